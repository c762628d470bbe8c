"""Below the chart: the region through the levels and through the valid times, the a priori
scale sheet, and the notes on how the numbers were computed.

Each view draws what :mod:`app.compute` returns; the scale sheet writes its preset
and edits to the view state, so they travel in a link like every other control.
"""

from __future__ import annotations

import math

import numpy as np
import panel as pn
import param

from bokeh.models import (ColorBar, ColumnDataSource, FactorRange, Legend, LegendItem,
                          LinearColorMapper, Span)
from bokeh.plotting import figure

from balance_core.scales import PRESETS

from .. import vocab
from ..state import SHEET_SCALES, ViewState
from .look import BLUE, INK, MUTED, ORANGE, VERMILION, WIDGET_CSS, alert, esc, palette, style_figure

__all__ = ["Below"]

LEVEL_TERMS = ("pressure_gradient", "coriolis", "horizontal_advection", "tendency",
               "vertical_advection", "metric_uv", "residual", "acceleration", "centripetal")
UNITS = {"U": "m s-1", "W": "m s-1", "L": "m", "H": "m", "dP": "Pa", "rho": "kg m-3",
         "lat0": "degrees", "nu": "m2 s-1"}


class Below(pn.viewable.Viewer):
    """The tabs under the chart."""

    state = param.ClassSelector(class_=ViewState)

    def __init__(self, state, **params):
        super().__init__(state=state, **params)
        self._build_levels()
        self._build_times()
        self._build_sheet()
        self.notes = pn.pane.HTML("", sizing_mode="stretch_width")
        self.tabs = pn.Tabs(("Through the levels", self.levels_pane),
                            ("Through the times", self.times_pane),
                            ("A priori scale sheet", self.sheet),
                            ("Notes on the data", self.notes), dynamic=False,
                            sizing_mode="stretch_width", css_classes=["bd-live"])

    # -- through the levels ----------------------------------------------------------------
    def _build_levels(self):
        self.lev_src = ColumnDataSource(dict(term=[], level=[], value=[], text=[], ink=[]))
        self.lev_cls_src = ColumnDataSource(dict(term=[], level=[], text=[]))
        self.lev_mapper = LinearColorMapper(palette=palette("sequential"), low=-8, high=-2,
                                            nan_color="#e3e3e3")
        xs = [vocab.term_name(t) for t in LEVEL_TERMS] + ["balance"]
        f = figure(height=420, x_range=FactorRange(factors=xs),
                   y_range=FactorRange(factors=[]), tools="hover", toolbar_location=None,
                   sizing_mode="stretch_width", min_width=700,
                   title="Term magnitudes through the levels (log10 m s-2)",
                   tooltips=[("level", "@level"), ("term", "@term"), ("magnitude", "@text")])
        f.rect("term", "level", 0.96, 0.92, source=self.lev_src,
               fill_color={"field": "value", "transform": self.lev_mapper}, line_color=None)
        f.text("term", "level", text="text", source=self.lev_src, text_align="center",
               text_baseline="middle", text_font_size="14px", text_color="ink")
        f.text("term", "level", text="text", source=self.lev_cls_src, text_align="center",
               text_baseline="middle", text_font_size="15px", text_color=INK,
               text_font_style="bold")
        f.add_layout(ColorBar(color_mapper=self.lev_mapper, width=16,
                              major_label_text_font_size="14px",
                              major_label_text_color=INK), "right")
        f.xaxis.major_label_orientation = 0.45
        f.min_border_bottom = 110
        style_figure(f, "17px")
        self.levels_fig = f
        self.levels_status = pn.pane.HTML("", sizing_mode="stretch_width")
        self.levels_pane = pn.Column(self.levels_status, pn.pane.Bokeh(f), pn.pane.HTML(
            "<div style='font-size:15px'>Each row is one pressure level of the region at this "
            "valid time; the last column is the balance found there (no verdict where too few "
            "points are valid).</div>"), sizing_mode="stretch_width")

    def levels_progress(self, done, total):
        self.levels_status.object = alert(f"Computing the levels: {done} of {total} done...",
                                          "info") if done < total else ""

    def show_levels(self, data, error=None):
        if error or not data:
            self.levels_status.object = alert(f"Through the levels: {error}", "error")
            return
        self.levels_status.object = ""
        levels = [f"{r['level_hpa']:g} hPa" for r in data["rows"]][::-1]
        src = dict(term=[], level=[], value=[], text=[], ink=[])
        cls = dict(term=[], level=[], text=[])
        for r in data["rows"]:
            lv = f"{r['level_hpa']:g} hPa"
            for t in LEVEL_TERMS:
                m = (r.get("magnitudes") or {}).get(t)
                src["term"].append(vocab.term_name(t))
                src["level"].append(lv)
                src["value"].append(math.log10(m) if m else np.nan)
                src["text"].append(f"{m:.0e}" if m else "n/a")
            cls["term"].append("balance")
            cls["level"].append(lv)
            cls["text"].append(vocab.balance_name(r["balance"]) if r.get("balance") else "error")
        self.levels_fig.y_range.factors = levels
        vals = [v for v in src["value"] if np.isfinite(v)]
        if vals:
            self.lev_mapper.low, self.lev_mapper.high = math.floor(min(vals)), math.ceil(max(vals))
        lo, hi = self.lev_mapper.low, self.lev_mapper.high
        # dark text on light cells (n/a cells are light grey), white on dark ones
        src["ink"] = [INK if not np.isfinite(v) or (v - lo) / max(hi - lo, 1e-9) > 0.55
                      else "white" for v in src["value"]]
        self.lev_src.data = src
        self.lev_cls_src.data = cls
        self.levels_fig.height = 170 + 30 * len(levels)
        self.levels_fig.title.text = (f"Term magnitudes through the levels (log10 m s-2) - "
                                      f"{data['region']}, {data['when']}")

    # -- through the times ---------------------------------------------------------------
    def _build_times(self):
        self.times_src = ColumnDataSource(dict(t=[], ro=[], agf=[], label=[]))
        f = figure(height=360, x_axis_type="datetime", tools="hover", toolbar_location=None,
                   sizing_mode="stretch_width", min_width=700,
                   title="Through the valid times, for the region at this level",
                   tooltips=[("time", "@label"), ("local Rossby", "@ro{0.000}"),
                             ("ageostrophic fraction", "@agf{0.000}")])
        r1 = f.line("t", "ro", source=self.times_src, line_width=3, color=BLUE)
        r2 = f.scatter("t", "ro", source=self.times_src, size=10, color=BLUE)
        r3 = f.line("t", "agf", source=self.times_src, line_width=3, color=VERMILION,
                    line_dash="dashed")
        r4 = f.scatter("t", "agf", source=self.times_src, size=10, color=VERMILION,
                       marker="square")
        self.time_span = Span(location=0, dimension="height", line_color=ORANGE, line_width=4)
        f.add_layout(self.time_span)
        legend = Legend(items=[LegendItem(label="local Rossby number (median |zeta / f|)",
                                          renderers=[r1, r2]),
                               LegendItem(label="ageostrophic fraction (median |V - Vg| / |V|)",
                                          renderers=[r3, r4])],
                        label_text_font_size="15px", label_text_color=INK)
        f.add_layout(legend, "below")  # beside the data, never over the first point
        f.yaxis.axis_label = "dimensionless"
        style_figure(f)
        self.times_fig = f
        self.times_status = pn.pane.HTML("", sizing_mode="stretch_width")
        self.times_plot = pn.pane.Bokeh(f)
        self.times_pane = pn.Column(self.times_status, self.times_plot, pn.pane.HTML(
            "<div style='font-size:15px'>The orange line marks the valid time shown on the "
            "chart.</div>"), sizing_mode="stretch_width")

    def times_progress(self, done, total):
        self.times_status.object = alert(f"Computing the valid times: {done} of {total} "
                                         "done...", "info") if done < total else ""

    def show_times(self, data, error=None):
        if error or not data:
            self.times_status.object = alert(f"Through the times: {error}", "error")
            return
        ser = data["series"]
        if len(ser) < 2:
            s = ser[0] if ser else {}
            self.times_status.object = alert(
                "This case has one valid time only, so there is nothing to follow through the "
                "times" + (f" (local Rossby number {s['rossby_local']:.3g}, ageostrophic "
                           f"fraction {s['ageostrophic_fraction']:.3g})"
                           if s.get("rossby_local") is not None and
                           s.get("ageostrophic_fraction") is not None else "") + ".", "info")
            self.times_plot.visible = False
            return
        self.times_plot.visible = True
        self.times_status.object = ""
        t = [np.datetime64(s["time"].replace("Z", "")).astype("datetime64[ms]").astype(float)
             for s in ser]
        self.times_src.data = dict(t=t, ro=[np.nan if s["rossby_local"] is None else
                                            s["rossby_local"] for s in ser],
                                   agf=[np.nan if s["ageostrophic_fraction"] is None else
                                        s["ageostrophic_fraction"] for s in ser],
                                   label=[vocab.when(s["time"]) for s in ser])
        self.time_span.location = float(np.datetime64(data["current"].replace("Z", ""))
                                        .astype("datetime64[ms]").astype(float))
        pad = 0.04 * (t[-1] - t[0])
        self.times_fig.x_range.update(start=t[0] - pad, end=t[-1] + pad)
        self.times_fig.title.text = (f"Through the valid times, for the region at "
                                     f"{data['level_hpa']:g} hPa")

    # -- the a priori scale sheet ------------------------------------------------------------
    def _build_sheet(self):
        css = [WIDGET_CSS]
        self.w_preset = pn.widgets.Select(label="Preset", width=290, stylesheets=css,
                                          options={vocab.preset_name(k): k for k in PRESETS},
                                          value=self.state.preset)
        self.w_preset.param.watch(self._preset_to_state, "value")
        self.scale_inputs = {}
        for k in SHEET_SCALES:
            w = pn.widgets.FloatInput(label=f"{vocab.SCALE_NAMES.get(k, k)} ({UNITS[k]})",
                                      value=None, width=140, placeholder="preset",
                                      stylesheets=css)
            w.param.watch(self._scales_to_state, "value")
            self.scale_inputs[k] = w
        self.w_reset = pn.widgets.Button(label="Back to the preset", width=290, stylesheets=css)
        self.w_reset.on_click(lambda e: setattr(self.state, "sheet", {}))
        self.sheet_out = pn.pane.HTML("", sizing_mode="stretch_width")
        grid = pn.GridBox(*self.scale_inputs.values(), ncols=2, width=300)
        self.sheet = pn.Row(pn.Column(self.w_preset, grid, self.w_reset, width=310),
                            self.sheet_out, sizing_mode="stretch_width")

    def _preset_to_state(self, event):
        if event.new and event.new != self.state.preset:
            self.state.preset = event.new

    def _scales_to_state(self, event=None):
        edits = {k: float(w.value) for k, w in self.scale_inputs.items() if w.value is not None}
        if edits != dict(self.state.sheet or {}):
            self.state.sheet = edits

    def follow(self, names):
        """Show the state's preset and edits (after a change made anywhere)."""
        if "preset" in names and self.w_preset.value != self.state.preset:
            self.w_preset.value = self.state.preset
        if "sheet" in names:
            edits = self.state.sheet or {}
            for k, w in self.scale_inputs.items():
                if w.value != edits.get(k):
                    w.value = edits.get(k)

    def show_sheet(self, sh):
        def f(x, spec=".2e"):
            return "n/a" if x is None else format(x, spec)

        srows = "".join(
            f"<tr><td>{esc(r['label'])}{' (edited)' if r['edited'] else ''}</td>"
            f"<td style='text-align:right'>{f(r['sheet'])}</td>"
            f"<td style='text-align:right'>{f(r['from_box'])}</td></tr>" for r in sh["scales"])
        trows = "".join(
            f"<tr><td>{esc(r['label'])}</td><td style='text-align:right'>{f(r['sheet'])}</td>"
            f"<td style='text-align:right'>{f(r['from_box_scales'])}</td>"
            f"<td style='text-align:right'>{f(r['measured'])}</td>"
            f"<td style='color:{MUTED}'>{esc(r['data_label'])}</td></tr>" for r in sh["terms"])
        nums = ", ".join(f"{esc(vocab.NUMBERS.get(k, (k,))[0])} {f(v, '.2g')}"
                         for k, v in sh["numbers"].items())
        err = alert(sh["error"], "error") if sh["error"] else ""
        bv = sh.get("box_verdict") or {}
        self.sheet_out.object = (
            f"<div style='font-size:16px;color:{INK}'>"
            f"<p><b>Preset:</b> {esc(sh['preset_label'])} &mdash; <i>{esc(sh['source'])}</i></p>"
            f"{err}<div style='display:flex;gap:28px;flex-wrap:wrap'>"
            "<table><tr><th>scale</th><th>sheet</th><th>from the region</th></tr>"
            f"{srows}</table>"
            "<table><tr><th>term (m s-2)</th><th>sheet</th><th>region's scales</th>"
            f"<th>measured</th><th>measured as</th></tr>{trows}</table></div>"
            f"<p><b>Numbers from the sheet:</b> {nums}</p>"
            f"<p><b>The sheet says:</b> {esc(sh['verdict']['text'])}</p>"
            f"<p><b>The data in the region say:</b> {esc(bv.get('text', 'n/a'))}</p></div>")

    # -- notes --------------------------------------------------------------------------------
    def show_notes(self, rep, thresholds):
        if not rep:
            self.notes.object = ""
            return
        parts = ["<h4>How this region was computed</h4><ul>"]
        parts += [f"<li>{esc(n)}</li>" for n in rep.get("notes", [])]
        parts.append("</ul>")
        src = rep.get("sources") or {}
        if src:
            parts.append("<h4>Where each field came from</h4><ul>")
            for role, d in src.items():
                grib = (f", GRIB {d['grib_short_name']} (paramId {d['grib_param_id']}, "
                        f"{d['grib_type_of_level']})" if d.get("grib_short_name") else "")
                conv = (f", converted from {d['units_from']}" if d.get("units_from") and
                        d["units_from"] != d.get("units_to") else "")
                rot = f", {d['rotated']}" if d.get("rotated") else ""
                parts.append(f"<li>{esc(role)}: {esc(repr(d['variable']))} of {esc(d['file'])}, "
                             f"{esc(d['level_type'])}{esc(grib + conv + rot)}</li>")
            parts.append("</ul>")
        if rep.get("left_out"):
            parts.append("<h4>Found but left out</h4><ul>")
            parts += [f"<li>{esc(t)}</li>" for t in rep["left_out"].values()]
            parts.append("</ul>")
        if rep.get("residual_causes"):
            parts.append("<h4>What the residual may hold</h4><ul>")
            parts += [f"<li>{esc(c)}</li>" for c in rep["residual_causes"]]
            parts.append("</ul>")
        s = rep.get("scales") or {}
        if s:
            parts.append("<h4>Scales estimated from the region</h4><p>" +
                         esc(", ".join(f"{k} = {v:.3g}" for k, v in s.items())) + "</p><ul>")
            parts += [f"<li>{esc(k)}: {esc(t)}</li>"
                      for k, t in (rep.get("scales_recipe") or {}).items()]
            parts.append("</ul>")
        parts.append(f"<p>Verdict thresholds are the project's own choice (a balance holds at "
                     f"{thresholds.balanced:g} or less; at least {thresholds.min_points} valid "
                     f"points and {100 * thresholds.min_valid_share:.0f} % of the region for a "
                     "verdict); see DEVELOPERS.md.</p>")
        self.notes.object = f"<div style='font-size:16px;color:{INK}'>" + "".join(parts) + \
            "</div>"

    def __panel__(self):
        return self.tabs
