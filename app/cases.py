"""Which case files a command or the server uses, and what each holds.

Shared by the command line (``balance-desk cases``, ``serve``) and the server, so that
the page never imports the command line.
"""

from __future__ import annotations

import glob
import json
import os

import numpy as np
import pyproj  # noqa: F401  (before anything that may load eccodes)

__all__ = ["sample_dir", "case_paths", "case_names", "describe_case", "list_cases", "CASE_SUFFIXES"]

#: File names taken as cases when a directory is given.
CASE_SUFFIXES = (".nc", ".nc4", ".grib", ".grib2", ".grb", ".grb2", ".zarr")


def sample_dir() -> str:
    """The bundled invented sample cases (sample_cases/ next to the app package)."""
    return os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "sample_cases")


def case_paths(files=None, cases_dir=None) -> list:
    """The files to load: the given ones, every case in a directory, or the sample cases."""
    if files:
        return [str(f) for f in files]
    d = cases_dir or sample_dir()
    # a pipe or a device named like a case is listed too: reading it is refused with one
    # sentence (balance_core.io.reader.sniff_format), never waited on
    return sorted(
        p
        for p in glob.glob(os.path.join(glob.escape(d), "*"))
        if p.rstrip("/").endswith(CASE_SUFFIXES)
    )


def case_names(paths) -> list:
    """One name per path: the file's stem, made unique with -2, -3, ... where stems repeat."""
    out, seen = [], {}
    for p in paths:
        stem = os.path.splitext(os.path.basename(str(p).rstrip("/")))[0] or "case"
        n = seen.get(stem, 0) + 1
        seen[stem] = n
        out.append(stem if n == 1 else f"{stem}-{n}")
    return out


def _suggested_box(attrs):
    """The file's suggested box, if it is four finite numbers with south below north."""
    from .state import parse_box

    raw = attrs.get("suggested_box")
    if raw is None:
        return None
    try:
        vals = json.loads(raw) if isinstance(raw, str) else list(np.ravel(raw))
    except (ValueError, TypeError):
        return None
    return parse_box(vals)


def describe_case(path, name=None) -> dict:
    """What a case file holds, or its one-sentence error (never raises)."""
    from balance_core.io import CaseError, iso, open_case
    from balance_core.io.errors import printable

    base = printable(os.path.basename(str(path).rstrip("/")))
    try:
        c = open_case(path, name=name)
    except CaseError as exc:
        return {"file": base, "error": str(exc)}
    except Exception as exc:  # noqa: BLE001 - one bad file never stops the listing
        return {"file": base, "error": f"{base}: could not be read ({type(exc).__name__})."}
    step = (c.times[1] - c.times[0]) / np.timedelta64(1, "h") if c.times.size > 1 else None
    expected = []
    try:
        raw = c.attrs.get("expected_verdicts")
        expected = json.loads(raw) if isinstance(raw, str) else []
        expected = [e for e in expected if isinstance(e, dict)]
    except ValueError:
        expected = []
    return {
        "name": c.name,
        "file": base,
        "title": printable(c.title),
        "levels_hpa": [float(p / 100) for p in c.levels_pa],
        "sea_level": bool(c.has_sea_level),
        "valid_times": [iso(t) for t in c.times],
        "step_hours": step,
        "suggested_box": _suggested_box(c.attrs),
        "expected": expected,
        "invented": c.invented,
    }


def list_cases(directory=None) -> list:
    """Every case in a directory (default: the samples), each described or with its error."""
    paths = case_paths(None, directory)
    return [describe_case(p, n) for p, n in zip(paths, case_names(paths))]
