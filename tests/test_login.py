"""Slowed logins (app/login.py): the gate's holds on a clock of the test's own, and a real
server that holds, logs and then lets the right passphrase in."""

import http.cookiejar
import os
import urllib.error
import urllib.parse
import urllib.request

import pytest

from app.login import LoginGate
from testkit.serving import start_server, stop_server, wait_until


class Clock:
    def __init__(self):
        self.t = 1000.0

    def __call__(self):
        return self.t


def _fail(gate, address="10.0.0.1"):
    wait = gate.admit(address)
    gate.record(address, False)
    return wait


def _after_failures(n):
    """(clock, gate) after ``n`` failed attempts from 10.0.0.1, each having waited its hold."""
    clock = Clock()
    gate = LoginGate(clock)
    for _ in range(n):
        clock.t += _fail(gate)
    return clock, gate


def test_the_first_failures_are_free_then_each_attempt_waits_twice_as_long():
    clock = Clock()
    gate = LoginGate(clock)
    waits = []
    for _ in range(40):
        w = _fail(gate)
        waits.append(w)
        clock.t += w  # the attempt waited its hold
    assert waits == [0, 0, 0, 1, 2, 4, 8, 16] + [30] * 32
    # forty wrong passphrases take 14 minutes instead of a second
    assert sum(waits) == 991


def test_the_right_passphrase_gets_in_after_its_wait_and_clears_the_failures():
    clock, gate = _after_failures(5)
    wait = gate.admit("10.0.0.1")
    assert wait == 4.0  # held like any attempt: the wait says nothing of the passphrase
    clock.t += wait
    assert gate.record("10.0.0.1", True) == 0
    assert gate.admit("10.0.0.1") == 0.0


def test_attempts_sent_side_by_side_get_slots_one_hold_apart():
    _, gate = _after_failures(6)
    # six failures: the hold is 8 s; three attempts at once wait 8, 16 and 24 s
    assert [gate.admit("10.0.0.1") for _ in range(3)] == [8.0, 16.0, 24.0]


def test_too_many_waiting_attempts_are_refused():
    gate = LoginGate(Clock())
    admitted = [gate.admit("10.0.0.2") for _ in range(LoginGate.PENDING + 3)]
    assert admitted[: LoginGate.PENDING] == [0.0] * LoginGate.PENDING
    assert admitted[LoginGate.PENDING :] == [None, None, None]


def test_addresses_are_held_apart_until_many_fail_together():
    clock = Clock()
    gate = LoginGate(clock)
    for _ in range(8):
        _fail(gate, "10.0.0.1")
    assert gate.admit("10.0.0.9") == 0.0  # another address: not held by the first's failures
    gate.record("10.0.0.9", True)
    # many addresses, a few failures each: more than 60 in a minute hold everyone
    for i in range(LoginGate.TOTAL_PER_MINUTE + 1):
        _fail(gate, f"10.1.{i // 200}.{i % 200}")
    assert gate.admit("10.0.0.10") == LoginGate.TOTAL_HOLD_S
    clock.t += 61.0  # a minute later the spread failures no longer count
    assert gate.admit("10.0.0.11") == 0.0


def test_failures_are_forgotten_after_the_window():
    clock, gate = _after_failures(6)
    clock.t += LoginGate.WINDOW_S + 1
    assert gate.failures("10.0.0.1") == 0 and gate.admit("10.0.0.1") == 0.0


PASSPHRASE = "a long enough passphrase for the test"


def _login(url, password, jar):
    opener = urllib.request.build_opener(urllib.request.HTTPCookieProcessor(jar))
    body = urllib.parse.urlencode({"username": "ana", "password": password}).encode()
    try:
        r = opener.open(url + "login", data=body, timeout=120)
        return r.status, r.geturl()
    except urllib.error.HTTPError as exc:
        return exc.code, exc.url


def test_a_server_holds_wrong_passphrases_logs_them_and_still_lets_the_right_one_in(tmp_path):
    from app.rooms import SQLiteStore

    store = str(tmp_path / "rooms.sqlite")
    s = SQLiteStore(store)
    key = s.create_room("Behind the door", "ocean_cyclone").token
    s.close()
    env = dict(os.environ, BALANCE_DESK_PASSPHRASE=PASSPHRASE)
    proc, url, _ = start_server(["--store", store], env=env, ready_path="/login")
    try:
        # a room link opened before signing in: sent to the login page with the link as
        # ``next``; the cookie that keeps it is out of scripts' reach and not sent by
        # other sites' requests
        r = urllib.request.urlopen(
            url + "login?" + urllib.parse.urlencode({"next": f"/room?room={key}"}), timeout=60
        )
        cookies = r.headers.get_all("Set-Cookie") or []
        assert cookies and all("HttpOnly" in c and "SameSite=Lax" in c for c in cookies), cookies
        jar = http.cookiejar.CookieJar()
        for i in range(5):
            status, where = _login(url, f"guess {i} zebra", jar)
            assert "error=" in where, (status, where)  # back at the door
        with open(proc.log_path) as fh:
            text = fh.read()
        refused = [line for line in text.splitlines() if "login refused from 127.0.0.1" in line]
        assert len(refused) == 5, text[-3000:]
        # the holds announced grow: 0, 0, 1, 2, 4 s after the 1st to 5th failure
        assert [line.rsplit("waits ", 1)[1] for line in refused] == [
            "0 s)",
            "0 s)",
            "1 s)",
            "2 s)",
            "4 s)",
        ]
        assert "zebra" not in text and PASSPHRASE not in text  # no passphrase in the log
        status, where = _login(url, PASSPHRASE, jar)
        assert status == 200 and "error=" not in where and "login" not in where, where
        assert any(c.name == "user" for c in jar)
        wait_until(
            lambda: "login from 127.0.0.1 as ana" in open(proc.log_path).read(), 60, proc=proc
        )
        # a whole session in the room behind the door: the page, its socket, a note
        import tornado.ioloop

        from testkit.wire_page import WirePage

        async def visit():
            page = WirePage(url + f"room?room={key}", cookies={c.name: c.value for c in jar})
            await page.open()
            page.close()
            return page.widgets

        assert "Add the note" in tornado.ioloop.IOLoop.current().run_sync(visit, timeout=180)
    finally:
        out = stop_server(proc)
    assert "Traceback" not in out, out[-3000:]
    # the key in no log line, in any encoding
    for form in (key, urllib.parse.quote(key), key[:12]):
        assert form not in out, out[-3000:]


@pytest.mark.parametrize(
    "line",
    [
        "GET /room?room=KEYKEYKEYKEY-_x (127.0.0.1)",
        "302 GET /login?next=%2Froom%3Froom%3DKEYKEYKEYKEY-_x (127.0.0.1)",
        "302 GET /login?next=%252Froom%253Froom%253DKEYKEYKEYKEY-_x",
        'message {"room": "KEYKEYKEYKEY-_x"}',
        "ROOM=KEYKEYKEYKEY-_x",
    ],
)
def test_room_keys_are_hidden_in_every_encoding(line):
    import logging

    from app.serve import HideRoomKeys

    record = logging.LogRecord("t", logging.INFO, __file__, 1, "%s", (line,), None)
    HideRoomKeys().filter(record)
    shown = record.getMessage()
    assert "KEYKEYKEY" not in shown and "..." in shown, shown


@pytest.mark.parametrize("n", [0, 2, 3, 10])
def test_the_hold_after_n_failures(n):
    expected = {0: 0.0, 2: 0.0, 3: 1.0, 10: 30.0}[n]
    assert LoginGate().hold_after(n) == expected
