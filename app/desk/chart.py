"""The chart: the filled field, height contours, vectors with a reference arrow, coastlines,
the points without data, the region, and a box drawn with the mouse.

It draws what :func:`app.compute.chart_data` returns and writes a drawn box to the
view state (a lon/lat box on a plate carree chart, the drawn area on a conformal
one). It computes nothing itself.
"""

from __future__ import annotations

import math

import numpy as np
import panel as pn
import param
from bokeh import events
from bokeh.models import (
    Arrow,
    BoxSelectTool,
    ColorBar,
    ColumnDataSource,
    CustomJS,
    CustomJSHover,
    CustomJSTickFormatter,
    FixedTicker,
    HoverTool,
    Label,
    LabelSet,
    LinearColorMapper,
    NormalHead,
    PanTool,
    Range1d,
    ResetTool,
    SingleIntervalTicker,
    WheelZoomTool,
)
from bokeh.plotting import figure

from balance_core.verdict import CLASSES
from balance_core.vocabulary import BALANCE_NAMES

from ..state import ViewState, area_from_crs
from .look import (
    BUSY,
    GREY,
    INK,
    INVENTED_BG,
    ORANGE,
    PRINT_CSS,
    VERMILION,
    alert,
    esc,
    mark_busy,
    palette,
    style_figure,
)

__all__ = ["Chart"]

#: the chart's drawing size at its widest; narrower screens scale it down
WIDTH, MIN_WIDTH = 860, 520
#: the figure's pixels outside its frame, by kind of chart, as measured in Chromium (the
#: colour bar and the axes beside it, the toolbar and the axis above and below; a conformal
#: chart has no axes, its graticule is labelled inside): the figure's height is chosen so
#: that its frame has about the view's shape, and FIT_JS makes it exact in the frame the
#: browser drew
FRAME_OFF = {"plate_carree": (176, 90), "conformal": (110, 36)}

#: The chart at true shape (render.ViewGeometry.x_ground_scale): the ranges span the view's
#: extent (``home``) with the same ground distance per pixel both ways, the frame's spare
#: side padded. Run in the browser, which alone knows the frame's size, whenever the extent
#: or the frame changes. A view panned or zoomed (ranges that are not the last fit's) is the
#: forecaster's own until the extent changes: in a new frame it keeps its middle and its
#: ground distance per pixel. The reset tool returns to the extent's fit.
FIT_JS = """
const d = home.data;
const w = fig.inner_width, h = fig.inner_height;
if (!d.x0 || !d.x0.length || !(w > 0) || !(h > 0)) return;
const k = d.k[0];
const around = (xm, ym, s) => [xm - 0.5 * s * w / k, xm + 0.5 * s * w / k,
                               ym - 0.5 * s * h, ym + 0.5 * s * h];
const [x0, x1, y0, y1] = [d.x0[0], d.x1[0], d.y0[0], d.y1[0]];
const home_fit = around(0.5 * (x0 + x1), 0.5 * (y0 + y1),
                        Math.max((x1 - x0) * k / w, (y1 - y0) / h));
const last = xr._bd_fit;
let own = cb_obj !== home && last !== undefined && last[5];
if (cb_obj !== home && last !== undefined && !own)
  own = xr.start !== last[0] || xr.end !== last[1] || yr.start !== last[2] || yr.end !== last[3];
if (own && xr.start === xr.reset_start && xr.end === xr.reset_end &&
    yr.start === yr.reset_start && yr.end === yr.reset_end) own = false;  // reset since
const r = own ? around(0.5 * (xr.start + xr.end), 0.5 * (yr.start + yr.end),
                       (xr.end - xr.start) * k / last[4]) : home_fit;
xr.setv({start: r[0], end: r[1], reset_start: home_fit[0], reset_end: home_fit[1]});
yr.setv({start: r[2], end: r[3], reset_start: home_fit[2], reset_end: home_fit[3]});
xr._bd_fit = [xr.start, xr.end, yr.start, yr.end, w, own];
"""


def HOVER_TIPS(field_label, contoured="height", same=False):
    """The readout's lines: where, the field, the contoured quantity (unless it is the
    field), the wind."""
    tips = [("where", "@lat{lat}, @lon{lon}"), (field_label, "@field{value}")]
    if not same:
        tips.append((contoured, "@height{height}"))
    return tips + [("wind", "@speed{wind}")]


#: the readout written in the page from the numbers: N/S/E/W, the units, "no data"
_HOVER_JS = {
    "@lat": "if (!isFinite(value)) return ''; "
    "return Math.abs(value).toFixed(1) + (value > 0 ? 'N' : (value < 0 ? 'S' : ''));",
    "@lon": "if (!isFinite(value)) return ''; let x = ((value + 180) % 360 + 360) % 360 - 180; "
    "if (Math.abs(Math.abs(x) - 180) < 1e-9) return '180.0'; "
    "return Math.abs(x).toFixed(1) + (x > 0 ? 'E' : (x < 0 ? 'W' : ''));",
    "@field": "if (!isFinite(value)) return 'no data'; const a = Math.abs(value); "
    "const t = a === 0 ? '0' : (a >= 1000 ? value.toFixed(0) : (a >= 1e-2 ? "
    "String(Number(value.toPrecision(3))) : value.toExponential(2))); "
    "return unit ? t + ' ' + unit : t;",
    "@height": "if (!isFinite(value)) return 'no data'; "
    "return value.toFixed(unit === 'm' ? 0 : 1) + ' ' + unit;",
    "@speed": "if (!isFinite(value)) return 'no data'; "
    "const d = src.data.dir[special_vars.index]; "
    "return value.toFixed(0) + ' ' + unit + ' from ' + "
    "String(Math.round(d) % 360).padStart(3, '0') + ' deg';",
}


#: a field of verdict classes (the map of which balance holds where) reads as the class
_CLASS_JS = "if (!isFinite(value)) return 'no data'; return names[Math.round(value)] || '';"

#: the verdict classes' names, in the order of their index (balance_core.verdict.CLASSES)
CLASS_NAMES = [BALANCE_NAMES[c] for c in CLASSES]


def _hover_formatters(src, units, classes=False):
    unit_of = {"@field": units["field"], "@height": units["height"], "@speed": units["wind"]}
    out = {
        k: CustomJSHover(code=code, args={"src": src, "unit": unit_of.get(k, "")})
        for k, code in _HOVER_JS.items()
    }
    if classes:
        out["@field"] = CustomJSHover(code=_CLASS_JS, args={"names": CLASS_NAMES})
    return out


def _colour_bar(mapper, *, visible=False, **kw) -> ColorBar:
    """A colour bar of the chart's mapper in the page's look; ``kw``: its ticker and labels."""
    return ColorBar(
        color_mapper=mapper,
        width=18,
        title="",
        title_text_font_size="16px",
        visible=visible,
        title_text_color=INK,
        major_label_text_color=INK,
        major_label_text_font_size="15px",
        location=(0, 0),
        **kw,
    )


def one_line(lines) -> list:
    """Many lines as one, a NaN between each two (Bokeh draws a NaN as a gap): a column of
    one array. Bokeh sends every array of a column as a buffer of its own, and each costs
    the server and the browser a step; a chart's contours are 50 to 150 lines, and a review
    room sends them to every follower."""
    parts = []
    for seg in lines:
        seg = np.asarray(seg, dtype=np.float64)
        if seg.size == 0:
            continue
        if parts:
            parts.append(np.array([np.nan]))
        parts.append(seg)
    return [np.concatenate(parts)] if parts else []


def _update_source(src, data: dict, geometry=()):
    """Replace a source's columns; when the ``geometry`` columns are unchanged (a new level
    or time on the same grid), send only the others."""
    old = src.data
    same = geometry and all(
        k in old
        and len(old[k]) == len(data[k])
        and np.array_equal(np.asarray(old[k]), data[k], equal_nan=True)
        for k in geometry
    )
    if same:
        src.data.update({k: v for k, v in data.items() if k not in geometry})
    else:
        src.data = data


def _labels(source, text="text", **style):
    """Text at the points of ``source`` (columns x, y and ``text``), 14 px unless told."""
    return LabelSet(x="x", y="y", text=text, source=source, text_font_size="14px", **style)


def _rimmed_line(fig, source, colour, width, **style):
    """A line of ``source`` (columns x, y) on the overlay layer, on a white rim 2.5 px wider
    so that it reads over any fill."""
    fig.line("x", "y", source=source, line_color="white", line_width=width + 2.5, level="overlay")
    fig.line("x", "y", source=source, line_color=colour, line_width=width, level="overlay", **style)


class Chart(pn.viewable.Viewer):
    """The middle of the page."""

    state = param.ClassSelector(class_=ViewState)

    def __init__(self, state, **params):
        super().__init__(state=state, **params)
        self.data = None
        self._build()

    def _build(self):
        e = np.full((2, 2), np.nan, np.float32)
        self.img_src = ColumnDataSource(dict(image=[e], x=[0], y=[0], dw=[1], dh=[1]))
        self.mask_src = ColumnDataSource(dict(image=[e], x=[0], y=[0], dw=[1], dh=[1]))
        self.cont_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.clab_src = ColumnDataSource(dict(x=[], y=[], text=[]))
        #: the second field's contours and their labels (dashed, in vermilion)
        self.ocont_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.oclab_src = ColumnDataSource(dict(x=[], y=[], text=[]))
        self.vec_src = ColumnDataSource(dict(x0=[], y0=[], x1=[], y1=[], angle=[], head=[]))
        #: wind barbs (render.wind_barbs): staffs and barbs, pennants, calm circles
        self.barb_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.pennant_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.calm_src = ColumnDataSource(dict(x=[], y=[]))
        self.coast_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.land_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.grat_src = ColumnDataSource(dict(xs=[], ys=[]))
        self.glab_src = ColumnDataSource(dict(x=[], y=[], text=[]))
        self.region_src = ColumnDataSource(dict(x=[], y=[]))
        #: the section's line while the section is open (its ends A and B, as on its plot)
        self.section_src = ColumnDataSource(dict(x=[], y=[]))
        self.section_end_src = ColumnDataSource(dict(x=[], y=[], text=[]))
        self._section_line = None  # its (lon, lat) points, drawn again with each chart
        self.note_src = ColumnDataSource(dict(x=[], y=[], label=[]))
        self.sys_src = ColumnDataSource(dict(x=[], y=[], label=[], marker=[], colour=[]))
        #: called with (lon, lat) when the chart is clicked, while someone wants a point
        self.tap_listener = None
        #: called with (lon, lat) for any other click (the systems' marks take it)
        self.tap_default = None
        self.hover_src = ColumnDataSource(
            dict(x=[], y=[], lat=[], lon=[], field=[], height=[], speed=[], dir=[])
        )
        #: the view's extent and x_ground_scale (k), fitted at true shape by FIT_JS
        self.home_src = ColumnDataSource(dict(x0=[0.0], x1=[1.0], y0=[0.0], y1=[1.0], k=[1.0]))
        self.mapper = LinearColorMapper(palette=palette("sequential"), nan_color=(0, 0, 0, 0))
        fig = figure(
            width=WIDTH,
            height=620,
            tools="",
            toolbar_location="above",
            title="",
            output_backend="canvas",
            x_range=Range1d(0, 1),
            y_range=Range1d(0, 1),
            sizing_mode="scale_width",
            min_width=MIN_WIDTH,
            max_width=WIDTH + 120,
        )
        fig.image(
            image="image",
            x="x",
            y="y",
            dw="dw",
            dh="dh",
            source=self.img_src,
            color_mapper=self.mapper,
        )
        fig.image(
            image="image",
            x="x",
            y="y",
            dw="dw",
            dh="dh",
            source=self.mask_src,
            color_mapper=LinearColorMapper(palette=[GREY], low=0, high=1, nan_color=(0, 0, 0, 0)),
            global_alpha=0.6,
        )
        fig.multi_line(
            "xs",
            "ys",
            source=self.grat_src,
            line_color="#555555",
            line_alpha=0.7,
            line_dash="dotted",
            line_width=1,
        )
        fig.multi_line("xs", "ys", source=self.coast_src, line_color="#222222", line_width=1.6)
        fig.multi_line(
            "xs",
            "ys",
            source=self.land_src,
            line_color="#5b3a1a",
            line_width=2.5,
            line_dash="dashed",
        )
        fig.multi_line("xs", "ys", source=self.cont_src, line_color="black", line_width=1.3)
        fig.multi_line(
            "xs",
            "ys",
            source=self.ocont_src,
            line_color=VERMILION,
            line_width=1.6,
            line_dash="dashed",
        )
        fig.segment(
            "x0",
            "y0",
            "x1",
            "y1",
            source=self.vec_src,
            line_color="white",
            line_width=3.5,
            line_alpha=0.8,
        )
        fig.segment("x0", "y0", "x1", "y1", source=self.vec_src, line_color="black", line_width=1.6)
        fig.scatter(
            "x1",
            "y1",
            source=self.vec_src,
            marker="triangle",
            angle="angle",
            size="head",
            fill_color="black",
            line_color="white",
            line_width=0.5,
        )
        # wind barbs: black on a white casing, as the arrows
        fig.multi_line("xs", "ys", source=self.barb_src, line_color="white", line_width=3.5)
        fig.multi_line("xs", "ys", source=self.barb_src, line_color="black", line_width=1.6)
        fig.patches("xs", "ys", source=self.pennant_src, fill_color="black", line_color="white")
        fig.scatter(
            "x",
            "y",
            source=self.calm_src,
            marker="circle",
            size=7,
            fill_color=None,
            line_color="black",
            line_width=1.6,
        )
        # the region's outline on the overlay layer: moving it repaints that layer alone, not
        # the raster, contours and arrows below (Bokeh paints the two canvases apart)
        _rimmed_line(fig, self.region_src, ORANGE, 3.5)
        # the section's line: dashed ink on a white rim, apart from the region's orange
        _rimmed_line(fig, self.section_src, INK, 2.5, line_dash=[8, 5])
        fig.add_layout(
            _labels(
                self.section_end_src,
                text_align="center",
                text_baseline="middle",
                text_color=INK,
                text_font_style="bold",
                background_fill_color="white",
                background_fill_alpha=0.9,
                level="overlay",
            )
        )
        # weather systems: shape by kind, fill by verdict, a white rim, the label in a box;
        # on the overlay layer too (they come after the chart, and a room's notes at any time:
        # each would repaint the raster, contours and arrows)
        fig.scatter(
            "x",
            "y",
            source=self.sys_src,
            marker="marker",
            size=20,
            fill_color="colour",
            line_color="white",
            line_width=2.5,
            level="overlay",
        )
        fig.add_layout(
            _labels(
                self.sys_src,
                text="label",
                text_color=INK,
                text_font_style="bold",
                x_offset=12,
                y_offset=-8,
                background_fill_color="white",
                background_fill_alpha=0.9,
                level="overlay",
            )
        )
        # review notes pinned to a point: a dark square with a white number beside it
        fig.scatter(
            "x",
            "y",
            source=self.note_src,
            marker="square_pin",
            size=16,
            fill_color=INK,
            line_color="white",
            line_width=2,
            level="overlay",
        )
        fig.add_layout(
            _labels(
                self.note_src,
                text="label",
                text_color="#ffffff",
                text_font_style="bold",
                x_offset=9,
                y_offset=2,
                background_fill_color=INK,
                background_fill_alpha=0.9,
                level="overlay",
            )
        )
        # the contours' labels stay above the region's outline: on its layer, after it
        fig.add_layout(
            _labels(
                self.oclab_src,
                text_align="center",
                text_color=VERMILION,
                text_baseline="middle",
                background_fill_color="white",
                background_fill_alpha=0.85,
                level="overlay",
            )
        )
        fig.add_layout(
            _labels(
                self.clab_src,
                text_align="center",
                text_color=INK,
                text_baseline="middle",
                background_fill_color="white",
                background_fill_alpha=0.85,
                level="overlay",
            )
        )
        fig.add_layout(
            _labels(
                self.glab_src,
                text_color=INK,
                background_fill_color="white",
                background_fill_alpha=0.85,
            )
        )
        # the reference arrow, in a white box at the lower left
        self.ref_arrow = Arrow(
            end=NormalHead(size=10, fill_color="black"),
            x_start=0,
            y_start=0,
            x_end=0,
            y_end=0,
            line_width=2.5,
            visible=False,
        )
        self.ref_label = Label(
            x=0,
            y=0,
            text="",
            text_font_size="15px",
            text_color=INK,
            background_fill_color="white",
            background_fill_alpha=0.9,
            x_offset=6,
            y_offset=6,
            visible=False,
        )
        fig.add_layout(self.ref_arrow)
        fig.add_layout(self.ref_label)
        self.hover_rect = fig.rect(
            "x",
            "y",
            1.0,
            1.0,
            source=self.hover_src,
            fill_alpha=0.0,
            line_alpha=0.0,
            hover_fill_alpha=0.08,
            hover_fill_color="white",
            hover_line_alpha=0.0,
        )
        hover_r = self.hover_rect
        self.hover_units = {"field": "", "height": "m", "wind": "m/s"}
        self.hover_classes = False  # the field is of verdict classes (read as their names)
        self.hover = HoverTool(
            renderers=[hover_r],
            tooltips=HOVER_TIPS("field"),
            formatters=_hover_formatters(self.hover_src, self.hover_units),
        )
        # the tool selects from an empty renderer: only the drawn geometry is wanted, not
        # the indices of the hover grid's cells under it (hundreds sent at every drag)
        nothing = fig.scatter(x=[], y=[], size=0, alpha=0)
        self.box_tool = BoxSelectTool(renderers=[nothing], description="Draw a region")
        fig.add_tools(self.box_tool, PanTool(), WheelZoomTool(), ResetTool(), self.hover)
        fig.toolbar.active_drag = self.box_tool
        fig.toolbar.active_scroll = None
        fmt = CustomJSTickFormatter(
            code="return Math.abs(tick) >= 1000 ? tick.toFixed(0) : +tick.toPrecision(3);"
        )
        self.colorbar = _colour_bar(self.mapper, formatter=fmt, visible=True)
        self.colorbar_log = _colour_bar(
            self.mapper,
            ticker=SingleIntervalTicker(interval=1),
            formatter=CustomJSTickFormatter(code="return '1e' + Math.round(tick);"),
        )
        # the map of which balance holds where: one band per verdict class, named
        self.colorbar_classes = _colour_bar(
            self.mapper,
            ticker=FixedTicker(ticks=list(range(len(CLASS_NAMES)))),
            formatter=CustomJSTickFormatter(
                code="return names[Math.round(tick)] || '';", args={"names": CLASS_NAMES}
            ),
        )
        fig.add_layout(self.colorbar, "right")
        fig.add_layout(self.colorbar_log, "right")
        fig.add_layout(self.colorbar_classes, "right")
        digits_js = (
            "var d = (ticks.length > 1 && Math.abs(ticks[1] - ticks[0]) < 1) ? "
            "(Math.abs(ticks[1] - ticks[0]) < 0.1 ? 2 : 1) : 0; "
        )
        self._lon_fmt = CustomJSTickFormatter(
            code=digits_js + "var x = ((tick + 180) % 360 + 360) % 360 - 180; "
            "return Math.abs(x).toFixed(d) + (x < 0 ? 'W' : (x > 0 ? 'E' : ''));"
        )
        self._lat_fmt = CustomJSTickFormatter(
            code=digits_js + "return Math.abs(tick).toFixed(d) + "
            "(tick < 0 ? 'S' : (tick > 0 ? 'N' : ''));"
        )
        fit = CustomJS(
            args=dict(home=self.home_src, fig=fig, xr=fig.x_range, yr=fig.y_range), code=FIT_JS
        )
        fig.js_on_change("inner_width", fit)
        fig.js_on_change("inner_height", fit)
        self.home_src.js_on_change("data", fit)
        fig.on_event(events.SelectionGeometry, self._on_select)
        fig.on_event(events.Tap, self._on_tap)
        fig.grid.grid_line_color = "#555555"
        fig.grid.grid_line_alpha = 0.45
        fig.grid.grid_line_dash = "dotted"
        style_figure(fig)
        self.fig = fig
        # scale_width: the chart keeps its shape (a map stretched sideways misleads) and
        # takes the column's width
        self.pane = pn.pane.Bokeh(
            fig, sizing_mode="scale_width", min_width=MIN_WIDTH, max_width=WIDTH + 120
        )
        # the chart fades while it changes through a box of its own: a style set on the
        # figure itself makes Bokeh repaint the whole map (raster, contours, arrows) once more
        self.figure_box = pn.Column(
            self.pane, sizing_mode="stretch_width", margin=0, styles=dict(BUSY)
        )
        # the caption names the level and time: it fades with the chart while they change
        self.caption = pn.pane.HTML(
            "",
            sizing_mode="stretch_width",
            styles={"font-size": "18px", "font-weight": "600", **BUSY},
        )
        self.alert = pn.pane.HTML("", sizing_mode="stretch_width")
        self.note = pn.pane.HTML("", sizing_mode="stretch_width")
        #: the chart shows the region's box (and follows the region) rather than the case
        self.zoomed = False
        self.w_zoom = pn.widgets.Button(label="Zoom to the region", width=170)
        self.w_unzoom = pn.widgets.Button(label="Whole chart", width=130)
        self.w_zoom.on_click(lambda e: self.zoom_to_region(True))
        self.w_unzoom.on_click(lambda e: self.zoom_to_region(False))
        self.layout = pn.Column(
            self.caption,
            self.alert,
            self.figure_box,
            pn.Row(self.w_zoom, self.w_unzoom, margin=0, css_classes=["bd-no-print"]),
            self.note,
            sizing_mode="stretch_width",
            min_width=MIN_WIDTH,
            max_width=WIDTH + 140,
            css_classes=["bd-live"],
            stylesheets=[PRINT_CSS],
        )

    # -- showing ----------------------------------------------------------------------------
    def busy(self, on: bool = True):
        mark_busy(self.figure_box, on)
        mark_busy(self.caption, on)

    def show_error(self, text):
        self.alert.object = alert(text, "error")
        self.busy(False)

    def show(self, cd):
        """Draw a :class:`app.compute.ChartData`."""
        self.alert.object = ""
        self.data = cd
        g = cd.geom
        x0, x1, y0, y1 = g.extent
        fig = self.fig
        data = cd.raster
        if cd.color_kind == "log":
            with np.errstate(invalid="ignore", divide="ignore"):
                data = np.where(data > 0, np.log10(data), np.nan).astype(np.float32)
            lo, hi = math.log10(cd.color_range[0]), math.log10(cd.color_range[1])
        else:
            lo, hi = cd.color_range
        self.colorbar.visible = cd.color_kind not in ("log", "classes")
        self.colorbar_log.visible = cd.color_kind == "log"
        self.colorbar_classes.visible = cd.color_kind == "classes"
        self.mapper.palette = palette(
            cd.color_kind if cd.color_kind in ("diverging", "classes") else "seq"
        )
        self.mapper.low, self.mapper.high = float(lo), float(hi)
        self.img_src.data = dict(image=[data], x=[x0], y=[y0], dw=[x1 - x0], dh=[y1 - y0])
        blank = np.full((2, 2), np.nan, np.float32)
        self.mask_src.data = dict(
            image=[cd.masked if cd.masked is not None else blank],
            x=[x0],
            y=[y0],
            dw=[x1 - x0],
            dh=[y1 - y0],
        )
        self.colorbar.title = self.colorbar_log.title = self.colorbar_classes.title = (
            f"{cd.field_label}"
            + (f" ({cd.units})" if cd.units else "")
            + (" \u00b7 scale cut, see below" if any(cd.color_cut) else "")
        )
        lx, ly, lv, labels = cd.contours
        self.cont_src.data = dict(xs=one_line(lx), ys=one_line(ly))
        digits = 1 if cd.contour_units == "dam" and cd.contour_interval < 1.5 else 0
        self.clab_src.data = dict(
            x=[a for a, _, _ in labels],
            y=[b for _, b, _ in labels],
            text=[f"{c:.{digits}f}" for _, _, c in labels],
        )
        ox, oy, _, olabels = cd.overlay if cd.overlay is not None else ([], [], [], [])
        if cd.overlay is not None or self.ocont_src.data["xs"]:
            self.ocont_src.data = dict(xs=one_line(ox), ys=one_line(oy))
            self.oclab_src.data = dict(
                x=[a for a, _, _ in olabels],
                y=[b for _, b, _ in olabels],
                text=[f"{c:g}" for _, _, c in olabels],
            )
        if cd.vectors is not None and cd.barbs is None:
            v = cd.vectors
            self.vec_src.data = dict(
                x0=v["x0"],
                y0=v["y0"],
                x1=v["x1"],
                y1=v["y1"],
                # the heads turn on the screen: at true shape a degree of longitude is
                # x_ground_scale as long there as one of latitude
                angle=np.arctan2(v["y1"] - v["y0"], (v["x1"] - v["x0"]) * g.x_ground_scale)
                - np.pi / 2,
                head=head_sizes(v, cd.reference_arrow),
            )
        else:
            self.vec_src.data = dict(x0=[], y0=[], x1=[], y1=[], angle=[], head=[])
        self._show_barbs(cd.barbs)
        a = cd.reference_arrow
        self.ref_arrow.visible = self.ref_label.visible = a is not None
        if a is not None:
            self.ref_arrow.update(x_start=a["x0"], y_start=a["y0"], x_end=a["x1"], y_end=a["y1"])
            self.ref_label.update(x=a["x0"], y=a["y0"], text=f"arrow: {a['text']}")
        # the map's furniture is sent only when it changed (a new case or projection)
        furniture = (cd.coast, cd.land, cd.graticule)
        kept = getattr(self, "_furniture", None)
        if kept is None or any(a is not b for a, b in zip(furniture, kept)):
            self._furniture = furniture
            cx, cy = cd.coast if cd.coast is not None else ([], [])
            self.coast_src.data = dict(xs=one_line(cx), ys=one_line(cy))
            lx2, ly2 = cd.land if cd.land is not None else ([], [])
            self.land_src.data = dict(xs=one_line(lx2), ys=one_line(ly2))
            gx, gy, glab = cd.graticule
            self.grat_src.data = dict(xs=one_line(gx), ys=one_line(gy))
            self.glab_src.data = dict(
                x=[p[0] for p in glab], y=[p[1] for p in glab], text=[p[2] for p in glab]
            )
        self.show_outline(cd.region_xy)
        self._draw_section_line()
        h = cd.hover
        _update_source(
            self.hover_src,
            {k: h[k] for k in ("x", "y", "lat", "lon", "field", "height", "speed", "dir")},
            geometry=("x", "y", "lat", "lon"),
        )
        self.hover_rect.glyph.update(width=h["w"], height=h["h"])
        units = {
            "field": h["field_units"] or "",
            "height": h["height_units"],
            "wind": h["wind_units"],
        }
        classes = cd.color_kind == "classes"
        if units != self.hover_units or classes != self.hover_classes:
            self.hover_units, self.hover_classes = units, classes
            self.hover.formatters = _hover_formatters(self.hover_src, units, classes=classes)
        tips = HOVER_TIPS(
            cd.field_label,
            "sea-level pressure" if cd.contour_units == "hPa" else "height",
            cd.field_key == "height",
        )
        if tips != self.hover.tooltips:
            self.hover.tooltips = tips
        self._fit_home()
        aspect = (y1 - y0) / ((x1 - x0) * g.x_ground_scale)
        if getattr(self, "_axes_kind", None) != g.kind:
            # the axes' look changes with the kind of chart only: set it then, never again
            # (every property set on the figure makes Bokeh walk the whole document)
            self._axes_kind = g.kind
            lonlat = g.kind == "plate_carree"
            if lonlat:
                fig.xaxis.axis_label, fig.yaxis.axis_label = "longitude", "latitude"
                fig.xaxis.formatter, fig.yaxis.formatter = self._lon_fmt, self._lat_fmt
            fig.axis.visible = lonlat
            fig.grid.visible = lonlat  # on conformal charts the graticule draws them
        off_x, off_y = FRAME_OFF["plate_carree" if g.kind == "plate_carree" else "conformal"]
        frame_h = (WIDTH - off_x) * aspect
        _set(fig, width=WIDTH, height=int(min(max(frame_h, 320), 720)) + off_y)
        interval = (
            ""
            if not math.isfinite(cd.contour_interval)
            else f" every {cd.contour_interval:g} {cd.contour_units}"
        )
        mark = (
            (
                f" <span style='background:{INVENTED_BG};color:#fff;padding:2px 8px;"
                "border-radius:4px;font-size:15px;white-space:nowrap'>invented demo data"
                "</span>"
            )
            if cd.invented
            else ""
        )
        self.caption.object = (
            f"<div><span class='bd-chart-title'>{esc(cd.title)}</span>{mark}"
            f"</div><div style='font-size:16px;font-weight:400'>"
            f"{esc(cd.field_label)}"
            + (f" ({esc(cd.units)})" if cd.units else "")
            + f"; {esc(cd.contour_label)}{esc(interval)}</div>"
        )
        notes = [
            n
            for n in (
                cd.coast_note,
                f"Dashed: {cd.overlay_label}" if cd.overlay_label else "",
                cd.vector_label,
                f"Projection: {g.label}",
            )
            if n
        ]
        notes += cd.notes
        self.note.object = (
            "<div style='font-size:15px'>" + "<br>".join(esc(n) for n in notes) + "</div>"
        )
        self.busy(False)

    def show_section_line(self, lonlat):
        """Draw the section's line, (lon, lat) of its points from A to B, on the chart (and
        again on every chart after this one); None takes it away."""
        self._section_line = lonlat
        self._draw_section_line()

    def _draw_section_line(self):
        if self._section_line is None or self.data is None:
            self.section_src.data = dict(x=[], y=[])
            self.section_end_src.data = dict(x=[], y=[], text=[])
            return
        lon, lat = self._section_line
        x, y = self.data.geom.path_to_view(np.asarray(lon), np.asarray(lat))
        x, y = np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)
        self.section_src.data = dict(x=x, y=y)
        self.section_end_src.data = dict(x=[x[0], x[-1]], y=[y[0], y[-1]], text=["A", "B"])

    def show_outline(self, xy):
        if xy is None:
            self.region_src.data = dict(x=[], y=[])
        else:
            self.region_src.data = dict(x=xy[0], y=xy[1])
        if self.zoomed:
            self._fit_home()

    def zoom_to_region(self, on: bool = True):
        """Show the region's box (``on``; it follows a new region) or the whole chart."""
        self.zoomed = on
        self._fit_home()

    def _fit_home(self):
        """Give the browser's fit (FIT_JS) what to show: the view's extent, or with
        :attr:`zoomed` the region's outline with a margin of a fifth of its size (the extent
        where there is no region)."""
        if self.data is None:
            return
        g = self.data.geom
        x0, x1, y0, y1 = g.extent
        rx = np.asarray(self.region_src.data["x"], float)
        ry = np.asarray(self.region_src.data["y"], float)
        ok = np.isfinite(rx) & np.isfinite(ry)
        if self.zoomed and ok.any():
            bx0, bx1, by0, by1 = rx[ok].min(), rx[ok].max(), ry[ok].min(), ry[ok].max()
            mx, my = 0.2 * (bx1 - bx0), 0.2 * (by1 - by0)
            x0, x1, y0, y1 = bx0 - mx, bx1 + mx, by0 - my, by1 + my
        k = g.x_ground_scale_between(y0, y1)
        home = dict(x0=[float(x0)], x1=[float(x1)], y0=[float(y0)], y1=[float(y1)], k=[k])
        if home != self.home_src.data:
            self.home_src.data = home

    def show_notes(self, points):
        """Mark notes on the chart: ``points`` is a list of (lon, lat, label)."""
        if self.data is None or not points:
            self.note_src.data = dict(x=[], y=[], label=[])
            return
        lon = np.array([p[0] for p in points], float)
        lat = np.array([p[1] for p in points], float)
        x, y = self.data.geom.to_view(lon, lat)
        x, y = np.asarray(x, float), np.asarray(y, float)
        ok = np.isfinite(x) & np.isfinite(y)
        self.note_src.data = dict(x=x[ok], y=y[ok], label=[p[2] for p, k in zip(points, ok) if k])

    def show_systems(self, marks):
        """Mark weather systems: ``marks`` is a list of (lon, lat, label, marker, colour)."""
        if self.data is None or not marks:
            self.sys_src.data = dict(x=[], y=[], label=[], marker=[], colour=[])
            return
        x, y = self.data.geom.to_view(
            np.array([m[0] for m in marks], float), np.array([m[1] for m in marks], float)
        )
        x, y = np.asarray(x, float), np.asarray(y, float)
        ok = np.isfinite(x) & np.isfinite(y)
        self.sys_src.data = dict(
            x=x[ok],
            y=y[ok],
            label=[m[2] for m, k in zip(marks, ok) if k],
            marker=[m[3] for m, k in zip(marks, ok) if k],
            colour=[m[4] for m, k in zip(marks, ok) if k],
        )

    def _on_tap(self, event):
        listener = self.tap_listener or self.tap_default
        if listener is None or self.data is None:
            return
        x, y = event.x, event.y
        if x is None or y is None:
            return
        g = self.data.geom
        if g.kind == "plate_carree":
            lon, lat = float(x), float(y)
        else:
            lo, la = g.to_lonlat(np.array([x]), np.array([y]))
            lon, lat = float(np.asarray(lo)[0]), float(np.asarray(la)[0])
        if np.isfinite(lon) and np.isfinite(lat) and -90 <= lat <= 90:
            listener(lon, lat)

    # -- drawing a region --------------------------------------------------------------------
    def _show_barbs(self, barbs):
        """Draw :attr:`app.compute.ChartData.barbs` (or none)."""
        lines, flags, calm = (
            (barbs["lines"], barbs["pennants"], barbs["calm"])
            if barbs is not None
            else (([], []), ([], []), ([], []))
        )
        if barbs is not None or self.barb_src.data["xs"] or self.calm_src.data["x"]:
            self.barb_src.data = dict(xs=lines[0], ys=lines[1])
            self.pennant_src.data = dict(xs=flags[0], ys=flags[1])
            self.calm_src.data = dict(x=calm[0], y=calm[1])

    def _on_select(self, event):
        geo = event.geometry
        if not getattr(event, "final", True) or geo.get("type") != "rect":
            return
        self.select_rect(geo["x0"], geo["x1"], geo["y0"], geo["y1"])

    def select_rect(self, xa, xb, ya, yb):
        """A rectangle drawn in view coordinates becomes the state's region."""
        x0, x1 = sorted((xa, xb))
        y0, y1 = sorted((ya, yb))
        if self.data is None or x1 - x0 <= 0 or y1 - y0 <= 0:
            return
        g = self.data.geom
        if g.kind == "plate_carree":
            self.state.set_box(x0, x1, max(y0, -90), min(y1, 90))
            return
        lons, lats = g.to_lonlat(np.array([x0, x1, x1, x0]), np.array([y0, y0, y1, y1]))
        if not (np.isfinite(lons).all() and np.isfinite(lats).all()):
            return
        spec = area_from_crs(g.crs, list(zip(np.asarray(lons), np.asarray(lats))))
        if spec is not None:
            self.state.set_area(spec)

    def __panel__(self):
        return self.layout


def _set(model, **props):
    """Set only the properties that change: a set that changes nothing still costs Bokeh a
    walk of the document and the page a message."""
    changed = {k: v for k, v in props.items() if getattr(model, k) != v}
    if changed:
        model.update(**changed)


def head_sizes(v, ref, full=8.0):
    """Arrow-head sizes (screen pixels): ``full`` from 40 % of the reference arrow's length
    up, smaller in proportion below, so that a near-calm point shows a small mark instead
    of a full head on no shaft."""
    n = len(v["x0"])
    if ref is None or n == 0:
        return np.full(n, full)
    ref_len = math.hypot(ref["x1"] - ref["x0"], ref["y1"] - ref["y0"])
    if not ref_len > 0:
        return np.full(n, full)
    length = np.hypot(
        np.asarray(v["x1"]) - np.asarray(v["x0"]), np.asarray(v["y1"]) - np.asarray(v["y0"])
    )
    return full * np.clip(length / (0.4 * ref_len), 0.25, 1.0)
