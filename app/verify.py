"""Reference checks of the numerics, run by ``balance-desk verify`` and by the tests.

Each check compares the core with something outside the project (a published
test case, a standard, a fact of the trade) and says which. They run in a few
seconds on a laptop, so a forecaster or a scientist can see that the numerics
hold on the machine where they use them.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from balance_core import (
    PRESETS,
    Fields,
    Grid,
    analytic,
    analyze_scales,
    classify_scales,
    momentum_budget,
    thermo,
)
from balance_core.grid import coriolis_parameter
from balance_core.winds import gradient_wind_from_pressure

__all__ = ["CheckResult", "run_all", "CHECKS"]


@dataclasses.dataclass
class CheckResult:
    name: str
    source: str
    passed: bool
    detail: str
    values: dict = dataclasses.field(default_factory=dict)
    skipped: bool = False

    def as_dict(self) -> dict:
        return dataclasses.asdict(self)


def check_synoptic_scales() -> CheckResult:
    """The synoptic scale table: orders of magnitude and a geostrophic verdict."""
    s = PRESETS["synoptic_cyclone"]
    r = analyze_scales(s)
    expected = {
        "acceleration": -4,
        "metric_uv": -5,
        "metric_uw": -8,
        "pressure_gradient": -3,
        "coriolis": -3,
        "coriolis_w": -6,
        "viscous": -12,
    }
    got = {k: math.floor(math.log10(v) + 1e-9) for k, v in r.terms}
    bad = {k: got[k] for k, e in expected.items() if got[k] != e}
    verdict = classify_scales(r).balance
    ok = not bad and verdict == "geostrophic"
    detail = (
        "orders of magnitude "
        + ", ".join(f"{k} 1e{got[k]}" for k in expected)
        + f"; verdict {verdict}"
    )
    if bad:
        detail += f"; wrong: {bad}"
    return CheckResult(
        "synoptic scale table (U 10 m/s, L 1000 km, f0 1e-4 /s)",
        "the classic synoptic scale analysis (common practice, no source)",
        ok,
        detail,
        {"orders": got, "verdict": verdict},
    )


def williamson_residuals(resolutions=(24, 48, 96)) -> dict:
    """Relative RMS budget residual of Williamson et al. (1992) case 2, per resolution.

    The residual is measured against the pressure-gradient force, area-weighted,
    leaving out the row next to each pole. The flow is steady, so three equal
    times make the tendency exactly zero; the residual then measures the
    truncation error of advection + metric + Coriolis + pressure gradient.
    """
    out = {}
    for n in resolutions:
        case = analytic.williamson_case2(n)
        g = case.grid
        stack = lambda a: np.broadcast_to(a, (3, 1) + a.shape)  # noqa: E731
        fields = Fields(
            stack(case.u),
            stack(case.v),
            stack(case.geopotential / 9.80665),
            pressure=[50000.0],
            time=[0.0, 3600.0, 7200.0],
        )
        b = momentum_budget(g, fields, 1, 0)
        res = np.hypot(b["residual"].x, b["residual"].y)[1:-1]
        pgf = np.hypot(b["pressure_gradient"].x, b["pressure_gradient"].y)[1:-1]
        w = g.cell_area[1:-1]
        out[n] = float(np.sqrt(np.sum(w * res**2) / np.sum(w * pgf**2)))
    return out


def convergence_slope(errors: dict) -> float:
    """Least-squares slope of log(error) against log(grid length)."""
    n = np.array(sorted(errors))
    e = np.array([errors[k] for k in n])
    return float(-np.polyfit(np.log(n), np.log(e), 1)[0])


def check_williamson() -> CheckResult:
    errs = williamson_residuals()
    slope = convergence_slope(errs)
    ok = 1.8 <= slope <= 2.2
    detail = (
        "relative RMS residual "
        + ", ".join(f"{180 / n:.2f} deg: {e:.2e}" for n, e in errs.items())
        + f"; convergence slope {slope:.2f} (second order: 1.8 to 2.2)"
    )
    return CheckResult(
        "steady geostrophic flow over the poles (alpha = pi/4): budget residual converges",
        "Williamson et al. (1992), J. Comput. Phys. 102, 211-224, test case 2",
        ok,
        detail,
        {"errors": errs, "slope": slope},
    )


def holland_errors(step_deg: float = 0.05, lat0: float = 20.0, f_plane: bool = True) -> dict:
    """Gradient wind from the 2-D contour curvature against Holland's formula.

    A Holland (1980) pressure profile (dp 40 hPa, R_max 40 km, B 1.5,
    rho 1.15 kg m-3) on a lat-lon grid; errors at radii from three grid
    lengths to 300 km.
    """
    dp, rmax, b, rho = 4000.0, 40e3, 1.5, 1.15
    lon0 = 150.0
    lat = np.arange(lat0 - 4, lat0 + 4 + 1e-9, step_deg)
    lon = np.arange(lon0 - 4, lon0 + 4 + 1e-9, step_deg)
    g = Grid.latlon(lat, lon)
    if f_plane:
        g = g.f_plane(lat0)
    r = analytic.great_circle_distance(lat0, lon0, g.lat, g.lon, g.radius)
    p = analytic.holland_pressure(r, 96000.0, dp, rmax, b)
    gw = gradient_wind_from_pressure(g, p, rho)
    ref = analytic.holland_gradient_wind(r, dp, rmax, b, rho, coriolis_parameter(lat0))
    dx = math.radians(step_deg) * g.radius
    sel = (r >= 3 * dx) & (r <= 3e5)
    vmax = float(ref[sel].max())
    err = np.abs(gw.speed - ref)
    outer = sel & (r >= rmax)
    return {
        "max_error_over_vmax": float(err[sel].max() / vmax),
        "max_relative_error_outside_rmax": float((err[outer] / ref[outer]).max()),
        "vmax": vmax,
        "no_root_points": gw.no_root_count,
    }


def check_holland() -> CheckResult:
    e = holland_errors()
    es = holland_errors(f_plane=False)
    ok = (
        e["max_error_over_vmax"] <= 0.03
        and e["max_relative_error_outside_rmax"] <= 0.02
        and e["no_root_points"] == 0
    )
    detail = (
        f"f-plane, 0.05 deg grid: max error {100 * e['max_error_over_vmax']:.1f} % of Vmax "
        f"({e['vmax']:.1f} m/s) beyond 3 grid lengths (limit 3 %), "
        f"{100 * e['max_relative_error_outside_rmax']:.1f} % beyond R_max (limit 2 %); "
        f"with f varying on the sphere instead: {100 * es['max_error_over_vmax']:.1f} % "
        "(the formula assumes an f-plane)"
    )
    return CheckResult(
        "gradient wind of a parametric hurricane from contour curvature",
        "Holland (1980), Mon. Wea. Rev. 108, 1212-1218",
        ok,
        detail,
        {"f_plane": e, "sphere": es},
    )


def check_standard_atmosphere() -> CheckResult:
    z = thermo.standard_atmosphere_height(np.array([85000.0, 50000.0]))
    ok = abs(z[0] - 1457) < 1.0 and abs(z[1] - 5574) < 1.0
    return CheckResult(
        "standard-atmosphere heights of 850 and 500 hPa",
        "U.S. Standard Atmosphere, 1976 (1457 m and 5574 m)",
        ok,
        f"850 hPa {z[0]:.1f} m, 500 hPa {z[1]:.1f} m (within 1 m)",
        {"z850": float(z[0]), "z500": float(z[1])},
    )


def check_linear_exact() -> CheckResult:
    """A height field linear in longitude and latitude differentiates exactly."""
    lat = np.linspace(20, 60, 41)
    lon = np.linspace(-30, 30, 61)
    g = Grid.latlon(lat, lon)
    lam, phi = np.deg2rad(g.lon), np.deg2rad(g.lat)
    z = 5500 + 300 * lam - 200 * phi
    dzdx, dzdy = g.grad(z)
    ex = 300 / (g.radius * np.cos(phi))
    ey = np.full_like(z, -200 / g.radius)
    err = max(np.max(np.abs(dzdx - ex) / np.abs(ex)), np.max(np.abs(dzdy - ey) / np.abs(ey)))
    ok = err < 1e-11
    return CheckResult(
        "fields linear in the grid coordinates differentiate exactly",
        "property of second-order differences (common practice, no source)",
        ok,
        f"largest relative error {err:.1e} (limit 1e-11, rounding only)",
        {"error": float(err)},
    )


def check_metpy_geostrophic() -> CheckResult:
    """Our geostrophic wind against MetPy's, when MetPy is installed."""
    name = "geostrophic wind against a reference library"
    source = "MetPy (metpy.calc.geostrophic_wind), on the same sphere"
    try:
        import warnings

        import metpy.calc as mpcalc
        import pyproj
        from metpy.units import units
    except ImportError:
        return CheckResult(
            name, source, False, "MetPy is not installed (pip extra 'test')", skipped=True
        )
    from balance_core import constants as C
    from balance_core.winds import geostrophic_wind

    lat = np.arange(-80, 80 + 1e-9, 1.0)
    lon = np.arange(0, 360, 1.0)
    g = Grid.latlon(lat, lon)
    phi, lam = np.deg2rad(g.lat), np.deg2rad(g.lon)
    z = 5500 + 150 * np.sin(phi) ** 2 * np.cos(3 * lam) + 40 * np.cos(2 * phi)
    dx, dy = mpcalc.lat_lon_grid_deltas(
        lon, lat, geod=pyproj.Geod(a=C.EARTH_RADIUS, b=C.EARTH_RADIUS)
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mu, mv = mpcalc.geostrophic_wind(
            z * units.m, dx=dx, dy=dy, latitude=lat[:, None] * units.degree
        )
    ug, vg = geostrophic_wind(g, z)
    ok = ~g.tropics_mask
    ok[:, [0, -1]] = False  # MetPy does not wrap around the globe
    scale = np.nanmax(np.hypot(ug, vg))
    err = max(np.abs(mu.m - ug)[ok].max(), np.abs(mv.m - vg)[ok].max()) / scale
    return CheckResult(
        name,
        source,
        err < 2e-4,
        f"largest difference {err:.1e} of the top speed (limit 2e-4: geodesic "
        "versus along-parallel spacing)",
        {"error": float(err)},
    )


CHECKS = (
    check_synoptic_scales,
    check_standard_atmosphere,
    check_linear_exact,
    check_williamson,
    check_holland,
    check_metpy_geostrophic,
)


def run_all() -> list:
    results = []
    for check in CHECKS:
        try:
            results.append(check())
        except Exception as exc:  # noqa: BLE001 - a broken check is a failed check
            results.append(CheckResult(check.__name__, "", False, f"raised {exc!r}"))
    return results
