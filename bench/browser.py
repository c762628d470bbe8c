"""What the browser benchmarks share: the server, Chromium's flags, and clocks kept in the page.

Times are taken by the page itself (``performance.now()``, whose zero is the start of
the navigation): a script installed before the page loads looks every 5 ms, through
the shadow roots Panel draws into, for what a figure waits for, and notes the first
moment it is there. A probe from outside (Playwright's polling) would add its own
round trips to the figure.
"""

from __future__ import annotations

import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
if ROOT not in sys.path:
    sys.path.insert(0, ROOT)

from testkit import serving  # noqa: E402
from testkit.chromium import ARGS, CHROMIUM  # noqa: E402,F401 - Chromium's path and flags, as the tests

LINK = "?case=ocean_cyclone&level=500&time=2041-01-19T12%3A00%3A00Z"

#: installed in every page before it loads: window.bdFind(selector, text) and the clocks
CLOCKS = """
(() => {
  function find(root, sel, text) {
    for (const el of root.querySelectorAll(sel)) {
      if (!text || el.textContent.includes(text)) return el;
    }
    for (const el of root.querySelectorAll('*')) {
      if (el.shadowRoot) { const hit = find(el.shadowRoot, sel, text); if (hit) return hit; }
    }
    return null;
  }
  window.bdFind = (sel, text) => find(document, sel, text);
  window.bdSeen = {};
  // bdWatch(name, selector, text): note when an element with that text is first there
  window.bdWatch = (name, sel, text) => {
    delete window.bdSeen[name];
    const iv = setInterval(() => {
      if (find(document, sel, text)) { window.bdSeen[name] = performance.now(); clearInterval(iv); }
    }, 5);
  };
  // bdWatchChange(name, selector): note when that element's text first differs from now
  window.bdWatchChange = (name, sel) => {
    delete window.bdSeen[name];
    const el0 = find(document, sel, '');
    const before = el0 ? el0.textContent : null;
    const iv = setInterval(() => {
      const el = find(document, sel, '');
      if (el && el.textContent !== before) {
        window.bdSeen[name] = performance.now(); clearInterval(iv);
      }
    }, 5);
  };
  // the moment of the last mouse button release anywhere on the page
  window.addEventListener('pointerup', () => { window.bdSeen.pointerup = performance.now(); },
                          true);
  window.bdWatch('verdict', '.bd-verdict', '');
})();
"""


def start_server(*files, env=None):
    """A ``balance-desk serve`` of its own on a free port (tests/serving.py): (process, url,
    log path)."""
    proc, url, _ = serving.start_server(files, env=env)
    return proc, url, proc.log_path


def new_page(browser, width=1500, height=1000):
    page = browser.new_page(viewport={"width": width, "height": height})
    page.add_init_script(CLOCKS)
    return page


def seen(page, name, timeout_s=120.0) -> float:
    """Milliseconds from the navigation's start to the moment ``name`` was first seen."""
    deadline = time.perf_counter() + timeout_s
    while time.perf_counter() < deadline:
        t = page.evaluate(f"window.bdSeen && window.bdSeen[{name!r}]")
        if t is not None:
            return float(t)
        time.sleep(0.02)
    raise TimeoutError(f"{name} not seen in {timeout_s:.0f} s")


def mark(page, name="t0") -> float:
    """Note the page's clock now, under ``name``; returns it (ms)."""
    return float(page.evaluate(f"window.bdSeen[{name!r}] = performance.now()"))


def page_ready(browser, url, link=LINK) -> float:
    """Seconds from navigation to the verdict drawn, in a fresh page."""
    page = new_page(browser)
    page.goto(url + link)
    ms = seen(page, "verdict")
    page.close()
    return ms / 1e3


def set_box(page, box):
    for label, v in zip(("West", "East", "South", "North"), box):
        page.get_by_label(label, exact=True).fill(str(v))
    page.get_by_role("button", name="Use this box").click()
