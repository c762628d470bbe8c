"""Write small GRIB2 files with eccodes for the tests (Lambert conformal, polar
stereographic and regular lat-lon grids on pressure levels).

Key names and meanings follow the WMO GRIB2 templates as eccodes exposes them
(WMO-No. 306, template 3.30 Lambert conformal, 3.20 polar stereographic).
"""

import eccodes
import numpy as np
import pyproj  # noqa: F401  (before eccodes: the other order crashes at exit)

PARAMS = {  # name: (discipline, parameterCategory, parameterNumber), WMO GRIB2 table 4.2
    "gh": (0, 3, 5),
    "u": (0, 2, 2),
    "v": (0, 2, 3),
    "t": (0, 0, 0),
    "w": (0, 2, 8),
    "pres": (0, 3, 0),  # eccodes calls it sp at the surface, pres elsewhere
    "prmsl": (0, 3, 1),
    "r": (0, 1, 1),
    "absv": (0, 2, 10),
    "clwmr": (0, 1, 22),
    "tke": (0, 19, 11),
}
#: kinds of level: (typeOfFirstFixedSurface, scaled value), WMO GRIB2 code table 4.5;
#: "isobaric" takes the level in hPa instead.
LEVELS = {
    "surface": (1, 0),
    "cloudTop": (3, 0),
    "tropopause": (7, 0),
    "meanSea": (101, 0),
    "10m": (103, 10),
    "2m": (103, 2),
}


def _message(
    grid,
    values,
    short,
    level_hpa,
    date,
    hour,
    uv_relative,
    level_type="isobaric",
    packing=None,
    bits=24,
):
    kind = grid["kind"]
    if kind == "polar_stereographic":
        h = eccodes.codes_grib_new_from_samples("polar_stereographic_pl_grib2")
    else:
        h = eccodes.codes_grib_new_from_samples("GRIB2")
        if kind == "lambert":
            eccodes.codes_set(h, "gridDefinitionTemplateNumber", 30)
    ny, nx = values.shape
    eccodes.codes_set(h, "shapeOfTheEarth", 6)  # sphere of radius 6371229 m
    if kind == "regular_ll":
        eccodes.codes_set(h, "Ni", nx)
        eccodes.codes_set(h, "Nj", ny)
        for k, v in (
            ("latitudeOfFirstGridPointInDegrees", grid["lat0"]),
            ("longitudeOfFirstGridPointInDegrees", grid["lon0"]),
            ("latitudeOfLastGridPointInDegrees", grid["lat1"]),
            ("longitudeOfLastGridPointInDegrees", grid["lon1"]),
            ("iDirectionIncrementInDegrees", grid["dlon"]),
            ("jDirectionIncrementInDegrees", grid["dlat"]),
        ):
            eccodes.codes_set(h, k, v)
        eccodes.codes_set(h, "jScansPositively", 1 if grid["lat1"] > grid["lat0"] else 0)
    else:
        eccodes.codes_set(h, "Nx", nx)
        eccodes.codes_set(h, "Ny", ny)
        eccodes.codes_set(h, "latitudeOfFirstGridPointInDegrees", grid["lat_first"])
        eccodes.codes_set(h, "longitudeOfFirstGridPointInDegrees", grid["lon_first"] % 360)
        eccodes.codes_set(h, "DxInMetres", grid["dx"])
        eccodes.codes_set(h, "DyInMetres", grid["dy"])
        eccodes.codes_set(h, "LaDInDegrees", grid["lad"])
        eccodes.codes_set(h, "iScansNegatively", 0)
        eccodes.codes_set(h, "jScansPositively", 1)
        if kind == "lambert":
            eccodes.codes_set(h, "LoVInDegrees", grid["lov"] % 360)
            eccodes.codes_set(h, "Latin1InDegrees", grid["latin1"])
            eccodes.codes_set(h, "Latin2InDegrees", grid["latin2"])
        else:
            eccodes.codes_set(h, "orientationOfTheGridInDegrees", grid["lov"] % 360)
    eccodes.codes_set(h, "resolutionAndComponentFlags", 8 if uv_relative else 0)
    d, c, n = PARAMS[short]
    eccodes.codes_set(h, "discipline", d)
    eccodes.codes_set(h, "parameterCategory", c)
    eccodes.codes_set(h, "parameterNumber", n)
    kind, value = (100, int(level_hpa * 100)) if level_type == "isobaric" else LEVELS[level_type]
    eccodes.codes_set(h, "typeOfFirstFixedSurface", kind)
    eccodes.codes_set(h, "scaleFactorOfFirstFixedSurface", 0)
    eccodes.codes_set(h, "scaledValueOfFirstFixedSurface", value)
    eccodes.codes_set(h, "dataDate", date)
    eccodes.codes_set(h, "dataTime", hour * 100)
    eccodes.codes_set(h, "bitsPerValue", bits)
    eccodes.codes_set_values(h, np.asarray(values, dtype=np.float64).ravel())
    if packing:
        eccodes.codes_set(h, "packingType", packing)
    return h


def write_grib2(
    path,
    grid,
    fields,
    levels_hpa,
    dates_hours,
    *,
    uv_relative,
    single=None,
    mode="wb",
    packing=None,
    bits=24,
):
    """fields: {shortName: array (time, level, y, x)}; rows from south to north.

    single: {(name, level_type): array (time, y, x)} for fields on other kinds of level
    (see LEVELS), written after the isobaric ones of each time. ``packing`` is an
    eccodes packingType (default simple packing), ``bits`` the bits per value.
    """
    with open(path, mode) as fh:
        for it, (date, hour) in enumerate(dates_hours):
            for ik, lev in enumerate(levels_hpa):
                for short, arr in fields.items():
                    h = _message(
                        grid,
                        arr[it, ik],
                        short,
                        lev,
                        date,
                        hour,
                        uv_relative,
                        packing=packing,
                        bits=bits,
                    )
                    eccodes.codes_write(h, fh)
                    eccodes.codes_release(h)
            for (short, level_type), arr in (single or {}).items():
                h = _message(
                    grid,
                    arr[it],
                    short,
                    0.0,
                    date,
                    hour,
                    uv_relative,
                    level_type,
                    packing=packing,
                    bits=bits,
                )
                eccodes.codes_write(h, fh)
                eccodes.codes_release(h)
