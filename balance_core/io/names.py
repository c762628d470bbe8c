"""How variables and coordinates are recognised in model output.

CF standard_name first (CF Conventions 1.11, standard name table), then the
short names and long names that the major centres' output uses (GRIB shortName
as decoded by cfgrib/eccodes, CMIP variable names, NCEP and ECMWF NetCDF
conversions), case-insensitively. Where one short name means two things
(ECMWF's ``w`` is omega in Pa s-1, WRF's ``w`` is m s-1; ``z`` is geopotential,
not height), the units decide; see :func:`classify`.
"""

from __future__ import annotations

import dataclasses

__all__ = ["Role", "ROLES", "LEVEL_ROLES", "SURFACE_ROLES", "PRESSURE_COORD_NAMES",
           "MEMBER_DIM_NAMES", "TIME_NAMES", "LAT_NAMES", "LON_NAMES"]


@dataclasses.dataclass(frozen=True)
class Role:
    """What a variable is for balance-desk, and how to find it."""

    name: str
    standard_names: tuple
    short_names: tuple
    long_names: tuple
    #: the dimensionality it must convert to, as a pint dimensionality string
    target_units: str
    #: accepted spellings, said in error messages
    accepted: str


def _r(name, std, short, long, target, accepted):
    return Role(name, tuple(std), tuple(s.lower() for s in short), tuple(s.lower() for s in long),
                target, accepted)


#: Variables on pressure levels.
LEVEL_ROLES = (
    _r("height", ["geopotential_height"], ["gh", "hgt", "zg", "height", "geopotential_height"],
       ["geopotential height", "geopotential height (gpm)"], "m",
       "m, gpm, dam, km (geopotential height)"),
    _r("geopotential", ["geopotential"], ["z", "phi", "geopotential", "geopot"],
       ["geopotential"], "m**2 s**-2", "m2 s-2 or m**2 s**-2 (geopotential)"),
    _r("u", ["eastward_wind"], ["u", "ua", "ugrd", "uwnd", "u_wind"],
       ["u component of wind", "u-component of wind", "eastward wind", "zonal wind"],
       "m s-1", "m s-1, m/s, knot, km h-1"),
    _r("v", ["northward_wind"], ["v", "va", "vgrd", "vwnd", "v_wind"],
       ["v component of wind", "v-component of wind", "northward wind", "meridional wind"],
       "m s-1", "m s-1, m/s, knot, km h-1"),
    _r("x_wind", ["x_wind", "grid_eastward_wind"], ["x_wind"], ["x wind", "grid-relative u"],
       "m s-1", "m s-1, m/s, knot"),
    _r("y_wind", ["y_wind", "grid_northward_wind"], ["y_wind"], ["y wind", "grid-relative v"],
       "m s-1", "m s-1, m/s, knot"),
    _r("omega", ["lagrangian_tendency_of_air_pressure"],
       ["w", "omega", "wap", "vvel", "omg"],
       ["vertical velocity", "pressure vertical velocity", "omega", "vertical velocity (pressure)"],
       "Pa s-1", "Pa s-1, Pa/s, hPa s-1, hPa h-1"),
    _r("w", ["upward_air_velocity"], ["w", "wa", "wz", "dzdt"],
       ["geometric vertical velocity", "upward air velocity", "vertical velocity (geometric)"],
       "m s-1", "m s-1, m/s, cm s-1"),
    _r("temperature", ["air_temperature"], ["t", "ta", "tmp", "temp", "air", "temperature"],
       ["temperature", "air temperature"], "K", "K, degC, degree_Celsius"),
)

#: Variables without a pressure level (surface and near-surface fields).
SURFACE_ROLES = (
    _r("msl", ["air_pressure_at_mean_sea_level", "air_pressure_at_sea_level"],
       ["msl", "prmsl", "slp", "mslp", "psl", "mslet"],
       ["mean sea level pressure", "pressure reduced to msl", "sea level pressure"],
       "Pa", "Pa, hPa, millibar, mb"),
    _r("surface_pressure", ["surface_air_pressure"], ["sp", "ps", "psfc", "pres", "surface_pressure"],
       ["surface pressure"], "Pa", "Pa, hPa, millibar"),
    _r("orography", ["surface_geopotential"], ["orog_geopotential", "phis", "zs_geopotential"],
       ["surface geopotential"], "m**2 s**-2", "m2 s-2 (surface geopotential)"),
    _r("surface_height", ["surface_altitude"], ["orog", "zs", "hgts", "z_sfc", "terrain"],
       ["orography", "terrain height", "surface altitude", "model terrain height"], "m",
       "m (surface altitude)"),
    _r("u10", [], ["u10", "10u", "uas", "u10m"], ["10 metre u wind component",
                                                  "10 metre u-component of wind"],
       "m s-1", "m s-1, m/s, knot"),
    _r("v10", [], ["v10", "10v", "vas", "v10m"], ["10 metre v wind component",
                                                  "10 metre v-component of wind"],
       "m s-1", "m s-1, m/s, knot"),
    _r("t2m", [], ["t2m", "2t", "tas", "t2"], ["2 metre temperature"], "K", "K, degC"),
    _r("land_mask", ["land_binary_mask", "land_area_fraction"],
       ["lsm", "landmask", "land_mask", "lsmask", "slm", "sftlf", "land"],
       ["land-sea mask", "land sea mask", "land binary mask", "land cover (1=land, 0=sea)"], "1",
       "1 (a fraction of land) or %"),
)

ROLES = {r.name: r for r in LEVEL_ROLES + SURFACE_ROLES}

#: Names of a pressure-level coordinate (CF standard_name air_pressure also counts).
PRESSURE_COORD_NAMES = ("isobaricinhpa", "isobaricinpa", "level", "plev", "lev", "pressure",
                        "pressure_level", "pres", "p", "lv_isbl0", "isobaric")
#: Names of an ensemble member dimension (CF standard_name realization also counts).
MEMBER_DIM_NAMES = ("number", "member", "realization", "ensemble", "ens", "ensemble_member",
                    "mem")
TIME_NAMES = ("time", "valid_time", "t", "times")
LAT_NAMES = ("latitude", "lat", "nav_lat", "xlat", "lat2d")
LON_NAMES = ("longitude", "lon", "nav_lon", "xlong", "lon2d")
