"""The xarray edge of the core: read model output, hand numpy arrays and a Grid to the core.

``open_case`` reads NetCDF (netCDF4 or h5netcdf), GRIB1/GRIB2 (eccodes, through
io/grib.py) and Zarr, one file or several (valid times concatenated), lazily with
dask chunks. Variables are recognised by CF standard_name first, then by the
common short and long names of the major centres' output; units go through
pint. Projected grids get their map factors and meridian convergence from
pyproj, and grid-relative winds are rotated to east and north.

Import order matters with the current binary wheels: pyproj is imported here
before anything can load eccodes (see DEVELOPERS.md).
"""

import pyproj  # noqa: F401  (before eccodes: the other order crashes at exit)

from .analysis import (
    SEA_LEVEL,
    analyze_case,
    analyze_systems,
    diagnostics_for,
    is_sea_level,
    level_words,
    sea_level_diagnostics_for,
    track_systems,
)
from .case import Case, iso, open_case
from .errors import CaseError

__all__ = [
    "Case",
    "CaseError",
    "open_case",
    "analyze_case",
    "diagnostics_for",
    "iso",
    "analyze_systems",
    "track_systems",
    "SEA_LEVEL",
    "is_sea_level",
    "level_words",
    "sea_level_diagnostics_for",
]
