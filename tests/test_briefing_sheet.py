"""The briefing sheet: a PDF of two landscape pages (A4 or Letter) that holds the chart, the
verdict with why, the levels, the systems and every note, read back with pypdf (an
independent PDF reader). Paper sizes: ISO 216 A4 is 297 x 210 mm, 841.89 x 595.28 points;
US Letter is 11 x 8.5 in, 792 x 612 points."""

import glob
import io
import os

import pytest
from pypdf import PdfReader

from app.briefing_sheet import briefing_pdf, column_chars, sheet_lines
from app.library import CaseLibrary
from app.state import ViewState

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


@pytest.fixture(scope="module")
def page():
    from app.desk import Page

    lib = CaseLibrary(sorted(glob.glob(os.path.join(ROOT, "sample_cases", "*.nc"))))
    st = ViewState(case="ocean_cyclone", level=500.0, time="2041-01-19T12:00:00Z")
    st.set_box(-52, -28, 38, 56)
    p = Page(lib, st)
    p.start()
    return p


def _read(data: bytes):
    reader = PdfReader(io.BytesIO(data))
    return reader, [pg.extract_text() or "" for pg in reader.pages]


@pytest.mark.parametrize("paper, size", [("A4", (841.89, 595.28)), ("Letter", (792.0, 612.0))])
def test_the_sheet_is_two_landscape_pages_that_hold_the_verdict_levels_systems_and_notes(
    page, paper, size
):
    page.downloads.paper.value = paper
    data = page.downloads.pdf_bytes().getvalue()
    reader, texts = _read(data)
    assert len(reader.pages) == 2
    for pg in reader.pages:
        w, h = float(pg.mediabox.width), float(pg.mediabox.height)
        assert abs(w - size[0]) < 0.5 and abs(h - size[1]) < 0.5, (w, h)
    second = " ".join(texts[1].split())
    rep = page.report
    assert rep["verdict"]["balance"] == "geostrophic"
    assert "Geostrophic: the pressure-gradient force" in second
    assert "Why: Geostrophic is the simplest balance that holds" in second
    assert "The region through the levels" in second and "850 hPa" in second
    assert "Systems on this level" in second and "closed contours every 60 m" in second
    for note in page.chart.data.notes + rep["notes"]:
        assert " ".join(note.split())[:60] in second, note
    assert "Caution: balance-desk is a diagnostic aid" in second
    assert page.downloads.pdf.filename.endswith("_500hPa_2041-01-19T1200Z_52W-28W_38N-56N.pdf")
    page.downloads.paper.value = "A4"


def test_notes_beyond_the_second_page_are_counted_not_dropped_and_stay_text(page):
    notes = [f"note {i}: a $x^2$ <b>bold</b> claim" for i in range(200)]
    data = briefing_pdf(
        page.chart.data,
        page.report,
        None,
        region_text="r",
        caution="c",
        invented_text="",
        notes=notes,
    )
    reader, texts = _read(data)
    assert len(reader.pages) == 2
    second = " ".join(texts[1].split())
    assert "note 0: a $x^2$ <b>bold</b> claim" in second
    lines = sheet_lines(page.report, notes=notes, chars=column_chars("A4"))
    hidden = len(lines) - 2 * 62 + 1
    assert f"... and {hidden} more lines: see the exports" in second


def test_a_line_fits_its_column_on_either_paper():
    """A4's column holds more characters than Letter's (the wider page); every line of the
    text is wrapped to its paper's column."""
    assert column_chars("A4") > column_chars("Letter") >= 80
    long = "word " * 200
    for paper in ("A4", "Letter"):
        n = column_chars(paper)
        lines = sheet_lines(None, notes=[long], chars=n)
        assert max(len(line) for line in lines) <= n
