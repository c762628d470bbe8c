"""The page's small promises, checked without a browser: graticule labels apart, text contrast,
a file with one time, a case switch to the nearest level.

Label sizes come from the DejaVu Sans font's own metrics (matplotlib ships it), not from the
chart's estimate; contrast is the WCAG 2.1 ratio (relative luminance, success criterion 1.4.3:
at least 4.5:1), computed here.
"""

import glob
import html.parser
import itertools
import os
import re

import matplotlib
import netCDF4
import numpy as np
import pytest
from PIL import ImageFont

from app import compute
from app.library import CaseLibrary
from app.state import ViewState
from testkit import samples
from testkit.makedata import latlon_dataset

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = sorted(glob.glob(os.path.join(HERE, "..", "sample_cases", "*.nc")))
ETA = samples.ETA
FONT = os.path.join(
    os.path.dirname(matplotlib.__file__), "mpl-data", "fonts", "ttf", "DejaVuSans.ttf"
)


@pytest.fixture(scope="module")
def library():
    return CaseLibrary(SAMPLES + ([ETA] if os.path.exists(ETA) else []))


# -- graticule labels ------------------------------------------------------------------------


def _label_boxes(cd, frame_px):
    """Pixel boxes of the graticule labels as Bokeh draws them (anchored at their left and
    bottom, 14 px text on a padded white box) on a map frame ``frame_px`` wide."""
    from PIL import ImageFont

    font = ImageFont.truetype(FONT, 14)
    x0, x1, y0, _ = cd.geom.extent
    k = frame_px / (x1 - x0)
    out = []
    for x, y, text, _ in cd.graticule[2]:
        px, py = (x - x0) * k, (y - y0) * k
        out.append((px - 2, py - 2, px + font.getlength(text) + 2, py + 19, text))
    return out


def _collisions(boxes):
    return [
        (a[4], b[4])
        for a, b in itertools.combinations(boxes, 2)
        if not (a[2] <= b[0] or b[2] <= a[0] or a[3] <= b[1] or b[3] <= a[1])
    ]


def test_graticule_labels_never_collide(library):
    from app.desk.chart import MIN_WIDTH, WIDTH

    for name in library.good:
        case = library.get(name)
        st = ViewState(case=name, level=compute.nearest_level(case, 500.0), projection="conformal")
        cd = compute.chart_data(library, st)
        # at the chart's widest and at its narrowest (the text keeps its size)
        for frame in (WIDTH - 100, (WIDTH - 100) * MIN_WIDTH / WIDTH):
            boxes = _label_boxes(cd, frame)
            # at least a parallel and two meridians named (the reference arrow's corner
            # takes the labels near it)
            assert len(boxes) >= 3, name
            assert {b[4][-1] for b in boxes} & set("NS") and {b[4][-1] for b in boxes} & set("EW")
            assert not _collisions(boxes), (name, frame, _collisions(boxes))
            # nor with the reference arrow and its label ("arrow: 20 m/s", 15 px text 6 px
            # above and right of the arrow's start, on a padded box)
            if cd.reference_arrow is not None:
                a = cd.reference_arrow
                x0, x1, y0, _ = cd.geom.extent
                k = frame / (x1 - x0)
                ax, ay = (a["x0"] - x0) * k, (a["y0"] - y0) * k
                width = max(
                    ImageFont.truetype(FONT, 15).getlength(f"arrow: {a['text']}"),
                    (a["x1"] - a["x0"]) * k,
                )
                arrow = (ax - 2, ay - 6, ax + 6 + width + 4, ay + 6 + 22, "arrow")
                hit = _collisions([arrow] + boxes)
                assert not hit, (name, frame, hit)
            # and every label whole inside the frame: one cut at the edge reads as another
            # ("60N" as "0N"); the frame is at true shape (conformal: metres both ways)
            x0, x1, y0, y1 = cd.geom.extent
            height = frame * (y1 - y0) / (x1 - x0)
            cut = [
                b[4]
                for b in boxes
                if b[0] < -2 or b[1] < -2 or b[2] > frame + 2 or b[3] > height + 2
            ]
            assert not cut, (name, frame, cut)


def _degrees(text):
    value, hemi = float(text[:-1]), text[-1]
    return -value if hemi in "WS" else value


def test_each_graticule_label_stands_where_its_line_crosses_the_edge(library):
    # a meridian's label on the bottom edge at that meridian, a parallel's on the left edge
    # at that parallel (the place read back through the view's projection, pyproj): one that
    # entered by a side was once labelled at the bottom corner, far from itself
    for name in library.good:
        case = library.get(name)
        st = ViewState(case=name, level=compute.nearest_level(case, 500.0), projection="conformal")
        cd = compute.chart_data(library, st)
        for x, y, text, kind in cd.graticule[2]:
            lon, lat = cd.geom.to_lonlat(np.array([x]), np.array([y]))
            if kind == "lon":
                off = (float(lon[0]) - _degrees(text) + 180) % 360 - 180
            else:
                off = float(lat[0]) - _degrees(text)
            assert abs(off) < 0.05, (name, text, float(lon[0]), float(lat[0]))


def test_the_collision_check_can_fail(library, monkeypatch):
    # every meridian and parallel labelled, none dropped: labels collide at a corner
    from app import render

    monkeypatch.setattr(render, "_thin_labels", lambda labels, extent: labels)
    monkeypatch.setattr(render, "_GRATICULE_CACHE", {})
    st = ViewState(case="ocean_cyclone", level=500.0, projection="conformal")
    assert _collisions(_label_boxes(compute.chart_data(library, st), 660))


# -- contrast ----------------------------------------------------------------------------------

NAMED = {"white": "#ffffff", "black": "#000000", "#fff": "#ffffff", "#000": "#000000"}


def _rgb(colour):
    c = NAMED.get(colour.strip().lower(), colour.strip().lower())
    m = re.fullmatch(r"#([0-9a-f]{3})", c)
    if m:
        c = "#" + "".join(ch * 2 for ch in m.group(1))
    m = re.fullmatch(r"#([0-9a-f]{6})", c)
    return None if m is None else [int(m.group(1)[i : i + 2], 16) / 255 for i in (0, 2, 4)]


def contrast(fg, bg):
    """WCAG 2.1 contrast ratio of two sRGB colours (definitions of relative luminance and
    contrast ratio in the WCAG 2.1 recommendation, W3C 2018)."""

    def lum(rgb):
        lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
        return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]

    a, b = sorted((lum(_rgb(fg)), lum(_rgb(bg))), reverse=True)
    return (a + 0.05) / (b + 0.05)


class _Pairs(html.parser.HTMLParser):
    """Every piece of text with the colour and background it inherits (white page, dark ink)."""

    VOID = {"br", "img", "hr", "input", "meta", "link", "col", "wbr"}

    def __init__(self):
        super().__init__()
        self.stack = [("#1a1a1a", "#ffffff")]
        self.pairs = []

    def handle_starttag(self, tag, attrs):
        style = dict(attrs).get("style") or ""
        fg, bg = self.stack[-1]
        for prop, val in re.findall(r"(?:^|;)\s*([a-z-]+)\s*:\s*([^;]+)", style):
            if prop == "color" and _rgb(val):
                fg = val
            if prop in ("background", "background-color") and _rgb(val.split()[0]):
                bg = val.split()[0]
        if tag not in self.VOID:
            self.stack.append((fg, bg))

    def handle_endtag(self, tag):
        if tag not in self.VOID and len(self.stack) > 1:
            self.stack.pop()

    def handle_data(self, data):
        if data.strip():
            self.pairs.append((data.strip()[:40],) + self.stack[-1])


def _low_contrast(markup):
    p = _Pairs()
    p.feed(markup)
    return [
        (t, fg, bg, round(contrast(fg, bg), 2)) for t, fg, bg in p.pairs if contrast(fg, bg) < 4.5
    ]


def test_all_text_of_the_page_has_a_contrast_of_at_least_4_5(library):
    from app.desk import Page

    st = ViewState(case="ocean_cyclone", level=500.0, time="2041-01-19T12:00:00Z")
    st.set_box(-52, -28, 38, 56)
    page = Page(library, st)
    page.start()
    for tab in range(len(page.below.TAB)):  # a closed tab's text is written when opened
        page.below.tabs.active = tab
    parts = {
        "header": page.header,
        "caption": page.chart.caption,
        "notes": page.chart.note,
        "evidence": page.evidence.body,
        "levels": page.below.levels_table,
        "sheet": page.below.sheet_out,
        "data notes": page.below.notes,
        "section verdicts": page.below.section_verdicts,
    }
    for name, pane in parts.items():
        markup = pane.object if isinstance(pane.object, str) else ""
        assert markup, name
        assert not _low_contrast(markup), (name, _low_contrast(markup))


def test_the_contrast_check_can_fail():
    assert _low_contrast("<div style='color:#ffffff;background:#d9d9d9'>n/a</div>")
    assert not _low_contrast("<div style='color:#1a1a1a;background:#ffffff'>n/a</div>")
    assert contrast("#ffffff", "#000000") == pytest.approx(21.0)


# -- one time, and a case switch ---------------------------------------------------------------


def test_a_file_with_one_time_says_so_in_the_times_view(tmp_path):
    from app.desk import Page

    ds, _ = latlon_dataset(np.arange(60.0, 29.9, -1.0), np.arange(-40.0, 0.1, 1.0))
    ds = ds.isel(time=[0])
    path = str(tmp_path / "one_time.nc")
    ds.to_netcdf(path)
    lib = CaseLibrary([path])
    page = Page(lib, ViewState(case=lib.good[0], level=500.0))
    page.below.tabs.active = page.below.TAB["times"]
    page.start()
    text = page.below.times_status.object
    assert "one valid time only" in text, text
    assert page.below.times_fig is None  # no axis of one point drawn


def test_a_case_switch_lands_on_the_nearest_level_the_case_has(library):
    from app.desk import Page

    with netCDF4.Dataset(os.path.join(HERE, "..", "sample_cases", "ocean_cyclone.nc")) as f:
        ocean_levels = [float(p) for p in f["plev"][:]]
    with netCDF4.Dataset(os.path.join(HERE, "..", "sample_cases", "sea_breeze.nc")) as f:
        sea_levels = [float(p) for p in f["plev"][:]]
    only_sea = [p for p in sea_levels if p not in ocean_levels]
    assert only_sea, (sea_levels, ocean_levels)
    for p in only_sea:
        page = Page(library, ViewState(case="sea_breeze", level=p))
        page.start()
        page.state.case = "ocean_cyclone"
        # nearest in log pressure, worked out here from the file's own levels
        want = min(ocean_levels, key=lambda q: abs(np.log(q / p)))
        assert page.state.level == want, (p, page.state.level, want)
        assert f"{want:g} hPa" in page.chart.caption.object
        assert page.report and page.report["level_hpa"] == want
        page.detach()


def _levels_with_wind(name):
    """The levels of a sample file whose wind varies by 0.5 m/s or more across the grid at
    its first time, read here with netCDF4 (not through the code under test)."""
    with netCDF4.Dataset(os.path.join(HERE, "..", "sample_cases", f"{name}.nc")) as f:
        plev = [float(p) for p in f["plev"][:]]
        u, v = np.asarray(f["u"][0], float), np.asarray(f["v"][0], float)
    spread = [max(np.ptp(u[k]), np.ptp(v[k])) for k in range(len(plev))]
    return plev, [p for p, s in zip(plev, spread) if s >= 0.5]


def test_a_case_opens_at_the_nearest_level_with_something_to_draw(library):
    from app.desk.page import build_page

    plev, windy = _levels_with_wind("sea_breeze")
    assert 500.0 in plev and 500.0 not in windy  # the sample is calm and even aloft
    want = min(windy, key=lambda q: abs(np.log(q / 500.0)))
    page = build_page(library, {"case": ["sea_breeze"]})
    assert page.state.level == want, (page.state.level, want, windy)
    # the ocean cyclone has wind at 500 hPa: it opens there, as before
    page = build_page(library, {"case": ["ocean_cyclone"]})
    assert page.state.level == 500.0
    # the rule says no to a level with wind, and yes to a calm, even one
    case = library.get("sea_breeze")
    assert not compute.level_has_data(case, 500.0)
    assert compute.level_has_data(case, want)


def test_a_case_switch_leaves_a_level_with_nothing_to_draw(library):
    from app.desk import Page

    _, windy = _levels_with_wind("sea_breeze")
    page = Page(library, ViewState(case="ocean_cyclone", level=500.0))
    page.start()
    page.state.case = "sea_breeze"
    assert page.state.level == min(windy, key=lambda q: abs(np.log(q / 500.0)))
    page.detach()


def test_a_link_to_a_calm_level_shows_it_with_a_calm_arrow(library):
    # the link's level is honoured even where the air is calm; the arrow says a calm speed
    # (it said 1e-06 m/s), and a line says the air is calm
    from app.desk.page import build_page

    page = build_page(library, {"case": ["sea_breeze"], "level": ["500"]})
    assert page.state.level == 500.0
    cd = compute.chart_data(library, page.state)
    assert cd.reference_arrow["text"] == "0.5 m/s"
    assert any(n.startswith("Calm:") for n in cd.notes), cd.notes
    windy = compute.chart_data(library, ViewState(case="ocean_cyclone", level=500.0))
    assert not any(n.startswith("Calm:") for n in windy.notes)
