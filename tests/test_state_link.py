"""The page link: one schema, one validating parser, every reachable state reopens exactly.

Property tests (hypothesis): any sequence of control changes -- every control, in any
order, boxes across the date line, areas drawn on conformal charts, scale-sheet edits --
leaves a state whose link reopens to the same state; and no text at all, however hostile,
makes the parser raise or take a value outside a control's range.
"""

import math
import urllib.parse

from hypothesis import given, settings
from hypothesis import strategies as st

from app.state import (
    FIELDS,
    PROJECTIONS,
    SHEET_SCALES,
    URL_PARAMS,
    VECTORS,
    RegionSpec,
    ViewState,
    parse_query,
    parse_region,
)
from balance_core.scales import PRESETS

CASES = ["ocean_cyclone", "tropical_cyclone", "sea_breeze"]

lon = st.floats(-360, 360, allow_nan=False).map(lambda v: round(v, 4))
lat = st.floats(-90, 90, allow_nan=False).map(lambda v: round(v, 4))


@st.composite
def boxes(draw):
    s = draw(st.floats(-90, 89, allow_nan=False).map(lambda v: round(v, 4)))
    n = draw(st.floats(s + 0.01, 90, allow_nan=False).map(lambda v: round(v, 4)))
    w = draw(lon)
    e = draw(lon.filter(lambda v: v != w))
    return ("box", (w, e, s, n))


@st.composite
def areas(draw):
    proj = draw(st.sampled_from(["lcc", "stere", "merc"]))
    lo0 = round(draw(st.floats(-180, 180)), 2)
    if proj == "lcc":
        p = (
            ("lat_1", round(draw(st.floats(20, 60)), 2)),
            ("lat_2", round(draw(st.floats(20, 60)), 2)),
            ("lat_0", 45.0),
            ("lon_0", lo0),
            ("R", 6371008.7714),
        )
    elif proj == "stere":
        p = (
            ("lat_0", draw(st.sampled_from([90.0, -90.0]))),
            ("lat_ts", 60.0),
            ("lon_0", lo0),
            ("R", 6371008.7714),
        )
    else:
        p = (("lat_ts", round(draw(st.floats(0, 30)), 2)), ("lon_0", lo0), ("R", 6371008.7714))
    corners = tuple(
        (round(draw(st.floats(-180, 180)), 4), round(draw(st.floats(-80, 80)), 4)) for _ in range(4)
    )
    return ("area", (proj, p, corners))


@st.composite
def circles(draw):
    """A weather system's region: a centre and a radius."""
    return (
        "circle",
        (
            round(draw(st.floats(-180, 180)), 4),
            round(draw(st.floats(-89, 89)), 4),
            round(draw(st.floats(1, 5000)), 1),
        ),
    )


changes = st.one_of(
    st.tuples(st.just("case"), st.sampled_from(CASES)),
    st.tuples(
        st.just("level"), st.sampled_from([1000.0, 925.0, 850.0, 700.0, 500.0, 250.0, 0.0])
    ),  # 0: sea level, "msl" in a link
    st.tuples(st.just("level"), st.floats(1, 1100, allow_nan=False).map(lambda v: round(v, 4))),
    st.tuples(
        st.just("time"), st.sampled_from(["", "2041-01-19T12:00:00Z", "2038-09-04T06:00:00Z"])
    ),
    st.tuples(st.just("field"), st.sampled_from(list(FIELDS))),
    st.tuples(st.just("vectors"), st.sampled_from(list(VECTORS))),
    st.tuples(st.just("smooth_km"), st.floats(0, 2000, allow_nan=False).map(lambda v: round(v, 4))),
    st.tuples(st.just("min_lat"), st.floats(0, 45, allow_nan=False).map(lambda v: round(v, 4))),
    st.tuples(st.just("projection"), st.sampled_from(list(PROJECTIONS))),
    st.tuples(st.just("height_units"), st.sampled_from(["m", "dam"])),
    st.tuples(st.just("wind_units"), st.sampled_from(["m/s", "kt"])),
    st.tuples(st.just("preset"), st.sampled_from(list(PRESETS))),
    st.tuples(
        st.just("sheet"),
        st.dictionaries(
            st.sampled_from(SHEET_SCALES),
            st.floats(1e-6, 1e7).map(lambda v: float(f"{v:.6g}")),
            max_size=4,
        ),
    ),
    st.tuples(st.just("region"), st.one_of(st.just(("whole", None)), boxes(), areas(), circles())),
)


def apply(state, change):
    name, value = change
    if name != "region":
        setattr(state, name, value)
        return
    kind, v = value
    if kind == "whole":
        state.clear_region()
    elif kind == "box":
        state.set_box(*v)
    elif kind == "circle":
        state.set_circle(*v)
    else:
        proj, params, corners = v
        state.set_area(RegionSpec("area", corners=corners, proj=(proj, params)))


def reopen(state):
    url = "?" + urllib.parse.urlencode(state.to_query())
    query = urllib.parse.parse_qs(url[1:], keep_blank_values=True)
    back = ViewState()
    problems = back.update_from_query(query, cases=CASES)
    return back, problems, url


@settings(max_examples=300, deadline=None)
@given(st.lists(changes, min_size=1, max_size=25))
def test_every_reachable_state_reopens_to_itself(seq):
    s = ViewState(case="ocean_cyclone")
    for c in seq:
        apply(s, c)
    back, problems, url = reopen(s)
    assert problems == [], (problems, url)
    assert back.to_query() == s.to_query()
    for k in URL_PARAMS:
        a, b = getattr(s, k), getattr(back, k)
        if isinstance(a, float):
            assert math.isclose(a, b, rel_tol=1e-6, abs_tol=1e-4), (k, a, b)
        elif k != "sheet":
            assert a == b, (k, a, b)
    # and the region survives: the same kind and outline
    ra, rb = s.region_spec(), back.region_spec()
    assert (ra is None) == (rb is None)
    if ra is not None:
        assert ra.kind == rb.kind and ra.to_text() == rb.to_text()
    assert len(url) < 1000


@settings(max_examples=400, deadline=None)
@given(
    st.dictionaries(
        st.sampled_from(list(URL_PARAMS) + ["other"]),
        st.one_of(st.text(max_size=300), st.binary(max_size=60)),
        max_size=8,
    )
)
def test_any_text_parses_to_defaults_or_valid_values(query):
    values, problems = parse_query({k: [v] for k, v in query.items()}, cases=CASES)
    s = ViewState()
    s.param.update(**values)  # never outside a parameter's range or choices
    assert all(isinstance(p, str) and "\n" not in p for p in problems)
    if "region" in values and values["region"]:
        assert parse_region(values["region"])[0] is not None


def test_a_python_repr_of_a_region_is_refused_with_a_message():
    s = ViewState()
    problems = s.update_from_query({"region": ["{'kind': 'box', 'bounds': [1, 2, 3, 4]}"]})
    assert s.region == "" and len(problems) == 1 and "region" in problems[0]
