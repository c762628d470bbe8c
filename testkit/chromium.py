"""Headless Chromium for the browser tests (Debian's chromium, driven by Playwright).

A module calls :func:`require` at import: without Chromium it is skipped, or fails under
CI, where ``make test`` installs it.
"""

from __future__ import annotations

import contextlib
import os
import shutil

import pytest

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")

#: no sandbox (root in a container), no GPU, nothing fetched in the background
ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--no-first-run",
    "--disable-sync",
]


def require():
    """Playwright's sync API, once Chromium is known to be here (else skip, or fail in CI)."""
    if CHROMIUM is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is not installed: make test installs it", pytrace=False)
        pytest.skip("chromium is not installed", allow_module_level=True)
    return pytest.importorskip("playwright.sync_api")


@contextlib.contextmanager
def launched():
    """A headless Chromium, closed on the way out."""
    sync_api = require()
    with sync_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            yield b
        finally:
            b.close()
