"""The dashboard driven through its view state, without a browser."""

import glob
import json
import os
import urllib.parse

import numpy as np
import pytest

from app import compute
from app.library import CaseLibrary
from app.state import URL_PARAMS, ViewState
from testkit import samples
from testkit.serving import HANG_S

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = sorted(glob.glob(os.path.join(HERE, "..", "sample_cases", "*.nc")))


@pytest.fixture(scope="module")
def library():
    return CaseLibrary(SAMPLES)


def _state(**kw):
    base = dict(case="ocean_cyclone", level=500.0, time="2041-01-19T12:00:00Z")
    base.update(kw)
    st = ViewState(**base)
    if "region" not in kw:
        st.set_box(-52, -28, 38, 56)
    return st


def _chart_signature(cd):
    return (
        cd.field_key,
        cd.units,
        float(np.nanmean(cd.raster)),
        cd.raster.shape,
        len(cd.contours[0]),
        None if cd.vectors is None else len(cd.vectors["x0"]),
        None if cd.vectors is None else float(np.nanmean(cd.vectors["x1"])),
        cd.vector_label,
        cd.hover["wind_units"],
        cd.geom.label,
        None if cd.region_xy is None else float(np.nanmean(cd.region_xy[0])),
        cd.contour_units,
    )


@pytest.mark.parametrize(
    "param, value",
    [
        ("case", "tropical_cyclone"),
        ("level", 250.0),
        ("time", "2041-01-20T00:00:00Z"),
        ("field", "speed"),
        ("field", "term:residual"),
        ("vectors", "geostrophic"),
        ("vectors", "none"),
        ("smooth_km", 300.0),
        ("projection", "conformal"),
        ("height_units", "dam"),
        ("wind_units", "kt"),
        ("region", "box:-40,-10,30,45"),
    ],
)
def test_every_chart_control_changes_the_chart(library, param, value):
    before = compute.chart_data(library, _state(level=850.0 if param == "case" else 500.0))
    st = _state(level=850.0 if param == "case" else 500.0)
    if param == "field" and value == "speed":
        st.wind_units = "kt"
    setattr(st, param, value)
    if param == "case":
        st.time = ""  # the first valid time of the new case
    after = compute.chart_data(library, st)
    assert _chart_signature(after) != _chart_signature(before)


@pytest.mark.parametrize(
    "param, value",
    [
        ("level", 1000.0),
        ("time", "2041-01-19T00:00:00Z"),
        ("smooth_km", 300.0),
        ("min_lat", 45.0),
        ("region", "box:-40,-10,30,45"),
    ],
)
def test_every_box_control_changes_the_analysis(library, param, value):
    a = compute.box_data(library, _state())
    st = _state()
    setattr(st, param, value)
    b = compute.box_data(library, st)
    sig = lambda r: (  # noqa: E731
        r["points"],
        tuple(round(t["magnitude"] or 0, 12) for t in r["terms"]),
        r["winds"]["geostrophic_speed_rms"],
    )
    assert sig(a) != sig(b)


def test_levels_and_times_views(library):
    st = _state()
    lv = compute.levels_data(library, st)
    assert [r["level_hpa"] for r in lv["rows"]] == [1000, 925, 850, 700, 500, 300, 250]
    assert lv["rows"][0]["balance"] == "frictional"
    assert lv["rows"][4]["balance"] == "geostrophic"
    tv = compute.times_data(library, st)
    assert len(tv["series"]) == 5 and tv["current"] == "2041-01-19T12:00:00Z"
    assert all(0 < s["rossby_local"] < 1 for s in tv["series"])


def test_scale_sheet_presets_and_edits(library):
    st = _state()
    rep = compute.box_data(library, st)
    sheet = compute.scale_sheet(st, rep)
    assert sheet["verdict"]["balance"] == "geostrophic"
    assert sheet["preset_label"] == "Synoptic cyclone"
    st.preset = "tornado"
    assert compute.scale_sheet(st, rep)["verdict"]["balance"] == "cyclostrophic"
    st.sheet = {"L": 5e5, "U": 10.0, "dP": 1000.0, "lat0": 45.0}
    edited = compute.scale_sheet(st, rep)
    assert edited["verdict"]["balance"] != "cyclostrophic"
    assert [r["name"] for r in edited["scales"] if r["edited"]] == ["U", "L", "dP", "lat0"]
    st.sheet = {"L": -1.0}
    bad = compute.scale_sheet(st, rep)
    assert bad["error"] and "positive" in bad["error"]
    # side by side with the region; the friction estimate stands beside the residual, so named
    rows = {r["name"]: r for r in sheet["terms"]}
    assert rows["coriolis"]["measured"] == pytest.approx(
        next(t["magnitude"] for t in rep["terms"] if t["name"] == "coriolis")
    )
    assert rows["viscous"]["data_label"].startswith("residual")


def test_url_round_trip_restores_a_view():
    from app.state import RegionSpec

    st = ViewState(
        case="tropical_cyclone",
        level=850.0,
        time="2038-09-04T06:00:00Z",
        field="rossby_local",
        vectors="ageostrophic",
        smooth_km=50.0,
        min_lat=12.0,
        projection="conformal",
        height_units="dam",
        wind_units="kt",
        preset="tropical_cyclone",
        sheet={"U": 30.0, "L": 4e4},
    )
    st.set_area(
        RegionSpec(
            "area",
            corners=((145.0, 17.0), (147.0, 17.0), (147.0, 19.0), (145.0, 19.0)),
            proj=(
                "lcc",
                (
                    ("lat_1", 15.0),
                    ("lat_2", 21.0),
                    ("lat_0", 18.0),
                    ("lon_0", 146.0),
                    ("R", 6371008.7714),
                ),
            ),
        )
    )
    url = "?" + urllib.parse.urlencode(st.to_query())
    assert len(url) < 400  # a drawn area stays short
    query = urllib.parse.parse_qs(url[1:], keep_blank_values=True)
    back = ViewState()
    assert back.update_from_query(query) == []
    assert back.to_query() == st.to_query()
    assert set(st.to_query()) == set(URL_PARAMS) - {"line"}  # no section line: not written
    assert back.region_spec().kind == "area"


def test_bad_url_values_fall_back_with_a_message():
    st = ViewState()
    problems = st.update_from_query(
        {
            "level": ["not a number"],
            "field": ["nonsense"],
            "min_lat": ["1000"],
            "case": ["sea_breeze"],
            "region": ["{'kind': 'box'}"],
        }
    )
    assert st.case == "sea_breeze"
    assert st.field == "height" and st.min_lat == 10.0 and st.level == 500.0 and st.region == ""
    assert len(problems) == 4 and all("default is shown" in p for p in problems)


def test_errors_are_readable(library):
    from balance_core.io import CaseError

    with pytest.raises(CaseError, match="no 600 hPa level"):
        compute.chart_data(library, _state(level=600.0))
    st = _state(region="box:100,110,-10,0")
    with pytest.raises(CaseError, match="holds no grid points"):
        compute.box_data(library, st)
    # a field the case lacks falls back to the height, with a note
    st2 = _state(case="tropical_cyclone", level=850.0, time="", field="omega")
    cd = compute.chart_data(library, st2)
    assert cd.field_key == "omega"  # the TC has omega (zero everywhere)
    # omega's sign runs against the motion: its name on the chart says which way rises
    assert "negative: rising" in cd.field_label
    # zero everywhere: the chart says so, and its scale is one unit each way, not noise
    assert "The field is the same everywhere on the chart: 0 Pa s-1" in cd.notes
    assert cd.color_range == (-1.0, 1.0)
    # a field that varies says no such thing
    assert not any("same everywhere" in n for n in compute.chart_data(library, _state()).notes)
    st3 = _state(field="term:tendency")
    assert compute.chart_data(library, st3).field_key == "term:tendency"


def _page(library, state):
    from app.desk import Page

    page = Page(library, state)
    page.start()
    return page


def test_page_without_a_server(library):
    page = _page(library, _state())
    assert page.evidence.ranking[0].name in ("pressure gradient", "Coriolis")
    assert "Geostrophic" in page.evidence.body.object
    assert len(page.chart.hover_src.data["x"]) > 100
    assert page.chart.caption.object.count("500 hPa") == 1
    # the page keeps working after an error, and says what happened
    page.state.level = 600.0
    assert "no 600 hPa level" in page.chart.alert.object
    page.state.level = 850.0
    assert page.chart.alert.object == ""
    page.state.set_box(100, 110, -10, 0)
    assert "holds no grid points" in page.evidence.alert.object
    page.state.clear_region()
    assert page.evidence.alert.object == ""
    # drawing a box on a plate carree chart sets a lon/lat box, and the typed fields follow
    page.chart.select_rect(-45, -30, 40, 50)
    assert page.state.region == "box:-45,-30,40,50"
    assert [w.value for w in page.controls.w_box] == [-45, -30, 40, 50]
    # on a conformal chart the drawn rectangle becomes an area: its corners and projection
    page.state.projection = "conformal"
    g = page.chart.data.geom
    cx, cy = g.to_view(-40.0, 47.0)
    page.chart.select_rect(cx - 3e5, cx + 3e5, cy - 2e5, cy + 2e5)
    spec = page.state.region_spec()
    assert spec.kind == "area" and len(spec.corners) == 4
    assert page.state.region.startswith("area:") and len(page.state.region) < 200
    lo, hi = spec.bounds_box[0], spec.bounds_box[1]
    assert lo < -40 < hi
    assert "drawn area" in page.state.region_text()
    assert page.controls.w_box[0].value == pytest.approx(lo, abs=0.01)


def test_exports_carry_the_view(library):
    page = _page(library, _state())
    png = page.downloads.png_bytes().getvalue()
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and len(png) > 50_000
    csv_text = page.downloads.csv_text().getvalue()
    head, first = csv_text.splitlines()[:2]
    assert head.startswith("case,level (hPa),valid time,reference time,lead time (h),region")
    assert first.startswith("ocean_cyclone,500")
    assert "box 52.0W to 28.0W, 38.0N to 56.0N" in first
    rep = json.loads(page.downloads.json_text().getvalue())
    assert rep["context"]["case"] == "ocean_cyclone" and rep["verdict"]["balance"] == "geostrophic"
    assert rep["context"]["units"] == {"terms": "m s-2", "wind": "m/s", "height": "m"}
    assert {t["name"] for t in rep["terms"]} >= {"pressure_gradient", "coriolis", "residual"}
    for t in rep["terms"]:  # four significant digits
        if t["magnitude"]:
            assert len(f"{t['magnitude']:e}".split("e")[0].rstrip("0").replace(".", "")) <= 4


def test_a_case_that_fails_to_load_says_so(tmp_path):
    bad = tmp_path / "broken.nc"
    bad.write_bytes(b"not a file at all")
    lib = CaseLibrary([str(bad)] + SAMPLES[:1])
    page = _page(lib, ViewState(case="broken"))
    assert "could not be loaded" in page.chart.alert.object
    page.state.case = lib.good[0]
    assert page.chart.alert.object == ""


def test_cases_are_shared_between_sessions(library):
    a = _page(library, _state())
    b = _page(library, _state())
    assert a.report["points"] == b.report["points"]
    d1 = library.diagnostics("ocean_cyclone", 4, 2)
    d2 = library.diagnostics("ocean_cyclone", 4, 2)
    assert d1 is d2  # computed once, shared
    assert a.library.get("ocean_cyclone") is b.library.get("ocean_cyclone")


def test_a_page_fetched_while_the_pool_is_busy_starts_its_work_on_connecting(library):
    # a plain fetch under load must not add work nobody may see; the page computes its
    # views once the browser connects (start)
    import threading

    from app.desk import Page
    from app.work import FairPool

    pool = FairPool(threads=1)
    gate, started = threading.Event(), threading.Event()
    pool.lane("other").submit("box", lambda: (started.set(), gate.wait(30)), lambda *a: None)
    assert started.wait(30) and pool.busy()
    page = Page(library, _state(), pool=pool)
    page.prime()
    assert pool.waiting() == 0  # nothing queued for it
    gate.set()
    page.start()
    from testkit.serving import wait_until

    wait_until(lambda: page.report is not None, HANG_S, what="the page's report")
    assert page.report["points"] > 0


def test_sessions_showing_one_view_share_its_chart_and_report():
    # a review room's followers show one view: it is computed once, and nobody can change
    # what the others see (the chart's arrays are read-only; each gets its own report)
    import numpy as np

    from app import compute

    library = CaseLibrary(SAMPLES)  # a cache of its own
    calls = []
    real = compute.chart_data

    def counted(lib, st):
        calls.append(1)
        return real(lib, st)

    a, b = _state(), _state()
    compute_chart = compute.chart_data
    try:
        compute.chart_data = counted
        ca = compute.shared_chart_data(library, a)
        cb = compute.shared_chart_data(library, b)
    finally:
        compute.chart_data = compute_chart
    assert ca is cb and len(calls) == 1
    with pytest.raises(ValueError):
        ca.raster[0, 0] = np.float32(1.0)
    ra, rb = compute.shared_box_data(library, a), compute.shared_box_data(library, b)
    assert ra == rb and ra is not rb
    ra["verdict"]["balance"] = "changed"
    assert compute.shared_box_data(library, a)["verdict"]["balance"] != "changed"
    b.level = 850.0  # another view is another computation
    assert compute.shared_chart_data(library, b) is not ca


def test_a_copied_link_of_a_chosen_system_chooses_it_again(library):
    # the link carries the system's region; the page it opens chooses that system again,
    # with its details and its life, and a link to another region chooses none
    from app.desk.page import build_page

    page = build_page(library, {"case": ["tropical_cyclone"], "level": ["850"], "region": [""]})
    page.start()
    page.systems.w_list.value = "L1"
    query = {k: [v] for k, v in page.state.to_query().items()}
    assert query["region"][0].startswith("circle:146,18,")
    copied = build_page(library, query)
    copied.start()
    assert copied.systems.w_list.value == "L1"
    assert "L1, " in copied.systems.detail.object
    assert "L1 through the valid times" in copied.systems.life.object
    boxed = build_page(library, dict(query, region=["box:140,150,14,22"]))
    boxed.start()
    assert boxed.systems.w_list.value == "" and boxed.systems.detail.object == ""


def test_the_systems_of_the_level_are_listed_marked_and_chosen(library):
    # the tropical cyclone at 850 hPa: one closed low; choosing it makes its circle the
    # view's region (the ranking follows), a click near its mark does the same, the marks
    # can be hidden, its life is followed through the times, and winds follow the unit
    from app.desk.page import build_page

    page = build_page(library, {"case": ["tropical_cyclone"], "level": ["850"], "region": [""]})
    page.start()
    data = page.systems.data
    assert [s["label"] for s in data["systems"]] == ["L1"]
    assert list(page.chart.sys_src.data["label"]) == ["L1"]
    assert list(page.chart.sys_src.data["marker"]) == ["circle"]
    assert page.state.region == "" and page.report["region_points"] > 5000
    page.systems.w_list.value = "L1"
    assert page.state.region.startswith("circle:146,18,")
    assert page.report["verdict"]["balance"] == "cyclostrophic"
    assert "within 239 km of 18.0N 146.0E" in page.header.object
    assert "L1 through the valid times" in page.systems.life.object
    assert page.systems.life.object.count("Cyclostrophic") == 5
    page.systems.w_list.value = ""
    page.state.clear_region()
    page._system_tapped(146.3, 18.2)  # a click on the chart near its mark
    assert page.state.region.startswith("circle:146,18,")
    page.state.clear_region()
    page._system_tapped(141.0, 22.0)  # far from it: nothing chosen
    assert page.state.region == ""
    page.systems.w_marks.value = False
    assert len(page.chart.sys_src.data["x"]) == 0
    page.systems.w_marks.value = True
    assert len(page.chart.sys_src.data["x"]) == 1
    page.state.wind_units = "kt"
    text = page.systems.status.object + page.systems.detail.object
    assert "kt" in text and "m/s" not in text


@pytest.mark.parametrize(
    "case, asked, shown",
    [
        ("ocean_cyclone", "400", "500 hPa"),
        ("ocean_cyclone", "1100", "1000 hPa"),
        ("ocean_cyclone", "500", None),  # a level the case has: nothing to say
        ("ocean_cyclone", "nonsense", None),  # not taken: its own sentence, not this one
    ],
)
def test_a_link_level_the_case_lacks_says_which_level_is_shown(library, case, asked, shown):
    import html

    from app.desk.page import build_page

    page = build_page(library, {"case": [case], "level": [asked]})
    said = html.unescape(page.problems.object)
    if shown is None:
        assert "is not in this case" not in said, said
    else:
        assert (
            f"the link's level {asked} hPa is not in this case; the nearest, {shown}, is shown"
            in said
        )
        assert page.state.level == float(shown.split()[0])


def test_a_level_with_no_system_says_so(library):
    from app.desk.page import build_page

    page = build_page(library, {"case": ["sea_breeze"], "level": ["850"]})
    page.start()
    assert page.systems.data["systems"] == []
    assert "0 found" in page.systems.status.object
    assert len(page.chart.sys_src.data["x"]) == 0


def test_sea_level_is_a_level_of_the_page_with_isobars_and_the_surface_budget(library):
    # the invented ocean cyclone carries sea-level pressure and the 10 m wind: "sea level"
    # is in the level menu, the chart draws isobars every 4 hPa (common practice), the
    # region's verdict is the surface budget's, and the link says level=msl
    from app.desk.page import build_page
    from app.state import SEA_LEVEL, encode_query

    page = build_page(
        library,
        {
            "case": ["ocean_cyclone"],
            "level": ["msl"],
            "time": ["2041-01-19T12:00:00Z"],
            "region": ["box:-52,-28,38,56"],
        },
    )
    page.start()
    assert page.state.level == SEA_LEVEL
    assert page.controls.w_level.options["sea level"] == SEA_LEVEL
    assert page.controls.w_level.value == SEA_LEVEL
    cd = compute.chart_data(library, page.state)
    assert cd.contour_units == "hPa" and cd.contour_interval == 4.0
    assert cd.contour_label == "isobars" and cd.field_label == "sea-level pressure"
    assert all(abs(v / 4.0 - round(v / 4.0)) < 1e-9 for v in cd.contours[2])
    assert "sea level" in cd.title and "at 10 m" in cd.vector_label
    rep = page.report
    assert rep["level"] == "msl" and rep["level_hpa"] is None
    assert rep["verdict"]["balance"] == "frictional"
    assert "sea level" in page.header.object
    status = page.systems.status.object
    assert "found at sea level" in status and "every 4 hPa" in status
    assert "shallow low or high is left out" in status  # the closed 1004 hPa isobar is shallow
    assert encode_query(page.state.values())["level"] == "msl"
    # a case without sea-level pressure does not offer it, and a link asking for it gets a
    # pressure level
    other = build_page(library, {"case": ["tropical_cyclone"], "level": ["msl"]})
    assert "sea level" not in other.controls.w_level.options
    assert other.state.level == 1000.0


def test_the_chart_contours_at_the_interval_the_systems_are_found_with(library):
    from balance_core.systems import contour_interval

    for level, units in ((500.0, "m"), (850.0, "dam"), (250.0, "m")):
        st = _state(level=level, height_units=units)
        cd = compute.chart_data(library, st)
        k = 0.1 if units == "dam" else 1.0
        assert cd.contour_interval == pytest.approx(contour_interval(level * 100) * k)
        assert all(
            abs(v / cd.contour_interval - round(v / cd.contour_interval)) < 1e-6
            for v in cd.contours[2]
        )
        data = compute.systems_data(library, st)
        assert data["rules"]["contour_interval"] == contour_interval(level * 100)


def test_a_jet_streak_chosen_on_real_output_gives_its_flow_aligned_region():
    path = samples.need(samples.GFS)
    from app.desk.page import build_page

    lib = CaseLibrary([path])
    page = build_page(lib, {"level": ["250"], "region": [""]})
    page.start()
    jets = [s for s in page.systems.data["systems"] if s["kind"] == "jet_streak"]
    assert jets
    page.systems.w_list.value = jets[0]["label"]
    assert page.state.region.startswith("area:aeqd,")
    assert "area along the flow" in page.state.region_text()
    assert page.report["points"] >= 25 and page.report["verdict"]["balance"] != "none"
    assert "kt" not in page.systems.detail.object
    page.state.wind_units = "kt"
    assert "kt" in page.systems.detail.object


def test_the_evidence_tells_the_same_story_as_the_verdict(library):
    # 500 hPa, one region: frictional is not tested (far from the ground), so it gets no
    # bar under the line but a "not tested" line with the reason; the estimates made of the
    # same fields (Coriolis) get no diamond; the numbers carry the textbook names
    from app.desk.page import build_page

    page = build_page(
        library,
        {
            "case": ["ocean_cyclone"],
            "level": ["500"],
            "time": ["2041-01-19T12:00:00Z"],
            "region": ["box:-52,-28,38,56"],
        },
    )
    page.start()
    html = page.evidence.body.object
    assert "frictional" in page.report["verdict"]["not_tested"]
    assert "Not tested:</b> Frictional (500 hPa" in html
    assert "Frictional" not in html.split("Candidate balances")[1].split("Not tested")[0]
    assert "Geostrophic" in html.split("Candidate balances")[1].split("Not tested")[0]
    bars = {b.name: b for b in page.evidence.ranking}
    assert bars["Coriolis"].estimate is None and bars["pressure gradient"].estimate
    assert "Ekman number" in html and "(effective)" not in html
    assert "residual over Coriolis" in html and "shear depth" in html


def test_a_file_with_heights_and_no_wind_is_shown_with_its_geostrophic_wind_and_systems():
    # the ERA5 sample carries geopotential and temperature only: the page draws the
    # heights with the geostrophic wind, lists the lows and highs, and says that no budget
    # can be made -- nothing is refused that can be answered
    path = samples.need(samples.ERA5)
    from app.desk.page import build_page

    lib = CaseLibrary([path])
    page = build_page(lib, {"level": ["500"]})
    page.start()
    assert page.chart.alert.object == "" and page.evidence.alert.object == ""
    assert page.report["verdict"]["balance"] == "none"
    assert "no momentum budget" in page.report["verdict"]["text"]
    assert page.report["winds"]["geostrophic_speed_rms"] > 5.0
    kinds = {s["kind"] for s in page.systems.data["systems"]}
    assert kinds == {"low", "high"}
    cd = compute.chart_data(lib, page.state)
    assert cd.vector_label == "Vectors: geostrophic wind" and cd.masked_share == 0.0
    assert any("no wind" in n for n in cd.notes)


def test_the_loop_steps_to_the_next_time_wraps_and_waits_for_a_frame_on_its_way(library):
    st = _state(time="2041-01-19T18:00:00Z")
    page = _page(library, st)
    page.loop_step()
    assert st.time == "2041-01-20T00:00:00Z"
    page.loop_step()  # after the last time, the first
    assert st.time == "2041-01-19T00:00:00Z"
    page._pending.add("chart")  # the chart of the time shown is still on its way: wait
    page.loop_step()
    assert st.time == "2041-01-19T00:00:00Z"
    page._pending.discard("chart")
    page.loop_step()
    assert st.time == "2041-01-19T06:00:00Z"
    # without a server nothing plays (no periodic callback), and saying so is quiet
    page.controls.w_play.value = True
    assert page._loop is None and page.controls.w_play.label == "Pause"
    page.controls.w_play.value = False
    assert page.controls.w_play.label == "Play the times"


def test_a_change_made_while_the_browser_fetches_the_document_waits_for_the_start(library):
    """The lost-chart race of tests/test_chart_draws.py made certain: a change that comes
    while a browser is connected but the page has not started is held, and is made (in
    order, once) when the page starts; without a browser it goes in at once."""
    from types import SimpleNamespace

    from app.desk import Page

    page = Page(library, _state())
    seen = []
    page._held(lambda: seen.append("before any browser"))
    assert seen == ["before any browser"]  # no browser: straight into the document
    session = SimpleNamespace(connection_count=1)
    page.doc = SimpleNamespace(session_context=SimpleNamespace(_session=session))
    page._held(lambda: seen.append("first"))
    page._held(lambda: seen.append("second"))
    assert seen == ["before any browser"]  # held: the browser may not have the document yet
    page.doc = None  # started without a server: the held changes are made here
    page.start()
    assert seen == ["before any browser", "first", "second"]
    page._held(lambda: seen.append("after the start"))
    assert seen[-1] == "after the start" and len(seen) == 4


def test_the_section_line_is_on_the_chart_while_its_tab_is_open(library):
    """Its ends A and B where the section's line begins and ends, in the chart's
    coordinates; gone when another tab is opened, back when the section's is; a section that
    cannot be made takes it away (and says why)."""
    from app.desk.page import build_page

    page = build_page(
        library,
        {
            "case": ["ocean_cyclone"],
            "level": ["500"],
            "time": ["2041-01-19T12:00:00Z"],
            "region": ["box:-52,-28,38,56"],
            "line": ["-50,40,-30,50"],
        },
    )
    page.start()
    assert list(page.chart.section_src.data["x"]) == []  # the section's tab is not open
    page.below.tabs.active = page.below.TAB["section"]
    ends = page.chart.section_end_src.data
    assert list(ends["text"]) == ["A", "B"]
    x, y = page.chart.data.geom.path_to_view(np.array([-50.0, -30.0]), np.array([40.0, 50.0]))
    np.testing.assert_allclose(ends["x"], x, rtol=1e-9, atol=1e-6)
    np.testing.assert_allclose(ends["y"], y, rtol=1e-9, atol=1e-6)
    assert len(page.chart.section_src.data["x"]) == compute.SECTION_POINTS
    page.below.tabs.active = page.below.TAB["levels"]
    assert list(page.chart.section_src.data["x"]) == []
    page.below.tabs.active = page.below.TAB["section"]
    assert len(page.chart.section_src.data["x"]) == compute.SECTION_POINTS
    page.state.case = "sea_breeze"  # the line lies outside this case: no section, no line
    assert "Section:" in page.below.section_status.object
    assert list(page.chart.section_src.data["x"]) == []


def test_the_region_numbers_name_each_number_once(library):
    """The region's numbers hold the report's numbers only: one deformation radius (in km, as
    the report gives it), not a second one of the scale sheet's that the report never has."""
    from app.desk.evidence import _numbers_table

    rep = compute.box_data(library, _state(region="box:-52,-28,38,56"))
    html = _numbers_table(rep, "m/s")
    assert html.count("dotted #999'>deformation radius<") == 1
    assert html.count("<b>deformation radius</b>") <= 1  # its meaning, once at most
    assert "n/a</b> m<" not in html
