"""The systems of real model output against an independent finder.

The truth is ``tests/independent_systems.py``: a priority flood written for these checks
(none of the project's code), on fields read with cfgrib (a GRIB reader the project does
not use outside the tests), with the points below the ground masked from the file's own
surface pressure. The files are real output that two GRIB packages publish in their
source distributions (``make`` fetches them): the NCEP GFS 2.5-degree global forecast,
the NCEP Eta (NAM) regional output on a Lambert grid, and ECMWF ERA5 samples.

* every closed low and high the flood finds at least half an interval deep is found by
  ``balance_core.systems`` within one grid length (pole rows count as one point), near
  the poles too, and nothing is found that the flood does not see;
* no region with a verdict crosses the equator;
* the sea-level lows of the GFS file below 990 hPa are found, with their value to 1 hPa;
* every wind maximum above its level's threshold whose core lies more than 1000 km from
  every closed centre is a jet streak.
"""

import os

import numpy as np
import pytest

from testkit import independent_systems as ind
from testkit import samples

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
GFS = samples.GFS
ETA = samples.ETA
ERA5 = samples.ERA5


def _cfgrib(path, **keys):
    import xarray as xr

    return xr.open_dataset(
        path, engine="cfgrib", backend_kwargs={"filter_by_keys": keys, "indexpath": ""}
    )


def _areas(lat, lon):
    """Cell areas (km2) of a grid of 2-D latitudes and longitudes: the parallelogram of the
    neighbouring points' east and north offsets on the sphere (independent of the project)."""
    r = ind.RADIUS / 1e3
    la, lo = np.deg2rad(lat), np.deg2rad(np.unwrap(np.deg2rad(lon), axis=1) * 180 / np.pi)
    dlo_x, dla_x = np.gradient(lo, axis=1), np.gradient(la, axis=1)
    dlo_y, dla_y = np.gradient(lo, axis=0), np.gradient(la, axis=0)
    ex = np.stack([r * np.cos(la) * dlo_x, r * dla_x])
    ey = np.stack([r * np.cos(la) * dlo_y, r * dla_y])
    return np.abs(ex[0] * ey[1] - ex[1] * ey[0])


def _reference(z, lat2d, area, periodic, joined, ci, kind):
    return ind.closed_extrema(
        z, lat2d, area, interval=ci, kind=kind, periodic=periodic, joined=joined
    )


def _same_point(a, b, joined):
    """Within one grid length: one row and one column apart (a pole row is one point)."""
    (r1, c1), (r2, c2) = a, b
    if r1 == r2 and r1 in joined:
        return True
    return abs(r1 - r2) <= 1 and abs(c1 - c2) <= 1


def _compare(found, ref, joined, nx, periodic):
    """Every reference system matched by one found, and every found one by the reference."""

    def close(a, b):
        (r1, c1), (r2, c2) = a, b
        if periodic:
            dc = min(abs(c1 - c2), nx - abs(c1 - c2))
            return (r1 == r2 and r1 in joined) or (abs(r1 - r2) <= 1 and dc <= 1)
        return _same_point(a, b, joined)

    missed = [d for d in ref if not any(close(d["index"], s.index) for s in found)]
    extra = [s for s in found if not any(close(d["index"], s.index) for d in ref)]
    return missed, extra


LEVELS_GFS = [85000.0, 50000.0, 25000.0]


@pytest.fixture(scope="module")
def gfs():
    samples.need(GFS)
    from balance_core.io import open_case

    gh = _cfgrib(GFS, typeOfLevel="isobaricInhPa", shortName="gh")
    sp = _cfgrib(GFS, typeOfLevel="surface", shortName="sp")
    msl = _cfgrib(GFS, typeOfLevel="meanSea", shortName="prmsl")
    u = _cfgrib(GFS, typeOfLevel="isobaricInhPa", shortName="u")
    v = _cfgrib(GFS, typeOfLevel="isobaricInhPa", shortName="v")
    lat = gh.latitude.values
    lon = gh.longitude.values
    lat2d = np.broadcast_to(lat[:, None], (lat.size, lon.size))
    return {
        "gh": gh,
        "sp": sp.sp.values,
        "msl": msl.prmsl.values,
        "u": u,
        "v": v,
        "lat": lat,
        "lon": lon,
        "lat2d": lat2d,
        "area": ind.latlon_cell_area_km2(lat, lon.size),
        "joined": ind.joined_rows(lat, True),
        "case": open_case(GFS),
    }


@pytest.mark.parametrize("level", LEVELS_GFS + [None], ids=["850", "500", "250", "msl"])
def test_gfs_closed_lows_and_highs_are_those_the_flood_finds(gfs, level):
    from balance_core.systems import contour_interval, find_closed_extrema

    case = gfs["case"]
    if level is None:
        z = gfs["msl"].astype(np.float64)
        zc = case.sea_level_pressure(0)
    else:
        z = gfs["gh"].gh.sel(isobaricInhPa=level / 100).values.astype(np.float64)
        z = np.where(level > gfs["sp"] + 1.0, np.nan, z)  # below the ground, as the reader
        k = case.level_index(level / 100)
        zc = np.asarray(case.data["height"].isel(time=0, level=k).values, np.float64)
    np.testing.assert_array_equal(np.isnan(z), np.isnan(zc))  # the same points masked
    ci = contour_interval(level)
    near_pole = 0
    for kind in ("low", "high"):
        ref = _reference(z, gfs["lat2d"], gfs["area"], True, gfs["joined"], ci, kind)
        found = find_closed_extrema(case.grid, zc, level, kind)
        missed, extra = _compare(found, ref, gfs["joined"], z.shape[1], True)
        assert not missed, f"{kind}s the flood finds and the tool misses: {missed}"
        assert not extra, f"{kind}s the tool finds and the flood does not: {extra}"
        for s in found:  # the same depth where both found it
            d = min(
                ref, key=lambda d: abs(d["index"][0] - s.index[0]) + abs(d["index"][1] - s.index[1])
            )
            assert s.value == pytest.approx(d["value"], abs=1e-6)
            assert s.outer_level == pytest.approx(d["outer"], abs=1e-6)
        near_pole += sum(abs(s.lat) > 80 for s in found)
    if level in (50000.0, 25000.0):
        # the deepest northern lows of these levels lie within 10 degrees of the pole, their
        # wide contours around it (the cases that were missed when the pole row was an edge)
        assert near_pole >= 1


def test_gfs_sea_level_lows_below_990_hpa_are_found_with_their_value(gfs):
    from balance_core.systems import find_closed_extrema

    case = gfs["case"]
    z = gfs["msl"].astype(np.float64)
    ref = _reference(z, gfs["lat2d"], gfs["area"], True, gfs["joined"], 400.0, "low")
    deep = [d for d in ref if d["value"] < 99000.0]
    assert len(deep) >= 5  # a January global forecast (the file's own count is 9)
    found = find_closed_extrema(case.grid, case.sea_level_pressure(0), None, "low")
    for d in deep:
        hits = [s for s in found if _same_point(d["index"], s.index, gfs["joined"])]
        assert hits, f"the sea-level low of {d['value'] / 100:.1f} hPa at {d['index']} is missed"
        assert abs(hits[0].value - d["value"]) <= 100.0  # within 1 hPa
        assert hits[0].units == "Pa"


def test_gfs_no_region_with_a_verdict_crosses_the_equator(gfs):
    from balance_core.io import analyze_systems

    case = gfs["case"]
    for level in ("msl", 850.0, 250.0):
        out = analyze_systems(case, level, limit=200)
        assert out["systems"]
        for s in out["systems"]:
            r = s["region"]
            if r["kind"] == "circle":
                from balance_core.region import Region

                reg = Region.circle(r["lon"], r["lat"], r["radius_km"])
                south, north = reg.south, reg.north
            else:
                lats = [c[1] for c in r["corners"]]
                south, north = min(lats), max(lats)
            if south < 0.0 < north:
                assert s["report"]["verdict"]["balance"] == "none", (level, s["kind"], r)
                assert "crosses the equator" in s["report"]["verdict"]["text"]


@pytest.mark.parametrize("level", LEVELS_GFS, ids=["850", "500", "250"])
def test_gfs_every_wind_maximum_far_from_closed_centres_is_a_jet_streak(gfs, level):
    from balance_core.systems import contour_interval, find_systems, jet_threshold

    case = gfs["case"]
    k = case.level_index(level / 100)
    below = level > gfs["sp"] + 1.0
    z = np.where(below, np.nan, gfs["gh"].gh.sel(isobaricInhPa=level / 100).values)
    u = np.where(below, np.nan, gfs["u"].u.sel(isobaricInhPa=level / 100).values)
    v = np.where(below, np.nan, gfs["v"].v.sel(isobaricInhPa=level / 100).values)
    ci = contour_interval(level)
    centres = []
    for kind in ("low", "high"):
        for d in _reference(z, gfs["lat2d"], gfs["area"], True, gfs["joined"], ci, kind):
            r, c = d["index"]
            centres.append((gfs["lon"][c], gfs["lat"][r]))
    maxima = ind.wind_maxima(np.hypot(u, v), jet_threshold(level), periodic=True)
    zc = np.asarray(case.data["height"].isel(time=0, level=k).values, np.float64)
    uc = np.asarray(case.data["u"].isel(time=0, level=k).values, np.float64)
    vc = np.asarray(case.data["v"].isel(time=0, level=k).values, np.float64)
    jets = [
        s for s in find_systems(case.grid, zc, uc, vc, level, limit=1000) if s.kind == "jet_streak"
    ]
    lon2d = np.broadcast_to(gfs["lon"][None, :], gfs["lat2d"].shape)
    checked = 0
    for m in maxima:
        core_lon, core_lat = lon2d[m["core"]], gfs["lat2d"][m["core"]]
        far = all(
            np.min(ind.great_circle_km(lo, la, core_lon, core_lat)) > 1000.0 for lo, la in centres
        )
        if not far:
            continue
        checked += 1
        r, c = m["index"]
        lo, la = gfs["lon"][c], gfs["lat"][r]
        # peaks closer than the finder's separation (500 km) are one streak
        near = [s for s in jets if ind.great_circle_km(lo, la, s.lon, s.lat) <= 600.0]
        assert near, (
            f"a wind maximum of {m['value']:.0f} m/s at {la:.1f}N {lo:.1f}E, more "
            "than 1000 km from every closed centre, is not a jet streak"
        )
    assert checked >= 5


def test_eta_and_era5_closed_systems_are_those_the_flood_finds():
    samples.need(ETA)
    samples.need(ERA5)
    from balance_core.io import open_case
    from balance_core.systems import contour_interval, find_closed_extrema

    # Eta: a regional Lambert grid (no wrap, no pole); the ground masked by its surface pressure
    gh = _cfgrib(ETA, typeOfLevel="isobaricInhPa", shortName="gh")
    sp = _cfgrib(ETA, typeOfLevel="surface", shortName="sp").sp.values
    lat, lon = gh.latitude.values, gh.longitude.values
    area = _areas(lat, lon)
    case = open_case(ETA)
    compared = 0
    msl = _cfgrib(ETA, typeOfLevel="meanSea", shortName="prmsl").prmsl.values
    for level in (None, 85000.0, 70000.0, 50000.0, 25000.0):
        if level is None:
            z, zc = msl.astype(np.float64), case.sea_level_pressure(0)
        else:
            z = np.where(level > sp + 1.0, np.nan, gh.gh.sel(isobaricInhPa=level / 100).values)
            k = case.level_index(level / 100)
            zc = np.asarray(case.data["height"].isel(time=0, level=k).values, np.float64)
        for kind in ("low", "high"):
            ref = _reference(z, lat, area, False, (), contour_interval(level), kind)
            found = find_closed_extrema(case.grid, zc, level, kind)
            missed, extra = _compare(found, ref, (), z.shape[1], False)
            assert not missed and not extra, (level, kind, missed, extra)
            compared += len(ref)
    assert compared >= 2
    # ERA5: a global 3-degree grid with pole rows, every valid time, heights only
    era = _cfgrib(ERA5, typeOfLevel="isobaricInhPa", shortName="z")
    lat = era.latitude.values
    lon = era.longitude.values
    lat2d = np.broadcast_to(lat[:, None], (lat.size, lon.size))
    area = ind.latlon_cell_area_km2(lat, lon.size)
    joined = ind.joined_rows(lat, True)
    case = open_case(ERA5)
    assert case.times.size == era.time.size == 4
    found_any = 0
    for t in range(4):
        for level in (85000.0, 50000.0):
            z = era.z.sel(number=0, isobaricInhPa=level / 100).isel(time=t).values / 9.80665
            k = case.level_index(level / 100)
            zc = np.asarray(case.data["height"].isel(time=t, level=k).values, np.float64)
            for kind in ("low", "high"):
                ref = _reference(z, lat2d, area, True, joined, contour_interval(level), kind)
                found = find_closed_extrema(case.grid, zc, level, kind)
                missed, extra = _compare(found, ref, joined, z.shape[1], True)
                assert not missed and not extra, (t, level, kind, missed, extra)
                found_any += len(found)
    assert found_any >= 8
