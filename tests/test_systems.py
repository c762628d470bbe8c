"""Weather systems found in the data, and the split of the ageostrophic wind.

Flows with known answers:

* a Holland (1980) vortex: one low, its centre within one grid cell, in gradient or
  cyclostrophic balance by its own region's report;
* two vortices of opposite sign: one low and one high where they were put;
* Williamson et al. (1992) test case 2 (alpha = 0): no closed low or high (its extremes are
  at the poles and along the equator, which no contour closes around);
* a zonal jet with a streak of known peak: the streak found at its peak, within one cell;
* the invented sample cases (a demo check, not proof): the generator's systems are found;
* real data (the ERA5 and NCEP samples of two GRIB packages): every low found is a local
  minimum inside a closed contour, checked with scikit-image's marching squares
  (``skimage.measure.find_contours``), not with the contouring the code uses;
* the ageostrophic parts add up to V - Vg at every point, and on a steady circular
  vortex the inertial-advective part carries it.

Each rule is shown saying no where it can (a vortex too shallow, a jet too weak, a low
that reaches the edge).
"""

import math
import os

import numpy as np
import pytest

from balance_core import Grid, analytic
from balance_core.budget import Fields, ageostrophic_parts
from balance_core.report import box_report, level_diagnostics
from balance_core.systems import (
    System,
    contour_interval,
    find_closed_extrema,
    find_jet_streaks,
    find_systems,
    jet_threshold,
    match_tracks,
)
from testkit import samples

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
G0 = 9.80665


def _diag(grid, z, u, v, p):
    f = Fields(
        u=u[None, None], v=v[None, None], height=z[None, None], pressure=np.array([p]), time=None
    )
    return level_diagnostics(grid, f, 0, 0)


def holland(step=0.1, lat0=20.0, lon0=150.0, dp=4000.0, rmax=40e3, b=1.5, rho=1.15, half=6.0):
    """A Holland (1980) vortex on a pressure level: height from the pressure deficit
    (dZ = dp / (rho g)), winds the Holland gradient wind, on an f-plane at lat0."""
    lat = np.arange(lat0 - half, lat0 + half + 1e-9, step)
    lon = np.arange(lon0 - half, lon0 + half + 1e-9, step)
    g = Grid.latlon(lat, lon).f_plane(lat0)
    r = analytic.great_circle_distance(lat0, lon0, g.lat, g.lon, g.radius)
    p = analytic.holland_pressure(r, 96000.0, dp, rmax, b)
    z = 1500.0 + (p - 100000.0) / (rho * G0)
    f0 = 2 * 7.292115e-5 * math.sin(math.radians(lat0))
    speed = np.nan_to_num(analytic.holland_gradient_wind(r, dp, rmax, b, rho, f0))
    # counterclockwise about the centre (northern hemisphere, cyclonic)
    x = np.deg2rad(g.lon - lon0) * g.radius * np.cos(np.deg2rad(lat0))
    y = np.deg2rad(g.lat - lat0) * g.radius
    rr = np.hypot(x, y)
    rr[rr == 0] = 1.0
    u, v = -speed * y / rr, speed * x / rr
    return g, z, u, v


def test_a_holland_vortex_is_one_low_in_gradient_or_cyclostrophic_balance():
    g, z, u, v = holland()
    lows = find_closed_extrema(g, z, 85000.0, "low")
    assert len(lows) == 1
    low = lows[0]
    assert abs(low.lat - 20.0) <= 0.1 + 1e-9 and abs(low.lon - 150.0) <= 0.1 + 1e-9  # one cell
    # its depth: the pressure deficit over rho g, to the outermost closed contour
    assert low.depth > 300.0 and low.outer_level > low.value
    assert find_closed_extrema(g, z, 85000.0, "high") == []
    rep = box_report(_diag(g, z, u, v, 85000.0), low.region)
    assert rep["verdict"]["balance"] in ("gradient", "cyclostrophic"), rep["verdict"]


def test_a_vortex_too_shallow_for_a_closed_contour_is_not_a_low():
    g, z, u, v = holland(dp=150.0)  # 13 m deep: from 1145.4 m at the centre to 1158.7 m
    # no multiple of the 30 m interval lies between: no closed contour at all
    assert find_closed_extrema(g, z, 85000.0, "low") == []
    # every 10 m, the 1150 m contour closes 4.6 m above the centre: under the least depth
    # (half an interval) it is no low; with a smaller least depth it is
    assert find_closed_extrema(g, z, 85000.0, "low", interval=10.0) == []
    assert len(find_closed_extrema(g, z, 85000.0, "low", interval=10.0, min_depth=2.0)) == 1


def test_two_vortices_of_opposite_sign_are_a_low_and_a_high():
    lat = np.arange(30.0, 60.01, 0.5)
    lon = np.arange(-40.0, 20.01, 0.5)
    g = Grid.latlon(lat, lon)
    r1 = analytic.great_circle_distance(45.0, -20.0, g.lat, g.lon, g.radius)
    r2 = analytic.great_circle_distance(42.0, 5.0, g.lat, g.lon, g.radius)
    z = 5500.0 - 200.0 * np.exp(-((r1 / 600e3) ** 2)) + 180.0 * np.exp(-((r2 / 500e3) ** 2))
    lows = find_closed_extrema(g, z, 50000.0, "low")
    highs = find_closed_extrema(g, z, 50000.0, "high")
    # the centres refined below the grid: within a tenth of a grid cell of where they were put
    assert len(lows) == 1 and len(highs) == 1
    assert abs(lows[0].lon + 20.0) < 0.05 and abs(lows[0].lat - 45.0) < 0.05
    assert abs(highs[0].lon - 5.0) < 0.05 and abs(highs[0].lat - 42.0) < 0.05
    assert lows[0].index == (30, 40) and highs[0].index == (24, 90)  # the grid points
    assert 140.0 <= lows[0].depth <= 200.0 and 120.0 <= highs[0].depth <= 180.0


def test_a_low_that_reaches_the_edge_of_the_data_is_not_closed():
    lat = np.arange(30.0, 60.01, 0.5)
    lon = np.arange(-40.0, 20.01, 0.5)
    g = Grid.latlon(lat, lon)
    r1 = analytic.great_circle_distance(45.0, -39.0, g.lat, g.lon, g.radius)  # at the edge
    z = 5500.0 - 200.0 * np.exp(-((r1 / 600e3) ** 2))
    assert find_closed_extrema(g, z, 50000.0, "low") == []


def test_williamson_case_2_has_its_polar_lows_and_no_high():
    # Williamson et al. (1992), J. Comput. Phys. 102, 211-224, test case 2 with alpha = 0:
    # the height falls from the equator to both poles along latitude circles. The pole row
    # is one point, so each pole is a closed low (its contours are latitude circles around
    # it); the equatorial maximum is a band between two latitude circles, which no single
    # contour encloses: no high
    case = analytic.williamson_case2(91, alpha=0.0)
    z = case.geopotential / G0
    lows = find_closed_extrema(case.grid, z, 50000.0, "low", interval=60.0)
    # the rows nearest the poles are cell centres 0.99 degrees from them: the pole rows
    assert sorted(np.sign(s.lat) for s in lows) == [-1, 1] and all(abs(s.lat) > 89 for s in lows)
    assert find_closed_extrema(case.grid, z, 50000.0, "high", interval=60.0) == []
    # their outermost closed contours enclose at most a tenth of the globe (a cap poleward
    # of asin(0.8) = 53.1 degrees): the contour below that is planetary, not synoptic
    for s in lows:
        assert (
            0.09 * 4 * math.pi * (6371.0087714) ** 2
            < s.area_km2
            <= 0.10 * 4 * math.pi * (6371.0087714) ** 2
        )
    # saying no: the same flow on a grid that stops 2 degrees short of the poles has no
    # pole row to join, and its polar contours reach the edge of the data
    lat = np.linspace(-88.0, 88.0, 89)
    lon = np.arange(180) * 2.0
    g = Grid.latlon(lat, lon)
    z2 = np.interp(lat, case.grid.lat[:, 0], z[:, 0])[:, None] * np.ones(lon.size)
    assert find_closed_extrema(g, z2, 50000.0, "low", interval=60.0) == []


def test_a_streak_on_a_zonal_jet_is_found_at_its_peak():
    lat = np.arange(10.0, 80.01, 0.5)
    lon = np.arange(-100.0, 60.01, 0.5)
    g = Grid.latlon(lat, lon)
    jet = np.exp(-(((g.lat - 45.0) / 8.0) ** 2))
    streak = np.exp(-(((g.lon + 20.0) / 15.0) ** 2))
    u = 25.0 * jet + 30.0 * jet * streak  # 55 m/s at (20W, 45N); 25 m/s elsewhere on the jet
    v = np.zeros_like(u)
    found = find_jet_streaks(g, u, v, 25000.0)
    assert len(found) == 1
    s = found[0]
    assert abs(s.lon + 20.0) <= 0.5 and abs(s.lat - 45.0) <= 0.5 and abs(s.value - 55.0) < 1e-9
    assert s.region.west < -20.0 < s.region.east and s.region.south < 45.0 < s.region.north
    # too weak for the level: no streak (common practice: 30 m/s at 250 hPa)
    assert find_jet_streaks(g, 0.5 * u, v, 25000.0) == []
    assert jet_threshold(25000.0) == 30.0 and contour_interval(50000.0) == 60.0


def test_systems_are_matched_through_the_times():
    def sys_(kind, lon, lat):
        from balance_core.region import Region

        return System(kind, lon, lat, 0.0, 60.0, 0.0, 1.0, Region.circle(lon, lat, 100.0), (0, 0))

    times = [
        [sys_("low", -40, 50), sys_("high", 0, 40)],
        [sys_("high", 1, 40), sys_("low", -37, 50)],  # moved about 210 km in 6 h
        [sys_("low", -20, 50)],
    ]  # 1200 km in 6 h: a new system
    tracks = match_tracks(times, [0.0, 6.0, 12.0])
    assert [(0, 0), (1, 1)] in tracks and [(0, 1), (1, 0)] in tracks and [(2, 0)] in tracks


def _sample(name):
    from balance_core.io import open_case

    return open_case(os.path.join(ROOT, "sample_cases", f"{name}.nc"))


def test_the_invented_cases_systems_are_found_where_the_generator_put_them():
    # a demo check, not proof: the generator's own centres (sample_cases/make_cases.py)
    from balance_core.io import diagnostics_for
    from balance_core.region import great_circle_km

    tc = _sample("tropical_cyclone")
    k = list(tc.levels_pa).index(85000.0)
    d = diagnostics_for(tc, k, 0, None)
    found = find_systems(tc.grid, d.height, d.u, d.v, 85000.0)
    assert [s.kind for s in found] == ["low"]  # its eyewall ring is not a jet streak
    assert great_circle_km(146.0, 18.0, found[0].lon, found[0].lat) < 60.0
    oc = _sample("ocean_cyclone")
    k = list(oc.levels_pa).index(85000.0)
    d = diagnostics_for(oc, k, 0, None)
    lows = [s for s in find_systems(oc.grid, d.height, d.u, d.v, 85000.0) if s.kind == "low"]
    # the low sits on the jet's sloping heights: its minimum lies poleward of the
    # perturbation's centre (47N, 42W), on the same meridian
    assert len(lows) == 1 and abs(lows[0].lon + 42.0) < 1.0 and 47.0 <= lows[0].lat <= 52.0


def _closed_contour_around(z, level, row, col, periodic=False):
    """scikit-image's marching squares: is there a closed contour of ``z`` at ``level``
    with the point (row, col) inside it? On a global grid the field is laid out three
    times side by side (a contour may cross the edge of the array), the point in the
    middle copy."""
    from matplotlib.path import Path
    from skimage import measure

    if periodic:
        col = col + z.shape[1]
        z = np.concatenate([z, z, z], axis=1)
    for c in measure.find_contours(z, level):
        if len(c) > 3 and np.allclose(c[0], c[-1]) and Path(c).contains_point((row, col)):
            return True
    return False


REAL = [
    (samples.ERA5, 50000.0),
    (samples.ETA, 50000.0),
    (samples.GFS, 50000.0),
    (samples.GFS, 85000.0),
]


@pytest.mark.parametrize(
    "path, level", REAL, ids=[f"{os.path.basename(p)}-{int(lv / 100)}" for p, lv in REAL]
)
def test_every_low_found_in_real_data_is_a_minimum_inside_a_closed_contour(path, level):
    samples.need(path)
    from balance_core.io import open_case

    case = open_case(path)
    k = int(np.argmin(np.abs(np.asarray(case.levels_pa) - level)))
    z = np.asarray(case.data["height"].isel(time=0, level=k).values, dtype=np.float64)
    periodic = bool(case.grid.periodic)
    lows = find_closed_extrema(case.grid, z, case.levels_pa[k], "low")
    highs = find_closed_extrema(case.grid, z, case.levels_pa[k], "high")
    if "gfs" in path:  # a global chart has closed systems (common practice, no source)
        assert lows and highs

    def cap(s):
        # a contour around a pole is no closed ring on the lon/lat array: marching squares
        # cannot draw it; those are checked by the priority flood (test_systems_real.py)
        return periodic and (s.inside[0].any() or s.inside[-1].any())

    for s in lows:
        r, c = s.index
        win = z[max(r - 1, 0) : r + 2, max(c - 1, 0) : c + 2]
        assert z[r, c] == np.nanmin(win)  # a local minimum of the data
        # just under the outermost closed contour's height, a closed contour around it
        assert cap(s) or _closed_contour_around(z, s.outer_level - 1e-6, r, c, periodic), (
            s.lon,
            s.lat,
        )
    for s in highs:
        r, c = s.index
        assert cap(s) or _closed_contour_around(-z, -s.outer_level - 1e-6, r, c, periodic), (
            s.lon,
            s.lat,
        )


def test_the_ageostrophic_parts_add_up_to_the_ageostrophic_wind():
    # on the invented ocean cyclone (two times, all levels): every part from the budget's
    # terms; their sum must be V - Vg at every point where f is used, to rounding
    from balance_core.io import diagnostics_for

    oc = _sample("ocean_cyclone")
    k = list(oc.levels_pa).index(50000.0)
    d = diagnostics_for(oc, k, 1, None)
    parts = ageostrophic_parts(d.budget, d.grid.inverse_f)
    sx = sum(p.x for p in parts.values() if p.available)
    sy = sum(p.y for p in parts.values() if p.available)
    ua, va = d.u - d.ug, d.v - d.vg
    ok = np.isfinite(sx) & np.isfinite(ua)
    assert ok.sum() > 1000
    scale = np.nanmax(np.hypot(ua, va))
    assert np.nanmax(np.abs(sx - ua)[ok]) < 1e-9 * scale
    assert np.nanmax(np.abs(sy - va)[ok]) < 1e-9 * scale
    assert all(
        parts[n].available
        for n in ("tendency", "inertial_advective", "vertical_advection", "remainder")
    )


def test_on_a_steady_vortex_the_inertial_advective_part_carries_the_gradient_excess():
    # a Holland vortex in gradient balance, one time: V - Vg is the inertial-advective part
    # (the centripetal acceleration turned by 1/f); the remainder is small
    g, z, u, v = holland(step=0.05, half=3.0)
    d = _diag(g, z, u, v, 85000.0)
    r = analytic.great_circle_distance(20.0, 150.0, g.lat, g.lon, g.radius)
    rep = box_report(d, (r > 60e3) & (r < 250e3))
    parts = rep["ageostrophic_parts"]
    measured = parts["measured_rms"]
    inertial = parts["parts"]["inertial_advective"]["speed_rms"]
    assert parts["parts"]["tendency"]["speed_rms"] is None  # one time: no tendency
    assert "no tendency" in parts["parts"]["tendency"]["note"]
    assert abs(inertial - measured) < 0.1 * measured
    assert parts["parts"]["remainder"]["speed_rms"] < 0.1 * measured


# -- the rules of the systems issue, each shown saying yes and no ------------------------------


def _global(step=1.0):
    lat = np.arange(90.0, -90.01, -step)
    lon = np.arange(0.0, 360.0, step)
    return Grid.latlon(lat, lon)


def test_a_centre_between_grid_points_is_refined_below_the_grid():
    # a Gaussian low centred at 45.25N 19.75W on a half-degree grid: the grid's minimum is
    # 0.35 degrees away; the paraboloid through its neighbours puts it within a tenth of a cell
    lat = np.arange(30.0, 60.01, 0.5)
    lon = np.arange(-40.0, 0.01, 0.5)
    g = Grid.latlon(lat, lon)
    r = analytic.great_circle_distance(45.25, -19.75, g.lat, g.lon, g.radius)
    z = 5500.0 - 200.0 * np.exp(-((r / 600e3) ** 2))
    (low,) = find_closed_extrema(g, z, 50000.0, "low")
    r0, c0 = low.index
    assert abs(g.lat[r0, c0] - 45.25) == 0.25 and abs(g.lon[r0, c0] + 19.75) == 0.25
    assert abs(low.lat - 45.25) < 0.05 and abs(low.lon + 19.75) < 0.05


def test_a_high_is_bounded_by_the_share_of_the_globe_its_contour_may_enclose():
    # a broad high of 4000 km e-folding radius at 65N over a flat field: its outer contours
    # would enclose a fifth of the globe (without reaching the equator); with the tenth that
    # the rule allows, its outermost closed contour is a smaller one
    g = _global()
    r = analytic.great_circle_distance(65.0, 200.0, g.lat, g.lon, g.radius)
    z = 10400.0 + 300.0 * np.exp(-((r / 4000e3) ** 2))
    earth = 4 * math.pi * 6371.0087714**2
    (high,) = find_closed_extrema(g, z, 25000.0, "high")
    assert high.area_km2 <= 0.10 * earth
    (wide,) = find_closed_extrema(g, z, 25000.0, "high", max_share=0.5)
    assert wide.area_km2 > 0.15 * earth  # the rule said no to these wider contours
    assert wide.depth > high.depth


def test_a_contour_that_crosses_the_equator_does_not_close_a_system():
    # a high centred at 10N (1112 km from the equator), 1500 km e-folding radius: its
    # 10920 m contour (1640 km out) reaches into the southern hemisphere; its outermost
    # closed contour is the next, 11040 m (1070 km out), north of the equator
    g = _global()
    r = analytic.great_circle_distance(10.0, 100.0, g.lat, g.lon, g.radius)
    z = 10800.0 + 400.0 * np.exp(-((r / 1500e3) ** 2))
    (high,) = find_closed_extrema(g, z, 25000.0, "high")
    inside = high.inside
    assert inside.any() and g.lat[inside].min() >= 0.0 and high.outer_level == 11040.0
    assert high.region.south >= 0.0  # the region stays north
    # saying no: moved to 30N the same high keeps its wider contour (nothing to cross)
    r = analytic.great_circle_distance(30.0, 100.0, g.lat, g.lon, g.radius)
    (far,) = find_closed_extrema(g, 10800.0 + 400.0 * np.exp(-((r / 1500e3) ** 2)), 25000.0, "high")
    assert far.outer_level == 10920.0 and far.depth > high.depth


def test_a_latitude_band_is_no_closed_low_but_a_polar_cap_is():
    # heights lowest along 60N, all the way round (a band), and lowest at the pole (a cap)
    g = _global(2.0)
    band = 5500.0 + 150.0 * ((g.lat - 60.0) / 20.0) ** 2
    band = band + 0.0 * g.lon
    assert find_closed_extrema(g, band, 50000.0, "low") == []
    cap = 5000.0 + 400.0 * np.cos(np.deg2rad(g.lat)) ** 2 + 0.0 * g.lon
    lows = find_closed_extrema(g, cap, 50000.0, "low")
    assert [round(s.lat) for s in lows] == [90, -90] or sorted(round(s.lat) for s in lows) == [
        -90,
        90,
    ]


def test_a_tropical_cyclones_ring_of_wind_is_no_jet_streak_but_a_streak_far_away_is():
    # a Holland (1980) vortex: the strongest wind rings the centre 40 km out, outside the
    # centre's grid cell; it is the low's ring, not a jet streak (the ring rule saying yes)
    g, z, u, v = holland(step=0.05, half=4.0)
    found = find_systems(g, z, u, v, 85000.0)
    assert [s.kind for s in found] == ["low"]
    jets = find_jet_streaks(g, u, v, 85000.0)
    assert jets and great_circle_km_(jets[0], 150.0, 20.0) < 100.0  # the maximum is there
    # the ring rule saying no: a jet streak of 30 m/s added 1400 km from the centre is kept
    lat = np.arange(5.0, 45.01, 0.25)
    lon = np.arange(135.0, 175.01, 0.25)
    g2 = Grid.latlon(lat, lon)
    r = analytic.great_circle_distance(20.0, 150.0, g2.lat, g2.lon, g2.radius)
    z2 = 1500.0 - 300.0 * np.exp(-((r / 300e3) ** 2))
    streak = 30.0 * np.exp(-(((g2.lat - 32.6) / 1.5) ** 2) - ((g2.lon - 150.0) / 5.0) ** 2)
    found = find_systems(g2, z2, streak, 0.0 * streak, 85000.0)
    kinds = [s.kind for s in found]
    assert kinds.count("low") == 1 and kinds.count("jet_streak") == 1
    jet = next(s for s in found if s.kind == "jet_streak")
    assert abs(jet.lat - 32.6) < 0.3 and abs(jet.lon - 150.0) < 0.3


def great_circle_km_(s, lon, lat):
    from balance_core.region import great_circle_km

    return float(great_circle_km(lon, lat, s.lon, s.lat))


def test_a_streak_near_a_low_is_its_ring_only_within_its_circulation():
    # a low of 300 km e-folding radius, and a westerly streak 700 km south of it: within
    # RING_KM of the centre, blowing around it (tangential), but outside its outermost closed
    # contour and beyond 1.5 times its radius: a jet streak
    from balance_core.systems import RING_KM, is_ring

    lat = np.arange(20.0, 60.01, 0.25)
    lon = np.arange(-30.0, 30.01, 0.25)
    g = Grid.latlon(lat, lon)
    r = analytic.great_circle_distance(45.0, 0.0, g.lat, g.lon, g.radius)
    z = 5500.0 - 200.0 * np.exp(-((r / 300e3) ** 2))
    (low,) = find_closed_extrema(g, z, 50000.0, "low")
    for lat_jet, ring in ((38.7, False), (45.0 - 1.2, True)):
        streak = 35.0 * np.exp(-(((g.lat - lat_jet) / 1.0) ** 2) - (g.lon / 6.0) ** 2)
        (jet,) = find_jet_streaks(g, streak, 0.0 * streak, 50000.0)
        d = great_circle_km_(jet, low.lon, low.lat)
        assert d < RING_KM
        # 700 km away: outside the contour (radius about 420 km) and past 1.5 radii -> a streak;
        # 130 km away, inside the contour -> the low's ring
        assert is_ring(jet, low, streak, 0.0 * streak) is ring, (lat_jet, d, low.radius_km)


def test_a_jet_streaks_region_is_aligned_with_the_flow_big_enough_and_has_four_quadrants():
    from balance_core.region import Region
    from balance_core.systems import JET_MIN_HALF_LENGTH, JET_MIN_HALF_WIDTH, QUADRANTS

    # a south-westerly streak (blowing toward the north-east) on a 2.5-degree grid: its core is
    # a few points; the region is long along the flow, enough points for a verdict
    lat = np.arange(0.0, 80.01, 2.5)
    lon = np.arange(-100.0, 60.01, 2.5)
    g = Grid.latlon(lat, lon)
    x = (g.lon + 20.0) * np.cos(np.deg2rad(45.0))
    y = g.lat - 45.0
    along, across = (x + y) / math.sqrt(2), (y - x) / math.sqrt(2)
    speed = 60.0 * np.exp(-((along / 8.0) ** 2) - (across / 3.0) ** 2)
    u = speed / math.sqrt(2)
    v = speed / math.sqrt(2)
    (jet,) = find_jet_streaks(g, u, v, 25000.0)
    assert jet.region.kind == "polygon"
    assert abs(jet.frame["direction_deg"] - 45.0) < 1.0
    spacing = math.sqrt(np.nanmedian(g.cell_area)) / 1e3
    assert jet.frame["half_length_km"] >= JET_MIN_HALF_LENGTH * spacing - 1e-6
    assert jet.frame["half_width_km"] >= JET_MIN_HALF_WIDTH * spacing - 1e-6
    assert jet.frame["half_length_km"] > jet.frame["half_width_km"]
    assert jet.region.mask(g).sum() >= 25  # the verdict's least number of points
    # quadrants: entrance upstream (south-west), exit downstream; left of the flow north-west
    assert set(jet.quadrants) == set(QUADRANTS)
    centroid = {
        q: (
            np.mean([c[0] for c in jet.frame["quadrants"][q]]),
            np.mean([c[1] for c in jet.frame["quadrants"][q]]),
        )
        for q in QUADRANTS
    }
    el, er = centroid["entrance_left"], centroid["entrance_right"]
    xl, xr = centroid["exit_left"], centroid["exit_right"]
    assert xl[0] + xl[1] > el[0] + el[1] and xr[0] + xr[1] > er[0] + er[1]  # exit downstream
    assert el[1] - el[0] > er[1] - er[0] and xl[1] - xl[0] > xr[1] - xr[0]  # left: north-west
    for q in QUADRANTS:
        assert isinstance(jet.quadrants[q], Region) and jet.quadrants[q].mask(g).any()


def test_a_streak_moving_one_grid_column_a_step_on_a_ten_degree_grid_is_tracked():
    from balance_core.systems import track_limit_km

    # a streak at 40N moving east one 10-degree column (850 km) in 6 h
    lat = np.arange(-80.0, 80.01, 10.0)
    lon = np.arange(0.0, 360.0, 10.0)
    g = Grid.latlon(lat, lon)
    spacing = math.sqrt(np.nanmedian(g.cell_area)) / 1e3
    by_time = []
    for step in range(3):
        peak_lon = 100.0 + 10.0 * step
        speed = 50.0 * np.exp(
            -(((g.lat - 40.0) / 10.0) ** 2) - (((g.lon - peak_lon + 180) % 360 - 180) / 15.0) ** 2
        )
        by_time.append(find_jet_streaks(g, speed, 0.0 * speed, 25000.0))
    assert all(len(s) == 1 for s in by_time)
    moved = great_circle_km_(by_time[1][0], by_time[0][0].lon, by_time[0][0].lat)
    assert moved > 600.0  # more than the speed rule allows in 6 h (100 km/h)
    tracks = match_tracks(by_time, [0.0, 6.0, 12.0], spacing)
    assert [(0, 0), (1, 0), (2, 0)] in tracks
    assert track_limit_km(6.0, spacing) >= 1.5 * spacing
    # saying no: without the grid spacing the speed rule alone breaks the track
    assert [(0, 0), (1, 0), (2, 0)] not in match_tracks(by_time, [0.0, 6.0, 12.0])


def test_a_file_with_heights_and_no_wind_gets_its_lows_and_highs():
    path = samples.need(samples.ERA5)
    from balance_core.io import analyze_systems, open_case

    case = open_case(path)
    assert "u" not in case.data  # the ERA5 sample carries geopotential and temperature only
    out = analyze_systems(case, 500.0, 0)
    kinds = {s["kind"] for s in out["systems"]}
    assert kinds == {"low", "high"}  # and no jet streak without wind
    assert out["rules"]["jet_threshold_ms"] is None
    assert any("no wind" in n for n in out["notes"])
    for s in out["systems"]:
        rep = s["report"]
        assert rep["verdict"]["balance"] == "none"
        assert "no momentum budget" in rep["verdict"]["text"]
        if rep["points"]:
            assert rep["winds"]["geostrophic_speed_rms"] > 1.0


def test_valid_times_of_different_runs_are_said_to_be_so(tmp_path):
    import xarray as xr

    from balance_core.io import analyze_case, open_case, track_systems
    from testkit import makedata

    lat = np.arange(20.0, 70.01, 2.0)
    lon = np.arange(-60.0, 20.01, 2.0)
    ds, _ = makedata.latlon_dataset(lat, lon)
    a = ds.isel(time=[0, 1]).assign(forecast_reference_time=np.datetime64("2040-02-02T18:00"))
    b = ds.isel(time=[2]).assign(forecast_reference_time=np.datetime64("2040-02-03T06:00"))
    pa, pb = tmp_path / "run_a.nc", tmp_path / "run_b.nc"
    a.to_netcdf(pa)
    b.to_netcdf(pb)
    case = open_case([str(pa), str(pb)])
    rep = analyze_case(case, 500.0, 1, (-40, 0, 35, 55))
    assert any("2 model runs" in n for n in rep["notes"]), rep["notes"]
    tr = track_systems(case, 500.0)
    assert any("2 model runs" in n for n in tr["notes"])
    # saying no: one run, no sentence
    one = open_case(str(pa))
    assert not any(
        "model runs" in n for n in analyze_case(one, 500.0, 1, (-40, 0, 35, 55))["notes"]
    )
    assert xr is not None


def test_a_region_that_would_cross_the_equator_is_cut_back_to_it():
    # a high at 8N, long along the equator (3000 km) and narrow across it (400 km): none of
    # its contours crosses the equator, but the circle of its outer contour's area would
    g = _global(0.5)
    dx = np.deg2rad(((g.lon - 100.0) + 180) % 360 - 180) * g.radius * np.cos(np.deg2rad(8.0))
    dy = np.deg2rad(g.lat - 8.0) * g.radius
    z = 10800.0 + 400.0 * np.exp(-((dx / 3000e3) ** 2) - (dy / 400e3) ** 2)
    (high,) = find_closed_extrema(g, z, 25000.0, "high")
    assert g.lat[high.inside].min() > 0.0
    assert high.radius_km > 890.0  # the circle of the contour's area
    assert "cut back to the equator" in high.note
    assert high.region.radius_km == pytest.approx(8.0 * math.pi / 180 * g.radius / 1e3, rel=1e-3)
    assert high.region.south >= -1e-9


def test_two_runs_at_the_same_valid_time_are_refused_with_a_sentence(tmp_path):
    from balance_core.io import CaseError, open_case
    from testkit import makedata

    lat = np.arange(20.0, 70.01, 2.0)
    lon = np.arange(-60.0, 20.01, 2.0)
    ds, _ = makedata.latlon_dataset(lat, lon)
    a = ds.isel(time=[1]).assign(forecast_reference_time=np.datetime64("2040-02-02T18:00"))
    b = ds.isel(time=[1]).assign(forecast_reference_time=np.datetime64("2040-02-03T00:00"))
    a.to_netcdf(tmp_path / "a.nc")
    b.to_netcdf(tmp_path / "b.nc")
    with pytest.raises(CaseError, match="two model runs"):
        open_case([str(tmp_path / "a.nc"), str(tmp_path / "b.nc")])
