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
from bokeh.models import ColumnDataSource, Legend, LegendItem, Span
from bokeh.plotting import figure

from balance_core.scales import PRESETS

from .. import wording
from ..state import SHEET_SCALES, ViewState, level_text
from .look import (
    BLUE,
    INK,
    MUTED,
    ORANGE,
    VERMILION,
    WIDGET_CSS,
    alert,
    esc,
    palette,
    style_figure,
    valid_time_ticks,
)

__all__ = ["Below"]

LEVEL_TERMS = (
    "pressure_gradient",
    "coriolis",
    "horizontal_advection",
    "tendency",
    "vertical_advection",
    "metric_uv",
    "residual",
    "acceleration",
    "centripetal",
)
UNITS = {
    "U": "m s-1",
    "W": "m s-1",
    "L": "m",
    "H": "m",
    "dP": "Pa",
    "rho": "kg m-3",
    "lat0": "degrees",
    "nu": "m2 s-1",
}


def _ink_on(hex_colour: str) -> str:
    """Black or white text, whichever contrasts more with the cell (WCAG relative luminance)."""
    rgb = [int(hex_colour[i : i + 2], 16) / 255 for i in (1, 3, 5)]
    lum = sum(
        w * (c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4)
        for w, c in zip((0.2126, 0.7152, 0.0722), rgb)
    )
    return "#000000" if (lum + 0.05) / 0.05 >= 1.05 / (lum + 0.05) else "#ffffff"


def levels_table(data) -> str:
    """The region through the levels as an HTML table: a cell per term and level, coloured
    by log10 of its magnitude (cividis), its value written in it; the balance last."""
    pal = palette("sequential")
    mags = [
        m
        for r in data["rows"]
        for t, m in (r.get("magnitudes") or {}).items()
        if m and t in LEVEL_TERMS
    ]
    lo = math.floor(math.log10(min(mags))) if mags else -8
    hi = math.ceil(math.log10(max(mags))) if mags else -2
    hi = max(hi, lo + 1)
    lo = max(lo, hi - 6)  # six decades: smaller values take the darkest colour

    def cell(m):
        if not m:
            return (
                "<td style='background:#e3e3e3;color:#1a1a1a;text-align:center;"
                "padding:4px 6px'>n/a</td>"
            )
        x = (math.log10(m) - lo) / (hi - lo)
        bg = pal[min(max(int(x * (len(pal) - 1)), 0), len(pal) - 1)]
        return (
            f"<td title='{m:.3g} m s-2' style='background:{bg};color:{_ink_on(bg)};"
            f"text-align:center;padding:4px 6px;font-variant-numeric:tabular-nums'>"
            f"{m:.0e}</td>"
        )

    head = "".join(
        f"<th scope='col' style='padding:4px 6px;font-weight:600;vertical-align:bottom'"
        f">{esc(wording.term_name(t))}</th>"
        for t in LEVEL_TERMS
    )
    rows = []
    for r in sorted(data["rows"], key=lambda r: r["level_hpa"]):
        bal = wording.balance_name(r["balance"]) if r.get("balance") else "error"
        rows.append(
            f"<tr><th scope='row' style='text-align:right;padding:4px 8px;"
            f"white-space:nowrap'>{r['level_hpa']:g} hPa</th>"
            + "".join(cell((r.get("magnitudes") or {}).get(t)) for t in LEVEL_TERMS)
            + f"<td style='padding:4px 8px;font-weight:700'>{esc(bal)}</td></tr>"
        )
    steps = 8
    scale = "".join(
        f"<span style='display:inline-block;width:34px;height:14px;background:"
        f"{pal[int(k / (steps - 1) * (len(pal) - 1))]}'></span>"
        for k in range(steps)
    )
    return (
        f"<div style='color:{INK}'><div style='font-size:17px;font-weight:700;margin:4px 0'>"
        f"Term magnitudes through the levels (m s-2) &middot; {esc(data['region'])}, "
        f"{esc(data['when'])}</div><div style='overflow-x:auto'>"
        "<table class='bd-levels' style='border-collapse:separate;border-spacing:2px;"
        "font-size:15px'>"
        f"<thead><tr><th></th>{head}<th scope='col' style='padding:4px 6px'>balance</th>"
        f"</tr></thead><tbody>{''.join(rows)}</tbody></table></div>"
        f"<div style='font-size:14px;margin-top:4px'>colour: 1e{lo} {scale} 1e{hi} m s-2 "
        "(log scale)</div></div>"
    )


#: the tabs below the chart, in their order
TAB_TITLES = {
    "levels": "Through the levels",
    "times": "Through the times",
    "section": "Section",
    "sheet": "A priori scale sheet",
    "notes": "Notes on the data",
}


class Below(pn.viewable.Viewer):
    """The tabs under the chart."""

    state = param.ClassSelector(class_=ViewState)

    def __init__(self, state, **params):
        super().__init__(state=state, **params)
        self._build_levels()
        self._build_times()
        self._build_section()
        self._build_sheet()
        self.notes = pn.pane.HTML("", sizing_mode="stretch_width")
        # only the open tab is in the page (the browser lays out less); what a closed tab
        # is given waits until it is opened (see _put)
        parts = {
            "levels": self.levels_pane,
            "times": self.times_pane,
            "section": self.section_pane,
            "sheet": self.sheet,
        }
        parts["notes"] = self.notes
        self.tabs = pn.Tabs(
            *((TAB_TITLES[k], parts[k]) for k in self.TAB),
            dynamic=True,
            sizing_mode="stretch_width",
            css_classes=["bd-live"],
        )
        tab = self.TAB
        self._tab_of = {id(p): tab["levels"] for p in (self.levels_status, self.levels_table)}
        self._tab_of.update(
            {
                id(self.times_status): tab["times"],
                id(self.section_status): tab["section"],
                id(self.section_verdicts): tab["section"],
                id(self.sheet_out): tab["sheet"],
                id(self.notes): tab["notes"],
            }
        )
        self._pending: dict = {}
        self.tabs.param.watch(self._opened, "active")

    #: each tab's number
    TAB = {k: i for i, k in enumerate(TAB_TITLES)}

    def is_open(self, view: str) -> bool:
        return self.tabs.active == self.TAB[view]

    def _put(self, pane, text):
        """Give an HTML pane its text now if its tab is open, else when the tab is opened.

        Panel draws a closed tab's parts afresh when it is opened; a text given to a part
        that is not in the page would take Panel's stylesheets from its CDN, which the
        page may not load.
        """
        if self._tab_of.get(id(pane), self.tabs.active) == self.tabs.active:
            self._pending.pop(id(pane), None)
            pane.object = text
        else:
            self._pending[id(pane)] = (pane, text)

    def _opened(self, event):
        for key, (pane, text) in list(self._pending.items()):
            if self._tab_of[key] == event.new:
                del self._pending[key]
                pane.object = text

    # -- through the levels ----------------------------------------------------------------
    def _build_levels(self):
        self.levels_status = pn.pane.HTML("", sizing_mode="stretch_width")
        self.levels_table = pn.pane.HTML(
            f"<div style='font-size:16px;color:{MUTED}'>Computing the levels...</div>",
            sizing_mode="stretch_width",
        )
        self.levels_data = None
        self.levels_csv = pn.widgets.FileDownload(
            callback=self._levels_csv,
            filename="levels.csv",
            label="Levels table (CSV)",
            width=250,
            disabled=True,
            stylesheets=[WIDGET_CSS],
        )
        self.levels_pane = pn.Column(
            self.levels_status,
            self.levels_table,
            self.levels_csv,
            pn.pane.HTML(
                "<div style='font-size:15px'>Each row is one pressure level of the region at this "
                "valid time: the colour and the number are the term's magnitude in m s-2 "
                "(log scale; grey: not available); the last column is the balance found there (no "
                "verdict where too few points are valid).</div>"
            ),
            sizing_mode="stretch_width",
        )

    def levels_progress(self, done, total):
        of = "" if total is None else f": {done} of {total} done"
        self._put(
            self.levels_status,
            alert(f"Computing the levels{of}...", "info") if total is None or done < total else "",
        )

    def show_levels(self, data, error=None):
        if error or not data:
            self._put(self.levels_status, alert(f"Through the levels: {error}", "error"))
            return
        self._put(self.levels_status, "")
        self._put(self.levels_table, levels_table(data))
        self.levels_data = data
        self.levels_csv.disabled = False

    def _levels_csv(self):
        """The levels table as CSV, named for its case, valid time and region."""
        import io

        from .. import report_files

        data = self.levels_data or {"rows": [], "case": self.state.case}
        context = {
            "case": data.get("case"),
            "level": "levels",
            "level_hpa": None,
            "valid_time": data.get("time"),
            "box": data.get("box"),
            "settings": {
                "smoothing_km": data.get("smooth_km"),
                "tropical_mask_deg": data.get("min_lat"),
            },
        }
        self.levels_csv.filename = f"{report_files.export_stem(context)}.csv"
        return io.StringIO(report_files.levels_csv(data, context))

    # -- through the times ---------------------------------------------------------------
    def _build_times(self):
        # the figure is made when it is first needed (the tab is opened): most pages never
        # open it, and a figure is the costliest part to build
        self.times_fig = None
        self.times_status = pn.pane.HTML("", sizing_mode="stretch_width")
        self.times_plot = pn.Column(sizing_mode="stretch_width")
        #: the region's verdict at each valid time, under the curves
        self.times_verdicts = pn.pane.HTML("", sizing_mode="stretch_width")
        self.times_pane = pn.Column(
            self.times_status,
            self.times_plot,
            self.times_verdicts,
            pn.pane.HTML(
                "<div style='font-size:15px'>The orange line marks the valid time shown on the "
                "chart.</div>"
            ),
            sizing_mode="stretch_width",
        )

    def _times_figure(self):
        if self.times_fig is not None:
            return self.times_fig
        self.times_src = ColumnDataSource(dict(t=[], ro=[], agf=[], label=[], verdict=[]))
        f = figure(
            height=360,
            x_axis_type="datetime",
            tools="hover",
            toolbar_location=None,
            sizing_mode="stretch_width",
            min_width=700,
            title="Through the valid times, for the region at this level",
            tooltips=[
                ("time", "@label"),
                ("verdict", "@verdict"),
                ("local Rossby", "@ro{0.000}"),
                ("ageostrophic fraction", "@agf{0.000}"),
            ],
        )
        r1 = f.line("t", "ro", source=self.times_src, line_width=3, color=BLUE)
        r2 = f.scatter("t", "ro", source=self.times_src, size=10, color=BLUE)
        r3 = f.line(
            "t", "agf", source=self.times_src, line_width=3, color=VERMILION, line_dash="dashed"
        )
        r4 = f.scatter("t", "agf", source=self.times_src, size=10, color=VERMILION, marker="square")
        self.time_span = Span(location=0, dimension="height", line_color=ORANGE, line_width=4)
        f.add_layout(self.time_span)
        legend = Legend(
            items=[
                LegendItem(label="local Rossby number (median |zeta / f|)", renderers=[r1, r2]),
                LegendItem(
                    label="ageostrophic fraction (median |V - Vg| / |V|)", renderers=[r3, r4]
                ),
            ],
            label_text_font_size="15px",
            label_text_color=INK,
        )
        f.add_layout(legend, "below")  # beside the data, never over the first point
        f.yaxis.axis_label = "dimensionless"
        f.xaxis.formatter = valid_time_ticks()
        style_figure(f)
        self.times_fig = f
        self.times_plot.objects = [pn.pane.Bokeh(f, sizing_mode="stretch_width")]
        return f

    # -- the section -----------------------------------------------------------------------
    #: what the section fills: key -> (label, units)
    SECTION_FIELDS = {
        "speed": ("wind speed", "wind"),
        "ratio": ("imbalance the region's balance leaves (% of the pressure gradient)", "%"),
    }

    def _build_section(self):
        self.section_fig = None
        self.section_data = None
        self.section_status = pn.pane.HTML("", sizing_mode="stretch_width")
        self.section_plot = pn.Column(sizing_mode="stretch_width")
        self.section_verdicts = pn.pane.HTML("", sizing_mode="stretch_width")
        num = dict(width=110, stylesheets=[WIDGET_CSS])
        self.w_line = [
            pn.widgets.FloatInput(label=n, value=None, step=1.0, **num)
            for n in ("From lon", "From lat", "To lon", "To lat")
        ]
        self.w_line_go = pn.widgets.Button(label="Show this line", width=150)
        self.w_line_region = pn.widgets.Button(label="The region's own line", width=170)
        self.w_section_field = pn.widgets.RadioButtonGroup(
            options={v[0].split(" (")[0]: k for k, v in self.SECTION_FIELDS.items()},
            value="speed",
            stylesheets=[WIDGET_CSS],
        )
        self.w_line_go.on_click(lambda e: self._line_typed())
        self.w_line_region.on_click(lambda e: setattr(self.state, "line", ""))
        self.w_section_field.param.watch(lambda e: self._draw_section(), "value")
        self.section_pane = pn.Column(
            pn.pane.HTML(
                "<div style='font-size:15px'>A vertical section along the great circle between "
                "two points (degrees; west and south negative), at this valid time: the field "
                "filled, potential temperature in black contours every 4 K, and the region's "
                "verdict at each level on the right. Without a line of its own it runs west to "
                "east across the middle of the region; through a chosen low or high from west "
                "to east, two radii of its region each side of its centre; across a chosen jet "
                "streak through its peak, from the left of the flow to the right.</div>"
            ),
            pn.Row(*self.w_line, self.w_line_go, self.w_line_region),
            self.w_section_field,
            self.section_status,
            self.section_plot,
            self.section_verdicts,
            sizing_mode="stretch_width",
        )

    def _line_typed(self):
        from ..inputs import InputError, parse_line
        from ..state import line_text

        values = [w.value for w in self.w_line]
        try:
            if any(v is None for v in values):
                raise InputError("a line needs both ends, each a longitude and a latitude")
            self.state.line = line_text(parse_line(values))
        except InputError as exc:
            self._put(self.section_status, alert(f"Section: {exc}", "error"))

    def _section_figure(self):
        if self.section_fig is not None:
            return self.section_fig
        from bokeh.models import ColorBar, LinearColorMapper

        self.section_src = ColumnDataSource(
            dict(left=[], right=[], top=[], bottom=[], value=[], text=[])
        )
        self.theta_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.section_mapper = LinearColorMapper(palette=palette("sequential"), nan_color="#d0d0d0")
        f = figure(
            height=380,
            tools="hover",
            toolbar_location=None,
            sizing_mode="stretch_width",
            min_width=700,
            tooltips=[("", "@text")],
        )
        f.quad(
            "left",
            "right",
            "top",
            "bottom",
            source=self.section_src,
            fill_color={"field": "value", "transform": self.section_mapper},
            # edged in their own colour: no pale seams between neighbouring cells
            line_color={"field": "value", "transform": self.section_mapper},
            line_width=0.6,
        )
        f.multi_line("xs", "ys", source=self.theta_src, line_color="black", line_width=1.3)
        self.section_bar = ColorBar(
            color_mapper=self.section_mapper,
            width=16,
            title_text_font_size="15px",
            major_label_text_font_size="14px",
        )
        f.add_layout(self.section_bar, "right")
        f.xaxis.axis_label = "distance along the line (km)"
        f.yaxis.axis_label = "pressure (hPa)"
        style_figure(f)
        self.section_fig = f
        self.section_plot.objects = [pn.pane.Bokeh(f, sizing_mode="stretch_width")]
        return f

    def section_progress(self, done, total):
        of = "" if total is None else f": {done} of {total} levels done"
        self._put(
            self.section_status,
            alert(f"Computing the section{of}...", "info") if total is None or done < total else "",
        )

    def show_section(self, data, error=None):
        if error or not data:
            self._put(self.section_status, alert(f"Section: {error}", "error"))
            self._put(self.section_verdicts, "")
            self.section_data = None  # no old section under the sentence, nor its line
            if self.section_fig is not None:
                self.section_src.data = {k: [] for k in self.section_src.data}
                self.theta_src.data = dict(xs=[], ys=[])
            return
        self.section_data = data
        for w, v in zip(self.w_line, data["line"]):
            w.value = round(float(v), 2)
        self._put(self.section_status, "")
        self._draw_section()

    def _draw_section(self):
        from ..compute import section_cells, theta_lines

        data = self.section_data
        if data is None:
            return
        f = self._section_figure()
        key = self.w_section_field.value
        cells = section_cells(data, key, self.state.wind_units)
        self.section_src.data = cells["cells"]
        self.section_mapper.low, self.section_mapper.high = cells["range"]
        self.section_bar.title = cells["title"]
        xs, ys = theta_lines(data)
        self.theta_src.data = dict(xs=xs, ys=ys)
        levels = data["levels_hpa"]
        f.y_range.start, f.y_range.end = float(cells["p_max"]), float(cells["p_min"])
        f.x_range.start, f.x_range.end = 0.0, float(data["distance_km"][-1])
        lon0, lat0, lon1, lat1 = data["line"]
        along = (
            f"{wording.lat(lat0)} {wording.lon(lon0)} to {wording.lat(lat1)} {wording.lon(lon1)}"
        )
        f.title.text = f"{along} \u00b7 {data['when']}"
        rows = "".join(
            f"<tr><th scope='row' style='text-align:right;padding:2px 8px'>{p:g} hPa</th>"
            f"<td style='padding:2px 8px'>{esc(wording.balance_name(v))}</td>"
            f"<td style='padding:2px 8px;color:{MUTED}'>"
            + (
                f"section shows what {esc(wording.balance_name(b))} leaves"
                if b and key == "ratio"
                else ""
            )
            + "</td></tr>"
            for p, v, b in zip(levels, data["verdicts"], data["balances"])
        )
        self._put(
            self.section_verdicts,
            f"<div style='font-size:15px;color:{INK}'><b>The region's verdict at each level</b>"
            f" ({esc(data['region'])}); the section runs from {esc(along)}, "
            f"{esc(data.get('line_why', ''))}"
            f"<table class='bd-section-verdicts'>{rows}</table></div>",
        )

    def times_progress(self, done, total):
        of = "" if total is None else f": {done} of {total} done"
        self._put(
            self.times_status,
            alert(f"Computing the valid times{of}...", "info")
            if total is None or done < total
            else "",
        )

    def show_times(self, data, error=None):
        if error or not data:
            self._put(self.times_status, alert(f"Through the times: {error}", "error"))
            self._put(self.times_verdicts, "")
            return
        ser = data["series"]
        if len(ser) < 2:
            s = ser[0] if ser else {}
            self._put(
                self.times_status,
                alert(
                    "This case has one valid time only, so there is nothing to follow through the "
                    "times"
                    + (
                        f" (local Rossby number {s['rossby_local']:.3g}, ageostrophic "
                        f"fraction {s['ageostrophic_fraction']:.3g})"
                        if s.get("rossby_local") is not None
                        and s.get("ageostrophic_fraction") is not None
                        else ""
                    )
                    + ".",
                    "info",
                ),
            )
            self.times_plot.visible = False
            self._put(self.times_verdicts, "")
            return
        self._times_figure()
        self.times_plot.visible = True
        self._put(self.times_status, "")
        t = [
            np.datetime64(s["time"].replace("Z", "")).astype("datetime64[ms]").astype(float)
            for s in ser
        ]
        self.times_src.data = dict(
            t=t,
            ro=[np.nan if s["rossby_local"] is None else s["rossby_local"] for s in ser],
            agf=[
                np.nan if s["ageostrophic_fraction"] is None else s["ageostrophic_fraction"]
                for s in ser
            ],
            label=[wording.when(s["time"]) for s in ser],
            verdict=[_verdict_text(s.get("balance")) for s in ser],
        )
        self._put(self.times_verdicts, verdicts_html(ser))
        self.time_span.location = float(
            np.datetime64(data["current"].replace("Z", "")).astype("datetime64[ms]").astype(float)
        )
        pad = 0.04 * (t[-1] - t[0])
        self.times_fig.x_range.update(start=t[0] - pad, end=t[-1] + pad)
        self.times_fig.title.text = (
            f"Through the valid times, for the region at {level_text(data['level_hpa'])}"
        )

    # -- the a priori scale sheet ------------------------------------------------------------
    def _build_sheet(self):
        css = [WIDGET_CSS]
        self.w_preset = pn.widgets.Select(
            label="Preset",
            width=290,
            stylesheets=css,
            options={wording.preset_name(k): k for k in PRESETS},
            value=self.state.preset,
        )
        self.w_preset.param.watch(self._preset_to_state, "value")
        self.scale_inputs = {}
        # a long name wraps inside its own column instead of running under the next one,
        # never inside its unit (no-break spaces and hyphens)
        wrap = css + [":host label { white-space: normal; }"]
        for k in SHEET_SCALES:
            unit = UNITS[k].replace(" ", "\u00a0").replace("-", "\u2011")
            w = pn.widgets.FloatInput(
                label=f"{wording.SCALE_NAMES.get(k, k)} ({unit})",
                value=None,
                width=140,
                placeholder="preset",
                stylesheets=wrap,
            )
            w.param.watch(self._scales_to_state, "value")
            self.scale_inputs[k] = w
        self.w_reset = pn.widgets.Button(label="Back to the preset", width=290, stylesheets=css)
        self.w_reset.on_click(lambda e: setattr(self.state, "sheet", {}))
        self.sheet_out = pn.pane.HTML("", sizing_mode="stretch_width")
        grid = pn.GridBox(*self.scale_inputs.values(), ncols=2, width=300)
        self.sheet = pn.Row(
            pn.Column(self.w_preset, grid, self.w_reset, width=310),
            self.sheet_out,
            sizing_mode="stretch_width",
        )

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
            f"<td style='text-align:right'>{f(r['from_box'])}</td></tr>"
            for r in sh["scales"]
        )
        trows = "".join(
            f"<tr><td>{esc(r['label'])}</td><td style='text-align:right'>{f(r['sheet'])}</td>"
            f"<td style='text-align:right'>{f(r['from_box_scales'])}</td>"
            f"<td style='text-align:right'>{f(r['measured'])}</td>"
            f"<td style='color:{MUTED}'>{esc(r['data_label'])}</td></tr>"
            for r in sh["terms"]
        )
        nums = ", ".join(
            f"{esc(wording.NUMBERS[k][0])} {f(v, '.2g')}"
            + (f" {esc(wording.NUMBERS[k][1])}" if wording.NUMBERS[k][1] else "")
            for k, v in sh["numbers"].items()
        )
        err = alert(sh["error"], "error") if sh["error"] else ""
        bv = sh.get("box_verdict") or {}
        self._put(
            self.sheet_out,
            (
                f"<div style='font-size:16px;color:{INK}'>"
                f"<p><b>Preset:</b> {esc(sh['preset_label'])} &mdash; "
                f"<i>{esc(sh['source'])}</i></p>"
                f"{err}<div style='display:flex;gap:28px;flex-wrap:wrap'>"
                "<table><tr><th>scale</th><th>sheet</th><th>from the region</th></tr>"
                f"{srows}</table>"
                "<table><tr><th>term (m s-2)</th><th>sheet</th><th>region's scales</th>"
                f"<th>measured</th><th>measured as</th></tr>{trows}</table></div>"
                f"<p><b>Numbers from the sheet:</b> {nums}</p>"
                f"<p><b>The sheet says:</b> {esc(sh['verdict']['text'])}</p>"
                f"<p><b>The data in the region say:</b> {esc(bv.get('text', 'n/a'))}</p></div>"
            ),
        )

    # -- notes --------------------------------------------------------------------------------
    def show_notes(self, rep, thresholds):
        if not rep:
            self._put(self.notes, "")
            return
        parts = ["<h4>How this region was computed</h4><ul>"]
        parts += [f"<li>{esc(n)}</li>" for n in rep.get("notes", [])]
        parts.append("</ul>")
        src = rep.get("sources") or {}
        if src:
            parts.append("<h4>Where each field came from</h4><ul>")
            for role, d in src.items():
                grib = (
                    f", GRIB {d['grib_short_name']} (paramId {d['grib_param_id']}, "
                    f"{d['grib_type_of_level']})"
                    if d.get("grib_short_name")
                    else ""
                )
                conv = (
                    f", converted from {d['units_from']}"
                    if d.get("units_from") and d["units_from"] != d.get("units_to")
                    else ""
                )
                rot = f", {d['rotated']}" if d.get("rotated") else ""
                parts.append(
                    f"<li>{esc(role)}: {esc(repr(d['variable']))} of {esc(d['file'])}, "
                    f"{esc(d['level_type'])}{esc(grib + conv + rot)}</li>"
                )
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
            parts.append(
                "<h4>Scales estimated from the region</h4><p>"
                + esc(", ".join(f"{k} = {v:.3g}" for k, v in s.items()))
                + "</p><ul>"
            )
            parts += [
                f"<li>{esc(k)}: {esc(t)}</li>" for k, t in (rep.get("scales_recipe") or {}).items()
            ]
            parts.append("</ul>")
        parts.append(
            f"<p>Verdict thresholds are the project's own choice (a balance holds at "
            f"{thresholds.balanced:g} or less; at least {thresholds.min_points} valid "
            f"points and {100 * thresholds.min_valid_share:.0f} % of the region for a "
            "verdict); see DEVELOPERS.md.</p>"
        )
        self._put(
            self.notes, f"<div style='font-size:16px;color:{INK}'>" + "".join(parts) + "</div>"
        )

    def __panel__(self):
        return self.tabs


def _verdict_text(balance) -> str:
    return "no verdict" if balance is None else wording.balance_name(balance)


def verdicts_html(series) -> str:
    """The region's verdict at each valid time, in order: a chip per time with the verdict's
    colour (the systems' colours)."""
    from .systems import VERDICT_COLOURS

    chips = []
    for s in series:
        colour = VERDICT_COLOURS.get(s.get("balance"), "#8c8c8c")
        chips.append(
            "<span style='white-space:nowrap;margin-right:14px'>"
            f"{esc(wording.when_short(s['time']))} "
            f"<span style='display:inline-block;width:12px;height:12px;background:{colour};"
            "border:1px solid #333;vertical-align:middle'></span> "
            f"<b>{esc(_verdict_text(s.get('balance')))}</b></span>"
        )
    return (
        f"<div class='bd-times-verdicts' style='font-size:15px;color:{INK};line-height:1.9'>"
        "Verdict at each time: " + " ".join(chips) + "</div>"
    )
