"""The shared pool of work: only the latest request of a view is computed, sessions take turns,
a session's first screen goes before its views below, and a closed session's work is dropped.

Order is observed with events (a job that holds the pool until it is let go), never with
wall-clock times.
"""

import threading

import pytest

from app.work import FairPool
from testkit.serving import HANG_S

WAIT = HANG_S  # before a test gives up on an event (a hang, not a speed check)


class Log:
    def __init__(self):
        self.lock = threading.Lock()
        self.events = []
        self.done = {}
        self.finished = threading.Condition(self.lock)

    def job(self, name, gate=None, started=None, fail=False):
        def fn():
            with self.lock:
                self.events.append(("start", name))
            if started is not None:
                started.set()
            if gate is not None:
                assert gate.wait(WAIT)
            if fail:
                raise ValueError("no data at this level")
            with self.lock:
                self.events.append(("end", name))
            return name

        return fn

    def callback(self, name):
        def done(status, value, gen):
            with self.finished:
                self.done[name] = (status, value)
                self.finished.notify_all()

        return done

    def wait_for(self, *names):
        with self.finished:
            ok = self.finished.wait_for(lambda: all(n in self.done for n in names), WAIT)
        assert ok, (names, self.done)

    def order(self, what="start"):
        return [n for kind, n in self.events if kind == what]


def _hold(pool, log, lane_name="holder"):
    """Occupy the pool's (only) thread until the returned event is set."""
    gate, started = threading.Event(), threading.Event()
    lane = pool.lane(lane_name)
    lane.submit("box", log.job("hold", gate, started), log.callback("hold"))
    assert started.wait(WAIT)
    return gate


def test_only_the_latest_request_of_a_view_is_computed():
    pool, log = FairPool(threads=1), Log()
    gate = _hold(pool, log)
    lane = pool.lane("a")
    for i in range(1, 4):
        lane.submit("chart", log.job(f"chart{i}"), log.callback(f"chart{i}"))
    gate.set()
    log.wait_for("chart1", "chart2", "chart3")
    assert log.done["chart1"] == ("stale", None) and log.done["chart2"] == ("stale", None)
    assert log.done["chart3"] == ("ok", "chart3")
    assert "chart1" not in log.order() and "chart2" not in log.order()


def test_sessions_take_turns():
    # a lane with three views waiting does not make another session wait for all three
    pool, log = FairPool(threads=1), Log()
    gate = _hold(pool, log)
    a, b = pool.lane("a"), pool.lane("b")
    for kind in ("box", "chart", "levels"):
        a.submit(kind, log.job(f"a.{kind}"), log.callback(f"a.{kind}"))
    b.submit("box", log.job("b.box"), log.callback("b.box"))
    gate.set()
    log.wait_for("a.box", "a.chart", "a.levels", "b.box")
    assert log.order() == ["hold", "a.box", "b.box", "a.chart", "a.levels"]


def test_a_sessions_first_screen_goes_before_its_views_below():
    # two threads: the second is free, yet the levels view waits for the ranking to end
    pool, log = FairPool(threads=2), Log()
    lane = pool.lane("a")
    gate, started = threading.Event(), threading.Event()
    lane.submit("box", log.job("box", gate, started), log.callback("box"))
    assert started.wait(WAIT)
    lane.submit("levels", log.job("levels"), log.callback("levels"))
    other = pool.lane("b")  # another session is not held back by it
    other.submit("chart", log.job("b.chart"), log.callback("b.chart"))
    log.wait_for("b.chart")
    assert "levels" not in log.order()
    gate.set()
    log.wait_for("box", "levels")
    ev = log.events
    assert ev.index(("end", "box")) < ev.index(("start", "levels"))


def test_a_closed_session_is_dropped_and_errors_are_reported():
    pool, log = FairPool(threads=1), Log()
    gate = _hold(pool, log)
    gone, here = pool.lane("gone"), pool.lane("here")
    gone.submit("chart", log.job("gone.chart"), log.callback("gone.chart"))
    gone.close()
    here.submit("box", log.job("here.box", fail=True), log.callback("here.box"))

    def broken(status, value, gen):
        raise RuntimeError("a callback that fails")

    here.submit("chart", log.job("here.chart"), broken)
    here.submit("levels", log.job("here.levels"), log.callback("here.levels"))
    gate.set()
    log.wait_for("here.box", "here.levels")  # the worker lived through the broken callback
    status, value = log.done["here.box"]
    assert status == "error" and isinstance(value, ValueError)
    assert "gone.chart" not in log.order() and "gone.chart" not in log.done
    assert log.done["here.levels"] == ("ok", "here.levels")
    assert pool.waiting() == 0


@pytest.mark.parametrize("threads", [1, 3])
def test_every_submitted_view_gets_one_answer(threads):
    # many sessions, many requests: each request is answered exactly once (ok or stale),
    # and the last one of each view in each session is computed
    pool, log = FairPool(threads=threads), Log()
    lanes = [pool.lane(f"s{i}") for i in range(6)]
    names = []
    for rnd in range(5):
        for i, lane in enumerate(lanes):
            for kind in ("box", "chart", "levels"):
                n = f"s{i}.{kind}.{rnd}"
                names.append(n)
                lane.submit(kind, log.job(n), log.callback(n))
    log.wait_for(*names)
    assert len(log.done) == len(names)
    for i in range(6):
        for kind in ("box", "chart", "levels"):
            assert log.done[f"s{i}.{kind}.4"] == ("ok", f"s{i}.{kind}.4")


def test_the_pool_says_when_it_is_busy():
    pool, log = FairPool(threads=1), Log()
    assert not pool.busy()
    gate = _hold(pool, log)
    assert pool.busy()  # its only thread is at work
    gate.set()
    log.wait_for("hold")
    from testkit.serving import wait_until

    # the worker counts itself free just after the callback
    wait_until(lambda: not pool.busy(), HANG_S, what="the pool to be free")


def test_a_new_session_goes_ahead_of_busy_ones():
    # a session that has had its first screen waits its turn; one that just opened the page
    # (its first two jobs not done) goes ahead of it, and new ones keep their order
    pool, log = FairPool(threads=1), Log()
    old = pool.lane("old")
    for kind in ("box", "chart"):
        old.submit(kind, log.job(f"old.{kind}0"), log.callback(f"old.{kind}0"))
    log.wait_for("old.box0", "old.chart0")
    gate = _hold(pool, log)
    old.submit("box", log.job("old.box1"), log.callback("old.box1"))
    first, second = pool.lane("first"), pool.lane("second")
    first.submit("box", log.job("first.box"), log.callback("first.box"))
    second.submit("box", log.job("second.box"), log.callback("second.box"))
    gate.set()
    log.wait_for("old.box1", "first.box", "second.box")
    assert log.order()[-3:] == ["first.box", "second.box", "old.box1"], log.order()


def test_a_view_given_another_way_supersedes_its_waiting_and_running_jobs():
    pool, log = FairPool(threads=1), Log()
    lane = pool.lane("a")
    gate, started = threading.Event(), threading.Event()
    lane.submit("chart", log.job("running", gate, started), log.callback("running"))
    assert started.wait(WAIT)
    lane.submit("box", log.job("waiting"), log.callback("waiting"))
    lane.supersede("chart")
    lane.supersede("box")
    gate.set()
    log.wait_for("running", "waiting")
    assert log.done["waiting"] == ("stale", None)  # dropped without running
    assert log.done["running"][0] == "stale"  # its result is no longer wanted
    assert "waiting" not in log.order()
