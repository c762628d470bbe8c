"""Reading real-shaped GRIB: the whole ``analyze`` process against one plain eccodes pass.

The bench writes its own GRIB2 file shaped like a national centre's regional output:
a Lambert conformal grid of operational size (614 x 428 at 12.19 km, the shape of
NCEP grid 218, on which the NAM's CONUS output comes), one valid time, 37 isobaric
levels (1000 to 100 hPa) of gh, u, v, t, w, relative humidity, absolute vorticity and
cloud water, and fields on other kinds of level that share their short names -- pres
at the surface, at the cloud top (-50000 Pa where there is no cloud) and at the
tropopause; gh at the cloud top and the tropopause; u, v at 10 m and the tropopause;
t at 2 m, at the surface and at the tropopause; mean sea level pressure -- 311
messages, packed as NCEP packs such output (complex packing with spatial
differencing, 12 bits), winds flagged grid-relative. (A real NAM file on this grid
holds several hundred messages more.)

Both sides run as whole processes (interpreter start and imports included), timed
with the wall clock, median of several runs:

* reference: a plain script that opens the file with eccodes and decodes the values
  of every message;
* ours: ``balance-desk analyze FILE --level 500 --format json``.

The last lines are ``ratio analyze_grib/eccodes_decode VALUE`` (goal <= 3) and ``ratio
refuse_huge_file/analyze_small_sample VALUE``: the refusal of a small file that declares a
100000 x 100000 grid (goal under 2 s, about one interpreter start) against analysing the
smallest sample case. When the
real Eta sample from pygrib's source distribution is in .cache/pygrib-samples (``make
test`` fetches it) the same pair is also timed on it and printed as
``ratio analyze_grib_eta_sample/eccodes_decode VALUE``: a 93 x 65 grid, where the
fixed cost of starting Python and importing xarray weighs most.

    python bench/io.py [--repeat N]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time

os.environ.setdefault("PROJ_NETWORK", "OFF")
import numpy as np
import pyproj

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)

#: NCEP grid 218: 614 x 428 points, 12.19 km, Lambert conformal tangent at 25 N, LoV 265 E
NX, NY, DX = 614, 428, 12191.0

DECODE = """
import sys
import eccodes
eccodes.codes_grib_multi_support_on()
n = 0
with open(sys.argv[1], "rb") as fh:
    while True:
        h = eccodes.codes_grib_new_from_file(fh)
        if h is None:
            break
        eccodes.codes_get_values(h)
        eccodes.codes_release(h)
        n += 1
print(n)
"""


def make_file(path):
    """The regional multi-level-type GRIB2 file described in the module docstring."""
    from testkit.gribwrite import write_grib2
    from testkit.makedata import truth

    crs = pyproj.CRS.from_proj4(
        "+proj=lcc +lat_1=25 +lat_2=25 +lat_0=25 +lon_0=265 +R=6371229 +units=m"
    )
    to_geo = pyproj.Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
    x0, y0 = pyproj.Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True).transform(
        -133.459, 12.19
    )
    x = x0 + DX * np.arange(NX)
    y = y0 + DX * np.arange(NY)
    X, Y = np.meshgrid(x, y)
    lon, lat = to_geo.transform(X, Y)
    levels = list(np.arange(1000.0, 74.0, -25.0))  # 1000 to 100 hPa every 25: 37 levels
    names = ("gh", "u", "v", "t", "w", "r", "absv", "clwmr")
    f = {k: np.empty((1, len(levels)) + X.shape) for k in names}
    for ik, p in enumerate(levels):
        z, u, v, om, t = truth(lat, lon, p, 0.0)
        f["gh"][0, ik], f["u"][0, ik], f["v"][0, ik], f["t"][0, ik] = z, u, v, t
        f["w"][0, ik] = om
        f["r"][0, ik] = 50 + 40 * np.sin(np.deg2rad(3 * lon))
        f["absv"][0, ik] = 1e-4 + 5e-5 * np.cos(np.deg2rad(4 * lat))
        f["clwmr"][0, ik] = 1e-5 * (1 + np.sin(np.deg2rad(5 * lon)))
    one = lambda a: np.asarray(a, np.float64)[None]  # noqa: E731
    sp = 100000.0 - 15000.0 * np.exp(-(((lon + 110) / 12) ** 2 + ((lat - 40) / 8) ** 2))
    z10, u10, v10, _, t2 = truth(lat, lon, 1000.0, 0.0)
    cloud = np.where(np.sin(np.deg2rad(5 * lon)) > 0.3, 40000.0, -50000.0)
    single = {
        ("pres", "surface"): one(sp),
        ("prmsl", "meanSea"): one(101300.0 + 0 * sp),
        ("pres", "cloudTop"): one(cloud),
        ("gh", "cloudTop"): one(7000.0 + 0 * sp),
        ("pres", "tropopause"): one(25000.0 + 0 * sp),
        ("gh", "tropopause"): one(10500 + 0 * sp),
        ("t", "tropopause"): one(215.0 + 0 * sp),
        ("u", "tropopause"): one(0.8 * u10),
        ("v", "tropopause"): one(0.8 * v10),
        ("u", "10m"): one(0.6 * u10),
        ("v", "10m"): one(0.6 * v10),
        ("t", "2m"): one(t2 + 2.0),
        ("r", "2m"): one(60 + 0 * sp),
        ("t", "surface"): one(t2 + 3.0),
        ("tke", "surface"): one(0.5 + 0 * sp),
    }
    grid = dict(
        kind="lambert",
        lat_first=float(lat[0, 0]),
        lon_first=float(lon[0, 0]),
        dx=DX,
        dy=DX,
        lad=25.0,
        lov=265.0,
        latin1=25.0,
        latin2=25.0,
    )
    # NCEP's own packing of such output: complex packing with spatial differencing
    write_grib2(
        path,
        grid,
        f,
        levels,
        [(20041209, 12)],
        uv_relative=True,
        single=single,
        packing="grid_complex_spatial_differencing",
        bits=12,
    )
    return len(levels) * len(f) + len(single)


def wall(cmd, repeat, expect=0):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        r = subprocess.run(cmd, capture_output=True, text=True)
        times.append(time.perf_counter() - t0)
        if r.returncode != expect:
            raise SystemExit(f"{' '.join(cmd)} failed ({r.returncode}): {r.stderr[-400:]}")
    return statistics.median(times)


def pair(path, repeat):
    exe = sys.executable
    with tempfile.NamedTemporaryFile("w", suffix=".py", delete=False) as fh:
        fh.write(DECODE)
        script = fh.name
    try:
        ref = wall([exe, script, path], repeat)
        ours = wall(
            [exe, "-m", "app.cli", "analyze", path, "--level", "500", "--format", "json"], repeat
        )
    finally:
        os.unlink(script)
    return ref, ours


def huge_refusal(tmp, repeat):
    """The refusal of a file declaring a huge grid, against analysing the smallest sample
    case (the same interpreter start and imports): seconds, seconds."""
    from testkit.makedata import huge_declaring_netcdf

    huge = os.path.join(tmp, "huge.nc")
    huge_declaring_netcdf(huge)
    small = os.path.join(ROOT, "sample_cases", "sea_breeze.nc")
    exe = [sys.executable, "-m", "app.cli", "analyze"]
    refused = wall(exe + [huge, "--level", "500"], repeat, expect=2)
    ref = wall(exe + [small, "--level", "1000"], repeat)
    return refused, ref


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args(argv)
    os.chdir(ROOT)
    lines = []
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "regional.grib2")
        n = make_file(path)
        size = os.path.getsize(path) / 2**20
        ref, ours = pair(path, args.repeat)
        print(
            f"regional GRIB2, {NX} x {NY} Lambert, {n} messages on 10 kinds of level, "
            f"{size:.1f} MiB; median of {args.repeat} whole processes"
        )
        print(f"  eccodes: open and decode every message   {1000 * ref:8.0f} ms")
        print(f"  balance-desk analyze --level 500         {1000 * ours:8.0f} ms")
        lines.append(f"ratio analyze_grib/eccodes_decode {ours / ref:.2f}")
        refused, small = huge_refusal(tmp, args.repeat)
        print("a 300 kB NetCDF4 file declaring a 100000 x 100000 grid, refused from its metadata")
        print(
            f"  balance-desk analyze (exit 2)            {1000 * refused:8.0f} ms   (goal < 2000)"
        )
        print(f"  balance-desk analyze, smallest sample    {1000 * small:8.0f} ms")
        lines.append(f"ratio refuse_huge_file/analyze_small_sample {refused / small:.2f}")
    eta = os.path.join(ROOT, ".cache", "pygrib-samples", "eta.grb")
    if os.path.exists(eta):
        ref, ours = pair(eta, args.repeat)
        print(
            f"real NCEP Eta sample (pygrib 2.1.8 sampledata), 93 x 65, 181 fields, "
            f"{os.path.getsize(eta) / 2**20:.1f} MiB"
        )
        print(f"  eccodes: open and decode every message   {1000 * ref:8.0f} ms")
        print(f"  balance-desk analyze --level 500         {1000 * ours:8.0f} ms")
        lines.insert(0, f"ratio analyze_grib_eta_sample/eccodes_decode {ours / ref:.2f}")
    for line in lines:
        print(line)
    return 0


if __name__ == "__main__":
    sys.exit(main())
