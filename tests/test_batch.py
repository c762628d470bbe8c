"""``balance-desk batch`` on dask.distributed, on loopback.

* a real scheduler and two workers started with dask's own command-line tools
  (``dask scheduler``, ``dask worker``): every row of ``batch --scheduler`` equals, to the
  last bit, the report ``analyze`` makes in this process for the same slice and box;
* a run killed partway (SIGKILL of the whole process group) and started again: no row
  missing, none twice, and the same rows as a run that was never stopped;
* a bad file among good ones: one row in the errors table, results for all the others.
"""

import json
import os
import signal
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from testkit.makedata import latlon_dataset
from testkit.serving import wait_until

pytestmark = pytest.mark.slow

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.dirname(sys.executable)
BOXES = [(-40.0, -10.0, 35.0, 55.0), (-20.0, 10.0, 40.0, 60.0)]


@pytest.fixture(scope="module")
def archive(tmp_path_factory):
    folder = tmp_path_factory.mktemp("archive")
    for i in range(3):
        # from 2 to 82 N: the boxes (35 to 60 N) take a band of its rows, so the rows
        # compared with analyze below come from the band (app.batch._band)
        ds, _ = latlon_dataset(np.linspace(-78, 82, 81), np.linspace(-60, 20, 41))
        ds.attrs["title"] = f"synthetic archive file {i}"
        ds.to_netcdf(folder / f"run{i}.nc")
    return folder


def _batch(args, cwd, env=None, **kw):
    cmd = [sys.executable, "-m", "app.cli", "batch", *args]
    return subprocess.run(cmd, capture_output=True, text=True, cwd=cwd, timeout=600, env=env, **kw)


def _box_args():
    return [f"--box={','.join(f'{v:g}' for v in b)}" for b in BOXES]


def test_rows_from_a_real_cluster_equal_analyze(archive, tmp_path):
    from app.batch import Task, flatten
    from balance_core.io import analyze_case, open_case

    # port 0: the scheduler binds a free port and writes its address to the file
    scheduler_file = str(tmp_path / "scheduler.json")
    sched = subprocess.Popen(
        [
            os.path.join(BIN, "dask"),
            "scheduler",
            "--host",
            "127.0.0.1",
            "--port",
            "0",
            "--scheduler-file",
            scheduler_file,
            "--dashboard-address",
            ":0",
        ],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,
    )
    worker = subprocess.Popen(
        [
            os.path.join(BIN, "dask"),
            "worker",
            "--scheduler-file",
            scheduler_file,
            "--nworkers",
            "2",
            "--nthreads",
            "1",
            "--dashboard-address",
            ":0",
        ],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        cwd=ROOT,
        start_new_session=True,
    )
    try:
        from distributed import Client

        def address():
            try:
                with open(scheduler_file) as fh:
                    return json.load(fh)["address"]
            except (OSError, ValueError, KeyError):
                return None

        scheduler = wait_until(address, 120, what="the scheduler's address")

        def two_workers():
            try:
                with Client(scheduler, timeout="2s") as c:
                    return len(c.scheduler_info()["workers"]) == 2
            except OSError:
                return False

        wait_until(two_workers, 120, what="two workers", every=0.5)
        out = tmp_path / "rows.parquet"
        p = _batch(
            [
                str(archive / "run*.nc"),
                "--levels",
                "850,500",
                *_box_args(),
                "--out",
                str(out),
                "--scheduler",
                scheduler,
            ],
            cwd=ROOT,
        )
        assert p.returncode == 0, p.stderr + p.stdout
        assert "verdicts by level and region" in p.stdout
        rows = pd.read_parquet(out)
    finally:
        for proc in (worker, sched):
            os.killpg(proc.pid, signal.SIGTERM)
            proc.wait(timeout=30)
    # 3 files x 3 valid times x 2 levels x 2 boxes
    assert len(rows) == 36
    from app.batch import _band

    assert _band(open_case(str(archive / "run0.nc")), [("b", b) for b in BOXES]) is not None
    assert rows["file_sha256"].str.len().eq(64).all()
    compared = 0
    for path in sorted(archive.glob("run*.nc")):
        case = open_case(str(path))
        for t in range(case.times.size):
            for lev in (850.0, 500.0):
                for b in BOXES:
                    name = f"box {','.join(f'{v:g}' for v in b)}"
                    want = flatten(
                        analyze_case(case, lev, t, b), Task(str(path), None, t, lev, ()), name
                    )
                    got = rows[
                        (rows.file == path.name)
                        & (rows.valid_time == want["valid_time"])
                        & (rows.level_hpa == lev)
                        & (rows.region == name)
                    ]
                    assert len(got) == 1
                    got = got.iloc[0]
                    for k, v in want.items():
                        if isinstance(v, float):
                            assert got[k] == v, (k, got[k], v)  # to the last bit
                        elif k not in ("path",):
                            assert (got[k] if not pd.isna(got[k]) else None) == v, (k, got[k], v)
                    compared += 1
    assert compared == 36


def test_a_run_killed_partway_goes_on_without_gaps_or_repeats(archive, tmp_path):
    many = tmp_path / "many"
    many.mkdir()
    for i in range(3):
        ds, _ = latlon_dataset(
            np.linspace(20, 70, 26),
            np.linspace(-60, 20, 41),
            levels=np.array([1000, 925, 850, 700, 500, 300, 250.0]),
        )
        ds.to_netcdf(many / f"f{i}.nc")
    args = [str(many / "f*.nc"), "--levels", "850,500,300", *_box_args(), "--workers", "2"]
    out = tmp_path / "rows.csv"
    proc = subprocess.Popen(
        [sys.executable, "-m", "app.cli", "batch", *args, "--out", str(out)],
        cwd=ROOT,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,
    )
    parts = tmp_path / "rows.csv.parts"
    wait_until(lambda: len(list(parts.glob("*.json"))) >= 5, 300, what="five pieces done")
    os.killpg(proc.pid, signal.SIGKILL)  # the client and its local cluster, at once
    proc.wait(timeout=60)
    assert 5 <= len(list(parts.glob("*.json"))) < 27  # of 3 files x 3 times x 3 levels
    p = _batch([*args, "--out", str(out)], cwd=ROOT)
    assert p.returncode == 0, p.stderr + p.stdout
    assert "already done" in p.stdout
    rows = pd.read_csv(out)
    keys = rows[["file", "valid_time", "level_hpa", "region"]].apply(tuple, axis=1)
    assert len(rows) == 3 * 3 * 3 * 2 and keys.is_unique
    fresh = tmp_path / "fresh.csv"
    p = _batch([*args, "--out", str(fresh)], cwd=ROOT)
    assert p.returncode == 0
    pd.testing.assert_frame_equal(rows, pd.read_csv(fresh))


def test_a_bad_file_is_one_error_and_the_others_are_analysed(archive, tmp_path):
    folder = tmp_path / "mixed"
    folder.mkdir()
    for f in sorted(archive.glob("run*.nc"))[:2]:
        (folder / f.name).write_bytes(f.read_bytes())
    (folder / "broken.nc").write_bytes(b"this is not a NetCDF file")
    out = tmp_path / "rows.csv"
    p = _batch(
        [
            str(folder / "*.nc"),
            "--levels",
            "500",
            *_box_args(),
            "--out",
            str(out),
            "--workers",
            "1",
        ],
        cwd=ROOT,
    )
    assert p.returncode == 0, p.stderr + p.stdout
    rows = pd.read_csv(out)
    errors = pd.read_csv(tmp_path / "rows.errors.csv")
    assert sorted(set(rows.file)) == ["run0.nc", "run1.nc"] and len(rows) == 2 * 3 * 2
    assert len(errors) == 1 and errors.file.iloc[0].endswith("broken.nc")
    assert "broken.nc" in errors.error.iloc[0]


def test_bad_arguments_are_one_sentence(tmp_path):
    for args, words in (
        (
            ["nothing*.nc", "--levels", "500", "--systems", "--out", str(tmp_path / "a.csv")],
            "no file matches",
        ),
        (
            [
                str(tmp_path / "x.nc"),
                "--levels",
                "500",
                "--systems",
                "--out",
                str(tmp_path / "a.txt"),
            ],
            "must end in .parquet or .csv",
        ),
        (
            [
                str(tmp_path / "x.nc"),
                "--levels",
                "5000",
                "--systems",
                "--out",
                str(tmp_path / "a.csv"),
            ],
            "--levels: a level must lie",
        ),
        (
            [str(tmp_path / "x.nc"), "--levels", "500", "--out", str(tmp_path / "a.csv")],
            "one of the arguments",
        ),
    ):
        (tmp_path / "x.nc").write_bytes(b"")
        p = _batch(args, cwd=ROOT)
        assert p.returncode == 2 and words in p.stderr, (args, p.stderr)
        assert len(p.stderr.strip().splitlines()) == 1


def test_a_result_opens_through_the_archive(tmp_path):
    # the rows analyze makes for a box through the valid times of a sample case, as a batch
    # writes them: the archive page shows their ratios and verdicts for a region and level
    from app.batch import Task, _write_table, flatten
    from app.desk.archive import ArchivePage, load_result
    from balance_core.io import analyze_case, open_case

    path = os.path.join(ROOT, "sample_cases", "ocean_cyclone.nc")
    case = open_case(path)
    rows = []
    for t in range(case.times.size):
        for lev in (500.0, 1000.0):
            rep = analyze_case(case, lev, t, (-52.0, -28.0, 38.0, 56.0))
            rows.append(flatten(rep, Task(path, None, t, lev, ()), "cyclone box"))
    out = str(tmp_path / "r.parquet")
    _write_table(out, rows)
    page = ArchivePage({"r.parquet": load_result(out)})
    assert page.w_region.value == "cyclone box"
    page.w_level.value = 500.0
    data = page.src.data
    assert len(data["t"]) == case.times.size
    assert set(data["verdict"]) == {"Geostrophic"}  # the sample's own verdict at 500 hPa
    assert np.all(data["ratio_geostrophic"] < 0.3)
    assert "5 valid times" in page.counts.object and "Geostrophic: 5 of 5" in page.counts.object
    page.w_level.value = 1000.0
    assert "Frictional" in page.counts.object
    with pytest.raises(ValueError):
        bad = tmp_path / "bad.csv"
        bad.write_text("a,b\n1,2\n")
        load_result(str(bad))


def test_the_archive_keeps_runs_apart_names_them_marks_invented_data_and_links_the_desk(
    tmp_path,
):
    # two runs of the invented sample 14 years apart (the second a copy of the first's rows,
    # moved on), as a batch writes them
    from app.batch import Task, _write_table, flatten
    from app.desk.archive import ArchivePage, load_result
    from balance_core.io import analyze_case, open_case

    path = os.path.join(ROOT, "sample_cases", "ocean_cyclone.nc")
    case = open_case(path)
    assert case.invented  # the sample says so in its attributes
    rows = []
    for t in range(case.times.size):
        rep = analyze_case(case, 500.0, t, (-52.0, -28.0, 38.0, 56.0))
        rows.append(flatten(rep, Task(path, None, t, 500.0, ()), "box", invented=case.invented))
    assert rows[0]["reference_time"] is None  # the sample names no run
    later = []
    for r in rows:
        r2 = dict(r, file="later.nc", path="/elsewhere/later.nc", invented=False)
        moved = pd.Timestamp(r["valid_time"]) + pd.DateOffset(years=14)
        r2["valid_time"] = moved.strftime("%Y-%m-%dT%H:%M:%SZ")
        r2["reference_time"] = "2055-01-18T12:00:00Z"
        later.append(r2)
    out = str(tmp_path / "r.parquet")
    _write_table(out, rows + later)
    page = ArchivePage(
        {"r.parquet": load_result(out)}, desk_cases={"ocean_cyclone.nc": "ocean_cyclone"}
    )
    page.w_level.value = 500.0
    d = page.src.data
    n = case.times.size
    assert len(d["t"]) == 2 * n + 1  # the runs' rows and one break between them
    gap = n
    assert all(np.isnan(d[k][gap]) for k in d if k.startswith("ratio_")) and np.isnan(d["y"][gap])
    assert np.all(np.isfinite(d["ratio_geostrophic"][:gap]))
    assert np.all(np.isfinite(d["ratio_geostrophic"][gap + 1 :]))
    # the hover names each point's file and run
    assert set(d["file"][:gap]) == {"ocean_cyclone.nc"} and set(d["file"][gap + 1 :]) == {
        "later.nc"
    }
    assert d["run"][0] == "file ocean_cyclone.nc"  # a file that names no run is its own
    assert set(d["run"][gap + 1 :]) == {"run 18 Jan 12 UTC"}
    # the invented rows are marked, the others not
    assert set(d["data"][:gap]) == {"invented demo data"} and set(d["data"][gap + 1 :]) == {""}
    assert f"invented demo data: {n} of {2 * n} times" in page.counts.object
    assert f"{2 * n} valid times from 2 files in 2 runs" in page.counts.object
    # a mark of a file the desk holds links there at its time, level and region; the other
    # file is not on this server: no link
    link = d["link"][0]
    assert link.startswith("/?case=ocean_cyclone&level=500&time=")
    assert "region=box%3A-52%2C-28%2C38%2C56" in link
    assert rows[0]["valid_time"].replace(":", "%3A")[:16] in link
    assert set(d["link"][gap + 1 :]) == {""}


def test_the_archive_reads_a_result_written_before_runs_and_invented_marks(tmp_path):
    # no reference time, no invented column: each file is its own series, nothing is marked
    from app.desk.archive import ArchivePage, load_result

    rows = [
        {
            "file": f,
            "valid_time": t,
            "level_hpa": 500.0,
            "region": "r",
            "verdict": "geostrophic",
            "ratio_geostrophic": 0.1,
        }
        for f, t in [
            ("a.nc", "2020-01-01T00:00Z"),
            ("b.nc", "2020-01-01T06:00Z"),
            ("a.nc", "2020-01-01T12:00Z"),
        ]
    ]
    out = tmp_path / "old.csv"
    pd.DataFrame(rows).to_csv(out, index=False)
    page = ArchivePage({"old.csv": load_result(str(out))})
    d = page.src.data
    assert d["run"] == ["file a.nc", "file a.nc", "", "file b.nc"]
    assert "invented" not in page.counts.object and set(d["link"]) == {""}


def test_workers_too_small_for_a_piece_end_the_run_with_a_sentence(archive, tmp_path):
    # 120 MB per worker is less than a worker needs to start: dask restarts them until it
    # gives up; the run must end (never wait for ever) with one sentence, or report the
    # pieces as not analyzed -- and leave nothing half-written
    env = dict(os.environ, BALANCE_DESK_BATCH_NO_WORKER_S="20")
    out = tmp_path / "rows.csv"
    p = _batch(
        [
            str(archive / "run0.nc"),
            "--levels",
            "500",
            *_box_args(),
            "--out",
            str(out),
            "--workers",
            "1",
            "--memory-limit",
            "120MB",
        ],
        cwd=ROOT,
        env=env,
    )
    if p.returncode == 2:
        last = p.stderr.strip().splitlines()[-1]
        assert "no worker has been left" in last and "run again to go on" in last
    else:
        assert p.returncode == 0, p.stderr
        errors = pd.read_csv(tmp_path / "rows.errors.csv")
        assert (errors.error.str.startswith("not analyzed")).all() and len(errors) > 0
    assert not list((tmp_path / "rows.csv.parts").glob(".*.tmp"))


def test_a_run_in_this_process_leaves_its_environment_as_it_was(archive, tmp_path, monkeypatch):
    """A LocalCluster's nanny sets its workers' OMP_NUM_THREADS=1 (and more) in the process
    that starts them, for good; run_batch puts them back, so that a program calling it
    keeps its band pool on every core afterwards (balance_core.budget.band_threads)."""
    from app.batch import run_batch, worker_environment

    monkeypatch.delenv("OMP_NUM_THREADS", raising=False)
    monkeypatch.setenv("MALLOC_TRIM_THRESHOLD_", "12345")
    before_seed = os.environ.get("PYTHONHASHSEED")
    assert worker_environment()["OMP_NUM_THREADS"] == "1"
    out = str(tmp_path / "rows.csv")
    counts = run_batch(
        [str(archive / "run0.nc")],
        [500.0],
        out,
        boxes=[("a", BOXES[0])],
        workers=1,
        say=lambda *a: None,
        err=lambda *a: None,
    )
    assert counts["rows"] == 3 and counts["errors"] == 0, counts  # its 3 valid times
    assert "OMP_NUM_THREADS" not in os.environ
    assert os.environ["MALLOC_TRIM_THRESHOLD_"] == "12345"
    assert os.environ.get("PYTHONHASHSEED") == before_seed
