"""Every input fault gets exit status 2 and one sentence; nothing else gets a traceback.

A table of the faults an outside probe found (each once exit 1 "unexpected error", or a
silent wrong answer), run through the real command in a subprocess where the process
matters (exit status, stderr, resident memory, time), in-process where a fault can only
be simulated (a permission error, as root).
"""

import os
import socket
import subprocess
import sys
import time

import numpy as np
import pytest

from app.cli import main
from testkit.makedata import latlon_dataset
from testkit.serving import SERVING, own_store

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
LAT = np.arange(60.0, 39.9, -2.0)
LON = np.arange(-20.0, 20.1, 2.0)


def run(*args, timeout=120, env=None):
    r = subprocess.run(
        [sys.executable, "-m", "app.cli", *args],
        capture_output=True,
        text=True,
        timeout=timeout,
        cwd=ROOT,
        env=own_store(env) if args[:1] == ("serve",) else env,
    )
    return r.returncode, r.stdout, r.stderr


@pytest.fixture
def here(capsys):
    """The command run in this process: (exit status, stdout, stderr). The same ``main``
    the console script calls; the tests that need a process of its own use :func:`run`."""

    def call(*args):
        code = main(list(args))
        out, err = capsys.readouterr()
        return code, out, err

    return call


def good(tmp, name="good.nc"):
    ds, _ = latlon_dataset(LAT, LON)
    path = os.path.join(tmp, name)
    ds.to_netcdf(path)
    return path


def one_sentence(err):
    assert err.count("\n") == 1 and "Traceback" not in err, err


def mixed_grib(tmp):
    from testkit.gribwrite import write_grib2
    from testkit.makedata import truth

    def fields(lat, lon):
        la, lo = np.meshgrid(lat, lon, indexing="ij")
        out = {k: np.empty((1, 1) + la.shape) for k in ("gh", "u", "v")}
        out["gh"][0, 0], out["u"][0, 0], out["v"][0, 0] = truth(la, lo, 500.0, 0.0)[:3]
        return out

    path = os.path.join(tmp, "mixed.grib2")
    a = dict(kind="regular_ll", lat0=40.0, lat1=60.0, lon0=340.0, lon1=20.0, dlat=2.0, dlon=2.0)
    b = dict(kind="regular_ll", lat0=40.0, lat1=60.0, lon0=340.0, lon1=20.0, dlat=1.0, dlon=1.0)
    fa, fb = (
        fields(np.arange(40.0, 60.1, 2), np.arange(-20.0, 20.1, 2)),
        fields(np.arange(40.0, 60.1, 1), np.arange(-20.0, 20.1, 1)),
    )
    write_grib2(path, a, {"gh": fa["gh"]}, [500.0], [(20400203, 0)], uv_relative=False)
    write_grib2(
        path,
        b,
        {"u": fb["u"], "v": fb["v"]},
        [500.0],
        [(20400203, 0)],
        uv_relative=False,
        mode="ab",
    )
    return path


def time_on_another_grid(tmp):
    """The same three fields at 00 UTC on a 2-degree grid and at 06 UTC on a 1-degree one:
    before, the 06 UTC time was dropped without a word (exit 0, one time)."""
    from testkit.gribwrite import write_grib2
    from testkit.makedata import truth

    path = os.path.join(tmp, "two_grids.grib2")
    for k, (step, hour) in enumerate(((2.0, 0), (1.0, 6))):
        la, lo = np.meshgrid(
            np.arange(40.0, 60.1, step), np.arange(-20.0, 20.1, step), indexing="ij"
        )
        f = truth(la, lo, 500.0, 0.0)
        grid = dict(
            kind="regular_ll", lat0=40.0, lat1=60.0, lon0=340.0, lon1=20.0, dlat=step, dlon=step
        )
        write_grib2(
            path,
            grid,
            {n: f[i][None, None] for i, n in enumerate(("gh", "u", "v"))},
            [500.0],
            [(20400203, hour)],
            uv_relative=False,
            mode="ab" if k else "wb",
        )
    return path


def _zarr(tmp, name):
    import warnings

    ds, _ = latlon_dataset(LAT, LON)
    path = os.path.join(tmp, name)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the writer's remark on consolidated metadata
        ds.to_zarr(path)
    return path


def _damaged(files, data):
    hit = 0
    for f in files:
        if os.path.isfile(f):
            with open(f, "wb") as fh:
                fh.write(data)
            hit += 1
    assert hit, "nothing was damaged"


def zarr_damaged_chunk(tmp):
    """The height's chunks overwritten with bytes no codec decodes (before: exit 1)."""
    import glob

    path = _zarr(tmp, "chunk.zarr")
    names = ("zarr.json", ".zarray", ".zattrs")
    _damaged(
        [
            f
            for f in glob.glob(os.path.join(path, "height", "**"), recursive=True)
            if os.path.basename(f) not in names
        ],
        b"not a compressed chunk" * 4,
    )
    return path


def zarr_damaged_store(tmp):
    import glob

    path = _zarr(tmp, "meta.zarr")
    pattern = os.path.join(path, "**", "*")
    _damaged(
        [
            f
            for f in glob.glob(pattern, recursive=True)
            if os.path.basename(f).startswith((".z", "zarr.json"))
        ],
        b"{not json",
    )
    return path


@pytest.mark.parametrize(
    "fault, build, extra, fragment",
    [
        ("one_point_no_latitude", lambda t: _one_point(t), [], "has no horizontal grid"),
        ("grib_fields_of_mixed_sizes", mixed_grib, [], "is not on the height's grid"),
        ("grib_time_on_another_grid", time_on_another_grid, [], "on two grids"),
        ("zarr_damaged_chunk", zarr_damaged_chunk, [], "cannot be decoded: damaged or truncated"),
        ("zarr_damaged_store", zarr_damaged_store, [], "cannot be read as Zarr: damaged"),
        ("time_superscript_two", good, ["--time", "\u00b2"], "neither an index nor an ISO 8601"),
        ("smoothing_1e308", good, ["--smooth", "1e308"], "exceeds the size of the domain"),
        ("smoothing_1e9", good, ["--smooth", "1e9"], "exceeds the size of the domain"),
        ("member_without_members", good, ["--member", "5"], "has no ensemble member dimension"),
        ("member_mean_without_members", good, ["--member", "mean"], "no member can be averaged"),
        ("min_lat_95", good, ["--min-lat", "95"], "--min-lat must lie from 0 to 60"),
        ("min_lat_negative", good, ["--min-lat", "-5"], "--min-lat must lie from 0 to 60"),
        ("box_longitude_1e300", good, ["--box", "1e300,10,40,50"], "within -360 to 360"),
        ("box_longitude_nan", good, ["--box", "nan,10,40,50"], "finite"),
        ("memory_budget_nonsense", good, ["--memory-budget", "lots"], "must be a size"),
    ],
)
def test_input_faults_exit_2_with_one_sentence(tmp_path, here, fault, build, extra, fragment):
    path = build(str(tmp_path))
    code, out, err = here("analyze", path, "--level", "500", *extra)
    assert code == 2, (fault, code, err)
    assert fragment in err, err
    one_sentence(err)


def _one_point(tmp):
    ds, _ = latlon_dataset(LAT, LON)
    path = os.path.join(tmp, "one.nc")
    ds.isel(latitude=0, longitude=0).to_netcdf(path)
    return path


def test_a_fault_in_a_process_of_its_own_exits_2_with_one_sentence(tmp_path):
    # the exit status and stderr of the real process, for one fault of the table above
    code, out, err = run("analyze", good(str(tmp_path)), "--level", "500", "--min-lat", "95")
    assert code == 2 and "--min-lat must lie from 0 to 60" in err, (code, err)
    one_sentence(err)


def test_a_reader_that_goes_away_ends_the_command_quietly(tmp_path, capsys, monkeypatch):
    """``analyze ... | head``: the pipe closes under the command (was: "unexpected error
    (BrokenPipeError)")."""
    import io

    class Gone(io.StringIO):
        def write(self, text):
            raise BrokenPipeError(32, "Broken pipe")

    path = good(str(tmp_path))
    monkeypatch.setattr(sys, "stdout", Gone())
    code = main(["analyze", path, "--level", "500", "--format", "csv"])
    err = capsys.readouterr().err
    assert code == 1 and err == "", err


def test_a_repeated_360_degree_column_is_dropped_not_fatal(tmp_path, here):
    ds, _ = latlon_dataset(np.arange(85.0, -85.1, -10.0), np.arange(0.0, 360.1, 10.0))
    path = str(tmp_path / "cyclic.nc")
    ds.to_netcdf(path)
    code, out, err = here("analyze", path, "--level", "500", "--format", "json")
    assert code == 0, err
    assert "repeated (cyclic) last longitude column" in out


def test_an_unreadable_file(tmp_path, capsys, monkeypatch):
    # As root every file can be read, so the permission error is simulated where the reader
    # opens the file.
    import builtins

    path = good(str(tmp_path), "secret.nc")
    real = builtins.open

    def denied(p, *a, **k):
        if str(p) == path:
            raise PermissionError(13, "Permission denied", path)
        return real(p, *a, **k)

    monkeypatch.setattr(builtins, "open", denied)
    assert main(["analyze", path, "--level", "500"]) == 2
    err = capsys.readouterr().err
    assert "secret.nc: cannot be read: permission denied" in err
    one_sentence(err)


def test_a_file_name_that_is_not_utf8(tmp_path):
    data = open(good(str(tmp_path)), "rb").read()
    raw = os.path.join(os.fsencode(str(tmp_path)), b"caf\xe9.nc")
    with open(raw, "wb") as fh:
        fh.write(data)
    r = subprocess.run(
        [sys.executable.encode(), b"-m", b"app.cli", b"analyze", raw, b"--level", b"500"],
        capture_output=True,
        cwd=ROOT,
        timeout=120,
    )
    err = r.stderr.decode("utf-8", "replace")
    assert r.returncode == 2 and "not valid UTF-8" in err and "damaged" not in err, err
    assert "caf\\xe9.nc" in err
    one_sentence(err)


def test_a_newline_in_a_file_name_gives_one_line(tmp_path, here):
    path = good(str(tmp_path), "two\nlines.nc")
    code, _, err = here("analyze", path, "--level", "600")
    assert code == 2 and "two\\nlines.nc" in err and "has no 600 hPa level" in err
    one_sentence(err)


def test_a_time_with_a_zone_offset_gives_no_warning(tmp_path):
    # a process of its own: a warning filter of the test run must not hide a warning
    code, out, err = run(
        "analyze",
        good(str(tmp_path)),
        "--level",
        "500",
        "--time",
        "2040-02-03T07:00+01:00",
        "--format",
        "json",
    )
    assert code == 0 and err == "", err
    assert '"valid_time": "2040-02-03T06:00:00Z"' in out


def test_a_file_declaring_huge_dimensions_is_refused_from_its_metadata(tmp_path):
    # A few hundred kilobytes declaring a 100000 x 100000 grid whose chunks were never
    # written: refused from its metadata, without reading it.
    from testkit.makedata import huge_declaring_netcdf

    path = str(tmp_path / "huge.nc")
    huge_declaring_netcdf(path)
    assert os.path.getsize(path) < 1_000_000
    # A fresh parent runs the command and reports its only child's peak resident memory
    # (Linux reports kB); RUSAGE_CHILDREN of this test process would include every child
    # any earlier test started.
    probe = (
        "import resource, subprocess, sys; "
        "r = subprocess.run(sys.argv[1:], capture_output=True, text=True); "
        "sys.stdout.write(str(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)); "
        "sys.stderr.write(r.stderr); sys.exit(r.returncode)"
    )
    r = subprocess.run(
        [
            sys.executable,
            "-c",
            probe,
            sys.executable,
            "-m",
            "app.cli",
            "analyze",
            path,
            "--level",
            "500",
        ],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=120,
    )
    code, err, peak_kb = r.returncode, r.stderr, int(r.stdout)
    assert code == 2 and "declares a 100000 x 100000 grid" in err and "memory" in err, err
    one_sentence(err)
    # the interpreter and its libraries; reading the declared grid would need 40 GB per field
    assert peak_kb < 400 * 1024, peak_kb


def test_cases_lists_a_bad_file_and_goes_on(tmp_path, here):
    good(str(tmp_path), "fine.nc")
    (tmp_path / "broken.nc").write_bytes(b"not a file at all")
    code, out, err = here("cases", "--dir", str(tmp_path))
    assert code == 0, err
    assert "broken.nc: could not be read" in out and "fine" in out


def test_files_with_the_same_name_do_not_hide_one_another(tmp_path):
    from app.library import CaseLibrary

    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    lib = CaseLibrary([good(str(tmp_path / "a"), "run.nc"), good(str(tmp_path / "b"), "run.nc")])
    assert lib.names == ["run", "run-2"] and lib.good == ["run", "run-2"]


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["--port", "99999"], "--port must lie from 1 to 65535"),
        (["--port", "-1"], "--port must lie from 1 to 65535"),
        (["--host", "no-such-host.invalid"], "cannot be used"),
    ],
)
def test_serve_refuses_a_bad_address(args, fragment):
    code, out, err = run("serve", *args, timeout=60)
    assert code == 2 and fragment in err, (code, out, err)
    assert "serving" not in out
    one_sentence(err)


def test_serve_refuses_a_port_in_use():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        s.listen(1)
        port = s.getsockname()[1]
        code, out, err = run("serve", "--port", str(port), timeout=120)
    assert code == 2 and f"cannot listen on 127.0.0.1:{port}" in err, (code, out, err)
    assert "serving" not in out
    one_sentence(err)


def test_serve_refuses_when_no_case_loads(tmp_path):
    (tmp_path / "broken.nc").write_bytes(b"not a file at all")
    code, out, err = run("serve", "--cases", str(tmp_path), "--port", "0")
    assert code == 2 and "none of the cases could be loaded" in err
    assert "not serving broken" in out and "serving 0" not in out


def test_serve_says_which_cases_failed_and_serves_the_others(tmp_path):
    good(str(tmp_path), "fine.nc")
    (tmp_path / "broken.nc").write_bytes(b"not a file at all")
    proc = subprocess.Popen(
        [sys.executable, "-m", "app.cli", "serve", "--cases", str(tmp_path), "--port", "0"],
        stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT,
        text=True,
        cwd=ROOT,
        env=own_store(),
    )
    lines = []
    try:
        t0 = time.time()
        while time.time() - t0 < 120:
            line = proc.stdout.readline()
            if not line:
                break
            lines.append(line)
            if "serving" in line and "not serving" not in line:
                break
        # "serving" comes only once the port listens, and says which port the system gave
        port = int(SERVING.search(lines[-1]).group(1))
        with socket.create_connection(("127.0.0.1", port), timeout=5):
            pass
    finally:
        proc.terminate()
        proc.wait(timeout=30)
    text = "".join(lines)
    assert "not serving broken: broken.nc" in text
    assert "serving 1 case(s)" in text and "(fine)" in text


def test_a_named_pipe_is_refused_with_one_sentence_never_waited_on(tmp_path):
    """A pipe called *.nc blocks whoever opens it until someone writes: before, analyze,
    cases --dir and batch hung there with no message. The subprocess timeouts below are
    bounds for a hang, not speed goals."""
    good(str(tmp_path), "fine.nc")
    pipe = str(tmp_path / "pipe.nc")
    os.mkfifo(pipe)
    code, out, err = run("analyze", pipe, "--level", "500", timeout=120)
    assert code == 2 and "pipe.nc" in err and "not a regular file" in err, (code, err)
    code, out, err = run("cases", "--dir", str(tmp_path), timeout=120)
    assert code == 0 and "pipe.nc: could not be read" in out and "fine" in out, (out, err)
    assert "not a regular file" in out
    # the batch plans each file on a worker (app.batch.plan_file): the pipe is an error row
    from app.batch import plan_file

    plan = plan_file(pipe, [500.0], boxes=(("b", (-10.0, 10.0, 44.0, 56.0)),))
    assert plan["tasks"] == [] and plan["errors"][0]["file"] == "pipe.nc"
    assert "not a regular file" in plan["errors"][0]["error"]
