"""Physical checks of every recognised field: fill values, ranges, units that lie.

Model output lies in quiet ways: a producer's fill value left undeclared
(-9999, -32767, 9.999e20), hectopascals labelled pascals, heights in
decametres labelled metres, knots labelled m s-1. Each recognised field is
checked here before the core sees it:

* values equal to a usual producer fill value (:data:`FILL_VALUES`) that lie
  outside the role's physical range are treated as missing, and counted;
* every other value must lie within the role's physical range
  (:data:`BOUNDS`, in the SI unit of the role);
* geopotential height must lie near the U.S. Standard Atmosphere (1976) height
  of its pressure level (:func:`height_problem`), which catches dam, km or
  levels in the wrong unit;
* the wind speed must be what the geostrophic wind allows
  (:func:`wind_speed_problem`), which catches knots or km h-1 labelled m s-1.

The bounds are common practice, not a published standard: each is wide enough
for any weather on Earth (record values, from memory) and narrow enough that a
unit slip falls outside. They are listed in DEVELOPERS.md.
"""

from __future__ import annotations

import numpy as np

from ..thermo import standard_atmosphere_height

__all__ = [
    "FILL_VALUES",
    "BOUNDS",
    "fill_mask",
    "to_si",
    "range_problem",
    "height_problem",
    "wind_speed_problem",
    "HEIGHT_TOLERANCE",
]

#: Fill values producers write without declaring them (common practice, no source):
#: the WMO-ish 9999 family, the signed 16-bit extremes, GRIB and NCL's 9.999e20, the
#: netCDF default float fill and the float32 extremes.
FILL_VALUES = (
    -9999.0,
    -999.0,
    -99999.0,
    -999.9,
    -9999.9,
    9999.0,
    99999.0,
    -32767.0,
    -32768.0,
    32767.0,
    65535.0,
    9.999e20,
    9.99e20,
    1e20,
    -1e20,
    9.99e14,
    1e15,
    -9.99e14,
    1e30,
    -1e30,
    9.969209968386869e36,
    3.4028234663852886e38,
    -3.4028234663852886e38,
)

#: Physical range of each role in its SI unit (common practice, no source; record values
#: from memory). Height is also checked level by level against the standard atmosphere.
BOUNDS = {
    "height": (-2000.0, 80000.0),  # m, any pressure level
    "geopotential": (-2000.0 * 9.80665, 80000.0 * 9.80665),
    "u": (-150.0, 150.0),
    "v": (-150.0, 150.0),  # m s-1 (jets reach about 110)
    "x_wind": (-150.0, 150.0),
    "y_wind": (-150.0, 150.0),
    "omega": (-100.0, 100.0),  # Pa s-1 (convective cores a few tens)
    "w": (-100.0, 100.0),  # m s-1
    "temperature": (150.0, 340.0),  # K
    "msl": (85000.0, 109000.0),  # Pa: 850 to 1090 hPa
    "surface_pressure": (30000.0, 110000.0),  # Pa: 300 to 1100 hPa
    "orography": (-500.0 * 9.80665, 9000.0 * 9.80665),  # m2 s-2
    "surface_height": (-500.0, 9000.0),  # m
    "u10": (-100.0, 100.0),
    "v10": (-100.0, 100.0),
    "x_wind10": (-100.0, 100.0),
    "y_wind10": (-100.0, 100.0),
    "t2m": (180.0, 340.0),  # K
    "land_mask": (0.0, 1.0),  # fraction
}

#: Height near the standard atmosphere: (metres, fraction of the standard height) for
#: every point and for the level's median. Common practice, no source: real 500 hPa
#: heights lie within about 900 m of the standard 5574 m (from memory).
HEIGHT_TOLERANCE = {"point": (1500.0, 0.15), "median": (500.0, 0.08)}


def fill_mask(values, role: str, scale: float, offset: float):
    """Where raw ``values`` hold a usual fill value outside the role's range (numpy).

    ``scale`` and ``offset`` convert raw values to the role's SI unit. Only the
    values outside the range are compared with the fill values (few, or none).
    """
    lo, hi = BOUNDS[role]
    raw = np.asarray(values)
    si = raw * scale + offset if (scale != 1.0 or offset != 0.0) else raw
    out = (si < lo) | (si > hi)
    if out.any():
        out[out] = np.isin(raw[out], FILL_VALUES)
    return out


def to_si(values, role: str, scale: float, offset: float):
    """Raw values in the role's SI unit (a new float64 array), usual fill values set to NaN."""
    lo, hi = BOUNDS[role]
    raw = np.asarray(values)
    out = np.array(raw, dtype=np.float64, copy=True)
    if scale != 1.0 or offset != 0.0:
        out *= scale
        out += offset
    outside = (out < lo) | (out > hi)
    if outside.any():
        outside[outside] = np.isin(raw[outside], FILL_VALUES)
        out[outside] = np.nan
    return out


def _example(values, bad):
    v = values[bad]
    return float(v[np.argmax(np.abs(v))])


def range_problem(role: str, values, units: str) -> str | None:
    """A sentence if any finite value lies outside the role's physical range, else None."""
    lo, hi = BOUNDS[role]
    a = np.asarray(values)
    fin = np.isfinite(a)
    if not fin.any():
        return None
    bad = fin & ((a < lo) | (a > hi))
    n = int(np.count_nonzero(bad))
    if not n:
        return None
    return (
        f"{n} of {int(fin.sum())} values lie outside the physical range {lo:g} to {hi:g} "
        f"{units} (for example {_example(a, bad):.6g}); wrong units or an undeclared fill "
        "value?"
    )


def height_problem(height, levels_pa) -> str | None:
    """A sentence if geopotential height (level, y, x) strays from the standard atmosphere.

    Every point must lie within 1500 m + 15 % of the U.S. Standard Atmosphere
    (1976) height of its level, and each level's median within 500 m + 8 %
    (:data:`HEIGHT_TOLERANCE`). The sentence guesses the likely slip: decametres
    or kilometres labelled metres, or levels in hPa labelled Pa.
    """
    z = np.asarray(height, dtype=np.float64)
    p = np.asarray(levels_pa, dtype=np.float64)
    zstd = np.atleast_1d(standard_atmosphere_height(p))
    (pa, pf), (ma, mf) = HEIGHT_TOLERANCE["point"], HEIGHT_TOLERANCE["median"]
    for k in range(p.size):
        lev = z[k]
        fin = np.isfinite(lev)
        if not fin.any():
            continue
        med = float(np.median(lev[fin]))
        worst = float(np.max(np.abs(lev[fin] - zstd[k])))
        if abs(med - zstd[k]) <= ma + mf * zstd[k] and worst <= pa + pf * zstd[k]:
            continue
        hint = _height_hint(med, zstd[k], p[k])
        return (
            f"at {p[k] / 100:g} hPa the heights have a median of {med:.6g} m (largest "
            f"departure {worst:.6g} m), but the 1976 Standard Atmosphere puts {p[k] / 100:g} "
            f"hPa at {zstd[k]:.0f} m{hint}"
        )
    return None


def _height_hint(med, zstd, p):
    if zstd > 500:
        r = med / zstd
        if 0.07 < r < 0.13:
            return "; heights in decametres labelled metres?"
        if 0.0007 < r < 0.0013:
            return "; heights in kilometres labelled metres?"
        if 7 < r < 13:
            return "; heights in metres labelled decametres?"
    if p < 2000:
        z100 = float(standard_atmosphere_height(p * 100))
        if abs(med - z100) < 500 + 0.08 * abs(z100):
            return "; pressure levels in hPa labelled Pa?"
    return ""


def wind_speed_problem(ratio: float | None) -> str | None:
    """A sentence if the median of |V| / |Vg| over the free atmosphere is implausible.

    Away from the equator and above the boundary layer the wind is within a
    few tens of percent of geostrophic (Holton and Hakim 2013, An Introduction
    to Dynamic Meteorology, 5th ed., ch. 3), so a median ratio outside 0.5 to
    1.6 means the wind's unit is wrong: knots read as m s-1 give about 1.94,
    km h-1 3.6. The bounds are the project's own.
    """
    if ratio is None or 0.5 <= ratio <= 1.6:
        return None
    hint = ""
    if 1.7 < ratio < 2.3:
        hint = "; knots labelled m s-1?"
    elif 3.0 < ratio < 4.3:
        hint = "; km h-1 labelled m s-1?"
    elif 0.4 < ratio < 0.6:
        hint = "; m s-1 labelled knots?"
    return (
        f"the wind speed is {ratio:.2f} times the geostrophic wind (median over the free "
        f"atmosphere away from the equator), where 0.5 to 1.6 is plausible{hint}"
    )
