"""The room commands and the server's safe defaults, through the real command line.

* ``rooms create`` prints a link whose key has at least 128 random bits; ``rooms list``
  shows it; ``rooms export`` writes the notes with their views (Markdown or JSON), never
  the key; bad input is exit 2 with one sentence;
* ``serve`` on an address other than this machine's needs a passphrase (from a file or
  the environment): without one it refuses with exit 2, with the opt-out flag it warns;
* a websocket from another origin is refused, and an over-long link gets 414.
"""

import base64
import json
import os
import subprocess
import sys
import urllib.error
import urllib.parse
import urllib.request

import pytest

from app.rooms import SQLiteStore
from testkit.serving import own_store, start_server, stop_server, wait_until

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def run(*args, env=None, timeout=120):
    p = subprocess.run(
        [sys.executable, "-m", "app.cli", *args],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env=own_store(env) if args[:1] == ("serve",) else env,
        timeout=timeout,
    )
    return p.returncode, p.stdout, p.stderr


def test_create_refuses_a_case_the_server_does_not_have(tmp_path):
    store = str(tmp_path / "r.sqlite")
    code, out, err = run("rooms", "create", "T", "--case", "no_such_case", "--store", store)
    assert code == 2 and out == "", (code, out, err)
    assert "the server has no case 'no_such_case'" in err and "ocean_cyclone" in err
    assert err.count("\n") == 1
    assert not os.path.exists(store)  # nothing made
    # a case in a folder of one's own, named with --cases as serve is
    folder = tmp_path / "cases"
    folder.mkdir()
    import shutil

    from app.cases import sample_dir

    shutil.copy(os.path.join(sample_dir(), "sea_breeze.nc"), folder / "coast.nc")
    code, out, err = run(
        "rooms", "create", "T", "--case", "coast", "--cases", str(folder), "--store", store
    )
    assert code == 0 and "/room?room=" in out, err


def test_a_store_made_before_rooms_kept_their_address_still_opens(tmp_path):
    import sqlite3

    path = str(tmp_path / "old.sqlite")
    db = sqlite3.connect(path)
    db.executescript(
        "CREATE TABLE rooms (token TEXT PRIMARY KEY, title TEXT NOT NULL, case_name TEXT NOT "
        "NULL, created REAL NOT NULL, view TEXT NOT NULL, view_version INTEGER NOT NULL "
        "DEFAULT 0, expires REAL NOT NULL);"
        "INSERT INTO rooms VALUES ('k' || hex(randomblob(20)), 'Old', 'ocean_cyclone', 0, '{}',"
        " 0, 2e9);"
    )
    db.commit()
    db.close()
    code, out, err = run("rooms", "list", "--store", path)
    assert code == 0 and "Old" in out and "http://127.0.0.1:5006/room?room=k" in out, err


def test_create_list_and_export(tmp_path):
    store = str(tmp_path / "r.sqlite")
    code, out, err = run(
        "rooms",
        "create",
        "Tuesday <b>12 UTC</b>",
        "--case",
        "ocean_cyclone",
        "--store",
        store,
        "--base-url",
        "http://desk.example:5006",
    )
    assert code == 0, err
    link = out.strip()
    assert link.startswith("http://desk.example:5006/room?room=")
    token = urllib.parse.parse_qs(urllib.parse.urlparse(link).query)["room"][0]
    assert len(base64.urlsafe_b64decode(token + "=" * (-len(token) % 4))) * 8 >= 128
    s = SQLiteStore(store)
    view = {
        "case": "ocean_cyclone",
        "level": "500",
        "time": "2041-01-19T12:00:00Z",
        "region": "box:-52,-28,38,56",
    }
    n = s.add_note(token, "Ana", "The low is <i>not</i> geostrophic", view, (-40.0, 52.0))
    s.edit_note(token, n.note_id, "Ben", "The low is in gradient balance")
    s.close()
    code, out, _ = run("rooms", "list", "--store", store)
    assert code == 0 and "Tuesday <b>12 UTC</b>" in out and "1 notes" in out and token in out
    assert f"    {link}\n" in out  # the link as it was made (before: always port 5006)
    code, out, _ = run("rooms", "list", "--store", store, "--base-url", "https://b.example")
    assert code == 0 and f"https://b.example/room?room={token}" in out
    code, md, _ = run("rooms", "export", link, "--store", store)
    assert code == 0
    assert "# Review room: Tuesday \\<b\\>12 UTC\\</b\\>" in md  # Markdown escapes
    assert "500 hPa" in md and "52.0N 40.0W" in md and "box 52.0W to 28.0W" in md
    assert "edited by Ben" in md and "\\<i\\>not\\</i\\>" in md and token not in md
    code, js, err = run("rooms", "export", token, "--format", "json", "--store", store)
    assert code == 0 and js.strip(), (code, js, err)  # once seen empty under load: say why
    d = json.loads(js)
    assert code == 0 and token not in js
    assert [v["text"] for v in d["notes"][0]["versions"]] == [
        "The low is <i>not</i> geostrophic",
        "The low is in gradient balance",
    ]
    assert d["notes"][0]["view"]["level"] == "500" and d["notes"][0]["point"] == [-40.0, 52.0]


@pytest.mark.parametrize(
    "args, words",
    [
        (("rooms", "create", ""), "title is empty"),
        (("rooms", "create", "x" * 121), "longer than 120"),
        (("rooms", "create", "ok", "--days", "0"), "--days"),
        (("rooms", "export", "no-such-room"), "no such room"),
        (("rooms", "export", "http://h/room?room=nope", "--format", "pdf"), "invalid choice"),
    ],
)
def test_bad_room_requests_exit_2_with_one_sentence(tmp_path, args, words):
    code, out, err = run(*args, "--store", str(tmp_path / "r.sqlite"))
    assert code == 2 and words in err and len(err.strip().splitlines()) == 1, err


def test_an_unusable_store_is_one_sentence(tmp_path):
    (tmp_path / "a_file").write_text("x")
    code, _, err = run("rooms", "list", "--store", str(tmp_path / "a_file" / "r.sqlite"))
    assert code == 2 and "cannot be used" in err and len(err.strip().splitlines()) == 1


def test_another_address_needs_a_passphrase(tmp_path):
    env = {k: v for k, v in os.environ.items() if k != "BALANCE_DESK_PASSPHRASE"}
    port = "0"  # refused before it binds
    code, out, err = run("serve", "--host", "0.0.0.0", "--port", port, env=env)
    assert code == 2 and "passphrase is needed" in err and len(err.strip().splitlines()) == 1
    short = tmp_path / "short"
    short.write_text("tooshort\n")
    code, _, err = run(
        "serve", "--host", "0.0.0.0", "--port", port, "--passphrase-file", str(short), env=env
    )
    assert code == 2 and "at least 12 characters" in err
    code, _, err = run(
        "serve",
        "--host",
        "0.0.0.0",
        "--port",
        port,
        "--passphrase-file",
        str(tmp_path / "missing"),
        env=env,
    )
    assert code == 2 and "cannot be read" in err
    # the passphrase is never taken from the command line
    code, _, err = run("serve", "--passphrase", "a long enough passphrase", env=env)
    assert code == 2 and "unrecognized arguments" in err


def test_a_second_server_on_a_store_is_refused_with_one_sentence(tmp_path):
    """A room in use lives in its server's memory: a second server on the same store would
    keep a copy of each room of its own (notes written on one never reached the other's
    pages). It is refused; the first goes on (that the store is free again once the first
    has stopped: tests/test_rooms_store.py, test_a_store_has_one_server_at_a_time)."""
    store = str(tmp_path / "rooms.sqlite")
    proc, url, _ = start_server(["--store", store])
    try:
        code, out, err = run("serve", "--store", store, "--port", "0", timeout=120)
        assert code == 2, (code, out, err)
        assert f"the room store {store} is in use by another balance-desk server" in err
        assert f"(process {proc.pid})" in err and "serving" not in out
        assert err.count("\n") == 1, err
        urllib.request.urlopen(url, timeout=30)  # the first still serves
    finally:
        stop_server(proc)


@pytest.fixture(scope="module")
def server():
    """One server for this module's tests of what a client may send (process, url, port);
    each looks for its own lines in the log."""
    proc, url, port = start_server()
    yield proc, url, port
    stop_server(proc)


def test_bodies_and_websocket_messages_are_bounded(server):
    """A body over 16 KiB gets 413 from its headers (was: up to 100 MB taken); a websocket
    message over 1 MiB closes the socket (was: up to 20 MB)."""
    import tornado.ioloop

    from app.serve import MAX_BODY, MAX_LOG_LINE, MAX_WS_MESSAGE
    from testkit.wire_page import WirePage

    proc, url, port = server
    for path in ("login", "", "room"):
        req = urllib.request.Request(url + path, data=b"x" * (MAX_BODY + 1), method="POST")
        with pytest.raises(urllib.error.HTTPError) as info:
            urllib.request.urlopen(req, timeout=60)
        assert info.value.code == 413, path
        assert info.value.headers.get("X-Content-Type-Options") == "nosniff"
    req = urllib.request.Request(url, data=b"x" * 100, method="POST")
    with pytest.raises(urllib.error.HTTPError) as info:  # within the bound: no 413
        urllib.request.urlopen(req, timeout=60)
    assert info.value.code != 413

    async def send(size):
        """A message of ``size`` bytes that is no Bokeh message; returns once the server
        has closed the socket."""
        page = WirePage(url)
        await page.open()
        await page._ws.write_message("{not a header")
        await page._ws.write_message("{}")
        await page._ws.write_message("x" * size)
        while await page._ws.read_message() is not None:
            pass  # what the server had sent already, then None: closed

    loop = tornado.ioloop.IOLoop.current()
    said = "server failed to parse a message"
    # over the bound: the socket is closed before the message reaches the page's server
    loop.run_sync(lambda: send(MAX_WS_MESSAGE + 1), timeout=180)
    assert said not in open(proc.log_path).read()
    # within it: the message is read, found to be no message, and the socket closed
    loop.run_sync(lambda: send(MAX_WS_MESSAGE - 100), timeout=180)
    wait_until(lambda: said in open(proc.log_path).read(), 60, proc=proc)
    with open(proc.log_path) as fh:
        out = fh.read()
    # Bokeh logs the message it could not read: cut (was: all of it, on one line)
    longest = max(len(line) for line in out.splitlines())
    assert longest < MAX_LOG_LINE + 200 and "characters cut" in out, longest


def test_a_session_a_client_makes_itself_is_refused(server):
    """Session ids are signed with a key made at each start: a token a client writes itself
    (to open sessions past the page limit, or to claim cookies or headers) is refused; the
    page's own token works."""
    import tornado.httpclient
    import tornado.ioloop
    import tornado.websocket
    from bokeh.util.token import generate_jwt_token

    from testkit.wire_page import WirePage

    proc, url, port = server
    own = generate_jwt_token(
        "a-session-of-my-own",
        secret_key=None,
        signed=False,
        extra_payload={"headers": {"X-Balance-Desk-Writer": "someone"}, "cookies": {}},
    )

    async def connect(token):
        req = tornado.httpclient.HTTPRequest(f"ws://127.0.0.1:{port}/ws")
        conn = await tornado.websocket.websocket_connect(req, subprotocols=["bokeh", token])
        got = []
        while (m := await conn.read_message()) is not None:
            got.append(m)
        return got

    loop = tornado.ioloop.IOLoop.current()
    assert loop.run_sync(lambda: connect(own), timeout=120) == []  # closed, nothing sent

    async def real():
        import asyncio

        page = WirePage(url)
        await page.open()  # the page's own token: a document comes back, and its widgets
        reading = asyncio.ensure_future(page.run())  # (with it, or just after: a page
        try:  # built when its session connects sends its parts after the document)
            return await page.until(lambda: page.widgets, what="the page's widgets")
        finally:
            page.close()
            await reading

    assert loop.run_sync(real, timeout=180)
    with open(proc.log_path) as fh:
        assert "invalid signature" in fh.read()


def test_long_log_lines_are_cut():
    import logging

    from app.serve import MAX_LOG_LINE, CutLongLines, HideRoomKeys

    record = logging.LogRecord(
        "t", logging.ERROR, __file__, 1, "fragment: %r", ("x" * 400_000,), None
    )
    CutLongLines().filter(record)
    shown = record.getMessage()
    assert len(shown) < MAX_LOG_LINE + 60 and shown.endswith("characters cut)"), shown[-80:]
    # the server's log handlers carry the filter (app.serve._set_up_logging)
    from app.serve import _set_up_logging

    root = logging.getLogger()
    before = list(root.handlers)
    try:
        _set_up_logging(logging.INFO)
        assert root.handlers and all(
            any(isinstance(f, CutLongLines) for f in h.filters)
            and any(isinstance(f, HideRoomKeys) for f in h.filters)
            for h in root.handlers
        )
    finally:
        for h in root.handlers:
            h.filters = [f for f in h.filters if not isinstance(f, (CutLongLines, HideRoomKeys))]
        root.handlers[:] = before or root.handlers


def test_serving_another_address_without_a_passphrase_warns_at_every_start():
    env = {k: v for k, v in os.environ.items() if k != "BALANCE_DESK_PASSPHRASE"}
    proc, url, _ = start_server(["--host", "0.0.0.0", "--open-without-passphrase"], env=env)
    out = stop_server(proc)
    assert "WARNING: balance-desk is served on 0.0.0.0 WITHOUT a passphrase" in out
    assert out.index("WARNING") < out.index("serving 3 case(s)")


def test_a_websocket_from_another_origin_is_refused_and_long_links_are_too(server):
    import tornado.httpclient
    import tornado.ioloop
    import tornado.websocket

    proc, url, port = server

    async def connect(origin):
        req = tornado.httpclient.HTTPRequest(
            f"ws://127.0.0.1:{port}/ws", headers={"Origin": origin}
        )
        try:
            conn = await tornado.websocket.websocket_connect(req)
            conn.close()
            return 101
        except tornado.httpclient.HTTPClientError as exc:
            return exc.code

    code = tornado.ioloop.IOLoop.current().run_sync(lambda: connect("http://evil.invalid"))
    assert code == 403
    with pytest.raises(urllib.error.HTTPError) as info:
        urllib.request.urlopen(url + "?case=" + "x" * 61000, timeout=30)
    assert info.value.code == 414
