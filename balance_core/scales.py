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

from . import constants as C
from .numbers import burger_number, deformation_radius, ekman_number, froude_number, rossby_number

__all__ = [
    "ScaleSet",
    "ScaleResult",
    "PRESETS",
    "analyze_scales",
    "estimate_scales",
    "SCALE_TERMS",
    "estimate_for_term",
    "RECIPE",
    "BY_CONSTRUCTION",
    "FlowLength",
    "flow_length_scale",
    "flow_rows",
    "MERIDIONAL_MARGIN_KM",
    "ZONAL_HALF_KM",
]

#: Names of the scale-analysis terms, as used in the JSON output.
SCALE_TERMS = (
    "acceleration",
    "vertical_advection",
    "metric_uv",
    "metric_uw",
    "coriolis",
    "coriolis_w",
    "pressure_gradient",
    "viscous",
)


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
    a: float = C.EARTH_RADIUS
    nu: float = C.NU_AIR
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
            ratio = self.f0 / (2 * C.OMEGA)
            if abs(ratio) > 1:
                raise ValueError(
                    f"|f0| = {abs(self.f0):.3g} s-1 exceeds 2 Omega = {2 * C.OMEGA:.3g} s-1; "
                    "no latitude has it"
                )
            object.__setattr__(self, "lat0", math.degrees(math.asin(ratio)))
        if self.f0 is None:
            object.__setattr__(self, "f0", 2 * C.OMEGA * math.sin(math.radians(self.lat0)))

    def replace(self, **changes) -> ScaleSet:
        """A copy with some scales changed (f0 and lat0 re-derived as needed)."""
        if "f0" in changes and "lat0" not in changes:
            changes["lat0"] = None
        if "lat0" in changes and "f0" not in changes:
            changes["f0"] = None
        return dataclasses.replace(self, **changes)

    def as_dict(self) -> dict:
        return {
            k: getattr(self, k)
            for k in ("U", "W", "L", "H", "dP", "rho", "f0", "lat0", "a", "nu", "n2")
        }


@dataclasses.dataclass(frozen=True)
class ScaleResult:
    """Term magnitudes (m s-2, sorted largest first) and numbers of a ScaleSet."""

    scales: ScaleSet
    terms: tuple  # of (name, magnitude)
    numbers: dict

    def magnitude(self, name: str) -> float:
        return dict(self.terms)[name]


def analyze_scales(s: ScaleSet) -> ScaleResult:
    """Magnitudes of the momentum-equation terms and the numbers of a ScaleSet.

    See the module docstring for the formulas. Numbers: Rossby U / (|f0| L),
    Ekman nu / (|f0| H^2), and with N^2 given Froude U / (N H), Burger
    (N H / (f0 L))^2 and the deformation radius N H / |f0| (m). A number that
    the scales cannot give (f0 = 0, N^2 <= 0) is None.
    """
    f0 = 0.0 if s.f0 is None else s.f0  # both are set once the ScaleSet is made
    lat0 = 0.0 if s.lat0 is None else s.lat0
    mags = {
        "acceleration": s.U**2 / s.L,
        "vertical_advection": s.U * s.W / s.H,
        "metric_uv": s.U**2 / s.a,
        "metric_uw": s.U * s.W / s.a,
        "pressure_gradient": s.dP / (s.rho * s.L),
        "coriolis": abs(f0) * s.U,
        "coriolis_w": 2 * C.OMEGA * abs(math.cos(math.radians(lat0))) * s.W,
        "viscous": s.nu * s.U / s.H**2,
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
    r = analyze_scales(s)
    table = dict(r.terms)
    alias = {
        "tendency": "acceleration",
        "horizontal_advection": "acceleration",
        "along_stream": "acceleration",
        "centripetal": "acceleration",
        "centripetal_trajectory": "acceleration",
        "residual": "viscous",
    }
    return table[alias.get(name, name)]


def _preset(name, source, **kw) -> ScaleSet:
    return ScaleSet(name=name, source=source, **kw)


#: Presets for the usual phenomenon classes. Each says where its numbers come from.
PRESETS = {
    p.name: p
    for p in (
        _preset(
            "planetary_wave",
            "typical long-wave values at 500 hPa, from memory; length class after Orlanski "
            "(1975), 'A rational subdivision of scales for atmospheric processes', "
            "Bull. Amer. Meteor. Soc. 56, 527-530",
            U=15.0,
            W=1e-3,
            L=3e6,
            H=1e4,
            dP=3000.0,
            rho=0.7,
            lat0=50.0,
            n2=1e-4,
        ),
        _preset(
            "synoptic_cyclone",
            "the classic synoptic scale set (common practice, no source)",
            U=10.0,
            W=0.01,
            L=1e6,
            H=1e4,
            dP=1000.0,
            rho=1.0,
            f0=1e-4,
            a=1e7,
            nu=1e-5,
            n2=1e-4,
        ),
        _preset(
            "front",
            "cross-front length and frontal wind, from memory; Orlanski (1975) meso-alpha class",
            U=10.0,
            W=0.05,
            L=1e5,
            H=1e3,
            dP=200.0,
            rho=1.1,
            lat0=45.0,
            n2=1e-4,
        ),
        _preset(
            "mesoscale_convective_system",
            "typical organised-convection values, from memory; Orlanski (1975) meso-beta class",
            U=10.0,
            W=1.0,
            L=1e5,
            H=1e4,
            dP=200.0,
            rho=0.8,
            lat0=35.0,
            n2=1e-4,
        ),
        _preset(
            "tropical_cyclone",
            "radius of maximum wind and pressure deficit of a mature storm, from memory; "
            "consistent with the parametric profile of Holland (1980), Mon. Wea. Rev. 108, "
            "1212-1218",
            U=40.0,
            W=0.5,
            L=5e4,
            H=1e4,
            dP=5000.0,
            rho=1.1,
            lat0=20.0,
            n2=1e-4,
            curved=True,
        ),
        _preset(
            "sea_breeze",
            "coastal circulation values, from memory; Orlanski (1975) meso-gamma class",
            U=5.0,
            W=0.1,
            L=2e4,
            H=1e3,
            dP=50.0,
            rho=1.2,
            lat0=35.0,
            n2=1e-4,
        ),
        _preset(
            "tornado",
            "core radius, wind and pressure deficit of a strong vortex, from memory; "
            "Orlanski (1975) micro-alpha class",
            U=50.0,
            W=10.0,
            L=200.0,
            H=1e3,
            dP=2000.0,
            rho=1.1,
            lat0=35.0,
            curved=True,
        ),
        _preset(
            "boundary_layer",
            "a daytime boundary layer with an eddy viscosity of 20 m2 s-1, from memory",
            U=10.0,
            W=0.01,
            L=1e6,
            H=500.0,
            dP=1000.0,
            rho=1.2,
            lat0=45.0,
            nu=20.0,
        ),
    )
}


#: The recipe of :func:`estimate_scales`, one line a scale, for the notes beside its numbers.
RECIPE = {
    "U": "the area-weighted RMS wind speed in the region",
    "L": (
        "the flow's length scale: one over the mean wavenumber of the height along whole "
        "grid rows within 1000 km of the region's centre and along its columns 2500 km either "
        "side (wavelength / 2 pi for one wave), so it belongs to the flow and not to the box"
    ),
    "dP": "rho g dZ, dZ the standard deviation of the height along those same rows and columns",
    "W": "RMS(omega) / (rho g)",
    "H": "the depth of the troposphere, 10 km (Holton and Hakim 2013)",
    "f0": "the area-weighted mean |f| of the region",
    "nu": "an eddy viscosity typical of the boundary layer, 10 m2 s-1 (common practice)",
}
#: The a priori estimates made of scales taken from the very fields their measured terms are
#: made of (U from the wind, W from omega): they agree with the measurement by construction
#: and are said to (no diamond on the page).
BY_CONSTRUCTION = ("coriolis", "coriolis_w", "metric_uw")


@dataclasses.dataclass(frozen=True)
class FlowLength:
    """The length scale of the flow through a region and how it was found.

    ``length`` (m); ``amplitude`` (m): the standard deviation of the height pattern the
    length belongs to; ``recipe`` in words; ``along_x`` and ``along_y`` (m, or None):
    the two directions' own scales.
    """

    length: float
    amplitude: float
    recipe: str
    along_x: float | None = None
    along_y: float | None = None


#: Rows or columns with less than this share of valid points do not enter the spectra.
_MIN_VALID = 0.75


def _mean_wavenumber(lines, lengths, periodic):
    """The power-weighted mean wavenumber (rad m-1) and variance of height along lines.

    ``lines``: (n, m) values along n lines of m points; ``lengths``: each line's length (m,
    the circle's for a periodic line). Each line's mean is removed (a non-periodic one is
    then tapered with a Hann window; a slope across it counts as the largest scale), its
    gaps filled with zero deviation; its power spectrum (numpy's FFT) gives the mean wavenumber
    2 pi sum(m P_m) / (L sum(P_m)) over the harmonics m >= 1. Lines are weighted by their
    variance. Returns (wavenumber, variance) or (None, 0) where there is no pattern.
    """
    z = np.asarray(lines, dtype=np.float64)
    lengths = np.asarray(lengths, dtype=np.float64)
    ok = np.isfinite(z)
    keep = (ok.mean(axis=1) >= _MIN_VALID) & (lengths > 0)
    if not keep.any():
        return None, 0.0
    z, ok, lengths = z[keep], ok[keep], lengths[keep]
    n = ok.sum(axis=1)
    zz = np.where(ok, z, 0.0)
    if periodic:
        dev = np.where(ok, z - (zz.sum(axis=1) / n)[:, None], 0.0)
        spec_in = dev
    else:
        dev = np.where(ok, z - (zz.sum(axis=1) / n)[:, None], 0.0)
        spec_in = dev * np.hanning(z.shape[1])[None, :]
    var = (dev * dev).sum(axis=1) / n
    power = np.abs(np.fft.rfft(spec_in, axis=1)[:, 1:]) ** 2
    m = np.arange(1, power.shape[1] + 1, dtype=np.float64)
    total = power.sum(axis=1)
    good = total > 0
    if not good.any():
        return None, 0.0
    k = 2.0 * np.pi * (power[good] @ m) / total[good] / lengths[good]
    w = var[good]
    if not w.sum() > 0:
        return None, 0.0
    return float(np.sum(w * k) / np.sum(w)), float(np.mean(w))


#: The columns of the flow's length scale reach this far beyond the region's rows, km (the
#: project's own choice: a synoptic wave's meridional extent), so that the meridional scale
#: depends little on how far the region itself reaches.
MERIDIONAL_MARGIN_KM = 2500.0


#: The rows whose whole length gives the zonal scale lie within this of the region's central
#: row, km (the project's own choice).
ZONAL_HALF_KM = 1000.0


def _distances_along_column(grid, inside):
    """(distance of every row from the region's central row along its middle column, km)."""
    from .region import great_circle_km

    rows = np.nonzero(np.any(inside, axis=1))[0]
    cols = np.nonzero(np.any(inside, axis=0))[0]
    lat, lon = np.asarray(grid.lat, np.float64), np.asarray(grid.lon, np.float64)
    i = int(cols[cols.size // 2])
    step = np.concatenate(
        [[0.0], great_circle_km(lon[:-1, i], lat[:-1, i], lon[1:, i], lat[1:, i])]
    )
    dist = np.cumsum(step) * (grid.radius / C.EARTH_RADIUS)
    centre = 0.5 * (dist[rows[0]] + dist[rows[-1]])
    return np.abs(dist - centre)


def _rows_within(dist, km):
    near = np.nonzero(dist <= km)[0]
    if near.size == 0:
        near = np.array([int(np.argmin(dist))])
    return int(near[0]), int(near[-1]) + 1


def flow_rows(grid, inside, margin_km: float = MERIDIONAL_MARGIN_KM):
    """(j0, j1): the rows :func:`flow_length_scale` reads for a region -- those within
    ``margin_km`` of the region's central row along the grid's middle column through the
    region (a batch reading a band of rows must read these), or None for no region."""
    if not np.any(inside):
        return None
    return _rows_within(_distances_along_column(grid, inside), margin_km)


def flow_length_scale(grid, height, inside) -> FlowLength | None:
    """The length scale of the flow through a region, from the height pattern, m.

    One over the mean wavenumber of the height along the grid's rows within
    :data:`ZONAL_HALF_KM` of the region's central row, each taken whole -- the whole
    latitude circle on a global grid, the whole domain on a regional one -- and along the
    columns through the region within :data:`MERIDIONAL_MARGIN_KM` of that row
    (:func:`flow_rows`), so that the scale belongs to the flow where the region is, not to
    the box drawn around it: the same jet in a 10- and a 20-degree box has nearly the same
    scale. The two directions' mean wavenumbers (power-weighted, see
    :func:`_mean_wavenumber`) combine in quadrature, L = 1 / sqrt(kx^2 + ky^2); for one
    sine wave of wavelength lambda, L = lambda / (2 pi), the distance over which its
    slope changes by its size. The amplitude is the height's standard deviation along the
    same lines. The project's own recipe (documented in DEVELOPERS.md). None where the
    height has no pattern.
    """
    z = np.asarray(height, dtype=np.float64)
    if not np.any(inside):
        return None
    cols = np.nonzero(np.any(inside, axis=0))[0]
    dist = _distances_along_column(grid, inside)
    rows = np.arange(*_rows_within(dist, ZONAL_HALF_KM))
    lat, lon = np.asarray(grid.lat, np.float64), np.asarray(grid.lon, np.float64)
    periodic = bool(getattr(grid, "periodic", False))

    from .region import great_circle_km

    def path_lengths(la, lo, closed):
        """The length (m) of each line (rows of la, lo) from its points, closed or not."""
        d = great_circle_km(lo[:, :-1], la[:, :-1], lo[:, 1:], la[:, 1:]).sum(axis=1)
        if closed:
            d = d + great_circle_km(lo[:, -1], la[:, -1], lo[:, 0], la[:, 0])
        return np.asarray(d, dtype=np.float64) * 1e3 * (grid.radius / C.EARTH_RADIUS)

    j0, j1 = flow_rows(grid, inside)
    # a line of n points sampled at spacing d: its spectrum's harmonics are of n d (an open
    # line's path is (n - 1) d long; a closed circle's is n d already)
    nx, ny = z.shape[1], j1 - j0
    row_lengths = path_lengths(lat[rows], lon[rows], periodic) * (
        1.0 if periodic else nx / max(nx - 1, 1)
    )
    col_lengths = path_lengths(lat[j0:j1, cols].T, lon[j0:j1, cols].T, False) * (
        ny / max(ny - 1, 1)
    )
    kx, vx = _mean_wavenumber(z[rows], row_lengths, periodic)
    ky, vy = (None, 0.0) if j1 - j0 < 4 else _mean_wavenumber(z[j0:j1, cols].T, col_lengths, False)
    # the height's gradient variance is about var_x kx^2 + var_y ky^2 over its variance: a
    # direction along which the height does not vary adds nothing
    parts = [(k, v) for k, v in ((kx, vx), (ky, vy)) if k is not None and v > 0]
    if not parts:
        return None
    vmax = max(v for _, v in parts)
    k = float(np.sqrt(sum(v * q * q for q, v in parts) / vmax))
    amp = float(np.sqrt(vmax))
    return FlowLength(
        length=1.0 / k,
        amplitude=amp,
        recipe=RECIPE["L"],
        along_x=None if kx is None else 1.0 / kx,
        along_y=None if ky is None else 1.0 / ky,
    )


def estimate_scales(
    grid,
    inside,
    *,
    u,
    v,
    height,
    pressure,
    omega=None,
    temperature=None,
    shear2=None,
    nu: float = C.NU_AIR,
    n2=None,
    height_gradient=None,
    flow_length: FlowLength | None = None,
) -> ScaleSet:
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
    height_gradient : unused (kept for callers)
    flow_length : FlowLength, optional
        The flow's length scale and amplitude if already known (a closed system's
        radius); else :func:`flow_length_scale` of ``height`` over the whole rows and
        columns through the region.

    Notes
    -----
    U is the area-weighted RMS speed; L the flow's length scale (:func:`flow_length_scale`,
    or the caller's); dP = rho g dZ, dZ the amplitude of that same height pattern, so the
    a priori pressure gradient dP / (rho L) comes from the pattern's size and scale and can
    disagree with the one measured in the region; rho = p / (R_d T) (or the standard
    atmosphere); W = RMS(omega) / (rho g0); H the depth of the troposphere, 10 km (Holton
    and Hakim 2013), as in the textbook scale analysis; f0 the area-weighted mean |f| and
    lat0 the mean latitude; nu as given (the box report passes the eddy viscosity
    :data:`balance_core.constants.EDDY_VISCOSITY`). The Coriolis, vertical Coriolis and
    vertical metric estimates are products of scales taken from the same fields their
    measured terms are made of (:data:`BY_CONSTRUCTION`). This is the project's own recipe
    (documented in DEVELOPERS.md); :data:`RECIPE` says it in words.
    """
    from .region import weighted_stats
    from .thermo import standard_atmosphere_temperature

    w = np.where(inside, grid.cell_area, 0.0)
    ok = inside & np.isfinite(u) & np.isfinite(v) & np.isfinite(height)
    if not ok.any():
        raise ValueError("no valid points in the region to estimate scales from")
    speed = np.hypot(u, v)
    U = weighted_stats(speed, grid, ok).rms
    fl = flow_length
    if fl is None:
        fl = flow_length_scale(grid, height, ok)
    if fl is None or not (np.isfinite(fl.length) and fl.length > 0):
        raise ValueError("the height has no pattern through the region: no length scale")
    L = fl.length
    T = None
    if temperature is not None:
        T = weighted_stats(temperature, grid, ok & np.isfinite(temperature)).mean
    if T is None:
        T = float(standard_atmosphere_temperature(pressure))
    rho = pressure / (C.R_DRY * T)
    dP = rho * C.G0 * fl.amplitude
    W = 0.0
    if omega is not None:
        om = weighted_stats(omega, grid, ok & np.isfinite(omega)).rms
        W = (om or 0.0) / (rho * C.G0)
    H = C.TROPOSPHERE_DEPTH
    fstat = weighted_stats(np.abs(grid.f), grid, ok)
    lat0 = float(np.sum(w * grid.lat) / np.sum(w))
    sign = 1.0 if lat0 >= 0 else -1.0
    if U is None or not U > 0:
        raise ValueError("the wind is calm everywhere in the region: no velocity scale")
    return ScaleSet(
        U=U,
        W=W,
        L=float(L),
        H=float(H),
        dP=dP,
        rho=rho,
        f0=sign * (fstat.mean or 0.0),
        lat0=lat0,
        a=grid.radius,
        nu=nu,
        n2=n2,
        name="from the data",
        source="estimated from the data in the region",
    )
