"""Regions of a chart and area-weighted statistics over them.

A region is a lon/lat box (west, east, south, north; it may cross the
dateline), a lon/lat polygon (a box drawn on a conformal map is not a lon/lat
box, so the app hands the core the drawn outline as a polygon), or a circle on
the sphere (the region of a weather system, see :mod:`balance_core.systems`). Statistics
weight each point by its cell area (proportional to cos(phi) on a regular
lat-lon grid; the projected cell area on a projected grid).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from . import constants as C
from .grid import Grid

__all__ = [
    "Region",
    "Stats",
    "weighted_stats",
    "vector_stats",
    "weighted_quantile",
    "great_circle_km",
]


def great_circle_km(lon0, lat0, lon, lat):
    """Great-circle distance (km) on a sphere of the mean Earth radius: the haversine
    formula (Sinnott 1984, "Virtues of the haversine", Sky and Telescope 68, 159)."""
    p0, p1 = np.deg2rad(lat0), np.deg2rad(np.asarray(lat, dtype=np.float64))
    dl = np.deg2rad(np.asarray(lon, dtype=np.float64) - lon0)
    h = np.sin(0.5 * (p1 - p0)) ** 2 + np.cos(p0) * np.cos(p1) * np.sin(0.5 * dl) ** 2
    return 2e-3 * C.EARTH_RADIUS * np.arcsin(np.sqrt(np.clip(h, 0.0, 1.0)))


def _wrap180(lon):
    return (np.asarray(lon, dtype=np.float64) + 180.0) % 360.0 - 180.0


@dataclasses.dataclass(frozen=True)
class Region:
    """A lon/lat box or polygon on the sphere.

    Build with :meth:`box` or :meth:`polygon`; :meth:`whole` takes every point.
    """

    kind: str
    west: float | None = None
    east: float | None = None
    south: float | None = None
    north: float | None = None
    lons: tuple | None = None
    lats: tuple | None = None
    radius_km: float | None = None

    @classmethod
    def box(cls, west: float, east: float, south: float, north: float) -> Region:
        """A box in degrees. ``west > east`` (after wrapping) crosses the dateline.

        West and east are taken modulo 360, so 170..-170 and 170..190 are the
        same 20-degree box; west == east (mod 360) with different values, such
        as -180..180, is the whole circle.
        """
        vals = [west, east, south, north]
        if not all(np.isfinite(vals)):
            raise ValueError("box edges must be finite numbers")
        if not -90 <= south < north <= 90:
            raise ValueError(
                f"box south {south} and north {north} must satisfy -90 <= south < north <= 90"
            )
        return cls("box", float(west), float(east), float(south), float(north))

    @classmethod
    def polygon(cls, lons, lats) -> Region:
        """A polygon given by its lon/lat vertices (degrees), closed implicitly.

        Edges are straight lines in (lon, lat) between consecutive vertices, the
        longitudes unwrapped from the first vertex so the polygon may cross the
        dateline.
        """
        lons = np.asarray(lons, dtype=np.float64).ravel()
        lats = np.asarray(lats, dtype=np.float64).ravel()
        if lons.size != lats.size or lons.size < 3:
            raise ValueError("a polygon needs at least three lon/lat vertices")
        if not (np.all(np.isfinite(lons)) and np.all(np.isfinite(lats))):
            raise ValueError("polygon vertices must be finite numbers")
        unwrapped = np.rad2deg(np.unwrap(np.deg2rad(lons)))
        return cls(
            "polygon",
            lons=tuple(unwrapped),
            lats=tuple(lats),
            west=float(unwrapped.min()),
            east=float(unwrapped.max()),
            south=float(lats.min()),
            north=float(lats.max()),
        )

    @classmethod
    def circle(cls, lon: float, lat: float, radius_km: float) -> Region:
        """The points within ``radius_km`` (great-circle distance on a sphere of the mean
        Earth radius) of (lon, lat), degrees."""
        vals = [lon, lat, radius_km]
        if not all(np.isfinite(vals)) or not -90 <= lat <= 90 or not 0 < radius_km <= 20000:
            raise ValueError(
                "a circle needs a finite centre on the Earth and a radius of more "
                "than 0 and at most 20000 km"
            )
        delta = radius_km * 1e3 / C.EARTH_RADIUS  # the radius as an angle, radians
        dlat = np.rad2deg(delta)
        if abs(lat) + dlat >= 90.0:
            dlon = 180.0  # the cap holds a pole: every longitude
        else:
            # the half-width in longitude of a spherical cap: sin(dlon) = sin(delta) / cos(lat)
            dlon = float(np.rad2deg(np.arcsin(min(1.0, np.sin(delta) / np.cos(np.deg2rad(lat))))))
        return cls(
            "circle",
            float(lon) - dlon,
            float(lon) + dlon,
            max(-90.0, lat - dlat),
            min(90.0, lat + dlat),
            lons=(float(lon),),
            lats=(float(lat),),
            radius_km=float(radius_km),
        )

    @classmethod
    def whole(cls) -> Region:
        """Every point of the grid."""
        return cls("whole")

    def mask(self, grid: Grid) -> np.ndarray:
        """Boolean (ny, nx): True for the grid points inside the region.

        On a lat-lon grid only the rows within the region's latitudes are looked at."""
        lat1 = getattr(grid, "lat1d", None)
        if self.kind == "whole" or lat1 is None or getattr(grid, "kind", "") != "latlon":
            return self.contains(grid.lon, grid.lat)
        rows = np.nonzero((lat1 >= self.south) & (lat1 <= self.north))[0]
        out = np.zeros(grid.shape, dtype=bool)
        if rows.size:
            j0, j1 = int(rows[0]), int(rows[-1]) + 1
            out[j0:j1] = self.contains(grid.lon[j0:j1], grid.lat[j0:j1])
        return out

    def bounds(self) -> tuple[float, float, float, float]:
        """West, east, south, north (degrees) of a region that has them (not "whole")."""
        if self.west is None or self.east is None or self.south is None or self.north is None:
            raise ValueError("the whole grid has no bounds")
        return self.west, self.east, self.south, self.north

    def vertices(self) -> tuple[tuple, tuple]:
        """The longitudes and latitudes of a polygon (a circle's: its centre)."""
        if self.lons is None or self.lats is None:
            raise ValueError(f"a {self.kind} region has no vertices")
        return self.lons, self.lats

    def contains(self, lon, lat) -> np.ndarray:
        """Boolean, the shape of ``lon`` and ``lat`` (degrees): True for points inside."""
        lon = np.asarray(lon, dtype=np.float64)
        lat = np.asarray(lat, dtype=np.float64)
        if self.kind == "whole":
            return np.ones(lat.shape, dtype=bool)
        west, east, south, north = self.bounds()
        if self.kind == "box":
            inside_lat = (lat >= south) & (lat <= north)
            width = (east - west) % 360.0
            if width == 0.0 and east != west:
                return inside_lat
            offset = (lon - west) % 360.0
            return inside_lat & (offset <= width + 1e-9)
        # circles and polygons: only the points in the lon/lat box are tested
        lon, lat = np.broadcast_arrays(lon, lat)
        near = (lat >= south) & (lat <= north)
        if east - west < 360.0:
            near &= (lon - west) % 360.0 <= (east - west)
        out = np.zeros(lat.shape, dtype=bool)
        lons, lats = self.vertices()
        if self.kind == "circle":
            out[near] = great_circle_km(lons[0], lats[0], lon[near], lat[near]) <= float(
                self.radius_km or 0.0
            )
            return out
        from shapely import Polygon, contains_xy  # vectorised point-in-polygon

        poly = Polygon(zip(lons, lats))
        # put each point's longitude in the polygon's unwrapped range
        ref = lons[0]
        plon = ref + _wrap180(lon[near] - ref)
        plat = lat[near]
        inside = contains_xy(poly, plon, plat)
        for shift in (-360.0, 360.0):  # polygons wider than half the globe
            inside |= contains_xy(poly, plon + shift, plat)
        out[near] = inside
        return out

    def mask_point(self, lon: float, lat: float) -> bool:
        """Is the point (degrees) inside the region?"""
        return bool(self.contains(np.array([float(lon)]), np.array([float(lat)]))[0])

    def describe(self) -> dict:
        """West, east, south, north of the region's bounding box, degrees."""
        if self.kind == "whole":
            return {"west": None, "east": None, "south": None, "north": None}
        return {"west": self.west, "east": self.east, "south": self.south, "north": self.north}


@dataclasses.dataclass(frozen=True)
class Stats:
    """Area-weighted statistics of one field over a region."""

    rms: float | None
    mean: float | None
    median: float | None
    p90: float | None
    count: int
    masked: int

    def as_dict(self) -> dict:
        return dataclasses.asdict(self)


def weighted_quantile(values, weights, q):
    """Weighted quantile(s) ``q`` (0..1) by interpolating the weighted CDF.

    The CDF places each sorted value at the midpoint of its weight, so equal
    weights give the usual linear-interpolation quantile of the values' midranks
    (Hyndman and Fan 1996, "Sample quantiles in statistical packages",
    Amer. Stat. 50, 361-365, definition 5).
    """
    v = np.asarray(values, dtype=np.float64).ravel()
    w = np.asarray(weights, dtype=np.float64).ravel()
    order = np.argsort(v)
    v, w = v[order], w[order]
    cw = np.cumsum(w)
    mid = (cw - 0.5 * w) / cw[-1]
    return np.interp(q, mid, v)


def weighted_stats(field, grid: Grid, inside: np.ndarray, *, quantiles: bool = True) -> Stats:
    """RMS, mean, median and 90th percentile of ``field`` over ``inside``.

    Points that are NaN (masked by the tropics, the poles, the ground, or
    missing in the data) are left out and counted in ``masked``. Weights are
    ``grid.cell_area``. ``quantiles=False`` skips the median and percentile
    (a sort), leaving them None.
    """
    a = np.asarray(field)
    sel = inside & np.isfinite(a)
    n_in = int(np.count_nonzero(inside))
    n = int(np.count_nonzero(sel))
    if n == 0:
        return Stats(None, None, None, None, 0, n_in)
    vals = a[sel].astype(np.float64)
    w = grid.cell_area[sel]
    wsum = w.sum()
    rms = float(np.sqrt(np.dot(w, vals * vals) / wsum))
    mean = float(np.dot(w, vals) / wsum)
    if not quantiles:
        return Stats(rms, mean, None, None, n, n_in - n)
    med, p90 = weighted_quantile(vals, w, [0.5, 0.9])
    return Stats(rms, mean, float(med), float(p90), n, n_in - n)


def vector_stats(x, y, grid: Grid, inside: np.ndarray, *, quantiles: bool = False):
    """Statistics of the magnitude of a vector, and the RMS of each component.

    Returns ``(stats_of_magnitude, x_rms, y_rms)``; the component RMS values use
    the same points as the magnitude (where both components are finite).
    """
    x = np.asarray(x)
    y = np.asarray(y)
    mag = np.hypot(x, y)
    s = weighted_stats(mag, grid, inside, quantiles=quantiles)
    if s.count == 0:
        return s, None, None
    sel = inside & np.isfinite(mag)
    w = grid.cell_area[sel]
    wsum = w.sum()
    xr = float(np.sqrt(np.dot(w, x[sel] ** 2) / wsum))
    yr = float(np.sqrt(np.dot(w, y[sel] ** 2) / wsum))
    return s, xr, yr
