"""Published analytic flows, used to check the numerics (``balance-desk verify``, tests).

Nothing here is demo data: each function reproduces a flow from the
literature in closed form, so that the budget can be compared with an exact
answer.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from .grid import Grid

__all__ = [
    "WILLIAMSON",
    "williamson_case2",
    "holland_pressure",
    "holland_gradient_wind",
    "great_circle_distance",
]

#: Constants of Williamson et al. (1992), section 2 (Earth radius, rotation,
#: gravity) and test case 2 (u0 = 2 pi a / 12 days, g h0 = 2.94e4 m2 s-2).
WILLIAMSON = {"a": 6.37122e6, "omega": 7.292e-5, "g": 9.80616, "gh0": 2.94e4, "days": 12.0}


@dataclasses.dataclass
class WilliamsonCase2:
    """Fields of test case 2 on a lat-lon grid (SI, earth-relative)."""

    grid: Grid
    u: np.ndarray
    v: np.ndarray
    geopotential: np.ndarray  # g h, m2 s-2
    alpha: float


def williamson_case2(nlat: int, alpha: float = np.pi / 4) -> WilliamsonCase2:
    """Steady nonlinear zonal geostrophic flow with its axis tilted by ``alpha``.

    Williamson, Drake, Hack, Jakob and Swarztrauber (1992), "A standard test
    set for numerical approximations to the shallow water equations in
    spherical geometry", J. Comput. Phys. 102, 211-224, test case 2:

        u  = u0 (cos(phi) cos(alpha) + cos(lambda) sin(phi) sin(alpha))
        v  = -u0 sin(lambda) sin(alpha)
        gh = g h0 - (a Omega u0 + u0^2 / 2) (-cos(lambda) cos(phi) sin(alpha)
                                              + sin(phi) cos(alpha))^2
        f  = 2 Omega (-cos(lambda) cos(phi) sin(alpha) + sin(phi) cos(alpha))

    The flow is an exact steady solution of the shallow-water momentum
    equations on the sphere, so the budget's residual must vanish to
    truncation. The grid has ``nlat`` rows at cell centres (no pole points)
    and ``2 nlat`` columns; f is the rotated Coriolis parameter (Grid override),
    the radius and rotation rate those of the paper.
    """
    w = WILLIAMSON
    a, om = w["a"], w["omega"]
    u0 = 2 * np.pi * a / (w["days"] * 86400.0)
    d = 180.0 / nlat
    lat = -90.0 + d * (np.arange(nlat) + 0.5)
    lon = np.arange(2 * nlat) * d
    lam, phi = np.meshgrid(np.deg2rad(lon), np.deg2rad(lat))
    s = -np.cos(lam) * np.cos(phi) * np.sin(alpha) + np.sin(phi) * np.cos(alpha)
    u = u0 * (np.cos(phi) * np.cos(alpha) + np.cos(lam) * np.sin(phi) * np.sin(alpha))
    v = -u0 * np.sin(lam) * np.sin(alpha)
    gh = w["gh0"] - (a * om * u0 + u0**2 / 2) * s**2
    grid = Grid.latlon(lat, lon, radius=a, omega=om, coriolis=2 * om * s)
    return WilliamsonCase2(grid, u, v, gh, alpha)


def holland_pressure(r, p_centre: float, delta_p: float, r_max: float, b: float):
    """Holland (1980) parametric surface pressure p(r) = p_c + dp exp(-(R_max / r)^B), Pa.

    Holland (1980), "An analytic model of the wind and pressure profiles in
    hurricanes", Mon. Wea. Rev. 108, 1212-1218.
    """
    r = np.asarray(r, dtype=np.float64)
    with np.errstate(divide="ignore", over="ignore"):
        return p_centre + delta_p * np.exp(-((r_max / r) ** b))


def holland_gradient_wind(r, delta_p: float, r_max: float, b: float, rho: float, f: float):
    """Holland (1980) gradient wind of the parametric profile, m s-1.

    V = sqrt(A B dp exp(-A / r^B) / (rho r^B) + r^2 f^2 / 4) - r f / 2,
    A = R_max^B (Holland 1980), with constant f (an f-plane).
    """
    r = np.asarray(r, dtype=np.float64)
    A = r_max**b
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        term = A * b * delta_p * np.exp(-A / r**b) / (rho * r**b)
        return np.sqrt(term + (r * f) ** 2 / 4) - r * abs(f) / 2


def great_circle_distance(lat0, lon0, lat, lon, radius: float):
    """Great-circle distance (m) from (lat0, lon0) to each (lat, lon), haversine formula."""
    p0, p = np.deg2rad(lat0), np.deg2rad(lat)
    dl = np.deg2rad(np.asarray(lon) - lon0)
    h = np.sin((p - p0) / 2) ** 2 + np.cos(p0) * np.cos(p) * np.sin(dl / 2) ** 2
    return 2 * radius * np.arcsin(np.sqrt(np.clip(h, 0, 1)))
