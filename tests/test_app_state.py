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
    return (cd.field_key, cd.units, float(np.nanmean(cd.raster)), cd.raster.shape,
            len(cd.contours[0]), None if cd.vectors is None else len(cd.vectors["x0"]),
            None if cd.vectors is None else float(np.nanmean(cd.vectors["x1"])), cd.vector_label,
            cd.hover["wind_units"],
            cd.geom.label, None if cd.region_xy is None else float(np.nanmean(cd.region_xy[0])),
            cd.contour_units)


@pytest.mark.parametrize("param, value", [
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
    ("region", json.dumps({"kind": "box", "bounds": [-40, -10, 30, 45]})),
])
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


@pytest.mark.parametrize("param, value", [
    ("level", 1000.0),
    ("time", "2041-01-19T00:00:00Z"),
    ("smooth_km", 300.0),
    ("min_lat", 45.0),
    ("region", json.dumps({"kind": "box", "bounds": [-40, -10, 30, 45]})),
])
def test_every_box_control_changes_the_analysis(library, param, value):
    a = compute.box_data(library, _state())
    st = _state()
    setattr(st, param, value)
    b = compute.box_data(library, st)
    sig = lambda r: (r["points"], tuple(round(t["magnitude"] or 0, 12) for t in r["terms"]),  # noqa: E731
                     r["winds"]["geostrophic_speed_rms"])
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
    sheet = compute.scale_sheet(st, {}, rep)
    assert sheet["verdict"]["balance"] == "geostrophic"
    st.preset = "tornado"
    sheet2 = compute.scale_sheet(st, {}, rep)
    assert sheet2["verdict"]["balance"] == "cyclostrophic"
    edited = compute.scale_sheet(st, {"L": 5e5, "U": 10.0, "dP": 1000.0, "lat0": 45.0}, rep)
    assert edited["verdict"]["balance"] != "cyclostrophic"
    bad = compute.scale_sheet(st, {"L": -1.0}, rep)
    assert bad["error"] and "positive" in bad["error"]
    # side by side with the region
    rows = {r["name"]: r for r in sheet["terms"]}
    assert rows["coriolis"]["measured"] == pytest.approx(
        next(t["magnitude"] for t in rep["terms"] if t["name"] == "coriolis"))


def test_url_round_trip_restores_a_view():
    st = ViewState(case="tropical_cyclone", level=850.0, time="2038-09-04T06:00:00Z",
                   field="rossby_local", vectors="ageostrophic", smooth_km=50.0, min_lat=12.0,
                   projection="conformal", height_units="dam", wind_units="kt",
                   preset="tropical_cyclone")
    st.set_polygon([145.0, 147.0, 147.0, 145.0], [17.0, 17.0, 19.0, 19.0])
    url = "?" + urllib.parse.urlencode({k: str(v) for k, v in st.to_query().items()})
    query = urllib.parse.parse_qs(url[1:])
    back = ViewState()
    back.update_from_query(query)
    assert back.to_query() == st.to_query()
    assert set(st.to_query()) == set(URL_PARAMS)


def test_bad_url_values_are_ignored():
    st = ViewState()
    changed = st.update_from_query({"level": ["not a number"], "field": ["nonsense"],
                                    "min_lat": ["1000"], "case": ["sea_breeze"]})
    assert changed == {"case": "sea_breeze"}
    assert st.field == "height" and st.min_lat == 10.0


def test_errors_are_readable(library):
    from balance_core.io import CaseError

    with pytest.raises(CaseError, match="no 600 hPa level"):
        compute.chart_data(library, _state(level=600.0))
    st = _state(region=json.dumps({"kind": "box", "bounds": [100, 110, -10, 0]}))
    with pytest.raises(CaseError, match="holds no grid points"):
        compute.box_data(library, st)
    # a field the case lacks falls back to the height, with a note
    st2 = _state(case="tropical_cyclone", level=850.0, time="", field="omega")
    cd = compute.chart_data(library, st2)
    assert cd.field_key == "omega"  # the TC has omega (zero everywhere)
    st3 = _state(field="term:tendency")
    assert compute.chart_data(library, st3).field_key == "term:tendency"


def test_dashboard_without_a_server(library, tmp_path):
    from app.dashboard import Dashboard

    dash = Dashboard(library, _state())
    dash.refresh()
    assert dash.rank_src.data["name"][0] in ("pressure gradient", "Coriolis")
    assert "Geostrophic" in dash.verdict.object
    assert len(dash.hover_src.data["x"]) > 100
    assert dash.chart_caption.object.count("500 hPa") == 1
    # the page keeps working after an error, and says what happened
    dash.state.level = 600.0
    assert dash.chart_alert.visible and "no 600 hPa level" in dash.chart_alert.object
    dash.state.level = 850.0
    assert not dash.chart_alert.visible
    dash.state.set_box(100, 110, -10, 0)
    assert dash.box_alert.visible and "holds no grid points" in dash.box_alert.object
    dash.state.clear_region()
    assert not dash.box_alert.visible
    # drawing a box on a plate carree chart sets a lon/lat box
    from types import SimpleNamespace

    dash._on_select(SimpleNamespace(geometry={"type": "rect", "x0": -45, "x1": -30, "y0": 40,
                                              "y1": 50}, final=True))
    assert json.loads(dash.state.region)["bounds"] == [-45, -30, 40, 50]
    # on a conformal chart the drawn rectangle becomes a lon/lat polygon
    dash.state.projection = "conformal"
    g = dash._chart.geom
    cx, cy = g.to_view(-40.0, 47.0)
    dash._on_select(SimpleNamespace(geometry={"type": "rect", "x0": cx - 3e5, "x1": cx + 3e5,
                                              "y0": cy - 2e5, "y1": cy + 2e5}, final=True))
    spec = json.loads(dash.state.region)
    assert spec["kind"] == "polygon" and len(spec["lons"]) > 4
    assert min(spec["lons"]) < -40 < max(spec["lons"])
    assert "drawn area" in dash.state.region_text()


def test_exports(library):
    from app.dashboard import Dashboard

    dash = Dashboard(library, _state())
    dash.refresh()
    png = dash._export_png().getvalue()
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and len(png) > 50_000
    csv_text = dash._export_csv().getvalue()
    assert csv_text.splitlines()[0].startswith("case,level_hpa,valid_time,kind,name")
    rep = json.loads(dash._export_json().getvalue())
    assert rep["case"] == "ocean_cyclone" and rep["verdict"]["balance"] == "geostrophic"
    assert {t["name"] for t in rep["terms"]} >= {"pressure_gradient", "coriolis", "residual"}


def test_a_case_that_fails_to_load_says_so(tmp_path):
    bad = tmp_path / "broken.nc"
    bad.write_bytes(b"not a file at all")
    lib = CaseLibrary([str(bad)] + SAMPLES[:1])
    from app.dashboard import Dashboard

    dash = Dashboard(lib, ViewState(case="broken"))
    dash.refresh()
    assert dash.chart_alert.visible and "could not be loaded" in dash.chart_alert.object
    dash.state.case = lib.names[1]
    dash.refresh()
    assert not dash.chart_alert.visible


def test_cases_are_shared_between_sessions(library):
    from app.dashboard import Dashboard

    a = Dashboard(library, _state())
    b = Dashboard(library, _state())
    a.refresh()
    b.refresh()
    d1 = library.diagnostics("ocean_cyclone", 4, 2)
    d2 = library.diagnostics("ocean_cyclone", 4, 2)
    assert d1 is d2  # computed once, shared
    assert a.library.get("ocean_cyclone") is b.library.get("ocean_cyclone")
