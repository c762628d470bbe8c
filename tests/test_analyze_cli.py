"""``balance-desk analyze`` and ``balance-desk cases``: the objects users get."""

import csv
import io
import json
import os

import numpy as np
import pytest

from app.cli import main
from testkit.makedata import latlon_dataset

HERE = os.path.dirname(os.path.abspath(__file__))
CYCLONE = os.path.join(HERE, "..", "sample_cases", "ocean_cyclone.nc")
BOX = "-52,-28,38,56"

TERM_NAMES = {
    "tendency",
    "horizontal_advection",
    "vertical_advection",
    "metric_uv",
    "metric_uw",
    "coriolis",
    "coriolis_w",
    "pressure_gradient",
    "residual",
}


def _run(capsys, *args):
    code = main(list(args))
    out = capsys.readouterr()
    return code, out.out, out.err


def _json(capsys, *args):
    code, out, err = _run(capsys, *args, "--format", "json")
    assert code == 0, err
    return json.loads(out)


def test_json_object_has_every_field(capsys):
    rep = _json(capsys, "analyze", CYCLONE, "--level", "500", "--time", "2", "--box", BOX)
    assert rep["case"] == "ocean_cyclone" and rep["level_hpa"] == 500.0
    assert rep["valid_time"] == "2041-01-19T12:00:00Z"
    assert rep["box"] == {"west": -52.0, "east": -28.0, "south": 38.0, "north": 56.0}
    assert rep["points"] > 1000 and rep["masked_points"] == 0
    names = [t["name"] for t in rep["terms"]]
    assert set(names) == TERM_NAMES
    mags = [t["magnitude"] for t in rep["terms"]]
    assert mags == sorted(mags, reverse=True)
    for t in rep["terms"] + rep["derived"]:
        assert set(t) == {
            "name",
            "magnitude",
            "x_rms",
            "y_rms",
            "estimate",
            "estimate_by_construction",
            "note",
        }
        assert t["magnitude"] == pytest.approx(np.hypot(t["x_rms"], t["y_rms"]), rel=1e-9)
    # the trajectory's centripetal term beside the streamlines' (the case has several times)
    assert [t["name"] for t in rep["derived"]] == [
        "acceleration",
        "along_stream",
        "centripetal",
        "centripetal_trajectory",
    ]
    assert rep["curvature"] == "trajectory"
    assert {t["name"] for t in rep["terms"] if t["estimate_by_construction"]} == {
        "coriolis",
        "coriolis_w",
        "metric_uw",
    }
    assert set(rep["winds"]) == {
        "speed_rms",
        "geostrophic_speed_rms",
        "ageostrophic_fraction_median",
        "gradient_speed_rms",
    }
    assert set(rep["numbers"]) == {
        "rossby",
        "rossby_local_median",
        "ekman",
        "froude",
        "burger",
        "richardson_median",
        "deformation_radius_km",
        "residual_to_coriolis",
        "shear_depth_km",
    }
    assert set(rep["scales"]) == {"U", "W", "L", "H", "dP", "f0", "nu"}
    assert set(rep["scales_recipe"]) >= {"U", "L", "dP", "nu"}
    assert set(rep["balances"]) == {"geostrophic", "gradient", "cyclostrophic", "frictional"}
    assert rep["balances_tested"] == {
        "geostrophic": True,
        "gradient": True,
        "cyclostrophic": True,
        "frictional": False,
    }
    assert "frictional" in rep["verdict"]["not_tested"] and rep["verdict"]["cautions"] == []
    assert rep["verdict"]["balance"] == "geostrophic" and rep["verdict"]["text"]
    assert "simplest balance that holds" in rep["verdict"]["why"]
    assert rep["region_points"] == rep["points"] and rep["valid_share"] == 1.0
    assert set(rep["invalid"]) == {"below_ground", "pole_row", "missing_data"}
    res = rep["resolution"]
    assert res["resolved"] and res["grid_spacing_km"] > 0 and res["flow_length_km"] > 0
    assert rep["ground"]["near"] is False
    assert set(rep["explain"]) == {"rossby", "rossby_local_median"}
    # where every field came from
    assert (
        rep["sources"]["height"]["variable"]
        and rep["sources"]["height"]["level_type"] == "pressure"
    )
    assert {"u", "v", "height"} <= set(rep["sources"])
    assert rep["reference_time"] is None or rep["lead_time_h"] is not None


def test_whole_domain_without_box(capsys):
    rep = _json(capsys, "analyze", CYCLONE, "--level", "500")
    assert rep["box"] == {"west": None, "east": None, "south": None, "north": None}
    assert rep["valid_time"] == "2041-01-19T00:00:00Z"  # the first time by default


def test_time_by_iso(capsys):
    a = _json(capsys, "analyze", CYCLONE, "--level", "500", "--time", "2041-01-19T18:00:00Z")
    b = _json(capsys, "analyze", CYCLONE, "--level", "500", "--time", "3")
    assert a == b


def test_unavailable_terms_listed_with_reasons(tmp_path, capsys):
    ds, _ = latlon_dataset(np.arange(60.0, 39.9, -2.0), np.arange(-20.0, 20.1, 2.0))
    one = ds.isel(time=[0]).drop_vars("wap")
    path = str(tmp_path / "one.nc")
    one.to_netcdf(path)
    rep = _json(capsys, "analyze", path, "--level", "500")
    by = {t["name"]: t for t in rep["terms"]}
    for name in ("tendency", "vertical_advection", "metric_uw", "coriolis_w"):
        assert by[name]["magnitude"] is None and by[name]["note"]
    assert "one time" in by["tendency"]["note"]
    assert "omega" in by["vertical_advection"]["note"]
    assert "tendency" in by["residual"]["note"]
    # unavailable ones come last
    assert [t["magnitude"] is None for t in rep["terms"]][-4:] == [True] * 4
    assert any("tendency" in c for c in rep["residual_causes"])


def test_min_lat_and_smoothing_change_the_answer(capsys):
    base = _json(capsys, "analyze", CYCLONE, "--level", "500", "--box", BOX, "--time", "2")
    smooth = _json(
        capsys, "analyze", CYCLONE, "--level", "500", "--box", BOX, "--time", "2", "--smooth", "200"
    )
    adv = lambda r: next(t["magnitude"] for t in r["terms"] if t["name"] == "horizontal_advection")  # noqa: E731
    assert smooth["smooth_km"] == 200.0 and adv(smooth) != adv(base)
    masked = _json(
        capsys, "analyze", CYCLONE, "--level", "500", "--box", BOX, "--time", "2", "--min-lat", "45"
    )
    assert masked["min_lat"] == 45.0
    assert any("within 45 degrees of the equator" in n for n in masked["notes"])
    assert masked["winds"]["geostrophic_speed_rms"] != base["winds"]["geostrophic_speed_rms"]


def test_csv_and_table(capsys):
    from balance_core.vocabulary import TERM_NAMES as WORDS

    code, out, _ = _run(
        capsys,
        "analyze",
        CYCLONE,
        "--level",
        "1000",
        "--time",
        "2",
        "--box",
        BOX,
        "--format",
        "csv",
    )
    assert code == 0
    rows = list(csv.DictReader(io.StringIO(out)))
    kinds = {r["kind"] for r in rows}
    assert kinds == {
        "term",
        "derived view",
        "balance (imbalance ratio)",
        "number",
        "wind",
        "verdict",
    }
    # plain words, never code names; every row carries the context
    assert {r["name"] for r in rows if r["kind"] == "term"} == {WORDS[t] for t in TERM_NAMES}
    assert all(r["case"] == "ocean_cyclone" and r["level (hPa)"] == "1000" for r in rows)
    assert all(r["region"] == "box 52.0W to 28.0W, 38.0N to 56.0N" for r in rows)
    chosen = [
        r["name"] for r in rows if r["kind"].startswith("balance") and r["note"] == "the verdict"
    ]
    assert chosen == ["Frictional"]
    vals = [r["value"] for r in rows if r["kind"] == "term" and r["value"]]
    assert all(
        len(v.split("e")[0].replace(".", "").replace("-", "").lstrip("0")) <= 4 for v in vals
    )  # four significant digits
    code, out, _ = _run(capsys, "analyze", CYCLONE, "--level", "1000", "--time", "2", "--box", BOX)
    assert "verdict: Frictional" in out and "residual" in out and "a priori" in out


def test_cases_command(capsys):
    code, out, _ = _run(capsys, "cases")
    assert code == 0
    for name in ("ocean_cyclone", "tropical_cyclone", "sea_breeze"):
        assert name in out
    assert "suggested box: --box" in out
    cases = _json(capsys, "cases")
    assert len(cases) == 3 and all(c["step_hours"] in (3.0, 6.0) for c in cases)
    # the suggested box as printed works as given (negative west edge included)
    cyc = next(c for c in cases if c["name"] == "ocean_cyclone")
    b = ",".join(f"{x:g}" for x in cyc["suggested_box"])
    code, out, err = _run(capsys, "analyze", CYCLONE, "--level", "500", "--box", b)
    assert code == 0, err
