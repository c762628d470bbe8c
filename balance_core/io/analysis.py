"""One box of one case at one level and time: the object ``balance-desk analyze`` prints."""

from __future__ import annotations

import numpy as np

from ..region import Region, weighted_stats
from ..report import box_report, level_diagnostics
from ..verdict import Thresholds
from .case import Case, iso
from .errors import CaseError

__all__ = ["analyse_case", "diagnostics_for"]


def diagnostics_for(case: Case, level_index: int, time_index: int, smooth_km=None):
    """:func:`balance_core.report.level_diagnostics` for one level and time of a case."""
    fields, it, ik = case.fields(time_index, level_index, smooth_km=smooth_km)
    hag, how = case.height_above_ground(time_index, level_index)
    return level_diagnostics(case.grid, fields, it, ik, height_above_ground=hag,
                             height_above_ground_source=how,
                             below_ground=case.below_ground_mask(time_index, level_index))


def analyse_case(case: Case, level_hpa: float, time=None, box=None, *, smooth_km=None,
                 thresholds: Thresholds = Thresholds(), diagnostics=None) -> dict:
    """The analysis of one box (west, east, south, north; a Region; None for the whole domain).

    Returns the report of :func:`balance_core.report.box_report` with the case,
    level, valid time, box, smoothing and the case's notes added.
    """
    k = case.level_index(level_hpa)
    t = case.time_index(time)
    if isinstance(box, Region):
        region = box
        box_d = region.describe()
        if region.kind == "polygon":
            box_d = {**box_d, "polygon": {"lons": list(region.lons), "lats": list(region.lats)}}
    elif box is None:
        region = Region.whole()
        box_d = {"west": None, "east": None, "south": None, "north": None}
    else:
        try:
            region = Region.box(*box)
        except ValueError as exc:
            raise CaseError(f"box {list(box)}: {exc}") from None
        box_d = dict(zip(("west", "east", "south", "north"), map(float, box)))
    inside = region.mask(case.grid)
    if not inside.any() and region.kind != "whole":
        raise CaseError(f"box {box_d['west']:g},{box_d['east']:g},{box_d['south']:g},"
                        f"{box_d['north']:g} holds no grid points of {case.name} (its grid spans "
                        f"lat {case.grid.lat.min():.1f} to {case.grid.lat.max():.1f}, lon "
                        f"{case.grid.lon.min():.1f} to {case.grid.lon.max():.1f})")
    diag = diagnostics or diagnostics_for(case, k, t, smooth_km)
    below = int(case.below_ground.get(float(case.levels_pa[k] / 100), 0))
    rep = box_report(diag, inside, thresholds=thresholds, below_ground=below)
    ref = None
    if case.reference_times is not None and not np.isnat(case.reference_times[t]):
        ref = case.reference_times[t]
    out = {
        "case": case.name,
        "level_hpa": float(case.levels_pa[k] / 100),
        "valid_time": iso(case.times[t]),
        "reference_time": None if ref is None else iso(ref),
        "lead_time_h": None if ref is None else float((case.times[t] - ref) /
                                                     np.timedelta64(1, "h")),
        "box": box_d,
        "smooth_km": smooth_km,
        "min_lat": case.grid.min_lat,
    }
    out.update(rep)
    out["sources"] = {role: dict(src) for role, src in case.sources.items()}
    out["left_out"] = dict(case.dropped)
    out["notes"] = list(case.notes) + rep["notes"]
    sfc = case.surface_analysis(t)
    if sfc is not None:
        ok = inside & np.isfinite(sfc["cross_isobar_angle"]) & np.isfinite(sfc["speed_ratio"])
        ang = weighted_stats(sfc["cross_isobar_angle"], case.grid, ok)
        rat = weighted_stats(sfc["speed_ratio"], case.grid, ok)
        out["surface"] = {"cross_isobar_angle_median_deg": ang.median,
                          "speed_over_geostrophic_median": rat.median,
                          "points": ang.count, "note": sfc["density_source"]}
    return out
