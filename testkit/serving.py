"""Start and stop a real ``balance-desk serve`` on a port the system picks, for the tests.

The server's log goes to a file: a pipe nobody reads fills up and stops the server.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import tempfile
import time
import urllib.request

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


#: the line a server prints once it listens, with the port it was given
#: How long any wait of a test may last (s): a bound that only a hung run reaches, never a
#: speed goal. A page under a full suite on two busy cores has taken over a minute to redraw
#: everything after a change of units; nothing that works takes three.
HANG_S = 180.0
HANG_MS = 1000 * HANG_S

SERVING = re.compile(r"balance-desk: serving \d+ case\(s\) at http://[^\s/]+:(\d+)/")


#: what :func:`start_server` fetches to know the server answers: any answer will do, and a
#: missing file is answered at once (the page itself would build a whole session for nothing,
#: about 0.5 s of the server's time)
READY_PATH = "/static/ready-probe"


def start_server(args=(), *, env=None, cwd=ROOT, port=0, ready_path=READY_PATH, timeout=180):
    """(process, url, port) of a server that answers; RuntimeError with its log if it dies.

    By default the server binds port 0 (a free port the system picks, never one handed
    over and raced for) and the port is read from the line it prints once it listens.
    The process carries ``log_path``. ``ready_path`` is fetched until it answers.
    """
    log = tempfile.NamedTemporaryFile("w+", suffix=".log", delete=False)
    full_env = dict(os.environ if env is None else env, PYTHONUNBUFFERED="1")
    if "--store" not in args:
        full_env = own_store(full_env)
    proc = subprocess.Popen(
        [sys.executable, "-m", "app.cli", "serve", *args, "--port", str(port)],
        stdout=log,
        stderr=subprocess.STDOUT,
        text=True,
        cwd=cwd,
        env=full_env,
    )
    proc.log_path = log.name

    def listening():
        with open(log.name) as fh:
            found = SERVING.search(fh.read())
        return int(found.group(1)) if found else None

    port = wait_until(listening, timeout, proc=proc, what="the server to listen")
    url = f"http://127.0.0.1:{port}/"

    def answers():
        try:
            urllib.request.urlopen(url + ready_path.lstrip("/"), timeout=5)
        except urllib.error.HTTPError:
            pass  # it answers (a refusal is an answer)
        except OSError:
            return False
        return True

    wait_until(answers, timeout, proc=proc, what="the server to answer")
    return proc, url, port


def own_store(env=None) -> dict:
    """``env`` (default: this process's) with a room store of its own: a server a test
    starts never shares a store with another (one server per store: the second is refused)."""
    return dict(
        os.environ if env is None else env,
        BALANCE_DESK_STORE=os.path.join(tempfile.mkdtemp(prefix="bd-store-"), "rooms.sqlite"),
    )


def wait_until(condition, timeout=120.0, *, proc=None, what="the condition", every=0.1):
    """The first true value of ``condition()``, polled every ``every`` seconds.

    A condition wait, never a fixed one: it returns as soon as the condition holds. It
    raises RuntimeError (with the server's log) if ``proc`` dies first, and TimeoutError
    naming ``what`` after ``timeout`` seconds (a bound for a broken run, not a speed goal).
    """
    deadline = time.monotonic() + timeout
    while True:
        value = condition()
        if value:
            return value
        if proc is not None and proc.poll() is not None:
            with open(proc.log_path) as fh:
                raise RuntimeError(f"the server stopped:\n{fh.read()}")
        if time.monotonic() > deadline:
            if proc is not None:
                proc.kill()
            raise TimeoutError(f"waited {timeout:.0f} s for {what}")
        time.sleep(every)


#: a line of the server's work pool or a page about one lane (logged at DEBUG)
LANE_LINE = re.compile(r"lane (\w+): (.*)")


def lane_lines(text: str) -> dict:
    """Each lane's lines of a server log (BALANCE_DESK_LOG=DEBUG), in order."""
    out: dict = {}
    for lane, what in LANE_LINE.findall(text):
        out.setdefault(lane, []).append(what)
    return out


def lane_asked(text: str, *fragments) -> str | None:
    """The lane of the first page that asked for a view whose line holds every fragment."""
    for lane, lines in lane_lines(text).items():
        if any(" asked for " in w and all(f in w for f in fragments) for w in lines):
            return lane
    return None


def lane_idle(text: str, lane: str) -> bool:
    """The lane's last word is that it is idle: nothing of it waits or runs."""
    lines = lane_lines(text).get(lane)
    return bool(lines) and lines[-1] == "idle"


def log_text(proc) -> str:
    with open(proc.log_path) as fh:
        return fh.read()


def stop_server(proc, *, signal_kill=False) -> str:
    """Stop the server; returns its log."""
    if signal_kill:
        proc.kill()
    else:
        proc.terminate()
    try:
        proc.wait(timeout=20)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
    with open(proc.log_path) as fh:
        out = fh.read()
    os.unlink(proc.log_path)
    return out
