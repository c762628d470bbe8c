"""A priori scale analysis, presets, scales from data, and the scales command."""

import json
import math
import re
import subprocess
import sys

import numpy as np
import pytest

from app.cli import main
from balance_core import PRESETS, Grid, Region, ScaleSet, analyze_scales, classify_scales
from balance_core import constants as C
from balance_core.scales import SCALE_TERMS, estimate_scales

SYNOPTIC = dict(U=10.0, W=0.01, L=1e6, H=1e4, dP=1000.0, rho=1.0, f0=1e-4, a=1e7, nu=1e-5)


def test_synoptic_table_orders_of_magnitude():
    # The classic synoptic scale analysis (common practice, no source).
    r = analyze_scales(ScaleSet(**SYNOPTIC))
    orders = {k: math.floor(math.log10(v) + 1e-9) for k, v in r.terms}
    assert orders == {
        "acceleration": -4,
        "vertical_advection": -5,
        "metric_uv": -5,
        "metric_uw": -8,
        "pressure_gradient": -3,
        "coriolis": -3,
        "coriolis_w": -6,
        "viscous": -12,
    }
    assert classify_scales(r).balance == "geostrophic"
    assert r.numbers["rossby"] == pytest.approx(0.1)
    assert r.numbers["ekman"] == pytest.approx(1e-9)


def test_f0_alone_gives_its_latitude():
    s = ScaleSet(**SYNOPTIC)
    assert math.sin(math.radians(s.lat0)) * 2 * C.OMEGA == pytest.approx(1e-4)
    s2 = ScaleSet(**{**SYNOPTIC, "f0": None}, lat0=30.0)
    assert s2.f0 == pytest.approx(C.OMEGA)


@pytest.mark.parametrize("name", list(PRESETS))
def test_every_preset_has_a_source_and_a_class(name):
    p = PRESETS[name]
    assert p.source and len(p.source) > 20
    v = classify_scales(analyze_scales(p))
    assert v.balance in ("geostrophic", "gradient", "cyclostrophic", "frictional", "unsteady")
    assert v.text.startswith("By scales")


def test_preset_classes_are_the_expected_ones():
    got = {n: classify_scales(analyze_scales(p)).balance for n, p in PRESETS.items()}
    assert got["synoptic_cyclone"] == "geostrophic"
    assert got["planetary_wave"] == "geostrophic"
    assert got["tornado"] == "cyclostrophic"
    assert got["boundary_layer"] == "frictional"
    assert got["sea_breeze"] == "unsteady"


@pytest.mark.parametrize(
    "bad", [dict(L=-1.0), dict(U=0.0), dict(H=float("nan")), dict(f0=None, lat0=None), dict(f0=1.0)]
)
def test_bad_scales_raise(bad):
    with pytest.raises(ValueError):
        ScaleSet(**{**SYNOPTIC, **bad})


def test_scales_estimated_from_data():
    # A jet of known speed over a height field of known wavelength: U is the RMS
    # speed; L the height's gradient length std(Z) / RMS|grad Z| = 1 / k for a sine.
    g = Grid.latlon(np.linspace(-1, 1, 41), np.linspace(0, 10, 201)).f_plane(45.0)
    k = 2 * np.pi / np.deg2rad(5.0) / g.radius
    x = np.deg2rad(g.lon) * g.radius
    z = 5500 + 50 * np.sin(k * x)
    u = np.full(g.shape, 20.0)
    om = np.full(g.shape, 0.1)
    s = estimate_scales(
        g, Region.whole().mask(g), u=u, v=0 * u, height=z, pressure=50000.0, omega=om
    )
    assert s.U == pytest.approx(20.0)
    assert s.L == pytest.approx(1 / k, rel=0.02)
    rho = 50000.0 / (C.R_DRY * 251.916)  # standard-atmosphere temperature at 500 hPa
    assert s.rho == pytest.approx(rho, rel=1e-3)
    # dP over the same distance L: rho g std(Z), std of a sine of amplitude 50 m = 50 / sqrt(2)
    assert s.dP == pytest.approx(rho * C.G0 * 50 / np.sqrt(2), rel=5e-3)  # sampled sine
    assert s.W == pytest.approx(0.1 / (rho * C.G0), rel=1e-6)
    # for one sine the a priori pressure gradient dP / (rho L) is the measured RMS g |grad Z|,
    # g 50 k / sqrt(2)
    assert s.dP / (s.rho * s.L) == pytest.approx(C.G0 * 50 * k / np.sqrt(2), rel=0.02)


def test_a_priori_pressure_gradient_and_coriolis_agree_on_geostrophic_flow():
    # Geostrophic flow (u = -(g/f) dZ/dy) of a height wave: the a priori estimates
    # dP / (rho L) and f0 U from the same data must agree within a factor of 2
    # (with dP from the range of Z they differed by range / std, about 3 here). The
    # domain holds more than one wavelength (2000 km), so the pattern's scale is in the data.
    g = Grid.latlon(np.linspace(30, 60, 121), np.linspace(0, 20, 81)).f_plane(45.0)
    f0 = g.f[0, 0]
    y = np.deg2rad(g.lat - 45.0) * g.radius
    ky = 2 * np.pi / 2.0e6
    z = 5500 + 80 * np.sin(ky * y)
    u = -(C.G0 / f0) * 80 * ky * np.cos(ky * y)
    s = estimate_scales(g, Region.whole().mask(g), u=u, v=0 * u, height=z, pressure=50000.0)
    pgf, cor = s.dP / (s.rho * s.L), abs(s.f0) * s.U
    assert 0.5 < pgf / cor < 2.0, (pgf, cor)


def _run(capsys, *args):
    code = main(list(args))
    out = capsys.readouterr()
    return code, out.out, out.err


def test_scales_json_object(capsys):
    code, out, err = _run(capsys, "scales", "--format", "json")
    assert code == 0 and not err
    rep = json.loads(out)
    assert set(rep) >= {"scales", "terms", "numbers", "verdict"}
    names = [t["name"] for t in rep["terms"]]
    assert sorted(names) == sorted(SCALE_TERMS)
    mags = [t["magnitude"] for t in rep["terms"]]
    assert mags == sorted(mags, reverse=True)
    assert rep["verdict"]["balance"] == "geostrophic"
    assert {"rossby", "ekman"} <= set(rep["numbers"])


def test_scales_flags_change_the_answer(capsys):
    _, out, _ = _run(capsys, "scales", "--format", "json", "--L", "1e4", "--U", "20")
    rep = json.loads(out)
    assert rep["scales"]["L"] == 1e4 and rep["numbers"]["rossby"] > 10
    _, out, _ = _run(capsys, "scales", "--format", "json", "--f0", "5e-5")
    assert json.loads(out)["scales"]["lat0"] == pytest.approx(
        math.degrees(math.asin(5e-5 / (2 * C.OMEGA)))
    )


def test_scales_table_is_readable(capsys):
    code, out, _ = _run(capsys, "scales", "--preset", "tropical_cyclone")
    assert code == 0
    assert "verdict: Cyclostrophic" in out and "10^-2" in out and "m s-2" in out
    assert "Scale analysis: Tropical cyclone" in out
    # display names only: no code name (lower-case words joined by "_") in the table
    assert not re.findall(r"\b[a-z]+_[a-z_]+\b", out), re.findall(r"\b[a-z]+_[a-z_]+\b", out)
    assert "deformation radius" in out and "pressure gradient" in out


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["scales", "--L", "-5"], "--L must be a positive number"),
        (["scales", "--preset", "nope"], "unknown preset 'nope'"),
        (["scales", "--lat", "0"], "gives no Rossby number"),
        (["scales", "--f0", "0"], "gives no Rossby number"),
        (["scales", "--f0", "1e-3"], "exceeds 2 Omega"),
        (["scales", "--U", "fast"], "must be a number"),
        (["scales", "--f0", "1e-4", "--lat", "40"], "not allowed with"),
        (["scales", "--format", "xml"], "invalid choice"),
    ],
)
def test_bad_flags_one_sentence_exit_2(capsys, args, fragment):
    code, out, err = _run(capsys, *args)
    assert code == 2
    assert fragment in err
    assert err.count("\n") == 1 and "Traceback" not in err


def test_console_script_runs_in_a_subprocess():
    r = subprocess.run(
        [sys.executable, "-m", "app.cli", "scales", "--format", "json"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["verdict"]["balance"] == "geostrophic"
    r = subprocess.run(
        [sys.executable, "-m", "app.cli", "scales", "--L", "0"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert r.returncode == 2 and "Traceback" not in r.stderr


def test_verify_command_passes(capsys):
    code, out, _ = _run(capsys, "verify")
    assert code == 0, out
    assert "Williamson et al. (1992)" in out and "Holland (1980)" in out
    assert "0 failed" in out
