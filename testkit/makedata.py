"""Analytic test fields written in the conventions real model output uses.

The fields are smooth closed-form functions of (lat, lon, p, t), so the same
flow can be laid on a lat-lon grid and on a projected grid without
interpolation, and every reader path can be compared with the truth.
"""

import numpy as np
import pandas as pd
import pyproj
import xarray as xr

from balance_core import constants as C
from balance_core.thermo import standard_atmosphere_height, standard_atmosphere_temperature

LEVELS = np.array([1000.0, 850.0, 700.0, 500.0, 300.0])  # hPa
TIMES = pd.date_range("2040-02-03T00:00", periods=3, freq="6h")


def truth(lat, lon, p_hpa, t_hours=0.0):
    """(Z gpm, u, v m s-1, omega Pa s-1, T K) at the given points (broadcast).

    The wind is the geostrophic wind of the height field, in closed form, plus a
    small ageostrophic part, so it is as near balance as real mid-latitude flow
    (the reader checks wind speeds against the geostrophic wind).
    """
    lat, lon = np.deg2rad(lat), np.deg2rad(lon)
    p = np.asarray(p_hpa, float)
    s = np.log(1000.0 / p) / np.log(10 / 3)
    phase = lon - 2e-6 * t_hours * 3600
    amp, slope = 60 + 80 * s, 300 + 900 * s
    z = (
        standard_atmosphere_height(p * 100)
        + amp * np.sin(2 * lat) ** 2 * np.cos(3 * phase)
        - slope * np.sin(lat) ** 2
    )
    dz_dlat = amp * np.cos(3 * phase) * 2 * np.sin(4 * lat) - slope * np.sin(2 * lat)
    dz_dlon = -3 * amp * np.sin(2 * lat) ** 2 * np.sin(3 * phase)
    f = 2 * C.OMEGA * np.sin(lat)
    k = C.G0 / (f * C.EARTH_RADIUS)
    u = -k * dz_dlat + 2 * np.sin(2 * phase) * np.cos(lat)
    v = k * dz_dlon / np.cos(lat) + np.cos(3 * phase) * np.cos(lat)
    om = 0.2 * np.sin(2 * phase) * np.cos(lat) * np.sin(np.pi * (p - 250) / 750)
    t = standard_atmosphere_temperature(p * 100) - 12 * s * np.sin(lat) ** 2 + 0 * lon
    return z, u, v, om, t


def latlon_dataset(lat, lon, *, levels=LEVELS, times=TIMES, style="cf"):
    """A lat-lon dataset; ``style`` picks the naming and units convention.

    cf    CF standard names, geopotential height in m, levels in hPa
    era5  ECMWF names: z (geopotential m2 s-2), t, u, v, w (omega), level in millibars
    ncep  NCEP-like names: HGT (gpm), UGRD, VGRD, VVEL, TMP, levels in Pa, T in degC
    """
    la, lo = np.meshgrid(lat, lon, indexing="ij")
    shape = (len(times), len(levels)) + la.shape
    arr = {k: np.empty(shape) for k in ("z", "u", "v", "om", "t")}
    hours = (times - times[0]) / pd.Timedelta(hours=1)
    for i, h in enumerate(hours):
        for k, p in enumerate(levels):
            vals = truth(la, lo, p, h)
            for key, val in zip(arr, vals):
                arr[key][i, k] = val
    dims = ("time", "level", "latitude", "longitude")
    coords = {
        "time": times,
        "latitude": ("latitude", lat, {"units": "degrees_north"}),
        "longitude": ("longitude", lon, {"units": "degrees_east"}),
    }
    if style == "cf":
        coords["level"] = ("level", levels, {"units": "hPa", "standard_name": "air_pressure"})
        data = {
            "height": (dims, arr["z"], {"standard_name": "geopotential_height", "units": "m"}),
            "ua": (dims, arr["u"], {"standard_name": "eastward_wind", "units": "m s-1"}),
            "va": (dims, arr["v"], {"standard_name": "northward_wind", "units": "m s-1"}),
            "wap": (
                dims,
                arr["om"],
                {"standard_name": "lagrangian_tendency_of_air_pressure", "units": "Pa s-1"},
            ),
            "ta": (dims, arr["t"], {"standard_name": "air_temperature", "units": "K"}),
        }
    elif style == "era5":
        coords["level"] = ("level", levels, {"units": "millibars", "long_name": "pressure_level"})
        data = {
            "z": (dims, arr["z"] * C.G0, {"units": "m**2 s**-2", "long_name": "Geopotential"}),
            "u": (dims, arr["u"], {"units": "m s**-1", "long_name": "U component of wind"}),
            "v": (dims, arr["v"], {"units": "m s**-1", "long_name": "V component of wind"}),
            "w": (dims, arr["om"], {"units": "Pa s**-1", "long_name": "Vertical velocity"}),
            "t": (dims, arr["t"], {"units": "K", "long_name": "Temperature"}),
        }
    elif style == "ncep":
        coords["level"] = ("level", levels * 100, {"units": "Pa"})
        data = {
            "HGT": (dims, arr["z"], {"units": "gpm"}),
            "UGRD": (dims, arr["u"] / 0.514444, {"units": "knot"}),
            "VGRD": (dims, arr["v"] / 0.514444, {"units": "knot"}),
            "VVEL": (dims, arr["om"] / 100, {"units": "hPa s-1"}),
            "TMP": (dims, arr["t"] - 273.15, {"units": "degC"}),
        }
    else:
        raise ValueError(style)
    ds = xr.Dataset(data, coords=coords, attrs={"title": f"analytic test fields ({style})"})
    return ds, arr


def projected_dataset(crs, x, y, *, angle=None, levels=LEVELS, times=TIMES):
    """A CF projected dataset with grid-relative winds (x_wind, y_wind).

    ``angle(lat, lon)`` gives the rotation (degrees, true north counter-clockwise
    from grid north) used to write the winds; by default pyproj's meridian
    convergence. Tests pass a closed form to check the reader independently.
    """
    X, Y = np.meshgrid(x, y)
    lon, lat = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True).transform(X, Y)
    if angle is None:
        gam = np.asarray(pyproj.Proj(crs).get_factors(lon, lat).meridian_convergence)
    else:
        gam = angle(lat, lon)
    g = np.deg2rad(gam)
    shape = (len(times), len(levels)) + X.shape
    arr = {k: np.empty(shape) for k in ("z", "u", "v", "om", "t", "xw", "yw")}
    hours = (times - times[0]) / pd.Timedelta(hours=1)
    for i, h in enumerate(hours):
        for k, p in enumerate(levels):
            z, u, v, om, t = truth(lat, lon, p, h)
            arr["z"][i, k], arr["u"][i, k], arr["v"][i, k] = z, u, v
            arr["om"][i, k], arr["t"][i, k] = om, t
            # earth-relative (u, v) to grid-relative:
            # u_g = u cos g - v sin g, v_g = u sin g + v cos g
            arr["xw"][i, k] = u * np.cos(g) - v * np.sin(g)
            arr["yw"][i, k] = u * np.sin(g) + v * np.cos(g)
    dims = ("time", "plev", "y", "x")
    gm = crs.to_cf()
    common = {"grid_mapping": "crs", "coordinates": "lat lon"}
    ds = xr.Dataset(
        {
            "zg": (
                dims,
                arr["z"],
                {"standard_name": "geopotential_height", "units": "m", **common},
            ),
            "x_wind": (dims, arr["xw"], {"standard_name": "x_wind", "units": "m s-1", **common}),
            "y_wind": (dims, arr["yw"], {"standard_name": "y_wind", "units": "m s-1", **common}),
            "wap": (
                dims,
                arr["om"],
                {
                    "standard_name": "lagrangian_tendency_of_air_pressure",
                    "units": "Pa s-1",
                    **common,
                },
            ),
            "ta": (dims, arr["t"], {"standard_name": "air_temperature", "units": "K", **common}),
            "crs": ((), 0, gm),
        },
        coords={
            "time": times,
            "plev": ("plev", levels, {"standard_name": "air_pressure", "units": "hPa"}),
            "x": ("x", x / 1000.0, {"standard_name": "projection_x_coordinate", "units": "km"}),
            "y": ("y", y / 1000.0, {"standard_name": "projection_y_coordinate", "units": "km"}),
            "lat": (("y", "x"), lat, {"standard_name": "latitude", "units": "degrees_north"}),
            "lon": (("y", "x"), lon, {"standard_name": "longitude", "units": "degrees_east"}),
        },
        attrs={"title": "analytic test fields on a projected grid"},
    )
    return ds, arr, lat, lon


def huge_declaring_netcdf(path):
    """A few hundred kilobytes of NetCDF4 declaring a 100000 x 100000 grid whose chunks were
    never written (a reader that trusts the metadata would ask for 40 GB per field)."""
    import netCDF4

    with netCDF4.Dataset(path, "w") as ds:
        for name, n in (("time", 1), ("level", 1), ("lat", 100_000), ("lon", 100_000)):
            ds.createDimension(name, n)
        t = ds.createVariable("time", "f8", ("time",))
        t.units = "hours since 2000-01-01"
        t[:] = [0]
        lev = ds.createVariable("level", "f8", ("level",))
        lev.units, lev.standard_name = "hPa", "air_pressure"
        lev[:] = [500]
        for name, sn, u in (
            ("z", "geopotential_height", "m"),
            ("ua", "eastward_wind", "m s-1"),
            ("va", "northward_wind", "m s-1"),
        ):
            v = ds.createVariable(
                name, "f4", ("time", "level", "lat", "lon"), chunksizes=(1, 1, 1000, 1000)
            )
            v.standard_name, v.units = sn, u
