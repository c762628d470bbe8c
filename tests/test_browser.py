"""The dashboard in a real headless Chromium (Debian's chromium, driven by Playwright).

The server runs in a subprocess on a free loopback port with the sample cases.
Screenshots go to artifacts/screenshots/. Skipped when Chromium is not
installed (``make test`` installs it as root), failed under CI=true.
"""

import io
import os
import re
import time

import numpy as np
import pytest
from PIL import Image

from testkit.chromium import address, chart_canvas, open_tab, require, settled
from testkit.serving import HANG_MS, HANG_S, start_server, stop_server, wait_until

pytestmark = pytest.mark.browser

HERE = os.path.dirname(os.path.abspath(__file__))
SHOTS = os.path.join(HERE, "..", "artifacts", "screenshots")

require()


#: the module's server's log, which a failed test's report ends with (tests/conftest.py)
SERVER_LOG = None


@pytest.fixture(scope="module")
def server():
    global SERVER_LOG
    # each view the lanes are asked for and compute, for the report of a failure
    proc, url, _ = start_server(env=dict(os.environ, BALANCE_DESK_LOG="DEBUG"))
    SERVER_LOG = proc.log_path
    yield url
    out = stop_server(proc)
    assert "Traceback" not in out, out[-3000:]


@pytest.fixture(scope="module")
def desk(browser):
    """One browser context for the module's desk pages: the page's scripts are fetched and
    compiled once, not once a test (about 1.3 s of Chromium's time a page, measured). The
    desk keeps no state in the browser, so the pages share nothing else."""
    ctx = browser.new_context(viewport={"width": 1800, "height": 1200})
    yield ctx
    ctx.close()


def _page(desk, url):
    page = desk.new_page()
    errors = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.goto(url)
    page.locator(".bd-chart-title").first.wait_for(timeout=HANG_MS)
    return page, errors


def _wait_for(page, fn, timeout=HANG_S):
    """The first true value of ``fn()`` (a condition wait: testkit.serving.wait_until)."""
    return wait_until(fn, timeout, what="the page to change", every=0.25)


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


def test_page_loads_without_errors(server, desk):
    page, errors = _page(desk, server)
    _wait_for(page, lambda: "hPa" in _chart_title(page))
    _wait_for(page, lambda: re.search(r"Geostrophic", _verdict_text(page)))
    assert "diagnostic aid" in page.locator("text=diagnostic aid").first.inner_text()
    settled(page)
    _shot(page, "01_first_view")
    assert errors == [], errors
    page.close()


def test_drawing_a_box_changes_the_ranking_and_verdict(server, desk):
    page, errors = _page(desk, server + "?case=ocean_cyclone&level=500&time=2041-01-19T12:00:00Z")
    before = _wait_for(
        page, lambda: re.search(r"Geostrophic", _verdict_text(page)) and _verdict_text(page)
    )
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
    _wait_for(page, lambda: "region=box" in address(page))
    _shot(page, "02_after_drawing_a_box")
    assert errors == [], errors
    page.close()


def test_changing_the_level_updates_the_chart(server, desk):
    page, errors = _page(desk, server + "?case=ocean_cyclone&level=500")
    _wait_for(page, lambda: "500 hPa" in _chart_title(page))
    select = page.locator("select").nth(1)  # case, level, time
    select.select_option(label="1000 hPa")
    _wait_for(page, lambda: "1000 hPa" in _chart_title(page))
    _wait_for(page, lambda: "Frictional" in _verdict_text(page))
    _shot(page, "03_level_1000")
    assert errors == [], errors
    page.close()


def test_the_arrow_keys_step_the_time_and_the_level_but_not_while_typing(server, desk):
    page, errors = _page(
        desk, server + "?case=ocean_cyclone&level=500&time=2041-01-19T06%3A00%3A00Z"
    )
    _wait_for(page, lambda: "500 hPa" in _chart_title(page) and "06 UTC" in _chart_title(page))
    settled(page)  # the page's keys are set up once its document is ready and its work done
    page.locator("body").click(position={"x": 5, "y": 5})  # the page, not a field, has focus
    page.keyboard.press("ArrowRight")
    _wait_for(page, lambda: "12 UTC" in _chart_title(page))
    page.keyboard.press("ArrowLeft")
    page.keyboard.press("ArrowLeft")
    _wait_for(page, lambda: "Sat 19 Jan 2041 00 UTC" in _chart_title(page))
    page.keyboard.press("ArrowUp")  # up: toward lower pressure, 500 -> 300 hPa
    _wait_for(page, lambda: "300 hPa" in _chart_title(page))
    page.keyboard.press("ArrowDown")
    page.keyboard.press("ArrowDown")
    _wait_for(page, lambda: "700 hPa" in _chart_title(page))
    # keys typed into a field stay there: the positive sign is the field's own value
    west = page.get_by_label("West", exact=True)
    west.click()
    step = settled(page)
    west.press("ArrowUp")
    west.press("ArrowRight")
    _wait_for(page, lambda: west.input_value() != "")
    settled(page, after=step - 1)
    assert "700 hPa" in _chart_title(page) and "00 UTC" in _chart_title(page)
    assert "Keys:" in page.locator(".bd-keys").first.inner_text()
    assert errors == [], errors
    page.close()


def test_play_loops_through_the_times_and_pause_stops_it(server, desk):
    page, errors = _page(
        desk, server + "?case=ocean_cyclone&level=500&time=2041-01-19T00%3A00%3A00Z"
    )
    _wait_for(page, lambda: "Sat 19 Jan 2041 00 UTC" in _chart_title(page))
    page.locator("select", has=page.locator("option", has_text="2 frames/s")).select_option(
        label="2 frames/s"
    )
    page.get_by_role("button", name="Play the times").click()
    # the chart moves on by itself, frame by frame
    _wait_for(page, lambda: "06 UTC" in _chart_title(page))
    _wait_for(page, lambda: "12 UTC" in _chart_title(page))
    page.locator("body").click(position={"x": 5, "y": 5})  # the page has the keys
    page.keyboard.press("Space")  # pauses
    _wait_for(page, lambda: page.get_by_role("button", name="Play the times").count() == 1)
    settled(page)
    before = _chart_title(page)
    # a step by hand after the pause lands one time on, and the page settles there
    step = settled(page)
    page.get_by_role("button", name="later >").click()
    settled(page, after=step)
    times = [
        "19 Jan 2041 00",
        "19 Jan 2041 06",
        "19 Jan 2041 12",
        "19 Jan 2041 18",
        "20 Jan 2041 00",
    ]
    was = next(i for i, t in enumerate(times) if t in before)
    assert times[min(was + 1, len(times) - 1)] in _chart_title(page), (before, _chart_title(page))
    assert errors == [], errors
    page.close()


def test_sea_level_in_the_level_menu_draws_isobars_and_the_surface_verdict(server, desk):
    page, errors = _page(
        desk,
        server + "?case=ocean_cyclone&level=500"
        "&time=2041-01-19T12%3A00%3A00Z&region=box%3A-52%2C-28%2C38%2C56",
    )
    _wait_for(page, lambda: "500 hPa" in _chart_title(page))
    page.locator("select").nth(1).select_option(label="sea level")
    _wait_for(page, lambda: "sea level" in _chart_title(page))
    _wait_for(page, lambda: page.locator("text=isobars every 4 hPa").count() > 0)
    _wait_for(page, lambda: "Frictional" in _verdict_text(page))
    # the region's surface balance: the 10 m wind across the isobars, the friction implied
    surface = page.locator(".bd-surface").first
    said = surface.inner_text()
    assert re.search(r"crosses the isobars toward low pressure by \d+ degrees", said), said
    assert "Friction the data imply" in surface.inner_text()
    _wait_for(page, lambda: page.locator("text=found at sea level").count() > 0)
    _wait_for(page, lambda: "level=msl" in address(page))
    _shot(page, "03b_sea_level")
    assert errors == [], errors
    page.close()


#: the chart's visible colour bars: (number of ticks of a fixed ticker or -1, title)
COLOUR_BARS_JS = """() => {
  const d = Bokeh.documents[0];
  const ms = d._all_models instanceof Map ? [...d._all_models.values()] : [...d._all_models];
  return ms.filter(m => m.type === 'ColorBar' || (m.color_mapper !== undefined
                                                 && m.ticker !== undefined))
           .filter(m => m.visible)
           .map(m => [m.ticker.ticks ? m.ticker.ticks.length : -1, m.title]);
}"""


def test_the_map_of_which_balance_holds_where_is_drawn_in_the_verdict_colours(server, desk):
    page, errors = _page(desk, server + "?case=ocean_cyclone&level=500")
    _wait_for(page, lambda: "500 hPa" in _chart_title(page))
    menu = page.locator("select", has=page.locator("option", has_text="which balance holds where"))
    menu.select_option(label="which balance holds where")
    _wait_for(page, lambda: "field=balance_here" in address(page))
    _wait_for(page, lambda: page.locator("text=Which balance holds where: tiles of 5").count() > 0)
    settled(page)
    # one colour bar, with a band per verdict class
    assert page.evaluate(COLOUR_BARS_JS) == [[7, "which balance holds where"]]
    shot = chart_canvas(page).screenshot()
    pixels = np.asarray(Image.open(io.BytesIO(shot)).convert("RGB"))
    blue = np.array([0x00, 0x72, 0xB2])  # the geostrophic class's colour
    share = np.mean(np.all(np.abs(pixels.astype(int) - blue) <= 3, axis=-1))
    assert share > 0.2, share  # most of the 500 hPa flow of the case is geostrophic
    # the readout names the class (30N 33W, in the geostrophic south of the chart)
    box = chart_canvas(page).bounding_box()
    page.mouse.move(box["x"] + box["width"] * 0.45, box["y"] + box["height"] * 0.75)
    page.mouse.move(box["x"] + box["width"] * 0.46, box["y"] + box["height"] * 0.76)
    label = page.get_by_text("which balance holds where:", exact=True).first
    label.wait_for(timeout=HANG_MS)
    assert label.evaluate("e => e.parentElement.innerText").split("\t")[-1] == "Geostrophic"
    _shot(page, "03c_balance_map")
    assert errors == [], errors
    page.close()


def test_printed_the_page_is_two_landscape_pages_and_the_sheet_downloads(server, desk):
    """Chromium's own print of the desk (its PDF): at most two landscape pages that start
    with the chart and hold the verdict with why and the chart's notes, without the
    controls; the briefing sheet's PDF downloads in two pages of the paper chosen."""
    from pypdf import PdfReader

    page, errors = _page(desk, server + OCEAN)
    _wait_for(page, lambda: "Geostrophic" in _verdict_text(page))
    settled(page)
    page.emulate_media(media="print")
    printed = PdfReader(io.BytesIO(page.pdf(format="A4", landscape=True, print_background=True)))
    assert 1 <= len(printed.pages) <= 2
    assert float(printed.pages[0].mediabox.width) > float(printed.pages[0].mediabox.height)
    text = " ".join(" ".join((p.extract_text() or "").split()) for p in printed.pages)
    assert "Geostrophic: the pressure-gradient force" in text and "Why:" in text
    assert "Vectors: actual wind" in text and "diagnostic aid" in text
    assert "Filled field" not in text and "Briefing image" not in text  # no controls
    page.emulate_media(media="screen")
    page.get_by_role("button", name="Letter", exact=True).click()
    with page.expect_download(timeout=HANG_MS) as dl:
        page.get_by_role("button", name="Briefing sheet (PDF, 2 pages)").click()
    sheet = PdfReader(dl.value.path())
    assert dl.value.suggested_filename.endswith(".pdf") and len(sheet.pages) == 2
    assert float(sheet.pages[0].mediabox.width) == 792.0  # US Letter, landscape
    assert errors == [], errors
    page.close()


def test_the_section_tab_draws_a_typed_line_with_the_verdict_at_each_level(server, desk):
    page, errors = _page(desk, server + OCEAN)
    _wait_for(page, lambda: "Geostrophic" in _verdict_text(page))
    open_tab(page, "Section")
    table = page.locator(".bd-section-verdicts").first
    table.wait_for(timeout=HANG_MS)
    assert "500 hPa" in table.inner_text() and "Geostrophic" in table.inner_text()
    for label, value in (
        ("From lon", "-50"),
        ("From lat", "30"),
        ("To lon", "-30"),
        ("To lat", "55"),
    ):
        box = page.get_by_label(label, exact=True)
        box.fill(value)
        box.press("Enter")
    page.get_by_role("button", name="Show this line").click()
    _wait_for(page, lambda: "line=-50%2C30%2C-30%2C55" in address(page))
    _wait_for(page, lambda: page.locator("text=30.0N 50.0W to 55.0N 30.0W").count() > 0)
    assert errors == [], errors
    page.close()


def test_a_link_reopens_the_view(server, desk):
    link = (
        server + "?case=tropical_cyclone&level=850&time=2038-09-04T06%3A00%3A00Z"
        "&field=rossby_local&projection=conformal&wind_units=kt"
    )
    page, errors = _page(desk, link)
    _wait_for(
        page,
        lambda: (
            "tropical_cyclone" in _chart_title(page)
            and "850 hPa" in _chart_title(page)
            and "06 UTC" in _chart_title(page)
        ),
    )
    _wait_for(page, lambda: "Cyclostrophic" in _verdict_text(page))
    assert "local Rossby" in page.locator("text=local Rossby number |zeta / f|").first.inner_text()
    _shot(page, "04_link_tropical_cyclone")
    assert errors == [], errors
    page.close()


def test_errors_show_in_the_page(server, desk):
    page, errors = _page(
        desk, server + "?case=ocean_cyclone&level=500&region=box%3A100%2C110%2C-10%2C0"
    )
    _wait_for(page, lambda: page.locator("text=holds no grid points").count() > 0)
    _shot(page, "05_box_without_points")
    # the page keeps working: back to the whole case
    page.locator("button:has-text('Whole case')").first.click()
    _wait_for(page, lambda: "whole case" in _verdict_text(page))
    assert errors == [], errors
    page.close()


def test_sea_breeze_and_scale_sheet(server, desk):
    page, errors = _page(
        desk, server + "?case=sea_breeze&level=1000&field=speed&time=2039-06-21T15%3A00%3A00Z"
    )
    _wait_for(page, lambda: "Unsteady" in _verdict_text(page))
    open_tab(page, "A priori scale sheet")
    _shot(page, "06_sea_breeze_scale_sheet")
    open_tab(page, "Through the times")
    _shot(page, "07_sea_breeze_times")
    assert errors == [], errors
    page.close()


# -- the checks of the desk page (what the briefing shows, fit, units, busy state, times) ----

#: every text node and title attribute of the page, through the shadow roots Panel draws into
ALL_TEXT_JS = """() => {
  const out = [];
  const walk = (root) => {
    const tw = document.createTreeWalker(root, NodeFilter.SHOW_ELEMENT | NodeFilter.SHOW_TEXT);
    for (let n = tw.currentNode; n; n = tw.nextNode()) {
      if (n.nodeType === Node.TEXT_NODE) {
        const p = n.parentElement;
        if (p && !['STYLE', 'SCRIPT'].includes(p.tagName)) out.push(n.textContent);
      } else {
        if (n.title) out.push(n.title);
        if (n.shadowRoot) walk(n.shadowRoot);
      }
    }
  };
  walk(document);
  return out.join('\\n');
}"""

#: in one task of the page (so nothing changes between the readings): the header's level and
#: each panel's level with its effective opacity (the product over its ancestors)
LEVELS_NOW_JS = """() => {
  const find = (root, sel) => {
    const hit = root.querySelector(sel);
    if (hit) return hit;
    for (const el of root.querySelectorAll('*')) {
      if (el.shadowRoot) { const h = find(el.shadowRoot, sel); if (h) return h; }
    }
    return null;
  };
  const opacity = (el) => {
    let o = 1;
    while (el) {
      if (el.nodeType === 1) o *= parseFloat(getComputedStyle(el).opacity);
      el = el.parentElement || (el.getRootNode().host || null);
    }
    return o;
  };
  const level = (el) => {
    const m = el && el.textContent.match(/(\\d+) hPa/);
    return m ? m[1] : null;
  };
  const out = {header: level(find(document, '.bd-header'))};
  for (const [name, sel] of [['chart', '.bd-chart-title'], ['verdict', '.bd-verdict-where']]) {
    const el = find(document, sel);
    out[name] = el ? [level(el), opacity(el)] : null;
  }
  return out;
}"""

OCEAN = "?case=ocean_cyclone&level=500&time=2041-01-19T12%3A00%3A00Z"


def _all_text(page):
    return page.evaluate(ALL_TEXT_JS)


def _set_box(page, box):
    for label, v in zip(("West", "East", "South", "North"), box):
        page.get_by_label(label, exact=True).fill(str(v))
    page.get_by_role("button", name="Use this box").click()


def _download(page, label):
    with page.expect_download(timeout=HANG_MS) as dl:
        page.get_by_role("button", name=label).click()
    return dl.value.path()


def _rgb(path):
    from PIL import Image

    return np.asarray(Image.open(path).convert("RGB")).astype(int)


def _edges(mask, axis):
    """Centres of the outline's two straight edges along ``axis`` (0: the vertical edges'
    columns, 1: the horizontal edges' rows): where the outline's pixels pile up."""
    counts = mask.sum(axis=axis)
    hot = np.nonzero(counts > 0.6 * counts.max())[0]
    groups = np.split(hot, np.nonzero(np.diff(hot) > 3)[0] + 1)
    assert len(groups) == 2, [(g[0], g[-1]) for g in groups]
    return [float(g.mean()) for g in groups]


def _outline_edges(path):
    """(left, right, top, bottom) pixel centres of the region's outline in the chart's part
    of a briefing PNG (the left 62 %: the verdict's panel uses the same orange)."""
    from app.briefing_image import OUTLINE_RGB

    im = _rgb(path)
    im = im[:, : int(0.62 * im.shape[1])]
    mask = np.abs(im - np.array(OUTLINE_RGB)).max(axis=-1) <= 8
    assert mask.sum() > 200, "no outline in the image"
    left, right = _edges(mask, 0)
    top, bottom = _edges(mask, 1)
    return left, right, top, bottom


def test_the_briefing_outline_lies_where_the_typed_box_is(server, desk):
    # Three typed boxes fix the chart's lon/lat -> pixel map from the images themselves
    # (plate carree: linear in each); the outline of a fourth, typed after them, must then
    # lie where that map puts its edges. A stale outline (the case's starting box, or the
    # previous box) misses by tens of pixels.
    page, errors = _page(desk, server + OCEAN)
    _wait_for(page, lambda: _verdict_text(page))
    edges = {}
    boxes = {
        "a": (-60, -45, 35, 45),
        "b": (-40, -25, 35, 45),
        "c": (-60, -45, 50, 60),
        "d": (-35, -15, 45, 58),
    }
    for key, box in boxes.items():
        _set_box(page, box)
        # the verdict's footer names the box once its report is computed
        _wait_for(
            page,
            lambda box=box: f"{abs(box[0]):.1f}W to {abs(box[1]):.1f}W" in _verdict_text(page),
        )
        edges[key] = _outline_edges(_download(page, "Briefing image (PNG)"))
    (la, ra, ta, ba), (lb, _, _, _), (_, _, tc, _) = edges["a"], edges["b"], edges["c"]
    kx = (lb - la) / (boxes["b"][0] - boxes["a"][0])  # px per degree east
    ky = (tc - ta) / (boxes["c"][3] - boxes["a"][3])  # px per degree north (< 0)
    assert kx > 0 and ky < 0
    x = lambda lon: la + kx * (lon - boxes["a"][0])  # noqa: E731
    y = lambda lat: ta + ky * (lat - boxes["a"][3])  # noqa: E731
    w, e, s, n = boxes["d"]
    got = edges["d"]
    want = (x(w), x(e), y(n), y(s))
    assert np.allclose(got, want, atol=2.5), (got, want)
    # and the fitted map is the image's own: box a's east edge and south edge agree with it
    assert abs(ra - x(boxes["a"][1])) < 2.5 and abs(ba - y(boxes["a"][2])) < 2.5
    assert errors == [], errors
    page.close()


def test_at_a_laptop_size_the_verdict_and_ranking_are_in_view(server, desk):
    page = desk.new_page()
    page.set_viewport_size({"width": 1366, "height": 768})
    page.goto(server + OCEAN)
    settled(page)
    vb = page.locator(".bd-verdict").first.bounding_box()
    assert vb["x"] >= 0 and vb["x"] + vb["width"] <= 1366, vb
    assert vb["y"] >= 0 and vb["y"] + 40 <= 768, vb  # at least its heading line shows
    # the ranking's first bar beside it, and no scrolling sideways
    first = page.locator(".bd-bar-name").first.bounding_box()
    assert first["x"] + first["width"] <= 1366, first
    width = page.evaluate("document.documentElement.scrollWidth")
    assert width <= 1366, width
    os.makedirs(SHOTS, exist_ok=True)
    page.screenshot(path=os.path.join(SHOTS, "08_laptop_1366x768.png"))
    page.close()


@pytest.mark.parametrize(
    "size, zoom, name",
    [((1920, 1080), 1, "09_desk_1920x1080"), ((960, 540), 2, "10_zoom_200_percent")],
)
def test_screens_at_desk_size_and_at_double_zoom(server, browser, size, zoom, name):
    # 200 % browser zoom is a CSS viewport of half the screen at two device pixels each
    page = browser.new_page(
        viewport={"width": size[0], "height": size[1]}, device_scale_factor=zoom
    )
    page.goto(server + OCEAN)
    settled(page)
    os.makedirs(SHOTS, exist_ok=True)
    page.screenshot(path=os.path.join(SHOTS, f"{name}.png"))
    page.screenshot(path=os.path.join(SHOTS, f"{name}_full.png"), full_page=True)
    width = page.evaluate("document.documentElement.scrollWidth")
    assert width <= size[0], width
    page.close()


WIND_IN_MS = re.compile(r"\d\s*(m/s|m s-1|m s\^-1)")


def test_after_knots_no_number_in_the_page_is_in_metres_per_second(server, desk):
    page, errors = _page(desk, server + OCEAN + "&field=speed")
    _wait_for(page, lambda: _verdict_text(page))
    assert WIND_IN_MS.search(_all_text(page))  # the check can fail: m/s before the switch
    before = settled(page)
    page.get_by_role("button", name="kt", exact=True).click()
    _wait_for(
        page, lambda: "wind_units=kt" in address(page) and re.search(r"\d\s*kt", _all_text(page))
    )
    # every part that follows the unit has been redrawn: the page asked for its views again
    # and has shown them all
    settled(page, before)
    for tab in (
        "Through the levels",
        "Through the times",
        "A priori scale sheet",
        "Notes on the data",
    ):
        open_tab(page, tab)
        text = _all_text(page)
        hits = [text[max(0, m.start() - 40) : m.end()] for m in WIND_IN_MS.finditer(text)]
        assert not hits, (tab, hits)
    assert errors == [], errors
    page.close()


def test_an_invented_case_says_so_in_the_page_and_in_the_briefing(server, desk):
    from app.briefing_image import INVENTED_RGB

    page, errors = _page(desk, server + OCEAN)
    _wait_for(page, lambda: _verdict_text(page))
    assert "invented demo data" in _all_text(page).lower()
    im = _rgb(_download(page, "Briefing image (PNG)"))
    mark = np.abs(im - np.array(INVENTED_RGB)).max(axis=-1) <= 6
    rows, cols = np.nonzero(mark)
    # a solid band across the top right of the image
    assert (
        mark.sum() > 5000 and rows.max() < 0.15 * im.shape[0] and cols.min() > 0.3 * im.shape[1]
    ), (mark.sum(), rows.max(), cols.min())
    assert errors == [], errors
    page.close()


def test_a_burst_of_level_changes_never_shows_a_level_the_header_does_not(server, desk):
    # Each reading is taken in one task of the page: a panel either names the header's level
    # or is faded as updating (opacity well below 1) until it is replaced. A smoothing no
    # other test asks for: the levels are computed now, whatever ran before on the server,
    # so the panels have a busy state to be seen in.
    page, errors = _page(desk, server + OCEAN + "&smooth_km=173")
    _wait_for(page, lambda: _verdict_text(page))
    select = page.get_by_label("Level", exact=True)
    readings = []
    for label in (
        "850 hPa",
        "700 hPa",
        "300 hPa",
        "1000 hPa",
        "250 hPa",
        "500 hPa",
        "925 hPa",
        "700 hPa",
    ):
        select.select_option(label=label)
        for _ in range(3):
            readings.append(page.evaluate(LEVELS_NOW_JS))
            page.wait_for_timeout(40)
    t0 = time.time()
    while time.time() - t0 < 30:
        r = page.evaluate(LEVELS_NOW_JS)
        readings.append(r)
        if r["header"] == "700" and all(
            r[k] and r[k][0] == "700" and r[k][1] > 0.99 for k in ("chart", "verdict")
        ):
            break
        page.wait_for_timeout(50)
    else:
        raise AssertionError(f"the page did not settle on 700 hPa: {readings[-1]}")
    wrong = [
        r
        for r in readings
        for k in ("chart", "verdict")
        if r[k] and r[k][0] != r["header"] and r[k][1] > 0.5
    ]
    assert not wrong, wrong
    # the readings saw the panels faded at least once (the check can see a busy state)
    assert any(r[k] and r[k][1] < 0.5 for r in readings for k in ("chart", "verdict"))
    assert errors == [], errors
    page.close()


#: the one way the page writes a time: "Tue 19 Jan 2041 12 UTC", with an optional run and
#: lead "(run 19 Jan 00 UTC, +12 h)"; short forms on axes "19 Jan 12 UTC"
LONG_TIME = re.compile(
    r"\b(Mon|Tue|Wed|Thu|Fri|Sat|Sun) \d\d (Jan|Feb|Mar|Apr|May|Jun|Jul|Aug"
    r"|Sep|Oct|Nov|Dec) \d{4} \d\d(:\d\d)? UTC\b"
)
OTHER_TIME = re.compile(r"\d{4}-\d\d-\d\d[T ]\d\d:\d\d|\d\d:\d\d(:\d\d)?Z|\d\d:\d\d UTC")


def test_one_time_format_throughout(server, desk):
    page, errors = _page(desk, server + OCEAN)
    _wait_for(page, lambda: _verdict_text(page))
    seen = []
    for tab in (
        "Through the levels",
        "Through the times",
        "A priori scale sheet",
        "Notes on the data",
    ):
        open_tab(page, tab)
        text = _all_text(page)
        seen += LONG_TIME.findall(text)
        others = [text[max(0, m.start() - 30) : m.end() + 10] for m in OTHER_TIME.finditer(text)]
        assert not others, (tab, others)
    assert seen  # the check reads times: the header, the chart title, the time menu
    assert errors == [], errors
    page.close()
