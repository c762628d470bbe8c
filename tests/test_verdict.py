"""Balance verdicts on flows whose balance is known in closed form."""

import numpy as np
import pytest

from balance_core import Fields, Grid, Region, Thresholds, budget_verdict, momentum_budget
from balance_core import analytic
from balance_core import constants as C
from balance_core.grid import coriolis_parameter
from balance_core.verdict import classify_budget, imbalance_ratios, residual_causes


def _steady(u, v, z, p=50000.0):
    st = lambda a: np.broadcast_to(a, (3, 1) + a.shape)  # noqa: E731
    return Fields(st(u), st(v), st(z), [p], [0.0, 3600.0, 7200.0])


def test_williamson_flow_is_geostrophic():
    # Williamson et al. (1992) case 2 away from the rotated equator: Rossby
    # number about 0.05, so geostrophy holds within a few per cent.
    case = analytic.williamson_case2(90)
    b = momentum_budget(case.grid, _steady(case.u, case.v, case.geopotential / C.G0))
    v = budget_verdict(b, case.grid, Region.box(0, 360, 30, 70))
    assert v.balance == "geostrophic"
    assert v.ratios["geostrophic"] < 0.15
    assert "Geostrophic" in v.text and "m s-2" in v.text


def _holland_vortex(lat0, dp=4000.0, rmax=40e3, b=1.5, rho=1.15, step=0.05):
    # Holland (1980) wind and pressure in exact gradient balance on an f-plane.
    lat = np.arange(lat0 - 3, lat0 + 3 + 1e-9, step)
    lon = np.arange(120, 126 + 1e-9, step)
    g = Grid.latlon(lat, lon).f_plane(lat0)
    r = analytic.great_circle_distance(lat0, 123.0, g.lat, g.lon, g.radius)
    p = analytic.holland_pressure(r, 96000.0, dp, rmax, b)
    speed = analytic.holland_gradient_wind(r, dp, rmax, b, rho, coriolis_parameter(lat0))
    # tangential direction: counter-clockwise in the north
    dy = np.deg2rad(g.lat - lat0) * g.radius
    dx = np.deg2rad(g.lon - 123.0) * g.radius * np.cos(np.deg2rad(lat0))
    rr = np.hypot(dx, dy)
    with np.errstate(invalid="ignore", divide="ignore"):
        u, v = -speed * dy / rr, speed * dx / rr
    u[rr == 0] = v[rr == 0] = 0
    # the pressure-gradient potential p / rho as a geopotential height
    return g, r, u, v, p / rho / C.G0


def test_hurricane_core_is_cyclostrophic():
    # Near the radius of maximum wind of a strong vortex at 15 deg, the Rossby
    # number V / (f R) is about 25: Coriolis is minor (Holland 1980 profile).
    g, r, u, v, z = _holland_vortex(15.0)
    b = momentum_budget(g, _steady(u, v, z))
    inside = (r > 30e3) & (r < 60e3)
    verdict = budget_verdict(b, g, inside)
    assert verdict.balance == "cyclostrophic", verdict.ratios
    assert verdict.ratios["gradient"] < verdict.ratios["geostrophic"]


def test_hurricane_outer_ring_is_gradient():
    # Farther out the Coriolis and centripetal terms are both needed.
    g, r, u, v, z = _holland_vortex(25.0)
    b = momentum_budget(g, _steady(u, v, z))
    inside = (r > 120e3) & (r < 250e3)
    verdict = budget_verdict(b, g, inside)
    assert verdict.balance == "gradient", verdict.ratios
    assert verdict.ratios["gradient"] < 0.1 < verdict.ratios["geostrophic"]


def _uniform(grid, u, v, pgf_x, pgf_y):
    """Height whose pressure-gradient force is (pgf_x, pgf_y) on an f-plane box."""
    x = np.deg2rad(grid.lon) * grid.radius * np.cos(np.deg2rad(grid.lat))
    y = np.deg2rad(grid.lat) * grid.radius
    return np.full(grid.shape, u), np.full(grid.shape, v), 1000 - (pgf_x * x + pgf_y * y) / C.G0


def test_frictional_balance():
    # Steady uniform flow with Rayleigh drag F = -V / tau: PGF + Cor + F = 0, so
    # the residual is the drag and the flow crosses the isobars toward low
    # pressure (common practice, no source).
    g = Grid.latlon(np.linspace(44.5, 45.5, 11), np.linspace(0, 1.5, 11))
    f0, tau = g.f[5, 5], 2e4
    u, v = 8.0, 3.0
    pgf_x = f0 * v * -1 + u / tau   # -(Cor_x) - F_x
    pgf_y = f0 * u + v / tau
    uu, vv, z = _uniform(g, u, v, pgf_x, pgf_y)
    b = momentum_budget(g.f_plane(45.0), _steady(uu, vv, z, 100000.0))
    verdict = budget_verdict(b, g, Region.box(0.3, 1.2, 44.7, 45.3))
    assert verdict.balance == "frictional", verdict.ratios
    assert verdict.ratios["residual_share"] > 0.4


def _accelerating(a_frac):
    g = Grid.latlon(np.linspace(44.5, 45.5, 11), np.linspace(0, 1.5, 11)).f_plane(45.0)
    f0 = g.f[0, 0]
    t = np.array([0.0, 3600.0, 7200.0])
    u_t = 5.0 + 1e-3 * a_frac * t  # speeding up at a = a_frac * 1e-3 m s-2
    pgf_x, pgf_y = 1e-3 * a_frac, f0 * u_t[1]  # x: drives the acceleration; y: geostrophic
    x = np.deg2rad(g.lon) * g.radius * np.cos(np.deg2rad(g.lat))
    y = np.deg2rad(g.lat) * g.radius
    z = 1000 - (pgf_x * x + pgf_y * y) / C.G0
    uu = u_t[:, None, None, None] * np.ones((1, 1) + g.shape)
    f = Fields(uu, 0 * uu, np.broadcast_to(z, uu.shape), [70000.0], t)
    return g, momentum_budget(g, f, 1, 0)


def test_unsteady_flow():
    g, b = _accelerating(1.0)
    verdict = budget_verdict(b, g, Region.whole())
    assert verdict.balance == "unsteady", verdict.ratios
    # |DV/Dt| = 1e-3 against |PGF| = |(1e-3, f u)| = 1.34e-3 m s-2
    assert verdict.ratios["acceleration_share"] == pytest.approx(0.75, abs=0.01)


def test_unbalanced_flow():
    # Acceleration well below the unsteady share but still breaking every balance.
    g, b = _accelerating(0.001)
    r = imbalance_ratios(b, g, Region.whole().mask(g))
    th = Thresholds(balanced=0.001, unsteady_share=0.9)
    assert classify_budget(r, th).balance == "unbalanced"


def test_thresholds_are_configurable():
    case = analytic.williamson_case2(45)
    b = momentum_budget(case.grid, _steady(case.u, case.v, case.geopotential / C.G0))
    r = imbalance_ratios(b, case.grid, Region.box(0, 360, 30, 70).mask(case.grid))
    assert classify_budget(r).balance == "geostrophic"
    assert classify_budget(r, Thresholds(balanced=r["geostrophic"] / 2,
                                         unsteady_share=10)).balance != "geostrophic"


def test_empty_region():
    case = analytic.williamson_case2(24)
    b = momentum_budget(case.grid, _steady(case.u, case.v, case.geopotential / C.G0))
    v = budget_verdict(b, case.grid, np.zeros(case.grid.shape, bool))
    assert v.balance == "unbalanced" and "No valid points" in v.text


def test_residual_causes():
    causes = residual_causes(level_pa=92500.0, time_step_s=12 * 3600)
    assert any("boundary layer" in c for c in causes)
    assert any("too coarse" in c for c in causes)
    assert residual_causes(level_pa=50000.0) == []
