"""The invented sample cases: metadata, regeneration, budget closure, regimes.

These checks are about the demo data's internal consistency (does the budget
of each case mean something?), not proof of the numerics, which the reference
tests against published test cases and MetPy give.
"""

import functools
import json
import os
import sys

import numpy as np
import pytest

from balance_core import Region, weighted_stats
from balance_core.io import analyze_case, diagnostics_for, open_case

HERE = os.path.dirname(os.path.abspath(__file__))
CASES_DIR = os.path.join(HERE, "..", "sample_cases")
sys.path.insert(0, CASES_DIR)
import make_cases  # noqa: E402

NAMES = ("ocean_cyclone", "tropical_cyclone", "sea_breeze")
REQUIRED_LEVELS = {1000, 925, 850, 700, 500, 300, 250}


@functools.cache
def _build(name):
    return make_cases.build(name)


@pytest.fixture(scope="module")
def built():
    """Each case regenerated in memory when a test first asks for it: (dataset, exact
    tendencies). One case at a time, so parallel workers share the three builds out."""

    class Built:
        def __getitem__(self, name):
            return _build(name)

    return Built()


@pytest.fixture(scope="module")
def cases():
    return {n: open_case(os.path.join(CASES_DIR, f"{n}.nc")) for n in NAMES}


@pytest.mark.parametrize("name", NAMES)
def test_files_are_small_multilevel_multitime_and_say_synthetic(cases, name):
    path = os.path.join(CASES_DIR, f"{name}.nc")
    assert os.path.getsize(path) < 6e6
    c = cases[name]
    assert REQUIRED_LEVELS <= {int(p / 100) for p in c.levels_pa}
    assert c.times.size >= 5
    steps = np.diff(c.times) / np.timedelta64(1, "h")
    assert np.all((steps >= 3) & (steps <= 6))
    assert c.missing == []
    for key in (
        "title",
        "history",
        "source",
        "Conventions",
        "how_made",
        "friction",
        "expected_verdicts",
        "suggested_box",
    ):
        assert key in c.attrs, key
    assert "synthetic" in c.attrs["source"]
    assert "synthetic" in c.attrs["title"]


@pytest.mark.parametrize("name", NAMES)
def test_generator_is_deterministic(cases, built, name):
    ds, _ = built[name]
    c = cases[name]
    for key, role in (
        ("height", "height"),
        ("u", "u"),
        ("v", "v"),
        ("omega", "omega"),
        ("temperature", "temperature"),
    ):
        new = ds[key].values.astype(np.float32).astype(np.float64)
        old = c.data[role].values
        scale = max(np.abs(new).max(), 1e-6)
        np.testing.assert_allclose(old, new, rtol=1e-5, atol=1e-6 * scale, err_msg=key)


def _box(c):
    return json.loads(c.attrs["suggested_box"])


def _rms(field, c, inside):
    return weighted_stats(field, c.grid, inside).rms


@pytest.mark.parametrize("name", NAMES)
def test_each_case_lands_in_its_recorded_class(cases, name):
    c = cases[name]
    for e in json.loads(c.attrs["expected_verdicts"]):
        rep = analyze_case(c, e["level_hpa"], e["time_index"], e["box"])
        assert rep["verdict"]["balance"] == e["balance"], (e, rep["balances"], rep["shares"])


@pytest.mark.parametrize("name", NAMES)
def test_free_atmosphere_residual_is_small(cases, name):
    # residual at most 30 % of the total acceleration DV/Dt, over the case's box
    c = cases[name]
    inside = Region.box(*_box(c)).mask(c.grid)
    levels = json.loads(c.attrs["free_atmosphere_levels_hpa"])
    assert levels
    for lev in levels:
        for t in (1, 2, 3):
            d = diagnostics_for(c, c.level_index(lev), t)
            res = _rms(d.budget["residual"].magnitude(), c, inside)
            acc = _rms(d.budget["acceleration"].magnitude(), c, inside)
            assert res <= 0.3 * acc, (lev, t, res / acc)


@pytest.mark.parametrize("name", ["ocean_cyclone", "sea_breeze"])
def test_friction_layer_residual_is_the_friction_put_in(cases, name):
    c = cases[name]
    inside = Region.box(*_box(c)).mask(c.grid)
    rates = json.loads(c.attrs["friction_rate_per_level_s-1"])
    for lev in json.loads(c.attrs["friction_levels_hpa"]):
        r = rates[str(float(lev))]
        for t in (1, 2, 3):
            d = diagnostics_for(c, c.level_index(lev), t)
            res = d.budget["residual"]
            fx, fy = -r * d.u, -r * d.v
            err = _rms(np.hypot(res.x - fx, res.y - fy), c, inside)
            assert err <= 0.3 * _rms(np.hypot(fx, fy), c, inside), (lev, t)


@pytest.mark.parametrize("name", NAMES)
def test_centred_time_differences_resolve_the_tendency(cases, built, name):
    # 3- and 6-hourly centred differences against the closed-form tendency that the
    # generator knows (d/dt = -omega_c d/dlambda for a drifting pattern; the
    # integrated along-shore equation for the sea breeze)
    c = cases[name]
    _, exact = built[name]
    inside = Region.box(*_box(c)).mask(c.grid)
    for k, p in enumerate(c.levels_pa):
        for t in (1, 2, 3):
            ex, ey = exact["u"][t, k], exact["v"][t, k]
            scale = _rms(np.hypot(ex, ey), c, inside)
            if scale < 1e-7:  # no tendency to speak of (calm levels)
                continue
            d = diagnostics_for(c, k, t)
            tend = d.budget["tendency"]
            err = _rms(np.hypot(tend.x - ex, tend.y - ey), c, inside)
            assert err <= 0.3 * scale, (p / 100, t, err / scale)


def test_cyclone_is_near_geostrophic_aloft_and_crosses_isobars_below(cases):
    c = cases["ocean_cyclone"]
    box = _box(c)
    aloft = analyze_case(c, 500, 2, box)
    assert 0.05 <= aloft["numbers"]["rossby_local_median"] <= 0.2
    low = diagnostics_for(c, c.level_index(1000), 2)
    inside = Region.box(*box).mask(c.grid)
    # the wind turns from the geostrophic direction toward low pressure (positive angle
    # in the north): friction's signature (common practice, no source)
    cross = low.ug * low.v - low.vg * low.u
    dot = low.ug * low.u + low.vg * low.v
    angle = np.degrees(np.arctan2(cross, dot))
    med = weighted_stats(angle, c.grid, inside & np.isfinite(angle)).median
    assert 5 < med < 40


def test_tropical_cyclone_core_is_cyclostrophic(cases):
    c = cases["tropical_cyclone"]
    rep = analyze_case(c, 850, 2, _box(c))
    assert rep["numbers"]["rossby_local_median"] > 5
    mags = {t["name"]: t["magnitude"] for t in rep["terms"] + rep["derived"]}
    assert mags["centripetal"] > 5 * mags["coriolis"]


def test_sea_breeze_advection_beats_coriolis(cases):
    c = cases["sea_breeze"]
    rep = analyze_case(c, 1000, 2, _box(c))
    mags = {t["name"]: t["magnitude"] for t in rep["terms"] + rep["derived"]}
    assert mags["horizontal_advection"] > mags["coriolis"]
    assert mags["acceleration"] > mags["coriolis"]
