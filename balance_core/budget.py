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
* along_stream and centripetal: the acceleration of the flow along the
  Earth's surface split into the parts along and normal to the wind,
  -(V dV/ds) t and -(V^2 / R) n, R the radius of curvature of the trajectory
  on the sphere. The along-stream part is that of horizontal_advection; the
  centripetal part is the normal part of horizontal_advection plus metric_uv
  (which is normal to the wind by construction: (u tan(phi) / a)(v, -u)), so
  that a flow along a latitude circle, whose trajectory curves on the sphere,
  has the centripetal acceleration the gradient wind of its height contours
  implies (:func:`balance_core.winds.gradient_wind` uses the same spherical
  curvature). Same sign convention as the terms: along_stream + centripetal =
  horizontal_advection + metric_uv at every point.

w = -omega / (rho g0), rho = p / (R_d T) or, without temperature, the
U.S. Standard Atmosphere (1976) density at the level.
"""

from __future__ import annotations

import dataclasses
import os
import threading
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import numpy as np

from . import _memory
from . import constants as C
from .grid import Grid, derivative_weights
from .thermo import standard_atmosphere_density
from .winds import Flow

__all__ = [
    "Fields",
    "Term",
    "Budget",
    "momentum_budget",
    "TERMS",
    "FORCING_TERMS",
    "DERIVED",
    "ageostrophic_parts",
    "AGEOSTROPHIC_PARTS",
    "trajectory_centripetal",
    "isallobaric_wind",
]

#: The terms of the budget, in the order of the equations; the residual last.
TERMS = (
    "tendency",
    "horizontal_advection",
    "vertical_advection",
    "metric_uv",
    "metric_uw",
    "coriolis",
    "coriolis_w",
    "pressure_gradient",
    "residual",
)
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
    omega: Any = None  # an array, or None
    temperature: Any = None  # an array, or None
    #: why an optional field is None, if the reason is more than "not in the data"
    reasons: dict = dataclasses.field(default_factory=dict)

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

    def rows(self, j0: int, j1: int) -> Fields:
        """The same fields restricted to rows j0..j1-1 (views, no copies)."""

        def cut(a: Any) -> Any:
            return None if a is None else a[..., j0:j1, :]

        return Fields(
            cut(self.u),
            cut(self.v),
            cut(self.height),
            self.pressure,
            self.time,
            cut(self.omega),
            cut(self.temperature),
            dict(self.reasons),
        )

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
    #: numpy arrays, or None where unavailable (typed Any: a check of ``available`` comes
    #: before every use, which the type checker cannot follow)
    x: Any
    y: Any
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


_POOLS: dict[int, ThreadPoolExecutor] = {}
_POOLS_LOCK = threading.Lock()

#: Points per band of rows: small enough that a band's intermediate arrays
#: stay in a core's cache, large enough that Python overhead stays small.
BAND_POINTS = 80_000


def band_threads() -> int:
    """Threads for the bands of a large grid: the CPUs this process may run on (its
    affinity mask, which a container or ``taskset`` narrows, not the machine's count), at
    most 8, and no more than ``OMP_NUM_THREADS`` when that is set.

    dask's workers are started with OMP_NUM_THREADS=1 (``distributed.nanny.pre-spawn-
    environ``), as are numpy's BLAS and OpenMP threads: one thread per worker and one
    worker per core is how dask uses a machine, and a pool of our own in each worker
    would put two threads on every core (measured in bench/batch.py).
    """
    try:
        n = len(os.sched_getaffinity(0))
    except AttributeError:  # (not on Linux)
        n = os.cpu_count() or 1
    omp = os.environ.get("OMP_NUM_THREADS", "").strip()
    if omp.isdigit() and int(omp) >= 1:
        n = min(n, int(omp))
    return max(1, min(n, 8))


def _pool(n: int) -> ThreadPoolExecutor:
    """A pool of ``n`` threads, made once."""
    with _POOLS_LOCK:
        if n not in _POOLS:
            _POOLS[n] = ThreadPoolExecutor(max_workers=n, thread_name_prefix=f"budget{n}")
        return _POOLS[n]


def momentum_budget(
    grid: Grid,
    fields: Fields,
    time_index: int = 0,
    level_index: int = 0,
    *,
    views: bool = True,
    workers: int | None = None,
) -> Budget:
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
        Threads to use; 1 computes in the calling thread; by default
        :func:`band_threads`. Large grids are cut
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
    layout = _Layout(fields, time_index % nt, level_index % nk)
    out = _allocate(layout, grid.shape, views)
    ny, nx = grid.shape
    rows = max(3, BAND_POINTS // nx)
    nthreads = band_threads() if workers is None else max(1, int(workers))
    if ny < 2 * rows:
        bands = [(0, ny)]
    else:
        nbands = -(-ny // rows)
        nbands = -(-nbands // nthreads) * nthreads  # a whole number of bands per thread
        nbands = min(nbands, ny // 3)  # every band at least three rows
        edges = np.linspace(0, ny, nbands + 1).round().astype(int)
        bands = [(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:])]

    def run(band):
        _fill_band(grid, fields, layout, out, band[0], band[1], views)

    if nthreads == 1 or len(bands) == 1:
        for b in bands:
            run(b)
    else:
        for _ in _pool(nthreads).map(run, bands):
            pass
    return out


def _zeros(shape):
    """A read-only field of zeros that takes no memory (a term that is zero by definition)."""
    return np.broadcast_to(np.float64(0.0), shape)


class _Layout:
    """What the data can give at one (time, level): weights, availability, notes. No arrays."""

    def __init__(self, fields: Fields, it: int, ik: int):
        self.it, self.ik = it, ik
        self.p = float(fields.pressure[ik])
        self.notes: list[str] = []
        self.missing: dict[str, str] = {}
        if fields.ntime >= 2:
            self.t_ids, self.t_w = derivative_weights(fields.time, it)
            if fields.ntime == 2:
                self.notes.append("tendency from two times: a first-order difference")
        else:
            self.t_ids = self.t_w = None
            self.missing["tendency"] = fields.reasons.get(
                "tendency", "one time only, so no local tendency"
            )
        if fields.nlevel >= 2:
            self.p_ids, self.p_w = derivative_weights(fields.pressure, ik)
        else:
            self.p_ids = self.p_w = None
        self.has_omega = fields.omega is not None
        self.has_temperature = fields.temperature is not None
        self.rho_std = None
        if not self.has_omega:
            why = fields.reasons.get("omega", "no vertical motion (omega) in the data")
            for name in ("vertical_advection", "metric_uw", "coriolis_w"):
                self.missing[name] = why
        else:
            if self.has_temperature:
                self.notes.append("w = -omega / (rho g), rho from the temperature")
            else:
                self.rho_std = float(standard_atmosphere_density(self.p))
                why_t = fields.reasons.get("temperature", "no temperature in the data")
                self.notes.append(
                    f"w = -omega / (rho g), rho = {self.rho_std:.3f} kg m-3 from the standard "
                    f"atmosphere ({why_t})"
                )
            if self.p_ids is None:
                self.missing["vertical_advection"] = (
                    "one pressure level only, so no vertical derivative"
                )
        self.includes = [n for n in TERMS[:-1] if n in self.missing]
        note = "friction, sub-grid processes and numerical or data error"
        if self.includes:
            note += "; also holds the unavailable " + ", ".join(self.includes)
        self.residual_note = note

    def available(self, name) -> bool:
        return name not in self.missing


def _allocate(layout: _Layout, shape, views: bool) -> Budget:
    """The output Budget: every field a view into one block (see :mod:`._memory`).

    One large allocation is mapped with huge pages where the system allows and
    is recycled once no budget refers to it, where dozens of separate arrays
    would each pay for their own page faults.
    """
    names = [n for n in TERMS if layout.available(n)]
    derived = list(DERIVED) if views else []
    n_arrays = 2 * (len(names) + len(derived)) - ("coriolis_w" in names)
    slots = iter(_memory.take((n_arrays,) + tuple(shape)))
    terms = {}
    for n in TERMS:
        if not layout.available(n):
            terms[n] = Term(n, None, None, layout.missing[n])
        elif n == "coriolis_w":
            terms[n] = Term(n, next(slots), _zeros(shape))  # no y part, by definition
        else:
            terms[n] = Term(
                n, next(slots), next(slots), layout.residual_note if n == "residual" else None
            )
    notes = []
    if not layout.available("vertical_advection"):
        notes.append("without vertical advection")
    if not layout.available("tendency"):
        notes.append("without the local tendency (one time): the steady-state value")
    der = {}
    for n in derived:
        der[n] = Term(
            n, next(slots), next(slots), ("; ".join(notes) or None) if n == "acceleration" else None
        )
    return Budget(
        terms=terms,
        derived=der,
        residual_includes=layout.includes,
        notes=list(layout.notes),
        level_pa=layout.p,
        time_index=layout.it,
        level_index=layout.ik,
    )


def _f64(a):
    return np.asarray(a, dtype=np.float64)


def _weighted_sum(arrays, weights, out):
    """sum(w * a) into ``out`` (float64); zero weights are skipped."""
    pairs = [(a, w) for a, w in zip(arrays, weights) if w != 0.0]
    if len(pairs) == 2 and pairs[0][1] == -pairs[1][1]:  # centred, even spacing
        np.subtract(pairs[1][0], pairs[0][0], out=out, dtype=np.float64)
        out *= pairs[1][1]
        return out
    np.multiply(pairs[0][0], pairs[0][1], out=out, dtype=np.float64)
    if len(pairs) > 1:
        scratch = np.empty_like(out)
        for a, w in pairs[1:]:
            np.multiply(a, w, out=scratch, dtype=np.float64)
            out += scratch
    return out


def _grad_rows(gb: Grid, gi: Grid, fh, a: int, b: int, factor=None):
    """(d/dx, d/dy) of the interior rows a..b-1 of a band field ``fh`` that has halo rows."""
    if gb.kind == "latlon":
        dx = gi.ddx(fh[a:b], factor=factor)
        dy = gb.ddy(fh, factor=factor)[a:b]
        return dx, dy
    gx, gy = gb.grad(fh, factor=factor)
    return gx[a:b], gy[a:b]


def _fill_band(
    grid: Grid, fields: Fields, layout: _Layout, out: Budget, j0: int, j1: int, views: bool
):
    """Every term of rows j0..j1-1, written straight into ``out``.

    Derivatives across rows use one halo row each side (from the whole field),
    so they equal those of the whole grid; everything else is computed for the
    band's own rows only.
    """
    ny = grid.shape[0]
    h0, h1 = max(j0 - 1, 0), min(j1 + 1, ny)
    gb = grid if (h0, h1) == (0, ny) else grid.rows(h0, h1)
    gi = grid if (j0, j1) == (0, ny) else grid.rows(j0, j1)
    a, b = j0 - h0, j1 - h0
    it, ik, rows = layout.it, layout.ik, slice(j0, j1)
    uh = _f64(fields.u[it, ik, h0:h1])
    vh = _f64(fields.v[it, ik, h0:h1])
    u, v = uh[a:b], vh[a:b]
    neg_u = np.negative(u)
    w: Any = None  # w, w / a and omega where the data give omega
    w_over_a: Any = None
    om: Any = None
    if layout.has_omega:
        om = _f64(fields.omega[it, ik, rows])
        if layout.has_temperature:  # w = -omega / (rho g), rho = p / (R_d T)
            w = np.multiply(om, fields.temperature[it, ik, rows], dtype=np.float64)
            w *= -C.R_DRY / (layout.p * C.G0)
        else:
            w = om * (-1.0 / (C.G0 * float(layout.rho_std or 0.0)))
        w_over_a = w * (1.0 / grid.radius)

    def o(name, comp):
        return getattr(out.terms[name], comp)[rows]

    zh = fields.height[it, ik, h0:h1]
    pgf_x, pgf_y = _grad_rows(gb, gi, zh, a, b, factor=-C.G0)
    o("pressure_gradient", "x")[...] = pgf_x
    o("pressure_gradient", "y")[...] = pgf_y
    for comp, q, qh in (("x", fields.u, uh), ("y", fields.v, vh)):
        q0 = qh[a:b]
        dqdx, dqdy = _grad_rows(gb, gi, qh, a, b)
        adv = o("horizontal_advection", comp)
        np.multiply(dqdx, neg_u, out=adv)  # -(u dq/dx + v dq/dy)
        dqdy *= v
        adv -= dqdy
        if layout.t_ids is not None:
            _weighted_sum(
                [q0 if i == it else q[i, ik, rows] for i in layout.t_ids],
                layout.t_w,
                o("tendency", comp),
            )
        if layout.available("vertical_advection"):  # -omega dq/dp
            va = _weighted_sum(
                [q0 if k == ik else q[it, k, rows] for k in layout.p_ids],
                [-x for x in layout.p_w],
                o("vertical_advection", comp),
            )
            va *= om
    mx, my = o("metric_uv", "x"), o("metric_uv", "y")
    np.multiply(u, v, out=mx)  # + u v tan(phi) / a
    mx *= gi.tan_lat_over_a
    np.multiply(u, neg_u, out=my)  # - u^2 tan(phi) / a
    my *= gi.tan_lat_over_a
    np.multiply(gi.f, v, out=o("coriolis", "x"))  # + f v
    np.multiply(gi.f, neg_u, out=o("coriolis", "y"))  # - f u
    if w is not None:
        np.multiply(neg_u, w_over_a, out=o("metric_uw", "x"))  # - u w / a
        muy = o("metric_uw", "y")
        np.multiply(v, w_over_a, out=muy)  # - v w / a
        np.negative(muy, out=muy)
        np.multiply(w, -2.0 * grid.omega * gi.cos_lat, out=o("coriolis_w", "x"))
    for comp in ("x", "y"):
        _residual_into(layout, out, rows, comp)
    if views:
        _derived_into(gi, layout, out, rows, u, v)


def _residual_into(layout: _Layout, out: Budget, rows, comp):
    """residual = tendency - sum of the forcing terms (or -sum without a tendency)."""
    res = getattr(out.terms["residual"], comp)[rows]
    parts = [
        getattr(out.terms[n], comp)[rows]
        for n in FORCING_TERMS
        if layout.available(n) and not (n == "coriolis_w" and comp == "y")
    ]
    if layout.t_ids is None:
        np.add(parts[0], parts[1], out=res)
        for p in parts[2:]:
            res += p
        np.negative(res, out=res)
        return
    np.subtract(getattr(out.terms["tendency"], comp)[rows], parts[0], out=res)
    for p in parts[1:]:
        res -= p


def _derived_into(gi: Grid, layout: _Layout, out: Budget, rows, u, v):
    """DV/Dt and the natural-coordinate split of the horizontal advection."""
    hadv = out.terms["horizontal_advection"]
    for comp in ("x", "y"):
        acc = getattr(out.derived["acceleration"], comp)[rows]
        h = getattr(hadv, comp)[rows]
        if layout.t_ids is not None:
            np.subtract(getattr(out.terms["tendency"], comp)[rows], h, out=acc)
        else:
            np.negative(h, out=acc)
        if layout.available("vertical_advection"):
            acc -= getattr(out.terms["vertical_advection"], comp)[rows]
    s, n = out.derived["along_stream"], out.derived["centripetal"]
    Flow(gi, u, v).natural_split(
        hadv.x[rows], hadv.y[rows], out=(s.x[rows], s.y[rows], n.x[rows], n.y[rows])
    )
    # the Earth's curvature of the trajectory: metric_uv is normal to the wind
    n.x[rows] += out.terms["metric_uv"].x[rows]
    n.y[rows] += out.terms["metric_uv"].y[rows]


def isallobaric_wind(grid: Grid, height_tendency):
    """The isallobaric wind -(g0 / f^2) grad(dZ/dt), m s-1.

    The ageostrophic wind that the local change of the geostrophic wind makes,
    (1/f) k x dVg/dt with Vg = (g0/f) k x grad Z on an f-plane (Holton and Hakim 2013,
    An Introduction to Dynamic Meteorology, 5th ed., ch. 6, the ageostrophic wind;
    Bluestein 1992, Synoptic-Dynamic Meteorology in Midlatitudes, vol. I, ch. 4),
    ``height_tendency`` dZ/dt in m s-1. f is taken at each point (the variation of f
    across the grid is left out, as in the textbook form); NaN in the tropical mask.
    """
    gx, gy = grid.grad(np.asarray(height_tendency, dtype=np.float64))
    k = -C.G0 * grid.inverse_f**2
    return gx * k, gy * k


def trajectory_centripetal(budget: Budget, u, v) -> Term:
    """The centripetal term along the trajectories, m s-2 (same sign convention as the
    budget's terms).

    The acceleration normal to the wind along a trajectory is the streamlines' one plus
    the cross-stream part of the local tendency: with n = k x V / |V| (to the left of the
    flow), V^2 K_traj = V^2 K_stream + n . dV/dt (Holton and Hakim 2013, ch. 3, trajectories
    and streamlines in natural coordinates), so

        centripetal_trajectory = centripetal - (n . tendency) n.

    Unavailable (with the reason) where the data give no local tendency.
    """
    ten = budget.terms["tendency"]
    cen = budget.derived.get("centripetal")
    if not ten.available or cen is None or not cen.available:
        return Term(
            "centripetal_trajectory",
            None,
            None,
            "no local tendency (one valid time): only the streamlines' curvature",
        )
    u = np.asarray(u, dtype=np.float64)
    v = np.asarray(v, dtype=np.float64)
    speed = np.hypot(u, v)
    with np.errstate(invalid="ignore", divide="ignore"):
        nx, ny = -v / speed, u / speed
    along_n = ten.x * nx + ten.y * ny
    return Term(
        "centripetal_trajectory",
        cen.x - along_n * nx,
        cen.y - along_n * ny,
        "the streamlines' curvature plus the cross-stream tendency over V^2",
    )


#: The parts of the ageostrophic wind, by the terms that make them (see ageostrophic_parts).
AGEOSTROPHIC_PARTS = ("tendency", "inertial_advective", "vertical_advection", "remainder")


def ageostrophic_parts(budget: Budget, inverse_f) -> dict:
    """The ageostrophic wind split by the terms that cause it, m s-1.

    ``inverse_f`` is 1/f on the budget's grid (``Grid.inverse_f``: NaN in the tropical
    mask).

    Notes
    -----
    With the budget's terms, Coriolis plus the pressure-gradient force is
    f k x (V - Vg) turned by a right angle: (f v_ag, -f u_ag). So

        V_ag = (1/f) k x (tendency - horizontal_advection - vertical_advection
                          - metric_uv - metric_uw - coriolis_w - residual)

    (e.g. Holton and Hakim 2013, An Introduction to Dynamic Meteorology, 5th ed.,
    section 6.1: V_ag = (1/f) k x DV/Dt without friction; Bluestein 1992,
    Synoptic-Dynamic Meteorology in Midlatitudes, vol. I, section 4.4), with
    k x (a, b) = (-b, a). The parts, which add up to V - Vg at every point:

    * ``tendency``: (1/f) k x dV/dt, the part of the local change of the wind, where the
      tendency is from the data (unavailable with a single time: the remainder then
      holds it). It is not the isallobaric wind -(g/f^2) grad(dZ/dt) of the height
      tendency (:func:`isallobaric_wind`), which changes the geostrophic wind only;
    * ``inertial_advective``: (1/f) k x (V . grad) V;
    * ``vertical_advection``: (1/f) k x omega dV/dp;
    * ``remainder``: what the metric terms, the vertical Coriolis term and the
      residual (friction, unresolved processes, error) make.

    Where |f| is within the grid's tropical mask every part is NaN (1/f is).
    Returns {name: Term} with an unavailable Term (and its reason) where the data
    cannot give the part.
    """
    inv_f = np.asarray(inverse_f, dtype=np.float64)
    t = budget.terms

    def turned(ax, ay, sign=1.0):
        # (1/f) k x (sign * a) = (1/f) (-sign a_y, sign a_x)
        return -sign * ay * inv_f, sign * ax * inv_f

    out = {}
    ten = t["tendency"]
    out["tendency"] = (
        Term("tendency", *turned(ten.x, ten.y))
        if ten.available
        else Term("tendency", None, None, f"no tendency ({ten.note}); the remainder holds its part")
    )
    adv = t["horizontal_advection"]
    out["inertial_advective"] = Term("inertial_advective", *turned(adv.x, adv.y, -1.0))
    vad = t["vertical_advection"]
    out["vertical_advection"] = (
        Term("vertical_advection", *turned(vad.x, vad.y, -1.0))
        if vad.available
        else Term(
            "vertical_advection",
            None,
            None,
            f"no vertical advection ({vad.note}); the remainder holds its part",
        )
    )
    rx = np.zeros_like(t["residual"].x)
    ry = np.zeros_like(t["residual"].y)
    for name in ("metric_uv", "metric_uw", "coriolis_w", "residual"):
        term = t[name]
        if term.available:
            rx = rx + term.x
            ry = ry + term.y
    remx, remy = turned(rx, ry, -1.0)
    out["remainder"] = Term(
        "remainder",
        remx,
        remy,
        "metric terms, vertical Coriolis and the residual (friction, unresolved processes, error)",
    )
    return out
