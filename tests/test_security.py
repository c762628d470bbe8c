"""The page under attack, in a real headless Chromium: no injected markup ever runs.

A corpus of payloads goes into every link parameter, into file names, file attributes,
variable names and the text of error messages. For each page: no dialog opens, no
console error, the page still shows a verdict, and the payload shows as text where the
page repeats it. The server's headers forbid framing by other origins and sniffing;
a page on a second local origin that frames the desk gets nothing.
"""

import os
import signal
import sys
import threading
import urllib.parse
import urllib.request
from http.server import BaseHTTPRequestHandler, HTTPServer

import numpy as np
import pytest

from app.state import MAX_QUERY_VALUE, URL_PARAMS
from testkit.chromium import open_tab, require, settled
from testkit.payloads import PAYLOADS, injected
from testkit.serving import HANG_MS, start_server, stop_server

pytestmark = pytest.mark.browser

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.join(HERE, "..")
SHOTS = os.path.join(ROOT, "artifacts", "screenshots")

require()


PARAMS = list(URL_PARAMS)  # every parameter a link carries


def test_the_corpus_is_large_enough():
    assert len(PAYLOADS) >= 30


def _start(args, cwd=ROOT):
    return start_server(args, cwd=cwd)


def _stop(proc):
    return stop_server(proc)


def _hostile_cases(tmp):
    """Case files whose names, attributes and variable names carry payloads."""
    sys.path.insert(0, HERE)
    from testkit.makedata import latlon_dataset

    lat = np.arange(60.0, 39.9, -2.0)
    lon = np.arange(-20.0, 20.1, 2.0)
    ds, _ = latlon_dataset(lat, lon)
    # a file name with markup (no slash: file names cannot hold one)
    name = "<img src=x onerror=alert(101)>"
    ds.to_netcdf(os.path.join(tmp, name + ".nc"))
    # attributes and variable names with markup
    ds2 = ds.rename({"height": "z<svg onload=alert(102)>"})  # a name must start with a letter
    ds2.attrs.update(
        title="<script>alert(103)</script>",
        suggested_box="<b>not a box</b>",
        scale_preset="<img src=x onerror=alert(104)>",
        geography="<script>alert(105)</script>",
    )
    ds2["ta"].attrs["long_name"] = "<img src=x onerror=alert(106)> potential temperature"
    ds2.to_netcdf(os.path.join(tmp, "attrs.nc"))
    # a broken file whose error message repeats markup from its attributes
    ds3 = ds.copy()
    ds3["height"].attrs["units"] = "<script>alert(107)</script>"
    ds3.to_netcdf(os.path.join(tmp, "badunits.nc"))
    return tmp


@pytest.fixture(scope="module")
def hostile_server(tmp_path_factory):
    d = _hostile_cases(str(tmp_path_factory.mktemp("hostile")))
    proc, url, port = _start(["--cases", d])
    yield url
    out = _stop(proc)
    assert "Traceback" not in out or "error id" in out


def _open(browser, url, wait_verdict=True):
    page = browser.new_page(viewport={"width": 1500, "height": 1000})
    dialogs, errors = [], []
    page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.goto(url)
    page.locator(".bd-chart-title").or_(page.get_by_text("could not be loaded")).first.wait_for(
        timeout=HANG_MS
    )
    if wait_verdict:
        page.locator(".bd-verdict").first.wait_for(timeout=HANG_MS)
    return page, dialogs, errors


def _body_text(page):
    """All text of the page, shadow roots included (Playwright's locators pierce them)."""
    return "\n".join(page.locator("div").all_inner_texts()[:1]) + page.evaluate(
        "() => { const out = []; const walk = n => { if (n.shadowRoot) walk(n.shadowRoot); "
        "for (const c of n.children || []) walk(c); if (n.nodeType === 1 && !n.children.length)"
        " out.push(n.textContent); }; walk(document.body); return out.join('\\n'); }"
    )


def test_every_payload_in_every_link_parameter_is_refused_as_text():
    """Each of the 34 payloads in each of the 13 parameters, through the parser the page
    uses: never taken, and the sentence repeats it as the page will show it."""
    from app.state import parse_query
    from balance_core.io.errors import printable

    for payload in PAYLOADS:
        for p in PARAMS:
            values, problems = parse_query({p: payload}, cases=["attrs"])
            assert p not in values, (p, payload)
            assert len(problems) == 1 and problems[0].startswith(f"the link's {p} "), problems
            if len(payload) <= MAX_QUERY_VALUE:  # a longer one is "too long", not repeated
                assert printable(payload)[:10] in problems[0], (p, payload, problems)


#: Pages of the browser test: page j puts payload (j * 13 + k) mod 34 into parameter k, so
#: three pages carry all 34 payloads (each parameter gets three), each in its own parameter.
PAGES = -(-len(PAYLOADS) // len(PARAMS))


def _page_payloads(j):
    return {p: PAYLOADS[(j * len(PARAMS) + k) % len(PAYLOADS)] for k, p in enumerate(PARAMS)}


def test_the_pages_carry_every_payload():
    carried = {v for j in range(PAGES) for v in _page_payloads(j).values()}
    assert carried == set(PAYLOADS)


@pytest.mark.parametrize("j", range(PAGES))
def test_payloads_in_the_link_parameters_stay_text(hostile_server, browser, j):
    from balance_core.io.errors import printable

    chosen = _page_payloads(j)
    page, dialogs, errors = _open(browser, hostile_server + "?" + urllib.parse.urlencode(chosen))
    settled(page)
    assert dialogs == [], dialogs
    assert errors == [], errors
    text = _body_text(page)
    lines = text.splitlines()
    # the page says, as text, that the link's values were not taken, one sentence each
    for p, payload in chosen.items():
        said = [line for line in lines if f"the link's {p} " in line]
        assert said and "default is shown" in said[0], (p, said)
        # as the page writes outside text: control and format characters (a right-to-left
        # override, a zero-width space) spelled out as escapes, so they cannot reorder it
        if len(payload) <= MAX_QUERY_VALUE:
            assert printable(payload)[:10] in said[0], (p, payload, said)
    # no element from a payload made it into the page's markup
    assert injected(page) == []
    os.makedirs(SHOTS, exist_ok=True)
    page.screenshot(path=os.path.join(SHOTS, f"security_link_{j:02d}.png"), full_page=False)
    page.close()


def test_file_names_attributes_and_variable_names_stay_text(hostile_server, browser):
    for case in ("<img src=x onerror=alert(101)>", "attrs"):
        page, dialogs, errors = _open(
            browser, hostile_server + "?" + urllib.parse.urlencode({"case": case})
        )
        open_tab(page, "Notes on the data")
        assert dialogs == [], (case, dialogs)
        assert errors == [], (case, errors)
        text = _body_text(page)
        if case == "attrs":
            assert "<svg onload=alert(102)>" in text  # the height's variable name, as text
            assert "alert(106)" in text  # a ruled-out variable's long name, as text
        else:
            assert "<img src=x onerror=alert(101)>" in text
        assert page.locator("img[src=x]").count() == 0
        page.close()


def test_an_error_message_with_markup_stays_text(hostile_server, browser):
    page, dialogs, errors = _open(browser, hostile_server + "?case=badunits", wait_verdict=False)
    page.locator("text=could not be loaded").first.wait_for(timeout=HANG_MS)
    assert dialogs == [] and errors == [], (dialogs, errors)
    assert "<script>alert(107)</script>" in _body_text(page)
    page.close()


def test_headers_forbid_framing_and_sniffing(hostile_server):
    for path in ("", "static/js/bokeh.min.js", "no-such-page"):
        try:
            r = urllib.request.urlopen(hostile_server + path, timeout=10)
            headers = r.headers
        except urllib.error.HTTPError as exc:
            headers = exc.headers
        csp = headers.get("Content-Security-Policy", "")
        assert "frame-ancestors 'self'" in csp and "object-src 'none'" in csp, path
        assert "default-src 'self'" in csp and "base-uri 'self'" in csp
        assert headers.get("X-Frame-Options") == "SAMEORIGIN"
        assert headers.get("X-Content-Type-Options") == "nosniff"


class _Framer(BaseHTTPRequestHandler):
    target = ""

    def do_GET(self):
        body = (
            f"<html><body><h1>another origin</h1><iframe id='f' src='{self.target}' "
            "width=800 height=600></iframe></body></html>"
        ).encode()
        self.send_response(200)
        self.send_header("Content-Type", "text/html")
        self.end_headers()
        self.wfile.write(body)

    def log_message(self, *a):
        pass


def test_another_origin_cannot_frame_the_desk(hostile_server, browser):
    _Framer.target = hostile_server
    httpd = HTTPServer(("127.0.0.1", 0), _Framer)
    port = httpd.server_address[1]
    t = threading.Thread(target=httpd.serve_forever, daemon=True)
    t.start()
    try:
        page = browser.new_page()
        # the frame has gone where it was sent (the desk, or the browser's error page)
        with page.expect_event(
            "framenavigated",
            predicate=lambda f: f.parent_frame is not None and f.url != "about:blank",
            timeout=HANG_MS,
        ) as went:
            page.goto(f"http://localhost:{port}/")  # another origin: another host and port
        went.value.wait_for_load_state("domcontentloaded")  # its text, if any, is there
        child = [f for f in page.frames if f != page.main_frame]
        assert child, "no frame"
        # the browser refuses to show the desk inside another origin's page
        content = (
            child[0].evaluate("() => document.body ? document.body.innerText : ''")
            if not child[0].url.startswith("chrome-error")
            else ""
        )
        assert "balance-desk" not in content
        assert child[0].url.startswith("chrome-error") or content == ""
        page.close()
    finally:
        httpd.shutdown()


def test_the_page_says_when_the_server_is_gone(browser):
    proc, url, port = _start([])
    try:
        page, dialogs, errors = _open(browser, url)
        banner = page.locator("#bd-lost")
        assert not banner.is_visible()
        os.kill(proc.pid, signal.SIGKILL)
        banner.wait_for(state="visible", timeout=HANG_MS)
        assert "no longer current" in banner.inner_text()
        os.makedirs(SHOTS, exist_ok=True)
        page.screenshot(path=os.path.join(SHOTS, "server_gone.png"))
        page.close()
    finally:
        proc.kill()
        proc.wait(timeout=10)
