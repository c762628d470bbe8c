"""A page without a browser: one server session, driven over Bokeh's websocket protocol.

It does what a browser's page does on the wire and nothing more: it fetches the page
(with the browser's cookie), takes the session token from it, opens the websocket
with that token, asks for the document, says the document is ready (Panel's
``onload`` starts the session's work on that event, as it does for a browser) and then
reads every message the server sends. So the server builds, computes, serializes and
sends exactly what it would for a person's browser; only the drawing is left out.

It can also act as a person would: change a widget's value (a ``ModelChanged`` patch, as
BokehJS sends when an input is edited) and click a button (a ``button_click`` event). The
widgets are found in the pulled document by their title or label.

The load benchmarks (bench/rooms.py, bench/serve.py) use it for the many sessions they
need, beside real browser pages that measure the drawing (20 real Chromium renderers on a
2-core machine measure the machine, not the server); a test counts the messages a change
takes to reach a follower with it.

Protocol: header, metadata and content are three text frames; a message with buffers
follows them with a text frame and a binary frame per buffer (bokeh/protocol/message.py,
``Message.send``, Bokeh 3).
"""

from __future__ import annotations

import html
import json
import re
import time
import urllib.parse

from tornado.httpclient import AsyncHTTPClient, HTTPRequest
from tornado.websocket import websocket_connect

__all__ = ["WirePage", "verdict_where"]

#: what a cookie's value may hold as it is (a signed cookie's bars and quotes); the rest is
#: percent-encoded (a typed name's spaces and letters beyond ASCII)
COOKIE_SAFE = "".join(chr(c) for c in range(33, 127) if chr(c) not in ";,\\%")
TOKEN = re.compile(r'"token":"([^"]+)"')
WHERE = re.compile(r"class='bd-verdict-where'[^>]*>(.*?)</div>", re.S)
#: the page's hidden mark of what it is doing (app.desk.page.Page.settle_mark)
MARK = re.compile(r"class='bd-settled'([^>]*)>")
MARK_DATA = re.compile(r"data-(\w+)='([^']*)'")
TAG = re.compile(r"<[^>]+>")


def _plain(fragment: str) -> str:
    return " ".join(html.unescape(TAG.sub("", fragment)).split())


def _markup(text: str) -> str:
    """An HTML pane's markup from its text in a message (Panel sends it escaped once)."""
    return html.unescape(text) if "&lt;" in text else text


def verdict_where(text: str) -> str | None:
    """The verdict's "where" line in an HTML pane's text, as the page shows it; None if the
    text has none."""
    m = WHERE.search(_markup(text))
    return _plain(m.group(1)) if m else None


def _message(msgid: str, msgtype: str, content: dict) -> list[str]:
    return [json.dumps({"msgid": msgid, "msgtype": msgtype}), "{}", json.dumps(content)]


READY = {
    "events": [
        {
            "kind": "MessageSent",
            "msg_type": "bokeh_event",
            "msg_data": {"type": "event", "name": "document_ready", "values": {"type": "map"}},
        }
    ]
}


def _click(model_id: str) -> dict:
    return {
        "events": [
            {
                "kind": "MessageSent",
                "msg_type": "bokeh_event",
                "msg_data": {
                    "type": "event",
                    "name": "button_click",
                    "values": {"type": "map", "entries": [["model", {"id": model_id}]]},
                },
            }
        ]
    }


class WirePage:
    """One session of ``link`` on the server, kept open; ``log`` holds (time.time(), where)
    each time the verdict's "where" line changes, ``pane`` the verdict pane's latest text
    (plain), and ``bytes`` what the server sent."""

    def __init__(self, link: str, cookies: dict | None = None, agent: str = "wire page"):
        self.link = link
        self.cookies = cookies or {}
        self.agent = agent
        self.log: list[tuple[float, str]] = []
        self.bytes = 0
        self.messages = 0
        #: (time.time(), number of events) of every message read
        self.received: list[tuple[float, int]] = []
        self.pane: str | None = None
        #: the page's hidden mark as last sent: started, pending, step, tab, room
        self.mark: dict[str, str] = {}
        #: the page's widgets, {title or label: model id}, from the pulled document
        self.widgets: dict[str, str] = {}
        self._ws = None
        self._last = None
        self._n = 0

    async def open(self):
        cookie = "; ".join(
            f"{k}={urllib.parse.quote(v, safe=COOKIE_SAFE)}" for k, v in self.cookies.items()
        )
        resp = await AsyncHTTPClient().fetch(
            HTTPRequest(
                self.link, headers={"Cookie": cookie, "User-Agent": self.agent}, request_timeout=180
            )
        )
        token = TOKEN.search(resp.body.decode("utf-8")).group(1)
        parts = urllib.parse.urlsplit(self.link)
        ws = urllib.parse.urlunsplit(("ws", parts.netloc, parts.path.rstrip("/") + "/ws", "", ""))
        self._ws = await websocket_connect(
            HTTPRequest(ws, headers={"Cookie": cookie, "User-Agent": self.agent}),
            subprotocols=["bokeh", token],
            max_message_size=1 << 30,
        )
        await self._read()  # ACK
        await self._send("PULL-DOC-REQ", {})
        reply = await self._read()
        self.widgets = dict(_widgets(reply))
        self._look(reply)
        await self._send("PATCH-DOC", READY)
        return self

    async def _widget(self, name: str, timeout: float = 180.0) -> str:
        """The id of the widget titled or labelled ``name``: at once if the pulled document
        held it, else as soon as a message from the server brings it (a page built when its
        session connects sends its parts after the document; :meth:`run` reads them)."""
        await self.until(lambda: name in self.widgets, timeout, f"a widget called {name!r}")
        return self.widgets[name]

    async def until(self, condition, timeout: float = 180.0, what: str = "the condition"):
        """The first true value of ``condition()``, checked as the reading task (:meth:`run`)
        takes in messages: a condition wait, never a fixed one; TimeoutError naming ``what``
        after ``timeout`` seconds (a bound for a broken run, not a speed goal)."""
        import asyncio

        deadline = time.monotonic() + timeout
        while not (value := condition()):
            if time.monotonic() > deadline:
                raise TimeoutError(f"waited {timeout:.0f} s for {what}")
            await asyncio.sleep(0.05)
        return value

    def step(self) -> int:
        """How many changes the page has followed (-1 before its mark came)."""
        return int(self.mark.get("step", -1))

    async def settled(self, after: int = -1, timeout: float = 180.0) -> int:
        """Wait until the page has started, has no view on its way and has followed more
        than ``after`` changes (as testkit.chromium.settled, for a page on the wire)."""
        m = self.mark
        await self.until(
            lambda: (
                self.mark.get("started") == "1"
                and self.mark.get("pending") == ""
                and self.step() > after
            ),
            timeout,
            f"the page to settle after step {after} (mark {m})",
        )
        return self.step()

    async def change(self, widget: str, attr: str, new):
        """Set ``attr`` of the widget titled or labelled ``widget``, as its input would."""
        wid = await self._widget(widget)
        await self._send(
            "PATCH-DOC",
            {"events": [{"kind": "ModelChanged", "model": {"id": wid}, "attr": attr, "new": new}]},
        )

    async def click(self, widget: str):
        await self._send("PATCH-DOC", _click(await self._widget(widget)))

    async def set_box(self, box):
        """Type a box (west, east, south, north) and press "Use this box"."""
        for title, value in zip(("West", "East", "South", "North"), box):
            await self.change(title, "value", float(value))
        await self.click("Use this box")

    async def _send(self, msgtype, content):
        self._n += 1
        for frame in _message(f"w{self._n}", msgtype, content):
            await self._ws.write_message(frame)

    async def _read(self):
        """One whole message: its content, parsed (its buffers are read and counted)."""
        frames = []
        for _ in range(3):
            f = await self._ws.read_message()
            if f is None:
                raise ConnectionError("the server closed the session")
            frames.append(f)
            self.bytes += len(f)
        header = json.loads(frames[0])
        for _ in range(2 * int(header.get("num_buffers", 0) or 0)):
            f = await self._ws.read_message()
            if f is None:
                raise ConnectionError("the server closed the session")
            self.bytes += len(f)
        self.messages += 1
        content = json.loads(frames[2])
        self.received.append((time.time(), len(content.get("events", []) or [])))
        return content

    def _look(self, content):
        """Note the verdict's line wherever a text in the message carries it, and every
        widget the message brings."""
        for name, wid in _widgets(content):
            self.widgets.setdefault(name, wid)
        for text in _texts(content):
            mark = MARK.search(_markup(text))
            if mark is not None:
                self.mark = dict(MARK_DATA.findall(mark.group(1)))
            where = verdict_where(text)
            if where is not None:
                self.pane = _plain(_markup(text))
            if where is not None and where != self._last:
                self._last = where
                self.log.append((time.time(), where))

    async def run(self):
        """Read until the server closes the session or :meth:`close` is called."""
        try:
            while True:
                self._look(await self._read())
        except Exception:  # noqa: BLE001 - the session closed (or was closed): reading ends
            return

    def close(self):
        if self._ws is not None:
            self._ws.close()


def _widgets(obj):
    """(title or label, id) of every model in a pulled document that has one."""
    if isinstance(obj, dict):
        if obj.get("type") == "object" and "id" in obj:
            attrs = obj.get("attributes") or {}
            for name in ("title", "label"):
                if isinstance(attrs.get(name), str) and attrs[name]:
                    yield attrs[name], obj["id"]
        for v in obj.values():
            yield from _widgets(v)
    elif isinstance(obj, list):
        for v in obj:
            yield from _widgets(v)


def _texts(obj):
    """Every string in a decoded message that may hold a pane's HTML."""
    if isinstance(obj, str):
        if "bd-verdict-where" in obj or "bd-settled" in obj:
            yield obj
    elif isinstance(obj, dict):
        for v in obj.values():
            yield from _texts(v)
    elif isinstance(obj, list):
        for v in obj:
            yield from _texts(v)
