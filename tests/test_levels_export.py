"""The levels tab's table as CSV: one row per level, every term, the candidate balances,
the verdict, and the case, valid time, region and settings; named for its view."""

import csv
import glob
import os

import pytest

from app import compute, wording
from app.library import CaseLibrary
from app.state import ViewState

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = sorted(glob.glob(os.path.join(HERE, "..", "sample_cases", "*.nc")))


@pytest.fixture(scope="module")
def library():
    return CaseLibrary(SAMPLES)


def test_the_levels_table_exports_as_csv(library):
    from app.desk import Page

    st = ViewState(case="ocean_cyclone", level=500.0, time="2041-01-19T12:00:00Z")
    st.set_box(-52, -28, 38, 56)
    st.smooth_km = 200.0
    page = Page(library, st)
    assert page.below.levels_csv.disabled  # nothing to export before the table is made
    page.below.tabs.active = page.below.TAB["levels"]
    page.start()
    assert not page.below.levels_csv.disabled
    text = page.below.levels_csv.callback().getvalue()
    assert page.below.levels_csv.filename == (
        "ocean_cyclone_levels_2041-01-19T1200Z_52W-28W_38N-56N.csv"
    )
    rows = list(csv.DictReader(text.splitlines()))
    assert [r["level (hPa)"] for r in rows] == ["1000", "925", "850", "700", "500", "300", "250"]
    assert {r["smoothing (km)"] for r in rows} == {"200"}
    assert {r["case"] for r in rows} == {"ocean_cyclone"}
    # each row holds what the region's report at that level says (the page's own report)
    for r in rows:
        s2 = st.copy()
        s2.level = float(r["level (hPa)"])
        rep = compute.box_data(library, s2)
        pgf = next(t["magnitude"] for t in rep["terms"] if t["name"] == "pressure_gradient")
        col = f"{wording.term_name('pressure_gradient')} (m s-2)"
        assert float(r[col]) == pytest.approx(pgf, rel=1e-3)
        assert r["verdict"] == wording.balance_name(rep["verdict"]["balance"])
        geo = f"{wording.balance_name('geostrophic')} imbalance ratio"
        if rep["balances"].get("geostrophic") is not None:
            assert float(r[geo]) == pytest.approx(rep["balances"]["geostrophic"], rel=1e-3)
