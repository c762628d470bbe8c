"""The report of a region as a table and as files: shared by the command line and the page.

* :func:`table` -- the text ``balance-desk analyze`` prints;
* :func:`export_json` and :func:`export_csv` -- the briefing exports: the same object
  as ``analyze --format json``, with the view's context (case, level, valid and
  reference time, lead time, region, units), winds in the chosen unit, and every
  value rounded to four significant digits; the CSV says each term in plain words.
"""

from __future__ import annotations

import csv
import io
import json
import math

from . import vocab

__all__ = ["table", "export_json", "export_csv", "context_of", "clean"]


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
        return vocab.sig(obj, digits)
    return obj


def context_of(rep: dict, *, region_text: str | None = None, wind_units: str = "m/s",
               height_units: str = "m", case_title: str | None = None,
               invented: bool = False) -> dict:
    """What view a report belongs to, for the exports (and their headings)."""
    return {
        "case": rep.get("case"), "case_title": case_title, "invented_demo_data": bool(invented),
        "level_hpa": rep.get("level_hpa"), "valid_time": rep.get("valid_time"),
        "reference_time": rep.get("reference_time"), "lead_time_h": rep.get("lead_time_h"),
        "valid_time_text": vocab.when(rep.get("valid_time"), rep.get("reference_time")),
        "region": region_text or _box_text(rep.get("box")),
        "units": {"terms": "m s-2", "wind": wind_units, "height": height_units},
    }


def _box_text(box):
    if not box or box.get("west") is None:
        return "whole case"
    return (f"box {vocab.lon(box['west'])} to {vocab.lon(box['east'])}, "
            f"{vocab.lat(box['south'])} to {vocab.lat(box['north'])}")


def _winds_in(rep, wind_units):
    _, k = vocab.WIND_UNITS[wind_units]
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
    w = csv.writer(buf)
    level = context["level_hpa"]
    ctx = [context["case"], "" if level is None else f"{level:g}", context["valid_time"],
           context["reference_time"] or "", _num(context["lead_time_h"]), context["region"]]
    w.writerow(["case", "level (hPa)", "valid time", "reference time", "lead time (h)", "region",
                "kind", "name", "value", "unit", "x part", "y part", "a priori estimate", "note"])
    for kind, rows in (("term", rep.get("terms", [])), ("derived view", rep.get("derived", []))):
        for t in rows:
            w.writerow(ctx + [kind, vocab.term_name(t["name"]), _num(t["magnitude"]), "m s-2",
                              _num(t["x_rms"]), _num(t["y_rms"]), _num(t["estimate"]),
                              t["note"] or ""])
    chosen = (rep.get("verdict") or {}).get("balance")
    for k, v in (rep.get("balances") or {}).items():
        w.writerow(ctx + ["balance (imbalance ratio)", vocab.balance_name(k), _num(v), "", "",
                          "", "", "the verdict" if k == chosen else ""])
    for k, v in (rep.get("numbers") or {}).items():
        name, unit, _ = vocab.NUMBERS.get(k, (k, "", ""))
        w.writerow(ctx + ["number", name, _num(v), unit, "", "", "", ""])
    unit = context["units"]["wind"]
    for k, v in _winds_in(rep, unit).items():
        is_speed = k.endswith("_rms")
        w.writerow(ctx + ["wind", k.replace("_", " ").replace(" rms", " (RMS)"), _num(v),
                          unit if is_speed else "", "", "", "", ""])
    v = rep.get("verdict") or {}
    w.writerow(ctx + ["verdict", vocab.balance_name(v.get("balance", "")), "", "", "", "", "",
                      v.get("text", "")])
    return buf.getvalue()


def _num(x):
    y = vocab.sig(x)
    return "" if y is None else f"{y:.4g}"


# -- the command line's table ----------------------------------------------------------------

def _fmt(x, spec=".2e"):
    return "n/a" if x is None else format(x, spec)


def table(rep: dict) -> str:
    """The text of ``balance-desk analyze`` (format table)."""
    where = _box_text(rep["box"])
    share = rep.get("valid_share")
    lines = [f"{rep['case']}  {rep['level_hpa']:g} hPa  "
             f"{vocab.when(rep['valid_time'], rep.get('reference_time'))}  {where}",
             f"{rep['points']} of {rep.get('region_points', rep['points'])} points valid"
             + (f" ({100 * share:.0f} %)" if share is not None else "")
             + f", {rep['masked_points']} masked", "",
             f"verdict: {vocab.balance_name(rep['verdict']['balance'])}",
             f"  {rep['verdict']['text']}"]
    if rep["verdict"].get("why"):
        lines.append(f"  why: {rep['verdict']['why']}")
    lines.append("")
    pgf = next((t["magnitude"] for t in rep["terms"] if t["name"] == "pressure_gradient"), None)
    lines.append("  term                       measured (m s-2)  a priori   / PGF   note")
    for t in rep["terms"]:
        ratio = _fmt(t["magnitude"] / pgf, ".2f") if t["magnitude"] is not None and pgf else "n/a"
        note = t["note"] if t["magnitude"] is None or t["name"] == "residual" else ""
        lines.append(f"  {vocab.term_name(t['name']):<25}  {_fmt(t['magnitude']):<16}  "
                     f"{_fmt(t['estimate']):<9}  {ratio:<6}  {note or ''}".rstrip())
    lines.append("  derived views (not part of the sum)")
    for t in rep["derived"]:
        lines.append(f"  {vocab.term_name(t['name']):<25}  {_fmt(t['magnitude']):<16}  "
                     f"{_fmt(t['estimate']):<9}")
    lines += ["", "  balance         imbalance ratio (RMS of the sum / RMS of the PGF)"]
    for k, v in rep["balances"].items():
        mark = "  <- verdict" if k == rep["verdict"]["balance"] else ""
        lines.append(f"  {vocab.balance_name(k):<14}  {_fmt(v, '.3f')}{mark}")
    lines += ["", "  winds (m/s)"]
    for k, v in rep["winds"].items():
        lines.append(f"  {k.replace('_', ' '):<30}  {_fmt(v, '.3g')}")
    lines += ["", "  numbers"]
    for k, v in rep["numbers"].items():
        name, unit, _ = vocab.NUMBERS.get(k, (k, "", ""))
        lines.append(f"  {name:<30}  {_fmt(v, '.3g')} {unit}".rstrip())
    for k, text in rep.get("explain", {}).items():
        lines.append(f"    {vocab.NUMBERS.get(k, (k,))[0]}: {text}")
    if rep.get("scales"):
        lines += ["", "  scales from the box: " + ", ".join(
            f"{k} {_fmt(v, '.2e')}" for k, v in rep["scales"].items())]
        for k, text in rep.get("scales_recipe", {}).items():
            lines.append(f"    {k}: {text}")
    res = rep.get("resolution")
    if res:
        lines.append(f"  resolution: grid spacing {res['grid_spacing_km']:.0f} km, flow length "
                     f"scale {res['flow_length_km']:.0f} km ({res['points_per_length']:.1f} "
                     f"spacings): {'resolved' if res['resolved'] else 'UNDER-RESOLVED'}")
    for c in rep.get("residual_causes", []):
        lines.append(f"  residual: {c}")
    if rep.get("sources"):
        lines += ["", "  sources"]
        for role, src in rep["sources"].items():
            grib = (f", GRIB {src['grib_short_name']} (paramId {src['grib_param_id']}, "
                    f"{src['grib_type_of_level']})") if src.get("grib_short_name") else ""
            conv = (f", {src['units_from']} -> {src['units_to']}"
                    if src.get("units_from") and _differ(src["units_from"], src["units_to"])
                    else "")
            lines.append(f"  {role:<17} {src['variable']!r} ({src['level_type']}{grib}{conv})")
    for why in rep.get("left_out", {}).values():
        lines.append(f"  left out: {why}")
    for n in rep.get("notes", []):
        lines.append(f"  note: {n}")
    return "\n".join(lines)


def _differ(a, b) -> bool:
    from balance_core.io.units import _canonical

    return _canonical(str(a)) != _canonical(str(b))
