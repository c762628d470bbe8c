"""A Case: one loaded set of model fields, normalised, with its Grid.

The fields are SI, earth-relative winds, dims (time, level, y, x) for the
pressure-level variables and (time, y, x) for surface ones, held lazily
(dask-backed xarray) until a budget needs them. The Case says what is missing
and therefore which budget terms are unavailable.
"""

from __future__ import annotations

import dataclasses
import os

import numpy as np

from .. import constants as C
from ..budget import Fields
from ..grid import Grid
from .errors import CaseError

__all__ = ["Case", "open_case", "REQUIRED", "OPTIONAL"]

REQUIRED = ("height",)
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

    # -- what the data can give ----------------------------------------------------
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
            raise CaseError(f"has no {float(hpa):g} hPa level (levels: {have} hPa)",
                            self.paths[0] if self.paths else None)
        return int(hits[0])

    def time_index(self, spec) -> int:
        """The index of a valid time given as an index (int or digits) or an ISO 8601 time."""
        n = self.times.size
        if spec is None:
            return 0
        text = str(spec).strip()
        if text.lstrip("-").isdigit():
            i = int(text)
            if not -n <= i < n:
                raise CaseError(f"time index {i} is outside the {n} valid times (0..{n - 1})",
                                self.paths[0] if self.paths else None)
            return i % n
        try:
            t = np.datetime64(text.replace("Z", ""), "ns")
        except ValueError:
            raise CaseError(f"time {text!r} is neither an index nor an ISO 8601 time",
                            self.paths[0] if self.paths else None) from None
        hits = np.nonzero(self.times == t)[0]
        if hits.size == 0:
            first, last = iso(self.times[0]), iso(self.times[-1])
            raise CaseError(f"time {iso(t)} is not one of the {n} valid times ({first} to {last})",
                            self.paths[0] if self.paths else None)
        return int(hits[0])

    # -- arrays for the core -----------------------------------------------------------
    def fields(self, time_index: int, level_index: int, smooth_km: float | None = None):
        """The core's :class:`~balance_core.budget.Fields` around one time and level.

        Returns ``(fields, it, ik)``: the fields hold the neighbouring times and
        levels the tendency and vertical derivatives need, as float64 numpy
        arrays, and (it, ik) locate the requested time and level inside them.
        """
        if "u" not in self.data or "v" not in self.data:
            raise CaseError("has no eastward and northward wind on pressure levels, so the "
                            "momentum budget cannot be computed (the height alone gives only the "
                            "geostrophic wind)", self.paths[0] if self.paths else None)
        nt, nk = self.times.size, self.levels_pa.size
        t0, t1 = _window(time_index, nt)
        k0, k1 = _window(level_index, nk)
        sel = dict(time=slice(t0, t1), level=slice(k0, k1))

        def load(role):
            if role not in self.data:
                return None
            return np.asarray(self.data[role].isel(sel).values, dtype=np.float64)

        arrays = {r: load(r) for r in ("u", "v", "height", "omega", "temperature")}
        reasons = {}
        for r in ("omega", "temperature"):
            a = arrays[r]
            if a is not None and not np.isfinite(a[time_index - t0, level_index - k0]).any():
                arrays[r] = None  # a variable the file does not give at this level or time
                reasons[r] = (f"{r} is not given at {self.levels_pa[level_index] / 100:g} hPa, "
                              f"{iso(self.times[time_index])}")
        if smooth_km:
            from ..smoothing import smooth

            arrays = {r: None if a is None else smooth(self.grid, a, smooth_km)
                      for r, a in arrays.items()}
        secs = (self.times[t0:t1] - self.times[0]) / np.timedelta64(1, "s")
        f = Fields(arrays["u"], arrays["v"], arrays["height"], self.levels_pa[k0:k1],
                   secs.astype(np.float64) if t1 - t0 > 1 else None, arrays["omega"],
                   arrays["temperature"], reasons=reasons)
        return f, time_index - t0, level_index - k0

    def surface_analysis(self, time_index: int):
        """Surface geostrophic wind and the direct evidence of friction, or None.

        From sea-level pressure and the 10 m wind: the geostrophic wind
        ug = -(1/(rho f)) dp/dy, vg = (1/(rho f)) dp/dx with rho = p / (R_d T)
        from the 2 m temperature (or the standard-atmosphere density at sea level
        when there is none), the cross-isobar angle (degrees, positive when the
        wind turns toward low pressure, in both hemispheres) and |V| / |Vg|.
        """
        if "msl" not in self.surface or "u10" not in self.surface or "v10" not in self.surface:
            return None
        from ..thermo import standard_atmosphere_density
        from ..winds import geostrophic_wind_from_pressure

        p = np.asarray(self.surface["msl"].isel(time=time_index).values, dtype=np.float64)
        u = np.asarray(self.surface["u10"].isel(time=time_index).values, dtype=np.float64)
        v = np.asarray(self.surface["v10"].isel(time=time_index).values, dtype=np.float64)
        if "t2m" in self.surface:
            rho = p / (C.R_DRY * np.asarray(self.surface["t2m"].isel(time=time_index).values))
            source = "density from the 2 m temperature"
        else:
            rho = float(standard_atmosphere_density(C.STD_SEA_LEVEL_PRESSURE))
            source = "standard-atmosphere density at sea level (no 2 m temperature)"
        ug, vg = geostrophic_wind_from_pressure(self.grid, p, rho)
        cross = ug * v - vg * u
        dot = ug * u + vg * v
        angle = np.sign(self.grid.f) * np.degrees(np.arctan2(cross, dot))
        angle[~(np.hypot(ug, vg) > 1e-3) | ~(np.hypot(u, v) > 1e-3)] = np.nan  # no direction
        with np.errstate(invalid="ignore", divide="ignore"):
            ratio = np.hypot(u, v) / np.hypot(ug, vg)
        return {"u": u, "v": v, "ug": ug, "vg": vg, "cross_isobar_angle": angle,
                "speed_ratio": ratio, "density_source": source}

    def column(self, role: str, time_index: int):
        """All levels of one variable at one time, float64 (level, y, x)."""
        return np.asarray(self.data[role].isel(time=time_index).values, dtype=np.float64)

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


def iso(t) -> str:
    """ISO 8601 text of a datetime64 (UTC, seconds)."""
    return np.datetime_as_string(np.datetime64(t, "s"), unit="s") + "Z"


# -- opening ------------------------------------------------------------------------

def open_case(paths, *, member=0, min_lat: float = 10.0, name: str | None = None,
              chunks=None) -> Case:
    """Open one file, several files (valid times concatenated) or a Zarr store.

    Parameters
    ----------
    paths : str or list of str
    member : int or "mean"
        Ensemble member to use where the file has a member dimension.
    min_lat : float
        Tropical mask of the Grid for quantities divided by f (degrees).

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
    pieces = [normalise(p, open_datasets(p), member=member) for p in paths]
    return _assemble(pieces, min_lat=min_lat, name=name)


def _assemble(pieces, *, min_lat, name) -> Case:
    import xarray as xr

    first = pieces[0]
    for pc in pieces[1:]:
        _same_grid(first, pc)
    data = {}
    for role in first.data:
        parts = [pc.data.get(role) for pc in pieces]
        if any(p is None for p in parts):
            missing = pieces[[p is None for p in parts].index(True)].path
            raise CaseError(f"lacks {role}, which the first file has", missing)
        data[role] = xr.concat(parts, dim="time") if len(parts) > 1 else parts[0]
    surface = {}
    for role in first.surface:
        parts = [pc.surface.get(role) for pc in pieces]
        if all(p is not None for p in parts):
            surface[role] = xr.concat(parts, dim="time") if len(parts) > 1 else parts[0]
    times = np.concatenate([pc.times for pc in pieces])
    order = np.argsort(times, kind="stable")
    times = times[order]
    if np.unique(times).size != times.size:
        dup = times[np.nonzero(np.diff(times) == np.timedelta64(0))[0][0]]
        raise CaseError(f"valid time {iso(dup)} appears more than once across the files",
                        first.path)
    if not np.all(order == np.arange(order.size)):
        data = {r: d.isel(time=order) for r, d in data.items()}
        surface = {r: d.isel(time=order) for r, d in surface.items()}
    for role in REQUIRED:
        if role not in data:
            label = {"u": "eastward wind (u)", "v": "northward wind (v)"}.get(role, role)
            raise CaseError(f"has no {label} on pressure levels", first.path)
    # every pressure-level variable on the height's levels; one that lacks some is missing there
    level_notes = []
    for role, da in list(data.items()):
        lv = np.asarray(da["level"].values)
        if lv.shape == first.levels_pa.shape and np.allclose(lv, first.levels_pa):
            continue
        absent = [p for p in first.levels_pa if not np.any(np.isclose(lv, p, atol=1.0))]
        if len(absent) == first.levels_pa.size:
            raise CaseError(f"{role} shares no pressure level with the height", first.path, role)
        data[role] = da.reindex(level=first.levels_pa, method="nearest", tolerance=1.0)
        if absent:
            level_notes.append(f"{role} is not given at " + ", ".join(f"{p / 100:g}" for p in absent)
                               + " hPa")
    grid = _build_grid(first, min_lat)
    notes = list(dict.fromkeys(n for pc in pieces for n in pc.notes)) + level_notes
    data, extra = _drop_cyclic_column(first, data, surface)
    if extra:
        grid = _build_grid(extra, min_lat)
        surface = {r: d.isel(x=slice(0, -1)) for r, d in surface.items()}
        notes.append("dropped the repeated (cyclic) last longitude column")
    if first.grid_relative:
        data = _rotate_winds(grid, data)
        notes.append("grid-relative winds rotated to east and north with the meridian "
                      "convergence")
    elif first.crs is not None:
        notes.append("winds taken as earth-relative (eastward/northward) on the projected grid")
    if "omega" not in data and "w" in data:
        data["omega"] = _omega_from_w(data, first.levels_pa)
        notes.append("omega = -rho g w from the vertical velocity w")
    data.pop("w", None)
    for r in ("x_wind", "y_wind"):
        data.pop(r, None)
    _check_values(data, surface, first.path)
    data, below = _mask_below_ground(data, surface)
    if below:
        total = sum(below.values())
        notes.append(f"{total} points below the ground masked (surface pressure or orography)")
    title = str(first.attrs.get("title") or os.path.basename(first.path))
    nm = name or os.path.splitext(os.path.basename(first.path.rstrip("/")))[0]
    return Case(name=nm, title=title, paths=[pc.path for pc in pieces], grid=grid,
                times=times, levels_pa=first.levels_pa, data=data, surface=surface, notes=notes,
                below_ground=below, attrs=first.attrs)


def _same_grid(a, b):
    def close(p, q):
        return p is not None and q is not None and np.shape(p) == np.shape(q) and \
            np.allclose(p, q, atol=1e-6)

    if not (close(a.lat, b.lat) and close(a.lon, b.lon)):
        raise CaseError(f"has another grid than {os.path.basename(a.path)} (latitudes or "
                        "longitudes differ)", b.path)
    if a.levels_pa.shape != b.levels_pa.shape or not np.allclose(a.levels_pa, b.levels_pa):
        raise CaseError(f"has other pressure levels than {os.path.basename(a.path)}", b.path)


def _build_grid(pc, min_lat) -> Grid:
    try:
        if pc.crs is None:
            return Grid.latlon(pc.lat, pc.lon, min_lat=min_lat)
        return Grid.projected(pc.x, pc.y, pc.crs, min_lat=min_lat)
    except ValueError as exc:
        if "cyclic point" in str(exc):
            raise
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


def _rotate_winds(grid: Grid, data):
    """Earth-relative (u, v) from grid-relative (x_wind, y_wind).

    u_e = u_g cos(g) + v_g sin(g), v_n = -u_g sin(g) + v_g cos(g), g the angle of
    true north counter-clockwise from grid north (pyproj's meridian convergence).
    """
    g = np.deg2rad(grid.convergence)
    cg, sg = np.cos(g), np.sin(g)
    ux = data.pop("x_wind", data.get("u"))
    vy = data.pop("y_wind", data.get("v"))
    data["u"] = ux * cg + vy * sg
    data["v"] = -ux * sg + vy * cg
    return data


def _omega_from_w(data, levels):
    from ..thermo import standard_atmosphere_density

    w = data["w"]
    p = w["level"]
    if "temperature" in data:
        rho = p / (C.R_DRY * data["temperature"])
    else:
        rho = standard_atmosphere_density(p.values)[None, :, None, None]
    return -(rho * C.G0) * w


def _check_values(data, surface, path):
    """All-missing fields and undeclared fill values, judged on the first valid time
    (reading one time keeps a large archive from being read whole)."""
    for role, da in list(data.items()) + list(surface.items()):
        vals = np.asarray(da.isel(time=0).values)
        finite = np.isfinite(vals)
        if not finite.any():
            raise CaseError("holds no valid values at the first time (all missing)", path, role)
        big = float(np.abs(vals[finite]).max())
        if big > 1e15:
            raise CaseError(f"holds values up to {big:.3g}: an undeclared fill value? (set "
                            "_FillValue or missing_value)", path, role)


def _mask_below_ground(data, surface):
    """NaN where a pressure level lies below the ground; counts per level (hPa)."""
    below = None
    if "surface_pressure" in surface:
        below = data["height"]["level"] > surface["surface_pressure"] + 1.0
    elif "surface_height" in surface:
        below = data["height"] < surface["surface_height"]
    if below is None:
        return data, {}
    below = below.transpose("time", "level", "y", "x")
    counts = below.sum(("time", "y", "x")).values
    if not counts.any():
        return data, {}
    levels = data["height"]["level"].values
    data = {r: d.where(~below) for r, d in data.items()}
    return data, {float(p / 100): int(n) for p, n in zip(levels, counts) if n}
