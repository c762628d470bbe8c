"""Where a region's outline is drawn on a lon/lat chart: on 0 to 360 and -180 to 180 grids
alike, across the Greenwich meridian and the dateline, and on the real GFS file.

The expected positions are written out by hand for each case (the box's edges as numbers
on the chart's own axis), not computed by the code under test.
"""

import types

import numpy as np
import pytest

from app import compute, render
from app.state import RegionSpec
from balance_core import Grid
from testkit import samples


def _chart(lon):
    grid = Grid.latlon(np.linspace(-80, 80, 33), np.asarray(lon, float))
    case = types.SimpleNamespace(name=f"chart from {lon[0]:g}", grid=grid)
    return render.geometry_for(case, "plate_carree")


def _pieces(x):
    """(min, max) of x over each piece of the outline between breaks (NaN)."""
    x = np.asarray(x)
    breaks = np.flatnonzero(np.isnan(x))
    return [
        (float(np.nanmin(p)), float(np.nanmax(p)))
        for p in np.split(x, breaks)
        if np.isfinite(p).any()
    ]


ZERO_360 = np.arange(0, 360, 2.5)
MINUS_180 = np.arange(-180, 180, 2.5)

CASES = [
    # chart's longitudes, box (W, E), the pieces the outline must be drawn as (x from, x to)
    ("0-360, 60W to 0", ZERO_360, (-60, 0), [(300, 360)]),
    ("0-360, 100E to 140E", ZERO_360, (100, 140), [(100, 140)]),
    ("0-360, across Greenwich", ZERO_360, (-10, 10), [(350, 370), (-10, 10)]),
    ("0-360, 170E to 170W", ZERO_360, (170, -170), [(170, 190)]),
    ("-180-180, 60W to 0", MINUS_180, (-60, 0), [(-60, 0)]),
    ("-180-180, across the dateline", MINUS_180, (170, -170), [(170, 190), (-190, -170)]),
    ("-180-180, 0 to 60E given as 360 to 420", MINUS_180, (360, 420), [(0, 60)]),
]


@pytest.mark.parametrize("name, lon, box, want", CASES, ids=[c[0] for c in CASES])
def test_a_box_is_outlined_where_its_numbers_are(name, lon, box, want):
    geom = _chart(lon)
    spec = RegionSpec("box", bounds=(*box, 30.0, 50.0))
    x, y = compute.region_outline(geom, spec)
    assert _pieces(x) == [pytest.approx(p) for p in want], name
    assert np.nanmin(y) == pytest.approx(30) and np.nanmax(y) == pytest.approx(50)


def test_an_outline_inside_the_chart_is_one_piece():
    # a box wholly inside the chart is one piece: no second copy drawn off the chart
    x, _ = compute.region_outline(_chart(ZERO_360), RegionSpec("box", bounds=(20, 40, 0, 10)))
    assert not np.isnan(x).any()


def test_the_gfs_file_outlines_60w_to_0_at_300_to_360():
    # the GFS 2.5-degree sample runs 0 to 357.5 E; a box from 60W to 0 must not be drawn
    # across the whole globe (its east edge at 0 instead of 360)
    samples.need(samples.GFS)
    from balance_core.io import open_case

    case = open_case(samples.GFS)
    assert case.grid.lon1d.min() == 0 and case.grid.lon1d.max() == 357.5
    geom = render.geometry_for(case, "plate_carree")
    x, _ = compute.region_outline(geom, RegionSpec("box", bounds=(-60, 0, 30, 50)))
    assert _pieces(x) == [pytest.approx((300, 360))]
