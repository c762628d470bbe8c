"""Independent computations of the winds a balance verdict can be argued from, for the tests.

None of the project's code: fields read with cfgrib, derivatives with numpy.gradient (on a
lat-lon grid in radians, periodic in longitude on a global grid; on any other grid through
the local east and north offsets of the neighbouring points, a 2 x 2 Jacobian solved at
each point), the textbook formulas written out here:

* the geostrophic wind ug = -(g/f) dZ/dy, vg = (g/f) dZ/dx (Holton and Hakim 2013, ch. 3);
* the gradient wind from the curvature of the height contours, K V^2 + f V + dPhi/dn = 0
  with K the spherical divergence of the contours' unit normal (Holton and Hakim 2013,
  ch. 3), the regular root, along the contours;
* from sea-level pressure, the geostrophic wind of -(1/rho) grad p with the density of
  the standard atmosphere at sea level (1.225 kg m-3, the U.S. Standard Atmosphere 1976).
"""

from __future__ import annotations

import numpy as np

G0 = 9.80665  # standard gravity (3rd CGPM 1901)
OMEGA = 7.292115e-5  # the Earth's rotation, rad s-1 (GRS80; Moritz 2000)
A = 6371008.7714  # mean Earth radius, m (GRS80 R1; Moritz 2000)
RHO_SEA = 1.225  # kg m-3 (U.S. Standard Atmosphere 1976, sea level)


_OPENED: dict = {}


def cfgrib(path, **keys):
    """The fields of a GRIB file that match ``keys``, read by cfgrib (kept for the module)."""
    import xarray as xr

    key = (path, tuple(sorted(keys.items())))
    if key not in _OPENED:
        _OPENED[key] = xr.open_dataset(
            path, engine="cfgrib", backend_kwargs={"filter_by_keys": keys, "indexpath": ""}
        ).load()
    return _OPENED[key]


class LatLon:
    """Derivatives on a regular global (periodic) or regional lat-lon grid."""

    def __init__(self, lat1d, lon1d, periodic):
        self.lat = np.broadcast_to(np.asarray(lat1d, float)[:, None], (len(lat1d), len(lon1d)))
        self.lon = np.broadcast_to(np.asarray(lon1d, float)[None, :], self.lat.shape)
        self.phi = np.deg2rad(np.asarray(lat1d, float))
        self.lam = np.deg2rad(np.asarray(lon1d, float))
        self.periodic = periodic

    def grad(self, f):
        f = np.asarray(f, float)
        if self.periodic:
            step = self.lam[1] - self.lam[0]
            fp = np.concatenate([f[:, -1:], f, f[:, :1]], axis=1)
            lp = np.concatenate([[self.lam[0] - step], self.lam, [self.lam[-1] + step]])
            dl = np.gradient(fp, lp, axis=1)[:, 1:-1]
        else:
            dl = np.gradient(f, self.lam, axis=1)
        dp = np.gradient(f, self.phi, axis=0)
        with np.errstate(divide="ignore", invalid="ignore"):
            return dl / (A * np.cos(self.phi)[:, None]), dp / A

    def rotate(self, u, v):
        return u, v  # earth-relative already


class Curvilinear:
    """Derivatives on any grid of 2-D latitudes and longitudes: d/di and d/dj of the field
    and of the points' east and north positions (numpy.gradient), then the 2 x 2 system
    solved for d/dx (east) and d/dy (north) at each point."""

    def __init__(self, lat2d, lon2d):
        self.lat, self.lon = np.asarray(lat2d, float), np.asarray(lon2d, float)
        phi = np.deg2rad(self.lat)
        lam = np.unwrap(np.deg2rad(self.lon), axis=1)
        cos = np.cos(phi)
        self.xi = (A * cos * np.gradient(lam, axis=1), A * np.gradient(phi, axis=1))
        self.xj = (A * cos * np.gradient(lam, axis=0), A * np.gradient(phi, axis=0))
        self.det = self.xi[0] * self.xj[1] - self.xi[1] * self.xj[0]

    def grad(self, f):
        fi, fj = (
            np.gradient(np.asarray(f, float), axis=1),
            np.gradient(np.asarray(f, float), axis=0),
        )
        # [fi, fj] = [[xi_e, xi_n], [xj_e, xj_n]] [fx, fy]
        fx = (fi * self.xj[1] - fj * self.xi[1]) / self.det
        fy = (fj * self.xi[0] - fi * self.xj[0]) / self.det
        return fx, fy

    def rotate(self, u, v):
        """Grid-relative components (along i and j) to east and north."""
        ex = np.hypot(*self.xi)
        cx, sx = self.xi[0] / ex, self.xi[1] / ex  # the i direction in east, north
        ue = u * cx - v * sx
        vn = u * sx + v * cx
        return ue, vn


def geostrophic(grid, z):
    f = 2 * OMEGA * np.sin(np.deg2rad(grid.lat))
    zx, zy = grid.grad(z)
    with np.errstate(divide="ignore", invalid="ignore"):
        return -G0 / f * zy, G0 / f * zx


def streamline_curvature(grid, u, v):
    """The curvature of the streamlines on the sphere, m-1, positive turning left:
    (u^2 dv/dx - v^2 du/dy + u v (dv/dy - du/dx)) / V^3, plus u tan(phi) / (a V), the
    turning of a path along a latitude circle."""
    ux, uy = grid.grad(u)
    vx, vy = grid.grad(v)
    speed = np.hypot(u, v)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (u * u * vx - v * v * uy + u * v * (vy - ux)) / speed**3 + u * np.tan(
            np.deg2rad(grid.lat)
        ) / (A * speed)


def gradient_wind(grid, z, curvature=None, u=None, v=None):
    """The gradient wind vector (u, v), the regular root, along the height contours: with
    the contours' curvature, or (``curvature="streamline"``) the wind's streamlines'."""
    f = 2 * OMEGA * np.sin(np.deg2rad(grid.lat))
    zx, zy = grid.grad(z)
    gx, gy = G0 * zx, G0 * zy
    mag = np.hypot(gx, gy)
    with np.errstate(divide="ignore", invalid="ignore"):
        nx, ny = gx / mag, gy / mag
    nxx, _ = grid.grad(nx)
    _, nyy = grid.grad(ny)
    kappa = nxx + nyy - ny * np.tan(np.deg2rad(grid.lat)) / A
    s = np.where(f >= 0, 1.0, -1.0)
    k = s * kappa
    if curvature == "streamline":
        # the streamlines' curvature (left turns positive), seen along the contour direction
        # t (low on the left where f >= 0): K = s * Ks * sign(V . t)
        tx, ty = -s * ny, s * nx
        k = streamline_curvature(grid, u, v) * np.sign(u * tx + v * ty) * s
    dphidn = -s * mag
    disc = f * f - 4 * k * dphidn
    with np.errstate(invalid="ignore", divide="ignore"):
        speed = np.where(np.abs(k) > 1e-12, (-f + s * np.sqrt(disc)) / (2 * k), -dphidn / f)
    return speed * (-s * ny), speed * (s * nx)


def rms(a, weight, mask):
    m = mask & np.isfinite(a)
    return float(np.sqrt(np.sum(weight[m] * a[m] ** 2) / np.sum(weight[m])))
