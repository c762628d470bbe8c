"""The balance-desk command line.

    balance-desk scales    a priori scale analysis (presets or your own scales)
    balance-desk analyze   the momentum budget of a box of a model file
    balance-desk cases     the bundled sample cases
    balance-desk serve     the dashboard
    balance-desk verify    the reference checks, run on this machine

Every error is one sentence on stderr: exit status 2 for bad input, 1 for
anything unexpected (a traceback only with --debug).
"""

from __future__ import annotations

import argparse
import json
import math
import sys

import numpy as np

# pyproj before anything that may load eccodes (cfgrib): the other order makes
# the process crash at exit with the current binary wheels.
import pyproj  # noqa: F401

from balance_core import PRESETS, ScaleSet, analyse_scales, classify_scales

__all__ = ["main", "UsageError"]

DEFAULT_PRESET = "synoptic_cyclone"


class UsageError(Exception):
    """Bad input from the user: printed as one sentence, exit status 2."""


class _Parser(argparse.ArgumentParser):
    """argparse with one-sentence errors and exit status 2."""

    def error(self, message):
        raise UsageError(f"{self.prog}: {message}")


def _number(name, lower=None, strict=False):
    """An argparse type: a finite number, optionally at least (or above) ``lower``."""
    def conv(text):
        try:
            val = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{name} must be a number, got {text!r}") from None
        if not math.isfinite(val):
            raise argparse.ArgumentTypeError(f"{name} must be a finite number, got {text}")
        if lower is not None and (val <= lower if strict else val < lower):
            what = "a positive number" if strict else "zero or positive"
            raise argparse.ArgumentTypeError(f"{name} must be {what}, got {text}")
        return val
    return conv


def _positive(name):
    return _number(name, 0.0, strict=True)


def _non_negative(name):
    return _number(name, 0.0)


def _box(text):
    parts = [t for t in text.replace(" ", "").split(",") if t != ""]
    if len(parts) != 4:
        raise argparse.ArgumentTypeError(f"--box needs WEST,EAST,SOUTH,NORTH, got {text!r}")
    try:
        vals = [float(t) for t in parts]
    except ValueError:
        raise argparse.ArgumentTypeError(f"--box needs four numbers, got {text!r}") from None
    if not all(math.isfinite(v) for v in vals):
        raise argparse.ArgumentTypeError(f"--box needs finite numbers, got {text!r}")
    w, e, s, n = vals
    if not -90 <= s < n <= 90:
        raise argparse.ArgumentTypeError(
            f"--box south {s:g} and north {n:g} must satisfy -90 <= south < north <= 90")
    return vals


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="balance-desk",
                     description="Is the flow balanced? The momentum budget of gridded model "
                                 "output, term by term. A diagnostic aid: official forecasts "
                                 "and warnings come from the responsible meteorological service.")
    parser.add_argument("--debug", action="store_true", help="show tracebacks")
    sub = parser.add_subparsers(dest="command", parser_class=_Parser, metavar="COMMAND")

    p = sub.add_parser("scales", help="a priori scale analysis of the momentum equations",
                       description="Term magnitudes, numbers and a verdict from the scales of a "
                                   "phenomenon. Start from a preset and change any scale.")
    p.add_argument("--preset", default=DEFAULT_PRESET, help=f"one of: {', '.join(PRESETS)} "
                   f"(default {DEFAULT_PRESET})")
    p.add_argument("--U", type=_positive("--U"), metavar="M_S", help="horizontal velocity scale")
    p.add_argument("--W", type=_non_negative("--W"), metavar="M_S", help="vertical velocity scale")
    p.add_argument("--L", type=_positive("--L"), metavar="M", help="horizontal length scale")
    p.add_argument("--H", type=_positive("--H"), metavar="M", help="depth scale")
    p.add_argument("--dp", type=_non_negative("--dp"), metavar="PA",
                   help="horizontal pressure difference")
    p.add_argument("--rho", type=_positive("--rho"), metavar="KG_M3", help="density")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--f0", type=_number("--f0"), metavar="PER_S", help="Coriolis parameter")
    g.add_argument("--lat", type=_number("--lat"), metavar="DEG", help="latitude")
    p.add_argument("--a", type=_positive("--a"), metavar="M", help="Earth radius")
    p.add_argument("--nu", type=_non_negative("--nu"), metavar="M2_S",
                   help="viscosity (molecular, or an eddy viscosity)")
    p.add_argument("--n2", type=_number("--n2"), metavar="PER_S2",
                   help="N^2, for the Froude and Burger numbers and the deformation radius")
    p.add_argument("--curved", action=argparse.BooleanOptionalAction, default=None,
                   help="the flow follows curved paths (a vortex)")
    p.add_argument("--format", choices=("table", "json"), default="table")
    p.set_defaults(func=cmd_scales)

    p = sub.add_parser("analyze", help="the momentum budget of a box at one level and time",
                       description="Every term of the horizontal momentum equations in a box, "
                                   "ranked, beside the a priori estimate from the box's own "
                                   "scales, with the numbers and a balance verdict.")
    p.add_argument("files", nargs="+", metavar="FILE",
                   help="NetCDF, GRIB or Zarr; several files are joined along valid time")
    p.add_argument("--level", required=True, type=_positive("--level"), metavar="HPA")
    p.add_argument("--time", default=None, metavar="INDEX_OR_ISO",
                   help="valid time: an index (0 is the first) or an ISO 8601 time")
    p.add_argument("--box", default=None, type=_box, metavar="WEST,EAST,SOUTH,NORTH",
                   help="degrees; west > east crosses the dateline (default: the whole domain)")
    p.add_argument("--min-lat", type=_non_negative("--min-lat"), default=10.0, metavar="DEG",
                   help="mask quantities divided by f this close to the equator (default 10)")
    p.add_argument("--smooth", type=_non_negative("--smooth"), default=None, metavar="KM",
                   help="Gaussian smoothing of the input fields (standard deviation, km)")
    p.add_argument("--member", default="0", metavar="N|mean",
                   help="ensemble member index, or 'mean' (default 0, the first)")
    p.add_argument("--format", choices=("table", "json", "csv"), default="table")
    p.set_defaults(func=cmd_analyze)

    p = sub.add_parser("cases", help="list the bundled sample cases",
                       description="The invented sample cases, with their levels, times and a "
                                   "suggested box.")
    p.add_argument("--dir", default=None, help="a directory of cases (default: sample_cases/)")
    p.add_argument("--format", choices=("table", "json"), default="table")
    p.set_defaults(func=cmd_cases)

    p = sub.add_parser("serve", help="start the dashboard in the browser",
                       description="Serve the dashboard on the given files, on every case in a "
                                   "directory, or on the bundled sample cases.")
    p.add_argument("files", nargs="*", metavar="FILE")
    p.add_argument("--cases", default=None, metavar="DIR", help="serve every case in DIR")
    p.add_argument("--host", default="127.0.0.1", help="address to bind (default 127.0.0.1)")
    p.add_argument("--port", type=int, default=5006)
    p.add_argument("--show", action="store_true", help="open a browser window")
    p.set_defaults(func=cmd_serve)

    p = sub.add_parser("verify", help="run the reference checks on this machine",
                       description="Checks the numerics against published test cases and "
                                   "reference values, and prints each with its source.")
    p.add_argument("--format", choices=("table", "json"), default="table")
    p.set_defaults(func=cmd_verify)
    return parser


# -- scales --------------------------------------------------------------------------

def scale_set_from_args(args) -> ScaleSet:
    if args.preset not in PRESETS:
        raise UsageError(f"balance-desk scales: unknown preset {args.preset!r}; choose one of "
                         f"{', '.join(PRESETS)}")
    s = PRESETS[args.preset]
    changes = {}
    for flag, key in (("U", "U"), ("W", "W"), ("L", "L"), ("H", "H"), ("dp", "dP"),
                      ("rho", "rho"), ("a", "a"), ("nu", "nu"), ("n2", "n2"),
                      ("curved", "curved")):
        val = getattr(args, flag)
        if val is not None:
            changes[key] = val
    if args.f0 is not None:
        changes["f0"] = args.f0
    if args.lat is not None:
        changes["lat0"] = args.lat
    if changes:
        changes["name"] = f"{s.name} (changed)"
    try:
        s = s.replace(**changes)
    except ValueError as exc:
        raise UsageError(f"balance-desk scales: {exc}") from None
    if s.f0 == 0:
        raise UsageError("balance-desk scales: f0 = 0 (on the equator) gives no Rossby number; give a "
                         "non-zero --f0 or a --lat off the equator")
    return s


def scales_report(s: ScaleSet) -> dict:
    """The JSON object of ``balance-desk scales``."""
    r = analyse_scales(s)
    v = classify_scales(r)
    return {
        "preset": s.name,
        "source": s.source,
        "scales": s.as_dict(),
        "terms": [{"name": n, "magnitude": m} for n, m in r.terms],
        "numbers": r.numbers,
        "verdict": v.as_dict(),
    }


_UNITS = {"U": "m s-1", "W": "m s-1", "L": "m", "H": "m", "dP": "Pa", "rho": "kg m-3",
          "f0": "s-1", "lat0": "deg", "a": "m", "nu": "m2 s-1", "n2": "s-2"}
_NUMBER_UNITS = {"deformation_radius": "m"}


def _sci(x):
    return "n/a" if x is None else f"{x:.2e}"


def format_scales_table(rep: dict) -> str:
    lines = [f"Scale analysis: {rep['preset']}", f"  numbers from: {rep['source']}", ""]
    sc = rep["scales"]
    lines.append("  scale  value       unit")
    for k, unit in _UNITS.items():
        if sc.get(k) is None:
            continue
        val = f"{sc[k]:.2f}" if k == "lat0" else _sci(sc[k])
        lines.append(f"  {k:<5}  {val:<10}  {unit}")
    pgf = next(t["magnitude"] for t in rep["terms"] if t["name"] == "pressure_gradient")
    lines += ["", "  rank  term                 magnitude (m s-2)  power of ten  / pressure gradient"]
    for i, t in enumerate(rep["terms"], 1):
        m = t["magnitude"]
        p10 = f"10^{math.floor(math.log10(m) + 1e-9):d}" if m > 0 else "0"
        ratio = f"{m / pgf:.2g}" if pgf > 0 else "n/a"
        lines.append(f"  {i:>4}  {t['name']:<19}  {_sci(m):<17}  {p10:<12}  {ratio}")
    lines += ["", "  number              value"]
    for k, v in rep["numbers"].items():
        unit = _NUMBER_UNITS.get(k, "")
        lines.append(f"  {k:<18}  {_sci(v)} {unit}".rstrip())
    lines += ["", f"  verdict: {rep['verdict']['balance']}", f"  {rep['verdict']['text']}"]
    return "\n".join(lines)


def cmd_scales(args) -> int:
    rep = scales_report(scale_set_from_args(args))
    if args.format == "json":
        print(json.dumps(rep, indent=2))
    else:
        print(format_scales_table(rep))
    return 0


# -- analyze -------------------------------------------------------------------------

def _member(text):
    if str(text).strip().lower() == "mean":
        return "mean"
    try:
        return int(text)
    except ValueError:
        raise UsageError(f"balance-desk analyze: --member must be an index or 'mean', got {text!r}")


def cmd_analyze(args) -> int:
    from balance_core.io import CaseError, analyse_case, open_case

    try:
        case = open_case(args.files, member=_member(args.member), min_lat=args.min_lat)
        rep = analyse_case(case, args.level, args.time, args.box, smooth_km=args.smooth or None)
    except CaseError as exc:
        raise UsageError(str(exc)) from None
    if args.format == "json":
        print(json.dumps(rep, indent=2, default=_json_default))
    elif args.format == "csv":
        print(format_analysis_csv(rep), end="")
    else:
        print(format_analysis_table(rep))
    return 0


def _json_default(o):
    if hasattr(o, "item"):
        return o.item()
    raise TypeError(f"not JSON serialisable: {type(o).__name__}")


def _fmt(x, spec=".2e"):
    return "n/a" if x is None else format(x, spec)


def format_analysis_table(rep: dict) -> str:
    box = rep["box"]
    where = ("whole domain" if box["west"] is None else
             f"box {box['west']:g} to {box['east']:g} E, {box['south']:g} to {box['north']:g} N")
    share = rep.get("valid_share")
    lines = [f"{rep['case']}  {rep['level_hpa']:g} hPa  {rep['valid_time']}  {where}",
             f"{rep['points']} of {rep.get('region_points', rep['points'])} points valid"
             + (f" ({100 * share:.0f} %)" if share is not None else "")
             + f", {rep['masked_points']} masked", "",
             f"verdict: {rep['verdict']['balance']}", f"  {rep['verdict']['text']}"]
    if rep["verdict"].get("why"):
        lines.append(f"  why: {rep['verdict']['why']}")
    lines.append("")
    pgf = next((t["magnitude"] for t in rep["terms"] if t["name"] == "pressure_gradient"), None)
    lines.append("  term                  measured (m s-2)  a priori   / PGF   note")
    for t in rep["terms"]:
        ratio = _fmt(t["magnitude"] / pgf, ".2f") if t["magnitude"] is not None and pgf else "n/a"
        note = t["note"] if t["magnitude"] is None or t["name"] == "residual" else ""
        lines.append(f"  {t['name']:<20}  {_fmt(t['magnitude']):<16}  {_fmt(t['estimate']):<9}  "
                     f"{ratio:<6}  {note or ''}".rstrip())
    lines.append("  derived views (not part of the sum)")
    for t in rep["derived"]:
        lines.append(f"  {t['name']:<20}  {_fmt(t['magnitude']):<16}  {_fmt(t['estimate']):<9}")
    lines += ["", "  balance         imbalance ratio (RMS of the sum / RMS of the PGF)"]
    for k, v in rep["balances"].items():
        mark = "  <- verdict" if k == rep["verdict"]["balance"] else ""
        lines.append(f"  {k:<14}  {_fmt(v, '.3f')}{mark}")
    lines += ["", "  winds"]
    for k, v in rep["winds"].items():
        lines.append(f"  {k:<30}  {_fmt(v, '.3g')}")
    lines += ["", "  numbers"]
    for k, v in rep["numbers"].items():
        lines.append(f"  {k:<30}  {_fmt(v, '.3g')}")
    for k, text in rep.get("explain", {}).items():
        lines.append(f"    {k}: {text}")
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
                    if src.get("units_from") and src["units_from"] != src["units_to"] else "")
            lines.append(f"  {role:<17} {src['variable']!r} ({src['level_type']}{grib}{conv})")
    for role, why in rep.get("left_out", {}).items():
        lines.append(f"  left out: {why}")
    for n in rep.get("notes", []):
        lines.append(f"  note: {n}")
    return "\n".join(lines)


def format_analysis_csv(rep: dict) -> str:
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(["case", "level_hpa", "valid_time", "kind", "name", "magnitude_m_s-2", "x_rms",
                "y_rms", "estimate", "note"])
    for kind in ("terms", "derived"):
        for t in rep[kind]:
            w.writerow([rep["case"], rep["level_hpa"], rep["valid_time"], kind[:-1] if kind ==
                        "terms" else "derived", t["name"], t["magnitude"], t["x_rms"], t["y_rms"],
                        t["estimate"], t["note"] or ""])
    for k, v in rep["balances"].items():
        w.writerow([rep["case"], rep["level_hpa"], rep["valid_time"], "balance", k, v, "", "",
                    "", "chosen" if k == rep["verdict"]["balance"] else ""])
    return buf.getvalue()


# -- cases ---------------------------------------------------------------------------

def sample_dir():
    """The bundled sample cases (sample_cases/ next to the app package)."""
    import os

    return os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))),
                        "sample_cases")


def list_cases(directory=None) -> list:
    import glob
    import os

    from balance_core.io import CaseError, iso, open_case

    d = directory or sample_dir()
    if not os.path.isdir(d):
        raise UsageError(f"balance-desk cases: no directory {d}")
    out = []
    for path in sorted(glob.glob(os.path.join(d, "*.nc"))):
        try:
            c = open_case(path)
        except CaseError as exc:
            out.append({"file": os.path.basename(path), "error": str(exc)})
            continue
        box = c.attrs.get("suggested_box")
        step = (c.times[1] - c.times[0]) / np.timedelta64(1, "h") if c.times.size > 1 else None
        out.append({
            "name": c.name, "file": os.path.basename(path), "title": c.title,
            "levels_hpa": [float(p / 100) for p in c.levels_pa],
            "valid_times": [iso(t) for t in c.times], "step_hours": step,
            "suggested_box": json.loads(box) if box else None,
            "expected": json.loads(c.attrs["expected_verdicts"]) if "expected_verdicts" in c.attrs
            else [],
        })
    return out


def cmd_cases(args) -> int:
    cases = list_cases(args.dir)
    if args.format == "json":
        print(json.dumps(cases, indent=2))
        return 0
    for c in cases:
        if "error" in c:
            print(f"{c['file']}: {c['error']}")
            continue
        print(f"{c['name']}  ({c['file']})")
        print(f"  {c['title']}")
        print(f"  levels: {', '.join(f'{p:g}' for p in c['levels_hpa'])} hPa")
        print(f"  valid times: {len(c['valid_times'])}, {c['valid_times'][0]} to "
              f"{c['valid_times'][-1]} every {c['step_hours']:g} h")
        if c["suggested_box"]:
            b = c["suggested_box"]
            print(f"  suggested box: --box {b[0]:g},{b[1]:g},{b[2]:g},{b[3]:g}")
        for e in c["expected"]:
            print(f"  expected at {e['level_hpa']} hPa, time {e['time_index']}, box "
                  f"{','.join(f'{x:g}' for x in e['box'])}: {e['balance']}")
        print()
    return 0


# -- serve ---------------------------------------------------------------------------

def cmd_serve(args) -> int:
    from .serve import case_paths, serve

    if args.files and args.cases:
        raise UsageError("balance-desk serve: give files or --cases DIR, not both")
    if args.cases and not __import__("os").path.isdir(args.cases):
        raise UsageError(f"balance-desk serve: no directory {args.cases}")
    if not case_paths(args.files, args.cases):
        raise UsageError("balance-desk serve: no case files found")
    serve(args.files, args.cases, host=args.host, port=args.port, show=args.show)
    return 0


# -- verify --------------------------------------------------------------------------

def cmd_verify(args) -> int:
    from .verify import run_all

    results = run_all()
    if args.format == "json":
        print(json.dumps([r.as_dict() for r in results], indent=2))
    else:
        for r in results:
            mark = "PASS" if r.passed else ("SKIP" if r.skipped else "FAIL")
            print(f"[{mark}] {r.name}")
            print(f"       source: {r.source}")
            print(f"       result: {r.detail}")
        n_fail = sum(not r.passed and not r.skipped for r in results)
        print(f"\n{len(results)} checks, {n_fail} failed.")
    return 0 if all(r.passed or r.skipped for r in results) else 1


# -- entry point ---------------------------------------------------------------------

def _join_negative_values(argv):
    """Let ``--box -52,-28,38,56`` work: argparse would read the value as an option."""
    out, i = [], 0
    while i < len(argv):
        a = argv[i]
        if a == "--box" and i + 1 < len(argv) and argv[i + 1].startswith("-") and \
                "," in argv[i + 1]:
            out.append(f"--box={argv[i + 1]}")
            i += 2
            continue
        out.append(a)
        i += 1
    return out


def main(argv=None) -> int:
    parser = build_parser()
    argv = _join_negative_values(list(sys.argv[1:] if argv is None else argv))
    debug = "--debug" in argv
    try:
        args = parser.parse_args(argv)
        if not getattr(args, "func", None):
            parser.print_help()
            return 2
        return args.func(args)
    except UsageError as exc:
        if debug:
            raise
        print(str(exc), file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130
    except Exception as exc:  # noqa: BLE001 - the last line of defence
        if debug:
            raise
        print(f"balance-desk: unexpected error ({type(exc).__name__}: {exc}); "
              "run again with --debug for the details", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
