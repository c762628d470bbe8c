"""Start and stop a real ``balance-desk serve`` on a port the system picks, for the tests.

The server's log goes to a file: a pipe nobody reads fills up and stops the server.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import signal
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


#: the environment variable naming the folder where the servers shared by one test run leave
#: their address (tests/conftest.py makes the folder in the run's first process); a handover
#: between the test processes, not a setting of balance-desk (so not named BALANCE_DESK_*)
SHARED_ENV = "BD_TEST_SHARED_DIR"
_KEEP: list = []  # the shared servers this process started: never collected while they run


def shared_server(name: str, args=(), *, env=None) -> tuple[str, str]:
    """(url, log path) of a server shared by every process of one test run (pytest-xdist's
    workers): the first to ask starts it (:func:`start_server`), the others find its address
    in the run's folder (named by :data:`SHARED_ENV`), and :func:`stop_shared_servers` stops
    it at the end of the run. Its tests must not depend on what the others did on it."""
    import fcntl

    folder = os.environ.get(SHARED_ENV)
    if not folder:
        raise RuntimeError(f"{SHARED_ENV} is not set: tests/conftest.py sets it for a run")
    info = os.path.join(folder, f"{name}.json")
    with open(os.path.join(folder, f"{name}.lock"), "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)  # one process starts it; the others wait, then read
        if not os.path.exists(info):
            proc, url, _ = start_server(args, env=env)
            _KEEP.append(proc)
            with open(info + ".part", "w") as fh:
                json.dump({"url": url, "pid": proc.pid, "log": proc.log_path}, fh)
            os.replace(info + ".part", info)
        with open(info) as fh:
            found = json.load(fh)
    return found["url"], found["log"]


def _running(pid: int) -> bool:
    """Is ``pid`` a process that still runs (not gone, not a zombie waiting to be reaped)?"""
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def stop_shared_servers() -> dict:
    """Stop the run's shared servers and remove their folder; {name: the end of its log} for
    each whose log holds a Python traceback (the run's first process calls this once every
    test has finished)."""
    folder = os.environ.get(SHARED_ENV)
    broken: dict = {}
    if not folder or not os.path.isdir(folder):
        return broken
    for entry in sorted(os.listdir(folder)):
        if not entry.endswith(".json"):
            continue
        with open(os.path.join(folder, entry)) as fh:
            found = json.load(fh)
        pid = found["pid"]
        try:
            os.kill(pid, signal.SIGTERM)
        except ProcessLookupError:
            pass
        try:
            wait_until(lambda pid=pid: not _running(pid), 20, what="a shared server to stop")
        except TimeoutError:
            os.kill(pid, signal.SIGKILL)
        with open(found["log"], errors="replace") as fh:
            out = fh.read()
        os.unlink(found["log"])
        if "Traceback" in out:
            broken[entry[: -len(".json")]] = out[-3000:]
    shutil.rmtree(folder, ignore_errors=True)
    return broken
