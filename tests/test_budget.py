"""The momentum budget: published test case, closure, unavailable terms, numerics."""

import numpy as np
import pyproj
import pytest

import balance_core.budget as budget_mod
from balance_core import TERMS, Fields, Grid, analytic, momentum_budget
from balance_core import constants as C


def _steady(case):
    stack = lambda a: np.broadcast_to(a, (3, 1) + a.shape)  # noqa: E731
    return Fields(
        stack(case.u),
        stack(case.v),
        stack(case.geopotential / C.G0),
        pressure=[50000.0],
        time=[0.0, 3600.0, 7200.0],
    )


def test_williamson_case2_residual_converges_at_second_order():
    # Williamson et al. (1992), J. Comput. Phys. 102, 211-224, test case 2 with
    # alpha = pi/4 (the flow crosses the poles; f is the paper's rotated one):
    # the budget residual falls with a slope between 1.8 and 2.2.
    from app.verify import convergence_slope, williamson_residuals

    errs = williamson_residuals((24, 48, 96, 192))
    slope = convergence_slope(errs)
    assert 1.8 <= slope <= 2.2, errs


def test_williamson_pressure_gradient_balances_coriolis_metric_advection():
    case = analytic.williamson_case2(96)
    b = momentum_budget(case.grid, _steady(case), 1, 0)
    rows = slice(1, -1)  # leave out the rows next to the poles
    sx = sum(b[n].x for n in ("coriolis", "metric_uv", "horizontal_advection"))[rows]
    sy = sum(b[n].y for n in ("coriolis", "metric_uv", "horizontal_advection"))[rows]
    px, py = b["pressure_gradient"].x[rows], b["pressure_gradient"].y[rows]
    rel = np.sqrt(np.mean((px + sx) ** 2 + (py + sy) ** 2) / np.mean(px**2 + py**2))
    assert rel < 1e-3
    # the tendency is exactly zero for three equal times
    assert np.all(b["tendency"].x == 0)


def _random_fields(rng, nt=3, nk=3, shape=(20, 30), dtype=np.float64):
    def f(base, amp):
        return (base + amp * rng.standard_normal((nt, nk) + shape)).astype(dtype)

    return Fields(
        f(10, 5),
        f(0, 5),
        f(5500, 30),
        pressure=[85000.0, 70000.0, 50000.0][:nk],
        time=np.arange(nt) * 10800.0 if nt > 1 else None,
        omega=f(0, 0.2),
        temperature=f(260, 3),
    )


def test_closure_is_exact(rng):
    g = Grid.latlon(np.linspace(20, 60, 20), np.linspace(-40, 20, 30))
    b = momentum_budget(g, _random_fields(rng), 1, 1)
    cx, cy = b.closure()
    assert np.nanmax(np.abs(cx)) < 1e-15 and np.nanmax(np.abs(cy)) < 1e-15
    assert set(b.terms) == set(TERMS)
    assert all(b[n].available for n in TERMS)


def test_derived_views_add_up(rng):
    g = Grid.latlon(np.linspace(20, 60, 20), np.linspace(-40, 20, 30))
    f = _random_fields(rng)
    b = momentum_budget(g, f, 1, 1)
    # the split covers the horizontal advection and the Earth's curvature of the path
    hx = b["along_stream"].x + b["centripetal"].x
    hy = b["along_stream"].y + b["centripetal"].y
    np.testing.assert_allclose(hx, b["horizontal_advection"].x + b["metric_uv"].x, atol=1e-15)
    np.testing.assert_allclose(hy, b["horizontal_advection"].y + b["metric_uv"].y, atol=1e-15)
    # along_stream is parallel to the wind, centripetal normal to it
    u, v = f.u[1, 1], f.v[1, 1]
    np.testing.assert_allclose(b["centripetal"].x * u + b["centripetal"].y * v, 0, atol=1e-12)
    np.testing.assert_allclose(b["along_stream"].x * v - b["along_stream"].y * u, 0, atol=1e-12)
    acc = b["acceleration"]
    ex = b["tendency"].x - b["horizontal_advection"].x - b["vertical_advection"].x
    np.testing.assert_allclose(acc.x, ex, atol=1e-15)


def test_unavailable_terms_are_reported_with_reasons(rng):
    g = Grid.latlon(np.linspace(20, 60, 20), np.linspace(-40, 20, 30))
    f = _random_fields(rng, nt=1, nk=1)
    f = Fields(f.u, f.v, f.height, f.pressure)  # no omega, no temperature
    b = momentum_budget(g, f)
    assert not b["tendency"].available and "one time" in b["tendency"].note
    for n in ("vertical_advection", "metric_uw", "coriolis_w"):
        assert not b[n].available and "omega" in b[n].note
    assert b.residual_includes == ["tendency", "vertical_advection", "metric_uw", "coriolis_w"]
    assert "tendency" in b["residual"].note
    assert "steady" in b["acceleration"].note
    # one level with omega: vertical advection alone is missing, for its own reason
    f2 = _random_fields(rng, nt=3, nk=1)
    b2 = momentum_budget(g, f2, 1, 0)
    assert not b2["vertical_advection"].available
    assert "one pressure level" in b2["vertical_advection"].note
    assert b2["metric_uw"].available and b2["coriolis_w"].available
    assert any("rho from the temperature" in n for n in b2.notes)


def test_standard_atmosphere_density_without_temperature(rng):
    g = Grid.latlon(np.linspace(20, 60, 20), np.linspace(-40, 20, 30))
    f = _random_fields(rng)
    f2 = Fields(f.u, f.v, f.height, f.pressure, f.time, f.omega, None)
    b = momentum_budget(g, f2, 1, 1)
    assert any("standard atmosphere" in n for n in b.notes)
    # w = -omega / (rho g) with the 1976 density at 700 hPa
    from balance_core.thermo import standard_atmosphere_density

    rho = standard_atmosphere_density(70000.0)
    w = -f.omega[1, 1] / (rho * C.G0)
    np.testing.assert_allclose(b["coriolis_w"].x, -2 * C.OMEGA * np.cos(np.deg2rad(g.lat)) * w)
    np.testing.assert_allclose(b["metric_uw"].x, -f.u[1, 1] * w / g.radius)
    assert np.all(b["coriolis_w"].y == 0)


def test_tendency_of_translating_field():
    # A pattern moving east at c: du/dt = -c du/dx exactly; centred 3 h
    # differences resolve it to second order in the time step.
    g = Grid.latlon(np.linspace(30, 60, 31), np.arange(0, 360, 1.0))
    c = 15.0
    lam, phi = np.deg2rad(g.lon), np.deg2rad(g.lat)
    errs = []
    for dt in (6 * 3600.0, 3 * 3600.0, 1.5 * 3600.0):
        t = np.array([-dt, 0.0, dt])
        # angular speed c / (a cos(phi)) so the pattern keeps its shape on each parallel
        shift = c * t[:, None, None] / (g.radius * np.cos(phi))
        u = 10 + 5 * np.sin(3 * (lam - shift))
        f = Fields(u[:, None], np.zeros_like(u)[:, None], 5500 + 0 * u[:, None], [50000.0], t)
        b = momentum_budget(g, f, 1, 0)
        exact = -15 * np.cos(3 * lam) * c / (g.radius * np.cos(phi))
        errs.append(np.abs(b["tendency"].x - exact).max() / np.abs(exact).max())
    rates = np.log2(np.array(errs[:-1]) / np.array(errs[1:]))
    assert np.all((rates > 1.9) & (rates < 2.1)), errs
    assert errs[1] < 0.02  # 3-hourly data resolve this 120-degree wave to 2 %


def test_vertical_advection_on_uneven_levels():
    g = Grid.latlon(np.linspace(30, 40, 5), np.linspace(0, 10, 6))
    p = np.array([100000, 92500, 85000, 70000, 50000.0])
    u = (2e-8 * p**2)[None, :, None, None] * np.ones((1, 5, 5, 6))  # quadratic in p: exact
    om = np.full((1, 5, 5, 6), 0.3)
    f = Fields(u, np.zeros_like(u), 5500 + 0 * u, p, None, om, 250 + 0 * u)
    for k in range(5):
        b = momentum_budget(g, f, 0, k)
        np.testing.assert_allclose(b["vertical_advection"].x, -0.3 * 4e-8 * p[k], rtol=1e-9)


def test_solid_body_rotation_terms():
    # u = U cos(phi), v = 0, in gradient balance on the sphere: -g dZ/dy = f u
    # + u^2 tan(phi)/a with g Z = -(a Omega U + U^2/2) sin^2(phi) (Williamson et al.
    # 1992, case 2 with alpha = 0). Metric and Coriolis terms have closed forms.
    case = analytic.williamson_case2(90, alpha=0.0)
    b = momentum_budget(case.grid, _steady(case), 1, 0)
    phi = np.deg2rad(case.grid.lat)
    u = case.u
    np.testing.assert_allclose(
        b["metric_uv"].y, -(u**2) * np.tan(phi) / case.grid.radius, rtol=1e-12
    )
    np.testing.assert_allclose(b["coriolis"].y, -case.grid.f * u, rtol=1e-12)
    assert np.abs(b["horizontal_advection"].x).max() < 1e-12


@pytest.mark.parametrize("projected", [False, True])
def test_bands_match_one_piece(rng, monkeypatch, projected):
    if projected:
        crs = pyproj.CRS.from_proj4(
            "+proj=lcc +lat_1=45 +lat_2=45 +lat_0=45 +lon_0=0 +R=6371008.7714"
        )
        g = Grid.projected(np.arange(-6e5, 6e5 + 1, 3e4), np.arange(-6e5, 6e5 + 1, 3e4), crs)
    else:
        g = Grid.latlon(np.linspace(-85, 85, 41), np.arange(0, 360, 9.0))
    f = _random_fields(rng, shape=g.shape)
    whole = momentum_budget(g, f, 1, 1)
    monkeypatch.setattr(budget_mod, "BAND_POINTS", 3 * g.shape[1])
    for workers in (1, 2):
        banded = momentum_budget(g, f, 1, 1, workers=workers)
        for n in list(whole.terms) + list(whole.derived):
            np.testing.assert_allclose(banded[n].x, whole[n].x, rtol=1e-12, atol=1e-16)
            np.testing.assert_allclose(banded[n].y, whole[n].y, rtol=1e-12, atol=1e-16)


def test_band_threads_follow_the_cpus_given_and_omp_num_threads(monkeypatch):
    """A dask worker gets OMP_NUM_THREADS=1 (distributed's pre-spawn environment); its
    bands are then computed in the calling thread, not in a pool of their own."""
    monkeypatch.setattr(budget_mod.os, "sched_getaffinity", lambda pid: {0, 1, 2, 3}, raising=False)
    monkeypatch.delenv("OMP_NUM_THREADS", raising=False)
    assert budget_mod.band_threads() == 4
    monkeypatch.setenv("OMP_NUM_THREADS", "not a number")
    assert budget_mod.band_threads() == 4
    monkeypatch.setenv("OMP_NUM_THREADS", "2")
    assert budget_mod.band_threads() == 2
    monkeypatch.setenv("OMP_NUM_THREADS", "1")
    assert budget_mod.band_threads() == 1
    monkeypatch.setattr(budget_mod.os, "sched_getaffinity", lambda pid: set(range(64)))
    monkeypatch.delenv("OMP_NUM_THREADS")
    assert budget_mod.band_threads() == 8


def test_one_thread_computes_the_bands_in_the_calling_thread(rng, monkeypatch):
    g = Grid.latlon(np.linspace(-85, 85, 41), np.arange(0, 360, 9.0))
    f = _random_fields(rng, shape=g.shape)
    monkeypatch.setattr(budget_mod, "BAND_POINTS", 3 * g.shape[1])
    used = []
    real_pool = budget_mod._pool
    monkeypatch.setattr(budget_mod, "_pool", lambda n: used.append(n) or real_pool(n))
    monkeypatch.setenv("OMP_NUM_THREADS", "1")
    momentum_budget(g, f, 1, 1)
    assert used == []
    monkeypatch.setenv("OMP_NUM_THREADS", "2")
    monkeypatch.setattr(budget_mod.os, "sched_getaffinity", lambda pid: {0, 1}, raising=False)
    momentum_budget(g, f, 1, 1)
    assert used == [2]


def test_float32_input_computed_in_float64(rng):
    g = Grid.latlon(np.linspace(20, 60, 20), np.linspace(-40, 20, 30))
    f64 = _random_fields(rng)
    f32 = Fields(
        *(a.astype(np.float32) for a in (f64.u, f64.v, f64.height)),
        f64.pressure,
        f64.time,
        f64.omega.astype(np.float32),
        f64.temperature.astype(np.float32),
    )
    b32 = momentum_budget(g, f32, 1, 1)
    assert all(b32[n].x.dtype == np.float64 for n in TERMS)
    cx, _ = b32.closure()
    assert np.nanmax(np.abs(cx)) < 1e-15


def test_nan_stays_local(rng):
    g = Grid.latlon(np.linspace(20, 60, 20), np.linspace(-40, 20, 30))
    f = _random_fields(rng)
    f.u[:, :, 10, 15] = np.nan
    b = momentum_budget(g, f, 1, 1)
    bad = np.isnan(b["residual"].x)
    ys, xs = np.nonzero(bad)
    assert bad.any() and np.all(np.abs(ys - 10) <= 1) and np.all(np.abs(xs - 15) <= 1)


def test_bad_input_messages(rng):
    g = Grid.latlon(np.linspace(20, 60, 20), np.linspace(-40, 20, 30))
    f = _random_fields(rng)
    with pytest.raises(IndexError, match="level index 5"):
        momentum_budget(g, f, 1, 5)
    with pytest.raises(ValueError, match="v has shape"):
        Fields(f.u, f.v[:, :1], f.height, f.pressure, f.time)
    with pytest.raises(ValueError, match="strictly increasing"):
        Fields(f.u, f.v, f.height, f.pressure, [0.0, 0.0, 1.0])
    g2 = Grid.latlon(np.linspace(20, 60, 21), np.linspace(-40, 20, 30))
    with pytest.raises(ValueError, match="u has shape"):
        momentum_budget(g2, f)
