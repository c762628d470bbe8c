"""Where review rooms live: their titles, their last view and every version of every note.

One small interface, :class:`RoomStore`, and its SQLite implementation,
:class:`SQLiteStore` (one file, WAL journal, every write one transaction that is
synced to disk before it is acknowledged). Another database could serve later by
implementing the same methods.

Nothing is ever deleted or overwritten in place: editing or withdrawing a note
adds a version (``version`` counts up per note), so every text a person wrote
can be read back. A note carries an idempotency key (``request``) chosen by the
writer: a write repeated with the same key (a retry after a lost answer)
returns the note already stored instead of adding a copy.

The store path is ``--store PATH``, else the environment variable
``BALANCE_DESK_STORE``, else ``rooms.sqlite`` in the user's data folder
(:func:`default_store_path`).
"""

from __future__ import annotations

import dataclasses
import json
import os
import secrets
import sqlite3
import threading
import time

from balance_core import settings

__all__ = [
    "Room",
    "Note",
    "RoomStore",
    "SQLiteStore",
    "ServerLock",
    "StoreError",
    "default_store_path",
    "open_store",
    "new_token",
    "TOKEN_BYTES",
    "MAX_TITLE",
    "MAX_NOTE",
    "MAX_NAME",
]

#: a room's token: 24 random bytes from :mod:`secrets` (192 bits), URL-safe text
TOKEN_BYTES = 24
MAX_TITLE = 120
MAX_NOTE = 2000
MAX_NAME = 40


class StoreError(Exception):
    """The store cannot be used, or a request to it is not valid: one sentence."""


def new_token() -> str:
    return secrets.token_urlsafe(TOKEN_BYTES)


def default_store_path() -> str:
    """``BALANCE_DESK_STORE``, else rooms.sqlite in the user's data folder."""
    env = settings.text("BALANCE_DESK_STORE")
    if env:
        return env
    import platformdirs

    return os.path.join(platformdirs.user_data_dir("balance-desk"), "rooms.sqlite")


@dataclasses.dataclass(frozen=True)
class Room:
    token: str
    title: str
    case: str
    created: float
    view: dict  # the room's last view (the link's parameters, see app.state)
    view_version: int  # counts every change of the view
    expires: float = float("inf")  # after this (seconds since the epoch) its link is refused
    base_url: str = ""  # the server's address its link was made with ("" for older rooms)

    @property
    def expired(self) -> bool:
        return time.time() > self.expires


@dataclasses.dataclass(frozen=True)
class Note:
    note_id: str  # the same for every version of one note
    version: int  # 1 for the first text, then one more per edit or withdrawal
    room: str
    author: str  # who wrote this version
    created: float  # when this version was written (seconds since the epoch, UTC)
    text: str
    view: dict  # the view it was written on
    point: tuple | None  # (lon, lat) on the chart, or None
    withdrawn: bool
    first_author: str = ""
    first_created: float = 0.0
    #: who may change it: a digest of its author's browser's secret (app.serve), "" for a
    #: note written outside a browser; never exported
    writer: str = ""

    def as_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d["point"] = list(self.point) if self.point is not None else None
        del d["writer"]
        return d


class RoomStore:
    """What the rooms need from a store (see :class:`SQLiteStore`)."""

    def create_room(
        self, title: str, case: str, view: dict | None = None, days: float = 30.0, base_url=""
    ) -> Room: ...
    def room(self, token: str) -> Room | None: ...
    def rooms(self) -> list: ...
    def save_view(self, token: str, view: dict) -> int: ...
    def add_note(
        self,
        token: str,
        author: str,
        text: str,
        view: dict,
        point=None,
        request: str | None = None,
        writer: str = "",
    ) -> Note: ...
    def edit_note(
        self, token: str, note_id: str, author: str, text: str, writer: str = ""
    ) -> Note: ...
    def withdraw_note(self, token: str, note_id: str, author: str, writer: str = "") -> Note: ...
    def notes(self, token: str) -> list: ...
    def history(self, token: str, note_id: str) -> list: ...
    def close(self) -> None: ...


_SCHEMA = """
CREATE TABLE IF NOT EXISTS rooms (
    token TEXT PRIMARY KEY,
    title TEXT NOT NULL,
    case_name TEXT NOT NULL,
    created REAL NOT NULL,
    view TEXT NOT NULL,
    view_version INTEGER NOT NULL DEFAULT 0,
    expires REAL NOT NULL
);
CREATE TABLE IF NOT EXISTS notes (
    seq INTEGER PRIMARY KEY AUTOINCREMENT,
    room TEXT NOT NULL REFERENCES rooms(token),
    note_id TEXT NOT NULL,
    version INTEGER NOT NULL,
    author TEXT NOT NULL,
    created REAL NOT NULL,
    text TEXT NOT NULL,
    view TEXT NOT NULL,
    lon REAL,
    lat REAL,
    withdrawn INTEGER NOT NULL DEFAULT 0,
    request TEXT UNIQUE,
    UNIQUE (note_id, version)
);
CREATE INDEX IF NOT EXISTS notes_room ON notes (room, note_id, version);
"""


def _clean(text, limit, what) -> str:
    text = str(text or "").replace("\x00", "").strip()
    if not text:
        raise StoreError(f"the {what} is empty")
    if len(text) > limit:
        raise StoreError(f"the {what} is longer than {limit} characters")
    return text


class SQLiteStore(RoomStore):
    """Rooms and notes in one SQLite file (WAL journal, synchronous=FULL).

    One connection, used under a lock by whichever thread calls; each method is one
    transaction. ``synchronous=FULL`` syncs the journal before a commit returns, so an
    acknowledged note survives a crash of the process (and of the machine).
    """

    def __init__(self, path: str):
        self.path = path
        folder = os.path.dirname(os.path.abspath(path))
        try:
            os.makedirs(folder, exist_ok=True)
            self._db = sqlite3.connect(
                path, check_same_thread=False, isolation_level=None, timeout=30
            )
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=FULL")
            self._db.execute("PRAGMA foreign_keys=ON")
            self._db.executescript(_SCHEMA)
            # columns a store made by an earlier version lacks
            self._add_column("rooms", "base_url TEXT NOT NULL DEFAULT ''")
            self._add_column("notes", "writer TEXT NOT NULL DEFAULT ''")
        except (sqlite3.Error, OSError) as exc:
            raise StoreError(f"the room store {path} cannot be used ({exc})") from None
        self._lock = threading.Lock()

    def _add_column(self, table, column):
        if column.split()[0] in {row[1] for row in self._db.execute(f"PRAGMA table_info({table})")}:
            return
        try:
            self._db.execute(f"ALTER TABLE {table} ADD COLUMN {column}")
        except sqlite3.OperationalError as exc:  # another process added it first
            if "duplicate column" not in str(exc):
                raise

    # -- rooms ----------------------------------------------------------------------
    def create_room(self, title, case, view=None, days=30.0, base_url="") -> Room:
        """A new room; its link works for ``days`` days (its notes are kept after that).
        ``base_url`` is the server's address the link is made with, kept to list it again."""
        title = _clean(title, MAX_TITLE, "room's title")
        if not (isinstance(days, (int, float)) and 0 < days <= 3650):
            raise StoreError("a room's life must be more than 0 and at most 3650 days")
        token, now = new_token(), time.time()
        view = dict(view or {})
        expires = now + 86400.0 * days
        with self._lock, self._db:
            self._db.execute(
                "INSERT INTO rooms (token, title, case_name, created, view, expires, base_url) "
                "VALUES (?, ?, ?, ?, ?, ?, ?)",
                (token, title, str(case), now, json.dumps(view), expires, str(base_url)),
            )
        return Room(token, title, str(case), now, view, 0, expires, str(base_url))

    def room(self, token) -> Room | None:
        if not isinstance(token, str) or not token or len(token) > 100:
            return None
        with self._lock:
            row = self._db.execute(
                "SELECT token, title, case_name, created, view, view_version, "
                "expires, base_url FROM rooms WHERE token = ?",
                (token,),
            ).fetchone()
        return (
            None
            if row is None
            else Room(row[0], row[1], row[2], row[3], json.loads(row[4]), row[5], row[6], row[7])
        )

    def rooms(self) -> list:
        with self._lock:
            rows = self._db.execute(
                "SELECT token, title, case_name, created, view, view_version, expires, "
                "base_url FROM rooms ORDER BY created"
            ).fetchall()
        return [Room(r[0], r[1], r[2], r[3], json.loads(r[4]), *r[5:8]) for r in rows]

    def save_view(self, token, view) -> int:
        with self._lock, self._db:
            cur = self._db.execute(
                "UPDATE rooms SET view = ?, view_version = view_version + 1 WHERE token = ?",
                (json.dumps(dict(view)), token),
            )
            if cur.rowcount == 0:
                raise StoreError("no such room")
            return self._db.execute(
                "SELECT view_version FROM rooms WHERE token = ?", (token,)
            ).fetchone()[0]

    # -- notes ----------------------------------------------------------------------
    def add_note(self, token, author, text, view, point=None, request=None, writer="") -> Note:
        author = _clean(author, MAX_NAME, "name")
        text = _clean(text, MAX_NOTE, "note")
        lon, lat = _point(point)
        with self._lock, self._db:
            if request is not None:
                row = self._db.execute(
                    "SELECT note_id, version FROM notes WHERE request = ?", (str(request),)
                ).fetchone()
                if row is not None:  # the same write again: the note already stored
                    return self._version(row[0], row[1])
            if self._db.execute("SELECT 1 FROM rooms WHERE token = ?", (token,)).fetchone() is None:
                raise StoreError("no such room")
            note_id = secrets.token_hex(8)
            self._db.execute(
                "INSERT INTO notes (room, note_id, version, author, created, text, view, lon, "
                "lat, withdrawn, request, writer) VALUES (?, ?, 1, ?, ?, ?, ?, ?, ?, 0, ?, ?)",
                (
                    token,
                    note_id,
                    author,
                    time.time(),
                    text,
                    json.dumps(dict(view)),
                    lon,
                    lat,
                    None if request is None else str(request),
                    str(writer),
                ),
            )
            return self._version(note_id, 1)

    def edit_note(self, token, note_id, author, text, writer="") -> Note:
        """A new version of the note's text; only its writer (see :class:`Note`) may."""
        return self._next_version(
            token, note_id, author, _clean(text, MAX_NOTE, "note"), False, writer
        )

    def withdraw_note(self, token, note_id, author, writer="") -> Note:
        """The note marked withdrawn (a new version); only its writer may."""
        return self._next_version(token, note_id, author, None, True, writer)

    def _next_version(self, token, note_id, author, text, withdrawn, writer) -> Note:
        author = _clean(author, MAX_NAME, "name")
        with self._lock, self._db:
            last = self._db.execute(
                "SELECT version, text, view, lon, lat, writer FROM notes WHERE room = ? AND "
                "note_id = ? ORDER BY version DESC LIMIT 1",
                (token, note_id),
            ).fetchone()
            if last is None:
                raise StoreError("no such note in this room")
            if last[5] != str(writer):
                raise StoreError("only the person who wrote this note can change it")
            version = last[0] + 1
            self._db.execute(
                "INSERT INTO notes (room, note_id, version, author, created, text, view, lon, "
                "lat, withdrawn, writer) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                (
                    token,
                    note_id,
                    version,
                    author,
                    time.time(),
                    last[1] if text is None else text,
                    last[2],
                    last[3],
                    last[4],
                    int(withdrawn),
                    last[5],
                ),
            )
            return self._version(note_id, version)

    def notes(self, token) -> list:
        """The latest version of every note of the room, oldest note first (withdrawn ones
        included, marked)."""
        with self._lock:
            rows = self._db.execute(
                "SELECT n.note_id, n.version FROM notes n JOIN (SELECT note_id, MAX(version) v, "
                "MIN(seq) first FROM notes WHERE room = ? GROUP BY note_id) m "
                "ON n.note_id = m.note_id AND n.version = m.v ORDER BY m.first",
                (token,),
            ).fetchall()
            return [self._version(r[0], r[1]) for r in rows]

    def history(self, token, note_id) -> list:
        """Every version of one note, first to last."""
        with self._lock:
            rows = self._db.execute(
                "SELECT version FROM notes WHERE room = ? AND note_id = ? ORDER BY version",
                (token, note_id),
            ).fetchall()
            return [self._version(note_id, r[0]) for r in rows]

    def _version(self, note_id, version) -> Note:
        row = self._db.execute(
            "SELECT note_id, version, room, author, created, text, view, lon, lat, withdrawn, "
            "writer FROM notes WHERE note_id = ? AND version = ?",
            (note_id, version),
        ).fetchone()
        first = self._db.execute(
            "SELECT author, created FROM notes WHERE note_id = ? AND version = 1", (note_id,)
        ).fetchone()
        point = None if row[7] is None else (row[7], row[8])
        return Note(
            row[0],
            row[1],
            row[2],
            row[3],
            row[4],
            row[5],
            json.loads(row[6]),
            point,
            bool(row[9]),
            first[0],
            first[1],
            row[10],
        )

    def integrity(self) -> str:
        """SQLite's own integrity check: "ok" when the file is sound."""
        with self._lock:
            return self._db.execute("PRAGMA integrity_check").fetchone()[0]

    def close(self):
        with self._lock:
            self._db.close()


def _point(point):
    if point is None:
        return None, None
    try:
        lon, lat = (float(v) for v in point)
    except (TypeError, ValueError):
        raise StoreError("a note's point is not a longitude and a latitude") from None
    import math

    if not (math.isfinite(lon) and math.isfinite(lat) and -540 <= lon <= 540 and -90 <= lat <= 90):
        raise StoreError("a note's point is not on the Earth")
    return lon, lat


class ServerLock:
    """The one server of a store: an exclusive lock on ``<store>.server``, held while the
    server runs and let go by the system when its process ends, however it ends.

    A room in use lives in its server's memory (who is in it, who steers, the pages to
    tell of a note): a second server on the same store would keep a second, separate
    copy of each room, so it is refused with one sentence instead.
    """

    def __init__(self, store_path: str):
        import fcntl

        self.path = os.path.abspath(store_path) + ".server"
        try:
            self._fh = open(self.path, "a+", encoding="utf-8")
        except OSError as exc:
            raise StoreError(f"the room store {store_path} cannot be used ({exc})") from None
        try:
            fcntl.flock(self._fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            self._fh.seek(0)
            held = self._fh.read().strip()[:40] or "unknown"
            self._fh.close()
            raise StoreError(
                f"the room store {store_path} is in use by another balance-desk server "
                f"(process {held}); stop that one, or give this one its own --store"
            ) from None
        self._fh.seek(0)
        self._fh.truncate()
        self._fh.write(str(os.getpid()))
        self._fh.flush()

    def release(self) -> None:
        if not self._fh.closed:
            self._fh.close()  # closing the file lets the lock go


def open_store(path: str | None = None) -> SQLiteStore:
    """The store at ``path`` (or the default path)."""
    return SQLiteStore(path or default_store_path())
