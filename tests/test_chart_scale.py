"""The chart's colour scale: a smooth field (heights, sea-level pressure) is coloured over
every value in view, so the centre of a deep low is never drawn in the scale's end colour;
other fields keep the 1st to 99th percentile and say which share of the chart lies beyond
the scale, on the page and with pointed ends on the briefing image's colour bar."""

import dataclasses
import glob
import os

import numpy as np
import pytest

from app import compute
from app.library import CaseLibrary
from app.state import ViewState

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = sorted(glob.glob(os.path.join(HERE, "..", "sample_cases", "*.nc")))


@pytest.fixture(scope="module")
def library():
    return CaseLibrary(SAMPLES)


def test_the_tropical_cyclones_centre_is_inside_the_colour_scale(library):
    cd = compute.chart_data(library, ViewState(case="tropical_cyclone", level=500.0))
    lo, hi = cd.color_range
    assert lo <= np.nanmin(cd.raster) and hi >= np.nanmax(cd.raster)
    assert cd.color_cut == (0.0, 0.0)
    assert not any(n.startswith("Colour scale cut") for n in cd.notes)


def test_a_field_with_extremes_says_how_much_lies_beyond_the_scale(library):
    st = ViewState(case="ocean_cyclone", level=500.0, field="vorticity")
    cd = compute.chart_data(library, st)
    lo, hi = cd.color_range
    finite = cd.raster[np.isfinite(cd.raster)]
    above = np.count_nonzero(finite > hi) / finite.size
    assert above > 0  # the sample's vortex core reaches past the 99th percentile
    (note,) = [n for n in cd.notes if n.startswith("Colour scale cut")]
    assert f"{100 * above:.0f} % above {hi:.4g} (1e-5 s-1)" in note, note


def test_the_scale_cut_note_reads_plainly():
    assert compute.color_cut_note((0.0, 0.0), (0, 1), "m") == ""
    note = compute.color_cut_note((0.002, 0.25), (5400.0, 5800.0), "m")
    assert note == (
        "Colour scale cut: under 1 % of the chart lies below 5400 m and 25 % above 5800 m, "
        "drawn in the end colours"
    )


@pytest.mark.parametrize(
    "values, kind, whole, cut",
    [
        # a spike of 1e9 among 0..999: the percentiles keep it out, and it is counted
        (np.r_[np.arange(1000.0), 1e9], "sequential", False, "both"),
        # the same values coloured whole: nothing lies beyond
        (np.r_[np.arange(1000.0), 1e9], "sequential", True, "none"),
        # whole applies to sequential scales only: a diverging field keeps its percentiles
        # (symmetric about 0, at the larger of the two: -999..-990 and 1e9 lie beyond)
        (np.r_[-np.arange(1000.0), 1e9], "diverging", True, "both"),
    ],
)
def test_the_range_and_its_cut(values, kind, whole, cut):
    rng_ = compute._color_range(values, kind, whole=whole)
    below, above = compute._color_cut(values, kind, rng_)
    got = {(True, True): "both", (False, False): "none"}[(below > 0, above > 0)]
    assert got == cut, (rng_, below, above)


def test_the_briefing_colour_bar_points_where_values_are_cut(library, monkeypatch):
    import matplotlib.figure

    from app.briefing_image import briefing_png

    seen = []
    save = matplotlib.figure.Figure.savefig

    def spy(fig, *a, **k):
        seen.extend(im.colorbar.extend for ax in fig.axes for im in ax.images if im.colorbar)
        return save(fig, *a, **k)

    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", spy)
    cd = compute.chart_data(library, ViewState(case="ocean_cyclone", level=500.0))
    for cut, extend in (((0.0, 0.0), "neither"), ((0.01, 0.0), "min"), ((0.02, 0.03), "both")):
        seen.clear()
        briefing_png(
            dataclasses.replace(cd, color_cut=cut),
            None,
            None,
            region_text="whole case",
            caution="",
            invented_text="",
        )
        assert seen == [extend]
