"""Which balance holds where (balance_core.balance_map): the region verdict tile by tile.

The truth is the analytic flow of testkit/makedata.py, whose wind is the closed-form
geostrophic wind of its heights plus a small ageostrophic part (about 2 m/s against 10 to
40 m/s): geostrophic in mid-latitudes by construction, and without a geostrophic wind (f
is zero) at the equator. Each rule is shown saying no: a wind made half again as fast
is not geostrophic anywhere, a tile with too few points, a tile under masked ground and
a coarse grid get no verdict.
"""

import numpy as np
import pytest

from balance_core.balance_map import balance_map, tile_side
from balance_core.io import open_case
from balance_core.io.analysis import diagnostics_for
from balance_core.report import box_report
from balance_core.verdict import CLASSES, Thresholds
from testkit.makedata import latlon_dataset


def _diag(tmp_path_factory, step, *, wind_factor=1.0, hole=None, times=None):
    lat = np.arange(90.0, -90.0 - 1e-9, -step)
    lon = np.arange(0.0, 360.0, step)
    kw = {} if times is None else {"times": times}
    with np.errstate(divide="ignore", invalid="ignore"):
        ds, _ = latlon_dataset(lat, lon, **kw)
    ds["ua"] = ds["ua"] * wind_factor
    ds["va"] = ds["va"] * wind_factor
    if hole is not None:  # missing data over a box of (south, north, west, east)
        s, n, w, e = hole
        inside = (ds.latitude >= s) & (ds.latitude <= n) & (ds.longitude >= w) & (ds.longitude <= e)
        for name in ("height", "ua", "va"):
            ds[name] = ds[name].where(~inside)
    path = tmp_path_factory.mktemp("flow") / f"flow_{step}_{wind_factor}_{hole is not None}.nc"
    ds.to_netcdf(path)
    case = open_case([str(path)])
    level = int(np.argmin(np.abs(case.levels_pa - 50000.0)))
    return diagnostics_for(case, level, min(1, len(case.times) - 1))


@pytest.fixture(scope="module")
def flow_2p5(tmp_path_factory):
    return _diag(tmp_path_factory, 2.5)


def _names(m):
    return np.asarray(CLASSES)[m.classes]


def test_the_analytic_flow_is_geostrophic_in_mid_latitudes_and_none_in_the_tropics(flow_2p5):
    m = balance_map(flow_2p5)
    names = _names(m)
    lat = flow_2p5.grid.lat
    mid = (np.abs(lat) >= 30) & (np.abs(lat) <= 60)
    assert np.mean(names[mid] == "geostrophic") > 0.9, m.counts
    # a tile whose rows all lie within the tropical mask (10 degrees) has no verdict; a
    # tile reaching out of it is judged by the share of its points inside (the region rule)
    n = m.tile_points
    rows = [slice(r, r + n) for r in range(0, lat.shape[0] - n + 1, n)]
    within = [r for r in rows if np.all(np.abs(lat[r, 0]) < 10)]
    assert len(within) == 1  # 2.5N to 7.5S
    assert set(names[within[0]].ravel()) == {"none"}
    assert m.tile_points == 5 and m.tiles == 15 * 29
    assert 1000 < m.tile_km < 1300  # 5 x 2.5 degrees is 1390 km at the equator, less poleward
    assert sum(m.counts.values()) == m.tiles


def test_a_tile_has_the_class_of_its_own_box_report(flow_2p5):
    """The map takes the region verdict's rule: the tile's class is the class of the report
    of a region made of exactly its points."""
    m = balance_map(flow_2p5)
    n = m.tile_points
    for r0, c0 in [(5, 0), (10, 60), (30, 100), (35, 140), (55, 5)]:
        inside = np.zeros(flow_2p5.grid.shape, dtype=bool)
        inside[r0 : r0 + n, c0 : c0 + n] = True
        rep = box_report(flow_2p5, inside)
        assert CLASSES[m.classes[r0, c0]] == rep["verdict"]["balance"], (r0, c0)


def test_a_wind_half_again_the_geostrophic_is_geostrophic_nowhere(tmp_path_factory):
    diag = _diag(tmp_path_factory, 2.5, wind_factor=1.5)
    names = _names(balance_map(diag))
    lat = diag.grid.lat
    mid = (np.abs(lat) >= 30) & (np.abs(lat) <= 60)
    assert not np.any(names[mid] == "geostrophic")
    assert np.mean(names[mid] == "unbalanced") > 0.8


def test_a_tile_under_missing_data_has_no_verdict(tmp_path_factory):
    diag = _diag(tmp_path_factory, 2.5, hole=(35.0, 50.0, 100.0, 130.0))
    names = _names(balance_map(diag))
    lat, lon = diag.grid.lat, diag.grid.lon
    hole = (lat >= 37.5) & (lat <= 47.5) & (lon >= 102.5) & (lon <= 127.5)
    assert np.all(names[hole] == "none")
    outside = (np.abs(lat) >= 30) & (np.abs(lat) <= 60) & ((lon < 80) | (lon > 150))
    assert np.mean(names[outside] == "geostrophic") > 0.9


def test_a_ten_degree_grid_gives_no_verdict_where_a_tile_has_too_few_valid_points(
    tmp_path_factory,
):
    """On a 10-degree grid a 5 x 5 tile is 50 degrees: every tile reaches the pole row, the
    tropical mask or both, and fewer than 25 of its points can be judged."""
    diag = _diag(tmp_path_factory, 10.0)
    m = balance_map(diag)
    assert set(m.counts) == {"none"}, m.counts
    # with the threshold lowered the mid-latitude tiles are judged again: it was the rule
    low = balance_map(diag, thresholds=Thresholds(min_points=9, min_valid_share=0.3), side=3)
    assert low.counts.get("geostrophic", 0) > 0, low.counts


def test_one_valid_time_and_a_smaller_tile(tmp_path_factory):
    import pandas as pd

    diag = _diag(tmp_path_factory, 2.5, times=pd.date_range("2040-02-03", periods=1))
    assert diag.budget.terms["tendency"].available is False
    m = balance_map(diag, side=6)
    assert m.tile_points == 6
    mid = (np.abs(diag.grid.lat) >= 30) & (np.abs(diag.grid.lat) <= 60)
    assert np.mean(_names(m)[mid] == "geostrophic") > 0.9


def test_the_tile_side_holds_a_verdicts_points_and_bounds_the_tiles():
    assert tile_side((73, 144)) == 5  # ceil(sqrt(25))
    assert tile_side((721, 1440)) == 24  # at most 60 tiles across
    assert tile_side((721, 1440), max_across=30) == 48
    assert tile_side((10, 10), Thresholds(min_points=50)) == 8


def test_the_chart_field_draws_the_classes_in_their_colours_and_says_its_tiles():
    """The chart's field: the tile classes sampled to the nearest point (no value between
    two classes), the classes' own colours in the briefing image, the tile size in a note."""
    import io
    import os

    from PIL import Image

    from app import compute
    from app.briefing_image import briefing_png
    from app.library import CaseLibrary
    from app.state import ViewState
    from balance_core.vocabulary import BALANCE_CLASSES

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    lib = CaseLibrary([os.path.join(root, "sample_cases", "ocean_cyclone.nc")])
    cd = compute.chart_data(lib, ViewState(case="ocean_cyclone", field="balance_here"))
    assert cd.color_kind == "classes" and cd.color_range == (-0.5, len(CLASSES) - 0.5)
    shown = np.unique(cd.raster[np.isfinite(cd.raster)])
    assert set(shown) <= set(range(len(CLASSES))) and CLASSES.index("geostrophic") in shown
    assert any("tiles of 5 \u00d7 5 grid points" in n for n in cd.notes), cd.notes
    data = briefing_png(cd, None, None, region_text="r", caution="c", invented_text="")
    rgb = np.asarray(Image.open(io.BytesIO(data)).convert("RGB")).reshape(-1, 3)
    blue = [int(BALANCE_CLASSES[0].colour[i : i + 2], 16) for i in (1, 3, 5)]
    assert BALANCE_CLASSES[0].name == "geostrophic"
    assert np.mean(np.all(np.abs(rgb.astype(int) - blue) <= 3, axis=1)) > 0.05


def test_the_tiles_at_the_poles_and_the_last_columns_take_the_region_rule_too(flow_2p5):
    """Where the globe is awkward: the tile holding the north pole row (one point), the last
    tile of rows (to the south pole, whatever its size) and the last tile of columns (up to
    the wrap at 0 E) each have the class of the report of a region made of exactly its
    points."""
    m = balance_map(flow_2p5)
    ny, nx = flow_2p5.grid.shape
    n = m.tile_points
    # 73 rows and 144 columns in tiles of 5: the last tile of rows is 70 to 72 (80S to the
    # pole; 3 rows, at least half a tile, stay a tile of their own), of columns 140 to 143
    assert (ny, nx, n) == (73, 144, 5)
    last_r, last_c = 70, 140
    for r0, c0 in [(0, 0), (0, last_c), (last_r, 20), (30, last_c)]:
        r1 = ny if r0 == last_r else r0 + n
        c1 = nx if c0 == last_c else c0 + n
        # the tile is one class throughout, from its first point to its last
        assert len(set(m.classes[r0:r1, c0:c1].ravel())) == 1, (r0, c0)
        inside = np.zeros(flow_2p5.grid.shape, dtype=bool)
        inside[r0:r1, c0:c1] = True
        rep = box_report(flow_2p5, inside)
        assert CLASSES[m.classes[r0, c0]] == rep["verdict"]["balance"], (r0, c0)
