"""Optional smoothing of input fields before differencing (scipy.ndimage).

A Gaussian of a given length (km, the standard deviation) along the ground:
on a lat-lon grid the width in grid points differs per row because the
east-west spacing shrinks with cos(latitude). Missing values stay missing
and do not spread (normalised convolution: the filtered values are divided by
the filtered mask).
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

from .grid import Grid

__all__ = ["smooth"]


def smooth(grid: Grid, field, length_km: float):
    """Gaussian-smoothed copy of ``field`` (..., y, x), standard deviation ``length_km``."""
    if not length_km or length_km <= 0:
        return np.asarray(field, dtype=np.float64)
    a = np.asarray(field, dtype=np.float64)
    ok = np.isfinite(a)
    vals = np.where(ok, a, 0.0)
    wts = ok.astype(np.float64)
    sig_y, sig_x = _sigmas(grid, length_km * 1e3)
    mode_x = "wrap" if grid.periodic else "nearest"
    out_v, out_w = vals, wts
    out_v = ndimage.gaussian_filter1d(out_v, sig_y, axis=-2, mode="nearest")
    out_w = ndimage.gaussian_filter1d(out_w, sig_y, axis=-2, mode="nearest")
    if np.ndim(sig_x) == 0:
        out_v = ndimage.gaussian_filter1d(out_v, float(sig_x), axis=-1, mode=mode_x)
        out_w = ndimage.gaussian_filter1d(out_w, float(sig_x), axis=-1, mode=mode_x)
    else:
        for j, s in enumerate(sig_x):  # one width per row (a loop over rows, not points)
            out_v[..., j, :] = ndimage.gaussian_filter1d(out_v[..., j, :], s, axis=-1, mode=mode_x)
            out_w[..., j, :] = ndimage.gaussian_filter1d(out_w[..., j, :], s, axis=-1, mode=mode_x)
    with np.errstate(invalid="ignore", divide="ignore"):
        res = out_v / out_w
    res[~ok] = np.nan
    return res


def _sigmas(grid: Grid, length_m: float):
    """Gaussian widths in grid points along y (a number) and x (per row on lat-lon grids)."""
    nx = grid.shape[1]
    if grid.kind == "latlon":
        dphi = np.abs(np.gradient(np.deg2rad(grid.lat1d))).mean()
        dlam = np.abs(np.gradient(np.deg2rad(np.unwrap(grid.lon1d, period=360)))).mean()
        sig_y = min(length_m / (grid.radius * dphi), grid.shape[0])  # wider is the mean
        cosl = np.maximum(np.cos(np.deg2rad(grid.lat1d)), 1e-6)
        sig_x = np.minimum(length_m / (grid.radius * cosl * dlam), nx / 2)
        return sig_y, sig_x
    dx = np.abs(np.diff(grid.x)).mean()
    dy = np.abs(np.diff(grid.y)).mean()
    m = float(np.nanmean(grid.map_factor))
    ny = grid.shape[0]
    return min(length_m * m / dy, ny), min(length_m * m / dx, nx)
