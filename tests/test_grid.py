"""Grid metrics and derivative operators."""

import numpy as np
import pyproj
import pytest

from balance_core.grid import Grid, Stencil, derivative_along, derivative_weights


def test_stencil_exact_for_quadratics_on_uneven_points(rng):
    # Three-point second-order weights are exact for polynomials of degree 2
    # (Fornberg 1988, Math. Comp. 51, 699-706), at the edges too.
    x = np.sort(rng.uniform(0, 10, 25))
    f = 3 * x**2 - 2 * x + 1
    for coord, vals in ((x, f), (x[::-1], f[::-1])):
        d = Stencil(coord, -1)(vals[None, :])[0]
        np.testing.assert_allclose(d, 6 * coord - 2, rtol=1e-10, atol=1e-9)


def test_derivative_weights_match_stencil(rng):
    x = np.sort(rng.uniform(0, 5, 9))
    f = np.sin(x)
    d = Stencil(x, -1)(f[None, :])[0]
    for i in range(x.size):
        ids, w = derivative_weights(x, i)
        assert np.isclose(sum(wi * f[j] for j, wi in zip(ids, w)), d[i], rtol=1e-12)


def test_periodic_stencil_is_second_order():
    # d/dlambda of sin on a periodic grid: error falls by 4 per halving.
    errs = []
    for n in (36, 72, 144):
        lam = np.arange(n) * 2 * np.pi / n
        d = Stencil(lam, -1, periodic=True, period=2 * np.pi)(np.sin(lam)[None, :])[0]
        errs.append(np.abs(d - np.cos(lam)).max())
    rates = np.log2(np.array(errs[:-1]) / np.array(errs[1:]))
    assert np.all((rates > 1.9) & (rates < 2.1)), rates


def test_linear_field_exact_on_latlon_grid():
    # A field linear in (lambda, phi): d/dx = c1 / (a cos phi), d/dy = c2 / a exactly
    # (common practice, no source: differences are exact for linear functions).
    g = Grid.latlon(np.linspace(-60, 70, 27), np.linspace(100, 170, 36))
    lam, phi = np.deg2rad(g.lon), np.deg2rad(g.lat)
    dzdx, dzdy = g.grad(10 + 4 * lam - 7 * phi)
    np.testing.assert_allclose(dzdx, 4 / (g.radius * np.cos(phi)), rtol=1e-11)
    np.testing.assert_allclose(dzdy, -7 / g.radius, rtol=1e-11)


def test_linear_field_exact_on_projected_grid():
    crs = pyproj.CRS.from_proj4("+proj=lcc +lat_1=45 +lat_2=45 +lat_0=45 +lon_0=0 +R=6371008.7714")
    x = np.arange(-5e5, 5e5 + 1, 5e4)
    y = np.arange(-4e5, 4e5 + 1, 5e4)
    g = Grid.projected(x, y, crs)
    X, Y = np.meshgrid(x, y)
    # d/dX = 2e-3 and d/dY = -1e-3 along the grid axes; rotate by gamma, scale by m.
    gx, gy = g.grad(2e-3 * X - 1e-3 * Y)
    m, gam = g.map_factor, np.deg2rad(g.convergence)
    ex = m * (2e-3 * np.cos(gam) - 1e-3 * np.sin(gam))
    ey = m * (-2e-3 * np.sin(gam) - 1e-3 * np.cos(gam))
    np.testing.assert_allclose(gx, ex, rtol=1e-9)
    np.testing.assert_allclose(gy, ey, rtol=1e-9)


def test_gaussian_latitudes_second_order():
    # Non-uniform (Gaussian) latitudes: d/dy of sin(2 phi) converges at second order.
    errs = []
    for n in (32, 64, 128):
        lat = np.rad2deg(np.arcsin(np.polynomial.legendre.leggauss(n)[0]))[::-1]
        g = Grid.latlon(lat, np.arange(0, 360, 360 / (2 * n)))
        phi = np.deg2rad(g.lat)
        err = np.abs(g.ddy(np.sin(2 * phi)) - 2 * np.cos(2 * phi) / g.radius)[2:-2]
        errs.append(err.max() * g.radius)
    rates = np.log2(np.array(errs[:-1]) / np.array(errs[1:]))
    assert np.all((rates > 1.8) & (rates < 2.3)), rates


def test_pressure_levels_uneven_exact_for_quadratics():
    p = np.array([100000, 92500, 85000, 70000, 50000, 30000, 25000.0])
    col = 1e-9 * p**2 - 3e-4 * p
    d = derivative_along(col[:, None, None] * np.ones((1, 2, 2)), p, 0)
    np.testing.assert_allclose(d[:, 0, 0], 2e-9 * p - 3e-4, rtol=1e-10)


def test_irregular_times_second_order():
    # Irregular steps (3 h then 6 h pattern): centred weights are second order.
    errs = []
    for h in (3600.0 * 3, 3600.0 * 1.5, 3600.0 * 0.75):
        t = np.cumsum([0, h, 2 * h, h, 2 * h])
        f = np.sin(t / 86400.0)
        ids, w = derivative_weights(t, 2)
        est = sum(wi * f[j] for j, wi in zip(ids, w))
        errs.append(abs(est - np.cos(t[2] / 86400.0) / 86400.0))
    rates = np.log2(np.array(errs[:-1]) / np.array(errs[1:]))
    assert np.all(rates > 1.8), rates


def test_lambert_rotation_angle_matches_closed_form():
    # For a tangent Lambert conformal projection the angle between grid north
    # and true north is n (lon - lon0), n = sin(lat_tangent) (Snyder 1987,
    # "Map Projections: A Working Manual", USGS Prof. Paper 1395, ch. 15).
    lat_t, lon0 = 50.0, 10.0
    crs = pyproj.CRS.from_proj4(
        f"+proj=lcc +lat_1={lat_t} +lat_2={lat_t} +lat_0={lat_t} +lon_0={lon0} +R=6371008.7714"
    )
    x = np.arange(-2e6, 2e6 + 1, 2e5)
    y = np.arange(-1.5e6, 1.5e6 + 1, 2e5)
    g = Grid.projected(x, y, crs)
    expected = np.sin(np.deg2rad(lat_t)) * (g.lon - lon0)
    np.testing.assert_allclose(g.convergence, expected, atol=1e-6)


def test_rotation_matches_finite_difference_of_projection():
    # Independent of pyproj's factors: move a little north and see where the
    # grid coordinates go; the angle of true north from grid north must agree.
    crs = pyproj.CRS.from_proj4("+proj=stere +lat_0=90 +lat_ts=60 +lon_0=-40 +R=6371008.7714")
    x = np.arange(-3e6, 3e6 + 1, 5e5)
    y = np.arange(-3e6, 3e6 + 1, 5e5)
    g = Grid.projected(x, y, crs)
    fwd = pyproj.Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True)
    x0, y0 = fwd.transform(g.lon, g.lat)
    x1, y1 = fwd.transform(g.lon, g.lat + 1e-4)
    angle = np.rad2deg(np.arctan2(-(x1 - x0), y1 - y0))
    off_pole = ~g.pole_mask
    np.testing.assert_allclose(g.convergence[off_pole], angle[off_pole], atol=1e-4)
    # at the pole east and north are undefined: the gradient is masked there
    assert g.pole_mask.sum() == 1
    assert np.isnan(g.grad(g.lat)[0][g.pole_mask]).all()


def test_projected_gradient_matches_latlon_gradient():
    # The same smooth field on a lat-lon grid and on a Lambert grid: the
    # east/north gradients agree to truncation at the shared points.
    crs = pyproj.CRS.from_proj4("+proj=lcc +lat_1=40 +lat_2=60 +lat_0=50 +lon_0=5 +R=6371008.7714")
    x = np.arange(-1e6, 1e6 + 1, 2.5e4)
    y = np.arange(-8e5, 8e5 + 1, 2.5e4)
    g = Grid.projected(x, y, crs)

    def field(lat, lon):
        return 5500 + 80 * np.sin(np.deg2rad(3 * lon)) * np.cos(np.deg2rad(2 * lat))

    def exact(lat, lon):
        phi, lam = np.deg2rad(lat), np.deg2rad(lon)
        dx = 80 * 3 * np.cos(3 * lam) * np.cos(2 * phi) / (g.radius * np.cos(phi))
        dy = -80 * 2 * np.sin(3 * lam) * np.sin(2 * phi) / g.radius
        return dx, dy

    gx, gy = g.grad(field(g.lat, g.lon))
    ex, ey = exact(g.lat, g.lon)
    scale = np.abs(ex).max()
    inner = (slice(1, -1), slice(1, -1))
    assert np.abs(gx - ex)[inner].max() / scale < 2e-3
    assert np.abs(gy - ey)[inner].max() / scale < 2e-3


def test_rows_band_matches_whole_grid():
    g = Grid.latlon(np.linspace(-80, 80, 33), np.arange(0, 360, 10.0))
    z = np.cos(np.deg2rad(g.lat)) ** 2 * np.sin(np.deg2rad(2 * g.lon))
    full = g.grad(z)
    band = g.rows(5, 20).grad(z[5:20])
    for a, b in zip(full, band):
        np.testing.assert_allclose(a[6:19], b[1:-1], rtol=1e-12)


@pytest.mark.parametrize(
    "lat",
    [
        np.linspace(90, -90, 721),  # 0.25 degree
        np.degrees(np.arcsin(np.polynomial.legendre.leggauss(96)[0])),
    ],
    ids=["quarter-degree", "gaussian-n48"],
)
def test_a_band_s_inner_derivatives_are_the_whole_grid_s_to_the_last_bit(lat):
    # a band's own spacings differ from the whole axis's by a rounding; with them the
    # band's derivatives differed in the 16th digit
    g = Grid.latlon(lat, np.arange(0, 360, 2.5))
    z = np.cos(np.deg2rad(g.lat)) ** 2 * np.sin(np.deg2rad(3 * g.lon)) * 1e4
    # (2, 40): a band whose first spacing differs from the axis's first by a rounding;
    # (40, 56): near the equator, where Gaussian latitudes are all but evenly spaced
    for j0, j1 in [(2, 40), (40, 56)]:
        full = g.grad(z)
        band = g.rows(j0, j1).grad(z[j0:j1])
        for a, b in zip(full, band):
            assert np.array_equal(a[j0 + 1 : j1 - 1], b[1:-1], equal_nan=True)


def test_cell_areas_sum_to_sphere():
    # 4 pi a^2 (exact for cells bounded by midpoints and the poles).
    g = Grid.latlon(np.linspace(-90, 90, 73), np.arange(0, 360, 2.5))
    assert np.isclose(g.cell_area.sum(), 4 * np.pi * g.radius**2, rtol=1e-12)


def test_masks_reported():
    g = Grid.latlon(np.linspace(-90, 90, 37), np.arange(0, 360, 10.0), min_lat=12)
    rep = g.mask_report()
    assert rep["pole_points"] == 2 * 36
    assert rep["tropics_points"] == 5 * 36  # the rows -10, -5, 0, 5, 10 lie within 12 deg
    assert np.isnan(g.inverse_f[g.tropics_mask]).all()
    assert np.isfinite(g.inverse_f[~g.tropics_mask]).all()


def test_masks_follow_overridden_f():
    # With a rotated Coriolis parameter the "equator" is where f vanishes.
    g = Grid.latlon(np.linspace(-80, 80, 17), np.arange(0, 360, 20.0))
    g2 = g.with_coriolis(np.full(g.shape, 1e-4))
    assert not g2.tropics_mask.any()
    fp = g.f_plane(45).f
    assert np.all(fp == fp[0, 0])
    beta = g.beta_plane(45).f
    assert np.all(np.diff(beta[:, 0]) > 0)


@pytest.mark.parametrize(
    "lat, lon, msg",
    [
        (np.array([0, 1, 1, 2.0]), np.arange(5.0), "latitude is not strictly monotonic"),
        (np.arange(5.0), np.array([0, 2, 1, 3, 4.0]), "longitude is not strictly monotonic"),
        (np.arange(5.0), np.arange(0, 361, 90.0), "cyclic point"),
        (np.arange(2.0), np.arange(5.0), "at least 3 x 3"),
        (np.array([80, 85, 95.0]), np.arange(5.0), "outside -90..90"),
    ],
)
def test_bad_coordinates_say_what_is_wrong(lat, lon, msg):
    with pytest.raises(ValueError, match=msg):
        Grid.latlon(lat, lon)


def test_field_shape_checked():
    g = Grid.latlon(np.linspace(0, 10, 5), np.linspace(0, 10, 6))
    with pytest.raises(ValueError, match="height has shape"):
        g.check_field(np.zeros((6, 5)), "height")


def test_periodic_detection_across_conventions():
    a = Grid.latlon(np.linspace(-80, 80, 9), np.arange(0, 360, 30.0))
    b = Grid.latlon(np.linspace(-80, 80, 9), np.arange(-180, 180, 30.0))
    c = Grid.latlon(np.linspace(-80, 80, 9), np.arange(0, 300, 30.0))
    assert a.periodic and b.periodic and not c.periodic
