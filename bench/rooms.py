"""Review rooms under load, on loopback: following, many notes at once, and a crash.

1. **Following.** One server, one room, 20 people in it: the person steering and two
   followers are pages of one headless Chromium; the other 17 followers are sessions
   driven over the websocket protocol (``tests/wire_page.py``: the server builds, computes and
   sends them everything it sends a browser; only the drawing is left out). 20 Chromium
   renderers on a 2-core machine would measure how fast the machine draws 20 pages one
   after another, not how fast the room reaches its people, who each draw on their own
   machine; ``--browsers 19`` runs that too. The person steering changes the level or the
   box every few seconds for two minutes. Each follower notes (its own clock:
   ``Date.now()`` in a page, ``time.time()`` on the wire, the one clock of this machine)
   when its verdict line first shows the new view; the delay of a change is measured from
   the moment the leader's page was told to change. Printed: the 95th percentile over
   all (change, follower) pairs, and over changes of the delay until *every* follower had
   it (goal: < 1 s), for the browsers and the wire sessions apart too; and the server's
   resident memory per extra follower (goal: < 20 MB).
2. **Notes at once.** 10 people write 100 notes each through their pages, all at the
   same time; the store must then hold 1000 notes, none lost and none twice.
3. **A crash.** 4 people write notes continuously; the server is killed (-9) in the
   middle; after a restart, SQLite's integrity check must pass and every note that a
   page saw acknowledged (its text box emptied by the server) must be in the store.

The last lines are ``figure NAME VALUE``.

    python bench/rooms.py [--seconds 120] [--people 20] [--browsers 2] [--skip-follow]
"""

from __future__ import annotations

import argparse
import asyncio
import os
import signal
import statistics
import sys
import tempfile
import time
import urllib.parse

os.environ.setdefault("PROJ_NETWORK", "OFF")
import pyproj  # noqa: F401

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)

from app.rooms import SQLiteStore  # noqa: E402
from testkit.chromium import ARGS, CHROMIUM  # noqa: E402
from testkit.serving import start_server, stop_server  # noqa: E402
from testkit.wire_page import WirePage  # noqa: E402

#: in every follower: a log of (Date.now(), text) each time the verdict line changes
WATCH_JS = """
(() => {
  window.bdLog = [];
  let el = null, last = null;
  function find(root) {
    const hit = root.querySelector('.bd-verdict-where');
    if (hit) return hit;
    for (const e of root.querySelectorAll('*')) {
      if (e.shadowRoot) { const h = find(e.shadowRoot); if (h) return h; }
    }
    return null;
  }
  setInterval(() => {
    if (!el || !el.isConnected) el = find(document);
    if (!el) return;
    const t = el.textContent;
    if (t !== last) { last = t; window.bdLog.push([Date.now(), t]); }
  }, 15);
})();
"""

LEVELS = ["850 hPa", "250 hPa", "700 hPa", "300 hPa", "925 hPa", "500 hPa"]
BOXES = [(-52, -28, 38, 56), (-45, -20, 30, 50), (-60, -35, 45, 60), (-40, -10, 35, 55)]


def _rss_mb(pid) -> float:
    import psutil

    return psutil.Process(pid).memory_info().rss / 2**20


async def _person(browser, link, name, watch=False):
    ctx = await browser.new_context(viewport={"width": 1400, "height": 1000})
    host = urllib.parse.urlparse(link).hostname
    await ctx.add_cookies(
        [{"name": "bd_name", "value": urllib.parse.quote(name), "domain": host, "path": "/"}]
    )
    page = await ctx.new_page()
    if watch:
        await page.add_init_script(WATCH_JS)
    await page.goto(link)
    await page.locator(".bd-verdict").first.wait_for(timeout=180_000)
    await page.locator(".bd-room-status").first.wait_for(timeout=180_000)
    return page


async def follow(url, store_path, seconds, people, browsers, pid):
    from playwright.async_api import async_playwright

    s = SQLiteStore(store_path)
    room = s.create_room(
        "load",
        "ocean_cyclone",
        {"case": "ocean_cyclone", "level": "500", "region": "box:-52,-28,38,56"},
    )
    s.close()
    link = f"{url}room?room={room.token}"
    browsers = max(0, min(browsers, people - 1))
    async with async_playwright() as p:
        b = await p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        leader = await _person(b, link, "leader")
        await leader.wait_for_timeout(3000)
        rss1 = _rss_mb(pid)
        pages, wires, reading = [], [], []
        for i in range(people - 1):  # one after another: a room fills up over minutes
            name = f"follower {i + 1}"
            if i < browsers:
                pages.append(await _person(b, link, name, watch=True))
            else:
                w = await WirePage(link, {"bd_name": name}, f"wire follower {i + 1}").open()
                wires.append(w)
                reading.append(asyncio.ensure_future(w.run()))
                await leader.wait_for_timeout(300)  # as a page takes its time to load
        await leader.wait_for_timeout(5000)
        rss_n = _rss_mb(pid)
        pairs, every, missed = {"browser": [], "wire": []}, [], 0
        t_end = time.monotonic() + seconds
        i = 0
        while time.monotonic() < t_end:
            before = await leader.locator(".bd-verdict-where").first.inner_text()
            t0 = await leader.evaluate("Date.now()")
            if i % 2 == 0:
                await leader.get_by_label("Level", exact=True).select_option(
                    label=LEVELS[(i // 2) % len(LEVELS)]
                )
            else:
                box = BOXES[(i // 2 + 1) % len(BOXES)]  # not the room's first box
                for lab, v in zip(("West", "East", "South", "North"), box):
                    await leader.get_by_label(lab, exact=True).fill(str(v))
                await leader.get_by_role("button", name="Use this box").click()
            # the leader's own page settles on the new view: that text is what followers show
            for _ in range(400):
                now = await leader.locator(".bd-verdict-where").first.inner_text()
                if now != before:
                    break
                await asyncio.sleep(0.02)
            await asyncio.sleep(2.5)  # "every few seconds"
            want = " ".join((await leader.locator(".bd-verdict-where").first.inner_text()).split())
            logs = [("browser", await f.evaluate("window.bdLog")) for f in pages]
            logs += [("wire", [(1e3 * t, text) for t, text in w.log]) for w in wires]
            if want == " ".join(before.split()):
                print(f"change {i}: the leader's view did not change", file=sys.stderr)
                i += 1
                continue
            delays = []
            for kind, log in logs:
                seen = [t for t, text in log if t >= t0 and " ".join(text.split()) == want]
                if seen:
                    delays.append((seen[0] - t0) / 1e3)
                    pairs[kind].append(delays[-1])
                else:
                    missed += 1
            if len(delays) == len(logs):
                every.append(max(delays))
            else:
                print(
                    f"change {i}: {len(logs) - len(delays)} followers did not show {want!r}",
                    file=sys.stderr,
                )
            i += 1
        for w in wires:
            w.close()
        await asyncio.gather(*reading, return_exceptions=True)
        await b.close()
    return {
        "changes": i,
        "pairs": pairs,
        "every": every,
        "missed": missed,
        "rss1": rss1,
        "rss_n": rss_n,
        "people": people,
        "browsers": browsers,
    }


async def _write_notes(page, prefix, n, acked):
    box = page.get_by_label("New note")
    add = page.get_by_role("button", name="Add the note")
    for j in range(n):
        text = f"{prefix} {j}"
        await box.fill(text)
        await add.click()
        for _ in range(1000):  # the server empties the box once the note is stored
            if (await box.input_value()) == "":
                acked.append(text)
                break
            await asyncio.sleep(0.02)


async def notes_at_once(url, store_path, sessions=10, per_session=100):
    from playwright.async_api import async_playwright

    s = SQLiteStore(store_path)
    room = s.create_room("notes", "ocean_cyclone", {"case": "ocean_cyclone"})
    s.close()
    link = f"{url}room?room={room.token}"
    acked = []
    async with async_playwright() as p:
        b = await p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        pages = [await _person(b, link, f"writer {i}") for i in range(sessions)]
        t0 = time.monotonic()
        await asyncio.gather(
            *(_write_notes(pg, f"w{i}", per_session, acked) for i, pg in enumerate(pages))
        )
        seconds = time.monotonic() - t0
        await b.close()
    s = SQLiteStore(store_path)
    texts = [n.text for n in s.notes(room.token)]
    s.close()
    want = {f"w{i} {j}" for i in range(sessions) for j in range(per_session)}
    return {
        "stored": len(texts),
        "lost": len(want - set(texts)),
        "duplicated": len(texts) - len(set(texts)),
        "acked": len(acked),
        "seconds": seconds,
    }


async def crash(store_path, writers=4, seconds=8.0):
    from playwright.async_api import async_playwright

    s = SQLiteStore(store_path)
    room = s.create_room("crash", "ocean_cyclone", {"case": "ocean_cyclone"})
    s.close()
    env = dict(os.environ, BALANCE_DESK_NOTES_PER_MINUTE="100000")
    proc, url, port = start_server(["--store", store_path], env=env)
    link = f"{url}room?room={room.token}"
    acked = []
    async with async_playwright() as p:
        b = await p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        pages = [await _person(b, link, f"writer {i}") for i in range(writers)]
        tasks = [
            asyncio.ensure_future(_write_notes(pg, f"c{i}", 10_000, acked))
            for i, pg in enumerate(pages)
        ]
        await asyncio.sleep(seconds)
        os.kill(proc.pid, signal.SIGKILL)  # in the middle of the writes
        proc.wait()
        await asyncio.sleep(1.0)
        for t in tasks:
            t.cancel()
        await asyncio.gather(*tasks, return_exceptions=True)
        await b.close()
    stop_server(proc)
    proc, url, port = start_server(["--store", store_path], env=env)
    stop_server(proc)
    s = SQLiteStore(store_path)
    ok = s.integrity()
    texts = {n.text for n in s.notes(room.token)}
    s.close()
    return {
        "integrity": ok,
        "acked": len(acked),
        "stored": len(texts),
        "acked_lost": len(set(acked) - texts),
    }


def _p95(xs):
    if not xs:
        return float("nan")
    xs = sorted(xs)
    return xs[min(len(xs) - 1, int(round(0.95 * (len(xs) - 1))))]


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=120.0)
    ap.add_argument("--people", type=int, default=20)
    ap.add_argument(
        "--browsers",
        type=int,
        default=2,
        help="followers that are Chromium pages (the rest are wire sessions)",
    )
    ap.add_argument("--skip-follow", action="store_true")
    ap.add_argument(
        "--only-follow",
        action="store_true",
        help="the following part alone (no notes at once, no crash)",
    )
    args = ap.parse_args(argv)
    tmp = tempfile.mkdtemp(prefix="bd-rooms-bench-")
    store_path = os.path.join(tmp, "rooms.sqlite")
    env = dict(os.environ, BALANCE_DESK_NOTES_PER_MINUTE="100000")
    proc, url, _ = start_server(["--store", store_path], env=env)
    try:
        fol = (
            None
            if args.skip_follow
            else asyncio.run(
                follow(url, store_path, args.seconds, args.people, args.browsers, proc.pid)
            )
        )
        notes = None if args.only_follow else asyncio.run(notes_at_once(url, store_path))
    finally:
        log = stop_server(proc)
    if "Traceback" in log:
        print(log[-3000:], file=sys.stderr)
    cr = None if args.only_follow else asyncio.run(crash(os.path.join(tmp, "crash.sqlite")))
    print(
        f"{os.cpu_count()} cores, one headless Chromium for every person, sample case ocean_cyclone"
    )
    figures = {}
    if fol is not None:
        pairs, every = fol["pairs"]["browser"] + fol["pairs"]["wire"], fol["every"]
        per = (fol["rss_n"] - fol["rss1"]) / max(fol["people"] - 1, 1)
        n_wire = fol["people"] - 1 - fol["browsers"]
        print(
            f"1. following: {fol['people']} people (the leader and {fol['browsers']} "
            f"followers in Chromium, {n_wire} followers on the wire), {fol['changes']} "
            f"changes in {args.seconds:.0f} s; {len(pairs)} follower updates seen, "
            f"{fol['missed']} not seen within the 2.5 s between changes"
        )
        for kind, xs in (
            ("all", pairs),
            ("browser", fol["pairs"]["browser"]),
            ("wire", fol["pairs"]["wire"]),
        ):
            if xs:
                print(
                    f"   delay per follower ({kind}): median "
                    f"{1e3 * statistics.median(xs):.0f} ms, 95th percentile "
                    f"{1e3 * _p95(xs):.0f} ms"
                )
        print(
            f"   delay until every follower had it: median "
            f"{1e3 * statistics.median(every) if every else float('nan'):.0f} ms, "
            f"95th percentile {1e3 * _p95(every):.0f} ms (goal < 1000)"
        )
        print(
            f"   server memory: {fol['rss1']:.0f} MB with the leader, {fol['rss_n']:.0f} MB "
            f"with {fol['people']} people: {per:.1f} MB per extra follower (goal < 20)"
        )
        figures.update(
            {
                "room_follow_browsers": fol["browsers"],
                "room_follow_browser_p95_ms": 1e3 * _p95(fol["pairs"]["browser"]),
            }
        )
        figures.update(
            {
                "room_follow_every_p95_ms": 1e3 * _p95(every),
                "room_follow_pair_p95_ms": 1e3 * _p95(pairs),
                "room_follow_missed": fol["missed"],
                "room_rss_per_follower_mb": per,
            }
        )
    if notes is None:
        for k, v in figures.items():
            print(f"figure {k} {v:.1f}" if isinstance(v, float) else f"figure {k} {v}")
        return 0
    print(
        f"2. notes at once: 10 people x 100 notes in {notes['seconds']:.1f} s; stored "
        f"{notes['stored']}, lost {notes['lost']}, twice {notes['duplicated']}"
    )
    print(
        f"3. crash: {cr['acked']} notes acknowledged before kill -9, {cr['stored']} in the "
        f"store after the restart; acknowledged but lost: {cr['acked_lost']}; SQLite "
        f"integrity check: {cr['integrity']}"
    )
    figures.update(
        {
            "room_notes_lost": notes["lost"],
            "room_notes_duplicated": notes["duplicated"],
            "room_crash_acknowledged_lost": cr["acked_lost"],
            "room_crash_integrity_ok": int(cr["integrity"] == "ok"),
        }
    )
    for k, v in figures.items():
        print(f"figure {k} {v:.1f}" if isinstance(v, float) else f"figure {k} {v}")
    ok = notes["lost"] == notes["duplicated"] == cr["acked_lost"] == 0 and cr["integrity"] == "ok"
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
