"""The desk page: its parts, one shared view state, and the work that keeps them current.

The parts (:mod:`.controls`, :mod:`.chart`, :mod:`.evidence`, :mod:`.below`,
:mod:`.downloads`) each own one part of the page and read or write one
:class:`~app.state.ViewState`. This module builds the page from them, turns a
change of the state into work -- submitted to the session's lane of the fair
pool (:mod:`app.work`), newest request first, the region's ranking before the
chart -- and applies each result on the session's own event loop, marking a
part busy from the moment its content is out of date until it is replaced.

A session costs no computation until its page asks for it: the first work is
started when the browser connects (``pn.state.onload``), so a plain GET of the
page builds the frame and nothing else.
"""

from __future__ import annotations

import logging
import time
import uuid
from functools import partial

import panel as pn
from bokeh.models import CustomJS
from panel.io.state import set_curdoc

from balance_core.io import CaseError, iso
from balance_core.scales import PRESETS
from balance_core.verdict import Thresholds

from .. import compute
from ..state import URL_PARAMS, ViewState, encode_query, level_text
from ..work import POOL
from .below import Below
from .chart import Chart
from .controls import Controls
from .downloads import Downloads
from .evidence import Evidence
from .look import CAUTION, GLOBAL_CSS, INK, INVENTED_BG, PRINT_CSS, alert, esc
from .systems import SystemsPanel

__all__ = ["Page", "make_session", "make_room_session", "error_page", "EarlyBuilds"]

log = logging.getLogger(__name__)

#: what redraws the chart (a new region only moves its outline, unless it must be drawn anew)
CHART = set(compute.CHART_KEYS) - {"region"}
BOX = set(compute.BOX_KEYS)
SYSTEMS = {"case", "level", "time", "smooth_km", "min_lat"}
#: the report is the same in other units: its numbers are only written again
UNITS = {"height_units", "wind_units"}

#: run in the browser once the page is there: the arrow keys step the valid time (left,
#: right) and the level (up: toward lower pressure, down: toward the ground), the space bar
#: plays and pauses the loop through the times, by working the
#: page's own controls, unless a field takes the keys (a box typed, a menu open) or a modifier
#: is held
KEYS_JS = """
if (window.bdKeys) return;
window.bdKeys = true;
const find = (root, test) => {
  for (const el of root.querySelectorAll('*')) {
    if (test(el)) return el;
    if (el.shadowRoot) { const hit = find(el.shadowRoot, test); if (hit) return hit; }
  }
  return null;
};
const typing = (ev) => ev.composedPath().some(
  el => el.tagName && ['INPUT', 'SELECT', 'TEXTAREA'].includes(el.tagName));
window.addEventListener('keydown', (ev) => {
  if (ev.altKey || ev.ctrlKey || ev.metaKey || ev.shiftKey || typing(ev)) return;
  if (ev.key === ' ') {
    // (a button with the focus takes its own space: it is clicked by the browser)
    if (ev.composedPath().some(el => el.tagName === 'BUTTON')) return;
    const b = find(document, el => el.tagName === 'BUTTON' &&
                   ['Play the times', 'Pause'].includes(el.textContent.trim()));
    if (b) { b.click(); ev.preventDefault(); }
  } else if (ev.key === 'ArrowLeft' || ev.key === 'ArrowRight') {
    const text = ev.key === 'ArrowLeft' ? '< earlier' : 'later >';
    const b = find(document, el => el.tagName === 'BUTTON' && el.textContent.trim() === text);
    if (b && !b.disabled) { b.click(); ev.preventDefault(); }
  } else if (ev.key === 'ArrowUp' || ev.key === 'ArrowDown') {
    const label = find(document, el => el.tagName === 'LABEL' && el.textContent.trim() === 'Level');
    const sel = label && find(label.parentNode, el => el.tagName === 'SELECT');
    if (!sel) return;
    const hpa = (o) => /sea level/i.test(o.textContent) ? 1e4 : parseFloat(o.textContent);
    const opts = [...sel.options].sort((a, b) => hpa(b) - hpa(a));  // the ground first
    const i = opts.indexOf(sel.options[sel.selectedIndex]);
    const j = i + (ev.key === 'ArrowUp' ? 1 : -1);
    if (j < 0 || j >= opts.length) return;
    sel.value = opts[j].value;
    sel.dispatchEvent(new Event('change', {bubbles: true}));
    ev.preventDefault();
  }
});
"""

#: run in the browser when the connection to the server is lost: say so, grey the figures
LOST_JS = """
if (!document.getElementById('bd-lost')) {
  const veil = document.createElement('div');  // greys what is no longer current
  veil.id = 'bd-lost-veil';
  veil.style.cssText = 'position:fixed;inset:0;z-index:9999;background:rgba(90,90,90,0.6);';
  document.body.appendChild(veil);
  const el = document.createElement('div');
  el.id = 'bd-lost';
  el.setAttribute('role', 'alert');
  el.style.cssText = 'position:fixed;top:0;left:0;right:0;z-index:10000;background:#7a0000;'
    + 'color:#ffffff;font-size:20px;font-weight:700;padding:12px 18px;';
  el.textContent = 'The connection to the balance-desk server is lost: what is shown below is '
    + 'no longer current. Reload the page when the server is back.';
  document.body.appendChild(el);
}
"""


def _error_id() -> str:
    return uuid.uuid4().hex[:8]


class Page(pn.viewable.Viewer):
    """One browser session's page."""

    def __init__(
        self,
        library,
        state: ViewState | None = None,
        *,
        pool=POOL,
        thresholds: Thresholds = Thresholds(),
        problems=(),
        **params,
    ):
        super().__init__(**params)
        #: the page writes its view to its link (not in a review room: its link is the room's)
        self.sync_link = True
        #: True while the page corrects its own state (a level the new case has, ...): such
        #: a change follows a person's change and is not one (see app.desk.room)
        self.correcting = False
        #: notes the briefing image carries (a review room's), see Downloads
        self.briefing_notes = []
        #: called after a new chart is drawn (a review room marks its notes on it)
        self.after_chart = []
        self.library = library
        self.state = state or ViewState(case=library.good[0] if library.good else "")
        self.thresholds = thresholds
        self.report = None
        self.doc = None
        self.live = False
        self._lane = pool.lane()
        self._gens = {}
        #: the views asked of the pool and not shown yet, and how many changes the page has
        #: followed: the page writes both into a hidden mark (see :meth:`_mark_pending`), the
        #: sign that it has settled that a test (or a script driving the page) waits on
        self._pending: set = set()
        self._step = 0
        self._started = False
        #: changes held back until the browser has the document (see :meth:`_held`)
        self._deferred: list = []
        self._room_views = 0  # views a review room sent (followed or not)
        self.settle_mark = pn.pane.HTML(self._mark_html(), visible=False, margin=0)
        self._stale: set = set()  # views of closed tabs that are out of date
        self.controls = Controls(library, self.state)
        #: the loop through the valid times: its periodic callback while it plays
        self._loop = None
        self.controls.w_play.param.watch(lambda e: self._play(e.new), "value")
        self.controls.w_speed.param.watch(lambda e: self._play(self.controls.w_play.value), "value")
        self.chart = Chart(self.state)
        self.evidence = Evidence(self.state, thresholds)
        self.below = Below(self.state)
        self.below.follow(set(URL_PARAMS))  # the sheet's preset and edits of a link
        self.downloads = Downloads(self)
        self.controls.downloads_slot.objects = [self.downloads]
        self.header = pn.pane.HTML("", sizing_mode="stretch_width")
        self.problems = pn.pane.HTML(
            alert("; ".join(problems)) if problems else "", sizing_mode="stretch_width"
        )
        footer = pn.pane.HTML(
            f"<div style='font-size:16px;color:{INK}'><b>Caution.</b> {esc(CAUTION)}</div>",
            sizing_mode="stretch_width",
            styles={"background": "#fff3cd", "padding": "8px", "border-top": "2px solid #856404"},
        )
        # a row that wraps: the evidence goes below the chart on a narrow screen (a plain
        # Row with CSS, not a FlexBox: that one is a template the browser lays out slowly).
        # Panel gives a stretching row the sum of its parts' minimum widths, as if it could
        # not wrap (and the page the row's): the two say their own minimum (the chart's) in an
        # inline style, which wins, so that at a narrow window or a high zoom the parts go
        # below one another instead of off to the side
        narrowest = {"min-width": "540px"}
        main = pn.Row(
            self.controls,
            self.chart,
            self.evidence,
            sizing_mode="stretch_width",
            styles={"flex-wrap": "wrap", "gap": "8px", "align-items": "flex-start", **narrowest},
            stylesheets=[PRINT_CSS],
        )
        self.chart.layout.styles = {"flex": "1 1 560px"}
        #: where a review room puts its bar (above the parts) and its notes (under the chart,
        #: in its column)
        self.top = pn.Column(sizing_mode="stretch_width", margin=0)
        self.middle = pn.Column(sizing_mode="stretch_width", margin=0)
        self.systems = SystemsPanel(self.state)
        self.systems.on_choose = self._system_chosen
        self.systems.w_marks.param.watch(lambda e: self._mark_systems(), "value")
        self.chart.tap_default = self._system_tapped
        self.chart.layout.append(self.systems)
        self.chart.layout.append(self.middle)
        self.layout = pn.Column(
            self.header,
            self.problems,
            self.top,
            main,
            self.below.tabs,
            footer,
            self.settle_mark,
            sizing_mode="stretch_width",
            styles=narrowest,
            stylesheets=[PRINT_CSS],
        )
        # printed, the page is the briefing: what steers it is left out (look.PRINT_CSS)
        for part in (self.controls.layout, self.below.tabs, self.top):
            part.css_classes = [*part.css_classes, "bd-no-print"]
        # the state the page last followed: the header names it, not a change still waiting
        # for its tick, so a view shown before that tick is never beside a newer header
        self._followed = self.state.copy()
        self._update_header()
        self._watcher = self.state.param.watch(self._on_state, list(URL_PARAMS))
        self.below.tabs.param.watch(self._tab_opened, "active")

    def detach(self):
        """Stop following the state (a closed session, or a benchmark timing one path)."""
        self.state.param.unwatch(self._watcher)
        self._lane.close()

    # -- the session ---------------------------------------------------------------------------
    def attach(self, doc):
        """Tie the page to its browser session (the server calls this)."""
        self.doc = doc
        doc.js_on_event("connection_lost", CustomJS(code=LOST_JS))
        doc.js_on_event("document_ready", CustomJS(code=KEYS_JS))
        doc.on_session_destroyed(lambda ctx: self._lane.close())

    def prime(self):
        """Start the first screen's two views (the region's ranking, the chart) while the
        browser loads the page: results that arrive before it asks for the document are part
        of the document, so its first paint has them."""
        if self._lane.pool.busy():
            # under load, work for a page nobody may ever open would delay everyone's: the
            # page starts its work when the browser connects (a plain fetch never does)
            return
        self._primed = True
        self.live = True  # a change made in the page from now on is computed at once
        self.refresh(set(URL_PARAMS), views=("box", "chart"))

    def start(self):
        """The page is in the browser: compute everything it shows (what :meth:`prime`
        started is not asked for again)."""
        self.live = True
        views = (
            ("systems", "levels", "times", "section") if getattr(self, "_primed", False) else None
        )
        if self.doc is not None and self.doc.session_context is not None:
            self._in_document(partial(self._start_views, views))
        else:
            self._start_views(views)

    def _start_views(self, views):
        self._started = True
        deferred, self._deferred = self._deferred, []
        for fn in deferred:  # what came in while the browser was fetching the document
            fn()
        self.settle_mark.object = self._mark_html()
        self.refresh(set(URL_PARAMS), views)

    # -- the state changed -----------------------------------------------------------------------
    def _on_state(self, *events):
        # Bokeh models may change only under the document's lock, which a callback of the
        # document's own next tick holds (a widget's event or another session's change may
        # arrive without it): the page follows the state there.
        self._later(partial(self._changed, {e.name for e in events}))

    def _changed(self, names):
        log.debug("page %s: %s changed", id(self), ",".join(sorted(names)))
        if "case" in names:
            self._case_changed(names)
        self._followed = self.state.copy()
        self.controls.follow(names)
        self.below.follow(names)
        self._sync_url()
        if self.live:
            self.refresh(names)
        self._update_header()

    def _case_changed(self, names):
        """A new case: the level it has nearest the one shown, its first time, its region."""
        try:
            case = self.library.get(self.state.case)
        except CaseError:
            return
        updates = {}
        near = compute.nearest_level_with_data(case, self.state.level)
        if near != self.state.level:
            updates["level"] = near
        times = [iso(t) for t in case.times]
        if self.state.time not in times:
            updates["time"] = times[0]
        if "region" not in names:
            updates.update(self.suggested(case))
        if updates:
            self.correcting = True
            try:
                self.state.param.update(**updates)
            finally:
                self.correcting = False

    @staticmethod
    def suggested(case) -> dict:
        """The case's suggested box and preset, where its file gives valid ones."""
        from ..cases import _suggested_box

        out = {"region": ""}
        b = _suggested_box(case.attrs)
        if b is not None:
            out["region"] = f"box:{','.join(f'{v:g}' for v in b)}"
        preset = case.attrs.get("scale_preset")
        if isinstance(preset, str) and preset in PRESETS:
            out["preset"] = preset
        return out

    def _sync_url(self):
        loc = pn.state.location if self.doc is not None else None
        if loc is None or not self.live or not self.sync_link:
            return
        try:
            import urllib.parse

            q = {k: v for k, v in encode_query(self.state.values()).items() if v != ""}
            search = "?" + urllib.parse.urlencode(q)
            if loc.search != search:
                loc.search = search
        except Exception:
            log.exception("could not update the page's link")

    # -- work -------------------------------------------------------------------------------------
    def refresh(self, names=None, views=None):
        """Recompute what the changed parameters affect (of ``views``: all by default)."""
        names = set(names or URL_PARAMS)
        views = set(views or ("box", "chart", "systems", "levels", "times", "section"))
        snap = self.state.copy()
        self._step += 1  # one more change followed (the mark is written below, or by a view)
        self.settle_mark.object = self._mark_html()
        # a view another session computed already (a review room's followers) is shown at
        # once: no busy mark, no trip through the pool
        ready = self.live and self.doc is not None
        if names & BOX and "box" in views:
            rep = compute.ready_box_data(self.library, snap, self.thresholds) if ready else None
            if rep is not None:
                self._cancel("box")
                self._apply("box", None, self._show_box, "ok", rep)
            else:
                self.evidence.busy(True)
                self._submit(
                    "box",
                    lambda: compute.shared_box_data(self.library, snap, self.thresholds),
                    self._show_box,
                )
        geom = self.chart.data.geom if self.chart.data is not None else None
        global_conformal = (
            geom is not None and geom.kind == "conformal" and getattr(geom.grid, "periodic", False)
        )
        if "chart" not in views:
            pass
        elif names & CHART or ("region" in names and (geom is None or global_conformal)):
            cd = compute.ready_chart_data(self.library, snap) if ready else None
            if cd is not None:
                self._cancel("chart")
                self._apply("chart", None, self._show_chart, "ok", cd)
            else:
                self.chart.busy(True)
                self._submit(
                    "chart", lambda: compute.shared_chart_data(self.library, snap), self._show_chart
                )
        elif "region" in names:
            # only the outline moves: no new raster, contours or vectors to send
            spec = snap.region_spec()
            self.chart.show_outline(None if spec is None else compute.region_outline(geom, spec))
        if names & SYSTEMS and "systems" in views:
            self.systems.busy()
            self._submit(
                "systems",
                lambda: compute.systems_data(self.library, snap, self.thresholds),
                self._show_systems,
            )
        if names & BOX or "line" in names:
            # the views through the levels and the times, and the section, are computed for
            # an open tab only; a closed one is brought up to date when it is opened
            for kind in ("levels", "times", "section"):
                if kind not in views or (kind != "section" and not names & BOX):
                    continue
                if self.below.is_open(kind):
                    self._submit_below(kind, snap)
                else:
                    self._stale.add(kind)
        if names & UNITS and not (names & BOX and "box" in views) and self.report:
            self.evidence.show(self.report)
        if names & UNITS and self.below.section_data is not None:
            self.below._draw_section()  # the section's speeds in the new units
        if names & UNITS and not names & SYSTEMS and self.systems.data is not None:
            self.systems.show(self.systems.data)
        if names & {"preset", "sheet"} and not names & BOX:
            self.below.show_sheet(compute.scale_sheet(self.state, self.report))

    def _submit_below(self, kind, snap=None):
        snap = snap or self.state.copy()
        self._stale.discard(kind)
        if kind == "levels":
            self.below.levels_progress(0, None)
            self._submit(
                "levels",
                lambda: compute.levels_data(
                    self.library, snap, progress=self._progress(self.below.levels_progress)
                ),
                self.below.show_levels,
            )
        elif kind == "section":
            self.below.section_progress(0, None)
            self._submit(
                "section",
                lambda: compute.section_data(
                    self.library, snap, progress=self._progress(self.below.section_progress)
                ),
                self._show_section,
            )
        else:
            self.below.times_progress(0, None)
            self._submit(
                "times",
                lambda: compute.times_data(
                    self.library, snap, progress=self._progress(self.below.times_progress)
                ),
                self.below.show_times,
            )

    # -- the loop through the valid times --------------------------------------------------
    def _play(self, on: bool):
        """Start (or restart at a new speed) or stop the loop. Starting it computes every
        valid time's chart and ranking ahead, in the page's lane after its own views, with
        progress; each tick then steps to the next time once the last frame is shown."""
        if self._loop is not None and self.doc is not None:
            try:
                self.doc.remove_periodic_callback(self._loop)
            except ValueError:
                pass  # the session has gone
        self._loop = None
        self.controls.w_play.label = "Pause" if on else "Play the times"
        if not on or self.doc is None or self.doc.session_context is None:
            self.controls.frames_progress(0, 0)
            return
        self._frames_ahead()
        period = int(1000 / float(self.controls.w_speed.value))
        self._loop = self.doc.add_periodic_callback(self.loop_step, period)

    def _frames_ahead(self):
        snap = self.state.copy()
        times = self._valid_times()
        report = self._progress(self.controls.frames_progress)
        self.controls.frames_progress(0, len(times))

        def make():
            for i, t in enumerate(times):
                frame = snap.copy()
                frame.time = t
                try:
                    compute.shared_chart_data(self.library, frame)
                    compute.shared_box_data(self.library, frame, self.thresholds)
                except CaseError:
                    pass  # that frame says why when it is shown
                report(i + 1, len(times))
            return len(times)

        self._submit("frames", make, lambda n: self.controls.frames_progress(n, n))

    def _valid_times(self) -> list:
        """The case's valid times as the state writes them (ISO 8601)."""
        return [iso(t) for t in self.library.get(self.state.case).times]

    def loop_step(self):
        """One tick of the loop: the next valid time (the first after the last), unless the
        chart or the ranking of the time shown is still on its way."""
        if self._pending & {"chart", "box"}:
            return
        times = self._valid_times()
        if len(times) < 2:
            return
        i = times.index(self.state.time) if self.state.time in times else 0
        self.state.time = times[(i + 1) % len(times)]

    def _show_section(self, data, error=None):
        """The section below, and its line on the chart while its tab is open."""
        self.below.show_section(data, error)
        self._section_line_on_chart()

    def _section_line_on_chart(self):
        data = self.below.section_data
        shown = self.below.is_open("section") and data is not None
        self.chart.show_section_line((data["lon"], data["lat"]) if shown else None)

    def _tab_opened(self, event):
        self._section_line_on_chart()  # (an old line is redrawn now and replaced when ready)
        for kind in list(self._stale):
            if self.below.is_open(kind) and self.live:
                self._submit_below(kind)
        self.settle_mark.object = self._mark_html()  # the tab the server has opened

    #: seconds between two progress reports of one view (each one costs the browser a layout)
    PROGRESS_EVERY = 0.5

    def _progress(self, show):
        last = [time.monotonic()]

        def report(done, total):
            now = time.monotonic()
            if done <= 0 or done >= total or now - last[0] < self.PROGRESS_EVERY:
                return  # the start is already shown, and the end replaces the line
            last[0] = now
            self._later(partial(show, done, total))

        return report

    def _later(self, fn):
        """Run ``fn`` on the document's next tick, its changes sent as one message."""
        if self.doc is not None and self.doc.session_context is not None:
            self.doc.add_next_tick_callback(partial(self._held, fn))
        else:
            fn()

    def _held(self, fn):
        """Run ``fn`` now, or, while the browser is fetching the document, when it has it.

        Between a browser's connection and its first paint (:meth:`start`) a change may be
        lost: Bokeh sends the document once asked for it, and a change made just after the
        document was taken can go out ahead of it, where the browser drops it (it counts on
        the document holding every change before it). A primed chart that finished then
        was never drawn: empty 0-1 axes beside a right header (seen under load, 2 in 22
        loads of conformal charts). Such changes wait for :meth:`start`; before any browser
        connects they go into the document as before."""
        if not self._started and _has_browser(self.doc):
            self._deferred.append(fn)
            return
        self._in_document(fn)

    def _in_document(self, fn):
        # the browser lays the page out once per message: one message per step, not per
        # property. A callback another session scheduled (a review room's hub) runs in that
        # session's context, where Panel would take the other document for the current one,
        # hold the wrong one and send each of this page's changes as a message of its own:
        # this page's document is made the current one first.
        with set_curdoc(self.doc), pn.io.hold(self.doc):
            fn()

    def _submit(self, kind, fn, show):
        inline = self.doc is None or self.doc.session_context is None
        if inline:  # no server (tests, exports): compute here
            try:
                self._apply(kind, None, show, "ok", fn())
            except Exception as exc:  # noqa: BLE001
                self._apply(kind, None, show, "error", exc)
            return

        def done(status, value, gen):
            if status != "stale":
                self._later(partial(self._apply, kind, gen, show, status, value))

        if log.isEnabledFor(logging.DEBUG):  # before the job can start (and end)
            s = self.state
            log.debug(
                "lane %s: %s asked for case=%s level=%s time=%s region=%s",
                self._lane.name,
                kind,
                s.case,
                level_text(s.level),
                s.time,
                s.region_text(),
            )
        # marked before it is submitted: a job that ends at once must find its mark to clear
        self._mark_pending(kind, True)
        self._gens[kind] = self._lane.submit(kind, fn, done)

    def _mark_html(self) -> str:
        pending = " ".join(sorted(self._pending))
        return (
            f"<span class='bd-settled' data-started='{int(self._started)}' "
            f"data-pending='{pending}' data-step='{self._step}' "
            f"data-tab='{self.below.tabs.active if hasattr(self, 'below') else 0}' "
            f"data-room='{self._room_views}'></span>"
        )

    def room_view_seen(self):
        """A review room sent its view (taken if this page follows): counted in the mark."""
        self._room_views += 1
        self.settle_mark.object = self._mark_html()

    def _mark_pending(self, kind, on: bool):
        """A view asked of the pool (``on``) or shown: the hidden mark says which views are
        still on their way (none: the page has settled)."""
        before = set(self._pending)
        (self._pending.add if on else self._pending.discard)(kind)
        if on or self._pending != before:
            self.settle_mark.object = self._mark_html()

    def _cancel(self, kind):
        """A view shown now: a result still on its way for an older request is dropped (and
        so is not waited for: that result's _apply returns before it could unmark it)."""
        self._gens[kind] = self._lane.supersede(kind)
        self._mark_pending(kind, False)

    def _apply(self, kind, gen, show, status, value):
        if gen is not None and self._gens.get(kind) != gen:
            return  # a newer request of this view was made
        try:
            if status == "ok":
                show(value)
            else:
                show(None, self._sentence(kind, value)) if kind in (
                    "levels",
                    "times",
                    "section",
                    "systems",
                    "life",
                ) else self._show_error(kind, self._sentence(kind, value))
        except Exception:
            eid = _error_id()
            log.exception("drawing the %s view failed (error id %s)", kind, eid)
            self._show_error(
                kind,
                f"This view could not be drawn (error id {eid}; the server log has the details).",
            )
        finally:
            self._mark_pending(kind, False)  # in the same message as the view

    def _sentence(self, kind, exc) -> str:
        if isinstance(exc, CaseError):
            return str(exc)
        eid = _error_id()
        log.error(
            "%s view failed for %s (error id %s)",
            kind,
            encode_query(self.state.values()),
            eid,
            exc_info=exc,
        )
        return (
            f"Something went wrong computing this view (error id {eid}); the server log has "
            "the details."
        )

    def _show_error(self, kind, text):
        if kind == "chart":
            self.chart.show_error(text)
        elif kind == "box":
            self.report = None
            self.evidence.show_error(text)
            self.below.show_notes(None, self.thresholds)
            self.below.show_sheet(compute.scale_sheet(self.state, None))
            self._update_header()
        elif kind == "frames":
            self.controls.frames_note.object = alert(f"The loop's frames: {text}")

    def _show_chart(self, cd):
        log.debug("page %s: chart shown", id(self))
        self.chart.show(cd)
        self._mark_systems()
        for fn in self.after_chart:
            fn()

    # -- the systems of the level ----------------------------------------------------------------
    def _show_systems(self, data, error=None):
        if data is None:
            self.systems.show_error(error or "The systems could not be found.")
            self.chart.show_systems([])
            return
        self.systems.show(data)
        self._mark_systems()
        self._life()

    def _mark_systems(self):
        self.chart.show_systems(self.systems.marks())

    def _system_chosen(self, s):
        """A system chosen in the list or on the chart: its region becomes the view's."""
        if s["region"] != self.state.region:
            self.state.region = s["region"]
        self._life()

    def _system_tapped(self, lon, lat):
        label = self.systems.pick_near(lon, lat)
        if label is not None:
            self.systems.w_list.value = label  # the list's watcher does the rest

    def _life(self):
        s = self.systems.chosen()
        if s is None:
            self.systems.show_life(None)
            return
        snap = self.state.copy()
        self.systems.show_life(None, "Following it through the valid times...")
        self._submit(
            "life",
            lambda: compute.system_life(self.library, snap, s["label"], self.thresholds),
            self._show_life,
        )

    def _show_life(self, life, error=None):
        if error:
            self.systems.show_life(None, error)
        elif life is None:
            self.systems.show_life(None, "It could not be followed through the valid times.")
        else:
            self.systems.show_life(life)

    def _show_box(self, rep):
        log.debug("page %s: ranking shown", id(self))
        self.report = rep
        self.evidence.show(rep)
        self.below.show_notes(rep, self.thresholds)
        self.below.show_sheet(compute.scale_sheet(self.state, rep))
        self._update_header()

    # -- the header ------------------------------------------------------------------------
    def _update_header(self):
        s = self._followed
        rep = self.report or {}
        when = ""
        try:
            sel = compute.resolve(self.library, s)
            when, level = sel.when, sel.level_hpa
        except CaseError:
            level = s.level
        share = rep.get("valid_share")
        rep_level = 0.0 if rep.get("level") == "msl" else rep.get("level_hpa")
        current = rep and rep_level == level and rep.get("region_text") == s.region_text()
        valid = (
            f" &middot; {100 * share:.0f} % of the region valid"
            if current and share is not None
            else ""
        )
        invented = ""
        try:
            if compute.case_facts(self.library.get(s.case))["invented"]:
                invented = (
                    f" <span style='background:{INVENTED_BG};color:#fff;padding:2px 8px;"
                    "border-radius:4px;font-size:16px;white-space:nowrap'>invented demo "
                    "data</span>"
                )
        except CaseError:
            pass
        self.header.object = (
            "<div style='display:flex;justify-content:space-between;align-items:baseline;"
            f"flex-wrap:wrap;gap:12px;color:{INK}'>"
            "<span style='font-size:26px;font-weight:700'>balance-desk</span>"
            f"<span class='bd-header' style='font-size:19px'>{esc(s.case)}{invented} &middot; "
            f"{esc(level_text(level))} "
            f"&middot; {esc(when)} &middot; {esc(s.region_text())}{valid}</span></div>"
        )

    def __panel__(self):
        return self.layout


def error_page(text: str):
    """A plain page with one sentence (a session that could not be built)."""
    return pn.Column(
        pn.pane.HTML(f"<h1>balance-desk</h1>{alert(text, 'error')}<p>{esc(CAUTION)}</p>"),
        sizing_mode="stretch_width",
    )


def _frame(text: str):
    """The page's frame before its parts arrive: the name, a loading line, the caution."""
    return pn.pane.HTML(
        f"<div style='color:{INK}'><div style='font-size:26px;font-weight:700'>balance-desk</div>"
        f"<div style='font-size:19px;margin:24px 0'>{esc(text)}</div>"
        f"<div style='background:#fff3cd;padding:8px;border-top:2px solid #856404;"
        f"font-size:16px'><b>Caution.</b> {esc(CAUTION)}</div></div>",
        sizing_mode="stretch_width",
    )


def _has_browser(doc) -> bool:
    """Whether a browser has connected to the document's session (its websocket is open)."""
    session = getattr(getattr(doc, "session_context", None), "_session", None)
    return bool(session is not None and getattr(session, "connection_count", 0))


def build_page(library, query: dict, thresholds: Thresholds = Thresholds(), doc=None) -> Page:
    """The page of a link's query: state parsed and validated, the case's defaults filled in.

    The state is complete before the page is made, so the page's first work is for the
    view it will show (a default filled in afterwards would start every view again).
    """
    state = ViewState(
        case=library.good[0] if library.good else (library.names[0] if library.names else "")
    )
    problems = state.update_from_query(query, cases=library.names)
    try:
        case = library.get(state.case)
    except CaseError:
        case = None
    if case is not None:
        if "region" not in query:  # a link without a region: the case's suggested one
            extra = Page.suggested(case)
            if "preset" in query:
                extra.pop("preset", None)
            state.param.update(**extra)
        times = [iso(t) for t in case.times]
        if state.time not in times:  # the first valid time when the link gives none
            state.time = times[0]
        asked = state.level
        linked = "level" in query and "level" in values_taken(query, problems)
        if linked:
            # the link's level, or the nearest the case has, said like any other value of
            # the link not taken; a level without data is shown if the link asks for it
            state.level = compute.nearest_level(case, state.level)
            if state.level != asked:
                problems = [
                    *problems,
                    f"the link's level {level_text(asked)} is not in this case; the nearest, "
                    f"{level_text(state.level)}, is shown",
                ]
        else:  # the case opens at the level nearest the default that has something to draw
            state.level = compute.nearest_level_with_data(case, state.level)
    page = Page(library, state, thresholds=thresholds, problems=problems)
    if doc is not None:
        page.attach(doc)
    return page


def values_taken(query: dict, problems) -> set:
    """The link's parameters that were taken (those without a sentence of their own)."""
    return {k for k in query if not any(p.startswith(f"the link's {k} ") for p in problems)}


class EarlyBuilds:
    """Whether a fetched page may be built before its browser connects.

    Building a page while the browser loads its scripts (about half a second) makes the
    first screen come sooner, but a page fetched by a script or monitor never connects,
    and building it is wasted work. So a client (its address and User-Agent, as for the
    page limit in :mod:`app.serve`) gets a page built early only while fewer than
    ``per_client`` of its early-built pages of the last ``window`` seconds still wait for
    their browser, and the whole server while fewer than ``limit`` do. A client that
    fetches pages in a loop gets them built when a browser connects -- never, for a
    script -- and a plain fetch costs a small frame; other people's pages come as fast
    as on an idle server.
    """

    def __init__(self, per_client: int = 2, limit: int = 8, window: float = 20.0):
        import threading

        self.per_client, self.limit, self.window = per_client, limit, window
        self._waiting: dict = {}  # page key -> (client, time)
        self._lock = threading.Lock()

    def take(self, client, key, now=None) -> bool:
        now = time.monotonic() if now is None else now
        with self._lock:
            for k, (_, t) in list(self._waiting.items()):
                if now - t > self.window:
                    del self._waiting[k]
            mine = sum(1 for c, _ in self._waiting.values() if c == client)
            if mine >= self.per_client or len(self._waiting) >= self.limit:
                return False
            self._waiting[key] = (client, now)
            return True

    def connected(self, key):
        with self._lock:
            self._waiting.pop(key, None)


EARLY = EarlyBuilds()


def _client(doc):
    """The client that fetched a page: its address and its browser's User-Agent."""
    try:
        req = doc.session_context.request
        return (getattr(req, "remote_ip", ""), (req.headers or {}).get("User-Agent", ""))
    except Exception:  # noqa: BLE001 - unknown: all such pages share one allowance
        return ("", "")


def make_session(
    library, thresholds: Thresholds = Thresholds(), early: EarlyBuilds = EARLY, hub=None
):
    """The page of one new browser session (the function the server calls per request).

    A GET gets the page's frame (its name, a loading line, the caution). The page's
    parts are built, and its first screen's views started, right after the GET's
    answer while the browser loads its scripts -- unless many fetched pages were
    never opened by a browser (:class:`EarlyBuilds`), in which case they are built
    when the browser connects (``pn.state.onload``). Either way the views through
    the levels and the times start when the browser is there. With a ``hub`` the
    page can open a review room on its view. Never raises: a failure shows one
    sentence with an error id, the server log the details.
    """

    def extend(page, doc):
        if hub is not None:
            from .room import RoomOpener

            page.controls.downloads_slot.objects = [page.downloads, RoomOpener(hub, page)]
        return None

    return _session(library, dict(pn.state.session_args or {}), thresholds, early, extend)


def make_room_session(
    library, hub, thresholds: Thresholds = Thresholds(), early: EarlyBuilds = EARLY
):
    """The page of a review room (``/room?room=TOKEN``): the desk page on the room's view,
    with the room's bar and notes; a person joins the room when their browser connects.
    A wrong or expired token gets a plain "no such room" page and nothing else."""
    from .room import NAME_COOKIE, WRITER_HEADER, RoomSession, no_such_room

    try:
        args = pn.state.session_args or {}
        raw = args.get("room", [b""])
        token = (raw[0] if isinstance(raw, (list, tuple)) and raw else raw) or b""
        token = token.decode("utf-8", "replace") if isinstance(token, bytes) else str(token)
        room = hub.room(token) if 0 < len(token) <= 100 else None
    except Exception:  # noqa: BLE001
        room = None
    if room is None:
        return no_such_room()
    query = dict(room.view) if room.view else {"case": room.case}
    try:
        import urllib.parse

        name = urllib.parse.unquote((pn.state.cookies or {}).get(NAME_COOKIE, ""))
    except Exception:  # noqa: BLE001 - no name: a guest
        name = ""

    try:
        writer = str((pn.state.headers or {}).get(WRITER_HEADER, ""))[:64]
    except Exception:  # noqa: BLE001 - none: only this page may change its notes
        writer = ""

    def extend(page, doc):
        session = RoomSession(hub, room.token, page, name, writer)
        if doc is not None:
            from bokeh.events import ConnectionLost

            # the page's socket closed (its tab closed, its browser gone): it leaves at once
            # and, if it steered, the next one takes over; the session itself is discarded
            # only later (unused_session_lifetime), which made a handover take a minute
            doc.on_event(ConnectionLost, lambda event: session.leave("its page closed"))
            doc.on_session_destroyed(lambda ctx: session.leave())
        return session.join

    return _session(library, query, thresholds, early, extend)


def _session(library, query, thresholds, early, extend):
    def failed():
        eid = _error_id()
        log.exception("could not build a page (error id %s)", eid)
        return error_page(
            f"The page could not be built (error id {eid}); the server log has the details."
        )

    try:
        if GLOBAL_CSS not in pn.config.raw_css:
            pn.config.raw_css.append(GLOBAL_CSS)
        doc = pn.state.curdoc
        if doc is None or doc.session_context is None:  # no browser: build and compute now
            page = build_page(library, query, thresholds)
            on_connect = extend(page, None)
            page.start()
            if on_connect is not None:
                on_connect()
            return page.layout
        # parts drawn later take Panel's stylesheets from this server too, not from
        # Panel's CDN (which the CSP blocks and an offline desk cannot reach)
        from panel.io.resources import get_dist_path

        doc._template_variables.setdefault("dist_url", get_dist_path(cdn=False))
        # the page's own minimum width, inline (see Page: Panel would sum its parts')
        holder = pn.Column(
            _frame("Loading the case..."),
            sizing_mode="stretch_width",
            styles={"min-width": "540px"},
        )
        built = []

        def build():
            if built:
                return built[0]
            try:
                page = build_page(library, query, thresholds, doc)
                on_connect = extend(page, doc)
                page.prime()
                with pn.io.hold(doc):
                    holder.objects = [page.layout]
            except Exception:  # noqa: BLE001
                page, on_connect = None, None
                holder.objects = [failed()]
            built.append((page, on_connect))
            return built[0]

        def connected():
            early.connected(id(doc))
            page, on_connect = build()
            if page is not None:
                page.start()
                if on_connect is not None:
                    try:
                        on_connect()
                    except Exception:
                        eid = _error_id()
                        log.exception("could not join the room (error id %s)", eid)
                        page.problems.object = alert(
                            f"Could not join the room (error id {eid}).", "error"
                        )

        if early.take(_client(doc), id(doc)):
            doc.add_next_tick_callback(build)
        pn.state.onload(connected)
        return holder
    except Exception:  # noqa: BLE001 - the page says one sentence, the log the rest
        return failed()
