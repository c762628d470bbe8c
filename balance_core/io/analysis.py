"""One box of one case at one level and time: the object ``balance-desk analyze`` prints."""

from __future__ import annotations

import numpy as np

from ..region import Region, weighted_stats
from ..report import box_report, level_diagnostics
from ..verdict import Thresholds
from .case import Case, iso
from .errors import CaseError

__all__ = ["analyse_case", "diagnostics_for", "analyse_systems", "track_systems"]


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
        if region.kind == "circle":
            box_d = {**box_d, "circle": {"lon": region.lons[0], "lat": region.lats[0],
                                         "radius_km": region.radius_km}}
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


def analyse_systems(case: Case, level_hpa: float, time=None, *, smooth_km=None,
                    thresholds: Thresholds = Thresholds(), diagnostics=None, limit: int = 30,
                    interval=None, min_depth=None, jet=None) -> dict:
    """The weather systems of one level and time (:func:`balance_core.systems.find_systems`)
    and, for each, the report of its region (:func:`analyse_case`).

    Returns ``case``, ``level_hpa``, ``valid_time``, ``reference_time``, ``lead_time_h``,
    ``rules`` (the contour interval, least depth and jet threshold used) and ``systems``:
    each system's kind, centre, intensity and region, with ``report``.
    """
    from ..systems import contour_interval, find_systems, jet_threshold

    k = case.level_index(level_hpa)
    t = case.time_index(time)
    diag = diagnostics or diagnostics_for(case, k, t, smooth_km)
    p = float(case.levels_pa[k])
    found = find_systems(case.grid, diag.height, diag.u, diag.v, p, interval=interval,
                         min_depth=min_depth, jet=jet, limit=limit)
    ci = float(interval or contour_interval(p))
    systems = []
    for s in found:
        rep = analyse_case(case, p / 100, t, s.region, smooth_km=smooth_km,
                           thresholds=thresholds, diagnostics=diag)
        systems.append({**s.as_dict(), "report": rep})
    ref = None
    if case.reference_times is not None and not np.isnat(case.reference_times[t]):
        ref = case.reference_times[t]
    return {
        "case": case.name, "level_hpa": p / 100, "valid_time": iso(case.times[t]),
        "reference_time": None if ref is None else iso(ref),
        "lead_time_h": None if ref is None else float((case.times[t] - ref) /
                                                     np.timedelta64(1, "h")),
        "rules": {"contour_interval_m": ci,
                  "min_depth_m": 0.5 * ci if min_depth is None else float(min_depth),
                  "jet_threshold_ms": float(jet or jet_threshold(p)),
                  "core_fraction": 0.8, "limit": limit},
        "systems": systems,
    }


def track_systems(case: Case, level_hpa: float, *, smooth_km=None,
                  thresholds: Thresholds = Thresholds(), limit: int = 30, progress=None) -> dict:
    """The systems of every valid time, matched into tracks
    (:func:`balance_core.systems.match_tracks`): each track's kind and, at each of its
    times, the centre, intensity, local Rossby number and verdict of its region."""
    from ..systems import MIN_TRACK_KM, TRACK_SPEED_KMH, System, match_tracks

    per_time, objects = [], []
    for t in range(case.times.size):
        out = analyse_systems(case, level_hpa, t, smooth_km=smooth_km, thresholds=thresholds,
                              limit=limit)
        per_time.append(out)
        objects.append([System(s["kind"], s["lon"], s["lat"], s["value"], s["depth"],
                               s["outer_level"], s["area_km2"], Region.whole(), (0, 0))
                        for s in out["systems"]])
        if progress is not None:
            progress(t + 1, case.times.size)
    hours = (case.times - case.times[0]) / np.timedelta64(1, "h")
    tracks = []
    for track in match_tracks(objects, [float(h) for h in hours]):
        life = []
        for t, i in track:
            s = per_time[t]["systems"][i]
            life.append({"valid_time": per_time[t]["valid_time"], "lon": s["lon"],
                         "lat": s["lat"], "intensity": s["intensity"],
                         "rossby_local_median": s["report"]["numbers"].get("rossby_local_median"),
                         "verdict": s["report"]["verdict"]["balance"]})
        tracks.append({"kind": per_time[track[0][0]]["systems"][track[0][1]]["kind"],
                       "life": life})
    return {"case": case.name, "level_hpa": per_time[0]["level_hpa"] if per_time else None,
            "match": {"speed_kmh": TRACK_SPEED_KMH, "min_km": MIN_TRACK_KM},
            "tracks": tracks, "times": per_time}
