"""Dashboard speed: server-side work per change, and one figure from a real browser.

Measured on the bundled sample cases and on a synthetic global 0.25-degree case
(721 x 1440, 7 levels, 5 times). Server-side work is timed on the same
objects the server uses (the dashboard of one session, driven through its
view state) and includes the Bokeh serialisation of what changed, i.e. the
data sent to the page:

* box change: the region's statistics, ranking and verdict, and the outline;
* level change: a new level's diagnostics (budget, winds, numbers), the chart
  raster, contours, vectors, and the region's report.

The browser figures (headless Chromium, driven by Playwright, timed by the page's own
clock, see bench/browser.py): the page ready from navigation to the verdict drawn, a
level change to the chart and the ranking both showing the new level, and the end of a
mouse drag on the chart to the ranking replaced.

Prints medians, then last one line per figure: ``figure NAME MILLISECONDS``.

    python bench/app.py [--repeat N] [--no-browser]
"""

from __future__ import annotations

import argparse
import gc
import glob
import os
import statistics
import sys
import time

os.environ.setdefault("PROJ_NETWORK", "OFF")
import numpy as np
import pyproj  # noqa: F401

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.join(HERE, "..")
sys.path.insert(0, ROOT)
sys.path.append(HERE)  # after the project: bench/app.py must not hide the app package

import browser as bb  # noqa: E402


def global_quarter_degree_case():
    """A synthetic global 0.25-degree case held in memory (float32, ~0.7 GB)."""
    import pandas as pd
    import xarray as xr

    from balance_core import Grid
    from balance_core.io.case import Case
    from balance_core.thermo import standard_atmosphere_height, standard_atmosphere_temperature

    lat = np.linspace(90, -90, 721)
    lon = np.arange(1440) * 0.25
    levels = np.array([1000, 925, 850, 700, 500, 300, 250], float) * 100
    times = pd.date_range("2040-03-01", periods=5, freq="6h").values
    lam, phi = np.meshgrid(np.deg2rad(lon), np.deg2rad(lat))
    cos, sin = np.cos(phi), np.sin(phi)
    shape = (5, 7) + lam.shape
    z, u, v, om, t = (np.empty(shape, np.float32) for _ in range(5))
    for i in range(5):
        ph = lam - 2e-6 * 6 * 3600 * i
        for k, p in enumerate(levels):
            s = np.log(1e5 / p) / np.log(4)
            z[i, k] = (
                standard_atmosphere_height(p)
                - 300 * s * sin**2
                + 80 * (1 + s) * np.cos(5 * ph) * (2 * sin * cos) ** 2
            )
            u[i, k] = (10 + 25 * s) * cos**2 * (2 * sin) ** 2 + 5 * np.sin(5 * ph) * cos
            v[i, k] = 6 * (1 + s) * np.cos(5 * ph) * cos * sin
            om[i, k] = 0.3 * np.sin(5 * ph) * cos * np.sin(np.pi * (p - 2.5e4) / 7.5e4)
            t[i, k] = standard_atmosphere_temperature(p) + 25 * (cos**2 - 0.5) - 5 * s
    dims = ("time", "level", "y", "x")
    coords = {"time": times, "level": levels}
    data = {
        name: xr.DataArray(arr, dims=dims, coords=coords)
        for name, arr in (("height", z), ("u", u), ("v", v), ("omega", om), ("temperature", t))
    }
    return Case(
        name="global_quarter_degree",
        title="synthetic global 0.25-degree case",
        paths=[],
        grid=Grid.latlon(lat, lon),
        times=times.astype("datetime64[ns]"),
        levels_pa=levels,
        data=data,
        surface={},
        notes=[],
        below_ground={},
        attrs={"suggested_box": "[-20, 20, 35, 60]"},
    )


def write_global_case(path):
    """The project's analytic flow (testkit.makedata, near balance, as real analyses are:
    the reader's plausibility checks take it) on a global 0.25-degree grid, five levels and
    three times, as a CF NetCDF file in float32 (about 0.4 GB), for the server the browser
    figures start. (The in-memory case above is not near balance: the reader refuses it.)"""
    from testkit.makedata import latlon_dataset

    lat = np.linspace(90, -90, 721)
    lon = np.arange(1440) * 0.25
    ds, _ = latlon_dataset(lat, lon)
    ds = ds.assign({k: ds[k].astype(np.float32) for k in ds.data_vars})
    ds.attrs.update(title="analytic global 0.25-degree flow", source="synthetic: bench/app.py")
    ds.to_netcdf(path)
    return path


def _serialise(models):
    """Serialise the given Bokeh models as the server would send them."""
    from bokeh.core.serialization import Serializer

    ser = Serializer()
    total = 0
    for m in models:
        value = m.object if hasattr(m, "object") else (m.data if hasattr(m, "data") else m)
        rep = ser.encode(value)
        total += len(str(rep)) if rep is not None else 0
    return total


def _median_ms(samples):
    return 1e3 * statistics.median(samples)


def server_side(library, case_name, boxes, level_cycle, repeat):
    """Median seconds of a box change and of a level change for one case."""
    from app import compute
    from app.desk import Page
    from app.state import ViewState

    case = library.get(case_name)
    st = ViewState(case=case_name, level=float(level_cycle[0]), time="")
    st.param.update(**Page.suggested(case))
    page = Page(library, st)
    page.start()
    # time each path by itself: in the server the other views run in the pool meanwhile
    page.detach()
    ev, ch = page.evidence, page.chart
    sources = [ev.body, ch.region_src]
    box_times = []
    for i in range(repeat):
        b = boxes[i % len(boxes)]
        t0 = time.perf_counter()
        st.set_box(*b)
        rep = compute.box_data(library, st)
        ev.show(rep)
        ch.show_outline(compute.region_outline(ch.data.geom, st.region_spec()))
        _serialise(sources)
        box_times.append(time.perf_counter() - t0)
    level_times = []
    chart_sources = [ch.img_src, ch.cont_src, ch.clab_src, ch.vec_src, ch.hover_src, ev.body]
    for i in range(repeat):
        lev = float(level_cycle[(i + 1) % len(level_cycle)])
        ti = i % case.times.size
        library._diag._data.clear()  # a change to a level or time nobody has looked at yet
        gc.collect()
        t0 = time.perf_counter()
        st.param.update(level=lev, time=str(np.datetime_as_string(case.times[ti], "s")) + "Z")
        ch.show(compute.chart_data(library, st))
        ev.show(compute.box_data(library, st))
        _serialise(chart_sources)
        level_times.append(time.perf_counter() - t0)
    return _median_ms(box_times), _median_ms(level_times)


def section_figures(library, case_name, repeat):
    """Median ms of a section along a new line: ``cold`` with nothing computed (every
    level's diagnostics and the region's verdict through the levels made for it), ``warm``
    once the levels have been computed for the region (as after the levels view)."""
    from app import compute
    from app.state import ViewState

    st = ViewState(case=case_name, level=500.0, time="")
    st.set_box(-20, 20, 35, 60)
    lines = ["-30,30,10,65", "-25,40,15,50", "-10,30,-10,70", "-40,45,20,45"]
    cold, warm = [], []
    for i in range(repeat):
        library._diag._data.clear()
        library._profiles._data.clear()
        gc.collect()
        st.line = lines[i % len(lines)]
        t0 = time.perf_counter()
        compute.section_data(library, st)
        cold.append(time.perf_counter() - t0)
        st.line = lines[(i + 1) % len(lines)]
        t0 = time.perf_counter()
        compute.section_data(library, st)
        warm.append(time.perf_counter() - t0)
    return _median_ms(cold), _median_ms(warm)


def browser_figures(repeat):
    """Figures from a real browser (headless Chromium), timed by the page's own clock.

    * page ready: from the start of the navigation to the verdict drawn, in a browser that
      has opened balance-desk before (its scripts cached, as on a desk), and in a fresh one;
    * level change: from choosing a level to the chart and the ranking both showing it;
    * box to ranking: from the mouse button released after a drag on the chart to the
      ranking replaced.

    Also the resident memory a second session of the same case adds to the server.
    Returns a dict of medians (ms, MB), or None without Chromium.
    """
    chromium = bb.CHROMIUM
    if chromium is None:
        return None
    import psutil
    from playwright.sync_api import sync_playwright

    proc, url, log = bb.start_server()
    out = {}
    try:
        with sync_playwright() as p:
            b = p.chromium.launch(executable_path=chromium, args=bb.ARGS)
            ctx = b.new_context(viewport={"width": 1800, "height": 1200})
            warm = ctx.new_page()
            warm.add_init_script(bb.CLOCKS)
            warm.goto(url + bb.LINK)
            bb.seen(warm, "verdict")
            warm.wait_for_timeout(4000)  # the levels and times views fill the caches
            warm.close()
            ready, cold = [], []
            for _ in range(repeat):
                time.sleep(1.5)  # an idle server
                page = ctx.new_page()
                page.add_init_script(bb.CLOCKS)
                page.goto(url + bb.LINK)
                ready.append(bb.seen(page, "verdict"))
                page.close()
                time.sleep(1.5)
                cold.append(1e3 * bb.page_ready(b, url))
            out["page_ready"] = statistics.median(ready)
            out["page_ready_cold"] = statistics.median(cold)

            page = ctx.new_page()
            page.add_init_script(bb.CLOCKS)
            page.goto(url + bb.LINK)
            bb.seen(page, "verdict")
            page.wait_for_timeout(3000)
            select = page.get_by_label("Level", exact=True)
            cycle = ["850 hPa", "250 hPa", "700 hPa", "300 hPa", "925 hPa", "500 hPa"]
            level_ms = []
            for i in range(repeat):
                lev = cycle[i % len(cycle)]
                page.evaluate(
                    f"bdWatch('chart', '.bd-chart-title', {lev!r}); "
                    f"bdWatch('rank', '.bd-verdict-where', {lev!r})"
                )
                t0 = bb.mark(page)
                select.select_option(label=lev)
                level_ms.append(max(bb.seen(page, "chart"), bb.seen(page, "rank")) - t0)
                page.wait_for_timeout(800)
            out["level_change"] = statistics.median(level_ms)

            canv = max(
                (c.bounding_box() for c in page.locator("canvas").all() if c.bounding_box()),
                key=lambda bb_: bb_["width"] * bb_["height"],
            )
            box_ms = []
            for i in range(repeat):
                fx0 = 0.15 + 0.05 * (i % 6)
                x0 = canv["x"] + canv["width"] * fx0
                y0 = canv["y"] + canv["height"] * 0.25
                x1 = canv["x"] + canv["width"] * (fx0 + 0.3)
                y1 = canv["y"] + canv["height"] * (0.55 + 0.03 * (i % 4))
                page.mouse.move(x0, y0)
                page.mouse.down()
                page.mouse.move(x1, y1, steps=8)
                page.evaluate("bdWatchChange('box', '.bd-verdict')")
                page.mouse.up()
                box_ms.append(bb.seen(page, "box") - bb.seen(page, "pointerup"))
                page.wait_for_timeout(600)
            out["box_to_ranking"] = statistics.median(box_ms)
            out["loop_frame"] = _loop_frames(page, repeat)

            # memory of a second session of the same case (below), then the global case
            server = psutil.Process(proc.pid)
            page.wait_for_timeout(1500)
            rss1 = server.memory_info().rss
            page2 = ctx.new_page()
            page2.add_init_script(bb.CLOCKS)
            page2.goto(url + bb.LINK)
            bb.seen(page2, "verdict")
            page2.wait_for_timeout(4000)
            out["second_session_mb"] = (server.memory_info().rss - rss1) / 2**20
            b.close()
    finally:
        proc.terminate()
        proc.wait(timeout=30)
        os.unlink(log)
    out.update(global_page_ready(repeat))
    return out


def _loop_frames(page, repeat):
    """Median ms of a step to the next valid time once the loop has computed its frames
    ahead: from the click on "later >" to the chart and the ranking both showing that time."""
    from testkit.chromium import settled

    page.get_by_role("button", name="Play the times").click()
    settled(page)  # every frame computed ahead (the page's mark: nothing on its way)
    page.get_by_role("button", name="Pause").click()
    settled(page)
    options = page.get_by_label("Valid time", exact=True).locator("option").all_inner_texts()
    frame_ms = []
    for _ in range(repeat):
        now = page.locator(".bd-chart-title").first.inner_text()
        at = next((i for i, o in enumerate(options) if o.split(" (")[0] in now), 0)
        step = 1 if at + 1 < len(options) else -1  # "later >" is off at the last time
        want = options[at + step].split(" (")[0]
        page.evaluate(
            f"bdWatch('chart', '.bd-chart-title', {want!r}); "
            f"bdWatch('rank', '.bd-verdict-where', {want!r})"
        )
        t0 = bb.mark(page)
        page.get_by_role("button", name="later >" if step > 0 else "< earlier").click()
        frame_ms.append(max(bb.seen(page, "chart"), bb.seen(page, "rank")) - t0)
        settled(page)
    return statistics.median(frame_ms)


def global_page_ready(repeat):
    """Page ready on the synthetic global 0.25-degree case, written to a file and served:
    the first load (the server computes the level from the file) and, as for the sample, the
    median of later loads in a browser that has the scripts."""
    import tempfile

    from playwright.sync_api import sync_playwright

    from testkit.chromium import settled

    folder = tempfile.mkdtemp(prefix="bd-bench-")
    path = write_global_case(os.path.join(folder, "global_quarter_degree.nc"))
    proc, url, log = bb.start_server(path)
    link = "?case=global_quarter_degree&level=500"
    try:
        with sync_playwright() as p:
            b = p.chromium.launch(executable_path=bb.CHROMIUM, args=bb.ARGS)
            ctx = b.new_context(viewport={"width": 1800, "height": 1200})
            first = ctx.new_page()
            first.add_init_script(bb.CLOCKS)
            first.goto(url + link)
            out = {"page_ready_global_first": bb.seen(first, "verdict")}
            settled(first)  # its other views (levels, systems) computed: the caches full
            first.close()
            ready = []
            for _ in range(repeat):
                page = ctx.new_page()
                page.add_init_script(bb.CLOCKS)
                page.goto(url + link)
                ready.append(bb.seen(page, "verdict"))
                settled(page)  # the server idle again before the next load
                page.close()
            out["page_ready_global"] = statistics.median(ready)
            b.close()
        return out
    finally:
        proc.terminate()
        proc.wait(timeout=30)
        os.unlink(log)
        os.unlink(path)
        os.rmdir(folder)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--no-browser", action="store_true")
    ap.add_argument("--browser-only", action="store_true", help="only the figures from the browser")
    args = ap.parse_args(argv)
    if args.browser_only:
        br = browser_figures(args.repeat)
        for k, v in br.items():
            print(f"figure {k} {v:.1f}")
        return 0

    from app.library import CaseLibrary

    samples = sorted(glob.glob(os.path.join(ROOT, "sample_cases", "*.nc")))
    lib = CaseLibrary(samples)
    cyclone_boxes = [[-52, -28, 38, 56], [-45, -20, 30, 50], [-60, -35, 45, 60], [-40, -10, 35, 55]]
    box_s, lev_s = server_side(
        lib, "ocean_cyclone", cyclone_boxes, [500, 850, 250, 1000, 700, 300, 925], args.repeat
    )
    t0 = time.perf_counter()
    big = global_quarter_degree_case()
    build_s = time.perf_counter() - t0
    glib = CaseLibrary.from_cases([big])
    global_boxes = [
        [-20, 20, 35, 60],
        [100, 160, 20, 50],
        [170, -150, 30, 70],
        [-80, -40, -50, -20],
    ]
    box_g, lev_g = server_side(
        glib,
        "global_quarter_degree",
        global_boxes,
        [500, 850, 250, 1000, 700, 300, 925],
        args.repeat,
    )
    sec_cold, sec_warm = section_figures(glib, "global_quarter_degree", max(3, args.repeat // 2))
    br = None if args.no_browser else browser_figures(args.repeat)
    print(
        f"sample case: ocean_cyclone ({lib.get('ocean_cyclone').grid.shape}); synthetic "
        f"global case {big.grid.shape} x 7 levels x 5 times built in {build_s:.1f} s; "
        f"median of {args.repeat}"
    )
    print(f"  box change, sample:               {box_s:8.1f} ms   (goal < 50)")
    print(f"  box change, global 0.25 deg:      {box_g:8.1f} ms   (goal < 300)")
    print(f"  level change, sample:             {lev_s:8.1f} ms   (goal < 300)")
    print(f"  level change, global 0.25 deg:    {lev_g:8.1f} ms   (goal < 1000)")
    if br is not None:
        print("  in the browser (its own clock):")
        print(f"    page ready, scripts cached:     {br['page_ready']:8.1f} ms   (goal < 1500)")
        print(f"    page ready, a fresh browser:    {br['page_ready_cold']:8.1f} ms")
        print(f"    level change to chart+ranking:  {br['level_change']:8.1f} ms   (goal < 400)")
        print(f"    drag end to ranking:            {br['box_to_ranking']:8.1f} ms   (goal < 100)")
        print(f"    loop frame, computed ahead:     {br['loop_frame']:8.1f} ms   (goal < 150)")
        print(
            f"    page ready, global 0.25 deg:    {br['page_ready_global']:8.1f} ms   (goal < 2500)"
        )
        print(f"    ... its first load:             {br['page_ready_global_first']:8.1f} ms")
        print(
            f"  second browser session of the same case: {br['second_session_mb']:+.1f} MB "
            "resident (goal < 20)"
        )
    print(f"  section, global 0.25 deg, cold:   {sec_cold:8.1f} ms   (goal < 1000)")
    print(f"  ... after the levels view:        {sec_warm:8.1f} ms")
    print(f"figure section/global_quarter_degree {sec_cold:.1f}")
    print(f"figure section_after_levels/global_quarter_degree {sec_warm:.1f}")
    print(f"figure box_change/sample {box_s:.1f}")
    print(f"figure box_change/global_quarter_degree {box_g:.1f}")
    print(f"figure level_change/sample {lev_s:.1f}")
    print(f"figure level_change/global_quarter_degree {lev_g:.1f}")
    if br is not None:
        print(f"figure page_ready/sample {br['page_ready']:.1f}")
        print(f"figure page_ready_fresh_browser/sample {br['page_ready_cold']:.1f}")
        print(f"figure browser_level_change/sample {br['level_change']:.1f}")
        print(f"figure browser_box_to_ranking/sample {br['box_to_ranking']:.1f}")
        print(f"figure browser_loop_frame/sample {br['loop_frame']:.1f}")
        print(f"figure page_ready/global_quarter_degree {br['page_ready_global']:.1f}")
        print(f"figure page_ready_first/global_quarter_degree {br['page_ready_global_first']:.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
