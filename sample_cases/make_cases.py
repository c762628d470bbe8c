"""Make balance-desk's invented sample cases (deterministic).

    python sample_cases/make_cases.py [OUTDIR]

Three invented scenarios, none taken from a real storm, place or date. Each
is built from analytic pieces so that every term of the momentum budget is
known, and is written as CF NetCDF on seven pressure levels and five valid
times:

* ``ocean_cyclone.nc``: a mid-latitude low under a westerly jet, drifting east.
  The height field is prescribed; the wind is found by iterating the full
  momentum equations (advection relative to the moving pattern, vertical
  advection with omega from continuity, metric and vertical Coriolis terms,
  Rayleigh drag below 850 hPa) from the geostrophic first guess. Close to
  geostrophic aloft, frictional near the ground.
* ``tropical_cyclone.nc``: a warm-core vortex drifting west in easterly
  steering flow. The wind is prescribed; the height is the least-squares
  potential of the force the wind needs, so the vortex is in gradient balance,
  cyclostrophic near the core. The part of that force no potential can supply
  (the beta effect) stays as a small residual.
* ``sea_breeze.nc``: a coastal circulation accelerating and decaying through
  an afternoon, turned by Coriolis and held back by drag near the ground. The
  onshore wind is prescribed, the along-shore wind integrated in time from its
  own momentum equation, and the height integrated across the coast from the
  force the onshore wind needs.

Derivatives here use numpy.gradient on grids twice as fine as the files', so
the cases do not share the budget's own stencils; temperature follows from
the hypsometric relation and omega from continuity. Each file records how it
was made, the friction put in and what the budget should show.
"""

from __future__ import annotations

import json
import os
import sys

import numpy as np

# the cases use the project's constants (facts, not code under test)
sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))
from balance_core import constants as C
from balance_core.thermo import standard_atmosphere_height

OUT_LEVELS = np.array([1000.0, 925.0, 850.0, 700.0, 500.0, 300.0, 250.0])  # hPa
#: the sea breeze is shallow: it also gets the extra lower levels that global models
#: publish, so that its vertical derivatives are resolved
BREEZE_LEVELS = np.array(
    [
        1000.0,
        975.0,
        950.0,
        925.0,
        900.0,
        875.0,
        850.0,
        800.0,
        750.0,
        700.0,
        650.0,
        600.0,
        500.0,
        300.0,
        250.0,
    ]
)
A, OMEGA, G, RD = C.EARTH_RADIUS, C.OMEGA, C.G0, C.R_DRY


# -- grid helpers (numpy.gradient: independent of balance_core.grid) -----------------


class Sphere:
    """Spherical derivatives on a lat-lon grid with numpy.gradient (second order)."""

    def __init__(self, lat, lon):
        self.lat, self.lon = np.asarray(lat, float), np.asarray(lon, float)
        self.phi = np.deg2rad(self.lat)
        self.lam = np.deg2rad(self.lon)
        self.cos = np.cos(self.phi)[:, None]
        self.tan = np.tan(self.phi)[:, None]
        self.f = 2 * OMEGA * np.sin(self.phi)[:, None]
        self.LAM, self.PHI = np.meshgrid(self.lam, self.phi)

    def ddx(self, a):
        return np.gradient(a, self.lam, axis=-1, edge_order=2) / (A * self.cos)

    def ddy(self, a):
        return np.gradient(a, self.phi, axis=-2, edge_order=2) / A


def great_circle(lat0, lon0, phi, lam):
    """Great-circle distance (m) and the unit vectors of the circle around (lat0, lon0)."""
    p0, l0 = np.deg2rad(lat0), np.deg2rad(lon0)
    cosd = np.sin(p0) * np.sin(phi) + np.cos(p0) * np.cos(phi) * np.cos(lam - l0)
    d = np.arccos(np.clip(cosd, -1, 1))
    # direction from the point towards the centre (initial bearing), east/north parts
    y = np.sin(l0 - lam) * np.cos(p0)
    x = np.cos(phi) * np.sin(p0) - np.sin(phi) * np.cos(p0) * np.cos(l0 - lam)
    norm = np.hypot(x, y)
    with np.errstate(invalid="ignore", divide="ignore"):
        to_e, to_n = y / norm, x / norm
    to_e = np.where(norm > 0, to_e, 0.0)
    to_n = np.where(norm > 0, to_n, 0.0)
    return A * d, to_e, to_n


def std_height(p_hpa):
    return standard_atmosphere_height(np.asarray(p_hpa, float) * 100.0)


def temperature_from_height(z, p_hpa, axis=0):
    """T = -(g0 / R_d) dZ / dln(p): the hypsometric relation, second-order in ln p."""
    lnp = np.log(np.asarray(p_hpa, float))
    return -(G / RD) * np.gradient(z, lnp, axis=axis, edge_order=2)


def omega_from_continuity(div, p_pa, axis=0):
    """omega(p) = -integral from the top p[0] to p of div dp (omega = 0 at the top)."""
    d = np.moveaxis(div, axis, 0)
    dp = np.diff(p_pa).reshape((-1,) + (1,) * (d.ndim - 1))
    cum = np.concatenate(
        [np.zeros((1,) + d.shape[1:]), np.cumsum(0.5 * (d[1:] + d[:-1]) * dp, axis=0)]
    )
    return np.moveaxis(-cum, 0, axis)


# -- case 1: mid-latitude ocean cyclone ------------------------------------------------

CYCLONE = dict(
    lat=(25.0, 65.0),
    lon=(-70.0, 0.0),
    step=0.5,
    start="2041-01-19T00:00",
    hours=6,
    ntimes=5,
    centre_lat=47.0,
    centre_lon=-42.0,
    drift_ms=10.0,  # eastward drift at the centre latitude
    jet_lat=42.0,
    jet_width_deg=10.0,
    drag_per_s=1.0 / (6 * 3600.0),
    drag_depth_hpa=110.0,
)


def cyclone_height(S, p_hpa, t_s, cfg=CYCLONE):
    """Z (gpm) of the cyclone case: standard atmosphere + zonal jet + a drifting low."""
    p = np.asarray(p_hpa, float)[:, None, None]
    s = np.log(1000.0 / p) / np.log(4.0)  # 0 at 1000 hPa, 1 at 250 hPa
    jet_amp = 40.0 + 230.0 * s  # m
    xj = (S.PHI - np.deg2rad(cfg["jet_lat"])) / np.deg2rad(cfg["jet_width_deg"])
    z_jet = -jet_amp * np.tanh(xj)
    omega_c = cfg["drift_ms"] / (A * np.cos(np.deg2rad(cfg["centre_lat"])))
    lon_c = cfg["centre_lon"] + np.rad2deg(omega_c * t_s)
    r, _, _ = great_circle(cfg["centre_lat"], lon_c, S.PHI, S.LAM)
    low_amp = 70.0 + 25.0 * s
    z_low = -low_amp * np.exp(-0.5 * (r / 1.0e6) ** 2)
    return std_height(p) + z_jet + z_low, omega_c


def drag_rate(p_hpa, cfg):
    """Rayleigh drag rate 1/tau (s-1) at each pressure: strongest at 1000 hPa, none aloft."""
    p = np.asarray(p_hpa, float)
    return cfg["drag_per_s"] * np.exp(-(((1000.0 - p) / cfg["drag_depth_hpa"]) ** 2))


def balanced_wind(S, z, p_hpa, omega_c, rate, *, iterations=12):
    """The wind that satisfies both momentum equations with the given height.

    Fixed-point iteration from the geostrophic wind: each step solves the
    Coriolis and drag terms exactly for (u, v) with everything else (advection
    relative to the pattern moving at angular speed omega_c, vertical advection,
    metric and vertical Coriolis terms) from the previous step; omega from
    continuity and w = -omega / (rho g) with rho = p / (R_d T). The smooth part
    of the solution converges by a factor of about the Rossby number per step;
    grid-scale noise grows instead (by U / (f dx) near the inflow edge), so the
    iteration stops at the smallest change and the field of that step is kept.
    Returns the fields and the last change (m s-1).
    """
    p_pa = np.asarray(p_hpa, float) * 100.0
    pp = p_pa[:, None, None]
    zx, zy = S.ddx(z), S.ddy(z)
    temp = temperature_from_height(z, p_hpa)
    f = S.f
    u = -G * zy / f
    v = G * zx / f
    c = omega_c * A * S.cos  # eastward speed of the pattern (m s-1) on each parallel
    r = np.asarray(rate)[:, None, None]
    best = np.inf
    for _ in range(iterations):
        div = S.ddx(u) + S.ddy(v) - v * S.tan / A
        om = omega_from_continuity(div, p_pa)  # p ascending from the top
        w = -om * RD * temp / (pp * G)
        dudp = np.gradient(u, p_pa, axis=0, edge_order=2)
        dvdp = np.gradient(v, p_pa, axis=0, edge_order=2)
        du = (u - c) * S.ddx(u) + v * S.ddy(u) + om * dudp
        dv = (u - c) * S.ddx(v) + v * S.ddy(v) + om * dvdp
        mx = u * v * S.tan / A - u * w / A - 2 * OMEGA * w * S.cos
        my = -u * u * S.tan / A - v * w / A
        rx = du + G * zx - mx
        ry = dv + G * zy - my
        det = r * r + f * f
        un = (-rx * r - f * ry) / det
        vn = (f * rx - ry * r) / det
        change = max(np.abs(un - u).max(), np.abs(vn - v).max())
        if change >= best:
            break  # noise has started to grow: keep the previous step
        best, u, v = change, un, vn
    div = S.ddx(u) + S.ddy(v) - v * S.tan / A
    om = omega_from_continuity(div, p_pa)
    tend_u = -c * S.ddx(u)  # the pattern moves: d/dt = -omega_c d/dlambda
    tend_v = -c * S.ddx(v)
    return u, v, om, temp, tend_u, tend_v, best


def make_cyclone(cfg=CYCLONE):
    """The ocean-cyclone fields on the output grid; also the exact tendency."""
    out_lat = np.arange(cfg["lat"][1], cfg["lat"][0] - 1e-9, -cfg["step"])
    out_lon = np.arange(cfg["lon"][0], cfg["lon"][1] + 1e-9, cfg["step"])
    fine = Sphere(
        np.arange(cfg["lat"][1], cfg["lat"][0] - 1e-9, -cfg["step"] / 2),
        np.arange(cfg["lon"][0], cfg["lon"][1] + 1e-9, cfg["step"] / 2),
    )
    p_fine = np.arange(150.0, 1000.0 + 1e-9, 25.0)  # top first: omega = 0 at 150 hPa
    kk = [int(np.nonzero(np.isclose(p_fine, p))[0][0]) for p in OUT_LEVELS]
    times = _times(cfg)
    fields = {k: [] for k in ("height", "u", "v", "omega", "temperature", "tend_u", "tend_v")}
    for t in times["seconds"]:
        z, omega_c = cyclone_height(fine, p_fine, t, cfg)
        u, v, om, temp, tu, tv, change = balanced_wind(
            fine, z, p_fine, omega_c, drag_rate(p_fine, cfg)
        )
        for name, arr in zip(fields, (z, u, v, om, temp, tu, tv)):
            fields[name].append(arr[kk][:, ::2, ::2])
    data = {k: np.stack(v) for k, v in fields.items()}
    data.update(
        sea_level_fields(
            data["height"][:, 0], data["temperature"][:, 0], data["u"][:, 0], data["v"][:, 0]
        )
    )
    rate = drag_rate(OUT_LEVELS, cfg)
    box = [-52.0, -28.0, 38.0, 56.0]
    attrs = {
        "title": "Invented ocean cyclone under a westerly jet (synthetic sample case)",
        "how_made": (
            "height prescribed: U.S. Standard Atmosphere 1976 heights, a zonal jet "
            "(tanh in latitude, deepening with height) and a Gaussian low 1000 km wide "
            "drifting east at 10 m/s along 47N; wind from iterating both momentum "
            "equations to convergence on a grid twice as fine; omega from continuity "
            "(zero at 150 hPa); temperature from the hypsometric relation"
        ),
        "friction": (
            "Rayleigh drag F = -V / tau with 1/tau = (1/6 h) exp(-((1000 - p) / "
            "110 hPa)^2): strongest at 1000 hPa, negligible above 800 hPa"
        ),
        "friction_rate_per_level_s-1": json.dumps(dict(zip(map(str, OUT_LEVELS), rate.tolist()))),
        "pattern_angular_speed_rad_s-1": (
            f"{cfg['drift_ms'] / (A * np.cos(np.deg2rad(cfg['centre_lat']))):.6e}"
        ),
        "suggested_box": json.dumps(box),
        "expected_verdicts": json.dumps(
            [
                {"level_hpa": 500, "time_index": 2, "box": box, "balance": "geostrophic"},
                {"level_hpa": 1000, "time_index": 2, "box": box, "balance": "frictional"},
                {"level_hpa": "msl", "time_index": 2, "box": box, "balance": "frictional"},
            ]
        ),
        "free_atmosphere_levels_hpa": json.dumps([700, 500, 300, 250]),
        "friction_levels_hpa": json.dumps([1000]),
        "sea_level": (
            "sea-level pressure from the 1000 hPa height and temperature through the "
            "hypsometric relation; the 10 m wind is the 1000 hPa wind (the ocean "
            "lies about 100 m below that level); 2 m temperature from the 1000 hPa "
            "temperature with a 6.5 K/km lapse rate"
        ),
        "scale_preset": "synoptic_cyclone",
    }
    return out_lat, out_lon, times, data, attrs


def sea_level_fields(z1000, t1000, u1000, v1000):
    """Sea-level pressure (Pa), 10 m wind and 2 m temperature of the invented ocean case:
    p = 1000 hPa exp(g Z / (R_d T)) at the 1000 hPa height Z, the 1000 hPa wind as the 10 m
    wind, and T + 6.5 K/km Z as the 2 m temperature."""
    return {
        "msl": 1.0e5 * np.exp(G * z1000 / (RD * t1000)),
        "u10": u1000,
        "v10": v1000,
        "t2m": t1000 + 0.0065 * z1000,
    }


# -- case 2: tropical cyclone ---------------------------------------------------------

TROPICAL = dict(
    lat=(13.0, 23.0),
    lon=(140.0, 150.0),
    step=0.1,
    start="2038-09-04T00:00",
    hours=3,
    ntimes=5,
    centre_lat=18.0,
    centre_lon=146.0,
    steering_ms=-1.5,  # solid-body easterlies at the equator
    vmax_ms=50.0,
    rmax_km=45.0,
    shape=0.6,
)


def vortex_speed(r, vmax, rmax, a):
    """Tangential speed v = Vmax x exp((1 - x^a) / a), x = r / R_max (maximum Vmax at R_max)."""
    x = r / rmax
    return vmax * x * np.exp((1.0 - x**a) / a)


def tropical_wind(S, p_hpa, t_s, cfg=TROPICAL):
    """(u, v) of the vortex plus the solid-body steering flow, and the pattern's angular speed."""
    p = np.asarray(p_hpa, float)[:, None, None]
    depth = (p - 150.0) / 850.0  # 1 at 1000 hPa, 0 at 150 hPa
    vmax = cfg["vmax_ms"] * (0.3 + 0.7 * np.sin(0.5 * np.pi * depth))  # flat near the ground
    rmax = cfg["rmax_km"] * 1e3 * (1.0 + 0.4 * (1.0 - depth))
    omega_c = cfg["steering_ms"] / A
    lon_c = cfg["centre_lon"] + np.rad2deg(omega_c * t_s)
    r, to_e, to_n = great_circle(cfg["centre_lat"], lon_c, S.PHI, S.LAM)
    vt = vortex_speed(r[None], vmax, rmax, cfg["shape"])
    # counter-clockwise: the tangent is the inward direction turned 90 degrees clockwise
    u = vt * to_n[None] + cfg["steering_ms"] * S.cos
    v = -vt * to_e[None]
    return u, v, omega_c


class PotentialFit:
    """Least-squares potential on a lat-lon patch: min sum |grad Z - H|^2 (area-weighted).

    The normal equations are a weighted Poisson problem; their sparse matrix is
    factorised once and reused for every level and time.
    """

    def __init__(self, S: Sphere):
        import scipy.sparse as sp
        from scipy.sparse.linalg import splu

        self.S = S
        ny, nx = S.PHI.shape
        n = ny * nx
        idx = np.arange(n).reshape(ny, nx)
        dlam = np.diff(S.lam)
        dphi = np.diff(S.phi)
        rows, cols, vals, self._edges = [], [], [], []
        eq = 0
        # east-west edges
        cos = np.cos(S.phi)
        for j in range(ny):
            hx = A * cos[j] * dlam
            wgt = np.sqrt(cos[j] * dlam * abs(np.gradient(S.phi)[j]))
            a, b = idx[j, :-1], idx[j, 1:]
            m = a.size
            e = np.arange(eq, eq + m)
            rows += [e, e]
            cols += [a, b]
            vals += [-wgt / hx, wgt / hx]
            self._edges.append(("x", j, wgt, e))
            eq += m
        # north-south edges
        phim = 0.5 * (S.phi[1:] + S.phi[:-1])
        for j in range(ny - 1):
            hy = A * dphi[j]
            wgt = np.sqrt(np.cos(phim[j]) * abs(dphi[j]) * np.gradient(S.lam))
            a, b = idx[j, :], idx[j + 1, :]
            e = np.arange(eq, eq + nx)
            rows += [e, e]
            cols += [a, b]
            vals += [-wgt / hy, wgt / hy]
            self._edges.append(("y", j, wgt, e))
            eq += nx
        rows, cols, vals = (np.concatenate(x) for x in (rows, cols, vals))
        self.M = sp.csr_matrix((vals, (rows, cols)), shape=(eq, n))
        self.neq = eq
        normal = (self.M.T @ self.M).tocsc()
        normal = normal + sp.identity(n, format="csc") * (1e-12 * normal.diagonal().mean())
        self.lu = splu(normal)
        self.shape = (ny, nx)

    def fit(self, hx, hy):
        """Z (up to a constant, fixed by the boundary mean = 0) from the target gradient."""
        b = np.empty(self.neq)
        for kind, j, wgt, e in self._edges:
            if kind == "x":
                b[e] = wgt * 0.5 * (hx[j, :-1] + hx[j, 1:])
            else:
                b[e] = wgt * 0.5 * (hy[j, :] + hy[j + 1, :])
        z = self.lu.solve(self.M.T @ b).reshape(self.shape)
        edge = np.concatenate([z[0], z[-1], z[:, 0], z[:, -1]])
        return z - edge.mean()


def make_tropical(cfg=TROPICAL):
    out_lat = np.arange(cfg["lat"][1], cfg["lat"][0] - 1e-9, -cfg["step"])
    out_lon = np.arange(cfg["lon"][0], cfg["lon"][1] + 1e-9, cfg["step"])
    fine = Sphere(
        np.arange(cfg["lat"][1], cfg["lat"][0] - 1e-9, -cfg["step"] / 2),
        np.arange(cfg["lon"][0], cfg["lon"][1] + 1e-9, cfg["step"] / 2),
    )
    fitter = PotentialFit(fine)
    half = 12.5  # hPa either side of each output level, for the hypsometric temperature
    p_fine = np.sort(np.concatenate([OUT_LEVELS - half, OUT_LEVELS, OUT_LEVELS + half]))
    times = _times(cfg)
    keep = {k: [] for k in ("height", "u", "v", "omega", "temperature", "tend_u", "tend_v")}
    for t in times["seconds"]:
        u, v, omega_c = tropical_wind(fine, p_fine, t, cfg)
        c = omega_c * A * fine.cos
        z = np.empty_like(u)
        for k in range(p_fine.size):
            uk, vk = u[k], v[k]
            # the force the wind needs, with d/dt = -omega_c d/dlambda (the pattern drifts)
            du = (uk - c) * fine.ddx(uk) + vk * fine.ddy(uk)
            dv = (uk - c) * fine.ddx(vk) + vk * fine.ddy(vk)
            mx = uk * vk * fine.tan / A
            my = -uk * uk * fine.tan / A
            # g grad Z = f k x ... : Du/Dt = f v - g Zx + mx, Dv/Dt = -f u - g Zy + my
            hx = (fine.f * vk + mx - du) / G
            hy = (-fine.f * uk + my - dv) / G
            z[k] = std_height(p_fine[k]) + fitter.fit(hx, hy)
        temp = temperature_from_height(z, p_fine)
        pick = [int(np.nonzero(np.isclose(p_fine, p))[0][0]) for p in OUT_LEVELS]
        zero = np.zeros_like(u[pick])
        arrays = (
            z[pick],
            u[pick],
            v[pick],
            zero,
            temp[pick],
            -c * fine.ddx(u[pick]),
            -c * fine.ddx(v[pick]),
        )
        for name, arr in zip(keep, arrays):
            keep[name].append(arr[:, ::2, ::2])
    data = {k: np.stack(v) for k, v in keep.items()}
    lon_mid = cfg["centre_lon"] + np.rad2deg(cfg["steering_ms"] / A * times["seconds"][2])
    core = [
        round(lon_mid - 0.6, 2),
        round(lon_mid + 0.6, 2),
        cfg["centre_lat"] - 0.6,
        cfg["centre_lat"] + 0.6,
    ]
    outer = [
        round(lon_mid + 1.5, 2),
        round(lon_mid + 3.5, 2),
        cfg["centre_lat"] - 1.0,
        cfg["centre_lat"] + 1.0,
    ]
    attrs = {
        "title": "Invented tropical cyclone in easterly steering flow (synthetic sample case)",
        "how_made": (
            "wind prescribed: a tangential vortex (Vmax 50 m/s at 1000 hPa weakening "
            "upward, radius of maximum wind 45 km widening upward) drifting slowly west "
            "in solid-body easterlies; height from the least-squares potential of the "
            "force the wind needs (advection relative to the drifting pattern, Coriolis, "
            "metric terms), on a grid twice as fine; temperature from the hypsometric "
            "relation; no secondary circulation, so omega is zero"
        ),
        "friction": "none",
        "friction_rate_per_level_s-1": json.dumps({str(p): 0.0 for p in OUT_LEVELS}),
        "pattern_angular_speed_rad_s-1": f"{cfg['steering_ms'] / A:.6e}",
        "suggested_box": json.dumps(core),
        "expected_verdicts": json.dumps(
            [
                {"level_hpa": 850, "time_index": 2, "box": core, "balance": "cyclostrophic"},
                {"level_hpa": 850, "time_index": 2, "box": outer, "balance": "gradient"},
            ]
        ),
        "free_atmosphere_levels_hpa": json.dumps([850, 700, 500]),
        "friction_levels_hpa": json.dumps([]),
        "scale_preset": "tropical_cyclone",
    }
    return out_lat, out_lon, times, data, attrs


# -- case 3: sea breeze --------------------------------------------------------------

SEA_BREEZE = dict(
    lat=(24.0, 26.0),
    lon=(-31.5, -28.5),
    step=0.03,
    start="2039-06-21T09:00",
    hours=3,
    ntimes=5,
    coast_lon=-30.0,
    width_km=20.0,
    peak_ms=8.0,
    onset_hours=3.0,
    period_hours=16.0,
    depth_hpa=150.0,
    drag_per_s=1.0 / 3600.0,
    mixed_layer_top_hpa=780.0,
)


def mixed_layer_drag(p_hpa, cfg):
    """Rayleigh drag rate (s-1): uniform in a daytime mixed layer, none above its top."""
    p = np.asarray(p_hpa, float)
    return cfg["drag_per_s"] * 0.5 * (1.0 + np.tanh((p - cfg["mixed_layer_top_hpa"]) / 25.0))


def breeze_profile(p_hpa, depth_hpa=100.0):
    """Vertical shape of the onshore flow: 1 at 1000 hPa, return flow above, zero net mass flux."""
    s = (1000.0 - np.asarray(p_hpa, float)) / depth_hpa
    return (1.0 - np.sqrt(np.pi) * s) * np.exp(-s * s)


def breeze_mass(p_hpa, depth_hpa=100.0):
    """I(s) = integral_0^s of the profile ds' = (sqrt(pi)/2) (erf(s) - 1 + exp(-s^2)),

    s = (1000 hPa - p) / depth; I tends to zero far aloft (no net mass flux).
    """
    from scipy.special import erf

    s = (1000.0 - np.asarray(p_hpa, float)) / depth_hpa
    return 0.5 * np.sqrt(np.pi) * (erf(s) - 1.0 + np.exp(-s * s))


def make_sea_breeze(cfg=SEA_BREEZE):
    out_lat = np.arange(cfg["lat"][1], cfg["lat"][0] - 1e-9, -cfg["step"])
    out_lon = np.arange(cfg["lon"][0], cfg["lon"][1] + 1e-9, cfg["step"])
    lat = out_lat
    lon = np.arange(cfg["lon"][0], cfg["lon"][1] + 1e-9, cfg["step"] / 2)
    S = Sphere(lat, lon)
    p_fine = np.arange(550.0, 1000.0 + 1e-9, 12.5)  # top first
    p_pa = p_fine * 100.0
    times = _times(cfg)
    phi0 = np.deg2rad(0.5 * sum(cfg["lat"]))
    x = A * np.cos(phi0) * np.deg2rad(lon - cfg["coast_lon"])  # distance from the coast (m)
    X = np.exp(-((x / (cfg["width_km"] * 1e3)) ** 2))
    dXdx = -2 * x / (cfg["width_km"] * 1e3) ** 2 * X
    P = breeze_profile(p_fine, cfg["depth_hpa"])[:, None]
    Q = breeze_mass(p_fine, cfg["depth_hpa"])[:, None] * cfg["depth_hpa"] * 100.0  # dp = -depth ds
    rate = mixed_layer_drag(p_fine, cfg)[:, None]
    w_day = np.pi / (cfg["period_hours"] * 3600.0)
    t_on = -cfg["onset_hours"] * 3600.0  # the breeze starts before the first time

    def amp(t):
        return cfg["peak_ms"] * np.sin(w_day * (t - t_on))

    def amp_rate(t):
        return cfg["peak_ms"] * w_day * np.cos(w_day * (t - t_on))

    def u_of(t):
        return amp(t) * X[None, :] * P

    def omega_of(t):
        # d omega / dp = -du/dx with omega = 0 at the top: omega = -A X' int_top^p P dp
        # and int_top^p P dp = -(Q(p) - Q(top)) since dp = -depth ds
        return amp(t) * dXdx[None, :] * (Q - Q[0])

    def dvdx(vv):
        return np.gradient(vv, x, axis=-1, edge_order=2)

    def dvdp(vv):
        return np.gradient(vv, p_pa, axis=0, edge_order=2)

    def rhs(t, vv):
        # along-shore momentum at the reference latitude, per unit f:
        # dv/dt = -u v_x - omega v_p - u - r v
        uu, om = u_of(t), omega_of(t)
        return -uu * dvdx(vv) - om * dvdp(vv) - uu - rate * vv

    # integrate v / f0 from the onset (RK4, 60 s steps): v = f * vt
    vt = np.zeros((p_fine.size, lon.size))
    t, dt = t_on, 60.0
    snaps = {}
    for target in times["seconds"]:
        while t < target - 1e-6:
            h = min(dt, target - t)
            k1 = rhs(t, vt)
            k2 = rhs(t + h / 2, vt + h / 2 * k1)
            k3 = rhs(t + h / 2, vt + h / 2 * k2)
            k4 = rhs(t + h, vt + h * k3)
            vt = vt + h / 6 * (k1 + 2 * k2 + 2 * k3 + k4)
            t += h
        snaps[target] = vt.copy()
    keep = {k: [] for k in ("height", "u", "v", "omega", "temperature", "tend_u", "tend_v")}
    fy = S.f[None]  # (1, ny, 1)
    for t in times["seconds"]:
        u2 = u_of(t)
        om2 = omega_of(t)
        vt2 = snaps[t]
        u = np.broadcast_to(u2[:, None, :], (p_fine.size, lat.size, lon.size))
        om = np.broadcast_to(om2[:, None, :], u.shape)
        v = fy * vt2[:, None, :]
        tend_u = amp_rate(t) * X[None, None, :] * P[:, :, None] * np.ones_like(u)
        tend_v = fy * rhs(t, vt2)[:, None, :]
        temp_guess = np.broadcast_to(
            temperature_from_height(std_height(p_fine), p_fine)[:, None, None], u.shape
        )
        w = -om * RD * temp_guess / (p_pa[:, None, None] * G)
        # Du/Dt with the exact local tendency; the x-momentum equation gives g dZ/dx
        dudx = np.gradient(u, x, axis=-1, edge_order=2)
        dudp = np.gradient(u, p_pa, axis=0, edge_order=2)
        du = tend_u + u * dudx * (np.cos(phi0) / S.cos[None]) + om * dudp
        mx = u * v * S.tan[None] / A - u * w / A - 2 * OMEGA * w * S.cos[None]
        hx = (fy * v + mx - rate[:, :, None] * u - du) / G
        # integrate across the coast on each parallel, zero at the western (sea) edge
        dx_row = A * S.cos[None] * np.gradient(S.lam)[None, None, :]
        zp = np.concatenate(
            [
                np.zeros(hx.shape[:2] + (1,)),
                np.cumsum(
                    0.5 * (hx[..., 1:] + hx[..., :-1]) * 0.5 * (dx_row[..., 1:] + dx_row[..., :-1]),
                    axis=-1,
                ),
            ],
            axis=-1,
        )
        z = std_height(p_fine)[:, None, None] + zp
        temp = temperature_from_height(z, p_fine)
        pick = []
        for p in BREEZE_LEVELS:
            hit = np.nonzero(np.isclose(p_fine, p))[0]
            pick.append(int(hit[0]) if hit.size else None)
        arrays = {
            "height": z,
            "u": u,
            "v": v,
            "omega": om,
            "temperature": temp,
            "tend_u": tend_u,
            "tend_v": tend_v,
        }
        for name, arr in arrays.items():
            out = []
            for p, k in zip(BREEZE_LEVELS, pick):
                if k is not None:
                    out.append(arr[k][:, ::2])
                elif name == "height":
                    out.append(np.full((lat.size, out_lon.size), float(std_height(p))))
                elif name == "temperature":
                    t_std = temperature_from_height(
                        std_height(np.array([p - 5, p, p + 5])), np.array([p - 5, p, p + 5])
                    )[1]
                    out.append(np.full((lat.size, out_lon.size), float(t_std)))
                else:
                    out.append(np.zeros((lat.size, out_lon.size)))
            keep[name].append(np.stack(out))
    data = {k: np.stack(v) for k, v in keep.items()}
    data["land_mask"] = (
        np.broadcast_to(out_lon[None, :] > cfg["coast_lon"], (out_lat.size, out_lon.size))
    ).astype(np.float32)
    rate_out = mixed_layer_drag(BREEZE_LEVELS, cfg)
    box = [cfg["coast_lon"] - 0.4, cfg["coast_lon"] + 0.4, 24.5, 25.5]
    attrs = {
        "title": "Invented afternoon sea breeze on a straight coast (synthetic sample case)",
        "how_made": (
            "onshore wind prescribed: 8 m/s peak, 20 km wide across an invented "
            "coast along 30W, 150 hPa deep with a return flow near 850-750 hPa, rising and "
            "falling over a 16 h day; along-shore wind integrated in time from its own "
            "momentum equation (Coriolis turning, advection, drag) from the onset 3 h "
            "before the first time; omega from continuity; height integrated across the "
            "coast from the force the onshore wind needs, on a grid twice as fine; "
            "temperature from the hypsometric relation; calm above 600 hPa"
        ),
        "friction": (
            "Rayleigh drag F = -V / tau, 1/tau = (1/1 h) in a daytime mixed layer "
            "below 780 hPa, tapering to none by 730 hPa: the whole circulation is "
            "turbulent; above it only the weak top of the return flow is free of friction"
        ),
        "friction_rate_per_level_s-1": json.dumps(
            dict(zip(map(str, BREEZE_LEVELS), rate_out.tolist()))
        ),
        "geography": (
            "invented: the coast along 30W (land to the east) is drawn from the "
            "file's land mask; real coastlines do not apply"
        ),
        "suggested_box": json.dumps(box),
        "expected_verdicts": json.dumps(
            [
                {"level_hpa": 1000, "time_index": 2, "box": box, "balance": "unsteady"},
                {"level_hpa": 900, "time_index": 2, "box": box, "balance": "unsteady"},
            ]
        ),
        "free_atmosphere_levels_hpa": json.dumps([700, 650]),
        "friction_levels_hpa": json.dumps([1000, 950, 900, 850]),
        "scale_preset": "sea_breeze",
    }
    return out_lat, out_lon, times, data, attrs


# -- writing --------------------------------------------------------------------------


def _times(cfg):
    t0 = np.datetime64(cfg["start"], "s")
    secs = np.arange(cfg["ntimes"]) * cfg["hours"] * 3600.0
    return {"seconds": secs, "datetime": t0 + secs.astype("timedelta64[s]")}


def to_dataset(name, lat, lon, times, data, attrs, levels=None):
    import xarray as xr

    levels = OUT_LEVELS if levels is None else levels
    dims = ("time", "plev", "lat", "lon")
    meta = {
        "height": ("geopotential_height", "m", "geopotential height"),
        "u": ("eastward_wind", "m s-1", "eastward wind"),
        "v": ("northward_wind", "m s-1", "northward wind"),
        "omega": ("lagrangian_tendency_of_air_pressure", "Pa s-1", "vertical velocity (omega)"),
        "temperature": ("air_temperature", "K", "air temperature"),
    }
    var = {}
    for key, (std, units, long) in meta.items():
        var[key] = (
            dims,
            data[key].astype(np.float32),
            {"standard_name": std, "units": units, "long_name": long},
        )
    for key, std, units, long in (
        ("msl", "air_pressure_at_mean_sea_level", "Pa", "mean sea level pressure"),
        ("u10", "eastward_wind", "m s-1", "10 m eastward wind"),
        ("v10", "northward_wind", "m s-1", "10 m northward wind"),
        ("t2m", "air_temperature", "K", "2 m air temperature"),
    ):
        if key in data:
            var[key] = (
                ("time", "lat", "lon"),
                data[key].astype(np.float32),
                {"standard_name": std, "units": units, "long_name": long},
            )
    if "land_mask" in data:
        var["land_mask"] = (
            ("lat", "lon"),
            data["land_mask"],
            {
                "standard_name": "land_binary_mask",
                "units": "1",
                "long_name": "land (1) or sea (0), invented",
            },
        )
    ds = xr.Dataset(
        var,
        coords={
            "time": (
                "time",
                times["datetime"].astype("datetime64[ns]"),
                {"standard_name": "time", "long_name": "valid time"},
            ),
            "plev": (
                "plev",
                levels,
                {"standard_name": "air_pressure", "units": "hPa", "positive": "down", "axis": "Z"},
            ),
            "lat": (
                "lat",
                lat,
                {"standard_name": "latitude", "units": "degrees_north", "axis": "Y"},
            ),
            "lon": (
                "lon",
                lon,
                {"standard_name": "longitude", "units": "degrees_east", "axis": "X"},
            ),
        },
        attrs={
            "Conventions": "CF-1.11",
            "institution": "balance-desk sample cases",
            "source": (
                "synthetic: invented analytic fields made by sample_cases/make_cases.py; "
                "not model output, not observations"
            ),
            "history": f"created by sample_cases/make_cases.py ({name})",
            "references": "see the docstring of sample_cases/make_cases.py",
            **attrs,
        },
    )
    ds["time"].encoding.update(
        units="hours since 2000-01-01 00:00:00", calendar="standard", dtype="float64"
    )
    return ds


CASES = {
    "ocean_cyclone": make_cyclone,
    "tropical_cyclone": make_tropical,
    "sea_breeze": make_sea_breeze,
}


def build(name):
    """(dataset, exact tendencies) of one case, in memory."""
    lat, lon, times, data, attrs = CASES[name]()
    levels = BREEZE_LEVELS if name == "sea_breeze" else OUT_LEVELS
    ds = to_dataset(name, lat, lon, times, data, attrs, levels)
    return ds, {"u": data["tend_u"], "v": data["tend_v"]}


def write(outdir):
    os.makedirs(outdir, exist_ok=True)
    paths = []
    for name in CASES:
        ds, _ = build(name)
        enc = {v: {"zlib": True, "complevel": 5, "dtype": "float32"} for v in ds.data_vars}
        path = os.path.join(outdir, f"{name}.nc")
        ds.to_netcdf(path, engine="netcdf4", encoding=enc)
        _height_coordinates(path)
        paths.append(path)
    return paths


def _height_coordinates(path):
    """The CF scalar coordinates that put the 10 m wind at 10 m and the 2 m temperature at 2 m
    above the ground (each on its own variables only: xarray would give a scalar coordinate
    to every variable)."""
    import netCDF4

    with netCDF4.Dataset(path, "a") as nc:
        for var, height, name in (
            ("u10", 10.0, "height10m"),
            ("v10", 10.0, "height10m"),
            ("t2m", 2.0, "height2m"),
        ):
            if var not in nc.variables:
                continue
            if name not in nc.variables:
                h = nc.createVariable(name, "f8", ())
                h.standard_name, h.units, h.positive = "height", "m", "up"
                h.long_name = "height above the ground"
                h[...] = height
            nc.variables[var].coordinates = name


if __name__ == "__main__":
    out = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
    for p in write(out):
        print(f"{p}  {os.path.getsize(p) / 1e6:.2f} MB")
