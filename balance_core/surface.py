"""The momentum budget of the wind near the ground, over the sea-level pressure.

Near the ground the data give the mean sea level pressure p and the 10 m wind V, not the
height of a pressure surface. On that surface (Holton and Hakim 2013, An Introduction to
Dynamic Meteorology, 5th ed., ch. 2 and 5, the momentum equations on a height surface
and the boundary layer), written as "local tendency = sum of forcing terms" like the
budget of a pressure level (:mod:`balance_core.budget`):

    du/dt = - u du/dx - v du/dy     horizontal_advection
            + u v tan(phi) / a      metric_uv
            + f v                   coriolis
            - (1 / rho) dp/dx       pressure_gradient
            + F_x                   residual (friction, and all the data do not give)
    dv/dt = - u dv/dx - v dv/dy - u^2 tan(phi) / a - f u - (1 / rho) dp/dy + F_y

with rho = p / (R_d T) from the 2 m temperature (or the standard atmosphere's sea-level
density). The vertical advection, the vertical metric and Coriolis terms are not in the
data at 10 m; the residual holds them, and with one valid time the tendency too (it is
then the steady-state residual, the friction the data imply if the flow is steady).

Over high ground the sea-level pressure is a reduction below the ground, not a pressure
the air feels: points higher than :data:`MAX_ELEVATION_M` are left out, and counted.
"""

from __future__ import annotations

import numpy as np

from . import constants as C
from .budget import DERIVED, FORCING_TERMS, TERMS, Budget, Term
from .grid import Grid, derivative_weights
from .winds import Flow

__all__ = ["surface_budget", "MAX_ELEVATION_M", "NOT_AT_THE_SURFACE"]

#: Ground higher than this (m) is left out of the surface budget: its sea-level pressure
#: is a reduction through the mountain (the project's own choice, common practice on
#: surface charts, no source).
MAX_ELEVATION_M = 1000.0

#: The terms of the pressure-level budget that the 10 m data cannot give, and why.
NOT_AT_THE_SURFACE = {
    "vertical_advection": "the 10 m wind comes with no vertical motion or shear",
    "metric_uw": "the 10 m wind comes with no vertical motion",
    "coriolis_w": "the 10 m wind comes with no vertical motion",
}


def surface_budget(
    grid: Grid, pressure, u, v, density, *, time=None, it: int = 0, keep=None
) -> Budget:
    """Every term of the momentum budget of the 10 m wind over the sea-level pressure.

    Parameters
    ----------
    grid : Grid
    pressure, u, v : arrays (nt, ny, nx) or (ny, nx)
        Mean sea level pressure (Pa) and the 10 m wind (m s-1, earth-relative), at the
        valid times the tendency needs.
    density : float or array (ny, nx)
        Air density at the time ``it``, kg m-3.
    time : 1-D array of seconds, one per time, or None with one time
    it : int
        The time of the budget within the arrays.
    keep : bool array (ny, nx), optional
        Points to compute (others are NaN), e.g. ground below :data:`MAX_ELEVATION_M`.

    Returns
    -------
    Budget
        The terms of :data:`balance_core.budget.TERMS` (those the data cannot give
        unavailable, with the reason) and the derived views (acceleration,
        along-stream and centripetal parts); ``level_pa`` is NaN (not a pressure level).
    """
    p = np.asarray(pressure, dtype=np.float64)
    uu = np.asarray(u, dtype=np.float64)
    vv = np.asarray(v, dtype=np.float64)
    if p.ndim == 2:
        p, uu, vv = p[None], uu[None], vv[None]
    nt = p.shape[0]
    if time is not None and np.size(time) != nt:
        raise ValueError(f"{np.size(time)} times for {nt} time steps")
    p0, u0, v0 = p[it], uu[it], vv[it]
    if keep is not None:
        p0 = np.where(keep, p0, np.nan)
        u0 = np.where(keep, u0, np.nan)
        v0 = np.where(keep, v0, np.nan)
    rho = np.asarray(density, dtype=np.float64)
    flow = Flow(grid, u0, v0)
    ax, ay = flow.advection
    dpdx, dpdy = grid.grad(p0)
    terms = {
        "horizontal_advection": Term("horizontal_advection", -ax, -ay),
        "metric_uv": Term(
            "metric_uv", u0 * v0 * grid.tan_lat_over_a, -u0 * u0 * grid.tan_lat_over_a
        ),
        "coriolis": Term("coriolis", grid.f * v0, -grid.f * u0),
        "pressure_gradient": Term(
            "pressure_gradient",
            -dpdx / rho,
            -dpdy / rho,
            "-(1/rho) grad p of the sea-level pressure",
        ),
    }
    missing = dict(NOT_AT_THE_SURFACE)
    notes = ["the surface budget: sea-level pressure and the 10 m wind"]
    if nt >= 2 and time is not None:
        ids, wts = derivative_weights(np.asarray(time, dtype=np.float64), it)
        tx = sum(w * uu[i] for i, w in zip(ids, wts))
        ty = sum(w * vv[i] for i, w in zip(ids, wts))
        terms["tendency"] = Term("tendency", tx, ty)
        if nt == 2:
            notes.append("tendency from two times: a first-order difference")
    else:
        missing["tendency"] = "one time only, so no local tendency"
    for name, why in missing.items():
        terms[name] = Term(name, None, None, why)
    includes = [n for n in TERMS[:-1] if n in missing]
    forcing = [terms[n] for n in FORCING_TERMS if terms[n].available]
    sx = sum(t.x for t in forcing)
    sy = sum(t.y for t in forcing)
    if terms["tendency"].available:
        rx, ry = terms["tendency"].x - sx, terms["tendency"].y - sy
    else:
        rx, ry = -sx, -sy
    terms["residual"] = Term(
        "residual",
        rx,
        ry,
        "friction, sub-grid processes and numerical or data error; also "
        "holds the unavailable " + ", ".join(includes),
    )
    hx, hy = terms["horizontal_advection"].x, terms["horizontal_advection"].y
    if terms["tendency"].available:
        acc = Term("acceleration", terms["tendency"].x - hx, terms["tendency"].y - hy)
    else:
        acc = Term(
            "acceleration",
            -hx,
            -hy,
            "without the local tendency (one time): the steady-state value",
        )
    sxx, syy, nxx, nyy = flow.natural_split(hx, hy)
    derived = {
        "acceleration": acc,
        "along_stream": Term("along_stream", sxx, syy),
        "centripetal": Term("centripetal", nxx + terms["metric_uv"].x, nyy + terms["metric_uv"].y),
    }
    return Budget(
        terms={n: terms[n] for n in TERMS},
        derived={n: derived[n] for n in DERIVED},
        residual_includes=includes,
        notes=notes,
        level_pa=float("nan"),
        time_index=it,
        level_index=0,
    )


def density_from(pressure, t2m=None):
    """Air density at the ground, kg m-3: p / (R_d T) from the 2 m temperature, else the
    1976 Standard Atmosphere's sea-level density; and a sentence saying which."""
    if t2m is not None:
        return (
            np.asarray(pressure, dtype=np.float64) / (C.R_DRY * np.asarray(t2m)),
            "density from the 2 m temperature",
        )
    from .thermo import standard_atmosphere_density

    return (
        float(standard_atmosphere_density(C.STD_SEA_LEVEL_PRESSURE)),
        "standard-atmosphere density at sea level (no 2 m temperature)",
    )
