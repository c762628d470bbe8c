"""Property tests (hypothesis): the answers do not depend on how the grid is written down."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from balance_core import Fields, Grid, momentum_budget
from balance_core.winds import geostrophic_wind

LAT = np.linspace(-80, 80, 33)
LON = np.arange(0, 360, 7.5)


def _fields(seed):
    rng = np.random.default_rng(seed)
    lam, phi = np.meshgrid(np.deg2rad(LON), np.deg2rad(LAT))
    k = rng.integers(1, 4, size=3)
    a = rng.uniform(0.5, 2.0, size=6)
    z = 5500 + 60 * a[0] * np.sin(k[0] * lam) * np.cos(phi) ** 2 + 30 * a[1] * np.cos(2 * phi)
    u = 10 * a[2] * np.cos(phi) + 3 * a[3] * np.sin(k[1] * lam) * np.cos(phi)
    v = 4 * a[4] * np.cos(k[2] * lam) * np.cos(phi) + a[5]
    st3 = lambda f, s: np.stack([f * (1 + s * i) for i in range(3)])[:, None]  # noqa: E731
    return st3(u, 0.01), st3(v, -0.02), st3(z, 0.001)


def _budget(lat, lon, u, v, z):
    g = Grid.latlon(lat, lon)
    return g, momentum_budget(g, Fields(u, v, z, [50000.0], [0.0, 3600.0, 7200.0]), 1, 0)


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 10_000), shift=st.integers(1, LON.size - 1))
def test_shifting_longitudes_changes_nothing(seed, shift):
    u, v, z = _fields(seed)
    _, a = _budget(LAT, LON, u, v, z)
    roll = lambda f: np.roll(f, -shift, axis=-1)  # noqa: E731
    lon2 = np.roll(LON, -shift)
    _, b = _budget(LAT, lon2, roll(u), roll(v), roll(z))
    for n in [n for n in a.terms if a[n].available]:
        np.testing.assert_allclose(np.roll(a[n].x, -shift, axis=-1), b[n].x, rtol=1e-9, atol=1e-14)
        np.testing.assert_allclose(np.roll(a[n].y, -shift, axis=-1), b[n].y, rtol=1e-9, atol=1e-14)


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 10_000))
def test_flipping_latitude_order_changes_nothing(seed):
    u, v, z = _fields(seed)
    _, a = _budget(LAT, LON, u, v, z)
    flip = lambda f: f[..., ::-1, :]  # noqa: E731
    _, b = _budget(LAT[::-1], LON, flip(u), flip(v), flip(z))
    for n in [n for n in a.terms if a[n].available]:
        np.testing.assert_allclose(flip(a[n].x), b[n].x, rtol=1e-9, atol=1e-14)
        np.testing.assert_allclose(flip(a[n].y), b[n].y, rtol=1e-9, atol=1e-14)


@settings(max_examples=10, deadline=None)
@given(seed=st.integers(0, 10_000))
def test_0_360_and_minus180_180_agree(seed):
    u, v, z = _fields(seed)
    _, a = _budget(LAT, LON, u, v, z)
    half = LON.size // 2
    lon2 = np.where(LON >= 180, LON - 360, LON)
    roll = lambda f: np.roll(f, half, axis=-1)  # noqa: E731
    _, b = _budget(LAT, np.roll(lon2, half), roll(u), roll(v), roll(z))
    for n in [n for n in a.terms if a[n].available]:
        np.testing.assert_allclose(roll(a[n].x), b[n].x, rtol=1e-9, atol=1e-14)


@settings(max_examples=20, deadline=None)
@given(seed=st.integers(0, 10_000), scale=st.floats(0.1, 10.0))
def test_scaling_height_scales_geostrophic_wind(seed, scale):
    _, _, z = _fields(seed)
    g = Grid.latlon(LAT, LON)
    ug, vg = geostrophic_wind(g, z[1, 0] - 5500)
    ug2, vg2 = geostrophic_wind(g, scale * (z[1, 0] - 5500))
    ok = np.isfinite(ug)
    np.testing.assert_allclose(ug2[ok], scale * ug[ok], rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(vg2[ok], scale * vg[ok], rtol=1e-10, atol=1e-12)


@settings(max_examples=20, deadline=None)
@given(seed=st.integers(0, 10_000), j=st.integers(3, LAT.size - 4), i=st.integers(0, LON.size - 1))
def test_a_nan_stays_local(seed, j, i):
    # rows 3 and more from the edges: the one-sided edge stencils reach two rows in
    u, v, z = _fields(seed)
    z = z.copy()
    z[:, :, j, i] = np.nan
    _, b = _budget(LAT, LON, u, v, z)
    bad = ~np.isfinite(b["pressure_gradient"].x) | ~np.isfinite(b["pressure_gradient"].y)
    ys, xs = np.nonzero(bad)
    dx = np.minimum(np.abs(xs - i), LON.size - np.abs(xs - i))  # periodic distance
    assert bad.any() and np.all(np.abs(ys - j) <= 1) and np.all(dx <= 1)
