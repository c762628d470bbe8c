"""Which balance holds where: the region verdict taken tile by tile over a level.

A region's verdict (:mod:`balance_core.verdict`) is one class for the whole box. To see where
each balance holds, the level's grid is cut into square tiles of ``n`` by ``n`` grid points
and each tile gets the class that the same rule gives for its points
(:func:`balance_core.report.window_verdict`: the same imbalance ratios, thresholds and
barriers: too few valid points, a weak pressure gradient, the tropical mask, a local Rossby
number above one, friction only near the ground). A tile is a small region, so "none" (no
verdict) is given wherever a region would get it: where fewer than ``min_points`` of its
points have every term, within the tropical mask where nothing else can be tested, under a
pressure gradient too weak for the ratios to mean anything.

A tile has at least ``ceil(sqrt(min_points))`` points a side (5 with the default 25), so
that a tile of valid points can have a verdict at all, and no more tiles across the grid
than ``max_across`` (the chart shows no finer; the work is one small region per tile). The
size is said with the map in grid points and in km (the square root of the median tile's
area).

The tiling is the project's own construction (no published source); the rule it applies is
the region verdict's, documented in DEVELOPERS.md.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from .report import LevelDiagnostics, window_verdict
from .verdict import CLASSES, Thresholds

__all__ = ["BalanceMap", "balance_map", "tile_side"]


@dataclasses.dataclass(frozen=True)
class BalanceMap:
    """The class of each tile, laid on the grid.

    ``classes``: (ny, nx) int8, at each grid point the index in
    :data:`balance_core.verdict.CLASSES` of its tile's class; ``tile_points``: the tile's
    side in grid points; ``tile_km``: the square root of the median tile's area, km;
    ``tiles``: how many; ``counts``: tiles of each class (classes with none left out).
    """

    classes: np.ndarray
    tile_points: int
    tile_km: float
    tiles: int
    counts: dict

    def share(self, name: str) -> float:
        """The share of the tiles in class ``name``."""
        return self.counts.get(name, 0) / max(self.tiles, 1)

    @property
    def size_text(self) -> str:
        """'tiles of 5 x 5 grid points, about 1390 km across'"""
        n = self.tile_points
        return f"tiles of {n} \u00d7 {n} grid points, about {self.tile_km:.0f} km across"


def tile_side(shape, thresholds: Thresholds = Thresholds(), max_across: int = 60) -> int:
    """The tile's side in grid points: at least ``ceil(sqrt(min_points))``, so that a tile
    can hold the points a verdict needs, and large enough that neither direction has more
    than ``max_across`` tiles."""
    least = math.ceil(math.sqrt(thresholds.min_points))
    return max(least, math.ceil(max(shape) / max_across))


def _starts(n_points: int, side: int) -> list:
    """Tile starts along one axis; the last tile takes the remainder when it is at least
    half a tile, otherwise the remainder joins the tile before it."""
    starts = list(range(0, n_points, side))
    if len(starts) > 1 and n_points - starts[-1] < side / 2:
        starts.pop()
    return starts


def balance_map(
    diag: LevelDiagnostics,
    *,
    thresholds: Thresholds = Thresholds(),
    side: int | None = None,
    max_across: int = 60,
) -> BalanceMap:
    """The class of the region verdict of each tile of the level (see the module docstring).

    Parameters
    ----------
    diag : LevelDiagnostics
        One level's diagnostics (:func:`balance_core.report.level_diagnostics`).
    thresholds : Thresholds
        The verdict's thresholds, as for a region.
    side : int, optional
        The tile's side in grid points; by default :func:`tile_side`.
    """
    ny, nx = diag.grid.shape
    n = side or tile_side((ny, nx), thresholds, max_across)
    rows, cols = _starts(ny, n), _starts(nx, n)
    classes = np.empty((ny, nx), dtype=np.int8)
    index = {c: i for i, c in enumerate(CLASSES)}
    counts: dict[str, int] = {}
    areas = []
    for k, r0 in enumerate(rows):
        r1 = rows[k + 1] if k + 1 < len(rows) else ny
        for m, c0 in enumerate(cols):
            c1 = cols[m + 1] if m + 1 < len(cols) else nx
            win = (slice(r0, r1), slice(c0, c1))
            ins = np.ones((r1 - r0, c1 - c0), dtype=bool)
            name = _tile_class(diag, win, ins, thresholds)
            classes[win] = index[name]
            counts[name] = counts.get(name, 0) + 1
            areas.append(float(np.sum(diag.grid.cell_area[win])))
    return BalanceMap(
        classes=classes,
        tile_points=n,
        tile_km=math.sqrt(float(np.median(areas))) / 1e3,
        tiles=len(areas),
        counts=counts,
    )


def _tile_class(diag, win, ins, thresholds) -> str:
    """The class of one tile: the region verdict's (no wind in the data: "none")."""
    if diag.no_wind:
        return "none"
    return window_verdict(diag, win, ins, thresholds).verdict.balance
