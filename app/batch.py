"""The same core over whole archives: ``balance-desk batch`` on dask.distributed.

The work is split into tasks of one (file, member, valid time, level). A task runs on a
worker: it opens its file lazily (the opened case is kept per worker process, so the
tasks of one file share it), computes the level's diagnostics once and the report of
every region (the boxes given, or the systems found in that field), and returns a small
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

__all__ = ["Task", "plan_tasks", "run_task", "flatten", "run_batch", "read_boxes",
           "BatchError", "file_checksum", "combine"]

#: seconds a run waits with no worker left before it stops (the pieces done are kept)
NO_WORKER_S = float(os.environ.get("BALANCE_DESK_BATCH_NO_WORKER_S", "120"))

#: columns that say where a row comes from, first in every result
KEY_COLUMNS = ("file", "member", "valid_time", "level_hpa", "region")


class BatchError(Exception):
    """Bad input to a batch run: one sentence, exit status 2."""


@dataclasses.dataclass(frozen=True)
class Task:
    path: str
    member: object        # an index, "mean", or None for a file without members
    time_index: int
    level_hpa: float
    regions: tuple        # ((name, (W, E, S, N)), ...) or () for the systems found
    systems: bool = False
    min_lat: float = 10.0

    @property
    def key(self) -> str:
        """A name for the task's part file: the same for the same piece of work."""
        text = json.dumps([os.path.abspath(self.path), str(self.member), self.time_index,
                           self.level_hpa, self.regions, self.systems, self.min_lat])
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

    from .cli import _box  # the same checks as --box

    try:
        with open(path, encoding="utf-8") as fh:
            data = yaml.safe_load(fh)
    except (OSError, yaml.YAMLError) as exc:
        raise BatchError(f"balance-desk batch: the boxes file {path} cannot be read "
                         f"({getattr(exc, 'strerror', None) or exc})") from None
    items = data.items() if isinstance(data, dict) else [
        (d.get("name"), d.get("box")) for d in (data or []) if isinstance(d, dict)]
    boxes = []
    for name, box in items:
        try:
            b = _box(",".join(str(v) for v in box))
        except Exception:  # noqa: BLE001 - one sentence for any malformed entry
            raise BatchError(f"balance-desk batch: the box {name!r} in {path} is not four "
                             "numbers west, east, south, north") from None
        boxes.append((str(name), tuple(b)))
    if not boxes:
        raise BatchError(f"balance-desk batch: {path} holds no boxes")
    return boxes


def _open(path, member, min_lat):
    """The case of a file, opened once per worker process."""
    from balance_core.io import open_case

    key = (os.path.abspath(path), str(member), float(min_lat))
    cache = _open.__dict__.setdefault("cache", {})
    if key not in cache:
        if len(cache) > 8:
            cache.pop(next(iter(cache)))
        cache[key] = open_case(path, member=member, min_lat=min_lat)
    return cache[key]


def plan_tasks(files, levels, *, boxes=(), systems=False, member="0", min_lat=10.0,
               errors=None) -> list:
    """The tasks of a run: every (file, member, valid time, level). A file that cannot be
    opened goes to ``errors`` (a list of (file, sentence)) and the others are planned."""
    import pyproj  # noqa: F401

    from balance_core.io import CaseError, open_case

    tasks = []
    for path in files:
        try:
            case = open_case(path, min_lat=min_lat)
            if member == "all":
                members = list(range(case.member_count))
            elif member == "mean":
                members = ["mean"]
            else:
                members = [int(member)]
                if case.member_count == 1 and members == [0]:
                    members = [None]  # a file without members: no member to choose
            have = [float(p) / 100 for p in case.levels_pa]
            for lev in levels:
                if not any(abs(h - lev) < 1e-6 for h in have):
                    raise CaseError(f"has no {lev:g} hPa level (it has "
                                    f"{', '.join(f'{h:g}' for h in have)})", path)
            for m in members:
                for t in range(case.times.size):
                    for lev in levels:
                        tasks.append(Task(path, m, t, float(lev), tuple(boxes), systems,
                                          min_lat))
        except CaseError as exc:
            if errors is None:
                raise BatchError(str(exc)) from None
            errors.append({"file": path, "member": None, "valid_time": None, "level_hpa": None,
                           "error": str(exc)})
        except Exception as exc:  # noqa: BLE001 - a file that breaks the reader
            if errors is None:
                raise
            errors.append({"file": path, "member": None, "valid_time": None, "level_hpa": None,
                           "error": f"{os.path.basename(path)}: could not be read "
                                    f"({type(exc).__name__})"})
    return tasks


def run_task(task: Task) -> dict:
    """One piece of work, on a worker: {"rows": [...], "error": None or a sentence}."""
    import pyproj  # noqa: F401

    from balance_core.io import CaseError, analyse_case, analyse_systems, diagnostics_for

    try:
        case = _open(task.path, task.member, task.min_lat)
        k = case.level_index(task.level_hpa)
        diag = diagnostics_for(case, k, task.time_index)
        rows = []
        if task.systems:
            out = analyse_systems(case, task.level_hpa, task.time_index, diagnostics=diag)
            for i, s in enumerate(out["systems"], 1):
                rows.append(flatten(s["report"], task, f"{s['kind']} {i}", system=s))
        else:
            for name, box in task.regions:
                rep = analyse_case(case, task.level_hpa, task.time_index, box,
                                   diagnostics=diag)
                rows.append(flatten(rep, task, name))
        return {"rows": rows, "error": None}
    except CaseError as exc:
        return {"rows": [], "error": str(exc)}
    except Exception as exc:  # noqa: BLE001 - the run goes on; the sentence says what broke
        return {"rows": [], "error": f"{os.path.basename(task.path)}: could not be analysed "
                                     f"({type(exc).__name__}: {exc})"}


def _f(x):
    if x is None:
        return None
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def flatten(rep: dict, task: Task, region: str, system=None) -> dict:
    """One row of a report, with stable column names (see the README's table)."""
    from balance_core import __version__ as core_version

    row = {"file": os.path.basename(task.path), "path": os.path.abspath(task.path),
           "member": "" if task.member is None else str(task.member),
           "valid_time": rep.get("valid_time"), "reference_time": rep.get("reference_time"),
           "lead_time_h": _f(rep.get("lead_time_h")), "level_hpa": _f(rep.get("level_hpa")),
           "region": region}
    box = rep.get("box") or {}
    for k in ("west", "east", "south", "north"):
        row[f"region_{k}"] = _f(box.get(k))
    if system is not None:
        row.update({"system_kind": system["kind"], "system_lon": _f(system["lon"]),
                    "system_lat": _f(system["lat"]), "system_intensity": _f(system["intensity"])})
    v = rep.get("verdict") or {}
    row.update({"verdict": v.get("balance"), "verdict_text": v.get("text"),
                "points": rep.get("points"), "region_points": rep.get("region_points"),
                "valid_share": _f(rep.get("valid_share"))})
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
            errors.append({"file": os.path.basename(task.path), "member": str(task.member),
                           "time_index": task.time_index, "level_hpa": task.level_hpa,
                           "error": part["error"]})
        for r in part["rows"]:
            r["file_sha256"] = checksums.get(r["path"])
            rows.append(r)
    rows.sort(key=lambda r: (r["file"], r["member"], r["valid_time"] or "", r["level_hpa"] or 0,
                             r["region"]))
    return rows, errors


def _write_table(path, rows):
    import pandas as pd

    df = pd.DataFrame(rows)
    cols = [c for c in KEY_COLUMNS if c in df.columns] + [c for c in df.columns
                                                          if c not in KEY_COLUMNS]
    df = df[cols] if len(df.columns) else df
    if path.endswith(".parquet"):
        df.to_parquet(path, index=False)
    else:
        df.to_csv(path, index=False)
    return df


def summary(rows) -> str:
    """Verdict counts by level and region."""
    counts = {}
    for r in rows:
        key = (r["level_hpa"], r["region"] if not r.get("system_kind") else r["system_kind"])
        counts.setdefault(key, {}).setdefault(r["verdict"], 0)
        counts[key][r["verdict"]] += 1
    lines = ["verdicts by level and region:"]
    for (lev, reg), c in sorted(counts.items(), key=lambda kv: (-(kv[0][0] or 0), kv[0][1])):
        total = sum(c.values())
        parts = ", ".join(f"{k} {n} ({100 * n / total:.0f} %)" for k, n in
                          sorted(c.items(), key=lambda kv: -kv[1]))
        lines.append(f"  {lev:g} hPa, {reg}: {total} rows: {parts}")
    return "\n".join(lines)


# -- the run ---------------------------------------------------------------------------------

def run_batch(files, levels, out, *, boxes=(), systems=False, workers=None, scheduler=None,
              memory_limit=None, member="0", min_lat=10.0, say=print, err=None) -> dict:
    """Run a batch (see the module docstring); returns counts and the output paths."""
    from distributed import Client, LocalCluster, wait

    err = err or (lambda text: print(text, file=sys.stderr, flush=True))
    if not (out.endswith(".parquet") or out.endswith(".csv")):
        raise BatchError("balance-desk batch: --out must end in .parquet or .csv")
    files = expand(files)
    errors = []
    tasks = plan_tasks(files, levels, boxes=boxes, systems=systems, member=member,
                       min_lat=min_lat, errors=errors)
    folder = _parts_dir(out)
    os.makedirs(folder, exist_ok=True)
    todo = [t for t in tasks if not os.path.exists(os.path.join(folder, f"{t.key}.json"))]
    say(f"balance-desk batch: {len(tasks)} pieces ({len(files)} files), {len(tasks) - len(todo)} "
        f"already done in {folder}")
    cluster = None
    if scheduler:
        client = Client(scheduler, timeout="30s")
    else:
        n = workers or max(1, os.cpu_count() or 1)
        cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                               memory_limit=memory_limit or "auto", dashboard_address=":0")
        client = Client(cluster)
    say(f"balance-desk batch: dask dashboard at {client.dashboard_link}")
    done = failed = 0
    lost = []
    t0 = time.monotonic()
    futures = []
    try:
        paths = sorted({os.path.abspath(t.path) for t in tasks})
        sums = client.map(file_checksum, paths, key=[f"checksum-{i}" for i in
                                                     range(len(paths))], pure=False)
        futures = client.map(run_task, todo, key=[f"balance-{t.key}" for t in todo])
        by_key = {f"balance-{t.key}": t for t in todo}
        last = 0.0
        pending = set(futures)
        alone_since = None
        while pending:
            ready = wait(pending, timeout=10, return_when="FIRST_COMPLETED").done
            if not ready:
                # nothing finished: are there workers at all? (when every worker has died,
                # dask neither runs nor fails the pieces: the run would wait for ever)
                if client.scheduler_info().get("workers"):
                    alone_since = None
                elif alone_since is None:
                    alone_since = time.monotonic()
                elif time.monotonic() - alone_since > NO_WORKER_S:
                    raise BatchError(
                        f"balance-desk batch: no worker has been left for {NO_WORKER_S:.0f} s "
                        f"(each piece may need more memory than --memory-limit gives); the "
                        f"{done} pieces done are kept in {folder}: run again to go on")
                continue
            for fut in ready:
                pending.discard(fut)
                task = by_key[str(fut.key)]
                try:
                    result = fut.result()
                except Exception as exc:  # noqa: BLE001 - the worker died (memory), or was lost
                    # no part file: a run started again tries this piece again
                    lost.append({"file": os.path.basename(task.path),
                                 "member": str(task.member), "time_index": task.time_index,
                                 "level_hpa": task.level_hpa,
                                 "error": f"not analysed: the workers running it died "
                                          f"({type(exc).__name__}; a worker over its memory "
                                          "limit is restarted by dask); run again to try it "
                                          "again"})
                    done += 1
                    failed += 1
                else:
                    _write_part(folder, task, result)
                    done += 1
                    failed += bool(result["error"])
                    fut.release()
            now = time.monotonic()
            if now - last > 1.0 or not pending:
                last = now
                rate = done / max(now - t0, 1e-9)
                left = (len(todo) - done) / rate if rate > 0 else float("inf")
                err(f"  [{_bar(done, len(todo))}] {done}/{len(todo)} pieces, {failed} failed, "
                    f"{_clock(now - t0)} elapsed, about {_clock(left)} left")
        try:
            wait(sums, timeout=NO_WORKER_S)
            checksums = dict(zip(paths, client.gather(sums)))
        except Exception:  # noqa: BLE001 - provenance left empty rather than the run lost
            checksums = {}
    except KeyboardInterrupt:
        for f in futures:
            f.cancel()
        say(f"balance-desk batch: stopped; {done} pieces of this run are kept in {folder}: run "
            "the same command again to go on")
        raise
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
    rows, task_errors = combine(out, tasks, checksums)
    errors += task_errors + lost
    _write_table(out, rows)
    err_path = os.path.splitext(out)[0] + ".errors.csv"
    import pandas as pd

    pd.DataFrame(errors, columns=["file", "member", "time_index", "level_hpa", "error"]
                 ).to_csv(err_path, index=False)
    say(summary(rows))
    say(f"balance-desk batch: {len(rows)} rows in {out}; {len(errors)} errors in {err_path}")
    return {"rows": len(rows), "errors": len(errors), "out": out, "errors_path": err_path,
            "tasks": len(tasks), "lost": len(lost)}


def _bar(done, total, width=24):
    n = int(width * done / max(total, 1))
    return "#" * n + "." * (width - n)


def _clock(seconds):
    if not math.isfinite(seconds):
        return "?"
    seconds = int(seconds)
    return f"{seconds // 3600}h{seconds // 60 % 60:02d}m" if seconds >= 3600 else \
        f"{seconds // 60}m{seconds % 60:02d}s"
