"""The horizontal momentum budget on a pressure surface, term by term.

Written as "local tendency = sum of forcing terms" (Holton and Hakim 2013,
An Introduction to Dynamic Meteorology, 5th ed., ch. 2, the momentum equations
in spherical coordinates, with the pressure-gradient force in isobaric form):

    du/dt = - u du/dx - v du/dy     horizontal_advection
            - omega du/dp           vertical_advection
            + u v tan(phi) / a      metric_uv  (the Earth's curvature, not the flow's)
            - u w / a               metric_uw
            + f v                   coriolis
            - 2 Omega w cos(phi)    coriolis_w
            - g0 dZ/dx              pressure_gradient
            + F_x                   residual

    dv/dt = - u dv/dx - v dv/dy - omega dv/dp - u^2 tan(phi) / a - v w / a
            - f u - g0 dZ/dy + F_y

F is never in the data: the residual is the tendency minus every resolved
term, so it holds friction, sub-grid processes and numerical or data error,
plus every term the data cannot give (named in ``Budget.residual_includes``).

Derived views of the same fields, never part of the sum:

* acceleration = DV/Dt = tendency - horizontal_advection - vertical_advection
  (the Lagrangian acceleration that scale analysis estimates as U^2 / L);
* along_stream and centripetal: the horizontal_advection split into the parts
  along and normal to the wind, -(V dV/ds) t and -(V^2 / R_s) n (same sign
  convention as the term they split, so along_stream + centripetal equals
  horizontal_advection at every point).

w = -omega / (rho g0), rho = p / (R_d T) or, without temperature, the
U.S. Standard Atmosphere (1976) density at the level.
"""

from __future__ import annotations

import dataclasses
import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from . import _memory
from . import constants as c
from .grid import Grid, derivative_weights
from .thermo import standard_atmosphere_density
from .winds import Flow

__all__ = ["Fields", "Term", "Budget", "momentum_budget", "TERMS", "FORCING_TERMS", "DERIVED"]

#: The terms of the budget, in the order of the equations; the residual last.
TERMS = ("tendency", "horizontal_advection", "vertical_advection", "metric_uv", "metric_uw",
         "coriolis", "coriolis_w", "pressure_gradient", "residual")
#: The terms on the right-hand side that the data resolves.
FORCING_TERMS = TERMS[1:-1]
#: Views derived from the terms, not part of the sum.
DERIVED = ("acceleration", "along_stream", "centripetal")


@dataclasses.dataclass
class Fields:
    """The input of a budget: SI units, earth-relative winds, dims (time, level, y, x).

    Attributes
    ----------
    u, v : arrays, m s-1
    height : array, geopotential metres
    pressure : 1-D array, Pa, one value per level (any order, any spacing)
    time : 1-D array of seconds, one per time (irregular steps allowed), or None
        when there is one time
    omega : array, Pa s-1, optional
    temperature : array, K, optional
    """

    u: np.ndarray
    v: np.ndarray
    height: np.ndarray
    pressure: np.ndarray
    time: np.ndarray | None = None
    omega: np.ndarray | None = None
    temperature: np.ndarray | None = None

    def __post_init__(self):
        self.pressure = np.atleast_1d(np.asarray(self.pressure, dtype=np.float64))
        shape = np.shape(self.u)
        if len(shape) != 4:
            raise ValueError(f"u has {len(shape)} dimensions; expected (time, level, y, x)")
        for name in ("v", "height", "omega", "temperature"):
            a = getattr(self, name)
            if a is not None and np.shape(a) != shape:
                raise ValueError(f"{name} has shape {np.shape(a)}; u has {shape}")
        if self.pressure.size != shape[1]:
            raise ValueError(f"{self.pressure.size} pressure values for {shape[1]} levels")
        if np.any(~np.isfinite(self.pressure)) or np.any(self.pressure <= 0):
            raise ValueError("pressure levels must be positive numbers (Pa)")
        if self.time is not None:
            self.time = np.atleast_1d(np.asarray(self.time, dtype=np.float64))
            if self.time.size != shape[0]:
                raise ValueError(f"{self.time.size} times for {shape[0]} time steps")
            if np.any(np.diff(self.time) <= 0):
                raise ValueError("times must be strictly increasing")
        elif shape[0] > 1:
            raise ValueError("several time steps need their times (seconds)")

    def rows(self, j0: int, j1: int) -> "Fields":
        """The same fields restricted to rows j0..j1-1 (views, no copies)."""
        cut = lambda a: None if a is None else a[..., j0:j1, :]  # noqa: E731
        return Fields(cut(self.u), cut(self.v), cut(self.height), self.pressure, self.time,
                      cut(self.omega), cut(self.temperature))

    @property
    def ntime(self) -> int:
        return np.shape(self.u)[0]

    @property
    def nlevel(self) -> int:
        return np.shape(self.u)[1]


@dataclasses.dataclass
class Term:
    """One term of the budget as its two components (m s-2).

    ``x`` and ``y`` are None when the data cannot give the term; ``note`` then
    says why. For an available term ``note`` may say how it was computed.
    """

    name: str
    x: np.ndarray | None
    y: np.ndarray | None
    note: str | None = None

    @property
    def available(self) -> bool:
        return self.x is not None

    def magnitude(self):
        """|term| = sqrt(x^2 + y^2), or None when unavailable."""
        if not self.available:
            return None
        return np.hypot(self.x, self.y)


@dataclasses.dataclass
class Budget:
    """Every term of both momentum equations at one level and time.

    Attributes
    ----------
    terms : dict of Term
        Keyed by :data:`TERMS`; tendency equals the sum of all the others.
    derived : dict of Term
        Keyed by :data:`DERIVED`.
    residual_includes : list of str
        Unavailable terms whose contribution the residual therefore holds.
    notes : list of str
        How the budget was computed (density source, masks, difference order).
    level_pa : float
    time_index, level_index : int
    """

    terms: dict
    derived: dict
    residual_includes: list
    notes: list
    level_pa: float
    time_index: int
    level_index: int

    def __getitem__(self, name) -> Term:
        if name in self.terms:
            return self.terms[name]
        return self.derived[name]

    def closure(self):
        """tendency - sum(all other terms), which is zero by construction (checks)."""
        total = [np.zeros_like(self.terms["residual"].x), np.zeros_like(self.terms["residual"].y)]
        for name in TERMS[1:]:
            t = self.terms[name]
            if t.available:
                total[0] = total[0] + t.x
                total[1] = total[1] + t.y
        tend = self.terms["tendency"]
        if tend.available:
            return tend.x - total[0], tend.y - total[1]
        return -total[0], -total[1]


_POOL: ThreadPoolExecutor | None = None

#: Points per band of rows: small enough that a band's intermediate arrays
#: stay in a core's cache, large enough that Python overhead stays small.
BAND_POINTS = 80_000


def _pool() -> ThreadPoolExecutor:
    global _POOL
    if _POOL is None:
        _POOL = ThreadPoolExecutor(max_workers=min(os.cpu_count() or 1, 8),
                                   thread_name_prefix="budget")
    return _POOL


def momentum_budget(grid: Grid, fields: Fields, time_index: int = 0, level_index: int = 0,
                    *, views: bool = True, workers: int | None = None) -> Budget:
    """Compute every term of the x and y momentum equations at one level and time.

    Parameters
    ----------
    grid : Grid
    fields : Fields
    time_index, level_index : int
        Where to evaluate; neighbours in time and pressure give the tendency
        and the vertical derivatives (second order, centred inside, one-sided
        at the first and last time or level, first order with only two).
    views : bool
        Also compute the derived views (acceleration, along_stream,
        centripetal); False leaves ``Budget.derived`` empty.
    workers : int, optional
        Threads to use; 1 computes in the calling thread. Large grids are cut
        into bands of rows (with one halo row each side, so every derivative
        is exactly that of the whole grid) that are computed side by side and
        written straight into the full output arrays; numpy releases the GIL
        inside each operation.

    Returns
    -------
    Budget

    Notes
    -----
    The equations are those of the module docstring; the frame is
    ``grid.frame`` (earth-relative components, derivatives along east and north).
    """
    for name in ("u", "v", "height", "omega", "temperature"):
        a = getattr(fields, name)
        if a is not None:
            grid.check_field(a, name)
    nt, nk = fields.ntime, fields.nlevel
    if not -nt <= time_index < nt:
        raise IndexError(f"time index {time_index} outside the {nt} times")
    if not -nk <= level_index < nk:
        raise IndexError(f"level index {level_index} outside the {nk} levels")
    it, ik = time_index % nt, level_index % nk
    ny, nx = grid.shape
    rows = max(3, BAND_POINTS // nx)
    if ny < 2 * rows:
        return _band_budget(grid, fields, it, ik, views)
    nthreads = 1 if workers == 1 else _pool()._max_workers
    nbands = -(-ny // rows)
    nbands = -(-nbands // nthreads) * nthreads  # a whole number of bands per thread
    edges = np.linspace(0, ny, nbands + 1).round().astype(int)
    bands = [(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:])]

    def band(j0, j1):
        h0, h1 = max(j0 - 1, 0), min(j1 + 1, ny)
        return _band_budget(grid.rows(h0, h1), fields.rows(h0, h1), it, ik, views), j0 - h0

    # the layout of the output (which terms exist) from a three-row sample
    layout = _band_budget(grid.rows(0, 3), fields.rows(0, 3), it, ik, views)
    out = _empty_like_budget(layout, grid.shape)

    def run(b):
        sub, off = band(*b)
        _copy_rows(sub, out, b, off)

    if workers == 1:
        for b in bands:
            run(b)
    else:
        for _ in _pool().map(run, bands):
            pass
    return out


def _zeros(shape):
    """A read-only field of zeros that takes no memory (a term that is zero by definition)."""
    return np.broadcast_to(np.float64(0.0), shape)


def _is_zeros(a) -> bool:
    return a is not None and a.ndim > 0 and all(st == 0 for st in a.strides)


def _empty_like_budget(b: "Budget", shape) -> "Budget":
    """A Budget shaped like band budget ``b`` on the full grid, arrays not yet filled.

    All the output fields are views into one block of memory: one large
    allocation is mapped with huge pages where the system allows and is
    recycled by :mod:`balance_core._memory`, where dozens of separate arrays would each
    pay for their own page faults.
    """
    fields = [(g, n, t) for g in ("terms", "derived") for n, t in getattr(b, g).items()]
    n_arrays = sum(not _is_zeros(a) for _, _, t in fields if t.available for a in (t.x, t.y))
    slots = iter(_memory.take((n_arrays,) + tuple(shape)))
    out = {"terms": {}, "derived": {}}
    for group, name, t in fields:
        if t.available:
            xy = [_zeros(shape) if _is_zeros(a) else next(slots) for a in (t.x, t.y)]
            out[group][name] = Term(name, xy[0], xy[1], t.note)
        else:
            out[group][name] = Term(name, None, None, t.note)
    return dataclasses.replace(b, terms=out["terms"], derived=out["derived"])


def _copy_rows(src: "Budget", dst: "Budget", band, offset: int):
    """Write the rows of band budget ``src`` into their place in ``dst``."""
    j0, j1 = band
    a, b = offset, offset + (j1 - j0)
    for group in ("terms", "derived"):
        for name, t in getattr(src, group).items():
            if t.available:
                d = getattr(dst, group)[name]
                for sa, da in ((t.x, d.x), (t.y, d.y)):
                    if not _is_zeros(da):
                        da[j0:j1] = sa[a:b]


def _band_budget(grid: Grid, fields: Fields, it: int, ik: int, views: bool = True) -> Budget:
    ctx = _Context(grid, fields, it, ik)
    return _assemble(ctx, _x_terms(ctx), _y_terms(ctx), views)


class _Context:
    """What both equations share at one (time, level): float64 slices, w, notes."""

    def __init__(self, grid: Grid, fields: Fields, it: int, ik: int):
        self.grid, self.fields, self.it, self.ik = grid, fields, it, ik
        self.p = float(fields.pressure[ik])
        self.u = np.asarray(fields.u[it, ik], dtype=np.float64)
        self.v = np.asarray(fields.v[it, ik], dtype=np.float64)
        self.notes: list[str] = []
        self.missing: dict[str, str] = {}
        # touch the cached metrics here, before two threads share the grid
        grid.tan_lat_over_a, grid.cos_lat
        # time derivative weights
        if fields.ntime >= 2:
            self.t_ids, self.t_w = derivative_weights(fields.time, it)
            if fields.ntime == 2:
                self.notes.append("tendency from two times: a first-order difference")
        else:
            self.t_ids = None
            self.missing["tendency"] = "one time only, so no local tendency"
        # vertical derivative weights
        if fields.nlevel >= 2:
            self.p_ids, self.p_w = derivative_weights(fields.pressure, ik)
        else:
            self.p_ids = None
        if fields.omega is None:
            why = "no vertical motion (omega) in the data"
            for name in ("vertical_advection", "metric_uw", "coriolis_w"):
                self.missing[name] = why
            self.omega = self.w = None
        else:
            self.omega = np.asarray(fields.omega[it, ik], dtype=np.float64)
            if fields.temperature is not None:
                # w = -omega / (rho g) with rho = p / (R_d T)
                self.w = np.multiply(self.omega, fields.temperature[it, ik], dtype=np.float64)
                self.w *= -c.R_DRY / (self.p * c.G0)
                self.notes.append("w = -omega / (rho g), rho from the temperature")
            else:
                rho = float(standard_atmosphere_density(self.p))
                self.notes.append(
                    f"w = -omega / (rho g), rho = {rho:.3f} kg m-3 from the standard atmosphere "
                    "(no temperature in the data)")
                self.w = self.omega * (-1.0 / (c.G0 * rho))
            if self.p_ids is None:
                self.missing["vertical_advection"] = "one pressure level only, so no vertical derivative"
        self.neg_u = np.negative(self.u)
        self.w_over_a = None if self.w is None else self.w * (1.0 / grid.radius)

    def tendency(self, q, q0):
        """d q / dt at (it, ik) for q = fields.u or fields.v (q0 its float64 slice), or None."""
        if self.t_ids is None:
            return None
        return _weighted_sum([q0 if i == self.it else q[i, self.ik] for i in self.t_ids], self.t_w)

    def vertical_advection(self, q, q0):
        """-omega d q / dp at (it, ik), or None."""
        if self.p_ids is None or self.omega is None:
            return None
        out = _weighted_sum([q0 if k == self.ik else q[self.it, k] for k in self.p_ids],
                            [-w for w in self.p_w])
        out *= self.omega
        return out


def _weighted_sum(arrays, weights):
    """sum(w * a) in float64 with one scratch buffer; zero weights are skipped."""
    pairs = [(a, w) for a, w in zip(arrays, weights) if w != 0.0]
    if len(pairs) == 2 and pairs[0][1] == -pairs[1][1]:  # centred, even spacing
        out = np.subtract(pairs[1][0], pairs[0][0], dtype=np.float64)
        out *= pairs[1][1]
        return out
    out = np.multiply(pairs[0][0], pairs[0][1], dtype=np.float64)
    scratch = np.empty_like(out) if len(pairs) > 1 else None
    for a, w in pairs[1:]:
        np.multiply(a, w, out=scratch, dtype=np.float64)
        out += scratch
    return out


def _advection(neg_u, v, dqdx, dqdy):
    """-(u dq/dx + v dq/dy), reusing the derivative arrays."""
    dqdx *= neg_u
    dqdy *= v
    dqdx -= dqdy
    return dqdx


def _x_terms(ctx: _Context) -> dict:
    """The x (eastward) momentum equation's terms."""
    g, u, v = ctx.grid, ctx.u, ctx.v
    dudx, dudy = g.grad(u)
    metric = np.multiply(u, v)
    metric *= g.tan_lat_over_a
    terms = {
        "tendency": ctx.tendency(ctx.fields.u, u),
        "horizontal_advection": _advection(ctx.neg_u, v, dudx, dudy),
        "vertical_advection": ctx.vertical_advection(ctx.fields.u, u),
        "metric_uv": metric,
        "coriolis": np.multiply(g.f, v),
        "pressure_gradient": g.ddx(ctx.fields.height[ctx.it, ctx.ik], factor=-c.G0),
    }
    if ctx.w is not None:
        terms["metric_uw"] = np.multiply(ctx.neg_u, ctx.w_over_a)
        terms["coriolis_w"] = np.multiply(ctx.w, -2.0 * g.omega * g.cos_lat)
    return terms


def _y_terms(ctx: _Context) -> dict:
    """The y (northward) momentum equation's terms."""
    g, u, v = ctx.grid, ctx.u, ctx.v
    dvdx, dvdy = g.grad(v)
    metric = np.multiply(u, ctx.neg_u)
    metric *= g.tan_lat_over_a
    terms = {
        "tendency": ctx.tendency(ctx.fields.v, v),
        "horizontal_advection": _advection(ctx.neg_u, v, dvdx, dvdy),
        "vertical_advection": ctx.vertical_advection(ctx.fields.v, v),
        "metric_uv": metric,
        "coriolis": np.multiply(g.f, ctx.neg_u),
        "pressure_gradient": g.ddy(ctx.fields.height[ctx.it, ctx.ik], factor=-c.G0),
    }
    if ctx.w is not None:
        metric_uw = np.multiply(v, ctx.w_over_a)
        terms["metric_uw"] = np.negative(metric_uw, out=metric_uw)
        terms["coriolis_w"] = _zeros(g.shape)  # the vertical Coriolis force has no y part
    return terms


def _residual(tendency, forcing):
    """tendency - sum(forcing), or -sum(forcing) without a tendency; zero terms skipped."""
    forcing = [f for f in forcing if not _is_zeros(f)]
    if tendency is None:
        res = np.add(forcing[0], forcing[1])
        for part in forcing[2:]:
            res += part
        np.negative(res, out=res)
        return res
    res = np.subtract(tendency, forcing[0])
    for part in forcing[1:]:
        res -= part
    return res


def _assemble(ctx: _Context, xs: dict, ys: dict, views: bool = True) -> Budget:
    terms = {}
    for name in TERMS[:-1]:
        x, y = xs.get(name), ys.get(name)
        terms[name] = Term(name, x, y, None if x is not None else ctx.missing.get(name))
    includes = [n for n in TERMS[:-1] if not terms[n].available]
    fx = [terms[n].x for n in FORCING_TERMS if terms[n].available]
    fy = [terms[n].y for n in FORCING_TERMS if terms[n].available]
    note = "friction, sub-grid processes and numerical or data error"
    if includes:
        note += "; also holds the unavailable " + ", ".join(includes)
    terms["residual"] = Term("residual", _residual(terms["tendency"].x, fx),
                             _residual(terms["tendency"].y, fy), note)
    return Budget(terms=terms, derived=_derived(ctx, terms) if views else {},
                  residual_includes=includes,
                  notes=ctx.notes, level_pa=ctx.p, time_index=ctx.it, level_index=ctx.ik)


def _derived(ctx: _Context, terms: dict) -> dict:
    """DV/Dt and the natural-coordinate split of the horizontal advection."""
    hadv, vadv, tend = terms["horizontal_advection"], terms["vertical_advection"], terms["tendency"]
    notes = []
    ax = np.negative(hadv.x)
    ay = np.negative(hadv.y)
    if vadv.available:
        ax -= vadv.x
        ay -= vadv.y
    else:
        notes.append("without vertical advection")
    if tend.available:
        ax += tend.x
        ay += tend.y
    else:
        notes.append("without the local tendency (one time): the steady-state value")
    acc = Term("acceleration", ax, ay, "; ".join(notes) or None)
    flow = Flow(ctx.grid, ctx.u, ctx.v)
    sx, sy, nx, ny = flow.natural_split(hadv.x, hadv.y)
    return {
        "acceleration": acc,
        "along_stream": Term("along_stream", sx, sy, None),
        "centripetal": Term("centripetal", nx, ny, None),
    }
