"""Bounded work: a file is refused before it is read when one level would not fit in memory.

A small file can declare enormous dimensions (a NetCDF4 file of a few hundred
kilobytes may declare a 100 000 x 100 000 grid whose chunks were never
written). The core works one level and time at a time, but on every point of
it: about :data:`FIELDS_PER_LEVEL` float64 fields of one level are alive at once
(the inputs around the level, every term of both equations, the derived views
and the wind diagnostics). So the declared sizes are read first, from the
file's metadata alone, and a file whose level slice would need more than the
memory budget is refused with a sentence that names the size.

The budget is a quarter of the machine's physical memory, or the
``BALANCE_DESK_MEMORY_BUDGET`` environment variable (bytes, or with a suffix
K, M, G, T: ``4G``), or the ``memory_budget`` argument of
:func:`balance_core.io.open_case`.
"""

from __future__ import annotations

import os

from .. import settings
from .errors import CaseError

__all__ = ["memory_budget", "parse_size", "check_declared", "FIELDS_PER_LEVEL", "format_size"]

#: float64 fields of one level that are alive at once while one level is analyzed
#: (measured: bench/core.py's peak memory is under 2 times the 13 input slices of the budget
#: alone; the wind diagnostics, the views and the statistics bring it to a few dozen).
FIELDS_PER_LEVEL = 64
#: Largest 1-D coordinate, in values, that may be read to build an index (xarray loads
#: dimension coordinates when it opens a file).
MAX_COORDINATE = 50_000_000

_SUFFIX = {"": 1, "B": 1, "K": 2**10, "M": 2**20, "G": 2**30, "T": 2**40}


def parse_size(text) -> int:
    """Bytes from '4G', '512M', '1e9' or a number; ValueError if not a positive size."""
    t = str(text).strip().upper().removesuffix("IB").removesuffix("B") or "0"
    unit = t[-1] if t[-1] in _SUFFIX else ""
    num = t[:-1] if unit else t
    val = float(num) * _SUFFIX[unit]
    if not val > 0 or val != val or val == float("inf"):
        raise ValueError(f"not a positive size: {text!r}")
    return int(val)


def memory_budget(explicit=None) -> int:
    """The memory budget in bytes (see the module docstring)."""
    if explicit is not None:
        return parse_size(explicit)
    env = settings.text("BALANCE_DESK_MEMORY_BUDGET")
    if env:
        try:
            return parse_size(env)
        except ValueError:
            raise CaseError(
                f"BALANCE_DESK_MEMORY_BUDGET={env!r} is not a size (give bytes or "
                "a number with K, M, G or T)"
            ) from None
    try:
        total = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        total = 8 * 2**30
    return int(total // 4)


def format_size(n: float) -> str:
    for unit, k in (("TB", 2**40), ("GB", 2**30), ("MB", 2**20), ("KB", 2**10)):
        if n >= k:
            return f"{n / k:.3g} {unit}"
    return f"{n:.0f} bytes"


def check_level_slice(path, ny: int, nx: int, budget: int, variable=None):
    """Refuse a grid whose one-level working set exceeds the budget."""
    need = int(ny) * int(nx) * 8 * FIELDS_PER_LEVEL
    if need > budget:
        raise CaseError(
            f"declares a {ny} x {nx} grid: analysing one level would need about "
            f"{format_size(need)} of memory, more than the budget of "
            f"{format_size(budget)} (set BALANCE_DESK_MEMORY_BUDGET to allow more)",
            path,
            variable,
        )


def check_declared(path, kind: str, budget: int):
    """Read only the metadata of a NetCDF file or Zarr store and refuse oversized ones."""
    if kind == "netcdf":
        dims, variables = _netcdf_shapes(path)
    elif kind == "zarr":
        dims, variables = _zarr_shapes(path)
    else:
        return
    for name, size in dims.items():
        if name in variables and len(variables[name]) == 1 and size > MAX_COORDINATE:
            raise CaseError(
                f"declares a coordinate of {size} values, too many to read "
                f"(at most {MAX_COORDINATE})",
                path,
                name,
            )
    for name, shape in variables.items():
        if len(shape) >= 2:
            check_level_slice(path, shape[-2], shape[-1], budget, name)


def _netcdf_shapes(path):
    try:
        import netCDF4

        with netCDF4.Dataset(path) as ds:
            dims = {n: len(d) for n, d in ds.dimensions.items()}
            return dims, {n: tuple(v.shape) for n, v in _walk_nc(ds)}
    except ImportError:
        pass
    except OSError:
        return {}, {}  # the real open says what is wrong with the file
    try:
        import h5py

        with h5py.File(path, "r") as f:
            shapes = {}
            f.visititems(
                lambda n, o: (
                    shapes.__setitem__(n, tuple(o.shape)) if isinstance(o, h5py.Dataset) else None
                )
            )
            return {}, shapes
    except Exception:  # noqa: BLE001 - not HDF5 either: the real open reports it
        return {}, {}


def _walk_nc(ds):
    yield from ds.variables.items()
    for g in ds.groups.values():
        yield from _walk_nc(g)


def _zarr_shapes(path):
    try:
        import zarr

        g = zarr.open_group(path, mode="r")
        shapes = {}
        for name, arr in g.arrays():
            shapes[name] = tuple(arr.shape)
        dims = {}
        for name, shape in shapes.items():
            if len(shape) == 1:
                dims[name] = shape[0]
        return dims, shapes
    except Exception:  # noqa: BLE001 - the real open reports what is wrong
        return {}, {}
