"""Wind barbs: the trade's convention (common practice, no source): speeds rounded to the
nearest 5 kt; a half barb 5 kt, a barb 10 kt, a pennant 50 kt; the staff points into the
wind; the barbs on the low-pressure side (right of the staff seen from the station in the
northern hemisphere, left in the southern); a circle for calm."""

import numpy as np
import pytest

from app import compute, render
from app.library import CaseLibrary
from app.state import ViewState

KT = 1852.0 / 3600.0  # m s-1 (the international knot, by definition)


@pytest.mark.parametrize(
    "kt, counts",
    [
        (0, (0, 0, 0)),
        (2, (0, 0, 0)),
        (3, (0, 0, 1)),
        (10, (0, 1, 0)),
        (47, (0, 4, 1)),
        (48, (1, 0, 0)),
        (65, (1, 1, 1)),
        (115, (2, 1, 1)),
    ],
)
def test_speeds_round_to_the_nearest_half_barb(kt, counts):
    assert render.barb_counts(kt * KT) == counts


def _westerly(lat, kt, k=1.0):
    # one point at (0, lat), moving east (its arrow's end to the east of it)
    return {
        "x0": np.array([0.0]),
        "y0": np.array([lat]),
        "x1": np.array([1.0]),
        "y1": np.array([lat]),
        "speed": np.array([kt * KT]),
        "lat": np.array([lat]),
        "cell": 1.0,
    }


@pytest.mark.parametrize("lat, north_side", [(45.0, True), (-45.0, False)])
def test_a_westerly_barb_points_west_with_its_barbs_toward_low_pressure(lat, north_side):
    b = render.wind_barbs(_westerly(lat, 65), 1.0)
    xs, ys = b["lines"]
    assert len(xs) == 3 and len(b["pennants"][0]) == 1  # a staff, a barb, a half barb
    staff_x, staff_y = xs[0], ys[0]
    assert staff_x[0] == 0.0 and staff_x[1] < -0.5 and staff_y[1] == pytest.approx(lat)
    # a westerly in the north has low pressure to its north; in the south, to its south
    feature_y = [y for ys_ in ys[1:] for y in ys_] + list(b["pennants"][1][0])
    off = np.array(feature_y) - lat
    assert (off > -1e-12).all() if north_side else (off < 1e-12).all()
    assert np.abs(off).max() > 0.2
    # the half barb is shorter than the full barb
    lengths = [np.hypot(np.diff(x), np.diff(y))[0] for x, y in zip(xs[1:], ys[1:])]
    assert lengths[1] == pytest.approx(lengths[0] / 2)


def test_calm_is_a_circle_and_a_lone_half_barb_is_set_in_from_the_end():
    assert render.wind_barbs(_westerly(45.0, 1), 1.0)["calm"] == ([0.0], [45.0])
    b = render.wind_barbs(_westerly(45.0, 5), 1.0)
    (staff, half), _ = b["lines"]
    assert half[0] > staff[1]  # its foot is nearer the station than the staff's end


def test_the_chart_draws_barbs_in_place_of_arrows_when_asked():
    import os

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    lib = CaseLibrary([os.path.join(root, "sample_cases", "ocean_cyclone.nc")])
    st = ViewState(case="ocean_cyclone", level=500.0, vector_style="barbs")
    cd = compute.chart_data(lib, st)
    assert cd.barbs is not None and cd.reference_arrow is None
    assert len(cd.barbs["lines"][0]) >= len(cd.vectors["x0"]) - len(cd.barbs["calm"][0])
    assert "barbs in knots" in cd.vector_label
    st.vector_style = "arrows"
    cd = compute.chart_data(lib, st)
    assert cd.barbs is None and cd.reference_arrow is not None


def test_the_briefing_image_draws_the_barbs():
    import io
    import os

    from PIL import Image

    from app.briefing_image import briefing_png

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    lib = CaseLibrary([os.path.join(root, "sample_cases", "ocean_cyclone.nc")])

    def png(style):
        cd = compute.chart_data(lib, ViewState(case="ocean_cyclone", vector_style=style))
        data = briefing_png(cd, None, None, region_text="r", caution="c", invented_text="")
        return np.asarray(Image.open(io.BytesIO(data)).convert("L"), dtype=float)

    barbs, arrows = png("barbs"), png("arrows")
    assert barbs.shape == arrows.shape
    assert np.mean(np.abs(barbs - arrows) > 40) > 0.002  # the vectors differ on the chart
