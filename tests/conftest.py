"""Shared test set-up.

The whole run blocks network sockets except loopback (pytest-socket, see
pyproject.toml), so a hidden download (coastlines, projection grids, sample
data) fails loudly instead of hanging; PROJ is told not to fetch grids.
"""

import os

os.environ.setdefault("PROJ_NETWORK", "OFF")
# servers the tests start keep their review rooms in a folder of this run, not the user's
if "BALANCE_DESK_STORE" not in os.environ:
    import tempfile

    os.environ["BALANCE_DESK_STORE"] = os.path.join(
        tempfile.mkdtemp(prefix="bd-store-"), "rooms.sqlite"
    )

import numpy as np
import pyproj  # noqa: F401  - before anything that may load eccodes
import pytest


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


@pytest.fixture(scope="module")
def browser():
    """A headless Chromium for the browser tests of one module (testkit.chromium.launched),
    each test opening contexts and pages of its own in it.

    Not for the whole run: Playwright's sync API keeps an asyncio loop running in the
    worker's thread while it is started, and a later module of the same worker that runs a
    loop of its own (tornado's ``run_sync``, ``asyncio.run``, a Playwright of its own) fails
    with "This event loop is already running". pytest closes a module's fixtures before the
    next module's test, so the loop ends with the module."""
    from testkit.chromium import launched

    with launched() as b:
        yield b


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    """A failed test that used a module's ``server`` (a dict with its process, or a module
    naming the log in ``SERVER_LOG``) gets the end of that server's log in its report: a page
    that never settled says why on the server."""
    outcome = yield
    rep = outcome.get_result()
    server = getattr(item, "funcargs", {}).get("server")
    proc = server.get("proc") if isinstance(server, dict) else None
    # a module whose server fixture gives only its address names the log SERVER_LOG
    log_path = getattr(proc, "log_path", None) or getattr(item.module, "SERVER_LOG", None)
    if rep.when == "call" and rep.failed and log_path:
        try:
            with open(log_path, encoding="utf-8", errors="replace") as fh:
                rep.sections.append(("the server's log (its end)", fh.read()[-20000:]))
        except OSError:
            pass
