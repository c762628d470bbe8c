"""Horizontal grids on the sphere and the derivative operators that go with them.

The Grid owns every metric: spacing, map factors, the meridian convergence, the
Coriolis parameter, cell areas and the masks (tropics, poles). Diagnostics are
then a few lines of ``grid.ddx(...)``, ``grid.ddy(...)``, following the habit of
grid-aware differencing libraries such as xgcm.

Frame
-----
Every vector on every grid is held in **earth-relative components** (u to the
east, v to the north) and every horizontal derivative is taken along east and
north. On a lat-lon grid that is the usual spherical form

    d/dx = 1 / (a cos(phi)) d/dlambda,     d/dy = 1 / a d/dphi.

On a projected grid the derivatives along the grid axes are scaled by the map
factor m and rotated to east and north with the meridian convergence gamma
(both from pyproj), so the spherical metric terms (tan(phi) / a) stay valid and
the lat-lon and projected budgets are the same equations. Grid-relative
components are never used inside the core: the io layer rotates them first.

Numerics
--------
Second-order centred differences inside, second-order one-sided differences
at open edges, periodic in longitude on global grids, and the non-uniform
three-point formula where the coordinate is not evenly spaced (Gaussian
latitudes, pressure levels, irregular times). See Fornberg (1988),
"Generation of finite difference formulas on arbitrarily spaced grids",
Math. Comp. 51, 699-706, for the weights.
"""

from __future__ import annotations

import copy
from functools import cached_property

import numpy as np

from . import constants as C

__all__ = [
    "Grid",
    "Stencil",
    "coriolis_parameter",
    "derivative_along",
    "derivative_weights",
]


def coriolis_parameter(lat_deg, omega: float = C.OMEGA):
    """Coriolis parameter f = 2 Omega sin(phi), s-1.

    Parameters
    ----------
    lat_deg : array_like
        Latitude in degrees.
    omega : float
        Rotation rate, rad s-1.
    """
    return 2.0 * omega * np.sin(np.deg2rad(lat_deg))


def derivative_weights(coord, index: int):
    """Indices and weights of the first derivative at one point of a 1-D coordinate.

    Three-point, second-order weights on an arbitrarily spaced coordinate:
    centred inside, one-sided at the two ends (Fornberg 1988). With only two
    points the two-point (first-order) difference is returned.

    Returns
    -------
    indices : tuple of int
    weights : tuple of float
        ``df/dc[index] ~ sum(w * f[i] for i, w in zip(indices, weights))``.
    """
    c = np.asarray(coord, dtype=np.float64)
    n = c.size
    if n < 2:
        raise ValueError("a derivative needs at least two coordinate values")
    if index < 0:
        index += n
    if n == 2:
        h = c[1] - c[0]
        return (0, 1), (-1.0 / h, 1.0 / h)
    if index == 0:
        ids = (0, 1, 2)
        w = _one_sided(c[1] - c[0], c[2] - c[1])
    elif index == n - 1:
        ids = (n - 3, n - 2, n - 1)
        # the forward formula with negative spacings is the backward one
        w = _one_sided(c[n - 2] - c[n - 1], c[n - 3] - c[n - 2])[::-1]
    else:
        ids = (index - 1, index, index + 1)
        w = _centred(c[index] - c[index - 1], c[index + 1] - c[index])
    return ids, tuple(float(x) for x in w)


def _centred(h1, h2):
    """Weights on f[i-1], f[i], f[i+1] of the centred three-point derivative."""
    return (
        -h2 / (h1 * (h1 + h2)),
        (h2 - h1) / (h1 * h2),
        h1 / (h2 * (h1 + h2)),
    )


def _one_sided(h1, h2):
    """Weights on f[0], f[1], f[2] of the forward second-order derivative at 0.

    h1 = x1 - x0 and h2 = x2 - x1. Called with the spacings of the reversed
    coordinate (negative), the same formula is the backward derivative at the
    last point.
    """
    return (
        -(2 * h1 + h2) / (h1 * (h1 + h2)),
        (h1 + h2) / (h1 * h2),
        -h1 / (h2 * (h1 + h2)),
    )


def _take(ndim: int, axis: int, sl):
    idx = [slice(None)] * ndim
    idx[axis] = sl
    return tuple(idx)


class Stencil:
    """Second-order first-derivative operator along one axis of an array.

    The weights are computed once from the coordinate and multiplied by a
    metric ``scale`` (for example 1 / (a cos(phi)) for d/dx on a lat-lon grid),
    so applying the operator is one or three array passes.

    Parameters
    ----------
    coord : 1-D array
        The coordinate along the axis (strictly monotonic).
    axis : int
        The array axis the operator differentiates along (negative counts
        from the end, so leading time and level axes are allowed).
    periodic : bool
        Wrap around (global longitude); ``period`` is then the coordinate period.
    scale : float or array
        Multiplies the derivative; an array must broadcast against the last
        two axes (y, x) of the fields.
    """

    uniform: bool
    _h: np.ndarray

    def __init__(
        self,
        coord,
        axis: int,
        *,
        periodic: bool = False,
        period: float | None = None,
        scale=1.0,
        like: Stencil | None = None,
    ):
        c = np.asarray(coord, dtype=np.float64)
        if c.ndim != 1 or c.size < 3:
            raise ValueError("a second-order derivative needs at least 3 points along the axis")
        h = np.diff(c)
        if not (np.all(h > 0) or np.all(h < 0)):
            raise ValueError("coordinate is not strictly monotonic")
        self.axis = axis
        self.n = c.size
        self.periodic = periodic
        if periodic:
            wrap = c[0] + np.sign(h[0]) * period - c[-1]
            hh = np.concatenate([[wrap], h, [wrap]])
        else:
            hh = h
        # ``like``: the operator of a whole axis this one is a stretch of (Grid.rows); its
        # choice of formula and its uniform spacing are kept, so that the stretch's inner
        # derivatives are the whole axis's to the last bit (a stretch's own first spacing
        # can differ from the whole axis's by a rounding)
        self.uniform = (
            like.uniform if like is not None else bool(np.allclose(hh, hh[0], rtol=1e-9, atol=0.0))
        )
        if like is not None and like.uniform:
            hh = np.full_like(hh, like._h[0])
        self._h = hh
        self._scale = scale
        self._build(c, hh)

    # -- construction -------------------------------------------------------
    def _scale_at(self, sl):
        """The scale restricted to positions ``sl`` along the axis."""
        s = np.asarray(self._scale, dtype=np.float64)
        if s.ndim == 0:
            return s
        # the scale broadcasts against (y, x): axis -2 is its first axis, -1 its last
        ax = s.ndim + self.axis
        if s.shape[ax] == 1:
            return s
        return s[_take(s.ndim, ax, sl)]

    def _shaped(self, w):
        """Reshape 1-D weights so they broadcast along this operator's axis."""
        w = np.asarray(w, dtype=np.float64)
        shape = [1] * (-self.axis)
        shape[0] = w.size
        return w.reshape(shape)

    def _build(self, c, hh):
        n = self.n
        # spacings before and after each point (each interior point when not periodic)
        h1, h2 = hh[:-1], hh[1:]
        if self.uniform:
            h = hh[0]
            self.c_int = self._scale_at(slice(1, n - 1)) / (2 * h)
            if self.periodic:
                self.c_first = self._scale_at(slice(0, 1)) / (2 * h)
                self.c_last = self._scale_at(slice(n - 1, n)) / (2 * h)
            else:
                w = _one_sided(h, h)
                self.w_first = [wi * self._scale_at(slice(0, 1)) for wi in w]
                self.w_last = [-wi * self._scale_at(slice(n - 1, n)) for wi in w[::-1]]
            return
        lo, mid, hi = _centred(h1, h2)
        if self.periodic:
            s = lambda a, sl: self._shaped(a[sl]) * self._scale_at(sl)  # noqa: E731
            self.w_int = [s(lo, slice(1, n - 1)), s(mid, slice(1, n - 1)), s(hi, slice(1, n - 1))]
            self.w_first = [s(lo, slice(0, 1)), s(mid, slice(0, 1)), s(hi, slice(0, 1))]
            self.w_last = [s(lo, slice(n - 1, n)), s(mid, slice(n - 1, n)), s(hi, slice(n - 1, n))]
        else:
            sc = self._scale_at(slice(1, n - 1))
            self.w_int = [self._shaped(lo) * sc, self._shaped(mid) * sc, self._shaped(hi) * sc]
            first = _one_sided(c[1] - c[0], c[2] - c[1])
            last = _one_sided(c[n - 2] - c[n - 1], c[n - 3] - c[n - 2])
            self.w_first = [wi * self._scale_at(slice(0, 1)) for wi in first]
            self.w_last = [wi * self._scale_at(slice(n - 1, n)) for wi in last[::-1]]

    def _with_factor(self, factor):
        cache = self.__dict__.setdefault("_factored", {})
        op = cache.get(factor)
        if op is None:
            op = cache[factor] = copy.copy(self)
            op._factored = {}
            for name in ("c_int", "c_first", "c_last"):
                if hasattr(self, name):
                    setattr(op, name, getattr(self, name) * factor)
            for name in ("w_int", "w_first", "w_last"):
                if hasattr(self, name):
                    setattr(op, name, [w * factor for w in getattr(self, name)])
        return op

    # -- application ------------------------------------------------------------
    def __call__(self, f, out=None, factor=None):
        """Return the scaled derivative of ``f`` along the axis, as float64.

        ``factor`` (a number) multiplies the result at no extra pass over the data.
        """
        if factor is not None:
            return self._with_factor(factor)(f, out)
        f = np.asarray(f)
        if f.shape[self.axis] != self.n:
            raise ValueError(
                f"field has {f.shape[self.axis]} points along axis {self.axis}, grid has {self.n}"
            )
        shape = (
            np.broadcast_shapes(f.shape, np.shape(self._scale)) if np.ndim(self._scale) else f.shape
        )
        if out is None:
            out = np.empty(shape, dtype=np.float64)
        nd, ax, n = f.ndim, self.axis, self.n
        T = lambda sl: _take(nd, ax, sl)  # noqa: E731
        o_int = out[T(slice(1, n - 1))]
        if self.uniform:
            np.subtract(f[T(slice(2, n))], f[T(slice(0, n - 2))], out=o_int, dtype=np.float64)
            o_int *= self.c_int
            if self.periodic:
                o = out[T(slice(0, 1))]
                np.subtract(f[T(slice(1, 2))], f[T(slice(n - 1, n))], out=o, dtype=np.float64)
                o *= self.c_first
                o = out[T(slice(n - 1, n))]
                np.subtract(f[T(slice(0, 1))], f[T(slice(n - 2, n - 1))], out=o, dtype=np.float64)
                o *= self.c_last
                return out
        else:
            lo, mid, hi = self.w_int
            np.multiply(f[T(slice(0, n - 2))], lo, out=o_int, dtype=np.float64)
            o_int += f[T(slice(1, n - 1))] * mid
            o_int += f[T(slice(2, n))] * hi
            if self.periodic:
                lo, mid, hi = self.w_first
                out[T(slice(0, 1))] = (
                    f[T(slice(n - 1, n))] * lo + f[T(slice(0, 1))] * mid + f[T(slice(1, 2))] * hi
                )
                lo, mid, hi = self.w_last
                out[T(slice(n - 1, n))] = (
                    f[T(slice(n - 2, n - 1))] * lo
                    + f[T(slice(n - 1, n))] * mid
                    + f[T(slice(0, 1))] * hi
                )
                return out
        w0, w1, w2 = self.w_first
        out[T(slice(0, 1))] = (
            f[T(slice(0, 1))] * w0 + f[T(slice(1, 2))] * w1 + f[T(slice(2, 3))] * w2
        )
        w0, w1, w2 = self.w_last
        out[T(slice(n - 1, n))] = (
            f[T(slice(n - 3, n - 2))] * w0
            + f[T(slice(n - 2, n - 1))] * w1
            + f[T(slice(n - 1, n))] * w2
        )
        return out


def derivative_along(field, coord, axis: int):
    """Second-order derivative of ``field`` along ``axis`` with respect to ``coord``.

    For the vertical (d/dp over pressure levels in any order and spacing) and
    for time (irregular steps). Uses the same weights as :class:`Stencil`; with
    two points it falls back to the first-order difference.
    """
    field = np.asarray(field)
    coord = np.asarray(coord, dtype=np.float64)
    if coord.size == 2:
        d = np.diff(field, axis=axis).astype(np.float64) / (coord[1] - coord[0])
        return np.repeat(d, 2, axis=axis)
    ax = axis if axis < 0 else axis - field.ndim
    return Stencil(coord, ax)(field)


class _Metrics:
    """What a Grid needs for its derivatives: axis coordinates, metric scales, rotation.

    The derivative along the grid's x axis is ``x_scale`` times d/d(x_coord)
    (x_coord is longitude in radians or projection x in metres); likewise for
    y. On projected grids ``cos_g`` and ``sin_g`` rotate the axis derivatives
    to east and north.
    """

    ddx_axis: Stencil
    ddy_axis: Stencil

    def __init__(
        self,
        x_coord,
        y_coord,
        x_scale,
        y_scale,
        periodic,
        cos_g=None,
        sin_g=None,
        like: _Metrics | None = None,
    ):
        self.x_coord, self.y_coord = x_coord, y_coord
        self.x_scale, self.y_scale = x_scale, y_scale
        self.periodic = periodic
        self.cos_g, self.sin_g = cos_g, sin_g
        self.ddx_axis = Stencil(
            x_coord,
            -1,
            periodic=periodic,
            period=2 * np.pi,
            scale=x_scale,
            like=None if like is None else like.ddx_axis,
        )
        self.ddy_axis = Stencil(
            y_coord, -2, scale=y_scale, like=None if like is None else like.ddy_axis
        )

    def rows(self, j0: int, j1: int) -> _Metrics:
        """The metrics of rows j0..j1-1 (a latitude band or a strip of y)."""
        cut = lambda a: a if a is None or np.ndim(a) == 0 else a[j0:j1]  # noqa: E731
        return _Metrics(
            self.x_coord,
            self.y_coord[j0:j1],
            cut(self.x_scale),
            cut(self.y_scale),
            self.periodic,
            cut(self.cos_g),
            cut(self.sin_g),
            like=self,
        )


class Grid:
    """A horizontal grid on the sphere: coordinates, metrics, Coriolis, masks.

    Build one with :meth:`latlon` or :meth:`projected`. Fields are arrays
    whose last two axes are (y, x); leading axes (time, level) are allowed.

    Attributes
    ----------
    kind : {"latlon", "projected"}
    shape : (ny, nx)
    lat, lon : 2-D arrays, degrees
    f : 2-D array, s-1
        Coriolis parameter, 2 Omega sin(phi) unless overridden
        (:meth:`with_coriolis`, :meth:`f_plane`, :meth:`beta_plane`).
    radius, omega : float
        Sphere radius (m) and rotation rate (rad s-1).
    min_lat : float
        Quantities divided by f are masked where |f| < 2 Omega sin(min_lat),
        i.e. within ``min_lat`` degrees of the equator for the usual f.
    periodic : bool
        True on a global lat-lon grid (x wraps around).
    frame : str
        The vector frame, said in words (see the module docstring).
    """

    frame = "earth-relative components; derivatives along east and north"

    def __init__(
        self,
        *,
        kind,
        lat2d,
        lon2d,
        metrics,
        cell_area,
        radius,
        omega,
        f=None,
        min_lat=10.0,
        pole_limit=89.99,
        periodic=False,
        x=None,
        y=None,
        crs=None,
        lat1d=None,
        lon1d=None,
        map_factor=None,
        convergence=None,
    ):
        self.kind = kind
        self.lat = _readonly(lat2d)
        self.lon = _readonly(lon2d)
        self.shape = self.lat.shape
        self._m = metrics
        self.cell_area = _readonly(cell_area)
        self.radius = float(radius)
        self.omega = float(omega)
        self.min_lat = float(min_lat)
        self.pole_limit = float(pole_limit)
        self.periodic = bool(periodic)
        self.x, self.y, self.crs = x, y, crs
        self.lat1d, self.lon1d = lat1d, lon1d
        self.map_factor = None if map_factor is None else _readonly(map_factor)
        self.convergence = None if convergence is None else _readonly(convergence)
        if f is None:
            f = coriolis_parameter(self.lat, self.omega)
        f = np.broadcast_to(np.asarray(f, dtype=np.float64), self.shape)
        self.f = _readonly(f)

    # -- constructors -----------------------------------------------------------
    @classmethod
    def latlon(
        cls,
        lat,
        lon,
        *,
        radius: float = C.EARTH_RADIUS,
        omega: float = C.OMEGA,
        min_lat: float = 10.0,
        pole_limit: float = 89.99,
        coriolis=None,
    ) -> Grid:
        """A regular or Gaussian latitude-longitude grid.

        Parameters
        ----------
        lat : 1-D array, degrees
            Ascending or descending, within [-90, 90], any spacing (Gaussian).
        lon : 1-D array, degrees
            0..360, -180..180, or a regional span that may cross the dateline;
            treated as periodic when the points cover the whole circle at even
            spacing.
        radius, omega : float
            Sphere radius (m) and rotation rate (rad s-1).
        min_lat : float
            Tropical mask for quantities divided by f (degrees).
        pole_limit : float
            Rows with |lat| >= pole_limit have no east-west derivative (NaN).
        coriolis : array, optional
            Override of f, broadcastable to (ny, nx).
        """
        lat = np.asarray(lat, dtype=np.float64)
        lon = np.asarray(lon, dtype=np.float64)
        if lat.ndim != 1 or lon.ndim != 1:
            raise ValueError("latitude and longitude must be 1-D for a lat-lon grid")
        if lat.size < 3 or lon.size < 3:
            raise ValueError(
                f"grid has {lat.size} x {lon.size} points; at least 3 x 3 are needed for "
                "derivatives"
            )
        if not np.all(np.isfinite(lat)) or not np.all(np.isfinite(lon)):
            raise ValueError("latitude or longitude holds missing values")
        if np.any(np.abs(lat) > 90 + 1e-9):
            raise ValueError("latitude outside -90..90 degrees")
        dlat = np.diff(lat)
        if not (np.all(dlat > 0) or np.all(dlat < 0)):
            raise ValueError("latitude is not strictly monotonic (repeated or unsorted values)")
        lon_u = np.rad2deg(np.unwrap(np.deg2rad(lon)))
        dlon = np.diff(lon_u)
        if not (np.all(dlon > 0) or np.all(dlon < 0)):
            raise ValueError("longitude is not strictly monotonic (repeated or unsorted values)")
        span = abs(lon_u[-1] - lon_u[0])
        mean_step = span / (lon.size - 1)
        wrap = 360.0 - span
        if abs(wrap) < 1e-6 * 360:
            raise ValueError(
                "longitude repeats its first column at the end (a cyclic point); drop it"
            )
        periodic = bool(abs(wrap - mean_step) < 1e-3 * mean_step)
        if span > 360 + 1e-6:
            raise ValueError("longitude spans more than 360 degrees")

        phi = np.deg2rad(lat)
        lam = np.deg2rad(lon_u)
        cos_phi = np.cos(phi)
        polar = np.abs(lat) >= pole_limit
        with np.errstate(divide="ignore"):
            inv_acos = np.where(polar, np.nan, 1.0 / (radius * cos_phi))[:, None]

        # cell areas: a^2 dlambda (sin phi_north - sin phi_south), bounds at midpoints
        lat_b = np.concatenate(
            [
                [phi[0] - (phi[1] - phi[0]) / 2],
                (phi[1:] + phi[:-1]) / 2,
                [phi[-1] + (phi[-1] - phi[-2]) / 2],
            ]
        )
        lat_b = np.clip(lat_b, -np.pi / 2, np.pi / 2)
        band = np.abs(np.diff(np.sin(lat_b)))
        if periodic:
            lon_w = np.full(lon.size, 2 * np.pi / lon.size)
        else:
            lon_b = np.concatenate(
                [
                    [lam[0] - (lam[1] - lam[0]) / 2],
                    (lam[1:] + lam[:-1]) / 2,
                    [lam[-1] + (lam[-1] - lam[-2]) / 2],
                ]
            )
            lon_w = np.abs(np.diff(lon_b))
        area = radius**2 * band[:, None] * lon_w[None, :]

        lat2d, lon2d = np.broadcast_arrays(lat[:, None], lon[None, :])
        grid = cls(
            kind="latlon",
            lat2d=lat2d,
            lon2d=lon2d,
            metrics=_Metrics(lam, phi, inv_acos, 1.0 / radius, periodic),
            cell_area=area,
            radius=radius,
            omega=omega,
            min_lat=min_lat,
            pole_limit=pole_limit,
            periodic=periodic,
            lat1d=lat,
            lon1d=lon,
        )
        if coriolis is not None:
            grid = grid.with_coriolis(coriolis)
        return grid

    @classmethod
    def projected(
        cls,
        x,
        y,
        crs,
        *,
        radius: float = C.EARTH_RADIUS,
        omega: float = C.OMEGA,
        min_lat: float = 10.0,
        pole_limit: float = 89.99,
        coriolis=None,
    ) -> Grid:
        """A grid regular in the coordinates (x, y) of a map projection.

        The map factor and the meridian convergence come from pyproj
        (``Proj.get_factors``), never from hand-written projection formulas.
        The derivative along east is
        ``cos(g) m d/dx + sin(g) m d/dy`` and along north
        ``-sin(g) m d/dx + cos(g) m d/dy``, g being the angle of true north
        counter-clockwise from grid north. Conformal projections (Lambert
        conformal, polar stereographic, Mercator, transverse Mercator) and
        projections whose axes follow the parallels and meridians are supported.

        Parameters
        ----------
        x, y : 1-D arrays, metres (projection coordinates)
        crs : anything ``pyproj.CRS.from_user_input`` accepts
        """
        import pyproj

        crs = pyproj.CRS.from_user_input(crs)
        x = np.asarray(x, dtype=np.float64)
        y = np.asarray(y, dtype=np.float64)
        if x.ndim != 1 or y.ndim != 1 or x.size < 3 or y.size < 3:
            raise ValueError("projected grid needs 1-D x and y with at least 3 points each")
        to_geo = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
        xx, yy = np.meshgrid(x, y)
        lon2d, lat2d = to_geo.transform(xx, yy)
        if not (np.all(np.isfinite(lon2d)) and np.all(np.isfinite(lat2d))):
            raise ValueError("some grid points lie outside the projection's valid area")
        fac = pyproj.Proj(crs).get_factors(lon2d, lat2d)
        h = np.asarray(fac.meridional_scale, dtype=np.float64)
        k = np.asarray(fac.parallel_scale, dtype=np.float64)
        gamma = _convergence(fac)
        conformal = np.nanmax(np.abs(np.asarray(fac.angular_distortion))) < 1e-3
        aligned = np.nanmax(np.abs(gamma)) < 1e-9
        if not (conformal or aligned):
            raise ValueError(
                f"projection {crs.name!r} is neither conformal nor aligned with the meridians; "
                "regrid the data or use a conformal projection"
            )
        if conformal:
            mx = my = k
        else:
            mx, my = k, h
        dx = np.abs(np.gradient(x))[None, :]
        dy = np.abs(np.gradient(y))[:, None]
        area = dx * dy / (np.asarray(fac.areal_scale, dtype=np.float64))
        g = np.deg2rad(gamma)
        # at a pole east and north are undefined: no rotation, so no gradient
        g[np.abs(lat2d) >= pole_limit] = np.nan
        grid = cls(
            kind="projected",
            lat2d=lat2d,
            lon2d=lon2d,
            metrics=_Metrics(x, y, mx, my, False, np.cos(g), np.sin(g)),
            cell_area=area,
            radius=radius,
            omega=omega,
            min_lat=min_lat,
            pole_limit=pole_limit,
            periodic=False,
            x=x,
            y=y,
            crs=crs,
            map_factor=k,
            convergence=gamma,
        )
        if coriolis is not None:
            grid = grid.with_coriolis(coriolis)
        return grid

    # -- variants -----------------------------------------------------------------
    def _replace(self, **changes) -> Grid:
        new = object.__new__(Grid)
        new.__dict__.update({k: v for k, v in self.__dict__.items() if k not in _CACHED})
        new.__dict__.update(changes)
        return new

    def with_coriolis(self, f) -> Grid:
        """The same grid with the Coriolis parameter replaced by ``f`` (s-1)."""
        f = np.broadcast_to(np.asarray(f, dtype=np.float64), self.shape)
        return self._replace(f=_readonly(f))

    def f_plane(self, lat0: float) -> Grid:
        """f = 2 Omega sin(lat0) everywhere (an f-plane)."""
        return self.with_coriolis(np.full(self.shape, coriolis_parameter(lat0, self.omega)))

    def beta_plane(self, lat0: float) -> Grid:
        """f = f0 + beta0 * a (phi - phi0): the beta-plane about ``lat0``.

        beta0 = 2 Omega cos(phi0) / a (Holton and Hakim 2013, An Introduction
        to Dynamic Meteorology, 5th ed., the beta-plane approximation).
        """
        phi0 = np.deg2rad(lat0)
        f0 = 2 * self.omega * np.sin(phi0)
        beta0 = 2 * self.omega * np.cos(phi0) / self.radius
        yy = self.radius * (np.deg2rad(self.lat) - phi0)
        return self.with_coriolis(f0 + beta0 * yy)

    def rows(self, j0: int, j1: int) -> Grid:
        """The grid of rows j0..j1-1 (a band of latitude or a strip of y).

        Metrics, areas and f are sliced from this grid, so derivatives inside
        the band are exactly those of the whole grid; the band's first and last
        rows use one-sided differences, so callers keep a halo row. Bands are
        cached on the grid.
        """
        cache = self.__dict__.setdefault("_bands", {})
        band = cache.get((j0, j1))
        if band is None:
            band = cache[(j0, j1)] = self._rows(j0, j1)
        return band

    def _rows(self, j0: int, j1: int) -> Grid:
        ny = self.shape[0]
        if not 0 <= j0 < j1 <= ny or j1 - j0 < 3:
            raise ValueError(f"rows {j0}..{j1} do not make a band of at least 3 rows in {ny}")
        sl = slice(j0, j1)
        cut = lambda a: None if a is None else _readonly(a[sl])  # noqa: E731
        return self._replace(
            lat=cut(self.lat),
            lon=cut(self.lon),
            shape=(j1 - j0, self.shape[1]),
            _m=self._m.rows(j0, j1),
            cell_area=cut(self.cell_area),
            f=cut(self.f),
            y=None if self.y is None else self.y[sl],
            lat1d=None if self.lat1d is None else self.lat1d[sl],
            map_factor=cut(self.map_factor),
            convergence=cut(self.convergence),
        )

    def with_min_lat(self, min_lat: float) -> Grid:
        """The same grid with another tropical mask latitude (degrees)."""
        return self._replace(min_lat=float(min_lat))

    # -- metrics ------------------------------------------------------------------
    def _lat_field(self):
        """Latitude as a (ny, 1) column on lat-lon grids, else the 2-D field (degrees)."""
        return self.lat1d[:, None] if self.kind == "latlon" else self.lat

    @cached_property
    def tan_lat_over_a(self):
        """tan(phi) / a, m-1: the metric factor of the spherical equations (NaN at the poles)."""
        lat = self._lat_field()
        t = np.tan(np.deg2rad(lat)) / self.radius
        return _readonly(np.where(np.abs(lat) >= self.pole_limit, np.nan, t))

    @cached_property
    def cos_lat(self):
        """cos(phi), broadcastable to the grid shape."""
        return _readonly(np.cos(np.deg2rad(self._lat_field())))

    @cached_property
    def pole_mask(self):
        """True on the pole rows (|lat| >= pole_limit), where d/dx is undefined."""
        return _readonly(np.abs(self.lat) >= self.pole_limit)

    @cached_property
    def tropics_mask(self):
        """True where |f| < 2 Omega sin(min_lat): quantities divided by f are masked."""
        fmin = 2 * self.omega * np.sin(np.deg2rad(self.min_lat))
        return _readonly(np.abs(self.f) < fmin)

    @cached_property
    def inverse_f(self):
        """1 / f with the tropical mask applied (NaN there), s."""
        with np.errstate(divide="ignore"):
            inv = 1.0 / self.f
        inv = np.where(self.tropics_mask, np.nan, inv)
        return _readonly(inv)

    def mask_report(self) -> dict:
        """Counts of the points the masks remove, so no output hides them."""
        return {
            "tropics_points": int(self.tropics_mask.sum()),
            "tropics_min_lat": self.min_lat,
            "pole_points": int(self.pole_mask.sum()),
            "pole_limit": self.pole_limit,
        }

    # -- derivatives --------------------------------------------------------------
    def grad(self, field, factor=None, out=None):
        """(d/dx, d/dy) of a scalar field along east and north, per metre.

        Lat-lon: d/dx = 1/(a cos(phi)) d/dlambda, d/dy = 1/a d/dphi.
        Projected: the axis derivatives times the map factor, rotated by the
        meridian convergence (see :meth:`projected`). ``factor`` (a number)
        multiplies both components without an extra pass; ``out`` is an
        optional pair of float64 arrays to write into.
        """
        m = self._m
        ox, oy = (None, None) if out is None else out
        gx = m.ddx_axis(field, out=ox, factor=factor)
        gy = m.ddy_axis(field, out=oy, factor=factor)
        if m.cos_g is None:
            return gx, gy
        east = gx * m.cos_g
        east += gy * m.sin_g
        gy *= m.cos_g
        gy -= gx * m.sin_g
        gx[...] = east
        return gx, gy

    def ddx(self, field, factor=None):
        """d/dx along east, per metre, times ``factor`` if given (see :meth:`grad`)."""
        if self._m.cos_g is None:
            return self._m.ddx_axis(field, factor=factor)
        return self.grad(field, factor)[0]

    def ddy(self, field, factor=None):
        """d/dy along north, per metre, times ``factor`` if given (see :meth:`grad`)."""
        if self._m.cos_g is None:
            return self._m.ddy_axis(field, factor=factor)
        return self.grad(field, factor)[1]

    def check_field(self, field, name: str = "field"):
        """Raise a ValueError naming ``name`` if its last two axes do not fit the grid."""
        shp = np.shape(field)
        if len(shp) < 2 or tuple(shp[-2:]) != tuple(self.shape):
            raise ValueError(f"{name} has shape {shp}; the grid is {self.shape} (y, x)")

    def __repr__(self):
        ny, nx = self.shape
        extra = " periodic" if self.periodic else ""
        return (
            f"<Grid {self.kind} {ny}x{nx}{extra} lat {np.nanmin(self.lat):.2f}.."
            f"{np.nanmax(self.lat):.2f}>"
        )


_CACHED = (
    "tan_lat_over_a",
    "cos_lat",
    "pole_mask",
    "tropics_mask",
    "inverse_f",
    "_bands",
    "_systems_work",
)


def _convergence(factors):
    """Angle of true north counter-clockwise from grid north, degrees.

    This is the sense of pyproj's ``meridian_convergence`` (positive east of
    the central meridian of a northern Lambert conformal projection);
    ``tests/test_grid.py`` pins it against the closed form n (lon - lon0) of a
    tangent Lambert conformal projection and against a finite difference of
    the projection itself.
    """
    return np.asarray(factors.meridian_convergence, dtype=np.float64)


def _readonly(a):
    """A read-only array owning its data (metrics must not be changed in place)."""
    a = np.array(
        a, dtype=np.result_type(a, np.float64) if np.asarray(a).dtype != bool else bool, copy=True
    )
    a.flags.writeable = False
    return a
