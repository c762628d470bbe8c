"""Headless Chromium for the browser tests (Debian's chromium, driven by Playwright).

A module calls :func:`require` at import: without Chromium it is skipped, or fails under
CI, where ``make test`` installs it.
"""

from __future__ import annotations

import contextlib
import os
import shutil

import pytest

from .serving import HANG_MS

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


#: the page's hidden mark (app.desk.page.Page.settle_mark), found through the shadow roots
#: Panel draws into: whether its work in the browser has started, which views are on their
#: way, how many changes it has followed, the tab open below the chart (as the server knows
#: it) and how many views of a review room it was sent
_MARK_JS = """() => {
  const find = (root) => {
    const el = root.querySelector('.bd-settled');
    if (el) return el;
    for (const n of root.querySelectorAll('*')) {
      if (n.shadowRoot) { const f = find(n.shadowRoot); if (f) return f; }
    }
    return null;
  };
  const el = find(document);
  return el ? {...el.dataset} : null;
}"""

#: true once the page has started, nothing is on its way, it has followed more than
#: ``step`` changes, the server has ``tab`` open (if given) and the page was sent more than
#: ``room`` views of its review room
_SETTLED_JS = (
    "(want) => { const m = ("
    + _MARK_JS
    + """)();
  if (!m || m.started !== '1' || m.pending !== '') return null;
  if (Number(m.step) <= want.step || Number(m.room) <= want.room) return null;
  if (want.tab !== null && m.tab !== String(want.tab)) return null;
  return Number(m.step);
}"""
)


def mark(page) -> dict:
    """The page's mark as the browser has it (text values), {} before it is there."""
    return page.evaluate(_MARK_JS) or {}


def step(page) -> int:
    """How many changes the page has followed so far (-1 before its mark is there)."""
    return int(mark(page).get("step", -1))


def room_views(page) -> int:
    """How many views of a review room the page has been sent (followed or not)."""
    return int(mark(page).get("room", -1))


def settled(
    page,
    after: int = -1,
    tab: int | None = None,
    room_after: int = -1,
    timeout_ms: float = HANG_MS,
) -> int:
    """Wait until the page has settled: it has started its work in the browser, no view it
    asked for is still on its way, and it has followed more than ``after`` changes (pass
    :func:`step` from before an action, so the wait cannot end on the state before the
    action). Returns the number of changes followed.

    The positive sign a negative assertion waits on ("no m/s anywhere" is only true once
    every part that follows the change has been redrawn). ``tab``: the server has also opened
    the tab of that number below the chart (a tab's parts are drawn when it is opened).
    ``room_after``: the page has been sent more than that many views of its review room
    (:func:`room_views` from before), whether it took them or not."""
    from playwright.sync_api import TimeoutError as PlaywrightTimeout

    want = {"step": after, "tab": tab, "room": room_after}
    try:
        handle = page.wait_for_function(_SETTLED_JS, arg=want, timeout=timeout_ms, polling=50)
    except PlaywrightTimeout:
        raise AssertionError(
            f"the page did not settle in {timeout_ms / 1000:.0f} s: its mark is {mark(page)}, "
            f"the wait was for {want}"
        ) from None
    return int(handle.json_value())


def open_tab(page, title: str, timeout_ms: float = HANG_MS) -> int:
    """Open the tab called ``title`` below the chart and wait until the server has opened
    it too and the page has settled (its parts are drawn when it is opened)."""
    from app.desk.below import TAB_TITLES

    page.locator(f"text={title}").first.click()
    return settled(page, tab=list(TAB_TITLES.values()).index(title), timeout_ms=timeout_ms)


def address(page) -> str:
    """The page's address as the browser has it now. ``page.url`` is Playwright's copy, which
    follows a change the page makes to its own address (history.replaceState) only while
    Playwright is being called: a poll on ``page.url`` alone never sees the change."""
    return page.evaluate("() => window.location.href")


def chart_canvas(page):
    """The chart's canvas: the widest Bokeh canvas on the page (a locator)."""
    return max(
        page.locator("canvas").all(),
        key=lambda c: (c.bounding_box() or {"width": 0})["width"],
    )


def open_view(browser, url: str, width: int = 1920, height: int = 1080):
    """(context, page) of a fresh browser context at ``url``, once the page has settled."""
    ctx = browser.new_context(viewport={"width": width, "height": height})
    page = ctx.new_page()
    page.goto(url)
    settled(page)
    return ctx, page
