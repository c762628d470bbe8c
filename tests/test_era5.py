"""Real, published model output: ERA5 sample GRIB carried by cfgrib's source distribution.

era5-levels-members.grib: geopotential and temperature at 850 and 500 hPa, a
3-degree global grid including the poles, 10 ensemble members, 4 times, no
wind. ``make test`` fetches it into .cache/cfgrib-samples before the tests
(which run with the network blocked).
"""

import os
import warnings

import numpy as np
import pytest

from balance_core import Region, weighted_stats
from balance_core.io import CaseError, open_case
from balance_core.thermo import hypsometric_thickness
from balance_core.winds import geostrophic_wind

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = os.environ.get(
    "BALANCE_DESK_SAMPLES", os.path.join(HERE, "..", ".cache", "cfgrib-samples")
)
ERA5 = os.path.join(SAMPLES, "era5-levels-members.grib")

if not os.path.exists(ERA5):
    if os.environ.get("CI"):
        pytest.fail(
            f"{ERA5} is missing: 'make test' fetches it (see .ci/fetch-samples)", pytrace=False
        )
    pytest.skip(f"{ERA5} not fetched yet: run 'make samples'", allow_module_level=True)


@pytest.fixture(scope="module")
def case():
    return open_case(ERA5)


def test_what_the_file_holds(case):
    assert case.levels_pa.tolist() == [85000.0, 50000.0]
    assert case.times.size == 4
    assert case.grid.shape == (61, 120) and case.grid.periodic
    assert set(case.missing) == {"u", "v", "omega"}
    with pytest.raises(CaseError, match="no eastward and northward wind"):
        case.fields(0, 0)


def test_mean_heights_near_the_standard_atmosphere(case):
    # area-weighted mean height within 5 % of the U.S. Standard Atmosphere (1976)
    # heights of the surfaces: 1457 m at 850 hPa, 5574 m at 500 hPa
    everywhere = Region.whole().mask(case.grid)
    for k, std in ((0, 1457.0), (1, 5574.0)):
        for t in range(case.times.size):
            z = case.data["height"].values[t, k]
            mean = weighted_stats(z, case.grid, everywhere).mean
            assert abs(mean / std - 1) < 0.05, (k, t, mean)


def test_heights_within_the_band_weather_allows(case):
    # from memory: 500 hPa heights lie between about 4700 and 6000 m; 850 hPa heights
    # between about 800 and 1900 m, counting values extrapolated under high ground
    z = case.data["height"].values
    assert 4700 < np.nanmin(z[:, 1]) and np.nanmax(z[:, 1]) < 6000
    assert 800 < np.nanmin(z[:, 0]) and np.nanmax(z[:, 0]) < 1900


def test_thickness_matches_the_hypsometric_relation(case):
    # Z500 - Z850 against (R_d T_mean / g0) ln(850/500) with T_mean the average of
    # the two levels' temperature (American Meteorological Society Glossary,
    # "hypsometric equation"). Two levels only approximate the
    # log-p layer mean (inversions, and 850 hPa extrapolated under high ground), and
    # virtual temperature is not available (moisture adds up to about 1 % in warm
    # humid air, from memory). So: median within 1 %, everywhere within 5 %.
    z = case.data["height"].values
    t = case.data["temperature"].values
    thick = z[:, 1] - z[:, 0]
    hyps = hypsometric_thickness(0.5 * (t[:, 0] + t[:, 1]), 85000.0, 50000.0)
    rel = np.abs(thick / hyps - 1)
    assert np.nanmax(rel) < 0.05
    assert np.nanmedian(rel) < 0.01


def test_geostrophic_wind_matches_metpy(case):
    # MetPy geostrophic_wind on the same 3-degree grid with spacings on our sphere.
    # Tolerance 2e-3 of the top speed: geodesic versus along-parallel spacing at 3
    # degrees; the pole rows, the tropics (|lat| < 10) and the two x-edge columns
    # (MetPy does not wrap) are left out.
    mpcalc = pytest.importorskip("metpy.calc")
    import pyproj
    from metpy.units import units

    from balance_core import constants as C

    g = case.grid
    z = case.data["height"].values[0, 1]
    dx, dy = mpcalc.lat_lon_grid_deltas(
        g.lon1d, g.lat1d, geod=pyproj.Geod(a=C.EARTH_RADIUS, b=C.EARTH_RADIUS)
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mu, mv = mpcalc.geostrophic_wind(
            z * units.m, dx=dx, dy=dy, latitude=g.lat1d[:, None] * units.degree
        )
    ug, vg = geostrophic_wind(g, z)
    ok = ~g.tropics_mask & ~g.pole_mask
    ok[:, [0, -1]] = False
    ok[[1, -2], :] = False  # next to the poles MetPy's one-sided rows differ from ours
    scale = np.nanmax(np.hypot(ug, vg)[ok])
    assert np.abs(mu.m - ug)[ok].max() / scale < 2e-3
    assert np.abs(mv.m - vg)[ok].max() / scale < 2e-3
    assert 20 < scale < 150  # a real jet


def test_member_choice_and_mean(case):
    import xarray as xr

    raw = xr.open_dataset(ERA5, engine="cfgrib", backend_kwargs={"indexpath": ""})
    z3 = raw["z"].isel(number=3).values / 9.80665
    c3 = open_case(ERA5, member=3)
    order = np.argsort(-raw["isobaricInhPa"].values)  # the case puts the surface first
    np.testing.assert_allclose(c3.data["height"].values, z3[:, order], rtol=1e-6)
    assert any("member 3 of 10" in n for n in c3.notes)
    cm = open_case(ERA5, member="mean")
    zm = raw["z"].mean("number").values / 9.80665
    np.testing.assert_allclose(cm.data["height"].values, zm[:, order], rtol=1e-6)
    assert any("ensemble mean of 10 members" in n for n in cm.notes)
    assert not np.allclose(c3.data["height"].values, cm.data["height"].values)
