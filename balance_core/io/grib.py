"""GRIB through eccodes: one pass over the file's keys, then lazy decoding of what is asked for.

A general GRIB file (a national centre's post-processed output, say) holds the
same short name on many kinds of level: ``gh`` on isobaric surfaces and at the
tropopause, the cloud top and the 0 degC isotherm; ``pres`` at the surface, at
cloud tops and at the level of maximum wind. So every message keeps its
``typeOfLevel`` (WMO-No. 306, GRIB2 code table 4.5, as eccodes names it), and
the reader decides roles by level kind as well as by name.

:func:`open_grib` reads the keys of every message once (no values decoded),
groups the messages into variables -- one per (cfVarName, typeOfLevel, level
outside isobaric surfaces, step type, grid) -- and returns xarray Datasets
whose data are decoded lazily, message by message, when a slice is asked for.
Isobaric levels in hPa and in Pa are one pressure dimension in Pa. A variable
whose (member, valid time, level) hypercube has holes keeps NaN there and says
how many (``GRIB_missing_fields``), so a file cut at a message boundary is seen.

The grid's latitudes and longitudes come from eccodes itself (its
``latitudes`` / ``longitudes`` keys apply the scanning mode), once per grid.
"""

from __future__ import annotations

import collections
import dataclasses
import os
import threading
from typing import Any

import numpy as np
import pyproj  # noqa: F401  (before eccodes: the other order crashes at exit)

from .errors import CaseError

__all__ = ["open_grib", "Message", "scan"]

#: Cheap keys read from every message (coded numbers, no parameter-table look-up).
_MESSAGE_KEYS = {
    "edition": int,
    "centre": str,
    "discipline": int,
    "parameterCategory": int,
    "parameterNumber": int,
    "table2Version": int,
    "indicatorOfParameter": int,
    "typeOfLevel": str,
    "level": float,
    "stepType": str,
    "productDefinitionTemplateNumber": int,
    "dataDate": int,
    "dataTime": int,
    "validityDate": int,
    "validityTime": int,
    "number": int,
    "dataType": str,
    "md5GridSection": str,
    "numberOfValues": int,
    "derivedForecast": int,
}
#: Keys that need eccodes' parameter tables (about a millisecond each): read once per
#: kind of field (see _concept_key) and shared by every message of that kind.
#: The shortName is read for every kind of field, units and paramId only for short names
#: that some role knows; the long name and cfVarName are not read at all (each table costs
#: about a tenth of a second to load).
_CONCEPT_KEYS = {"units": str, "paramId": int}
#: Keys read only where the product needs them (asking for an undefined key is slow).
_RARE_KEYS = ("number", "derivedForecast")
#: GRIB2 product templates of derived (ensemble mean or spread) forecasts (code table 4.0).
_DERIVED_TEMPLATES = (2, 3, 4, 12, 13, 14)
#: Keys that only one GRIB edition defines: {edition: keys}.
_EDITION_KEYS = {
    1: ("table2Version", "indicatorOfParameter"),
    2: (
        "discipline",
        "parameterCategory",
        "parameterNumber",
        "productDefinitionTemplateNumber",
        "derivedForecast",
    ),
}
#: Grid keys: read once per grid (md5GridSection).
_GRID_READ = {
    "gridType": str,
    "Ni": int,
    "Nj": int,
    "Nx": int,
    "Ny": int,
    "jPointsAreConsecutive": int,
    "alternativeRowScanning": int,
    "iScansNegatively": int,
    "jScansPositively": int,
    "resolutionAndComponentFlags": int,
    "uvRelativeToGrid": int,
    "shapeOfTheEarth": int,
    "projectionCentreFlag": int,
    "radius": float,
    "LaDInDegrees": float,
    "LoVInDegrees": float,
    "Latin1InDegrees": float,
    "Latin2InDegrees": float,
    "orientationOfTheGridInDegrees": float,
    "DxInMetres": float,
    "DyInMetres": float,
    "latitudeOfFirstGridPointInDegrees": float,
    "longitudeOfFirstGridPointInDegrees": float,
    "latitudeOfLastGridPointInDegrees": float,
    "longitudeOfLastGridPointInDegrees": float,
    "iDirectionIncrementInDegrees": float,
    "jDirectionIncrementInDegrees": float,
}
#: Keys read once per message only where defined: the component flags can differ between
#: fields of one grid (GRIB1 carries them in the grid section, GRIB2 too, but some producers
#: flag scalars differently from vectors).
_VECTOR_KEYS = {"resolutionAndComponentFlags": int, "uvRelativeToGrid": int}
#: Grid types the core can use (lat-lon, Gaussian, and the conformal projections).
SUPPORTED_GRIDS = ("regular_ll", "regular_gg", "lambert", "polar_stereographic", "mercator")
#: eccodes names of isobaric levels and the factor to Pa.
_ISOBARIC = {"isobaricInhPa": 100.0, "isobaricInPa": 1.0}
#: ECMWF/WMO ensemble product definition templates (WMO-No. 306, code table 4.0).
_ENSEMBLE_TEMPLATES = (1, 11, 60, 61)

#: Files whose fields would take at most this much memory as float64 are read without dask
#: (each variable is decoded whole the first time it is used): below it, dask's
#: per-task overhead costs more than decoding. Larger files get one dask chunk per field.
EAGER_LIMIT_BYTES = 256 * 2**20

_LOCK = threading.Lock()  # one decoder at a time: eccodes handles are not shared safely


@dataclasses.dataclass(frozen=True)
class Message:
    """Where one field lies in the file and what its keys say."""

    offset: int  # byte offset of its GRIB message
    field: int  # index of the field inside a multi-field message
    keys: dict


def _eccodes(path):
    try:
        import eccodes
    except Exception:  # noqa: BLE001 - ImportError, or a missing eccodes library
        raise CaseError(
            "GRIB needs the eccodes library: install the 'grib' extra "
            "(pip install 'balance-desk[grib]')",
            path,
        ) from None
    return eccodes


#: eccodes' values for a missing integer or double key
_MISSING = (2147483647, -1e100)


def _get(ec, h, key, kind):
    """A key's value, or None where undefined or missing (coded as all bits set).

    Asked directly: eccodes' own ``codes_is_defined`` costs as much as a failed
    read (about 60 microseconds), ten times a successful one.
    """
    try:
        if kind is str:
            return str(ec.codes_get_string(h, key))
        val = int(ec.codes_get_long(h, key)) if kind is int else float(ec.codes_get_double(h, key))
    except Exception:  # noqa: BLE001 - a key that cannot be read counts as absent
        return None
    return None if val in _MISSING else val


def _wanted_short_names():
    from .names import ROLES

    return {s for r in ROLES.values() for s in r.short_names}


def scan(path) -> list:
    """Every field of a GRIB file with its keys, in file order; no values are decoded.

    Raises CaseError when a message cannot be decoded (a damaged or truncated file).
    """
    ec = _eccodes(path)
    out: list[Any] = []
    concepts: dict[Any, Any] = {}
    grids: dict[Any, Any] = {}
    wanted = _wanted_short_names()
    with _LOCK, open(path, "rb") as fh:
        ec.codes_grib_multi_support_on()
        try:
            last_offset, field = None, 0
            while True:
                try:
                    h = ec.codes_grib_new_from_file(fh)
                except Exception as exc:  # noqa: BLE001
                    raise CaseError(
                        f"cannot be read as GRIB: damaged or truncated after "
                        f"{len(out)} fields ({_first_line(exc)})",
                        path,
                    ) from None
                if h is None:
                    break
                try:
                    edition = _get(ec, h, "edition", int)
                    skip = _EDITION_KEYS.get(3 - (edition or 2), ())
                    keys = {
                        k: _get(ec, h, k, t)
                        for k, t in _MESSAGE_KEYS.items()
                        if k not in skip and k not in _RARE_KEYS
                    }
                    keys["edition"] = edition
                    pdt = keys.get("productDefinitionTemplateNumber")
                    if edition == 1 or pdt in _ENSEMBLE_TEMPLATES:
                        keys["number"] = _get(ec, h, "number", int)
                    if pdt in _DERIVED_TEMPLATES:
                        keys["derivedForecast"] = _get(ec, h, "derivedForecast", int)
                    ck = _concept_key(keys)
                    if ck not in concepts:
                        c = {"shortName": _get(ec, h, "shortName", str)}
                        if (c["shortName"] or "").lower() in wanted:  # units and paramId cost
                            c.update({k: _get(ec, h, k, t) for k, t in _CONCEPT_KEYS.items()})
                        concepts[ck] = c
                    keys.update(concepts[ck])
                    gk = keys["md5GridSection"]
                    if gk not in grids:
                        grids[gk] = {k: _get(ec, h, k, t) for k, t in _GRID_READ.items()}
                    keys.update(grids[gk])
                    keys.update({k: _get(ec, h, k, t) for k, t in _VECTOR_KEYS.items()})
                    offset = int(ec.codes_get_message_offset(h))
                finally:
                    ec.codes_release(h)
                field = field + 1 if offset == last_offset else 0
                last_offset = offset
                out.append(Message(offset, field, keys))
        finally:
            ec.codes_grib_multi_support_reset_file(fh)
    if not out:
        raise CaseError("holds no GRIB messages that can be decoded", path)
    return out


def _concept_key(k) -> tuple:
    """What decides a field's parameter-table names: its coded parameter and level type."""
    return tuple(
        k.get(key)
        for key in (
            "edition",
            "centre",
            "discipline",
            "parameterCategory",
            "parameterNumber",
            "table2Version",
            "indicatorOfParameter",
            "typeOfLevel",
            "stepType",
            "productDefinitionTemplateNumber",
        )
    ) + (None if k.get("typeOfLevel") in _ISOBARIC else k.get("level"),)


def _first_line(exc) -> str:
    text = str(exc).strip().splitlines()
    return (text[0] if text else type(exc).__name__)[:160]


def _datetime(date, time):
    """datetime64[ns] from GRIB dataDate (YYYYMMDD) and dataTime (HHMM)."""
    if date is None:
        return np.datetime64("NaT", "ns")
    d = f"{int(date):08d}"
    t = f"{int(time or 0):04d}"
    return np.datetime64(f"{d[:4]}-{d[4:6]}-{d[6:]}T{t[:2]}:{t[2:]}", "ns")


def _level_of(k):
    """(kind, value): ('isobaric', Pa) or (typeOfLevel, level)."""
    tl = k.get("typeOfLevel") or "unknown"
    if tl in _ISOBARIC:
        return "isobaric", float(k.get("level") or 0.0) * _ISOBARIC[tl]
    return tl, float(k.get("level") or 0.0)


def _member_of(k):
    if (
        k.get("productDefinitionTemplateNumber") in _ENSEMBLE_TEMPLATES
        or k.get("dataType") in ("pf", "cf")
        or (k.get("edition") == 1 and k.get("number") is not None)
    ):
        return k.get("number")
    return None


def _shape(k):
    if k["gridType"] in ("regular_ll", "regular_gg"):
        ny, nx = k.get("Nj"), k.get("Ni")
    else:
        ny, nx = k.get("Ny"), k.get("Nx")
    if k.get("jPointsAreConsecutive"):
        return (nx, ny), True
    return (ny, nx), False


class _Fields:
    """Lazy values of one GRIB variable: an index array of fields, decoded on demand."""

    def __init__(self, path, messages, index, grid_shape, transposed):
        self.path = path
        self.messages = messages  # list of Message
        self.index = index  # int array (member, time, level) -> message or -1
        self.grid_shape = grid_shape  # (ny, nx) after un-transposing
        self.transposed = transposed
        self.shape = index.shape + grid_shape
        self.dtype = np.dtype(np.float32)

    def decode(self, key):
        """Values for a tuple of basic indexers (ints and slices) over all dimensions."""
        lead = key[: self.index.ndim]
        rest = key[self.index.ndim :]
        sel = self.index[lead]
        out = np.full(sel.shape + self.grid_shape, np.nan, dtype=np.float32)
        flat = out.reshape((-1,) + self.grid_shape)
        order = sorted(
            (self.messages[m].offset, self.messages[m].field, pos)
            for pos, m in enumerate(np.asarray(sel).ravel())
            if m >= 0
        )
        if order:
            ec = _eccodes(self.path)
            with _LOCK, open(self.path, "rb") as fh:
                ec.codes_grib_multi_support_on()
                try:
                    for offset, field, pos in order:
                        flat[pos] = self._one(ec, fh, offset, field)
                finally:
                    ec.codes_grib_multi_support_reset_file(fh)
        return out[(Ellipsis,) + tuple(rest)] if rest else out

    def _one(self, ec, fh, offset, field):
        fh.seek(offset)
        ec.codes_grib_multi_support_reset_file(fh)
        h = None
        try:
            for _ in range(field + 1):
                if h is not None:
                    ec.codes_release(h)
                h = ec.codes_grib_new_from_file(fh)
            if h is None:
                raise CaseError(
                    "a GRIB field vanished while reading (was the file changed?)", self.path
                )
            missing = 9.999e20
            ec.codes_set_double(h, "missingValue", missing)
            vals = np.asarray(ec.codes_get_values(h), dtype=np.float64)
        except CaseError:
            raise
        except Exception as exc:  # noqa: BLE001
            raise CaseError(
                f"a GRIB field cannot be decoded ({_first_line(exc)})", self.path
            ) from None
        finally:
            if h is not None:
                ec.codes_release(h)
        vals[vals == missing] = np.nan
        ny, nx = self.grid_shape
        if vals.size != ny * nx:
            raise CaseError(
                f"a GRIB field has {vals.size} values for a {ny} x {nx} grid", self.path
            )
        if self.transposed:
            return vals.reshape(nx, ny).T
        return vals.reshape(ny, nx)


def _backend_array(fields: _Fields):
    from xarray.backends import BackendArray
    from xarray.core import indexing

    class GribArray(BackendArray):
        def __init__(self, f):
            self.f = f
            self.shape = f.shape
            self.dtype = f.dtype

        def __getitem__(self, key):
            return indexing.explicit_indexing_adapter(
                key, self.shape, indexing.IndexingSupport.BASIC, self.f.decode
            )

    return indexing.LazilyIndexedArray(GribArray(fields))


def _coordinates(path, msg: Message, shape, transposed):
    """Latitudes and longitudes (2-D, rows as decoded) of a message's grid, from eccodes."""
    ec = _eccodes(path)
    with _LOCK, open(path, "rb") as fh:
        ec.codes_grib_multi_support_on()
        try:
            fh.seek(msg.offset)
            h = None
            for _ in range(msg.field + 1):
                if h is not None:
                    ec.codes_release(h)
                h = ec.codes_grib_new_from_file(fh)
            try:
                lat = np.asarray(ec.codes_get_array(h, "latitudes"), dtype=np.float64)
                lon = np.asarray(ec.codes_get_array(h, "longitudes"), dtype=np.float64)
            finally:
                ec.codes_release(h)
        finally:
            ec.codes_grib_multi_support_reset_file(fh)
    if transposed:
        return lat.reshape(shape).T, lon.reshape(shape).T
    return lat.reshape(shape), lon.reshape(shape)


#: grid types whose latitude and longitude are 1-D dimensions
_LATLON_GRIDS = ("regular_ll", "regular_gg")
#: grid keys copied to every variable as GRIB_* attributes (the projection needs them)
_GRID_KEYS = (
    "gridType",
    "resolutionAndComponentFlags",
    "uvRelativeToGrid",
    "shapeOfTheEarth",
    "radius",
    "LaDInDegrees",
    "LoVInDegrees",
    "Latin1InDegrees",
    "Latin2InDegrees",
    "orientationOfTheGridInDegrees",
    "projectionCentreFlag",
    "DxInMetres",
    "DyInMetres",
    "latitudeOfFirstGridPointInDegrees",
    "longitudeOfFirstGridPointInDegrees",
)


def open_grib(path, *, budget=None) -> list:
    """xarray Datasets of a GRIB file, one per (level kind, grid), lazily decoded.

    Each data variable carries GRIB_* attributes (``GRIB_shortName``,
    ``GRIB_paramId``, ``GRIB_typeOfLevel``, ``GRIB_gridType`` and the grid keys
    the projection needs), ``units`` and ``long_name``. Dimensions are
    ``number`` (ensemble members, where there are several), ``valid_time``,
    ``isobaric`` (Pa, isobaric variables only), and ``y``, ``x`` -- or
    ``latitude``, ``longitude`` on lat-lon and Gaussian grids. Data are
    lazily indexed (decoded on access) or, for files above
    :data:`EAGER_LIMIT_BYTES`, dask arrays of one chunk per field.
    """
    usable = _usable_messages(path, scan(path), budget)
    grids: dict[Any, Any] = {}
    wanted = _wanted_short_names()
    datasets: collections.OrderedDict[Any, Any] = collections.OrderedDict()
    stamp = f"{os.path.abspath(path)}-{os.path.getmtime(path)}"
    lazy = sum(int(m.keys.get("numberOfValues") or 0) for m in usable) * 8 > EAGER_LIMIT_BYTES
    for vi, (var_key, ids) in enumerate(_group_variables(usable).items()):
        name, lkind, lval, gsig = var_key[0], var_key[2], var_key[3], var_key[5]
        first = usable[ids[0]]
        shape, transposed = _shape(first.keys)
        if None in shape:
            raise CaseError(f"GRIB grid of {name!r} has no size keys", path, name)
        if gsig not in grids:
            grids[gsig] = (len(grids),) + _coordinates(path, first, shape, transposed)
        axes = _variable_axes(path, usable, ids, lkind, lval, keep=(name or "").lower() in wanted)
        if axes is None:
            continue  # two fields in one cell of a field no role uses: left out
        var, coords = _variable(path, usable, var_key, axes, grids[gsig], transposed)
        if lazy:
            chunks = {d: 1 for d in ("number", "valid_time", "isobaric") if d in var.dims}
            # a name of our own: dask would otherwise pickle the message list to name chunks
            var = var.chunk(chunks, name=f"grib-{stamp}-{vi}")
        ds_key = (lkind, lval if lkind != "isobaric" else None, grids[gsig][0])
        ds = datasets.setdefault(ds_key, {"vars": {}, "coords": {}})
        vname, n = name, 2
        while vname in ds["vars"]:
            vname, n = f"{name}_{n}", n + 1
        ds["vars"][vname] = (var, coords)
    return [ds for (lkind, _, _), parts in datasets.items() for ds in _datasets(lkind, parts)]


def _usable_messages(path, messages: list, budget) -> list:
    """The messages on grids balance-desk reads; refuse a file with none, one too large for
    the memory budget, or one in alternative row scanning."""
    unsupported = collections.Counter(
        m.keys.get("gridType") for m in messages if m.keys.get("gridType") not in SUPPORTED_GRIDS
    )
    usable = [m for m in messages if m.keys.get("gridType") in SUPPORTED_GRIDS]
    if not usable:
        kinds = ", ".join(sorted(str(k) for k in unsupported))
        raise CaseError(
            f"holds only GRIB grids of type {kinds}, which balance-desk cannot use "
            "(regular lat-lon, Gaussian, Lambert conformal, polar stereographic and "
            "Mercator are supported; regrid first)",
            path,
        )
    if budget is not None:
        from .limits import check_level_slice

        for gk in {m.keys.get("md5GridSection") for m in usable}:
            k = next(m.keys for m in usable if m.keys.get("md5GridSection") == gk)
            (ny, nx), _ = _shape(k)
            if ny and nx:
                check_level_slice(path, ny, nx, budget, k.get("shortName"))
    bad_scan = [m for m in usable if m.keys.get("alternativeRowScanning")]
    if bad_scan:
        raise CaseError(
            "uses alternative row scanning (boustrophedon order), which balance-desk does not read",
            path,
            bad_scan[0].keys.get("shortName"),
        )
    return usable


def _group_variables(usable: list) -> collections.OrderedDict:
    """Message numbers by variable: (short name, paramId, level kind, level value (None on
    isobaric levels, which become an axis), step type, grid, concept)."""
    groups: collections.OrderedDict[Any, Any] = collections.OrderedDict()
    for i, m in enumerate(usable):
        k = m.keys
        lkind, lval = _level_of(k)
        var_key = (
            k.get("shortName"),
            k.get("paramId"),
            lkind,
            None if lkind == "isobaric" else lval,
            k.get("stepType"),
            k.get("md5GridSection"),
            _concept_key(k),
        )
        groups.setdefault(var_key, []).append(i)
    return groups


@dataclasses.dataclass
class _Axes:
    """A variable's members, valid times, levels and message number of each cell (-1: none)."""

    members: list
    valid: list
    levels: list
    index: np.ndarray
    references: dict


def _variable_axes(path, usable, ids, lkind, lval, keep: bool) -> _Axes | None:
    """The axes of one variable's messages; None when two messages fill one cell of a
    variable no role uses (``keep`` False), a CaseError when it is one that is used."""
    members = sorted({_member_of(usable[i].keys) for i in ids}, key=lambda v: (v is None, v))
    valid = sorted(
        {
            _datetime(usable[i].keys.get("validityDate"), usable[i].keys.get("validityTime"))
            for i in ids
        }
    )
    levels = (
        sorted({_level_of(usable[i].keys)[1] for i in ids}, reverse=True)
        if lkind == "isobaric"
        else [lval]
    )
    index = np.full((len(members), len(valid), len(levels)), -1, dtype=np.int64)
    refs: dict[Any, Any] = {}
    clash = None
    for i in ids:
        mk = usable[i].keys
        vt = _datetime(mk.get("validityDate"), mk.get("validityTime"))
        cell = (members.index(_member_of(mk)), valid.index(vt), levels.index(_level_of(mk)[1]))
        if index[cell] >= 0 and clash is None:
            clash = vt
        index[cell] = i
        refs.setdefault(vt, set()).add(_datetime(mk.get("dataDate"), mk.get("dataTime")))
    if clash is None:
        return _Axes(members, valid, levels, index, refs)
    if not keep:
        return None
    name = usable[ids[0]].keys.get("shortName")
    raise CaseError(
        f"holds two fields of {name!r} ({lkind}) for the same member, valid "
        f"time {np.datetime_as_string(clash, unit='m')} and level (analysis "
        "and forecast mixed?); split the file by reference time",
        path,
        name,
    )


def _variable(path, usable, var_key, axes: _Axes, grid, transposed):
    """One variable (lazily decoded) and its coordinates; its attributes are those of its
    first message in the file."""
    import xarray as xr

    _, _, lkind, lval, step_type, _, _ = var_key
    gid, lat2d, lon2d = grid
    k = usable[int(axes.index[axes.index >= 0].min())].keys
    shape, _ = _shape(k)
    dims: list[str] = []
    coords: dict[str, Any] = {}
    index = axes.index
    if len(axes.members) > 1:
        dims.append("number")
        coords["number"] = ("number", np.array([-1 if m is None else m for m in axes.members]))
    else:
        index = index[0]
    dims.append("valid_time")
    coords["valid_time"] = ("valid_time", np.array(axes.valid, dtype="datetime64[ns]"))
    coords["reference_time"] = (
        "valid_time",
        np.array([min(axes.references[v]) for v in axes.valid], dtype="datetime64[ns]"),
    )
    if lkind == "isobaric":
        dims.append("isobaric")
        coords["isobaric"] = (
            "isobaric",
            np.array(axes.levels, dtype=np.float64),
            {
                "units": "Pa",
                "standard_name": "air_pressure",
                "long_name": "pressure (isobaric level)",
            },
        )
    else:
        index = index[..., 0]
        coords[lkind] = ((), lval, {"units": "m" if lkind.startswith("height") else "1"})
    grid_shape = (shape[1], shape[0]) if transposed else shape
    fields = _Fields(path, usable, index if index.ndim else index[None], grid_shape, transposed)
    coords.update(_horizontal_coords(k["gridType"], lat2d, lon2d))
    dims += ["latitude", "longitude"] if k["gridType"] in _LATLON_GRIDS else ["y", "x"]
    attrs = {
        "units": k.get("units") or "",
        "GRIB_shortName": k.get("shortName"),
        "GRIB_paramId": k.get("paramId"),
        "GRIB_typeOfLevel": k.get("typeOfLevel"),
        "GRIB_level": None if lkind == "isobaric" else lval,
        "GRIB_stepType": step_type,
        "GRIB_edition": k.get("edition"),
        "GRIB_derivedForecast": k.get("derivedForecast"),
        "GRIB_missing_fields": int(np.count_nonzero(axes.index < 0)),
        "GRIB_grid_id": gid,
    }
    attrs.update({f"GRIB_{key}": k[key] for key in _GRID_KEYS if k.get(key) is not None})
    attrs = {a: v for a, v in attrs.items() if v is not None}
    return xr.Variable(dims, _backend_array(fields), attrs), coords


def _horizontal_coords(grid_type: str, lat2d, lon2d) -> dict:
    """Latitude and longitude: 1-D dimensions on lat-lon and Gaussian grids, else 2-D on y, x."""
    lat_attrs = {"units": "degrees_north", "standard_name": "latitude"}
    lon_attrs = {"units": "degrees_east", "standard_name": "longitude"}
    if grid_type in _LATLON_GRIDS:
        return {
            "latitude": ("latitude", lat2d[:, 0], lat_attrs),
            "longitude": ("longitude", lon2d[0, :], lon_attrs),
        }
    return {"latitude": (("y", "x"), lat2d, lat_attrs), "longitude": (("y", "x"), lon2d, lon_attrs)}


def _datasets(lkind: str, parts: dict) -> list:
    """The Datasets of one level kind and grid: variables whose time or level axes differ
    go to datasets of their own."""
    import xarray as xr

    buckets: list[Any] = []
    for vname, (var, coords) in parts["vars"].items():
        for b in buckets:
            if all(c not in b["coords"] or _same_coord(b["coords"][c], coords[c]) for c in coords):
                b["vars"][vname] = var
                b["coords"].update(coords)
                break
        else:
            buckets.append({"vars": {vname: var}, "coords": dict(coords)})
    out = []
    for b in buckets:
        ds = xr.Dataset(dict(b["vars"]), coords=dict(b["coords"]))
        ds.attrs["GRIB_typeOfLevel"] = lkind
        out.append(ds)
    return out


def _same_coord(a, b) -> bool:
    va, vb = np.asarray(a[1]), np.asarray(b[1])
    return a[0] == b[0] and va.shape == vb.shape and bool(np.all(va == vb))
