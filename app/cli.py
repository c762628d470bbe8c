"""The balance-desk command line.

    balance-desk scales   a priori scale analysis (presets or your own scales)
    balance-desk verify   the reference checks, run on this machine

Every error is one sentence on stderr: exit status 2 for bad input, 1 for
anything unexpected (a traceback only with --debug).
"""

from __future__ import annotations

import argparse
import json
import math
import sys

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


def _positive(name):
    def conv(text):
        try:
            val = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{name} must be a number, got {text!r}") from None
        if not math.isfinite(val) or val <= 0:
            raise argparse.ArgumentTypeError(f"{name} must be a positive number, got {text}")
        return val
    return conv


def _non_negative(name):
    def conv(text):
        try:
            val = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{name} must be a number, got {text!r}") from None
        if not math.isfinite(val) or val < 0:
            raise argparse.ArgumentTypeError(f"{name} must be zero or positive, got {text}")
        return val
    return conv


def _number(name):
    def conv(text):
        try:
            val = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{name} must be a number, got {text!r}") from None
        if not math.isfinite(val):
            raise argparse.ArgumentTypeError(f"{name} must be a finite number, got {text}")
        return val
    return conv


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

def main(argv=None) -> int:
    parser = build_parser()
    debug = "--debug" in (sys.argv[1:] if argv is None else argv)
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
