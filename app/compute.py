"""What each view shows, computed from the view state without any browser.

Pure functions of (library, state) returning plain data; the page only draws
what they return, and the tests drive them directly. All physics comes from
balance_core (the budget, the winds, the statistics, the verdict); the words and
formats from :mod:`app.wording`.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from balance_core import Region, analyze_scales, classify_scales
from balance_core.io import CaseError, iso
from balance_core.io.analysis import SEA_LEVEL as SEA_LEVEL_NAME
from balance_core.io.analysis import analyze_case
from balance_core.scales import PRESETS, SCALE_TERMS
from balance_core.verdict import CLASSES, Thresholds

from . import render, wording
from .fields import balance_map_of, field_values
from .library import SEA_LEVEL_INDEX
from .state import (
    OVERLAYS,
    SEA_LEVEL,
    SHEET_SCALES,
    URL_PARAMS,
    VECTORS,
    ViewState,
    field_label,
    is_sea_level,
    level_text,
)

__all__ = [
    "Selection",
    "resolve",
    "region_of",
    "ChartData",
    "chart_data",
    "box_data",
    "shared_chart_data",
    "shared_box_data",
    "ready_chart_data",
    "ready_box_data",
    "levels_data",
    "section_data",
    "section_cells",
    "theta_lines",
    "times_data",
    "scale_sheet",
    "region_outline",
    "nearest_level",
    "nearest_level_with_data",
    "level_has_data",
    "case_facts",
]


@dataclasses.dataclass
class Selection:
    """The case, level and time a state points at (indices checked)."""

    case: object
    level_index: int
    time_index: int
    level_hpa: float
    valid_time: str
    reference_time: str | None

    @property
    def when(self) -> str:
        return wording.when(self.valid_time, self.reference_time)


def resolve(library, state: ViewState) -> Selection:
    """The case, level and time of a state; CaseError with a readable sentence if absent."""
    case = library.get(state.case)
    if is_sea_level(state.level):
        if not has_sea_level(case):
            raise CaseError(
                "this case has no sea-level pressure with the 10 m wind, so "
                "there is no sea-level chart; choose a pressure level"
            )
        k, hpa = SEA_LEVEL_INDEX, SEA_LEVEL
    else:
        k = case.level_index(state.level)
        hpa = float(case.levels_pa[k] / 100)
    t = case.time_index(state.time or None)
    ref = None
    if case.reference_times is not None and not np.isnat(case.reference_times[t]):
        ref = iso(case.reference_times[t])
    return Selection(case, k, t, hpa, iso(case.times[t]), ref)


def has_sea_level(case) -> bool:
    """Does the page offer sea level for this case (sea-level pressure and the 10 m wind)?"""
    return bool(case.has_sea_level and case.has_surface_wind)


def core_level(level):
    """The level as the core names it: hPa, or "msl" for sea level."""
    return SEA_LEVEL_NAME if is_sea_level(level) else float(level)


def nearest_level(case, hpa: float) -> float:
    """The case's pressure level nearest to ``hpa`` (in log pressure), hPa; sea level stays
    sea level where the case has it."""
    if is_sea_level(hpa) and has_sea_level(case):
        return SEA_LEVEL
    if is_sea_level(hpa):
        hpa = 1000.0
    levels = np.asarray(case.levels_pa, dtype=np.float64) / 100
    return float(levels[np.argmin(np.abs(np.log(levels / max(float(hpa), 1e-3))))])


#: below these spreads across the grid a level is taken to carry nothing to draw: a wind
#: that varies by less than calm (Beaufort force 0, under 0.5 m/s; WMO's Beaufort scale,
#: from memory), heights that vary by less than 1 m (our own choice)
STILL_SPREAD = {"u": 0.5, "v": 0.5, "height": 1.0}


def level_has_data(case, hpa: float) -> bool:
    """Whether the case's level ``hpa`` carries a field worth drawing at its first time:
    winds or heights that vary across the grid by more than :data:`STILL_SPREAD`. A level
    all missing, or constant (above the top of a shallow invented case), has none. Each
    level is read once per case (the answer is kept on the case)."""
    seen = case.__dict__.setdefault("_level_has_data", {})
    if hpa not in seen:
        k = case.level_index(hpa)
        seen[hpa] = any(_varies(case, role, k) for role in STILL_SPREAD if role in case.data)
    return seen[hpa]


def _varies(case, role, k) -> bool:
    a = np.asarray(case.data[role].isel(time=0, level=k).values, dtype=np.float64)
    finite = a[np.isfinite(a)]
    return bool(finite.size) and float(np.ptp(finite)) >= STILL_SPREAD[role]


def nearest_level_with_data(case, hpa: float) -> float:
    """The level :func:`nearest_level` gives, or, where that level carries nothing to draw
    (:func:`level_has_data`), the nearest level that does (in log pressure); the nearest
    level when none does. Sea level is kept where the case has it."""
    near = nearest_level(case, hpa)
    if is_sea_level(near) or level_has_data(case, near):
        return near
    levels = np.asarray(case.levels_pa, dtype=np.float64) / 100
    for q in sorted(levels, key=lambda q: abs(math.log(q / near))):
        if level_has_data(case, float(q)):
            return float(q)
    return near


def case_facts(case) -> dict:
    """What the page says about a case beside its name: invented or not, its title."""
    return {
        "invented": case.invented,
        "title": str(case.title),
    }


def region_of(state: ViewState) -> Region:
    spec = state.region_spec()
    return Region.whole() if spec is None else spec.region()


def _diag(library, state, sel):
    return library.diagnostics(
        state.case, sel.level_index, sel.time_index, state.smooth_km, state.min_lat
    )


# -- the chart -------------------------------------------------------------------------


@dataclasses.dataclass
class ChartData:
    geom: render.ViewGeometry
    title: str
    level_hpa: float
    valid_time: str
    when: str
    field_key: str
    field_label: str
    units: str
    raster: np.ndarray
    color_range: tuple
    #: shares of the values in view below and above the colour scale
    color_cut: tuple
    color_kind: str  # "sequential", "diverging", "log" or "classes"
    contours: tuple  # (xs, ys, levels, labels) of height
    contour_units: str
    contour_interval: float
    vectors: dict | None
    vector_label: str
    reference_arrow: dict | None
    hover: dict
    coast: tuple | None
    coast_note: str
    land: tuple | None
    graticule: tuple
    region_xy: tuple | None
    notes: list
    invented: bool = False
    #: 1 where the level has no data (below the ground or missing), NaN elsewhere
    masked: np.ndarray | None = None
    masked_share: float = 0.0
    #: what the contours are: "height contours" or "isobars" (sea-level pressure)
    contour_label: str = "height contours"
    #: the second field's contours (as ``contours``) and what they are ("isotachs
    #: every 10 kt"), where asked for
    overlay: tuple | None = None
    overlay_label: str = ""
    #: the vectors as wind barbs in knots (render.wind_barbs), where asked for; then the
    #: arrows and their reference arrow are not drawn
    barbs: dict | None = None


def _field_values(key, diag, state):
    """(values on the case grid, units, kind of colour scale): :func:`app.fields.field_values`."""
    return field_values(key, diag, state)


#: fields whose extremes are the weather systems themselves (the centre of a low, the core
#: of a jet): coloured over every value in view, never cut at a percentile
WHOLE_RANGE = ("height", "speed", "temperature")


def _color_range(vals, kind, *, whole=False):
    """(low, high) of the colour scale: the 1st to 99th percentile of the values in view
    (2nd to 99.5th, widened to whole decades, on a log scale), so that a few extreme points
    do not wash out the rest; with ``whole`` (a field whose extremes are the systems
    themselves, :data:`WHOLE_RANGE`) every value in view."""
    finite = vals[np.isfinite(vals)]
    if whole and kind == "sequential" and finite.size:
        lo, hi = float(finite.min()), float(finite.max())
        return (lo, hi if hi > lo else lo + 1.0)
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
        # a field that is zero everywhere gets a scale of one unit each way, not one of
        # rounding noise (its note says it is the same everywhere, :func:`constant_note`)
        m = max(abs(lo), abs(hi))
        return (-m, m) if m > 0 else (-1.0, 1.0)
    if hi <= lo:
        hi = lo + 1.0
    return (float(lo), float(hi))


def balance_map_note(m) -> str:
    """What the map of which balance holds where shows, its tile size and its tiles
    without a verdict."""
    none = m.counts.get("none", 0)
    return (
        f"Which balance holds where: {m.size_text}, each judged by the rule of the region's "
        f"verdict; {none} of {m.tiles} tiles have no verdict (too few points with every "
        "term, the tropical mask, or a pressure gradient too weak to judge)"
    )


def constant_note(vals, units) -> str:
    """'The field is the same everywhere on the chart: 0 Pa s-1', for a field with no spread
    in view (a colour scale would show nothing), else ''."""
    finite = vals[np.isfinite(vals)]
    if finite.size == 0 or float(np.ptp(finite)) > 0:
        return ""
    u = f" {units}" if units else ""
    return f"The field is the same everywhere on the chart: {float(finite[0]):.4g}{u}"


def _color_cut(vals, kind, color_range):
    """(share below, share above) of the values in view that lie beyond the colour scale
    and are drawn in its end colours (on a log scale, of the positive values)."""
    finite = vals[np.isfinite(vals)]
    if kind == "log":
        finite = finite[finite > 0]
    if finite.size == 0:
        return (0.0, 0.0)
    lo, hi = color_range
    return (float(np.mean(finite < lo)), float(np.mean(finite > hi)))


def color_cut_note(cut, color_range, units) -> str:
    """The line under a chart that says which values the colour scale does not reach."""
    below, above = cut
    if below == 0 and above == 0:
        return ""
    # a unit with a scale in it ("1e-5 s-1") goes in brackets, to stay apart from the number
    u = "" if not units else f" ({units})" if units[0].isdigit() else f" {units}"
    parts = []
    if below:
        parts.append(f"{_share(below)} of the chart lies below {color_range[0]:.4g}{u}")
    if above:
        parts.append(f"{_share(above)} above {color_range[1]:.4g}{u}")
    return "Colour scale cut: " + " and ".join(parts) + ", drawn in the end colours"


def _share(x: float) -> str:
    """A share in %, never rounded to 0 when it is not 0."""
    pct = 100.0 * x
    if 0 < pct < 0.5:
        return "under 1 %"
    return f"{pct:.0f} %"


def chart_data(library, state: ViewState) -> ChartData:
    """Everything the chart draws for a state."""
    sel = resolve(library, state)
    diag = _diag(library, state, sel)
    case = sel.case
    spec = state.region_spec()
    region = region_of(state)
    centre = None
    if spec is not None:
        centre = (
            0.5
            * (
                region.west + region.east
                if region.east >= region.west
                else region.west + region.east + 360
            ),
            0.5 * (region.south + region.north),
        )
    geom = render.geometry_for(case, state.projection, centre=centre)
    notes = []
    key = state.field
    try:
        vals, units, kind = _field_values(key, diag, state)
    except CaseError as exc:
        notes.append(
            f"{field_label(key)}: {exc.reason if hasattr(exc, 'reason') else exc}; "
            "showing the height instead"
        )
        key = "height"
        vals, units, kind = _field_values(key, diag, state)
    raster = render.sample(geom, vals, nearest=kind == "classes")
    if kind == "classes":
        notes.append(balance_map_note(balance_map_of(diag)))
    # contours at display resolution, at the interval the systems are found with
    zr, zunits, interval, contour_label = _contour_field(geom, diag, sel, state)
    levels = render.interval_levels(np.nanmin(zr), np.nanmax(zr), interval)
    contours = render.contour_lines(geom.xs, geom.ys, zr, levels)
    overlay, overlay_label = None, ""
    if state.overlay != "none":
        try:
            orr, ounits, oint = _overlay_field(case, sel, diag, geom, state)
        except CaseError as exc:
            why = exc.reason if hasattr(exc, "reason") else exc
            notes.append(f"No {OVERLAYS[state.overlay]} contours: {why}")
        else:
            olevels = render.interval_levels(np.nanmin(orr), np.nanmax(orr), oint)
            overlay = render.contour_lines(geom.xs, geom.ys, orr, olevels)
            overlay_label = f"{OVERLAYS[state.overlay]} every {oint:g} {ounits}"
    # vectors, and a reference arrow of one lattice cell
    vectors, vlabel, arrow, barbs = None, "", None, None
    kind_of_vectors = state.vectors
    if diag.no_wind and kind_of_vectors in ("wind", "ageostrophic"):
        notes.append(f"{diag.no_wind}: the vectors are the geostrophic wind of the heights")
        kind_of_vectors = "geostrophic"
    if kind_of_vectors != "none":
        uu, vv = {
            "wind": (diag.u, diag.v),
            "geostrophic": (diag.ug, diag.vg),
            "ageostrophic": (diag.u - diag.ug, diag.v - diag.vg),
        }[kind_of_vectors]
        ur = render.sample(geom, uu)
        vr = render.sample(geom, vv)
        vectors = render.vector_lattice(geom, ur, vr, n_across=18)
        if vectors["ref_speed"] <= render.CALM_MS:
            notes.append(
                "Calm: the vectors in view are almost all under 0.5 m/s (1 kt, Beaufort force 0)"
            )
        ref, wunit = wording.wind(vectors["ref_speed"], state.wind_units)
        speed = _round_speed(float(ref))
        vlabel = f"Vectors: {VECTORS[kind_of_vectors]}" + (" at 10 m" if diag.surface else "")
        x0, x1, y0, y1 = geom.extent
        cell = vectors["cell"] * speed / float(ref) if float(ref) > 0 else vectors["cell"]
        arrow = {
            "x0": x0 + 0.04 * (x1 - x0),
            "y0": y0 + 0.05 * (y1 - y0),
            "x1": x0 + 0.04 * (x1 - x0) + 0.95 * cell,
            "y1": y0 + 0.05 * (y1 - y0),
            "text": f"{speed:g} {wunit}",
        }
        if kind_of_vectors != "wind" and np.isnan(ur).mean() > 0.05:
            notes.append(f"geostrophic wind masked within {state.min_lat:g} degrees of the equator")
        if state.vector_style == "barbs":
            barbs = render.wind_barbs(vectors, geom.x_ground_scale)
            arrow = None
            vlabel += (
                " as barbs in knots: half barb 5 kt, barb 10 kt, pennant 50 kt, drawn on the "
                "low-pressure side; a circle is calm (under 2.5 kt)"
            )
    hover = _hover(geom, diag, vals, state, units)
    coast = render.coastlines(geom)
    coast_note = ""
    if coast is None:
        coast_note = (
            "Coastlines unavailable: install the Debian package python-cartopy-data "
            "(offline GSHHS shorelines)"
        )
    facts = case_facts(case)
    if "invented" in str(case.attrs.get("geography", "")):
        coast, coast_note = None, "Invented geography: real coastlines are not drawn"
    land = None
    if "land_mask" in case.surface:
        lm = np.asarray(case.surface["land_mask"].isel(time=0).values, dtype=np.float64)
        lr = render.sample(geom, lm)
        lx, ly, _, _ = render.contour_lines(geom.xs, geom.ys, lr, [0.5])
        land = (lx, ly)
    region_xy = None if spec is None else region_outline(geom, spec)
    # points without data at this level: below the ground or missing, shown, never hidden
    valid = np.isfinite(diag.height)
    if not diag.no_wind:
        valid &= np.isfinite(diag.u) & np.isfinite(diag.v)
    masked = None
    share = float(1.0 - valid.mean())
    if share > 0:
        frac = render.sample(geom, np.where(valid, 0.0, 1.0))
        masked = np.where(frac > 0.5, 1.0, np.nan).astype(np.float32)
        below = case.below_ground_mask(sel.time_index, sel.level_index)
        nb = 0 if below is None else int(np.count_nonzero(below))
        notes.append(
            f"Grey: {_share(share)} of the level has no data"
            + (f" ({nb} point{'s' if nb > 1 else ''} below the ground)" if nb else "")
            + "; those points are left out of every number"
        )
    title = f"{case.name} \u00b7 {level_text(sel.level_hpa)} \u00b7 {sel.when}"
    color_range = _color_range(raster, kind, whole=key in WHOLE_RANGE)
    if kind == "classes":
        color_range = (-0.5, len(CLASSES) - 0.5)
    color_cut = _color_cut(raster, kind, color_range)
    cut_note = color_cut_note(color_cut, color_range, units)
    if cut_note:
        notes.append(cut_note)
    same = constant_note(raster, units) if kind != "classes" else ""
    if same:
        notes.append(same)
    return ChartData(
        geom=geom,
        title=title,
        level_hpa=sel.level_hpa,
        valid_time=sel.valid_time,
        when=sel.when,
        field_key=key,
        field_label="sea-level pressure" if key == "height" and diag.surface else field_label(key),
        units=units,
        raster=raster,
        color_range=color_range,
        color_cut=color_cut,
        color_kind=kind,
        contours=contours,
        contour_units=zunits,
        contour_interval=interval,
        contour_label=contour_label,
        vectors=vectors,
        barbs=barbs,
        overlay=overlay,
        overlay_label=overlay_label,
        vector_label=vlabel,
        reference_arrow=arrow,
        hover=hover,
        coast=coast,
        coast_note=coast_note,
        land=land,
        graticule=render.graticule(geom),
        region_xy=region_xy,
        notes=notes,
        invented=facts["invented"],
        masked=masked,
        masked_share=share,
    )


def _contour_field(geom, diag, sel, state):
    """(the contoured field on the display raster, its units, the interval, its name): the
    height in the view's unit at the interval :func:`balance_core.systems.contour_interval`
    gives the level (the one the systems are found with), or at sea level the sea-level
    pressure in hPa every 4 hPa."""
    from balance_core.systems import contour_interval

    if diag.surface:
        return (
            render.sample(geom, diag.sea_level_pressure) / 100.0,
            "hPa",
            contour_interval(None) / 100.0,
            "isobars",
        )
    zr, zunits = wording.height(render.sample(geom, diag.height), state.height_units)
    k = wording.HEIGHT_UNITS[state.height_units][1]
    return zr, zunits, contour_interval(sel.level_hpa * 100.0) * k, "height contours"


def _overlay_field(case, sel, diag, geom, state):
    """(the second field on the display raster, its units, its contour interval) of
    ``state.overlay``; CaseError with a sentence where the case cannot give it.

    Intervals (common practice, no source): thickness 60 m (6 dam), sea-level pressure
    4 hPa, isotachs 10 kt or 5 m/s, temperature 2 degC at and below 700 hPa, 5 degC above."""
    from balance_core.io.units import to_numpy

    t, what = sel.time_index, state.overlay
    if what == "thickness":
        slabs = []
        for hpa in (1000.0, 500.0):
            k = case.level_index(hpa)  # CaseError: "no 1000 hPa level"
            z = np.asarray(to_numpy(case.data["height"].isel(time=t, level=k)), np.float64)
            below = case.below_ground_mask(t, k)
            if below is not None:
                z = np.where(below, np.nan, z)
            slabs.append(z)
        dz, units = wording.height(render.sample(geom, slabs[1] - slabs[0]), state.height_units)
        return dz, units, 60.0 * wording.HEIGHT_UNITS[state.height_units][1]
    if what == "msl":
        if not case.has_sea_level:
            raise CaseError("this case has no sea-level pressure")
        msl = np.asarray(to_numpy(case.surface["msl"].isel(time=t)), np.float64)
        return render.sample(geom, msl) / 100.0, "hPa", 4.0
    if what == "isotachs":
        if diag.no_wind:
            raise CaseError(f"{diag.no_wind}, so there are no isotachs")
        speed, units = wording.wind(render.sample(geom, np.hypot(diag.u, diag.v)), state.wind_units)
        return speed, units, 10.0 if units == "kt" else 5.0
    if what == "temperature":
        if diag.temperature is None:
            raise CaseError("this case has no temperature")
        low = diag.surface or sel.level_hpa >= 700.0
        return render.sample(geom, diag.temperature) - 273.15, "degC", 2.0 if low else 5.0
    raise CaseError(f"unknown second field {wording.quote(what)}")


def _round_speed(x: float) -> float:
    """A round reference speed near ``x`` (1, 2, 5 times a power of ten, or 10, 20, 25...)."""
    if not x > 0:
        return 10.0
    e = 10.0 ** math.floor(math.log10(x))
    return min((b * e for b in (1, 2, 2.5, 5, 10)), key=lambda v: abs(math.log(v / x)))


def _hover(geom, diag, vals, state, units, n_across=40):
    """A coarse lattice of readouts in the page's units, as numbers (float32): the page
    writes them (N/S/E/W, the units, "no data") when the mouse is over one."""
    ny, nx = geom.lon.shape
    step = max(1, nx // n_across)
    jj, ii = np.mgrid[step // 2 : ny : step, step // 2 : nx : step]
    lon, lat = geom.lon[jj, ii], geom.lat[jj, ii]
    sub = dataclasses.replace(geom, rows=geom.rows[jj, ii], cols=geom.cols[jj, ii])
    f = render.sample(sub, vals)
    if diag.surface:
        z, zu = render.sample(sub, diag.sea_level_pressure) / 100.0, "hPa"
    else:
        z, zu = wording.height(render.sample(sub, diag.height), state.height_units)
    u = render.sample(sub, diag.u)
    v = render.sample(sub, diag.v)
    spd, wu = wording.wind(np.hypot(u, v), state.wind_units)
    direction = (np.degrees(np.arctan2(-u, -v)) + 360) % 360  # where the wind comes from
    ok = np.isfinite(f) | np.isfinite(z)
    dx = (geom.xs[-1] - geom.xs[0]) / max(nx - 1, 1) * step
    dy = (geom.ys[-1] - geom.ys[0]) / max(ny - 1, 1) * step
    f32 = np.float32
    return {
        "x": geom.xs[ii][ok].astype(f32),
        "y": geom.ys[jj][ok].astype(f32),
        "w": float(abs(dx)),
        "h": float(abs(dy)),
        "lat": lat[ok].astype(f32),
        "lon": lon[ok].astype(f32),
        "field": np.asarray(f[ok], f32),
        "height": np.asarray(z[ok], f32),
        "speed": np.asarray(spd[ok], f32),
        "dir": np.asarray(direction[ok], f32),
        "field_units": units,
        "height_units": zu,
        "wind_units": wu,
    }


def region_outline(geom, spec):
    """The region's edges in view coordinates."""
    lons, lats = spec.outline()
    lons = np.append(lons, lons[0])
    lats = np.append(lats, lats[0])
    x, y = geom.path_to_view(lons, lats)
    return np.asarray(x), np.asarray(y)


# -- the box ---------------------------------------------------------------------------


def box_data(library, state: ViewState, thresholds: Thresholds = Thresholds()) -> dict:
    """The analysis of the state's region: the same object as ``balance-desk analyze``."""
    sel = resolve(library, state)
    diag = _diag(library, state, sel)
    case = library.case_for(state.case, state.min_lat)
    rep = analyze_case(
        case,
        core_level(sel.level_hpa),
        sel.time_index,
        region_of(state),
        smooth_km=state.smooth_km or None,
        thresholds=thresholds,
        diagnostics=diag,
    )
    rep["region_text"] = state.region_text()
    rep["when"] = sel.when
    rep["invented"] = case_facts(case)["invented"]
    rep["unavailable"] = [t for t in rep["terms"] if t["magnitude"] is None]
    return rep


#: what a chart and a region's report depend on (the rest of the state does not change them)
#: (every parameter of a link but the preset and the sheet, which change only the words, and
#: the section's line, which only the section view draws)
CHART_KEYS = tuple(p for p in URL_PARAMS if p not in ("preset", "sheet", "line"))
BOX_KEYS = ("case", "level", "time", "smooth_km", "min_lat", "region")


def _key(kind, state, names, *extra):
    from .state import encode_query

    q = encode_query(state.values())
    return (kind,) + tuple(q.get(k, "") for k in names) + extra


def _read_only(obj):
    """Make every array of a shared result read-only: a session that tried to change one
    would change every session's view, so it fails loudly instead."""
    if isinstance(obj, np.ndarray):
        obj.setflags(write=False)
    elif isinstance(obj, dict):
        for v in obj.values():
            _read_only(v)
    elif isinstance(obj, (list, tuple)):
        for v in obj:
            _read_only(v)
    elif dataclasses.is_dataclass(obj):
        for f in dataclasses.fields(obj):
            _read_only(getattr(obj, f.name))
    return obj


def shared_chart_data(library, state: ViewState) -> ChartData:
    """:func:`chart_data`, computed once per view for every session that shows it (a review
    room's followers). The result is shared: its arrays are read-only."""
    return library.view(
        _key("chart", state, CHART_KEYS), lambda: _read_only(chart_data(library, state))
    )


def ready_chart_data(library, state: ViewState):
    """The shared chart of this view if some session computed it already, else None."""
    return library.view_ready(_key("chart", state, CHART_KEYS))


def ready_box_data(library, state: ViewState, thresholds: Thresholds = Thresholds()):
    """A copy of the shared report of this view if it was computed already, else None."""
    import copy

    rep = library.view_ready(_key("box", state, BOX_KEYS, thresholds))
    return None if rep is None else copy.deepcopy(rep)


def shared_box_data(library, state: ViewState, thresholds: Thresholds = Thresholds()) -> dict:
    """:func:`box_data`, computed once per view for every session; each gets its own copy."""
    import copy

    rep = library.view(
        _key("box", state, BOX_KEYS, thresholds), lambda: box_data(library, state, thresholds)
    )
    return copy.deepcopy(rep)


def _levels_key(state: ViewState, sel) -> tuple:
    return ("levels", state.case, sel.time_index, state.smooth_km, state.min_lat, state.region)


def levels_data(library, state: ViewState, progress=None, report_at=None) -> dict:
    """Term magnitudes and the verdict at every level, for the state's region and time.

    ``progress(done, total)`` is called after each level. ``report_at(level_index, state)``
    gives a level's report where the caller has a faster way to the same numbers (a
    section's band of rows, :func:`section_data`); by default :func:`box_data`.
    """
    sel = resolve(library, state)
    region = region_of(state)
    key = _levels_key(state, sel)

    def make():
        rows = []
        n = sel.case.levels_pa.size
        for k, p in enumerate(sel.case.levels_pa):
            s2 = state.copy()
            s2.level = float(p / 100)
            try:
                rep = box_data(library, s2) if report_at is None else report_at(k, s2)
            except CaseError as exc:
                rows.append({"level_hpa": float(p / 100), "error": str(exc)})
            else:
                mags = {t["name"]: t["magnitude"] for t in rep["terms"] + rep["derived"]}
                rows.append(
                    {
                        "level_hpa": float(p / 100),
                        "magnitudes": mags,
                        "balance": rep["verdict"]["balance"],
                        "ratios": rep["balances"],
                        "valid_share": rep.get("valid_share"),
                    }
                )
            if progress is not None:
                progress(k + 1, n)
        spec = state.region_spec()
        return {
            "rows": rows,
            "case": state.case,
            "region": state.region_text(),
            "box": None
            if spec is None
            else dict(zip(("west", "east", "south", "north"), spec.bounds_box)),
            "time": sel.valid_time,
            "when": sel.when,
            "region_kind": region.kind,
            "smooth_km": state.smooth_km,
            "min_lat": state.min_lat,
        }

    return library.profile(key, make)


#: points along a section (every 1/120 of its length)
SECTION_POINTS = 121


def section_line(library, state: ViewState):
    """The section's two ends, (lon0, lat0, lon1, lat1): the state's own line, else the line
    :func:`proposed_line` proposes for the region."""
    return section_line_and_why(library, state)[0]


def section_line_and_why(library, state: ViewState):
    """((lon0, lat0, lon1, lat1), the words that say where it runs): the state's own line,
    else through a chosen system (:func:`proposed_line`), else across the middle of the
    region from west to east (of the whole case without a region)."""
    if state.line:
        from .inputs import parse_line

        return parse_line(state.line), "the line typed"
    spec = state.region_spec()
    if spec is not None:
        case = library.get(state.case)
        proposed = proposed_line(spec, case.grid.radius)
        if proposed is not None:
            return proposed
    region = region_of(state)
    if region.kind != "whole":
        west, east, south, north = region.bounds()
    else:
        case = library.get(state.case)
        lon, lat = case.grid.lon, case.grid.lat
        west, east = float(np.nanmin(lon)), float(np.nanmax(lon))
        south, north = float(np.nanmin(lat)), float(np.nanmax(lat))
    if east < west:  # across the date line
        east += 360.0
    # a great circle between two points is the shorter way round: a span of half the globe
    # or more (a global case) would run the other way, so the line spans at most 179 degrees
    east = min(east, west + 179.0)
    mid = 0.5 * (south + north)
    where = "the whole case" if region.kind == "whole" else "the region"
    return (west, mid, east, mid), f"west to east across the middle of {where}"


#: how far a line through a chosen low or high runs each side of its centre, in radii of its
#: region, and one across a jet streak each side of its axis, in half-widths of its area: far
#: enough to show the system and the flow around it (the project's own choice)
LINE_RADII = 2.0
LINE_HALF_WIDTHS = 2.0


def proposed_line(spec, radius: float):
    """The line a chosen system proposes, with its words, or None for a region of another
    kind: through a low or high (a circle) from west to east, LINE_RADII of its radius each
    side of its centre; across a jet streak (an area along the flow, straight in the
    azimuthal equidistant projection centred on its peak) through its centre, from the
    left of the flow to the right, LINE_HALF_WIDTHS of its half-width each side. The ends are
    found on a sphere of the grid's ``radius`` (pyproj's Geod and the area's projection)."""
    import pyproj

    if spec.kind == "circle":
        ((lon, lat),) = spec.corners
        geod = pyproj.Geod(a=radius, b=radius)
        reach = LINE_RADII * spec.radius_km * 1e3
        lon1, lat1, _ = geod.fwd(lon, lat, 90.0, reach)
        lon0, lat0, _ = geod.fwd(lon, lat, 270.0, reach)
        return (lon0, lat0, lon1, lat1), "west to east through the chosen system's centre"
    if spec.kind == "area" and spec.proj and spec.proj[0] == "aeqd":
        crs = spec.crs()
        fwd = pyproj.Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True)
        inv = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
        lo, la = np.array(spec.corners, dtype=np.float64).T
        x, y = fwd.transform(lo, la)
        # the sides from the first corner to the second and from the third to the fourth
        # cross the flow, from its left to its right (balance_core.systems._rect)
        cx, cy = float(np.mean(x)), float(np.mean(y))
        dx, dy = 0.5 * (x[1] - x[0] + x[2] - x[3]), 0.5 * (y[1] - y[0] + y[2] - y[3])
        k = LINE_HALF_WIDTHS / 2.0  # the side is two half-widths long
        (lon0, lon1), (lat0, lat1) = inv.transform(
            [cx - k * dx, cx + k * dx], [cy - k * dy, cy + k * dy]
        )
        return (
            (float(lon0), float(lat0), float(lon1), float(lat1)),
            "across the chosen jet streak, from the left of the flow to the right",
        )
    return None


class _SectionLevels:
    """A section's levels: each level's diagnostics, from the library where the whole grid's
    were computed before, else computed once on the band of rows that the section's points
    and its region need (:func:`balance_core.io.analysis.band_rows`; the inner rows of a
    band are the whole grid's, bit for bit, :meth:`balance_core.io.case.Case.rows`). Without
    a band (the whole case, a smoothed flow, or a band of most of the grid) every level is
    the library's."""

    BAND_STEP = 16

    def __init__(self, library, state: ViewState, time_index: int, lon, lat):
        self.library, self.state, self.time_index = library, state, time_index
        self.case = library.case_for(state.case, state.min_lat)
        self.band_case = None
        self._reports: dict = {}
        self.band = self._band(lon, lat)
        if self.band is not None:
            self.band_case = self.case.rows(*self.band)

    def _band(self, lon, lat):
        from balance_core.io.analysis import band_rows

        region = region_of(self.state)
        if region.kind == "whole" or self.state.smooth_km:
            return None  # the whole grid anyway; a smoother reads beyond any halo
        grid = self.case.grid
        rows = render.rows_at(grid, lon, lat)
        rows = rows[np.isfinite(rows)]
        need = np.concatenate([np.floor(rows), np.ceil(rows)]).astype(np.int64)
        try:
            band = band_rows(grid, [region.mask(grid)], rows=need)
        except ValueError:
            return None  # the region's own report says what is wrong with it
        if band is None:
            return None
        # widened to whole steps of BAND_STEP rows, so that the next line across the same
        # region finds its levels computed (the library keeps them by their band)
        step, ny = self.BAND_STEP, grid.shape[0]
        return (band[0] // step) * step, min(ny, -(-band[1] // step) * step)

    def diagnostics(self, level_index: int):
        """(LevelDiagnostics, the case they are on: the whole case or its band) of one level."""
        s = self.state
        key = (s.case, level_index, self.time_index, s.smooth_km, s.min_lat)
        whole = self.library.diagnostics_ready(*key)
        if whole is not None or self.band_case is None:
            if whole is None:
                whole = self.library.diagnostics(*key)
            return whole, self.case
        band = self.library.band_diagnostics(
            s.case, level_index, self.time_index, s.min_lat, self.band
        )
        return band, self.band_case

    def prepare(self) -> None:
        """Compute every level's band diagnostics and report at once, a level a thread (numpy
        works outside Python's lock for most of a level: on 2 cores a cold section of 7
        levels of bench/app.py's 0.25-degree global case took 1.37 s this way against 2.30 s
        one level after another, medians of 6 runs of each taken in turn). Nothing to do
        without a band."""
        if self.band_case is None:
            return
        import concurrent.futures
        import os

        todo = [k for k in range(self.case.levels_pa.size) if k not in self._reports]
        if len(todo) < 2:
            return

        def one(k):
            s2 = self.state.copy()
            s2.level = float(self.case.levels_pa[k] / 100)
            try:
                self._reports[k] = self.report(k, s2)
            except CaseError:
                pass  # the level's report says it again when it is asked for

        with concurrent.futures.ThreadPoolExecutor(min(len(todo), os.cpu_count() or 1)) as ex:
            list(ex.map(one, todo))

    def report(self, level_index: int, state: ViewState) -> dict:
        """A level's report for the region (the numbers :func:`box_data` gives)."""
        if level_index in self._reports:
            return self._reports[level_index]
        diag, case = self.diagnostics(level_index)
        return analyze_case(
            case,
            core_level(state.level),
            self.time_index,
            region_of(state),
            smooth_km=state.smooth_km or None,
            diagnostics=diag,
        )


def section_data(library, state: ViewState, progress=None) -> dict:
    """A vertical section along the state's line (:func:`section_line`) at its valid time:
    at every level, the wind speed, the potential temperature and the imbalance the
    region's best balance leaves at each point (:func:`balance_core.section.imbalance_field`;
    the balance of the region's verdict at that level, or where the verdict names none the
    candidate with the smallest ratio), with the region's verdict at each level (as the
    levels view gives it). ``progress(done, total)`` after each level.

    A level whose whole-grid diagnostics were not computed before is computed on the band
    of rows the line and the region need (:func:`_SectionLevels`), which gives the same
    numbers; a section of a region on a global grid then costs a fraction of its levels.
    """
    from balance_core.section import great_circle, imbalance_field
    from balance_core.thermo import potential_temperature

    sel = resolve(library, state)
    line, line_why = section_line_and_why(library, state)
    case = sel.case
    lon, lat, dist = great_circle(*line, n=SECTION_POINTS, radius=case.grid.radius)
    at = _SectionLevels(library, state, sel.time_index, lon, lat)
    if library.profile_ready(_levels_key(state, sel)) is None:
        at.prepare()
    through = levels_data(library, state, report_at=at.report)
    by_level = {round(r["level_hpa"], 3): r for r in through["rows"]}
    levels = sorted((float(p / 100) for p in case.levels_pa), reverse=True)
    n = len(levels)
    speed = np.full((n, lon.size), np.nan)
    theta = np.full((n, lon.size), np.nan)
    ratio = np.full((n, lon.size), np.nan)
    verdicts, balances = [], []
    for k, hpa in enumerate(levels):
        row = by_level.get(round(hpa, 3), {})
        verdict = row.get("balance") or "none"
        balance = _best_balance(row)
        verdicts.append(verdict)
        balances.append(balance)
        li = int(np.argmin(np.abs(case.levels_pa - hpa * 100)))
        diag, on = at.diagnostics(li)
        grid = on.grid
        if not diag.no_wind:
            speed[k] = render.sample_at(grid, diag.speed, lon, lat)
            if balance is not None:
                try:
                    ratio[k] = render.sample_at(
                        grid, imbalance_field(diag.budget, balance), lon, lat
                    )
                except ValueError:
                    pass
        if diag.temperature is not None:
            theta[k] = render.sample_at(
                grid, potential_temperature(diag.temperature, hpa * 100), lon, lat
            )
        if progress is not None:
            progress(k + 1, n)
    if not (np.isfinite(speed).any() or np.isfinite(theta).any()):
        raise CaseError(
            "the section's line lies outside this case's data: type a line within it, or "
            "take the region's own line"
        )
    return {
        "case": state.case,
        "time": sel.valid_time,
        "when": sel.when,
        "line": line,
        "line_why": line_why,
        "lon": lon,
        "lat": lat,
        "distance_km": dist,
        "levels_hpa": np.array(levels),
        "speed": speed,
        "theta": theta,
        "ratio": ratio,
        "verdicts": verdicts,
        "balances": balances,
        "region": state.region_text(),
    }


def _edges(centres):
    """Cell edges around increasing or decreasing centres: midway between neighbours, half a
    step beyond the ends."""
    c = np.asarray(centres, dtype=np.float64)
    if c.size == 1:
        return np.array([c[0] - 0.5, c[0] + 0.5])
    mid = 0.5 * (c[1:] + c[:-1])
    return np.concatenate([[c[0] - (mid[0] - c[0])], mid, [c[-1] + (c[-1] - mid[-1])]])


def section_cells(data: dict, key: str, wind_units: str = "m/s") -> dict:
    """The section's filled cells for Bokeh quads: ``cells`` (left, right, top, bottom,
    value, text), the colour ``range``, its ``title`` and the pressure range ``p_min`` to
    ``p_max`` (hPa). ``key``: "speed" (in ``wind_units``) or "ratio" (% of the pressure
    gradient, coloured up to 150 %)."""
    dist, levels = data["distance_km"], data["levels_hpa"]
    if key == "speed":
        values, units = wording.wind(data["speed"], wind_units)
        values = np.asarray(values, dtype=np.float64)
        finite = values[np.isfinite(values)]
        rng = (0.0, float(finite.max()) if finite.size and finite.max() > 0 else 1.0)
        title = f"wind speed ({units})"
    else:
        values, units = 100.0 * np.asarray(data["ratio"], dtype=np.float64), "%"
        rng = (0.0, 150.0)
        title = "% of the pressure gradient left over"
    xe, pe = _edges(dist), _edges(levels)
    pe = np.clip(pe, 1.0, None)
    n_lev, n_pt = values.shape
    left = np.tile(xe[:-1], n_lev)
    right = np.tile(xe[1:], n_lev)
    top = np.repeat(pe[1:], n_pt)
    bottom = np.repeat(pe[:-1], n_pt)
    flat = values.ravel()
    text = [
        f"{p:g} hPa, {d:.0f} km: " + ("no data" if not np.isfinite(v) else f"{v:.0f} {units}")
        for k, p in enumerate(levels)
        for d, v in zip(dist, values[k])
    ]
    return {
        "cells": dict(left=left, right=right, top=top, bottom=bottom, value=flat, text=text),
        "range": rng,
        "title": title,
        "p_min": float(min(pe)),
        "p_max": float(max(pe)),
    }


#: potential temperature contours on a section, K (common practice, no source)
THETA_INTERVAL = 4.0


def theta_lines(data: dict) -> tuple[list, list]:
    """(xs, ys) of the section's potential temperature every :data:`THETA_INTERVAL` K, in
    distance (km) and pressure (hPa)."""
    theta = np.asarray(data["theta"], dtype=np.float64)
    if not np.isfinite(theta).any() or len(data["levels_hpa"]) < 2:
        return [], []
    levels = render.interval_levels(np.nanmin(theta), np.nanmax(theta), THETA_INTERVAL)
    xs, ys, _, _ = render.contour_lines(data["distance_km"], data["levels_hpa"], theta, levels)
    return xs, ys


def _best_balance(row: dict) -> str | None:
    """The balance a level's section shows the imbalance of: its verdict's where that is a
    candidate balance, else the candidate with the smallest ratio (None without ratios)."""
    from balance_core.verdict import CANDIDATES

    if row.get("balance") in CANDIDATES:
        return row["balance"]
    ratios = {k: v for k, v in (row.get("ratios") or {}).items() if v is not None}
    return min(ratios, key=ratios.get) if ratios else None


def times_data(library, state: ViewState, progress=None) -> dict:
    """Local Rossby number and ageostrophic fraction over the valid times, for the region."""
    sel = resolve(library, state)
    key = ("times", state.case, sel.level_index, state.smooth_km, state.min_lat, state.region)

    def make():
        out = []
        n = sel.case.times.size
        for t, when in enumerate(sel.case.times):
            s2 = state.copy()
            s2.time = iso(when)
            try:
                rep = box_data(library, s2)
            except CaseError:
                out.append(
                    {
                        "time": iso(when),
                        "rossby_local": None,
                        "ageostrophic_fraction": None,
                        "balance": None,
                    }
                )
            else:
                out.append(
                    {
                        "time": iso(when),
                        "rossby_local": rep["numbers"].get("rossby_local_median"),
                        "ageostrophic_fraction": rep["winds"].get("ageostrophic_fraction_median"),
                        "balance": rep["verdict"]["balance"],
                    }
                )
            if progress is not None:
                progress(t + 1, n)
        return {"series": out, "current": sel.valid_time, "level_hpa": sel.level_hpa}

    return library.profile(key, make)


# -- the a priori scale sheet ------------------------------------------------------------


def scale_sheet(state: ViewState, box_report: dict | None) -> dict:
    """The preset (with the state's edits), its ranked magnitudes, numbers and verdict, beside
    the box.

    Returns rows of scales (sheet value, value estimated from the box), rows of
    terms (magnitude from the sheet, from the box's scales, measured in the box)
    and the two verdicts.
    """
    base = PRESETS[state.preset]
    changes = {k: v for k, v in (state.sheet or {}).items() if k in SHEET_SCALES and v is not None}
    if "lat0" in changes:
        changes["f0"] = None
    try:
        s = base.replace(**changes) if changes else base
        error = None
    except ValueError as exc:
        s, error = base, str(exc)
    res = analyze_scales(s)
    verdict = classify_scales(res)
    box_scales = (box_report or {}).get("scales") or {}
    rows = (box_report or {}).get("terms", []) + (box_report or {}).get("derived", [])
    measured = {t["name"]: t["magnitude"] for t in rows}
    estimated = {t["name"]: t["estimate"] for t in rows}
    # the data's counterpart of each scale term: the friction estimate has none of its own,
    # the residual (which holds friction and everything unresolved) stands beside it
    alias = {"acceleration": "acceleration", "viscous": "residual"}
    term_rows = []
    for name, mag in res.terms:
        data_name = alias.get(name, name)
        term_rows.append(
            {
                "name": name,
                "label": wording.term_name(name),
                "data_label": wording.term_name(data_name)
                + (" (all that is unresolved)" if name == "viscous" else ""),
                "sheet": mag,
                "from_box_scales": estimated.get(data_name),
                "measured": measured.get(data_name),
            }
        )
    scale_rows = []
    for k in SHEET_SCALES:
        box_k = {"lat0": None, "rho": None}.get(k, box_scales.get(k))
        scale_rows.append(
            {
                "name": k,
                "label": wording.SCALE_NAMES.get(k, k),
                "sheet": getattr(s, k),
                "from_box": box_k,
                "edited": k in changes,
            }
        )
    scale_rows.append(
        {
            "name": "f0",
            "label": wording.SCALE_NAMES["f0"],
            "sheet": s.f0,
            "from_box": box_scales.get("f0"),
            "edited": False,
        }
    )
    return {
        "preset": state.preset,
        "preset_label": wording.preset_name(state.preset),
        "source": s.source,
        "scales": scale_rows,
        "terms": term_rows,
        "numbers": res.numbers,
        "verdict": verdict.as_dict(),
        "error": error,
        "box_verdict": (box_report or {}).get("verdict"),
        "order": list(SCALE_TERMS),
    }


# -- systems --------------------------------------------------------------------------

SYSTEM_KEYS = ("case", "level", "time", "smooth_km", "min_lat")


def system_region_spec(r: dict, radius_m: float | None = None):
    """The link's region (a :class:`app.state.RegionSpec`) of a system's region: a circle, a
    box, or for a jet streak the area along the flow (its corners in the azimuthal
    equidistant projection centred on its peak)."""
    from balance_core.constants import EARTH_RADIUS

    from .state import parse_region

    if r["kind"] == "circle":
        text = f"circle:{r['lon']:.4f},{r['lat']:.4f},{r['radius_km']:.1f}"
    elif r["kind"] == "flow_box":
        corners = ";".join(f"{lo:.4f},{la:.4f}" for lo, la in r["corners"])
        text = (
            f"area:aeqd,lat_0={r['lat_0']:.6f},lon_0={r['lon_0']:.6f},"
            f"R={radius_m or EARTH_RADIUS:.4f};{corners}"
        )
    else:
        text = f"box:{r['west']:.4f},{r['east']:.4f},{r['south']:.4f},{r['north']:.4f}"
    return parse_region(text)[0]  # the link's own compact form


def systems_data(library, state: ViewState, thresholds: Thresholds = Thresholds()) -> dict:
    """The weather systems of the state's level and time, each with its region's report
    (:func:`balance_core.io.analyze_systems`), shared by every session that shows them.

    Returns ``systems`` (lows and highs by depth, then jet streaks by peak speed; each
    with ``label``, ``region_text``, ``region`` for the view state, ``verdict``), ``rules``
    and ``when``.
    """
    from balance_core.io import analyze_systems

    from . import report_files

    def make():
        sel = resolve(library, state)
        case = library.case_for(state.case, state.min_lat)
        out = analyze_systems(
            case,
            core_level(sel.level_hpa),
            sel.time_index,
            smooth_km=state.smooth_km or None,
            thresholds=thresholds,
            diagnostics=_diag(library, state, sel),
        )
        order = {"low": 0, "high": 1, "jet_streak": 2}
        systems = sorted(out["systems"], key=lambda s: (order[s["kind"]], -s["intensity"]))
        count = {}
        rows = []
        for s in systems:
            letter = {"low": "L", "high": "H", "jet_streak": "J"}[s["kind"]]
            count[letter] = count.get(letter, 0) + 1
            spec = system_region_spec(s["region"])
            region = spec.to_text() if spec is not None else ""
            rep = s["report"]
            rows.append(
                {
                    "label": f"{letter}{count[letter]}",
                    "kind": s["kind"],
                    "lon": s["lon"],
                    "lat": s["lat"],
                    "intensity": s["intensity"],
                    "value": s["value"],
                    "depth": s["depth"],
                    "outer_level": s["outer_level"],
                    "units": s.get("units", "m"),
                    "note": s.get("note", ""),
                    "intensity_text": report_files.intensity_text(s),
                    "region": region,
                    "region_text": report_files.system_region_text(s["region"]),
                    "verdict": rep["verdict"]["balance"],
                    "verdict_text": rep["verdict"]["text"],
                    "points": rep.get("points", 0),
                    "rossby_local": (rep.get("numbers") or {}).get("rossby_local_median"),
                    "ageostrophic_parts": rep.get("ageostrophic_parts"),
                }
            )
        return {
            "systems": rows,
            "rules": out["rules"],
            "when": sel.when,
            "level_hpa": out.get("level_hpa"),
            "level": out.get("level"),
            "notes": out.get("notes", []),
        }

    return library.view(_key("systems", state, SYSTEM_KEYS, thresholds), make)


def system_life(
    library, state: ViewState, label: str, thresholds: Thresholds = Thresholds()
) -> dict | None:
    """The track through the valid times of the system ``label`` of the state's time:
    its centre, intensity, local Rossby number and verdict at each time (None if it is
    not found)."""
    from balance_core.io import track_systems

    sel = resolve(library, state)
    now = systems_data(library, state, thresholds)
    me = next((s for s in now["systems"] if s["label"] == label), None)
    if me is None:
        return None
    key = ("tracks", state.case, sel.level_index, state.smooth_km, state.min_lat, thresholds)

    def make():
        case = library.case_for(state.case, state.min_lat)
        return track_systems(
            case,
            core_level(sel.level_hpa),
            smooth_km=state.smooth_km or None,
            thresholds=thresholds,
        )

    tracks = library.view(key, make)
    when = sel.valid_time
    for tr in tracks["tracks"]:
        for p in tr["life"]:
            if (
                p["valid_time"] == when
                and tr["kind"] == me["kind"]
                and abs(p["lon"] - me["lon"]) < 1e-6
                and abs(p["lat"] - me["lat"]) < 1e-6
            ):
                return {
                    "label": label,
                    "kind": tr["kind"],
                    "units": me.get("units", "m"),
                    "life": tr["life"],
                    "match": tracks["match"],
                    "notes": tracks.get("notes", []),
                }
    return None
