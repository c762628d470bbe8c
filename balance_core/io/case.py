"""A Case: one loaded set of model fields, normalised, with its Grid.

The fields are SI, earth-relative winds, dims (time, level, y, x) for the
pressure-level variables and (time, y, x) for surface ones, held lazily
(dask-backed xarray) until a budget needs them. The Case says what is missing
and therefore which budget terms are unavailable.
"""

from __future__ import annotations

import dataclasses
import os
from typing import Any

import numpy as np

from .. import constants as C
from ..budget import Fields
from ..grid import Grid
from .errors import CaseError
from .names import REQUIRED_ROLES, ROLES
from .units import to_numpy

__all__ = ["Case", "open_case", "REQUIRED", "OPTIONAL"]

REQUIRED = ("height",)
#: Pressure-level fields a case may lack: without the wind, the heights still give the
#: geostrophic wind and the closed systems (no budget); without omega or temperature,
#: the terms that need them are unavailable with the reason.
OPTIONAL = ("u", "v", "omega", "temperature")


@dataclasses.dataclass
class Case:
    """Normalised model fields and their grid.

    Attributes
    ----------
    name : str
        Short name (the file's stem, or the title of an in-memory case).
    title : str
    paths : list of str
    grid : Grid
    times : datetime64[ns] array, the valid times
    levels_pa : float array, pressure levels, descending (surface first)
    data : dict of xarray.DataArray (time, level, y, x)
        height (gpm), u, v (m s-1, earth-relative), and where present omega
        (Pa s-1) and temperature (K).
    surface : dict of xarray.DataArray (time, y, x)
        Where present: msl, surface_pressure (Pa), surface_height (m), u10, v10
        (m s-1), t2m (K), land_mask (fraction of land, 0..1).
    notes : list of str
        What was done to the data (member chosen, winds rotated, levels masked).
    below_ground : dict
        Pressure level (hPa) -> number of points masked as below the ground
        (summed over times).
    attrs : dict
        The file's global attributes.
    """

    name: str
    title: str
    paths: list
    grid: Grid
    times: np.ndarray
    levels_pa: np.ndarray
    data: dict
    surface: dict
    notes: list
    below_ground: dict
    attrs: dict
    #: role -> where the field came from (variable, level type, GRIB keys, units)
    sources: dict = dataclasses.field(default_factory=dict)
    #: reference (run) time of each valid time, datetime64[ns], NaT where unknown
    reference_times: np.ndarray | None = None
    #: optional fields found but left out, role -> the sentence saying why
    dropped: dict = dataclasses.field(default_factory=dict)
    #: the surface field that masks levels below the ground ("surface_pressure",
    #: "surface_height") or None
    ground_field: str | None = None
    #: lazy bool DataArray (time, level, y, x): True below the ground, or None
    below: Any = None
    #: how many ensemble members the files hold (1 without a member dimension)
    member_count: int = 1
    #: the member read (an index or "mean"); None for files without members
    member: Any = None
    #: the surface analyses of the valid times asked for last (:meth:`surface_analysis`),
    #: oldest first; a copy of the case (dataclasses.replace) starts with none
    _surface_memo: dict = dataclasses.field(
        default_factory=dict, init=False, repr=False, compare=False
    )
    #: how many valid times' surface analyses a case keeps
    SURFACE_MEMO_TIMES = 2

    # -- what the data can give ----------------------------------------------------
    @property
    def invented(self) -> bool:
        """Is the case invented demo data (an own scenario, not weather that happened)? The
        sample cases say so in their ``geography`` ("invented ...") or ``source``
        ("synthetic ..."/"invented ...") attribute."""
        geo = str(self.attrs.get("geography", "")).lower()
        src = str(self.attrs.get("source", "")).lower()
        return "invented" in geo or "synthetic" in src or "invented" in src

    @property
    def missing(self) -> list:
        """Optional pressure-level variables the case lacks."""
        return [r for r in OPTIONAL if r not in self.data]

    def unavailable_terms(self) -> dict:
        """Budget terms the data cannot give, with the reason."""
        out = {}
        if self.times.size < 2:
            out["tendency"] = "one time only, so no local tendency"
        if "omega" not in self.data:
            for t in ("vertical_advection", "metric_uw", "coriolis_w"):
                out[t] = "no vertical motion (omega) in the data"
        elif self.levels_pa.size < 2:
            out["vertical_advection"] = "one pressure level only, so no vertical derivative"
        return out

    # -- choosing a level and a time -------------------------------------------------
    def level_index(self, hpa: float) -> int:
        hits = np.nonzero(np.isclose(self.levels_pa, float(hpa) * 100.0, rtol=0, atol=1.0))[0]
        if hits.size == 0:
            have = ", ".join(f"{p / 100:g}" for p in self.levels_pa)
            raise CaseError(
                f"has no {float(hpa):g} hPa level (levels: {have} hPa)",
                self.paths[0] if self.paths else None,
            )
        return int(hits[0])

    def time_index(self, spec) -> int:
        """The index of a valid time given as an index (int or digits) or an ISO 8601 time."""
        n = self.times.size
        if spec is None:
            return 0
        text = str(spec).strip()
        digits = text[1:] if text[:1] in "+-" else text
        if digits.isascii() and digits.isdigit():
            i = int(text)
            if not -n <= i < n:
                raise CaseError(
                    f"time index {i} is outside the {n} valid times (0..{n - 1})",
                    self.paths[0] if self.paths else None,
                )
            return i % n
        t = parse_time(text)
        if t is None:
            raise CaseError(
                f"time {text!r} is neither an index nor an ISO 8601 time",
                self.paths[0] if self.paths else None,
            )
        hits = np.nonzero(self.times == t)[0]
        if hits.size == 0:
            first, last = iso(self.times[0]), iso(self.times[-1])
            raise CaseError(
                f"time {iso(t)} is not one of the {n} valid times ({first} to {last})",
                self.paths[0] if self.paths else None,
            )
        return int(hits[0])

    # -- arrays for the core -----------------------------------------------------------
    def fields(self, time_index: int, level_index: int, smooth_km: float | None = None):
        """The core's :class:`~balance_core.budget.Fields` around one time and level.

        Returns ``(fields, it, ik)``: the fields hold the neighbouring times and
        levels the tendency and vertical derivatives need, as float64 numpy
        arrays, and (it, ik) locate the requested time and level inside them.
        """
        if "u" not in self.data or "v" not in self.data:
            raise CaseError(
                "has no eastward and northward wind on pressure levels, so the "
                "momentum budget cannot be computed (the height alone gives only the "
                "geostrophic wind)",
                self.paths[0] if self.paths else None,
            )
        if smooth_km:
            extent = self.extent_km()
            if not smooth_km <= extent:
                raise CaseError(
                    f"a smoothing length of {smooth_km:g} km exceeds the size of the "
                    f"domain (about {extent:.0f} km); give at most that",
                    self.paths[0] if self.paths else None,
                )
        nt, nk = self.times.size, self.levels_pa.size
        t0, t1 = _window(time_index, nt)
        k0, k1 = _window(level_index, nk)
        sel = dict(time=slice(t0, t1), level=slice(k0, k1))

        def load(role):
            if role not in self.data:
                return None
            return np.asarray(to_numpy(self.data[role].isel(sel)), dtype=np.float64)

        arrays = {r: load(r) for r in ("u", "v", "height", "omega", "temperature")}
        reasons = self._check_window(arrays, self.levels_pa[k0:k1])
        # a neighbouring time with no data at this level would spoil the tendency of every
        # point: leave it out of the window (and with it, perhaps, the tendency)
        ik_w = level_index - k0
        empty = [
            i
            for i in range(t1 - t0)
            if i != time_index - t0
            and not any(np.isfinite(arrays[r][i, ik_w]).any() for r in ("u", "v", "height"))
        ]
        if empty:
            keep = [i for i in range(t1 - t0) if i not in empty]
            gone = ", ".join(iso(self.times[t0 + i]) for i in empty)
            arrays = {r: None if a is None else a[keep] for r, a in arrays.items()}
            times_kept = self.times[t0:t1][keep]
            it_new = keep.index(time_index - t0)
            if len(keep) == 1:
                reasons["tendency"] = (
                    f"the neighbouring valid time {gone} holds no data at "
                    f"{self.levels_pa[level_index] / 100:g} hPa, so no "
                    "local tendency"
                )
        else:
            times_kept = self.times[t0:t1]
            it_new = time_index - t0
        for r in ("omega", "temperature"):
            a = arrays[r]
            if (
                r not in reasons
                and a is not None
                and not np.isfinite(a[it_new, level_index - k0]).any()
            ):
                arrays[r] = None  # a variable the file does not give at this level or time
                reasons[r] = (
                    f"{r} is not given at {self.levels_pa[level_index] / 100:g} hPa, "
                    f"{iso(self.times[time_index])}"
                )
        if smooth_km:
            from ..smoothing import smooth

            arrays = {
                r: None if a is None else smooth(self.grid, a, smooth_km) for r, a in arrays.items()
            }
        secs = (times_kept - self.times[0]) / np.timedelta64(1, "s")
        f = Fields(
            arrays["u"],
            arrays["v"],
            arrays["height"],
            self.levels_pa[k0:k1],
            secs.astype(np.float64) if times_kept.size > 1 else None,
            arrays["omega"],
            arrays["temperature"],
            reasons=reasons,
        )
        return f, it_new, level_index - k0

    def extent_km(self) -> float:
        """The size of the domain: the square root of its area, km."""
        return float(np.sqrt(np.nansum(self.grid.cell_area))) / 1e3

    def _check_window(self, arrays, levels) -> dict:
        """The physical checks of :mod:`.checks` on the slab the core is about to use.

        The case was checked at its first time when it was opened; a later time
        or level can still be bad (a missing Zarr chunk filled with zeros, a
        corrupted field). A required field that fails is bad input (CaseError);
        an optional one is left out of this budget, and the reason returned.
        """
        from .checks import height_problem, range_problem

        reasons = {}
        path = self.paths[0] if self.paths else None
        for role, a in list(arrays.items()):
            if a is None:
                continue
            problem = range_problem(role, a, ROLES[role].target_units)
            if problem is None and role == "height":
                for t in range(a.shape[0]):
                    problem = height_problem(a[t], levels)
                    if problem:
                        break
            if problem is None:
                continue
            var = self.sources.get(role, {}).get("variable", role)
            if role in REQUIRED_ROLES:
                raise CaseError(problem, path, var)
            arrays[role] = None
            reasons[role] = f"{ROLES[role].words} left out here: {problem}"
        return reasons

    def surface_analysis(self, time_index: int):
        """Surface geostrophic wind and the direct evidence of friction, or None.

        From sea-level pressure and the 10 m wind: the geostrophic wind
        ug = -(1/(rho f)) dp/dy, vg = (1/(rho f)) dp/dx with rho = p / (R_d T)
        from the 2 m temperature (or the standard-atmosphere density at sea level
        when there is none), the cross-isobar angle (degrees, positive when the
        wind turns toward low pressure, in both hemispheres) and |V| / |Vg|.

        Kept for the last :attr:`SURFACE_MEMO_TIMES` valid times (every region's report of
        a time asks for it: read afresh, it was 70 % of a region's report on a sample); its
        arrays are read-only.
        """
        if "msl" not in self.surface or "u10" not in self.surface or "v10" not in self.surface:
            return None
        memo = self._surface_memo
        if time_index in memo:
            return memo[time_index]
        out = self._surface_analysis(time_index)
        for a in out.values():
            if isinstance(a, np.ndarray):
                a.setflags(write=False)
        memo[time_index] = out
        while len(memo) > self.SURFACE_MEMO_TIMES:
            memo.pop(next(iter(memo)), None)
        return out

    def _surface_analysis(self, time_index: int) -> dict:
        """:meth:`surface_analysis`, computed."""
        from ..surface import density_from
        from ..winds import geostrophic_wind_from_pressure

        p = np.asarray(to_numpy(self.surface["msl"].isel(time=time_index)), dtype=np.float64)
        u = np.asarray(to_numpy(self.surface["u10"].isel(time=time_index)), dtype=np.float64)
        v = np.asarray(to_numpy(self.surface["v10"].isel(time=time_index)), dtype=np.float64)
        t2m = None
        if "t2m" in self.surface:
            t2m = np.asarray(to_numpy(self.surface["t2m"].isel(time=time_index)), np.float64)
        rho, source = density_from(p, t2m)
        ug, vg = geostrophic_wind_from_pressure(self.grid, p, rho)
        cross = ug * v - vg * u
        dot = ug * u + vg * v
        angle = np.sign(self.grid.f) * np.degrees(np.arctan2(cross, dot))
        angle[~(np.hypot(ug, vg) > 1e-3) | ~(np.hypot(u, v) > 1e-3)] = np.nan  # no direction
        with np.errstate(invalid="ignore", divide="ignore"):
            ratio = np.hypot(u, v) / np.hypot(ug, vg)
        return {
            "u": u,
            "v": v,
            "ug": ug,
            "vg": vg,
            "cross_isobar_angle": angle,
            "speed_ratio": ratio,
            "density_source": source,
        }

    # -- the surface ---------------------------------------------------------------------
    @property
    def has_sea_level(self) -> bool:
        """Does the case carry mean sea level pressure (surface systems)?"""
        return "msl" in self.surface

    @property
    def has_surface_wind(self) -> bool:
        """Does the case carry the 10 m wind (the surface budget)?"""
        return "u10" in self.surface and "v10" in self.surface

    def sea_level_pressure(self, time_index: int):
        """Mean sea level pressure at one time, Pa, float64 (ny, nx)."""
        if not self.has_sea_level:
            raise CaseError(
                "has no mean sea level pressure, so nothing can be said at sea level",
                self.paths[0] if self.paths else None,
            )
        return np.asarray(to_numpy(self.surface["msl"].isel(time=time_index)), np.float64)

    def surface_fields(self, time_index: int) -> dict:
        """What the surface budget needs around one valid time.

        Returns ``pressure``, ``u``, ``v`` (the time and its neighbours, (nt, ny, nx), Pa
        and m s-1), ``it`` (the time within them), ``time`` (seconds, or None with one
        time), ``t2m`` (K, or None) and ``elevation`` (the ground's height, m, or None) at
        the time.
        """
        if not (self.has_sea_level and self.has_surface_wind):
            lacks = [
                w
                for w, ok in (
                    ("mean sea level pressure", self.has_sea_level),
                    ("the 10 m wind", self.has_surface_wind),
                )
                if not ok
            ]
            raise CaseError(
                f"has no {' and no '.join(lacks)}, so there is no surface budget at sea level",
                self.paths[0] if self.paths else None,
            )
        t0, t1 = _window(time_index, self.times.size)

        def load(role, sl):
            return np.asarray(to_numpy(self.surface[role].isel(time=sl)), np.float64)

        sl = slice(t0, t1)
        out = {
            "pressure": load("msl", sl),
            "u": load("u10", sl),
            "v": load("v10", sl),
            "it": time_index - t0,
            "time": None,
            "t2m": None,
            "elevation": None,
        }
        if t1 - t0 > 1:
            out["time"] = ((self.times[t0:t1] - self.times[0]) / np.timedelta64(1, "s")).astype(
                np.float64
            )
        if "t2m" in self.surface:
            out["t2m"] = load("t2m", time_index)
        if "surface_height" in self.surface:
            out["elevation"] = load("surface_height", time_index)
        return out

    def runs_note(self, time_indices) -> str | None:
        """A sentence when these valid times come from more than one model run, else None:
        a tendency or a track across them mixes runs, not one model's evolution."""
        if self.reference_times is None:
            return None
        refs = {
            iso(r) for r in np.asarray(self.reference_times)[list(time_indices)] if not np.isnat(r)
        }
        if len(refs) < 2:
            return None
        listed = ", ".join(sorted(refs)[:4]) + (" and others" if len(refs) > 4 else "")
        return (
            f"these valid times come from {len(refs)} model runs ({listed}): differences "
            "and tracks across them join different runs, not one model's evolution"
        )

    def time_window(self, time_index: int) -> range:
        """The valid times a budget at this time reads (the time and its neighbours)."""
        return range(*_window(time_index, self.times.size))

    def height_above_ground(self, time_index: int, level_index: int):
        """(height of the level above the ground in m, or None; how it was found).

        From the orography, Z - z_s; else from the surface pressure through the
        hypsometric relation (R_d T / g0) ln(p_s / p), T the level's temperature
        (or the standard atmosphere's); negative below the ground.
        """
        p = float(self.levels_pa[level_index])
        if "surface_height" in self.surface:
            z = to_numpy(self.data["height"].isel(time=time_index, level=level_index))
            zs = to_numpy(self.surface["surface_height"].isel(time=time_index))
            return np.asarray(z, np.float64) - zs, "height minus orography"
        if "surface_pressure" in self.surface:
            from ..thermo import standard_atmosphere_temperature

            ps = np.asarray(
                to_numpy(self.surface["surface_pressure"].isel(time=time_index)), np.float64
            )
            t: Any
            if "temperature" in self.data:
                t = np.asarray(
                    to_numpy(self.data["temperature"].isel(time=time_index, level=level_index)),
                    np.float64,
                )
                how = "hypsometric, from the surface pressure and the level's temperature"
            else:
                t = float(standard_atmosphere_temperature(p))
                how = "hypsometric, from the surface pressure and the standard atmosphere"
            with np.errstate(invalid="ignore", divide="ignore"):
                return C.R_DRY * t / C.G0 * np.log(ps / p), how
        return None, ""

    def below_ground_mask(self, time_index: int, level_index: int):
        """Points where the level lies below the ground (bool), or None without a surface field."""
        if self.below is None:
            return None
        return np.asarray(to_numpy(self.below.isel(time=time_index, level=level_index)), dtype=bool)

    def column(self, role: str, time_index: int):
        """All levels of one variable at one time, float64 (level, y, x)."""
        return np.asarray(to_numpy(self.data[role].isel(time=time_index)), dtype=np.float64)

    def rows(self, j0: int, j1: int) -> Case:
        """The case on rows j0..j1-1 of its grid (a band of latitude, or a strip of y).

        Every field is sliced lazily, so only the band is read, and the grid is
        :meth:`Grid.rows`: the derivatives of the band's inner rows are those of the
        whole case, bit for bit, and its first and last rows are one-sided, so the
        caller keeps a halo of rows beyond what it reduces. The checks of
        :meth:`fields` then look at the band alone. What was counted when the case was
        opened (the points below the ground, the notes) stays the whole case's.
        """
        sl = {"y": slice(int(j0), int(j1))}
        return dataclasses.replace(
            self,
            grid=self.grid.rows(int(j0), int(j1)),
            data={r: d.isel(sl) for r, d in self.data.items()},
            surface={r: d.isel(sl) for r, d in self.surface.items()},
            below=None if self.below is None else self.below.isel(sl),
        )

    def describe(self) -> dict:
        return {
            "name": self.name,
            "title": self.title,
            "levels_hpa": [float(p / 100) for p in self.levels_pa],
            "valid_times": [iso(t) for t in self.times],
            "grid": f"{self.grid.kind} {self.grid.shape[0]} x {self.grid.shape[1]}",
            "missing": self.missing,
            "notes": self.notes,
        }


def _window(i, n):
    """Indices [a, b) of i and its neighbours (three where possible)."""
    if n <= 3:
        return 0, n
    a = min(max(i - 1, 0), n - 3)
    return a, a + 3


def parse_time(text: str):
    """datetime64[ns] (UTC) of an ISO 8601 time, with or without a zone offset; None if not one."""
    import datetime as dt

    t = str(text).strip()
    if not t or not t.isascii() or len(t) > 40:
        return None
    try:
        when = dt.datetime.fromisoformat(t[:-1] + "+00:00" if t.endswith(("Z", "z")) else t)
    except ValueError:
        return None
    if when.tzinfo is not None:
        when = when.astimezone(dt.UTC).replace(tzinfo=None)
    return np.datetime64(when, "ns")


def iso(t) -> str:
    """ISO 8601 text of a datetime64 (UTC, seconds)."""
    return np.datetime_as_string(np.datetime64(t, "s"), unit="s") + "Z"


# -- opening ------------------------------------------------------------------------


def open_case(
    paths,
    *,
    member=0,
    min_lat: float = 10.0,
    name: str | None = None,
    chunks=None,
    memory_budget=None,
) -> Case:
    """Open one file, several files (valid times concatenated) or a Zarr store.

    Parameters
    ----------
    paths : str or list of str
    member : int or "mean"
        Ensemble member to use where the file has a member dimension.
    min_lat : float
        Tropical mask of the Grid for quantities divided by f (degrees).
    memory_budget : int or str, optional
        Bytes one level may use (see :mod:`balance_core.io.limits`); a file
        whose level slice would need more is refused before it is read.

    Raises
    ------
    CaseError
        One sentence naming the file, the variable and what is wrong.
    """
    from .reader import normalise, open_datasets

    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    paths = [str(p) for p in paths]
    if not paths:
        raise CaseError("no files given")
    try:
        min_lat = float(min_lat)
    except (TypeError, ValueError):
        raise CaseError(f"the tropical mask latitude {min_lat!r} is not a number") from None
    if not 0.0 <= min_lat < 90.0:
        raise CaseError(
            f"the tropical mask latitude must lie from 0 to under 90 degrees, got {min_lat:g}"
        )
    from .limits import memory_budget as _budget

    budget = _budget(memory_budget)
    opened = [(p, open_datasets(p, budget=budget)) for p in paths]
    with _quiet_dask():
        pieces = [normalise(p, dss, member=member) for p, dss in opened]
        case = _assemble(pieces, min_lat=min_lat, name=name)
    if case.member_count > 1:
        case = dataclasses.replace(case, member=member)
    return case


def _quiet_dask():
    """Build lazy graphs without dask reaching for distributed (rechunk method, scheduler).

    Nothing to do when dask was never imported (small GRIB files are read without it).
    """
    import contextlib
    import sys

    if "dask" not in sys.modules:
        return contextlib.nullcontext()
    import dask
    import dask.local

    return dask.config.set({"array.rechunk.method": "tasks", "scheduler": dask.local.get_sync})


def _assemble(pieces, *, min_lat, name) -> Case:
    """One Case from the normalised pieces of one or more files, in named steps."""
    first = pieces[0]
    for pc in pieces[1:]:
        _same_grid(first, pc)
    notes = []
    for pc in pieces:
        notes.extend(_check_times(pc))
        notes.extend(_check_holes(pc))
    data, surface, fills = _join_pieces(pieces, notes)
    times, refs, order = _valid_times(pieces)
    if not np.all(order == np.arange(order.size)):
        data = {r: d.isel(time=order) for r, d in data.items()}
        surface = {r: d.isel(time=order) for r, d in surface.items()}
        fills = {r: f.map(lambda d: d.isel(time=order)) for r, f in fills.items()}
    for role in REQUIRED:
        if role not in data:
            label = {"u": "eastward wind (u)", "v": "northward wind (v)"}.get(role, role)
            raise CaseError(f"has no {label} on pressure levels", first.path)
    level_notes = _onto_height_levels(first, data, fills)
    notes = list(dict.fromkeys(n for pc in pieces for n in pc.notes)) + notes + level_notes
    dropped = {}
    for pc in pieces:
        dropped.update(pc.dropped)
    data, extra = _drop_cyclic_column(first, data, surface)
    grid_piece = first
    if extra:
        grid_piece = extra
        surface = {r: d.isel(x=slice(0, -1)) for r, d in surface.items()}
        fills = {r: f.map(lambda d: d.isel(x=slice(0, -1))) for r, f in fills.items()}
        notes.append("dropped the repeated (cyclic) last longitude column")
    grid = _build_grid(grid_piece, min_lat)
    sources = dict(first.sources)
    fill_notes, checked = _check_fields(fills, first.path, sources, first.levels_pa)
    notes.extend(fill_notes)
    for role, sentence in checked.items():
        dropped[role] = sentence
        data.pop(role, None)
        surface.pop(role, None)
    data, surface = _earth_relative(grid, first, data, surface, sources, notes)
    _omega_role(data, sources, notes, first.levels_pa)
    _check_winds(grid, data, first.path, sources, first.levels_pa)
    data, below, mask_notes, mask_dropped, ground_field, below_da = _mask_below_ground(
        data, surface, first.levels_pa
    )
    notes.extend(mask_notes)
    for role in mask_dropped:
        dropped[role] = mask_dropped[role]
        surface.pop(role, None)
    for role, sentence in dropped.items():
        sources.pop(role, None)
        notes.append(sentence)
    title = str(first.attrs.get("title") or os.path.basename(first.path))
    nm = name or os.path.splitext(os.path.basename(first.path.rstrip("/")))[0]
    return Case(
        name=nm,
        title=title,
        paths=[pc.path for pc in pieces],
        grid=grid,
        times=times,
        levels_pa=first.levels_pa,
        data=data,
        surface=surface,
        notes=notes,
        below_ground=below,
        attrs=first.attrs,
        sources=sources,
        reference_times=refs,
        dropped=dropped,
        ground_field=ground_field,
        below=below_da,
        member_count=max(pc.member_count for pc in pieces),
    )


def _join_pieces(pieces, notes) -> tuple[dict, dict, dict]:
    """The pressure-level, surface and fill fields of every piece, joined along time.

    A role the first file has and a later one lacks is refused when the budget needs it,
    else left out with a note.
    """
    import xarray as xr

    def joined(parts):
        return xr.concat(parts, dim="time") if len(parts) > 1 else parts[0]

    first = pieces[0]
    data = {}
    for role in first.data:
        parts = [pc.data.get(role) for pc in pieces]
        if any(p is None for p in parts):
            missing = pieces[[p is None for p in parts].index(True)].path
            if role in REQUIRED_ROLES:
                raise CaseError(f"lacks {ROLES[role].words}, which the first file has", missing)
            notes.append(f"{ROLES[role].words} left out: {os.path.basename(missing)} lacks it")
            continue
        data[role] = joined(parts)
    surface = {}
    for role in first.surface:
        parts = [pc.surface.get(role) for pc in pieces]
        if all(p is not None for p in parts):
            surface[role] = joined(parts)
    fills = {}
    for role in list(data) + list(surface):
        parts = [pc.fills.get(role) for pc in pieces]
        if all(p is not None for p in parts):
            fills[role] = (
                parts[0].map(lambda _, parts=parts: xr.concat([p.data for p in parts], dim="time"))
                if len(parts) > 1
                else parts[0]
            )
    return data, surface, fills


def _valid_times(pieces) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The valid and reference times of all pieces in time order, and that order.

    A valid time given twice is refused; when the two come from different model runs the
    message says so (runs are never differenced one into the other).
    """
    first = pieces[0]
    times = np.concatenate([pc.times for pc in pieces])
    refs = np.concatenate(
        [
            pc.reference_times
            if pc.reference_times is not None
            else np.full(pc.times.size, np.datetime64("NaT", "ns"))
            for pc in pieces
        ]
    )
    order = np.argsort(times, kind="stable")
    times, refs = times[order], refs[order]
    if np.unique(times).size != times.size:
        i = np.nonzero(np.diff(times) == np.timedelta64(0))[0][0]
        dup = times[i]
        runs = {iso(r) for r in refs[i : i + 2] if not np.isnat(r)}
        if len(runs) == 2:
            raise CaseError(
                f"valid time {iso(dup)} comes from two model runs "
                f"({', '.join(sorted(runs))}) across the files: runs are not "
                "differenced or tracked one into the other; open one run at a "
                "time",
                first.path,
            )
        raise CaseError(
            f"valid time {iso(dup)} appears more than once across the files", first.path
        )
    return times, refs, order


def _onto_height_levels(first, data, fills) -> list[str]:
    """Every pressure-level variable on the height's levels (in place); one that lacks some
    is missing there, and the notes say where. One that shares none is refused."""
    level_notes = []
    for role, da in list(data.items()):
        lv = np.asarray(da["level"].values)
        if lv.shape == first.levels_pa.shape and np.allclose(lv, first.levels_pa):
            continue
        absent = [p for p in first.levels_pa if not np.any(np.isclose(lv, p, atol=1.0))]
        if len(absent) == first.levels_pa.size:
            raise CaseError(f"{role} shares no pressure level with the height", first.path, role)
        data[role] = da.reindex(level=first.levels_pa, method="nearest", tolerance=1.0)
        fills[role] = fills[role].map(
            lambda d: d.reindex(level=first.levels_pa, method="nearest", tolerance=1.0)
        )
        if absent:
            level_notes.append(
                f"{role} is not given at " + ", ".join(f"{p / 100:g}" for p in absent) + " hPa"
            )
    return level_notes


def _earth_relative(grid, first, data, surface, sources, notes) -> tuple[dict, dict]:
    """Winds as eastward and northward: grid-relative ones rotated by the meridian
    convergence, the sources renamed to u, v (u10, v10) and told so."""
    if first.grid_relative:
        data = _rotate_winds(grid, data, "x_wind", "y_wind", "u", "v")
        notes.append("grid-relative winds rotated to east and north with the meridian convergence")
    elif first.crs is not None:
        notes.append("winds taken as earth-relative (eastward/northward) on the projected grid")
    if "x_wind10" in surface and "y_wind10" in surface:
        surface = _rotate_winds(grid, surface, "x_wind10", "y_wind10", "u10", "v10")
        notes.append(
            "grid-relative 10 m winds rotated to east and north with the meridian convergence"
        )
    for a, b in (("x_wind", "u"), ("y_wind", "v"), ("x_wind10", "u10"), ("y_wind10", "v10")):
        if a in sources:
            sources[b] = sources.pop(a)
            sources[b]["rotated"] = "grid-relative, rotated to east and north"
    surface.pop("x_wind10", None)
    surface.pop("y_wind10", None)
    for r in ("x_wind", "y_wind"):
        data.pop(r, None)
    return data, surface


def _omega_role(data, sources, notes, levels_pa) -> None:
    """Omega from w (omega = -rho g w) when the file gives only w; w itself goes (in place)."""
    if "omega" not in data and "w" in data:
        data["omega"] = _omega_from_w(data, levels_pa)
        notes.append("omega = -rho g w from the vertical velocity w")
        sources["omega"] = {**sources.pop("w"), "note": "omega = -rho g w"}
    data.pop("w", None)
    sources.pop("w", None)


def _check_times(pc) -> list:
    """Every field of a file must have the height's valid times (a cut file is reported)."""
    notes: list[str] = []
    for store in (pc.data, pc.surface):
        for role, da in list(store.items()):
            t = np.asarray(da["time"].values).astype("datetime64[ns]")
            if t.shape == pc.times.shape and np.all(t == pc.times):
                continue
            if role in ("orography", "surface_height", "land_mask") and np.all(np.isnat(t)):
                continue
            lack = [iso(x) for x in pc.times if x not in set(t)]
            extra = [iso(x) for x in t if x not in set(pc.times)]
            what = (
                f"lacks the valid time{'s' if len(lack) > 1 else ''} {', '.join(lack[:3])}"
                if lack
                else f"has valid times the height lacks ({', '.join(extra[:3])})"
            )
            msg = (
                f"{ROLES[role].words} {what} that the height has ({t.size} against "
                f"{pc.times.size}); the file may be cut at a message boundary"
            )
            if role in REQUIRED_ROLES:
                raise CaseError(msg, pc.path, pc.sources.get(role, {}).get("variable", role))
            store.pop(role)
            pc.fills.pop(role, None)
            pc.dropped[role] = f"{ROLES[role].words} left out: {msg}"
    return notes


def _check_holes(pc) -> list:
    """GRIB fields missing inside a variable's (time, level) hypercube: a cut or partial file."""
    notes = []
    for role, n in pc.holes.items():
        var = pc.sources.get(role, {}).get("variable", role)
        msg = (
            f"{n} of its GRIB fields are missing (some valid times lack some levels); the "
            "file may be cut at a message boundary"
        )
        if role in REQUIRED_ROLES:
            raise CaseError(msg, pc.path, var)
        notes.append(f"{ROLES[role].words}: {msg}; those fields are treated as missing")
    return notes


def _check_fields(fills, path, sources, levels) -> tuple:
    """Fill values and physical ranges at the first valid time (see :mod:`.checks`).

    Reads each field's raw values once (on up to six levels spread over the
    column, :func:`_sample_levels`), counts the producer fill values taken as
    missing, and checks the rest against the role's range (and heights against
    the standard atmosphere). A required field (height, winds) that fails is bad
    input (CaseError); an optional one is returned in ``dropped`` with its sentence.
    Returns (notes, dropped).
    """
    from .checks import fill_mask, height_problem, range_problem, to_si

    notes, dropped = [], {}
    for role, f in fills.items():
        raw, scale, offset, kind = f.data, f.scale, f.offset, f.role
        var = sources.get(role, {}).get("variable", role)
        first = raw.isel(time=0)
        nfill, which, problem, seen = 0, set(), None, False
        if "level" in first.dims:
            ks = _sample_levels(first.sizes["level"])
            first = first.isel(level=ks)
            slab = to_numpy(first) if first.size <= 2e7 else None  # one read if small
            for j, k in enumerate(ks):
                vals = np.asarray(
                    slab[j] if slab is not None else to_numpy(first.isel(level=j)), np.float64
                )
                seen = seen or bool(np.isfinite(vals).any())
                hit = fill_mask(vals, kind, scale, offset)
                nfill += int(np.count_nonzero(hit))
                which.update(np.unique(vals[hit]).tolist())
                si = to_si(vals, kind, scale, offset)
                problem = range_problem(kind, si, ROLES[kind].target_units)
                if problem is None and kind in ("height", "geopotential"):
                    z = si / C.G0 if kind == "geopotential" else si
                    problem = height_problem(z[None], levels[k : k + 1])
                elif problem is not None:
                    problem = f"at {levels[k] / 100:g} hPa, {problem}"
                if problem:
                    break
        else:
            vals = np.asarray(to_numpy(first), np.float64)
            seen = bool(np.isfinite(vals).any())
            hit = fill_mask(vals, kind, scale, offset)
            nfill, which = int(np.count_nonzero(hit)), set(np.unique(vals[hit]).tolist())
            problem = range_problem(
                kind, to_si(vals, kind, scale, offset), ROLES[kind].target_units
            )
        if role in REQUIRED_ROLES and not seen and not _any_valid(raw):
            raise CaseError("holds no valid values at any time (all missing)", path, var)
        if nfill:
            w = sorted(which)
            notes.append(
                f"{var!r}: {nfill} values at the first valid time equal the producer "
                f"fill value{'s' if len(w) > 1 else ''} "
                f"{', '.join(f'{x:g}' for x in w[:4])} and are treated as missing"
            )
        if problem is None:
            continue
        if role in REQUIRED_ROLES:
            raise CaseError(problem, path, var)
        dropped[role] = f"{ROLES[role].words} ({var!r}) left out: {problem}"
    return notes, dropped


def _sample_levels(n: int, most: int = 6) -> list:
    """Up to ``most`` level indices spread over a column, the bottom and the top included.

    The opening check looks at these; every slab the core reads later is checked
    in full (:meth:`Case._check_window`), so a bad level is still caught.
    """
    if n <= most:
        return list(range(n))
    return sorted({int(round(x)) for x in np.linspace(0, n - 1, most)})


def _any_valid(da) -> bool:
    """True if the field has a finite value at some time (looks at times one by one)."""
    for t in range(da.sizes["time"]):
        if bool(np.isfinite(np.asarray(to_numpy(da.isel(time=t)))).any()):
            return True
    return False


def _check_winds(grid, data, path, sources, levels):
    """The wind must be about as fast as the geostrophic wind (catches knots read as m s-1)."""
    from .checks import wind_speed_problem

    ratio = _free_atmosphere_speed_ratio(grid, data, levels)
    problem = wind_speed_problem(ratio)
    if problem:
        raise CaseError(problem, path, sources.get("u", {}).get("variable", "u"))


def _free_atmosphere_speed_ratio(grid, data, levels):
    """Median |V| / |Vg| at the first time on up to three levels between 700 and 200 hPa.

    Only points at least 20 degrees from the equator, off the pole rows, with a
    geostrophic wind of at least 5 m s-1; None when fewer than 50 such points, or
    the domain is under 1000 km across (too small for the geostrophic wind to say
    anything about units).
    """
    from ..winds import geostrophic_wind

    if "u" not in data or "v" not in data:
        return None
    span = float(np.sqrt(np.nansum(grid.cell_area)))
    if span < 1.0e6:
        return None
    free = [k for k, p in enumerate(levels) if 20000.0 <= p <= 70000.0]
    free = sorted(free, key=lambda k: abs(levels[k] - 50000.0))[:3]
    ok_lat = (np.abs(grid.lat) >= 20.0) & ~grid.pole_mask
    ratios = []
    for k in free:
        z = np.asarray(to_numpy(data["height"].isel(time=0, level=k)), np.float64)
        u = np.asarray(to_numpy(data["u"].isel(time=0, level=k)), np.float64)
        v = np.asarray(to_numpy(data["v"].isel(time=0, level=k)), np.float64)
        ug, vg = geostrophic_wind(grid, z)
        vg_speed = np.hypot(ug, vg)
        ok = ok_lat & np.isfinite(vg_speed) & np.isfinite(u) & np.isfinite(v) & (vg_speed >= 5.0)
        if np.count_nonzero(ok) >= 50:
            ratios.append(np.hypot(u, v)[ok] / vg_speed[ok])
    if not ratios:
        return None
    return float(np.median(np.concatenate(ratios)))


def _same_grid(a, b):
    def close(p, q):
        return (
            p is not None
            and q is not None
            and np.shape(p) == np.shape(q)
            and np.allclose(p, q, atol=1e-6)
        )

    if not (close(a.lat, b.lat) and close(a.lon, b.lon)):
        raise CaseError(
            f"has another grid than {os.path.basename(a.path)} (latitudes or longitudes differ)",
            b.path,
        )
    if a.levels_pa.shape != b.levels_pa.shape or not np.allclose(a.levels_pa, b.levels_pa):
        raise CaseError(f"has other pressure levels than {os.path.basename(a.path)}", b.path)


def _build_grid(pc, min_lat) -> Grid:
    try:
        if pc.crs is None:
            return Grid.latlon(pc.lat, pc.lon, min_lat=min_lat)
        return Grid.projected(pc.x, pc.y, pc.crs, min_lat=min_lat)
    except ValueError as exc:
        var = "latitude/longitude" if pc.crs is None else "x/y"
        raise CaseError(str(exc), pc.path, var) from None


def _drop_cyclic_column(pc, data, surface):
    """Drop a repeated last longitude column (lon[-1] = lon[0] + 360) of a global grid."""
    if pc.crs is not None or pc.lon.size < 3:
        return data, None
    span = abs(np.rad2deg(np.unwrap(np.deg2rad(pc.lon)))[-1] - pc.lon[0])
    if abs(span - 360.0) > 1e-6:
        return data, None
    trimmed = dataclasses.replace(pc, lon=pc.lon[:-1])
    return {r: d.isel(x=slice(0, -1)) for r, d in data.items()}, trimmed


def _rotate_winds(grid: Grid, store, xname, yname, uname, vname):
    """Earth-relative (u, v) from grid-relative (x, y) components.

    u_e = u_g cos(g) + v_g sin(g), v_n = -u_g sin(g) + v_g cos(g), g the angle of
    true north counter-clockwise from grid north (pyproj's meridian convergence).
    """
    g = np.deg2rad(grid.convergence)
    cg, sg = np.cos(g), np.sin(g)
    ux = store.pop(xname, store.get(uname))
    vy = store.pop(yname, store.get(vname))
    store[uname] = ux * cg + vy * sg
    store[vname] = -ux * sg + vy * cg
    return store


def _omega_from_w(data, levels):
    from ..thermo import standard_atmosphere_density

    w = data["w"]
    p = w["level"]
    if "temperature" in data:
        rho = p / (C.R_DRY * data["temperature"])
    else:
        rho = standard_atmosphere_density(p.values)[None, :, None, None]
    return -(rho * C.G0) * w


#: A masking field that puts more than this share of a level at or above 400 hPa below the
#: ground is not a surface field (no ground on Earth is that high over a model grid box;
#: common practice, no source).
IMPLAUSIBLE_MASK_SHARE = 0.005


def _mask_below_ground(data, surface, levels):
    """NaN where a pressure level lies below the ground.

    Returns (data, counts per level in hPa summed over times, notes, dropped, the
    role of the masking field or None, the lazy mask): a masking field that would put high
    levels underground is dropped instead of used, and the share masked at each
    level is said in the notes.
    """
    dropped = {}
    for role in ("surface_pressure", "surface_height"):
        if role not in surface:
            continue
        below = _below(data, surface, role)
        first = below.isel(time=0)
        high = [k for k, p in enumerate(levels) if p <= 40000.0]
        if high:
            share = float(to_numpy(first.isel(level=high).mean()))
            if share > IMPLAUSIBLE_MASK_SHARE:
                dropped[role] = (
                    f"{'surface pressure' if role == 'surface_pressure' else 'orography'}"
                    f" left out: it would put {100 * share:.0f} % of the levels at "
                    "or above 400 hPa below the ground, which no real surface does"
                )
                continue
        break
    else:
        return data, {}, [], dropped, None, None
    below = below.transpose("time", "level", "y", "x")
    counts = to_numpy(below.sum(("time", "y", "x")))
    if not counts.any():
        return data, {}, [], dropped, role, below
    levels_hpa = data["height"]["level"].values
    data = {r: d.where(~below) for r, d in data.items()}
    per_level = to_numpy(below.mean(("time", "y", "x")))
    parts = [
        f"{p / 100:g} hPa {100 * s:.0f} %" if s >= 0.005 else f"{p / 100:g} hPa <1 %"
        for p, s in zip(levels_hpa, per_level)
        if s > 0
    ]
    src = "surface pressure" if role == "surface_pressure" else "orography"
    notes = [f"points below the ground ({src}) are masked: " + ", ".join(parts)]
    return (
        data,
        {float(p / 100): int(n) for p, n in zip(levels_hpa, counts) if n},
        notes,
        dropped,
        role,
        below,
    )


def _below(data, surface, role):
    if role == "surface_pressure":
        return data["height"]["level"] > surface["surface_pressure"] + 1.0
    return data["height"] < surface["surface_height"]
