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
from balance_core.systems import (System, contour_interval, find_closed_extrema,
                                  find_jet_streaks, find_systems, jet_threshold, match_tracks)

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
G0 = 9.80665


def _diag(grid, z, u, v, p):
    f = Fields(u=u[None, None], v=v[None, None], height=z[None, None],
               pressure=np.array([p]), time=None)
    return level_diagnostics(grid, f, 0, 0)


def holland(step=0.1, lat0=20.0, lon0=150.0, dp=4000.0, rmax=40e3, b=1.5, rho=1.15,
            half=6.0):
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
    z = 5500.0 - 200.0 * np.exp(-(r1 / 600e3) ** 2) + 180.0 * np.exp(-(r2 / 500e3) ** 2)
    lows = find_closed_extrema(g, z, 50000.0, "low")
    highs = find_closed_extrema(g, z, 50000.0, "high")
    assert [(s.lon, s.lat) for s in lows] == [(-20.0, 45.0)]
    assert [(s.lon, s.lat) for s in highs] == [(5.0, 42.0)]
    assert 140.0 <= lows[0].depth <= 200.0 and 120.0 <= highs[0].depth <= 180.0


def test_a_low_that_reaches_the_edge_of_the_data_is_not_closed():
    lat = np.arange(30.0, 60.01, 0.5)
    lon = np.arange(-40.0, 20.01, 0.5)
    g = Grid.latlon(lat, lon)
    r1 = analytic.great_circle_distance(45.0, -39.0, g.lat, g.lon, g.radius)  # at the edge
    z = 5500.0 - 200.0 * np.exp(-(r1 / 600e3) ** 2)
    assert find_closed_extrema(g, z, 50000.0, "low") == []


def test_williamson_case_2_has_no_closed_low_or_high():
    # Williamson et al. (1992), J. Comput. Phys. 102, 211-224, test case 2 with alpha = 0
    case = analytic.williamson_case2(91, alpha=0.0)
    z = case.geopotential / G0
    assert find_closed_extrema(case.grid, z, 50000.0, "low", interval=60.0) == []
    assert find_closed_extrema(case.grid, z, 50000.0, "high", interval=60.0) == []


def test_a_streak_on_a_zonal_jet_is_found_at_its_peak():
    lat = np.arange(10.0, 80.01, 0.5)
    lon = np.arange(-100.0, 60.01, 0.5)
    g = Grid.latlon(lat, lon)
    jet = np.exp(-((g.lat - 45.0) / 8.0) ** 2)
    streak = np.exp(-((g.lon + 20.0) / 15.0) ** 2)
    u = 25.0 * jet + 30.0 * jet * streak   # 55 m/s at (20W, 45N); 25 m/s elsewhere on the jet
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

        return System(kind, lon, lat, 0.0, 60.0, 0.0, 1.0, Region.circle(lon, lat, 100.0),
                      (0, 0))
    times = [[sys_("low", -40, 50), sys_("high", 0, 40)],
             [sys_("high", 1, 40), sys_("low", -37, 50)],    # moved about 210 km in 6 h
             [sys_("low", -20, 50)]]                         # 1200 km in 6 h: a new system
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


REAL = [(os.path.join(ROOT, ".cache", "cfgrib-samples", "era5-levels-members.grib"), 50000.0),
        (os.path.join(ROOT, ".cache", "pygrib-samples", "eta.grb"), 50000.0),
        (os.path.join(ROOT, ".cache", "pygrib-samples", "gfs.t12z.pgrbf120.2p5deg.grib2"),
         50000.0),
        (os.path.join(ROOT, ".cache", "pygrib-samples", "gfs.t12z.pgrbf120.2p5deg.grib2"),
         85000.0)]


@pytest.mark.parametrize("path, level", REAL, ids=[f"{os.path.basename(p)}-{int(lv / 100)}"
                                                   for p, lv in REAL])
def test_every_low_found_in_real_data_is_a_minimum_inside_a_closed_contour(path, level):
    if not os.path.exists(path):
        if os.environ.get("CI"):
            pytest.fail(f"{path} is missing: make test fetches it", pytrace=False)
        pytest.skip(f"{path} is missing (make test fetches it)")
    from balance_core.io import open_case

    case = open_case(path)
    k = int(np.argmin(np.abs(np.asarray(case.levels_pa) - level)))
    z = np.asarray(case.data["height"].isel(time=0, level=k).values, dtype=np.float64)
    periodic = bool(case.grid.periodic)
    lows = find_closed_extrema(case.grid, z, case.levels_pa[k], "low")
    highs = find_closed_extrema(case.grid, z, case.levels_pa[k], "high")
    if "gfs" in path:  # a global chart has closed systems (common practice, no source)
        assert lows and highs
    for s in lows:
        r, c = s.index
        win = z[max(r - 1, 0):r + 2, max(c - 1, 0):c + 2]
        assert z[r, c] == np.nanmin(win)  # a local minimum of the data
        # just under the outermost closed contour's height, a closed contour around it
        assert _closed_contour_around(z, s.outer_level - 1e-6, r, c, periodic), (s.lon, s.lat)
    for s in highs:
        r, c = s.index
        assert _closed_contour_around(-z, -s.outer_level - 1e-6, r, c, periodic), \
            (s.lon, s.lat)


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
    assert all(parts[n].available for n in ("tendency", "inertial_advective",
                                            "vertical_advection", "remainder"))


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
