"""``balance-desk batch`` on a synthetic archive the bench makes itself.

The archive: 0.25-degree global levels (721 x 1440) at 850, 500 and 250 hPa, ``--times``
valid times (default 40), one NetCDF file per time (float32, as archives are stored).
Two boxes per level. Measured in the same run:

* the core called directly, file after file (``plan_file``, which opens it and takes its
  checksum, then ``run_task`` on each of its pieces), in a plain process started with the
  environment of the batch's workers (one thread: OMP_NUM_THREADS=1, which the core's
  band pool follows too): the reference;
* the same direct calls in 2 such processes, each on half the files: what this machine
  gives a second process on this work without dask (two processes share the memory
  bandwidth and the caches; the ceiling of the next ratio);
* for comparison, the direct calls in 1 process without the workers' environment, whose
  band pool computes each level on every core (``balance_core.budget.band_threads``), as
  the dashboard does;
* the batch on a local cluster of 1 worker, then of 2 workers (one thread each);
* the batch with 2 workers whose memory limit is a quarter of the archive's size:
  it must complete with no task lost to memory and no worker restarted; each worker's
  resident memory is sampled every 0.1 s (psutil) and the largest is printed.

The 1-worker and 2-worker runs alternate, ``--rounds`` pairs of them (default 3): a
shared virtual machine's speed drifts by tens of per cent within minutes, and a pair run
back to back sees the same machine. Each pair's ratio is printed; the figure is their
median.

Prints ``ratio workers2/workers1`` (throughput, pieces a second from the first piece
written to the last, so without the cluster's start; goal >= 1.7) beside ``ratio
direct_2procs/direct_1proc`` (the machine's own), ``ratio
workers2/workers1_whole_run`` (the whole runs' times, start included), ``ratio
batch_task/direct_call`` (time per piece on 1 worker over the direct call; goal
< 1.2) and ``figure peak_worker_memory_mb``, ``figure archive_mb``.

    python bench/batch.py [--times 40] [--rounds 3] [--keep DIR]
"""

from __future__ import annotations

import argparse
import glob
import os
import shutil
import sys
import tempfile
import threading
import time

os.environ.setdefault("PROJ_NETWORK", "OFF")
import numpy as np
import pyproj  # noqa: F401

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)

BOXES = [
    ("north atlantic", (-60.0, -10.0, 35.0, 65.0)),
    ("north pacific", (150.0, -140.0, 30.0, 60.0)),
]
LEVELS = [850.0, 500.0, 250.0]


def make_archive(folder, n_times):
    import pandas as pd
    import xarray as xr

    from balance_core import Grid
    from balance_core.thermo import standard_atmosphere_height, standard_atmosphere_temperature
    from balance_core.winds import geostrophic_wind

    lat = np.linspace(90, -90, 721)
    lon = np.arange(1440) * 0.25
    lam, phi = np.meshgrid(np.deg2rad(lon), np.deg2rad(lat))
    cos, sin = np.cos(phi), np.sin(phi)
    levels = np.array(LEVELS)
    grid = Grid.latlon(lat, lon)
    t0 = pd.Timestamp("2039-01-01T00")
    for i in range(n_times):
        ph = lam - 2e-6 * 6 * 3600 * i
        shape = (1, 3) + lam.shape
        z, u, v, om, t = (np.empty(shape, np.float32) for _ in range(5))
        for k, p in enumerate(levels):
            s = np.log(1e3 / p) / np.log(4)
            z[0, k] = (
                standard_atmosphere_height(p * 100)
                - 300 * s * sin**2
                + 80 * (1 + s) * np.cos(5 * ph) * (2 * sin * cos) ** 2
            )
            # the wind of the heights (geostrophic; calm within the tropical mask), with a
            # ten per cent ageostrophic part
            ug, vg = geostrophic_wind(grid, z[0, k].astype(np.float64))
            ug, vg = np.nan_to_num(ug), np.nan_to_num(vg)
            u[0, k] = 0.92 * ug - 0.1 * vg
            v[0, k] = 0.92 * vg + 0.1 * ug
            om[0, k] = 0.3 * np.sin(5 * ph) * cos
            t[0, k] = standard_atmosphere_temperature(p * 100) + 25 * (cos**2 - 0.5) - 5 * s
        coords = {
            "time": [t0 + pd.Timedelta(hours=6 * i)],
            "level": ("level", levels, {"units": "hPa"}),
            "lat": ("lat", lat, {"units": "degrees_north", "standard_name": "latitude"}),
            "lon": ("lon", lon, {"units": "degrees_east", "standard_name": "longitude"}),
        }
        dims = ("time", "level", "lat", "lon")
        ds = xr.Dataset(
            {
                "z": (dims, z, {"standard_name": "geopotential_height", "units": "m"}),
                "u": (dims, u, {"standard_name": "eastward_wind", "units": "m s-1"}),
                "v": (dims, v, {"standard_name": "northward_wind", "units": "m s-1"}),
                "w": (
                    dims,
                    om,
                    {"standard_name": "lagrangian_tendency_of_air_pressure", "units": "Pa s-1"},
                ),
                "t": (dims, t, {"standard_name": "air_temperature", "units": "K"}),
            },
            coords=coords,
            attrs={"title": "synthetic archive for bench/batch.py", "source": "synthetic"},
        )
        ds.to_netcdf(os.path.join(folder, f"an_{i:03d}.nc"))


def run(files, out, workers, memory_limit=None, sample=False):
    """Seconds of a batch run in this process (a local cluster); with ``sample``, also the
    largest resident memory of a worker (MB) and the workers that were replaced."""
    from distributed import Client

    from app.batch import local_cluster, run_batch

    for p in glob.glob(out + "*"):
        shutil.rmtree(p) if os.path.isdir(p) else os.unlink(p)
    t0 = time.perf_counter()
    if sample:
        # the same run on a cluster made here, so that each worker's resident memory can be
        # sampled (every 0.1 s, from this process); a worker that was restarted would come
        # back under another address
        lc = local_cluster(workers, memory_limit)
        client = Client(lc)
        peaks = {}
        stop = threading.Event()

        def watch(pids):
            import psutil

            procs = {pid: psutil.Process(pid) for pid in pids}
            while not stop.is_set():
                for pid, proc in procs.items():
                    try:
                        peaks[pid] = max(peaks.get(pid, 0), proc.memory_info().rss)
                    except psutil.Error:
                        pass
                time.sleep(0.1)

        try:
            before = set(client.scheduler_info()["workers"])
            th = threading.Thread(target=watch, args=(list(client.run(os.getpid).values()),))
            th.start()
            try:
                run_batch(
                    files,
                    LEVELS,
                    out,
                    boxes=BOXES,
                    scheduler=lc.scheduler_address,
                    say=lambda *a: None,
                    err=lambda *a: None,
                )
            finally:
                stop.set()
                th.join()
            after = set(client.scheduler_info()["workers"])
        finally:
            client.close()
            lc.close()
        return time.perf_counter() - t0, max(peaks.values()) / 2**20, sorted(after - before)
    run_batch(
        files,
        LEVELS,
        out,
        boxes=BOXES,
        workers=workers,
        memory_limit=memory_limit,
        say=lambda *a: None,
        err=lambda *a: None,
    )
    return time.perf_counter() - t0, None, []


def steady_rate(out):
    """Pieces a second while the run was going: the part files written after the first,
    over the time from the first to the last (their modification times)."""
    times = sorted(os.path.getmtime(p) for p in glob.glob(os.path.join(out + ".parts", "*.json")))
    return (len(times) - 1) / (times[-1] - times[0])


def _direct(files):
    """The core called directly on ``files``, one after another: seconds."""
    from app.batch import plan_file, run_task

    t0 = time.perf_counter()
    for path in files:
        plan = plan_file(path, LEVELS, boxes=BOXES)
        for task in plan["tasks"]:
            r = run_task(task)
            assert r["error"] is None, r["error"]
    return time.perf_counter() - t0


def _direct_in_processes(files, n=2, worker_env=True):
    """The direct calls in ``n`` fresh processes, each on every n-th file: wall seconds.
    They start with the environment of the batch's workers, or with ``worker_env`` False
    without it (as the dashboard's server runs: the band pool on every core)."""
    import multiprocessing as mp

    from app.batch import worker_environment

    ctx = mp.get_context("spawn")  # fresh interpreters, as dask's workers are
    saved = dict(os.environ)
    if worker_env:
        os.environ.update(worker_environment())  # what the batch's workers get, before numpy
    else:
        # (a LocalCluster's nanny sets them in the process that started it, for good)
        for k in worker_environment():
            os.environ.pop(k, None)
    try:
        with ctx.Pool(n) as pool:
            pool.map(_direct, [files[:1]] * n)  # imports and first-call costs, not timed
            t0 = time.perf_counter()
            pool.map(_direct, [files[i::n] for i in range(n)])
            return time.perf_counter() - t0
    finally:
        os.environ.clear()
        os.environ.update(saved)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--times", type=int, default=40)
    ap.add_argument(
        "--rounds",
        type=int,
        default=3,
        help="pairs of 1-worker and 2-worker runs, one after the other",
    )
    ap.add_argument("--keep", default=None, help="keep the archive in this folder")
    args = ap.parse_args(argv)
    folder = args.keep or tempfile.mkdtemp(prefix="bd-archive-")
    os.makedirs(folder, exist_ok=True)
    files = sorted(glob.glob(os.path.join(folder, "an_*.nc")))
    if len(files) != args.times:
        t0 = time.perf_counter()
        make_archive(folder, args.times)
        files = sorted(glob.glob(os.path.join(folder, "an_*.nc")))
        print(f"archive made in {time.perf_counter() - t0:.0f} s", file=sys.stderr)
    size_mb = sum(os.path.getsize(f) for f in files) / 2**20
    pieces = len(files) * len(LEVELS)

    # the reference: the same work in one process with a worker's environment, a file at
    # a time -- opened (and its checksum taken) once, then every piece of it
    print(
        f"archive: {len(files)} files, {pieces} pieces (3 levels x {len(files)} times, "
        f"0.25-degree global), {size_mb:.0f} MB; {os.cpu_count()} cores",
        flush=True,
    )
    direct = _direct_in_processes(files, 1)
    print(
        f"  direct calls, 1 process:        {direct:7.1f} s ({direct / pieces:.2f} s a piece)",
        flush=True,
    )
    direct2 = _direct_in_processes(files, 2)
    print(f"  direct calls, 2 processes:      {direct2:7.1f} s", flush=True)
    out = os.path.join(folder, "result.parquet")
    pairs = []
    for _ in range(args.rounds):
        one, _, _ = run(files, out, 1)
        rate1 = steady_rate(out)
        print(
            f"  batch, 1 worker:                {one:7.1f} s ({one / pieces:.2f} s a piece); "
            f"{rate1:.2f} pieces/s once running",
            flush=True,
        )
        two, _, _ = run(files, out, 2)
        rate2 = steady_rate(out)
        print(
            f"  batch, 2 workers:               {two:7.1f} s; {rate2:.2f} pieces/s once "
            f"running; this pair: {rate2 / rate1:.2f}",
            flush=True,
        )
        pairs.append((one, rate1, two, rate2))
    # the median pair (by its throughput ratio) gives every figure below
    one, rate1, two, rate2 = sorted(pairs, key=lambda p: p[3] / p[1])[len(pairs) // 2]
    first_one = pairs[0][0]
    here = _direct_in_processes(files, 1, worker_env=False)
    print(f"  direct calls, 1 process with the band pool on every core: {here:7.1f} s", flush=True)
    # unlimited, sampled: what one worker needs
    free, peak_free, _ = run(files, out, 2, memory_limit=0, sample=True)
    print(f"  peak memory of a worker without a limit: {peak_free:.0f} MB", flush=True)
    limit = int(size_mb / 4 * 2**20)
    limited, peak, restarts = run(files, out, 2, memory_limit=limit, sample=True)
    import pandas as pd

    rows = pd.read_parquet(out)
    errors = pd.read_csv(os.path.splitext(out)[0] + ".errors.csv")
    print(
        f"  batch, 2 workers limited to {limit / 2**20:.0f} MB each: {limited:7.1f} s, "
        f"{len(rows)} rows of {pieces * len(BOXES)}, {len(errors)} pieces not analyzed, "
        f"workers replaced: {len(restarts)}; peak worker memory {peak:.0f} MB"
    )
    print(f"figure archive_mb {size_mb:.0f}")
    print(f"figure peak_worker_memory_mb {peak_free:.0f}")
    # throughput: pieces a second from the first piece written to the last (the cluster's
    # start, a few seconds whatever the archive, left out); and the whole runs' times
    print(f"  pairs' ratios: {', '.join(f'{p[3] / p[1]:.2f}' for p in pairs)}")
    print(f"ratio workers2/workers1 {rate2 / rate1:.2f}")
    print(f"ratio workers2/workers1_whole_run {one / two:.2f}")
    print(f"ratio direct_2procs/direct_1proc {direct / direct2:.2f}")
    # the first 1-worker run comes right after the direct reference (the machine drifts)
    print(f"ratio batch_task/direct_call {first_one / direct:.2f}")
    print(f"ratio workers2/direct_every_core {here / two:.2f}")
    if not args.keep:
        shutil.rmtree(folder, ignore_errors=True)
    print(f"figure limited_run_pieces_lost {len(errors)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
