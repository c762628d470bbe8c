"""The same core over whole archives: ``balance-desk batch`` on dask.distributed.

The work is split into tasks of one (file, member, valid time, level). A task runs on a
worker: it opens its file lazily (the opened case is kept per worker process, so the
tasks of one file share it), computes the level's diagnostics once -- for boxes, on the
band of rows they cover and a halo (:func:`_band`), which gives the same numbers as the
whole grid for a fraction of its memory -- and the report of every region (the boxes
given, or the systems found in that field, on the whole grid), and returns a small
table: one flat row per region (:func:`flatten`). The client writes each task's rows to a
part file as it completes (``RESULT.parts/``); a run started again with the same
arguments skips the pieces already there, so an interrupted run goes on where it
stopped. At the end the parts are combined, sorted, into the result (Parquet or CSV),
failures into ``RESULT.errors.csv`` (file, sentence), and a summary of verdicts by
level and region is printed.

Every row is what ``balance-desk analyze`` reports for that slice and region (the same
functions, the same numbers to the last bit), however many workers run it.
"""

from __future__ import annotations

import dataclasses
import glob
import hashlib
import json
import math
import os
import sys
import time
from typing import TypedDict

from balance_core import settings

from .outside import csv_frame

__all__ = [
    "Task",
    "plan_file",
    "plan_tasks",
    "run_task",
    "flatten",
    "run_batch",
    "read_boxes",
    "BatchError",
    "file_checksum",
    "combine",
    "local_cluster",
]


#: columns that say where a row comes from, first in every result
KEY_COLUMNS = ("file", "member", "valid_time", "level_hpa", "region")


class BatchError(Exception):
    """Bad input to a batch run: one sentence, exit status 2."""


class RunError(TypedDict):
    """One row of a run's errors table (RESULT.errors.csv): a file that could not be
    opened (no member, time or level), or a piece that failed or was lost."""

    file: str  # the file's name, without its folder
    member: str | None
    time_index: int | None
    level_hpa: float | None
    error: str


#: the errors table's columns, in order
ERROR_COLUMNS = tuple(RunError.__annotations__)


def run_error(path, task, sentence) -> RunError:
    """The error row of ``path`` (``task`` None: the whole file) saying ``sentence``."""
    return {
        "file": os.path.basename(path),
        "member": None if task is None else str(task.member),
        "time_index": None if task is None else task.time_index,
        "level_hpa": None if task is None else task.level_hpa,
        "error": sentence,
    }


@dataclasses.dataclass(frozen=True)
class Task:
    path: str
    member: object  # an index, "mean", or None for a file without members
    time_index: int
    level_hpa: float
    regions: tuple  # ((name, (W, E, S, N)), ...) or () for the systems found
    systems: bool = False
    min_lat: float = 10.0

    @property
    def key(self) -> str:
        """A name for the task's part file: the same for the same piece of work."""
        text = json.dumps(
            [
                os.path.abspath(self.path),
                str(self.member),
                self.time_index,
                self.level_hpa,
                self.regions,
                self.systems,
                self.min_lat,
            ]
        )
        return hashlib.sha1(text.encode()).hexdigest()[:20]


def expand(patterns) -> list:
    """Files of the given paths and globs, sorted, each once."""
    out = []
    for p in patterns:
        hits = sorted(glob.glob(p)) if any(c in p for c in "*?[") else [p]
        if not hits:
            raise BatchError(f"balance-desk batch: no file matches {p!r}")
        out += hits
    seen, files = set(), []
    for f in out:
        a = os.path.abspath(f)
        if a not in seen:
            seen.add(a)
            files.append(f)
    return files


def read_boxes(path) -> list:
    """Named boxes from a YAML file: ``name: [west, east, south, north]`` per line, or a
    list of ``{name: ..., box: [...]}``."""
    import yaml

    from .inputs import InputError, parse_box  # the same rules as --box and the page

    try:
        with open(path, encoding="utf-8") as fh:
            data = yaml.safe_load(fh)
    except (OSError, yaml.YAMLError) as exc:
        raise BatchError(
            f"balance-desk batch: the boxes file {path} cannot be read "
            f"({getattr(exc, 'strerror', None) or exc})"
        ) from None
    items = (
        data.items()
        if isinstance(data, dict)
        else [(d.get("name"), d.get("box")) for d in (data or []) if isinstance(d, dict)]
    )
    boxes = []
    for name, box in items:
        try:
            b = parse_box(box if isinstance(box, (list, tuple)) else str(box))
        except InputError as exc:
            raise BatchError(f"balance-desk batch: the box {name!r} in {path}: {exc}") from None
        boxes.append((str(name), tuple(b)))
    if not boxes:
        raise BatchError(f"balance-desk batch: {path} holds no boxes")
    return boxes


#: cases a worker keeps open: the tasks of a file run one after another on the worker that
#: planned it, so one is enough; each costs its grid's metrics and the reader's buffers
#: (about 180 MB at 0.25 degree, global)
CASES_KEPT = 1


def _open(path, member, min_lat):
    """The case of a file, opened once per worker process (the last CASES_KEPT kept)."""
    from balance_core.io import open_case

    key = (os.path.abspath(path), str(member), float(min_lat))
    cache = _open.__dict__.setdefault("cache", {})
    if key not in cache:
        while len(cache) >= CASES_KEPT:
            cache.pop(next(iter(cache)))
        cache[key] = open_case(path, member=member, min_lat=min_lat)
    return cache[key]


class FilePlan(TypedDict):
    """One file's part of a run (:func:`plan_file`)."""

    tasks: list[Task]
    errors: list[RunError]
    checksum: str | None  # SHA-256 of the file, None when it could not be opened


def plan_file(path, levels, *, boxes=(), systems=False, member="0", min_lat=10.0) -> FilePlan:
    """One file's part of a run: {"tasks": [...], "errors": [...], "checksum": str or None}.

    The file is opened through the worker's case cache with the member its first task
    asks for, so that task finds it open when it runs on the same worker. A file that
    cannot be opened gives one error (file, sentence) and no task.
    """
    import pyproj  # noqa: F401

    from balance_core.io import CaseError, open_case

    def failed(sentence) -> FilePlan:
        return {"tasks": [], "checksum": None, "errors": [run_error(path, None, sentence)]}

    members: list[int | str | None]
    try:
        if member in ("all", "mean"):
            case = open_case(path, min_lat=min_lat)
            members = list(range(case.member_count)) if member == "all" else ["mean"]
        else:
            members = [int(member)]
            case = _open(path, members[0], min_lat)
            if case.member_count == 1 and members == [0]:
                members = [None]  # a file without members: no member to choose
        have = [float(p) / 100 for p in case.levels_pa]
        for lev in levels:
            if not any(abs(h - lev) < 1e-6 for h in have):
                raise CaseError(
                    f"has no {lev:g} hPa level (it has {', '.join(f'{h:g}' for h in have)})", path
                )
        tasks = [
            Task(path, m, t, float(lev), tuple(boxes), systems, min_lat)
            for m in members
            for t in range(case.times.size)
            for lev in levels
        ]
    except CaseError as exc:
        return failed(str(exc))
    except Exception as exc:  # noqa: BLE001 - a file that breaks the reader
        return failed(f"{os.path.basename(path)}: could not be read ({type(exc).__name__})")
    return {"tasks": tasks, "errors": [], "checksum": file_checksum(path)}


def plan_tasks(
    files, levels, *, boxes=(), systems=False, member="0", min_lat=10.0, errors=None
) -> list:
    """The tasks of a run, in this process: every (file, member, valid time, level). A file
    that cannot be opened goes to ``errors`` (a list of dicts with its sentence) and the
    others are planned; without ``errors`` it raises BatchError."""
    tasks = []
    for path in files:
        plan = plan_file(path, levels, boxes=boxes, systems=systems, member=member, min_lat=min_lat)
        if plan["errors"] and errors is None:
            raise BatchError(plan["errors"][0]["error"])
        tasks += plan["tasks"]
        if errors is not None:
            errors += plan["errors"]
    return tasks


def _band(case, regions):
    """(j0, j1): the rows of the case the regions' boxes need
    (:func:`balance_core.io.analysis.band_rows`); None to compute the whole grid (the band
    would be most of it, or a box is not valid: analyze_case says what is wrong with it)."""
    from balance_core.io.analysis import band_rows
    from balance_core.region import Region

    try:
        masks = [Region.box(*box).mask(case.grid) for _, box in regions]
    except ValueError:
        return None
    return band_rows(case.grid, masks)


def run_task(task: Task) -> dict:
    """One piece of work, on a worker: {"rows": [...], "error": None or a sentence}."""
    import pyproj  # noqa: F401

    from balance_core.io import CaseError, analyze_case, analyze_systems, diagnostics_for
    from balance_core.io.analysis import region_of

    try:
        # (None, a file without members, opens as its only member: the case the plan opened)
        case = _open(task.path, 0 if task.member is None else task.member, task.min_lat)
        k = case.level_index(task.level_hpa)
        # a box this file's grid does not hold costs its own rows only, and is said with the
        # whole grid's extent (checked before the grid is cut to the boxes' band)
        regions, problems = [], []
        for name, box in task.regions:
            try:
                region_of(case, box)
                regions.append((name, box))
            except CaseError as exc:
                problems.append(f"region {name}: {exc}")
        if not task.systems and not regions:
            return {"rows": [], "error": "; ".join(problems)}
        band = None if task.systems else _band(case, regions)
        if band is not None:
            case = case.rows(*band)
        diag = diagnostics_for(case, k, task.time_index)
        rows = []
        if task.systems:
            out = analyze_systems(case, task.level_hpa, task.time_index, diagnostics=diag)
            for i, s in enumerate(out["systems"], 1):
                rows.append(
                    flatten(s["report"], task, f"{s['kind']} {i}", system=s, invented=case.invented)
                )
        else:
            for name, box in regions:
                try:
                    rep = analyze_case(case, task.level_hpa, task.time_index, box, diagnostics=diag)
                except CaseError as exc:
                    problems.append(f"region {name}: {exc}")
                    continue
                rows.append(flatten(rep, task, name, invented=case.invented))
        return {"rows": rows, "error": "; ".join(problems) or None}
    except CaseError as exc:
        return {"rows": [], "error": str(exc)}
    except Exception as exc:  # noqa: BLE001 - the run goes on; the sentence says what broke
        return {
            "rows": [],
            "error": f"{os.path.basename(task.path)}: could not be analyzed "
            f"({type(exc).__name__}: {exc})",
        }


def _f(x):
    if x is None:
        return None
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def flatten(rep: dict, task: Task, region: str, system=None, invented: bool = False) -> dict:
    """One row of a report, with stable column names (see the README's table);
    ``invented``: the file is invented demo data (balance_core.io.Case.invented)."""
    from balance_core import __version__ as core_version

    row = {
        "file": os.path.basename(task.path),
        "path": os.path.abspath(task.path),
        "invented": bool(invented),
        "member": "" if task.member is None else str(task.member),
        "valid_time": rep.get("valid_time"),
        "reference_time": rep.get("reference_time"),
        "lead_time_h": _f(rep.get("lead_time_h")),
        "level_hpa": _f(rep.get("level_hpa")),
        "region": region,
    }
    box = rep.get("box") or {}
    for k in ("west", "east", "south", "north"):
        row[f"region_{k}"] = _f(box.get(k))
    if system is not None:
        row.update(
            {
                "system_kind": system["kind"],
                "system_lon": _f(system["lon"]),
                "system_lat": _f(system["lat"]),
                "system_intensity": _f(system["intensity"]),
            }
        )
    v = rep.get("verdict") or {}
    row.update(
        {
            "verdict": v.get("balance"),
            "verdict_text": v.get("text"),
            "points": rep.get("points"),
            "region_points": rep.get("region_points"),
            "valid_share": _f(rep.get("valid_share")),
        }
    )
    for k, x in (rep.get("balances") or {}).items():
        row[f"ratio_{k}"] = _f(x)
    for k, x in (rep.get("shares") or {}).items():
        row[f"share_{k}"] = _f(x)
    for t in (rep.get("terms") or []) + (rep.get("derived") or []):
        row[f"term_{t['name']}"] = _f(t["magnitude"])
        row[f"estimate_{t['name']}"] = _f(t.get("estimate"))
    for k, x in (rep.get("numbers") or {}).items():
        row[f"number_{k}"] = _f(x)
    for k, x in (rep.get("winds") or {}).items():
        row[f"wind_{k}"] = _f(x)
    parts = rep.get("ageostrophic_parts") or {}
    row["ageostrophic_rms"] = _f(parts.get("measured_rms"))
    for k, p in (parts.get("parts") or {}).items():
        row[f"ageostrophic_{k}_rms"] = _f(p.get("speed_rms"))
    res = rep.get("resolution") or {}
    row["grid_spacing_km"] = _f(res.get("grid_spacing_km"))
    row["flow_length_km"] = _f(res.get("flow_length_km"))
    row["resolved"] = res.get("resolved")
    row["near_ground"] = (rep.get("ground") or {}).get("near")
    row["sources"] = json.dumps(rep.get("sources") or {}, sort_keys=True, default=str)
    row["balance_desk_version"] = core_version
    return row


def file_checksum(path) -> str:
    """SHA-256 of a file (for the rows' provenance)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 22), b""):
            h.update(chunk)
    return h.hexdigest()


# -- parts, combining ------------------------------------------------------------------------


def _parts_dir(out) -> str:
    return out + ".parts"


def _write_part(folder, task, result):
    """Write one task's rows (or error) atomically: a part is there whole or not at all."""
    tmp = os.path.join(folder, f".{task.key}.tmp")
    with open(tmp, "w", encoding="utf-8") as fh:
        json.dump({"task": dataclasses.asdict(task), **result}, fh, default=str)
    os.replace(tmp, os.path.join(folder, f"{task.key}.json"))


def combine(out, tasks, checksums) -> tuple:
    """The parts of the planned tasks, sorted, into the result; returns (rows, errors)."""
    folder = _parts_dir(out)
    rows, errors = [], []
    for task in tasks:
        path = os.path.join(folder, f"{task.key}.json")
        if not os.path.exists(path):
            continue
        with open(path, encoding="utf-8") as fh:
            part = json.load(fh)
        if part.get("error"):
            errors.append(run_error(task.path, task, part["error"]))
        for r in part["rows"]:
            r["file_sha256"] = checksums.get(r["path"])
            rows.append(r)
    rows.sort(
        key=lambda r: (
            r["file"],
            r["member"],
            r["valid_time"] or "",
            r["level_hpa"] or 0,
            r["region"],
        )
    )
    return rows, errors


def _write_table(path, rows):
    import pandas as pd

    df = pd.DataFrame(rows)
    cols = [c for c in KEY_COLUMNS if c in df.columns] + [
        c for c in df.columns if c not in KEY_COLUMNS
    ]
    df = df[cols] if len(df.columns) else df
    if path.endswith(".parquet"):
        df.to_parquet(path, index=False)
    else:  # outside text (a file named "=...") never a spreadsheet formula
        csv_frame(df).to_csv(path, index=False)
    return df


def summary(rows) -> str:
    """Verdict counts by level and region."""
    counts: dict[tuple, dict[str, int]] = {}
    for r in rows:
        key = (r["level_hpa"], r["region"] if not r.get("system_kind") else r["system_kind"])
        counts.setdefault(key, {}).setdefault(r["verdict"], 0)
        counts[key][r["verdict"]] += 1
    lines = ["verdicts by level and region:"]
    for (lev, reg), c in sorted(counts.items(), key=lambda kv: (-(kv[0][0] or 0), kv[0][1])):
        total = sum(c.values())
        parts = ", ".join(
            f"{k} {n} ({100 * n / total:.0f} %)"
            for k, n in sorted(c.items(), key=lambda kv: -kv[1])
        )
        lines.append(f"  {lev:g} hPa, {reg}: {total} rows: {parts}")
    return "\n".join(lines)


# -- the run ---------------------------------------------------------------------------------

#: glibc's mmap threshold in the workers of a local cluster (see :func:`local_cluster`)
MMAP_THRESHOLD = 64 * 2**20


def local_cluster(n_workers, memory_limit=None):
    """A LocalCluster of ``n_workers`` processes of one thread each.

    dask sets MALLOC_TRIM_THRESHOLD_ in its workers (so that freed memory goes back to the
    system); glibc then stops raising its mmap threshold, and every array above 128 kB --
    a 0.25-degree global field is 8 MB -- is mapped afresh and faulted in page by page:
    measured here, a piece took 0.93 s on such a worker against 0.43 s called directly
    (1.07 s directly with the same setting; 0.64 s with the mmap threshold fixed). Fixing
    the mmap threshold at 64 MB keeps such arrays on the heap, which is still trimmed as
    dask wants (the same peak memory, measured).
    dask's statistical profiler, which samples each worker thread every 10 ms for the
    dashboard's profile page, is turned off: it cost about 8 % of a piece here.
    """
    import dask
    from distributed import LocalCluster

    with dask.config.set(
        {
            "distributed.nanny.pre-spawn-environ.MALLOC_MMAP_THRESHOLD_": MMAP_THRESHOLD,
            "distributed.worker.profile.enabled": False,
        }
    ):
        return LocalCluster(
            n_workers=n_workers,
            threads_per_worker=1,
            processes=True,
            memory_limit="auto" if memory_limit is None else memory_limit,
            dashboard_address=":0",
        )


def worker_environment() -> dict:
    """The environment variables a local cluster's worker starts with: dask's own
    (``distributed.nanny.pre-spawn-environ``: one thread for OpenMP and BLAS, the trim
    threshold) and the mmap threshold of :func:`local_cluster`; as strings."""
    import dask
    import distributed  # noqa: F401 - its settings join dask's config on import

    env = dict(dask.config.get("distributed.nanny.pre-spawn-environ", {}) or {})
    env["MALLOC_MMAP_THRESHOLD_"] = MMAP_THRESHOLD
    return {str(k): str(v) for k, v in env.items()}


def _not_analysed(path, task, exc, what="the workers running it died") -> RunError:
    return run_error(
        path,
        task,
        f"not analyzed: {what} ({type(exc).__name__}; a worker over its memory "
        "limit is restarted by dask); run again to try it again",
    )


def run_batch(
    files,
    levels,
    out,
    *,
    boxes=(),
    systems=False,
    workers=None,
    scheduler=None,
    memory_limit=None,
    member="0",
    min_lat=10.0,
    say=print,
    err=None,
) -> dict:
    """Run a batch (see the module docstring); returns counts and the output paths.

    The files are planned on the workers (:func:`plan_file`, which opens each once and
    takes its checksum); the pieces of a file are then sent to the worker that opened it,
    before the next file is planned, so that they find it open.
    """
    from distributed import Client

    err = err or (lambda text: print(text, file=sys.stderr, flush=True))
    if not (out.endswith(".parquet") or out.endswith(".csv")):
        raise BatchError("balance-desk batch: --out must end in .parquet or .csv")
    files = expand(files)
    folder = _parts_dir(out)
    os.makedirs(folder, exist_ok=True)
    cluster = None
    # a LocalCluster's nanny sets its workers' variables (OMP_NUM_THREADS=1 ...) in this
    # process before it starts each worker, and leaves them (PYTHONHASHSEED too): put them
    # back at the end
    environ = {k: os.environ.get(k) for k in [*worker_environment(), "PYTHONHASHSEED"]}
    if scheduler:
        client = Client(scheduler, timeout="30s")
    else:
        cluster = local_cluster(workers or max(1, os.cpu_count() or 1), memory_limit)
        client = Client(cluster)
    say(f"balance-desk batch: dask dashboard at {client.dashboard_link}")
    opts = dict(
        levels=list(levels), boxes=tuple(boxes), systems=systems, member=member, min_lat=min_lat
    )
    run = _Run(client, files, folder, opts, err)
    try:
        run.go()
        say(
            f"balance-desk batch: {len(run.tasks)} pieces ({len(files)} files), {run.skipped} "
            f"already done in {folder}"
        )
    except KeyboardInterrupt:
        for f in run.futures:
            f.cancel()
        say(
            f"balance-desk batch: stopped; {run.done} pieces of this run are kept in {folder}: "
            "run the same command again to go on"
        )
        raise
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
        for k, v in environ.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v
    rows, task_errors = combine(out, run.tasks, run.checksums)
    errors = run.errors + task_errors + run.lost
    _write_table(out, rows)
    err_path = os.path.splitext(out)[0] + ".errors.csv"
    import pandas as pd

    csv_frame(pd.DataFrame(errors, columns=list(ERROR_COLUMNS))).to_csv(err_path, index=False)
    say(summary(rows))
    say(f"balance-desk batch: {len(rows)} rows in {out}; {len(errors)} errors in {err_path}")
    return {
        "rows": len(rows),
        "errors": len(errors),
        "out": out,
        "errors_path": err_path,
        "tasks": len(run.tasks),
        "lost": len(run.lost),
    }


class _Run:
    """One batch on a dask client: files planned on workers, their pieces sent after them.

    A file is planned on a worker, which keeps it open; its pieces are then sent there, and
    the next file's plan after them (a lower priority). So that a worker never starts
    another file before its pieces have arrived (and opens the file again), no more files
    are being planned than there are workers, and the plan that follows a file goes to the
    worker that planned it.
    """

    def __init__(self, client, files, folder, opts, err) -> None:
        self.client, self.files, self.folder = client, files, folder
        self.opts, self.err = opts, err
        self.queue = list(enumerate(files))
        self.pending: set = set()
        self.futures: list = []
        self.plan_of: dict = {}
        self.run_of: dict = {}
        self.errors: list[RunError] = []
        self.lost: list[RunError] = []
        self.tasks: list[Task] = []
        self.checksums: dict[str, str | None] = {}
        self.done = self.failed = self.skipped = self.planned = 0
        self.t0 = time.monotonic()
        self.last_said = 0.0
        self.alone_since: float | None = None
        self.no_worker_s = settings.seconds("BALANCE_DESK_BATCH_NO_WORKER_S")

    def go(self):
        """Run until every planned piece has finished, failed or been lost."""
        from distributed import wait

        for _ in range(max(1, len(self.client.scheduler_info().get("workers", {})))):
            self.plan_next()
        while self.pending:
            try:
                ready = wait(self.pending, timeout=10, return_when="FIRST_COMPLETED").done
            except TimeoutError:  # (dask's wait raises when nothing finished in time)
                ready = set()
            if not ready:
                self.check_workers()
                continue
            for fut in ready:
                self.pending.discard(fut)
                if fut.key in self.plan_of:
                    self.planned_file(fut)
                else:
                    self.finished_piece(fut)
            self.progress()

    def plan_next(self, where=None):
        """Send the next file's plan, to ``where`` (the worker that planned the last) if given."""
        if not self.queue:
            return
        i, path = self.queue.pop(0)
        key = (
            "plan-"
            + hashlib.sha1(
                json.dumps([os.path.abspath(path), i, str(self.opts)]).encode()
            ).hexdigest()[:20]
        )
        near = dict(workers=where, allow_other_workers=True) if where else {}
        fut = self.client.submit(
            plan_file, path, key=key, priority=-2 * i, pure=False, **near, **self.opts
        )
        self.plan_of[fut.key] = (i, path)
        self.futures.append(fut)
        self.pending.add(fut)

    def check_workers(self):
        """Refuse to wait for ever: when every worker has died, dask neither runs nor fails
        the pieces."""
        if self.client.scheduler_info().get("workers"):
            self.alone_since = None
        elif self.alone_since is None:
            self.alone_since = time.monotonic()
        elif time.monotonic() - self.alone_since > self.no_worker_s:
            raise BatchError(
                f"balance-desk batch: no worker has been left for {self.no_worker_s:.0f} s "
                f"(each piece may need more memory than --memory-limit gives); the "
                f"{self.done} pieces done are kept in {self.folder}: run again to go on"
            )

    def planned_file(self, fut):
        """A file's plan came back: send its pieces not done yet to the worker that has it
        open, then the next file's plan."""
        i, path = self.plan_of[fut.key]
        self.planned += 1
        try:
            plan = fut.result()
        except Exception as exc:  # noqa: BLE001 - the worker died, or was lost
            self.lost.append(_not_analysed(path, None, exc, "the workers opening the file died"))
            self.plan_next()
            return
        self.errors += plan["errors"]
        self.checksums[os.path.abspath(path)] = plan["checksum"]
        self.tasks += plan["tasks"]
        todo = [
            t
            for t in plan["tasks"]
            if not os.path.exists(os.path.join(self.folder, f"{t.key}.json"))
        ]
        self.skipped += len(plan["tasks"]) - len(todo)
        where = list(self.client.who_has([fut]).get(fut.key, ()))
        if todo:
            near = dict(workers=where, allow_other_workers=True) if where else {}
            new = self.client.map(
                run_task,
                todo,
                key=[f"balance-{t.key}" for t in todo],
                priority=-2 * i + 1,
                **near,
            )
            for t, f in zip(todo, new):
                self.run_of[f.key] = t
            self.futures += new
            self.pending.update(new)
        fut.release()
        self.plan_next(where)

    def finished_piece(self, fut):
        """A piece came back: its part file is written (none if its worker died, so that a
        run started again tries it again)."""
        task = self.run_of[fut.key]
        self.done += 1
        try:
            result = fut.result()
        except Exception as exc:  # noqa: BLE001 - the worker died (memory), or was lost
            self.lost.append(_not_analysed(task.path, task, exc))
            self.failed += 1
            return
        _write_part(self.folder, task, result)
        self.failed += bool(result["error"])
        fut.release()

    def progress(self):
        """The bar, at most once a second and at the end."""
        now = time.monotonic()
        if now - self.last_said <= 1.0 and self.pending:
            return
        self.last_said = now
        total = len(self.tasks) - self.skipped
        rate = self.done / max(now - self.t0, 1e-9)
        # the files not planned yet are guessed to hold as many pieces as the others
        guess = total * len(self.files) / max(self.planned, 1)
        left = (guess - self.done) / rate if rate > 0 else float("inf")
        self.err(
            f"  [{_bar(self.done, guess)}] {self.done}/{total} pieces, {self.failed} failed, "
            f"{self.planned}/{len(self.files)} files opened, {_clock(now - self.t0)} elapsed, "
            f"about {_clock(left)} left"
        )


# The bar is the run's own. distributed.diagnostics' TextProgressBar follows a fixed set of
# keys on the scheduler (its Progress plugin waits until every key exists there, and stops
# at the first task that fails), while a run's pieces become known only as each file is
# opened on a worker, and a piece whose worker died is a row of the errors table, not the
# end of the run; it shows no time left either.
def _bar(done, total, width=24):
    n = int(width * done / max(total, 1))
    return "#" * n + "." * (width - n)


def _clock(seconds):
    if not math.isfinite(seconds):
        return "?"
    seconds = int(seconds)
    return (
        f"{seconds // 3600}h{seconds // 60 % 60:02d}m"
        if seconds >= 3600
        else f"{seconds // 60}m{seconds % 60:02d}s"
    )
