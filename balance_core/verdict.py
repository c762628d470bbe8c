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
from typing import Any, TypedDict

import numpy as np

from .region import Region, weighted_stats
from .vocabulary import BALANCE_CLASSES, TERM_NAMES

__all__ = [
    "Thresholds",
    "Verdict",
    "imbalance_ratios",
    "classify_budget",
    "classify_scales",
    "budget_verdict",
    "residual_causes",
    "near_ground",
    "CANDIDATES",
    "CLASSES",
]

#: Candidate balances, simplest first, and the terms each adds up (from the one table,
#: :data:`balance_core.vocabulary.BALANCE_CLASSES`).
CANDIDATES = {b.name: b.terms for b in BALANCE_CLASSES if b.terms is not None}
#: Every class a verdict can take ("none": the data cannot support a verdict).
CLASSES = tuple(b.name for b in BALANCE_CLASSES)


@dataclasses.dataclass(frozen=True)
class Thresholds:
    """The project's own thresholds for the verdict (not a published standard).

    Attributes
    ----------
    balanced : float
        A candidate balance holds when its imbalance ratio is at or below this.
    good : float
        A balance holding to within this is kept even when one with more terms
        does better still (but see ``curvature_share`` for gradient balance).
    improvement : float
        Otherwise frictional balance replaces a balance that also holds only if its
        ratio is at most ``improvement`` times that one's.
    curvature_share : float
        Gradient balance is preferred to geostrophic where the centripetal term is at
        least this share of the Coriolis term (RMS over the region) ...
    gradient_gain : float
        ... and its ratio is at most ``gradient_gain`` times the geostrophic one (it fits
        clearly better). The same two numbers decide between gradient and cyclostrophic,
        with Coriolis in place of the centripetal term.
    friction_share : float
        Frictional balance needs RMS|residual| / RMS|PGF| at or above this.
    unsteady_share : float
        With no balance holding and the local tendency known, RMS|DV/Dt| / RMS|PGF| at or
        above this makes the class "unsteady".
    unexplained_share : float
        A term in no candidate balance (vertical advection, the residual away from the
        ground, ...) at least this share of the pressure gradient gets a caution.
    weak_pgf : float
        Below this RMS pressure-gradient force (m s-2; 2.5e-4 is the force of a geostrophic
        wind of 2.5 m/s at f = 1e-4 s-1) the ratios are noise: verdict "none".
    weak_wind : float
        Below this RMS wind speed (m s-1) the wind's direction and curvature mean nothing:
        the balances that need them (gradient, cyclostrophic, frictional) are not tested.
    tropics_share : float
        Where more than this share of the region's valid points lie within the tropical
        mask, the balances that need f (geostrophic, gradient) are not tested and the
        numbers that divide by f are not quoted.
    rossby_share : float
        Where the local Rossby number |zeta / f| exceeds 1 over more than this share of the
        region, geostrophy is not claimed.
    comparable_factor : float
        Scale verdict: a term within this factor of the pressure gradient
        matters ("within a factor of a few").
    rossby_small, rossby_large : float
        Scale verdict: Ro below ``rossby_small`` allows geostrophy; Ro above
        ``rossby_large`` leaves Coriolis out of a curved flow (cyclostrophic).
    min_points, min_valid_share : int, float
        No verdict ("none") unless at least ``min_points`` points, and at least
        ``min_valid_share`` of the region's points, have every term; no number either.
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
        :func:`balance_core.scales.flow_length_scale`, wavelength / 2 pi for one wave) is
        less than this many grid spacings; the verdict then says so and names truncation
        error. 1.5 is about 9 points a wavelength, where a centred difference loses
        sin(k dx) / (k dx), about 7 %, of a first derivative.
    """

    balanced: float = 0.3
    good: float = 0.1
    improvement: float = 0.5
    curvature_share: float = 0.1
    gradient_gain: float = 0.8
    friction_share: float = 0.2
    unsteady_share: float = 0.5
    unexplained_share: float = 0.7
    weak_pgf: float = 2.5e-4
    weak_wind: float = 1.0
    tropics_share: float = 0.5
    rossby_share: float = 0.5
    comparable_factor: float = 3.0
    rossby_small: float = 0.3
    rossby_large: float = 3.0
    min_points: int = 25
    min_valid_share: float = 0.5
    friction_alignment: float = 0.4
    boundary_layer_m: float = 2000.0
    boundary_layer_pa: float = 85000.0
    resolved_ratio: float = 1.5


class VerdictDict(TypedDict):
    """A verdict as reports and files carry it (:meth:`Verdict.as_dict`)."""

    balance: str
    text: str
    why: str
    tested: dict[str, bool]  # candidate -> whether it could be tested here
    not_tested: dict[str, str]  # candidate -> why not
    cautions: list[str]


@dataclasses.dataclass(frozen=True)
class Verdict:
    """A balance class with its plain-language sentence, why it was chosen, and the evidence.

    ``tested`` says of each candidate balance (and "unsteady") whether it was tested: None
    if it was, else the sentence saying why not. ``cautions`` are the reasons to take the
    verdict with care.
    """

    balance: str
    text: str
    ratios: dict = dataclasses.field(default_factory=dict)
    why: str = ""
    tested: dict = dataclasses.field(default_factory=dict)
    cautions: tuple = ()

    def as_dict(self) -> VerdictDict:
        return {
            "balance": self.balance,
            "text": self.text,
            "why": self.why,
            "tested": {k: v is None for k, v in self.tested.items()},
            "not_tested": {k: v for k, v in self.tested.items() if v is not None},
            "cautions": list(self.cautions),
        }


def _rms(field, grid, inside):
    s = weighted_stats(field, grid, inside, quantiles=False)
    return s.rms


def imbalance_ratios(budget, grid, inside, *, u=None, v=None, vorticity=None) -> dict:
    """Imbalance ratio of each candidate balance and the shares that decide the verdict.

    Parameters
    ----------
    budget : balance_core.budget.Budget
    grid : Grid (or a window of one: ``cell_area``, ``f``, ``tropics_mask``)
    inside : bool array, or a Region
    u, v : arrays, optional
        The wind (m s-1); gives ``friction_alignment`` and ``speed_rms``.
    vorticity : array, optional
        Relative vorticity (s-1); gives ``rossby_local_share``.

    Returns
    -------
    dict
        ``geostrophic``, ``cyclostrophic``, ``gradient``, ``frictional``,
        ``acceleration_share``, ``residual_share``, ``friction_alignment`` (the
        area-weighted mean of -cos(residual, wind): 1 when the residual opposes
        the wind everywhere, 0 when it is unrelated), ``curvature`` ("trajectory" where
        the local tendency is known, else "streamline": which curvature the centripetal
        term of the gradient and cyclostrophic balances takes), ``has_tendency``,
        ``tropics_share`` (valid points within the tropical mask), ``rossby_local_share``
        (points with |zeta / f| > 1 among those outside it), ``speed_rms``, ``points``
        (valid), ``region_points``, and the RMS magnitudes of every term and view under
        ``"rms"`` (``"centripetal_used"``: the one the balances took). A value is None
        where the region has no valid points or the needed terms are unavailable.
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
    out: dict[str, Any] = {
        "points": int(ok.sum()),
        "region_points": int(inside.sum()),
        "masked_points": int(inside.sum() - ok.sum()),
    }
    rms: dict[str, float | None] = {}
    for n in names:
        t = budget[n]
        rms[n] = _rms(np.hypot(t.x, t.y), grid, ok) if t.available else None
    traj = budget.derived.get("centripetal_trajectory")
    use_traj = traj is not None and traj.available
    cen = traj if use_traj else budget["centripetal"]
    out["curvature"] = "trajectory" if use_traj else "streamline"
    out["has_tendency"] = bool(budget.terms["tendency"].available)
    rms["centripetal_used"] = rms["centripetal_trajectory"] if use_traj else rms["centripetal"]
    out["rms"] = rms
    p = rms["pressure_gradient"]
    for cand, parts in CANDIDATES.items():
        terms = [cen if n == "centripetal" else budget[n] for n in parts]
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
    out["speed_rms"] = None
    if u is not None and v is not None and ok.any():
        out["speed_rms"] = _rms(np.hypot(u, v), grid, ok)
        r = budget["residual"]
        with np.errstate(invalid="ignore", divide="ignore"):
            cos = (r.x * u + r.y * v) / (np.hypot(r.x, r.y) * np.hypot(u, v))
        good = ok & np.isfinite(cos)
        if good.any():
            mean = weighted_stats(cos, grid, good, quantiles=False).mean
            out["friction_alignment"] = None if mean is None else -mean
    tropics = getattr(grid, "tropics_mask", None)
    out["tropics_share"] = None
    out["rossby_local_share"] = None
    if ok.any() and tropics is not None:
        wts = grid.cell_area
        total = float(np.sum(wts[ok]))
        trop = ok & np.asarray(tropics, dtype=bool)
        out["tropics_share"] = float(np.sum(wts[trop])) / total
        free = ok & ~trop
        if vorticity is not None and free.any():
            with np.errstate(invalid="ignore", divide="ignore"):
                big = free & (np.abs(vorticity) > np.abs(grid.f))
            out["rossby_local_share"] = float(np.sum(wts[big]) / np.sum(wts[free]))
    return out


def near_ground(
    level_pa: float, height_above_ground_m: float | None, thresholds: Thresholds | None = None
) -> tuple:
    """(near, sentence): is the level in or near the boundary layer, and how that was judged.

    With the height above the ground known (median over the region), near means
    at most ``boundary_layer_m``; otherwise (no orography or surface pressure)
    levels at pressures of at least ``boundary_layer_pa`` count as near
    (the project's own fallback, common practice).
    """
    th = thresholds or Thresholds()
    if height_above_ground_m is not None and np.isfinite(height_above_ground_m):
        near = height_above_ground_m <= th.boundary_layer_m
        return near, (
            f"{level_pa / 100:g} hPa lies about {height_above_ground_m:.0f} m above "
            f"the ground ({'within' if near else 'above'} the "
            f"{th.boundary_layer_m:.0f} m taken as the boundary layer)"
        )
    near = level_pa >= th.boundary_layer_pa
    return near, (
        f"{level_pa / 100:g} hPa, with no orography or surface pressure to give its "
        f"height above the ground, counts as {'near' if near else 'far from'} the "
        f"ground (levels at or below {th.boundary_layer_pa / 100:g} hPa are near)"
    )


#: Terms that no candidate balance holds: when one of them rivals the pressure gradient,
#: the verdict says so.
_OUTSIDE = ("vertical_advection", "metric_uw", "coriolis_w", "metric_uv")


def _not_tested(ratios, th: Thresholds, ground) -> dict:
    """Each candidate (and "unsteady"): None if it can be tested here, else why not."""
    out: dict[str, str | None] = {c: None for c in CANDIDATES}
    out["unsteady"] = None
    trop = ratios.get("tropics_share")
    if trop is not None and trop > th.tropics_share:
        why = (
            f"{_pct(trop)} of the region lies within the tropical mask, where f is too "
            "small for the Coriolis force to balance the pressure gradient"
        )
        out["geostrophic"] = f"Geostrophic balance was not tested: {why}."
        out["gradient"] = f"Gradient balance was not tested: {why}."
    ro = ratios.get("rossby_local_share")
    if out["geostrophic"] is None and ro is not None and ro > th.rossby_share:
        out["geostrophic"] = (
            f"Geostrophic balance was not tested: the local Rossby number "
            f"|zeta / f| exceeds 1 over {_pct(ro)} of the region, where the "
            "flow spins faster than the planet and geostrophy cannot hold."
        )
    speed = ratios.get("speed_rms")
    if speed is not None and speed < th.weak_wind:
        for cand in ("gradient", "cyclostrophic", "frictional"):
            if out[cand] is None:
                out[cand] = (
                    f"{cand.capitalize()} balance was not tested: the wind "
                    f"({speed:.1f} m/s RMS) is under {th.weak_wind:g} m/s, too weak "
                    "for its direction and curvature to mean anything."
                )
    for cand in CANDIDATES:
        if out[cand] is None and ratios.get(cand) is None:
            out[cand] = (
                f"{cand.capitalize()} balance was not tested: a term it needs is not in the data."
            )
    if out["frictional"] is None:
        out["frictional"] = _friction_barrier(ratios, th, ground)
    if not ratios.get("has_tendency", True):
        out["unsteady"] = (
            "Unsteady flow was not tested: with one valid time the local "
            "tendency is unknown, so the total acceleration DV/Dt is not."
        )
    return out


def classify_budget(
    ratios: dict, thresholds: Thresholds = Thresholds(), *, ground: tuple | None = None
) -> Verdict:
    """Pick one class from the imbalance ratios of :func:`imbalance_ratios`.

    Rule (the project's own, thresholds in :class:`Thresholds`):

    * fewer than ``min_points`` valid points, or less than ``min_valid_share`` of
      the region valid: "none";
    * a pressure gradient under ``weak_pgf`` (RMS): "none", the ratios would be noise;
    * candidates that cannot be tested here are left out and say why: geostrophic and
      gradient where most of the region lies within the tropical mask, geostrophic where
      the local Rossby number exceeds 1 over most of it, frictional away from the ground
      or where the residual does not act as friction (:func:`_friction_barrier`),
      gradient, cyclostrophic and frictional under a wind weaker than ``weak_wind``,
      "unsteady" with one valid time;
    * of the balances that hold (ratio at or below ``balanced``), the simplest with the
      smallest ratio (geostrophic or cyclostrophic) is taken; gradient replaces it where
      the term it adds matters (the centripetal term at least ``curvature_share`` of
      Coriolis, or Coriolis that share of the centripetal term) and it fits clearly
      better (at most ``gradient_gain`` times the ratio); frictional replaces the
      choice only if that is not already within ``good`` and frictional leaves at most
      ``improvement`` times as much;
    * if none holds: "unsteady" where the tendency is known and the acceleration share
      reaches ``unsteady_share``; "none" where no balance could be tested; otherwise
      "unbalanced";
    * a term that is in no candidate balance and at least ``unexplained_share`` of the
      pressure gradient is named in a caution.
    """
    th = thresholds
    rms = ratios.get("rms", {})
    refused = _too_few_points(ratios, th)
    if refused is not None:
        return refused
    p = rms["pressure_gradient"]
    tested = _not_tested(ratios, th, ground)
    if p < th.weak_pgf:
        return _weak_forcing(ratios, th, tested, p)
    holds = {
        c: ratios[c]
        for c in CANDIDATES
        if tested[c] is None and ratios.get(c) is not None and ratios[c] <= th.balanced
    }
    why: list[str] = []
    chosen = _simplest_that_holds(holds, th, why)
    if "gradient" in holds:
        chosen = _gradient_or_simpler(chosen, holds, rms, th, why)
    if "frictional" in holds:
        chosen = _frictional_or_not(chosen, holds, th, why)
    if chosen in ("gradient", "cyclostrophic"):
        curv = ratios.get("curvature", "streamline")
        why.append(
            f"The centripetal term takes the {curv} curvature"
            + (
                " (the streamlines' curvature plus the cross-stream tendency over V^2)."
                if curv == "trajectory"
                else " (one valid time: no tendency to turn it into the trajectory's)."
            )
        )
    if chosen is None:
        chosen = _when_none_holds(ratios, th, tested, why)
    why.extend(t for c, t in tested.items() if t is not None)
    cautions = _unexplained_terms(rms, p, th, ground)
    text = _sentence(chosen, ratios, tested)
    if cautions:
        text += " Caution: " + " ".join(cautions)
    return Verdict(chosen, text, ratios, " ".join(why), tested, tuple(cautions))


def _too_few_points(ratios, th) -> Verdict | None:
    """ "none" when no point, or too few or too small a share of the region, has every term."""
    rms = ratios.get("rms", {})
    n, total = ratios.get("points") or 0, ratios.get("region_points")
    total = n if total is None else total
    if not n or not rms.get("pressure_gradient"):
        return Verdict(
            "none",
            f"No verdict: none of the {total} points of the region has "
            "every term of the budget (missing data, below the ground or outside "
            "the grid), so no balance can be tested.",
            ratios,
            "A verdict needs valid points.",
        )
    if n < th.min_points or (total and n / total < th.min_valid_share):
        return Verdict(
            "none",
            f"No verdict: only {n} of the {total} points of the region "
            f"({100 * n / max(total, 1):.0f} %) have every term of the budget; at "
            f"least {th.min_points} points and {100 * th.min_valid_share:.0f} % of "
            "the region are needed before a balance is named.",
            ratios,
            "Too few valid points to name a balance.",
        )
    return None


def _weak_forcing(ratios, th, tested, p) -> Verdict:
    """ "none" under a pressure gradient weaker than ``weak_pgf``: every ratio is a share of it."""
    weak = f"the pressure-gradient force ({_fmt(p)}) is under {th.weak_pgf:.1e} m s-2"
    reason = f"{weak[0].upper() + weak[1:]}: every ratio is a share of it, so none means anything."
    tested = {
        c: (f"{c.capitalize()} {'flow' if c == 'unsteady' else 'balance'} was not tested: {weak}.")
        for c in tested
    }
    return Verdict(
        "none",
        f"No verdict: {weak}, too weak for the imbalance ratios to "
        "mean anything (each is a share of the pressure gradient).",
        ratios,
        reason,
        tested,
        cautions=(f"Weak forcing: {weak}.",),
    )


def _simplest_that_holds(holds, th, why) -> str | None:
    """Geostrophic or cyclostrophic, whichever holds with the smaller ratio (or None)."""
    simple = [c for c in ("geostrophic", "cyclostrophic") if c in holds]
    if not simple:
        return None
    chosen = min(simple, key=lambda c: holds[c])
    why.append(
        f"{chosen.capitalize()} is the simplest balance that holds: it leaves "
        f"{_pct(holds[chosen])} of the pressure-gradient force unbalanced (a balance "
        f"holds at {_pct(th.balanced)} or less)."
    )
    return chosen


def _gradient_or_simpler(chosen, holds, rms, th, why) -> str:
    """Gradient where nothing simpler holds, or where the term it adds matters (at least
    ``curvature_share``) and it fits clearly better (at most ``gradient_gain`` times)."""
    g = holds["gradient"]
    if chosen is None:
        why.append(
            f"Gradient is the simplest balance that holds: it leaves {_pct(g)} (a "
            f"balance holds at {_pct(th.balanced)} or less)."
        )
        return "gradient"
    cen, cor = rms.get("centripetal_used"), rms.get("coriolis")
    other = cen if chosen == "geostrophic" else cor
    base = cor if chosen == "geostrophic" else cen
    added = "the centripetal term" if chosen == "geostrophic" else "Coriolis"
    against = "Coriolis" if chosen == "geostrophic" else "the centripetal term"
    share = other / base if other is not None and base else 0.0
    if share >= th.curvature_share and g <= th.gradient_gain * holds[chosen]:
        why.append(
            f"Gradient replaces {chosen}: {added} is {_pct(share)} of {against}"
            f" and gradient leaves {_pct(g)} against {_pct(holds[chosen])}, "
            f"clearly less (at most {th.gradient_gain:g} times)."
        )
        return "gradient"
    if g >= holds[chosen]:
        why.append(
            f"Gradient also holds ({_pct(g)}) but fits no better than "
            f"{chosen} ({_pct(holds[chosen])})."
        )
    elif share < th.curvature_share:
        why.append(
            f"Gradient fits a little better ({_pct(g)} against "
            f"{_pct(holds[chosen])}), but {added} is only {_pct(share)} of {against}"
            f": too small to matter (the line is {_pct(th.curvature_share)})."
        )
    else:
        why.append(
            f"Gradient fits a little better ({_pct(g)} against "
            f"{_pct(holds[chosen])}), not clearly (it would need at most "
            f"{th.gradient_gain:g} times), so the simpler {chosen} stays."
        )
    return chosen


def _frictional_or_not(chosen, holds, th, why) -> str:
    """Frictional where nothing else holds, or where the choice is not already within
    ``good`` and friction leaves at most ``improvement`` times as much."""
    f_ = holds["frictional"]
    if chosen is None:
        why.append(
            f"Frictional is the balance that holds: it leaves {_pct(f_)} (a balance "
            f"holds at {_pct(th.balanced)} or less)."
        )
        return "frictional"
    if holds[chosen] > th.good and f_ <= th.improvement * holds[chosen]:
        why.append(
            f"Frictional replaces {chosen}: it leaves {_pct(f_)} against "
            f"{_pct(holds[chosen])}, at most {th.improvement:g} times as much, so "
            "friction earns its place."
        )
        return "frictional"
    why.append(
        f"Frictional also holds ({_pct(f_)}) but does not do enough better than "
        f"{chosen} ({_pct(holds[chosen])}) to add friction."
    )
    return chosen


def _when_none_holds(ratios, th, tested, why) -> str:
    """ "unsteady", "none" or "unbalanced" when no candidate balance holds."""
    testable = [c for c in CANDIDATES if tested[c] is None]
    acc = ratios.get("acceleration_share")
    if tested["unsteady"] is None and acc is not None and acc >= th.unsteady_share:
        why.insert(
            0,
            f"No candidate balance leaves {_pct(th.balanced)} or less; the "
            f"total acceleration is {_pct(acc)} of the pressure-gradient force "
            f"(at least {_pct(th.unsteady_share)}).",
        )
        return "unsteady"
    if not testable:
        why.insert(0, "No candidate balance could be tested here.")
        return "none"
    if (
        tested["geostrophic"] is not None
        and tested["gradient"] is not None
        and ratios.get("tropics_share") is not None
        and ratios["tropics_share"] > th.tropics_share
    ):
        why.insert(
            0,
            "Within the tropics only the balances that do without f can be "
            "tested, and none of them holds here.",
        )
        return "none"
    tail = (
        ""
        if tested["unsteady"] is None
        else " With one valid time, whether the flow is unsteady cannot be told."
    )
    why.insert(0, f"No candidate balance leaves {_pct(th.balanced)} or less.{tail}")
    return "unbalanced"


def _unexplained_terms(rms, p, th, ground) -> list[str]:
    """A caution for each term outside every candidate balance that reaches
    ``unexplained_share`` of the pressure gradient (the residual too, away from the ground)."""
    cautions = []
    for name in _OUTSIDE + (() if ground and ground[0] else ("residual",)):
        m = rms.get(name)
        if m is not None and m >= th.unexplained_share * p:
            cautions.append(
                f"{TERM_NAMES[name].capitalize()} is {_pct(m / p)} of the "
                "pressure-gradient force and no candidate balance holds it: "
                "check that term (or the data it comes from) before trusting "
                "this verdict."
            )
    return cautions


def _friction_barrier(ratios, th, ground) -> str | None:
    """Why frictional balance is not a candidate here (None if it is)."""
    if ground is None:
        return (
            "Frictional balance was not tested: the level's height above the ground is not known."
        )
    near, where = ground
    if not near:
        return f"Frictional balance was not tested: {where}."
    if (ratios.get("residual_share") or 0) < th.friction_share:
        return (
            f"Frictional balance was not tested: the residual is only "
            f"{_pct(ratios.get('residual_share') or 0)} of the pressure-gradient force."
        )
    align = ratios.get("friction_alignment")
    if align is None or align < th.friction_alignment:
        shown = "unknown" if align is None else f"{align:.2f}"
        return (
            f"Frictional balance was not tested: the residual does not oppose the wind "
            f"(alignment {shown}, at least {th.friction_alignment:g} is needed), so it does "
            "not act as friction."
        )
    return None


def budget_verdict(
    budget,
    grid,
    inside,
    thresholds: Thresholds = Thresholds(),
    *,
    u=None,
    v=None,
    height_above_ground_m: float | None = None,
    vorticity=None,
) -> Verdict:
    """:func:`imbalance_ratios` then :func:`classify_budget` (ground from :func:`near_ground`)."""
    ground = near_ground(budget.level_pa, height_above_ground_m, thresholds)
    return classify_budget(
        imbalance_ratios(budget, grid, inside, u=u, v=v, vorticity=vorticity),
        thresholds,
        ground=ground,
    )


def _fmt(x):
    return "n/a" if x is None else f"{x:.1e} m s-2"


def _pct(x):
    return f"{100 * x:.0f} %"


def _sentence(cls, ratios, tested=None) -> str:
    rms = ratios["rms"]
    p = rms["pressure_gradient"]
    ranked = sorted(
        (
            (v, k)
            for k, v in rms.items()
            if v is not None
            and k in TERM_NAMES
            and k
            not in (
                "pressure_gradient",
                "residual",
                "acceleration",
                "along_stream",
                "centripetal",
                "tendency",
            )
        ),
        reverse=True,
    )
    cor = rms.get("coriolis")
    cen = rms.get("centripetal_used")
    acc = rms.get("acceleration")
    res = rms.get("residual")
    steady = (
        "" if ratios.get("has_tendency", True) else " (one valid time: the steady-state residual)"
    )
    if cls == "geostrophic":
        other = next((k for v, k in ranked if k != "coriolis"), None)
        tail = (
            f"; the largest other term is {TERM_NAMES[other]} ({_fmt(rms[other])})" if other else ""
        )
        return (
            f"Geostrophic: the pressure-gradient force ({_fmt(p)}) is balanced by Coriolis "
            f"({_fmt(cor)}) to within {_pct(ratios['geostrophic'])}{tail}."
        )
    if cls == "cyclostrophic":
        return (
            f"Cyclostrophic: the pressure-gradient force ({_fmt(p)}) is balanced by the "
            f"centripetal acceleration ({_fmt(cen)}) to within {_pct(ratios['cyclostrophic'])}; "
            f"Coriolis ({_fmt(cor)}) is minor."
        )
    if cls == "gradient":
        geo = ratios.get("geostrophic")
        geo_txt = (
            ""
            if geo is None or (tested and tested.get("geostrophic"))
            else f" (geostrophy alone leaves {_pct(geo)})"
        )
        return (
            f"Gradient: the pressure-gradient force ({_fmt(p)}) is balanced by Coriolis "
            f"({_fmt(cor)}) and the centripetal acceleration ({_fmt(cen)}) together, to within "
            f"{_pct(ratios['gradient'])}{geo_txt}."
        )
    if cls == "frictional":
        return (
            f"Frictional: the pressure-gradient force ({_fmt(p)}), Coriolis ({_fmt(cor)}) and "
            f"the residual friction ({_fmt(res)}{steady}) balance to within "
            f"{_pct(ratios['frictional'])}; geostrophy alone leaves "
            f"{_pct(ratios['geostrophic'])}."
        )
    best = min(
        (
            (ratios[c], c)
            for c in ("geostrophic", "cyclostrophic", "gradient")
            if ratios.get(c) is not None and not (tested and tested.get(c))
        ),
        default=None,
    )
    best_txt = f"; the closest balance, {best[1]}, leaves {_pct(best[0])}" if best else ""
    if cls == "unsteady":
        return (
            f"Unsteady: the total acceleration DV/Dt ({_fmt(acc)}) is "
            f"{_pct(ratios['acceleration_share'])} of the pressure-gradient force ({_fmt(p)}), "
            f"so no balance holds{best_txt}."
        )
    if cls == "none":
        return (
            f"No verdict: no candidate balance that can be tested here holds (the "
            f"pressure-gradient force is {_fmt(p)}){best_txt}; see why below."
        )
    return (
        f"Unbalanced: no candidate balance holds for the pressure-gradient force ({_fmt(p)})"
        f"{best_txt}; the residual is {_fmt(res)}{steady}."
    )


def classify_scales(result, thresholds: Thresholds = Thresholds()) -> Verdict:
    """Verdict of an a priori scale analysis (:func:`balance_core.scales.analyze_scales`).

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
        return Verdict(
            "unbalanced", "The pressure difference is zero, so no balance can be tested by scales."
        )
    near = {
        k for k, v in mags.items() if k != "pressure_gradient" and v * th.comparable_factor >= p
    }
    curved = result.scales.curved
    ro_txt = "n/a" if ro is None else f"{ro:.2g}"
    listing = ", ".join(
        f"{TERM_NAMES[k]} {mags[k]:.1e}" for k in sorted(near, key=lambda k: -mags[k])
    )
    head = (
        f"By scales (magnitudes only, no signs): pressure gradient {p:.1e} m s-2, Rossby number "
        f"{ro_txt}; within a factor {th.comparable_factor:g}: {listing or 'no other term'}."
    )
    if "viscous" in near:
        return Verdict("frictional", head + " Friction matters: frictional balance.")
    if near == {"coriolis"} and ro is not None and ro < th.rossby_small:
        return Verdict("geostrophic", head + " Coriolis alone balances it: geostrophic.")
    if "acceleration" in near and "coriolis" in near and (ro is None or ro <= th.rossby_large):
        if curved:
            return Verdict(
                "gradient",
                head + " Curved flow with Coriolis and centripetal terms "
                "both in play: gradient balance.",
            )
        return Verdict(
            "unsteady",
            head + " Acceleration rivals Coriolis in a flow that is not "
            "curved: unsteady (scales cannot tell curvature from speeding up).",
        )
    if "acceleration" in near:
        if curved:
            return Verdict(
                "cyclostrophic", head + " Curved flow with Coriolis minor: cyclostrophic balance."
            )
        return Verdict(
            "unsteady",
            head + " Acceleration dominates Coriolis: unsteady (scales "
            "cannot tell curvature from speeding up).",
        )
    if "coriolis" in near:
        return Verdict(
            "geostrophic",
            head + " Coriolis balances it (Rossby number not small, so "
            "take this with care): geostrophic.",
        )
    return Verdict(
        "unbalanced",
        head + " No term at these scales opposes the pressure gradient: "
        "the scales are not consistent with each other.",
    )


def residual_causes(
    *,
    level_pa: float,
    budget=None,
    time_step_s: float | None = None,
    residual_share: float | None = None,
    below_ground: int = 0,
    steep_terrain: bool = False,
    ground: tuple | None = None,
    resolution: dict | None = None,
    friction_alignment: float | None = None,
    thresholds: Thresholds = Thresholds(),
) -> list:
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
        where = (
            ground[1]
            if ground is not None
            else (f"{level_pa / 100:.0f} hPa is in or near the boundary layer")
        )
        if friction_alignment is not None and friction_alignment < th.friction_alignment:
            causes.append(
                f"{where}, where friction is expected, but the residual does not "
                "oppose the wind, so it is not mainly friction"
            )
        else:
            causes.append(f"{where}, where friction is expected")
    if resolution is not None and resolution.get("resolved") is False:
        causes.append(
            f"truncation error: the grid spacing ({resolution['grid_spacing_km']:.0f} "
            f"km) is coarse for the flow's length scale "
            f"({resolution['flow_length_km']:.0f} km)"
        )
    if budget is not None:
        if "tendency" in budget.residual_includes:
            causes.append("one time only: the residual holds the local tendency")
        if "vertical_advection" in budget.residual_includes:
            causes.append("no vertical advection: the residual holds it")
    if time_step_s is not None and time_step_s > 6 * 3600:
        causes.append(
            f"a time step of {time_step_s / 3600:.0f} h is too coarse to resolve the local tendency"
        )
    if below_ground:
        causes.append(
            f"{below_ground} points lie below the ground (values extrapolated by the "
            "model's post-processing)"
        )
    if steep_terrain:
        causes.append("steep terrain: pressure-level gradients are noisy there")
    if large and not near:
        causes.append(
            "away from the ground the residual is unexplained imbalance, not friction: "
            "sub-grid processes (convection, gravity waves) or numerical error in the "
            "data"
        )
    elif not causes and large:
        causes.append(
            "sub-grid processes (convection, gravity waves) or numerical error in the data"
        )
    return causes
