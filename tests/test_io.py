"""Reading model output: conventions, units, files, members, valid times, masks, projections."""

import subprocess
import sys

import numpy as np
import pyproj
import pytest
import xarray as xr

from balance_core.io import CaseError, analyze_case, open_case
from balance_core.winds import geostrophic_wind
from testkit.makedata import LEVELS, TIMES, latlon_dataset, projected_dataset, truth

LAT = np.arange(70.0, 29.9, -1.0)
LON = np.arange(-30.0, 30.1, 1.0)


def _write(ds, path, **kw):
    ds.to_netcdf(path, **kw)
    return str(path)


@pytest.mark.parametrize("style", ["cf", "era5", "ncep"])
def test_conventions_and_units_read_the_same(tmp_path, style):
    # CF standard names; ECMWF short names with geopotential in m2 s-2 and levels
    # in millibars; NCEP-like names with heights in gpm, winds in knots, omega in
    # hPa s-1, temperature in degC and levels in Pa: one truth (units via pint).
    ds, arr = latlon_dataset(LAT, LON, style=style)
    c = open_case(_write(ds, tmp_path / f"{style}.nc"))
    np.testing.assert_allclose(c.levels_pa, LEVELS * 100)
    np.testing.assert_allclose(c.data["height"].values, arr["z"], rtol=1e-10)
    np.testing.assert_allclose(c.data["u"].values, arr["u"], rtol=1e-6)
    np.testing.assert_allclose(c.data["v"].values, arr["v"], rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(c.data["omega"].values, arr["om"], rtol=1e-6, atol=1e-12)
    np.testing.assert_allclose(c.data["temperature"].values, arr["t"], rtol=1e-10)
    assert c.missing == []
    if style == "era5":
        assert any("geopotential divided by standard gravity" in n for n in c.notes)


def test_level_and_latitude_order_do_not_matter(tmp_path):
    ds, _ = latlon_dataset(LAT, LON)
    flipped = ds.isel(level=slice(None, None, -1), latitude=slice(None, None, -1))
    a = open_case(_write(ds, tmp_path / "a.nc"))
    b = open_case(_write(flipped, tmp_path / "b.nc"))
    np.testing.assert_allclose(b.levels_pa, a.levels_pa)  # both surface first
    ra = analyze_case(a, 500, 1, (-20, 20, 40, 60))
    rb = analyze_case(b, 500, 1, (-20, 20, 40, 60))
    for ta, tb in zip(ra["terms"], rb["terms"]):
        assert ta["name"] == tb["name"]
        if ta["magnitude"] is not None:
            assert ta["magnitude"] == pytest.approx(tb["magnitude"], rel=1e-9)


def test_several_files_join_along_valid_time(tmp_path):
    ds, arr = latlon_dataset(LAT, LON)
    paths = [_write(ds.isel(time=[i]), tmp_path / f"part{i}.nc") for i in (2, 0, 1)]
    c = open_case(paths)
    assert list(c.times) == list(TIMES.values)
    np.testing.assert_allclose(c.data["u"].values, arr["u"], rtol=1e-12)
    assert c.unavailable_terms() == {}


def test_zarr_store_and_h5netcdf(tmp_path):
    ds, arr = latlon_dataset(LAT, LON)
    ds.to_zarr(tmp_path / "case.zarr")
    c = open_case(str(tmp_path / "case.zarr"))
    np.testing.assert_allclose(c.data["height"].values, arr["z"])
    h5 = _write(ds, tmp_path / "h5.nc", engine="h5netcdf")
    np.testing.assert_allclose(open_case(h5).data["u"].values, arr["u"])


def test_lazy_until_needed(tmp_path):
    ds, _ = latlon_dataset(LAT, LON)
    c = open_case(_write(ds, tmp_path / "lazy.nc"))
    import dask.array as da

    assert isinstance(c.data["u"].data, da.Array)  # nothing read whole at open


def test_numeric_time_with_cf_units(tmp_path):
    ds, _ = latlon_dataset(LAT, LON)
    ds["time"].encoding.update(units="hours since 2040-02-01 00:00:00", calendar="standard")
    c = open_case(_write(ds, tmp_path / "t.nc"))
    assert list(c.times) == list(TIMES.values)


def test_forecast_steps_give_valid_times(tmp_path):
    # reference time + step: what a forecast file carries; valid time is what users see
    ds, _ = latlon_dataset(LAT, LON)
    fc = ds.rename({"time": "step"}).assign_coords(
        step=("step", (TIMES - TIMES[0]).values + np.timedelta64(12, "h")),
        time=((), np.datetime64("2040-02-02T12:00", "ns")),
    )
    c = open_case(_write(fc, tmp_path / "fc.nc"))
    assert list(c.times) == list(TIMES.values)
    assert any("reference time + step" in n for n in c.notes)
    assert c.time_index("2040-02-03T06:00:00Z") == 1


def test_ensemble_member_and_mean(tmp_path):
    ds, arr = latlon_dataset(LAT, LON)
    members = xr.concat([ds * (1 + 0.01 * m) for m in range(4)], dim="number")
    members = members.assign_coords(number=np.arange(4))
    members.attrs = ds.attrs
    for v in ds.data_vars:
        members[v].attrs = ds[v].attrs
    path = _write(members, tmp_path / "ens.nc")
    c2 = open_case(path, member=2)
    np.testing.assert_allclose(c2.data["u"].values, arr["u"] * 1.02, rtol=1e-10)
    assert any("member 2 of 4" in n for n in c2.notes)
    cm = open_case(path, member="mean")
    np.testing.assert_allclose(cm.data["u"].values, arr["u"] * 1.015, rtol=1e-10)
    assert any("ensemble mean of 4 members" in n for n in cm.notes)
    # the member read goes into the report, and so into every export's settings
    assert analyze_case(c2, 500.0)["member"] == 2
    assert analyze_case(cm, 500.0)["member"] == "mean"
    assert analyze_case(open_case(_write(ds, tmp_path / "one.nc")), 500.0)["member"] is None


def test_below_ground_levels_are_masked_and_counted(tmp_path):
    ds, _ = latlon_dataset(LAT, LON)
    ps = np.full((len(TIMES), LAT.size, LON.size), 101000.0)
    ps[:, :10, :] = 88000.0  # high ground in the north: 1000 hPa lies below it
    ds["sp"] = (
        ("time", "latitude", "longitude"),
        ps,
        {"standard_name": "surface_air_pressure", "units": "Pa"},
    )
    c = open_case(_write(ds, tmp_path / "ps.nc"))
    assert c.below_ground == {1000.0: 3 * 10 * LON.size}
    assert np.isnan(c.data["u"].values[:, 0, :10]).all()
    assert np.isfinite(c.data["u"].values[:, 1]).all()
    rep = analyze_case(c, 1000, 1, (-20, 20, 45, 70))
    assert rep["masked_points"] > 0
    assert any("below the ground" in n for n in rep["residual_causes"])


def test_surface_friction_evidence(tmp_path):
    # Sea-level pressure and a 10 m wind turned 20 degrees toward low pressure and
    # slowed to 70 % of geostrophic: the reader recovers both (common practice, no
    # source: the surface wind crosses the isobars toward low pressure).
    ds, _ = latlon_dataset(LAT, LON)
    la, lo = np.meshgrid(np.deg2rad(LAT), np.deg2rad(LON), indexing="ij")
    msl = 101000 + 1500 * np.sin(2 * la) * np.cos(2 * lo)
    t2 = np.full(msl.shape, 285.0)
    from balance_core import Grid
    from balance_core.winds import geostrophic_wind_from_pressure

    g = Grid.latlon(LAT, LON)
    from balance_core.constants import R_DRY

    ug, vg = geostrophic_wind_from_pressure(g, msl, msl / (R_DRY * t2))
    a = np.deg2rad(20.0)
    u10 = 0.7 * (ug * np.cos(a) - vg * np.sin(a))
    v10 = 0.7 * (ug * np.sin(a) + vg * np.cos(a))
    st = lambda f: np.broadcast_to(f, (len(TIMES),) + f.shape)  # noqa: E731
    ds["msl"] = (
        ("time", "latitude", "longitude"),
        st(msl),
        {"units": "Pa", "standard_name": "air_pressure_at_mean_sea_level"},
    )
    ds["u10"] = (("time", "latitude", "longitude"), st(u10), {"units": "m s-1"})
    ds["v10"] = (("time", "latitude", "longitude"), st(v10), {"units": "m s-1"})
    ds["t2m"] = (("time", "latitude", "longitude"), st(t2), {"units": "K"})
    c = open_case(_write(ds, tmp_path / "sfc.nc"))
    sfc = c.surface_analysis(0)
    ok = np.isfinite(sfc["cross_isobar_angle"]) & (np.abs(g.lat) > 35)
    np.testing.assert_allclose(sfc["cross_isobar_angle"][ok], 20.0, atol=1e-6)
    np.testing.assert_allclose(sfc["speed_ratio"][ok], 0.7, rtol=1e-9)
    rep = analyze_case(c, 850, 0, (-20, 20, 40, 60))
    assert rep["surface"]["cross_isobar_angle_median_deg"] == pytest.approx(20.0)
    # kept for the times asked last, read-only, and never handed to a copy of another grid
    assert c.surface_analysis(0) is sfc
    with pytest.raises(ValueError):
        sfc["speed_ratio"][0, 0] = 1.0
    band = c.rows(2, 6)
    assert band.surface_analysis(0)["speed_ratio"].shape == (4, c.grid.shape[1])
    for t in range(1, len(TIMES)):
        c.surface_analysis(t)
    assert len(TIMES) == 3 and c.surface_analysis(0) is not sfc  # an old time is computed again


# -- projected grids -------------------------------------------------------------------

LCC = "+proj=lcc +lat_1=50 +lat_2=50 +lat_0=50 +lon_0=5 +R=6371008.7714 +units=m"
STERE = "+proj=stere +lat_0=90 +lat_ts=60 +lon_0=-35 +R=6371008.7714 +units=m"


def _closed_form_angle(kind):
    # tangent Lambert conformal: n (lon - lon0), n = sin(lat_tangent); north polar
    # stereographic: lon - lon0 (Snyder 1987, "Map Projections: A Working Manual",
    # USGS Professional Paper 1395, chapters 15 and 21)
    if kind == "lcc":
        return lambda lat, lon: np.sin(np.deg2rad(50.0)) * (lon - 5.0)
    return lambda lat, lon: (lon + 35.0 + 180.0) % 360.0 - 180.0


@pytest.mark.parametrize("kind", ["lcc", "stere"])
def test_projected_grid_relative_winds_come_back_earth_relative(tmp_path, kind):
    crs = pyproj.CRS.from_proj4(LCC if kind == "lcc" else STERE)
    if kind == "lcc":
        x = np.arange(-1.2e6, 1.2e6 + 1, 4e4)
        y = np.arange(-9e5, 9e5 + 1, 4e4)
    else:
        x = np.arange(-2.0e6, 2.0e6 + 1, 5e4) + 2.5e4
        y = np.arange(-4.0e6, -1.0e6 + 1, 5e4)
    # the winds are written grid-relative with the closed-form angle, not pyproj's:
    # a sign error shared by writer and reader cannot pass
    ds, arr, lat, lon = projected_dataset(crs, x, y, angle=_closed_form_angle(kind))
    # 10 m winds, grid-relative too (CF x_wind / y_wind with a height coordinate of 10 m)
    g = np.deg2rad(_closed_form_angle(kind)(lat, lon))
    u10, v10 = 0.7 * arr["u"][:, 0], 0.7 * arr["v"][:, 0]
    common = {"grid_mapping": "crs", "coordinates": "lat lon"}
    ds["uas"] = (
        ("time", "y", "x"),
        u10 * np.cos(g) - v10 * np.sin(g),
        {"standard_name": "x_wind", "units": "m s-1", **common},
    )
    ds["vas"] = (
        ("time", "y", "x"),
        u10 * np.sin(g) + v10 * np.cos(g),
        {"standard_name": "y_wind", "units": "m s-1", **common},
    )
    ds = ds.assign_coords(height=((), 10.0, {"standard_name": "height", "units": "m"}))
    c = open_case(_write(ds, tmp_path / f"{kind}.nc"))
    assert c.grid.kind == "projected"
    np.testing.assert_allclose(c.grid.lat, lat, atol=1e-9)
    np.testing.assert_allclose(c.data["u"].values, arr["u"], atol=1e-6)
    np.testing.assert_allclose(c.data["v"].values, arr["v"], atol=1e-6)
    assert any("rotated to east and north" in n for n in c.notes)
    np.testing.assert_allclose(c.surface["u10"].values, u10, atol=1e-6)
    np.testing.assert_allclose(c.surface["v10"].values, v10, atol=1e-6)
    assert c.sources["u10"]["rotated"] and c.sources["u10"]["level_type"] == "10 m above ground"


def _latlon_twin(tmp_path, box):
    lat = np.arange(box[3] + 2, box[2] - 2.01, -0.5)
    lon = np.arange(box[0] - 3, box[1] + 3.01, 0.5)
    ds, _ = latlon_dataset(lat, lon)
    return open_case(_write(ds, tmp_path / "twin.nc"))


@pytest.mark.parametrize("kind", ["lcc", "stere"])
def test_projected_budget_equals_latlon_budget(tmp_path, kind):
    # The same analytic flow on a projected grid and on a lat-lon grid: the
    # geostrophic wind agrees pointwise with the analytic one on both, and the
    # budget terms' RMS over the same lon/lat box agree (to truncation).
    crs = pyproj.CRS.from_proj4(LCC if kind == "lcc" else STERE)
    if kind == "lcc":
        x, y = np.arange(-1.2e6, 1.2e6 + 1, 2.5e4), np.arange(-9e5, 9e5 + 1, 2.5e4)
        box = (-5.0, 15.0, 45.0, 55.0)
    else:
        x, y = np.arange(-2.0e6, 2.0e6 + 1, 4e4) + 2e4, np.arange(-4.0e6, -1.0e6 + 1, 4e4)
        box = (-55.0, -15.0, 55.0, 65.0)
    ds, arr, lat, lon = projected_dataset(crs, x, y)
    pc = open_case(_write(ds, tmp_path / "proj.nc"))
    lc = _latlon_twin(tmp_path, box)
    # geostrophic wind against the closed form at the projected points
    k = pc.level_index(500)
    ug, vg = geostrophic_wind(pc.grid, pc.data["height"].values[1, k])
    d = 1e-5
    zx = (truth(lat, lon + d, 500.0, 6.0)[0] - truth(lat, lon - d, 500.0, 6.0)[0]) / (
        2 * np.deg2rad(d) * pc.grid.radius * np.cos(np.deg2rad(lat))
    )
    zy = (truth(lat + d, lon, 500.0, 6.0)[0] - truth(lat - d, lon, 500.0, 6.0)[0]) / (
        2 * np.deg2rad(d) * pc.grid.radius
    )
    exact_u = -9.80665 * zy * pc.grid.inverse_f
    exact_v = 9.80665 * zx * pc.grid.inverse_f
    inner = (slice(1, -1), slice(1, -1))
    scale = np.nanmax(np.hypot(exact_u, exact_v))
    assert np.nanmax(np.abs(ug - exact_u)[inner]) / scale < 5e-3
    assert np.nanmax(np.abs(vg - exact_v)[inner]) / scale < 5e-3
    # the budget over the same box
    rp = analyze_case(pc, 500, 1, box)
    rl = analyze_case(lc, 500, 1, box)
    mp = {t["name"]: t["magnitude"] for t in rp["terms"] + rp["derived"]}
    ml = {t["name"]: t["magnitude"] for t in rl["terms"] + rl["derived"]}
    for name in (
        "pressure_gradient",
        "coriolis",
        "horizontal_advection",
        "metric_uv",
        "tendency",
        "vertical_advection",
        "acceleration",
    ):
        assert mp[name] == pytest.approx(ml[name], rel=0.03), name
    assert rp["verdict"]["balance"] == rl["verdict"]["balance"]


def test_grib2_lambert_grid_relative_winds(tmp_path):
    # A GRIB2 file written with eccodes on a Lambert grid, winds flagged
    # grid-relative (resolution-and-component flags, bit 5): the case reads them
    # back earth-relative (WMO-No. 306, code table 3.3).
    from testkit.gribwrite import write_grib2

    crs = pyproj.CRS.from_proj4(
        "+proj=lcc +lat_1=45 +lat_2=45 +lat_0=45 +lon_0=10 +R=6371229 +units=m"
    )
    x, y = np.arange(-6e5, 6e5 + 1, 5e4), np.arange(-5e5, 5e5 + 1, 5e4)
    X, Y = np.meshgrid(x, y)
    lon, lat = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True).transform(X, Y)
    gam = np.deg2rad(np.sin(np.deg2rad(45.0)) * (lon - 10.0))  # closed form, not pyproj
    levels = [850.0, 500.0]
    fields = {k: np.empty((2, 2) + X.shape) for k in ("gh", "u", "v", "t")}
    truth_uv = np.empty((2, 2, 2) + X.shape)
    for it, hours in enumerate((0.0, 6.0)):
        for ik, p in enumerate(levels):
            z, u, v, _, t = truth(lat, lon, p, hours)
            fields["gh"][it, ik], fields["t"][it, ik] = z, t
            fields["u"][it, ik] = u * np.cos(gam) - v * np.sin(gam)
            fields["v"][it, ik] = u * np.sin(gam) + v * np.cos(gam)
            truth_uv[:, it, ik] = u, v
    grid = dict(
        kind="lambert",
        lat_first=float(lat[0, 0]),
        lon_first=float(lon[0, 0]),
        dx=5e4,
        dy=5e4,
        lad=45.0,
        lov=10.0,
        latin1=45.0,
        latin2=45.0,
    )
    u10, v10 = 0.6 * truth_uv[0, :, 0] + 1.0, 0.6 * truth_uv[1, :, 0] - 1.5  # (time, y, x)
    single = {
        ("u", "10m"): u10 * np.cos(gam) - v10 * np.sin(gam),
        ("v", "10m"): u10 * np.sin(gam) + v10 * np.cos(gam),
    }
    path = tmp_path / "lcc.grib2"
    write_grib2(
        path, grid, fields, levels, [(20400203, 0), (20400203, 6)], uv_relative=True, single=single
    )
    c = open_case(str(path))
    assert c.grid.kind == "projected"
    # 24-bit packing: agreement to the packing precision
    np.testing.assert_allclose(c.data["u"].values, truth_uv[0], atol=2e-3)
    np.testing.assert_allclose(c.data["v"].values, truth_uv[1], atol=2e-3)
    np.testing.assert_allclose(c.grid.convergence, np.rad2deg(gam), atol=1e-6)
    # the 10 m winds too (they were once left grid-relative)
    np.testing.assert_allclose(c.surface["u10"].values, u10, atol=2e-3)
    np.testing.assert_allclose(c.surface["v10"].values, v10, atol=2e-3)


def test_grib2_regular_latlon(tmp_path):
    from testkit.gribwrite import write_grib2

    lat = np.arange(30.0, 70.01, 1.0)
    lon = np.arange(-30.0, 30.01, 1.0)
    la, lo = np.meshgrid(lat, lon, indexing="ij")
    levels = [850.0, 500.0]
    fields = {k: np.empty((2, 2) + la.shape) for k in ("gh", "u", "v", "t", "w")}
    for it, hours in enumerate((0.0, 6.0)):
        for ik, p in enumerate(levels):
            z, u, v, om, t = truth(la, lo, p, hours)
            for key, val in zip(("gh", "u", "v", "w", "t"), (z, u, v, om, t)):
                fields[key][it, ik] = val
    grid = dict(kind="regular_ll", lat0=30.0, lat1=70.0, lon0=330.0, lon1=30.0, dlat=1.0, dlon=1.0)
    path = tmp_path / "ll.grib2"
    write_grib2(path, grid, fields, levels, [(20400203, 0), (20400203, 6)], uv_relative=False)
    c = open_case(str(path))
    assert c.grid.kind == "latlon" and c.missing == []
    k = c.level_index(500)
    row = int(np.argmin(np.abs(c.grid.lat1d - 50)))
    col = int(np.argmin(np.abs(((c.grid.lon1d + 180) % 360) - 180 - 0.0)))
    z, u, v, om, t = truth(50.0, 0.0, 500.0, 6.0)
    assert c.data["u"].values[1, k, row, col] == pytest.approx(u, abs=1e-3)
    assert c.data["omega"].values[1, k, row, col] == pytest.approx(om, abs=1e-5)


def test_real_command_exit_status_on_grib_and_netcdf(tmp_path):
    # The trap of these wheels: eccodes imported before pyproj crashes the process at
    # exit (status 134/139) after correct output. Run the real command and look.
    from testkit.gribwrite import write_grib2

    lat = np.arange(30.0, 70.01, 2.0)
    lon = np.arange(-30.0, 30.01, 2.0)
    la, lo = np.meshgrid(lat, lon, indexing="ij")
    fields = {k: np.empty((3, 2) + la.shape) for k in ("gh", "u", "v", "t", "w")}
    for it in range(3):
        for ik, p in enumerate((850.0, 500.0)):
            z, u, v, om, t = truth(la, lo, p, 6.0 * it)
            for key, val in zip(("gh", "u", "v", "w", "t"), (z, u, v, om, t)):
                fields[key][it, ik] = val
    grid = dict(kind="regular_ll", lat0=30.0, lat1=70.0, lon0=330.0, lon1=30.0, dlat=2.0, dlon=2.0)
    grib = tmp_path / "run.grib2"
    write_grib2(
        grib,
        grid,
        fields,
        [850.0, 500.0],
        [(20400203, 0), (20400203, 6), (20400203, 12)],
        uv_relative=False,
    )
    ds, _ = latlon_dataset(lat, lon)
    nc = _write(ds, tmp_path / "run.nc")
    for path in (grib, nc):
        r = subprocess.run(
            [
                sys.executable,
                "-m",
                "app.cli",
                "analyze",
                str(path),
                "--level",
                "500",
                "--format",
                "json",
            ],
            capture_output=True,
            text=True,
            timeout=300,
        )
        assert r.returncode == 0, (path, r.returncode, r.stderr[-500:])
        assert '"verdict"' in r.stdout


def test_grib2_polar_stereographic(tmp_path):
    from testkit.gribwrite import write_grib2

    crs = pyproj.CRS.from_proj4("+proj=stere +lat_0=90 +lat_ts=60 +lon_0=-35 +R=6371229 +units=m")
    x, y = np.arange(-1.5e6, 1.5e6 + 1, 6e4) + 3e4, np.arange(-3.5e6, -1.0e6 + 1, 6e4)
    X, Y = np.meshgrid(x, y)
    lon, lat = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True).transform(X, Y)
    gam = np.deg2rad(lon + 35.0)  # north polar stereographic: lon - lon0 (Snyder 1987, ch. 21)
    fields = {k: np.empty((1, 1) + X.shape) for k in ("gh", "u", "v")}
    z, u, v, _, _ = truth(lat, lon, 500.0, 0.0)
    fields["gh"][0, 0] = z
    fields["u"][0, 0] = u * np.cos(gam) - v * np.sin(gam)
    fields["v"][0, 0] = u * np.sin(gam) + v * np.cos(gam)
    grid = dict(
        kind="polar_stereographic",
        lat_first=float(lat[0, 0]),
        lon_first=float(lon[0, 0]),
        dx=6e4,
        dy=6e4,
        lad=60.0,
        lov=-35.0,
    )
    u10, v10 = 0.6 * u - 1.0, 0.6 * v + 2.0  # 10 m winds, flagged grid-relative too
    single = {
        ("u", "10m"): (u10 * np.cos(gam) - v10 * np.sin(gam))[None],
        ("v", "10m"): (u10 * np.sin(gam) + v10 * np.cos(gam))[None],
    }
    path = tmp_path / "ps.grib2"
    write_grib2(path, grid, fields, [500.0], [(20400203, 0)], uv_relative=True, single=single)
    c = open_case(str(path))
    assert c.grid.kind == "projected"
    np.testing.assert_allclose(c.grid.lat, lat, atol=1e-6)
    np.testing.assert_allclose(c.data["u"].values[0, 0], u, atol=2e-3)
    np.testing.assert_allclose(c.data["v"].values[0, 0], v, atol=2e-3)
    np.testing.assert_allclose(c.surface["u10"].values[0], u10, atol=2e-3)
    np.testing.assert_allclose(c.surface["v10"].values[0], v10, atol=2e-3)
    assert c.sources["u10"]["grib_short_name"] == "10u"


def test_cf_mercator_grid(tmp_path):
    crs = pyproj.CRS.from_proj4("+proj=merc +lat_ts=20 +lon_0=0 +R=6371008.7714 +units=m")
    x, y = np.arange(-1.0e6, 1.0e6 + 1, 5e4), np.arange(1.5e6, 3.5e6 + 1, 5e4)
    ds, arr, lat, lon = projected_dataset(crs, x, y, angle=lambda la, lo: 0 * la)
    c = open_case(_write(ds, tmp_path / "merc.nc"))
    np.testing.assert_allclose(c.grid.convergence, 0, atol=1e-9)  # Mercator: north is up
    # the map factor of Mercator is sec(lat) / sec(lat_ts) on the sphere (Snyder 1987, ch. 7)
    np.testing.assert_allclose(
        c.grid.map_factor, np.cos(np.deg2rad(20)) / np.cos(np.deg2rad(lat)), rtol=1e-6
    )
    np.testing.assert_allclose(c.data["u"].values, arr["u"], atol=1e-9)


def test_rotated_pole_is_refused_clearly(tmp_path):
    crs = pyproj.CRS.from_cf(
        {
            "grid_mapping_name": "rotated_latitude_longitude",
            "grid_north_pole_latitude": 40.0,
            "grid_north_pole_longitude": -170.0,
        }
    )
    ds, _ = latlon_dataset(LAT, LON)
    ds = ds.rename({"latitude": "rlat", "longitude": "rlon"})
    ds["rlat"].attrs = {"standard_name": "grid_latitude", "units": "degrees"}
    ds["rlon"].attrs = {"standard_name": "grid_longitude", "units": "degrees"}
    ds["rotated_pole"] = ((), 0, crs.to_cf())
    for v in ("height", "ua", "va", "wap", "ta"):
        ds[v].attrs["grid_mapping"] = "rotated_pole"
    path = _write(ds, tmp_path / "rot.nc")
    with pytest.raises(CaseError, match="rotated-pole"):
        open_case(path)


def test_orography_masks_levels_under_the_ground(tmp_path):
    ds, arr = latlon_dataset(LAT, LON)
    orog = np.zeros((LAT.size, LON.size))
    orog[:, :5] = 2000.0  # a plateau in the west: 1000 and 850 hPa lie under it
    ds["orog"] = (
        ("latitude", "longitude"),
        orog,
        {"standard_name": "surface_altitude", "units": "m"},
    )
    ds["orog"] = ds["orog"].expand_dims(time=ds["time"])
    c = open_case(_write(ds, tmp_path / "orog.nc"))
    assert set(c.below_ground) == {1000.0, 850.0}
    assert np.isnan(c.data["height"].values[:, :2, :, :5]).all()
    assert np.isfinite(c.data["height"].values[:, 2:]).all()


def test_a_variable_missing_at_some_levels(tmp_path):
    # omega given only from 1000 to 500 hPa: the case opens, says so, and the budget at
    # 300 hPa lists the vertical terms as unavailable for that reason
    ds, _ = latlon_dataset(LAT, LON)
    om = ds["wap"].isel(level=slice(0, 4))
    ds = ds.drop_vars("wap")
    ds["omega"] = om.rename({"level": "plev"}).assign_coords(
        plev=("plev", om["level"].values, {"units": "hPa"})
    )
    ds["omega"].attrs = {"standard_name": "lagrangian_tendency_of_air_pressure", "units": "Pa s-1"}
    c = open_case(_write(ds, tmp_path / "partial.nc"))
    assert any("omega is not given at 300 hPa" in n for n in c.notes)
    rep = analyze_case(c, 300, 1, (-20, 20, 40, 60))
    by = {t["name"]: t for t in rep["terms"]}
    assert by["vertical_advection"]["magnitude"] is None
    assert "not given at 300 hPa" in by["vertical_advection"]["note"]
    ok = analyze_case(c, 700, 1, (-20, 20, 40, 60))
    assert {t["name"]: t for t in ok["terms"]}["vertical_advection"]["magnitude"] is not None
