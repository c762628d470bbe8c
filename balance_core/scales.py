"""A priori scale analysis: scales in, term magnitudes and numbers out.

From a velocity scale U, vertical velocity W, length L, depth H, pressure
difference dP, density rho, Coriolis parameter f0 (or latitude lat0), sphere
radius a and viscosity nu (time scale T = L / U), the magnitudes of the terms of
the horizontal momentum equations are (the classic scale analysis, e.g.
Holton and Hakim 2013, An Introduction to Dynamic Meteorology, 5th ed., ch. 2):

    acceleration         U^2 / L
    vertical_advection   U W / H
    metric_uv            U^2 / a
    metric_uw            U W / a
    pressure_gradient    dP / (rho L)
    coriolis             |f0| U
    coriolis_w           2 Omega |cos(lat0)| W
    viscous              nu U / H^2

Scales carry no signs, so their verdict follows the magnitudes alone (see
:func:`balance_core.verdict.classify_scales`).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from . import constants as c
from .numbers import burger_number, deformation_radius, ekman_number, froude_number, rossby_number

__all__ = ["ScaleSet", "ScaleResult", "PRESETS", "analyse_scales", "estimate_scales",
           "SCALE_TERMS", "estimate_for_term", "RECIPE"]

#: Names of the scale-analysis terms, as used in the JSON output.
SCALE_TERMS = ("acceleration", "vertical_advection", "metric_uv", "metric_uw",
               "coriolis", "coriolis_w", "pressure_gradient", "viscous")


@dataclasses.dataclass(frozen=True)
class ScaleSet:
    """The scales of one phenomenon (SI units).

    Give either ``f0`` or ``lat0`` (or both, for an f-plane at some latitude);
    with ``f0`` alone, lat0 is the latitude where 2 Omega sin(lat0) = f0.
    ``n2`` (N^2, s-2) is optional and enables the Froude and Burger numbers and
    the deformation radius. ``curved`` says the flow follows curved paths (a
    vortex), so that an acceleration term means centripetal acceleration;
    scales alone cannot tell curvature from speeding up.
    """

    U: float
    W: float
    L: float
    H: float
    dP: float
    rho: float = 1.0
    f0: float | None = None
    lat0: float | None = None
    a: float = c.EARTH_RADIUS
    nu: float = c.NU_AIR
    n2: float | None = None
    curved: bool = False
    name: str = "custom"
    source: str = "scales given by the user"

    def __post_init__(self):
        for key in ("U", "L", "H", "rho", "a"):
            val = getattr(self, key)
            if not (isinstance(val, (int, float)) and math.isfinite(val) and val > 0):
                raise ValueError(f"scale {key} must be a positive number, got {val!r}")
        for key in ("W", "dP", "nu"):
            val = getattr(self, key)
            if not (isinstance(val, (int, float)) and math.isfinite(val) and val >= 0):
                raise ValueError(f"scale {key} must be zero or positive, got {val!r}")
        if self.f0 is None and self.lat0 is None:
            raise ValueError("give the Coriolis parameter f0 or the latitude lat0")
        if self.lat0 is not None and not -90 <= self.lat0 <= 90:
            raise ValueError(f"latitude lat0 must lie within -90..90 degrees, got {self.lat0}")
        if self.f0 is not None and not math.isfinite(self.f0):
            raise ValueError("f0 must be a finite number")
        if self.lat0 is None:
            ratio = self.f0 / (2 * c.OMEGA)
            if abs(ratio) > 1:
                raise ValueError(
                    f"|f0| = {abs(self.f0):.3g} s-1 exceeds 2 Omega = {2 * c.OMEGA:.3g} s-1; "
                    "no latitude has it")
            object.__setattr__(self, "lat0", math.degrees(math.asin(ratio)))
        if self.f0 is None:
            object.__setattr__(self, "f0", 2 * c.OMEGA * math.sin(math.radians(self.lat0)))

    def replace(self, **changes) -> "ScaleSet":
        """A copy with some scales changed (f0 and lat0 re-derived as needed)."""
        if "f0" in changes and "lat0" not in changes:
            changes["lat0"] = None
        if "lat0" in changes and "f0" not in changes:
            changes["f0"] = None
        return dataclasses.replace(self, **changes)

    def as_dict(self) -> dict:
        return {k: getattr(self, k) for k in ("U", "W", "L", "H", "dP", "rho", "f0", "lat0",
                                              "a", "nu", "n2")}


@dataclasses.dataclass(frozen=True)
class ScaleResult:
    """Term magnitudes (m s-2, sorted largest first) and numbers of a ScaleSet."""

    scales: ScaleSet
    terms: tuple  # of (name, magnitude)
    numbers: dict

    def magnitude(self, name: str) -> float:
        return dict(self.terms)[name]


def analyse_scales(s: ScaleSet) -> ScaleResult:
    """Magnitudes of the momentum-equation terms and the numbers of a ScaleSet.

    See the module docstring for the formulas. Numbers: Rossby U / (|f0| L),
    Ekman nu / (|f0| H^2), and with N^2 given Froude U / (N H), Burger
    (N H / (f0 L))^2 and the deformation radius N H / |f0| (m). A number that
    the scales cannot give (f0 = 0, N^2 <= 0) is None.
    """
    mags = {
        "acceleration": s.U ** 2 / s.L,
        "vertical_advection": s.U * s.W / s.H,
        "metric_uv": s.U ** 2 / s.a,
        "metric_uw": s.U * s.W / s.a,
        "pressure_gradient": s.dP / (s.rho * s.L),
        "coriolis": abs(s.f0) * s.U,
        "coriolis_w": 2 * c.OMEGA * abs(math.cos(math.radians(s.lat0))) * s.W,
        "viscous": s.nu * s.U / s.H ** 2,
    }
    terms = tuple(sorted(mags.items(), key=lambda kv: -kv[1]))
    numbers = {
        "rossby": _num(rossby_number(s.U, s.f0, s.L)),
        "ekman": _num(ekman_number(s.nu, s.f0, s.H)),
    }
    if s.n2 is not None:
        numbers["froude"] = _num(froude_number(s.U, s.n2, s.H))
        numbers["burger"] = _num(burger_number(s.n2, s.H, s.f0, s.L))
        numbers["deformation_radius"] = _num(deformation_radius(s.n2, s.H, s.f0))
    return ScaleResult(s, terms, numbers)


def _num(x):
    x = float(x)
    return x if math.isfinite(x) else None


def estimate_for_term(name: str, s: ScaleSet) -> float:
    """The a priori magnitude (m s-2) that ScaleSet ``s`` gives a budget term or view.

    The local tendency, the horizontal advection and the derived views scale as
    U^2 / L (T = L / U); the residual as the viscous term nu U / H^2.
    """
    r = analyse_scales(s)
    table = dict(r.terms)
    alias = {"tendency": "acceleration", "horizontal_advection": "acceleration",
             "along_stream": "acceleration", "centripetal": "acceleration",
             "residual": "viscous"}
    return table[alias.get(name, name)]


def _preset(name, source, **kw) -> ScaleSet:
    return ScaleSet(name=name, source=source, **kw)


#: Presets for the usual phenomenon classes. Each says where its numbers come from.
PRESETS = {
    p.name: p
    for p in (
        _preset("planetary_wave",
                "typical long-wave values at 500 hPa, from memory; length class after Orlanski "
                "(1975), 'A rational subdivision of scales for atmospheric processes', "
                "Bull. Amer. Meteor. Soc. 56, 527-530",
                U=15.0, W=1e-3, L=3e6, H=1e4, dP=3000.0, rho=0.7, lat0=50.0, n2=1e-4),
        _preset("synoptic_cyclone",
                "the classic synoptic scale set (common practice, no source)",
                U=10.0, W=0.01, L=1e6, H=1e4, dP=1000.0, rho=1.0, f0=1e-4, a=1e7, nu=1e-5,
                n2=1e-4),
        _preset("front",
                "cross-front length and frontal wind, from memory; Orlanski (1975) meso-alpha "
                "class",
                U=10.0, W=0.05, L=1e5, H=1e3, dP=200.0, rho=1.1, lat0=45.0, n2=1e-4),
        _preset("mesoscale_convective_system",
                "typical organised-convection values, from memory; Orlanski (1975) meso-beta "
                "class",
                U=10.0, W=1.0, L=1e5, H=1e4, dP=200.0, rho=0.8, lat0=35.0, n2=1e-4),
        _preset("tropical_cyclone",
                "radius of maximum wind and pressure deficit of a mature storm, from memory; "
                "consistent with the parametric profile of Holland (1980), Mon. Wea. Rev. 108, "
                "1212-1218",
                U=40.0, W=0.5, L=5e4, H=1e4, dP=5000.0, rho=1.1, lat0=20.0, n2=1e-4,
                curved=True),
        _preset("sea_breeze",
                "coastal circulation values, from memory; Orlanski (1975) meso-gamma class",
                U=5.0, W=0.1, L=2e4, H=1e3, dP=50.0, rho=1.2, lat0=35.0, n2=1e-4),
        _preset("tornado",
                "core radius, wind and pressure deficit of a strong vortex, from memory; "
                "Orlanski (1975) micro-alpha class",
                U=50.0, W=10.0, L=200.0, H=1e3, dP=2000.0, rho=1.1, lat0=35.0, curved=True),
        _preset("boundary_layer",
                "a daytime boundary layer with an eddy viscosity of 20 m2 s-1, from memory",
                U=10.0, W=0.01, L=1e6, H=500.0, dP=1000.0, rho=1.2, lat0=45.0, nu=20.0),
    )
}


#: The recipe of :func:`estimate_scales`, one line a scale, for the notes beside its numbers.
RECIPE = {
    "U": "the area-weighted RMS wind speed in the region",
    "L": "std(Z) / RMS|grad Z|: the distance over which the height changes by its spread",
    "dP": "rho g std(Z): the pressure difference over that same distance L",
    "W": "RMS(omega) / (rho g)",
    "H": "U / RMS|dV/dz| where the shear is known, else the density scale height R_d T / g",
    "f0": "the area-weighted mean |f| of the region",
    "nu": "an eddy viscosity typical of the boundary layer, 10 m2 s-1 (common practice)",
}


def estimate_scales(grid, inside, *, u, v, height, pressure, omega=None, temperature=None,
                    shear2=None, nu: float = c.NU_AIR, n2=None, height_gradient=None) -> ScaleSet:
    """Scales of the flow inside a region, estimated from the data.

    Parameters
    ----------
    grid : Grid
    inside : bool array (ny, nx)
    u, v, height : 2-D arrays at one level and time (m s-1, gpm)
    pressure : float, Pa
    omega, temperature : 2-D arrays, optional (Pa s-1, K)
    shear2 : 2-D array, optional
        |dV/dz|^2 (s-2) at the level; gives the depth scale.
    nu : float
        Viscosity for the viscous estimate (molecular by default).
    n2 : float, optional
        N^2 (s-2) in the region, passed on.
    height_gradient : 2-D array, optional
        |grad Z| (m m-1) if already known; else taken with ``grid.grad``.

    Notes
    -----
    U is the area-weighted RMS speed; L the height field's own gradient length
    std(Z) / RMS|grad Z|, and dP = rho g0 std(Z) the pressure difference over
    that same distance, so that dP / (rho L) = g0 RMS|grad Z| is the measured
    pressure-gradient force (a dP from the range of Z over an L from the
    standard deviation would overstate it by range / std, 3 to 4 times);
    rho = p / (R_d T) (or the standard atmosphere); W = RMS(omega) / (rho g0);
    H = U / RMS|dV/dz| where the shear is known, else the density scale height
    R_d T / g0; f0 the area-weighted mean |f| and lat0 the mean latitude; nu as
    given (the box report passes the eddy viscosity
    :data:`balance_core.constants.EDDY_VISCOSITY`). This is the project's own
    recipe (documented in DEVELOPERS.md); :data:`RECIPE` says it in words.
    """
    from .region import weighted_stats
    from .thermo import standard_atmosphere_temperature

    w = np.where(inside, grid.cell_area, 0.0)
    ok = inside & np.isfinite(u) & np.isfinite(v) & np.isfinite(height)
    if not ok.any():
        raise ValueError("no valid points in the region to estimate scales from")
    speed = np.hypot(u, v)
    U = weighted_stats(speed, grid, ok).rms
    if height_gradient is None:
        zx, zy = grid.grad(height)
        height_gradient = np.hypot(zx, zy)
    gz = height_gradient
    zstat = weighted_stats(height, grid, ok)
    zdev = np.where(ok, height - zstat.mean, np.nan)
    zstd = weighted_stats(zdev, grid, ok).rms
    gstat = weighted_stats(gz, grid, ok & np.isfinite(gz)).rms
    L = zstd / gstat if gstat else float("nan")
    if temperature is not None:
        T = weighted_stats(temperature, grid, ok & np.isfinite(temperature)).mean
    else:
        T = float(standard_atmosphere_temperature(pressure))
    rho = pressure / (c.R_DRY * T)
    dP = rho * c.G0 * zstd
    W = 0.0
    if omega is not None:
        om = weighted_stats(omega, grid, ok & np.isfinite(omega)).rms
        W = (om or 0.0) / (rho * c.G0)
    H = c.R_DRY * T / c.G0
    if shear2 is not None:
        sh = weighted_stats(np.sqrt(shear2), grid, ok & np.isfinite(shear2)).rms
        if sh:
            H = U / sh
    fstat = weighted_stats(np.abs(grid.f), grid, ok)
    lat0 = float(np.sum(w * grid.lat) / np.sum(w))
    sign = 1.0 if lat0 >= 0 else -1.0
    if not U > 0:
        raise ValueError("the wind is calm everywhere in the region: no velocity scale")
    if not (np.isfinite(L) and L > 0):
        raise ValueError("the height is uniform in the region: no length scale")
    return ScaleSet(U=U, W=W, L=float(L), H=float(H), dP=dP, rho=rho, f0=sign * fstat.mean,
                    lat0=lat0,
                    a=grid.radius, nu=nu, n2=n2, name="from the data",
                    source="estimated from the data in the region")
