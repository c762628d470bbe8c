"""Weather systems found in one level's fields: closed lows, closed highs, jet streaks.

**Closed lows and highs** of the geopotential height on a pressure level, or of the
mean sea level pressure. A low is a local minimum enclosed by at least one closed
contour: a contour at a multiple of the chart's interval (:func:`contour_interval`) around
it that

* reaches neither the edge of the data (the domain's edge, points without data);
* does not enclose a deeper minimum;
* does not go all the way round a global grid without holding a pole (a band between two
  latitude circles is not enclosed by one contour);
* does not cross the equator, and encloses at most ``max_share`` (:data:`MAX_SHARE`) of the
  Earth's surface: a contour that does either encloses a planetary-scale feature (a
  subtropical ridge, the polar trough), not a closed synoptic system.

On a global lat-lon grid the pole row is one point: every point of a row at the pole (or
within three quarters of a working-grid row of it) is a neighbour of every other, so a
contour that encloses the pole is closed (a polar cap), and a low a few degrees from the
pole keeps its wide closed contours. Going up from the minimum one interval at a time, the
last such contour is its *outermost closed contour*; the low's depth is that contour's
value minus the central value, and a low shallower than ``min_depth`` (half an interval
unless told otherwise) is dropped. Highs are the same for the field turned upside down.
The contours are found as connected regions below (above) each level with
``scipy.ndimage.label`` -- the set inside a closed contour -- on a grid coarsened to about
half a degree; the centre is then found on the full grid and refined below the grid by the
paraboloid through its nine neighbours (the central value stays the grid's).

**Jet streaks** (of wind speed). A local maximum of the speed above a threshold that
depends on the level (:func:`jet_threshold`); its core is the connected region where
the speed is at least ``core_fraction`` (0.8) of the peak; two peaks in one core are one
streak (the higher). A wind maximum belongs to a closed low or high -- its ring of
strongest wind, a tropical cyclone's eyewall -- and is no jet streak when its peak lies
within :data:`RING_KM` of the vortex's centre and either inside the vortex's outermost
closed contour or, within 1.5 times that contour's equivalent radius, blowing mostly
around the centre (the sine of the angle between the wind and the line to the centre at
least :data:`RING_TANGENTIAL`).

**Regions.** So that a system's region can be carried in a link and drawn on any chart,
a low's or high's region is the circle around its centre with the area of its outermost
closed contour (:meth:`Region.circle`), cut back to the equator where it would cross it;
a streak's is a rectangle aligned with the flow at its peak, straight-sided in the
azimuthal equidistant projection centred on the peak (pyproj), that covers the core and
as much again upstream (the entrance) and downstream (the exit), and at least
:data:`JET_MIN_HALF_LENGTH` by :data:`JET_MIN_HALF_WIDTH` grid spacings, so that a
verdict has points to stand on. Its four quadrants (entrance and exit, left and right of
the flow looking downstream) are regions too.

Thresholds are the project's own choices, from common practice on weather charts (no
source; values from memory), and every function takes others.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from . import constants as C
from .grid import Grid
from .region import Region, great_circle_km

__all__ = [
    "System",
    "contour_interval",
    "jet_threshold",
    "find_closed_extrema",
    "find_jet_streaks",
    "find_systems",
    "match_tracks",
    "track_limit_km",
    "TRACK_SPEED_KMH",
    "MIN_TRACK_KM",
    "TRACK_SPACINGS",
    "MAX_SHARE",
    "RING_KM",
    "RING_TANGENTIAL",
    "SEA_LEVEL_INTERVAL_PA",
    "JET_MIN_HALF_LENGTH",
    "JET_MIN_HALF_WIDTH",
    "QUADRANTS",
]

#: The largest share of the Earth's surface the outermost closed contour of a closed
#: synoptic system may enclose (the project's own choice: a tenth of the globe is a cap
#: poleward of about 53 degrees; a contour enclosing more belongs to a planetary-scale
#: feature such as the subtropical ridge).
MAX_SHARE = 0.10
#: A wind maximum farther than this from a closed centre is never that vortex's ring, km
#: (the project's own choice).
RING_KM = 1000.0
#: Near a closed centre, a wind maximum blowing this much around the centre (the sine of
#: the angle between the wind and the line to the centre) is its ring (the project's own).
RING_TANGENTIAL = 0.8
#: The contour interval of sea-level pressure charts, Pa (4 hPa, common practice).
SEA_LEVEL_INTERVAL_PA = 400.0
#: A jet streak's region reaches at least this many grid spacings upstream and downstream
#: of the peak, and this many either side of the flow (the project's own choice: 9 by 7
#: points, enough for the verdict's 25).
JET_MIN_HALF_LENGTH = 4.0
JET_MIN_HALF_WIDTH = 3.0
#: A jet streak's region at most this long and wide either side of the peak, km
#: (unless the grid spacing asks for more).
JET_MAX_HALF_LENGTH_KM = 3000.0
JET_MAX_HALF_WIDTH_KM = 1000.0
#: The quadrants of a jet streak, named looking downstream.
QUADRANTS = ("entrance_left", "entrance_right", "exit_left", "exit_right")


def contour_interval(pressure_pa: float | None) -> float:
    """The contour interval of a chart at this level (common practice, from memory).

    Heights, m: 30 m (3 dam) from 1000 to 700 hPa, 60 m from 700 to 400 hPa, 120 m
    above. ``None`` (sea level): 400 Pa (4 hPa) of sea-level pressure.
    """
    if pressure_pa is None:
        return SEA_LEVEL_INTERVAL_PA
    p = float(pressure_pa)
    if p >= 70000.0:
        return 30.0
    if p >= 40000.0:
        return 60.0
    return 120.0


def jet_threshold(pressure_pa: float) -> float:
    """The wind speed a jet streak must exceed at this level, m s-1 (common practice,
    from memory): 30 (about 60 kt) at and above 300 hPa, 25 up to 500 hPa, 20 up to
    700 hPa, 15 below (a low-level jet)."""
    p = float(pressure_pa)
    if p <= 30000.0:
        return 30.0
    if p <= 50000.0:
        return 25.0
    if p <= 70000.0:
        return 20.0
    return 15.0


@dataclasses.dataclass(frozen=True)
class System:
    """One weather system on one level at one time.

    ``value``, ``depth`` and ``outer_level`` are in the units of the field the system was
    found in (``units``: "m" for heights, "Pa" for sea-level pressure, "m s-1" for a
    streak's peak speed).
    """

    kind: str  # "low", "high" or "jet_streak"
    lon: float  # centre (refined below the grid), degrees
    lat: float
    value: float  # central value on the grid, or peak speed
    depth: float | None  # below (low) or above (high) the outermost closed contour
    outer_level: float | None  # the outermost closed contour's value
    area_km2: float  # inside the outermost closed contour, or the streak's core
    region: Region  # circle (lows, highs) or flow-aligned polygon (streaks)
    index: tuple  # (row, column) of the centre on the grid
    units: str = "m"
    note: str = ""
    #: a streak's flow-aligned frame: peak, direction, half-length and half-width (km),
    #: the corners of its region and of its quadrants
    frame: dict | None = dataclasses.field(default=None, compare=False)
    #: the quadrants of a streak, name -> Region
    quadrants: dict | None = dataclasses.field(default=None, compare=False, repr=False)
    #: inside the outermost closed contour, on the working grid, and its coarsening
    inside: np.ndarray | None = dataclasses.field(default=None, compare=False, repr=False)
    coarsening: int = dataclasses.field(default=1, compare=False, repr=False)

    @property
    def intensity(self) -> float:
        """What ranks systems of a kind: a low's or high's depth, a streak's peak speed."""
        return self.value if self.kind == "jet_streak" else float(self.depth or 0.0)

    @property
    def radius_km(self) -> float:
        """The radius of the circle with the area of the outermost closed contour, km."""
        return math.sqrt(self.area_km2 / math.pi)

    def encloses(self, row: int, col: int) -> bool:
        """Is the grid point inside this low's or high's outermost closed contour?"""
        if self.inside is None:
            return False
        r, c = row // self.coarsening, col // self.coarsening
        return (
            0 <= r < self.inside.shape[0]
            and 0 <= c < self.inside.shape[1]
            and bool(self.inside[r, c])
        )

    def as_dict(self) -> dict:
        r = self.region
        if r.kind == "circle":
            region = {
                "kind": "circle",
                "lon": r.vertices()[0][0],
                "lat": r.vertices()[1][0],
                "radius_km": r.radius_km,
            }
        elif self.frame is not None and r.kind == "polygon":
            region = {
                "kind": "flow_box",
                "projection": "aeqd",
                "lon_0": self.frame["lon"],
                "lat_0": self.frame["lat"],
                "corners": [list(c) for c in self.frame["corners"]],
                "length_km": 2 * self.frame["half_length_km"],
                "width_km": 2 * self.frame["half_width_km"],
                "direction_deg": self.frame["direction_deg"],
            }
        else:
            region = {
                "kind": "box",
                "west": r.west,
                "east": r.east,
                "south": r.south,
                "north": r.north,
            }
        out = {
            "kind": self.kind,
            "lon": self.lon,
            "lat": self.lat,
            "value": self.value,
            "units": self.units,
            "depth": self.depth,
            "outer_level": self.outer_level,
            "area_km2": self.area_km2,
            "intensity": self.intensity,
            "region": region,
            "note": self.note,
        }
        if self.frame is not None:
            out["quadrants"] = {
                q: {"corners": [list(c) for c in self.frame["quadrants"][q]]} for q in QUADRANTS
            }
        return out


# -- the working grid -------------------------------------------------------------------


@dataclasses.dataclass
class _Work:
    """The working grid of about half a degree (block means of k x k points) and how its
    points neighbour each other."""

    k: int
    lat: np.ndarray
    lon: np.ndarray
    area: np.ndarray  # km2
    periodic: bool  # the first and last columns are neighbours
    joined: tuple  # rows whose points are all neighbours of each other (a pole)
    spacing_km: float  # the square root of the median cell area
    grid_spacing_km: float  # the same of the grid itself


def _coarsening(grid: Grid, target_km: float = 55.0) -> int:
    """How many points of the grid make one of the working grid (about half a degree)."""
    area = np.nanmedian(grid.cell_area)
    spacing_km = math.sqrt(area) / 1e3 if area > 0 else target_km
    return max(1, int(target_km // max(spacing_km, 1e-3)))


def _block_mean(a, k):
    if k == 1:
        return np.asarray(a, dtype=np.float64).copy()
    a = np.asarray(a, dtype=np.float64)
    ny, nx = (a.shape[0] // k) * k, (a.shape[1] // k) * k
    b = a[:ny, :nx].reshape(ny // k, k, nx // k, k)
    with np.errstate(invalid="ignore"):
        return np.mean(b, axis=(1, 3))  # a block with a point without data has none


def _working(grid: Grid) -> _Work:
    """The working grid of ``grid``, made once and kept with it."""
    cache = grid.__dict__.setdefault("_systems_work", {})
    if "work" not in cache:
        cache["work"] = _make_working(grid)
    return cache["work"]


def _make_working(grid: Grid) -> _Work:
    k = _coarsening(grid)
    area = _block_mean(grid.cell_area, k) * k * k / 1e6
    lat = _block_mean(grid.lat, k)
    rad = np.deg2rad(np.asarray(grid.lon, dtype=np.float64))
    lon = np.rad2deg(np.arctan2(_block_mean(np.sin(rad), k), _block_mean(np.cos(rad), k)))
    periodic = bool(getattr(grid, "periodic", False)) and lat.shape[1] * k == grid.shape[1]
    joined = []
    if periodic and lat.shape[0] >= 2:
        for r, nb in ((0, 1), (lat.shape[0] - 1, lat.shape[0] - 2)):
            step = abs(float(np.mean(lat[r]) - np.mean(lat[nb])))
            if 90.0 - abs(float(np.mean(lat[r]))) <= 0.75 * step + 1e-9:
                joined.append(r)
    spacing = math.sqrt(max(float(np.nanmedian(area)), 1e-6))
    grid_spacing = math.sqrt(max(float(np.nanmedian(grid.cell_area)), 1.0)) / 1e3
    return _Work(k, lat, lon, area, periodic, tuple(joined), spacing, grid_spacing)


def _label(mask, work: _Work):
    """Connected regions of ``mask`` (4-connected); on a periodic grid the first and last
    columns are neighbours, and the points of a joined row (a pole) are all one.

    Returns (labels, count); labels need not be consecutive."""
    from scipy import ndimage

    labels, n = ndimage.label(mask)
    if not n:
        return labels, 0
    pairs = []
    if work.periodic:
        a, b = labels[:, 0], labels[:, -1]
        sel = (a > 0) & (b > 0) & (a != b)
        if sel.any():
            pairs.append(np.stack([a[sel], b[sel]], axis=1))
    for r in work.joined:
        on = np.unique(labels[r])
        on = on[on > 0]
        if on.size > 1:
            pairs.append(np.stack([on[:-1], on[1:]], axis=1))
    if not pairs:
        return labels, n
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    p = np.concatenate(pairs)
    graph = coo_matrix((np.ones(len(p)), (p[:, 0], p[:, 1])), shape=(n + 1, n + 1))
    _, comp = connected_components(graph, directed=False)
    remap = comp + 1
    remap[0] = 0  # the background has no edges: its component is its own
    return remap[labels], int(remap.max())


def _edge(work: _Work, invalid):
    """Points whose region cannot be closed: the domain's edges (the first and last rows
    unless they are a pole; the first and last columns unless periodic), and the eight
    neighbours of every point without data."""
    from scipy import ndimage

    shape = work.lat.shape
    edge = np.zeros(shape, dtype=bool)
    for r in (0, shape[0] - 1):
        if r not in work.joined:
            edge[r, :] = True
    if not work.periodic:
        edge[:, 0] = edge[:, -1] = True
    if invalid.any():
        # every point that shares a grid cell with a point without data: no contour can be
        # drawn through such a cell
        if work.periodic:
            padded = np.concatenate([invalid[:, -1:], invalid, invalid[:, :1]], axis=1)
            grown = ndimage.binary_dilation(padded, structure=np.ones((3, 3), dtype=bool))
            edge |= grown[:, 1:-1]
        else:
            edge |= ndimage.binary_dilation(invalid, structure=np.ones((3, 3), dtype=bool))
    return edge


def _sizes(labels, work: _Work, size: int) -> np.ndarray:
    """The area of each label's region, km2."""
    return np.bincount(labels.ravel(), weights=work.area.ravel(), minlength=size)


def _open_regions(labels, n, work: _Work, edge, max_share, radius) -> np.ndarray:
    """For each label, True if its region is not enclosed by a closed synoptic contour
    (see the module docstring)."""
    from scipy import ndimage

    size = n + 1
    open_ = np.bincount(labels[edge], minlength=size) > 0
    earth_km2 = 4.0 * math.pi * (radius / 1e3) ** 2
    open_ |= _sizes(labels, work, size) > max_share * earth_km2
    south = np.bincount(labels[work.lat < 0.0], minlength=size) > 0
    north = np.bincount(labels[work.lat > 0.0], minlength=size) > 0
    open_ |= south & north  # crosses the equator
    if work.periodic:
        # a region round the whole grid that holds no pole is a band between two latitude
        # circles: no single contour encloses it
        nx = labels.shape[1]
        caps: set[int] = set()
        for r in work.joined:
            caps.update(int(x) for x in np.unique(labels[r]) if x)
        for i, sl in enumerate(ndimage.find_objects(labels), start=1):
            if sl is None or open_[i] or i in caps:
                continue
            if sl[1].stop - sl[1].start == nx and (labels[sl] == i).any(axis=0).all():
                open_[i] = True
    open_[0] = True
    return open_


# -- lows and highs ---------------------------------------------------------------------------


def _candidates(zf, invalid, work: _Work):
    """Local minima of the working field: no lower point among its four neighbours (the
    neighbours of the regions); on a joined row (a pole, one point) the row's lowest point
    if no point of the next row is lower."""
    nb = np.full(zf.shape, np.inf)
    nb[1:] = np.minimum(nb[1:], zf[:-1])
    nb[:-1] = np.minimum(nb[:-1], zf[1:])
    if work.periodic:
        nb = np.minimum(nb, np.roll(zf, 1, axis=1))
        nb = np.minimum(nb, np.roll(zf, -1, axis=1))
    else:
        nb[:, 1:] = np.minimum(nb[:, 1:], zf[:, :-1])
        nb[:, :-1] = np.minimum(nb[:, :-1], zf[:, 1:])
    minima = (zf <= nb) & ~invalid
    ny = zf.shape[0]
    for r, row_next in ((0, 1), (ny - 1, ny - 2)):
        minima[r, :] = False
        if r in work.joined and np.isfinite(zf[r]).any():
            c = int(np.argmin(zf[r]))
            if np.isfinite(zf[r, c]) and zf[r, c] <= np.min(zf[row_next]):
                minima[r, c] = True
    if not work.periodic:
        minima[:, 0] = minima[:, -1] = False
    return np.argwhere(minima)


def _refine(z, r, c, periodic):
    """The fractional (row, column) of the extremum of the paraboloid through the 3 x 3
    neighbours of (r, c), least squares; the grid point itself where the neighbours are
    not all there or the fit has no extremum within one grid length."""
    ny, nx = z.shape
    if r <= 0 or r >= ny - 1 or (not periodic and (c <= 0 or c >= nx - 1)):
        return float(r), float(c)
    cols = [(c + d) % nx for d in (-1, 0, 1)]
    block = z[r - 1 : r + 2][:, cols]
    if not np.isfinite(block).all():
        return float(r), float(c)
    yy, xx = np.mgrid[-1:2, -1:2]
    a = np.stack(
        [np.ones(9), xx.ravel(), yy.ravel(), xx.ravel() ** 2, yy.ravel() ** 2, (xx * yy).ravel()],
        axis=1,
    )
    coef = np.linalg.lstsq(a, block.ravel(), rcond=None)[0]
    _, b, cy, d, e, f = coef
    hess = np.array([[2 * d, f], [f, 2 * e]])
    det = np.linalg.det(hess)
    if not det > 0:
        return float(r), float(c)
    dx, dy = np.linalg.solve(hess, [-b, -cy])
    if abs(dx) > 1.0 or abs(dy) > 1.0:
        return float(r), float(c)
    return r + float(dy), c + float(dx)


def _position(grid: Grid, rf, cf):
    """Longitude and latitude (degrees) at a fractional grid index, bilinear in the index
    (longitudes unwrapped about the nearest point)."""
    ny, nx = grid.shape
    r0, c0 = int(math.floor(rf)), int(math.floor(cf))
    tr, tc = rf - r0, cf - c0
    lon_ref = float(grid.lon[int(round(rf)) % ny, int(round(cf)) % nx])
    lat = lon = wsum = 0.0
    for dr, wr in ((0, 1 - tr), (1, tr)):
        for dc, wc in ((0, 1 - tc), (1, tc)):
            w = wr * wc
            if w == 0:
                continue
            rr, cc = min(r0 + dr, ny - 1), (c0 + dc) % nx
            lat += w * float(grid.lat[rr, cc])
            dl = (float(grid.lon[rr, cc]) - lon_ref + 180.0) % 360.0 - 180.0
            lon += w * (lon_ref + dl)
            wsum += w
    return (lon / wsum + 180.0) % 360.0 - 180.0, lat / wsum


def find_closed_extrema(
    grid: Grid,
    height,
    pressure_pa: float | None,
    kind: str = "low",
    *,
    interval: float | None = None,
    min_depth: float | None = None,
    max_levels: int = 400,
    max_share: float = MAX_SHARE,
    units: str | None = None,
) -> list:
    """Closed lows (``kind="low"``) or highs of a field, deepest first.

    ``height`` is the geopotential height (m) of the level ``pressure_pa``, or, with
    ``pressure_pa=None``, the sea-level pressure (Pa; interval 400 Pa unless told). See
    the module docstring for the rule. Returns :class:`System` objects.
    """
    if kind not in ("low", "high"):
        raise ValueError("kind is 'low' or 'high'")
    ci = float(interval or contour_interval(pressure_pa))
    units = units or ("Pa" if pressure_pa is None else "m")
    depth_min = 0.5 * ci if min_depth is None else float(min_depth)
    sign = 1.0 if kind == "low" else -1.0
    z_full = sign * np.asarray(height, dtype=np.float64)
    work = _working(grid)
    k = work.k
    z = _block_mean(z_full, k)
    invalid = ~np.isfinite(z)
    zf = np.where(invalid, np.inf, z)
    cand = _candidates(zf, invalid, work)
    if cand.size == 0:
        return []
    zc = zf[cand[:, 0], cand[:, 1]]
    order = np.argsort(zc, kind="stable")
    cand, zc = cand[order], zc[order]
    edge = _edge(work, invalid)
    outer = np.full(len(cand), np.nan)
    outer_area = np.zeros(len(cand))
    done = np.zeros(len(cand), dtype=bool)
    level = math.floor(zc[0] / ci) * ci + ci
    top = float(np.max(zf[np.isfinite(zf)]))
    for _ in range(max_levels):
        if done.all() or level > top + ci:
            break
        active = ~done & (zc < level)
        if not active.any():
            level += ci
            continue
        labels, n = _label(zf < level, work)
        lab = labels[cand[:, 0], cand[:, 1]]
        open_ = _open_regions(labels, n, work, edge, max_share, grid.radius)
        # the deepest candidate of each region owns it; the others are merged into it
        first = {}
        for i, lb in enumerate(lab):
            if lb and lb not in first:
                first[lb] = i
        sizes = _sizes(labels, work, n + 1)
        for i in map(int, np.nonzero(active)[0]):
            lb = lab[i]
            if not lb or open_[lb] or first[lb] != i:
                done[i] = True  # open, or now around a deeper extremum: the last level holds
                continue
            outer[i] = level
            outer_area[i] = sizes[lb]
        level += ci
    found = []
    ny, nx = z_full.shape
    for i, (r, c) in enumerate(cand):
        if not np.isfinite(outer[i]):
            continue
        # the extremum on the full grid within the working cell (the point itself when the
        # working grid is the grid)
        r0, r1 = r * k, min(ny, (r + 1) * k)
        c0, c1 = c * k, min(nx, (c + 1) * k)
        block = z_full[r0:r1, c0:c1]
        if not np.isfinite(block).any():
            continue
        j = np.nanargmin(block)
        fr, fc = r0 + j // block.shape[1], c0 + j % block.shape[1]
        centre = float(z_full[fr, fc])
        depth = float(outer[i] - centre)
        if depth < depth_min:
            continue
        if r in work.joined:
            lon, lat = float(grid.lon[fr, fc]), float(grid.lat[fr, fc])
        else:
            lon, lat = _position(grid, *_refine(z_full, fr, fc, work.periodic))
        labels, _ = _label(zf < outer[i], work)
        inside = labels == labels[r, c]
        radius = max(math.sqrt(outer_area[i] / math.pi), 1.0)
        note = ""
        to_equator = abs(lat) * math.pi / 180.0 * grid.radius / 1e3
        if radius > to_equator and abs(lat) > 0:
            note = (
                f"its region is cut back to the equator ({to_equator:.0f} km from the "
                f"centre; the circle of its contour's area would reach {radius:.0f} km)"
            )
            radius = max(to_equator, 1.0)
        found.append(
            System(
                kind,
                (lon + 180.0) % 360.0 - 180.0,
                lat,
                sign * centre,
                depth,
                float(sign * outer[i]),
                float(outer_area[i]),
                Region.circle(lon, lat, radius),
                (int(fr), int(fc)),
                units,
                note,
                inside=inside,
                coarsening=k,
            )
        )
    found.sort(key=lambda s: -(s.depth or 0.0))
    return found


# -- jet streaks ------------------------------------------------------------------------------


def _aeqd(lon0, lat0, radius):
    """Transformers to and from the azimuthal equidistant projection centred on a point
    (x east, y north at the centre, m), on a sphere of the grid's radius."""
    import pyproj

    crs = pyproj.CRS.from_proj4(
        f"+proj=aeqd +lat_0={lat0!r} +lon_0={lon0!r} +R={radius!r} +units=m +no_defs"
    )
    geo = crs.geodetic_crs
    return (
        pyproj.Transformer.from_crs(geo, crs, always_xy=True),
        pyproj.Transformer.from_crs(crs, geo, always_xy=True),
    )


def flow_box_outline(inverse, corners_xy, n: int = 40):
    """Lon/lat points along the sides of a quadrilateral whose sides are straight in the
    projection of ``inverse`` (a pyproj Transformer to lon/lat), ``n`` per side."""
    t = np.linspace(0.0, 1.0, n, endpoint=False)
    xs = np.concatenate(
        [corners_xy[i][0] + (corners_xy[(i + 1) % 4][0] - corners_xy[i][0]) * t for i in range(4)]
    )
    ys = np.concatenate(
        [corners_xy[i][1] + (corners_xy[(i + 1) % 4][1] - corners_xy[i][1]) * t for i in range(4)]
    )
    lons, lats = inverse.transform(xs, ys)
    return np.asarray(lons), np.asarray(lats)


def _rect(ex, ey, a0, a1, b0, b1):
    """Corners (x, y) of the rectangle along in [a0, a1], cross in [b0, b1] (left of the
    flow positive), for the flow direction (ex, ey); counter-clockwise."""

    def pt(a, b):
        return (a * ex - b * ey, a * ey + b * ex)

    return [pt(a0, b1), pt(a0, b0), pt(a1, b0), pt(a1, b1)]


def _flow_box(lon0, lat0, u0, v0, core_lon, core_lat, spacing_km, radius):
    """The flow-aligned region of a streak (see the module docstring): (Region, frame,
    quadrants) or None where the peak has no wind direction."""
    speed = math.hypot(u0, v0)
    if not speed > 0:
        return None
    ex, ey = u0 / speed, v0 / speed  # along the flow (east, north at the peak)
    fwd, inv = _aeqd(lon0, lat0, radius)
    x, y = fwd.transform(
        np.asarray(core_lon, dtype=np.float64), np.asarray(core_lat, dtype=np.float64)
    )
    along = (x * ex + y * ey) / 1e3
    cross = (-x * ey + y * ex) / 1e3
    core_half = max(float(np.max(np.abs(along))), 0.5 * spacing_km)
    a = min(
        max(2.0 * core_half, JET_MIN_HALF_LENGTH * spacing_km),
        max(JET_MAX_HALF_LENGTH_KM, JET_MIN_HALF_LENGTH * spacing_km),
    )
    b = min(
        max(float(np.max(np.abs(cross))) + spacing_km, JET_MIN_HALF_WIDTH * spacing_km),
        max(JET_MAX_HALF_WIDTH_KM, JET_MIN_HALF_WIDTH * spacing_km),
    )
    am, bm = a * 1e3, b * 1e3
    box = _rect(ex, ey, -am, am, -bm, bm)
    parts = {
        "entrance_left": _rect(ex, ey, -am, 0.0, 0.0, bm),
        "entrance_right": _rect(ex, ey, -am, 0.0, -bm, 0.0),
        "exit_left": _rect(ex, ey, 0.0, am, 0.0, bm),
        "exit_right": _rect(ex, ey, 0.0, am, -bm, 0.0),
    }

    def lonlat(corners):
        lo, la = inv.transform([p[0] for p in corners], [p[1] for p in corners])
        return [(float(p), float(q)) for p, q in zip(lo, la)]

    # a rectangle that holds a pole cannot be a lon/lat polygon: a circle instead
    for pole in (90.0, -90.0):
        px, py = fwd.transform(0.0, pole)
        pa, pb = (px * ex + py * ey), (-px * ey + py * ex)
        if np.isfinite(pa) and abs(pa) <= am and abs(pb) <= bm:
            return None
    lons, lats = flow_box_outline(inv, box)
    region = Region.polygon(lons, lats)
    quads = {}
    for q, corners in parts.items():
        ql, qa = flow_box_outline(inv, corners)
        quads[q] = Region.polygon(ql, qa)
    frame = {
        "lon": float(lon0),
        "lat": float(lat0),
        "direction_deg": float(math.degrees(math.atan2(ex, ey)) % 360.0),
        "half_length_km": a,
        "half_width_km": b,
        "corners": lonlat(box),
        "quadrants": {q: lonlat(c) for q, c in parts.items()},
    }
    return region, frame, quads


def find_jet_streaks(
    grid: Grid,
    u,
    v,
    pressure_pa: float,
    *,
    threshold: float | None = None,
    core_fraction: float = 0.8,
    separation_km: float = 500.0,
    most: int = 50,
) -> list:
    """Jet streaks of the wind (u, v in m s-1), strongest first (see the module docstring).

    A peak is a local maximum of the speed (its eight neighbours) above the threshold; a
    weaker peak within ``separation_km`` of a stronger one in the same region above the
    threshold, or inside a stronger streak's core, is part of that streak. At most ``most``
    streaks are returned. The ring rule (a maximum that belongs to a closed low or high)
    is applied by :func:`find_systems`.
    """
    from scipy import ndimage

    thr = float(threshold or jet_threshold(pressure_pa))
    u = np.asarray(u, dtype=np.float64)
    v = np.asarray(v, dtype=np.float64)
    speed_full = np.hypot(u, v)
    work = _working(grid)
    k = work.k
    s = _block_mean(speed_full, k)
    sf = np.where(np.isfinite(s), s, -np.inf)
    mode = ("nearest", "wrap") if work.periodic else "nearest"
    peaks = (sf == ndimage.maximum_filter(sf, size=3, mode=mode)) & (sf >= thr)
    cand = np.argwhere(peaks)
    if cand.size == 0:
        return []
    vals = sf[cand[:, 0], cand[:, 1]]
    order = np.argsort(-vals, kind="stable")
    cand, vals = cand[order], vals[order]
    above, _ = _label(sf >= thr, work)
    found: list[System] = []
    cores: list[np.ndarray] = []
    kept: list[tuple[int, int]] = []
    ny, nx = speed_full.shape
    grid_spacing = work.grid_spacing_km
    for (r, c), peak in zip(cand, vals):
        if len(found) >= most:
            break
        if any(core[r, c] for core in cores):
            continue  # a weaker peak inside a stronger streak's core is part of it
        if any(
            above[r, c] == above[a, b]
            and great_circle_km(work.lon[a, b], work.lat[a, b], work.lon[r, c], work.lat[r, c])
            < separation_km
            for a, b in kept
        ):
            continue  # and so is one close to a stronger peak above the same threshold
        kept.append((r, c))
        labels, _ = _label(sf >= core_fraction * peak, work)
        core = labels == labels[r, c]
        cores.append(core)
        r0, r1 = r * k, min(ny, (r + 1) * k)
        c0, c1 = c * k, min(nx, (c + 1) * k)
        block = speed_full[r0:r1, c0:c1]
        j = np.nanargmax(block)
        fr, fc = r0 + j // block.shape[1], c0 + j % block.shape[1]
        lon0, lat0 = float(grid.lon[fr, fc]), float(grid.lat[fr, fc])
        box = _flow_box(
            lon0,
            lat0,
            float(u[fr, fc]),
            float(v[fr, fc]),
            work.lon[core],
            work.lat[core],
            max(grid_spacing, work.spacing_km),
            grid.radius,
        )
        if box is None:
            half = max(JET_MIN_HALF_LENGTH * max(grid_spacing, work.spacing_km), 500.0)
            region, frame, quads = Region.circle(lon0, lat0, half), None, None
            note = "its region is a circle: the flow-aligned box would hold a pole"
        else:
            (region, frame, quads), note = box, ""
        found.append(
            System(
                "jet_streak",
                (lon0 + 180.0) % 360.0 - 180.0,
                lat0,
                float(speed_full[fr, fc]),
                None,
                None,
                float(work.area[core].sum()),
                region,
                (int(fr), int(fc)),
                "m s-1",
                note,
                frame=frame,
                quadrants=quads,
            )
        )
    return found


def _tangential_share(vortex: System, lon, lat, u0, v0) -> float:
    """|sin| of the angle between the wind at (lon, lat) and the line to the vortex's centre
    (1: blowing around the centre, 0: toward or away from it)."""
    import pyproj

    speed = math.hypot(u0, v0)
    if not speed > 0:
        return 0.0
    geod = pyproj.Geod(a=C.EARTH_RADIUS, b=C.EARTH_RADIUS)
    az_centre = geod.inv(lon, lat, vortex.lon, vortex.lat)[0]
    az_wind = math.degrees(math.atan2(u0, v0))
    return abs(math.sin(math.radians(az_wind - az_centre)))


def is_ring(streak: System, vortex: System, u, v) -> bool:
    """Is this wind maximum the ring of strongest wind of that closed low or high (see the
    module docstring)?"""
    d = float(great_circle_km(vortex.lon, vortex.lat, streak.lon, streak.lat))
    if d > RING_KM:
        return False
    r, c = streak.index
    if vortex.encloses(r, c):
        return True
    if d > 1.5 * vortex.radius_km:
        return False
    return (
        _tangential_share(vortex, streak.lon, streak.lat, float(u[r, c]), float(v[r, c]))
        >= RING_TANGENTIAL
    )


def find_systems(
    grid: Grid,
    height,
    u,
    v,
    pressure_pa: float | None,
    *,
    interval=None,
    min_depth=None,
    jet=None,
    core_fraction: float = 0.8,
    limit: int = 30,
    vortices=(),
    shallow: list | None = None,
) -> list:
    """Closed lows and highs and jet streaks of one level, at most ``limit`` of them:
    the most intense of each kind first, kinds taken in turn.

    Without wind (``u`` or ``v`` None) there are no jet streaks. ``vortices``: closed
    systems found elsewhere (the sea-level lows and highs under a low level) whose rings
    are not jet streaks either. ``shallow``, a list, receives the lows and highs with a
    closed contour that are less than the least depth deep (left out of the result, but
    visible on a chart at the same interval).
    """
    ci = float(interval or contour_interval(pressure_pa))
    depth_min = 0.5 * ci if min_depth is None else float(min_depth)
    lows = find_closed_extrema(grid, height, pressure_pa, "low", interval=interval, min_depth=0.0)
    highs = find_closed_extrema(grid, height, pressure_pa, "high", interval=interval, min_depth=0.0)
    if shallow is not None:
        shallow.extend(s for s in lows + highs if s.depth < depth_min)
    lows = [s for s in lows if s.depth >= depth_min]
    highs = [s for s in highs if s.depth >= depth_min]
    jets = []
    if u is not None and v is not None and pressure_pa is not None:
        jets = find_jet_streaks(
            grid,
            u,
            v,
            pressure_pa,
            threshold=jet,
            core_fraction=core_fraction,
            most=max(50, 2 * limit),
        )
        centres = lows + highs + list(vortices)
        jets = [j for j in jets if not any(is_ring(j, e, u, v) for e in centres)]
    out: list[System] = []
    queues = [list(lows), list(highs), list(jets)]
    while len(out) < limit and any(queues):
        for q in queues:
            if q and len(out) < limit:
                out.append(q.pop(0))
    return out


# -- tracks -----------------------------------------------------------------------------------

#: how fast a system may move between two valid times, km per hour (common practice, from
#: memory: mid-latitude lows rarely move faster than about 100 km/h), the least distance
#: a match may span whatever the time step, km, and the least in grid spacings (a system
#: that moves one grid length a step must still be matched)
TRACK_SPEED_KMH = 100.0
MIN_TRACK_KM = 300.0
TRACK_SPACINGS = 1.5


def track_limit_km(hours: float, grid_spacing_km: float = 0.0) -> float:
    """The farthest a system may move in ``hours`` and still be matched, km:
    max(``MIN_TRACK_KM``, ``TRACK_SPEED_KMH`` x hours, ``TRACK_SPACINGS`` x the grid
    spacing)."""
    return max(MIN_TRACK_KM, TRACK_SPEED_KMH * abs(hours), TRACK_SPACINGS * grid_spacing_km)


def match_tracks(systems_by_time, hours, grid_spacing_km: float = 0.0) -> list:
    """Tracks through the valid times: each system is matched to the nearest system of the
    same kind at the next time, within :func:`track_limit_km`, nearest pairs first, each
    system used once.

    ``systems_by_time``: a list (one per time) of lists of :class:`System`; ``hours``: the
    valid times in hours. Returns tracks, each a list of (time index, system index).
    """
    tracks = [[(0, i)] for i in range(len(systems_by_time[0]))] if systems_by_time else []
    open_tracks = {i: t for i, t in enumerate(tracks)}  # system index at the last time -> track
    for t in range(1, len(systems_by_time)):
        prev, cur = systems_by_time[t - 1], systems_by_time[t]
        limit = track_limit_km(hours[t] - hours[t - 1], grid_spacing_km)
        pairs = []
        for i, a in enumerate(prev):
            for j, b in enumerate(cur):
                if a.kind == b.kind:
                    d = float(great_circle_km(a.lon, a.lat, b.lon, b.lat))
                    if d <= limit:
                        pairs.append((d, i, j))
        pairs.sort()
        used_i, used_j, nxt = set(), set(), {}
        for _d, i, j in pairs:
            if i in used_i or j in used_j or i not in open_tracks:
                continue
            used_i.add(i)
            used_j.add(j)
            track = open_tracks[i]
            track.append((t, j))
            nxt[j] = track
        for j in range(len(cur)):
            if j not in used_j:
                track = [(t, j)]
                tracks.append(track)
                nxt[j] = track
        open_tracks = nxt
    return tracks
