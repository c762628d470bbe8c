"""Nondimensional numbers and N^2, against MetPy and closed forms."""

import numpy as np
import pytest

from balance_core import constants as C
from balance_core import numbers as nb
from balance_core.thermo import potential_temperature

mpcalc = pytest.importorskip("metpy.calc")
units = pytest.importorskip("metpy.units").units


def test_potential_temperature_matches_metpy():
    # MetPy uses the same R_d / c_p (2/7) and p0 (1000 hPa): agreement to rounding.
    p = np.array([100000, 85000, 50000, 25000.0])
    t = np.array([288.0, 280.0, 255.0, 225.0])
    ref = mpcalc.potential_temperature(p * units.Pa, t * units.K).m
    np.testing.assert_allclose(potential_temperature(t, p), ref, rtol=1e-12)


def _lapse_rate_column(p_levels, t0=288.15, lapse=0.0065):
    """A column with constant lapse rate: z, T at the given pressures (hydrostatic, exact)."""
    expo = C.R_DRY * lapse / C.G0
    t = t0 * (p_levels / 101325.0) ** expo
    z = (t0 - t) / lapse
    return z, t


def test_brunt_vaisala_matches_metpy_and_closed_form():
    # Constant lapse rate Gamma: N^2 = (g / T) (g / c_p - Gamma) (common practice,
    # no source). Ours differentiates ln(theta) against ln(p), both linear in ln(p)
    # for a constant lapse rate, so it is exact on any levels; MetPy
    # (brunt_vaisala_frequency_squared) works on heights with a dtheta/dz stencil,
    # which converges at second order. They agree to 1 % on 32 levels.
    errs_ours, errs_metpy = [], []
    for n in (4, 8, 16, 32):
        p = np.geomspace(100000.0, 30000.0, n)
        z, t = _lapse_rate_column(p)
        exact = C.G0 / t * (C.G0 / C.CP_DRY - 0.0065)
        ours = nb.brunt_vaisala_squared(t, p, axis=0)
        theta = potential_temperature(t, p)
        ref = mpcalc.brunt_vaisala_frequency_squared(z * units.m, theta * units.K).m
        errs_ours.append(np.abs(ours / exact - 1).max())
        errs_metpy.append(np.abs(ref / exact - 1).max())
        if n == 32:
            np.testing.assert_allclose(ours, ref, rtol=1e-2)
    assert max(errs_ours) < 1e-12, errs_ours  # exact, even with 4 uneven levels
    assert errs_metpy[-1] < errs_metpy[1] / 8, errs_metpy  # MetPy: second order


def test_brunt_vaisala_dtheta_dp_form_is_not_exact():
    # The reason for the ln-ln form: the same column differenced as dtheta/dp on 4
    # levels errs by more than 1 % (so the test above can tell the two apart).
    p = np.geomspace(100000.0, 30000.0, 4)
    z, t = _lapse_rate_column(p)
    exact = C.G0 / t * (C.G0 / C.CP_DRY - 0.0065)
    theta = potential_temperature(t, p)
    naive = -(C.G0**2) * p / (C.R_DRY * t * theta) * np.gradient(theta, p, edge_order=2)
    assert np.abs(naive / exact - 1).max() > 1e-2


def test_rossby_and_ekman():
    assert nb.rossby_number(10.0, 1e-4, 1e6) == pytest.approx(0.1)
    assert nb.ekman_number(1e-5, 1e-4, 1e4) == pytest.approx(1e-9)
    assert np.isnan(nb.rossby_number(10.0, 0.0, 1e6))


def test_stratified_numbers_null_where_unstable():
    n2 = np.array([1e-4, 0.0, -1e-5])
    fr = nb.froude_number(10.0, n2, 1e4)
    bu = nb.burger_number(n2, 1e4, 1e-4, 1e6)
    lr = nb.deformation_radius(n2, 1e4, 1e-4)
    assert fr[0] == pytest.approx(0.1) and np.isnan(fr[1:]).all()
    assert bu[0] == pytest.approx(1.0) and np.isnan(bu[1:]).all()
    assert lr[0] == pytest.approx(1e6) and np.isnan(lr[1:]).all()


def test_richardson_number_against_metpy():
    # Ri = N^2 / |dV/dz|^2: ours on pressure levels against MetPy's
    # gradient_richardson_number on heights (different stencils; agree to 3 %).
    p = np.geomspace(100000.0, 30000.0, 40)
    z, t = _lapse_rate_column(p)
    u = 5 + 2e-3 * z
    v = 1e-3 * z
    theta = potential_temperature(t, p)
    n2 = nb.brunt_vaisala_squared(t, p)
    ri = nb.richardson_number(n2, nb.vertical_shear_squared(u, v, t, p))
    ref = mpcalc.gradient_richardson_number(
        z * units.m, theta * units.K, u * units("m/s"), v * units("m/s")
    ).m
    np.testing.assert_allclose(ri[1:-1], ref[1:-1], rtol=3e-2)


def test_local_rossby_numbers():
    assert nb.local_rossby_vorticity(2e-5, -1e-4) == pytest.approx(0.2)
    val = nb.local_rossby_acceleration(np.array(3e-4), np.array(4e-4), 1e-4, 10.0, 0.0)
    assert val == pytest.approx(0.5)


# -- the textbook numbers in a region's report, against hand computations -----------------------


def test_the_reports_textbook_numbers_against_hand_computations():
    # An isothermal atmosphere at 250 K: N^2 = g^2 / (c_p T) exactly (Holton and Hakim 2013,
    # ch. 2: dtheta/dz = theta g / (c_p T) when dT/dz = 0). A uniform westerly of 20 m/s in
    # geostrophic balance on an f-plane at 45N. With H the depth of the troposphere
    # (10 km, Holton and Hakim 2013) and the eddy viscosity 10 m2 s-1:
    # Fr = U / (N H), Bu = (N H / (f0 L))^2, L_R = N H / f0, Ek = nu / (f0 H^2).
    import math

    from balance_core import Fields, Grid
    from balance_core import constants as C
    from balance_core.report import box_report, level_diagnostics

    g = Grid.latlon(np.linspace(40, 50, 41), np.linspace(-10, 10, 81)).f_plane(45.0)
    f0 = float(g.f[0, 0])
    T, U = 250.0, 20.0
    p = np.array([60000.0, 50000.0, 40000.0])
    y = np.deg2rad(g.lat - 45.0) * g.radius
    z = np.stack([C.R_DRY * T / C.G0 * np.log(1e5 / pk) - f0 * U / C.G0 * y for pk in p])
    u = np.full(z.shape, U)
    fields = Fields(u[None], 0 * u[None], z[None], p, None, None, np.full(z[None].shape, T))
    d = level_diagnostics(g, fields, 0, 1)
    inside = (np.abs(g.lat - 45) < 4) & (np.abs(g.lon) < 8)
    rep = box_report(d, inside)
    n = math.sqrt(C.G0**2 / (C.CP_DRY * T))  # by hand
    H, nu = 1.0e4, 10.0
    L = rep["scales"]["L"]
    assert rep["scales"]["H"] == H and rep["scales"]["U"] == pytest.approx(U)
    num = rep["numbers"]
    assert num["froude"] == pytest.approx(U / (n * H), rel=1e-3)
    assert num["deformation_radius_km"] == pytest.approx(n * H / abs(f0) / 1e3, rel=1e-3)
    assert num["burger"] == pytest.approx((n * H / (abs(f0) * L)) ** 2, rel=1e-3)
    assert num["ekman"] == pytest.approx(nu / (abs(f0) * H**2), rel=1e-9)
    # the data's own beside them, under their own names: no shear, no shear depth
    assert num["shear_depth_km"] is None
    mags = {t["name"]: t["magnitude"] for t in rep["terms"]}
    assert num["residual_to_coriolis"] == pytest.approx(mags["residual"] / mags["coriolis"])


def test_the_isallobaric_wind_of_a_travelling_height_wave():
    # Z = Z0 + A cos(k x - w t) on an f-plane: dZ/dt = A w sin(k x - w t), and the isallobaric
    # wind -(g/f^2) grad(dZ/dt) = (-(g/f^2) A w k cos(k x - w t), 0) (Holton and Hakim 2013,
    # ch. 6, the isallobaric wind), in closed form here
    from balance_core import Fields, Grid
    from balance_core import constants as C
    from balance_core.budget import isallobaric_wind
    from balance_core.report import level_diagnostics

    g = Grid.latlon(np.linspace(40, 50, 101), np.linspace(-30, 30, 601)).f_plane(45.0)
    f0 = float(g.f[0, 0])
    x = np.deg2rad(g.lon) * g.radius * np.cos(np.deg2rad(45.0))
    k, w, A = 2 * np.pi / 3.0e6, 2 * np.pi / (5 * 86400.0), 100.0
    # x is measured along 45N; on a row at latitude phi an east step is cos(phi)/cos(45) as long
    stretch = np.cos(np.deg2rad(45.0)) / np.cos(np.deg2rad(g.lat))
    truth_u = -(C.G0 / f0**2) * A * w * k * stretch * np.cos(k * x)
    ix, iy = isallobaric_wind(g, A * w * np.sin(k * x))
    inner = slice(None), slice(5, -5)
    scale = np.abs(truth_u).max()
    assert np.nanmax(np.abs(ix - truth_u)[inner]) < 0.01 * scale
    assert np.nanmax(np.abs(iy)[inner]) < 1e-6 * scale
    # through a level's diagnostics: the height tendency from three times an hour apart
    t = np.array([-3600.0, 0.0, 3600.0])
    z = np.stack([5500 + A * np.cos(k * x - w * tt) for tt in t])[:, None]
    u = np.full(z.shape, 10.0)
    d = level_diagnostics(g, Fields(u, 0 * u, z, [50000.0], t), 1, 0)
    assert np.nanmax(np.abs(d.height_tendency - A * w * np.sin(k * x))) < 1e-3 * A * w
