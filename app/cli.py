"""The balance-desk command line.

    balance-desk scales    a priori scale analysis (presets or your own scales)
    balance-desk analyze   the momentum budget of a box of a model file
    balance-desk cases     the bundled sample cases
    balance-desk serve     the dashboard
    balance-desk rooms     review rooms: create, list, export their notes
    balance-desk systems   the weather systems of a level, each with its balance
    balance-desk batch     the same over whole archives, on dask.distributed
    balance-desk verify    the reference checks, run on this machine

Every error is one sentence on stderr: exit status 2 for bad input, 1 for
anything unexpected (a traceback only with --debug).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys

# pyproj before anything that may load eccodes: the other order makes
# the process crash at exit with the current binary wheels.
import pyproj  # noqa: F401

from balance_core import PRESETS, ScaleSet, analyze_scales, classify_scales

from .inputs import InputError, parse_box, parse_level, parse_levels, parse_member
from .outside import one_line

__all__ = ["main", "UsageError"]

DEFAULT_PRESET = "synoptic_cyclone"
#: the address a room's link is printed with when none is given (serve's own default)
DEFAULT_BASE_URL = "http://127.0.0.1:5006"


class UsageError(Exception):
    """Bad input from the user: printed as one sentence, exit status 2."""


class _Parser(argparse.ArgumentParser):
    """argparse with one-sentence errors and exit status 2, and no abbreviated options
    (``--passphrase`` must not be read as ``--passphrase-file``)."""

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("allow_abbrev", False)
        super().__init__(*args, **kwargs)

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


def _bounded(name, lo, hi):
    """An argparse type: a number from ``lo`` to ``hi``."""
    base = _number(name)

    def conv(text):
        val = base(text)
        if not lo <= val <= hi:
            raise argparse.ArgumentTypeError(f"{name} must lie from {lo:g} to {hi:g}, got {text}")
        return val

    return conv


def _positive(name):
    return _number(name, 0.0, strict=True)


def _port(text):
    try:
        val = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"--port must be a whole number, got {text!r}") from None
    if not 0 <= val <= 65535:
        raise argparse.ArgumentTypeError(
            f"--port must lie from 1 to 65535 (or 0: a free port), got {text}"
        )
    return val


def _size(name):
    def conv(text):
        from balance_core.io.limits import parse_size

        try:
            return parse_size(text)
        except ValueError:
            raise argparse.ArgumentTypeError(
                f"{name} must be a size such as 512M or 4G, got {text!r}"
            ) from None

    return conv


def _typed(option, parse, **kw):
    """An argparse type from one of :mod:`app.inputs`' parsers: its sentence, after the
    option it was typed in."""

    def conv(text):
        try:
            return parse(text, **kw)
        except InputError as exc:
            raise argparse.ArgumentTypeError(f"{option}: {exc}") from None

    return conv


_levels = _typed("--levels", parse_levels)
_level = _typed("--level", parse_level)
_box = _typed("--box", parse_box)


def _non_negative(name):
    return _number(name, 0.0)


def _reading_options(p, members="N|mean", budget=True):
    """The options of every command that reads cases: the tropical mask, the member and
    (but for batch, whose workers have --memory-limit) the memory budget of a level."""
    p.add_argument(
        "--min-lat",
        type=_bounded("--min-lat", 0.0, 60.0),
        default=10.0,
        metavar="DEG",
        help="mask quantities divided by f this close to the equator (0 to 60, default 10)",
    )
    p.add_argument(
        "--member",
        default="0",
        metavar=members,
        help="ensemble member index, or 'mean'"
        + (", or 'all' (one row each)" if "all" in members else "")
        + " (default 0, the first)",
    )
    if budget:
        p.add_argument(
            "--memory-budget",
            type=_size("--memory-budget"),
            default=None,
            metavar="SIZE",
            help="memory one level may use, e.g. 4G (default: a "
            "quarter of the machine's memory, or "
            "BALANCE_DESK_MEMORY_BUDGET)",
        )


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="balance-desk",
        description="Is the flow balanced? The momentum budget of gridded model "
        "output, term by term. A diagnostic aid: official forecasts "
        "and warnings come from the responsible meteorological service.",
    )
    parser.add_argument("--debug", action="store_true", help="show tracebacks")
    sub = parser.add_subparsers(dest="command", parser_class=_Parser, metavar="COMMAND")
    _add_scales(sub)
    _add_analyze(sub)
    _add_systems(sub)
    _add_batch(sub)
    _add_cases(sub)
    _add_serve(sub)
    _add_rooms(sub)
    _add_verify(sub)
    return parser


def _add_scales(sub) -> None:
    """The scales command's options."""
    p = sub.add_parser(
        "scales",
        help="a priori scale analysis of the momentum equations",
        description="Term magnitudes, numbers and a verdict from the scales of a "
        "phenomenon. Start from a preset and change any scale.",
    )
    p.add_argument(
        "--preset",
        default=DEFAULT_PRESET,
        help=f"one of: {', '.join(PRESETS)} (default {DEFAULT_PRESET})",
    )
    p.add_argument("--U", type=_positive("--U"), metavar="M_S", help="horizontal velocity scale")
    p.add_argument("--W", type=_non_negative("--W"), metavar="M_S", help="vertical velocity scale")
    p.add_argument("--L", type=_positive("--L"), metavar="M", help="horizontal length scale")
    p.add_argument("--H", type=_positive("--H"), metavar="M", help="depth scale")
    p.add_argument(
        "--dp", type=_non_negative("--dp"), metavar="PA", help="horizontal pressure difference"
    )
    p.add_argument("--rho", type=_positive("--rho"), metavar="KG_M3", help="density")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--f0", type=_number("--f0"), metavar="PER_S", help="Coriolis parameter")
    g.add_argument("--lat", type=_number("--lat"), metavar="DEG", help="latitude")
    p.add_argument("--a", type=_positive("--a"), metavar="M", help="Earth radius")
    p.add_argument(
        "--nu",
        type=_non_negative("--nu"),
        metavar="M2_S",
        help="viscosity (molecular, or an eddy viscosity)",
    )
    p.add_argument(
        "--n2",
        type=_number("--n2"),
        metavar="PER_S2",
        help="N^2, for the Froude and Burger numbers and the deformation radius",
    )
    p.add_argument(
        "--curved",
        action=argparse.BooleanOptionalAction,
        default=None,
        help="the flow follows curved paths (a vortex)",
    )
    p.add_argument("--format", choices=("table", "json"), default="table")
    p.set_defaults(func=cmd_scales)


def _add_analyze(sub) -> None:
    """The analyze command's options."""
    p = sub.add_parser(
        "analyze",
        help="the momentum budget of a box at one level and time",
        description="Every term of the horizontal momentum equations in a box, "
        "ranked, beside the a priori estimate from the box's own "
        "scales, with the numbers and a balance verdict.",
    )
    p.add_argument(
        "files",
        nargs="+",
        metavar="FILE",
        help="NetCDF, GRIB or Zarr; several files are joined along valid time",
    )
    p.add_argument(
        "--level",
        required=True,
        type=_level,
        metavar="HPA",
        help="pressure level in hPa, or msl: the sea-level pressure with the 10 m wind",
    )
    p.add_argument(
        "--time",
        default=None,
        metavar="INDEX_OR_ISO",
        help="valid time: an index (0 is the first) or an ISO 8601 time",
    )
    p.add_argument(
        "--box",
        default=None,
        type=_box,
        metavar="WEST,EAST,SOUTH,NORTH",
        help="degrees; west > east crosses the dateline (default: the whole domain)",
    )
    p.add_argument(
        "--smooth",
        type=_non_negative("--smooth"),
        default=None,
        metavar="KM",
        help="Gaussian smoothing of the input fields (standard deviation, km)",
    )
    _reading_options(p)
    p.add_argument("--format", choices=("table", "json", "csv"), default="table")
    p.set_defaults(func=cmd_analyze)


def _add_systems(sub) -> None:
    """The systems command's options."""
    p = sub.add_parser(
        "systems",
        help="the lows, highs and jet streaks of a level, each with its balance",
        description="Finds closed lows and highs of the height and jet streaks "
        "of the wind on one level, and gives each the report of its "
        "region: ranked terms, balances, numbers, verdict, and the "
        "parts of its ageostrophic wind.",
    )
    p.add_argument("files", nargs="+", metavar="FILE")
    p.add_argument(
        "--level",
        type=_level,
        default=500.0,
        metavar="HPA",
        help="pressure level in hPa (default 500), or msl: the lows and highs of "
        "the sea-level pressure",
    )
    p.add_argument("--time", default=None, metavar="INDEX_OR_ISO")
    p.add_argument(
        "--track", action="store_true", help="every valid time, the systems matched into tracks"
    )
    p.add_argument(
        "--limit",
        type=_bounded("--limit", 1, 200),
        default=30,
        help="at most this many systems (default 30)",
    )
    _reading_options(p)
    p.add_argument("--format", choices=("table", "json", "csv"), default="table")
    p.set_defaults(func=cmd_systems)


def _add_batch(sub) -> None:
    """The batch command's options."""
    p = sub.add_parser(
        "batch",
        help="the report of boxes or systems over whole archives, on dask.distributed",
        description="One row per (file, member, valid time, level, region), "
        "with everything analyze reports; on a local cluster sized "
        "to this machine, or on an existing one (--scheduler).",
    )
    p.add_argument("files", nargs="+", metavar="FILE_OR_GLOB")
    p.add_argument("--levels", required=True, type=_levels, metavar="HPA,HPA,...")
    regions = p.add_mutually_exclusive_group(required=True)
    regions.add_argument(
        "--box",
        action="append",
        type=_box,
        metavar="W,E,S,N",
        help="a box (may be given several times)",
    )
    regions.add_argument(
        "--boxes",
        metavar="FILE.yaml",
        help="named boxes: 'name: [west, east, south, north]' per line",
    )
    regions.add_argument(
        "--systems",
        action="store_true",
        help="the systems found in each field, each with its region",
    )
    p.add_argument("--out", required=True, metavar="RESULT.parquet|RESULT.csv")
    p.add_argument(
        "--workers",
        type=_bounded("--workers", 1, 512),
        default=None,
        help="workers of the local cluster (default: one per core)",
    )
    p.add_argument(
        "--scheduler",
        default=None,
        metavar="tcp://HOST:PORT",
        help="an existing dask scheduler instead of a local cluster",
    )
    p.add_argument(
        "--memory-limit",
        default=None,
        metavar="SIZE",
        help="memory per worker of the local cluster, e.g. 2GB",
    )
    _reading_options(p, members="all|N|mean", budget=False)
    p.set_defaults(func=cmd_batch)


def _add_cases(sub) -> None:
    """The cases command's options."""
    p = sub.add_parser(
        "cases",
        help="list the bundled sample cases",
        description="The invented sample cases, with their levels, times and a suggested box.",
    )
    p.add_argument("--dir", default=None, help="a directory of cases (default: sample_cases/)")
    p.add_argument("--format", choices=("table", "json"), default="table")
    p.set_defaults(func=cmd_cases)


def _add_serve(sub) -> None:
    """The serve command's options."""
    p = sub.add_parser(
        "serve",
        help="start the dashboard in the browser",
        description="Serve the dashboard on the given files, on every case in a "
        "directory, or on the bundled sample cases.",
    )
    p.add_argument("files", nargs="*", metavar="FILE")
    p.add_argument("--cases", default=None, metavar="DIR", help="serve every case in DIR")
    p.add_argument("--host", default="127.0.0.1", help="address to bind (default 127.0.0.1)")
    p.add_argument(
        "--port",
        type=_port,
        default=5006,
        help="1 to 65535, or 0 for a free port the system picks (it is printed; default 5006)",
    )
    p.add_argument("--show", action="store_true", help="open a browser window")
    p.add_argument(
        "--memory-budget",
        type=_size("--memory-budget"),
        default=None,
        metavar="SIZE",
        help="memory one level may use, e.g. 4G",
    )
    p.add_argument(
        "--store",
        default=None,
        metavar="PATH",
        help="the review rooms' SQLite file (default: BALANCE_DESK_STORE, else "
        "rooms.sqlite in your data folder)",
    )
    p.add_argument(
        "--passphrase-file",
        default=None,
        metavar="FILE",
        help="the access passphrase (first line), needed on any address other "
        "than this machine's own; or set BALANCE_DESK_PASSPHRASE",
    )
    p.add_argument(
        "--open-without-passphrase",
        action="store_true",
        help="serve another address without a passphrase (warns at every start)",
    )
    p.add_argument(
        "--origin",
        action="append",
        default=[],
        metavar="HOST[:PORT]",
        help="another address people type to reach the server (for websockets)",
    )
    p.add_argument(
        "--archive",
        action="append",
        default=[],
        metavar="RESULT.parquet",
        help="a result of balance-desk batch, shown through the archive at /archive",
    )
    p.set_defaults(func=cmd_serve)


def _add_rooms(sub) -> None:
    """The rooms command's options."""
    p = sub.add_parser(
        "rooms",
        help="review rooms: create one, list them, export notes",
        description="Review rooms live in the store that `serve` uses "
        "(--store PATH, or BALANCE_DESK_STORE).",
    )
    rsub = p.add_subparsers(dest="rooms_command", parser_class=_Parser, metavar="ACTION")
    r = rsub.add_parser("create", help="open a room and print its link")
    r.add_argument("title")
    r.add_argument(
        "--case",
        default=None,
        help="the case under review, one the server has (default: its first case)",
    )
    r.add_argument(
        "--cases",
        default=None,
        metavar="DIR",
        help="the folder of cases the server is started with (default: the sample cases)",
    )
    r.add_argument(
        "--days",
        type=_bounded("--days", 0.01, 3650),
        default=30.0,
        help="how long its link works (default 30 days; notes are kept after)",
    )
    r.add_argument(
        "--base-url",
        default=DEFAULT_BASE_URL,
        help=f"the server's address, for the printed link (default {DEFAULT_BASE_URL})",
    )
    r.add_argument("--store", default=None, metavar="PATH")
    r.set_defaults(func=cmd_rooms_create)
    r = rsub.add_parser("list", help="the rooms, with their links")
    r.add_argument(
        "--base-url",
        default=None,
        help="the server's address for every link (default: the one each room was made with)",
    )
    r.add_argument("--store", default=None, metavar="PATH")
    r.set_defaults(func=cmd_rooms_list)
    r = rsub.add_parser("export", help="a room's notes with their views")
    r.add_argument("room", help="the room's link or its key")
    r.add_argument("--format", choices=("md", "json"), default="md")
    r.add_argument("--store", default=None, metavar="PATH")
    r.set_defaults(func=cmd_rooms_export)


def _add_verify(sub) -> None:
    """The verify command's options."""
    p = sub.add_parser(
        "verify",
        help="run the reference checks on this machine",
        description="Checks the numerics against published test cases and "
        "reference values, and prints each with its source.",
    )
    p.add_argument("--format", choices=("table", "json"), default="table")
    p.set_defaults(func=cmd_verify)


# -- scales --------------------------------------------------------------------------


def scale_set_from_args(args) -> ScaleSet:
    if args.preset not in PRESETS:
        raise UsageError(
            f"balance-desk scales: unknown preset {args.preset!r}; choose one of "
            f"{', '.join(PRESETS)}"
        )
    s = PRESETS[args.preset]
    changes = {}
    for flag, key in (
        ("U", "U"),
        ("W", "W"),
        ("L", "L"),
        ("H", "H"),
        ("dp", "dP"),
        ("rho", "rho"),
        ("a", "a"),
        ("nu", "nu"),
        ("n2", "n2"),
        ("curved", "curved"),
    ):
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
        raise UsageError(
            "balance-desk scales: f0 = 0 (on the equator) gives no Rossby number; give a "
            "non-zero --f0 or a --lat off the equator"
        )
    return s


def scales_report(s: ScaleSet) -> dict:
    """The JSON object of ``balance-desk scales``."""
    r = analyze_scales(s)
    v = classify_scales(r)
    return {
        "preset": s.name,
        "source": s.source,
        "scales": s.as_dict(),
        "terms": [{"name": n, "magnitude": m} for n, m in r.terms],
        "numbers": r.numbers,
        "verdict": v.as_dict(),
    }


_UNITS = {
    "U": "m s-1",
    "W": "m s-1",
    "L": "m",
    "H": "m",
    "dP": "Pa",
    "rho": "kg m-3",
    "f0": "s-1",
    "lat0": "deg",
    "a": "m",
    "nu": "m2 s-1",
    "n2": "s-2",
}


def _sci(x):
    return "n/a" if x is None else f"{x:.2e}"


def format_scales_table(rep: dict) -> str:
    # the names people read: a term, number, preset or balance by its display name (the
    # JSON keeps the code names, as keys for programs)
    from .wording import NUMBERS, balance_name, preset_name, term_name

    lines = [
        f"Scale analysis: {preset_name(rep['preset'])}",
        f"  numbers from: {rep['source']}",
        "",
    ]
    sc = rep["scales"]
    lines.append("  scale  value       unit")
    for k, unit in _UNITS.items():
        if sc.get(k) is None:
            continue
        val = f"{sc[k]:.2f}" if k == "lat0" else _sci(sc[k])
        lines.append(f"  {k:<5}  {val:<10}  {unit}")
    pgf = next(t["magnitude"] for t in rep["terms"] if t["name"] == "pressure_gradient")
    wide = max(len(term_name(t["name"])) for t in rep["terms"])
    lines += [
        "",
        f"  rank  {'term':<{wide}}  magnitude (m s-2)  power of ten  / pressure gradient",
    ]
    for i, t in enumerate(rep["terms"], 1):
        m = t["magnitude"]
        p10 = f"10^{math.floor(math.log10(m) + 1e-9):d}" if m > 0 else "0"
        ratio = f"{m / pgf:.2g}" if pgf > 0 else "n/a"
        lines.append(f"  {i:>4}  {term_name(t['name']):<{wide}}  {_sci(m):<17}  {p10:<12}  {ratio}")
    lines += ["", "  number              value"]
    for k, v in rep["numbers"].items():
        name, unit = NUMBERS[k][:2] if k in NUMBERS else (k.replace("_", " "), "")
        lines.append(f"  {name:<18}  {_sci(v)} {unit}".rstrip())
    lines += [
        "",
        f"  verdict: {balance_name(rep['verdict']['balance'])}",
        f"  {rep['verdict']['text']}",
    ]
    return "\n".join(lines)


def cmd_scales(args) -> int:
    rep = scales_report(scale_set_from_args(args))
    if args.format == "json":
        print(json.dumps(rep, indent=2))
    else:
        print(format_scales_table(rep))
    return 0


# -- analyze -------------------------------------------------------------------------


def _member(text, allow_all=False):
    try:
        return parse_member(text, allow_all=allow_all)
    except InputError as exc:
        raise UsageError(f"balance-desk: --member: {exc}") from None


def cmd_analyze(args) -> int:
    from balance_core.io import CaseError, analyze_case, open_case

    from . import report_files

    try:
        case = open_case(
            args.files,
            member=_member(args.member),
            min_lat=args.min_lat,
            memory_budget=args.memory_budget,
        )
        rep = analyze_case(case, args.level, args.time, args.box, smooth_km=args.smooth or None)
    except CaseError as exc:
        raise UsageError(str(exc)) from None
    if args.format == "json":
        print(json.dumps(report_files.clean(rep), indent=2))
    elif args.format == "csv":
        print(report_files.export_csv(rep, report_files.context_of(rep)), end="")
    else:
        print(report_files.table(rep))
    return 0


# -- systems -------------------------------------------------------------------------


def cmd_systems(args) -> int:
    from balance_core.io import CaseError, analyze_systems, open_case, track_systems

    from . import report_files

    try:
        case = open_case(
            args.files,
            member=_member(args.member),
            min_lat=args.min_lat,
            memory_budget=args.memory_budget,
        )
        if args.track:
            out = track_systems(case, args.level, limit=int(args.limit))
        else:
            out = analyze_systems(case, args.level, args.time, limit=int(args.limit))
    except CaseError as exc:
        raise UsageError(str(exc)) from None
    if args.format == "json":
        print(json.dumps(report_files.clean(out), indent=2))
    elif args.format == "csv":
        print(report_files.systems_csv(out), end="")
    else:
        print(report_files.systems_table(out))
    return 0


# -- batch ---------------------------------------------------------------------------


def cmd_batch(args) -> int:
    import logging

    from .batch import BatchError, read_boxes, run_batch

    member = str(_member(args.member, allow_all=True))
    try:
        if args.boxes:
            boxes = read_boxes(args.boxes)
        elif args.box:
            boxes = [(f"box {','.join(f'{v:g}' for v in b)}", tuple(b)) for b in args.box]
        else:
            boxes = []
        for name in (
            "distributed",
            "distributed.worker",
            "distributed.scheduler",
            "distributed.nanny",
            "distributed.core",
            "distributed.http.proxy",
        ):
            logging.getLogger(name).setLevel(logging.ERROR)
        run_batch(
            args.files,
            args.levels,
            args.out,
            boxes=boxes,
            systems=args.systems,
            workers=None if args.workers is None else int(args.workers),
            scheduler=args.scheduler,
            memory_limit=args.memory_limit,
            member=member,
            min_lat=args.min_lat,
            say=lambda text: print(text, flush=True),
        )
    except BatchError as exc:
        raise UsageError(str(exc)) from None
    except KeyboardInterrupt:
        return 130
    return 0


# -- cases ---------------------------------------------------------------------------


def cmd_cases(args) -> int:
    import os

    from .cases import list_cases

    if args.dir is not None and not os.path.isdir(args.dir):
        raise UsageError(f"balance-desk cases: no directory {args.dir}")
    cases = list_cases(args.dir)
    if args.format == "json":
        print(json.dumps(cases, indent=2))
        return 0
    for c in cases:
        if "error" in c:
            print(f"{one_line(c['file'])}: could not be read: {one_line(c['error'])}")
            print()
            continue
        print(
            f"{one_line(c['name'])}  ({one_line(c['file'])})"
            + ("  [invented demo data]" if c.get("invented") else "")
        )
        print(f"  {one_line(c['title'])}")
        print(
            f"  levels: {', '.join(f'{p:g}' for p in c['levels_hpa'])} hPa"
            + (", and sea level" if c.get("sea_level") else "")
        )
        step = f" every {c['step_hours']:g} h" if c["step_hours"] else ""
        print(
            f"  valid times: {len(c['valid_times'])}, {c['valid_times'][0]} to "
            f"{c['valid_times'][-1]}{step}"
        )
        if c["suggested_box"]:
            b = c["suggested_box"]
            print(f"  suggested box: --box {b[0]:g},{b[1]:g},{b[2]:g},{b[3]:g}")
        for e in c["expected"]:
            try:
                where = "sea level" if e["level_hpa"] == "msl" else f"{e['level_hpa']} hPa"
                print(
                    f"  expected at {where}, time {e['time_index']}, box "
                    f"{','.join(f'{x:g}' for x in e['box'])}: {e['balance']}"
                )
            except (KeyError, TypeError, ValueError):
                continue
        print()
    return 0


# -- serve ---------------------------------------------------------------------------


def cmd_serve(args) -> int:
    import os

    from .serve import ServeError, serve

    if args.files and args.cases:
        raise UsageError("balance-desk serve: give files or --cases DIR, not both")
    if args.cases and not os.path.isdir(args.cases):
        raise UsageError(f"balance-desk serve: no directory {args.cases}")
    try:
        serve(
            args.files,
            args.cases,
            host=args.host,
            port=args.port,
            show=args.show,
            memory_budget=args.memory_budget,
            out=lambda text: print(text, flush=True),
            store=args.store,
            passphrase_file=args.passphrase_file,
            open_without_passphrase=args.open_without_passphrase,
            origins=args.origin,
            archives=args.archive,
        )
    except ServeError as exc:
        raise UsageError(str(exc)) from None
    return 0


# -- rooms ---------------------------------------------------------------------------


def _store(args):
    from .rooms import StoreError, open_store
    from .rooms.store import default_store_path

    path = args.store or default_store_path()
    try:
        return open_store(path), path
    except StoreError as exc:
        raise UsageError(f"balance-desk rooms: {exc}") from None


def _token_of(text: str) -> str:
    import urllib.parse

    text = text.strip()
    if "room=" in text:
        q = urllib.parse.urlparse(text).query
        return (urllib.parse.parse_qs(q).get("room") or [""])[0]
    return text


def cmd_rooms_create(args) -> int:
    from .cases import case_names, case_paths
    from .rooms import StoreError
    from .rooms.share import room_link

    names = case_names(case_paths(None, args.cases))
    case = args.case
    if case is None:
        case = names[0] if names else ""
    elif case not in names:
        shown = ", ".join(one_line(n) for n in names) or "none"
        raise UsageError(
            f"balance-desk rooms create: the server has no case {one_line(case)!r} "
            f"(it has: {shown}; --cases DIR names the folder it serves)"
        )
    store, path = _store(args)
    try:
        room = store.create_room(
            args.title,
            case,
            {"case": case} if case else {},
            days=args.days,
            base_url=args.base_url,
        )
    except StoreError as exc:
        raise UsageError(f"balance-desk rooms create: {exc}") from None
    print(room_link(args.base_url, room.token))
    print(
        f"(room {room.title!r} on case {room.case}, kept in {path}; the link is the room's "
        f"key: give it only to the team)",
        file=sys.stderr,
    )
    return 0


def cmd_rooms_list(args) -> int:
    from .rooms.share import room_link, stamp

    store, path = _store(args)
    rooms = store.rooms()
    if not rooms:
        print(f"no review rooms in {path}")
        return 0
    for r in rooms:
        n = len(store.notes(r.token))
        state = "link expired" if r.expired else f"until {stamp(r.expires)}"
        base = args.base_url or r.base_url or DEFAULT_BASE_URL  # as it was made, by default
        print(
            f"{one_line(r.title)}  |  case {one_line(r.case)}  |  opened {stamp(r.created)}  |  "
            f"{n} notes  |  {state}\n    {room_link(base, r.token)}"
        )
    return 0


def cmd_rooms_export(args) -> int:
    from .rooms.share import notes_json, notes_markdown

    store, _ = _store(args)
    room = store.room(_token_of(args.room))
    if room is None:
        raise UsageError("balance-desk rooms export: no such room in this store")
    print(notes_markdown(room, store) if args.format == "md" else notes_json(room, store))
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
        if (
            a == "--box"
            and i + 1 < len(argv)
            and argv[i + 1].startswith("-")
            and "," in argv[i + 1]
        ):
            out.append(f"--box={argv[i + 1]}")
            i += 2
            continue
        out.append(a)
        i += 1
    return out


def main(argv=None) -> int:
    """Run one command. Everything it prints goes through :class:`app.outside.TerminalStream`:
    a name, a title, a note or a file name that holds control characters reaches the
    terminal spelled out, never as a control sequence."""
    from .outside import TerminalStream

    streams = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = TerminalStream(sys.stdout), TerminalStream(sys.stderr)
    try:
        return _main(argv)
    except BrokenPipeError:
        # the reader went away (``analyze ... | head``): no "unexpected error", exit 1; run
        # as a program, stdout is pointed at /dev/null so the interpreter's last flush does
        # not fail again (the Python documentation's note on SIGPIPE)
        if argv is None:
            try:
                os.dup2(os.open(os.devnull, os.O_WRONLY), streams[0].fileno())
            except (OSError, AttributeError, ValueError):
                pass
        return 1
    finally:
        sys.stdout, sys.stderr = streams


def _main(argv=None) -> int:
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
    except BrokenPipeError:
        raise  # the reader went away: main() ends quietly
    except Exception as exc:
        if debug:
            raise
        print(
            f"balance-desk: unexpected error ({type(exc).__name__}: {exc}); "
            "run again with --debug for the details",
            file=sys.stderr,
        )
        return 1


if __name__ == "__main__":
    sys.exit(main())
