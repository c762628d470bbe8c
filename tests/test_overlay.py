"""A second field drawn as contours over the filled one: 1000-500 hPa thickness, sea-level
pressure, isotachs and temperature, each at its stated interval (common practice, no
source), and one sentence where a case cannot give it."""

import os

import numpy as np
import pytest
import xarray as xr
from scipy.interpolate import RegularGridInterpolator

from app import compute
from app.library import CaseLibrary
from app.state import ViewState

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
CYCLONE = os.path.join(ROOT, "sample_cases", "ocean_cyclone.nc")
TC = os.path.join(ROOT, "sample_cases", "tropical_cyclone.nc")


@pytest.fixture(scope="module")
def library():
    return CaseLibrary([CYCLONE, TC])


@pytest.mark.parametrize(
    "overlay, level, units, interval",
    [
        ("thickness", 500.0, "m", 60.0),
        ("thickness", 500.0, "dam", 6.0),
        ("msl", 850.0, "m", 4.0),
        ("isotachs", 250.0, "m", 5.0),
        ("temperature", 850.0, "m", 2.0),
        ("temperature", 300.0, "m", 5.0),
    ],
)
def test_each_second_field_is_contoured_at_its_stated_interval(
    library, overlay, level, units, interval
):
    st = ViewState(case="ocean_cyclone", level=level, overlay=overlay, height_units=units)
    cd = compute.chart_data(library, st)
    xs, ys, values, labels = cd.overlay
    assert len(xs) >= 3, overlay
    assert f"every {interval:g} " in cd.overlay_label
    assert np.allclose(np.asarray(values) / interval, np.round(np.asarray(values) / interval))


def test_the_thickness_contours_lie_where_the_file_has_that_thickness(library):
    # truth: the file read with xarray, the 500 hPa height less the 1000 hPa one, interpolated
    # (scipy) to each contour label's place
    st = ViewState(
        case="ocean_cyclone", level=500.0, time="2041-01-19T00:00:00Z", overlay="thickness"
    )
    cd = compute.chart_data(library, st)
    with xr.open_dataset(CYCLONE) as ds:
        z = ds["height"].isel(time=0)
        dz = (z.sel(plev=500.0) - z.sel(plev=1000.0)).values.astype(float)
        lat, lon = ds["lat"].values, ds["lon"].values
    f = RegularGridInterpolator((lat[::-1], lon), dz[::-1])
    labels = cd.overlay[3]
    assert len(labels) >= 3
    for x, y, value in labels:
        assert f([y, x])[0] == pytest.approx(value, abs=6.0)  # a tenth of the interval


def test_a_case_without_sea_level_pressure_says_so_and_draws_none(library):
    st = ViewState(case="tropical_cyclone", level=850.0, overlay="msl")
    cd = compute.chart_data(library, st)
    assert cd.overlay is None
    assert "No sea-level pressure contours: this case has no sea-level pressure" in cd.notes
    # and none is drawn where none is asked for
    assert compute.chart_data(library, ViewState(case="tropical_cyclone")).overlay is None
