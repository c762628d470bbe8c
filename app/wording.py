"""The page's words and formats: one table of display names, one way to write each value.

Terms, balances, scales and presets take their names from
:mod:`balance_core.vocabulary` (the verdict's sentences use the same); this module
adds the chart's fields and the numbers, and writes times ("Tue 19 Jan 2041 00 UTC
(run 18 Jan 12 UTC, +12 h)"), latitudes and longitudes (N/S/E/W) and values (four
significant digits) the same way on every screen and in every export.
"""

from __future__ import annotations

import math

import numpy as np

from balance_core.vocabulary import (
    BALANCE_NAMES,
    PART_NAMES,
    PRESET_NAMES,
    SCALE_NAMES,
    SYSTEM_NAMES,
    TERM_NAMES,
    term_name,
)

__all__ = [
    "system_name",
    "part_name",
    "TERM_NAMES",
    "BALANCE_NAMES",
    "SCALE_NAMES",
    "PRESET_NAMES",
    "FIELD_NAMES",
    "NUMBERS",
    "term_name",
    "balance_name",
    "preset_name",
    "when",
    "when_short",
    "lat",
    "lon",
    "sig",
    "quote",
    "KT",
    "wind",
    "height",
    "WIND_UNITS",
    "HEIGHT_UNITS",
]

KT = 0.514444  # m s-1 per knot (1852 m per hour)
WIND_UNITS = {"m/s": ("m/s", 1.0), "kt": ("kt", 1 / KT)}
HEIGHT_UNITS = {"m": ("m", 1.0), "dam": ("dam", 0.1)}

#: Fields the chart can fill (units are added where they are shown).
FIELD_NAMES = {
    "height": "geopotential height",
    "speed": "wind speed",
    "geostrophic_speed": "geostrophic wind speed",
    "ageostrophic_speed": "ageostrophic wind speed",
    "ageostrophic_fraction": "ageostrophic fraction |V - Vg| / |V|",
    "rossby_local": "local Rossby number |zeta / f|",
    "vorticity": "relative vorticity",
    "omega": "vertical motion omega (negative: rising air)",
    "temperature": "temperature",
    "balance_here": "which balance holds where",
}

#: Numbers of the report: key -> (display name, unit, what it means).
NUMBERS = {
    "rossby": (
        "box Rossby number",
        "",
        "U / (f0 L), U the region's RMS wind, L the flow's length scale: how large the "
        "acceleration of the flow is against Coriolis for the region as a whole (small: "
        "geostrophy can hold)",
    ),
    "rossby_local_median": (
        "local Rossby number",
        "",
        "median |zeta / f| over the region's points: how strongly the flow "
        "spins against the planet's rotation at a typical point (large in "
        "tight vortices even when the box number is small)",
    ),
    "ekman": (
        "Ekman number",
        "",
        "nu / (f0 H^2), nu an eddy viscosity of 10 m2/s and H the depth of the "
        "troposphere (10 km): friction against Coriolis over the depth of the flow",
    ),
    "froude": (
        "Froude number",
        "",
        "U / (N H), H the depth of the troposphere: flow speed over the speed of gravity waves",
    ),
    "burger": ("Burger number", "", "(N H / (f0 L))^2: stratification against rotation"),
    "deformation_radius": (
        "deformation radius",
        "m",
        "N H / f0: the length at which rotation and stratification matter equally",
    ),
    "deformation_radius_km": (
        "deformation radius",
        "km",
        "N H / f0: the length at which rotation and stratification matter equally",
    ),
    "richardson_median": (
        "Richardson number",
        "",
        "median N^2 / |dV/dz|^2: below 1/4 the shear can overturn the layer",
    ),
    "residual_to_coriolis": (
        "residual over Coriolis",
        "",
        "RMS residual / RMS Coriolis (from the data): what the residual "
        "would be against the Coriolis force if it were all friction",
    ),
    "shear_depth_km": (
        "shear depth",
        "km",
        "U / RMS|dV/dz| (from the data): the depth over which the wind changes by its own speed",
    ),
}


def system_name(code: str) -> str:
    return SYSTEM_NAMES.get(code, str(code).replace("_", " "))


def part_name(code: str) -> str:
    return PART_NAMES.get(code, str(code).replace("_", " "))


def balance_name(code: str) -> str:
    return BALANCE_NAMES.get(code, str(code).capitalize())


def preset_name(code: str) -> str:
    return PRESET_NAMES.get(code, str(code).replace("_", " ").capitalize())


def _dt(t):
    return (
        np.datetime64(t, "m").astype(object)
        if t is not None and not (isinstance(t, np.datetime64) and np.isnat(t))
        else None
    )


def when(valid, reference=None) -> str:
    """'Tue 19 Jan 2041 00 UTC (run 18 Jan 12 UTC, +12 h)'; minutes only where not zero."""
    v = _dt(_as64(valid))
    if v is None:
        return "no valid time"
    text = v.strftime("%a %d %b %Y %H") + (f":{v.minute:02d}" if v.minute else "") + " UTC"
    r = _dt(_as64(reference)) if reference is not None else None
    if r is not None:
        lead = (v - r).total_seconds() / 3600.0
        run = r.strftime("%d %b %H") + (f":{r.minute:02d}" if r.minute else "") + " UTC"
        text += f" (run {run}, +{lead:g} h)"
    return text


def when_short(valid) -> str:
    """'19 Jan 00 UTC', for axes and lists."""
    v = _dt(_as64(valid))
    return (
        "no time"
        if v is None
        else v.strftime("%d %b %H") + (f":{v.minute:02d}" if v.minute else "") + " UTC"
    )


def _as64(t):
    if t is None or t == "":
        return None
    if isinstance(t, str):
        return np.datetime64(t.replace("Z", ""), "m")
    return np.datetime64(t, "m")


def lat(y, digits=1) -> str:
    y = float(y)
    return f"{abs(y):.{digits}f}{'N' if y > 0 else ('S' if y < 0 else '')}"


def lon(x, digits=1) -> str:
    x = (float(x) + 180.0) % 360.0 - 180.0
    if abs(x - 180.0) < 1e-9 or abs(x + 180.0) < 1e-9:
        return f"{180:.{digits}f}"
    return f"{abs(x):.{digits}f}{'E' if x > 0 else ('W' if x < 0 else '')}"


def sig(x, digits: int = 4):
    """A float rounded to ``digits`` significant digits (None and non-finite stay None)."""
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    if x == 0:
        return 0.0
    return float(f"{x:.{digits - 1}e}")


def quote(text, limit: int = 60) -> str:
    """Outside text for a message: quoted, on one line, at most ``limit`` characters."""
    from balance_core.io.errors import printable

    t = printable(str(text))
    if len(t) > limit:
        t = t[: limit - 1] + "..."
    return repr(t)


def wind(values, units: str):
    label, k = WIND_UNITS[units]
    return np.asarray(values) * k, label


def height(values, units: str):
    label, k = HEIGHT_UNITS[units]
    return np.asarray(values) * k, label
