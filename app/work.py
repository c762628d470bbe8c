"""Heavy work off the server's event loop: a small pool of threads, fair across sessions.

Every browser session has a :class:`Lane`. A lane holds at most one waiting job
per kind of view (the chart, the region's ranking, the views through the levels
and the times): a newer request for the same view replaces the waiting one, so
only the latest request of a view is ever computed. The pool's threads take
lanes in turn (round robin), one job at a time, so one busy session cannot
starve another, and the number of waiting jobs is bounded by sessions x kinds.
A lane whose first screen (its first two jobs: the ranking and the chart) is not
done yet goes ahead of the others, in the order such lanes came: a person who
just opened the page waits for one job, not for a turn of every busy session.

A job's result goes to its ``done`` callback, which the page turns into an
update on its own document's event loop; a job whose result is no longer
wanted (its lane was closed, or a newer one of its kind was submitted) is
reported as ``stale`` and dropped there.
"""

from __future__ import annotations

import collections
import logging
import os
import threading
import time
import uuid

__all__ = ["FairPool", "Lane", "POOL"]

log = logging.getLogger(__name__)

#: the order a lane's waiting jobs are taken in: the ranking before the chart, then a review
#: room's view (given to the room once the first two are computed), the systems of the
#: level, the views through the levels and the times, and a loop's frames computed ahead last
KIND_ORDER = (
    "box",
    "chart",
    "outline",
    "room",
    "systems",
    "life",
    "levels",
    "times",
    "section",
    "frames",
)
#: a lane's views through the levels and the times wait while its first screen (the ranking,
#: the chart) is computed, so they do not slow it down (both hold the interpreter in turn)
FIRST = ("box", "chart", "outline")


class Lane:
    """One session's queue: the newest waiting job of each kind."""

    def __init__(self, pool: FairPool, name: str = ""):
        self.pool = pool
        self.name = name or uuid.uuid4().hex[:8]
        self.waiting: dict = {}
        self.generation: collections.Counter = collections.Counter()
        self.running: collections.Counter = collections.Counter()
        self.closed = False
        self.served = 0  # jobs finished

    #: jobs a lane finishes before it no longer goes ahead (the ranking and the chart)
    FIRST_SCREEN_JOBS = 2

    @property
    def new(self) -> bool:
        """Its first screen is not done yet: it goes ahead of the others."""
        return self.served < self.FIRST_SCREEN_JOBS

    def submit(self, kind: str, fn, done) -> int:
        """Queue ``fn()`` as the newest job of ``kind``; ``done(status, value, gen)`` gets the
        result ("ok", "error" or "stale"). Returns the job's generation."""
        with self.pool._lock:
            self.generation[kind] += 1
            gen = self.generation[kind]
            replaced = self.waiting.pop(kind, None)
            self.waiting[kind] = (gen, fn, done)
            self.pool._ready(self)
        if replaced is not None:
            _safe(replaced[2], "stale", None, replaced[0])
        return gen

    def supersede(self, kind: str) -> int:
        """The view of ``kind`` was given another way: a waiting or running job of it is no
        longer wanted (its result is reported stale). Returns the new generation."""
        with self.pool._lock:
            self.generation[kind] += 1
            gen = self.generation[kind]
            replaced = self.waiting.pop(kind, None)
        if replaced is not None:
            _safe(replaced[2], "stale", None, replaced[0])
        return gen

    def current(self, kind: str, gen: int) -> bool:
        return not self.closed and self.generation[kind] == gen

    def close(self):
        """The session is gone: drop its waiting jobs."""
        with self.pool._lock:
            self.closed = True
            self.waiting.clear()
            if not any(self.running.values()):
                log.debug("lane %s: idle", self.name)

    def _take(self):
        first_busy = any(self.running[k] for k in FIRST)
        for kind in sorted(
            self.waiting, key=lambda k: KIND_ORDER.index(k) if k in KIND_ORDER else len(KIND_ORDER)
        ):
            if first_busy and kind not in FIRST:
                return None  # taken up again when the first screen's job ends
            gen, fn, done = self.waiting.pop(kind)
            self.running[kind] += 1
            return kind, gen, fn, done
        return None


class FairPool:
    """A fixed number of worker threads taking sessions' lanes in turn."""

    def __init__(self, threads: int | None = None):
        self.threads = threads or max(2, min(4, os.cpu_count() or 2))
        self._lock = threading.Lock()
        self._wake = threading.Condition(self._lock)
        self._ring: collections.deque = collections.deque()
        self._workers: list = []
        self.running = 0

    def lane(self, name: str = "") -> Lane:
        self._start()
        return Lane(self, name)

    def _ready(self, lane):
        if lane not in self._ring:
            if lane.new:  # behind the other new lanes, ahead of the rest
                ahead = 0
                while ahead < len(self._ring) and self._ring[ahead].new:
                    ahead += 1
                self._ring.insert(ahead, lane)
            else:
                self._ring.append(lane)
        self._wake.notify()

    def _start(self):
        with self._lock:
            if self._workers:
                return
            for i in range(self.threads):
                t = threading.Thread(target=self._run, name=f"balance-desk-{i}", daemon=True)
                t.start()
                self._workers.append(t)

    def _run(self):
        while True:
            with self._lock:
                job = None
                while job is None:
                    while not self._ring:
                        self._wake.wait()
                    lane = self._ring.popleft()
                    job = None if lane.closed else lane._take()
                    if job is not None and lane.waiting:
                        self._ready(lane)  # its other views wait their turn
                self.running += 1
            kind, gen, fn, done = job
            computed = False
            try:
                if not lane.current(kind, gen):
                    _safe(done, "stale", None, gen)
                    continue
                try:
                    t0 = time.perf_counter()
                    computed = True
                    value = fn()
                    status = "ok"
                    log.debug(
                        "lane %s: %s computed in %.0f ms",
                        lane.name,
                        kind,
                        1e3 * (time.perf_counter() - t0),
                    )
                except Exception as exc:  # noqa: BLE001 - the page says it in one sentence
                    status, value = "error", exc
                _safe(done, status if lane.current(kind, gen) else "stale", value, gen)
            finally:
                with self._lock:
                    self.running -= 1
                    lane.running[kind] -= 1
                    lane.served += computed
                    if lane.waiting and not lane.closed:
                        self._ready(lane)
                    elif not any(lane.running.values()):
                        log.debug("lane %s: idle", lane.name)  # the sign tests wait on

    def busy(self) -> bool:
        """Every thread at work, or work waiting: a new job would queue."""
        with self._lock:
            return self.running >= self.threads or any(lane.waiting for lane in self._ring)

    def waiting(self) -> int:
        with self._lock:
            return sum(len(lane.waiting) for lane in self._ring)


def _safe(done, status, value, gen):
    try:
        done(status, value, gen)
    except Exception:
        log.exception("a view's callback failed")


#: The pool every session of a server shares.
POOL = FairPool()
