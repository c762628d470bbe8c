"""One box of one case at one level and time: the object ``balance-desk analyze`` prints;
and the weather systems of a level, each with the report of its region.

A level is a pressure level in hPa, or sea level (:data:`SEA_LEVEL`, "msl"): the mean sea
level pressure with the 10 m wind (:func:`balance_core.report.surface_diagnostics`).
"""

from __future__ import annotations

import math

import numpy as np

from ..region import Region, weighted_stats
from ..report import box_report, geostrophic_only_report, level_diagnostics, surface_diagnostics
from ..verdict import Thresholds
from .case import Case, iso
from .errors import CaseError

__all__ = [
    "analyze_case",
    "diagnostics_for",
    "sea_level_diagnostics_for",
    "analyze_systems",
    "track_systems",
    "band_rows",
    "HALO_ROWS",
    "SEA_LEVEL",
    "is_sea_level",
    "level_words",
]

#: The name of sea level where a level is asked for (the command line's ``--level msl``).
SEA_LEVEL = "msl"
_SEA_LEVEL_WORDS = {"msl", "sea level", "sea_level", "sealevel", "mean sea level"}
#: A pressure level with more than this share of its points below the ground says so, and
#: points to sea level for the systems near the ground (the project's own choice).
BELOW_GROUND_SHARE = 0.1


#: rows kept beyond what a computation on a band of the grid reduces: the deepest chain of
#: differences in the core (the gradient wind's curvature, the derivatives of the
#: geostrophic wind) reaches two rows, so eight leave room
HALO_ROWS = 8


def band_rows(grid, masks, rows=None, most: float = 0.75):
    """(j0, j1): the band of rows a computation for regions needs, so that it can run on
    ``case.rows(j0, j1)`` (:meth:`Case.rows`) and give the whole grid's numbers, bit for bit.

    The band holds the rows the regions cover (``masks``, boolean on the grid), the rows
    their flow's length scale reads (:func:`balance_core.scales.flow_rows`), any other
    ``rows`` the caller samples (indices), and :data:`HALO_ROWS` beyond. None to compute the
    whole grid: no row is needed, or the band would be over ``most`` of the grid.
    """
    from ..scales import flow_rows

    ny = grid.shape[0]
    need = np.zeros(ny, dtype=bool)
    for inside in masks:
        need |= np.asarray(inside, dtype=bool).any(axis=1)
        span = flow_rows(grid, inside)
        if span is not None:
            need[span[0] : span[1]] = True
    if rows is not None:
        r = np.asarray(rows, dtype=np.int64)
        need[r[(r >= 0) & (r < ny)]] = True
    hit = np.nonzero(need)[0]
    if hit.size == 0:
        return None
    j0, j1 = max(0, int(hit[0]) - HALO_ROWS), min(ny, int(hit[-1]) + 1 + HALO_ROWS)
    return None if j1 - j0 > most * ny else (j0, j1)


def is_sea_level(level) -> bool:
    """Is this level sea level ("msl", "sea level"; any case)?"""
    return isinstance(level, str) and level.strip().lower() in _SEA_LEVEL_WORDS


def level_words(level) -> str:
    """The level in words: "sea level" or "500 hPa"."""
    return "sea level" if is_sea_level(level) else f"{float(level):g} hPa"


#: Why a file without wind gives no budget.
NO_WIND = "the file has no wind on this level"


def diagnostics_for(case: Case, level_index: int, time_index: int, smooth_km=None):
    """:func:`balance_core.report.level_diagnostics` for one level and time of a case (a file
    with heights and no wind: :func:`balance_core.report.heights_only_diagnostics`)."""
    if "u" not in case.data or "v" not in case.data:
        from ..report import heights_only_diagnostics

        t = None
        if "temperature" in case.data:
            t = _slab(case, "temperature", time_index, level_index, smooth_km)
        return heights_only_diagnostics(
            case.grid,
            _slab(case, "height", time_index, level_index, smooth_km),
            float(case.levels_pa[level_index]),
            NO_WIND,
            temperature=t,
            below_ground=case.below_ground_mask(time_index, level_index),
        )
    fields, it, ik = case.fields(time_index, level_index, smooth_km=smooth_km)
    hag, how = case.height_above_ground(time_index, level_index)
    return level_diagnostics(
        case.grid,
        fields,
        it,
        ik,
        height_above_ground=hag,
        height_above_ground_source=how,
        below_ground=case.below_ground_mask(time_index, level_index),
    )


def sea_level_diagnostics_for(case: Case, time_index: int, smooth_km=None):
    """:func:`balance_core.report.surface_diagnostics` for one valid time of a case."""
    f = case.surface_fields(time_index)
    p, u, v = f["pressure"], f["u"], f["v"]
    if smooth_km:
        from ..smoothing import smooth

        p, u, v = (smooth(case.grid, a, smooth_km) for a in (p, u, v))
    return surface_diagnostics(
        case.grid, p, u, v, t2m=f["t2m"], time=f["time"], it=f["it"], elevation=f["elevation"]
    )


def region_of(case: Case, box):
    """(region, its box as a dict, the mask of its grid points) of a box, a drawn region or
    None (the whole grid) on ``case``; CaseError, naming the grid's extent, if it holds no
    grid point."""
    return _region_and_box(case, box)


def _region_and_box(case: Case, box):
    if isinstance(box, Region):
        region = box
        box_d = region.describe()
        if region.kind == "polygon":
            lons, lats = region.vertices()
            box_d = {**box_d, "polygon": {"lons": list(lons), "lats": list(lats)}}
        if region.kind == "circle":
            box_d = {
                **box_d,
                "circle": {
                    "lon": region.vertices()[0][0],
                    "lat": region.vertices()[1][0],
                    "radius_km": region.radius_km,
                },
            }
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
        raise CaseError(
            f"box {box_d['west']:g},{box_d['east']:g},{box_d['south']:g},"
            f"{box_d['north']:g} holds no grid points of {case.name} (its grid spans "
            f"lat {case.grid.lat.min():.1f} to {case.grid.lat.max():.1f}, lon "
            f"{case.grid.lon.min():.1f} to {case.grid.lon.max():.1f})"
        )
    return region, box_d, inside


def _times(case: Case, t: int) -> dict:
    ref = None
    if case.reference_times is not None and not np.isnat(case.reference_times[t]):
        ref = case.reference_times[t]
    return {
        "valid_time": iso(case.times[t]),
        "reference_time": None if ref is None else iso(ref),
        "lead_time_h": None
        if ref is None
        else float((case.times[t] - ref) / np.timedelta64(1, "h")),
    }


def analyze_case(
    case: Case,
    level_hpa,
    time=None,
    box=None,
    *,
    smooth_km=None,
    thresholds: Thresholds = Thresholds(),
    diagnostics=None,
    flow_length=None,
) -> dict:
    """The analysis of one box (west, east, south, north; a Region; None for the whole domain)
    at a pressure level (hPa) or at sea level (:data:`SEA_LEVEL`).

    Returns the report of :func:`balance_core.report.box_report` with the case,
    level, valid time, box, smoothing and the case's notes added.
    """
    t = case.time_index(time)
    sea = is_sea_level(level_hpa)
    if sea:
        level_value = None
    else:
        k = case.level_index(level_hpa)
        level_value = float(case.levels_pa[k] / 100)
    region, box_d, inside = _region_and_box(case, box)
    if diagnostics is not None:
        diag = diagnostics
    elif sea:
        diag = sea_level_diagnostics_for(case, t, smooth_km)
    else:
        diag = diagnostics_for(case, k, t, smooth_km)
    rep = box_report(diag, inside, thresholds=thresholds, flow_length=flow_length)
    out = {
        "case": case.name,
        "level_hpa": level_value,
        "level": SEA_LEVEL if sea else level_value,
        **_times(case, t),
        "box": box_d,
        "smooth_km": smooth_km,
        "min_lat": case.grid.min_lat,
        "member": case.member,
    }
    out.update(rep)
    out["sources"] = {role: dict(src) for role, src in case.sources.items()}
    out["left_out"] = dict(case.dropped)
    out["notes"] = list(case.notes) + rep["notes"]
    runs = (
        case.runs_note(case.time_window(t))
        if "tendency" not in diag.budget.residual_includes
        else None
    )
    if runs:
        out["notes"].append(f"the local tendency: {runs}")
    sfc = case.surface_analysis(t)
    if sfc is not None:
        ok = inside & np.isfinite(sfc["cross_isobar_angle"]) & np.isfinite(sfc["speed_ratio"])
        ang = weighted_stats(sfc["cross_isobar_angle"], case.grid, ok)
        rat = weighted_stats(sfc["speed_ratio"], case.grid, ok)
        out["surface"] = {
            "cross_isobar_angle_median_deg": ang.median,
            "speed_over_geostrophic_median": rat.median,
            "points": ang.count,
            "note": sfc["density_source"],
        }
    return out


def _crosses_equator(region: Region) -> bool:
    if region.kind == "whole":
        return False
    if region.kind == "polygon":
        lats = region.vertices()[1]
        return min(lats) < 0.0 < max(lats)
    _, _, south, north = region.bounds()
    return south < 0.0 < north


def _no_verdict(rep: dict, sentence: str) -> dict:
    rep = dict(rep)
    rep["verdict"] = {
        **rep["verdict"],
        "balance": "none",
        "text": f"No verdict: {sentence}.",
        "why": sentence[0].upper() + sentence[1:] + ".",
    }
    return rep


def _slab(case: Case, role: str, t: int, k: int, smooth_km):
    a = np.asarray(case.data[role].isel(time=t, level=k).values, dtype=np.float64)
    if smooth_km:
        from ..smoothing import smooth

        a = smooth(case.grid, a, smooth_km)
    return a


def analyze_systems(
    case: Case,
    level_hpa,
    time=None,
    *,
    smooth_km=None,
    thresholds: Thresholds = Thresholds(),
    diagnostics=None,
    limit: int = 30,
    interval=None,
    min_depth=None,
    jet=None,
) -> dict:
    """The weather systems of one level and time (:func:`balance_core.systems.find_systems`)
    and, for each, the report of its region (:func:`analyze_case`).

    ``level_hpa`` is a pressure level or sea level (:data:`SEA_LEVEL`): there the lows and
    highs of the mean sea level pressure, every 4 hPa, each with the surface budget of
    its region where the file has the 10 m wind. A file with heights and no wind gets
    its lows and highs with the geostrophic wind of each region and a verdict of "none".

    Returns ``case``, ``level_hpa`` (None at sea level), ``level``, ``valid_time``,
    ``reference_time``, ``lead_time_h``, ``rules`` (the field, its units, the contour
    interval, least depth, jet threshold and the other limits used), ``notes`` and
    ``systems``: each system's kind, centre, intensity, units and region (a streak's
    quadrants too), with ``report``.
    """
    from .. import systems as S
    from ..winds import geostrophic_wind, geostrophic_wind_from_pressure

    t = case.time_index(time)
    notes, budget, why_not = [], True, ""
    sea = is_sea_level(level_hpa)
    if sea:
        p = None
        field = case.sea_level_pressure(t)
        if smooth_km:
            from ..smoothing import smooth

            field = smooth(case.grid, field, smooth_km)
        u = v = None
        budget = case.has_surface_wind
        if budget:
            diag = diagnostics or sea_level_diagnostics_for(case, t, smooth_km)
        else:
            why_not = "the file has no 10 m wind"
            from ..surface import density_from

            rho, _ = density_from(field, None)
            ug, vg = geostrophic_wind_from_pressure(case.grid, field, rho)
        vortices = ()
        level_out: str | float = SEA_LEVEL
    else:
        k = case.level_index(level_hpa)
        p = float(case.levels_pa[k])
        budget = "u" in case.data and "v" in case.data
        if budget:
            diag = diagnostics or diagnostics_for(case, k, t, smooth_km)
            field, u, v = diag.height, diag.u, diag.v
        else:
            why_not = NO_WIND
            field, u, v = _slab(case, "height", t, k, smooth_km), None, None
            ug, vg = geostrophic_wind(case.grid, field)
            notes.append(
                "the file has no wind: closed lows and highs only (no jet streaks), "
                "each with the geostrophic wind of its region"
            )
        vortices = ()
        if p >= 85000.0 and case.has_sea_level and u is not None:
            # the sea-level lows and highs under a low level: their rings are not jet streaks
            msl = case.sea_level_pressure(t)
            vortices = tuple(
                S.find_closed_extrema(case.grid, msl, None, "low")
                + S.find_closed_extrema(case.grid, msl, None, "high")
            )
        below = case.below_ground_mask(t, k)
        if below is not None and below.mean() > BELOW_GROUND_SHARE:
            notes.append(
                f"{100 * below.mean():.0f} % of the {p / 100:g} hPa level lies below the "
                "ground, where no contour can be traced: lows and highs near the "
                'ground are found in the sea-level pressure (--level msl, or "sea '
                'level" on the page)'
            )
        level_out = p / 100
    shallow: list = []
    found = S.find_systems(
        case.grid,
        field,
        u,
        v,
        p,
        interval=interval,
        min_depth=min_depth,
        jet=jet,
        limit=limit,
        vortices=vortices,
        shallow=shallow,
    )
    ci = float(interval or S.contour_interval(p))
    depth_min = 0.5 * ci if min_depth is None else float(min_depth)
    if shallow:
        unit, scale = ("hPa", 0.01) if sea else ("m", 1.0)
        listed = "; ".join(
            f"a {s.kind} of {s.value * scale:.{1 if sea else 0}f} {unit} at "
            f"{abs(s.lat):.1f}{'N' if s.lat >= 0 else 'S'} "
            f"{abs(s.lon):.1f}{'E' if s.lon >= 0 else 'W'}, "
            f"{s.depth * scale:.{1 if sea else 0}f} {unit} inside its "
            f"{s.outer_level * scale:g} {unit} contour"
            for s in shallow[:3]
        )
        n = len(shallow)
        notes.append(
            f"{n} shallow {'low or high is' if n == 1 else 'lows and highs are'} left "
            f"out: closed by a contour, but less than {depth_min * scale:g} {unit} (half an "
            f"interval) inside it: {listed}" + ("; and others" if n > 3 else "")
        )
    systems = []
    for s in found:
        if budget:
            rep = analyze_case(
                case,
                level_out,
                t,
                s.region,
                smooth_km=smooth_km,
                thresholds=thresholds,
                diagnostics=diag,
                flow_length=_system_length(s, sea),
            )
        else:
            rep = dict(geostrophic_only_report(case.grid, ug, vg, s.region, why_not))
        if _crosses_equator(s.region):
            rep = _no_verdict(
                rep,
                "the region crosses the equator, where the Coriolis "
                "parameter changes sign and no balance that needs it holds",
            )
        d = s.as_dict()
        d["report"] = rep
        systems.append(d)
    return {
        "case": case.name,
        "level_hpa": None if p is None else p / 100,
        "level": level_out,
        **_times(case, t),
        "rules": {
            "field": "sea_level_pressure" if sea else "height",
            "units": "Pa" if sea else "m",
            "contour_interval": ci,
            "min_depth": depth_min,
            "shallow_left_out": len(shallow),
            "jet_threshold_ms": None
            if u is None or p is None
            else float(jet or S.jet_threshold(p)),
            "core_fraction": 0.8,
            "limit": limit,
            "max_share": S.MAX_SHARE,
            "ring_km": S.RING_KM,
            "ring_tangential": S.RING_TANGENTIAL,
        },
        "notes": notes,
        "systems": systems,
    }


def _system_length(s, sea: bool):
    """A closed low's or high's length scale: the radius of its outermost closed contour,
    its depth the amplitude (as a height: at sea level through the standard sea-level
    density); None for a jet streak (the flow's own length scale then)."""
    from .. import constants as C
    from ..scales import FlowLength
    from ..thermo import standard_atmosphere_density

    if s.kind == "jet_streak" or not s.depth:
        return None
    amp = s.depth
    if sea:
        amp = s.depth / (float(standard_atmosphere_density(C.STD_SEA_LEVEL_PRESSURE)) * C.G0)
    return FlowLength(
        length=s.radius_km * 1e3,
        amplitude=amp,
        recipe="the radius of the system's outermost closed contour",
    )


def track_systems(
    case: Case,
    level_hpa,
    *,
    smooth_km=None,
    thresholds: Thresholds = Thresholds(),
    limit: int = 30,
    progress=None,
) -> dict:
    """The systems of every valid time, matched into tracks
    (:func:`balance_core.systems.match_tracks`): each track's kind and, at each of its
    times, the centre, intensity, local Rossby number and verdict of its region."""
    from ..systems import TRACK_SPACINGS, TRACK_SPEED_KMH, System, match_tracks, track_limit_km

    per_time, objects = [], []
    for t in range(case.times.size):
        out = analyze_systems(
            case, level_hpa, t, smooth_km=smooth_km, thresholds=thresholds, limit=limit
        )
        per_time.append(out)
        objects.append(
            [
                System(
                    s["kind"],
                    s["lon"],
                    s["lat"],
                    s["value"],
                    s["depth"],
                    s["outer_level"],
                    s["area_km2"],
                    Region.whole(),
                    (0, 0),
                )
                for s in out["systems"]
            ]
        )
        if progress is not None:
            progress(t + 1, case.times.size)
    hours = [float(h) for h in (case.times - case.times[0]) / np.timedelta64(1, "h")]
    spacing = math.sqrt(float(np.nanmedian(case.grid.cell_area))) / 1e3
    tracks = []
    for track in match_tracks(objects, hours, spacing):
        life = []
        for t, i in track:
            s = per_time[t]["systems"][i]
            life.append(
                {
                    "valid_time": per_time[t]["valid_time"],
                    "lon": s["lon"],
                    "lat": s["lat"],
                    "intensity": s["intensity"],
                    "rossby_local_median": (s["report"].get("numbers") or {}).get(
                        "rossby_local_median"
                    ),
                    "verdict": s["report"]["verdict"]["balance"],
                }
            )
        tracks.append({"kind": per_time[track[0][0]]["systems"][track[0][1]]["kind"], "life": life})
    notes = []
    runs = case.runs_note(range(case.times.size))
    if runs:
        notes.append(f"tracks: {runs}")
    step = min((b - a for a, b in zip(hours, hours[1:])), default=0.0)
    return {
        "case": case.name,
        "level_hpa": per_time[0]["level_hpa"] if per_time else None,
        "level": per_time[0]["level"] if per_time else None,
        "match": {
            "speed_kmh": TRACK_SPEED_KMH,
            "min_km": track_limit_km(0.0),
            "grid_spacing_km": spacing,
            "spacings": TRACK_SPACINGS,
            "limit_km": track_limit_km(step, spacing),
        },
        "notes": notes,
        "tracks": tracks,
        "times": per_time,
    }
