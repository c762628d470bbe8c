"""The controls: case, level, time, field, vectors, projection, units, smoothing, the region.

Each widget writes one parameter of the shared view state and follows it back,
so a change made elsewhere (a link, a drawn box, another participant) shows here.
"""

from __future__ import annotations

from functools import partial

import numpy as np
import panel as pn
import param

from balance_core.io import CaseError, iso

from .. import wording
from ..compute import has_sea_level as compute_has_sea_level
from ..state import (
    FIELDS,
    OVERLAYS,
    PROJECTIONS,
    SEA_LEVEL,
    VECTOR_STYLES,
    VECTORS,
    ViewState,
)
from .look import WIDGET_CSS, alert

__all__ = ["Controls"]

W = 250  # the column's width at every screen size


def _menu(label, table, value):
    """A menu of one of the state's tables (value -> the name shown)."""
    return pn.widgets.Select(
        label=label,
        width=W,
        stylesheets=[WIDGET_CSS],
        options={shown: v for v, shown in table.items()},
        value=value,
    )


class Controls(pn.viewable.Viewer):
    """The left column of the page."""

    state = param.ClassSelector(class_=ViewState)

    def __init__(self, library, state, **params):
        super().__init__(state=state, **params)
        self.library = library
        css = [WIDGET_CSS]
        self.w_case = pn.widgets.Select(
            label="Case", options=library.names, value=state.case, width=W, stylesheets=css
        )
        self.w_level = pn.widgets.Select(label="Level", width=W, stylesheets=css)
        self.w_time = pn.widgets.Select(label="Valid time", width=W, stylesheets=css)
        self.w_prev = pn.widgets.Button(label="< earlier", width=W // 2 - 5, stylesheets=css)
        #: looping through the valid times (app.desk.page.Page runs the loop)
        self.w_play = pn.widgets.Toggle(label="Play the times", width=W // 2 - 5, stylesheets=css)
        self.w_speed = pn.widgets.Select(
            options={"0.5 frames/s": 0.5, "1 frame/s": 1.0, "2 frames/s": 2.0},
            value=1.0,
            width=W // 2 - 5,
            stylesheets=css,
        )
        self.frames_note = pn.pane.HTML("", width=W, margin=(0, 5))
        self.w_next = pn.widgets.Button(label="later >", width=W // 2 - 5, stylesheets=css)
        self.w_field = _menu("Filled field", FIELDS, state.field)
        self.w_overlay = _menu("Contours of a second field", OVERLAYS, state.overlay)
        self.w_vectors = _menu("Vectors", VECTORS, state.vectors)
        self.w_vstyle = pn.widgets.RadioButtonGroup(
            label="Vectors drawn as",
            options={label: key for key, label in VECTOR_STYLES.items()},
            value=state.vector_style,
            width=W,
            stylesheets=css,
        )
        self.w_proj = _menu("Projection", PROJECTIONS, state.projection)
        self.w_hunits = pn.widgets.RadioButtonGroup(
            label="Heights",
            options=["m", "dam"],
            value=state.height_units,
            width=W // 2 - 5,
            stylesheets=css,
        )
        self.w_wunits = pn.widgets.RadioButtonGroup(
            label="Winds",
            options=["m/s", "kt"],
            value=state.wind_units,
            width=W // 2 - 5,
            stylesheets=css,
        )
        self.w_smooth = pn.widgets.FloatInput(
            label="Smoothing (km, 0 = none)",
            value=state.smooth_km,
            start=0,
            end=2000,
            step=25,
            width=W,
            stylesheets=css,
        )
        self.w_minlat = pn.widgets.FloatInput(
            label="Tropical mask (degrees)",
            value=state.min_lat,
            start=0,
            end=45,
            step=1,
            width=W,
            stylesheets=css,
        )
        self.w_box = [
            pn.widgets.FloatInput(label=n, width=W // 2 - 5, value=None, stylesheets=css)
            for n in ("West", "East", "South", "North")
        ]
        self.w_apply = pn.widgets.Button(
            label="Use this box", color="primary", width=W // 2 - 5, stylesheets=css
        )
        self.w_whole = pn.widgets.Button(label="Whole case", width=W // 2 - 5, stylesheets=css)
        self.box_alert = pn.pane.HTML("", width=W)
        for w, p in (
            (self.w_case, "case"),
            (self.w_field, "field"),
            (self.w_overlay, "overlay"),
            (self.w_vectors, "vectors"),
            (self.w_vstyle, "vector_style"),
            (self.w_proj, "projection"),
            (self.w_hunits, "height_units"),
            (self.w_wunits, "wind_units"),
            (self.w_smooth, "smooth_km"),
            (self.w_minlat, "min_lat"),
        ):
            w.param.watch(partial(self._to_state, p), "value")
        self.w_level.param.watch(self._level_widget, "value")
        self.w_time.param.watch(self._time_widget, "value")
        self.w_prev.on_click(lambda e: self.step_time(-1))
        self.w_next.on_click(lambda e: self.step_time(+1))
        self.w_apply.on_click(self.apply_box)
        self.w_whole.on_click(lambda e: self.state.clear_region())
        self.downloads_slot = pn.Column(width=W, margin=0)
        self.layout = pn.Column(
            self.w_case,
            self.w_level,
            self.w_time,
            pn.Row(self.w_prev, self.w_next),
            pn.Row(self.w_play, self.w_speed),
            self.frames_note,
            pn.pane.HTML(
                "<div class='bd-keys' style='font-size:14px'>Keys: &larr; &rarr; the valid "
                "time, &uarr; &darr; the level (up: toward lower pressure), space plays and pauses"
                "</div>",
                width=W,
                margin=(0, 5),
            ),
            self.w_field,
            self.w_overlay,
            self.w_vectors,
            self.w_vstyle,
            self.w_proj,
            pn.pane.HTML("<b>Heights and winds in</b>", margin=(8, 5, 0, 5)),
            pn.Row(self.w_hunits, self.w_wunits),
            self.w_smooth,
            self.w_minlat,
            pn.pane.HTML(
                "<h3 style='margin:10px 0 0 0'>Region</h3><div style='font-size:15px'>"
                "Drag on the chart to draw a region, or type one (degrees; west &gt; "
                "east crosses the date line).</div>",
                width=W,
                margin=(5, 5, 0, 5),
            ),
            pn.Row(self.w_box[0], self.w_box[1]),
            pn.Row(self.w_box[2], self.w_box[3]),
            pn.Row(self.w_apply, self.w_whole),
            self.box_alert,
            pn.pane.HTML(
                "<h3 style='margin:10px 0 0 0'>For the briefing</h3>", width=W, margin=(5, 5, 0, 5)
            ),
            self.downloads_slot,
            width=W + 15,
            margin=(0, 5),
        )
        self.sync_case()
        self.follow(set(ViewState.param) - {"name"})

    # -- widgets to the state ---------------------------------------------------------------
    def _to_state(self, name, event):
        if event.new is not None and getattr(self.state, name) != event.new:
            setattr(self.state, name, event.new)

    def _level_widget(self, event):
        if event.new is not None and self.state.level != event.new:
            self.state.level = float(event.new)

    def _time_widget(self, event):
        if event.new is not None and self.state.time != event.new:
            self.state.time = event.new

    def frames_progress(self, done, total):
        """Say how many frames of the loop are computed ahead."""
        self.frames_note.object = (
            ""
            if total is None or done >= total
            else f"<div style='font-size:14px'>Frames computed ahead: {done} of {total}</div>"
        )

    def step_time(self, d):
        opts = (
            list(self.w_time.options.values())
            if isinstance(self.w_time.options, dict)
            else list(self.w_time.options)
        )
        if not opts:
            return
        cur = self.state.time if self.state.time in opts else opts[0]
        i = min(max(opts.index(cur) + d, 0), len(opts) - 1)
        self.state.time = opts[i]

    def apply_box(self, event=None):
        vals = [w.value for w in self.w_box]
        if any(v is None for v in vals):
            self.box_alert.object = alert("Type all four edges of the box (degrees).")
            return
        w, e, s, n = vals
        try:
            self.state.set_box(w, e, s, n)
        except ValueError:
            self.box_alert.object = alert(
                "A box needs the south edge below the north edge, "
                "within -90 to 90 degrees, and longitudes within "
                "-360 to 360."
            )
            return
        self.box_alert.object = ""

    # -- the state to the widgets --------------------------------------------------------------
    def sync_case(self):
        """Level and time choices of the current case (empty for a case that failed)."""
        try:
            case = self.library.get(self.state.case)
        except CaseError:
            self.w_level.options, self.w_time.options = {}, {}
            return
        levels = {f"{p / 100:g} hPa": float(p / 100) for p in case.levels_pa}
        if compute_has_sea_level(case):
            levels["sea level"] = SEA_LEVEL
        self.w_level.options = levels
        refs = case.reference_times
        self.w_time.options = {
            wording.when(t, None if refs is None or np.isnat(refs[i]) else refs[i]): iso(t)
            for i, t in enumerate(case.times)
        }

    def follow(self, names):
        """Show the state's values (after a change made anywhere)."""
        s = self.state
        for w, p in (
            (self.w_case, "case"),
            (self.w_field, "field"),
            (self.w_overlay, "overlay"),
            (self.w_vectors, "vectors"),
            (self.w_vstyle, "vector_style"),
            (self.w_proj, "projection"),
            (self.w_hunits, "height_units"),
            (self.w_wunits, "wind_units"),
            (self.w_smooth, "smooth_km"),
            (self.w_minlat, "min_lat"),
        ):
            if p in names and w.value != getattr(s, p):
                w.value = getattr(s, p)
        if "case" in names:
            self.sync_case()
        levels = self.w_level.options.values() if isinstance(self.w_level.options, dict) else []
        if ("level" in names or "case" in names) and float(s.level) in levels:
            self.w_level.value = float(s.level)
        times = self.w_time.options.values() if isinstance(self.w_time.options, dict) else []
        if ("time" in names or "case" in names) and s.time in times:
            self.w_time.value = s.time
        if "region" in names:
            spec = s.region_spec()
            vals = [None] * 4 if spec is None else [round(v, 2) for v in spec.bounds_box]
            for w, v in zip(self.w_box, vals):
                w.value = v
            self.box_alert.object = ""
        n = len(times)
        i = list(times).index(s.time) if s.time in times else 0
        self.w_prev.disabled = n <= 1 or i == 0
        self.w_next.disabled = n <= 1 or i == n - 1

    def __panel__(self):
        return self.layout
