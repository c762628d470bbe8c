"""The one tables that several places loop over: every entry complete, every place in step.

A balance class or a chart field added without what every output needs (a display name, a
colour, a ratio column; a label, a colour scale, a way to make its values) fails here,
before it is drawn grey or left out of a table somewhere.
"""

import re

import pytest

from app import fields, report_files
from app.desk import archive, systems
from app.state import FIELDS, ViewState
from balance_core.verdict import CANDIDATES, CLASSES
from balance_core.vocabulary import BALANCE_CLASSES, BALANCE_NAMES, TERM_NAMES


@pytest.mark.parametrize("b", BALANCE_CLASSES, ids=[b.name for b in BALANCE_CLASSES])
def test_every_balance_class_is_complete(b):
    assert re.fullmatch(r"[a-z]+", b.name)
    assert b.display and b.display[0].isupper()
    assert re.fullmatch(r"#[0-9A-Fa-f]{6}", b.colour), b.colour
    if b.terms is not None:  # a candidate balance: terms of the budget, and a column
        assert b.column == f"ratio_{b.name}"
        assert set(b.terms) <= set(TERM_NAMES) and "pressure_gradient" in b.terms


def test_every_place_loops_over_the_balance_classes():
    names = [b.name for b in BALANCE_CLASSES]
    assert len(set(names)) == len(names)
    assert len({b.colour for b in BALANCE_CLASSES}) == len(names)  # told apart on the chart
    assert list(CLASSES) == names and set(BALANCE_NAMES) == set(names)
    assert list(CANDIDATES) == [b.name for b in BALANCE_CLASSES if b.terms]
    assert systems.VERDICT_COLOURS == {b.name: b.colour for b in BALANCE_CLASSES}
    assert {name for name, _ in archive.RATIOS.values()} == set(CANDIDATES)
    out = {
        "case": "c",
        "level_hpa": 500.0,
        "level": 500.0,
        "valid_time": "2041-01-19T00:00:00Z",
        "systems": [],
    }
    header = report_files.systems_csv(out).splitlines()[0].split(",")
    assert {f"ratio_{c}" for c in CANDIDATES} <= set(header)
    legend = systems.legend_html()
    assert all(b.display in legend for b in BALANCE_CLASSES)


@pytest.mark.parametrize("f", fields.CHART_FIELDS, ids=[f.key for f in fields.CHART_FIELDS])
def test_every_chart_field_is_complete(f):
    assert f.label and f.scale in ("sequential", "diverging", "log") and callable(f.make)


def test_the_link_and_the_menu_take_the_fields_of_the_one_table():
    assert list(FIELDS) == [f.key for f in fields.CHART_FIELDS]
    assert list(ViewState.param["field"].objects) == list(FIELDS)
