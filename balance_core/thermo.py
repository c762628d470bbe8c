"""Thermodynamic helpers: potential temperature, density, the standard atmosphere.

Plain numpy functions in SI units (K, Pa, kg m-3, m).
"""

from __future__ import annotations

import numpy as np

from . import constants as C

__all__ = [
    "potential_temperature",
    "density",
    "virtual_temperature",
    "vertical_velocity",
    "standard_atmosphere_temperature",
    "standard_atmosphere_density",
    "standard_atmosphere_height",
    "hypsometric_thickness",
    "log_pressure_mean",
]


def potential_temperature(temperature, pressure):
    """Potential temperature theta = T (p0 / p)^(R_d / c_p), K.

    Notes
    -----
    Poisson's equation with p0 = 1000 hPa and R_d / c_p = 2/7 (American
    Meteorological Society, Glossary of Meteorology, "potential temperature").
    """
    return np.asarray(temperature, dtype=np.float64) * (C.P0 / np.asarray(pressure)) ** C.KAPPA


def density(pressure, temperature):
    """Density of dry air from the ideal gas law, rho = p / (R_d T), kg m-3."""
    return np.asarray(pressure, dtype=np.float64) / (C.R_DRY * np.asarray(temperature))


def virtual_temperature(temperature, mixing_ratio):
    """Virtual temperature T_v = T (w + eps) / (eps (1 + w)), K.

    ``mixing_ratio`` in kg kg-1 (American Meteorological Society, Glossary of
    Meteorology, "virtual temperature", written with the mixing ratio).
    """
    w = np.asarray(mixing_ratio, dtype=np.float64)
    return np.asarray(temperature) * (w + C.EPSILON) / (C.EPSILON * (1.0 + w))


def vertical_velocity(omega, pressure, temperature=None):
    """Vertical velocity w = -omega / (rho g), m s-1, from omega = Dp/Dt (Pa s-1).

    rho = p / (R_d T) where temperature is given, else the U.S. Standard
    Atmosphere (1976) density at that pressure. Hydrostatic approximation
    (common practice, no source).
    """
    p = np.asarray(pressure, dtype=np.float64)
    if temperature is None:
        rho = standard_atmosphere_density(p)
    else:
        rho = density(p, temperature)
    return -np.asarray(omega, dtype=np.float64) / (rho * C.G0)


def _std_layers():
    """Base pressure, temperature, height and lapse rate of each 1976 layer."""
    rows = []
    p, t = C.STD_SEA_LEVEL_PRESSURE, C.STD_SEA_LEVEL_TEMPERATURE
    r = C.STD_GAS_CONSTANT / C.STD_MOLAR_MASS
    for (z0, lapse), nxt in zip(C.STD_LAYERS, C.STD_LAYERS[1:] + ((np.inf, 0.0),)):
        rows.append((p, t, z0, lapse))
        dz = nxt[0] - z0
        if not np.isfinite(dz):
            break
        if lapse == 0.0:
            p = p * np.exp(-C.G0 * dz / (r * t))
        else:
            t_top = t + lapse * dz
            p = p * (t_top / t) ** (-C.G0 / (r * lapse))
            t = t_top
    return rows


_LAYERS = _std_layers()


def standard_atmosphere_height(pressure):
    """Geopotential height (m) of a pressure surface in the U.S. Standard Atmosphere, 1976.

    Valid from the ground to 1 hPa (47 km). Tabulated values for checking:
    850 hPa 1457 m, 500 hPa 5574 m (U.S. Standard Atmosphere 1976, Table I).
    """
    p = np.asarray(pressure, dtype=np.float64)
    r = C.STD_GAS_CONSTANT / C.STD_MOLAR_MASS
    z = np.full(p.shape, np.nan)
    for i, (pb, tb, zb, lapse) in enumerate(_LAYERS):
        p_top = _LAYERS[i + 1][0] if i + 1 < len(_LAYERS) else 0.0
        sel = (p <= pb) & (p > p_top) if i > 0 else (p > p_top)
        if lapse == 0.0:
            zz = zb - r * tb / C.G0 * np.log(p / pb)
        else:
            zz = zb + tb / lapse * ((p / pb) ** (-r * lapse / C.G0) - 1.0)
        z = np.where(sel, zz, z)
    return z


def standard_atmosphere_temperature(pressure):
    """Temperature (K) of the U.S. Standard Atmosphere (1976) at a pressure (Pa)."""
    p = np.asarray(pressure, dtype=np.float64)
    z = standard_atmosphere_height(p)
    t = np.full(p.shape, np.nan)
    for i, (pb, tb, zb, lapse) in enumerate(_LAYERS):
        p_top = _LAYERS[i + 1][0] if i + 1 < len(_LAYERS) else 0.0
        sel = (p <= pb) & (p > p_top) if i > 0 else (p > p_top)
        t = np.where(sel, tb + lapse * (z - zb), t)
    return t


def standard_atmosphere_density(pressure):
    """Density (kg m-3) of the U.S. Standard Atmosphere (1976) at a pressure (Pa)."""
    p = np.asarray(pressure, dtype=np.float64)
    r = C.STD_GAS_CONSTANT / C.STD_MOLAR_MASS
    return p / (r * standard_atmosphere_temperature(p))


def log_pressure_mean(values, pressure, axis: int = 0):
    """Mean of ``values`` over a layer weighted by d ln p (trapezoid rule).

    T_mean = integral T d(ln p) / ln(p_bottom / p_top): the layer temperature of
    the hypsometric equation (American Meteorological Society, Glossary of
    Meteorology, "hypsometric equation").
    """
    v = np.moveaxis(np.asarray(values, dtype=np.float64), axis, 0)
    lnp = np.log(np.asarray(pressure, dtype=np.float64))
    if lnp.size < 2:
        raise ValueError("a layer mean needs at least two levels")
    d = np.diff(lnp).reshape((-1,) + (1,) * (v.ndim - 1))
    total = np.sum(0.5 * (v[1:] + v[:-1]) * d, axis=0)
    return total / (lnp[-1] - lnp[0])


def hypsometric_thickness(mean_virtual_temperature, p_bottom, p_top):
    """Thickness (geopotential m) of a layer: Z_top - Z_bottom = (R_d T_v / g0) ln(p_b / p_t).

    The hypsometric equation (American Meteorological Society, Glossary of
    Meteorology, "hypsometric equation").
    """
    return C.R_DRY * np.asarray(mean_virtual_temperature) / C.G0 * np.log(p_bottom / p_top)
