"""The chart draws on every load: fifty page loads in real Chromium across the cases, levels
and projections, each checked for a drawn chart (its ranges in the browser are the chart's,
not the empty figure's 0 to 1, and its canvas holds a picture, not blank axes).

A chart computed while the browser was fetching the document was once lost that way (a
change made just after Bokeh took the document can reach the browser ahead of it, and is
dropped there): app.desk.page.Page._held now holds such changes until the page has started.
"""

import io
import os

import numpy as np
import pytest
from PIL import Image

from testkit import samples
from testkit.chromium import require, settled
from testkit.serving import start_server, stop_server

pytestmark = pytest.mark.browser

require()
HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = sorted(
    os.path.join(HERE, "..", "sample_cases", f)
    for f in os.listdir(os.path.join(HERE, "..", "sample_cases"))
    if f.endswith(".nc")
)
#: the server's log, which a failed test's report ends with (tests/conftest.py)
SERVER_LOG = None

#: the browser's ranges of every chart-like figure of the page (one with many renderers)
RANGES_JS = """() => {
  const d = Bokeh.documents[0];
  const ms = d._all_models instanceof Map ? [...d._all_models.values()] : [...d._all_models];
  return ms.filter(m => m.x_range !== undefined && m.renderers !== undefined
                        && m.renderers.length > 5)
           .map(p => [p.x_range.start, p.x_range.end, p.y_range.start, p.y_range.end]);
}"""


@pytest.fixture(scope="module")
def server():
    global SERVER_LOG
    files = SAMPLES + [samples.need(samples.GFS), samples.need(samples.ETA)]
    proc, url, _ = start_server(files, env=dict(os.environ, BALANCE_DESK_LOG="DEBUG"))
    SERVER_LOG = proc.log_path
    yield url
    out = stop_server(proc)
    assert "Traceback" not in out, out[-3000:]


def _views():
    gfs = os.path.splitext(os.path.basename(samples.GFS))[0]
    eta = os.path.splitext(os.path.basename(samples.ETA))[0]
    cases = [
        ("ocean_cyclone", ("500", "850")),
        ("tropical_cyclone", ("500", "850")),
        ("sea_breeze", ("1000", "850")),
        (gfs, ("500", "250")),
        (eta, ("500", "700")),
    ]
    return [(c, lv, p) for c, lvs in cases for lv in lvs for p in ("plate_carree", "conformal")]


def test_fifty_loads_each_draw_the_chart(server, browser):
    views = _views()
    ctx = browser.new_context(viewport={"width": 1200, "height": 900})
    blank = []
    for i in range(50):
        case, level, projection = views[i % len(views)]
        page = ctx.new_page()
        page.goto(f"{server}?case={case}&level={level}&projection={projection}")
        settled(page)
        ranges = page.evaluate(RANGES_JS)
        canvas = max(
            page.locator("canvas").all(),
            key=lambda c: (c.bounding_box() or {"width": 0})["width"],
        )
        pixels = np.asarray(Image.open(io.BytesIO(canvas.screenshot())).convert("RGB"))
        colours = len(np.unique(pixels.reshape(-1, 3), axis=0))
        # a drawn chart has its own ranges and a picture of thousands of colours; the
        # empty figure has ranges 0 to 1 and its axes' few greys (71 colours measured)
        if len(ranges) != 1 or ranges[0][:2] == [0, 1] or colours < 500:
            blank.append((i, case, level, projection, ranges, colours))
        page.close()
    ctx.close()
    assert blank == [], blank
