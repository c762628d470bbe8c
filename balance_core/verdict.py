"""Which balance holds: imbalance ratios of the candidate balances, a class, one sentence.

Ranking RMS magnitudes alone always puts the pressure gradient and Coriolis
on top whether or not they cancel, so the data verdict is decided on vector
sums. For a region, the imbalance ratio of a candidate balance is

    RMS |sum of its terms| / RMS |pressure_gradient|

area-weighted over the points where every term involved is finite:

    geostrophic     pressure_gradient + coriolis
    cyclostrophic   pressure_gradient + centripetal
    gradient        pressure_gradient + coriolis + centripetal
    frictional      pressure_gradient + coriolis + residual

together with two shares, RMS|acceleration| / RMS|PGF| (is the flow speeding
up, slowing or turning faster than a balance allows?) and RMS|residual| /
RMS|PGF| (how much the unresolved force matters).

The frictional ratio alone can never say no: PGF + Coriolis + residual is the
acceleration (less the small terms) by construction, whatever the data. So
frictional balance is a candidate only where friction can act -- in or near
the boundary layer -- and only where the residual behaves like friction: it
opposes the wind over the box (the area-weighted mean cosine of the angle
between residual and wind is at most ``-friction_alignment``). Elsewhere a large
residual is unexplained imbalance (truncation on a coarse grid, a missing
tendency, sub-grid processes), and the verdict names the best physical
balance, or none.

With too few valid points the verdict is "none": no balance is named from data
that cannot support one.

The thresholds are the project's own choice, not a published standard:
they are the fields of :class:`Thresholds`, documented in DEVELOPERS.md and
configurable by every caller.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from .region import Region, weighted_stats
from .vocabulary import TERM_NAMES

__all__ = ["Thresholds", "Verdict", "imbalance_ratios", "classify_budget", "classify_scales",
           "budget_verdict", "residual_causes", "near_ground", "CANDIDATES", "CLASSES"]

#: Candidate balances, simplest first, and the terms each adds up.
CANDIDATES = {
    "geostrophic": ("pressure_gradient", "coriolis"),
    "cyclostrophic": ("pressure_gradient", "centripetal"),
    "gradient": ("pressure_gradient", "coriolis", "centripetal"),
    "frictional": ("pressure_gradient", "coriolis", "residual"),
}
#: Every class a verdict can take ("none": the data cannot support a verdict).
CLASSES = ("geostrophic", "gradient", "cyclostrophic", "frictional", "unsteady", "unbalanced",
           "none")

_PRETTY = TERM_NAMES


@dataclasses.dataclass(frozen=True)
class Thresholds:
    """The project's own thresholds for the verdict (not a published standard).

    Attributes
    ----------
    balanced : float
        A candidate balance holds when its imbalance ratio is at or below this.
    good : float
        A balance holding to within this is kept even when one with more terms
        does better still.
    improvement : float
        Otherwise a candidate with more terms replaces a simpler one that also
        holds only if its ratio is at most ``improvement`` times the simpler one's.
    friction_share : float
        Frictional balance needs RMS|residual| / RMS|PGF| at or above this.
    unsteady_share : float
        With no balance holding, RMS|DV/Dt| / RMS|PGF| at or above this makes
        the class "unsteady"; below it, "unbalanced".
    comparable_factor : float
        Scale verdict: a term within this factor of the pressure gradient
        matters ("within a factor of a few").
    rossby_small, rossby_large : float
        Scale verdict: Ro below ``rossby_small`` allows geostrophy; Ro above
        ``rossby_large`` leaves Coriolis out of a curved flow (cyclostrophic).
    min_points, min_valid_share : int, float
        No verdict ("none") unless at least ``min_points`` points, and at least
        ``min_valid_share`` of the region's points, have every term.
    friction_alignment : float
        Frictional balance needs the residual to oppose the wind: the
        area-weighted mean of -cos(angle between residual and wind) at least this.
    boundary_layer_m : float
        Frictional balance needs the level within this height above the ground
        (median over the region), m.
    boundary_layer_pa : float
        Where the height above the ground is unknown: levels at or below (at
        pressures of at least) this count as near the ground, Pa.
    resolved_ratio : float
        The flow is under-resolved where its length scale L (see
        :func:`balance_core.scales.estimate_scales`) is less than this many grid
        spacings; the verdict then says so and names truncation error.
    """

    balanced: float = 0.3
    good: float = 0.1
    improvement: float = 0.5
    friction_share: float = 0.2
    unsteady_share: float = 0.5
    comparable_factor: float = 3.0
    rossby_small: float = 0.3
    rossby_large: float = 3.0
    min_points: int = 25
    min_valid_share: float = 0.5
    friction_alignment: float = 0.5
    boundary_layer_m: float = 2000.0
    boundary_layer_pa: float = 85000.0
    resolved_ratio: float = 3.0


@dataclasses.dataclass(frozen=True)
class Verdict:
    """A balance class with its plain-language sentence, why it was chosen, and the evidence."""

    balance: str
    text: str
    ratios: dict = dataclasses.field(default_factory=dict)
    why: str = ""

    def as_dict(self) -> dict:
        return {"balance": self.balance, "text": self.text, "why": self.why}


def _rms(field, grid, inside):
    s = weighted_stats(field, grid, inside, quantiles=False)
    return s.rms


def imbalance_ratios(budget, grid, inside, *, u=None, v=None) -> dict:
    """Imbalance ratio of each candidate balance and the two shares over a region.

    Parameters
    ----------
    budget : balance_core.budget.Budget
    grid : Grid
    inside : bool array, or a Region
    u, v : arrays, optional
        The wind (m s-1); gives ``friction_alignment``.

    Returns
    -------
    dict
        ``geostrophic``, ``cyclostrophic``, ``gradient``, ``frictional``,
        ``acceleration_share``, ``residual_share``, ``friction_alignment`` (the
        area-weighted mean of -cos(residual, wind): 1 when the residual opposes
        the wind everywhere, 0 when it is unrelated), ``points`` (valid),
        ``region_points``, and the RMS magnitudes of every term and view under
        ``"rms"``. A value is None where the region has no valid points or the
        needed terms are unavailable.
    """
    if isinstance(inside, Region):
        inside = inside.mask(grid)
    names = list(budget.terms) + list(budget.derived)
    # one common set of points: where every available term is finite
    ok = inside.copy()
    for n in names:
        t = budget[n]
        if t.available:
            ok &= np.isfinite(t.x) & np.isfinite(t.y)
    out = {"points": int(ok.sum()), "region_points": int(inside.sum()),
           "masked_points": int(inside.sum() - ok.sum())}
    rms = {}
    for n in names:
        t = budget[n]
        rms[n] = _rms(np.hypot(t.x, t.y), grid, ok) if t.available else None
    out["rms"] = rms
    p = rms["pressure_gradient"]
    for cand, parts in CANDIDATES.items():
        terms = [budget[n] for n in parts]
        if not p or not all(t.available for t in terms):
            out[cand] = None
            continue
        sx = sum(t.x for t in terms)
        sy = sum(t.y for t in terms)
        out[cand] = _rms(np.hypot(sx, sy), grid, ok) / p
    acc, res = rms.get("acceleration"), rms.get("residual")
    out["acceleration_share"] = acc / p if p and acc is not None else None
    out["residual_share"] = res / p if p and res is not None else None
    out["friction_alignment"] = None
    if u is not None and v is not None and ok.any():
        r = budget["residual"]
        with np.errstate(invalid="ignore", divide="ignore"):
            cos = (r.x * u + r.y * v) / (np.hypot(r.x, r.y) * np.hypot(u, v))
        good = ok & np.isfinite(cos)
        if good.any():
            out["friction_alignment"] = -weighted_stats(cos, grid, good, quantiles=False).mean
    return out


def near_ground(level_pa: float, height_above_ground_m: float | None,
                thresholds: "Thresholds" = None) -> tuple:
    """(near, sentence): is the level in or near the boundary layer, and how that was judged.

    With the height above the ground known (median over the region), near means
    at most ``boundary_layer_m``; otherwise (no orography or surface pressure)
    levels at pressures of at least ``boundary_layer_pa`` count as near
    (the project's own fallback, common practice).
    """
    th = thresholds or Thresholds()
    if height_above_ground_m is not None and np.isfinite(height_above_ground_m):
        near = height_above_ground_m <= th.boundary_layer_m
        return near, (f"{level_pa / 100:g} hPa lies about {height_above_ground_m:.0f} m above "
                      f"the ground ({'within' if near else 'above'} the "
                      f"{th.boundary_layer_m:.0f} m taken as the boundary layer)")
    near = level_pa >= th.boundary_layer_pa
    return near, (f"{level_pa / 100:g} hPa, with no orography or surface pressure to give its "
                  f"height above the ground, counts as {'near' if near else 'far from'} the "
                  f"ground (levels at or below {th.boundary_layer_pa / 100:g} hPa are near)")


def classify_budget(ratios: dict, thresholds: Thresholds = Thresholds(), *,
                    ground: tuple | None = None) -> Verdict:
    """Pick one class from the imbalance ratios of :func:`imbalance_ratios`.

    Rule (the project's own):

    * fewer than ``min_points`` valid points, or less than ``min_valid_share`` of
      the region valid: "none";
    * the candidate balances that hold (ratio at or below ``balanced``) are taken
      simplest first (geostrophic and cyclostrophic, then gradient, then
      frictional); a more complex one replaces the current choice only if the
      current one is not already within ``good`` and the new ratio is at most
      ``improvement`` times the current one;
    * frictional is a candidate only near the ground (``ground``, from
      :func:`near_ground`; without it, by the level's pressure) and where the
      residual opposes the wind (``friction_alignment``) and matters
      (``friction_share``);
    * if none holds, "unsteady" when the acceleration share reaches
      ``unsteady_share`` and "unbalanced" otherwise.
    """
    th = thresholds
    rms = ratios.get("rms", {})
    n, total = ratios.get("points") or 0, ratios.get("region_points")
    total = n if total is None else total
    if not n or not rms.get("pressure_gradient"):
        return Verdict("none", f"No verdict: none of the {total} points of the region has "
                       "every term of the budget (missing data, below the ground or outside "
                       "the grid), so no balance can be tested.", ratios,
                       "A verdict needs valid points.")
    if n < th.min_points or (total and n / total < th.min_valid_share):
        return Verdict("none", f"No verdict: only {n} of the {total} points of the region "
                       f"({100 * n / max(total, 1):.0f} %) have every term of the budget; at "
                       f"least {th.min_points} points and {100 * th.min_valid_share:.0f} % of "
                       "the region are needed before a balance is named.", ratios,
                       "Too few valid points to name a balance.")
    holds, skipped = {}, []
    for cand in CANDIDATES:
        r = ratios.get(cand)
        if r is None or r > th.balanced:
            continue
        if cand == "frictional":
            why_not = _friction_barrier(ratios, th, ground)
            if why_not:
                skipped.append(why_not)
                continue
        holds[cand] = r
    chosen = None
    simple = [c for c in ("geostrophic", "cyclostrophic") if c in holds]
    if simple:
        chosen = min(simple, key=holds.get)
    why = []
    if chosen:
        why.append(f"{chosen.capitalize()} is the simplest balance that holds: it leaves "
                   f"{_pct(holds[chosen])} of the pressure-gradient force unbalanced (a balance "
                   f"holds at {_pct(th.balanced)} or less).")
    for cand in ("gradient", "frictional"):
        if cand not in holds:
            continue
        if chosen is None:
            chosen = cand
            why.append(f"{cand.capitalize()} is the simplest balance that holds: it leaves "
                       f"{_pct(holds[cand])} (a balance holds at {_pct(th.balanced)} or less).")
        elif holds[chosen] > th.good and holds[cand] <= th.improvement * holds[chosen]:
            why.append(f"{cand.capitalize()} replaces {chosen}: it leaves {_pct(holds[cand])} "
                       f"against {_pct(holds[chosen])}, at most {th.improvement:g} times as much, "
                       "so its extra term earns its place.")
            chosen = cand
        else:
            why.append(f"{cand.capitalize()} also holds ({_pct(holds[cand])}) but does not do "
                       f"enough better than {chosen} ({_pct(holds[chosen])}) to prefer the "
                       "balance with more terms.")
    why.extend(skipped)
    if chosen is None:
        acc = ratios.get("acceleration_share")
        chosen = "unsteady" if acc is not None and acc >= th.unsteady_share else "unbalanced"
        why.insert(0, f"No candidate balance leaves {_pct(th.balanced)} or less; the total "
                      "acceleration is " + ("" if chosen == "unsteady" else "not ") +
                   f"at least {_pct(th.unsteady_share)} of the pressure-gradient force.")
    return Verdict(chosen, _sentence(chosen, ratios), ratios, " ".join(why))


def _friction_barrier(ratios, th, ground) -> str | None:
    """Why frictional balance is not a candidate here (None if it is)."""
    if ground is None:
        return ("Frictional balance was not tested: the level's height above the ground is "
                "not known.")
    near, where = ground
    if not near:
        return f"Frictional balance was not tested: {where}."
    if (ratios.get("residual_share") or 0) < th.friction_share:
        return (f"Frictional balance was not tested: the residual is only "
                f"{_pct(ratios.get('residual_share') or 0)} of the pressure-gradient force.")
    align = ratios.get("friction_alignment")
    if align is None or align < th.friction_alignment:
        shown = "unknown" if align is None else f"{align:.2f}"
        return (f"Frictional balance was not tested: the residual does not oppose the wind "
                f"(alignment {shown}, at least {th.friction_alignment:g} is needed), so it does "
                "not act as friction.")
    return None


def budget_verdict(budget, grid, inside, thresholds: Thresholds = Thresholds(), *, u=None,
                   v=None, height_above_ground_m: float | None = None) -> Verdict:
    """:func:`imbalance_ratios` then :func:`classify_budget` (ground from :func:`near_ground`)."""
    ground = near_ground(budget.level_pa, height_above_ground_m, thresholds)
    return classify_budget(imbalance_ratios(budget, grid, inside, u=u, v=v), thresholds,
                           ground=ground)


def _fmt(x):
    return "n/a" if x is None else f"{x:.1e} m s-2"


def _pct(x):
    return f"{100 * x:.0f} %"


def _sentence(cls, ratios) -> str:
    rms = ratios["rms"]
    p = rms["pressure_gradient"]
    ranked = sorted(((v, k) for k, v in rms.items()
                     if v is not None and k not in ("pressure_gradient", "residual", "acceleration",
                                                    "along_stream", "centripetal", "tendency")),
                    reverse=True)
    cor = rms.get("coriolis")
    cen = rms.get("centripetal")
    acc = rms.get("acceleration")
    res = rms.get("residual")
    if cls == "geostrophic":
        other = next((k for v, k in ranked if k != "coriolis"), None)
        tail = f"; the largest other term is {_PRETTY[other]} ({_fmt(rms[other])})" if other else ""
        return (f"Geostrophic: the pressure-gradient force ({_fmt(p)}) is balanced by Coriolis "
                f"({_fmt(cor)}) to within {_pct(ratios['geostrophic'])}{tail}.")
    if cls == "cyclostrophic":
        return (f"Cyclostrophic: the pressure-gradient force ({_fmt(p)}) is balanced by the "
                f"centripetal acceleration ({_fmt(cen)}) to within {_pct(ratios['cyclostrophic'])}; "
                f"Coriolis ({_fmt(cor)}) is minor.")
    if cls == "gradient":
        return (f"Gradient: the pressure-gradient force ({_fmt(p)}) is balanced by Coriolis "
                f"({_fmt(cor)}) and the centripetal acceleration ({_fmt(cen)}) together, to within "
                f"{_pct(ratios['gradient'])} (geostrophy alone leaves {_pct(ratios['geostrophic'])}).")
    if cls == "frictional":
        return (f"Frictional: the pressure-gradient force ({_fmt(p)}), Coriolis ({_fmt(cor)}) and "
                f"the residual friction ({_fmt(res)}) balance to within {_pct(ratios['frictional'])}; "
                f"geostrophy alone leaves {_pct(ratios['geostrophic'])}.")
    best = min(((ratios[c], c) for c in ("geostrophic", "cyclostrophic", "gradient")
                if ratios.get(c) is not None), default=None)
    best_txt = f"; the closest balance, {best[1]}, leaves {_pct(best[0])}" if best else ""
    if cls == "unsteady":
        return (f"Unsteady: the total acceleration DV/Dt ({_fmt(acc)}) is "
                f"{_pct(ratios['acceleration_share'])} of the pressure-gradient force ({_fmt(p)}), "
                f"so no balance holds{best_txt}.")
    return (f"Unbalanced: no candidate balance holds for the pressure-gradient force ({_fmt(p)})"
            f"{best_txt}; the residual is {_fmt(res)}.")


def classify_scales(result, thresholds: Thresholds = Thresholds()) -> Verdict:
    """Verdict of an a priori scale analysis (:func:`balance_core.scales.analyse_scales`).

    Scales carry no signs, so this follows the magnitudes alone: the Rossby
    number and which terms are within ``comparable_factor`` of the pressure
    gradient. Rule (the project's own):

    * the viscous term comparable: frictional;
    * only Coriolis comparable and Ro < ``rossby_small``: geostrophic;
    * Coriolis and acceleration comparable: gradient if the flow is curved,
      else unsteady;
    * acceleration comparable, Coriolis not (Ro > ``rossby_large`` or Coriolis
      below the factor): cyclostrophic if curved, else unsteady;
    * nothing comparable: unbalanced (the scales are not consistent).
    """
    th = thresholds
    mags = dict(result.terms)
    p = mags["pressure_gradient"]
    ro = result.numbers.get("rossby")
    if p <= 0:
        return Verdict("unbalanced", "The pressure difference is zero, so no balance can be tested "
                       "by scales.")
    near = {k for k, v in mags.items() if k != "pressure_gradient" and v * th.comparable_factor >= p}
    curved = result.scales.curved
    ro_txt = "n/a" if ro is None else f"{ro:.2g}"
    listing = ", ".join(f"{_PRETTY[k]} {mags[k]:.1e}" for k in sorted(near, key=lambda k: -mags[k]))
    head = (f"By scales (magnitudes only, no signs): pressure gradient {p:.1e} m s-2, Rossby number "
            f"{ro_txt}; within a factor {th.comparable_factor:g}: {listing or 'no other term'}.")
    if "viscous" in near:
        return Verdict("frictional", head + " Friction matters: frictional balance.")
    if near == {"coriolis"} and ro is not None and ro < th.rossby_small:
        return Verdict("geostrophic", head + " Coriolis alone balances it: geostrophic.")
    if "acceleration" in near and "coriolis" in near and (ro is None or ro <= th.rossby_large):
        if curved:
            return Verdict("gradient", head + " Curved flow with Coriolis and centripetal terms "
                           "both in play: gradient balance.")
        return Verdict("unsteady", head + " Acceleration rivals Coriolis in a flow that is not "
                       "curved: unsteady (scales cannot tell curvature from speeding up).")
    if "acceleration" in near:
        if curved:
            return Verdict("cyclostrophic", head + " Curved flow with Coriolis minor: "
                           "cyclostrophic balance.")
        return Verdict("unsteady", head + " Acceleration dominates Coriolis: unsteady (scales "
                       "cannot tell curvature from speeding up).")
    if "coriolis" in near:
        return Verdict("geostrophic", head + " Coriolis balances it (Rossby number not small, so "
                       "take this with care): geostrophic.")
    return Verdict("unbalanced", head + " No term at these scales opposes the pressure gradient: "
                   "the scales are not consistent with each other.")


def residual_causes(*, level_pa: float, budget=None, time_step_s: float | None = None,
                    residual_share: float | None = None, below_ground: int = 0,
                    steep_terrain: bool = False, ground: tuple | None = None,
                    resolution: dict | None = None, friction_alignment: float | None = None,
                    thresholds: Thresholds = Thresholds()) -> list:
    """Likely causes of a large residual, as short sentences (most likely first).

    The residual is the tendency minus every resolved term; which of friction,
    sub-grid processes or data and numerical error dominates depends on where
    and how the data was taken. Rules (the project's own, common practice):
    a level near the ground (``ground`` from :func:`near_ground`; without it,
    at or below 850 hPa) holds friction, if the residual opposes the wind; an
    under-resolved flow (``resolution["resolved"]`` false) holds truncation
    error; a time step longer than 6 h under-resolves the tendency; one time
    means the tendency is missing altogether; points below the ground or steep
    terrain point to extrapolated or noisy pressure-level data. Away from the
    ground a large residual is unexplained imbalance, never friction.
    """
    th = thresholds
    causes = []
    near = ground[0] if ground is not None else level_pa >= th.boundary_layer_pa
    large = residual_share is not None and residual_share >= th.friction_share
    if near:
        where = ground[1] if ground is not None else (f"{level_pa / 100:.0f} hPa is in or near "
                                                      "the boundary layer")
        if friction_alignment is not None and friction_alignment < th.friction_alignment:
            causes.append(f"{where}, where friction is expected, but the residual does not "
                          "oppose the wind, so it is not mainly friction")
        else:
            causes.append(f"{where}, where friction is expected")
    if resolution is not None and resolution.get("resolved") is False:
        causes.append(f"truncation error: the grid spacing ({resolution['grid_spacing_km']:.0f} "
                      f"km) is coarse for the flow's length scale "
                      f"({resolution['flow_length_km']:.0f} km)")
    if budget is not None:
        if "tendency" in budget.residual_includes:
            causes.append("one time only: the residual holds the local tendency")
        if "vertical_advection" in budget.residual_includes:
            causes.append("no vertical advection: the residual holds it")
    if time_step_s is not None and time_step_s > 6 * 3600:
        causes.append(f"a time step of {time_step_s / 3600:.0f} h is too coarse to resolve the "
                      "local tendency")
    if below_ground:
        causes.append(f"{below_ground} points lie below the ground (values extrapolated by the "
                      "model's post-processing)")
    if steep_terrain:
        causes.append("steep terrain: pressure-level gradients are noisy there")
    if large and not near:
        causes.append("away from the ground the residual is unexplained imbalance, not friction: "
                      "sub-grid processes (convection, gravity waves) or numerical error in the "
                      "data")
    elif not causes and large:
        causes.append("sub-grid processes (convection, gravity waves) or numerical error in the "
                      "data")
    return causes
