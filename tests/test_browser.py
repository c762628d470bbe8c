"""The dashboard in a real headless Chromium (Debian's chromium, driven by Playwright).

The server runs in a subprocess on a free loopback port with the sample cases.
Screenshots go to artifacts/screenshots/. Skipped when Chromium is not
installed (``make test`` installs it as root), failed under CI=true.
"""

import os
import re
import shutil
import socket
import subprocess
import sys
import time
import urllib.request

import pytest

pytestmark = pytest.mark.browser

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
HERE = os.path.dirname(os.path.abspath(__file__))
SHOTS = os.path.join(HERE, "..", "artifacts", "screenshots")

if CHROMIUM is None:
    if os.environ.get("CI"):
        pytest.fail("chromium is not installed: make test installs it (Debian package chromium)",
                    pytrace=False)
    pytest.skip("chromium is not installed", allow_module_level=True)

sync_api = pytest.importorskip("playwright.sync_api")

BROWSER_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking",
                "--disable-component-update", "--no-first-run", "--disable-sync"]


def _free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    port = _free_port()
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    # the log goes to a file: a pipe nobody reads fills up and stops the server
    log_path = tmp_path_factory.mktemp("server") / "server.log"
    log = open(log_path, "w")
    proc = subprocess.Popen([sys.executable, "-m", "app.cli", "serve", "--port", str(port)],
                            stdout=log, stderr=subprocess.STDOUT, text=True, env=env,
                            cwd=os.path.join(HERE, ".."))
    url = f"http://127.0.0.1:{port}/"
    for _ in range(120):
        try:
            urllib.request.urlopen(url, timeout=2)
            break
        except Exception:  # noqa: BLE001
            if proc.poll() is not None:
                raise RuntimeError(log_path.read_text())
            time.sleep(0.5)
    else:
        proc.kill()
        raise RuntimeError("the server did not start")
    yield url
    proc.terminate()
    try:
        proc.wait(timeout=20)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
    log.close()
    out = log_path.read_text()
    assert "Traceback" not in out, out[-3000:]


@pytest.fixture(scope="module")
def browser():
    with sync_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=BROWSER_ARGS)
        yield b
        b.close()


def _page(browser, url):
    page = browser.new_page(viewport={"width": 1800, "height": 1200})
    errors = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.goto(url)
    page.locator(".bd-chart-title").first.wait_for(timeout=60_000)
    return page, errors


def _wait_for(page, fn, timeout=60.0, every=0.25):
    t0 = time.time()
    while time.time() - t0 < timeout:
        v = fn()
        if v:
            return v
        page.wait_for_timeout(every * 1000)
    raise AssertionError("the page did not change in time")


def _shot(page, name):
    os.makedirs(SHOTS, exist_ok=True)
    page.screenshot(path=os.path.join(SHOTS, f"{name}.png"), full_page=True)


def _chart_title(page):
    return page.locator(".bd-chart-title").first.inner_text()


def _verdict_text(page):
    loc = page.locator(".bd-verdict")
    return loc.first.inner_text() if loc.count() else ""


def _main_canvas(page):
    # the chart is the largest Bokeh canvas on the page
    boxes = []
    for c in page.locator("canvas").all():
        bb = c.bounding_box()
        if bb:
            boxes.append((bb["width"] * bb["height"], bb))
    return max(boxes, key=lambda x: x[0])[1]


def test_page_loads_without_errors(server, browser):
    page, errors = _page(browser, server)
    _wait_for(page, lambda: "hPa" in _chart_title(page))
    _wait_for(page, lambda: re.search(r"Geostrophic", _verdict_text(page)))
    assert "diagnostic aid" in page.locator("text=diagnostic aid").first.inner_text()
    page.wait_for_timeout(1500)
    _shot(page, "01_first_view")
    assert errors == [], errors
    page.close()


def test_drawing_a_box_changes_the_ranking_and_verdict(server, browser):
    page, errors = _page(browser, server + "?case=ocean_cyclone&level=500&time="
                         "2041-01-19T12:00:00Z")
    before = _wait_for(page, lambda: re.search(r"Geostrophic", _verdict_text(page)) and
                       _verdict_text(page))
    bb = _main_canvas(page)
    # drag across the south of the chart (the jet's warm flank), away from the suggested box
    x0, y0 = bb["x"] + bb["width"] * 0.55, bb["y"] + bb["height"] * 0.72
    x1, y1 = bb["x"] + bb["width"] * 0.85, bb["y"] + bb["height"] * 0.92
    page.mouse.move(x0, y0)
    page.mouse.down()
    page.mouse.move(x1, y1, steps=12)
    page.mouse.up()
    after = _wait_for(page, lambda: _verdict_text(page) != before and _verdict_text(page))
    assert after != before
    assert "box" in after
    _wait_for(page, lambda: "region=box" in page.url)
    _shot(page, "02_after_drawing_a_box")
    assert errors == [], errors
    page.close()


def test_changing_the_level_updates_the_chart(server, browser):
    page, errors = _page(browser, server + "?case=ocean_cyclone&level=500")
    _wait_for(page, lambda: "500 hPa" in _chart_title(page))
    select = page.locator("select").nth(1)  # case, level, time
    select.select_option(label="1000 hPa")
    _wait_for(page, lambda: "1000 hPa" in _chart_title(page))
    _wait_for(page, lambda: "Frictional" in _verdict_text(page))
    _shot(page, "03_level_1000")
    assert errors == [], errors
    page.close()


def test_a_link_reopens_the_view(server, browser):
    link = (server + "?case=tropical_cyclone&level=850&time=2038-09-04T06%3A00%3A00Z"
            "&field=rossby_local&projection=conformal&wind_units=kt")
    page, errors = _page(browser, link)
    _wait_for(page, lambda: "tropical_cyclone" in _chart_title(page) and
              "850 hPa" in _chart_title(page) and "06 UTC" in _chart_title(page))
    _wait_for(page, lambda: "Cyclostrophic" in _verdict_text(page))
    assert "local Rossby" in page.locator("text=local Rossby number |zeta / f|").first.inner_text()
    _shot(page, "04_link_tropical_cyclone")
    assert errors == [], errors
    page.close()


def test_errors_show_in_the_page(server, browser):
    page, errors = _page(browser, server + "?case=ocean_cyclone&level=500&region="
                         "box%3A100%2C110%2C-10%2C0")
    _wait_for(page, lambda: page.locator("text=holds no grid points").count() > 0)
    _shot(page, "05_box_without_points")
    # the page keeps working: back to the whole case
    page.locator("button:has-text('Whole case')").first.click()
    _wait_for(page, lambda: "whole case" in _verdict_text(page))
    assert errors == [], errors
    page.close()


def test_sea_breeze_and_scale_sheet(server, browser):
    page, errors = _page(browser, server + "?case=sea_breeze&level=1000&field=speed"
                         "&time=2039-06-21T15%3A00%3A00Z")
    _wait_for(page, lambda: "Unsteady" in _verdict_text(page))
    page.locator("text=A priori scale sheet").first.click()
    page.wait_for_timeout(800)
    _shot(page, "06_sea_breeze_scale_sheet")
    page.locator("text=Through the times").first.click()
    page.wait_for_timeout(800)
    _shot(page, "07_sea_breeze_times")
    assert errors == [], errors
    page.close()
