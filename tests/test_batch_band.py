"""A batch piece computes on a band of rows; its rows must be the whole grid's, bit for bit.

``run_task`` cuts the case to the rows its boxes cover and a halo (app.batch._band) to
spare memory. The truth here is ``analyze_case`` on the whole case -- the path the
``analyze`` command takes, with no band -- on real files from registry packages (GFS
2.5-degree global with orography and surface fields, an Eta Lambert conformal grid) and
an invented sample with several times (the tendency's neighbours).
"""

import math
import os

import pytest

from testkit import samples

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
GFS = samples.GFS
ETA = samples.ETA
SAMPLE = os.path.join(ROOT, "sample_cases", "ocean_cyclone.nc")

PIECES = [
    # path, member, time index, level, boxes, a band expected (the flow's length scale reads
    # 2500 km of columns beyond a box: on the small domains that is the whole grid)
    (GFS, None, 0, 850.0, [("rockies", (-115.0, -95.0, 35.0, 50.0))], True),  # below ground
    (
        GFS,
        None,
        0,
        500.0,
        [("atlantic", (-60.0, -10.0, 35.0, 65.0)), ("pacific", (150.0, -140.0, 30.0, 60.0))],
        True,
    ),  # across 180
    (GFS, None, 0, 850.0, [("south", (-70.0, 20.0, -60.0, -30.0))], True),
    (ETA, None, 0, 500.0, [("plains", (-105.0, -90.0, 32.0, 42.0))], False),
    (SAMPLE, None, 1, 850.0, [("core", (-45.0, -25.0, 38.0, 50.0))], False),
]


def _same(a, b):
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    return a == b


@pytest.mark.parametrize(
    "path, member, t, level, boxes, banded",
    PIECES,
    ids=[f"{os.path.basename(p[0])}-{int(p[3])}-{p[4][0][0]}" for p in PIECES],
)
def test_a_piece_on_a_band_of_rows_equals_analyze_on_the_whole_grid(
    path, member, t, level, boxes, banded
):
    samples.need(path)
    from app.batch import Task, _band, flatten, run_task
    from balance_core.io import analyze_case, open_case

    case = open_case(path, member=0 if member is None else member)
    band = _band(case, boxes)
    # the band is what is tested on the global grid: it must leave rows out
    if banded:
        assert band is not None and band[1] - band[0] < case.grid.shape[0]
    else:
        assert band is None
    task = Task(path, member, t, level, tuple(boxes))
    result = run_task(task)
    assert result["error"] is None, result["error"]
    assert len(result["rows"]) == len(boxes)
    for (name, box), got in zip(boxes, result["rows"]):
        want = flatten(analyze_case(case, level, t, box), task, name, invented=case.invented)
        # the bundled sample is invented demo data, the registry packages' files are not
        assert got["invented"] is (path == SAMPLE)
        assert got.keys() == want.keys()
        differ = [k for k in want if not _same(got[k], want[k])]
        assert not differ, {k: (got[k], want[k]) for k in differ}
        assert want["points"] and want["points"] > 0


def test_a_box_over_most_of_the_grid_is_computed_on_the_whole_grid():
    from app.batch import _band
    from balance_core.io import open_case

    case = open_case(SAMPLE)
    assert _band(case, [("all", (-70.0, 0.0, 26.0, 64.0))]) is None
    assert _band(case, [("none", (100.0, 120.0, 26.0, 64.0))]) is None  # no point: analyze says
    assert _band(case, [("bad", (-70.0, 0.0, 64.0, 26.0))]) is None  # south > north: likewise


def test_a_box_outside_one_files_grid_costs_only_its_own_rows(tmp_path):
    """Two boxes, a file whose grid (25 to 65N) holds only the first: before, the piece lost
    the first box's row too, and its error gave the band's extent (36 to 64N), not the
    grid's."""
    import numpy as np

    from app.batch import Task, run_task
    from testkit.makedata import latlon_dataset

    ds, _ = latlon_dataset(np.arange(65.0, 24.9, -1.0), np.arange(-30.0, 20.1, 1.0))
    path = str(tmp_path / "small.nc")
    ds.to_netcdf(path)
    boxes = (("inside", (-20.0, 10.0, 40.0, 60.0)), ("north", (-20.0, 10.0, 70.0, 80.0)))
    out = run_task(Task(path, None, 0, 500.0, boxes, False, 10.0))
    assert [r["region"] for r in out["rows"]] == ["inside"]
    assert out["error"].startswith("region north: box -20,10,70,80 holds no grid points")
    assert "lat 25.0 to 65.0" in out["error"], out["error"]
    # a piece whose boxes all lie outside says so for each and computes nothing
    out = run_task(Task(path, None, 0, 500.0, boxes[1:] + boxes[1:], False, 10.0))
    assert out["rows"] == [] and out["error"].count("holds no grid points") == 2
