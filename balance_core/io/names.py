"""How variables and coordinates are recognised in model output.

A variable gets a role (height, u, surface pressure, ...) only if three things
agree:

1. **Its kind of level.** Heights, winds, temperature and omega come from
   pressure levels; surface pressure and orography from the surface; mean sea
   level pressure from mean sea level; 10 m and 2 m fields from a height above
   the ground. The kind comes from the GRIB ``typeOfLevel`` (WMO-No. 306, GRIB2
   code table 4.5, as eccodes names it), or for NetCDF and Zarr from the
   vertical coordinate (a pressure dimension; a ``height`` coordinate in m, CF
   standard name ``height``), from a standard name that implies a level
   (``surface_air_pressure``), or from a wgrib2-style name suffix
   (``PRES_surface``, ``UGRD_10maboveground``). A variable with no vertical
   information at all is "single-level": unambiguous names count there, but an
   ambiguous short name (``pres``, ``t``, ``u``, ``z``) counts only together with
   an explicit level kind.
2. **Its name.** CF standard_name first (CF Conventions 1.11, standard name
   table), then the short names of the major centres' output (GRIB shortName as
   eccodes decodes it, CMIP, NCEP and ECMWF NetCDF conversions), then long names,
   case-insensitively. Where one short name means two things (ECMWF's ``w`` is
   omega in Pa s-1, WRF's ``w`` is m s-1), the units decide.
3. **Nothing rules it out.** A CF standard name that is not one of the role's
   (``sea_water_x_velocity`` for ``u``, ``air_potential_temperature`` for
   ``t``), a standard-name modifier (``... standard_error``), a statistic in
   ``cell_methods`` (standard deviation, variance, extremes) or in the long name
   (spread, anomaly, potential temperature), an accumulated or averaged GRIB
   field, or an ensemble spread, whatever the short name says.

Where several candidates remain, the first by a stated preference wins
(:func:`preference`): an explicit level kind before single-level, standard name
before short name before long name, and the order of the role's short names
(``prmsl`` before ``mslet``). The case's notes say which was taken.
"""

from __future__ import annotations

import dataclasses
import re

__all__ = [
    "Role",
    "ROLES",
    "LEVEL_ROLES",
    "SURFACE_ROLES",
    "PRESSURE_COORD_NAMES",
    "MEMBER_DIM_NAMES",
    "TIME_NAMES",
    "LAT_NAMES",
    "LON_NAMES",
    "LevelKind",
    "PRESSURE",
    "SURFACE",
    "MEAN_SEA",
    "ABOVE_GROUND",
    "SINGLE",
    "OTHER",
    "ruled_out",
    "name_level_hint",
    "REQUIRED_ROLES",
]

# kinds of level
PRESSURE = "pressure"
SURFACE = "surface"
MEAN_SEA = "mean sea level"
ABOVE_GROUND = "height above ground"
SINGLE = "single level"  # a field without any vertical information
OTHER = "other level"  # cloud top, tropopause, maximum wind, model levels, ...


@dataclasses.dataclass(frozen=True)
class LevelKind:
    """The kind of level a variable lies on, and its value where one is given."""

    kind: str
    value: float | None = None
    #: what the file calls it (GRIB typeOfLevel, or the coordinate's name)
    label: str = ""

    def describe(self) -> str:
        if self.kind == ABOVE_GROUND and self.value is not None:
            return f"{self.value:g} m above ground"
        if self.kind == OTHER:
            return f"{self.label or 'other'} level"
        return self.kind


@dataclasses.dataclass(frozen=True)
class Role:
    """What a variable is for balance-desk, and how to find it."""

    name: str
    #: plain words for notes and messages
    words: str
    standard_names: tuple
    short_names: tuple
    long_names: tuple
    #: the dimensionality it must convert to, as a pint unit string
    target_units: str
    #: accepted spellings, said in error messages
    accepted: str
    #: kinds of level the role may come from
    levels: tuple
    #: short names that count only on the role's first kind of level (``pres`` only at
    #: the surface, ``u`` only at 10 m above the ground)
    ambiguous: tuple = ()
    #: for ABOVE_GROUND: the height (m) the field must be at
    above_ground: float | None = None


def _r(name, words, std, short, long, target, accepted, levels, ambiguous=(), above=None):
    low = lambda xs: tuple(s.lower() for s in xs)  # noqa: E731
    return Role(
        name,
        words,
        tuple(std),
        low(short),
        low(long),
        target,
        accepted,
        tuple(levels),
        low(ambiguous),
        above,
    )


_P = (PRESSURE,)

#: Variables on pressure levels.
LEVEL_ROLES = (
    _r(
        "height",
        "geopotential height",
        ["geopotential_height"],
        ["gh", "hgt", "zg", "height", "geopotential_height"],
        ["geopotential height", "geopotential height (gpm)"],
        "m",
        "m, gpm, dam, km (geopotential height)",
        _P,
    ),
    _r(
        "geopotential",
        "geopotential",
        ["geopotential"],
        ["z", "phi", "geopotential", "geopot"],
        ["geopotential"],
        "m**2 s**-2",
        "m2 s-2 or m**2 s**-2 (geopotential)",
        _P,
    ),
    _r(
        "u",
        "eastward wind",
        ["eastward_wind"],
        ["u", "ua", "ugrd", "uwnd", "u_wind"],
        ["u component of wind", "u-component of wind", "eastward wind", "zonal wind"],
        "m s-1",
        "m s-1, m/s, knot, km h-1",
        _P,
    ),
    _r(
        "v",
        "northward wind",
        ["northward_wind"],
        ["v", "va", "vgrd", "vwnd", "v_wind"],
        ["v component of wind", "v-component of wind", "northward wind", "meridional wind"],
        "m s-1",
        "m s-1, m/s, knot, km h-1",
        _P,
    ),
    _r(
        "x_wind",
        "grid-relative x wind",
        ["x_wind", "grid_eastward_wind"],
        ["x_wind"],
        ["x wind", "grid-relative u"],
        "m s-1",
        "m s-1, m/s, knot",
        _P,
    ),
    _r(
        "y_wind",
        "grid-relative y wind",
        ["y_wind", "grid_northward_wind"],
        ["y_wind"],
        ["y wind", "grid-relative v"],
        "m s-1",
        "m s-1, m/s, knot",
        _P,
    ),
    _r(
        "omega",
        "vertical motion (omega)",
        ["lagrangian_tendency_of_air_pressure"],
        ["w", "omega", "wap", "vvel", "omg"],
        [
            "vertical velocity",
            "pressure vertical velocity",
            "omega",
            "vertical velocity (pressure)",
        ],
        "Pa s-1",
        "Pa s-1, Pa/s, hPa s-1, hPa h-1",
        _P,
    ),
    _r(
        "w",
        "vertical velocity",
        ["upward_air_velocity"],
        ["w", "wa", "wz", "dzdt"],
        ["geometric vertical velocity", "upward air velocity", "vertical velocity (geometric)"],
        "m s-1",
        "m s-1, m/s, cm s-1",
        _P,
    ),
    _r(
        "temperature",
        "temperature",
        ["air_temperature"],
        ["t", "ta", "tmp", "temp", "air", "temperature"],
        ["temperature", "air temperature"],
        "K",
        "K, degC, degree_Celsius",
        _P,
    ),
)

_SFC = (SURFACE, SINGLE)

#: Variables without a pressure level (surface and near-surface fields).
SURFACE_ROLES = (
    _r(
        "msl",
        "mean sea level pressure",
        ["air_pressure_at_mean_sea_level", "air_pressure_at_sea_level"],
        ["prmsl", "msl", "mslp", "slp", "psl", "pmsl", "mslet"],
        ["mean sea level pressure", "pressure reduced to msl", "sea level pressure"],
        "Pa",
        "Pa, hPa, millibar, mb",
        (MEAN_SEA, SINGLE),
    ),
    _r(
        "surface_pressure",
        "surface pressure",
        ["surface_air_pressure"],
        ["sp", "ps", "psfc", "surface_pressure", "pres"],
        ["surface pressure"],
        "Pa",
        "Pa, hPa, millibar",
        _SFC,
        ambiguous=["pres"],
    ),
    _r(
        "orography",
        "surface geopotential",
        ["surface_geopotential"],
        ["orog_geopotential", "phis", "zs_geopotential", "z"],
        ["surface geopotential"],
        "m**2 s**-2",
        "m2 s-2 (surface geopotential)",
        _SFC,
        ambiguous=["z"],
    ),
    _r(
        "surface_height",
        "orography",
        ["surface_altitude"],
        ["orog", "zs", "hgts", "z_sfc", "terrain", "gh", "hgt"],
        ["orography", "terrain height", "surface altitude", "model terrain height"],
        "m",
        "m (surface altitude)",
        _SFC,
        ambiguous=["gh", "hgt"],
    ),
    _r(
        "u10",
        "10 m eastward wind",
        ["eastward_wind"],
        ["10u", "u10", "uas", "u10m", "u", "ugrd"],
        ["10 metre u wind component", "10 metre u-component of wind"],
        "m s-1",
        "m s-1, m/s, knot",
        (ABOVE_GROUND, SURFACE, SINGLE),
        ambiguous=["u", "ugrd"],
        above=10.0,
    ),
    _r(
        "v10",
        "10 m northward wind",
        ["northward_wind"],
        ["10v", "v10", "vas", "v10m", "v", "vgrd"],
        ["10 metre v wind component", "10 metre v-component of wind"],
        "m s-1",
        "m s-1, m/s, knot",
        (ABOVE_GROUND, SURFACE, SINGLE),
        ambiguous=["v", "vgrd"],
        above=10.0,
    ),
    _r(
        "x_wind10",
        "10 m grid-relative x wind",
        ["x_wind"],
        [],
        [],
        "m s-1",
        "m s-1, m/s, knot",
        (ABOVE_GROUND,),
        above=10.0,
    ),
    _r(
        "y_wind10",
        "10 m grid-relative y wind",
        ["y_wind"],
        [],
        [],
        "m s-1",
        "m s-1, m/s, knot",
        (ABOVE_GROUND,),
        above=10.0,
    ),
    _r(
        "t2m",
        "2 m temperature",
        ["air_temperature"],
        ["2t", "t2m", "tas", "t2", "t", "tmp"],
        ["2 metre temperature"],
        "K",
        "K, degC",
        (ABOVE_GROUND, SURFACE, SINGLE),
        ambiguous=["t", "tmp"],
        above=2.0,
    ),
    _r(
        "land_mask",
        "land-sea mask",
        ["land_binary_mask", "land_area_fraction"],
        ["lsm", "landmask", "land_mask", "lsmask", "slm", "sftlf", "land"],
        ["land-sea mask", "land sea mask", "land binary mask", "land cover (1=land, 0=sea)"],
        "1",
        "1 (a fraction of land) or %",
        _SFC,
    ),
)

ROLES = {r.name: r for r in LEVEL_ROLES + SURFACE_ROLES}

#: Roles without which no budget can be computed: a failing one is bad input.
REQUIRED_ROLES = ("height", "geopotential", "u", "v", "x_wind", "y_wind")

#: Names of a pressure-level coordinate (CF standard_name air_pressure also counts).
PRESSURE_COORD_NAMES = (
    "isobaricinhpa",
    "isobaricinpa",
    "isobaric",
    "level",
    "plev",
    "lev",
    "pressure",
    "pressure_level",
    "pres",
    "p",
    "lv_isbl0",
)
#: Names of an ensemble member dimension (CF standard_name realization also counts).
MEMBER_DIM_NAMES = ("number", "member", "realization", "ensemble", "ens", "ensemble_member", "mem")
TIME_NAMES = ("time", "valid_time", "t", "times")
LAT_NAMES = ("latitude", "lat", "nav_lat", "xlat", "lat2d")
LON_NAMES = ("longitude", "lon", "nav_lon", "xlong", "lon2d")
#: Names of a coordinate giving the height above the ground (m).
HEIGHT_COORD_NAMES = (
    "height",
    "heightaboveground",
    "height_above_ground",
    "height2m",
    "height10m",
    "z_above_ground",
)

#: GRIB level types (eccodes typeOfLevel) and the kind they are.
GRIB_LEVEL_KINDS = {
    "isobaricInhPa": PRESSURE,
    "isobaricInPa": PRESSURE,
    "surface": SURFACE,
    "meanSea": MEAN_SEA,
    "heightAboveGround": ABOVE_GROUND,
}
#: Standard names that say where a field lies even without a vertical coordinate.
STANDARD_NAME_LEVELS = {
    "air_pressure_at_mean_sea_level": MEAN_SEA,
    "air_pressure_at_sea_level": MEAN_SEA,
    "surface_air_pressure": SURFACE,
    "surface_altitude": SURFACE,
    "surface_geopotential": SURFACE,
    "land_binary_mask": SURFACE,
    "land_area_fraction": SURFACE,
}

#: Statistics in cell_methods that make a field something other than the quantity itself.
_STATISTICS = (
    "standard_deviation",
    "variance",
    "maximum",
    "minimum",
    "range",
    "sum",
    "mean_absolute",
    "root_mean_square",
    "anomaly",
)
#: Words in a long name (or description) that rule a field out of every role (whole words,
#: or word beginnings where they end in a hyphen-like stem such as "anomal").
_RULED_OUT = re.compile(
    r"\b(standard deviation|std dev|spread|variance|anomal\w*|errors?|potential temperature|"
    r"equivalent|dew ?point|wet bulb|virtual|climatolog\w*|increments?|departures?|sea water|"
    r"ocean\w*|soil|ice|waves?|probability|percentiles?|maximum|minimum|gusts?|storm motion)\b"
)
#: wgrib2-style NetCDF names: BASE_surface, BASE_meansealevel, BASE_10maboveground.
_SUFFIX = re.compile(
    r"^(?P<base>[A-Za-z0-9]+)_(?:(?P<sfc>surface)|(?P<msl>meansealevel)|"
    r"(?P<hag>\d+(?:\.\d+)?)maboveground)$",
    re.IGNORECASE,
)


def ruled_out(role: Role, attrs: dict) -> str | None:
    """Why a variable with these attributes cannot have ``role`` (None if nothing rules it out)."""
    std = str(attrs.get("standard_name") or "").strip().lower()
    if " " in std:
        return f"its standard name {std!r} carries a modifier (not the quantity itself)"
    if std and std not in role.standard_names:
        return f"its standard name is {std!r}"
    cell = str(attrs.get("cell_methods") or "").lower()
    for word in _STATISTICS:
        if word in cell:
            return f"its cell_methods say {cell!r}"
    for key in ("long_name", "description"):
        text = str(attrs.get(key) or "").lower()
        if _RULED_OUT.search(text):
            return f"its {key} is {text!r}"
    step = attrs.get("GRIB_stepType")
    if step not in (None, "", "instant"):
        return f"it is a GRIB {step} field, not an instantaneous one"
    derived = attrs.get("GRIB_derivedForecast")
    if derived not in (None, "", 0, 1):
        return f"it is a GRIB derived forecast of type {derived} (spread or other statistic)"
    return None


def name_level_hint(name: str):
    """(base name, LevelKind) from a wgrib2-style NetCDF name, or (name, None)."""
    m = _SUFFIX.match(name)
    if not m:
        return name, None
    if m.group("sfc"):
        return m.group("base"), LevelKind(SURFACE, None, "surface")
    if m.group("msl"):
        return m.group("base"), LevelKind(MEAN_SEA, None, "meansealevel")
    return m.group("base"), LevelKind(ABOVE_GROUND, float(m.group("hag")), "maboveground")


def preference(match: int, role: Role, key: str, level: LevelKind) -> tuple:
    """Sort key of a candidate: lower is preferred (see the module docstring)."""
    order = role.short_names.index(key) if key in role.short_names else len(role.short_names)
    return (level.kind == SINGLE, match, order)
