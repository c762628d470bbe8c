"""The server under load, on loopback: a new user's page against an idle server.

One server on the sample cases. First, on the idle server, a new user's page is timed
from navigation to its verdict shown (median of several). Then, for the load:

* 6 sessions hammer box changes for 30 s: each types a box and presses "Use this box",
  and types the next one as soon as the view of the last has come (as fast as the server
  answers);
* 4 clients fetch the page in a loop (plain GETs, as a monitor or a crawler would).

The 6 sessions are driven over the websocket protocol (tests/wire_page.py): the server
builds, computes and sends them all a browser would get; only the drawing is left out.
The people hammering a shared server draw on their own machines, not on the server's:
six Chromium renderers on this 2-core machine would measure their drawing as much as the
server (``--browsers`` runs them as Chromium pages, typing the boxes in the page, each
change as soon as the page takes it, without waiting for the view).

During the load the new user's page (Chromium) is timed again, the same way. After it,
every hammering session must show the verdict of the last box it set -- the same verdict
the core gives for that box -- within 60 s.

The last line is ``figure new_user_under_load/idle RATIO`` (goal <= 2).

    python bench/serve.py [--seconds 30] [--repeat 3] [--browsers]
"""

from __future__ import annotations

import argparse
import asyncio
import os
import random
import statistics
import sys
import threading
import time
import urllib.request

os.environ.setdefault("PROJ_NETWORK", "OFF")
import pyproj  # noqa: F401

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)
sys.path.append(HERE)  # after the project: bench/app.py must not hide the app package

from browser import ARGS, CHROMIUM, LINK, page_ready, set_box, start_server  # noqa: E402

from testkit.wire_page import WirePage  # noqa: E402

BOXES = [
    (-52, -28, 38, 56),
    (-45, -20, 30, 50),
    (-60, -35, 45, 60),
    (-40, -10, 35, 55),
    (-30, -5, 40, 52),
    (-55, -45, 30, 40),
    (-20, 0, 45, 60),
    (-65, -40, 28, 42),
]


def _state(box):
    """The view of LINK with ``box`` set."""
    from app.state import ViewState

    st = ViewState(case="ocean_cyclone", level=500.0, time="2041-01-19T12:00:00Z")
    st.set_box(*box)
    return st


def expected(box):
    """(the box's region text, the name of the verdict the core gives for it)."""
    import glob

    from app import compute, wording
    from app.library import CaseLibrary

    lib = expected.__dict__.setdefault(
        "lib", CaseLibrary(sorted(glob.glob(os.path.join(ROOT, "sample_cases", "*.nc"))))
    )
    st = _state(box)
    want = compute.box_data(lib, st)
    return st.region_text(), wording.balance_name(want["verdict"]["balance"])


def hammer_wire(url, seconds, n_sessions, result, ready):
    """The hammer on the wire: each session sets its next box once the view of its last
    has come (or after 30 s)."""

    async def session(w, rnd, t_end, last, i):
        n = 0
        while time.perf_counter() < t_end:
            box = rnd.choice([bx for bx in BOXES if bx != last[i]])
            region = expected_region[box]
            seen = len(w.log)
            await w.set_box(box)
            last[i] = box
            n += 1
            deadline = time.perf_counter() + 30
            while time.perf_counter() < deadline and not any(
                region in where for _, where in w.log[seen:]
            ):
                await asyncio.sleep(0.01)
        return n

    async def main():
        pages = [
            await WirePage(url + LINK, agent=f"hammer {i + 1}").open() for i in range(n_sessions)
        ]
        readers = [asyncio.ensure_future(w.run()) for w in pages]
        while not all(w.log for w in pages):
            await asyncio.sleep(0.05)
        ready.set()
        last = [None] * n_sessions
        t_end = time.perf_counter() + seconds
        counts = await asyncio.gather(
            *(session(w, random.Random(7 + i), t_end, last, i) for i, w in enumerate(pages))
        )
        right, t0 = 0, time.perf_counter()
        for w, box in zip(pages, last):
            region, name = expected(box)
            deadline = time.perf_counter() + 60
            while time.perf_counter() < deadline:
                if w.pane and region in w.pane and w.pane.startswith(name):
                    right += 1
                    break
                await asyncio.sleep(0.1)
        result.update(changes=sum(counts), right=right, settle_s=time.perf_counter() - t0)
        for w in pages:
            w.close()
        await asyncio.gather(*readers)

    expected_region = {box: _state(box).region_text() for box in BOXES}
    asyncio.run(main())


def hammer(url, seconds, n_sessions, result, ready):
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        pages = []
        for _ in range(n_sessions):
            pg = b.new_page(viewport={"width": 1300, "height": 900})
            pg.goto(url + LINK)
            pg.locator(".bd-verdict").first.wait_for(timeout=120_000)
            pages.append(pg)
        ready.set()
        rnd = random.Random(7)
        last = [None] * n_sessions
        changes = 0
        t_end = time.perf_counter() + seconds
        while time.perf_counter() < t_end:
            for i, pg in enumerate(pages):
                box = rnd.choice([bx for bx in BOXES if bx != last[i]])
                set_box(pg, box)
                last[i] = box
                changes += 1
        # every session's final view: the verdict of its last box
        right = 0
        t0 = time.perf_counter()
        for pg, box in zip(pages, last):
            region, text = expected(box)
            deadline = time.perf_counter() + 60
            while time.perf_counter() < deadline:
                v = pg.locator(".bd-verdict").first.inner_text()
                if region in v and v.strip().startswith(text):
                    right += 1
                    break
                pg.wait_for_timeout(100)
        result.update(changes=changes, right=right, settle_s=time.perf_counter() - t0)
        b.close()


def fetch_loop(url, stop, counts):
    n = 0
    while not stop.is_set():
        try:
            urllib.request.urlopen(url + LINK, timeout=30).read()
            n += 1
        except Exception:  # noqa: BLE001
            pass
    counts.append(n)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=30.0)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument(
        "--browsers",
        action="store_true",
        help="hammer from 6 Chromium pages on this machine instead of the wire",
    )
    args = ap.parse_args(argv)
    from playwright.sync_api import sync_playwright

    proc, url, log = start_server()
    try:
        with sync_playwright() as p:
            b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
            page_ready(b, url)  # warm the caches of the case
            idle = statistics.median(page_ready(b, url) for _ in range(args.repeat))
            print(f"idle: {idle:.2f} s", file=sys.stderr, flush=True)
            result, ready, stop, counts = {}, threading.Event(), threading.Event(), []
            h = threading.Thread(
                target=hammer if args.browsers else hammer_wire,
                args=(url, args.seconds, 6, result, ready),
            )
            h.start()
            ready.wait(timeout=300)
            fetchers = [
                threading.Thread(target=fetch_loop, args=(url, stop, counts)) for _ in range(4)
            ]
            for f in fetchers:
                f.start()
            time.sleep(min(5.0, args.seconds / 4))
            loaded = []
            while len(loaded) < args.repeat:
                loaded.append(page_ready(b, url))
                print(f"under load: {loaded[-1]:.2f} s", file=sys.stderr, flush=True)
            load = statistics.median(loaded)
            h.join()
            stop.set()
            for f in fetchers:
                f.join()
            b.close()
    except BaseException:
        print(f"the server's log is in {log}", file=sys.stderr)
        raise
    else:
        os.unlink(log)
    finally:
        proc.terminate()
        proc.wait(timeout=30)
    print(
        f"sample case ocean_cyclone, {os.cpu_count()} cores; new user's page from navigation "
        f"to verdict, median of {args.repeat}"
    )
    print(f"  idle server:                          {1000 * idle:8.0f} ms")
    who = "Chromium pages on this machine" if args.browsers else "sessions on the wire"
    print(
        f"  under load ({args.seconds:.0f} s of 6 {who} hammering "
        f"boxes, 4 clients fetching the page): {1000 * load:8.0f} ms "
        f"(each: {', '.join(f'{1000 * x:.0f}' for x in loaded)})"
    )
    print(f"  box changes made: {result.get('changes')}; plain page fetches: {sum(counts)}")
    print(
        f"  sessions showing the right final verdict: {result.get('right')} of 6 "
        f"(all settled {result.get('settle_s', float('nan')):.1f} s after the load)"
    )
    print(f"figure new_user_under_load/idle {load / idle:.2f}")
    return 0 if result.get("right") == 6 else 1


if __name__ == "__main__":
    sys.exit(main())
