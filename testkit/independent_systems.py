"""An independent finder of closed lows and highs and of wind maxima, for the tests.

Written for the checks only, with none of the project's code: the closed contours are
found by a priority flood (the points taken in order of their value, joined with a
union-find as they come, the way a basin fills), not by labelling the regions below each
contour level as ``balance_core.systems`` does. It applies the same definition (see that
module's docstring), which is the project's own:

* the points are 4-connected; the first and last columns of a global grid are
  neighbours, and the points of a pole row are all neighbours of each other (the pole is
  one point);
* a basin stops being closed around its minimum at the value of the first point whose
  joining makes it touch the edge of the data (the domain's edge, unless a pole row; the
  eight neighbours of a point without data), merge with a deeper basin, cross the equator,
  cover more than ``max_share`` of the Earth, or go round the globe without holding a pole;
* its outermost closed contour is the highest multiple of the interval at or below that
  value (the region below a contour excludes the points at it), and it is a closed low when
  that contour lies at least ``min_depth`` (half an interval) above the minimum.

The cell areas are computed here too (a^2 dlambda dsin(phi) between mid-latitudes for a
lat-lon grid; pyproj's areal scale factor times the projected cell for a projected one).
"""

from __future__ import annotations

import math

import numpy as np

#: mean Earth radius, m (GRS80 R1; Moritz 2000, J. Geodesy 74, 128)
RADIUS = 6371008.7714


def latlon_cell_area_km2(lat1d, nlon, radius=RADIUS):
    """Cell areas (km2) of a global regular lat-lon grid, (ny, nlon)."""
    phi = np.deg2rad(np.asarray(lat1d, dtype=np.float64))
    mid = (phi[1:] + phi[:-1]) / 2
    bounds = np.concatenate(
        [[phi[0] - (phi[1] - phi[0]) / 2], mid, [phi[-1] + (phi[-1] - phi[-2]) / 2]]
    )
    bounds = np.clip(bounds, -np.pi / 2, np.pi / 2)
    band = np.abs(np.diff(np.sin(bounds)))
    return np.repeat((radius / 1e3) ** 2 * band[:, None] * (2 * np.pi / nlon), nlon, axis=1)


def joined_rows(lat1d, periodic):
    """Rows of a global grid that are a pole (within three quarters of a row of it)."""
    if not periodic:
        return ()
    lat = np.asarray(lat1d, dtype=np.float64)
    out = []
    for r, nb in ((0, 1), (len(lat) - 1, len(lat) - 2)):
        if 90.0 - abs(lat[r]) <= 0.75 * abs(lat[r] - lat[nb]) + 1e-9:
            out.append(r)
    return tuple(out)


def closed_extrema(
    z,
    lat,
    area_km2,
    *,
    interval,
    kind="low",
    periodic=False,
    joined=(),
    max_share=0.10,
    min_depth=None,
    radius=RADIUS,
):
    """The closed lows (or highs) of ``z`` by the priority flood.

    Returns a list of dicts: ``index`` (row, column) of the minimum, ``value``,
    ``outer`` (the outermost closed contour) and ``depth``; only those at least
    ``min_depth`` deep.
    """
    sign = 1.0 if kind == "low" else -1.0
    f = sign * np.asarray(z, dtype=np.float64)
    ny, nx = f.shape
    valid = np.isfinite(f)
    edge = _edge_of_data(valid, periodic, joined)
    earth = 4 * math.pi * (radius / 1e3) ** 2
    full_cols = (1 << nx) - 1
    parent = {}
    comp = {}  # root -> attributes
    spill = {}  # minimum's cell -> the value at which its basin stopped being closed

    def find(x):
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    def bad(a):
        return (
            a["edge"]
            or a["area"] > max_share * earth
            or (a["lo"] < 0 < a["hi"])
            or (periodic and a["cols"] == full_cols and not a["cap"])
        )

    def union(x, y, value):
        rx, ry = find(x), find(y)
        if rx == ry:
            return
        a, b = comp[rx], comp[ry]
        # the deeper minimum owns the merged basin; the other stops here
        if (b["min"], b["cell"]) < (a["min"], a["cell"]):
            rx, ry, a, b = ry, rx, b, a
        if not b["failed"]:
            spill.setdefault(b["cell"], value)
        parent[ry] = rx
        a["area"] += b["area"]
        a["lo"], a["hi"] = min(a["lo"], b["lo"]), max(a["hi"], b["hi"])
        a["cols"] |= b["cols"]
        a["cap"] = a["cap"] or b["cap"]
        a["edge"] = a["edge"] or b["edge"]
        del comp[ry]

    order = sorted(zip(f[valid].tolist(), np.flatnonzero(valid).tolist()))
    row_first = {}
    for value, flat in order:
        r, c = divmod(flat, nx)
        parent[flat] = flat
        comp[flat] = {
            "min": value,
            "cell": (r, c),
            "area": float(area_km2[r, c]),
            "lo": float(lat[r, c]),
            "hi": float(lat[r, c]),
            "cols": 1 << c,
            "cap": r in joined,
            "edge": bool(edge[r, c]),
            "failed": False,
        }
        nbs = _four_neighbours(r, c, ny, nx, periodic)
        if r in joined:
            if r in row_first:
                nbs.append(row_first[r])
            else:
                row_first[r] = flat
        for nb in nbs:
            if nb in parent:
                union(flat, nb, value)
        root = find(flat)
        a = comp[root]
        if not a["failed"] and bad(a):
            a["failed"] = True
            spill.setdefault(a["cell"], value)
    return _outer_contours(f, spill, sign, interval, min_depth)


def _edge_of_data(valid, periodic, joined):
    """Where a basin touches the edge: the first and last rows unless a pole, the first and
    last columns unless global, and the eight neighbours of every point without data."""
    ny, nx = valid.shape
    edge = np.zeros((ny, nx), dtype=bool)
    for r in (0, ny - 1):
        if r not in joined:
            edge[r, :] = True
    if not periodic:
        edge[:, 0] = edge[:, -1] = True
    for r, c in zip(*np.nonzero(~valid)):
        for dr in (-1, 0, 1):
            for dc in (-1, 0, 1):
                rr, cc = r + dr, c + dc
                if periodic:
                    cc %= nx
                if 0 <= rr < ny and 0 <= cc < nx:
                    edge[rr, cc] = True
    return edge


def _four_neighbours(r, c, ny, nx, periodic):
    """The flat indices of a point's 4-connected neighbours (across the seam when global)."""
    nbs = []
    if r > 0:
        nbs.append((r - 1) * nx + c)
    if r < ny - 1:
        nbs.append((r + 1) * nx + c)
    if c > 0 or periodic:
        nbs.append(r * nx + (c - 1) % nx)
    if c < nx - 1 or periodic:
        nbs.append(r * nx + (c + 1) % nx)
    return nbs


def _outer_contours(f, spill, sign, interval, min_depth):
    """Each basin's outermost closed contour (the highest multiple of the interval at or
    below its spill value), kept when at least ``min_depth`` above its minimum."""
    out = []
    ci = float(interval)
    depth_min = 0.5 * ci if min_depth is None else float(min_depth)
    for cell, s in spill.items():
        zmin = f[cell]
        outer = math.floor(s / ci) * ci
        if outer <= zmin or outer - zmin < depth_min:
            continue
        out.append(
            {"index": cell, "value": sign * zmin, "outer": sign * outer, "depth": outer - zmin}
        )
    out.sort(key=lambda d: -d["depth"])
    return out


def _label_wrapped(mask, periodic):
    """scikit-image's 8-connected labels, with the first and last columns of a global grid
    joined (the labels of neighbouring points across the seam made one)."""
    from skimage import measure

    labels = measure.label(mask, connectivity=2)
    if not periodic:
        return labels
    parent = {}

    def find(x):
        while parent.get(x, x) != x:
            x = parent[x]
        return x

    ny = labels.shape[0]
    for r in range(ny):
        a = labels[r, -1]
        for rr in (r - 1, r, r + 1):
            if a and 0 <= rr < ny and labels[rr, 0]:
                ra, rb = find(a), find(labels[rr, 0])
                if ra != rb:
                    parent[max(ra, rb)] = min(ra, rb)
    out = labels.copy()
    for lb in np.unique(labels):
        if lb:
            out[labels == lb] = find(lb)
    return out


def wind_maxima(speed, threshold, core_fraction=0.8, periodic=False):
    """Each connected region (8-connected, scikit-image's labelling; across the seam of a
    global grid too) of the speed above the threshold: its maximum's index and value, and
    the core (the connected region at or above ``core_fraction`` of that maximum holding
    it), as a boolean array."""
    s = np.where(np.isfinite(speed), speed, -np.inf)
    labels = _label_wrapped(s >= threshold, periodic)
    out = []
    for lb in np.unique(labels):
        if not lb:
            continue
        region = labels == lb
        flat = int(np.argmax(np.where(region, s, -np.inf)))
        r, c = divmod(flat, s.shape[1])
        peak = float(s[r, c])
        core_labels = _label_wrapped(s >= core_fraction * peak, periodic)
        out.append({"index": (r, c), "value": peak, "core": core_labels == core_labels[r, c]})
    return out


def great_circle_km(lon0, lat0, lon, lat, radius=RADIUS):
    """Haversine distance, km (Sinnott 1984, Sky and Telescope 68, 159)."""
    p0, p1 = np.deg2rad(lat0), np.deg2rad(np.asarray(lat, dtype=np.float64))
    dl = np.deg2rad(np.asarray(lon, dtype=np.float64) - lon0)
    h = np.sin(0.5 * (p1 - p0)) ** 2 + np.cos(p0) * np.cos(p1) * np.sin(0.5 * dl) ** 2
    return 2e-3 * radius * np.arcsin(np.sqrt(np.clip(h, 0.0, 1.0)))
