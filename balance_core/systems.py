"""Weather systems found in one level's fields: closed lows, closed highs, jet streaks.

**Closed lows and highs** (of geopotential height). A low is a local minimum of the
height enclosed by at least one closed contour: a contour at a multiple of the chart's
interval (:func:`contour_interval`) around it that neither reaches the edge of the
data (the domain's edge, a pole row, points without data) nor encloses a deeper
minimum, nor goes all the way round a global grid (a band between two latitude
circles). Going up from the minimum one interval at a time, the last such contour is
its *outermost closed contour*; the low's depth is that contour's height minus the
central height, and a low shallower than ``min_depth`` (half an interval unless told
otherwise) is dropped. Highs are the same for the height turned upside down. The
contours are found as connected regions below (above) each level with
``scipy.ndimage.label`` -- the set inside a closed contour -- on a grid coarsened to
about half a degree, the centre then refined on the full grid.

**Jet streaks** (of wind speed). A local maximum of the speed above a threshold that
depends on the level (:func:`jet_threshold`); its core is the connected region where
the speed is at least ``core_fraction`` (0.8) of the peak; two peaks in one core are one
streak (the higher). A maximum whose core's box holds the centre of a closed low or high
is that vortex's ring of strongest wind, not a jet streak, and is left out.

**Regions.** So that a system's region can be carried in a link and drawn on any
chart, a low's or high's region is the circle around its centre with the area of its
outermost closed contour (:meth:`Region.circle`), and a streak's the lon/lat box
around its core.

Thresholds are the project's own choices, from common practice on weather charts (no
source; values from memory), and every function takes others.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from .grid import Grid
from .region import Region, great_circle_km

__all__ = ["System", "contour_interval", "jet_threshold", "find_closed_extrema",
           "find_jet_streaks", "find_systems", "match_tracks", "TRACK_SPEED_KMH",
           "MIN_TRACK_KM"]


def contour_interval(pressure_pa: float) -> float:
    """The height contour interval of a chart at this level, m (common practice, from
    memory): 30 m (3 dam) from 1000 to 700 hPa, 60 m from 700 to 400 hPa, 120 m above."""
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
    """One weather system on one level at one time."""

    kind: str                 # "low", "high" or "jet_streak"
    lon: float                # centre (a low's or high's extremum, a streak's peak), degrees
    lat: float
    value: float              # central height (m) or peak speed (m s-1)
    depth: float | None       # m below (low) or above (high) the outermost closed contour
    outer_level: float | None  # height of the outermost closed contour, m
    area_km2: float           # inside the outermost closed contour, or the streak's core
    region: Region            # circle (lows, highs) or box (streaks)
    index: tuple              # (row, column) of the centre on the grid

    @property
    def intensity(self) -> float:
        """What ranks systems of a kind: a low's or high's depth, a streak's peak speed."""
        return self.value if self.kind == "jet_streak" else float(self.depth)

    def as_dict(self) -> dict:
        r = self.region
        region = ({"kind": "circle", "lon": r.lons[0], "lat": r.lats[0],
                   "radius_km": r.radius_km} if r.kind == "circle" else
                  {"kind": "box", "west": r.west, "east": r.east, "south": r.south,
                   "north": r.north})
        return {"kind": self.kind, "lon": self.lon, "lat": self.lat, "value": self.value,
                "depth": self.depth, "outer_level": self.outer_level,
                "area_km2": self.area_km2, "intensity": self.intensity, "region": region}


# -- the working grid -------------------------------------------------------------------

def _coarsening(grid: Grid, target_km: float = 55.0) -> int:
    """How many points of the grid make one of the working grid (about half a degree)."""
    area = np.nanmedian(grid.cell_area)
    spacing_km = math.sqrt(area) / 1e3 if area > 0 else target_km
    return max(1, int(target_km // max(spacing_km, 1e-3)))


def _block_mean(a, k):
    if k == 1:
        return a.astype(np.float64, copy=True)
    ny, nx = (a.shape[0] // k) * k, (a.shape[1] // k) * k
    b = a[:ny, :nx].reshape(ny // k, k, nx // k, k)
    with np.errstate(invalid="ignore"):
        return np.mean(b, axis=(1, 3))  # a block with a point without data has none


def _label(mask, periodic):
    """Connected regions (4-connected); on a periodic grid the first and last columns
    are neighbours."""
    from scipy import ndimage

    labels, n = ndimage.label(mask)
    if periodic and n:
        a, b = labels[:, 0], labels[:, -1]
        pairs = {(int(x), int(y)) for x, y in zip(a, b) if x and y and x != y}
        if pairs:
            parent = np.arange(n + 1)

            def find(i):
                while parent[i] != i:
                    parent[i] = parent[parent[i]]
                    i = parent[i]
                return i

            for x, y in pairs:
                rx, ry = find(x), find(y)
                if rx != ry:
                    parent[max(rx, ry)] = min(rx, ry)
            roots = np.array([find(i) for i in range(n + 1)])
            labels = roots[labels]
    return labels


def _edge(shape, periodic, invalid):
    """Points whose region cannot be closed: the domain's edges (the first and last rows;
    the first and last columns unless periodic), and the eight neighbours of every point
    without data."""
    from scipy import ndimage

    edge = np.zeros(shape, dtype=bool)
    edge[0, :] = edge[-1, :] = True
    if not periodic:
        edge[:, 0] = edge[:, -1] = True
    if invalid.any():
        # every point that shares a grid cell with a point without data (the eight around
        # it): no contour can be drawn through such a cell
        edge |= ndimage.binary_dilation(invalid, structure=np.ones((3, 3), dtype=bool))
    return edge


# -- lows and highs ---------------------------------------------------------------------------

def find_closed_extrema(grid: Grid, height, pressure_pa: float, kind: str = "low", *,
                        interval: float | None = None, min_depth: float | None = None,
                        max_levels: int = 200) -> list:
    """Closed lows (``kind="low"``) or highs of ``height`` (m), deepest first.

    See the module docstring for the rule. Returns :class:`System` objects.
    """
    from scipy import ndimage

    if kind not in ("low", "high"):
        raise ValueError("kind is 'low' or 'high'")
    ci = float(interval or contour_interval(pressure_pa))
    depth_min = 0.5 * ci if min_depth is None else float(min_depth)
    sign = 1.0 if kind == "low" else -1.0
    z_full = sign * np.asarray(height, dtype=np.float64)
    k = _coarsening(grid)
    z = _block_mean(z_full, k)
    area = _block_mean(np.asarray(grid.cell_area, dtype=np.float64), k) * k * k / 1e6
    periodic = bool(getattr(grid, "periodic", False)) and z.shape[1] * k == z_full.shape[1]
    invalid = ~np.isfinite(z)
    zf = np.where(invalid, np.inf, z)
    mode = ("nearest", "wrap") if periodic else "nearest"
    minima = (zf == ndimage.minimum_filter(zf, size=3, mode=mode)) & ~invalid
    minima[0, :] = minima[-1, :] = False  # an extremum on a pole row or the edge is not closed
    if not periodic:
        minima[:, 0] = minima[:, -1] = False
    cand = np.argwhere(minima)
    if cand.size == 0:
        return []
    zc = zf[cand[:, 0], cand[:, 1]]
    order = np.argsort(zc, kind="stable")
    cand, zc = cand[order], zc[order]
    edge = _edge(z.shape, periodic, invalid)
    outer = np.full(len(cand), np.nan)
    outer_area = np.zeros(len(cand))
    done = np.zeros(len(cand), dtype=bool)
    level = math.floor(zc[0] / ci) * ci + ci
    for _ in range(max_levels):
        if done.all():
            break
        labels = _label(zf < level, periodic)
        lab = labels[cand[:, 0], cand[:, 1]]
        touching = np.zeros(labels.max() + 1, dtype=bool)
        touching[np.unique(labels[edge])] = True
        if periodic:
            # a region that goes all the way round (a band of latitude) is not enclosed by
            # a contour around a point: its edges are two latitude circles
            for lb in np.unique(lab[lab > 0]):
                if (labels == lb).any(axis=0).all():
                    touching[lb] = True
        # the deepest candidate of each region owns it; the others are merged into it
        first = {}
        for i, lb in enumerate(lab):
            if lb and lb not in first:
                first[lb] = i
        sizes = ndimage.sum(area, labels, index=np.arange(labels.max() + 1))
        for i, lb in enumerate(lab):
            if done[i] or not lb or level <= zc[i]:
                continue
            if touching[lb] or first[lb] != i:
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
        # the extremum on the full grid within the working cell and its neighbours
        r0, r1 = max(0, (r - 1) * k), min(ny, (r + 2) * k)
        c0, c1 = max(0, (c - 1) * k), min(nx, (c + 2) * k)
        block = z_full[r0:r1, c0:c1]
        if not np.isfinite(block).any():
            continue
        j = np.nanargmin(block)
        fr, fc = r0 + j // block.shape[1], c0 + j % block.shape[1]
        centre = float(z_full[fr, fc])
        depth = float(outer[i] - centre)
        if depth < depth_min:
            continue
        lon, lat = float(grid.lon[fr, fc]), float(grid.lat[fr, fc])
        radius = math.sqrt(outer_area[i] / math.pi)
        found.append(System(kind, (lon + 180.0) % 360.0 - 180.0, lat, sign * centre, depth,
                            float(sign * outer[i]), float(outer_area[i]),
                            Region.circle(lon, lat, max(radius, 1.0)), (int(fr), int(fc))))
    found.sort(key=lambda s: -s.depth)
    return found


# -- jet streaks ------------------------------------------------------------------------------

def find_jet_streaks(grid: Grid, u, v, pressure_pa: float, *, threshold: float | None = None,
                     core_fraction: float = 0.8, separation_km: float = 500.0) -> list:
    """Jet streaks of the wind (u, v in m s-1), strongest first (see the module docstring).

    A peak is a maximum of the speed within ``separation_km`` of it.
    """
    from scipy import ndimage

    thr = float(threshold or jet_threshold(pressure_pa))
    speed_full = np.hypot(np.asarray(u, dtype=np.float64), np.asarray(v, dtype=np.float64))
    k = _coarsening(grid)
    s = _block_mean(speed_full, k)
    area = _block_mean(np.asarray(grid.cell_area, dtype=np.float64), k) * k * k / 1e6
    periodic = bool(getattr(grid, "periodic", False)) and s.shape[1] * k == speed_full.shape[1]
    spacing_km = math.sqrt(max(float(np.nanmedian(area)), 1e-6))
    size = max(3, 2 * int(round(separation_km / spacing_km)) + 1)
    sf = np.where(np.isfinite(s), s, -np.inf)
    mode = ("nearest", "wrap") if periodic else "nearest"
    peaks = (sf == ndimage.maximum_filter(sf, size=size, mode=mode)) & (sf >= thr)
    cand = np.argwhere(peaks)
    if cand.size == 0:
        return []
    vals = sf[cand[:, 0], cand[:, 1]]
    order = np.argsort(-vals, kind="stable")
    cand, vals = cand[order][:50], vals[order][:50]
    found, cores = [], []
    ny, nx = speed_full.shape
    rad = np.deg2rad(np.asarray(grid.lon, dtype=np.float64))
    lon_c = np.rad2deg(np.arctan2(_block_mean(np.sin(rad), k), _block_mean(np.cos(rad), k)))
    lat_c = _block_mean(np.asarray(grid.lat, dtype=np.float64), k)
    for (r, c), peak in zip(cand, vals):
        if any(core[r, c] for core in cores):
            continue  # a weaker peak inside a stronger streak's core is part of it
        labels = _label(sf >= core_fraction * peak, periodic)
        core = labels == labels[r, c]
        cores.append(core)
        r0, r1 = max(0, (r - 1) * k), min(ny, (r + 2) * k)
        c0, c1 = max(0, (c - 1) * k), min(nx, (c + 2) * k)
        block = speed_full[r0:r1, c0:c1]
        j = np.nanargmax(block)
        fr, fc = r0 + j // block.shape[1], c0 + j % block.shape[1]
        lon0, lat0 = float(grid.lon[fr, fc]), float(grid.lat[fr, fc])
        lons = lon0 + (((lon_c[core] - lon0) + 180.0) % 360.0 - 180.0)
        lats = lat_c[core]
        # half a working cell around the core's centres
        half_lat = 0.5 * float(np.nanmax(np.abs(np.diff(lat_c, axis=0)))) if lat_c.shape[0] > 1 \
            else 0.5
        dlon = (np.diff(lon_c, axis=1) + 180.0) % 360.0 - 180.0  # across the dateline too
        half_lon = 0.5 * float(np.nanmax(np.abs(dlon))) if lon_c.shape[1] > 1 else 0.5
        west, east = float(lons.min()) - half_lon, float(lons.max()) + half_lon
        south = max(-90.0, float(lats.min()) - half_lat)
        north = min(90.0, float(lats.max()) + half_lat)
        if north <= south or not np.isfinite([west, east, south, north]).all():
            continue
        if east - west >= 360.0:
            west, east = -180.0, 180.0
        found.append(System("jet_streak", (lon0 + 180.0) % 360.0 - 180.0, lat0,
                            float(speed_full[fr, fc]), None, None,
                            float(area[core].sum()), Region.box(west, east, south, north),
                            (int(fr), int(fc))))
    return found


def find_systems(grid: Grid, height, u, v, pressure_pa: float, *, interval=None,
                 min_depth=None, jet=None, core_fraction: float = 0.8,
                 limit: int = 30) -> list:
    """Closed lows and highs and jet streaks of one level, at most ``limit`` of them:
    the most intense of each kind first, kinds taken in turn."""
    lows = find_closed_extrema(grid, height, pressure_pa, "low", interval=interval,
                               min_depth=min_depth)
    highs = find_closed_extrema(grid, height, pressure_pa, "high", interval=interval,
                                min_depth=min_depth)
    jets = find_jet_streaks(grid, u, v, pressure_pa, threshold=jet,
                            core_fraction=core_fraction)
    # a wind maximum whose core surrounds a closed low's or high's centre is that vortex's
    # ring of strongest wind (a tropical cyclone's eyewall), not a jet streak
    jets = [j for j in jets if not any(j.region.mask_point(e.lon, e.lat)
                                       for e in lows + highs)]
    out = []
    queues = [list(lows), list(highs), list(jets)]
    while len(out) < limit and any(queues):
        for q in queues:
            if q and len(out) < limit:
                out.append(q.pop(0))
    return out


# -- tracks -----------------------------------------------------------------------------------

#: how fast a system may move between two valid times, km per hour (common practice, from
#: memory: mid-latitude lows rarely move faster than about 100 km/h), and the least distance
#: a match may span whatever the time step
TRACK_SPEED_KMH = 100.0
MIN_TRACK_KM = 300.0


def match_tracks(systems_by_time, hours) -> list:
    """Tracks through the valid times: each system is matched to the nearest system of the
    same kind at the next time, within ``max(MIN_TRACK_KM, TRACK_SPEED_KMH x hours between)``,
    nearest pairs first, each system used once.

    ``systems_by_time``: a list (one per time) of lists of :class:`System`; ``hours``: the
    valid times in hours. Returns tracks, each a list of (time index, system index).
    """
    tracks = [[(0, i)] for i in range(len(systems_by_time[0]))] if systems_by_time else []
    open_tracks = {i: t for i, t in enumerate(tracks)}  # system index at the last time -> track
    for t in range(1, len(systems_by_time)):
        prev, cur = systems_by_time[t - 1], systems_by_time[t]
        limit = max(MIN_TRACK_KM, TRACK_SPEED_KMH * abs(hours[t] - hours[t - 1]))
        pairs = []
        for i, a in enumerate(prev):
            for j, b in enumerate(cur):
                if a.kind == b.kind:
                    d = float(great_circle_km(a.lon, a.lat, b.lon, b.lat))
                    if d <= limit:
                        pairs.append((d, i, j))
        pairs.sort()
        used_i, used_j, nxt = set(), set(), {}
        for d, i, j in pairs:
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
