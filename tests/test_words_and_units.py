"""One table of display names, and the unit choice, through every part of the page and every
export (driven through the view state, without a browser).

The knot is 1852 m per hour (the international nautical mile of 1852 m, adopted 1929; a
standard value, from memory), so 1 m/s = 3600 / 1852 kt; a decametre is 10 m. The expected
values below come from those definitions, not from the code under test.
"""

import csv
import glob
import io
import json
import os
import re

import numpy as np
import pytest

from app import wording
from app.library import CaseLibrary
from app.state import FIELDS, ViewState
from balance_core.vocabulary import BALANCE_NAMES, PRESET_NAMES, TERM_NAMES
from testkit import samples

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = sorted(glob.glob(os.path.join(HERE, "..", "sample_cases", "*.nc")))
KT_PER_MS = 3600.0 / 1852.0
CODE = re.compile(r"\b[a-z]+_[a-z_]+\b")  # a code name: lower case words joined by "_"


@pytest.fixture(scope="module")
def library():
    return CaseLibrary(SAMPLES)


def _page(library, **kw):
    from app.desk import Page

    base = dict(case="ocean_cyclone", level=500.0, time="2041-01-19T12:00:00Z")
    base.update(kw)
    st = ViewState(**base)
    st.set_box(-52, -28, 38, 56)
    page = Page(library, st)
    page.start()
    return page


def _png_texts(page, monkeypatch):
    """Every text the briefing PNG draws, taken from its figure as it is saved."""
    import matplotlib.figure
    import matplotlib.text

    seen = []
    save = matplotlib.figure.Figure.savefig

    def spy(fig, *a, **k):
        fig.canvas.draw()  # tick labels get their text when drawn
        seen.extend(t.get_text() for t in fig.findobj(matplotlib.text.Text) if t.get_text())
        return save(fig, *a, **k)

    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", spy)
    png = page.downloads.png_bytes().getvalue()
    assert png[:4] == b"\x89PNG"
    return seen


def _csv_rows(page):
    return list(csv.DictReader(io.StringIO(page.downloads.csv_text().getvalue())))


def test_one_table_of_names_in_the_ranking_menu_chart_png_csv_and_json(library, monkeypatch):
    page = _page(library)
    shown = set(TERM_NAMES.values())
    # the ranking
    names = [b.name for b in page.evidence.ranking]
    assert names and set(names) <= shown, names
    # the field menu: every term field is its display name between bars, no code name
    labels = list(page.controls.w_field.options)
    assert f"|{TERM_NAMES['metric_uv']}|" in labels
    assert not [x for x in labels if CODE.search(x)], labels
    # the chart's caption and colour bar use the menu's words
    page.state.field = "term:metric_uv"
    assert page.chart.data.field_label == FIELDS["term:metric_uv"]
    assert FIELDS["term:metric_uv"] in page.chart.caption.object
    assert page.chart.colorbar.title.startswith(FIELDS["term:metric_uv"])
    # the PNG: its ranking names, balances and title
    texts = _png_texts(page, monkeypatch)
    for name in names:
        assert name in texts, (name, texts)
    assert TERM_NAMES["metric_uv"] in " ".join(texts)
    assert not [t for t in texts if CODE.search(t) and "ocean_cyclone" not in t], texts
    # the CSV: display names in the name column
    rows = _csv_rows(page)
    terms = [r["name"] for r in rows if r["kind"] in ("term", "derived view")]
    assert terms and set(terms) <= shown, terms
    bal = [r["name"] for r in rows if r["kind"].startswith("balance")]
    assert bal and set(bal) <= set(BALANCE_NAMES.values()), bal
    nums = [r["name"] for r in rows if r["kind"] == "number"]
    assert nums and set(nums) <= {v[0] for v in wording.NUMBERS.values()}, nums
    # the JSON keeps the code names, as keys for programs
    rep = json.loads(page.downloads.json_text().getvalue())
    assert {t["name"] for t in rep["terms"]} <= set(TERM_NAMES)
    assert set(rep["balances"]) <= set(BALANCE_NAMES)


def test_presets_are_shown_by_name_and_the_sheet_calls_the_residual_so(library):
    page = _page(library)
    assert set(page.below.w_preset.options) == set(PRESET_NAMES.values())
    from app import compute

    sheet = compute.scale_sheet(page.state, page.report)
    viscous = [r for r in sheet["terms"] if r["name"] == "viscous"]
    label = viscous[0]["data_label"] if viscous else ""
    assert label.startswith(TERM_NAMES["residual"]) and "unresolved" in label, label
    # the sheet as the page shows it: display names and units only, no code name
    page.below.tabs.active = page.below.TAB["sheet"]
    shown = page.below.sheet_out.object
    assert "deformation radius 1e+06 m" in shown, shown
    assert not CODE.search(shown.replace("bd-", "")), CODE.findall(shown)


def test_the_names_check_can_fail():
    # a code name is caught, a display name is not
    assert CODE.search("metric_uv") and CODE.search("pressure_gradient 1e-3")
    assert not CODE.search("Earth curvature (uv)") and not CODE.search("pressure gradient")


def test_the_unit_choice_reaches_every_number_hover_colour_bar_and_export(library, monkeypatch):
    si = _page(library, field="speed")
    kt = _page(library, field="speed", wind_units="kt", height_units="dam")
    a, b = si.chart.data, kt.chart.data
    # the filled field and its colour bar
    assert (a.units, b.units) == ("m/s", "kt")
    assert np.nanmean(b.raster) == pytest.approx(np.nanmean(a.raster) * KT_PER_MS, rel=1e-5)
    assert kt.chart.colorbar.title.endswith("(kt)")
    # the contours in decametres: the same lines, labelled in tens of metres
    assert b.contour_units == "dam"
    assert b.contour_interval == pytest.approx(a.contour_interval / 10)
    # the hover's numbers and their units
    ha, hb = si.chart.hover_src.data, kt.chart.hover_src.data
    assert np.allclose(
        np.asarray(hb["speed"]), np.asarray(ha["speed"]) * KT_PER_MS, rtol=1e-4, equal_nan=True
    )
    assert np.allclose(
        np.asarray(hb["height"]), np.asarray(ha["height"]) / 10, rtol=1e-5, equal_nan=True
    )
    assert kt.chart.hover_units == {"field": "kt", "height": "dam", "wind": "kt"}
    # the reference arrow says its speed in knots
    assert b.reference_arrow["text"].endswith(" kt")
    # the numbers beside the verdict
    body = kt.evidence.body.object
    assert re.search(r"\d</b> kt", body) and not re.search(r"\d</b> m/s", body)
    # the CSV and JSON
    wa = {r["name"]: r for r in _csv_rows(si) if r["kind"] == "wind"}
    wb = {r["name"]: r for r in _csv_rows(kt) if r["kind"] == "wind"}
    speed = [k for k in wa if wa[k]["unit"]]
    assert speed
    for k in speed:
        assert (wa[k]["unit"], wb[k]["unit"]) == ("m/s", "kt")
        assert float(wb[k]["value"]) == pytest.approx(
            float(wa[k]["value"]) * KT_PER_MS, rel=2e-3
        )  # both to 4 digits
    ja, jb = (json.loads(p.downloads.json_text().getvalue()) for p in (si, kt))
    assert jb["context"]["units"] == {"terms": "m s-2", "wind": "kt", "height": "dam"}
    assert jb["winds"]["speed_rms"] == pytest.approx(ja["winds"]["speed_rms"] * KT_PER_MS, rel=2e-3)
    # the PNG: colour bar label and reference arrow
    texts = " | ".join(_png_texts(kt, monkeypatch))
    assert "(kt)" in texts and re.search(r"arrow: [\d.]+ kt", texts), texts
    assert "m/s" not in texts, texts


def test_switching_units_on_an_open_page_rewrites_its_numbers(library):
    page = _page(library, field="speed")
    assert re.search(r"\d</b> m/s", page.evidence.body.object)
    page.state.wind_units = "kt"
    body = page.evidence.body.object
    assert re.search(r"\d</b> kt", body) and not re.search(r"\d</b> m/s", body)
    assert page.chart.data.units == "kt"


# -- the briefing's outline is the screen's ------------------------------------------------

ETA = samples.ETA


def _png_outline_vs_screen(page, monkeypatch):
    """The outline's pixels in the briefing PNG, and where the chart's on-screen outline (its
    view coordinates, as sent to the browser) falls in that PNG through the main axes' own
    transform: (pixel mask, predicted pixel points)."""
    import matplotlib.figure
    from PIL import Image

    from app.briefing_image import OUTLINE_RGB

    seen = {}
    save = matplotlib.figure.Figure.savefig

    def spy(fig, *a, **k):
        fig.canvas.draw()
        seen["ax"] = fig.axes[0]
        seen["height"] = fig.canvas.get_width_height()[1]
        return save(fig, *a, **k)

    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", spy)
    png = page.downloads.png_bytes().getvalue()
    im = np.asarray(Image.open(io.BytesIO(png)).convert("RGB")).astype(int)
    mask = np.abs(im - np.array(OUTLINE_RGB)).max(axis=-1) <= 8
    mask[:, int(0.62 * im.shape[1]) :] = False  # the verdict's panel uses the same orange
    xs, ys = (
        np.asarray(v, float)
        for v in (page.chart.region_src.data["x"], page.chart.region_src.data["y"])
    )
    ok = np.isfinite(xs) & np.isfinite(ys)
    pts = seen["ax"].transData.transform(np.column_stack([xs[ok], ys[ok]]))
    pts[:, 1] = seen["height"] - pts[:, 1]  # matplotlib counts rows from the bottom
    return mask, pts


def _assert_outline_matches(mask, pts):
    assert mask.sum() > 200, "no outline in the briefing"
    rows, cols = np.nonzero(mask)
    # the image's outline spans what the screen's does, to within the line's width
    assert abs(cols.min() - pts[:, 0].min()) < 4 and abs(cols.max() - pts[:, 0].max()) < 4
    assert abs(rows.min() - pts[:, 1].min()) < 4 and abs(rows.max() - pts[:, 1].max()) < 4


def test_a_drawn_area_on_the_conformal_chart_is_the_briefings_outline(library, monkeypatch):
    page = _page(library)
    page.state.projection = "conformal"
    g = page.chart.data.geom
    cx, cy = g.to_view(-40.0, 47.0)
    page.chart.select_rect(cx - 4e5, cx + 6e5, cy - 3e5, cy + 2e5)
    assert page.state.region.startswith("area:")
    mask, pts = _png_outline_vs_screen(page, monkeypatch)
    _assert_outline_matches(mask, pts)
    # and the check can fail: the case's starting box is elsewhere in the image
    page.state.set_box(-52, -28, 38, 56)
    mask2, _ = _png_outline_vs_screen(page, monkeypatch)
    with pytest.raises(AssertionError):
        _assert_outline_matches(mask2, pts)


def test_the_real_grib_case_has_its_outline_in_the_briefing(monkeypatch):
    from app.desk import Page

    lib = CaseLibrary([samples.need(ETA)])
    st = ViewState(case=lib.good[0], level=500.0)
    st.set_box(-115, -100, 35, 45)
    page = Page(lib, st)
    page.start()
    assert page.report and page.report["points"] > 50
    mask, pts = _png_outline_vs_screen(page, monkeypatch)
    _assert_outline_matches(mask, pts)


def test_the_briefing_image_marks_and_lists_room_notes():
    # a review room's notes: a numbered mark where a note has a point, each text in full
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from app.briefing_image import NOTE_WIDTH, _mark_room_notes, room_note_lines

    fig = plt.figure()
    ax = fig.add_axes([0.1, 0.2, 0.5, 0.7])
    long_text = "Ben: jet exit " + " ".join(f"word{i}" for i in range(60))
    notes = [
        ("#1", (-40.0, 52.0), "Ana: the low is in gradient balance"),
        ("#2", None, long_text),
    ] + [(f"#{i}", None, f"note {i}") for i in range(3, 7)]
    _mark_room_notes(ax, notes)
    lines = room_note_lines(notes)
    assert lines[0] == "#1 Ana: the low is in gradient balance"
    # the long note wrapped over several lines, every word of it kept
    second = [ln for ln in lines if ln.startswith("#2 ") or ln.startswith("   ")]
    assert len(second) > 1 and all(len(ln) <= NOTE_WIDTH for ln in second)
    assert " ".join(" ".join(second).split()) == "#2 " + long_text
    assert lines[-1] == "#6 note 6"
    marks = [tuple(line.get_xydata()[0]) for line in ax.lines]
    assert marks == [(-40.0, 52.0)]  # only the note with a point is marked
    assert [a.get_text() for a in ax.texts] == ["#1"]
    plt.close(fig)


def test_a_room_with_more_notes_than_an_image_holds_names_the_rest():
    from app.briefing_image import NOTE_LINES_MAX, room_note_lines

    notes = [(f"#{i}", None, "x " * 400) for i in range(1, 60)]
    lines = room_note_lines(notes)
    assert len(lines) <= NOTE_LINES_MAX + 1
    assert lines[-1].startswith("... and ") and "in full in the notes export" in lines[-1]


def test_the_exports_record_their_settings_and_name_their_view(library, monkeypatch):
    # smoothing, the tropical mask and the units change the numbers: each export says them,
    # and each file is named for its case, level, valid time and region
    page = _page(library, smooth_km=300.0, min_lat=15.0, wind_units="kt")
    stem = "ocean_cyclone_500hPa_2041-01-19T1200Z_52W-28W_38N-56N"
    texts = _png_texts(page, monkeypatch)
    assert (
        "Settings: smoothing 300 km (Gaussian); quantities divided by f left out within 15 "
        "degrees of the equator; winds in kt, heights in m"
    ) in texts, texts
    assert page.downloads.png.filename == f"{stem}.png"
    rows = _csv_rows(page)
    assert {r["smoothing (km)"] for r in rows} == {"300"}
    assert {r["tropical mask (degrees from the equator)"] for r in rows} == {"15"}
    assert {r["member"] for r in rows} == {""}  # a file without members
    assert page.downloads.csv.filename == f"{stem}.csv"
    ctx = json.loads(page.downloads.json_text().getvalue())["context"]
    assert ctx["settings"] == {"smoothing_km": 300, "tropical_mask_deg": 15, "member": None}
    assert ctx["units"]["wind"] == "kt"
    assert page.downloads.json.filename == f"{stem}.json"
    # without smoothing the stamp says so; the ratios are in % as on the page
    page.state.smooth_km = 0.0
    texts = _png_texts(page, monkeypatch)
    assert any(t.startswith("Settings: no smoothing;") for t in texts), texts
    assert "150 %" in texts and not any(t in ("1.5", "1.50") for t in texts)
