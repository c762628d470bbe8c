"""Open model output and normalise it: the xarray edge of the core.

``open_datasets`` opens one path (NetCDF through netCDF4, GRIB through eccodes
in :mod:`.grib`, a Zarr store) lazily; ``normalise`` finds the variables by
their kind of level and their names (see :mod:`balance_core.io.names`), keeps
the ones that share the height's grid, converts units, treats producer fill
values as missing, reduces an ensemble dimension, turns reference time plus
step into valid time, orders pressure levels, and returns arrays with dims
(time, level, y, x) or (time, y, x) plus what is needed to build the Grid and
where every field came from. Every problem becomes one :class:`CaseError`
sentence naming the file and the variable.
"""

from __future__ import annotations

import dataclasses
import os
import warnings
from typing import Any

import numpy as np

from .. import constants as C
from .checks import to_si
from .errors import CaseError
from .names import (
    ABOVE_GROUND,
    GRIB_LEVEL_KINDS,
    HEIGHT_COORD_NAMES,
    LAT_NAMES,
    LEVEL_ROLES,
    LON_NAMES,
    MEMBER_DIM_NAMES,
    OTHER,
    PRESSURE,
    PRESSURE_COORD_NAMES,
    REQUIRED_ROLES,
    ROLES,
    SINGLE,
    STANDARD_NAME_LEVELS,
    SURFACE_ROLES,
    TIME_NAMES,
    LevelKind,
    name_level_hint,
    preference,
    ruled_out,
)
from .units import _canonical, convert, dimensionality_matches, linear_conversion

__all__ = [
    "open_datasets",
    "normalise",
    "Piece",
    "sniff_format",
    "level_kind",
    "Candidate",
    "find_candidates",
]

#: Surface fields that do not change with time (may come without a time coordinate).
STATIC_ROLES = ("orography", "surface_height", "land_mask")
#: Roles whose short names are shared and decided by the units (w: omega or w; z: m or m2 s-2).
_UNIT_DECIDED = ("omega", "w", "height", "geopotential")


def sniff_format(path) -> str:
    """'netcdf', 'grib' or 'zarr', from the file's first bytes (or a Zarr store's layout)."""
    p = str(path)
    try:
        p.encode("utf-8")
    except UnicodeEncodeError:
        raise CaseError(
            "has a name that is not valid UTF-8, which the NetCDF and GRIB "
            "libraries cannot open; rename the file",
            p,
        ) from None
    if not os.path.exists(p):
        raise CaseError("no such file or directory", p)
    try:
        if os.path.isdir(p):
            names = set(os.listdir(p))
            if names & {".zgroup", ".zmetadata", "zarr.json", ".zattrs"}:
                return "zarr"
            raise CaseError("is a directory but not a Zarr store", p)
        if not os.path.isfile(p):  # a pipe, a device, a socket: opening it could wait for ever
            raise CaseError(
                "is not a regular file (a named pipe, a device or a socket); only files "
                "and Zarr folders are read",
                p,
            )
        with open(p, "rb") as fh:
            head = fh.read(16)
    except PermissionError:
        raise CaseError("cannot be read: permission denied", p) from None
    except OSError as exc:
        raise CaseError(f"cannot be read ({exc.strerror or type(exc).__name__})", p) from None
    if not head:
        raise CaseError("is empty", p)
    if head[:3] == b"CDF" or head[:4] == b"\x89HDF":
        return "netcdf"
    if b"GRIB" in head[:16]:
        return "grib"
    raise CaseError("is not a NetCDF, GRIB or Zarr file (unknown first bytes)", p)


def open_datasets(path, chunks=None, *, budget=None):
    """Open ``path`` lazily; a list of xarray Datasets (GRIB gives one per kind of level).

    The declared sizes are checked against the memory ``budget`` (bytes, see
    :mod:`.limits`) from the file's metadata before any data is read.
    """
    import xarray as xr

    from .limits import check_declared, memory_budget

    kind = sniff_format(path)
    budget = memory_budget() if budget is None else budget
    chunks = {} if chunks is None else chunks
    if kind == "grib":
        from .grib import open_grib

        return open_grib(path, budget=budget)
    check_declared(path, kind, budget)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if kind == "netcdf":
                engine = "netcdf4"
                with open(path, "rb") as fh:
                    if fh.read(4) == b"\x89HDF":
                        engine = _hdf_engine()
                return [xr.open_dataset(path, engine=engine, chunks=chunks, decode_timedelta=True)]
            ds = xr.open_zarr(path, decode_timedelta=True)
            for var in ds.variables.values():  # as open_dataset does: a damaged chunk's
                var.encoding.setdefault("source", str(path))  # sentence names the store
            return [ds]
    except CaseError:
        raise
    except Exception as exc:  # noqa: BLE001 - every library error becomes one sentence
        detail = str(exc).splitlines()[0][:160] if str(exc) else type(exc).__name__
        raise CaseError(
            f"cannot be read as {kind.upper() if kind != 'zarr' else 'Zarr'}: "
            f"damaged or truncated ({detail})",
            path,
        ) from None


def _hdf_engine():
    try:
        import netCDF4  # noqa: F401

        return "netcdf4"
    except ImportError:
        return "h5netcdf"


# -- the kind of level --------------------------------------------------------------


def _attr(da, key):
    v = da.attrs.get(key)
    return None if v is None else str(v)


def _has_level_dim(da, ds) -> str | None:
    for d in da.dims:
        if _is_pressure_coord(d, ds):
            return d
    return None


def _is_pressure_coord(name, ds) -> bool:
    if name not in ds.coords and name not in ds.variables:
        return name.lower() in PRESSURE_COORD_NAMES
    c = ds[name]
    std = (c.attrs.get("standard_name") or "").lower()
    if std == "air_pressure":
        return True
    if name.lower() in PRESSURE_COORD_NAMES:
        units = c.attrs.get("units")
        if units is None:
            return name.lower() in (
                "isobaricinhpa",
                "isobaricinpa",
                "plev",
                "pressure",
                "pressure_level",
            )
        return dimensionality_matches(units, "Pa")
    return False


def _is_vertical(name, var) -> bool:
    std = str(var.attrs.get("standard_name") or "").lower()
    axis = str(var.attrs.get("axis") or "").upper()
    positive = str(var.attrs.get("positive") or "").lower()
    return (
        name.lower() in HEIGHT_COORD_NAMES
        or std in ("height", "altitude", "depth", "model_level_number")
        or std.startswith(("atmosphere_", "ocean_"))
        or axis == "Z"
        or positive in ("up", "down")
    )


def _vertical_coords(da, ds):
    """Names of the non-pressure vertical coordinates of a variable (dims and scalars).

    xarray hands every scalar coordinate of a file to every variable, so a coordinate that
    is not one of the variable's dimensions counts where the variable's own CF
    ``coordinates`` attribute lists it (CF 1.11, section 5). Where that attribute lists
    no vertical coordinate, an inherited one counts only when it is the file's only one
    and the variable's standard name implies no level of its own: a file with 10 m winds
    and a 2 m temperature must not put its sea-level pressure at 10 m above the ground,
    and a file whose writer listed its one height coordinate elsewhere still has its
    10 m wind.
    """

    def var_of(c):
        return da.coords[c] if c in da.coords else ds[c]

    names = [
        c
        for c in dict.fromkeys(list(da.dims) + list(da.coords))
        if (c in ds.variables or c in da.coords) and _is_vertical(c, var_of(c))
    ]
    own = set(str(da.encoding.get("coordinates") or "").split())
    scalars = [c for c in names if c not in da.dims]
    listed = [c for c in scalars if c in own]
    if listed:
        keep = set(listed)
    else:
        std = str(da.attrs.get("standard_name") or "").lower()
        keep = set(scalars) if len(scalars) == 1 and std not in STANDARD_NAME_LEVELS else set()
    return [c for c in names if c in da.dims or c in keep]


def level_kind(name, da, ds) -> LevelKind:
    """The kind of level variable ``name`` lies on (see :mod:`balance_core.io.names`)."""
    tl = da.attrs.get("GRIB_typeOfLevel")
    if tl:
        kind = GRIB_LEVEL_KINDS.get(str(tl), OTHER)
        val = da.attrs.get("GRIB_level")
        return LevelKind(kind, None if kind == PRESSURE or val is None else float(val), str(tl))
    lev = _has_level_dim(da, ds)
    if lev is not None:
        return LevelKind(PRESSURE, None, lev)
    _, hint = name_level_hint(name)
    if hint is not None:
        return hint
    for c in _vertical_coords(da, ds):
        var = da.coords[c] if c in da.coords else ds[c]
        std = str(var.attrs.get("standard_name") or "").lower()
        if (c.lower() in HEIGHT_COORD_NAMES or std == "height") and var.size == 1:
            units = var.attrs.get("units", "m")
            try:
                value = float(convert(np.asarray(var.values, np.float64).ravel()[0], units, "m"))
            except (CaseError, TypeError, ValueError):
                value = None
            return LevelKind(ABOVE_GROUND, value, c)
        return LevelKind(OTHER, None, c)
    std = str(da.attrs.get("standard_name") or "").lower()
    if std in STANDARD_NAME_LEVELS:
        return LevelKind(STANDARD_NAME_LEVELS[std], None, "standard name")
    return LevelKind(SINGLE, None, "")


# -- recognising variables ----------------------------------------------------------


@dataclasses.dataclass
class Candidate:
    """A variable that could fill a role, with why and how well."""

    role: str
    name: str
    da: Any  # xarray.DataArray
    ds: Any  # xarray.Dataset
    level: LevelKind
    rank: tuple
    how: str  # "standard name", "short name" or "long name"

    def describe(self) -> str:
        grib = self.da.attrs.get("GRIB_shortName")
        extra = f", GRIB {grib}" if grib and grib != self.name else ""
        return f"{self.name!r} ({self.level.describe()}{extra})"


def _matches(name, da, ds, level):
    """(role, match rank, key, how) for every role the variable's names fit on its level."""
    std = (_attr(da, "standard_name") or "").lower()
    base, _ = name_level_hint(name)
    keys = [
        ("short name", base.lower()),
        ("short name", (_attr(da, "GRIB_shortName") or "").lower()),
        ("long name", (_attr(da, "long_name") or "").lower()),
    ]
    hits = []
    for role in LEVEL_ROLES + SURFACE_ROLES:
        if level.kind not in role.levels:
            continue
        if (
            level.kind == ABOVE_GROUND
            and role.above_ground is not None
            and (level.value is None or abs(level.value - role.above_ground) > 0.5)
        ):
            continue
        if std and std in role.standard_names:
            hits.append((role, 0, std, "standard name"))
            continue
        for _rank, (how, key) in enumerate(keys, start=1):
            field = role.short_names if how == "short name" else role.long_names
            if key and key in field:
                if key in role.ambiguous and level.kind != role.levels[0]:
                    break
                hits.append((role, 1 if how == "short name" else 2, key, how))
                break
    return hits


def _by_units(hits, units):
    """Keep the roles whose units fit; 'z' in metres is height, in m2 s-2 geopotential."""
    if len(hits) == 1 and hits[0][0].name not in _UNIT_DECIDED:
        return hits
    if units is None:
        return hits if len(hits) == 1 else []
    same = [h for h in hits if _canonical(units) == _canonical(h[0].target_units)]
    if same:
        return same  # the unit is already the role's: no registry needed
    kept = [h for h in hits if dimensionality_matches(units, h[0].target_units)]
    if (
        not kept
        and any(h[0].name == "geopotential" for h in hits)
        and dimensionality_matches(units, "m")
    ):
        g = next(h for h in hits if h[0].name == "geopotential")
        kept = [(ROLES["height"], g[1], g[2], g[3])]
    return kept


def find_candidates(datasets):
    """Every (role, variable) pair that fits, and sentences on the variables ruled out.

    Returns ``(candidates, ruled)``: candidates as a list of :class:`Candidate`
    in discovery order, ``ruled`` as {role: [sentence, ...]}.
    """
    cands, ruled = [], {}
    order = 0
    for ds in datasets:
        for name, da in ds.data_vars.items():
            level = level_kind(name, da, ds)
            hits = _matches(name, da, ds, level)
            if not hits:
                continue
            std_hits = [h for h in hits if h[1] == 0]
            hits = std_hits or _by_units(hits, _attr(da, "units"))
            for role, match, key, how in hits:
                why = ruled_out(role, da.attrs)
                if why:
                    ruled.setdefault(role.name, []).append(
                        f"{name!r} was not taken as {role.words}: {why}"
                    )
                    continue
                cands.append(
                    Candidate(
                        role.name,
                        name,
                        da,
                        ds,
                        level,
                        preference(match, role, key, level) + (order,),
                        how,
                    )
                )
                order += 1
    return cands, ruled


# -- one horizontal grid -----------------------------------------------------------


def _horizontal(c: Candidate, path):
    """(sizes, [(what, values)]) of a candidate's horizontal grid, for comparison."""
    y_dim, x_dim, kind = _spatial_dims(c.da, c.ds, path, c.name)
    sizes = (c.da.sizes[y_dim], c.da.sizes[x_dim])
    coords = []
    if kind == "latlon":
        coords = [
            ("latitudes", np.asarray(c.ds[y_dim].values, np.float64)),
            ("longitudes", np.asarray(c.ds[x_dim].values, np.float64) % 360.0),
        ]
    else:
        lat, lon = _find_latlon_2d(c.da, c.ds)
        if lat is None and "latitude" in c.da.coords and c.da["latitude"].ndim == 2:
            lat, lon = c.da["latitude"], c.da["longitude"]
        if lat is not None and lon is not None:
            coords = [
                ("latitudes", np.asarray(lat.values, np.float64)),
                ("longitudes", np.asarray(lon.values, np.float64) % 360.0),
            ]
        for d in (y_dim, x_dim):
            if d in c.ds.coords and c.ds[d].ndim == 1 and np.issubdtype(c.ds[d].dtype, np.number):
                coords.append((f"{d} coordinates", np.asarray(c.ds[d].values, np.float64)))
    return sizes, coords


def _grid_difference(ref, other) -> str | None:
    """None when two horizontal grids are the same, else what differs (one phrase)."""
    (rs, rc), (os_, oc) = ref, other
    if rs != os_:
        return f"its grid is {os_[0]} x {os_[1]} points, the height's {rs[0]} x {rs[1]}"
    theirs = dict(oc)
    for what, vals in rc:
        if what not in theirs:
            continue
        o = theirs[what]
        if o.shape != vals.shape:
            return f"its {what} have another shape"
        diff = np.abs(o - vals)
        if what == "longitudes":
            diff = np.minimum(diff, 360.0 - diff)
        if np.nanmax(diff, initial=0.0) > 1e-4 * (1.0 if "itudes" in what else 1e3):
            i = np.unravel_index(int(np.nanargmax(diff)), diff.shape)
            return (
                f"its {what} differ from the height's by up to {np.nanmax(diff):.4g} "
                f"({o[i]:.6g} against {vals[i]:.6g})"
            )
    return None


@dataclasses.dataclass(frozen=True)
class Raw:
    """A field as the file holds it, with the linear conversion to its role's SI unit."""

    data: Any  # xarray.DataArray, raw values
    scale: float
    offset: float
    role: str  # the role whose checks apply (geopotential, not height)

    def map(self, fn) -> Raw:
        return dataclasses.replace(self, data=fn(self.data))


@dataclasses.dataclass
class Piece:
    """One file's normalised variables and grid description."""

    path: str
    data: dict  # role -> xarray.DataArray (time, level, y, x) in SI units
    surface: dict  # role -> xarray.DataArray (time, y, x) in SI units
    lat: np.ndarray  # 1-D (lat-lon) or 2-D (projected)
    lon: np.ndarray
    crs: Any  # pyproj CRS for projected grids, or None
    x: np.ndarray | None
    y: np.ndarray | None
    levels_pa: np.ndarray
    times: np.ndarray  # datetime64[ns]
    grid_relative: bool
    notes: list
    attrs: dict
    #: role -> where it came from (variable, level type, GRIB keys, units converted from)
    sources: dict = dataclasses.field(default_factory=dict)
    #: optional roles left out, with the sentence saying why
    dropped: dict = dataclasses.field(default_factory=dict)
    #: datetime64[ns] reference (run) time of each valid time, NaT where unknown
    reference_times: np.ndarray | None = None
    #: how many ensemble members the file holds (1 without a member dimension)
    member_count: int = 1
    #: role -> Raw: the file's values, for the checks and the count of fill values
    fills: dict = dataclasses.field(default_factory=dict)
    #: role -> GRIB fields missing from its (member, time, level) hypercube
    holes: dict = dataclasses.field(default_factory=dict)


# -- normalising one variable -------------------------------------------------------


def _member_dim(da, ds):
    for d in da.dims:
        std = (ds[d].attrs.get("standard_name", "") if d in ds.coords else "").lower()
        if d.lower() in MEMBER_DIM_NAMES or std == "realization":
            return d
    return None


def _is_time_like(d, ds):
    if d not in ds.coords:
        return d.lower() in TIME_NAMES
    c = ds[d]
    if np.issubdtype(c.dtype, np.datetime64) or np.issubdtype(c.dtype, np.timedelta64):
        return np.issubdtype(c.dtype, np.datetime64)
    # named or labelled as time: undecodable values then get their own message
    return c.attrs.get("standard_name", "").lower() == "time" or d.lower() in TIME_NAMES


def _is_step_like(d, ds):
    return d in ds.coords and np.issubdtype(ds[d].dtype, np.timedelta64)


def _spatial_dims(da, ds, path, var):
    """(y_dim, x_dim, kind) where kind is 'latlon' or 'projected'."""
    dims = list(da.dims)
    lat_dim = lon_dim = None
    for d in dims:
        if d not in ds.coords:
            continue
        c = ds[d]
        std = c.attrs.get("standard_name", "").lower()
        units = c.attrs.get("units", "").lower()
        if (
            std == "latitude"
            or d.lower() in LAT_NAMES
            or units in ("degrees_north", "degree_north")
        ):
            lat_dim = d
        elif (
            std == "longitude" or d.lower() in LON_NAMES or units in ("degrees_east", "degree_east")
        ):
            lon_dim = d
    if lat_dim and lon_dim:
        return lat_dim, lon_dim, "latlon"
    flat = [
        d
        for d in dims
        if not (
            _is_time_like(d, ds)
            or _is_step_like(d, ds)
            or _is_pressure_coord(d, ds)
            or _member_dim_name(d, ds)
        )
    ]
    if len(flat) < 2:
        raise CaseError(
            "has no horizontal grid (it needs latitude and longitude, or x and y, "
            f"dimensions; its dimensions are {', '.join(map(str, dims)) or 'none'})",
            path,
            var,
        )
    return flat[-2], flat[-1], "projected"


def _member_dim_name(d, ds) -> bool:
    std = (ds[d].attrs.get("standard_name", "") if d in ds.coords else "").lower()
    return d.lower() in MEMBER_DIM_NAMES or std == "realization"


def _find_latlon_2d(da, ds):
    lat = lon = None
    names = list(da.coords) + (da.attrs.get("coordinates", "") or "").split()
    for n in names:
        if n not in ds.variables:
            continue
        c = ds[n]
        std = c.attrs.get("standard_name", "").lower()
        if c.ndim == 2 and (std == "latitude" or n.lower() in LAT_NAMES):
            lat = c
        elif c.ndim == 2 and (std == "longitude" or n.lower() in LON_NAMES):
            lon = c
    return lat, lon


def _valid_times(da, ds, path, var):
    """(DataArray with one 'time' dim of valid times, note) from time / step / valid_time."""
    time_dims = [d for d in da.dims if _is_time_like(d, ds)]
    step_dims = [d for d in da.dims if _is_step_like(d, ds)]
    note = None
    if len(time_dims) > 1:
        raise CaseError(f"has several time dimensions {time_dims}", path, var)
    if step_dims and len(step_dims) > 1:
        raise CaseError(f"has several forecast-step dimensions {step_dims}", path, var)
    if step_dims:
        sd = step_dims[0]
        if time_dims and da.sizes[time_dims[0]] > 1 and da.sizes[sd] > 1:
            da = da.stack(_vt=(time_dims[0], sd))
            ref = da[time_dims[0]].values
            step = da[sd].values
            valid = ref + step
            da = da.drop_vars(["_vt", time_dims[0], sd], errors="ignore")
            da = da.assign_coords(_vt=("_vt", valid), reference_time=("_vt", ref)).rename(
                {"_vt": "time"}
            )
            note = "valid time = reference time + step, over several forecasts"
        else:
            if time_dims:
                da = da.isel({time_dims[0]: 0})
            ref = _scalar_time(da, ds, path, var)
            if ref is None:
                raise CaseError(f"has forecast steps ({sd}) but no reference time", path, var)
            valid = ref + da[sd].values
            da = da.drop_vars(
                [c for c in da.coords if c in ("time", "valid_time")], errors="ignore"
            )
            da = da.rename({sd: "time"}).assign_coords(
                time=("time", valid), reference_time=("time", np.repeat(ref, valid.size))
            )
            note = "valid time = reference time + step"
    elif time_dims:
        td = time_dims[0]
        vals = da[td].values if td in da.coords else None
        if vals is None or not np.issubdtype(np.asarray(vals).dtype, np.datetime64):
            vals = _decode_time_values(ds, td, path, var)
        da = (
            da.drop_vars([td], errors="ignore")
            .rename({td: "time"})
            .assign_coords(time=("time", vals))
        )
        step = _scalar_step(da)
        if step is not None:
            da = da.assign_coords(
                time=("time", da["time"].values + step), reference_time=("time", da["time"].values)
            )
            note = "valid time = reference time + step"
    else:
        t = _scalar_valid_time(da, ds, path, var)
        if t is None:
            raise CaseError("has no time coordinate (a valid time is needed)", path, var)
        da = da.drop_vars(
            [c for c in ("time", "valid_time", "step") if c in da.coords], errors="ignore"
        ).expand_dims(time=[t])
    da = da.drop_vars(
        [c for c in ("valid_time", "step") if c in da.coords and c != "time"], errors="ignore"
    )
    return da, note


def _decode_time_values(ds, td, path, var):
    c = ds[td] if td in ds.variables else None
    if c is None:
        raise CaseError(f"time dimension {td!r} has no coordinate values", path, var)
    vals = np.asarray(c.values)
    if np.issubdtype(vals.dtype, np.datetime64):
        return vals
    if vals.dtype.kind == "O":
        try:
            return np.array(
                [np.datetime64(v.isoformat()) for v in vals.ravel()], dtype="datetime64[ns]"
            )
        except Exception:  # noqa: BLE001
            pass
    units = c.attrs.get("units") or c.encoding.get("units")
    if not units:
        raise CaseError(
            f"time coordinate {td!r} is numeric and has no units (CF: "
            "'hours since 2000-01-01 00:00')",
            path,
            td,
        )
    raise CaseError(f"time coordinate {td!r} has units {units!r} that cannot be decoded", path, td)


def _scalar_time(da, ds, path, var):
    for name in ("time", "reference_time", "forecast_reference_time"):
        src = da.coords.get(name)
        if src is None and name in ds.variables:
            src = ds[name]
        if src is not None and src.size == 1:
            v = np.asarray(src.values).ravel()[0]
            if isinstance(v, np.datetime64):
                return v
    return None


def _scalar_step(da):
    s = da.coords.get("step")
    if s is not None and s.size == 1 and np.issubdtype(s.dtype, np.timedelta64):
        return np.asarray(s.values).ravel()[0]
    return None


def _scalar_valid_time(da, ds, path, var):
    v = da.coords.get("valid_time")
    if v is not None and v.size == 1:
        return np.asarray(v.values).ravel()[0]
    ref = _scalar_time(da, ds, path, var)
    if ref is None:
        return None
    step = _scalar_step(da)
    return ref + step if step is not None else ref


def _choose(path, cands, ruled):
    """The candidate taken for each role, and notes on the choices (see names.preference)."""
    by_role = {}
    for c in cands:
        by_role.setdefault(c.role, []).append(c)
    for cs in by_role.values():
        cs.sort(key=lambda c: c.rank)
    ref_role = (
        "height" if "height" in by_role else "geopotential" if "geopotential" in by_role else None
    )
    if ref_role is None:
        why = "; ".join(ruled.get("height", []) + ruled.get("geopotential", []))
        raise CaseError(
            "has no geopotential or geopotential height on pressure levels "
            "(looked for CF standard names geopotential_height / geopotential and "
            "short names gh, hgt, zg, z)" + (f"; {why}" if why else ""),
            path,
        )
    ref = by_role[ref_role][0]
    ref_grid = _horizontal(ref, path)
    _refuse_a_field_on_two_grids(path, by_role[ref_role], ref_grid)
    chosen, notes, dropped = {ref_role: ref}, [], {}
    for role, cs in by_role.items():
        if role in ("height", "geopotential") and role != ref_role:
            continue
        if role == ref_role:
            same = cs
        else:
            diffs = [(c, _grid_difference(ref_grid, _horizontal(c, path))) for c in cs]
            same = [c for c, d in diffs if d is None]
            if not same:
                c, d = diffs[0]
                msg = f"{c.describe()} is not on the height's grid: {d}"
                if role in REQUIRED_ROLES:
                    raise CaseError(msg, path, c.name)
                dropped[role] = f"{ROLES[role].words} left out: {msg}"
                continue
            for c, d in diffs:
                if d is not None and c is cs[0]:
                    notes.append(f"{ROLES[role].words}: {c.describe()} is on another grid ({d})")
        pick = same[0]
        chosen[role] = pick
        others = [c for c in cs if c is not pick]
        if others:
            notes.append(
                f"{ROLES[role].words}: took {pick.describe()}, the first by the "
                "stated preference; also found " + ", ".join(c.describe() for c in others)
            )
    for sentences in ruled.values():  # said whether or not another variable took the role
        notes.extend(sentences)
    return chosen, ref_role, notes, dropped


def _refuse_a_field_on_two_grids(path, cands, ref_grid) -> None:
    """The height's own variable found again on another grid (a GRIB file whose times or
    levels come on two grids) is refused, as the same data split across two files is:
    taking one grid would drop the other's times or levels without a word."""
    first = cands[0]
    for c in cands[1:]:
        if c.name != first.name or c.level.describe() != first.level.describe():
            continue
        d = _grid_difference(ref_grid, _horizontal(c, path))
        if d is not None:
            raise CaseError(
                f"holds {first.describe()} on two grids ({d}); balance-desk reads one grid "
                "per case: split the file by grid and open one part",
                path,
                first.name,
            )


def normalise(path, datasets, *, member=0) -> Piece:
    """Find, convert and reorder the variables of one file (see module docstring)."""
    datasets = [_promote_scalar_levels(ds) for ds in datasets]
    cands, ruled = find_candidates(datasets)
    chosen, key, notes, dropped = _choose(path, cands, ruled)
    ref = chosen[key]
    if _has_level_dim(ref.da, ref.ds) is None:
        raise CaseError("is not on pressure levels (no pressure coordinate found)", path, ref.name)
    y_dim, x_dim, kind = _spatial_dims(ref.da, ref.ds, path, ref.name)
    if kind == "projected":
        _mark_grid_relative(chosen)
    data: dict[str, Any] = {}
    surface: dict[str, Any] = {}
    sources, fills, holes = {}, {}, {}
    member_notes, member_count, statics, ref_times = [], 1, [], None
    for role, c in chosen.items():
        try:
            r = _role_array(c, role, member, path, reference=role == key)
        except CaseError as exc:
            if role in REQUIRED_ROLES:
                raise
            # an optional field that cannot be used is left out, and the case goes on
            dropped[role] = f"{ROLES[role].words} left out: {exc}"
            continue
        member_count = max(member_count, r.members)
        member_notes += [r.member_note] if r.member_note else []
        if r.time_note and r.time_note not in notes:
            notes.append(r.time_note)
        if role == key:
            ref_times = r.reference_times
        if r.static:
            statics.append(role)
        if r.missing:
            holes[role] = r.missing
        sources[role] = r.source
        (data if r.on_levels else surface)[role] = r.da
        fills[role] = r.raw
    _check_member(member, member_notes, notes, path)
    if statics and data:
        _repeat_statics(statics, next(iter(data.values()))["time"].values, surface, fills)
    _heights_from_geopotential(data, surface, fills, sources, notes)
    lat, lon, crs, x, y = _grid_of(kind, ref, y_dim, x_dim, path)
    return Piece(
        path=str(path),
        data=data,
        surface=surface,
        lat=lat,
        lon=lon,
        crs=crs,
        x=x,
        y=y,
        levels_pa=np.asarray(data["height"]["level"].values, dtype=np.float64),
        times=np.asarray(data["height"]["time"].values).astype("datetime64[ns]"),
        grid_relative=any(r in chosen for r in ("x_wind", "y_wind")),
        notes=notes,
        attrs=dict(ref.ds.attrs),
        sources=sources,
        dropped=dropped,
        reference_times=ref_times,
        fills=fills,
        holes=holes,
        member_count=member_count,
    )


def _mark_grid_relative(chosen: dict) -> None:
    """On a projected grid, winds a GRIB file says are grid-relative take the x_/y_ roles."""
    for role, target in (
        ("u", "x_wind"),
        ("v", "y_wind"),
        ("u10", "x_wind10"),
        ("v10", "y_wind10"),
    ):
        if role in chosen and _grib_grid_relative(chosen[role].da.attrs):
            chosen[target] = dataclasses.replace(chosen.pop(role), role=target)


@dataclasses.dataclass
class _RoleArray:
    """One role's variable read: in SI units on (time, [level,] y, x), with what was seen."""

    da: Any
    raw: Raw
    on_levels: bool
    static: bool
    members: int
    member_note: str | None
    time_note: str | None
    reference_times: Any
    missing: int
    source: dict


def _role_array(c, role: str, member, path, reference: bool = False) -> _RoleArray:
    """Reduce the member, find the valid times, drop length-1 dimensions, convert to SI and
    put one candidate on (time, [level,] y, x); a CaseError says why it cannot be used.
    ``reference``: the role whose reference (analysis) times the case takes."""
    vname, da, ds = c.name, c.da, c.ds
    mdim = _member_dim(da, ds)
    members = int(da.sizes[mdim]) if mdim is not None else 1
    da, member_note = _reduce_member(da, ds, member, path, vname)
    static = role in STATIC_ROLES and not any(
        _is_time_like(d, ds) or _is_step_like(d, ds) for d in da.dims
    )
    time_note = None
    if static:  # orography and land masks need no time: repeated for every valid time later
        gone = [t for t in ("time", "valid_time", "step", "reference_time") if t in da.coords]
        da = da.drop_vars(gone, errors="ignore").expand_dims(time=[np.datetime64("NaT", "ns")])
    else:
        da, time_note = _valid_times(da, ds, path, vname)
    reference_times = _reference_times(da, ds) if reference else None
    lev = _has_level_dim(da, ds)
    c_y, c_x, _ = _spatial_dims(da, ds, path, vname)
    keep = ["time"] + ([lev] if lev else []) + [c_y, c_x]
    for d in [d for d in da.dims if d not in keep]:
        if da.sizes[d] != 1:
            raise CaseError(
                f"has an extra dimension {d!r} of size {da.sizes[d]} that "
                "balance-desk does not know how to reduce",
                path,
                vname,
            )
        da = da.isel({d: 0})
    da = da.transpose(*keep)
    spec = ROLES[role]
    units = da.attrs.get("units")
    if not _is_dask(da):
        da = da.load()  # decode once (small GRIB files are read without dask)
    raw = da
    da = _si(da, role, units, path, vname)
    scale, offset = linear_conversion(str(units), spec.target_units)
    da = da.drop_vars([k for k in da.coords if k not in da.dims and k != "time"], errors="ignore")
    da.attrs = {"units": spec.target_units}
    source = _source(c, path, units, spec.target_units)
    if lev:
        da = _pressure_levels(da, ds, lev, path, vname)
        raw = _pressure_levels(raw, ds, lev, path, vname)
    yx = {c_y: "y", c_x: "x"}
    return _RoleArray(
        da=da.rename(yx),
        raw=Raw(raw.rename(yx), scale, offset, role),
        on_levels=bool(lev),
        static=static,
        members=members,
        member_note=member_note,
        time_note=time_note,
        reference_times=reference_times,
        missing=int(c.da.attrs.get("GRIB_missing_fields") or 0),
        source=source,
    )


def _check_member(member, member_notes: list, notes: list, path) -> None:
    """Say which member was taken; refuse a member asked of a file that has none."""
    if member_notes:
        notes.append(member_notes[0])
    elif str(member) not in ("0", "None"):
        what = "averaged" if member == "mean" else f"chosen (member {member})"
        raise CaseError(
            f"has no ensemble member dimension, so no member can be {what}; leave --member out",
            path,
        )


def _repeat_statics(statics: list, times, surface: dict, fills: dict) -> None:
    """Fields with no time (orography, land mask) repeated for every valid time."""

    def repeat(a):
        return a.isel(time=[0] * len(times)).assign_coords(time=times)

    for role in statics:
        surface[role] = repeat(surface[role])
        fills[role] = fills[role].map(repeat)


def _heights_from_geopotential(data, surface, fills, sources, notes) -> None:
    """Geopotential height Z = Phi / g0 (g0 = 9.80665 m s-2, the standard gravity of the WMO
    definition of geopotential metre), where a file gives geopotential and no height; the
    surface geopotential likewise gives the surface height."""
    if "geopotential" in data and "height" not in data:
        data["height"] = data.pop("geopotential") / C.G0
        fills["height"] = fills.pop("geopotential")
        sources["height"] = sources.pop("geopotential")
        sources["height"]["note"] = "geopotential divided by standard gravity 9.80665 m s-2"
        notes.append(
            "geopotential divided by standard gravity 9.80665 m s-2 to give geopotential height"
        )
    else:
        data.pop("geopotential", None)
    if "orography" in surface:
        surface["surface_height"] = surface.pop("orography") / C.G0
        fills["surface_height"] = fills.pop("orography")
        sources["surface_height"] = sources.pop("orography")
        sources["surface_height"]["note"] = "surface geopotential divided by 9.80665 m s-2"


def _grid_of(kind: str, ref, y_dim, x_dim, path):
    """(lat, lon, crs, x, y): 1-D latitudes and longitudes of a lat-lon grid (crs, x, y
    None), or a projected grid's CRS, coordinates and 2-D latitudes and longitudes."""
    if kind == "latlon":
        _check_units_deg(ref.ds[y_dim], "degrees_north", path)
        _check_units_deg(ref.ds[x_dim], "degrees_east", path)
        lat = np.asarray(ref.ds[y_dim].values, dtype=np.float64)
        lon = np.asarray(ref.ds[x_dim].values, dtype=np.float64)
        return lat, lon, None, None, None
    crs, x, y, lat, lon = _projected_grid(ref.da, ref.ds, y_dim, x_dim, path, ref.name)
    return lat, lon, crs, x, y


def _is_dask(da) -> bool:
    return type(da.data).__module__.startswith("dask")


def _si(da, role, units, path, vname):
    """The variable in its role's SI unit, usual fill values as NaN: one task per chunk."""
    import xarray as xr

    spec = ROLES[role]
    convert(0.0, units, spec.target_units, path=path, variable=vname, accepted=spec.accepted)
    scale, offset = linear_conversion(str(units), spec.target_units)
    return xr.apply_ufunc(
        to_si,
        da,
        kwargs={"role": role, "scale": scale, "offset": offset},
        dask="parallelized",
        output_dtypes=[np.float64],
        keep_attrs=True,
    )


def _source(c: Candidate, path, units, target) -> dict:
    out = {
        "file": os.path.basename(str(path).rstrip("/")),
        "variable": c.name,
        "level_type": c.level.describe(),
        "recognised_by": c.how,
        "units_from": None if units is None else str(units),
        "units_to": target,
    }
    if c.level.label:
        out["level_label"] = c.level.label
    if "GRIB_shortName" in c.da.attrs:
        out["grib_short_name"] = c.da.attrs.get("GRIB_shortName")
        out["grib_param_id"] = c.da.attrs.get("GRIB_paramId")
        out["grib_type_of_level"] = c.da.attrs.get("GRIB_typeOfLevel")
    return out


def _reference_times(da, ds):
    """The reference (run) time of each valid time, or None where the file does not say."""
    n = da.sizes["time"]
    for name in ("reference_time", "forecast_reference_time"):
        src = da.coords.get(name)
        if src is None and name in ds.variables:
            src = ds[name]
        if src is None:
            continue
        vals = np.asarray(src.values).ravel()
        if not np.issubdtype(vals.dtype, np.datetime64):
            continue
        vals = vals.astype("datetime64[ns]")
        if vals.size == 1:
            return np.repeat(vals, n)
        if vals.size == n:
            return vals
    return None


def _grib_grid_relative(attrs) -> bool:
    """GRIB winds relative to the grid's x and y: the uvRelativeToGrid key, or bit 5 (value 8)
    of the resolution-and-component flags (WMO-No. 306, GRIB2 flag table 3.3)."""
    if str(attrs.get("GRIB_uvRelativeToGrid", "")) == "1":
        return True
    flags = attrs.get("GRIB_resolutionAndComponentFlags")
    try:
        return bool(int(flags) & 8)
    except (TypeError, ValueError):
        return False


def _promote_scalar_levels(ds):
    """A file with one pressure level often holds it as a scalar coordinate: make it a dimension."""
    for c in list(ds.coords):
        if ds[c].ndim == 0 and _is_pressure_coord(c, ds):
            attrs = dict(ds[c].attrs)
            ds = ds.expand_dims(c)
            ds[c].attrs.update(attrs)
    return ds


def _check_units_deg(coord, expected, path):
    units = coord.attrs.get("units")
    if units is None:
        return
    if not (units.lower().startswith("degree") or units.lower() in ("deg", "degrees")):
        raise CaseError(f"has units {units!r}; expected {expected}", path, coord.name)


def _reduce_member(da, ds, member, path, var):
    mdim = _member_dim(da, ds)
    if mdim is None:
        return da, None
    n = da.sizes[mdim]
    if member == "mean":
        return da.mean(mdim, keep_attrs=True), f"ensemble mean of {n} members"
    try:
        idx = int(member)
    except (TypeError, ValueError):
        raise CaseError(f"member {member!r} is neither an index nor 'mean'", path, var) from None
    if not 0 <= idx < n:
        raise CaseError(f"has {n} ensemble members; member {idx} is not one of them", path, var)
    label = np.asarray(da[mdim].values)[idx] if mdim in da.coords else idx
    return da.isel({mdim: idx}), f"ensemble member {idx} of {n} (file's {mdim} = {label})"


def _pressure_levels(da, ds, lev, path, var):
    c = ds[lev] if lev in ds.variables else da[lev]
    units = c.attrs.get("units")
    if units is None and lev.lower() == "isobaricinhpa":
        units = "hPa"
    p = convert(
        np.asarray(c.values, dtype=np.float64),
        units,
        "Pa",
        path=path,
        variable=lev,
        accepted="Pa, hPa, millibar",
    )
    p = np.atleast_1d(p)
    if np.unique(p).size != p.size:
        raise CaseError("pressure levels repeat a value", path, lev)
    if np.any(~np.isfinite(p)) or np.any(p <= 0):
        raise CaseError("pressure levels must be positive numbers", path, lev)
    da = da.assign_coords({lev: p}).rename({lev: "level"})
    order = np.argsort(-p)  # surface first: 1000, 925, ... hPa
    return da.isel(level=order)


def _projected_grid(da, ds, y_dim, x_dim, path, var):
    from .crs import crs_from_cf, crs_from_grib, projected_axes
    from .units import convert as conv

    gm_name = da.attrs.get("grid_mapping")
    lat2d, lon2d = _find_latlon_2d(da, ds)
    crs = None
    if gm_name:
        gm_name = gm_name.split(":")[0].strip()
        if gm_name not in ds.variables:
            raise CaseError(f"names grid_mapping {gm_name!r}, which is not in the file", path, var)
        crs = crs_from_cf(ds[gm_name].attrs, path, gm_name)
        if crs.is_geographic:
            raise CaseError(
                "rotated-pole and other geographic grid mappings are not supported; "
                "regrid to a regular lat-lon or conformal projected grid",
                path,
                gm_name,
            )
    elif "GRIB_gridType" in da.attrs:
        crs = crs_from_grib(da.attrs, path, var)
    if crs is None:
        if lat2d is not None:
            raise CaseError(
                "has 2-D latitude and longitude but no projection (a CF "
                "grid_mapping or GRIB grid keys are needed)",
                path,
                var,
            )
        raise CaseError(
            "has no latitude/longitude coordinates that balance-desk recognises "
            f"(dimensions {y_dim!r}, {x_dim!r})",
            path,
            var,
        )
    if (
        x_dim in ds.coords
        and y_dim in ds.coords
        and ds[x_dim].ndim == 1
        and np.issubdtype(ds[x_dim].dtype, np.number)
    ):
        x = np.asarray(
            conv(
                np.asarray(ds[x_dim].values, np.float64),
                ds[x_dim].attrs.get("units"),
                "m",
                path=path,
                variable=x_dim,
                accepted="m, km",
            )
        )
        y = np.asarray(
            conv(
                np.asarray(ds[y_dim].values, np.float64),
                ds[y_dim].attrs.get("units"),
                "m",
                path=path,
                variable=y_dim,
                accepted="m, km",
            )
        )
        import pyproj

        to_geo = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
        xx, yy = np.meshgrid(x, y)
        lon, lat = to_geo.transform(xx, yy)
    elif lat2d is not None and lon2d is not None:
        lat = np.asarray(lat2d.values, np.float64)
        lon = np.asarray(lon2d.values, np.float64)
        x, y = projected_axes(crs, lat, lon, path, var)
    else:
        raise CaseError(
            "has a projection but neither x/y coordinates nor 2-D latitude and longitude", path, var
        )
    return crs, x, y, lat, lon
