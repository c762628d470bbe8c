"""Winds against MetPy (a reference library from the package index) and closed forms."""

import warnings

import numpy as np
import pyproj
import pytest

from balance_core import Flow, Grid, analytic, thermo
from balance_core import constants as C
from balance_core.grid import coriolis_parameter
from balance_core.winds import (
    geostrophic_wind,
    gradient_wind,
    gradient_wind_from_pressure,
    thermal_wind,
    thermal_wind_from_temperature,
)

mpcalc = pytest.importorskip("metpy.calc")
units = pytest.importorskip("metpy.units").units

SPHERE = pyproj.CRS.from_proj4(f"+proj=longlat +R={C.EARTH_RADIUS}")


def _sphere_deltas(lon, lat):
    return mpcalc.lat_lon_grid_deltas(
        lon, lat, geod=pyproj.Geod(a=C.EARTH_RADIUS, b=C.EARTH_RADIUS)
    )


@pytest.fixture(autouse=True)
def _quiet():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # MetPy divides by zero at the equator row
        yield


def _globe(step):
    lat = np.arange(-80, 80 + 1e-9, step)
    lon = np.arange(0, 360, step)
    return lat, lon, Grid.latlon(lat, lon)


def test_coriolis_parameter_matches_metpy():
    # MetPy's coriolis_parameter uses the same Omega (7.292115e-5 rad/s): to rounding.
    lat = np.linspace(-90, 90, 19)
    np.testing.assert_allclose(
        coriolis_parameter(lat),
        mpcalc.coriolis_parameter(lat * units.degree).m,
        rtol=1e-12,
        atol=1e-20,
    )


def test_geostrophic_wind_matches_metpy():
    # MetPy geostrophic_wind with grid spacings from lat_lon_grid_deltas on the
    # same sphere. Tolerance 2e-4 relative: MetPy's dx is the geodesic (great-circle)
    # distance between neighbours, ours the arc along the parallel, which differ by
    # about (dlambda sin(phi))^2 / 24; columns at the x edges are left out because
    # MetPy does not wrap around the globe.
    lat, lon, g = _globe(1.0)
    phi, lam = np.deg2rad(g.lat), np.deg2rad(g.lon)
    z = 5500 + 150 * np.sin(phi) ** 2 * np.cos(3 * lam) + 40 * np.cos(2 * phi)
    dx, dy = _sphere_deltas(lon, lat)
    mu, mv = mpcalc.geostrophic_wind(
        z * units.m, dx=dx, dy=dy, latitude=lat[:, None] * units.degree
    )
    ug, vg = geostrophic_wind(g, z)
    ok = ~g.tropics_mask
    ok[:, [0, -1]] = False
    scale = np.nanmax(np.hypot(ug, vg))
    assert np.abs(mu.m - ug)[ok].max() / scale < 2e-4
    assert np.abs(mv.m - vg)[ok].max() / scale < 2e-4
    assert np.isnan(ug[g.tropics_mask]).all()


@pytest.mark.parametrize("which", ["vorticity", "divergence"])
def test_vorticity_divergence_both_converge_to_analytic(which):
    # Our metric-term form and MetPy's map-factor form use different stencils,
    # so compare each with the closed form on three grids: both must converge at
    # about second order and agree with each other ever better.
    # Closed forms for u = 20 cos(phi) + 5 sin(2 lam) cos^2(phi), v = 3 cos(lam) cos(phi):
    #   zeta  = (-3 sin(lam) + 40 sin(phi) + 15 sin(2 lam) cos(phi) sin(phi)) / a
    #   delta = (10 cos(2 lam) cos(phi) - 6 cos(lam) sin(phi)) / a   (common practice, no source)
    ours, theirs = [], []
    for step in (2.0, 1.0, 0.5):
        lat, lon, g = _globe(step)
        phi, lam = np.deg2rad(g.lat), np.deg2rad(g.lon)
        u = 20 * np.cos(phi) + 5 * np.sin(2 * lam) * np.cos(phi) ** 2
        v = 3 * np.cos(lam) * np.cos(phi)
        if which == "vorticity":
            exact = (
                -3 * np.sin(lam)
                + 40 * np.sin(phi)
                + 15 * np.sin(2 * lam) * np.cos(phi) * np.sin(phi)
            ) / g.radius
            mine = Flow(g, u, v).vorticity
            ref = mpcalc.vorticity(
                u * units("m/s"),
                v * units("m/s"),
                latitude=lat * units.degree,
                longitude=lon * units.degree,
                crs=SPHERE,
            ).m
        else:
            exact = (10 * np.cos(2 * lam) * np.cos(phi) - 6 * np.cos(lam) * np.sin(phi)) / g.radius
            mine = Flow(g, u, v).divergence
            ref = mpcalc.divergence(
                u * units("m/s"),
                v * units("m/s"),
                latitude=lat * units.degree,
                longitude=lon * units.degree,
                crs=SPHERE,
            ).m
        inner = (slice(1, -1), slice(1, -1))
        s = np.abs(exact).max()
        ours.append(np.abs(mine - exact)[inner].max() / s)
        theirs.append(np.abs(ref - exact)[inner].max() / s)
    for errs in (ours, theirs):
        rates = np.log2(np.array(errs[:-1]) / np.array(errs[1:]))
        assert np.all(rates > 1.7), (which, errs)
    assert ours[-1] < 1e-4 and theirs[-1] < 2e-3


def test_advection_matches_metpy():
    # MetPy's advection(s, u, v) is -(u ds/dx + v ds/dy) for a scalar s: the same
    # as our x-momentum horizontal_advection with s = u. On the sphere with
    # MetPy's map factors; tolerance 1e-3 of the largest value (stencils of the
    # map-factor form differ at second order, see the vorticity test).
    lat, lon, g = _globe(1.0)
    phi, lam = np.deg2rad(g.lat), np.deg2rad(g.lon)
    u = 20 * np.cos(phi) + 5 * np.sin(2 * lam) * np.cos(phi) ** 2
    v = 3 * np.cos(lam) * np.cos(phi)
    ax, _ = Flow(g, u, v).advection
    ref = mpcalc.advection(
        u * units("m/s"),
        u * units("m/s"),
        v * units("m/s"),
        latitude=lat * units.degree,
        longitude=lon * units.degree,
        crs=SPHERE,
    ).m
    inner = (slice(1, -1), slice(1, -1))
    assert np.abs(-ax - ref)[inner].max() / np.abs(ax).max() < 1e-3


def test_thermal_wind_thickness_equals_temperature_form():
    # With the thickness built by the hypsometric equation from a layer-mean
    # temperature, the two forms of the thermal wind agree to rounding
    # (American Meteorological Society, Glossary of Meteorology, "thermal wind").
    lat, lon, g = _globe(2.0)
    phi, lam = np.deg2rad(g.lat), np.deg2rad(g.lon)
    t_mean = 260 + 15 * np.cos(phi) ** 2 + 3 * np.sin(2 * lam) * np.cos(phi)
    thick = thermo.hypsometric_thickness(t_mean, 85000.0, 50000.0)
    z_bot = 1500 + 30 * np.sin(lam)
    a = thermal_wind(g, z_bot + thick, z_bot)
    b = thermal_wind_from_temperature(g, t_mean, 85000.0, 50000.0)
    d = thermal_wind(g, z_bot + thick, z_bot)[0] - b[0]
    ok = ~g.tropics_mask
    np.testing.assert_allclose(a[0][ok], b[0][ok], rtol=1e-9)
    np.testing.assert_allclose(a[1][ok], b[1][ok], rtol=1e-9)
    assert np.isnan(d[g.tropics_mask]).all()


def test_gradient_wind_matches_holland_1980():
    # Holland (1980), Mon. Wea. Rev. 108, 1212-1218: the parametric profile's
    # gradient wind against ours from the 2-D contour curvature, on an f-plane
    # (the formula assumes constant f). Tolerance 3 % of Vmax beyond three grid
    # lengths, 2 % relative beyond R_max: the eye wall is resolved by 7 points.
    from app.verify import holland_errors

    e = holland_errors(0.05)
    assert e["max_error_over_vmax"] < 0.03
    assert e["max_relative_error_outside_rmax"] < 0.02
    assert e["no_root_points"] == 0
    # and the error falls with resolution (second order beyond R_max)
    coarse = holland_errors(0.1)["max_relative_error_outside_rmax"]
    assert coarse / e["max_relative_error_outside_rmax"] > 3


def _vortex(lat0, f=None, sign=-1.0, step=0.05, dp=3000.0):
    lat = np.arange(lat0 - 3, lat0 + 3 + 1e-9, step)
    lon = np.arange(100, 106 + 1e-9, step)
    g = Grid.latlon(lat, lon)
    g = g.with_coriolis(np.full(g.shape, coriolis_parameter(lat0) if f is None else f))
    r = analytic.great_circle_distance(lat0, 103.0, g.lat, g.lon, g.radius)
    p = 100000 + sign * dp * np.exp(-((r / 1.5e5) ** 2))
    return g, r, p


def test_cyclostrophic_limit_at_zero_f():
    # With f = 0 the gradient wind is cyclostrophic, V^2 / R = -dPhi/dn
    # (Holton and Hakim 2013, ch. 3): compare with Holland's formula at f = 0.
    dp, rmax, b, rho = 3000.0, 40e3, 1.5, 1.15
    g, r, _ = _vortex(0.0, f=0.0)
    p = analytic.holland_pressure(r, 97000.0, dp, rmax, b)
    gw = gradient_wind_from_pressure(g, p, rho)
    ref = analytic.holland_gradient_wind(r, dp, rmax, b, rho, 0.0)
    sel = (r > rmax) & (r < 2.5e5)
    assert np.nanmax(np.abs(gw.speed - ref)[sel] / ref[sel]) < 0.02
    assert gw.no_root_count == 0


def test_strong_high_flags_points_without_a_root():
    # Anticyclonic curvature too strong for the pressure gradient: no real root;
    # flagged in no_root, never filled in (Holton and Hakim 2013, ch. 3).
    g, r, p = _vortex(30.0, sign=+1.0, dp=3000.0)
    gw = gradient_wind_from_pressure(g, p, 1.2)
    assert gw.no_root_count > 0
    assert np.isnan(gw.speed[gw.no_root]).all()
    # a weak high: dp < f^2 rho L^2 / 8 (about 18 Pa here) keeps a real root everywhere
    weak = gradient_wind_from_pressure(*_vortex(30.0, sign=+1.0, dp=10.0)[::2], 1.2)
    assert weak.no_root_count == 0


def test_gradient_wind_same_in_both_hemispheres():
    # A low mirrored across the equator has the same gradient-wind speed; its
    # flow turns the other way (cyclonic is clockwise in the south).
    gn, rn, pn = _vortex(25.0)
    gs, rs, ps = _vortex(-25.0)
    wn = gradient_wind_from_pressure(gn, pn, 1.2)
    ws = gradient_wind_from_pressure(gs, ps, 1.2)
    # both grids' rows ascend: row j in the north mirrors row n-1-j in the south
    np.testing.assert_allclose(wn.speed, ws.speed[::-1], rtol=1e-9, atol=1e-9)
    ok = np.isfinite(wn.radius)
    assert np.all(wn.radius[ok] * gn.f[ok] > 0)  # f R > 0: cyclonic in the north
    ok = np.isfinite(ws.radius)
    assert np.all(ws.radius[ok] * gs.f[ok] > 0)  # and in the south
    centre = tuple(np.array(gn.shape) // 2)
    east = (centre[0], centre[1] + 20)
    assert wn.v[east] > 0  # counter-clockwise in the north: northward east of the low
    assert ws.v[::-1][east] < 0  # clockwise in the south


def test_gradient_wind_tends_to_geostrophic_for_straight_contours():
    g = Grid.latlon(np.linspace(40, 50, 41), np.linspace(0, 20, 81))
    z = 5500 - 1e-4 * g.radius * np.deg2rad(g.lat)  # straight zonal contours
    gw = gradient_wind(g, z)
    ug, vg = geostrophic_wind(g, z)
    inner = (slice(2, -2), slice(2, -2))
    # small curvature remains: parallels curve on the sphere (tan(phi)/a)
    assert np.allclose(gw.u[inner], ug[inner], rtol=2e-2)


def test_straight_contours_on_the_equator_have_no_gradient_wind():
    """Where f = 0 and the contours are straight (meridians crossing the equator) the
    gradient-wind equation f V + K V^2 = -dPhi/dn has no root: the speed is NaN, quietly
    (Holton and Hakim 2013, ch. 3: neither the geostrophic nor the cyclostrophic limit holds)."""
    g = Grid.latlon(np.linspace(-10, 10, 41), np.linspace(0, 20, 81))
    z = 5500 + 1e-4 * g.radius * np.deg2rad(g.lon)  # height rising eastward: meridians
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        gw = gradient_wind(g, z)
    on = g.lat[:, 0] == 0.0
    assert on.sum() == 1
    inner = (on, slice(2, -2))  # the edge columns' one-sided differences leave a trace of curvature
    assert np.isnan(gw.speed[inner]).all() and np.isnan(gw.u[inner]).all()
    off = np.abs(g.lat[:, 0]) >= 2.0
    assert np.isfinite(gw.speed[off][:, 2:-2]).all()
