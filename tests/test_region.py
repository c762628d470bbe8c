"""Regions (boxes across the dateline, polygons) and area-weighted statistics."""

import numpy as np
import pytest

from balance_core import Grid, Region, vector_stats, weighted_stats
from balance_core.region import weighted_quantile


@pytest.mark.parametrize("lon", [np.arange(0, 360, 5.0), np.arange(-180, 180, 5.0)])
def test_box_across_dateline(lon):
    g = Grid.latlon(np.linspace(-60, 60, 25), lon)
    a = Region.box(170, -170, -10, 10).mask(g)
    b = Region.box(170, 190, -10, 10).mask(g)
    assert (a == b).all()
    sel_lon = np.unique((g.lon[a] + 360) % 360)
    np.testing.assert_allclose(sel_lon, [170, 175, 180, 185, 190])
    assert np.unique(g.lat[a]).size == 5


def test_whole_circle_box():
    g = Grid.latlon(np.linspace(-60, 60, 25), np.arange(0, 360, 5.0))
    assert Region.box(-180, 180, -90, 90).mask(g).all()


def test_polygon_across_dateline_matches_box():
    g = Grid.latlon(np.linspace(-60, 60, 49), np.arange(-180, 180, 2.5))
    box = Region.box(160, -150, 0, 30).mask(g)
    poly = Region.polygon([160.0, 210.0, 210.0, 160.0], [0.0, 0.0, 30.0, 30.0])
    inner = Region.polygon([160.01, -150.01, -150.01, 160.01], [0.01, 0.01, 29.99, 29.99]).mask(g)
    assert (poly.mask(g) <= box).all()
    # strictly inside points agree; the polygon edge points are the difference
    strict = (
        box
        & (g.lat > 0)
        & (g.lat < 30)
        & (((g.lon - 160) % 360) > 0)
        & (((g.lon - 160) % 360) < 50)
    )
    assert (inner == strict).all()


def test_bad_boxes():
    with pytest.raises(ValueError, match="south"):
        Region.box(0, 10, 20, 10)
    with pytest.raises(ValueError, match="three"):
        Region.polygon([0, 1], [0, 1])


def test_area_weights_follow_cos_lat():
    # On a regular lat-lon grid the cell areas are proportional to cos(lat) up to
    # the sin-difference of the band edges (exact), so the area-weighted mean of
    # sin^2(lat) over the sphere is 1/3 (common practice, no source).
    g = Grid.latlon(np.linspace(-89.5, 89.5, 180), np.arange(0, 360, 1.0))
    s = weighted_stats(np.sin(np.deg2rad(g.lat)) ** 2, g, Region.whole().mask(g))
    assert s.mean == pytest.approx(1 / 3, rel=1e-4)
    ratio = g.cell_area[:, 0] / np.cos(np.deg2rad(g.lat[:, 0]))
    np.testing.assert_allclose(ratio / ratio[90], 1, rtol=1e-4)


def test_counts_and_nan():
    g = Grid.latlon(np.linspace(0, 10, 11), np.linspace(0, 10, 11))
    f = np.ones(g.shape)
    f[0, :] = np.nan
    inside = Region.box(0, 10, 0, 5).mask(g)
    s = weighted_stats(f, g, inside)
    assert s.count == 5 * 11 and s.masked == 11 and s.rms == 1.0
    empty = weighted_stats(f, g, np.zeros(g.shape, bool))
    assert empty.count == 0 and empty.rms is None


def test_weighted_quantile_equal_weights_is_hyndman_fan_5(rng):
    # Hyndman and Fan (1996), Amer. Stat. 50, 361-365, definition 5: numpy's
    # 'hazen' method is the same definition.
    x = rng.normal(size=101)
    w = np.ones_like(x)
    for q in (0.1, 0.5, 0.9):
        assert weighted_quantile(x, w, q) == pytest.approx(np.quantile(x, q, method="hazen"))


def test_vector_stats():
    g = Grid.latlon(np.linspace(0, 10, 11), np.linspace(0, 10, 11))
    inside = Region.whole().mask(g)
    s, xr, yr = vector_stats(np.full(g.shape, 3.0), np.full(g.shape, 4.0), g, inside)
    assert s.rms == pytest.approx(5.0) and xr == pytest.approx(3.0) and yr == pytest.approx(4.0)


@pytest.mark.parametrize(
    "lon, lat, radius",
    [(179.5, 40.0, 800.0), (-179.0, -20.0, 1500.0), (10.0, 86.0, 900.0), (0.0, 0.0, 3000.0)],
)
def test_a_circle_holds_the_points_within_its_great_circle_radius(lon, lat, radius):
    # the circle's points are those whose haversine distance (Sinnott 1984) is within the
    # radius: the fast mask (a lon/lat box first) against every point by brute force
    from balance_core.region import great_circle_km

    g = Grid.latlon(np.linspace(90, -90, 181), np.arange(360) * 1.0)
    fast = Region.circle(lon, lat, radius).mask(g)
    slow = great_circle_km(lon, lat, g.lon, g.lat) <= radius
    assert fast.sum() > 0 and np.array_equal(fast, slow)
