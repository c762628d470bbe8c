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
    naive = -(C.G0 ** 2) * p / (C.R_DRY * t * theta) * np.gradient(theta, p, edge_order=2)
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
    ref = mpcalc.gradient_richardson_number(z * units.m, theta * units.K, u * units("m/s"),
                                             v * units("m/s")).m
    np.testing.assert_allclose(ri[1:-1], ref[1:-1], rtol=3e-2)


def test_local_rossby_numbers():
    assert nb.local_rossby_vorticity(2e-5, -1e-4) == pytest.approx(0.2)
    val = nb.local_rossby_acceleration(np.array(3e-4), np.array(4e-4), 1e-4, 10.0, 0.0)
    assert val == pytest.approx(0.5)
