"""Files that tempt the reader to take the wrong field, made here.

Each one must end in the right field, or the field dropped with a note, or exit 2 with
one sentence -- never a wrong answer with exit 0, never a silently masked level. The
flows are the analytic, near-geostrophic fields of makedata.truth (invented data, used
here only to see which variable the reader takes, not to prove any numerics).
"""

import json
import os

import numpy as np
import pytest

from app.cli import main
from balance_core.io import CaseError, analyze_case, open_case
from testkit.makedata import latlon_dataset, truth

LAT = np.arange(60.0, 39.9, -2.0)
LON = np.arange(-20.0, 20.1, 2.0)
BOX = "-10,10,44,56"


def good():
    ds, _ = latlon_dataset(LAT, LON)
    return ds


def nc(tmp, name, ds):
    path = os.path.join(tmp, name)
    ds.to_netcdf(path)
    return path


def analyze(capsys, path, *extra, fmt="json"):
    code = main(["analyze", path, "--level", "500", "--box", BOX, "--format", fmt, *extra])
    out = capsys.readouterr()
    return code, out.out, out.err


def ok_json(capsys, path, *extra):
    code, out, err = analyze(capsys, path, *extra)
    assert code == 0, err
    return json.loads(out)


def bad(capsys, path, fragment, *extra):
    code, out, err = analyze(capsys, path, *extra)
    assert code == 2, (out[-300:], err)
    assert fragment in err, err
    assert err.count("\n") == 1 and "Traceback" not in err
    return err


def surface_pressure_field(la, lo):
    """1000 hPa lies below the ground where this is under 100000 Pa (about a third)."""
    return 100400.0 - 1500.0 * np.sin(np.deg2rad(9 * lo)) * np.cos(np.deg2rad(la))


# -- GRIB files with many kinds of level ---------------------------------------------------


def grib_file(tmp, name, single=None, *, uv_grid_shift=0.0, cut_messages=0):
    """A GRIB2 file of gh, u, v, t on 1000..300 hPa at three times, plus ``single`` fields
    on other kinds of level; winds optionally on a grid shifted east; optionally cut
    ``cut_messages`` whole messages before its end."""
    from testkit.gribwrite import write_grib2

    levels = [1000.0, 850.0, 700.0, 500.0, 300.0]
    lat = LAT[::-1]
    la, lo = np.meshgrid(lat, LON, indexing="ij")
    shape = (3, len(levels)) + la.shape
    f = {k: np.empty(shape) for k in ("gh", "u", "v", "t")}
    for it in range(3):
        for ik, p in enumerate(levels):
            z, u, v, _, t = truth(la, lo, p, 6.0 * it)
            f["gh"][it, ik], f["u"][it, ik], f["v"][it, ik], f["t"][it, ik] = z, u, v, t
    times = [(20400203, 0), (20400203, 6), (20400203, 12)]
    grid = dict(kind="regular_ll", lat0=40.0, lat1=60.0, lon0=340.0, lon1=20.0, dlat=2.0, dlon=2.0)
    path = os.path.join(tmp, name)
    if uv_grid_shift:
        write_grib2(
            path,
            grid,
            {k: f[k] for k in ("gh", "t")},
            levels,
            times,
            uv_relative=False,
            single=single,
        )
        shifted = dict(grid, lon0=(340.0 + uv_grid_shift) % 360, lon1=(20.0 + uv_grid_shift) % 360)
        write_grib2(
            path,
            shifted,
            {k: f[k] for k in ("u", "v")},
            levels,
            times,
            uv_relative=False,
            mode="ab",
        )
    else:
        write_grib2(path, grid, f, levels, times, uv_relative=False, single=single)
    if cut_messages:
        import eccodes

        starts = []
        with open(path, "rb") as fh:
            while (h := eccodes.codes_grib_new_from_file(fh)) is not None:
                starts.append(eccodes.codes_get_message_offset(h))
                eccodes.codes_release(h)
        with open(path, "rb") as fh:
            data = fh.read()
        with open(path, "wb") as fh:  # cut exactly where a message begins
            fh.write(data[: starts[-cut_messages]])
    return path


def _grid2d():
    lat = LAT[::-1]
    la, lo = np.meshgrid(lat, LON, indexing="ij")
    return la, lo


def test_cloud_top_pressure_is_not_the_surface_pressure(tmp_path, capsys):
    # NCEP files hold 'pres' at the cloud top, -50000 Pa where there is no cloud,
    # beside 'sp' at the surface. The surface one must be taken; no level is masked.
    la, lo = _grid2d()
    cloud = np.where(np.cos(np.deg2rad(4 * lo)) > 0, 45000.0, -50000.0)
    sp = surface_pressure_field(la, lo)
    path = grib_file(
        str(tmp_path),
        "clouds.grib2",
        {("pres", "cloudTop"): np.stack([cloud] * 3), ("pres", "surface"): np.stack([sp] * 3)},
    )
    rep = ok_json(capsys, path)
    assert rep["sources"]["surface_pressure"]["grib_type_of_level"] == "surface"
    assert rep["points"] == rep["region_points"]
    c = open_case(path)
    assert np.isfinite(c.data["height"].values[:, c.level_index(500)]).all()
    masked_1000 = ~np.isfinite(c.data["height"].values[:, c.level_index(1000)])
    np.testing.assert_array_equal(masked_1000, 100000.0 > np.stack([sp] * 3) + 1.0)


def test_pressure_on_cloud_top_or_tropopause_alone_is_not_taken(tmp_path, capsys):
    la, lo = _grid2d()
    cloud = np.where(np.cos(np.deg2rad(4 * lo)) > 0, 45000.0, -50000.0)
    trop = 32000.0 + 3000.0 * np.cos(np.deg2rad(la))  # within the surface range: tempting
    path = grib_file(
        str(tmp_path),
        "tops.grib2",
        {("pres", "cloudTop"): np.stack([cloud] * 3), ("pres", "tropopause"): np.stack([trop] * 3)},
    )
    rep = ok_json(capsys, path)
    assert "surface_pressure" not in rep["sources"]
    assert not any("below the ground" in n for n in rep["notes"])


def test_winds_on_a_shifted_grid_of_the_same_shape(tmp_path, capsys):
    path = grib_file(str(tmp_path), "shifted.grib2", uv_grid_shift=40.0)
    bad(capsys, path, "is not on the height's grid")


def test_a_grib_file_cut_at_a_message_boundary(tmp_path, capsys):
    # the last valid time loses its last two messages (v and t at 300 hPa): reported
    path = grib_file(str(tmp_path), "cut.grib2", cut_messages=2)
    err = bad(capsys, path, "cut at a message boundary")
    assert "cut.grib2" in err


# -- NetCDF files ---------------------------------------------------------------------------


def test_producer_fill_values_are_treated_as_missing(tmp_path, capsys):
    # -9999 in the height, -32767 in the temperature, 9.99e14 in the wind, undeclared:
    # once read as data (the pressure gradient 900 times too large, the RMS wind 9188 m/s).
    ds = good()
    idx = np.zeros(ds["height"].shape, bool)
    idx[:, :, 0, 0] = idx[:, :, -1, -1] = True  # two corners, outside the box
    ds["height"] = ds["height"].where(~idx, -9999.0)
    ds["ta"] = ds["ta"].where(~idx, -32767.0)
    ds["ua"] = ds["ua"].where(~idx, 9.99e14)
    rep = ok_json(capsys, nc(str(tmp_path), "fills.nc", ds))
    notes = " ".join(rep["notes"])
    assert "producer fill value -9999" in notes and "-32767" in notes and "9.99e+14" in notes
    assert rep["winds"]["speed_rms"] < 60
    clean = ok_json(capsys, nc(str(tmp_path), "clean.nc", good()))
    pgf = {t["name"]: t["magnitude"] for t in rep["terms"]}["pressure_gradient"]
    pgf_clean = {t["name"]: t["magnitude"] for t in clean["terms"]}["pressure_gradient"]
    assert pgf == pytest.approx(pgf_clean, rel=1e-9)  # the box never saw the fills


def test_surface_pressure_in_hpa_labelled_pa_is_dropped_with_a_note(tmp_path, capsys):
    ds = good()
    la, lo = np.meshgrid(LAT, LON, indexing="ij")
    ds["ps"] = (
        ("time", "latitude", "longitude"),
        np.stack([surface_pressure_field(la, lo) / 100] * 3),
        {"standard_name": "surface_air_pressure", "units": "Pa"},
    )
    rep = ok_json(capsys, nc(str(tmp_path), "ps_hpa.nc", ds))
    assert "surface_pressure" not in rep["sources"]
    assert any(
        "surface pressure" in n and "left out" in n and "physical range" in n for n in rep["notes"]
    )
    assert rep["points"] == rep["region_points"]  # nothing masked by a wrong field


def test_levels_in_hpa_labelled_pa(tmp_path, capsys):
    ds = good()
    ds = ds.assign_coords(
        level=("level", ds["level"].values, {"units": "Pa", "standard_name": "air_pressure"})
    )
    bad(capsys, nc(str(tmp_path), "lev_pa.nc", ds), "pressure levels in hPa labelled Pa")


@pytest.mark.parametrize(
    "factor, hint", [(0.1, "decametres labelled metres"), (0.001, "kilometres labelled metres")]
)
def test_heights_in_dam_or_km_labelled_m(tmp_path, capsys, factor, hint):
    ds = good()
    ds["height"] = ds["height"] * factor
    ds["height"].attrs = {"standard_name": "geopotential_height", "units": "m"}
    bad(capsys, nc(str(tmp_path), "z_units.nc", ds), hint)


def test_knots_labelled_m_per_s(tmp_path, capsys):
    ds = good()
    for v in ("ua", "va"):
        attrs = dict(ds[v].attrs)
        ds[v] = ds[v] / 0.514444
        ds[v].attrs = attrs
    bad(capsys, nc(str(tmp_path), "knots.nc", ds), "knots labelled m s-1")


def test_sea_water_velocity_named_u_is_not_the_wind(tmp_path, capsys):
    ds = good()
    ds["u"] = (
        ds["ua"].dims,
        0.3 + 0 * ds["ua"].values,
        {"standard_name": "sea_water_x_velocity", "units": "m s-1"},
    )
    ds = ds[["u"] + [v for v in ds.data_vars if v != "u"]]  # found first
    rep = ok_json(capsys, nc(str(tmp_path), "ocean_u.nc", ds))
    assert rep["sources"]["u"]["variable"] == "ua"
    assert any(
        "'u' was not taken as eastward wind" in n and "sea_water_x_velocity" in n
        for n in rep["notes"]
    )


def test_a_height_spread_is_not_the_height(tmp_path, capsys):
    ds = good()
    spread = 20.0 + 0 * ds["height"]
    spread.attrs = {
        "standard_name": "geopotential_height",
        "units": "m",
        "cell_methods": "realization: standard_deviation",
    }
    ds["gh"] = spread
    ds = ds[["gh"] + [v for v in ds.data_vars if v != "gh"]]
    rep = ok_json(capsys, nc(str(tmp_path), "spread.nc", ds))
    assert rep["sources"]["height"]["variable"] == "height"
    # with only the spread there is no height: exit 2 saying why 'gh' was not taken
    only = ds.drop_vars("height")
    err = bad(capsys, nc(str(tmp_path), "spread_only.nc", only), "no geopotential")
    assert "standard_deviation" in err


def test_a_potential_temperature_is_not_the_temperature(tmp_path, capsys):
    ds = good().drop_vars("ta")
    theta = ds["height"] * 0 + 300.0
    theta.attrs = {"standard_name": "air_potential_temperature", "units": "K"}
    ds["t"] = theta
    rep = ok_json(capsys, nc(str(tmp_path), "theta.nc", ds))
    assert "temperature" not in rep["sources"]
    assert any("'t' was not taken as temperature" in n for n in rep["notes"])
    # without temperature the density comes from the standard atmosphere, said in the notes
    assert any("standard atmosphere" in n for n in rep["notes"])


def test_pres_without_a_level_is_not_surface_pressure(tmp_path, capsys):
    # 'pres' names a pressure on any kind of level: without one it is not taken
    ds = good()
    la, lo = np.meshgrid(LAT, LON, indexing="ij")
    ds["pres"] = (
        ("time", "latitude", "longitude"),
        np.stack([surface_pressure_field(la, lo)] * 3),
        {"units": "Pa"},
    )
    rep = ok_json(capsys, nc(str(tmp_path), "pres.nc", ds))
    assert "surface_pressure" not in rep["sources"]
    # the same field named wgrib2-style for the surface is taken
    ds = ds.rename({"pres": "PRES_surface"})
    rep = ok_json(capsys, nc(str(tmp_path), "pres_sfc.nc", ds))
    assert rep["sources"]["surface_pressure"]["variable"] == "PRES_surface"


def test_surface_pressure_name_on_another_kind_of_level(tmp_path, capsys):
    # 'sp' on a coordinate that marks another vertical level (axis Z, a tropopause index)
    ds = good()
    la, lo = np.meshgrid(LAT, LON, indexing="ij")
    ds["sp"] = (
        ("time", "trop", "latitude", "longitude"),
        np.stack([surface_pressure_field(la, lo) * 0.3] * 3)[:, None],
    )
    ds["sp"].attrs = {"units": "Pa"}
    ds = ds.assign_coords(trop=("trop", [1], {"axis": "Z", "long_name": "tropopause"}))
    rep = ok_json(capsys, nc(str(tmp_path), "sp_trop.nc", ds))
    assert "surface_pressure" not in rep["sources"]


# -- missing data: no verdict rather than a guess -------------------------------------------


def test_an_all_missing_level_gets_no_verdict(tmp_path, capsys):
    ds = good()
    k = list(ds["level"].values).index(500.0)
    for v in ("height", "ua", "va"):
        vals = ds[v].values.copy()
        vals[:, k] = np.nan
        ds[v] = (ds[v].dims, vals, ds[v].attrs)
    rep = ok_json(capsys, nc(str(tmp_path), "nan_level.nc", ds))
    assert rep["verdict"]["balance"] == "none"
    assert rep["points"] == 0 and "No verdict" in rep["verdict"]["text"]
    assert rep["invalid"]["missing_data"] == rep["region_points"]


def test_an_all_missing_time_gets_no_verdict(tmp_path, capsys):
    ds = good()
    for v in ds.data_vars:
        vals = ds[v].values.copy()
        vals[1] = np.nan
        ds[v] = (ds[v].dims, vals, ds[v].attrs)
    rep = ok_json(capsys, nc(str(tmp_path), "nan_time.nc", ds), "--time", "1")
    assert rep["verdict"]["balance"] == "none"
    rep0 = ok_json(capsys, nc(str(tmp_path), "nan_time2.nc", ds), "--time", "0")
    assert rep0["verdict"]["balance"] not in ("none", "unbalanced")


def test_a_zarr_store_with_a_missing_chunk(tmp_path, capsys):
    # One chunk of the height (time 2, 500 hPa) is gone: the store returns its fill
    # value, which xarray reads as missing. That level and time get no verdict; the
    # others keep theirs.
    ds = good().chunk({"time": 1, "level": 1})
    store = os.path.join(str(tmp_path), "cut.zarr")
    ds.to_zarr(store, encoding={"height": {"_FillValue": np.nan}}, zarr_format=2, consolidated=True)
    k = list(ds["level"].values).index(500.0)
    chunk = os.path.join(store, "height", f"2.{k}.0.0")
    assert os.path.exists(chunk)
    os.remove(chunk)
    rep = ok_json(capsys, store, "--time", "2")
    assert rep["verdict"]["balance"] == "none"
    assert ok_json(capsys, store, "--time", "0")["verdict"]["balance"] != "none"


def test_a_bad_later_time_is_caught_when_it_is_read(tmp_path, capsys):
    # The case is checked at its first time when opened; a later time in decametres
    # is caught when the core reads it (or a time whose tendency would use it).
    import pandas as pd

    ds, _ = latlon_dataset(LAT, LON, times=pd.date_range("2040-02-03", periods=5, freq="6h"))
    vals = ds["height"].values.copy()
    vals[4] = vals[4] / 10
    ds["height"] = (ds["height"].dims, vals, ds["height"].attrs)
    path = nc(str(tmp_path), "late_dam.nc", ds)
    assert ok_json(capsys, path, "--time", "1")["verdict"]["balance"] != "none"
    bad(capsys, path, "decametres labelled metres", "--time", "4")
    bad(capsys, path, "decametres labelled metres", "--time", "3")  # its neighbour


def test_no_field_is_ever_masked_silently(tmp_path):
    # the masking field's work is said level by level in the notes
    ds = good()
    la, lo = np.meshgrid(LAT, LON, indexing="ij")
    ds["ps"] = (
        ("time", "latitude", "longitude"),
        np.stack([surface_pressure_field(la, lo)] * 3),
        {"standard_name": "surface_air_pressure", "units": "Pa"},
    )
    c = open_case(nc(str(tmp_path), "masked.nc", ds))
    note = next(n for n in c.notes if "below the ground" in n)
    assert "1000 hPa" in note and "%" in note
    rep = analyze_case(c, 1000, 0, (-20, 20, 40, 60))
    assert rep["invalid"]["below_ground"] > 0
    with pytest.raises(CaseError):
        analyze_case(c, 600, 0, None)  # no such level: said, not guessed


def test_scalar_height_coordinates_belong_to_the_variables_that_list_them(tmp_path):
    # CF scalar coordinates height10m (10 m wind) and height2m (2 m temperature), each
    # listed by its own variables only; xarray hands both to every variable, so a reader
    # that takes whatever coordinates it is given puts the sea-level pressure at 10 m
    import netCDF4

    ds = good()
    la, lo = np.meshgrid(LAT, LON, indexing="ij")
    shape = (ds.sizes["time"],) + la.shape
    ds["psl"] = (
        ("time", "latitude", "longitude"),
        np.full(shape, 101000.0),
        {"standard_name": "air_pressure_at_mean_sea_level", "units": "Pa"},
    )
    ds["uas"] = (
        ("time", "latitude", "longitude"),
        np.full(shape, 5.0),
        {"standard_name": "eastward_wind", "units": "m s-1"},
    )
    ds["vas"] = (
        ("time", "latitude", "longitude"),
        np.full(shape, -3.0),
        {"standard_name": "northward_wind", "units": "m s-1"},
    )
    ds["tas"] = (
        ("time", "latitude", "longitude"),
        np.full(shape, 285.0),
        {"standard_name": "air_temperature", "units": "K"},
    )
    path = nc(str(tmp_path), "two_heights.nc", ds)
    with netCDF4.Dataset(path, "a") as f:
        for name, h in (("height10m", 10.0), ("height2m", 2.0)):
            v = f.createVariable(name, "f8", ())
            v.standard_name, v.units = "height", "m"
            v[...] = h
        f["uas"].coordinates = f["vas"].coordinates = "height10m"
        f["tas"].coordinates = "height2m"
    c = open_case(path)
    assert {"msl", "u10", "v10", "t2m"} <= set(c.surface)
    assert c.sources["msl"]["variable"] == "psl"
    assert c.sources["t2m"]["variable"] == "tas" and c.sources["u10"]["variable"] == "uas"
    np.testing.assert_allclose(c.surface["t2m"].values, 285.0)
