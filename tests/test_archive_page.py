"""The archive page in Chromium: a mark opens the desk at its file, time, level and region."""

import os

import pytest

from testkit.chromium import require, settled
from testkit.serving import HANG_MS, start_server, stop_server

pytestmark = pytest.mark.browser

require()
ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
SAMPLE = os.path.join(ROOT, "sample_cases", "ocean_cyclone.nc")
#: the server's log, which a failed test's report ends with (tests/conftest.py)
SERVER_LOG = None


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    global SERVER_LOG
    from app.batch import Task, _write_table, flatten
    from balance_core.io import analyze_case, open_case

    case = open_case(SAMPLE)
    rows = []
    for t in range(case.times.size):
        rep = analyze_case(case, 500.0, t, (-52.0, -28.0, 38.0, 56.0))
        rows.append(flatten(rep, Task(SAMPLE, None, t, 500.0, ()), "box", invented=case.invented))
    result = str(tmp_path_factory.mktemp("archive") / "r.parquet")
    _write_table(result, rows)
    proc, url, _ = start_server([SAMPLE, "--archive", result], ready_path="/archive")
    SERVER_LOG = proc.log_path
    yield url
    out = stop_server(proc)
    assert "Traceback" not in out, out[-3000:]


def test_a_mark_opens_the_desk_at_its_time_level_and_region(server, browser):
    ctx = browser.new_context(viewport={"width": 1366, "height": 900})
    page = ctx.new_page()
    page.goto(server + "archive")
    page.locator(".bd-invented").first.wait_for(timeout=HANG_MS)  # the invented mark
    # the first mark's place on the screen, from the figure's own scales
    where = page.evaluate(
        """() => {
      const views = [];
      const walk = (v) => { views.push(v); for (const c of (v.child_views || [])) walk(c); };
      const idx = Bokeh.index;
      for (const v of (idx instanceof Map ? [...idx.values()] : Object.values(idx))) walk(v);
      const plot = views.find(v => v.frame !== undefined && v.model.renderers.length > 3);
      const src = plot.model.renderers.map(r => r.data_source)
                      .find(s => s && s.data.link !== undefined);
      const x = plot.frame.x_scale.compute(Number(src.data.t[0]));
      const y = plot.frame.y_scale.compute(src.data.y[0]);
      const box = plot.el.getBoundingClientRect();
      return {x: box.left + x, y: box.top + y, link: src.data.link[0]};
    }"""
    )
    assert where["link"].startswith("/?case=ocean_cyclone&level=500"), where
    with ctx.expect_page(timeout=HANG_MS) as opened:
        page.mouse.click(where["x"], where["y"])
    desk = opened.value
    desk.wait_for_load_state()
    settled(desk)
    text = desk.locator(".bd-verdict-where").first.inner_text()
    assert "500 hPa" in text and "52.0W to 28.0W" in text, text
    ctx.close()
