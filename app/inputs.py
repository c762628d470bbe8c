"""What people type, read one way for the command line, the batch and the page.

Each function takes the text (or values) as typed and returns the value, or raises
:class:`InputError` with one sentence that names what is wrong (the caller adds where it
was typed: an option, a link, a field of the page). The rules are the same everywhere:

* a box is four finite numbers west, east, south, north in degrees; west and east within
  -360 to 360 and different (west > east crosses the date line; -180 and 180 are the whole
  circle), -90 <= south < north <= 90;
* a level is a pressure level from 1 to 1100 hPa, or sea level (``msl``, ``sea level``);
* a member is an index (0 is the first), ``mean``, or where allowed ``all``;
* a section's line is four finite numbers lon0, lat0, lon1, lat1 in degrees: longitudes
  within -360 to 360, latitudes within -90 to 90, and two different ends.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

__all__ = [
    "InputError",
    "parse_box",
    "parse_level",
    "parse_levels",
    "parse_member",
    "parse_line",
    "SEA_LEVEL",
]

#: The name of sea level where a level is typed.
SEA_LEVEL = "msl"
_SEA_WORDS = {"msl", "sea level", "sea_level", "sealevel", "mean sea level"}


class InputError(ValueError):
    """What someone typed cannot be taken: one sentence."""


def _number(text, what: str) -> float:
    try:
        value = float(str(text).strip())
    except ValueError:
        raise InputError(f"{what} must be a number, got {str(text)!r}") from None
    if not math.isfinite(value):
        raise InputError(f"{what} must be a finite number, got {str(text)!r}")
    return value


def _four_numbers(value: str | Sequence, what: str, each: str) -> list[float]:
    """Four numbers typed as "A,B,C,D" or given as four values (``what``: how they are
    named in the sentence, ``each``: how one of them is)."""
    if isinstance(value, str):
        parts = [p for p in value.replace(" ", "").split(",") if p != ""]
    else:
        parts = list(value)
    if len(parts) != 4:
        raise InputError(f"{what}; got {value!r}")
    return [_number(p, each) for p in parts]


def parse_box(value: str | Sequence) -> list[float]:
    """[west, east, south, north] of a box typed as "W,E,S,N" or given as four values."""
    w, e, s, n = _four_numbers(
        value, "a box is four numbers west,east,south,north", "each edge of a box"
    )
    if not (-360 <= w <= 360 and -360 <= e <= 360):
        raise InputError(f"the box's west {w:g} and east {e:g} must lie within -360 to 360")
    if w == e:
        raise InputError(f"the box's west and east are the same ({w:g}): it has no width")
    if not -90 <= s < n <= 90:
        raise InputError(
            f"the box's south {s:g} and north {n:g} must satisfy -90 <= south < north <= 90"
        )
    return [w, e, s, n]


def parse_line(value: str | Sequence) -> tuple[float, float, float, float]:
    """(lon0, lat0, lon1, lat1) of a section's line typed as "LON0,LAT0,LON1,LAT1"."""
    lon0, lat0, lon1, lat1 = _four_numbers(
        value, "a line is four numbers lon0,lat0,lon1,lat1", "each end of a line"
    )
    if not (-360 <= lon0 <= 360 and -360 <= lon1 <= 360):
        raise InputError("a line's longitudes must lie within -360 to 360")
    if not (-90 <= lat0 <= 90 and -90 <= lat1 <= 90):
        raise InputError("a line's latitudes must lie within -90 to 90")
    if lat0 == lat1 and (lon0 - lon1) % 360 == 0:
        raise InputError("a line's two ends are the same point")
    return (lon0, lat0, lon1, lat1)


def parse_level(text) -> float | str:
    """A pressure level in hPa (1 to 1100), or :data:`SEA_LEVEL`."""
    if str(text).strip().lower() in _SEA_WORDS:
        return SEA_LEVEL
    value = _number(text, "a level")
    if not 1 <= value <= 1100:
        raise InputError(
            f"a level must lie from 1 to 1100 hPa, or be msl (sea level); got {str(text)!r}"
        )
    return value


def parse_levels(text) -> list[float | str]:
    """Levels typed as "850,500,250" (sea level among them as msl)."""
    parts = [p for p in str(text).replace(" ", "").split(",") if p != ""]
    if not parts:
        raise InputError("no level was given")
    return [parse_level(p) for p in parts]


def parse_member(text, *, allow_all: bool = False) -> int | str:
    """An ensemble member: an index, "mean", or (where ``allow_all``) "all"."""
    t = str(text).strip().lower()
    if t == "mean" or (allow_all and t == "all"):
        return t
    try:
        value = int(t)
    except ValueError:
        choices = "an index, 'mean' or 'all'" if allow_all else "an index or 'mean'"
        raise InputError(f"a member must be {choices}, got {str(text)!r}") from None
    if value < 0:
        raise InputError(f"a member index is 0 or more, got {value}")
    return value
