"""The room store and the live rooms, without a browser.

The store: tokens of at least 128 random bits, every version of every note kept,
a repeated write stored once, limits on sizes, SQLite's WAL journal, and a store
that survives the process being killed (-9) in the middle of a stream of writes
with every acknowledged note in it and SQLite's integrity check passing.

The hub: one person steers, the others follow; taking over, stepping out and back,
handing over when the person steering leaves; notes reach everyone; limits per person.
Each rule is shown saying no where it can.
"""

import os
import signal
import sqlite3
import subprocess
import sys
import threading
import time

import pytest

from app.rooms import Hub, RoomError, RoomLimits, SQLiteStore, StoreError
from app.rooms.store import TOKEN_BYTES

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


@pytest.fixture
def store(tmp_path):
    s = SQLiteStore(str(tmp_path / "rooms.sqlite"))
    yield s
    s.close()


VIEW = {"case": "ocean_cyclone", "level": "500", "region": "box:-52,-28,38,56"}


def test_tokens_are_long_random_and_unique(store):
    import base64

    tokens = {store.create_room(f"room {i}", "ocean_cyclone").token for i in range(50)}
    assert len(tokens) == 50
    for t in tokens:
        raw = base64.urlsafe_b64decode(t + "=" * (-len(t) % 4))
        assert len(raw) * 8 >= 128 and TOKEN_BYTES * 8 >= 128
    assert store.room("not-a-token") is None and store.room("") is None


def test_the_store_uses_one_file_in_wal_mode(store):
    mode = sqlite3.connect(store.path).execute("PRAGMA journal_mode").fetchone()[0]
    assert mode == "wal"


def test_every_version_of_a_note_is_kept(store):
    room = store.create_room("Tuesday briefing", "ocean_cyclone", VIEW)
    n1 = store.add_note(room.token, "Ana", "jet streak is ageostrophic", VIEW, (-40, 45))
    n2 = store.edit_note(room.token, n1.note_id, "Ben", "jet streak exit: ageostrophic")
    n3 = store.withdraw_note(room.token, n1.note_id, "Ana")
    assert (n2.version, n3.version) == (2, 3) and n3.withdrawn
    hist = store.history(room.token, n1.note_id)
    assert [h.text for h in hist] == [
        "jet streak is ageostrophic",
        "jet streak exit: ageostrophic",
        "jet streak exit: ageostrophic",
    ]
    assert [h.author for h in hist] == ["Ana", "Ben", "Ana"]
    latest = store.notes(room.token)
    assert len(latest) == 1 and latest[0].withdrawn and latest[0].first_author == "Ana"
    assert latest[0].point == (-40.0, 45.0) and latest[0].view == VIEW


def test_a_repeated_write_is_stored_once(store):
    room = store.create_room("r", "ocean_cyclone")
    a = store.add_note(room.token, "Ana", "once", VIEW, request="ana-1")
    b = store.add_note(room.token, "Ana", "once", VIEW, request="ana-1")
    assert a == b and len(store.notes(room.token)) == 1


def test_bad_requests_are_refused_with_a_sentence(store):
    room = store.create_room("r", "ocean_cyclone")
    for args in (("", "text"), ("Ana", ""), ("Ana", "x" * 2001), ("x" * 41, "text")):
        with pytest.raises(StoreError):
            store.add_note(room.token, args[0], args[1], VIEW)
    with pytest.raises(StoreError):
        store.add_note(room.token, "Ana", "text", VIEW, point=(0, 95))
    with pytest.raises(StoreError):
        store.add_note("no-such-room", "Ana", "text", VIEW)
    with pytest.raises(StoreError):
        store.create_room("", "ocean_cyclone")
    with pytest.raises(StoreError):
        store.edit_note(room.token, "no-such-note", "Ana", "text")


def test_rooms_and_notes_outlive_the_store_object(tmp_path):
    path = str(tmp_path / "s.sqlite")
    s = SQLiteStore(path)
    room = s.create_room("r", "ocean_cyclone", VIEW)
    s.save_view(room.token, dict(VIEW, level="850"))
    s.add_note(room.token, "Ana", "kept", VIEW)
    s.close()
    s2 = SQLiteStore(path)
    again = s2.room(room.token)
    assert again.view["level"] == "850" and again.view_version == 1
    assert [n.text for n in s2.notes(room.token)] == ["kept"]
    s2.close()


def test_an_expired_room_is_no_room_for_the_hub(store):
    hub = Hub(store)
    room = store.create_room("old", "ocean_cyclone", days=1)
    assert hub.room(room.token) is not None
    store._db.execute("UPDATE rooms SET expires = 0 WHERE token = ?", (room.token,))
    hub2 = Hub(store)
    assert hub2.room(room.token) is None  # the link is refused ...
    assert store.room(room.token) is not None  # ... but nothing is deleted


def test_a_room_in_use_closes_when_its_link_expires(store, monkeypatch):
    """The hub keeps a joined room in memory; it checked the expiry only when it first
    loaded it, so an expired link kept working for a room in use (joins, notes, views)."""
    hub = Hub(store)
    room = hub.create("in use", "ocean_cyclone", VIEW, days=1)
    a, b = Inbox(), Inbox()
    hub.join(room.token, "a", "Ana", a)
    hub.join(room.token, "b", "Ben", b)
    hub.add_note(room.token, "a", "before the end", VIEW)
    assert hub.change_view(room.token, "a", dict(VIEW, level="850"))  # it says yes ...
    later = time.time() + 2 * 86400.0  # two days on: the one-day link has expired
    monkeypatch.setattr(time, "time", lambda: later)
    for attempt in (
        lambda: hub.add_note(room.token, "b", "after the end", VIEW),
        lambda: hub.change_view(room.token, "a", dict(VIEW, level="700")),
        lambda: hub.join(room.token, "c", "Chi", Inbox()),
        lambda: hub.steer(room.token, "b", VIEW),
    ):
        with pytest.raises(RoomError, match="expired"):  # ... and now no
            attempt()
    # those in the room were told, with the sentence, once
    for inbox in (a, b):
        closed = [p for k, p in inbox.got if k == "closed"]
        assert len(closed) == 1 and "expired" in closed[0]["why"]
    assert hub.room(room.token) is None
    # nothing is lost: the notes are kept and can be exported
    assert [n.text for n in store.notes(room.token)] == ["before the end"]
    assert store.room(room.token).view["level"] == "850"


# -- the hub ----------------------------------------------------------------------------


class Inbox:
    def __init__(self):
        self.got = []

    def __call__(self, kind, payload):
        self.got.append((kind, payload))

    def kinds(self):
        return [k for k, _ in self.got]


def test_one_steers_the_others_follow(store):
    hub = Hub(store)
    room = hub.create("review", "ocean_cyclone", VIEW)
    a, b, c = Inbox(), Inbox(), Inbox()
    snap = hub.join(room.token, "a", "Ana", a)
    assert snap["steering"] == "a"  # the first in steers
    hub.join(room.token, "b", "Ben", b)
    hub.join(room.token, "c", "Chi", c)
    new = dict(VIEW, level="850")
    assert hub.change_view(room.token, "a", new)
    assert ("view", {"view": new, "version": 1, "by": "a"}) in b.got and (
        "view",
        {"view": new, "version": 1, "by": "a"},
    ) in c.got
    assert "view" not in a.kinds()  # the one who made the change has it already
    # a follower's change is not the room's
    assert not hub.change_view(room.token, "b", dict(VIEW, level="250"))
    assert store.room(room.token).view == new
    # taking over
    hub.steer(room.token, "b", dict(VIEW, level="300"))
    assert hub.snapshot(room.token)["steering"] == "b"
    assert not hub.change_view(room.token, "a", dict(VIEW, level="700"))
    assert hub.change_view(room.token, "b", dict(VIEW, level="925"))
    # stepping out: the room's changes no longer reach Chi, and back in gives the view
    hub.step_out(room.token, "c")
    n = len([k for k in c.kinds() if k == "view"])
    assert "where" not in c.kinds()  # (followers are not told where the room is: they go)
    hub.change_view(room.token, "b", dict(VIEW, level="1000"))
    assert len([k for k in c.kinds() if k == "view"]) == n
    # ... but told where it is, to show beside their own view
    assert c.got[-1][0] == "where" and c.got[-1][1]["view"] == dict(VIEW, level="1000")
    assert "where" not in a.kinds()
    assert hub.step_in(room.token, "c")["level"] == "1000"
    # the one steering leaves: the longest-present follower takes over
    hub.leave(room.token, "b")
    assert hub.snapshot(room.token)["steering"] == "a"
    people = hub.snapshot(room.token)["people"]
    assert [p["name"] for p in people] == ["Ana", "Chi"]


def test_notes_reach_everyone_and_are_limited_per_person(store):
    hub = Hub(store, RoomLimits(notes_per_minute=3))
    room = hub.create("review", "ocean_cyclone", VIEW)
    a, b = Inbox(), Inbox()
    hub.join(room.token, "a", "Ana", a)
    hub.join(room.token, "b", "Ben", b)
    note = hub.add_note(room.token, "a", "<b>not bold</b>", VIEW)
    assert ("notes", {"note": note}) in b.got and ("notes", {"note": note}) in a.got
    assert note.author == "Ana" and note.text == "<b>not bold</b>"  # kept as typed
    with pytest.raises(RoomError, match="only the person who wrote this note can change it"):
        hub.edit_note(room.token, "b", note.note_id, "edited by another")
    with pytest.raises(RoomError, match="only the person who wrote this note"):
        hub.withdraw_note(room.token, "b", note.note_id)
    hub.edit_note(room.token, "a", note.note_id, "edited")
    hub.add_note(room.token, "a", "two", VIEW)
    with pytest.raises(RoomError):
        hub.add_note(room.token, "a", "four", VIEW)  # a fourth in a minute
    hub.add_note(room.token, "b", "Ben's second", VIEW)  # others are not held back
    with pytest.raises(RoomError):
        hub.add_note(room.token, "stranger", "not in the room", VIEW)
    with pytest.raises(RoomError):
        hub.join("no-such-token", "x", "X", Inbox())


def test_one_browsers_tabs_are_one_writer(store):
    """The tabs of one browser (one writer: app.serve's cookie) change each other's notes and
    share one allowance of notes a minute; another browser does neither."""
    hub = Hub(store, RoomLimits(notes_per_minute=2))
    room = hub.create("review", "ocean_cyclone", VIEW)
    hub.join(room.token, "tab1", "Ana", Inbox(), writer="w-ana")
    hub.join(room.token, "tab2", "Ana", Inbox(), writer="w-ana")
    hub.join(room.token, "other", "Ana", Inbox(), writer="w-someone-else")
    note = hub.add_note(room.token, "tab1", "first", VIEW)
    assert hub.edit_note(room.token, "tab2", note.note_id, "from the other tab").version == 2
    with pytest.raises(RoomError, match="at most 2 notes a minute"):
        hub.add_note(room.token, "tab2", "third write of this browser", VIEW)
    with pytest.raises(RoomError, match="only the person who wrote"):
        hub.withdraw_note(room.token, "other", note.note_id)  # the same name is not enough
    assert hub.writer(room.token, "tab1") == "w-ana" and hub.writer(room.token, "x") == ""


def test_a_full_room_says_so(store):
    hub = Hub(store, RoomLimits(people=2))
    room = hub.create("review", "ocean_cyclone", VIEW)
    hub.join(room.token, "a", "Ana", Inbox())
    hub.join(room.token, "b", "Ben", Inbox())
    with pytest.raises(RoomError):
        hub.join(room.token, "c", "Chi", Inbox())


def test_notes_written_at_once_from_many_sessions_are_all_kept_once(store):
    # 10 people write 100 notes each at the same time; some writes are repeated (a retry
    # after a lost answer): none lost, none twice
    hub = Hub(store, RoomLimits(notes_per_minute=10_000))
    room = hub.create("load", "ocean_cyclone", VIEW)
    for i in range(10):
        hub.join(room.token, f"s{i}", f"person {i}", Inbox())

    def write(i):
        for j in range(100):
            hub.add_note(room.token, f"s{i}", f"note {i}-{j}", VIEW, request=f"s{i}-{j}")
            if j % 10 == 0:
                hub.add_note(room.token, f"s{i}", f"note {i}-{j}", VIEW, request=f"s{i}-{j}")

    threads = [threading.Thread(target=write, args=(i,)) for i in range(10)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    texts = [n.text for n in store.notes(room.token)]
    assert len(texts) == 1000 and len(set(texts)) == 1000


WRITER = """
import sys, time
sys.path.insert(0, {root!r})
from app.rooms import SQLiteStore
s = SQLiteStore({path!r})
token = {token!r}
i = 0
while True:
    n = s.add_note(token, "writer", f"note {{i}}", {{"level": "500"}}, request=f"w{{i}}")
    print(n.note_id, n.text, flush=True)   # acknowledged: stored and synced
    i += 1
"""


def test_a_kill_in_the_middle_of_writes_loses_nothing_acknowledged(tmp_path):
    path = str(tmp_path / "crash.sqlite")
    s = SQLiteStore(path)
    token = s.create_room("crash", "ocean_cyclone").token
    s.close()
    proc = subprocess.Popen(
        [sys.executable, "-c", WRITER.format(root=ROOT, path=path, token=token)],
        stdout=subprocess.PIPE,
        text=True,
    )
    acked = []
    for line in proc.stdout:
        acked.append(line.split(" ", 1)[1].strip())
        if len(acked) >= 150:
            break
    os.kill(proc.pid, signal.SIGKILL)  # in the middle of the next writes
    proc.wait()
    acked += [
        line.split(" ", 1)[1].strip() for line in proc.stdout.read().splitlines() if " " in line
    ]
    s2 = SQLiteStore(path)
    assert s2.integrity() == "ok"
    stored = {n.text for n in s2.notes(token)}
    assert set(acked) <= stored, set(acked) - stored
    assert len(stored) - len(set(acked)) <= 1  # at most the write in flight
    s2.close()


def test_a_store_has_one_server_at_a_time(tmp_path):
    from app.rooms.store import ServerLock

    path = str(tmp_path / "rooms.sqlite")
    first = ServerLock(path)
    with pytest.raises(
        StoreError, match=rf"in use by another balance-desk server \(process {os.getpid()}\)"
    ):
        ServerLock(path)
    ServerLock(str(tmp_path / "other.sqlite")).release()  # another store is free
    first.release()
    ServerLock(path).release()  # and this one once its server has let it go
