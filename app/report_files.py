"""The report of a region as a table and as files: shared by the command line and the page.

* :func:`table` -- the text ``balance-desk analyze`` prints;
* :func:`export_json` and :func:`export_csv` -- the briefing exports: the same object
  as ``analyze --format json``, with the view's context (case, level, valid and
  reference time, lead time, region, units and every setting that changes a number),
  winds in the chosen unit, and every value rounded to four significant digits; the CSV
  says each term in plain words;
* :func:`export_stem` -- the exports' file name: case, level, valid time and region;
* :func:`levels_csv` -- the region through the levels (the page's levels tab) as CSV.
"""

from __future__ import annotations

import io
import json
import math
import re

from balance_core.vocabulary import BALANCE_CLASSES

from . import wording
from .outside import csv_writer

__all__ = [
    "table",
    "export_json",
    "export_csv",
    "context_of",
    "settings_text",
    "export_stem",
    "levels_csv",
    "clean",
    "systems_table",
    "systems_csv",
    "system_region_text",
    "intensity_text",
    "quantity",
    "rules_text",
    "level_text",
]


def clean(obj):
    """JSON-safe: numpy scalars to Python, non-finite floats to None."""
    if isinstance(obj, dict):
        return {k: clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [clean(v) for v in obj]
    if hasattr(obj, "item") and not isinstance(obj, (str, bytes)):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def _round(obj, digits=4):
    if isinstance(obj, dict):
        return {k: _round(v, digits) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_round(v, digits) for v in obj]
    if isinstance(obj, float):
        return wording.sig(obj, digits)
    return obj


def context_of(
    rep: dict,
    *,
    region_text: str | None = None,
    wind_units: str = "m/s",
    height_units: str = "m",
    case_title: str | None = None,
    invented: bool = False,
) -> dict:
    """What view a report belongs to, for the exports (and their headings)."""
    return {
        "case": rep.get("case"),
        "case_title": case_title,
        "invented_demo_data": bool(invented),
        "level_hpa": rep.get("level_hpa"),
        "level": level_text(rep),
        "valid_time": rep.get("valid_time"),
        "reference_time": rep.get("reference_time"),
        "lead_time_h": rep.get("lead_time_h"),
        "valid_time_text": wording.when(rep.get("valid_time"), rep.get("reference_time")),
        "region": region_text or _box_text(rep.get("box")),
        "box": rep.get("box"),
        "units": {"terms": "m s-2", "wind": wind_units, "height": height_units},
        "settings": {
            "smoothing_km": rep.get("smooth_km") or 0,
            "tropical_mask_deg": rep.get("min_lat"),
            "member": rep.get("member"),
        },
    }


def settings_text(context: dict) -> str:
    """The settings that change the numbers, in one line (the briefing image's stamp)."""
    st = context.get("settings") or {}
    km = st.get("smoothing_km") or 0
    parts = [f"smoothing {km:g} km (Gaussian)" if km else "no smoothing"]
    if st.get("tropical_mask_deg") is not None:
        parts.append(
            f"quantities divided by f left out within {st['tropical_mask_deg']:g} degrees "
            "of the equator"
        )
    member = st.get("member")
    if member is not None:
        parts.append("ensemble mean" if member == "mean" else f"ensemble member {member}")
    units = context.get("units") or {}
    parts.append(f"winds in {units.get('wind', 'm/s')}, heights in {units.get('height', 'm')}")
    return "Settings: " + "; ".join(parts)


def export_stem(context: dict) -> str:
    """A file name (without its extension) naming the case, level, valid time and region,
    of letters, digits, ".", "-" and "_" only: e.g.
    ``ocean_cyclone_500hPa_2041-01-19T1200Z_52W-28W_38N-56N``."""
    level = context.get("level_hpa")
    level_part = f"{level:g}hPa" if level is not None else (context.get("level") or "")
    when = str(context.get("valid_time") or "")
    when = re.sub(r"(\d\d):(\d\d)(:\d\d)?Z?$", r"\1\2Z", when)
    parts = [str(context.get("case") or "case"), level_part, when, _region_stem(context)]
    stem = "_".join(p for p in parts if p)
    return re.sub(r"[^A-Za-z0-9.\-]+", "_", stem.replace(" ", "-")).strip("_.-")[:150]


def _region_stem(context: dict) -> str:
    box = context.get("box")
    if not box or box.get("west") is None:
        return "whole-case"

    def deg(v, pos, neg):
        v = ((v + 180.0) % 360.0) - 180.0 if pos == "E" else v
        return f"{abs(v):g}{pos if v > 0 else neg if v < 0 else ''}"

    return (
        f"{deg(box['west'], 'E', 'W')}-{deg(box['east'], 'E', 'W')}_"
        f"{deg(box['south'], 'N', 'S')}-{deg(box['north'], 'N', 'S')}"
    )


def level_text(rep: dict) -> str:
    """ "500 hPa", or "sea level" for the surface budget and the sea-level systems."""
    if rep.get("level_hpa") is None:
        return "sea level" if rep.get("level") == "msl" else ""
    return f"{rep['level_hpa']:g} hPa"


def _box_text(box):
    if not box or box.get("west") is None:
        return "whole case"
    return (
        f"box {wording.lon(box['west'])} to {wording.lon(box['east'])}, "
        f"{wording.lat(box['south'])} to {wording.lat(box['north'])}"
    )


def _winds_in(rep, wind_units):
    _, k = wording.WIND_UNITS[wind_units]
    out = {}
    for key, v in (rep.get("winds") or {}).items():
        out[key] = v * k if (v is not None and key.endswith("_rms")) else v
    return out


def export_json(rep: dict, context: dict) -> str:
    """The report with its context, winds in the chosen unit, 4 significant digits."""
    obj = dict(clean(rep))
    obj["winds"] = _winds_in(obj, context["units"]["wind"])
    obj = {"context": clean(context), **obj}
    return json.dumps(_round(obj), indent=2)


def export_csv(rep: dict, context: dict) -> str:
    """One row per term, view, balance, number and wind, each with the full context."""
    buf = io.StringIO()
    w = csv_writer(buf)  # outside text (a case named "=...") never a formula
    level = context["level_hpa"]
    settings = context.get("settings") or {}
    ctx = [
        context["case"],
        context.get("level") if level is None else f"{level:g}",
        context["valid_time"],
        context["reference_time"] or "",
        _num(context["lead_time_h"]),
        context["region"],
        _num(settings.get("smoothing_km") or 0),
        _num(settings.get("tropical_mask_deg")),
        "" if settings.get("member") is None else str(settings["member"]),
    ]
    w.writerow(
        [
            "case",
            "level (hPa)",
            "valid time",
            "reference time",
            "lead time (h)",
            "region",
            "smoothing (km)",
            "tropical mask (degrees from the equator)",
            "member",
            "kind",
            "name",
            "value",
            "unit",
            "x part",
            "y part",
            "a priori estimate",
            "note",
        ]
    )
    for kind, rows in (("term", rep.get("terms", [])), ("derived view", rep.get("derived", []))):
        for t in rows:
            w.writerow(
                ctx
                + [
                    kind,
                    wording.term_name(t["name"]),
                    _num(t["magnitude"]),
                    "m s-2",
                    _num(t["x_rms"]),
                    _num(t["y_rms"]),
                    _num(t["estimate"]),
                    t["note"] or "",
                ]
            )
    chosen = (rep.get("verdict") or {}).get("balance")
    for k, v in (rep.get("balances") or {}).items():
        w.writerow(
            ctx
            + [
                "balance (imbalance ratio)",
                wording.balance_name(k),
                _num(v),
                "",
                "",
                "",
                "",
                "the verdict" if k == chosen else "",
            ]
        )
    for k, v in (rep.get("numbers") or {}).items():
        name, unit, _ = wording.NUMBERS.get(k, (k, "", ""))
        w.writerow(ctx + ["number", name, _num(v), unit, "", "", "", ""])
    unit = context["units"]["wind"]
    for k, v in _winds_in(rep, unit).items():
        is_speed = k.endswith("_rms")
        w.writerow(
            ctx
            + [
                "wind",
                k.replace("_", " ").replace(" rms", " (RMS)"),
                _num(v),
                unit if is_speed else "",
                "",
                "",
                "",
                "",
            ]
        )
    v = rep.get("verdict") or {}
    w.writerow(
        ctx
        + [
            "verdict",
            wording.balance_name(v.get("balance", "")),
            "",
            "",
            "",
            "",
            "",
            v.get("text", ""),
        ]
    )
    return buf.getvalue()


def _num(x):
    y = wording.sig(x)
    return "" if y is None else f"{y:.4g}"


# -- the command line's table ----------------------------------------------------------------


def _fmt(x, spec=".2e"):
    return "n/a" if x is None else format(x, spec)


def table(rep: dict) -> str:
    """The text of ``balance-desk analyze`` (format table)."""
    where = _box_text(rep["box"])
    share = rep.get("valid_share")
    lines = [
        f"{rep['case']}  {level_text(rep)}  "
        f"{wording.when(rep['valid_time'], rep.get('reference_time'))}  {where}",
        f"{rep['points']} of {rep.get('region_points', rep['points'])} points valid"
        + (f" ({100 * share:.0f} %)" if share is not None else "")
        + f", {rep['masked_points']} masked",
        "",
        f"verdict: {wording.balance_name(rep['verdict']['balance'])}",
        f"  {rep['verdict']['text']}",
    ]
    if rep["verdict"].get("why"):
        lines.append(f"  why: {rep['verdict']['why']}")
    lines.append("")
    pgf = next((t["magnitude"] for t in rep["terms"] if t["name"] == "pressure_gradient"), None)
    lines.append("  term                       measured (m s-2)  a priori   / PGF   note")
    for t in rep["terms"]:
        ratio = _fmt(t["magnitude"] / pgf, ".2f") if t["magnitude"] is not None and pgf else "n/a"
        note = t["note"] if t["magnitude"] is None or t["name"] == "residual" else ""
        est = _fmt(t["estimate"]) + ("*" if t.get("estimate_by_construction") else "")
        lines.append(
            f"  {wording.term_name(t['name']):<25}  {_fmt(t['magnitude']):<16}  "
            f"{est:<9}  {ratio:<6}  {note or ''}".rstrip()
        )
    if any(t.get("estimate_by_construction") for t in rep["terms"]):
        lines.append(
            "  * a priori estimate made of the same fields as the term: it agrees by construction"
        )
    lines.append("  derived views (not part of the sum)")
    for t in rep["derived"]:
        lines.append(
            f"  {wording.term_name(t['name']):<25}  {_fmt(t['magnitude']):<16}  "
            f"{_fmt(t['estimate']):<9}"
        )
    lines += ["", "  balance         imbalance ratio (RMS of the sum / RMS of the PGF)"]
    not_tested = rep["verdict"].get("not_tested", {})
    for k, v in rep["balances"].items():
        mark = "  <- verdict" if k == rep["verdict"]["balance"] else ""
        if k in not_tested:
            lines.append(f"  {wording.balance_name(k):<14}  not tested")
        else:
            lines.append(f"  {wording.balance_name(k):<14}  {_fmt(v, '.3f')}{mark}")
    if rep.get("curvature"):
        lines.append(f"  (the centripetal term takes the {rep['curvature']} curvature)")
    for c in rep["verdict"].get("cautions", []):
        lines.append(f"  caution: {c}")
    lines += ["", "  winds (m/s)"]
    for k, v in rep["winds"].items():
        lines.append(f"  {k.replace('_', ' '):<30}  {_fmt(v, '.3g')}")
    lines += ["", "  numbers"]
    for k, v in rep["numbers"].items():
        name, unit, _ = wording.NUMBERS.get(k, (k, "", ""))
        lines.append(f"  {name:<30}  {_fmt(v, '.3g')} {unit}".rstrip())
    for k, text in rep.get("explain", {}).items():
        lines.append(f"    {wording.NUMBERS.get(k, (k,))[0]}: {text}")
    if rep.get("scales"):
        lines += [
            "",
            "  scales from the box: "
            + ", ".join(f"{k} {_fmt(v, '.2e')}" for k, v in rep["scales"].items()),
        ]
        for k, text in rep.get("scales_recipe", {}).items():
            lines.append(f"    {k}: {text}")
    res = rep.get("resolution")
    if res:
        lines.append(
            f"  resolution: grid spacing {res['grid_spacing_km']:.0f} km, flow length "
            f"scale {res['flow_length_km']:.0f} km ({res['points_per_length']:.1f} "
            f"spacings): {'resolved' if res['resolved'] else 'UNDER-RESOLVED'}"
        )
    for c in rep.get("residual_causes", []):
        lines.append(f"  residual: {c}")
    if rep.get("sources"):
        lines += ["", "  sources"]
        for role, src in rep["sources"].items():
            grib = (
                (
                    f", GRIB {src['grib_short_name']} (paramId {src['grib_param_id']}, "
                    f"{src['grib_type_of_level']})"
                )
                if src.get("grib_short_name")
                else ""
            )
            conv = (
                f", {src['units_from']} -> {src['units_to']}"
                if src.get("units_from") and _differ(src["units_from"], src["units_to"])
                else ""
            )
            lines.append(f"  {role:<17} {src['variable']!r} ({src['level_type']}{grib}{conv})")
    for why in rep.get("left_out", {}).values():
        lines.append(f"  left out: {why}")
    for n in rep.get("notes", []):
        lines.append(f"  note: {n}")
    return "\n".join(lines)


def _differ(a, b) -> bool:
    from balance_core.io.units import _canonical

    return _canonical(str(a)) != _canonical(str(b))


# -- systems ------------------------------------------------------------------------------


def system_region_text(region: dict) -> str:
    if region["kind"] == "circle":
        return (
            f"within {region['radius_km']:.0f} km of {wording.lat(region['lat'])} "
            f"{wording.lon(region['lon'])}"
        )
    if region["kind"] == "flow_box":
        return (
            f"{region['length_km']:.0f} km along the flow by {region['width_km']:.0f} km "
            f"across, centred on {wording.lat(region['lat_0'])} {wording.lon(region['lon_0'])}"
        )
    return (
        f"box {wording.lon(region['west'])} to {wording.lon(region['east'])}, "
        f"{wording.lat(region['south'])} to {wording.lat(region['north'])}"
    )


def quantity(value, units: str, height_units: str = "m", digits: int = 0) -> str:
    """A system's value in words and the view's unit: heights in m or dam, sea-level
    pressure in hPa, speeds in the wind unit."""
    if value is None:
        return "n/a"
    if units == "Pa":
        hpa = value / 100
        return f"{hpa:g} hPa" if float(hpa).is_integer() else f"{hpa:.1f} hPa"
    v, u = wording.height(value, height_units)
    d = digits + (1 if height_units == "dam" else 0)
    return f"{float(v):.{d}f} {u}"


def intensity_text(s: dict, wind_units: str = "m/s", height_units: str = "m") -> str:
    if s["kind"] == "jet_streak":
        v, u = wording.wind(s["value"], wind_units)
        return f"peak {float(v):.0f} {u}"
    side = "below" if s["kind"] == "low" else "above"
    units = s.get("units", "m")
    return (
        f"centre {quantity(s['value'], units, height_units)}, "
        f"{quantity(s['depth'], units, height_units)} {side} its outermost closed contour "
        f"({quantity(s['outer_level'], units, height_units)})"
    )


def rules_text(out: dict, wind_units: str = "m/s", height_units: str = "m") -> str:
    """The rules a systems listing used, in the view's units."""
    r = out["rules"]
    text = (
        f"closed contours every {quantity(r['contour_interval'], r['units'], height_units)}"
        f", at least {quantity(r['min_depth'], r['units'], height_units)} deep, within one "
        f"hemisphere and {100 * r['max_share']:.0f} % of the globe"
    )
    if r.get("jet_threshold_ms") is not None:
        v, u = wording.wind(r["jet_threshold_ms"], wind_units)
        text += (
            f"; jet streaks above {float(v):.0f} {u}, core above "
            f"{100 * r['core_fraction']:.0f} % of the peak"
        )
    return text


def systems_table(out: dict) -> str:
    """The text ``balance-desk systems`` prints: one block per system (or per track)."""
    if "tracks" in out:
        m = out["match"]
        lines = [
            f"Tracks of {out['case']} at {level_text(out)} (matched within "
            f"{m['speed_kmh']:g} km/h x the time step, at least {m['min_km']:g} km and "
            f"{m['spacings']:g} grid spacings of {m['grid_spacing_km']:.0f} km)",
            "",
        ]
        lines += [f"  note: {n}" for n in out.get("notes", [])]
        for i, tr in enumerate(out["tracks"], 1):
            lines.append(f"{i}. {wording.system_name(tr['kind'])}, {len(tr['life'])} times")
            for p in tr["life"]:
                ro = p["rossby_local_median"]
                lines.append(
                    f"   {wording.when_short(p['valid_time'])}  {wording.lat(p['lat'])} "
                    f"{wording.lon(p['lon'])}  intensity {p['intensity']:.1f}  local Ro "
                    f"{'n/a' if ro is None else f'{ro:.2g}'}  "
                    f"{wording.balance_name(p['verdict'])}"
                )
        return "\n".join(lines)
    lines = [
        f"Systems of {out['case']} at {level_text(out)}, "
        f"{wording.when(out['valid_time'], out.get('reference_time'))}",
        f"  rules: {rules_text(out)}",
    ]
    lines += [f"  note: {n}" for n in out.get("notes", [])]
    lines.append("")
    if not out["systems"]:
        lines.append("  no closed low, closed high or jet streak on this level")
    for i, s in enumerate(out["systems"], 1):
        rep = s["report"]
        v = rep["verdict"]
        lines.append(
            f"{i}. {wording.system_name(s['kind'])} at {wording.lat(s['lat'])} "
            f"{wording.lon(s['lon'])}: {intensity_text(s)}"
        )
        lines.append(
            f"   region: {system_region_text(s['region'])}, {rep.get('points', 0)} "
            "valid points" + (f" ({s['note']})" if s.get("note") else "")
        )
        lines.append(f"   verdict: {wording.balance_name(v['balance'])}. {v['text']}")
        top = [t for t in rep.get("terms", []) if t["magnitude"] is not None][:3]
        if top:
            lines.append(
                "   largest terms: "
                + ", ".join(f"{wording.term_name(t['name'])} {t['magnitude']:.1e}" for t in top)
                + " m s-2"
            )
        if rep.get("surface") and out.get("level") == "msl":
            sf = rep["surface"]
            ang, rat = (
                sf.get("cross_isobar_angle_median_deg"),
                sf.get("speed_over_geostrophic_median"),
            )
            if ang is not None:
                lines.append(
                    f"   10 m wind: crosses the isobars toward low pressure by "
                    f"{ang:.0f} degrees (median), at {rat:.2f} of the geostrophic "
                    "speed"
                )
        parts = rep.get("ageostrophic_parts") or {}
        if parts.get("measured_rms") is not None:
            bits = [
                f"{wording.part_name(k)} {p['speed_rms']:.1f}"
                if p["speed_rms"] is not None
                else f"{wording.part_name(k)} n/a"
                for k, p in parts["parts"].items()
            ]
            lines.append(
                f"   ageostrophic wind {parts['measured_rms']:.1f} m/s (RMS): " + "; ".join(bits)
            )
            if parts.get("note"):
                lines.append(f"   caution: {parts['note']}")
        lines.append("")
    return "\n".join(lines).rstrip()


def systems_csv(out: dict) -> str:
    """One row per system (or per system and time with tracks), values to 4 digits."""
    buf = io.StringIO()
    w = csv_writer(buf)  # outside text (a case named "=...") never a formula
    parts = ("tendency", "inertial_advective", "vertical_advection", "remainder")
    if "tracks" in out:
        w.writerow(
            [
                "case",
                "level",
                "track",
                "kind",
                "valid_time",
                "lat",
                "lon",
                "intensity",
                "rossby_local_median",
                "verdict",
            ]
        )
        for i, tr in enumerate(out["tracks"], 1):
            for p in tr["life"]:
                w.writerow(
                    [
                        out["case"],
                        level_text(out),
                        i,
                        wording.system_name(tr["kind"]),
                        p["valid_time"],
                        wording.sig(p["lat"]),
                        wording.sig(p["lon"]),
                        wording.sig(p["intensity"]),
                        wording.sig(p["rossby_local_median"]),
                        wording.balance_name(p["verdict"]),
                    ]
                )
        return buf.getvalue()
    w.writerow(
        [
            "case",
            "level",
            "valid_time",
            "kind",
            "lat",
            "lon",
            "intensity",
            "units",
            "depth",
            "outer_contour",
            "region",
            "points",
            "verdict",
            *[b.column for b in BALANCE_CLASSES if b.column],
            "rossby_local_median",
            "ageostrophic_rms_ms",
        ]
        + [f"ageostrophic_{p}_rms_ms" for p in parts]
    )
    for s in out["systems"]:
        rep = s["report"]
        b = rep.get("balances") or {}
        ap = rep.get("ageostrophic_parts") or {}
        w.writerow(
            [
                out["case"],
                level_text(out),
                out["valid_time"],
                wording.system_name(s["kind"]),
                wording.sig(s["lat"]),
                wording.sig(s["lon"]),
                wording.sig(s["intensity"]),
                s.get("units", "m"),
                wording.sig(s["depth"]),
                wording.sig(s["outer_level"]),
                system_region_text(s["region"]),
                rep.get("points"),
                wording.balance_name(rep["verdict"]["balance"]),
                *[wording.sig(b.get(c.name)) for c in BALANCE_CLASSES if c.column],
                wording.sig((rep.get("numbers") or {}).get("rossby_local_median")),
                wording.sig(ap.get("measured_rms")),
            ]
            + [wording.sig(((ap.get("parts") or {}).get(p) or {}).get("speed_rms")) for p in parts]
        )
    return buf.getvalue()


def levels_csv(data: dict, context: dict) -> str:
    """The region through the levels: one row per level, with every term's magnitude
    (m s-2, area-weighted RMS), each candidate balance's imbalance ratio, the verdict and
    the share of valid points; the case, valid time, region and settings on every row."""
    terms = sorted({t for r in data["rows"] for t in (r.get("magnitudes") or {})})
    balances = sorted({b for r in data["rows"] for b in (r.get("ratios") or {})})
    settings = context.get("settings") or {}
    buf = io.StringIO()
    w = csv_writer(buf)  # outside text (a case named "=...") never a formula
    w.writerow(
        [
            "case",
            "valid time",
            "region",
            "smoothing (km)",
            "tropical mask (degrees from the equator)",
            "level (hPa)",
            *(f"{wording.term_name(t)} (m s-2)" for t in terms),
            *(f"{wording.balance_name(b)} imbalance ratio" for b in balances),
            "verdict",
            "valid share",
            "error",
        ]
    )
    ctx = [
        context.get("case") or "",
        data.get("time") or "",
        data.get("region") or "",
        _num(settings.get("smoothing_km") or 0),
        _num(settings.get("tropical_mask_deg")),
    ]
    for r in sorted(data["rows"], key=lambda r: -r["level_hpa"]):
        mags, ratios = r.get("magnitudes") or {}, r.get("ratios") or {}
        w.writerow(
            ctx
            + [f"{r['level_hpa']:g}"]
            + [_num(mags.get(t)) for t in terms]
            + [_num(ratios.get(b)) for b in balances]
            + [
                wording.balance_name(r["balance"]) if r.get("balance") else "",
                _num(r.get("valid_share")),
                r.get("error", ""),
            ]
        )
    return buf.getvalue()
