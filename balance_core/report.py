"""Everything a forecaster asks of one box at one level and time, as plain data.

Two steps, so that a new box costs only statistics:

* :func:`level_diagnostics` computes the fields once per (level, time): the
  budget, geostrophic and gradient wind, vorticity, N^2 and shear;
* :func:`box_report` reduces them over a region: the ranked terms beside the a
  priori estimates from the box's own scales, the winds, the numbers, the
  imbalance ratios and the verdict.

The report is the object ``balance-desk analyze --format json`` prints (the
io layer adds the case name, level and valid time).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from . import constants as C
from .budget import (AGEOSTROPHIC_PARTS, DERIVED, TERMS, Budget, Fields, ageostrophic_parts,
                     momentum_budget)
from .grid import Grid
from .numbers import (brunt_vaisala_squared, burger_number, deformation_radius, froude_number,
                      richardson_number, rossby_number, vertical_shear_squared)
from .region import Region, vector_stats, weighted_stats
from .scales import RECIPE, estimate_for_term, estimate_scales
from .verdict import (Thresholds, Verdict, classify_budget, imbalance_ratios, near_ground,
                      residual_causes)
from .winds import Flow, GradientWind, geostrophic_wind, gradient_wind

__all__ = ["LevelDiagnostics", "level_diagnostics", "surface_diagnostics", "box_report",
           "geostrophic_only_report", "window"]


@dataclasses.dataclass
class LevelDiagnostics:
    """Fields of one level and time, computed once and reduced per box."""

    grid: Grid
    budget: Budget
    pressure: float
    u: np.ndarray
    v: np.ndarray
    height: np.ndarray
    omega: np.ndarray | None
    temperature: np.ndarray | None
    ug: np.ndarray
    vg: np.ndarray
    gradient: GradientWind
    vorticity: np.ndarray
    n2: np.ndarray | None
    shear2: np.ndarray | None
    time_step_s: float | None
    #: height of the level above the ground, m (None where neither orography nor surface
    #: pressure is known); and how it was found
    height_above_ground: np.ndarray | None = None
    height_above_ground_source: str = ""
    #: points where the level lies below the ground (masked in the data), or None
    below_ground: np.ndarray | None = None
    #: the surface budget (sea-level pressure and the 10 m wind) rather than a pressure
    #: level: ``height`` is then the sea-level pressure's equivalent height p / (rho g0),
    #: ``sea_level_pressure`` the pressure itself (Pa), and ``high_ground`` the points
    #: left out because the ground there is too high for the sea-level pressure
    surface: bool = False
    sea_level_pressure: np.ndarray | None = None
    high_ground: np.ndarray | None = None
    density_source: str = ""

    @property
    def speed(self):
        return np.hypot(self.u, self.v)

    @property
    def geostrophic_speed(self):
        return np.hypot(self.ug, self.vg)

    @property
    def ageostrophic_fraction(self):
        """|V - Vg| / |V| (NaN where calm or where Vg is masked)."""
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.hypot(self.u - self.ug, self.v - self.vg) / self.speed

    @property
    def rossby_local(self):
        """|zeta / f| (NaN in the tropical mask)."""
        return np.abs(self.vorticity * self.grid.inverse_f)


def level_diagnostics(grid: Grid, fields: Fields, it: int, ik: int, *,
                      height_above_ground=None, height_above_ground_source: str = "",
                      below_ground=None) -> LevelDiagnostics:
    """Budget and wind diagnostics at time ``it`` and level ``ik`` of ``fields``.

    ``height_above_ground`` (m, 2-D) lets the verdict tell levels near the ground
    from levels aloft; ``below_ground`` (bool, 2-D) says which missing points are
    under the ground rather than missing data.
    """
    budget = momentum_budget(grid, fields, it, ik)
    u = np.asarray(fields.u[it, ik], dtype=np.float64)
    v = np.asarray(fields.v[it, ik], dtype=np.float64)
    z = np.asarray(fields.height[it, ik], dtype=np.float64)
    om = None if fields.omega is None else np.asarray(fields.omega[it, ik], dtype=np.float64)
    t = None if fields.temperature is None else np.asarray(fields.temperature[it, ik], np.float64)
    ug, vg = geostrophic_wind(grid, z)
    n2 = shear2 = None
    if fields.temperature is not None and fields.nlevel >= 2:
        temp = np.asarray(fields.temperature[it], dtype=np.float64)
        n2 = brunt_vaisala_squared(temp, fields.pressure, axis=0)[ik]
        shear2 = vertical_shear_squared(np.asarray(fields.u[it], np.float64),
                                        np.asarray(fields.v[it], np.float64), temp,
                                        fields.pressure, axis=0)[ik]
    dt = None
    if fields.time is not None and fields.time.size > 1:
        dt = float(np.max(np.diff(fields.time)))
    return LevelDiagnostics(grid=grid, budget=budget, pressure=float(fields.pressure[ik]), u=u,
                            v=v, height=z, omega=om, temperature=t, ug=ug, vg=vg,
                            gradient=gradient_wind(grid, z), vorticity=Flow(grid, u, v).vorticity,
                            n2=n2, shear2=shear2, time_step_s=dt,
                            height_above_ground=height_above_ground,
                            height_above_ground_source=height_above_ground_source,
                            below_ground=below_ground)


def surface_diagnostics(grid: Grid, pressure, u, v, *, t2m=None, time=None, it: int = 0,
                        elevation=None) -> LevelDiagnostics:
    """Budget and wind diagnostics of the 10 m wind over the sea-level pressure at time
    ``it`` (:func:`balance_core.surface.surface_budget`).

    ``pressure``, ``u``, ``v`` are (nt, ny, nx) or (ny, nx) (Pa, m s-1); ``t2m`` the 2 m
    temperature at time ``it`` (K) for the density; ``elevation`` the height of the ground
    (m): ground higher than :data:`balance_core.surface.MAX_ELEVATION_M` is left out.
    The geostrophic and gradient winds are those of the pressure with the local density
    (:func:`balance_core.winds.geostrophic_wind_from_pressure`,
    :func:`balance_core.winds.gradient_wind_from_pressure`).
    """
    from .surface import MAX_ELEVATION_M, density_from, surface_budget
    from .winds import geostrophic_wind_from_pressure, gradient_wind_from_pressure

    p = np.asarray(pressure, dtype=np.float64)
    uu = np.asarray(u, dtype=np.float64)
    vv = np.asarray(v, dtype=np.float64)
    if p.ndim == 2:
        p, uu, vv = p[None], uu[None], vv[None]
    high = None
    if elevation is not None:
        high = np.asarray(elevation, dtype=np.float64) > MAX_ELEVATION_M
    keep = None if high is None else ~high
    p0 = p[it] if keep is None else np.where(keep, p[it], np.nan)
    u0 = uu[it] if keep is None else np.where(keep, uu[it], np.nan)
    v0 = vv[it] if keep is None else np.where(keep, vv[it], np.nan)
    rho, how = density_from(p0, t2m)
    budget = surface_budget(grid, p, uu, vv, rho, time=time, it=it, keep=keep)
    budget.notes.append(how)
    ug, vg = geostrophic_wind_from_pressure(grid, p0, rho)
    with np.errstate(invalid="ignore"):
        rho_mean = float(np.nanmean(rho)) if np.ndim(rho) else float(rho)
    dt = None
    if time is not None and np.size(time) > 1:
        dt = float(np.max(np.diff(np.asarray(time, dtype=np.float64))))
    return LevelDiagnostics(
        grid=grid, budget=budget, pressure=C.STD_SEA_LEVEL_PRESSURE, u=u0, v=v0,
        height=p0 / (rho_mean * C.G0), omega=None,
        temperature=None if t2m is None else np.asarray(t2m, dtype=np.float64), ug=ug, vg=vg,
        gradient=gradient_wind_from_pressure(grid, p0, rho),
        vorticity=Flow(grid, u0, v0).vorticity, n2=None, shear2=None, time_step_s=dt,
        height_above_ground=np.full(grid.shape, 10.0),
        height_above_ground_source="the 10 m wind", surface=True, sea_level_pressure=p0,
        high_ground=high, density_source=how)


def window(inside: np.ndarray):
    """Row and column slices bounding the True points of ``inside`` (None if none)."""
    rows = np.nonzero(inside.any(axis=1))[0]
    if rows.size == 0:
        return None
    cols = np.nonzero(inside.any(axis=0))[0]
    return slice(rows[0], rows[-1] + 1), slice(cols[0], cols[-1] + 1)


def _num(x):
    if x is None:
        return None
    x = float(x)
    return x if np.isfinite(x) else None


#: What the two Rossby numbers of the report mean, said beside them on every screen.
EXPLAIN = {
    "rossby": ("box Rossby number U / (f0 L), from the region's own scales: how large the "
               "acceleration of the flow is against Coriolis for the region as a whole (small: "
               "geostrophy can hold)"),
    "rossby_local_median": ("local Rossby number |zeta / f|, the median over the region's "
                            "points: how strongly the flow spins against the planet's rotation "
                            "at a typical point (large in tight vortices even when the box "
                            "number is small)"),
}


def box_report(diag: LevelDiagnostics, inside, *, thresholds: Thresholds = Thresholds(),
               nu: float = C.EDDY_VISCOSITY, below_ground: int = 0) -> dict:
    """Reduce one level's diagnostics over a region.

    Parameters
    ----------
    diag : LevelDiagnostics
    inside : bool array (ny, nx) or Region
    thresholds : Thresholds
        The verdict's thresholds (the project's own choice).
    nu : float
        Viscosity of the a priori viscous (friction) estimate: by default an eddy
        viscosity typical of the boundary layer, 10 m2 s-1 (common practice).
    below_ground : int
        Points of the level below the ground in the whole case (kept for callers;
        the report counts the region's own from ``diag.below_ground``).

    Returns
    -------
    dict
        ``points`` (valid), ``region_points``, ``valid_share``, ``masked_points``,
        ``invalid`` (why points are not valid), ``terms`` (sorted by magnitude,
        unavailable last), ``derived``, ``winds``, ``numbers``, ``scales``,
        ``scales_recipe``, ``resolution``, ``ground``, ``balances``, ``shares``,
        ``verdict`` (balance, text, why), ``explain``, ``residual_causes``,
        ``notes``. Magnitudes are area-weighted RMS of the term's horizontal
        vector, m s-2.
    """
    g = diag.grid
    th = thresholds
    if isinstance(inside, Region):
        inside = inside.mask(g)
    win = window(inside)
    if win is None:
        return _empty_report(inside, th)
    sub = _GridWindow(g, win)
    ins = inside[win]
    b = diag.budget
    # the budget restricted to the window (views, no copies)
    cropped = _crop_budget(b, win)
    w = lambda a: None if a is None else a[win]  # noqa: E731
    ratios = imbalance_ratios(cropped, sub, ins, u=w(diag.u), v=w(diag.v))
    ok = ins.copy()
    for name in list(cropped.terms) + list(cropped.derived):
        t = cropped[name]
        if t.available:
            ok &= np.isfinite(t.x) & np.isfinite(t.y)
    invalid = _invalid_points(diag, win, ins, ok)
    hag = _median(w(diag.height_above_ground), sub, ok)
    ground = (True, "the 10 m wind blows in the boundary layer, where friction acts") \
        if diag.surface else near_ground(diag.pressure, hag, th)
    verdict = classify_budget(ratios, th, ground=ground)
    if not ok.any():
        return _empty_report(inside, th, invalid=invalid, verdict=verdict)
    try:
        pgf = cropped["pressure_gradient"]
        scales = estimate_scales(sub, ok, u=w(diag.u), v=w(diag.v),
                                 height=w(diag.height), pressure=diag.pressure, omega=w(diag.omega),
                                 temperature=w(diag.temperature), shear2=w(diag.shear2), nu=nu,
                                 n2=_median(w(diag.n2), sub, ok),
                                 height_gradient=np.hypot(pgf.x, pgf.y) / C.G0)
    except ValueError:
        scales = None
    resolution = _resolution(sub, ok, scales, th)
    if verdict.balance == "none":
        verdict = Verdict("none", verdict.text + _invalid_text(invalid), verdict.ratios,
                          verdict.why)
    elif resolution is not None and not resolution["resolved"]:
        caution = (f" Caution: the flow is under-resolved (length scale "
                   f"{resolution['flow_length_km']:.0f} km, {resolution['points_per_length']:.1f} "
                   f"grid spacings of {resolution['grid_spacing_km']:.0f} km; at least "
                   f"{th.resolved_ratio:g} are needed), so truncation error is part of the "
                   "residual and the ratios; take this verdict as a rough guide only.")
        verdict = Verdict(verdict.balance, verdict.text + caution, verdict.ratios, verdict.why)

    def entry(name, t):
        if not t.available:
            return {"name": name, "magnitude": None, "x_rms": None, "y_rms": None,
                    "estimate": _estimate(name, scales), "note": t.note}
        s, xr, yr = vector_stats(t.x, t.y, sub, ok)
        return {"name": name, "magnitude": s.rms, "x_rms": xr, "y_rms": yr,
                "estimate": _estimate(name, scales), "note": t.note}

    terms = [entry(n, cropped.terms[n]) for n in TERMS]
    terms.sort(key=lambda e: (e["magnitude"] is None, -(e["magnitude"] or 0.0)))
    derived = [entry(n, cropped.derived[n]) for n in DERIVED if n in cropped.derived]

    speed = weighted_stats(np.hypot(diag.u[win], diag.v[win]), sub, ok, quantiles=False).rms
    parts = _ageostrophic_parts(diag, cropped, win, sub, ok)
    # every field cut to the region's window first: a small region of a large grid costs
    # what its window holds
    u_w, v_w, ug_w, vg_w = diag.u[win], diag.v[win], diag.ug[win], diag.vg[win]
    gstat = weighted_stats(np.hypot(ug_w, vg_w), sub, ok, quantiles=False)
    with np.errstate(invalid="ignore", divide="ignore"):
        agf_w = np.hypot(u_w - ug_w, v_w - vg_w) / np.hypot(u_w, v_w)
    agf = weighted_stats(agf_w, sub, ok)
    grad = weighted_stats(np.abs(diag.gradient.speed[win]), sub, ok, quantiles=False)
    no_root = int(np.count_nonzero(diag.gradient.no_root[win] & ok))
    ro_local = weighted_stats(np.abs(diag.vorticity[win] * g.inverse_f[win]), sub, ok)
    winds = {"speed_rms": speed, "geostrophic_speed_rms": gstat.rms,
             "ageostrophic_fraction_median": agf.median, "gradient_speed_rms": grad.rms}

    numbers = {"rossby": None, "rossby_local_median": ro_local.median, "ekman": None,
               "froude": None, "burger": None, "richardson_median": None,
               "deformation_radius_km": None}
    if scales is not None:
        numbers["rossby"] = _num(rossby_number(scales.U, scales.f0, scales.L))
    rms = ratios["rms"]
    if rms.get("residual") is not None and rms.get("coriolis"):
        numbers["ekman"] = rms["residual"] / rms["coriolis"]
    if diag.n2 is not None and scales is not None:
        n2m = _median(diag.n2[win], sub, ok)
        numbers["froude"] = _num(froude_number(scales.U, n2m, scales.H))
        numbers["burger"] = _num(burger_number(n2m, scales.H, scales.f0, scales.L))
        lr = _num(deformation_radius(n2m, scales.H, scales.f0))
        numbers["deformation_radius_km"] = None if lr is None else lr / 1e3
        with np.errstate(invalid="ignore", divide="ignore"):
            ri = richardson_number(diag.n2[win], diag.shear2[win])
        numbers["richardson_median"] = _median(ri, sub, ok)

    notes = list(b.notes)
    tropics = int(np.count_nonzero(g.tropics_mask[win] & ins))
    if tropics:
        notes.append(f"{tropics} points within {g.min_lat:g} degrees of the equator: quantities "
                     "divided by f (geostrophic wind, local Rossby number) are masked there")
    if invalid["pole_row"]:
        notes.append(f"{invalid['pole_row']} points lie on a pole row (|lat| >= "
                     f"{g.pole_limit:g}), where east and north have no meaning: masked")
    if invalid["below_ground"]:
        notes.append(f"{invalid['below_ground']} points of the region lie below the ground at "
                     f"{diag.pressure / 100:g} hPa: masked")
    if invalid.get("high_ground"):
        from .surface import MAX_ELEVATION_M

        notes.append(f"{invalid['high_ground']} points of the region lie on ground higher "
                     f"than {MAX_ELEVATION_M:g} m, where the sea-level pressure is a reduction "
                     "through the mountain: left out")
    if no_root:
        notes.append(f"{no_root} points have no real gradient-wind root (anticyclonic curvature "
                     "too strong for the pressure gradient); they are left out of the gradient "
                     "speed")
    if numbers["ekman"] is not None:
        notes.append("ekman is effective: RMS residual / RMS Coriolis, the friction the residual "
                     "implies if it is all friction")
    if resolution is not None:
        notes.append(f"grid spacing {resolution['grid_spacing_km']:.0f} km against a flow length "
                     f"scale of {resolution['flow_length_km']:.0f} km "
                     f"({resolution['points_per_length']:.1f} spacings; "
                     f"{'resolved' if resolution['resolved'] else 'under-resolved'}, the line "
                     f"is {th.resolved_ratio:g})")
    notes.append(ground[1] + (f" ({diag.height_above_ground_source})"
                              if diag.height_above_ground_source and hag is not None else ""))
    causes = residual_causes(level_pa=diag.pressure, budget=b, time_step_s=diag.time_step_s,
                             residual_share=ratios.get("residual_share"),
                             below_ground=invalid["below_ground"], ground=ground,
                             resolution=resolution,
                             friction_alignment=ratios.get("friction_alignment"), thresholds=th)
    npts = int(ok.sum())
    return {
        "points": npts,
        "region_points": int(ins.sum()),
        "valid_share": npts / max(int(ins.sum()), 1),
        "masked_points": int(ins.sum() - ok.sum()),
        "invalid": invalid,
        "terms": terms,
        "derived": derived,
        "winds": winds,
        "numbers": numbers,
        "scales": None if scales is None else {k: getattr(scales, k) for k in
                                                ("U", "W", "L", "H", "dP", "f0", "nu")},
        "scales_recipe": dict(RECIPE),
        "resolution": resolution,
        "ground": {"near": bool(ground[0]), "height_above_ground_m": hag, "why": ground[1]},
        "balances": {k: ratios.get(k) for k in ("geostrophic", "gradient", "cyclostrophic",
                                                "frictional")},
        "shares": {"acceleration": ratios.get("acceleration_share"),
                   "residual": ratios.get("residual_share"),
                   "friction_alignment": ratios.get("friction_alignment")},
        "verdict": verdict.as_dict(),
        "explain": dict(EXPLAIN),
        "ageostrophic_parts": parts,
        "residual_causes": causes,
        "notes": notes,
    }


def _ageostrophic_parts(diag, cropped, win, sub, ok) -> dict:
    """RMS speed of each part of the ageostrophic wind over the region (see
    :func:`balance_core.budget.ageostrophic_parts`), and of the measured V - Vg; the parts
    are counted only where f is outside the tropical mask."""
    inv_f = diag.grid.inverse_f[win]
    have_f = ok & np.isfinite(inv_f)
    out = {"measured_rms": None, "points": int(have_f.sum()), "parts": {}}
    if not have_f.any():
        out["note"] = "every point of the region is within the tropical mask, where 1/f is not used"
        for name in AGEOSTROPHIC_PARTS:
            out["parts"][name] = {"speed_rms": None, "note": "within the tropical mask"}
        return out
    ua, va = diag.u[win] - diag.ug[win], diag.v[win] - diag.vg[win]
    out["measured_rms"] = weighted_stats(np.hypot(ua, va), sub, have_f, quantiles=False).rms
    speed = weighted_stats(np.hypot(diag.u[win], diag.v[win]), sub, have_f,
                           quantiles=False).rms
    if out["measured_rms"] is not None and speed and out["measured_rms"] > 2.0 * speed:
        out["note"] = ("V - Vg is more than twice the wind itself: the geostrophic wind "
                       "overstates the flow here (tight curvature, small f), so the parts "
                       "describe how far the flow is from geostrophy, not a real cross-flow")
    for name, part in ageostrophic_parts(cropped, inv_f).items():
        if not part.available:
            out["parts"][name] = {"speed_rms": None, "note": part.note}
            continue
        s = weighted_stats(np.hypot(part.x, part.y), sub, have_f, quantiles=False).rms
        out["parts"][name] = {"speed_rms": _num(s), "note": part.note}
    return out


def _invalid_points(diag, win, ins, ok) -> dict:
    """Why the region's points that are not valid are not: below the ground, pole row, missing."""
    bad = ins & ~ok
    below = np.zeros_like(bad) if diag.below_ground is None else diag.below_ground[win] & bad
    high = np.zeros_like(bad) if diag.high_ground is None else diag.high_ground[win] & bad
    pole = diag.grid.pole_mask[win] & bad & ~below & ~high
    missing = bad & ~below & ~pole & ~high
    out = {"below_ground": int(below.sum()), "pole_row": int(pole.sum()),
           "missing_data": int(missing.sum())}
    if diag.surface:
        out["high_ground"] = int(high.sum())
    return out


def _invalid_text(invalid) -> str:
    parts = [f"{n} {what}" for what, n in (("below the ground", invalid["below_ground"]),
                                          ("on ground higher than the sea-level pressure "
                                           "allows", invalid.get("high_ground", 0)),
                                          ("with missing data", invalid["missing_data"]),
                                          ("on a pole row", invalid["pole_row"])) if n]
    return (" Of the points left out, " + ", ".join(parts) + ".") if parts else ""


def _resolution(sub, ok, scales, th) -> dict | None:
    """Grid spacing (the square root of the mean cell area) against the flow's length scale L."""
    if scales is None:
        return None
    spacing = float(np.sqrt(np.sum(sub.cell_area[ok]) / max(int(ok.sum()), 1)))
    ratio = scales.L / spacing
    return {"grid_spacing_km": spacing / 1e3, "flow_length_km": scales.L / 1e3,
            "points_per_length": ratio, "resolved": bool(ratio >= th.resolved_ratio)}


def _estimate(name, scales):
    if scales is None:
        return None
    return _num(estimate_for_term(name, scales))


def _median(field, grid, ok):
    if field is None:
        return None
    return weighted_stats(field, grid, ok & np.isfinite(field)).median


def _crop_budget(b: Budget, win) -> Budget:
    from .budget import Term

    def crop(t):
        if not t.available:
            return t
        return Term(t.name, t.x[win], t.y[win], t.note)

    return dataclasses.replace(b, terms={n: crop(t) for n, t in b.terms.items()},
                               derived={n: crop(t) for n, t in b.derived.items()})


class _GridWindow:
    """The parts of a Grid that the statistics and :func:`estimate_scales` use, cut to a window."""

    def __init__(self, grid: Grid, win):
        self.cell_area = grid.cell_area[win]
        self.lat = grid.lat[win]
        self.f = grid.f[win]
        self.radius = grid.radius


def geostrophic_only_report(grid: Grid, ug, vg, inside, why: str) -> dict:
    """The report of a region where no budget can be made (no wind in the data): the
    geostrophic wind's RMS speed over the region, and a verdict of "none" saying ``why``.

    Same keys as :func:`box_report`; the budget's parts are empty.
    """
    if isinstance(inside, Region):
        inside = inside.mask(grid)
    ok = inside & np.isfinite(ug) & np.isfinite(vg)
    rep = _empty_report(inside)
    gstat = weighted_stats(np.hypot(ug, vg), grid, ok, quantiles=False)
    n, total = int(ok.sum()), int(inside.sum())
    rep.update(points=n, valid_share=n / max(total, 1), masked_points=total - n,
               invalid={"below_ground": 0, "pole_row": 0, "missing_data": total - n},
               winds={"speed_rms": None, "geostrophic_speed_rms": gstat.rms,
                      "ageostrophic_fraction_median": None, "gradient_speed_rms": None})
    rep["verdict"] = {"balance": "none", "text": f"No verdict: {why}, so no momentum budget "
                      "can be made; the geostrophic wind of the region is given instead.",
                      "why": "A verdict needs the wind."}
    rep["notes"] = [f"{why}: the geostrophic wind only"]
    return rep


def _empty_report(inside, th: Thresholds = Thresholds(), invalid=None, verdict=None) -> dict:
    n = int(np.count_nonzero(inside))
    invalid = invalid or {"below_ground": 0, "pole_row": 0, "missing_data": n}
    text = (f"No verdict: none of the {n} points of the region has every term of the budget, "
            "so no balance can be tested." + _invalid_text(invalid)) if n else (
        "No verdict: the region holds no grid points; draw a larger box or one inside the data.")
    return {"points": 0, "region_points": n, "valid_share": 0.0, "masked_points": n,
            "invalid": invalid, "terms": [], "derived": [], "winds": {}, "numbers": {},
            "scales": None, "scales_recipe": dict(RECIPE), "resolution": None, "ground": None,
            "balances": {}, "shares": {},
            "verdict": {"balance": "none", "text": text,
                        "why": "A verdict needs valid points." if verdict is None else verdict.why},
            "explain": dict(EXPLAIN), "residual_causes": [], "notes": [],
            "ageostrophic_parts": {"measured_rms": None, "points": 0, "parts": {}}}
