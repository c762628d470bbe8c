"""Finding the systems of a 0.25-degree global level, each with its region's report.

A synthetic global level (721 x 1440, float64) made here: heights of the 1976 Standard
Atmosphere at 300 hPa with a pole-to-equator slope, 24 lows and highs of 400 to 1200 km
scattered over both hemispheres, winds from the heights' geostrophic relation outside
the tropics (so jet streaks form where the vortices crowd the slope). The level's
diagnostics are computed first (the dashboard's shared cache holds them), then timed:
finding the systems and the report of each region (at most 30), median of ``--repeat``.
Goal: under 1 s on this machine. The reference measured in the same run is one box
report of a 20-degree box.

The last lines are ``figure systems/global_quarter_degree MS`` and
``ratio systems_all/one_box_report VALUE``.

    python bench/systems.py [--repeat 5]
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

os.environ.setdefault("PROJ_NETWORK", "OFF")
import numpy as np
import pyproj  # noqa: F401

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))

from balance_core import Grid  # noqa: E402
from balance_core.analytic import great_circle_distance  # noqa: E402
from balance_core.budget import Fields  # noqa: E402
from balance_core.region import Region  # noqa: E402
from balance_core.report import box_report, level_diagnostics  # noqa: E402
from balance_core.systems import find_systems  # noqa: E402
from balance_core.thermo import standard_atmosphere_height  # noqa: E402
from balance_core.winds import geostrophic_wind  # noqa: E402

P = 30000.0


def global_level():
    lat = np.linspace(90, -90, 721)
    lon = np.arange(1440) * 0.25
    g = Grid.latlon(lat, lon)
    rng = np.random.default_rng(11)
    z = standard_atmosphere_height(P) - 500.0 * np.sin(np.deg2rad(g.lat)) ** 2
    for i in range(24):
        la = rng.uniform(25, 70) * (1 if i % 2 else -1)
        lo = rng.uniform(0, 360)
        amp = rng.uniform(150, 400) * (1 if i % 3 else -1)
        r = great_circle_distance(la, lo, g.lat, g.lon, g.radius)
        z = z - amp * np.exp(-((r / rng.uniform(4e5, 1.2e6)) ** 2))
    ug, vg = geostrophic_wind(g, z)
    u = np.nan_to_num(ug)
    v = np.nan_to_num(vg)
    fields = Fields(u=u[None, None], v=v[None, None], height=z[None, None], pressure=np.array([P]))
    return g, level_diagnostics(g, fields, 0, 0)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    g, diag = global_level()
    built = time.perf_counter() - t0
    runs, ref = [], []
    found = []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        box_report(diag, Region.box(-30, -10, 40, 60))
        ref.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        found = find_systems(g, diag.height, diag.u, diag.v, P, limit=30)
        reports = [box_report(diag, s.region) for s in found]
        runs.append(time.perf_counter() - t0)
    ms, ref_ms = 1e3 * statistics.median(runs), 1e3 * statistics.median(ref)
    kinds = {k: sum(s.kind == k for s in found) for k in ("low", "high", "jet_streak")}
    verdicts = {}
    for r in reports:
        verdicts[r["verdict"]["balance"]] = verdicts.get(r["verdict"]["balance"], 0) + 1
    print(
        f"{g.shape[0]} x {g.shape[1]} global level built in {built:.1f} s; {os.cpu_count()} "
        f"cores; median of {args.repeat}"
    )
    print(f"  systems found: {len(found)} ({kinds}); verdicts {verdicts}")
    print(f"  finding them and a report for each: {ms:8.1f} ms (goal < 1000)")
    print(f"  one report of a 20-degree box:      {ref_ms:8.1f} ms")
    print(f"figure systems/global_quarter_degree {ms:.1f}")
    print(f"ratio systems_all/one_box_report {ms / ref_ms:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
