"""What each view shows, computed from the view state without any browser.

Pure functions of (library, state) returning plain data; the dashboard only
draws what they return, and the tests drive them directly. All physics comes
from balance_core (the budget, the winds, the statistics, the verdict).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from balance_core import Region, analyse_scales, classify_scales
from balance_core.io import CaseError, iso
from balance_core.io.analysis import analyse_case
from balance_core.scales import PRESETS
from balance_core.verdict import Thresholds

from . import render
from .state import VECTORS, ViewState, field_label

__all__ = ["Selection", "resolve", "region_of", "ChartData", "chart_data", "box_data",
           "levels_data", "times_data", "scale_sheet", "UNITS", "to_display"]

KT = 0.514444  # m s-1 per knot (1852 m per hour)

#: Display units of the desk for each kind of quantity.
UNITS = {
    "height": {"m": ("m", 1.0), "dam": ("dam", 0.1)},
    "wind": {"m/s": ("m/s", 1.0), "kt": ("kt", 1 / KT)},
}


def to_display(kind, values, state: ViewState):
    """Values in the desk's chosen units, and the unit label."""
    if kind == "height":
        label, k = UNITS["height"][state.height_units]
        return np.asarray(values) * k, label
    if kind == "wind":
        label, k = UNITS["wind"][state.wind_units]
        return np.asarray(values) * k, label
    return values, ""


@dataclasses.dataclass
class Selection:
    """The case, level and time a state points at (indices checked)."""

    case: object
    level_index: int
    time_index: int
    level_hpa: float
    valid_time: str


def resolve(library, state: ViewState) -> Selection:
    """The case, level and time of a state; CaseError with a readable sentence if absent."""
    case = library.get(state.case)
    k = case.level_index(state.level)
    t = case.time_index(state.time or None)
    return Selection(case, k, t, float(case.levels_pa[k] / 100), iso(case.times[t]))


def region_of(state: ViewState) -> Region:
    spec = state.region_spec()
    if spec is None:
        return Region.whole()
    if spec["kind"] == "box":
        return Region.box(*spec["bounds"])
    return Region.polygon(spec["lons"], spec["lats"])


def _diag(library, state, sel):
    return library.diagnostics(state.case, sel.level_index, sel.time_index,
                               state.smooth_km, state.min_lat)


# -- the chart -------------------------------------------------------------------------

@dataclasses.dataclass
class ChartData:
    geom: render.ViewGeometry
    title: str
    field_key: str
    field_label: str
    units: str
    raster: np.ndarray
    color_range: tuple
    color_kind: str          # "sequential", "diverging" or "log"
    contours: tuple          # (xs, ys, levels, labels) of height
    contour_units: str
    vectors: dict | None
    vector_label: str
    hover: dict
    coast: tuple | None
    coast_note: str
    land: tuple | None
    graticule: tuple
    region_xy: tuple | None
    notes: list
    #: 1 where the level has no data (below the ground or missing), NaN elsewhere
    masked: np.ndarray | None = None
    masked_share: float = 0.0


def _field_values(key, diag, state):
    """(values on the case grid, units, kind of colour scale)."""
    if key == "height":
        v, u = to_display("height", diag.height, state)
        return v, u, "sequential"
    if key in ("speed", "geostrophic_speed", "ageostrophic_speed"):
        raw = {"speed": diag.speed, "geostrophic_speed": diag.geostrophic_speed,
               "ageostrophic_speed": np.hypot(diag.u - diag.ug, diag.v - diag.vg)}[key]
        v, u = to_display("wind", raw, state)
        return v, u, "sequential"
    if key == "ageostrophic_fraction":
        return np.clip(diag.ageostrophic_fraction, 0, 2), "", "sequential"
    if key == "rossby_local":
        return diag.rossby_local, "", "log"
    if key == "vorticity":
        return diag.vorticity * 1e5, "1e-5 s-1", "diverging"
    if key == "omega":
        if diag.omega is None:
            raise CaseError("this case has no vertical motion (omega)")
        return diag.omega, "Pa s-1", "diverging"
    if key == "temperature":
        if diag.temperature is None:
            raise CaseError("this case has no temperature")
        return diag.temperature - 273.15, "degC", "sequential"
    if key.startswith("term:"):
        name = key[5:]
        t = diag.budget[name]
        if not t.available:
            raise CaseError(f"the {name.replace('_', ' ')} term is unavailable: {t.note}")
        return t.magnitude(), "m s-2", "log"
    raise CaseError(f"unknown field {key!r}")


def _color_range(vals, kind):
    finite = vals[np.isfinite(vals)]
    if finite.size == 0:
        return (0.0, 1.0)
    if kind == "log":
        pos = finite[finite > 0]
        if pos.size == 0:
            return (1e-12, 1e-11)
        lo, hi = np.percentile(pos, [2, 99.5])
        lo = 10.0 ** math.floor(math.log10(lo))
        hi = 10.0 ** math.ceil(math.log10(max(hi, lo * 10)))
        return (lo, hi)
    lo, hi = np.percentile(finite, [1, 99])
    if kind == "diverging":
        m = max(abs(lo), abs(hi), 1e-12)
        return (-m, m)
    if hi <= lo:
        hi = lo + 1.0
    return (float(lo), float(hi))


def chart_data(library, state: ViewState) -> ChartData:
    """Everything the chart draws for a state."""
    sel = resolve(library, state)
    diag = _diag(library, state, sel)
    case = sel.case
    region = region_of(state)
    centre = None
    spec = state.region_spec()
    if spec is not None:
        centre = (0.5 * (region.west + region.east if region.east >= region.west
                         else region.west + region.east + 360), 0.5 * (region.south + region.north))
    geom = render.geometry_for(case, state.projection, centre=centre)
    notes = []
    key = state.field
    try:
        vals, units, kind = _field_values(key, diag, state)
    except CaseError as exc:
        notes.append(f"{field_label(key)}: {exc.reason if hasattr(exc, 'reason') else exc}; "
                     "showing the height instead")
        key = "height"
        vals, units, kind = _field_values(key, diag, state)
    raster = render.sample(geom, vals)
    # height contours at display resolution
    zm = render.sample(geom, diag.height)
    zr, zunits = to_display("height", zm, state)
    k = 0.1 if state.height_units == "dam" else 1.0
    levels = render.nice_levels(np.nanmin(zm), np.nanmax(zm),
                                steps=render.HEIGHT_INTERVALS) * k
    contours = render.contour_lines(geom.xs, geom.ys, zr, levels)
    # vectors
    vectors, vlabel = None, ""
    if state.vectors != "none":
        uu, vv = {"wind": (diag.u, diag.v), "geostrophic": (diag.ug, diag.vg),
                  "ageostrophic": (diag.u - diag.ug, diag.v - diag.vg)}[state.vectors]
        ur = render.sample(geom, uu)
        vr = render.sample(geom, vv)
        vectors = render.vector_lattice(geom, ur, vr, n_across=18)
        ref, wunit = to_display("wind", vectors["ref_speed"], state)
        vlabel = (f"Vectors: {VECTORS[state.vectors]}; an arrow one lattice cell long is "
                  f"{float(ref):.0f} {wunit}")
        if state.vectors != "wind" and np.isnan(ur).mean() > 0.05:
            notes.append("geostrophic wind masked within "
                         f"{state.min_lat:g} degrees of the equator")
    # hover readouts on a coarse lattice (field, height, wind, direction)
    hover = _hover(geom, diag, vals, state, units)
    coast = render.coastlines(geom)
    coast_note = ""
    if coast is None:
        coast_note = ("Coastlines unavailable: install the Debian package python-cartopy-data "
                      "(offline GSHHS shorelines)")
    if "invented" in str(case.attrs.get("geography", "")):
        coast, coast_note = None, "Invented geography: real coastlines are not drawn"
    land = None
    if "land_mask" in case.surface:
        lm = np.asarray(case.surface["land_mask"].isel(time=0).values, dtype=np.float64)
        lr = render.sample(geom, lm)
        lx, ly, _, _ = render.contour_lines(geom.xs, geom.ys, lr, [0.5])
        land = (lx, ly)
    region_xy = None
    if spec is not None:
        region_xy = _region_outline(geom, region)
    # points without data at this level: below the ground or missing, shown, never hidden
    valid = np.isfinite(diag.height) & np.isfinite(diag.u) & np.isfinite(diag.v)
    masked = None
    share = float(1.0 - valid.mean())
    if share > 0:
        frac = render.sample(geom, np.where(valid, 0.0, 1.0))
        masked = np.where(frac > 0.5, 1.0, np.nan).astype(np.float32)
        below = case.below_ground_mask(sel.time_index, sel.level_index)
        nb = 0 if below is None else int(np.count_nonzero(below))
        notes.append(f"Grey: {100 * share:.0f} % of the level has no data"
                     + (f" ({nb} points below the ground)" if nb else "")
                     + "; those points are left out of every number")
    title = f"{case.name}  {sel.level_hpa:g} hPa  {sel.valid_time}"
    return ChartData(geom=geom, title=title, field_key=key, field_label=field_label(key),
                     units=units, raster=raster, color_range=_color_range(raster, kind),
                     color_kind=kind, contours=contours, contour_units=zunits, vectors=vectors,
                     vector_label=vlabel, hover=hover, coast=coast, coast_note=coast_note,
                     land=land, graticule=render.graticule(geom), region_xy=region_xy,
                     notes=notes, masked=masked, masked_share=share)


def _hover(geom, diag, vals, state, units, n_across=48):
    ny, nx = geom.lon.shape
    step = max(1, nx // n_across)
    jj, ii = np.mgrid[step // 2:ny:step, step // 2:nx:step]
    lon, lat = geom.lon[jj, ii], geom.lat[jj, ii]
    sub = dataclasses.replace(geom, rows=geom.rows[jj, ii], cols=geom.cols[jj, ii])
    f = render.sample(sub, vals)
    z, zu = to_display("height", render.sample(sub, diag.height), state)
    u = render.sample(sub, diag.u)
    v = render.sample(sub, diag.v)
    spd, wu = to_display("wind", np.hypot(u, v), state)
    direction = (np.degrees(np.arctan2(-u, -v)) + 360) % 360  # where the wind comes from
    ok = np.isfinite(f) | np.isfinite(z)
    dx = (geom.xs[-1] - geom.xs[0]) / max(nx - 1, 1) * step
    dy = (geom.ys[-1] - geom.ys[0]) / max(ny - 1, 1) * step
    return {"x": geom.xs[ii][ok], "y": geom.ys[jj][ok], "w": np.full(ok.sum(), dx),
            "h": np.full(ok.sum(), dy), "lon": ((lon[ok] + 180) % 360) - 180, "lat": lat[ok],
            "field": f[ok], "height": z[ok], "speed": spd[ok], "direction": direction[ok],
            "field_units": units, "height_units": zu, "wind_units": wu}


def _region_outline(geom, region: Region):
    if region.kind == "box":
        w, e, s, n = region.west, region.east, region.south, region.north
        if e < w:
            e += 360
        t = np.linspace(0, 1, 40)
        lons = np.concatenate([w + (e - w) * t, np.full(40, e), e + (w - e) * t, np.full(40, w)])
        lats = np.concatenate([np.full(40, s), s + (n - s) * t, np.full(40, n), n + (s - n) * t])
    else:
        lons, lats = np.asarray(region.lons), np.asarray(region.lats)
        lons = np.append(lons, lons[0])
        lats = np.append(lats, lats[0])
    x, y = geom.to_view(lons, lats)
    return np.asarray(x), np.asarray(y)


# -- the box ---------------------------------------------------------------------------

def box_data(library, state: ViewState, thresholds: Thresholds = Thresholds()) -> dict:
    """The analysis of the state's region: the same object as ``balance-desk analyze``."""
    sel = resolve(library, state)
    diag = _diag(library, state, sel)
    case = library.case_for(state.case, state.min_lat)
    rep = analyse_case(case, sel.level_hpa, sel.time_index, region_of(state),
                       smooth_km=state.smooth_km or None, thresholds=thresholds,
                       diagnostics=diag)
    rep["region_text"] = state.region_text()
    rep["unavailable"] = [t for t in rep["terms"] if t["magnitude"] is None]
    return rep


def levels_data(library, state: ViewState) -> dict:
    """Term magnitudes and the verdict at every level, for the state's region and time."""
    sel = resolve(library, state)
    region = region_of(state)
    key = ("levels", state.case, sel.time_index, state.smooth_km, state.min_lat, state.region)

    def make():
        rows = []
        for k, p in enumerate(sel.case.levels_pa):
            s2 = ViewState(**{**state.param.values(), "name": "tmp", "level": float(p / 100)})
            try:
                rep = box_data(library, s2)
            except CaseError as exc:
                rows.append({"level_hpa": float(p / 100), "error": str(exc)})
                continue
            mags = {t["name"]: t["magnitude"] for t in rep["terms"] + rep["derived"]}
            rows.append({"level_hpa": float(p / 100), "magnitudes": mags,
                         "balance": rep["verdict"]["balance"], "ratios": rep["balances"]})
        return {"rows": rows, "region": state.region_text(), "time": sel.valid_time,
                "region_kind": region.kind}

    return library.profile(key, make)


def times_data(library, state: ViewState) -> dict:
    """Local Rossby number and ageostrophic fraction over the valid times, for the region."""
    sel = resolve(library, state)
    key = ("times", state.case, sel.level_index, state.smooth_km, state.min_lat, state.region)

    def make():
        out = []
        for t, when in enumerate(sel.case.times):
            s2 = ViewState(**{**state.param.values(), "name": "tmp", "time": iso(when)})
            try:
                rep = box_data(library, s2)
            except CaseError:
                out.append({"time": iso(when), "rossby_local": None, "ageostrophic_fraction": None,
                            "balance": None})
                continue
            out.append({"time": iso(when),
                        "rossby_local": rep["numbers"].get("rossby_local_median"),
                        "ageostrophic_fraction": rep["winds"].get("ageostrophic_fraction_median"),
                        "balance": rep["verdict"]["balance"]})
        return {"series": out, "current": sel.valid_time}

    return library.profile(key, make)


# -- the a priori scale sheet ------------------------------------------------------------

SHEET_SCALES = ("U", "W", "L", "H", "dP", "rho", "lat0", "nu")


def scale_sheet(state: ViewState, overrides: dict | None, box_report: dict | None) -> dict:
    """The preset (with any edits), its ranked magnitudes, numbers and verdict, beside the box.

    Returns rows of scales (sheet value, value estimated from the box), rows of
    terms (magnitude from the sheet, from the box's scales, measured in the box)
    and the two verdicts.
    """
    base = PRESETS[state.preset]
    changes = {k: v for k, v in (overrides or {}).items() if v is not None}
    try:
        s = base.replace(**changes) if changes else base
        error = None
    except ValueError as exc:
        s, error = base, str(exc)
    res = analyse_scales(s)
    verdict = classify_scales(res)
    box_scales = (box_report or {}).get("scales") or {}
    measured = {t["name"]: t["magnitude"] for t in (box_report or {}).get("terms", []) +
                (box_report or {}).get("derived", [])}
    estimated = {t["name"]: t["estimate"] for t in (box_report or {}).get("terms", []) +
                 (box_report or {}).get("derived", [])}
    alias = {"acceleration": "acceleration", "viscous": "residual"}
    term_rows = []
    for name, mag in res.terms:
        data_name = alias.get(name, name)
        term_rows.append({"name": name, "sheet": mag,
                          "from_box_scales": estimated.get(data_name),
                          "measured": measured.get(data_name)})
    scale_rows = []
    for k in SHEET_SCALES:
        box_k = {"lat0": None, "rho": None, "nu": None}.get(k, box_scales.get(k))
        scale_rows.append({"name": k, "sheet": getattr(s, k), "from_box": box_k})
    scale_rows.append({"name": "f0", "sheet": s.f0, "from_box": box_scales.get("f0")})
    return {"preset": s.name, "source": s.source, "scales": scale_rows, "terms": term_rows,
            "numbers": res.numbers, "verdict": verdict.as_dict(), "error": error,
            "box_verdict": (box_report or {}).get("verdict")}
