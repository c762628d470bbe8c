"""Start the balance-desk server (Panel on Tornado) on files or a directory of cases.

Every HTTP response carries headers that forbid framing by other origins and
content-type sniffing, and a content security policy as strict as Bokeh and
Panel allow (see DEVELOPERS.md, "The server's headers"): scripts and styles only
from the server itself, with the two allowances the libraries need -- inline
scripts (Bokeh embeds each document's JSON and its start-up call in the page)
and ``eval`` (Bokeh compiles CustomJS callbacks and tick formatters with
``new Function``) -- websockets only back to the server, no plugins, no
framing by another origin.
"""

from __future__ import annotations

import logging
import os
import re
import socket

import pyproj  # noqa: F401  (before anything that may load eccodes)

from balance_core import settings

from .cases import case_paths
from .outside import one_line

__all__ = [
    "serve",
    "case_paths",
    "security_headers",
    "ServeError",
    "check_address",
    "PageLimit",
    "LIMIT",
    "is_loopback",
    "read_passphrase",
    "MAX_URI",
]

#: the longest request line taken, with a readable "414" beyond it (Tornado's own limit
#: on a request's head is 64 KiB); within it every value of a link is still refused on
#: its own past 400 characters (app.state.MAX_QUERY_VALUE), so the page works and says so
MAX_URI = 60000
#: the largest request body taken (bytes), with "413" beyond it: the only bodies the desk
#: takes are the login form's (a name and a passphrase); Tornado's own bound is 100 MB
MAX_BODY = 16 * 1024
#: the largest websocket message a page may send (bytes; Bokeh's own bound is 20 MB): the
#: page sends widget changes and drawn regions, far smaller; a larger one closes the socket
MAX_WS_MESSAGE = 1024 * 1024
#: a log line is cut to this many characters (a malformed message was logged whole: 400 kB)
MAX_LOG_LINE = 2000

log = logging.getLogger(__name__)


class ServeError(Exception):
    """The server cannot start: one sentence, exit status 2."""


def security_headers(host: str, port: int) -> dict:
    """The headers every response carries (see the module docstring)."""
    csp = "; ".join(
        [
            "default-src 'self'",
            "script-src 'self' 'unsafe-inline' 'unsafe-eval' blob:",
            "worker-src 'self' blob:",
            "style-src 'self' 'unsafe-inline'",
            "img-src 'self' data: blob:",
            "font-src 'self' data:",
            f"connect-src 'self' ws://{host}:{port} wss://{host}:{port}",
            "object-src 'none'",
            "base-uri 'self'",
            "form-action 'self'",
            "frame-ancestors 'self'",
        ]
    )
    return {
        "Content-Security-Policy": csp,
        "X-Frame-Options": "SAMEORIGIN",
        "X-Content-Type-Options": "nosniff",
        "Referrer-Policy": "no-referrer",
        "Cross-Origin-Opener-Policy": "same-origin",
    }


def _transform(headers):
    from tornado.web import OutputTransform

    class SecurityHeaders(OutputTransform):
        def transform_first_chunk(self, status_code, h, chunk, finishing):
            for k, v in headers.items():
                h[k] = v
            return status_code, h, chunk

    return SecurityHeaders


class PageLimit:
    """A token bucket per client for the page's own requests (each builds a session).

    A client is its address and its browser's User-Agent: a script or monitor
    fetching the page in a loop drains its own bucket and gets "429 Too Many
    Requests" (about a millisecond of work) instead of a session each time, while
    people's browsers keep theirs. ``burst`` pages at once, then one every
    ``1 / per_second`` seconds. A refused request is answered only after
    ``hold_s`` seconds (the Retry-After it is told): a loop that retries at once
    makes one request per ``hold_s`` instead of hundreds a second, and a waiting
    answer costs the server nothing. A nicety against runaway loops, not an
    authentication: a determined client can vary its User-Agent.
    """

    hold_s = 2.0

    def __init__(self, burst: int = 10, per_second: float = 0.5, clients: int = 10_000):
        import collections
        import threading

        self.burst, self.rate, self.clients = burst, per_second, clients
        self._buckets = collections.OrderedDict()
        self._lock = threading.Lock()

    def allow(self, key, now=None) -> bool:
        import time

        now = time.monotonic() if now is None else now
        with self._lock:
            tokens, last = self._buckets.pop(key, (float(self.burst), now))
            tokens = min(self.burst, tokens + (now - last) * self.rate)
            ok = tokens >= 1.0
            self._buckets[key] = (tokens - 1.0 if ok else tokens, now)
            while len(self._buckets) > self.clients:
                self._buckets.popitem(last=False)
            return ok


LIMIT = PageLimit()


def _limit_page_requests():
    """Put :data:`LIMIT` in front of Panel's page handler (once per process)."""
    from panel.io.server import DocHandler

    if getattr(DocHandler, "_balance_desk_limited", False):
        return
    original = DocHandler.prepare

    async def prepare(self):
        _writer(self)
        if len(self.request.uri or "") > MAX_URI:
            self.set_status(414)
            self.set_header("Content-Type", "text/plain; charset=utf-8")
            self.finish("The link is too long.\n")
            return
        if self.request.method == "GET":
            key = (self.request.remote_ip, self.request.headers.get("User-Agent", ""))
            if not LIMIT.allow(key):
                import asyncio

                await asyncio.sleep(LIMIT.hold_s)
                self.set_status(429)
                self.set_header("Retry-After", f"{LIMIT.hold_s:.0f}")
                self.set_header("Content-Type", "text/plain; charset=utf-8")
                self.finish("Too many page requests from this client; try again in a moment.\n")
                return
        await original(self)

    DocHandler.prepare = prepare
    DocHandler._balance_desk_limited = True


def _writer(handler) -> None:
    """A page request's browser, known by the secret in its HttpOnly cookie (made at its first
    page, kept ten years): the page is handed a digest of it in a request header that no
    client can set (one sent is replaced), and only it may change the notes it writes."""
    import hashlib
    import secrets

    from .desk.room import WRITER_COOKIE, WRITER_HEADER

    secret = handler.get_cookie(WRITER_COOKIE) or ""
    if not re.fullmatch(r"[A-Za-z0-9_-]{32,64}", secret):
        secret = secrets.token_urlsafe(32)
        handler.set_cookie(
            WRITER_COOKIE, secret, expires_days=3650, httponly=True, samesite="Strict", path="/"
        )
    handler.request.headers[WRITER_HEADER] = hashlib.sha256(secret.encode()).hexdigest()[:32]


def bound_bodies(app, limit: int = MAX_BODY, headers: dict | None = None) -> None:
    """Answer "413 Payload Too Large" to a request whose body would exceed ``limit`` bytes,
    from its headers, before a byte of the body is read (the server's own ``max_body_size``,
    set to the same limit, then closes the connection). ``app`` is the server's Tornado
    application (an HTTPServerConnectionDelegate); ``headers`` go on the answer too."""
    from tornado import httputil

    class Refuse(httputil.HTTPMessageDelegate):
        def __init__(self, inner, conn):
            self.inner, self.conn, self.refused = inner, conn, False

        def headers_received(self, start_line, request_headers):
            try:
                size = int(request_headers.get("Content-Length", "0"))
            except ValueError:
                size = 0
            if size <= limit:
                return self.inner.headers_received(start_line, request_headers)
            self.refused = True
            body = f"The request is larger than {limit} bytes.\n".encode()
            answer = httputil.HTTPHeaders(
                {
                    "Content-Type": "text/plain; charset=utf-8",
                    "Content-Length": str(len(body)),
                    "Connection": "close",
                    **(headers or {}),
                }
            )
            start = httputil.ResponseStartLine("HTTP/1.1", 413, "Payload Too Large")
            self.conn.write_headers(start, answer, body)
            self.conn.finish()
            return None

        def data_received(self, chunk):
            return None if self.refused else self.inner.data_received(chunk)

        def finish(self):
            if not self.refused:
                self.inner.finish()

        def on_connection_close(self):
            if not self.refused:
                self.inner.on_connection_close()

    original = app.start_request
    app.start_request = lambda server_conn, request_conn: Refuse(
        original(server_conn, request_conn), request_conn
    )


class CutLongLines(logging.Filter):
    """A log line longer than :data:`MAX_LOG_LINE` characters is cut, saying how much."""

    def filter(self, record):
        msg = record.getMessage()
        if len(msg) > MAX_LOG_LINE:
            cut = len(msg) - MAX_LOG_LINE
            record.msg, record.args = f"{msg[:MAX_LOG_LINE]}... ({cut} characters cut)", ()
        return True


def quiet_closed_sockets(loop, context):
    """The event loop's handler of errors nobody collected. A page closed while the server
    was still writing to it leaves writes that fail with "closed" and that nobody awaits
    (Panel schedules them for a next tick that a destroyed session never has): that is a
    person leaving, said in one line. Every other error goes to asyncio's own handler."""
    from tornado.iostream import StreamClosedError
    from tornado.websocket import WebSocketClosedError

    if isinstance(context.get("exception"), (WebSocketClosedError, StreamClosedError)):
        log.info("a page closed before the server's last message to it was written")
        return
    loop.default_exception_handler(context)


#: a room's key after "room" and an equals sign, a colon or a quote, in any URL encoding
#: (``room=KEY``, ``room%3DKEY`` in a login page's ``next``, ``room%253DKEY``, ``"room": "KEY"``)
ROOM_KEY = re.compile(r"(?i)(room(?:%(?:25)*3D|%(?:25)*22|[=:\"'\s])+)[A-Za-z0-9_-]{8,}")


class HideRoomKeys(logging.Filter):
    """Room links are keys: the logs show ``room=...`` instead of the key."""

    def filter(self, record):
        msg = record.getMessage()
        hidden = ROOM_KEY.sub(r"\1...", msg)
        if hidden != msg:
            record.msg, record.args = hidden, ()
        return True


def check_address(host: str, port: int):
    """One sentence (ServeError) if the port is out of range or the host cannot be resolved.
    Port 0 asks the system for a free port (the server says which once it listens)."""
    if not isinstance(port, int) or not 0 <= port <= 65535:
        raise ServeError(f"balance-desk serve: port {port} is not a port (1 to 65535, or 0)")
    try:
        socket.getaddrinfo(host, port, type=socket.SOCK_STREAM)
    except (socket.gaierror, UnicodeError, OSError) as exc:
        raise ServeError(
            f"balance-desk serve: the host {host!r} cannot be used "
            f"({getattr(exc, 'strerror', None) or exc})"
        ) from None


def is_loopback(host: str) -> bool:
    """Is ``host`` this machine only (127.0.0.0/8, ::1, localhost)?"""
    import ipaddress

    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def read_passphrase(path: str | None, env=None) -> str | None:
    """The access passphrase: from the file ``path`` (its first line), else the
    environment variable BALANCE_DESK_PASSPHRASE; None when neither gives one. Never
    from the command line, where other users of the machine could read it."""
    if path:
        try:
            with open(path, encoding="utf-8") as fh:
                text = fh.readline().strip()
        except (OSError, UnicodeError) as exc:
            raise ServeError(
                f"balance-desk serve: the passphrase file cannot be read "
                f"({getattr(exc, 'strerror', None) or exc})"
            ) from None
    else:
        text = settings.text("BALANCE_DESK_PASSPHRASE", env) or ""
    if not text:
        return None
    if len(text) < 12:
        raise ServeError("balance-desk serve: the passphrase needs at least 12 characters")
    return text


def _origins(host, port, extra=()):
    """The websocket origins allowed: the served address (and its loopback names)."""
    import socket as _socket

    if host in ("0.0.0.0", "::", ""):
        names = {_socket.gethostname(), _socket.getfqdn()}
    else:
        names = {host}
    if is_loopback(host):
        names |= {"localhost", "127.0.0.1"}
    out = [f"{n}:{port}" for n in sorted(names) if n]
    out += [o if ":" in o else f"{o}:{port}" for o in extra]
    return out


def _passphrase(host, passphrase_file, env, open_without_passphrase, out) -> str | None:
    """The access passphrase; refused start (ServeError) without one on an address other
    machines can reach, unless ``open_without_passphrase``, which warns."""
    passphrase = read_passphrase(passphrase_file, env)
    if not is_loopback(host) and passphrase is None:
        if not open_without_passphrase:
            raise ServeError(
                f"balance-desk serve: {host} can be reached from other machines, "
                "so an access passphrase is needed (--passphrase-file FILE or the "
                "environment variable BALANCE_DESK_PASSPHRASE)"
            )
        out(
            f"WARNING: balance-desk is served on {host} WITHOUT a passphrase: anyone who can "
            "reach this address can see the cases, join every room whose link they have, and "
            "write notes."
        )
    return passphrase


def desk_cases_of(library) -> dict:
    """The desk's case of each file it holds, for the archive's links: absolute path -> case
    name, and file name -> case name where no other file has that name."""
    out, names = {}, {}
    for name, lc in library.cases.items():
        if lc.case is None:
            continue
        out[os.path.abspath(lc.path)] = name
        names.setdefault(os.path.basename(lc.path), []).append(name)
    out.update({f: n[0] for f, n in names.items() if len(n) == 1})
    return out


def _load_archives(archives, out) -> tuple[dict, list]:
    """The batch results to serve at /archive, and why any could not be read."""
    results, problems = {}, []
    if archives:
        from .desk.archive import load_result

        for a in archives:
            try:
                results[os.path.basename(a)] = load_result(a)
            except ValueError as exc:
                problems.append(str(exc))
                out(f"balance-desk: not serving {one_line(a)}: {one_line(exc)}")
    return results, problems


def _set_up_logging(log_level) -> None:
    """Log lines with times; room keys hidden from every logger that could print a URL; our
    loggers (named by module under app and balance_core) at ``log_level``; kill -USR1 prints
    every thread's stack to stderr (a stuck server shows where)."""
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(levelname)s %(message)s")
    names = ("tornado.access", "bokeh.server.views.ws", "bokeh", "tornado", "panel")
    for name in names:
        logging.getLogger(name).addFilter(HideRoomKeys())
    # every handler, the root's and those Bokeh and Panel add to their own loggers
    for logger in [logging.getLogger()] + [logging.getLogger(n) for n in names]:
        for handler in logger.handlers:
            if not any(isinstance(f, CutLongLines) for f in handler.filters):
                handler.addFilter(HideRoomKeys())
                handler.addFilter(CutLongLines())
    for name in ("app", "balance_core"):
        logging.getLogger(name).setLevel(log_level)  # DEBUG: page timings
    logging.getLogger("panel.util").setLevel(logging.ERROR)  # it warns of every odd link value
    try:
        import faulthandler
        import signal

        faulthandler.register(signal.SIGUSR1, all_threads=True)
    except (AttributeError, ValueError, OSError):
        pass


def serve(
    files=None,
    cases_dir=None,
    host="127.0.0.1",
    port=5006,
    show=False,
    *,
    memory_budget=None,
    start=True,
    out=print,
    store=None,
    passphrase_file=None,
    open_without_passphrase=False,
    origins=(),
    env=None,
    archives=(),
):
    """Load the cases once and serve the desk page and the review rooms.

    Says which cases failed and why, refuses to start (ServeError) when none loads
    or the address cannot be used, and prints "serving" only once it listens.
    On an address other than this machine's own it needs an access passphrase
    (:func:`read_passphrase`), checked by Panel's own login page; without one it
    refuses to start, unless ``open_without_passphrase``, which warns on every
    start. Returns the server (after it stops when ``start``).
    """
    import secrets

    import panel as pn
    from bokeh.settings import settings as bokeh_settings

    from .desk import make_room_session, make_session
    from .desk.look import GLOBAL_CSS
    from .desk.room import NAME_COOKIE
    from .library import CaseLibrary
    from .rooms import Hub, RoomLimits, StoreError, open_store
    from .rooms.store import ServerLock, default_store_path

    # every script and stylesheet from this server, also for parts drawn after the page
    # loaded (a tab opened later): the page works offline, and the CSP allows nothing else
    bokeh_settings.resources.set_value("server")

    check_address(host, port)
    passphrase = _passphrase(host, passphrase_file, env, open_without_passphrase, out)
    store_path = store or default_store_path()
    try:
        per_minute = settings.whole_number("BALANCE_DESK_NOTES_PER_MINUTE", env)
        people = settings.whole_number("BALANCE_DESK_ROOM_PEOPLE", env)
        log_level = settings.log_level(env=env)
    except settings.SettingError as exc:
        raise ServeError(f"balance-desk serve: {exc}") from None
    try:
        lock = ServerLock(store_path)  # one server per store: held until this process ends
        hub = Hub(open_store(store_path), RoomLimits(notes_per_minute=per_minute, people=people))
        hub.server_lock = lock
    except StoreError as exc:
        raise ServeError(f"balance-desk serve: {exc}") from None
    results, archive_problems = _load_archives(archives, out)
    paths = case_paths(files, cases_dir)
    if not paths:
        raise ServeError("balance-desk serve: no case files found")
    library = CaseLibrary(paths, memory_budget=memory_budget)
    for name, why in library.failed.items():
        out(f"balance-desk: not serving {one_line(name)}: {one_line(why)}")
    if not library.good:
        raise ServeError("balance-desk serve: none of the cases could be loaded (see above)")
    pn.extension(notifications=False)  # the page has its own notice of a lost connection
    _limit_page_requests()
    if GLOBAL_CSS not in pn.config.raw_css:
        pn.config.raw_css.append(GLOBAL_CSS)
    extra_origins = list(origins)
    origins = _origins(host, port, extra_origins)
    headers = security_headers(host, port)
    auth = {}
    if passphrase is not None:
        from .login import LoginGate, install

        # Panel's own login page and cookie; the cookie's key is new at every start; wrong
        # passphrases held back and logged (app/login.py)
        auth = {"basic_auth": passphrase, "cookie_secret": secrets.token_hex(32)}
        install(LoginGate())
    quiet = logging.getLogger("bokeh")
    level = quiet.level
    quiet.setLevel(logging.WARNING)  # a refusal to start is one sentence, nothing else
    try:
        from .desk.archive import make_archive_session

        server = pn.serve(
            {
                "/": lambda: make_session(library, hub=hub),
                "/room": lambda: make_room_session(library, hub),
                "/archive": lambda: make_archive_session(
                    results, archive_problems, desk_cases_of(library)
                ),
            },
            address=host,
            port=port,
            show=show,
            title="balance-desk",
            websocket_origin=origins,
            start=False,
            print=False,
            transforms=[_transform(headers)],
            check_unused_sessions=5000,
            unused_session_lifetime=60000,
            # session ids signed with a key made at this start: a client cannot make its
            # own (and walk around the page limits), nor forge what its token says
            sign_sessions=True,
            secret_key=secrets.token_urlsafe(48),
            # the token, which the page's HTML holds, carries no cookie but the typed name
            include_cookies=[NAME_COOKIE],
            exclude_headers=["Cookie"],
            http_server_kwargs={"max_body_size": MAX_BODY},
            websocket_max_message_size=MAX_WS_MESSAGE,
            **auth,
        )
    except OSError as exc:
        raise ServeError(
            f"balance-desk serve: cannot listen on {host}:{port} ({exc.strerror or exc})"
        ) from None
    finally:
        quiet.setLevel(level)
    bound_bodies(server._tornado, MAX_BODY, headers)
    if port == 0:  # the system picked the port as the server bound it: known only now
        port = server.port
        headers.update(security_headers(host, port))
        allowed = server._tornado.websocket_origins  # Bokeh's own set; it has no setter
        allowed.clear()
        allowed.update(_origins(host, port, extra_origins))
    _set_up_logging(log_level)
    out(f"balance-desk: review rooms are kept in {store_path}")
    if results:
        out(
            f"balance-desk: batch results through the archive at http://{host}:{port}/archive "
            f"({', '.join(one_line(r) for r in results)})"
        )
    out(
        f"balance-desk: serving {len(library.good)} case(s) at http://{host}:{port}/ "
        f"({', '.join(one_line(n) for n in library.good)})"
    )
    if start:
        # what is loaded by now (the cases, the libraries) lives as long as the server: keep
        # it out of every later full garbage collection, which would otherwise walk it all
        # (about 130 ms per pass, on the event loop) while sessions come and go
        import gc

        gc.collect()
        gc.freeze()
        server.start()
        server.io_loop.asyncio_loop.set_exception_handler(quiet_closed_sockets)
        try:
            server.io_loop.start()
        except KeyboardInterrupt:
            pass
    return server
