"""Speed and memory of the core against MetPy, measured in the same run.

A synthetic global 0.25-degree level (721 x 1440), three times and three
pressure levels (the budget needs neighbours in both), in float64 and float32.
Each of our timings alternates with the reference's, ``--repeat`` pairs of runs one
after the other: a shared machine's speed drifts by tens of per cent within minutes,
and a pair run back to back sees the same machine. A ratio is the median of the pairs'
ratios; its spread (lowest to highest pair) is printed beside it. The last lines are

    ratio geostrophic_wind/metpy VALUE          goal <= 0.2
    ratio full_budget/metpy_geostrophic_wind VALUE   goal <= 1.0
    ratio peak_memory/input VALUE               goal <= 12

(ours divided by the reference; lower is better).

    python bench/core.py [--repeat N]
"""

from __future__ import annotations

import argparse
import gc
import os
import statistics
import sys
import time
import tracemalloc
import warnings

os.environ.setdefault("PROJ_NETWORK", "OFF")
import numpy as np
import pyproj  # noqa: F401  (before anything that may load eccodes)

from balance_core import Fields, Grid, _memory, momentum_budget
from balance_core.winds import geostrophic_wind


def synthetic_level(dtype=np.float64, seed=1):
    """u, v, Z, omega, T on a 0.25-degree global grid: (3 times, 3 levels, 721, 1440)."""
    lat = np.linspace(90, -90, 721)
    lon = np.arange(1440) * 0.25
    lam, phi = np.meshgrid(np.deg2rad(lon), np.deg2rad(lat))
    rng = np.random.default_rng(seed)
    noise = lambda amp: amp * rng.standard_normal(lam.shape)  # noqa: E731
    shape = (3, 3) + lam.shape
    u, v, z, om, t = (np.empty(shape, dtype) for _ in range(5))
    for i in range(3):
        for k in range(3):
            s = 1 + 0.01 * i + 0.1 * k
            u[i, k] = s * (
                25 * np.cos(phi) ** 2 + 8 * np.sin(4 * lam - 0.1 * i) * np.cos(phi)
            ) + noise(0.5)
            v[i, k] = s * 6 * np.cos(3 * lam + 0.1 * i) * np.cos(phi) + noise(0.5)
            z[i, k] = 5500 + 1500 * (1 - k) + 200 * np.cos(2 * phi) * s + noise(2)
            om[i, k] = 0.2 * np.sin(5 * lam) * np.cos(phi) + noise(0.02)
            t[i, k] = 250 + 30 * np.cos(phi) - 10 * k + noise(0.3)
    return lat, lon, Fields(u, v, z, [70000.0, 50000.0, 30000.0], [0.0, 10800.0, 21600.0], om, t)


def _once_ms(fn):
    t0 = time.perf_counter()
    out = fn()
    ms = 1e3 * (time.perf_counter() - t0)
    del out
    return ms


def paired(ours, reference, repeat):
    """Alternate ``reference`` and ``ours``, ``repeat`` pairs after one warm-up run of each
    (first-touch memory, caches). Returns (median ms of ours, median ms of the reference,
    the median of the pairs' ratios, the lowest and the highest ratio)."""
    ours(), reference()
    pairs = [(_once_ms(reference), _once_ms(ours)) for _ in range(repeat)]
    ratios = sorted(o / r for r, o in pairs)
    return (
        statistics.median(o for _, o in pairs),
        statistics.median(r for r, _ in pairs),
        statistics.median(ratios),
        ratios[0],
        ratios[-1],
    )


def peak_bytes(fn):
    """Peak traced allocation while ``fn`` runs and its result is alive.

    The core's pool of recycled output blocks is emptied first, so the peak
    counts a freshly allocated block for every output field.
    """
    _memory.POOL.clear()
    gc.collect()
    tracemalloc.start()
    tracemalloc.reset_peak()
    out = fn()  # keep the outputs alive: the peak includes every output field
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    del out
    return peak


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args(argv)

    import metpy.calc as mpcalc
    from metpy.units import units

    lat, lon, f64 = synthetic_level(np.float64)
    _, _, f32 = synthetic_level(np.float32)
    grid = Grid.latlon(lat, lon)
    z = f64.height[1, 1]
    dx, dy = mpcalc.lat_lon_grid_deltas(lon, lat)
    zq = z * units.m
    latq = np.deg2rad(lat)[:, None] * units.radian

    def metpy_geo():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # division by f = 0 on the equator row
            return mpcalc.geostrophic_wind(zq, dx=dx, dy=dy, latitude=latq)

    ours = {
        "geostrophic_wind": (
            "balance_core geostrophic_wind float64",
            lambda: geostrophic_wind(grid, z),
        ),
        "geostrophic_wind_float32": (
            "balance_core geostrophic_wind float32 input",
            lambda: geostrophic_wind(grid, f32.height[1, 1]),
        ),
        "full_budget": (
            "full budget, every term of both equations, float64",
            lambda: momentum_budget(grid, f64, 1, 1, views=False),
        ),
        "full_budget_float32": (
            "full budget, float32 input",
            lambda: momentum_budget(grid, f32, 1, 1, views=False),
        ),
        "full_budget_with_views": (
            "full budget plus derived views (DV/Dt, along-stream, centripetal)",
            lambda: momentum_budget(grid, f64, 1, 1),
        ),
        "full_budget_one_thread": (
            "full budget in one thread",
            lambda: momentum_budget(grid, f64, 1, 1, views=False, workers=1),
        ),
    }
    timed = {key: paired(fn, metpy_geo, args.repeat) for key, (_, fn) in ours.items()}
    t_metpy = statistics.median(t[1] for t in timed.values())

    # input: the slices the budget at (time 1, level 1) reads: u and v at five
    # (time, level) pairs, Z, omega and T at one
    slice_bytes = f64.u[0, 0].nbytes
    input_bytes = (2 * 5 + 3) * slice_bytes
    peak = peak_bytes(lambda: momentum_budget(grid, f64, 1, 1))
    peak32 = peak_bytes(lambda: momentum_budget(grid, f32, 1, 1))
    input32 = (2 * 5 + 3) * f32.u[0, 0].nbytes

    print(
        f"grid 721 x 1440, 3 times x 3 levels, {os.cpu_count()} cores, {args.repeat} pairs "
        "of runs (ours, then MetPy's geostrophic wind) for each line"
    )
    print(f"  {'metpy geostrophic_wind (plain arrays with units)':<70} {t_metpy:8.1f} ms")
    for key, (name, _) in ours.items():
        ms, _, ratio, low, high = timed[key]
        print(f"  {name:<70} {ms:8.1f} ms  x{ratio:.3f} ({low:.3f} to {high:.3f})")
    print(
        f"  peak traced memory of the budget with views, float64: {peak / 2**20:.0f} MiB "
        f"for {input_bytes / 2**20:.0f} MiB of input slices"
    )
    print(f"  same with float32 input: {peak32 / 2**20:.0f} MiB for {input32 / 2**20:.0f} MiB")
    ratio = {key: t[2] for key, t in timed.items()}
    print(
        f"ratio full_budget_with_views/metpy_geostrophic_wind {ratio['full_budget_with_views']:.3f}"
    )
    print(f"ratio full_budget_float32/metpy_geostrophic_wind {ratio['full_budget_float32']:.3f}")
    print(f"ratio peak_memory_float32/input {peak32 / input32:.2f}")
    print(f"ratio geostrophic_wind/metpy {ratio['geostrophic_wind']:.3f}")
    print(f"ratio full_budget/metpy_geostrophic_wind {ratio['full_budget']:.3f}")
    print(f"ratio peak_memory/input {peak / input_bytes:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
