"""Vertical sections: the great circle between two points, the imbalance a balance leaves at
each point, and a section through the analytic jet of testkit/makedata.py, whose speed at
every point and level is known in closed form (testkit.makedata.truth, evaluated here at the
section's points: a truth the code under test does not compute)."""

import math

import numpy as np
import pytest

from app import compute
from app.inputs import InputError, parse_line
from app.library import CaseLibrary
from app.state import ViewState, parse_query
from balance_core import constants as C
from balance_core.section import great_circle, imbalance_field
from testkit.makedata import latlon_dataset, truth


def _haversine_km(lon0, lat0, lon1, lat1, radius=C.EARTH_RADIUS):
    """The great-circle distance by the haversine formula (Sinnott 1984, Virtues of the
    haversine, Sky and Telescope 68, 159), written here independently of pyproj."""
    p0, p1 = math.radians(lat0), math.radians(lat1)
    dp, dl = p1 - p0, math.radians(lon1 - lon0)
    h = math.sin(dp / 2) ** 2 + math.cos(p0) * math.cos(p1) * math.sin(dl / 2) ** 2
    return 2 * radius * math.asin(math.sqrt(h)) / 1e3


@pytest.mark.parametrize(
    "line",
    [(-60.0, 40.0, 0.0, 50.0), (170.0, 10.0, -170.0, -10.0), (0.0, 80.0, 180.0, 80.0)],
    ids=["mid-latitudes", "across the equator and the date line", "over the pole"],
)
def test_the_great_circle_runs_end_to_end_at_even_steps(line):
    lon, lat, dist = great_circle(*line, n=61)
    assert (lon[0], lat[0]) == pytest.approx(((line[0] + 180) % 360 - 180, line[1]))
    assert (lon[-1], lat[-1]) == pytest.approx(((line[2] + 180) % 360 - 180, line[3]))
    assert dist[-1] == pytest.approx(_haversine_km(*line), rel=1e-9)
    steps = [_haversine_km(lon[i], lat[i], lon[i + 1], lat[i + 1]) for i in range(60)]
    assert np.allclose(steps, dist[-1] / 60, rtol=1e-6)
    if line[1] == line[3] == 80.0:  # half way round at 80N: the path crosses the pole
        assert lat.max() == pytest.approx(90.0, abs=0.5)


def test_a_line_must_have_two_different_ends_typed_as_four_numbers():
    assert parse_line("-60, 40, 0, 50") == (-60.0, 40.0, 0.0, 50.0)
    for bad in ("1,2,3", "0,0,360,0", "0,95,1,1", "a,1,2,3"):
        with pytest.raises(InputError):
            parse_line(bad)
    values, problems = parse_query({"line": "0,95,1,1"})
    assert "line" not in values and "the link's line" in problems[0]
    with pytest.raises(ValueError):
        great_circle(10, 10, 10, 10)


@pytest.fixture(scope="module")
def jet(tmp_path_factory):
    lat = np.arange(80.0, 9.9, -1.0)
    lon = np.arange(-60.0, 20.1, 1.0)
    ds, _ = latlon_dataset(lat, lon)
    path = tmp_path_factory.mktemp("jet") / "jet.nc"
    ds.to_netcdf(path)
    return CaseLibrary([str(path)])


def test_a_section_through_the_analytic_jet_has_its_core_at_the_right_level(jet):
    st = ViewState(case="jet", level=500.0, line="-30,20,-30,75")
    st.time = jet.get("jet").times.astype("datetime64[s]").astype(str)[1] + "Z"
    data = compute.section_data(jet, st)
    hours = 6.0  # the second valid time
    levels = data["levels_hpa"]
    speed = np.empty_like(data["speed"])
    for k, p in enumerate(levels):
        _, u, v, _, _ = truth(data["lat"], data["lon"], p, hours)
        speed[k] = np.hypot(u, v)
    k_true, i_true = np.unravel_index(np.nanargmax(speed), speed.shape)
    k_got, i_got = np.unravel_index(np.nanargmax(data["speed"]), speed.shape)
    assert levels[k_got] == levels[k_true] == 300.0
    assert abs(data["distance_km"][i_got] - data["distance_km"][i_true]) < 150
    assert np.nanmax(data["speed"]) == pytest.approx(np.nanmax(speed), rel=0.02)
    # potential temperature rises upward (a stable column) and the region's balance leaves
    # little over where the flow is geostrophic by construction
    assert np.all(np.diff(np.nanmean(data["theta"], axis=1)) > 0)
    assert data["verdicts"][levels.tolist().index(500.0)] == "geostrophic"
    assert np.nanmedian(data["ratio"][levels.tolist().index(500.0)]) < 0.3


def test_the_imbalance_field_says_no_where_a_wind_is_half_again_the_geostrophic(jet):
    import dataclasses

    from balance_core.budget import momentum_budget

    diag = jet.diagnostics("jet", 3, 1)
    ok = np.isfinite(imbalance_field(diag.budget, "geostrophic"))
    assert np.median(imbalance_field(diag.budget, "geostrophic")[ok]) < 0.3
    case = jet.get("jet")
    f, it, ik = case.fields(1, 3)
    faster = dataclasses.replace(f, u=1.5 * f.u, v=1.5 * f.v)
    b = momentum_budget(case.grid, faster, it, ik)
    ratio = imbalance_field(b, "geostrophic")
    assert np.median(ratio[np.isfinite(ratio)]) > 0.3
    with pytest.raises(KeyError):
        imbalance_field(diag.budget, "none")


def test_the_section_cells_cover_the_levels_and_the_line(jet):
    st = ViewState(case="jet", level=500.0, line="-30,20,-30,75")
    data = compute.section_data(jet, st)
    cells = compute.section_cells(data, "speed", "kt")
    n = len(data["levels_hpa"]) * len(data["distance_km"])
    assert len(cells["cells"]["value"]) == n and cells["title"] == "wind speed (kt)"
    assert cells["p_min"] < 300 and cells["p_max"] > 1000
    assert max(cells["cells"]["right"]) == pytest.approx(data["distance_km"][-1], rel=0.01)
    xs, ys = compute.theta_lines(data)
    assert xs and all(np.nanmin(y) >= 250 for y in ys)


def test_a_global_case_without_a_region_gets_a_line_the_short_way_round(tmp_path):
    """On a whole global case the default line runs west to east across the middle; a span
    of 360 degrees would make the great circle from 0 to 359.75 E a quarter-degree step
    westward: the line is kept under half the globe."""
    lat = np.arange(90.0, -90.1, -10.0)
    lon = np.arange(0.0, 360.0, 10.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        ds, _ = latlon_dataset(lat, lon)
    path = tmp_path / "globe.nc"
    ds.to_netcdf(path)
    lib = CaseLibrary([str(path)])
    line = compute.section_line(lib, ViewState(case="globe", level=500.0))
    assert 170.0 <= line[2] - line[0] < 180.0 and line[1] == line[3] == 0.0
    _, _, dist = great_circle(*line)
    assert dist[-1] > 18000.0  # most of the way round the equator, not a short step


@pytest.fixture(scope="module")
def globe(tmp_path_factory):
    """The analytic flow on a whole 2.5-degree globe (poles included)."""
    lat = np.arange(90.0, -90.1, -2.5)
    lon = np.arange(0.0, 360.0, 2.5)
    with np.errstate(divide="ignore", invalid="ignore"):
        ds, _ = latlon_dataset(lat, lon)
    path = tmp_path_factory.mktemp("globe") / "globe.nc"
    ds.to_netcdf(path)
    return str(path)


@pytest.mark.parametrize(
    "box, line",
    [
        ((-40.0, 0.0, 35.0, 55.0), "-35,40,-5,50"),
        ((160.0, -160.0, 30.0, 50.0), "165,35,-165,45"),  # across the date line
        ((-40.0, 0.0, 60.0, 80.0), "-20,65,160,70"),  # over the pole to the far side
    ],
    ids=["mid-latitudes", "across the date line", "over the pole"],
)
def test_a_section_on_a_band_of_rows_is_the_whole_grids(globe, box, line):
    """A level the library has not computed is computed on the band of rows the section and
    its region need (compute._SectionLevels); the same section with every level computed on
    the whole grid first must give the same verdicts and levels table, bit for bit, and the
    same values along the line to rounding (a point's row in the band is its row in the
    whole grid less the band's first, so its interpolation weights differ in the last bit)."""
    st = ViewState(case="globe", level=500.0, line=line)
    st.set_box(*box)
    cold = CaseLibrary([globe])
    at = compute._SectionLevels(cold, st, 0, *great_circle(*parse_line(line))[:2])
    ny = cold.get("globe").grid.shape[0]
    assert at.band_case is not None and at.band_case.grid.shape[0] < ny  # a band, not all
    banded = compute.section_data(cold, st)
    assert all(cold.diagnostics_ready("globe", k, 0) is None for k in range(6))
    warm = CaseLibrary([globe])
    for k in range(warm.get("globe").levels_pa.size):
        warm.diagnostics("globe", k, 0)
    whole = compute.section_data(warm, st)
    for key in ("speed", "theta", "ratio"):
        assert np.array_equal(np.isnan(banded[key]), np.isnan(whole[key])), key
        np.testing.assert_allclose(banded[key], whole[key], rtol=1e-12, atol=0, err_msg=key)
        assert np.isfinite(banded[key]).mean() > 0.5, key
    assert banded["verdicts"] == whole["verdicts"] and banded["balances"] == whole["balances"]
    a = compute.levels_data(cold, st)["rows"]
    b = compute.levels_data(warm, st)["rows"]
    assert a == b


def test_a_section_of_the_whole_case_or_a_smoothed_flow_is_computed_on_the_whole_grid(globe):
    """No band where it cannot give the whole grid's numbers or would save nothing."""
    lib = CaseLibrary([globe])
    lon, lat, _ = great_circle(-35, 40, -5, 50)
    whole = ViewState(case="globe", level=500.0, line="-35,40,-5,50")
    assert compute._SectionLevels(lib, whole, 0, lon, lat).band_case is None
    smoothed = ViewState(case="globe", level=500.0, line="-35,40,-5,50", smooth_km=300.0)
    smoothed.set_box(-40.0, 0.0, 35.0, 55.0)
    assert compute._SectionLevels(lib, smoothed, 0, lon, lat).band_case is None
    pole_to_pole = ViewState(case="globe", level=500.0, line="0,-80,0,80")
    pole_to_pole.set_box(-40.0, 0.0, 35.0, 55.0)
    lon, lat, _ = great_circle(0, -80, 0, 80)
    assert compute._SectionLevels(lib, pole_to_pole, 0, lon, lat).band_case is None


def test_a_chosen_low_or_high_proposes_a_line_west_to_east_through_its_centre(globe):
    """Two radii each side of the centre, due east and due west at the centre: the ends are
    checked with the haversine distance (above), not with the code's own pyproj."""
    from app.state import parse_region

    spec = parse_region("circle:-30,50,600")[0]
    (lon0, lat0, lon1, lat1), why = compute.proposed_line(spec, C.EARTH_RADIUS)
    reach = compute.LINE_RADII * 600.0
    assert _haversine_km(-30, 50, lon0, lat0) == pytest.approx(reach, rel=1e-6)
    assert _haversine_km(-30, 50, lon1, lat1) == pytest.approx(reach, rel=1e-6)
    assert _haversine_km(lon0, lat0, lon1, lat1) == pytest.approx(2 * reach, rel=1e-3)
    assert lon0 < -30 < lon1 and "through the chosen system" in why
    # a box proposes nothing of its own: the section then runs across the region's middle
    assert compute.proposed_line(parse_region("box:-40,-20,40,60")[0], C.EARTH_RADIUS) is None
    st = ViewState(case="globe", level=500.0)
    st.set_box(-40, -20, 40, 60)
    assert compute.section_line(CaseLibrary([globe]), st) == (-40, 50, -20, 50)


@pytest.mark.parametrize("level", [250.0, 300.0])
def test_a_chosen_jet_streak_proposes_a_line_across_its_core_on_real_output(level):
    """On the GFS file that `make` fetches: the section the proposed line gives has the
    streak's core inside it, away from its ends, and slower flow at both ends, as a line
    across a jet does; the line crosses the wind at the streak's peak at nearly a right
    angle (the wind of the case at the grid point nearest the peak)."""
    from testkit import samples

    lib = CaseLibrary([samples.need(samples.GFS)])
    name = lib.names[0]
    st = ViewState(case=name, level=level)
    jets = [s for s in compute.systems_data(lib, st)["systems"] if s["kind"] == "jet_streak"]
    assert jets
    st.region = jets[0]["region"]
    assert st.region.startswith("area:aeqd,")
    data = compute.section_data(lib, st)
    assert "across the chosen jet streak" in data["line_why"]
    k = data["levels_hpa"].tolist().index(level)
    speed = data["speed"][k]
    n = speed.size
    assert n // 4 <= int(np.nanargmax(speed)) <= 3 * n // 4
    assert speed[0] < 0.8 * np.nanmax(speed) and speed[-1] < 0.8 * np.nanmax(speed)
    # across the flow: the line's bearing at its middle against the wind's at the peak
    case = lib.get(name)
    j, i = np.unravel_index(
        np.argmin(np.hypot(case.grid.lon - jets[0]["lon"], case.grid.lat - jets[0]["lat"])),
        case.grid.shape,
    )
    f, it, ik = case.fields(case.time_index(None), case.level_index(level))
    u, v = float(np.asarray(f.u)[it, ik, j, i]), float(np.asarray(f.v)[it, ik, j, i])
    m = n // 2
    dlon = (data["lon"][m + 1] - data["lon"][m - 1] + 180.0) % 360.0 - 180.0
    east = dlon * math.cos(math.radians(data["lat"][m]))
    north = data["lat"][m + 1] - data["lat"][m - 1]
    cos_angle = (east * u + north * v) / (math.hypot(east, north) * math.hypot(u, v))
    assert abs(cos_angle) < math.cos(math.radians(70.0))
