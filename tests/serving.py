"""Start and stop a real ``balance-desk serve`` on a free loopback port, for the tests.

The server's log goes to a file: a pipe nobody reads fills up and stops the server.
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def start_server(args=(), *, env=None, cwd=ROOT, port=None, ready_path="/"):
    """(process, url, port) of a server that answers; RuntimeError with its log if it dies.

    The process carries ``log_path``. ``ready_path`` is fetched until it answers.
    """
    port = port or free_port()
    log = tempfile.NamedTemporaryFile("w+", suffix=".log", delete=False)
    full_env = dict(os.environ if env is None else env, PYTHONUNBUFFERED="1")
    if "--store" not in args:
        # a store of its own: servers of tests running side by side never share one file
        full_env["BALANCE_DESK_STORE"] = os.path.join(
            tempfile.mkdtemp(prefix="bd-store-"), "rooms.sqlite"
        )
    proc = subprocess.Popen(
        [sys.executable, "-m", "app.cli", "serve", *args, "--port", str(port)],
        stdout=log,
        stderr=subprocess.STDOUT,
        text=True,
        cwd=cwd,
        env=full_env,
    )
    proc.log_path = log.name
    url = f"http://127.0.0.1:{port}/"
    for _ in range(240):
        try:
            urllib.request.urlopen(url + ready_path.lstrip("/"), timeout=2)
            return proc, url, port
        except urllib.error.HTTPError:
            return proc, url, port  # it answers (a refusal is an answer)
        except Exception:  # noqa: BLE001
            if proc.poll() is not None:
                with open(log.name) as fh:
                    raise RuntimeError(fh.read()) from None
            time.sleep(0.5)
    proc.kill()
    raise RuntimeError("the server did not start")


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
