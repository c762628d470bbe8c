"""Bad input never crashes and never guesses: a corpus of broken files, made here.

Each case writes one bad file (or asks one bad question of a good file), runs
``balance-desk analyze`` and checks the exit status (2), that stderr is one
sentence naming the file (where there is one) and what is wrong, and that no
traceback appears.
"""

import os
import subprocess
import sys

import numpy as np
import pytest
import xarray as xr

from app.cli import main
from testkit.makedata import latlon_dataset

LAT = np.arange(60.0, 39.9, -2.0)
LON = np.arange(-20.0, 20.1, 2.0)


def good():
    ds, _ = latlon_dataset(LAT, LON)
    return ds


def nc(tmp, name, ds):
    path = os.path.join(tmp, name)
    ds.to_netcdf(path)
    return path


def raw(tmp, name, data: bytes):
    path = os.path.join(tmp, name)
    with open(path, "wb") as fh:
        fh.write(data)
    return path


def truncated(tmp, name):
    path = nc(tmp, name + ".full", good())
    with open(path, "rb") as fh:
        data = fh.read()
    return raw(tmp, name, data[: len(data) // 2])


def with_var(ds, name, **changes):
    ds = ds.copy()
    da = ds[name]
    if "attrs" in changes:
        da.attrs = changes["attrs"]
    if "values" in changes:
        da = da.copy(data=changes["values"](da.values))
        da.attrs = ds[name].attrs
    ds[name] = da
    return ds


def drop_units(ds, var):
    ds = ds.copy()
    ds[var].attrs = {k: v for k, v in ds[var].attrs.items() if k != "units"}
    return ds


def coord_values(ds, coord, values, attrs=None):
    ds = ds.assign_coords({coord: (coord, values, attrs or ds[coord].attrs)})
    return ds


def grib_temperature_only(tmp, name):
    from testkit.gribwrite import write_grib2

    la, lo = np.meshgrid(LAT[::-1], LON, indexing="ij")
    t = np.broadcast_to(250.0 + 0 * la, (1, 1) + la.shape).copy()
    grid = dict(kind="regular_ll", lat0=40.0, lat1=60.0, lon0=340.0, lon1=20.0, dlat=2.0, dlon=2.0)
    path = os.path.join(tmp, name)
    write_grib2(path, grid, {"t": t}, [500.0], [(20400203, 0)], uv_relative=False)
    return path


def truncated_grib(tmp, name):
    from testkit.gribwrite import write_grib2

    la, lo = np.meshgrid(LAT[::-1], LON, indexing="ij")
    z = np.broadcast_to(5500.0 + la, (1, 1) + la.shape).copy()
    grid = dict(kind="regular_ll", lat0=40.0, lat1=60.0, lon0=340.0, lon1=20.0, dlat=2.0, dlon=2.0)
    path = os.path.join(tmp, name + ".full")
    write_grib2(path, grid, {"gh": z}, [500.0], [(20400203, 0)], uv_relative=False)
    with open(path, "rb") as fh:
        data = fh.read()
    return raw(tmp, name, data[: len(data) - 40])


def two_files(tmp, ds_a, ds_b):
    return [nc(tmp, "a.nc", ds_a), nc(tmp, "b.nc", ds_b)]


def height_levels(ds):
    ds = ds.rename({"level": "height_above_ground"})
    ds["height_above_ground"].attrs = {"units": "m", "standard_name": "height"}
    return ds


def curvilinear(ds):
    la, lo = np.meshgrid(LAT, LON, indexing="ij")
    ds = ds.rename({"latitude": "y", "longitude": "x"}).drop_vars(["x", "y"])
    ds = ds.assign_coords(
        lat=(("y", "x"), la, {"standard_name": "latitude"}),
        lon=(("y", "x"), lo, {"standard_name": "longitude"}),
    )
    for v in ds.data_vars:
        ds[v].attrs["coordinates"] = "lat lon"
    return ds


def missing_mapping(ds):
    ds = curvilinear(ds)
    for v in ds.data_vars:
        ds[v].attrs["grid_mapping"] = "lambert_projection"
    return ds


def extra_dim(ds):
    return xr.concat([ds, ds], dim="sector").assign_coords(sector=[0, 1])


def no_time(ds):
    return ds.isel(time=0).drop_vars("time")


def numeric_time_no_units(ds):
    ds = ds.assign_coords(time=("time", np.arange(ds.sizes["time"], dtype=float)))
    return ds


#: name -> (builder(tmp) returning a path or list of paths, extra CLI args, message fragment)
CORPUS = {
    "no_such_file": (lambda t: os.path.join(t, "absent.nc"), [], "no such file"),
    "empty_file": (lambda t: raw(t, "empty.nc", b""), [], "is empty"),
    "text_file": (
        lambda t: raw(t, "notes.nc", b"this is not a model file\n"),
        [],
        "not a NetCDF, GRIB or Zarr file",
    ),
    "truncated_netcdf": (lambda t: truncated(t, "cut.nc"), [], "damaged or truncated"),
    "truncated_grib": (lambda t: truncated_grib(t, "cut.grib2"), [], "damaged or truncated"),
    "directory_not_zarr": (
        lambda t: (
            os.makedirs(os.path.join(t, "dir.zarr"), exist_ok=True) or os.path.join(t, "dir.zarr")
        ),
        [],
        "not a Zarr store",
    ),
    "no_height": (
        lambda t: nc(t, "noz.nc", good().drop_vars("height")),
        [],
        "no geopotential or geopotential height",
    ),
    "height_without_units": (
        lambda t: nc(t, "zu.nc", drop_units(good(), "height")),
        [],
        "has no units attribute",
    ),
    "height_in_kelvin": (
        lambda t: nc(
            t,
            "zk.nc",
            with_var(
                good(), "height", attrs={"standard_name": "geopotential_height", "units": "K"}
            ),
        ),
        [],
        "cannot be read as m",
    ),
    "wind_unknown_units": (
        lambda t: nc(
            t,
            "wu.nc",
            with_var(
                good(), "ua", attrs={"standard_name": "eastward_wind", "units": "metres per dingle"}
            ),
        ),
        [],
        "cannot be read as m s-1",
    ),
    "levels_without_units": (
        lambda t: nc(
            t,
            "lu.nc",
            coord_values(
                good(), "level", good()["level"].values, {"standard_name": "air_pressure"}
            ),
        ),
        [],
        "has no units attribute",
    ),
    "levels_repeated": (
        lambda t: nc(
            t,
            "lr.nc",
            coord_values(good(), "level", np.array([1000.0, 850.0, 850.0, 500.0, 300.0])),
        ),
        [],
        "pressure levels repeat a value",
    ),
    "levels_negative": (
        lambda t: nc(
            t,
            "ln.nc",
            coord_values(good(), "level", np.array([1000.0, 850.0, 700.0, 500.0, -300.0])),
        ),
        [],
        "must be positive",
    ),
    "latitude_unsorted": (
        lambda t: nc(
            t, "lat.nc", coord_values(good(), "latitude", np.concatenate([LAT[:5], LAT[5:][::-1]]))
        ),
        [],
        "latitude is not strictly monotonic",
    ),
    "longitude_repeated": (
        lambda t: nc(
            t, "lon.nc", coord_values(good(), "longitude", np.concatenate([LON[:10], LON[9:-1]]))
        ),
        [],
        "longitude is not strictly monotonic",
    ),
    "height_all_missing": (
        lambda t: nc(t, "nan.nc", with_var(good(), "height", values=lambda a: a * np.nan)),
        [],
        "no valid values",
    ),
    # an undeclared fill value that is not one of the usual ones, in a field the budget needs
    "undeclared_fill_value": (
        lambda t: nc(
            t,
            "fill.nc",
            with_var(
                good(),
                "height",
                values=lambda a: np.where(np.arange(a.size).reshape(a.shape) % 7 == 0, 7.7e25, a),
            ),
        ),
        [],
        "undeclared fill value",
    ),
    "single_grid_point": (
        lambda t: nc(t, "one.nc", good().isel(latitude=[3], longitude=[4])),
        [],
        "at least 3 x 3",
    ),
    "two_by_two_grid": (
        lambda t: nc(t, "two.nc", good().isel(latitude=[1, 2], longitude=[1, 2])),
        [],
        "at least 3 x 3",
    ),
    "mismatched_grids": (
        lambda t: two_files(t, good().isel(time=[0]), good().isel(time=[1], latitude=slice(0, -1))),
        [],
        "has another grid",
    ),
    "duplicate_times": (
        lambda t: two_files(t, good().isel(time=[0, 1]), good().isel(time=[1])),
        [],
        "appears more than once",
    ),
    "level_not_in_file": (
        lambda t: nc(t, "ok1.nc", good()),
        ["--level", "600"],
        "has no 600 hPa level",
    ),
    "time_index_outside": (
        lambda t: nc(t, "ok2.nc", good()),
        ["--time", "9"],
        "time index 9 is outside the 3 valid times",
    ),
    "time_not_in_file": (
        lambda t: nc(t, "ok3.nc", good()),
        ["--time", "2041-01-01T00:00"],
        "is not one of the 3 valid times",
    ),
    "time_not_a_time": (
        lambda t: nc(t, "ok4.nc", good()),
        ["--time", "yesterday"],
        "neither an index nor an ISO 8601 time",
    ),
    "box_without_points": (
        lambda t: nc(t, "ok5.nc", good()),
        ["--box", "100,110,-10,0"],
        "holds no grid points",
    ),
    "box_south_of_north": (
        lambda t: nc(t, "ok6.nc", good()),
        ["--box", "0,10,50,40"],
        "must satisfy -90 <= south < north <= 90",
    ),
    "box_three_numbers": (
        lambda t: nc(t, "ok7.nc", good()),
        ["--box", "0,10,50"],
        "four numbers west,east,south,north",
    ),
    "no_time_coordinate": (lambda t: nc(t, "nt.nc", no_time(good())), [], "has no time coordinate"),
    "numeric_time_without_units": (
        lambda t: nc(t, "tu.nc", numeric_time_no_units(good())),
        [],
        "is numeric and has no units",
    ),
    "member_out_of_range": (
        lambda t: nc(t, "ens.nc", xr.concat([good()] * 3, dim="number")),
        ["--member", "5"],
        "has 3 ensemble members; member 5",
    ),
    "member_not_an_index": (
        lambda t: nc(t, "ens2.nc", good()),
        ["--member", "first"],
        "--member: a member must be an index or 'mean'",
    ),
    "not_on_pressure_levels": (
        lambda t: nc(t, "hl.nc", height_levels(good())),
        [],
        "no geopotential or geopotential height on pressure levels",
    ),
    "curvilinear_without_projection": (
        lambda t: nc(t, "curv.nc", curvilinear(good())),
        [],
        "2-D latitude and longitude but no projection",
    ),
    "grid_mapping_missing": (
        lambda t: nc(t, "gm.nc", missing_mapping(good())),
        [],
        "which is not in the file",
    ),
    "unknown_extra_dimension": (
        lambda t: nc(t, "extra.nc", extra_dim(good())),
        [],
        "extra dimension 'sector' of size 2",
    ),
    "grib_without_height": (
        lambda t: grib_temperature_only(t, "t.grib2"),
        [],
        "no geopotential or geopotential height",
    ),
}


def test_corpus_is_large_enough():
    assert len(CORPUS) >= 30


@pytest.mark.parametrize("case", sorted(CORPUS))
def test_bad_input_gets_one_sentence_and_status_2(tmp_path, capsys, case):
    build, extra, fragment = CORPUS[case]
    paths = build(str(tmp_path))
    paths = paths if isinstance(paths, list) else [paths]
    args = ["analyze", *paths, "--level", "500", *extra]
    if "--level" in extra:
        args = ["analyze", *paths, *extra]
    code = main(args)
    err = capsys.readouterr().err
    assert code == 2, err
    assert fragment in err, err
    assert "Traceback" not in err
    assert err.count("\n") == 1, err
    named = os.path.basename(paths[-1]) if case != "mismatched_grids" else "b.nc"
    if not case.startswith(("box_", "member_not")) and case != "time_not_a_time":
        assert named in err or os.path.basename(paths[0]) in err, err


@pytest.mark.parametrize(
    "case", ["truncated_netcdf", "truncated_grib", "text_file", "undeclared_fill_value"]
)
def test_bad_input_in_a_real_process(tmp_path, case):
    build, extra, fragment = CORPUS[case]
    path = build(str(tmp_path))
    r = subprocess.run(
        [sys.executable, "-m", "app.cli", "analyze", path, "--level", "500"],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert r.returncode == 2, (r.returncode, r.stderr)
    assert fragment in r.stderr and "Traceback" not in r.stderr


def test_unexpected_errors_exit_1_and_debug_shows_traceback(tmp_path, capsys, monkeypatch):
    import balance_core.io as bio

    def boom(*a, **k):
        raise RuntimeError("simulated failure")

    monkeypatch.setattr(bio, "open_case", boom)
    path = nc(str(tmp_path), "ok.nc", good())
    assert main(["analyze", path, "--level", "500"]) == 1
    err = capsys.readouterr().err
    assert "unexpected error" in err and "--debug" in err and "Traceback" not in err
    with pytest.raises(RuntimeError):
        main(["--debug", "analyze", path, "--level", "500"])


def test_a_file_without_wind_is_answered_with_its_geostrophic_wind(tmp_path, capsys):
    # no longer bad input: heights alone give the geostrophic wind and the closed systems;
    # the verdict says that no budget can be made
    import json

    from app.cli import main

    path = nc(str(tmp_path), "nowind.nc", good().drop_vars(["ua", "va"]))
    code = main(["analyze", path, "--level", "500", "--format", "json"])
    out = capsys.readouterr()
    assert code == 0, out.err
    rep = json.loads(out.out)
    assert rep["verdict"]["balance"] == "none" and "no momentum budget" in rep["verdict"]["text"]
    assert rep["winds"]["geostrophic_speed_rms"] > 0
