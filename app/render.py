"""Turning a case's fields into what a chart can draw, at the screen's resolution.

Every chart is a raster on a regular grid in the view's coordinates (lon/lat
degrees for plate carree, metres for a conformal projection), sampled from the
case's grid by bilinear interpolation in index space, so the page is never
sent a million points: a few hundred by a few hundred float32 values. The
geometry of a view (its projection, extent and the index map into the case
grid) depends only on the case and the projection, so it is cached and a
level or time change only resamples. Coastlines are read once per view from
cartopy's offline GSHHS data and projected once.
"""

from __future__ import annotations

import dataclasses
import functools
import logging
import math
import os

import numpy as np
import pyproj
from scipy import ndimage

__all__ = [
    "ViewGeometry",
    "geometry_for",
    "sample",
    "sample_at",
    "contour_lines",
    "interval_levels",
    "vector_lattice",
    "coastlines",
    "graticule",
    "COAST_DIRS",
]

log = logging.getLogger(__name__)

#: Where offline coastlines are looked for (Debian's python-cartopy-data first).
COAST_DIRS = ("/usr/share/cartopy/data", os.path.expanduser("~/.local/share/cartopy"))


@dataclasses.dataclass
class ViewGeometry:
    """A view of one case: projection, extent, raster and index map into the case grid."""

    kind: str  # "plate_carree" or "conformal"
    crs: pyproj.CRS | None  # None for plate carree (coordinates are lon/lat degrees)
    label: str  # e.g. "Lambert conformal, standard parallels 38N and 52N"
    xs: np.ndarray  # raster x centres (1-D)
    ys: np.ndarray  # raster y centres (1-D, ascending)
    lon: np.ndarray  # (ny, nx) lon of raster points
    lat: np.ndarray  # (ny, nx) lat
    rows: np.ndarray  # fractional row index into the case grid (NaN outside)
    cols: np.ndarray  # fractional column index (padded by one column if periodic)
    periodic: bool
    convergence: np.ndarray | None  # view's meridian convergence at raster points (deg)
    grid: object = dataclasses.field(default=None, repr=False)  # the case grid

    @property
    def extent(self):
        dx = (self.xs[-1] - self.xs[0]) / max(self.xs.size - 1, 1)
        dy = (self.ys[-1] - self.ys[0]) / max(self.ys.size - 1, 1)
        return (
            self.xs[0] - dx / 2,
            self.xs[-1] + dx / 2,
            self.ys[0] - dy / 2,
            self.ys[-1] + dy / 2,
        )

    @property
    def x_ground_scale(self) -> float:
        """Ground distance of one x unit over that of one y unit, at the middle of the view:
        1 on a conformal chart (metres both ways), cos(middle latitude) on a lon/lat chart
        (a degree of longitude is that much shorter than one of latitude).

        A chart at true shape spans, in a frame of w by h pixels, x and y with
        ``(x1 - x0) * x_ground_scale / w == (y1 - y0) / h``: the same ground distance per
        pixel both ways, so that a circle is drawn round (on a conformal chart exactly, up to
        the map factor's change across the view; on a lon/lat chart at the middle latitude)."""
        _, _, y0, y1 = self.extent
        return self.x_ground_scale_between(y0, y1)

    def x_ground_scale_between(self, y0: float, y1: float) -> float:
        """:attr:`x_ground_scale` of a part of the view, from y0 to y1 (a region zoomed to)."""
        if self.kind != "plate_carree":
            return 1.0
        return float(max(np.cos(np.deg2rad(0.5 * (y0 + y1))), 0.05))

    def to_view(self, lon, lat):
        """View coordinates of lon/lat points."""
        lon = np.asarray(lon, dtype=np.float64)
        lat = np.asarray(lat, dtype=np.float64)
        if self.crs is None:
            x0 = self.xs[0]
            return x0 + (lon - x0) % 360.0, lat
        return self._forward.transform(lon, lat)

    def path_to_view(self, lon, lat):
        """View coordinates of a connected path (an outline), kept in one piece.

        On a lon/lat view each point taken on its own lands in the view's 360 degrees, so a
        path along 0 E on a 0-360 chart would jump to the chart's west edge. Here the path's
        longitudes are made continuous and moved as one by whole turns, its west end inside
        the view; the part that runs past the view's east end is drawn again one turn west,
        after a break (NaN), so a region across the chart's seam shows at both edges (not
        when that part would reach less than one column into the chart: a box ending at
        0 E on a chart from 0 E ends at the east edge).
        """
        lon = np.asarray(lon, dtype=np.float64)
        lat = np.asarray(lat, dtype=np.float64)
        if self.crs is not None:
            return self._forward.transform(lon, lat)
        x0, x1 = self.extent[:2]
        step = abs(float(self.xs[1] - self.xs[0])) if self.xs.size > 1 else 0.0
        lon = np.rad2deg(np.unwrap(np.deg2rad(lon)))
        lon = lon - 360.0 * np.floor((np.nanmin(lon) - x0) / 360.0)
        if np.nanmax(lon) - 360.0 <= x0 + step:
            # the part past the east end would reach less than a column into the west
            return lon, lat
        gap = np.array([np.nan])
        return np.concatenate([lon, gap, lon - 360.0]), np.concatenate([lat, gap, lat])

    @functools.cached_property
    def _forward(self):
        return pyproj.Transformer.from_crs(self.crs.geodetic_crs, self.crs, always_xy=True)

    @functools.cached_property
    def _inverse(self):
        return pyproj.Transformer.from_crs(self.crs, self.crs.geodetic_crs, always_xy=True)

    def to_lonlat(self, x, y):
        """lon/lat of view coordinates."""
        if self.crs is None:
            return np.asarray(x, np.float64), np.asarray(y, np.float64)
        return self._inverse.transform(np.asarray(x, np.float64), np.asarray(y, np.float64))

    def outline(self, x0, y0, x1, y1, n=40):
        """The lon/lat polygon of a rectangle drawn in view coordinates."""
        t = np.linspace(0, 1, n)
        xs = np.concatenate(
            [x0 + (x1 - x0) * t, np.full(n, x1), x1 + (x0 - x1) * t, np.full(n, x0)]
        )
        ys = np.concatenate(
            [np.full(n, y0), y0 + (y1 - y0) * t, np.full(n, y1), y1 + (y0 - y1) * t]
        )
        return self.to_lonlat(xs, ys)


def _unwrapped_lon(grid):
    lon = grid.lon1d if grid.kind == "latlon" else None
    return None if lon is None else np.rad2deg(np.unwrap(np.deg2rad(lon)))


def _raster_shape(width, height, max_nx, max_ny, native=None):
    aspect = height / width if width else 1.0
    nx = max_nx
    ny = int(round(nx * aspect))
    if ny > max_ny:
        ny = max_ny
        nx = int(round(ny / aspect))
    if native is not None:
        nx = min(nx, native[1])
        ny = min(ny, native[0])
    return max(nx, 8), max(ny, 8)


def _conformal_crs(lat_lo, lat_hi, lon_c):
    """Polar stereographic poleward of 60, Mercator within 20 of the equator, else Lambert."""
    lat_c = 0.5 * (lat_lo + lat_hi)
    if lat_lo >= 55 or lat_hi <= -55:
        pole = 90 if lat_c > 0 else -90
        ts = 60 if pole > 0 else -60
        return (
            pyproj.CRS.from_proj4(
                f"+proj=stere +lat_0={pole} +lat_ts={ts} +lon_0={lon_c:.2f} "
                "+R=6371008.7714 +units=m +no_defs"
            ),
            f"polar stereographic, true at {abs(ts)}{'N' if ts > 0 else 'S'}",
        )
    if abs(lat_c) < 20 and lat_lo > -30 and lat_hi < 30:
        return (
            pyproj.CRS.from_proj4(
                f"+proj=merc +lat_ts={lat_c:.2f} +lon_0={lon_c:.2f} "
                "+R=6371008.7714 +units=m +no_defs"
            ),
            "Mercator",
        )
    span = lat_hi - lat_lo
    p1, p2 = lat_lo + span / 6, lat_hi - span / 6  # standard parallels: common practice
    return (
        pyproj.CRS.from_proj4(
            f"+proj=lcc +lat_1={p1:.2f} +lat_2={p2:.2f} +lat_0={lat_c:.2f} "
            f"+lon_0={lon_c:.2f} +R=6371008.7714 +units=m +no_defs"
        ),
        f"Lambert conformal, standard parallels {_deg(p1, 'N', 'S')} and {_deg(p2, 'N', 'S')}",
    )


def _deg(v, pos, neg):
    return f"{abs(v):.0f}{pos if v >= 0 else neg}"


def geometry_for(
    case, projection: str, *, max_nx: int = 560, max_ny: int = 420, centre=None
) -> ViewGeometry:
    """The view geometry of a case in a projection (cached per case, projection, centre)."""
    key = (
        id(case),
        case.name,
        projection,
        max_nx,
        max_ny,
        None if centre is None else tuple(round(c, 1) for c in centre),
    )
    return _geometry_cached(key, case, projection, max_nx, max_ny, centre)


_GEOM_CACHE: dict = {}


def _geometry_cached(key, case, projection, max_nx, max_ny, centre):
    g = _GEOM_CACHE.get(key)
    if g is None:
        g = _make_geometry(case, projection, max_nx, max_ny, centre)
        if len(_GEOM_CACHE) > 64:
            _GEOM_CACHE.pop(next(iter(_GEOM_CACHE)))
        _GEOM_CACHE[key] = g
    return g


def _make_geometry(case, projection, max_nx, max_ny, centre):
    grid = case.grid
    lat_lo, lat_hi = float(np.nanmin(grid.lat)), float(np.nanmax(grid.lat))
    if grid.kind == "latlon":
        lonu = _unwrapped_lon(grid)
        lon_lo, lon_hi = float(lonu.min()), float(lonu.max())
        if grid.periodic:
            step = abs(lonu[1] - lonu[0])
            lon_hi = lon_lo + 360.0 - step
    else:
        lon2 = np.rad2deg(np.unwrap(np.deg2rad(grid.lon), axis=1))
        lon_lo, lon_hi = float(lon2.min()), float(lon2.max())
    if projection == "conformal":
        if grid.kind == "projected" and _is_conformal(grid.crs):
            crs, label = grid.crs, "the data's own projection"
            x = grid.x
            y = grid.y
            x0, x1, y0, y1 = x.min(), x.max(), y.min(), y.max()
        else:
            if grid.kind == "latlon" and grid.periodic or (lon_hi - lon_lo) > 150:
                # a global case: a conformal view of mid latitudes around the region
                clon, clat = centre if centre is not None else (lon_lo + 180.0, 50.0)
                hemi = 1 if clat >= 0 else -1
                lat_lo2, lat_hi2 = (20, 80) if hemi > 0 else (-80, -20)
                lon_lo2, lon_hi2 = clon - 70, clon + 70
            else:
                lat_lo2, lat_hi2, lon_lo2, lon_hi2 = lat_lo, lat_hi, lon_lo, lon_hi
            clon = 0.5 * (lon_lo2 + lon_hi2)
            crs, label = _conformal_crs(lat_lo2, lat_hi2, clon)
            fwd = pyproj.Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True)
            bl = np.linspace(lon_lo2, lon_hi2, 60)
            bp = np.linspace(lat_lo2, lat_hi2, 60)
            ex, ey = fwd.transform(
                np.concatenate([bl, np.full(60, lon_hi2), bl, np.full(60, lon_lo2)]),
                np.concatenate([np.full(60, lat_lo2), bp, np.full(60, lat_hi2), bp]),
            )
            x0, x1, y0, y1 = np.nanmin(ex), np.nanmax(ex), np.nanmin(ey), np.nanmax(ey)
        nx, ny = _raster_shape(x1 - x0, y1 - y0, max_nx, max_ny)
        xs = np.linspace(x0, x1, nx)
        ys = np.linspace(y0, y1, ny)
        X, Y = np.meshgrid(xs, ys)
        inv = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
        lon, lat = inv.transform(X, Y)
        conv = np.asarray(pyproj.Proj(crs).get_factors(lon, lat).meridian_convergence)
        kind = "conformal"
    else:
        crs, label, kind, conv = None, "plate carree", "plate_carree", None
        native = grid.shape if grid.kind == "latlon" else None
        nx, ny = _raster_shape(
            (lon_hi - lon_lo) * np.cos(np.deg2rad(0.5 * (lat_lo + lat_hi))),
            lat_hi - lat_lo,
            max_nx,
            max_ny,
            native,
        )
        xs = np.linspace(lon_lo, lon_hi, nx)
        ys = np.linspace(lat_lo, lat_hi, ny)
        lon, lat = np.meshgrid(xs, ys)
    rows, cols, periodic = _index_map(grid, lon, lat)
    return ViewGeometry(
        kind=kind,
        crs=crs,
        label=label,
        xs=xs,
        ys=ys,
        lon=lon,
        lat=lat,
        rows=rows,
        cols=cols,
        periodic=periodic,
        convergence=conv,
        grid=grid,
    )


def _is_conformal(crs) -> bool:
    try:
        f = pyproj.Proj(crs).get_factors(0.0, 45.0)
        return abs(float(f.angular_distortion)) < 1e-3
    except Exception:  # noqa: BLE001
        return False


def _index_map(grid, lon, lat):
    """Fractional (row, col) in the case grid of each point; NaN outside the data."""
    if grid.kind == "latlon":
        lat1 = grid.lat1d
        order = np.argsort(lat1)
        rows = np.interp(lat, lat1[order], order.astype(float), left=np.nan, right=np.nan)
        lonu = _unwrapped_lon(grid)
        if grid.periodic:
            step = (lonu[-1] - lonu[0]) / (lonu.size - 1)
            cols = ((lon - lonu[0]) % 360.0) / step + 1.0  # +1: the padded wrap column
        else:
            ref = lonu[0]
            lon_rel = ref + (lon - ref + 180.0) % 360.0 - 180.0
            if lonu[-1] - ref > 180:
                lon_rel = np.where(lon_rel < ref - 1e-9, lon_rel + 360, lon_rel)
            if lonu[-1] < lonu[0]:
                cols = np.interp(
                    lon_rel,
                    lonu[::-1],
                    np.arange(lonu.size)[::-1].astype(float),
                    left=np.nan,
                    right=np.nan,
                )
            else:
                cols = np.interp(
                    lon_rel, lonu, np.arange(lonu.size, dtype=float), left=np.nan, right=np.nan
                )
        return rows, cols, bool(grid.periodic)
    fwd = pyproj.Transformer.from_crs(grid.crs.geodetic_crs, grid.crs, always_xy=True)
    x, y = fwd.transform(lon, lat)
    cols = (
        np.interp(x, grid.x, np.arange(grid.x.size, dtype=float), left=np.nan, right=np.nan)
        if grid.x[-1] > grid.x[0]
        else np.interp(
            x, grid.x[::-1], np.arange(grid.x.size)[::-1] * 1.0, left=np.nan, right=np.nan
        )
    )
    rows = (
        np.interp(y, grid.y, np.arange(grid.y.size, dtype=float), left=np.nan, right=np.nan)
        if grid.y[-1] > grid.y[0]
        else np.interp(
            y, grid.y[::-1], np.arange(grid.y.size)[::-1] * 1.0, left=np.nan, right=np.nan
        )
    )
    return rows, cols, False


def sample(geom: ViewGeometry, field, nearest: bool = False) -> np.ndarray:
    """The field at the raster points (float32; NaN outside the data and where it is NaN):
    interpolated linearly, or with ``nearest`` the nearest grid point's value (for a field
    of classes, where a value between two means nothing)."""
    return _at_indices(field, geom.rows, geom.cols, geom.periodic, nearest).astype(np.float32)


def sample_at(grid, field, lon, lat) -> np.ndarray:
    """The field (on ``grid``) at the points (lon, lat), interpolated linearly (float64; NaN
    outside the data): a section's points or a profile's."""
    rows, cols, periodic = _index_map(grid, np.asarray(lon, float), np.asarray(lat, float))
    return _at_indices(field, rows, cols, periodic, False)


def rows_at(grid, lon, lat) -> np.ndarray:
    """The fractional row in ``grid`` of each point (lon, lat); NaN outside the data."""
    return _index_map(grid, np.asarray(lon, float), np.asarray(lat, float))[0]


def _at_indices(field, rows, cols, periodic, nearest) -> np.ndarray:
    f = np.asarray(field, dtype=np.float64)
    if periodic:
        f = np.concatenate([f[:, -1:], f, f[:, :1]], axis=1)
    ok = np.isfinite(rows) & np.isfinite(cols)
    r = np.where(ok, rows, 0.0)
    c = np.where(ok, cols, 0.0)
    order = 0 if nearest else 1
    out = ndimage.map_coordinates(f, [r, c], order=order, mode="nearest", prefilter=False)
    out[~ok] = np.nan
    return out


def interval_levels(zmin, zmax, interval):
    """Contour levels at every multiple of ``interval`` within [zmin, zmax]."""
    if not (np.isfinite(zmin) and np.isfinite(zmax) and interval > 0) or zmax < zmin:
        return np.array([])
    start = np.ceil(zmin / interval) * interval
    return np.arange(start, zmax + interval * 1e-9, interval)


def contour_lines(xs, ys, z, levels, min_gap=0.07):
    """Lines of ``z`` (on the raster) at ``levels``: (xs list, ys list, level list, labels).

    Each level's longest line gets a label, at a point along it that shifts
    from level to level so that labels of neighbouring lines do not stack.
    """
    import contourpy

    z = np.ma.masked_invalid(np.asarray(z, dtype=np.float64))
    if z.mask.all() or len(levels) == 0:
        return [], [], [], []
    gen = contourpy.contour_generator(xs, ys, z, line_type="Separate")
    lx, ly, lv, labels = [], [], [], []
    fractions = (0.5, 0.3, 0.7, 0.4, 0.6)
    for n, level in enumerate(levels):
        lines = gen.lines(float(level))
        best = None
        for seg in lines:
            if len(seg) < 2:
                continue
            lx.append(seg[:, 0])
            ly.append(seg[:, 1])
            lv.append(float(level))
            if best is None or len(seg) > len(best):
                best = seg
        if best is not None and len(best) >= 6:
            mid = best[int(len(best) * fractions[n % len(fractions)])]
            labels.append((float(mid[0]), float(mid[1]), float(level)))
    # thin the labels: none closer than min_gap of the view's width to one already kept
    gap = min_gap * (xs[-1] - xs[0])
    kept = []
    for lab in labels:
        if all(math.hypot(lab[0] - k[0], lab[1] - k[1]) > gap for k in kept):
            kept.append(lab)
    return lx, ly, lv, kept


#: the wind below which the air is calm: Beaufort force 0, under 1 kt, 0.5 m/s (WMO's
#: Beaufort scale, from memory)
CALM_MS = 0.5


def vector_lattice(geom: ViewGeometry, u_raster, v_raster, n_across: int = 22):
    """Thinned arrows: start points, ends and angles in view coordinates.

    Returns dict with x0, y0, x1, y1, angle (radians, for the arrow heads) and
    speed, for points of a lattice about ``n_across`` arrows wide; the arrow
    length is the lattice spacing at the 95th-percentile speed (at least :data:`CALM_MS`),
    and ``ref_speed`` that speed.
    """
    ny, nx = u_raster.shape
    step = max(1, nx // n_across)
    jj, ii = np.mgrid[step // 2 : ny : step, step // 2 : nx : step]
    u = u_raster[jj, ii].astype(np.float64)
    v = v_raster[jj, ii].astype(np.float64)
    ok = np.isfinite(u) & np.isfinite(v)
    jj, ii, u, v = jj[ok], ii[ok], u[ok], v[ok]
    speed = np.hypot(u, v)
    x0 = geom.xs[ii]
    y0 = geom.ys[jj]
    if geom.kind == "plate_carree":
        # direction of motion on a lon/lat chart: (u / cos(lat), v) in degrees
        du = u / np.maximum(np.cos(np.deg2rad(y0)), 0.05)
        dv = v
    else:
        g = np.deg2rad(geom.convergence[jj, ii])
        du = u * np.cos(g) - v * np.sin(g)  # earth-relative to view-grid components
        dv = u * np.sin(g) + v * np.cos(g)
    norm = np.hypot(du, dv)
    with np.errstate(invalid="ignore", divide="ignore"):
        du, dv = du / norm, dv / norm
    ref = float(np.nanpercentile(speed, 95)) if speed.size else CALM_MS
    # in a calm, arrows are drawn to the calm's limit, not stretched to a cell's length
    ref = max(ref, CALM_MS)
    cell = (geom.xs[-1] - geom.xs[0]) / max(nx - 1, 1) * step
    length = cell * 0.95 * np.minimum(speed / ref, 1.5)
    x1 = x0 + du * length
    y1 = y0 + dv * length
    keep = np.isfinite(x1) & np.isfinite(y1)
    return {
        "lat": geom.lat[jj, ii][keep],
        "x0": x0[keep],
        "y0": y0[keep],
        "x1": x1[keep],
        "y1": y1[keep],
        "angle": np.arctan2(dv, du)[keep],
        "speed": speed[keep],
        "ref_speed": ref,
        "cell": cell,
    }


def _one_barb(at, staff_dir, side, k, counts, cell):
    """One barb's lines (the staff, then each barb) and pennant triangles, as point lists in
    view coordinates: the staff from ``at`` along ``staff_dir`` (a unit vector where a unit
    of x is ``k`` of y), the features on the ``side`` (+1 right, -1 left) of it."""
    (x0, y0), (dx, dy) = at, staff_dir
    px, py = side * dy, -side * dx
    staff, step, reach = 0.9 * cell, 0.13 * 0.9 * cell, 0.4 * 0.9 * cell

    def point(along, out=0.0):
        return x0 + (along * dx + out * px) / k, y0 + along * dy + out * py

    pennants, barbs, halves = counts
    lines, flags = [[point(0.0), point(staff)]], []
    pos = staff
    for _ in range(pennants):
        flags.append([point(pos), point(pos, reach), point(pos - step)])
        pos -= step * 1.2
    if pennants == 0 and barbs == 0:
        pos -= step  # a lone half barb, set in from the end
    for size in [1.0] * barbs + [0.5] * halves:
        # a barb leans toward the staff's end
        lines.append([point(pos), point(pos + 0.3 * reach * size, reach * size)])
        pos -= step
    return lines, flags


#: knots in a pennant, a barb and a half barb (the trade's wind barbs, common practice, no
#: source); speeds are rounded to the nearest half barb
PENNANT_KT, BARB_KT, HALF_KT = 50, 10, 5


def barb_counts(speed_ms):
    """(pennants, barbs, half barbs) of a wind speed, rounded to the nearest 5 kt."""
    from .wording import KT

    kt = int(HALF_KT * round(float(speed_ms) / KT / HALF_KT))
    pennants, rest = divmod(kt, PENNANT_KT)
    barbs, rest = divmod(rest, BARB_KT)
    return pennants, barbs, rest // HALF_KT


def wind_barbs(vectors, k: float):
    """Wind barbs at the points of :func:`vector_lattice`, in view coordinates.

    The staff runs from the point toward where the wind comes from, a lattice cell long;
    pennants, barbs and half barbs (:func:`barb_counts`) sit at its far end, on the side of
    low pressure: to the right of the staff seen from the point in the northern hemisphere,
    to the left in the southern (common practice, no source). A lone half barb is set in
    from the end so that it is not read as a full barb. The shapes are made where a unit of
    x is ``k`` (ViewGeometry.x_ground_scale) as long as a unit of y, so that they keep their
    shape on a chart at true shape. Returns {"lines": (xs, ys), "pennants": (xs, ys),
    "calm": (x, y)}: lists of point lists for the staffs and barbs and for the pennants'
    triangles, and the points whose wind rounds to 0 kt (a circle on the chart)."""
    lines_x, lines_y, flags_x, flags_y, calm_x, calm_y = [], [], [], [], [], []
    n = len(vectors["x0"])
    cell = vectors["cell"] * k  # in units of y
    for i in range(n):
        x0, y0 = float(vectors["x0"][i]), float(vectors["y0"][i])
        p, b, h = barb_counts(vectors["speed"][i])
        if p == b == h == 0:
            calm_x.append(x0)
            calm_y.append(y0)
            continue
        # the direction of motion on the screen, then the staff's: into the wind
        sx = (float(vectors["x1"][i]) - x0) * k
        sy = float(vectors["y1"][i]) - y0
        norm = math.hypot(sx, sy)
        if not norm > 0:
            continue
        dx, dy = -sx / norm, -sy / norm
        side = 1.0 if vectors["lat"][i] >= 0 else -1.0
        lines, flags = _one_barb((x0, y0), (dx, dy), side, k, (p, b, h), cell)
        for line in lines:
            lines_x.append([q[0] for q in line])
            lines_y.append([q[1] for q in line])
        for tri in flags:
            flags_x.append([q[0] for q in tri])
            flags_y.append([q[1] for q in tri])
    return {"lines": (lines_x, lines_y), "pennants": (flags_x, flags_y), "calm": (calm_x, calm_y)}


# -- coastlines ----------------------------------------------------------------------


def _coast_file():
    for d in COAST_DIRS:
        p = os.path.join(d, "shapefiles", "gshhs", "c", "GSHHS_c_L1.shp")
        if os.path.exists(p):
            return d, p
    return None, None


@functools.lru_cache(maxsize=1)
def _coast_polygons():
    """GSHHS coarse shorelines (lon/lat) from cartopy's offline data, or None."""
    data_dir, path = _coast_file()
    if path is None:
        return None
    try:
        import warnings

        import cartopy
        import cartopy.feature as cfeature

        cartopy.config["pre_existing_data_dir"] = data_dir
        feature = cfeature.GSHHSFeature(scale="c", levels=[1])
        quiet = logging.getLogger("shapefile")
        level = quiet.level
        quiet.setLevel(logging.ERROR)  # pyshp notes rings it re-orders; harmless here
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return list(feature.geometries())
        finally:
            quiet.setLevel(level)
    except Exception:
        log.exception("could not read the offline coastlines")
        return None


_COAST_CACHE: dict = {}


def coastlines(geom: ViewGeometry):
    """(xs, ys) lists of coastline lines in view coordinates, or None if none are available.

    Projected once per view geometry and cached.
    """
    key = (
        geom.kind,
        None if geom.crs is None else geom.crs.to_wkt(),
        tuple(np.round(geom.extent, 3)),
    )
    if key in _COAST_CACHE:
        return _COAST_CACHE[key]
    polys = _coast_polygons()
    if polys is None:
        return None
    from shapely import box as sbox
    from shapely import clip_by_rect

    lon_lo, lon_hi = np.nanmin(geom.lon) - 2, np.nanmax(geom.lon) + 2
    lat_lo, lat_hi = max(np.nanmin(geom.lat) - 2, -90), min(np.nanmax(geom.lat) + 2, 90)
    if geom.kind == "conformal":
        lonw = np.rad2deg(np.unwrap(np.deg2rad(geom.lon), axis=1))
        lon_lo, lon_hi = np.nanmin(lonw) - 2, np.nanmax(lonw) + 2
    xs, ys = [], []
    shifts = (-360.0, 0.0, 360.0)  # GSHHS longitudes are -180..180; views may span 0..360
    window = sbox(lon_lo, lat_lo, lon_hi, lat_hi)
    for shift in shifts:
        for poly in polys:
            b = poly.bounds
            if b[2] + shift < lon_lo or b[0] + shift > lon_hi or b[3] < lat_lo or b[1] > lat_hi:
                continue
            from shapely import affinity

            g = affinity.translate(poly, xoff=shift) if shift else poly
            g = clip_by_rect(g.boundary, *window.bounds)
            for line in getattr(g, "geoms", [g]):
                if line.is_empty:
                    continue
                c = np.asarray(line.coords)
                if c.shape[0] < 2:
                    continue
                x, y = (
                    geom.to_view(c[:, 0], c[:, 1])
                    if geom.kind == "conformal"
                    else (c[:, 0], c[:, 1])
                )
                xs.append(np.asarray(x, dtype=np.float64))
                ys.append(np.asarray(y, dtype=np.float64))
    _COAST_CACHE[key] = (xs, ys)
    return xs, ys


_GRATICULE_CACHE: dict = {}


def graticule(geom: ViewGeometry, step: float | None = None):
    """Meridians and parallels for a conformal view, with labels along the edges (cached
    per view geometry, like the coastlines: the page sends them again only when new)."""
    if geom.kind != "conformal":
        return [], [], []
    key = (None if geom.crs is None else geom.crs.to_wkt(), tuple(np.round(geom.extent, 3)), step)
    if key not in _GRATICULE_CACHE:
        _GRATICULE_CACHE[key] = _graticule(geom, step)
    return _GRATICULE_CACHE[key]


def _graticule(geom: ViewGeometry, step: float | None):
    lonw = np.rad2deg(np.unwrap(np.deg2rad(geom.lon), axis=1))
    lon_lo, lon_hi = np.nanmin(lonw), np.nanmax(lonw)
    lat_lo, lat_hi = np.nanmin(geom.lat), np.nanmax(geom.lat)
    span = max(lon_hi - lon_lo, lat_hi - lat_lo)
    step = step or next(s for s in (1, 2, 5, 10, 20, 30) if span / s <= 12)
    xs, ys, labels = [], [], []
    for lon in np.arange(np.floor(lon_lo / step) * step, lon_hi + step, step):
        la = np.linspace(max(lat_lo - step, -89.9), min(lat_hi + step, 89.9), 120)
        x, y = geom.to_view(np.full_like(la, lon), la)
        xs.append(np.asarray(x))
        ys.append(np.asarray(y))
        # labelled where it enters the frame (the bottom edge, or a side: put at the bottom
        # whatever its way in, a label would name a place it is not)
        at = _entry(np.asarray(x), np.asarray(y), geom.extent)
        if at is not None:
            labels.append((*at, _deg(((lon + 180) % 360) - 180, "E", "W"), "lon"))
    for lat in np.arange(np.floor(lat_lo / step) * step, lat_hi + step, step):
        if abs(lat) >= 90:
            continue
        lo = np.linspace(lon_lo - step, lon_hi + step, 200)
        x, y = geom.to_view(lo, np.full_like(lo, lat))
        xs.append(np.asarray(x))
        ys.append(np.asarray(y))
        at = _entry(np.asarray(x), np.asarray(y), geom.extent)
        if at is not None:
            labels.append((*at, _deg(lat, "N", "S"), "lat"))
    return xs, ys, _thin_labels(labels, geom.extent)


def _entry(x, y, extent):
    """Where the line through the points (x, y) first enters the rectangle ``extent`` (x0,
    x1, y0, y1) across its bottom or left edge, as (x, y) (linear between the two points
    about the crossing), or None. A label is drawn above and to the right of its point, so
    one on the top or right edge would fall outside the frame."""
    x0, x1, y0, y1 = extent
    best = None
    for a, b, level, lo, hi, swap in ((y, x, y0, x0, x1, True), (x, y, x0, y0, y1, False)):
        d = a - level
        ok = np.isfinite(d[:-1]) & np.isfinite(d[1:]) & np.isfinite(b[:-1]) & np.isfinite(b[1:])
        for i in np.nonzero(ok & (np.sign(d[:-1]) != np.sign(d[1:])))[0]:
            f = d[i] / (d[i] - d[i + 1])
            bc = float(b[i] + f * (b[i + 1] - b[i]))
            if lo <= bc <= hi:
                if best is None or i + f < best[0]:
                    best = (i + f, (bc, float(level)) if swap else (float(level), bc))
                break
    return None if best is None else best[1]


def _thin_labels(labels, extent, chars_across=70.0, rows_up=32.0):
    """Drop graticule labels that would overlap one already kept (corners included).

    A label's box is estimated from its length: the view is about ``chars_across``
    characters wide and ``rows_up`` lines high at the chart's size.
    """
    x0, x1, y0, y1 = extent
    cw, ch = (x1 - x0) / chars_across, (y1 - y0) / rows_up
    # the lower left corner is the reference arrow's (app.compute: its start 4 % and 5 % in
    # from the corner, its label "arrow: 20 m/s" above it)
    arrow = (x0, y0, x0 + 0.04 * (x1 - x0) + 18 * cw, y0 + 0.05 * (y1 - y0) + 2.2 * ch)
    kept, boxes = [], [arrow]
    # meridians named along the bottom and parallels along the left side first, as a reader
    # looks for them; a line that enters by the other edge is named there if room is left
    natural = [lab for lab in labels if (lab[3] == "lon") == (lab[1] == y0)]
    for x, y, text, kind in natural + [lab for lab in labels if lab not in natural]:
        w = (len(text) + 1) * cw
        # lon labels sit on the bottom edge, lat labels on the left edge, each drawn to the
        # right of and above its point (the chart's text is anchored at its left and bottom)
        box = (x, y, x + w, y + 1.4 * ch)
        # a label cut by the frame's edge reads as another one ("60N" as "0N"): only whole
        # labels are kept
        if box[0] < x0 or box[2] > x1 or box[1] < y0 or box[3] > y1:
            continue
        if any(
            not (box[2] < b[0] or box[0] > b[2] or box[3] < b[1] or box[1] > b[3]) for b in boxes
        ):
            continue
        kept.append((x, y, text, kind))
        boxes.append(box)
    return kept
