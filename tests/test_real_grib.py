"""Real operational GRIB from registry packages: the right field from the right level.

Files (fetched by ``make test`` through .ci/fetch-samples, from source distributions):

* eta.grb (pygrib 2.1.8 sampledata): NCEP Eta (NAM) GRIB2, 80 km Lambert conformal
  grid over North America, 2004-12-09 12 UTC, 181 fields on 19 kinds of level: ``pres``
  at the cloud top (-50000 Pa where there is no cloud) and at the maximum-wind level
  beside ``sp`` at the surface, ``gh`` at the tropopause and the 0 degC isotherm,
  grid-relative 10 m winds.
* gfs.t12z.pgrbf120.2p5deg.grib2 (pygrib 2.1.8 sampledata): NCEP GFS 2.5-degree global
  GRIB2, 120 h forecast, 343 fields on 28 kinds of level.
* the cfgrib 0.9.15.1 test files: edge cases (no height, reduced Gaussian grids,
  temperature on hPa and Pa levels, u and v on different levels).

Every "truth" here is computed in the test from the raw messages, read with eccodes
directly (not with balance-desk's reader), and from closed forms: the Lambert
conformal map factor and meridian convergence of a sphere (Snyder 1987, Map
Projections: A Working Manual, USGS Prof. Paper 1395, eqs. 15-1 to 15-4 and 15-9).
"""

import os

import numpy as np
import pyproj  # noqa: F401  (before eccodes)
import pytest

from balance_core import constants as C
from balance_core.io import CaseError, analyze_case, open_case

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.join(HERE, "..", ".cache")
PYGRIB = os.path.join(ROOT, "pygrib-samples")
CFGRIB = os.path.join(ROOT, "cfgrib-samples")
ETA = os.path.join(PYGRIB, "eta.grb")
GFS = os.path.join(PYGRIB, "gfs.t12z.pgrbf120.2p5deg.grib2")

if not (os.path.exists(ETA) and os.path.exists(GFS)):
    if os.environ.get("CI"):
        pytest.fail(
            f"{PYGRIB} is incomplete: 'make test' fetches it (.ci/fetch-samples)", pytrace=False
        )
    pytest.skip("real GRIB samples not fetched yet: run 'make samples'", allow_module_level=True)

eccodes = pytest.importorskip("eccodes")


def raw_field(path, short, level_type, level=None):
    """Values (rows as stored) of the first message matching, read with eccodes directly."""
    eccodes.codes_grib_multi_support_on()
    with open(path, "rb") as fh:
        try:
            while True:
                h = eccodes.codes_grib_new_from_file(fh)
                if h is None:
                    break
                try:
                    if (
                        eccodes.codes_get(h, "shortName") == short
                        and eccodes.codes_get(h, "typeOfLevel") == level_type
                        and (level is None or eccodes.codes_get(h, "level") == level)
                    ):
                        nx = eccodes.codes_get(
                            h, "Nx" if eccodes.codes_is_defined(h, "Nx") else "Ni"
                        )
                        vals = eccodes.codes_get_values(h).reshape(-1, nx)
                        lat = eccodes.codes_get_array(h, "latitudes").reshape(-1, nx)
                        lon = eccodes.codes_get_array(h, "longitudes").reshape(-1, nx)
                        return vals, lat, lon
                finally:
                    eccodes.codes_release(h)
        finally:
            eccodes.codes_grib_multi_support_reset_file(fh)
    raise LookupError((short, level_type, level))


@pytest.fixture(scope="module")
def eta():
    return open_case(ETA)


@pytest.fixture(scope="module")
def gfs():
    return open_case(GFS)


# -- the right field from the right level --------------------------------------------


def test_eta_surface_pressure_is_the_surface_field_not_the_cloud_top(eta):
    src = eta.sources["surface_pressure"]
    assert src["grib_short_name"] == "sp" and src["grib_type_of_level"] == "surface"
    sp, _, _ = raw_field(ETA, "sp", "surface")
    np.testing.assert_allclose(eta.surface["surface_pressure"].values[0], sp, rtol=1e-6)
    # the tempting one: 'pres' at the cloud top holds -50000 where there is no cloud
    cloud_top, _, _ = raw_field(ETA, "pres", "cloudTop")
    assert np.nanmin(cloud_top) < 0
    # the mean sea level pressure is the standard reduction, by the stated preference
    assert eta.sources["msl"]["grib_short_name"] == "prmsl"
    assert any("also found 'mslet'" in n for n in eta.notes)


def test_eta_heights_winds_and_temperature_come_from_isobaric_levels(eta):
    for role in ("height", "u", "v", "temperature", "omega"):
        assert eta.sources[role]["grib_type_of_level"] == "isobaricInhPa", role
    k = eta.level_index(500)
    gh, _, _ = raw_field(ETA, "gh", "isobaricInhPa", 500)
    np.testing.assert_allclose(eta.data["height"].values[0, k], gh, rtol=1e-6)
    assert eta.levels_pa.size == 19


def test_eta_no_point_is_underground_where_the_ground_is_lower(eta):
    sp, _, _ = raw_field(ETA, "sp", "surface")
    for hpa in (500.0, 700.0, 850.0, 1000.0):
        k = eta.level_index(hpa)
        masked = ~np.isfinite(eta.data["height"].values[0, k])
        expected = hpa * 100 > sp + 1.0  # the level lies below the ground
        np.testing.assert_array_equal(masked, expected, err_msg=f"{hpa} hPa")
    assert not (~np.isfinite(eta.data["height"].values[0, eta.level_index(500)])).any()


def _lambert_tangent(lat, lon, lat1=25.0, lon0=265.0):
    """Map factor and meridian convergence (deg) of a tangent Lambert conformal cone on a
    sphere, in closed form (Snyder 1987, eqs. 15-3, 15-4 with phi1 = phi2)."""
    n = np.sin(np.deg2rad(lat1))
    t = np.tan(np.pi / 4 + np.deg2rad(lat) / 2)
    t1 = np.tan(np.pi / 4 + np.deg2rad(lat1) / 2)
    k = np.cos(np.deg2rad(lat1)) * t1**n / (np.cos(np.deg2rad(lat)) * t**n)
    dlon = (lon - lon0 + 180.0) % 360.0 - 180.0
    return k, n * dlon


def test_eta_10m_winds_are_rotated_to_east_and_north(eta):
    # The file's 10 m winds are grid-relative (resolution and component flags, bit 5).
    # Earth-relative u = u_g cos(g) + v_g sin(g), v = -u_g sin(g) + v_g cos(g), with the
    # convergence g = n (lon - LoV) of the tangent cone (LaD = Latin = 25, LoV = 265).
    ug, lat, lon = raw_field(ETA, "10u", "heightAboveGround", 10)
    vg, _, _ = raw_field(ETA, "10v", "heightAboveGround", 10)
    _, gam = _lambert_tangent(lat, lon)
    g = np.deg2rad(gam)
    u = ug * np.cos(g) + vg * np.sin(g)
    v = -ug * np.sin(g) + vg * np.cos(g)
    np.testing.assert_allclose(eta.surface["u10"].values[0], u, atol=2e-3)
    np.testing.assert_allclose(eta.surface["v10"].values[0], v, atol=2e-3)
    assert np.abs(gam).max() > 15  # so an unrotated wind would be far off
    assert np.abs(eta.surface["u10"].values[0] - ug).max() > 2.0
    # and the reader's convergence (from pyproj) is the closed form
    np.testing.assert_allclose(eta.grid.convergence, gam, atol=1e-4)


def test_eta_box_figures_agree_with_an_independent_computation(eta):
    # The 500 hPa box over the western US: every point valid (the cloud-top pressure
    # once masked 96 % of it). Geostrophic speed and pressure-gradient force from
    # numpy.gradient on the projected grid, times the closed-form map factor.
    rep = analyze_case(eta, 500, 0, (-120, -105, 35, 45))
    assert rep["points"] == rep["region_points"] > 150
    assert rep["verdict"]["balance"] not in ("none", "frictional")
    gh, lat, lon = raw_field(ETA, "gh", "isobaricInhPa", 500)
    m, _ = _lambert_tangent(lat, lon)
    dx = 81271.0  # DxInMetres of the file
    dzdy, dzdx = np.gradient(gh, dx, dx, edge_order=2)
    grad = m * np.hypot(dzdx, dzdy)
    f = 2 * C.OMEGA * np.sin(np.deg2rad(lat))
    lon180 = (lon + 180) % 360 - 180
    box = (lon180 >= -120) & (lon180 <= -105) & (lat >= 35) & (lat <= 45)
    w = (dx / m) ** 2  # cell areas
    rms = lambda a: np.sqrt(np.sum(w[box] * a[box] ** 2) / np.sum(w[box]))  # noqa: E731
    pgf = next(t["magnitude"] for t in rep["terms"] if t["name"] == "pressure_gradient")
    assert pgf == pytest.approx(rms(C.G0 * grad), rel=0.01)
    assert rep["winds"]["geostrophic_speed_rms"] == pytest.approx(rms(C.G0 * grad / f), rel=0.01)
    # the a priori pressure gradient and Coriolis from the box's scales agree (factor 2)
    est = {t["name"]: t["estimate"] for t in rep["terms"]}
    assert 0.5 < est["pressure_gradient"] / est["coriolis"] < 2.0


def test_eta_central_us_is_not_frictional_from_a_handful_of_points(eta):
    # Once 'Frictional' from 4 valid points; now the box is whole and the verdict is
    # not friction at 500 hPa.
    rep = analyze_case(eta, 500, 0, (-100, -90, 35, 45))
    assert rep["valid_share"] == 1.0
    assert rep["verdict"]["balance"] != "frictional"


def test_gfs_picks_each_role_from_its_level(gfs):
    assert gfs.sources["surface_pressure"]["grib_type_of_level"] == "surface"
    assert gfs.sources["height"]["grib_type_of_level"] == "isobaricInhPa"
    assert gfs.sources["msl"]["grib_type_of_level"] == "meanSea"
    assert gfs.sources["u10"]["grib_type_of_level"] == "heightAboveGround"
    assert gfs.grid.periodic and gfs.levels_pa.size == 26
    # a lat-lon grid's winds are earth-relative: taken as they are
    u10, _, _ = raw_field(GFS, "10u", "heightAboveGround", 10)
    np.testing.assert_allclose(gfs.surface["u10"].values[0], u10, atol=1e-5)
    # the run (reference) time and the 120 h lead time
    assert str(gfs.reference_times[0])[:13] == "2011-01-10T12"
    assert (gfs.times[0] - gfs.reference_times[0]) / np.timedelta64(1, "h") == 120


def test_gfs_masks_exactly_where_the_surface_is_above_the_level(gfs):
    sp, _, _ = raw_field(GFS, "sp", "surface")
    for hpa in (500.0, 850.0, 1000.0):
        k = gfs.level_index(hpa)
        masked = ~np.isfinite(gfs.data["height"].values[0, k])
        np.testing.assert_array_equal(masked, hpa * 100 > sp + 1.0, err_msg=f"{hpa} hPa")
    k = gfs.level_index(500)
    assert (~np.isfinite(gfs.data["height"].values[0, k])).sum() <= 2  # the high Himalaya


def test_gfs_north_atlantic_500_is_geostrophic_and_resolved(gfs):
    rep = analyze_case(gfs, 500, 0, (-60, -10, 35, 60))
    assert rep["verdict"]["balance"] == "geostrophic"
    assert rep["resolution"]["resolved"]
    assert rep["ground"]["near"] is False
    assert rep["sources"]["surface_pressure"]["variable"] == "sp"


@pytest.mark.parametrize(
    "name, fragment",
    [
        ("reduced_gg.grib", "reduced_gg, which balance-desk cannot use"),
        ("hpa_and_pa.grib", "no geopotential or geopotential height"),
        ("uv_on_different_levels.grib", "no geopotential or geopotential height"),
        ("t_on_different_level_types.grib", "no geopotential or geopotential height"),
        ("era5-levels-corrupted.grib", "damaged or truncated"),
    ],
)
def test_cfgrib_edge_cases_get_one_sentence(name, fragment):
    path = os.path.join(CFGRIB, name)
    if not os.path.exists(path):
        pytest.fail(f"{path} missing: 'make test' fetches it") if os.environ.get(
            "CI"
        ) else pytest.skip(f"{name} not fetched")
    with pytest.raises(CaseError, match=fragment.replace("(", r"\(")):
        open_case(path)


@pytest.mark.parametrize(
    "name, fragment",
    [
        ("ecmwf_tigge.grb", "reduced_gg"),
        ("rotated_ll.grib1", "rotated_ll"),
        ("ngm.grb", "no geopotential or geopotential height"),
    ],
)
def test_pygrib_files_the_core_cannot_use_get_one_sentence(name, fragment):
    with pytest.raises(CaseError, match=fragment):
        open_case(os.path.join(PYGRIB, name))
