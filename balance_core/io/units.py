"""Unit conversion through pint with the cf_xarray (UDUNITS-style) registry.

No hand-written conversion table: a unit string is parsed by the registry
and converted to the SI unit the core wants. Two kinds of help are given
before parsing, both spelling aliases rather than conversions: meteorological
spellings the registry would misread (``mb`` is a millibar here, not a
millibarn) or does not know (``gpm``, geopotential metres).
"""

from __future__ import annotations

import functools

import numpy as np

from .errors import CaseError

__all__ = ["registry", "linear_conversion", "convert", "parse"]

#: Spellings the registry misreads or lacks, mapped to what they mean.
ALIASES = {
    "mb": "millibar",
    "mbar": "millibar",
    "gpm": "m",
    "gp m": "m",
    "m (gpm)": "m",
    "deg c": "degC",
    "c": "degC",
    "celsius": "degC",
    "kts": "knot",
    "kt": "knot",
    "pa/s": "Pa s-1",
    "pascal/s": "Pa s-1",
    "(0 - 1)": "1",  # eccodes' spelling of a fraction
    "0-1": "1",
    "fraction": "1",
    "proportion": "1",
}


@functools.lru_cache(maxsize=1)
def registry():
    """The cf_xarray pint registry (UDUNITS spellings such as ``m s-1``).

    Importing cf_xarray.units makes its registry pint's application registry
    for the whole process; that would change the units of any other library
    using pint (MetPy among them), so the previous one is put back.
    """
    import logging

    import pint

    previous = pint.application_registry.get()
    quiet = logging.getLogger("pint")
    level = quiet.level
    quiet.setLevel(logging.ERROR)  # cf_xarray redefines a few units on purpose
    try:
        import cf_xarray.units
    finally:
        quiet.setLevel(level)
    pint.application_registry.set(previous)
    return cf_xarray.units.units


def parse(unit: str):
    """A pint Unit for a unit string, after the spelling aliases."""
    text = unit.strip()
    text = ALIASES.get(text.lower(), text)
    return registry().parse_units(text)


def _canonical(unit: str) -> str:
    """A spelling of a unit with the exponent and division marks made uniform.

    Only spelling: ``m s**-1``, ``m s^-1``, ``m/s`` and ``m s-1`` are one text, so a
    unit already in the target's spelling needs no registry (loading pint and
    cf_xarray costs about 0.3 s, more than decoding a small GRIB file).
    """
    text = ALIASES.get(unit.strip().lower(), unit.strip())
    text = text.replace("**", "").replace("^", "").replace("·", " ").replace(".", " ")
    if text.count("/") == 1:
        num, den = text.split("/")
        den_parts = den.split()
        if len(den_parts) == 1 and den_parts[0].isalpha():
            text = f"{num.strip()} {den_parts[0]}-1"
    return " ".join(text.split())


@functools.lru_cache(maxsize=256)
def linear_conversion(unit: str, target: str):
    """(scale, offset) such that value_in_target = scale * value + offset.

    Raises ValueError when the unit cannot be parsed or has the wrong
    dimensionality.
    """
    if _canonical(unit) == _canonical(target):
        return 1.0, 0.0
    ureg = registry()
    src = parse(unit)
    dst = ureg.parse_units(target)
    zero = ureg.Quantity(0.0, src).to(dst).magnitude
    one = ureg.Quantity(1.0, src).to(dst).magnitude
    return float(one - zero), float(zero)


def convert(values, unit, target: str, *, path=None, variable=None, accepted: str = ""):
    """Convert ``values`` (numpy or dask array, or xarray) from ``unit`` to ``target``.

    The conversion stays lazy for dask arrays (it is a scale and an offset).
    Missing, unknown or mismatched units raise :class:`CaseError` naming the
    variable and the accepted spellings.
    """
    hint = f" (accepted: {accepted})" if accepted else ""
    if unit is None or str(unit).strip() == "":
        raise CaseError(f"has no units attribute{hint}", path, variable)
    try:
        scale, offset = linear_conversion(str(unit), target)
    except Exception:  # noqa: BLE001 - pint raises several kinds
        raise CaseError(
            f"has units {unit!r}, which cannot be read as {target}{hint}", path, variable
        ) from None
    if scale == 1.0 and offset == 0.0:
        return values
    out = values * scale
    if offset:
        out = out + offset
    return out


def dimensionality_matches(unit, target: str) -> bool:
    """True when ``unit`` converts to ``target`` (used to tell omega from w)."""
    try:
        linear_conversion(str(unit), target)
        return True
    except Exception:  # noqa: BLE001
        return False


#: what a decoder raises on stored bytes it cannot decode (a damaged Zarr chunk: zstd's
#: RuntimeError, numcodecs' ValueError; a damaged NetCDF/HDF5 block: OSError; zlib.error)
_DECODING_ERRORS = (RuntimeError, ValueError, OSError, EOFError)


def to_numpy(values):
    """A plain array from numpy, dask or xarray data, computed in the calling thread.

    Dask's default scheduler would start a thread pool (and look for a
    distributed client) for every small slice; the io layer reads one field at
    a time, and the core parallelises its own work. Stored data that cannot be
    decoded (a damaged chunk or block) is a :class:`CaseError`, not a crash.
    """
    import zlib

    try:
        return _computed(values)
    except CaseError:
        raise
    except (*_DECODING_ERRORS, zlib.error) as exc:
        name = getattr(values, "name", None)
        raise CaseError(
            "holds data that cannot be decoded: damaged or truncated "
            f"({type(exc).__name__}: {str(exc)[:200]})",
            getattr(values, "encoding", {}).get("source"),
            name if isinstance(name, str) else None,
        ) from None


def _computed(values):
    import sys

    if "dask" not in sys.modules:  # nothing lazy can be dask-backed
        return np.asarray(getattr(values, "values", values))
    import dask
    import dask.local

    # a callable, not the name "synchronous": naming it makes dask import distributed
    with dask.config.set(scheduler=dask.local.get_sync):
        return np.asarray(getattr(values, "values", values))
