"""A vertical section along a great circle, and the imbalance a balance leaves at each point.

A section is drawn along the great circle between two points (the shortest path on the
sphere, computed by pyproj's ``Geod.npts``, Karney 2013, Algorithms for geodesics, J. Geodesy
87, 43-55, on a sphere of the grid's radius). At each point and level the caller samples the
fields of that level; this module gives the path and the imbalance field.

The imbalance of a candidate balance at one point is the local counterpart of the region's
imbalance ratio (:mod:`balance_core.verdict`):

    |sum of the balance's terms| / |pressure_gradient|

with the centripetal term taken along the trajectory where the local tendency is known, as
the region's ratios take it. A point where the pressure gradient is zero has no ratio (NaN).
"""

from __future__ import annotations

import numpy as np
import pyproj

from . import constants as C
from .budget import Budget
from .verdict import CANDIDATES

__all__ = ["great_circle", "imbalance_field"]


def great_circle(lon0, lat0, lon1, lat1, n: int = 121, radius: float = C.EARTH_RADIUS):
    """(lon, lat, distance_km) of ``n`` points from (lon0, lat0) to (lon1, lat1) along the
    great circle (both ends included; longitudes in -180..180); ValueError where the two
    ends are the same point or ``n`` is under 2."""
    if n < 2:
        raise ValueError("a section needs at least two points")
    geod = pyproj.Geod(a=radius, b=radius)
    _, _, length = geod.inv(lon0, lat0, lon1, lat1)
    if not length > 0:
        raise ValueError("the section's two ends are the same point")
    inner = geod.npts(lon0, lat0, lon1, lat1, n - 2) if n > 2 else []
    lon = np.array([lon0] + [p[0] for p in inner] + [lon1], dtype=np.float64)
    lat = np.array([lat0] + [p[1] for p in inner] + [lat1], dtype=np.float64)
    lon = (lon + 180.0) % 360.0 - 180.0
    return lon, lat, np.linspace(0.0, length / 1e3, n)


def imbalance_field(budget: Budget, balance: str) -> np.ndarray:
    """|sum of the terms of ``balance``| / |pressure_gradient| at every point (NaN where a
    term is missing or the pressure gradient is zero); KeyError for a class that is not a
    candidate balance, ValueError where the data lack a term it needs."""
    parts = CANDIDATES[balance]
    traj = budget.derived.get("centripetal_trajectory")
    terms = [
        traj if (n == "centripetal" and traj is not None and traj.available) else budget[n]
        for n in parts
    ]
    missing = [t.name for t in terms if not t.available]
    if missing:
        raise ValueError(f"the data give no {', '.join(missing)} term")
    sx = sum(t.x for t in terms)
    sy = sum(t.y for t in terms)
    p = budget["pressure_gradient"]
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.hypot(sx, sy) / np.hypot(p.x, p.y)
    return np.where(np.isfinite(out), out, np.nan)
