"""The balance-desk page: controls, the chart, the ranked terms, and the views below.

Layout (our own): controls on the left; the chart in the middle with the
region drawn on it; on the right the verdict sentence over the ranked term
magnitudes, the derived views, the candidate balances and the numbers; below,
tabs for the view through the levels, through the times, the a priori scale
sheet and the notes; a caution in the footer.

Each session has its own :class:`~app.state.ViewState` and Bokeh models; the
cases and the diagnostics are shared (:class:`~app.library.CaseLibrary`).
Work runs in the shared thread pool; results are applied to the models on the
session's own event loop, newest request wins.
"""

from __future__ import annotations

import html
import io
import json
import logging
import math
from functools import partial

import numpy as np
import panel as pn

from bokeh import events
from bokeh.models import (BoxSelectTool, ColorBar, ColumnDataSource, CustomJSTickFormatter,
                          FactorRange, HoverTool, LabelSet, LinearColorMapper, LogTicker,
                          PanTool, Range1d, ResetTool, SingleIntervalTicker, Span,
                          WheelZoomTool)
from bokeh.plotting import figure

from balance_core.io import CaseError, iso
from balance_core.scales import PRESETS
from balance_core.verdict import Thresholds

from . import compute
from .library import POOL, CaseLibrary
from .state import FIELDS, PROJECTIONS, URL_PARAMS, VECTORS, ViewState

log = logging.getLogger("balance_desk")

CAUTION = ("balance-desk is a diagnostic aid. Official forecasts and warnings come from the "
           "responsible meteorological service; local rules and licensed practice come first.")

# Okabe-Ito colours (safe for colour-blind readers) for lines and marks
ORANGE, SKY, GREEN, BLUE, VERMILION, PURPLE = ("#E69F00", "#56B4E9", "#009E73", "#0072B2",
                                               "#D55E00", "#CC79A7")

PRETTY = {
    "tendency": "local tendency", "horizontal_advection": "horizontal advection",
    "vertical_advection": "vertical advection", "metric_uv": "Earth curvature (uv)",
    "metric_uw": "Earth curvature (uw)", "coriolis": "Coriolis", "coriolis_w": "vertical Coriolis",
    "pressure_gradient": "pressure gradient", "residual": "residual", "acceleration":
    "total acceleration DV/Dt", "along_stream": "along-stream", "centripetal": "centripetal",
    "viscous": "viscous",
}

NUMBER_HELP = {
    "rossby": ("Rossby number", "", "U / (f0 L) from the box's scales: acceleration over Coriolis"),
    "rossby_local_median": ("local Rossby number", "", "median |zeta / f| in the box"),
    "ekman": ("Ekman number (effective)", "", "RMS residual / RMS Coriolis: friction over "
              "Coriolis if the residual is all friction"),
    "froude": ("Froude number", "", "U / (N H): flow speed over the speed of gravity waves"),
    "burger": ("Burger number", "", "(N H / (f0 L))^2: stratification against rotation"),
    "richardson_median": ("Richardson number", "", "median N^2 / |dV/dz|^2: below 1/4 shear "
                          "can overturn the layer"),
    "deformation_radius_km": ("deformation radius", "km", "N H / f0: the length at which "
                              "rotation and stratification matter equally"),
}

#: Document-wide CSS: Panel and Bokeh components size their text from --bokeh-font-size,
#: which crosses into their shadow roots; 16 px reads from across a briefing room.
GLOBAL_CSS = """
:root { --bokeh-font-size: 16px; }
html, body { font-size: 16px; }
"""

STYLE = """
.bd-header { font-size: 22px; font-weight: 600; }
.bd-caution { font-size: 16px; }
"""

FONT = {"axis": "16px", "tick": "15px", "title": "18px", "label": "15px"}


def _style_figure(fig, title_size=FONT["title"]):
    fig.title.text_font_size = title_size
    for ax in fig.axis:
        ax.axis_label_text_font_size = FONT["axis"]
        ax.major_label_text_font_size = FONT["tick"]
        ax.axis_label_text_font_style = "normal"
    fig.toolbar.logo = None
    return fig


def _log_bars(source, title, height, *, fill, ink):
    """Horizontal bars of magnitudes on a log axis, a priori diamonds, value labels.

    ``fill`` and ``ink`` are colours or column names of ``source`` (name, left, value,
    estimate, label).
    """
    f = figure(width=560, height=height, y_range=FactorRange(factors=[]), x_axis_type="log",
               x_range=Range1d(1e-8, 1e-2), title=title, tools="", toolbar_location=None)
    bars = f.hbar(y="name", left="left", right="value", height=0.62, source=source,
                  fill_color=fill, line_color=None)
    f.scatter("estimate", "name", source=source, marker="diamond", size=15, fill_color="white",
              line_color="black", line_width=2)
    f.add_layout(LabelSet(x="left", y="name", text="label", source=source, text_font_size="14px",
                          text_color=ink, x_offset=4, text_baseline="middle",
                          text_font_style="bold"))
    f.xaxis.formatter = CustomJSTickFormatter(code="return '1e' + Math.round(Math.log10(tick));")
    f.xaxis.ticker = LogTicker(desired_num_ticks=6)
    return f, bars


def _palette(kind):
    import colorcet as cc

    if kind == "diverging":
        return cc.CET_D1A if hasattr(cc, "CET_D1A") else cc.coolwarm  # blue-white-red, uniform
    from bokeh.palettes import Cividis256

    return Cividis256


class Dashboard(pn.viewable.Viewer):
    """One browser session's page."""

    def __init__(self, library: CaseLibrary, state: ViewState | None = None, **params):
        super().__init__(**params)
        self.library = library
        self.state = state or ViewState(case=library.names[0] if library.names else "")
        self.thresholds = Thresholds()
        self._gen = {"chart": 0, "box": 0, "levels": 0, "times": 0}
        self._doc = None
        self._report = None
        self._chart = None
        self._pending_profiles = False
        self._build()
        self._watcher = self.state.param.watch(self._on_state, list(URL_PARAMS))
        self._sync_case_options()

    # -- building the page ------------------------------------------------------------
    def _build(self):
        s = self.state
        self.w_case = pn.widgets.Select(label="Case", options=self.library.names, value=s.case,
                                        width=260)
        self.w_level = pn.widgets.Select(label="Pressure level", width=260)
        self.w_time = pn.widgets.Select(label="Valid time", width=260)
        self.w_prev = pn.widgets.Button(label="< earlier", width=125)
        self.w_next = pn.widgets.Button(label="later >", width=125)
        self.w_field = pn.widgets.Select(label="Filled field", width=260,
                                         options={v: k for k, v in FIELDS.items()}, value=s.field)
        self.w_vectors = pn.widgets.Select(label="Vectors", width=260,
                                           options={v: k for k, v in VECTORS.items()},
                                           value=s.vectors)
        self.w_proj = pn.widgets.Select(label="Projection", width=260,
                                        options={v: k for k, v in PROJECTIONS.items()},
                                        value=s.projection)
        self.w_hunits = pn.widgets.RadioButtonGroup(label="Heights", options=["m", "dam"],
                                                    value=s.height_units, width=125)
        self.w_wunits = pn.widgets.RadioButtonGroup(label="Winds", options=["m/s", "kt"],
                                                    value=s.wind_units, width=125)
        self.w_smooth = pn.widgets.FloatInput(label="Smoothing (km, 0 = none)", value=s.smooth_km,
                                              start=0, end=2000, step=25, width=260)
        self.w_minlat = pn.widgets.FloatInput(label="Tropical mask (degrees)", value=s.min_lat,
                                              start=0, end=45, step=1, width=260)
        self.w_box = [pn.widgets.FloatInput(label=n, width=125, value=None)
                      for n in ("West", "East", "South", "North")]
        self.w_apply = pn.widgets.Button(label="Use this box", color="primary", width=125)
        self.w_whole = pn.widgets.Button(label="Whole case", width=125)
        self.box_hint = pn.pane.Markdown("Drag on the chart to draw a box, or type one.",
                                         width=260, margin=(0, 5))
        for w, p in ((self.w_case, "case"), (self.w_field, "field"), (self.w_vectors, "vectors"),
                     (self.w_proj, "projection"), (self.w_hunits, "height_units"),
                     (self.w_wunits, "wind_units"), (self.w_smooth, "smooth_km"),
                     (self.w_minlat, "min_lat")):
            w.param.watch(partial(self._widget_to_state, p), "value")
        self.w_level.param.watch(self._level_widget, "value")
        self.w_time.param.watch(self._time_widget, "value")
        self.w_prev.on_click(lambda e: self._step_time(-1))
        self.w_next.on_click(lambda e: self._step_time(+1))
        self.w_apply.on_click(self._apply_box)
        self.w_whole.on_click(lambda e: self.state.clear_region())

        self.dl_png = pn.widgets.FileDownload(callback=self._export_png, filename="briefing.png",
                                              label="Briefing image (PNG)", width=260,
                                              color="success")
        self.dl_csv = pn.widgets.FileDownload(callback=self._export_csv, filename="terms.csv",
                                              label="Term table (CSV)", width=260)
        self.dl_json = pn.widgets.FileDownload(callback=self._export_json, filename="terms.json",
                                               label="Term table (JSON)", width=260)

        controls = pn.Column(
            self.w_case, self.w_level, self.w_time, pn.Row(self.w_prev, self.w_next),
            self.w_field, self.w_vectors, self.w_proj,
            pn.pane.Markdown("Heights and winds in", margin=(5, 5, 0, 5)),
            pn.Row(self.w_hunits, self.w_wunits), self.w_smooth, self.w_minlat,
            pn.pane.Markdown("### Region", margin=(10, 5, 0, 5)), self.box_hint,
            pn.Row(self.w_box[0], self.w_box[1]), pn.Row(self.w_box[2], self.w_box[3]),
            pn.Row(self.w_apply, self.w_whole),
            pn.pane.Markdown("### For the briefing", margin=(10, 5, 0, 5)),
            self.dl_png, self.dl_csv, self.dl_json, width=285)

        self.header = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["bd-header"])
        self.chart_alert = pn.pane.Alert("", alert_type="warning", visible=False,
                                         sizing_mode="stretch_width")
        self.box_alert = pn.pane.Alert("", alert_type="warning", visible=False,
                                       sizing_mode="stretch_width")
        self.chart_note = pn.pane.Markdown("", sizing_mode="stretch_width")
        self.chart_caption = pn.pane.HTML("", sizing_mode="stretch_width",
                                          styles={"font-size": "18px", "font-weight": "600"})
        self._build_chart()
        self._build_ranking()
        self._build_levels()
        self._build_times()
        self._build_sheet()
        self.notes = pn.pane.Markdown("", sizing_mode="stretch_width")
        self.verdict = pn.pane.HTML("", width=560)
        self.numbers = pn.pane.HTML("", width=560)
        self.unavailable = pn.pane.Markdown("", width=560)
        right = pn.Column(self.verdict, self.box_alert, self.rank_fig_pane, self.unavailable,
                          self.derived_fig_pane, self.bal_fig_pane, self.numbers, width=580)
        middle = pn.Column(self.chart_caption, self.chart_alert, self.chart_pane, self.chart_note)
        tabs = pn.Tabs(("Through the levels", self.levels_pane),
                       ("Through the times", self.times_pane),
                       ("A priori scale sheet", self.sheet),
                       ("Notes on the data", self.notes), dynamic=False)
        self.footer = pn.pane.HTML(f"<div class='bd-caution'><b>Caution.</b> {CAUTION}</div>",
                                   sizing_mode="stretch_width",
                                   styles={"background": "#fff3cd", "padding": "8px",
                                           "border-top": "2px solid #856404"})
        self.layout = pn.Column(self.header, pn.Row(controls, middle, right), tabs, self.footer,
                                sizing_mode="stretch_width", stylesheets=[STYLE])

    def _build_chart(self):
        self.img_src = ColumnDataSource(dict(image=[np.zeros((2, 2), np.float32)], x=[0], y=[0],
                                             dw=[1], dh=[1]))
        self.cont_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.clab_src = ColumnDataSource(dict(x=[], y=[], text=[]))
        self.vec_src = ColumnDataSource(dict(x0=[], y0=[], x1=[], y1=[], angle=[]))
        self.coast_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.land_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.grat_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.glab_src = ColumnDataSource(dict(x=[], y=[], text=[]))
        self.region_src = ColumnDataSource(dict(x=[], y=[]))
        self.hover_src = ColumnDataSource(dict(x=[], y=[], w=[], h=[], lon=[], lat=[], field=[],
                                               height=[], speed=[], direction=[]))
        self.mapper = LinearColorMapper(palette=_palette("sequential"), nan_color=(0, 0, 0, 0))
        fig = figure(width=860, height=620, tools="", toolbar_location="above",
                     title="", output_backend="canvas", x_range=Range1d(0, 1), y_range=Range1d(0, 1))
        fig.image(image="image", x="x", y="y", dw="dw", dh="dh", source=self.img_src,
                  color_mapper=self.mapper)
        # points with no data at the level (below the ground or missing): grey, drawn
        self.mask_src = ColumnDataSource(dict(image=[np.full((2, 2), np.nan, np.float32)],
                                              x=[0], y=[0], dw=[1], dh=[1]))
        fig.image(image="image", x="x", y="y", dw="dw", dh="dh", source=self.mask_src,
                  color_mapper=LinearColorMapper(palette=["#6f6f6f"], low=0, high=1,
                                                 nan_color=(0, 0, 0, 0)), global_alpha=0.6)
        fig.multi_line("xs", "ys", source=self.grat_src, line_color="#777777", line_alpha=0.6,
                       line_dash="dotted", line_width=1)
        fig.multi_line("xs", "ys", source=self.coast_src, line_color="#222222", line_width=1.6)
        fig.multi_line("xs", "ys", source=self.land_src, line_color="#5b3a1a", line_width=2.5,
                       line_dash="dashed")
        fig.multi_line("xs", "ys", source=self.cont_src, line_color="black", line_width=1.3)
        fig.segment("x0", "y0", "x1", "y1", source=self.vec_src, line_color="white",
                    line_width=3.5, line_alpha=0.8)
        fig.segment("x0", "y0", "x1", "y1", source=self.vec_src, line_color="black",
                    line_width=1.6)
        fig.scatter("x1", "y1", source=self.vec_src, marker="triangle", angle="angle", size=8,
                    fill_color="black", line_color="white", line_width=0.5)
        fig.line("x", "y", source=self.region_src, line_color="white", line_width=6)
        fig.line("x", "y", source=self.region_src, line_color=ORANGE, line_width=3.5)
        fig.add_layout(LabelSet(x="x", y="y", text="text", source=self.clab_src,
                                text_font_size="14px", text_align="center",
                                text_baseline="middle", background_fill_color="white",
                                background_fill_alpha=0.8))
        fig.add_layout(LabelSet(x="x", y="y", text="text", source=self.glab_src,
                                text_font_size="14px", text_color="#333333",
                                background_fill_color="white", background_fill_alpha=0.7))
        hover_r = fig.rect("x", "y", "w", "h", source=self.hover_src, fill_alpha=0.0,
                           line_alpha=0.0, hover_fill_alpha=0.08, hover_fill_color="white",
                           hover_line_alpha=0.0)
        self.hover = HoverTool(renderers=[hover_r], tooltips=[("", "")])
        self.box_tool = BoxSelectTool(renderers=[hover_r], description="Draw a region")
        fig.add_tools(self.box_tool, PanTool(), WheelZoomTool(), ResetTool(), self.hover)
        fig.toolbar.active_drag = self.box_tool
        fig.toolbar.active_scroll = None
        self.colorbar = ColorBar(color_mapper=self.mapper, width=18, title="",
                                 title_text_font_size="16px",
                                 major_label_text_font_size="15px", location=(0, 0),
                                 formatter=CustomJSTickFormatter(
                                     code="return Math.abs(tick) >= 1000 ? tick.toFixed(0) : "
                                          "+tick.toPrecision(3);"))
        self.colorbar_log = ColorBar(color_mapper=self.mapper, width=18, title="",
                                     title_text_font_size="16px", visible=False,
                                     major_label_text_font_size="15px", location=(0, 0),
                                     ticker=SingleIntervalTicker(interval=1),
                                     formatter=CustomJSTickFormatter(
                                         code="return '1e' + Math.round(tick);"))
        fig.add_layout(self.colorbar, "right")
        fig.add_layout(self.colorbar_log, "right")
        fig.on_event(events.SelectionGeometry, self._on_select)
        fig.grid.visible = False
        _style_figure(fig)
        self.chart_fig = fig
        self.chart_pane = pn.pane.Bokeh(fig)

    def _build_ranking(self):
        self.rank_src = ColumnDataSource(dict(name=[], left=[], value=[], estimate=[],
                                              color=[], label=[], ink=[]))
        f, bars = _log_bars(self.rank_src, "Terms, largest first", 420, fill="color", ink="ink")
        f.add_tools(HoverTool(renderers=[bars], tooltips=[("term", "@name"),
                                                          ("measured", "@label m s-2"),
                                                          ("a priori", "@estimate{0.0e} m s-2")]))
        f.xaxis.axis_label = "m s-2   (bars: measured; diamonds: a priori)"
        _style_figure(f)
        self.rank_fig = f
        self.rank_fig_pane = pn.pane.Bokeh(f)
        self.der_src = ColumnDataSource(dict(name=[], left=[], value=[], estimate=[], label=[]))
        d, _ = _log_bars(self.der_src, "Derived views, not part of the sum", 200, fill=SKY,
                         ink="black")
        _style_figure(d)
        self.der_fig = d
        self.derived_fig_pane = pn.pane.Bokeh(d)
        self.bal_src = ColumnDataSource(dict(name=[], value=[], color=[], label=[], x=[]))
        b = figure(width=560, height=240, y_range=FactorRange(factors=[]), x_range=(0, 1.6),
                   title="Balances: |sum of their terms| / |PGF|",
                   tools="", toolbar_location=None)
        b.hbar(y="name", left=0, right="value", height=0.6, source=self.bal_src,
               fill_color="color", line_color=None)
        b.add_layout(LabelSet(x="x", y="name", text="label", source=self.bal_src,
                              text_font_size="15px", text_baseline="middle", x_offset=6))
        self.bal_span = Span(location=self.thresholds.balanced, dimension="height",
                             line_color="black", line_dash="dashed", line_width=2)
        b.add_layout(self.bal_span)
        b.xaxis.axis_label = f"smaller holds better (dashed: {self.thresholds.balanced:g})"
        _style_figure(b, "16px")
        self.bal_fig = b
        self.bal_fig_pane = pn.pane.Bokeh(b)

    def _build_levels(self):
        self.lev_src = ColumnDataSource(dict(term=[], level=[], value=[], text=[], ink=[]))
        self.lev_cls_src = ColumnDataSource(dict(term=[], level=[], text=[]))
        self.lev_mapper = LinearColorMapper(palette=_palette("sequential"), low=-8, high=-2,
                                            nan_color="#dddddd")
        f = figure(width=1150, height=430, x_range=FactorRange(factors=[]),
                   y_range=FactorRange(factors=[]), tools="hover", toolbar_location=None,
                   title="Term magnitudes through the levels (log10 m s-2) and the balance at "
                         "each level",
                   tooltips=[("level", "@level"), ("term", "@term"), ("magnitude", "@text")])
        f.rect("term", "level", 0.96, 0.92, source=self.lev_src,
               fill_color={"field": "value", "transform": self.lev_mapper}, line_color=None)
        f.text("term", "level", text="text", source=self.lev_src, text_align="center",
               text_baseline="middle", text_font_size="15px", text_color="ink")
        f.text("term", "level", text="text", source=self.lev_cls_src, text_align="center",
               text_baseline="middle", text_font_size="15px", text_color="black",
               text_font_style="bold")
        f.add_layout(ColorBar(color_mapper=self.lev_mapper, width=16,
                              major_label_text_font_size="14px"), "right")
        f.xaxis.major_label_orientation = 0.5
        _style_figure(f)
        self.levels_fig = f
        self.levels_pane = pn.Column(pn.pane.Bokeh(f), pn.pane.Markdown(
            "Each row is one pressure level of the region at this valid time; the last column "
            "is the balance found there."))

    def _build_times(self):
        self.times_src = ColumnDataSource(dict(t=[], ro=[], agf=[], label=[]))
        f = figure(width=1150, height=360, x_axis_type="datetime", tools="hover",
                   toolbar_location=None,
                   title="Through the valid times, for the region at this level",
                   tooltips=[("time", "@label"), ("local Rossby", "@ro{0.000}"),
                             ("ageostrophic fraction", "@agf{0.000}")])
        f.line("t", "ro", source=self.times_src, line_width=3, color=BLUE,
               legend_label="local Rossby number (median |zeta / f|)")
        f.scatter("t", "ro", source=self.times_src, size=10, color=BLUE)
        f.line("t", "agf", source=self.times_src, line_width=3, color=VERMILION, line_dash="dashed",
               legend_label="ageostrophic fraction (median |V - Vg| / |V|)")
        f.scatter("t", "agf", source=self.times_src, size=10, color=VERMILION, marker="square")
        self.time_span = Span(location=0, dimension="height", line_color=ORANGE, line_width=4)
        f.add_layout(self.time_span)
        f.legend.location = "top_left"
        f.legend.label_text_font_size = "15px"
        f.yaxis.axis_label = "dimensionless"
        _style_figure(f)
        self.times_fig = f
        self.times_pane = pn.Column(pn.pane.Bokeh(f), pn.pane.Markdown(
            "The orange line marks the valid time shown on the chart."))

    def _build_sheet(self):
        self.w_preset = pn.widgets.Select(label="Preset", options=list(PRESETS),
                                          value=self.state.preset, width=280)
        self.w_preset.param.watch(partial(self._widget_to_state, "preset"), "value")
        self.scale_inputs = {}
        units = {"U": "m s-1", "W": "m s-1", "L": "m", "H": "m", "dP": "Pa", "rho": "kg m-3",
                 "lat0": "degrees", "nu": "m2 s-1"}
        for k, u in units.items():
            w = pn.widgets.FloatInput(label=f"{k} ({u})", value=None, width=135,
                                      placeholder="preset")
            w.param.watch(lambda e: self._refresh_sheet(), "value")
            self.scale_inputs[k] = w
        self.w_reset = pn.widgets.Button(label="Back to the preset", width=280)
        self.w_reset.on_click(self._reset_sheet)
        self.sheet_out = pn.pane.HTML("", sizing_mode="stretch_width")
        grid = pn.GridBox(*self.scale_inputs.values(), ncols=2, width=290)
        self.sheet = pn.Row(pn.Column(self.w_preset, grid, self.w_reset, width=300),
                            self.sheet_out)

    # -- state plumbing ------------------------------------------------------------------
    def _widget_to_state(self, name, event):
        if getattr(self.state, name) != event.new:
            setattr(self.state, name, event.new)

    def _level_widget(self, event):
        if event.new is not None and self.state.level != event.new:
            self.state.level = float(event.new)

    def _time_widget(self, event):
        if event.new is not None and self.state.time != event.new:
            self.state.time = event.new

    def _step_time(self, d):
        opts = list(self.w_time.options.values()) if isinstance(self.w_time.options, dict) \
            else list(self.w_time.options)
        if not opts:
            return
        cur = self.w_time.value if self.w_time.value in opts else opts[0]
        i = min(max(opts.index(cur) + d, 0), len(opts) - 1)
        self.w_time.value = opts[i]

    def _apply_box(self, event=None):
        vals = [w.value for w in self.w_box]
        if any(v is None for v in vals):
            self._show(self.box_alert, "Type all four edges of the box (degrees).")
            return
        w, e, s, n = vals
        if not -90 <= s < n <= 90:
            self._show(self.box_alert, "The south edge must lie below the north edge, within "
                       "-90 to 90 degrees.")
            return
        self.state.set_box(w, e, s, n)

    def _reset_sheet(self, event=None):
        for w in self.scale_inputs.values():
            w.value = None
        self._refresh_sheet()

    def apply_suggested_region(self):
        """The case's suggested box, if its file has one; else the whole case."""
        try:
            case = self.library.get(self.state.case)
        except CaseError:
            return
        box = case.attrs.get("suggested_box")
        try:
            b = json.loads(box) if box else None
        except ValueError:
            b = None
        if b and len(b) == 4:
            self.state.set_box(*b)
        else:
            self.state.clear_region()
        preset = case.attrs.get("scale_preset")
        if preset in PRESETS:
            self.state.preset = preset

    def _sync_case_options(self):
        """Level and time choices of the current case; a case that failed says so."""
        try:
            case = self.library.get(self.state.case)
        except CaseError as exc:
            self._show(self.chart_alert, str(exc))
            self.w_level.options, self.w_time.options = {}, {}
            return
        levels = {f"{p / 100:g} hPa": float(p / 100) for p in case.levels_pa}
        times = {iso(t).replace("T", " ").replace(":00Z", " UTC"): iso(t) for t in case.times}
        self.w_level.options = levels
        self.w_time.options = times
        if float(self.state.level) not in levels.values():
            self.state.level = 500.0 if 500.0 in levels.values() else list(levels.values())[0]
        if self.state.time not in times.values():
            self.state.time = list(times.values())[0]
        self.w_level.value = float(self.state.level)
        self.w_time.value = self.state.time

    def _on_state(self, *events_):
        names = {e.name for e in events_}
        s = self.state
        for w, p in ((self.w_case, "case"), (self.w_field, "field"), (self.w_vectors, "vectors"),
                     (self.w_proj, "projection"), (self.w_hunits, "height_units"),
                     (self.w_wunits, "wind_units"), (self.w_smooth, "smooth_km"),
                     (self.w_minlat, "min_lat"), (self.w_preset, "preset")):
            if p in names and w.value != getattr(s, p):
                w.value = getattr(s, p)
        if "case" in names:
            self._sync_case_options()
            if "region" not in names:
                self.apply_suggested_region()
        if "level" in names and self.w_level.value != s.level:
            self.w_level.value = float(s.level)
        if "time" in names and self.w_time.value != s.time:
            self.w_time.value = s.time
        if "region" in names:
            spec = s.region_spec()
            if spec and spec["kind"] == "box":
                for w, v in zip(self.w_box, spec["bounds"]):
                    w.value = v
        self.refresh(names)

    # -- computing off the event loop -------------------------------------------------------
    def refresh(self, names=None):
        """Recompute what the changed parameters affect."""
        names = set(names or URL_PARAMS)
        chart = {"case", "level", "time", "field", "vectors", "smooth_km", "min_lat",
                 "projection", "height_units", "wind_units"}
        box = {"case", "level", "time", "smooth_km", "min_lat", "region"}
        global_conformal = (self._chart is not None and self._chart.geom.kind == "conformal"
                            and self._chart.geom.grid is not None
                            and getattr(self._chart.geom.grid, "periodic", False))
        if names & chart or ("region" in names and (self._chart is None or global_conformal)):
            self._submit("chart", compute.chart_data, self._apply_chart)
        elif "region" in names:
            # only the outline moves: no new raster, contours or vectors to send
            self._submit("chart", self._outline, self._apply_outline)
        if names & box:
            # the ranking first; the views through the levels and times follow it
            self._submit("box", compute.box_data, self._apply_box_report)
            self._pending_profiles = True
        if "preset" in names:
            self._refresh_sheet()
        self._update_header()

    def _outline(self, library, snap):
        geom = self._chart.geom
        spec = snap.region_spec()
        if spec is None:
            return None
        return compute._region_outline(geom, compute.region_of(snap))

    def _apply_outline(self, xy, error):
        if error or xy is None:
            self.region_src.data = dict(x=[], y=[])
        else:
            self.region_src.data = dict(x=xy[0], y=xy[1])

    def _submit_profiles(self):
        if getattr(self, "_pending_profiles", False):
            self._pending_profiles = False
            self._submit("levels", compute.levels_data, self._apply_levels)
            self._submit("times", compute.times_data, self._apply_times)

    def _snapshot(self):
        return ViewState(**{k: v for k, v in self.state.param.values().items() if k != "name"})

    def _submit(self, kind, fn, apply):
        self._gen[kind] += 1
        gen = self._gen[kind]
        snap = self._snapshot()
        doc = self._doc or pn.state.curdoc

        def work():
            try:
                return ("ok", fn(self.library, snap))
            except CaseError as exc:
                return ("error", str(exc))
            except Exception as exc:  # noqa: BLE001 - the page keeps working; the log has it
                log.exception("%s view failed for %s", kind, snap.to_query())
                return ("error", f"Something went wrong computing this view "
                                 f"({type(exc).__name__}); the server log has the details.")

        def done(fut):
            result = fut.result()
            if self._gen[kind] != gen:
                return  # a newer request has been made
            if doc is not None and doc.session_context is not None:
                doc.add_next_tick_callback(partial(self._apply_result, kind, gen, apply, result))
            else:
                self._apply_result(kind, gen, apply, result)

        if doc is None or doc.session_context is None:
            done(_Done(work()))
        else:
            POOL.submit(work).add_done_callback(done)

    def _apply_result(self, kind, gen, apply, result):
        if self._gen[kind] != gen:
            return
        status, value = result
        try:
            apply(value if status == "ok" else None, None if status == "ok" else value)
        except Exception:  # noqa: BLE001
            log.exception("applying the %s view failed", kind)

    # -- applying results to the models -----------------------------------------------------
    @staticmethod
    def _show(alert, text):
        alert.object = text
        alert.visible = bool(text)

    def _apply_chart(self, cd, error):
        if error:
            self._show(self.chart_alert, error)
            return
        self._show(self.chart_alert, "")
        self._chart = cd
        g = cd.geom
        x0, x1, y0, y1 = g.extent
        fig = self.chart_fig
        data = cd.raster
        if cd.color_kind == "log":
            with np.errstate(invalid="ignore", divide="ignore"):
                data = np.where(data > 0, np.log10(data), np.nan).astype(np.float32)
            lo, hi = math.log10(cd.color_range[0]), math.log10(cd.color_range[1])
        else:
            lo, hi = cd.color_range
        self.colorbar.visible = cd.color_kind != "log"
        self.colorbar_log.visible = cd.color_kind == "log"
        self.mapper.palette = _palette("diverging" if cd.color_kind == "diverging" else "seq")
        self.mapper.low, self.mapper.high = float(lo), float(hi)
        self.img_src.data = dict(image=[data], x=[x0], y=[y0], dw=[x1 - x0], dh=[y1 - y0])
        blank = np.full((2, 2), np.nan, np.float32)
        self.mask_src.data = dict(image=[cd.masked if cd.masked is not None else blank],
                                  x=[x0], y=[y0], dw=[x1 - x0], dh=[y1 - y0])
        self.colorbar.title = self.colorbar_log.title = (
            f"{cd.field_label}" + (f" ({cd.units})" if cd.units else ""))
        lx, ly, lv, labels = cd.contours
        self.cont_src.data = dict(xs=lx, ys=ly)
        self.clab_src.data = dict(x=[a for a, _, _ in labels], y=[b for _, b, _ in labels],
                                  text=[f"{c:.0f}" for _, _, c in labels])
        if cd.vectors is not None:
            v = cd.vectors
            self.vec_src.data = dict(x0=v["x0"], y0=v["y0"], x1=v["x1"], y1=v["y1"],
                                     angle=v["angle"] - np.pi / 2)
        else:
            self.vec_src.data = dict(x0=[], y0=[], x1=[], y1=[], angle=[])
        cx, cy = cd.coast if cd.coast is not None else ([], [])
        self.coast_src.data = dict(xs=cx, ys=cy)
        lx2, ly2 = cd.land if cd.land is not None else ([], [])
        self.land_src.data = dict(xs=lx2, ys=ly2)
        gx, gy, glab = cd.graticule
        self.grat_src.data = dict(xs=gx, ys=gy)
        self.glab_src.data = dict(x=[a for a, _, _, _ in glab], y=[b for _, b, _, _ in glab],
                                  text=[t for _, _, t, _ in glab])
        if cd.region_xy is not None:
            self.region_src.data = dict(x=cd.region_xy[0], y=cd.region_xy[1])
        else:
            self.region_src.data = dict(x=[], y=[])
        h = cd.hover
        self.hover_src.data = {k: h[k] for k in ("x", "y", "w", "h", "lon", "lat", "field",
                                                 "height", "speed", "direction")}
        fu = f" {h['field_units']}" if h["field_units"] else ""
        self.hover.tooltips = [("lat, lon", "@lat{0.0}, @lon{0.0}"),
                               (cd.field_label, "@field{0,0.[000]}" + fu),
                               ("height", "@height{0} " + h["height_units"]),
                               ("wind", "@speed{0} " + h["wind_units"] + " from @direction{0} deg")]
        fig.x_range.start, fig.x_range.end = x0, x1
        fig.y_range.start, fig.y_range.end = y0, y1
        fig.x_range.reset_start, fig.x_range.reset_end = x0, x1
        fig.y_range.reset_start, fig.y_range.reset_end = y0, y1
        width = 860
        if g.kind == "plate_carree":
            aspect = (y1 - y0) / ((x1 - x0) * math.cos(math.radians(0.5 * (y0 + y1))))
            fig.xaxis.axis_label, fig.yaxis.axis_label = "longitude", "latitude"
            digits = ("var d = (ticks.length > 1 && Math.abs(ticks[1] - ticks[0]) < 1) ? "
                      "(Math.abs(ticks[1] - ticks[0]) < 0.1 ? 2 : 1) : 0; ")
            fig.xaxis.formatter = CustomJSTickFormatter(
                code=digits + "var x = ((tick + 180) % 360 + 360) % 360 - 180; "
                     "return Math.abs(x).toFixed(d) + (x < 0 ? 'W' : (x > 0 ? 'E' : ''));")
            fig.yaxis.formatter = CustomJSTickFormatter(
                code=digits + "return Math.abs(tick).toFixed(d) + "
                              "(tick < 0 ? 'S' : (tick > 0 ? 'N' : ''));")
            fig.axis.visible = True
        else:
            aspect = (y1 - y0) / (x1 - x0)
            fig.axis.visible = False
        fig.frame_width = width
        fig.frame_height = int(min(max(width * aspect, 320), 720))
        fig.title.text = ""
        self.chart_caption.object = (f"<span class='bd-chart-title'>{cd.title}</span> &middot; "
                                     f"{cd.field_label}, height contours ({cd.contour_units})")
        notes = [n for n in (cd.coast_note, cd.vector_label, f"Projection: {g.label}") if n]
        notes += cd.notes
        self.chart_note.object = "  \n".join(notes)

    def _apply_box_report(self, rep, error):
        try:
            self._show_box_report(rep, error)
        finally:
            self._submit_profiles()

    def _show_box_report(self, rep, error):
        self._report = rep
        if error:
            self._show(self.box_alert, error)
            self.verdict.object = ""
            self.rank_src.data = dict(name=[], left=[], value=[], estimate=[], color=[], label=[],
                                      ink=[])
            self.der_src.data = dict(name=[], left=[], value=[], estimate=[], label=[])
            self.bal_src.data = dict(name=[], value=[], color=[], label=[], x=[])
            self.numbers.object = ""
            self.unavailable.object = ""
            self._refresh_sheet()
            return
        self._show(self.box_alert, "")
        v = rep["verdict"]
        esc = html.escape
        title = "No verdict" if v["balance"] == "none" else v["balance"].capitalize()
        share = rep.get("valid_share")
        valid = (f"{rep['points']} of {rep.get('region_points', rep['points'])} points valid"
                 + (f" ({100 * share:.0f} %)" if share is not None else ""))
        why = (f"<div style='font-size:16px;margin-top:6px'><b>Why:</b> {esc(v['why'])}</div>"
               if v.get("why") else "")
        self.verdict.object = (
            f"<div class='bd-verdict' style='font-size:19px;line-height:1.35;"
            f"border-left:6px solid {ORANGE if v['balance'] != 'none' else '#6f6f6f'};"
            f"padding:6px 10px;background:#fafafa'><div style='font-size:24px;font-weight:700'>"
            f"{esc(title)}</div>{esc(v['text'])}{why}<div style='font-size:15px;color:#444;"
            f"margin-top:4px'>{esc(rep['region_text'])}, {valid}</div></div>")
        avail = [t for t in rep["terms"] if t["magnitude"] is not None]
        mags = [t["magnitude"] for t in avail] + [t["estimate"] for t in avail if t["estimate"]]
        mags = [m for m in mags if m and m > 0]
        hi = 10.0 ** math.ceil(math.log10(max(mags))) if mags else 1e-2
        # six decades below the largest: smaller terms sit at the left edge (their values are
        # in the JSON and CSV exports and on hover)
        lo = max(10.0 ** math.floor(math.log10(min(mags))) / 10 if mags else 1e-12, hi * 1e-6)
        names = [PRETTY.get(t["name"], t["name"]) for t in avail][::-1]
        pairs = {"pressure_gradient", "coriolis"}
        self.rank_fig.y_range.factors = names
        self.rank_src.data = dict(
            name=[PRETTY.get(t["name"]) for t in avail],
            left=[lo] * len(avail),
            value=[max(t["magnitude"], lo) for t in avail],
            estimate=[max(t["estimate"], lo) if t["estimate"] and t["estimate"] > 0 else np.nan
                      for t in avail],
            color=[BLUE if t["name"] in pairs else (VERMILION if t["name"] == "residual" else GREEN)
                   for t in avail],
            label=[(f"{t['magnitude']:.1e}" if t["magnitude"] > 0 else "0 (none in the data)")
                   if t["magnitude"] >= lo * 30 or t["magnitude"] == 0 else "" for t in avail],
            ink=["white" if t["magnitude"] >= lo * 30 else "black" for t in avail])
        self.rank_fig.x_range.start, self.rank_fig.x_range.end = lo, hi * 3
        self.unavailable.object = ("**Unavailable:** " + "; ".join(
            f"{PRETTY.get(t['name'])} ({t['note']})" for t in rep["unavailable"])
            if rep["unavailable"] else "")
        der = [t for t in rep["derived"] if t["magnitude"] is not None]
        self.der_fig.y_range.factors = [PRETTY[t["name"]] for t in der][::-1]
        self.der_src.data = dict(name=[PRETTY[t["name"]] for t in der], left=[lo] * len(der),
                                 value=[max(t["magnitude"], lo) for t in der],
                                 estimate=[max(t["estimate"], lo) if t["estimate"] else np.nan
                                           for t in der],
                                 label=[f"{t['magnitude']:.1e}" for t in der])
        self.der_fig.x_range.start, self.der_fig.x_range.end = lo, hi * 3
        bal = [(k, r) for k, r in rep["balances"].items() if r is not None]
        chosen = v["balance"]
        self.bal_fig.y_range.factors = [k for k, _ in bal][::-1]
        self.bal_src.data = dict(
            name=[k for k, _ in bal], value=[min(r, 1.55) for _, r in bal],
            color=[ORANGE if k == chosen else "#9e9e9e" for k, _ in bal],
            label=[f"{100 * r:.0f} %" + ("  <- verdict" if k == chosen else "") for k, r in bal],
            x=[min(r, 1.55) for _, r in bal])
        self.numbers.object = self._numbers_html(rep)
        self.notes.object = self._notes_md(rep)
        self._refresh_sheet()
        self._update_header()

    def _numbers_html(self, rep):
        rows = []
        explain = rep.get("explain", {})
        for k, (label, unit, meaning) in NUMBER_HELP.items():
            val = rep["numbers"].get(k)
            txt = "n/a" if val is None else (f"{val:.3g}")
            said = (f"<tr><td colspan='2' style='font-size:14px;color:#333;padding:0 0 6px 8px'>"
                    f"{html.escape(explain[k])}</td></tr>" if k in explain else "")
            rows.append(f"<tr title='{html.escape(meaning)}'><td style='padding:2px 12px "
                        f"2px 0;border-bottom:1px dotted #999'>{label}</td><td "
                        f"style='text-align:right'><b>{txt}</b> {unit}</td></tr>{said}")
        w = rep.get("winds", {})
        spd = w.get("speed_rms")
        gsp = w.get("geostrophic_speed_rms")
        k = 1 / compute.KT if self.state.wind_units == "kt" else 1.0
        u = self.state.wind_units
        extra = ""
        if spd is not None:
            extra = (f"<tr title='area-weighted RMS wind speed in the region'><td>wind speed</td>"
                     f"<td style='text-align:right'><b>{spd * k:.1f}</b> {u}</td></tr>")
        if gsp is not None:
            warn = (" <span style='color:#a00'>(far above the wind: geostrophy fails here)"
                    "</span>" if spd and gsp > 2 * spd else "")
            extra += (f"<tr title='geostrophic wind speed from the height gradient'><td>"
                      f"geostrophic speed</td><td style='text-align:right'><b>{gsp * k:.1f}</b> {u}"
                      f"{warn}</td></tr>")
        more = "".join(f"<li><b>{label}</b>: {html.escape(meaning)}</li>"
                       for k, (label, _, meaning) in NUMBER_HELP.items() if k not in explain)
        return ("<div style='font-size:16px'><b>Numbers</b>"
                "<table style='font-size:16px'>" + "".join(rows) + extra + "</table>"
                "<details style='font-size:15px'><summary>What the other numbers mean</summary>"
                f"<ul>{more}</ul></details></div>")

    def _notes_md(self, rep):
        lines = ["#### How this region was computed"]
        lines += [f"- {_md_text(n)}" for n in rep.get("notes", [])]
        src = rep.get("sources") or {}
        if src:
            lines.append("#### Where each field came from")
            for role, d in src.items():
                grib = (f", GRIB {d['grib_short_name']} (paramId {d['grib_param_id']}, "
                        f"{d['grib_type_of_level']})" if d.get("grib_short_name") else "")
                conv = (f", converted from {d['units_from']}" if d.get("units_from") and
                        d["units_from"] != d.get("units_to") else "")
                rot = f", {d['rotated']}" if d.get("rotated") else ""
                lines.append(f"- {_md_text(role)}: {_md_text(repr(d['variable']))} of "
                             f"{_md_text(d['file'])}, {_md_text(d['level_type'])}"
                             f"{_md_text(grib + conv + rot)}")
        if rep.get("left_out"):
            lines.append("#### Found but left out")
            lines += [f"- {_md_text(t)}" for t in rep["left_out"].values()]
        if rep.get("residual_causes"):
            lines.append("#### What the residual may hold")
            lines += [f"- {_md_text(c)}" for c in rep["residual_causes"]]
        s = rep.get("scales") or {}
        if s:
            lines.append("#### Scales estimated from the region")
            lines.append(", ".join(f"{k} = {v:.3g}" for k, v in s.items()))
            lines += [f"- {k}: {_md_text(t)}" for k, t in (rep.get("scales_recipe") or {}).items()]
        lines.append(f"\nVerdict thresholds are the project's own choice (balanced at or below "
                     f"{self.thresholds.balanced:g}); see DEVELOPERS.md.")
        return "\n".join(lines)

    def _apply_levels(self, data, error):
        if error or not data:
            self.levels_fig.title.text = f"Through the levels: {error}"
            return
        terms = ["pressure_gradient", "coriolis", "horizontal_advection", "tendency",
                 "vertical_advection", "metric_uv", "residual", "acceleration", "centripetal"]
        xs = [PRETTY[t] for t in terms] + ["balance"]
        levels = [f"{r['level_hpa']:g} hPa" for r in data["rows"]][::-1]
        src = dict(term=[], level=[], value=[], text=[], ink=[])
        cls = dict(term=[], level=[], text=[])
        for r in data["rows"]:
            lv = f"{r['level_hpa']:g} hPa"
            for t in terms:
                m = (r.get("magnitudes") or {}).get(t)
                src["term"].append(PRETTY[t])
                src["level"].append(lv)
                src["value"].append(math.log10(m) if m else np.nan)
                src["text"].append(f"{m:.0e}" if m else "n/a")
            cls["term"].append("balance")
            cls["level"].append(lv)
            cls["text"].append(r.get("balance") or r.get("error", "")[:30])
        self.levels_fig.x_range.factors = xs
        self.levels_fig.y_range.factors = levels
        vals = [v for v in src["value"] if np.isfinite(v)]
        if vals:
            self.lev_mapper.low, self.lev_mapper.high = math.floor(min(vals)), math.ceil(max(vals))
        lo, hi = self.lev_mapper.low, self.lev_mapper.high
        src["ink"] = ["black" if np.isfinite(v) and (v - lo) / max(hi - lo, 1e-9) > 0.55
                      else "white" for v in src["value"]]
        self.lev_src.data = src
        self.lev_cls_src.data = cls
        self.levels_fig.title.text = (f"Term magnitudes through the levels (log10 m s-2), "
                                      f"{data['region']}, {data['time']}")

    def _apply_times(self, data, error):
        if error or not data:
            self.times_fig.title.text = f"Through the times: {error}"
            return
        ser = data["series"]
        t = [np.datetime64(s["time"].replace("Z", "")).astype("datetime64[ms]").astype(float)
             for s in ser]
        self.times_src.data = dict(t=t, ro=[np.nan if s["rossby_local"] is None else
                                            s["rossby_local"] for s in ser],
                                   agf=[np.nan if s["ageostrophic_fraction"] is None else
                                        s["ageostrophic_fraction"] for s in ser],
                                   label=[s["time"] for s in ser])
        self.time_span.location = float(np.datetime64(data["current"].replace("Z", ""))
                                        .astype("datetime64[ms]").astype(float))

    def _refresh_sheet(self):
        overrides = {k: w.value for k, w in self.scale_inputs.items()}
        if overrides.get("lat0") is not None:
            overrides["f0"] = None
        sheet = compute.scale_sheet(self.state, overrides, self._report)
        self.sheet_out.object = self._sheet_html(sheet)

    def _sheet_html(self, sh):
        def f(x, spec=".2e"):
            return "n/a" if x is None else format(x, spec)

        srows = "".join(f"<tr><td>{r['name']}</td><td style='text-align:right'>{f(r['sheet'])}"
                        f"</td><td style='text-align:right'>{f(r['from_box'])}</td></tr>"
                        for r in sh["scales"])
        trows = "".join(
            f"<tr><td>{PRETTY.get(r['name'], r['name'])}</td><td style='text-align:right'>"
            f"{f(r['sheet'])}</td><td style='text-align:right'>{f(r['from_box_scales'])}</td>"
            f"<td style='text-align:right'>{f(r['measured'])}</td></tr>" for r in sh["terms"])
        nums = ", ".join(f"{k} {f(v, '.2g')}" for k, v in sh["numbers"].items())
        err = f"<p style='color:#a00'>{sh['error']}</p>" if sh["error"] else ""
        bv = sh.get("box_verdict") or {}
        return (
            "<div style='font-size:16px'>"
            f"<p><b>Preset:</b> {sh['preset']} &mdash; <i>{sh['source']}</i></p>{err}"
            "<div style='display:flex;gap:28px;flex-wrap:wrap'>"
            "<table><tr><th>scale</th><th>sheet</th><th>from the region</th></tr>"
            f"{srows}</table>"
            "<table><tr><th>term (m s-2)</th><th>sheet</th><th>region's scales</th>"
            f"<th>measured</th></tr>{trows}</table></div>"
            f"<p><b>Numbers from the sheet:</b> {nums}</p>"
            f"<p><b>The sheet says:</b> {sh['verdict']['text']}</p>"
            f"<p><b>The data in the region say:</b> {bv.get('text', 'n/a')}</p></div>")

    def _update_header(self):
        s = self.state
        rep = self._report or {}
        share = rep.get("valid_share")
        valid = (f" &middot; {100 * share:.0f} % of the region valid" if share is not None
                 else "")
        self.header.object = (
            f"<div style='display:flex;justify-content:space-between;align-items:baseline'>"
            f"<span style='font-size:26px;font-weight:700'>balance-desk</span>"
            f"<span style='font-size:19px'>{html.escape(s.case)} &middot; {s.level:g} hPa "
            f"&middot; {html.escape((s.time or '').replace('T', ' ').replace(':00Z', ' UTC'))} "
            f"&middot; {html.escape(s.region_text())}{valid}</span></div>")

    # -- drawing a box on the chart ------------------------------------------------------------
    def _on_select(self, event):
        geo = event.geometry
        if not getattr(event, "final", True) or geo.get("type") != "rect":
            return
        x0, x1 = sorted((geo["x0"], geo["x1"]))
        y0, y1 = sorted((geo["y0"], geo["y1"]))
        if self._chart is None or x1 - x0 <= 0 or y1 - y0 <= 0:
            return
        g = self._chart.geom
        if g.kind == "plate_carree":
            self.state.set_box(x0, x1, max(y0, -90), min(y1, 90))
        else:
            lons, lats = g.outline(x0, y0, x1, y1)
            ok = np.isfinite(lons) & np.isfinite(lats)
            if ok.sum() >= 4:
                self.state.set_polygon(np.asarray(lons)[ok], np.asarray(lats)[ok])

    # -- exports ----------------------------------------------------------------------------
    def _export_json(self):
        rep = self._report or {}
        return io.StringIO(json.dumps(_clean(rep), indent=2))

    def _export_csv(self):
        from .cli import format_analysis_csv

        if not self._report:
            return io.StringIO("no region report yet\n")
        return io.StringIO(format_analysis_csv(self._report))

    def _export_png(self):
        from .export import briefing_png

        return io.BytesIO(briefing_png(self._chart, self._report, self.state, CAUTION))

    # -- serving ---------------------------------------------------------------------------
    def bind_document(self, doc):
        self._doc = doc

    def __panel__(self):
        return self.layout


class _Done:
    """A finished future holding a value (for computing in line outside a server)."""

    def __init__(self, value):
        self._v = value

    def result(self):
        return self._v


def _md_text(text) -> str:
    """Text for a Markdown pane, shown as text: HTML escaped and Markdown marks made literal."""
    out = html.escape(str(text))
    for ch in "\\`*_{}[]()#+-!|>~":
        out = out.replace(ch, "\\" + ch)
    return out


def _clean(obj):
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if hasattr(obj, "item"):
        return obj.item()
    return obj


def make_session(library: CaseLibrary):
    """The page of one new browser session (the function pn.serve calls)."""
    if GLOBAL_CSS not in pn.config.raw_css:
        pn.config.raw_css.append(GLOBAL_CSS)
    state = ViewState(case=library.names[0] if library.names else "")
    # the request's query (a copied link): values arrive as lists of bytes
    query = {k: v for k, v in (pn.state.session_args or {}).items()}
    state.update_from_query(query)
    dash = Dashboard(library, state)
    dash.bind_document(pn.state.curdoc)
    loc = pn.state.location
    if "region" not in query:
        dash.apply_suggested_region()
    if loc is not None:
        loc.sync(state, {p: p for p in URL_PARAMS})
    dash.refresh()
    return dash.layout
