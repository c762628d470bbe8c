"""Review rooms, live: who is in a room, who steers it, the room's view and its notes.

A room is one case under review by a team. Its view (the link's parameters of
:mod:`app.state`, as text) is the same for everyone who follows it. One person
*steers*: their changes are the room's view. Anyone may take over the steering;
anyone may step out to *look on their own* (their changes then stay theirs) and
step back in (they get the room's view again). When the person steering leaves,
the one who has been in the room longest among those following takes over.

The hub keeps the live part (people, who steers) in memory and writes what
must last (the view, the notes) to a :class:`~app.rooms.store.RoomStore` before
it tells anyone. It tells each person through the ``notify`` callback given at
:meth:`Hub.join` (the page turns it into an update on its own document), outside
its locks. It never reads files: a room names a case the server already serves.
"""

from __future__ import annotations

import collections
import dataclasses
import logging
import threading
import time

from .store import MAX_NAME, RoomStore, StoreError

__all__ = ["Hub", "Person", "RoomLimits", "RoomError"]

log = logging.getLogger(__name__)


class RoomError(Exception):
    """A request the room cannot take: one sentence for the person who made it."""


#: what those in a room (and those who open its link) are told once its link has expired
EXPIRED = (
    "This room's link has expired: the room takes no more notes or views. Its notes are "
    "kept and can still be exported (balance-desk rooms export)."
)


@dataclasses.dataclass
class RoomLimits:
    """Bounds on what one person may send (common practice, no source: our own choices)."""

    notes_per_minute: int = 20  # notes, edits and withdrawals per person per minute
    people: int = 60  # people in one room at once
    view_changes_per_second: float = 20.0  # the steering person's changes (a burst is fine)


@dataclasses.dataclass
class Person:
    key: str  # the browser session
    name: str
    joined: float
    following: bool = True
    notify: object = None  # notify(kind, payload)
    writer: str = ""  # who may change the notes it writes: its browser (app.serve)


class _Live:
    def __init__(self, room):
        self.token = room.token
        self.title = room.title
        self.case = room.case
        self.view = dict(room.view)
        self.version = room.view_version
        self.expires = room.expires
        self.people: collections.OrderedDict[str, Person] = collections.OrderedDict()
        self.steering: str | None = None
        self.lock = threading.RLock()
        # the times of each writer's notes in the last minute: counted per browser (or per
        # page where none is known), so several tabs of one browser share one allowance
        self.writes: collections.defaultdict = collections.defaultdict(collections.deque)


def clean_name(name) -> str:
    text = " ".join(str(name or "").split())[:MAX_NAME]
    return text


class Hub:
    """The live rooms of one server, over a store."""

    def __init__(self, store: RoomStore, limits: RoomLimits | None = None):
        self.store = store
        self.limits = RoomLimits() if limits is None else limits
        self.server_lock = None  # the store's ServerLock, while a server runs (app.serve)
        self._live: dict = {}
        self._lock = threading.Lock()

    # -- rooms --------------------------------------------------------------------------
    def create(self, title: str, case: str, view: dict | None = None, days: float = 30.0):
        return self.store.create_room(title, case, view, days)

    def room(self, token):
        """The stored room of a token, or None (a wrong or expired token)."""
        live = self._get(token)
        return None if live is None else self.store.room(token)

    def _get(self, token):
        """The live room of a token; None for a wrong token or an expired room (whose
        people are told it has closed, :meth:`_close`)."""
        with self._lock:
            live = self._live.get(token)
            if live is None:
                room = self.store.room(token)
                if room is None or room.expired:
                    return None
                live = self._live[token] = _Live(room)
                return live
            if time.time() > live.expires:
                del self._live[token]
            else:
                return live
        self._close(live)
        return None

    def _must(self, token):
        """The live room, or RoomError: checked at every join, view change and write."""
        live = self._get(token)
        if live is None:
            room = self.store.room(token)
            raise RoomError(EXPIRED if room is not None and room.expired else "no such room")
        return live

    def _close(self, live):
        """An expired room closes for those in it: each is told, with the sentence."""
        self._tell(live, "closed", {"why": EXPIRED})
        with live.lock:
            live.people.clear()
            live.steering = None

    # -- people -------------------------------------------------------------------------
    def join(self, token, key, name, notify, writer=""):
        """Come into the room, following it. Returns the room's snapshot. ``writer`` is who
        may change the notes this page writes (its browser; "" for no one but itself)."""
        live = self._must(token)
        with live.lock:
            if key not in live.people and len(live.people) >= self.limits.people:
                n = self.limits.people
                raise RoomError(
                    f"this room is full (it holds {n} {'person' if n == 1 else 'people'} at once)"
                )
            live.people[key] = Person(
                key, clean_name(name) or "someone", time.time(), True, notify, writer or key
            )
            if live.steering is None:
                live.steering = key
            snap = self._snapshot(live)
        self._tell(live, "people", None)
        return snap

    def leave(self, token, key):
        live = self._get(token)
        if live is None:
            return
        with live.lock:
            if live.people.pop(key, None) is None:
                return
            if live.steering == key:
                live.steering = next((k for k, p in live.people.items() if p.following), None)
        self._tell(live, "people", None)

    def rename(self, token, key, name):
        live = self._must(token)
        name = clean_name(name)
        if not name:
            raise RoomError("a name needs at least one letter")
        with live.lock:
            if key in live.people:
                live.people[key].name = name
        self._tell(live, "people", None)

    def steer(self, token, key, view: dict):
        """``key`` steers the room from now on, and the room takes its view."""
        live = self._must(token)
        with live.lock:
            p = live.people.get(key)
            if p is None:
                raise RoomError("you are not in this room")
            p.following = True
            live.steering = key
        self._tell(live, "people", None)
        self.change_view(token, key, view)

    def step_out(self, token, key):
        """``key`` looks on their own: the room's changes no longer reach them."""
        live = self._must(token)
        with live.lock:
            p = live.people.get(key)
            if p is None:
                return
            p.following = False
            if live.steering == key:
                live.steering = next((k for k, q in live.people.items() if q.following), None)
        self._tell(live, "people", None)

    def step_in(self, token, key) -> dict:
        """``key`` follows the room again; returns the room's view."""
        live = self._must(token)
        with live.lock:
            p = live.people.get(key)
            if p is not None:
                p.following = True
                if live.steering is None:
                    live.steering = key
            view = dict(live.view)
        self._tell(live, "people", None)
        return view

    # -- the view -----------------------------------------------------------------------
    def change_view(self, token, key, view: dict) -> bool:
        """The room's view becomes ``view`` if ``key`` steers it; False otherwise."""
        live = self._must(token)
        with live.lock:
            if live.steering != key:
                return False
            if view == live.view:
                return True
            version = self.store.save_view(token, view)
            live.view, live.version = dict(view), version
        told = {"view": dict(view), "version": version, "by": key}
        self._tell(live, "view", told, followers_only=True, skip=key)
        # those looking on their own are told where the room is, to show, never to take
        self._tell(live, "where", dict(told), alone_only=True, skip=key)
        return True

    # -- notes --------------------------------------------------------------------------
    def _allow_write(self, live, key):
        p = live.people.get(key)
        if p is None:
            raise RoomError("you are not in this room")
        now = time.monotonic()
        writes = live.writes[p.writer]
        while writes and now - writes[0] > 60:
            writes.popleft()
        if len(writes) >= self.limits.notes_per_minute:
            raise RoomError(f"at most {self.limits.notes_per_minute} notes a minute: wait a moment")
        writes.append(now)
        return p

    def add_note(self, token, key, text, view, point=None, request=None):
        live = self._must(token)
        with live.lock:
            p = self._allow_write(live, key)
            name, writer = p.name, p.writer
        try:
            note = self.store.add_note(token, name, text, view, point, request, writer)
        except StoreError as exc:
            raise RoomError(str(exc)) from None
        self._tell(live, "notes", {"note": note})
        return note

    def edit_note(self, token, key, note_id, text):
        live = self._must(token)
        with live.lock:
            p = self._allow_write(live, key)
        try:
            note = self.store.edit_note(token, note_id, p.name, text, p.writer)
        except StoreError as exc:
            raise RoomError(str(exc)) from None
        self._tell(live, "notes", {"note": note})
        return note

    def withdraw_note(self, token, key, note_id):
        live = self._must(token)
        with live.lock:
            p = self._allow_write(live, key)
        try:
            note = self.store.withdraw_note(token, note_id, p.name, p.writer)
        except StoreError as exc:
            raise RoomError(str(exc)) from None
        self._tell(live, "notes", {"note": note})
        return note

    def notes(self, token):
        return self.store.notes(token)

    def writer(self, token, key) -> str:
        """Who may change the notes the page ``key`` writes ("" when it is not in the room)."""
        live = self._get(token)
        p = None if live is None else live.people.get(key)
        return "" if p is None else p.writer

    def history(self, token, note_id):
        return self.store.history(token, note_id)

    # -- what everyone sees -------------------------------------------------------------
    def snapshot(self, token) -> dict:
        return self._snapshot(self._must(token))

    def _snapshot(self, live) -> dict:
        with live.lock:
            return {
                "token": live.token,
                "title": live.title,
                "case": live.case,
                "view": dict(live.view),
                "version": live.version,
                "steering": live.steering,
                "people": [
                    {
                        "key": p.key,
                        "name": p.name,
                        "following": p.following,
                        "steering": p.key == live.steering,
                    }
                    for p in live.people.values()
                ],
            }

    def _tell(self, live, kind, payload, followers_only=False, skip=None, alone_only=False):
        snap = self._snapshot(live) if kind == "people" else None
        with live.lock:
            targets = [
                p
                for p in live.people.values()
                if p.key != skip
                and (p.following or not followers_only)
                and not (alone_only and p.following)
            ]
        for p in targets:
            try:
                p.notify(kind, snap if kind == "people" else payload)
            except Exception:
                log.exception("could not tell a page of room %s", live.title)
