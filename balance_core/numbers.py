"""Nondimensional numbers of rotating, stratified flow, and N^2 on pressure levels.

Each function takes scalars or arrays in SI units and returns NaN where the
number has no meaning (Froude, Burger and the deformation radius where
N^2 <= 0, anything divided by a zero f).
"""

from __future__ import annotations

import numpy as np

from . import constants as C
from .grid import derivative_along
from .thermo import potential_temperature

__all__ = [
    "rossby_number",
    "local_rossby_vorticity",
    "local_rossby_acceleration",
    "ekman_number",
    "brunt_vaisala_squared",
    "brunt_vaisala_squared_height",
    "vertical_shear_squared",
    "froude_number",
    "burger_number",
    "richardson_number",
    "deformation_radius",
]


def _f64(x):
    return np.asarray(x, dtype=np.float64)


def _safe_div(num, den):
    num, den = np.broadcast_arrays(_f64(num), _f64(den))
    out = np.full(num.shape, np.nan)
    ok = (den != 0) & np.isfinite(den)
    np.divide(num, den, out=out, where=ok)
    return out if out.ndim else float(out)


def rossby_number(speed, f0, length):
    """Rossby number Ro = U / (|f0| L) from scales.

    The ratio of the acceleration U^2 / L to the Coriolis force f0 U
    (Holton and Hakim 2013, An Introduction to Dynamic Meteorology, 5th ed.,
    ch. 2, scale analysis). NaN where f0 = 0.
    """
    return _safe_div(speed, np.abs(_f64(f0)) * _f64(length))


def local_rossby_vorticity(vorticity, f):
    """Local Rossby number |zeta / f| from the relative vorticity (s-1)."""
    return np.abs(_safe_div(vorticity, f))


def local_rossby_acceleration(acc_x, acc_y, f, u, v):
    """Local Rossby number |DV/Dt| / |f V|: acceleration over Coriolis, pointwise."""
    return _safe_div(np.hypot(acc_x, acc_y), np.abs(_f64(f)) * np.hypot(u, v))


def ekman_number(viscosity, f0, depth):
    """Ekman number Ek = nu / (|f0| H^2): viscous over Coriolis force.

    (Holton and Hakim 2013, ch. 8 on the planetary boundary layer.)
    """
    return _safe_div(viscosity, np.abs(_f64(f0)) * _f64(depth) ** 2)


def brunt_vaisala_squared(temperature, pressure, axis: int = 0):
    """Brunt-Vaisala frequency squared on pressure levels, s-2.

    N^2 = (g / theta) dtheta/dz = g dln(theta)/dz, and with the hydrostatic
    relation dz = -(R_d T / g) dln(p):

        N^2 = -(g^2 / (R_d T)) dln(theta)/dln(p)

    theta = T (p0 / p)^(R_d / c_p). Differentiating ln(theta) against ln(p) is
    exact for a constant lapse rate, where both are linear in ln(p) (a dtheta/dp
    difference is not). ``pressure`` is 1-D (Pa) along ``axis`` of
    ``temperature`` (K); any order and spacing (second-order differences).
    (American Meteorological Society, Glossary of Meteorology,
    "Brunt-Vaisala frequency"; Holton and Hakim 2013, An Introduction to Dynamic
    Meteorology, 5th ed., ch. 2, static stability.)
    """
    t = _f64(temperature)
    p = _f64(pressure)
    shape = [1] * t.ndim
    shape[axis] = p.size
    pp = p.reshape(shape)
    ln_theta = np.log(potential_temperature(t, pp))
    dlntheta_dlnp = derivative_along(ln_theta, np.log(p), axis)
    return -(C.G0**2) / (C.R_DRY * t) * dlntheta_dlnp


def brunt_vaisala_squared_height(theta, height, axis: int = 0):
    """N^2 = (g / theta) dtheta/dz from potential temperature on height levels (m)."""
    th = _f64(theta)
    return C.G0 / th * derivative_along(th, _f64(height), axis)


def vertical_shear_squared(u, v, temperature, pressure, axis: int = 0):
    """|dV/dz|^2 on pressure levels, s-2, with d/dz = -(g / (R_d T)) d/dln(p) (hydrostatic)."""
    p = _f64(pressure)
    t = _f64(temperature)
    k = -C.G0 / (C.R_DRY * t)  # dln(p)/dz
    lnp = np.log(p)
    dudz = derivative_along(u, lnp, axis) * k
    dvdz = derivative_along(v, lnp, axis) * k
    return dudz * dudz + dvdz * dvdz


def _sqrt_positive(n2):
    n2 = _f64(n2)
    with np.errstate(invalid="ignore"):
        return np.where(n2 > 0, np.sqrt(np.where(n2 > 0, n2, np.nan)), np.nan)


def froude_number(speed, n2, depth):
    """Froude number Fr = U / (N H); NaN where N^2 <= 0."""
    return _safe_div(speed, _sqrt_positive(n2) * _f64(depth))


def burger_number(n2, depth, f0, length):
    """Burger number Bu = (N H / (f0 L))^2 = (L_R / L)^2; NaN where N^2 <= 0."""
    ratio = _safe_div(_sqrt_positive(n2) * _f64(depth), np.abs(_f64(f0)) * _f64(length))
    return ratio * ratio


def richardson_number(n2, shear2):
    """Gradient Richardson number Ri = N^2 / |dV/dz|^2 (may be negative)."""
    return _safe_div(n2, shear2)


def deformation_radius(n2, depth, f0):
    """Rossby radius of deformation L_R = N H / |f0|, m; NaN where N^2 <= 0."""
    return _safe_div(_sqrt_positive(n2) * _f64(depth), np.abs(_f64(f0)))
