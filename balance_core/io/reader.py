"""Open model output and normalise it: the xarray edge of the core.

``open_datasets`` opens one path (NetCDF through netCDF4, GRIB through cfgrib,
a Zarr store) lazily with dask chunks; ``normalise`` finds the variables by
their CF standard names and the common short and long names, converts units,
reduces an ensemble dimension, turns reference time plus step into valid
time, orders pressure levels, and returns arrays with dims
(time, level, y, x) or (time, y, x) plus what is needed to build the Grid.
Every problem becomes one :class:`CaseError` sentence naming the file and the
variable.
"""

from __future__ import annotations

import dataclasses
import os
import warnings

import numpy as np

from .errors import CaseError
from .names import (LAT_NAMES, LEVEL_ROLES, LON_NAMES, MEMBER_DIM_NAMES, PRESSURE_COORD_NAMES,
                    ROLES, SURFACE_ROLES, TIME_NAMES)
from .units import convert, dimensionality_matches

__all__ = ["open_datasets", "normalise", "Piece", "sniff_format"]

#: Surface fields that do not change with time (may come without a time coordinate).
STATIC_ROLES = ("orography", "surface_height", "land_mask")


def sniff_format(path) -> str:
    """'netcdf', 'grib' or 'zarr', from the file's first bytes (or a Zarr store's layout)."""
    p = str(path)
    if not os.path.exists(p):
        raise CaseError("no such file or directory", p)
    if os.path.isdir(p):
        names = set(os.listdir(p))
        if names & {".zgroup", ".zmetadata", "zarr.json", ".zattrs"}:
            return "zarr"
        raise CaseError("is a directory but not a Zarr store", p)
    with open(p, "rb") as fh:
        head = fh.read(16)
    if not head:
        raise CaseError("is empty", p)
    if head[:3] == b"CDF" or head[:4] == b"\x89HDF":
        return "netcdf"
    if b"GRIB" in head[:16]:
        return "grib"
    raise CaseError("is not a NetCDF, GRIB or Zarr file (unknown first bytes)", p)


def open_datasets(path, chunks=None):
    """Open ``path`` lazily; a list of xarray Datasets (GRIB may give several)."""
    import xarray as xr

    kind = sniff_format(path)
    chunks = {} if chunks is None else chunks
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if kind == "netcdf":
                engine = "netcdf4"
                with open(path, "rb") as fh:
                    if fh.read(4) == b"\x89HDF":
                        engine = _hdf_engine()
                return [xr.open_dataset(path, engine=engine, chunks=chunks,
                                        decode_timedelta=True)]
            if kind == "zarr":
                return [xr.open_zarr(path, decode_timedelta=True)]
            return _open_grib(path)
    except CaseError:
        raise
    except Exception as exc:  # noqa: BLE001 - every library error becomes one sentence
        detail = str(exc).splitlines()[0][:160] if str(exc) else type(exc).__name__
        raise CaseError(f"cannot be read as {kind.upper() if kind != 'zarr' else 'Zarr'}: "
                        f"damaged or truncated ({detail})", path) from None


def _hdf_engine():
    try:
        import netCDF4  # noqa: F401
        return "netcdf4"
    except ImportError:
        return "h5netcdf"


def _open_grib(path):
    try:
        import cfgrib
    except Exception:  # noqa: BLE001 - ImportError or a missing eccodes library
        raise CaseError("GRIB needs cfgrib and the eccodes library: install the 'grib' extra "
                        "(pip install 'balance-desk[grib]')", path) from None
    import logging

    from .crs import GRIB_READ_KEYS

    logging.getLogger("cfgrib").setLevel(logging.CRITICAL)  # errors come back as one sentence
    dss = cfgrib.open_datasets(str(path), backend_kwargs={"read_keys": GRIB_READ_KEYS,
                                                          "indexpath": "", "errors": "raise"})
    if not dss:
        raise CaseError("holds no GRIB messages that can be decoded", path)
    return dss


# -- recognising variables ----------------------------------------------------------

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
            return name.lower() in ("isobaricinhpa", "isobaricinpa", "plev", "pressure",
                                    "pressure_level")
        return dimensionality_matches(units, "Pa")
    return False


def classify(name, da, ds) -> str | None:
    """The role of data variable ``name`` (see :mod:`balance_core.io.names`), or None."""
    std = (_attr(da, "standard_name") or "").lower()
    short = name.lower()
    grib_short = (_attr(da, "GRIB_shortName") or "").lower()
    long = (_attr(da, "long_name") or "").lower()
    units = _attr(da, "units")
    on_levels = _has_level_dim(da, ds) is not None
    roles = LEVEL_ROLES if on_levels else SURFACE_ROLES
    # 1. CF standard name
    for r in roles:
        if std and std in r.standard_names:
            if std in ("eastward_wind", "northward_wind") and not on_levels:
                continue
            return r.name
    if not on_levels and std in ("eastward_wind", "northward_wind", "air_temperature"):
        height = _height_above_ground(da, ds)
        if height is not None and abs(height - (2.0 if std == "air_temperature" else 10.0)) < 0.5:
            return {"eastward_wind": "u10", "northward_wind": "v10", "air_temperature": "t2m"}[std]
    # 2. short names (the variable's own and GRIB's), 3. long names; units decide ambiguity
    for key, field in ((short, "short_names"), (grib_short, "short_names"), (long, "long_names")):
        if not key:
            continue
        hits = [r for r in roles if key in getattr(r, field)]
        if not hits:
            continue
        if len(hits) > 1 or hits[0].name in ("omega", "w", "height", "geopotential"):
            picked = _by_units(hits, units)
            if picked:
                return picked
            if len(hits) == 1 and units is None:
                return hits[0].name
            continue
        return hits[0].name
    return None


def _by_units(candidates, units):
    if units is None:
        return None
    for r in candidates:
        if dimensionality_matches(units, r.target_units):
            return r.name
    # "z" named variables in metres are geopotential height, in m2 s-2 geopotential
    if dimensionality_matches(units, "m"):
        return "height"
    if dimensionality_matches(units, "m**2 s**-2"):
        return "geopotential"
    return None


def _height_above_ground(da, ds):
    for c in list(da.coords) + [d for d in da.dims]:
        if c in ("heightAboveGround", "height", "height_above_ground"):
            try:
                v = np.asarray(ds[c].values if c in ds else da[c].values).ravel()
                return float(v[0])
            except Exception:  # noqa: BLE001
                return None
    return None


# -- normalising one variable -------------------------------------------------------

@dataclasses.dataclass
class Piece:
    """One file's normalised variables and grid description."""

    path: str
    data: dict          # role -> xarray.DataArray (time, level, y, x) in SI units
    surface: dict       # role -> xarray.DataArray (time, y, x) in SI units
    lat: np.ndarray     # 1-D (lat-lon) or 2-D (projected)
    lon: np.ndarray
    crs: object | None  # pyproj CRS for projected grids
    x: np.ndarray | None
    y: np.ndarray | None
    levels_pa: np.ndarray
    times: np.ndarray   # datetime64[ns]
    grid_relative: bool
    notes: list
    attrs: dict


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
        if std == "latitude" or d.lower() in LAT_NAMES or units in ("degrees_north", "degree_north"):
            lat_dim = d
        elif std == "longitude" or d.lower() in LON_NAMES or units in ("degrees_east", "degree_east"):
            lon_dim = d
    if lat_dim and lon_dim:
        return lat_dim, lon_dim, "latlon"
    if len(dims) < 2:
        raise CaseError("has fewer than two horizontal dimensions", path, var)
    return dims[-2], dims[-1], "projected"


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
            da = da.assign_coords(_vt=("_vt", valid)).rename({"_vt": "time"})
            note = "valid time = reference time + step, over several forecasts"
        else:
            if time_dims:
                da = da.isel({time_dims[0]: 0})
            ref = _scalar_time(da, ds, path, var)
            if ref is None:
                raise CaseError(f"has forecast steps ({sd}) but no reference time", path, var)
            valid = ref + da[sd].values
            da = da.drop_vars([c for c in da.coords if c in ("time", "valid_time")], errors="ignore")
            da = da.rename({sd: "time"}).assign_coords(time=("time", valid))
            note = "valid time = reference time + step"
    elif time_dims:
        td = time_dims[0]
        vals = da[td].values if td in da.coords else None
        if vals is None or not np.issubdtype(np.asarray(vals).dtype, np.datetime64):
            vals = _decode_time_values(ds, td, path, var)
        da = da.drop_vars([td], errors="ignore").rename({td: "time"}).assign_coords(time=("time", vals))
        step = _scalar_step(da)
        if step is not None:
            da = da.assign_coords(time=("time", da["time"].values + step))
            note = "valid time = reference time + step"
    else:
        t = _scalar_valid_time(da, ds, path, var)
        if t is None:
            raise CaseError("has no time coordinate (a valid time is needed)", path, var)
        da = da.drop_vars([c for c in ("time", "valid_time", "step") if c in da.coords],
                          errors="ignore").expand_dims(time=[t])
    da = da.drop_vars([c for c in ("valid_time", "step") if c in da.coords and c != "time"],
                      errors="ignore")
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
            return np.array([np.datetime64(v.isoformat()) for v in vals.ravel()],
                            dtype="datetime64[ns]")
        except Exception:  # noqa: BLE001
            pass
    units = c.attrs.get("units") or c.encoding.get("units")
    if not units:
        raise CaseError(f"time coordinate {td!r} is numeric and has no units (CF: "
                        "'hours since 2000-01-01 00:00')", path, td)
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


def normalise(path, datasets, *, member=0) -> Piece:
    """Find, convert and reorder the variables of one file (see module docstring)."""
    found = {}
    datasets = [_promote_scalar_levels(ds) for ds in datasets]
    for ds in datasets:
        for name, da in ds.data_vars.items():
            role = classify(name, da, ds)
            if role and role not in found:
                found[role] = (name, da, ds)
    if not ({"height", "geopotential"} & set(found)):
        raise CaseError("has no geopotential or geopotential height on pressure levels "
                        "(looked for CF standard names geopotential_height / geopotential and "
                        "short names gh, hgt, zg, z)", path)
    key = "height" if "height" in found else "geopotential"
    name, ref_da, ref_ds = found[key]
    level_dim = _has_level_dim(ref_da, ref_ds)
    if level_dim is None:
        raise CaseError("is not on pressure levels (no pressure coordinate found)", path, name)
    y_dim, x_dim, kind = _spatial_dims(ref_da, ref_ds, path, name)
    notes = []
    data, surface = {}, {}
    member_note = None
    grid_relative = False
    if kind == "projected":
        for role in ("u", "v"):
            if role in found and _grib_grid_relative(found[role][1].attrs):
                found["x_wind" if role == "u" else "y_wind"] = found.pop(role)
    statics = []
    for role, (vname, da, ds) in found.items():
        if role in ("x_wind", "y_wind"):
            grid_relative = True
        da, mnote = _reduce_member(da, ds, member, path, vname)
        member_note = member_note or mnote
        if role in STATIC_ROLES and not any(_is_time_like(d, ds) or _is_step_like(d, ds)
                                            for d in da.dims):
            # orography and land masks need no time: repeated for every valid time below
            da = da.drop_vars([c for c in ("time", "valid_time", "step") if c in da.coords],
                              errors="ignore").expand_dims(time=[np.datetime64("NaT", "ns")])
            statics.append(role)
            tnote = None
        else:
            da, tnote = _valid_times(da, ds, path, vname)
        if tnote and tnote not in notes:
            notes.append(tnote)
        lev = _has_level_dim(da, ds)
        keep = ["time"] + ([lev] if lev else []) + [y_dim, x_dim]
        missing = [d for d in (y_dim, x_dim) if d not in da.dims]
        if missing:
            raise CaseError(f"does not share the horizontal grid ({missing} missing)", path, vname)
        extra = [d for d in da.dims if d not in keep]
        for d in extra:
            if da.sizes[d] != 1:
                raise CaseError(f"has an extra dimension {d!r} of size {da.sizes[d]} that "
                                "balance-desk does not know how to reduce", path, vname)
            da = da.isel({d: 0})
        da = da.transpose(*keep)
        spec = ROLES[role]
        da = da.copy(data=convert(da.data, da.attrs.get("units"), spec.target_units, path=path,
                                  variable=vname, accepted=spec.accepted))
        if lev:
            da = _pressure_levels(da, ds, lev, path, vname)
            data[role] = da.rename({y_dim: "y", x_dim: "x"})
        else:
            surface[role] = da.rename({y_dim: "y", x_dim: "x"})
    if member_note:
        notes.append(member_note)
    if statics and data:
        first = next(iter(data.values()))
        for role in statics:
            surface[role] = surface[role].isel(time=[0] * first.sizes["time"]).assign_coords(
                time=first["time"].values)
    if "geopotential" in data and "height" not in data:
        from ..constants import G0

        data["height"] = data.pop("geopotential") / G0
        notes.append("geopotential divided by standard gravity 9.80665 m s-2 to give "
                     "geopotential height")
    else:
        data.pop("geopotential", None)
    if "orography" in surface:
        from ..constants import G0

        surface["surface_height"] = surface.pop("orography") / G0
    # grid
    lat = lon = x = y = crs = None
    if kind == "latlon":
        lat = np.asarray(ref_ds[y_dim].values, dtype=np.float64)
        lon = np.asarray(ref_ds[x_dim].values, dtype=np.float64)
        _check_units_deg(ref_ds[y_dim], "degrees_north", path)
        _check_units_deg(ref_ds[x_dim], "degrees_east", path)
    else:
        crs, x, y, lat, lon = _projected_grid(ref_da, ref_ds, y_dim, x_dim, path, name)
    levels = np.asarray(data["height"]["level"].values, dtype=np.float64)
    times = np.asarray(data["height"]["time"].values).astype("datetime64[ns]")
    return Piece(path=str(path), data=data, surface=surface, lat=lat, lon=lon, crs=crs, x=x, y=y,
                 levels_pa=levels, times=times, grid_relative=grid_relative, notes=notes,
                 attrs=dict(ref_ds.attrs))


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
    p = convert(np.asarray(c.values, dtype=np.float64), units, "Pa", path=path, variable=lev,
                accepted="Pa, hPa, millibar")
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
            raise CaseError("rotated-pole and other geographic grid mappings are not supported; "
                            "regrid to a regular lat-lon or conformal projected grid", path, gm_name)
    elif "GRIB_gridType" in da.attrs:
        crs = crs_from_grib(da.attrs, path, var)
    if crs is None:
        if lat2d is not None:
            raise CaseError("has 2-D latitude and longitude but no projection (a CF "
                            "grid_mapping or GRIB grid keys are needed)", path, var)
        raise CaseError("has no latitude/longitude coordinates that balance-desk recognises "
                        f"(dimensions {y_dim!r}, {x_dim!r})", path, var)
    if x_dim in ds.coords and y_dim in ds.coords and ds[x_dim].ndim == 1 and \
            np.issubdtype(ds[x_dim].dtype, np.number):
        x = np.asarray(conv(np.asarray(ds[x_dim].values, np.float64), ds[x_dim].attrs.get("units"),
                            "m", path=path, variable=x_dim, accepted="m, km"))
        y = np.asarray(conv(np.asarray(ds[y_dim].values, np.float64), ds[y_dim].attrs.get("units"),
                            "m", path=path, variable=y_dim, accepted="m, km"))
        import pyproj

        to_geo = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
        xx, yy = np.meshgrid(x, y)
        lon, lat = to_geo.transform(xx, yy)
    elif lat2d is not None and lon2d is not None:
        lat = np.asarray(lat2d.values, np.float64)
        lon = np.asarray(lon2d.values, np.float64)
        x, y = projected_axes(crs, lat, lon, path, var)
    else:
        raise CaseError("has a projection but neither x/y coordinates nor 2-D latitude and "
                        "longitude", path, var)
    return crs, x, y, lat, lon
