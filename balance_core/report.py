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
from typing import Any, NamedTuple, TypedDict

import numpy as np

from . import constants as C
from .budget import (
    AGEOSTROPHIC_PARTS,
    DERIVED,
    TERMS,
    Budget,
    Fields,
    ageostrophic_parts,
    momentum_budget,
    trajectory_centripetal,
)
from .grid import Grid, derivative_weights
from .numbers import (
    brunt_vaisala_squared,
    burger_number,
    deformation_radius,
    ekman_number,
    froude_number,
    richardson_number,
    rossby_number,
    vertical_shear_squared,
)
from .region import Region, vector_stats, weighted_stats
from .scales import BY_CONSTRUCTION, RECIPE, estimate_for_term, estimate_scales
from .verdict import (
    CANDIDATES,
    Thresholds,
    Verdict,
    VerdictDict,
    classify_budget,
    imbalance_ratios,
    near_ground,
    residual_causes,
)
from .winds import Flow, GradientWind, geostrophic_wind, gradient_wind

__all__ = [
    "LevelDiagnostics",
    "level_diagnostics",
    "surface_diagnostics",
    "box_report",
    "geostrophic_only_report",
    "heights_only_diagnostics",
    "window",
    "window_verdict",
    "WindowVerdict",
]


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
    #: dZ/dt at the level, m s-1 (None with one valid time)
    height_tendency: np.ndarray | None = None
    #: the surface budget (sea-level pressure and the 10 m wind) rather than a pressure
    #: level: ``height`` is then the sea-level pressure's equivalent height p / (rho g0),
    #: ``sea_level_pressure`` the pressure itself (Pa), and ``high_ground`` the points
    #: left out because the ground there is too high for the sea-level pressure
    surface: bool = False
    sea_level_pressure: np.ndarray | None = None
    high_ground: np.ndarray | None = None
    density_source: str = ""
    #: why there is no budget (the data have no wind): the wind is then NaN, the budget's
    #: terms unavailable but the pressure gradient, and a region's report the geostrophic
    #: wind only (:func:`geostrophic_only_report`); empty with a wind
    no_wind: str = ""

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


class TermEntry(TypedDict):
    """One term of a region's budget: its area-weighted RMS magnitude (m s-2, None where it
    is not available) and components, and its a priori estimate."""

    name: str
    magnitude: float | None
    x_rms: float | None
    y_rms: float | None
    estimate: Any
    estimate_by_construction: bool
    note: str | None


class BoxReport(TypedDict):
    """What :func:`box_report` says about one region at one level (see its docstring);
    the JSON, CSV, sheet and page all read these keys."""

    points: int
    region_points: int
    valid_share: float
    masked_points: int
    invalid: dict[str, int]
    terms: list[TermEntry]
    derived: list[TermEntry]
    winds: dict[str, Any]
    numbers: dict[str, Any]
    scales: dict[str, float] | None
    scales_recipe: dict[str, str]
    resolution: dict[str, Any] | None
    ground: dict[str, Any] | None
    balances: dict[str, float | None]
    balances_tested: dict[str, bool]
    curvature: str | None
    shares: dict[str, float | None]
    verdict: VerdictDict
    explain: dict[str, str]
    ageostrophic_parts: dict[str, Any]
    residual_causes: list[Any]
    notes: list[str]


def level_diagnostics(
    grid: Grid,
    fields: Fields,
    it: int,
    ik: int,
    *,
    height_above_ground=None,
    height_above_ground_source: str = "",
    below_ground=None,
) -> LevelDiagnostics:
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
        shear2 = vertical_shear_squared(
            np.asarray(fields.u[it], np.float64),
            np.asarray(fields.v[it], np.float64),
            temp,
            fields.pressure,
            axis=0,
        )[ik]
    dt = zt = None
    if fields.time is not None and fields.time.size > 1:
        dt = float(np.max(np.diff(fields.time)))
        ids, wts = derivative_weights(fields.time, it)
        zt = sum(wt * np.asarray(fields.height[i, ik], dtype=np.float64) for i, wt in zip(ids, wts))
        budget.derived["centripetal_trajectory"] = trajectory_centripetal(budget, u, v)
    return LevelDiagnostics(
        grid=grid,
        budget=budget,
        pressure=float(fields.pressure[ik]),
        u=u,
        v=v,
        height=z,
        omega=om,
        temperature=t,
        ug=ug,
        vg=vg,
        gradient=gradient_wind(grid, z),
        vorticity=Flow(grid, u, v).vorticity,
        n2=n2,
        shear2=shear2,
        time_step_s=dt,
        height_above_ground=height_above_ground,
        height_above_ground_source=height_above_ground_source,
        below_ground=below_ground,
        height_tendency=zt,
    )


def surface_diagnostics(
    grid: Grid, pressure, u, v, *, t2m=None, time=None, it: int = 0, elevation=None
) -> LevelDiagnostics:
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
    if budget.terms["tendency"].available:
        budget.derived["centripetal_trajectory"] = trajectory_centripetal(budget, u0, v0)
    ug, vg = geostrophic_wind_from_pressure(grid, p0, rho)
    with np.errstate(invalid="ignore"):
        rho_mean = float(np.nanmean(rho)) if np.ndim(rho) else float(rho)
    dt = None
    if time is not None and np.size(time) > 1:
        dt = float(np.max(np.diff(np.asarray(time, dtype=np.float64))))
    return LevelDiagnostics(
        grid=grid,
        budget=budget,
        pressure=C.STD_SEA_LEVEL_PRESSURE,
        u=u0,
        v=v0,
        height=p0 / (rho_mean * C.G0),
        omega=None,
        temperature=None if t2m is None else np.asarray(t2m, dtype=np.float64),
        ug=ug,
        vg=vg,
        gradient=gradient_wind_from_pressure(grid, p0, rho),
        vorticity=Flow(grid, u0, v0).vorticity,
        n2=None,
        shear2=None,
        time_step_s=dt,
        height_above_ground=np.full(grid.shape, 10.0),
        height_above_ground_source="the 10 m wind",
        surface=True,
        sea_level_pressure=p0,
        high_ground=high,
        density_source=how,
    )


def heights_only_diagnostics(
    grid: Grid, height, pressure: float, why: str, *, temperature=None, below_ground=None
) -> LevelDiagnostics:
    """The diagnostics of a level whose file gives the height and no wind: the geostrophic
    and gradient winds of the height, the pressure-gradient force, and nothing that needs
    the wind (NaN, or unavailable with ``why``)."""
    from .budget import Term

    z = np.asarray(height, dtype=np.float64)
    nan = np.full(z.shape, np.nan)
    px, py = grid.grad(z)
    terms = {n: Term(n, None, None, why) for n in TERMS}
    terms["pressure_gradient"] = Term("pressure_gradient", -C.G0 * px, -C.G0 * py)
    budget = Budget(
        terms=terms,
        derived={n: Term(n, None, None, why) for n in DERIVED},
        residual_includes=list(TERMS[:-1]),
        notes=[why],
        level_pa=float(pressure),
        time_index=0,
        level_index=0,
    )
    ug, vg = geostrophic_wind(grid, z)
    return LevelDiagnostics(
        grid=grid,
        budget=budget,
        pressure=float(pressure),
        u=nan,
        v=nan,
        height=z,
        omega=None,
        temperature=None if temperature is None else np.asarray(temperature, np.float64),
        ug=ug,
        vg=vg,
        gradient=gradient_wind(grid, z),
        vorticity=nan,
        n2=None,
        shear2=None,
        time_step_s=None,
        below_ground=below_ground,
        no_wind=why,
    )


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
    "rossby": (
        "box Rossby number U / (f0 L), U the region's RMS wind and L the flow's length "
        "scale: how large the acceleration of the flow is against Coriolis for the "
        "region as a whole (small: geostrophy can hold)"
    ),
    "rossby_local_median": (
        "local Rossby number |zeta / f|, the median over the region's "
        "points: how strongly the flow spins against the planet's rotation "
        "at a typical point (large in tight vortices even when the box "
        "number is small)"
    ),
}

#: The numbers of the report: the textbook's (with H the depth of the troposphere) and the
#: data's own, under names of their own.
NUMBER_KEYS = (
    "rossby",
    "rossby_local_median",
    "ekman",
    "froude",
    "burger",
    "deformation_radius_km",
    "richardson_median",
    "residual_to_coriolis",
    "shear_depth_km",
)


def box_report(
    diag: LevelDiagnostics,
    inside,
    *,
    thresholds: Thresholds = Thresholds(),
    nu: float = C.EDDY_VISCOSITY,
    flow_length=None,
) -> BoxReport:
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
    flow_length : balance_core.scales.FlowLength, optional
        The flow's length scale where the caller knows it (a closed system's radius);
        else :func:`balance_core.scales.flow_length_scale` over the whole grid.

    Returns
    -------
    dict
        ``points`` (valid), ``region_points``, ``valid_share``, ``masked_points``,
        ``invalid`` (why points are not valid), ``terms`` (sorted by magnitude,
        unavailable last; each with its a priori ``estimate`` and
        ``estimate_by_construction``), ``derived``, ``winds``, ``numbers``, ``scales``,
        ``scales_recipe``, ``resolution``, ``ground``, ``balances`` (the ratios),
        ``balances_tested``, ``curvature``, ``shares``, ``verdict`` (balance, text, why,
        tested, not_tested, cautions), ``explain``, ``residual_causes``,
        ``ageostrophic_parts``, ``notes``. Magnitudes are area-weighted RMS of the
        term's horizontal vector, m s-2.
    """
    g = diag.grid
    th = thresholds
    if isinstance(inside, Region):
        inside = inside.mask(g)
    if diag.no_wind:
        return geostrophic_only_report(g, diag.ug, diag.vg, inside, diag.no_wind)
    win = window(inside)
    if win is None:
        return _empty_report(inside, th)
    ins = inside[win]
    sub, cropped, ok, ratios, hag, ground, verdict = window_verdict(diag, win, ins, th)
    invalid = _invalid_points(diag, win, ins, ok)
    if not ok.any():
        return _empty_report(inside, th, invalid=invalid, verdict=verdict)
    scales, flow = _scales(diag, inside, win, sub, ok, nu, flow_length)
    resolution = _resolution(sub, ok, scales, th)
    verdict = _with_resolution(verdict, resolution, invalid, th)
    enough = _enough_points(ratios, th)
    f_ok = enough and not _mostly_tropical(ratios, th)
    terms = [_entry(n, cropped.terms[n], sub, ok, scales) for n in TERMS]
    terms.sort(key=lambda e: (e["magnitude"] is None, -(e["magnitude"] or 0.0)))
    derived = [
        _entry(n, cropped.derived[n], sub, ok, scales)
        for n in list(DERIVED) + ["centripetal_trajectory"]
        if n in cropped.derived
    ]
    winds = _winds(diag, win, sub, ok, f_ok)
    numbers = _numbers(diag, win, sub, ok, scales, ratios, enough, f_ok)
    parts = (
        _ageostrophic_parts(diag, cropped, win, sub, ok)
        if f_ok
        else _parts_not_given(
            diag,
            "the region lies mostly within the tropical mask" if enough else "too few valid points",
        )
    )
    notes = _notes(diag, win, ins, invalid, numbers, resolution, ground, hag, ratios, flow, th)
    causes = residual_causes(
        level_pa=diag.pressure,
        budget=diag.budget,
        time_step_s=diag.time_step_s,
        residual_share=ratios.get("residual_share"),
        below_ground=invalid["below_ground"],
        ground=ground,
        resolution=resolution,
        friction_alignment=ratios.get("friction_alignment"),
        thresholds=th,
    )
    npts = int(ok.sum())
    vd = verdict.as_dict()
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
        "scales": None
        if scales is None
        else {k: getattr(scales, k) for k in ("U", "W", "L", "H", "dP", "f0", "nu")},
        "scales_recipe": dict(RECIPE, **({"L": flow.recipe} if flow is not None else {})),
        "resolution": resolution,
        "ground": {"near": bool(ground[0]), "height_above_ground_m": hag, "why": ground[1]},
        "balances": {k: ratios.get(k) for k in CANDIDATES},
        "balances_tested": {k: vd["tested"].get(k, True) for k in CANDIDATES},
        "curvature": ratios.get("curvature"),
        "shares": {
            "acceleration": ratios.get("acceleration_share"),
            "residual": ratios.get("residual_share"),
            "friction_alignment": ratios.get("friction_alignment"),
            "tropics": ratios.get("tropics_share"),
            "rossby_local_above_1": ratios.get("rossby_local_share"),
        },
        "verdict": vd,
        "explain": dict(EXPLAIN),
        "ageostrophic_parts": parts,
        "residual_causes": causes,
        "notes": notes,
    }


class WindowVerdict(NamedTuple):
    """The verdict of the points ``ins`` of one window of a level, and what it came from."""

    grid: Any  # the window's grid (:class:`_GridWindow`)
    budget: Budget  # the budget cut to the window
    ok: np.ndarray  # the window's points where every available term is finite
    ratios: dict  # :func:`balance_core.verdict.imbalance_ratios`
    height_above_ground_m: float | None  # the median over ``ok``
    ground: tuple  # :func:`balance_core.verdict.near_ground`
    verdict: Verdict


def window_verdict(
    diag: LevelDiagnostics, win, ins: np.ndarray, thresholds: Thresholds = Thresholds()
) -> WindowVerdict:
    """The verdict of the points ``ins`` (bool, the window's shape) of the window ``win``
    (row and column slices, :func:`window`): the imbalance ratios over those points
    (:func:`balance_core.verdict.imbalance_ratios`), whether the level is near the ground
    there (:func:`balance_core.verdict.near_ground`; at sea level always) and the class
    (:func:`balance_core.verdict.classify_budget`). One rule for a region's report
    (:func:`box_report`) and for each tile of the map of which balance holds where
    (:mod:`balance_core.balance_map`)."""
    sub = _GridWindow(diag.grid, win)
    cropped = _crop_budget(diag.budget, win)
    w = lambda a: None if a is None else a[win]  # noqa: E731
    ok = _valid(cropped, ins)
    ratios = imbalance_ratios(
        cropped, sub, ins, u=w(diag.u), v=w(diag.v), vorticity=w(diag.vorticity)
    )
    hag = _median(w(diag.height_above_ground), sub, ok)
    ground = (
        (True, "the 10 m wind blows in the boundary layer, where friction acts")
        if diag.surface
        else near_ground(diag.pressure, hag, thresholds)
    )
    verdict = classify_budget(ratios, thresholds, ground=ground)
    return WindowVerdict(sub, cropped, ok, ratios, hag, ground, verdict)


def _valid(cropped: Budget, ins) -> np.ndarray:
    """The region's points where every available term and view is finite."""
    ok = ins.copy()
    for name in list(cropped.terms) + list(cropped.derived):
        t = cropped[name]
        if t.available:
            ok &= np.isfinite(t.x) & np.isfinite(t.y)
    return ok


def _enough_points(ratios, th) -> bool:
    n, total = ratios.get("points") or 0, ratios.get("region_points") or 0
    return n >= th.min_points and (not total or n / total >= th.min_valid_share)


def _mostly_tropical(ratios, th) -> bool:
    share = ratios.get("tropics_share")
    return share is not None and share > th.tropics_share


def _scales(diag, inside, win, sub, ok, nu, flow_length):
    """The region's scales (:func:`estimate_scales`) and the flow's length scale, taken over
    the whole grid's rows and columns through the region (or the caller's)."""
    from .scales import flow_length_scale

    w = lambda a: None if a is None else a[win]  # noqa: E731
    flow = flow_length
    if flow is None:
        full = np.zeros(inside.shape, dtype=bool)
        full[win] = ok
        flow = flow_length_scale(diag.grid, diag.height, full)
    try:
        scales = estimate_scales(
            sub,
            ok,
            u=w(diag.u),
            v=w(diag.v),
            height=w(diag.height),
            pressure=diag.pressure,
            omega=w(diag.omega),
            temperature=w(diag.temperature),
            nu=nu,
            n2=_median(w(diag.n2), sub, ok),
            flow_length=flow,
        )
    except ValueError:
        scales = None
    return scales, flow


def _with_resolution(verdict: Verdict, resolution, invalid, th) -> Verdict:
    """The verdict with the points left out said ("none"), or the under-resolved caution."""
    if verdict.balance == "none":
        return dataclasses.replace(verdict, text=verdict.text + _invalid_text(invalid))
    if resolution is not None and not resolution["resolved"]:
        caution = (
            f"the flow is under-resolved (length scale "
            f"{resolution['flow_length_km']:.0f} km, {resolution['points_per_length']:.1f} "
            f"grid spacings of {resolution['grid_spacing_km']:.0f} km; at least "
            f"{th.resolved_ratio:g} are needed), so truncation error is part of the "
            "residual and the ratios; take this verdict as a rough guide only."
        )
        return dataclasses.replace(
            verdict,
            text=verdict.text + " Caution: " + caution,
            cautions=verdict.cautions + (caution[0].upper() + caution[1:],),
        )
    return verdict


def _entry(name, t, sub, ok, scales) -> TermEntry:
    """One term's RMS magnitude and components, its a priori estimate and whether that
    estimate agrees by construction."""
    est = _estimate(name, scales)
    by_construction = name in BY_CONSTRUCTION
    if not t.available:
        return {
            "name": name,
            "magnitude": None,
            "x_rms": None,
            "y_rms": None,
            "estimate": est,
            "estimate_by_construction": by_construction,
            "note": t.note,
        }
    st, xr, yr = vector_stats(t.x, t.y, sub, ok)
    return {
        "name": name,
        "magnitude": st.rms,
        "x_rms": xr,
        "y_rms": yr,
        "estimate": est,
        "estimate_by_construction": by_construction,
        "note": t.note,
    }


def _winds(diag, win, sub, ok, f_ok) -> dict:
    """RMS speeds of the wind, the geostrophic and the gradient wind, and the median
    ageostrophic fraction (those that divide by f only outside the tropics)."""
    u_w, v_w, ug_w, vg_w = diag.u[win], diag.v[win], diag.ug[win], diag.vg[win]
    speed = weighted_stats(np.hypot(u_w, v_w), sub, ok, quantiles=False).rms
    out = {
        "speed_rms": speed,
        "geostrophic_speed_rms": None,
        "ageostrophic_fraction_median": None,
        "gradient_speed_rms": weighted_stats(
            np.abs(diag.gradient.speed[win]), sub, ok, quantiles=False
        ).rms,
    }
    if f_ok:
        out["geostrophic_speed_rms"] = weighted_stats(
            np.hypot(ug_w, vg_w), sub, ok, quantiles=False
        ).rms
        with np.errstate(invalid="ignore", divide="ignore"):
            agf = np.hypot(u_w - ug_w, v_w - vg_w) / np.hypot(u_w, v_w)
        out["ageostrophic_fraction_median"] = weighted_stats(agf, sub, ok).median
    return out


def _numbers(diag, win, sub, ok, scales, ratios, enough, f_ok) -> dict:
    """The textbook numbers from the region's scales (H the depth of the troposphere, N
    from the region's temperature), and the data's own beside them."""
    numbers: dict[str, float | None] = {k: None for k in NUMBER_KEYS}
    if not enough:
        return numbers
    rms = ratios["rms"]
    n2m = _median(None if diag.n2 is None else diag.n2[win], sub, ok)
    if diag.n2 is not None and diag.shear2 is not None:
        with np.errstate(invalid="ignore", divide="ignore"):
            ri = richardson_number(diag.n2[win], diag.shear2[win])
        numbers["richardson_median"] = _median(ri, sub, ok)
    if diag.shear2 is not None and scales is not None:
        sh = weighted_stats(
            np.sqrt(diag.shear2[win]), sub, ok & np.isfinite(diag.shear2[win]), quantiles=False
        ).rms
        # under 1e-6 s-1 (1 m/s over 1000 km of height) there is no shear to speak of
        numbers["shear_depth_km"] = _num(scales.U / sh / 1e3) if sh and sh > 1e-6 else None
    if not f_ok:
        return numbers
    numbers["rossby_local_median"] = weighted_stats(
        np.abs(diag.vorticity[win] * diag.grid.inverse_f[win]), sub, ok
    ).median
    if rms.get("residual") is not None and rms.get("coriolis"):
        numbers["residual_to_coriolis"] = rms["residual"] / rms["coriolis"]
    if scales is None:
        return numbers
    numbers["rossby"] = _num(rossby_number(scales.U, scales.f0, scales.L))
    numbers["ekman"] = _num(ekman_number(scales.nu, scales.f0, scales.H))
    if n2m is not None:
        numbers["froude"] = _num(froude_number(scales.U, n2m, scales.H))
        numbers["burger"] = _num(burger_number(n2m, scales.H, scales.f0, scales.L))
        lr = _num(deformation_radius(n2m, scales.H, scales.f0))
        numbers["deformation_radius_km"] = None if lr is None else lr / 1e3
    return numbers


def _notes(diag, win, ins, invalid, numbers, resolution, ground, hag, ratios, flow, th):
    g = diag.grid
    notes = list(diag.budget.notes)
    tropics = int(np.count_nonzero(g.tropics_mask[win] & ins))
    if tropics:
        notes.append(
            f"{tropics} points within {g.min_lat:g} degrees of the equator: quantities "
            "divided by f (geostrophic wind, local Rossby number) are masked there"
        )
    if _mostly_tropical(ratios, th):
        notes.append(
            f"the region lies mostly within {g.min_lat:g} degrees of the equator: the "
            "balances and numbers that need f are not given"
        )
    if invalid["pole_row"]:
        notes.append(
            f"{invalid['pole_row']} points lie on a pole row (|lat| >= "
            f"{g.pole_limit:g}), where east and north have no meaning: masked"
        )
    if invalid["below_ground"]:
        notes.append(
            f"{invalid['below_ground']} points of the region lie below the ground at "
            f"{diag.pressure / 100:g} hPa: masked"
        )
    if invalid.get("high_ground"):
        from .surface import MAX_ELEVATION_M

        notes.append(
            f"{invalid['high_ground']} points of the region lie on ground higher "
            f"than {MAX_ELEVATION_M:g} m, where the sea-level pressure is a reduction "
            "through the mountain: left out"
        )
    no_root = int(np.count_nonzero(diag.gradient.no_root[win] & ins))
    if no_root:
        notes.append(
            f"{no_root} points have no real gradient-wind root (anticyclonic curvature "
            "too strong for the pressure gradient); they are left out of the gradient "
            "speed"
        )
    if numbers.get("residual_to_coriolis") is not None:
        notes.append(
            "residual over Coriolis (RMS): the friction the residual implies against "
            "the Coriolis force, if it is all friction; the Ekman number is the "
            "textbook's nu / (f0 H^2)"
        )
    if ratios.get("curvature"):
        notes.append(
            f"the centripetal term of the gradient and cyclostrophic balances takes "
            f"the {ratios['curvature']} curvature"
        )
    if resolution is not None:
        notes.append(
            f"grid spacing {resolution['grid_spacing_km']:.0f} km against a flow length "
            f"scale of {resolution['flow_length_km']:.0f} km "
            f"({resolution['points_per_length']:.1f} spacings; "
            f"{'resolved' if resolution['resolved'] else 'under-resolved'}, the line "
            f"is {th.resolved_ratio:g}); the length scale is {flow.recipe}"
        )
    notes.append(
        ground[1]
        + (
            f" ({diag.height_above_ground_source})"
            if diag.height_above_ground_source and hag is not None
            else ""
        )
    )
    return notes


def _parts_not_given(diag, why: str) -> dict:
    names = list(AGEOSTROPHIC_PARTS) + ["isallobaric"]
    return {
        "measured_rms": None,
        "points": 0,
        "note": f"not given: {why}",
        "parts": {n: {"speed_rms": None, "note": why} for n in names},
    }


def _ageostrophic_parts(diag, cropped, win, sub, ok) -> dict:
    """RMS speed of each part of the ageostrophic wind over the region (see
    :func:`balance_core.budget.ageostrophic_parts`), of the measured V - Vg, and of the
    isallobaric wind (:func:`balance_core.budget.isallobaric_wind`) beside them; counted
    only where f is outside the tropical mask."""
    from .budget import isallobaric_wind

    inv_f = diag.grid.inverse_f[win]
    have_f = ok & np.isfinite(inv_f)
    out: dict[str, Any] = {"measured_rms": None, "points": int(have_f.sum()), "parts": {}}
    if not have_f.any():
        out["note"] = "every point of the region is within the tropical mask, where 1/f is not used"
        for name in list(AGEOSTROPHIC_PARTS) + ["isallobaric"]:
            out["parts"][name] = {"speed_rms": None, "note": "within the tropical mask"}
        return out
    ua, va = diag.u[win] - diag.ug[win], diag.v[win] - diag.vg[win]
    out["measured_rms"] = weighted_stats(np.hypot(ua, va), sub, have_f, quantiles=False).rms
    speed = weighted_stats(np.hypot(diag.u[win], diag.v[win]), sub, have_f, quantiles=False).rms
    if out["measured_rms"] is not None and speed and out["measured_rms"] > speed:
        out["note"] = (
            "V - Vg exceeds the wind itself: the geostrophic wind overstates the "
            "flow here (tight curvature, small f), so the parts describe how far "
            "the flow is from geostrophy, not a real cross-flow"
        )
    for name, part in ageostrophic_parts(cropped, inv_f).items():
        if not part.available:
            out["parts"][name] = {"speed_rms": None, "note": part.note}
            continue
        s = weighted_stats(np.hypot(part.x, part.y), sub, have_f, quantiles=False).rms
        out["parts"][name] = {"speed_rms": _num(s), "note": part.note}
    if diag.height_tendency is None:
        out["parts"]["isallobaric"] = {
            "speed_rms": None,
            "note": "no height tendency (one valid time)",
        }
    else:
        ix, iy = isallobaric_wind(diag.grid, diag.height_tendency)
        s = weighted_stats(np.hypot(ix[win], iy[win]), sub, have_f, quantiles=False).rms
        out["parts"]["isallobaric"] = {
            "speed_rms": _num(s),
            "note": (
                "-(g/f^2) grad(dZ/dt), from the height tendency: beside the parts, not "
                "one of them (the tendency part is the wind's own change)"
            ),
        }
    return out


def _invalid_points(diag, win, ins, ok) -> dict:
    """Why the region's points that are not valid are not: below the ground, pole row, missing."""
    bad = ins & ~ok
    below = np.zeros_like(bad) if diag.below_ground is None else diag.below_ground[win] & bad
    high = np.zeros_like(bad) if diag.high_ground is None else diag.high_ground[win] & bad
    pole = diag.grid.pole_mask[win] & bad & ~below & ~high
    missing = bad & ~below & ~pole & ~high
    out = {
        "below_ground": int(below.sum()),
        "pole_row": int(pole.sum()),
        "missing_data": int(missing.sum()),
    }
    if diag.surface:
        out["high_ground"] = int(high.sum())
    return out


def _invalid_text(invalid) -> str:
    parts = [
        f"{n} {what}"
        for what, n in (
            ("below the ground", invalid["below_ground"]),
            ("on ground higher than the sea-level pressure allows", invalid.get("high_ground", 0)),
            ("with missing data", invalid["missing_data"]),
            ("on a pole row", invalid["pole_row"]),
        )
        if n
    ]
    return (" Of the points left out, " + ", ".join(parts) + ".") if parts else ""


def _resolution(sub, ok, scales, th) -> dict | None:
    """Grid spacing (the square root of the mean cell area) against the flow's length scale L."""
    if scales is None:
        return None
    spacing = float(np.sqrt(np.sum(sub.cell_area[ok]) / max(int(ok.sum()), 1)))
    ratio = scales.L / spacing
    return {
        "grid_spacing_km": spacing / 1e3,
        "flow_length_km": scales.L / 1e3,
        "points_per_length": ratio,
        "resolved": bool(ratio >= th.resolved_ratio),
    }


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

    return dataclasses.replace(
        b,
        terms={n: crop(t) for n, t in b.terms.items()},
        derived={n: crop(t) for n, t in b.derived.items()},
    )


class _GridWindow:
    """The parts of a Grid that the statistics and :func:`estimate_scales` use, cut to a window."""

    def __init__(self, grid: Grid, win):
        self.cell_area = grid.cell_area[win]
        self.lat = grid.lat[win]
        self.f = grid.f[win]
        self.tropics_mask = grid.tropics_mask[win]
        self.radius = grid.radius


def geostrophic_only_report(grid: Grid, ug, vg, inside, why: str) -> BoxReport:
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
    rep["points"] = n
    rep["valid_share"] = n / max(total, 1)
    rep["masked_points"] = total - n
    rep["invalid"] = {"below_ground": 0, "pole_row": 0, "missing_data": total - n}
    rep["winds"] = {
        "speed_rms": None,
        "geostrophic_speed_rms": gstat.rms,
        "ageostrophic_fraction_median": None,
        "gradient_speed_rms": None,
    }
    rep["verdict"] = {
        "balance": "none",
        "text": f"No verdict: {why}, so no momentum budget "
        "can be made; the geostrophic wind of the region is given instead.",
        "why": "A verdict needs the wind.",
        "tested": {},
        "not_tested": {},
        "cautions": [],
    }
    rep["notes"] = [f"{why}: the geostrophic wind only"]
    return rep


def _empty_report(inside, th: Thresholds = Thresholds(), invalid=None, verdict=None) -> BoxReport:
    n = int(np.count_nonzero(inside))
    invalid = invalid or {"below_ground": 0, "pole_row": 0, "missing_data": n}
    text = (
        (
            f"No verdict: none of the {n} points of the region has every term of the budget, "
            "so no balance can be tested." + _invalid_text(invalid)
        )
        if n
        else (
            "No verdict: the region holds no grid points; draw a larger box or one inside the data."
        )
    )
    return {
        "points": 0,
        "region_points": n,
        "valid_share": 0.0,
        "masked_points": n,
        "invalid": invalid,
        "terms": [],
        "derived": [],
        "winds": {},
        "numbers": {},
        "scales": None,
        "scales_recipe": dict(RECIPE),
        "resolution": None,
        "ground": None,
        "balances": {},
        "balances_tested": {},
        "curvature": None,
        "shares": {},
        "verdict": {
            "balance": "none",
            "text": text,
            "why": "A verdict needs valid points." if verdict is None else verdict.why,
            "tested": {},
            "not_tested": {},
            "cautions": [],
        },
        "explain": dict(EXPLAIN),
        "residual_causes": [],
        "notes": [],
        "ageostrophic_parts": {"measured_rms": None, "points": 0, "parts": {}},
    }
