"""Map projections of model grids: from CF grid_mapping attributes or GRIB grid keys.

CF: ``pyproj.CRS.from_cf`` reads the grid_mapping variable (CF Conventions
1.11, appendix F). GRIB: the grid-definition keys decoded by eccodes (WMO
Manual on Codes, WMO-No. 306, GRIB2 template 3.30 Lambert conformal, 3.20 polar
stereographic, 3.10 Mercator), with the earth shape of code table 3.2.
"""

from __future__ import annotations

import numpy as np
import pyproj

from .errors import CaseError

__all__ = ["crs_from_cf", "crs_from_grib", "projected_axes"]

# WMO GRIB2 code table 3.2: shape of the earth (spheres and the common ellipsoids)
_EARTH = {
    0: "+R=6367470",
    4: "+ellps=GRS80",
    5: "+ellps=WGS84",
    6: "+R=6371229",
    8: "+R=6371200",
}


def crs_from_cf(attrs: dict, path=None, variable=None) -> pyproj.CRS:
    """The CRS described by a CF grid_mapping variable's attributes."""
    try:
        return pyproj.CRS.from_cf(dict(attrs))
    except Exception as exc:  # noqa: BLE001
        raise CaseError(
            f"grid mapping cannot be read as a projection ({exc})", path, variable
        ) from None


def _earth(attrs, path, variable):
    shape = attrs.get("GRIB_shapeOfTheEarth")
    if shape is None:
        return "+R=6371229"  # eccodes' default sphere for these templates
    shape = int(shape)
    if shape == 1:
        return f"+R={float(attrs.get('GRIB_radius', 6371229))}"
    if shape not in _EARTH:
        raise CaseError(f"GRIB shape of the earth {shape} is not supported", path, variable)
    return _EARTH[shape]


def crs_from_grib(attrs: dict, path=None, variable=None) -> pyproj.CRS | None:
    """The CRS of a GRIB grid from the GRIB_* attributes the reader (io/grib.py) gives its
    variables; None for lat-lon grids."""
    kind = attrs.get("GRIB_gridType")
    earth = _earth(attrs, path, variable)
    g = lambda k: float(attrs[f"GRIB_{k}"])  # noqa: E731
    try:
        if kind in (None, "regular_ll", "regular_gg"):
            return None
        if kind == "lambert":
            text = (
                f"+proj=lcc +lat_1={g('Latin1InDegrees')} +lat_2={g('Latin2InDegrees')} "
                f"+lat_0={g('LaDInDegrees')} +lon_0={g('LoVInDegrees')} {earth} +units=m +no_defs"
            )
        elif kind == "polar_stereographic":
            south = int(attrs.get("GRIB_projectionCentreFlag", 0)) & 128
            lat0 = -90 if south else 90
            text = (
                f"+proj=stere +lat_0={lat0} +lat_ts={g('LaDInDegrees')} "
                f"+lon_0={g('orientationOfTheGridInDegrees')} {earth} +units=m +no_defs"
            )
        elif kind == "mercator":
            text = f"+proj=merc +lat_ts={g('LaDInDegrees')} +lon_0=0 {earth} +units=m +no_defs"
        else:
            raise CaseError(
                f"GRIB grid type {kind!r} is not supported (lat-lon, Gaussian, "
                "Lambert conformal, polar stereographic and Mercator are)",
                path,
                variable,
            )
    except KeyError as exc:
        raise CaseError(f"GRIB grid {kind!r} lacks the key {exc.args[0]}", path, variable) from None
    return pyproj.CRS.from_proj4(text)


def projected_axes(crs: pyproj.CRS, lat2d, lon2d, path=None, variable=None):
    """1-D x and y (m) of a grid given its 2-D latitude and longitude.

    The grid must be regular in the projection's coordinates: every row has
    the same x and every column the same y, to a thousandth of the spacing.
    """
    fwd = pyproj.Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True)
    xx, yy = fwd.transform(np.asarray(lon2d, dtype=np.float64), np.asarray(lat2d, dtype=np.float64))
    x, y = xx[0, :], yy[:, 0]
    dx = np.abs(np.diff(x)).min() if x.size > 1 else 1.0
    dy = np.abs(np.diff(y)).min() if y.size > 1 else 1.0
    if (
        np.nanmax(np.abs(xx - x[None, :])) > 1e-3 * dx
        or np.nanmax(np.abs(yy - y[:, None])) > 1e-3 * dy
    ):
        raise CaseError(
            "latitude and longitude do not form a regular grid in the file's projection",
            path,
            variable,
        )
    return x, y
