"""Balance verdicts on flows whose balance is known in closed form."""

import numpy as np
import pytest

from balance_core import Fields, Grid, Region, Thresholds, analytic, budget_verdict, momentum_budget
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


def _drag_flow(level_pa, drag=True, residual_across=False):
    """Steady uniform flow (8, 3) m s-1 on an f-plane whose PGF and Coriolis leave a remainder.

    With ``drag`` the remainder is Rayleigh drag F = -V / tau, so PGF + Cor + F = 0 and
    the flow crosses the isobars toward low pressure (common practice, no source).
    With ``residual_across`` the remainder is as large but at right angles to the wind.
    """
    g = Grid.latlon(np.linspace(44.5, 45.5, 11), np.linspace(0, 1.5, 11))
    f0, tau = g.f[5, 5], 2e4
    u, v = 8.0, 3.0
    fx, fy = (-u / tau, -v / tau) if not residual_across else (v / tau, -u / tau)
    pgf_x = f0 * v * -1 - fx  # PGF = -(Cor) - F
    pgf_y = f0 * u - fy
    uu, vv, z = _uniform(g, u, v, pgf_x, pgf_y)
    gp = g.f_plane(45.0)
    b = momentum_budget(gp, _steady(uu, vv, z, level_pa))
    return gp, b, uu, vv


def test_frictional_balance_near_the_ground():
    # A boundary-layer flow with linear drag is frictional: the residual is the drag
    # and opposes the wind (alignment 1).
    g, b, u, v = _drag_flow(100000.0)
    verdict = budget_verdict(
        b, g, Region.box(0.3, 1.2, 44.7, 45.3), u=u, v=v, height_above_ground_m=100.0
    )
    assert verdict.balance == "frictional", verdict.ratios
    assert verdict.ratios["residual_share"] > 0.4
    # the box's curvature of the Earth adds a little to the residual: alignment 0.9996
    assert verdict.ratios["friction_alignment"] == pytest.approx(1.0, abs=1e-3)


def test_the_same_drag_aloft_is_not_frictional():
    # The frictional candidate PGF + Cor + residual is the acceleration by
    # construction, so it cannot say no by itself: the same flow at 500 hPa, 5.5 km
    # above the ground, must not come out frictional.
    g, b, u, v = _drag_flow(50000.0)
    verdict = budget_verdict(
        b, g, Region.box(0.3, 1.2, 44.7, 45.3), u=u, v=v, height_above_ground_m=5500.0
    )
    assert verdict.balance != "frictional", verdict.ratios
    assert verdict.ratios["frictional"] < 0.02  # the identity would have said yes
    assert "not tested" in verdict.why and "above the ground" in verdict.why


def test_a_residual_across_the_wind_is_not_friction():
    # Near the ground, but the residual acts at right angles to the wind: not friction.
    g, b, u, v = _drag_flow(100000.0, residual_across=True)
    verdict = budget_verdict(
        b, g, Region.box(0.3, 1.2, 44.7, 45.3), u=u, v=v, height_above_ground_m=100.0
    )
    assert verdict.balance != "frictional", verdict.ratios
    assert abs(verdict.ratios["friction_alignment"]) < 0.01
    assert "does not oppose the wind" in verdict.why


def test_truncation_error_aloft_is_not_frictional():
    # Williamson et al. (1992) case 2, a steady flow, on a 10-degree grid: the residual
    # is pure truncation error (no friction in the flow). At 500 hPa it must not come
    # out frictional, and the residual is called unexplained, not friction.
    case = analytic.williamson_case2(18)
    b = momentum_budget(case.grid, _steady(case.u, case.v, case.geopotential / C.G0))
    inside = Region.box(0, 360, 20, 70).mask(case.grid)
    r = imbalance_ratios(b, case.grid, inside, u=case.u, v=case.v)
    assert r["residual_share"] > 0.01  # truncation error is there
    verdict = budget_verdict(b, case.grid, inside, u=case.u, v=case.v, height_above_ground_m=5500.0)
    assert verdict.balance != "frictional"
    causes = residual_causes(
        level_pa=50000.0,
        residual_share=0.3,
        ground=(False, "500 hPa lies about 5500 m above the ground"),
    )
    assert any("unexplained imbalance, not friction" in c for c in causes)


def test_too_few_valid_points_give_no_verdict():
    # The project's rule: at least 25 valid points and half of the region.
    case = analytic.williamson_case2(90)
    z = case.geopotential / C.G0
    b = momentum_budget(case.grid, _steady(case.u, case.v, z))
    small = Region.box(10, 18, 40, 48).mask(case.grid)  # 5 x 4 points, all valid
    v = budget_verdict(b, case.grid, small)
    assert int(small.sum()) == 20
    assert v.balance == "none" and "only 20 of the 20 points" in v.text
    # a large region with most heights missing: enough points, too small a share
    # (around the rotated pole of the case's Coriolis axis, lon 180 lat 45, where f is large:
    # nearer its rotated equator the balances that need f are not tested)
    inside = Region.box(150, 210, 30, 60).mask(case.grid)
    zz = np.where(case.grid.lon < 192.0, np.nan, z)
    b2 = momentum_budget(case.grid, _steady(case.u, case.v, zz))
    r = imbalance_ratios(b2, case.grid, inside)
    assert r["points"] >= 25 and r["points"] / r["region_points"] < 0.5
    assert budget_verdict(b2, case.grid, inside).balance == "none"
    # and the same region with all its points has a verdict
    assert budget_verdict(b, case.grid, inside).balance == "geostrophic"


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
    assert (
        classify_budget(r, Thresholds(balanced=r["geostrophic"] / 2, unsteady_share=10)).balance
        != "geostrophic"
    )


def test_empty_region():
    case = analytic.williamson_case2(24)
    b = momentum_budget(case.grid, _steady(case.u, case.v, case.geopotential / C.G0))
    v = budget_verdict(b, case.grid, np.zeros(case.grid.shape, bool))
    assert v.balance == "none" and "No verdict" in v.text


def test_residual_causes():
    causes = residual_causes(level_pa=92500.0, time_step_s=12 * 3600)
    assert any("boundary layer" in c for c in causes)
    assert any("too coarse" in c for c in causes)
    assert residual_causes(level_pa=50000.0) == []


def test_one_curvature_for_the_gradient_candidate_and_the_gradient_wind():
    # Solid-body rotation on the sphere: Williamson et al. (1992) case 2 with alpha = 0,
    # u = u0 cos(phi), steady. The flow follows latitude circles, whose curvature on the
    # sphere is tan(phi) / a; the gradient wind of the height contours and the gradient
    # candidate of the budget must both see it. Geostrophy leaves k / (1 + k), k =
    # u0 / (2 Omega a), about 4 %, by construction (the metric term, against PGF =
    # f u + u^2 tan(phi) / a), and gradient balance must close it.
    case = analytic.williamson_case2(90, alpha=0.0)
    z = case.geopotential / C.G0
    b = momentum_budget(case.grid, _steady(case.u, case.v, z))
    inside = Region.box(0, 360, 20, 70).mask(case.grid)
    r = imbalance_ratios(b, case.grid, inside, u=case.u, v=case.v)
    u0 = 2 * np.pi * case.grid.radius / (12 * 86400.0)
    k = u0 / (2 * case.grid.omega * case.grid.radius)
    assert r["geostrophic"] == pytest.approx(k / (1 + k), rel=0.03)  # 2-degree truncation
    assert r["gradient"] < 0.1 * r["geostrophic"], r
    # the gradient wind of the height field is the wind itself, to truncation
    from balance_core.winds import gradient_wind

    gw = gradient_wind(case.grid, z)
    rel = np.abs(gw.speed - case.u)[inside] / case.u[inside]
    assert np.nanmax(rel) < 2e-3


# -- each rule of the verdict saying yes and no (the project's own rules) -----------------------


def _ratios(**kw):
    """Ratios of a region as imbalance_ratios returns them, the PGF 1e-3 m s-2."""
    rms = {
        "pressure_gradient": 1e-3,
        "coriolis": 1e-3,
        "centripetal_used": 2e-4,
        "centripetal": 2e-4,
        "acceleration": 2e-4,
        "residual": 5e-5,
        "vertical_advection": 1e-5,
        "metric_uv": 1e-5,
        "metric_uw": 1e-8,
        "coriolis_w": 1e-7,
        "tendency": 1e-4,
        "horizontal_advection": 2e-4,
    }
    rms.update(kw.pop("rms", {}))
    r = {
        "points": 400,
        "region_points": 400,
        "geostrophic": 0.2,
        "gradient": 0.1,
        "cyclostrophic": 0.9,
        "frictional": 0.25,
        "acceleration_share": 0.2,
        "residual_share": 0.05,
        "friction_alignment": 0.0,
        "curvature": "trajectory",
        "has_tendency": True,
        "tropics_share": 0.0,
        "rossby_local_share": 0.1,
        "speed_rms": 20.0,
        "rms": rms,
    }
    r.update(kw)
    return r


ALOFT = (False, "500 hPa lies about 5500 m above the ground")


def test_gradient_replaces_geostrophic_where_curvature_matters_and_it_fits_clearly_better():
    v = classify_budget(_ratios(), ground=ALOFT)  # 10 % against 20 %, centripetal 20 % of Cor
    assert v.balance == "gradient" and "replaces geostrophic" in v.why
    # no: the centripetal term only 5 % of Coriolis
    v = classify_budget(_ratios(rms={"centripetal_used": 5e-5}), ground=ALOFT)
    assert v.balance == "geostrophic" and "too small to matter" in v.why
    # no: it fits only a little better (17 % against 20 %)
    v = classify_budget(_ratios(gradient=0.17), ground=ALOFT)
    assert v.balance == "geostrophic" and "not clearly" in v.why
    # no, and the sentence compares what it says: gradient worse than geostrophic
    v = classify_budget(_ratios(gradient=0.25), ground=ALOFT)
    assert v.balance == "geostrophic" and "fits no better than geostrophic" in v.why


def test_with_one_valid_time_unsteady_is_never_given():
    # the acceleration share is 0.8, but without the local tendency it is not DV/Dt
    r = _ratios(geostrophic=0.6, gradient=0.6, frictional=0.6, acceleration_share=0.8)
    assert classify_budget(r, ground=ALOFT).balance == "unsteady"  # yes, with the tendency
    v = classify_budget({**r, "has_tendency": False, "curvature": "streamline"}, ground=ALOFT)
    assert v.balance == "unbalanced"
    assert "one valid time" in v.tested["unsteady"] and "unsteady" in v.as_dict()["not_tested"]


def test_within_the_tropics_the_balances_that_need_f_are_not_claimed():
    r = _ratios(tropics_share=0.8, geostrophic=0.1, gradient=0.05)
    v = classify_budget(r, ground=ALOFT)
    assert v.balance == "none" and "tropical mask" in v.tested["geostrophic"]
    assert "tropical mask" in v.tested["gradient"]
    # cyclostrophic where the curvature supports it
    v = classify_budget({**r, "cyclostrophic": 0.2}, ground=ALOFT)
    assert v.balance == "cyclostrophic"
    # no: outside the tropics the same ratios give gradient
    assert classify_budget({**r, "tropics_share": 0.3}, ground=ALOFT).balance == "gradient"


def test_geostrophy_is_not_claimed_where_the_local_rossby_number_exceeds_one():
    r = _ratios(rossby_local_share=0.7, gradient=0.5)
    v = classify_budget(r, ground=ALOFT)
    assert v.balance != "geostrophic" and "exceeds 1" in v.tested["geostrophic"]
    assert classify_budget({**r, "rossby_local_share": 0.3}, ground=ALOFT).balance == "geostrophic"


def test_a_weak_pressure_gradient_gives_no_verdict():
    v = classify_budget(_ratios(rms={"pressure_gradient": 2e-4}), ground=ALOFT)
    assert v.balance == "none" and "too weak" in v.text and v.cautions
    assert all(v.tested[c] for c in v.tested)  # every candidate says why it was not tested
    assert (
        classify_budget(_ratios(rms={"pressure_gradient": 3e-4}), ground=ALOFT).balance
        == "gradient"
    )


def test_a_weak_wind_tests_no_curved_or_frictional_balance():
    r = _ratios(
        speed_rms=0.5, geostrophic=0.6, gradient=0.1, cyclostrophic=0.2, acceleration_share=0.9
    )
    v = classify_budget(r, ground=ALOFT)
    assert v.balance == "unsteady"
    assert "too weak for its direction" in v.tested["gradient"]
    assert "too weak for its direction" in v.tested["cyclostrophic"]
    assert classify_budget({**r, "speed_rms": 5.0}, ground=ALOFT).balance == "gradient"


def test_a_term_no_balance_holds_that_rivals_the_pressure_gradient_gets_a_caution():
    r = _ratios(geostrophic=0.6, gradient=0.6, has_tendency=False, rms={"vertical_advection": 8e-4})
    v = classify_budget(r, ground=ALOFT)
    assert v.balance == "unbalanced" and v.cautions
    assert "Vertical advection is 80 %" in v.cautions[0] and "Caution" in v.text
    v = classify_budget(
        _ratios(
            geostrophic=0.6, gradient=0.6, has_tendency=False, rms={"vertical_advection": 4e-4}
        ),
        ground=ALOFT,
    )
    assert v.cautions == ()


def test_frictional_balance_is_tested_only_where_the_residual_acts_as_friction():
    near = (True, "1000 hPa lies about 100 m above the ground")
    r = _ratios(
        geostrophic=0.5, gradient=0.5, frictional=0.1, residual_share=0.4, friction_alignment=0.7
    )
    assert classify_budget(r, ground=near).balance == "frictional"
    v = classify_budget({**r, "friction_alignment": 0.1}, ground=near)
    assert v.balance != "frictional" and "does not oppose the wind" in v.tested["frictional"]
    v = classify_budget(r, ground=ALOFT)
    assert v.balance != "frictional" and "not tested" in v.tested["frictional"]


def test_a_region_of_one_point_quotes_no_number():
    # the report's numbers need the verdict's least number of points: no Rossby number of
    # 2e14 from one point
    from balance_core.report import box_report, level_diagnostics

    case = analytic.williamson_case2(90)
    f = _steady(case.u, case.v, case.geopotential / C.G0)
    d = level_diagnostics(case.grid, f, 1, 0)
    one = np.zeros(case.grid.shape, bool)
    one[20, 40] = True
    rep = box_report(d, one)
    assert rep["points"] == 1 and rep["verdict"]["balance"] == "none"
    assert all(v is None for v in rep["numbers"].values())
