"""The server under load, on loopback: a new user's page against an idle server.

One server on the sample cases. First, on the idle server, a new user's page is timed
from navigation to its verdict shown (median of several). Then, for the load:

* 6 sessions (pages of one headless Chromium, in a thread of their own) hammer box
  changes -- typed boxes, one after another, as fast as the page takes them -- for 30 s;
* 4 clients fetch the page in a loop (plain GETs, as a monitor or a crawler would).

During the load the new user's page is timed again, the same way. After it, every
hammering session must show the verdict of the last box it set -- the same verdict
the core gives for that box -- within 60 s.

The last line is ``figure new_user_under_load/idle RATIO`` (goal <= 2).

    python bench/serve.py [--seconds 30] [--repeat 3]
"""

from __future__ import annotations

import argparse
import os
import random
import shutil
import statistics
import sys
import threading
import time
import urllib.request

os.environ.setdefault("PROJ_NETWORK", "OFF")
import pyproj  # noqa: E402,F401

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)
sys.path.append(HERE)  # after the project: bench/app.py must not hide the app package

from browser import ARGS, LINK, page_ready, set_box, start_server  # noqa: E402
BOXES = [(-52, -28, 38, 56), (-45, -20, 30, 50), (-60, -35, 45, 60), (-40, -10, 35, 55),
         (-30, -5, 40, 52), (-55, -45, 30, 40), (-20, 0, 45, 60), (-65, -40, 28, 42)]


def hammer(url, seconds, n_sessions, result, ready):
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=shutil.which("chromium"), args=ARGS)
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
        from app import compute, vocab
        from app.library import CaseLibrary
        from app.state import ViewState

        import glob

        lib = CaseLibrary(sorted(glob.glob(os.path.join(ROOT, "sample_cases", "*.nc"))))
        right = 0
        t0 = time.perf_counter()
        for pg, box in zip(pages, last):
            st = ViewState(case="ocean_cyclone", level=500.0, time="2041-01-19T12:00:00Z")
            st.set_box(*box)
            want = compute.box_data(lib, st)
            text = vocab.balance_name(want["verdict"]["balance"])
            region = st.region_text()
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
    args = ap.parse_args(argv)
    from playwright.sync_api import sync_playwright

    proc, url, log = start_server()
    try:
        with sync_playwright() as p:
            b = p.chromium.launch(executable_path=shutil.which("chromium"), args=ARGS)
            page_ready(b, url)  # warm the caches of the case
            idle = statistics.median(page_ready(b, url) for _ in range(args.repeat))
            print(f"idle: {idle:.2f} s", file=sys.stderr, flush=True)
            result, ready, stop, counts = {}, threading.Event(), threading.Event(), []
            h = threading.Thread(target=hammer, args=(url, args.seconds, 6, result, ready))
            h.start()
            ready.wait(timeout=300)
            fetchers = [threading.Thread(target=fetch_loop, args=(url, stop, counts))
                        for _ in range(4)]
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
    print(f"sample case ocean_cyclone, {os.cpu_count()} cores; new user's page from navigation "
          f"to verdict, median of {args.repeat}")
    print(f"  idle server:                          {1000 * idle:8.0f} ms")
    print(f"  under load ({args.seconds:.0f} s of 6 sessions hammering "
          f"boxes, 4 clients fetching the page): {1000 * load:8.0f} ms "
          f"(each: {', '.join(f'{1000 * x:.0f}' for x in loaded)})")
    print(f"  box changes made: {result.get('changes')}; plain page fetches: {sum(counts)}")
    print(f"  sessions showing the right final verdict: {result.get('right')} of 6 "
          f"(all settled {result.get('settle_s', float('nan')):.1f} s after the load)")
    print(f"figure new_user_under_load/idle {load / idle:.2f}")
    return 0 if result.get("right") == 6 else 1


if __name__ == "__main__":
    sys.exit(main())
