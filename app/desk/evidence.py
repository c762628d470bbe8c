"""The evidence: the verdict and why, the ranked terms with their a priori estimates, the
unavailable terms, the derived views, the candidate balances and the numbers.

It draws the report of :func:`app.compute.box_data` (the same object as
``balance-desk analyze``); it computes nothing itself.
"""

from __future__ import annotations

import math

import numpy as np
import panel as pn
import param

from bokeh.models import (ColumnDataSource, CustomJSTickFormatter, FactorRange, HoverTool,
                          LabelSet, LogTicker, Range1d, Span)
from bokeh.plotting import figure

from balance_core.verdict import Thresholds

from .. import vocab
from ..state import ViewState
from .look import (BLUE, GREEN, GREY, INK, MUTED, ORANGE, SKY, VERMILION, alert, esc,
                   style_figure)

__all__ = ["Evidence"]

WIDTH = 470


def _log_bars(source, title, height, *, fill, ink):
    """Horizontal bars of magnitudes on a log axis, a priori diamonds, value labels."""
    f = figure(width=WIDTH, height=height, y_range=FactorRange(factors=[]), x_axis_type="log",
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


def _heading(title, sub):
    return pn.pane.HTML(f"<div style='font-size:18px;font-weight:700;color:{INK}'>{esc(title)}"
                        f"</div><div style='font-size:15px;color:{MUTED}'>{esc(sub)}</div>",
                        width=WIDTH, margin=(10, 5, 0, 5))


class Evidence(pn.viewable.Viewer):
    """The right column of the page."""

    state = param.ClassSelector(class_=ViewState)

    def __init__(self, state, thresholds: Thresholds = Thresholds(), **params):
        super().__init__(state=state, **params)
        self.thresholds = thresholds
        self.report = None
        self.verdict = pn.pane.HTML("", width=WIDTH + 10, loading=True)
        self.alert = pn.pane.HTML("", width=WIDTH + 10)
        self.unavailable = pn.pane.HTML("", width=WIDTH + 10)
        self.numbers = pn.pane.HTML("", width=WIDTH + 10)
        self._build_bars()
        self.layout = pn.Column(self.verdict, self.alert, self.rank_pane, self.unavailable,
                                self.derived_pane, self.bal_pane, self.numbers,
                                width=WIDTH + 20, css_classes=["bd-live"])

    def _build_bars(self):
        self.rank_src = ColumnDataSource(dict(name=[], left=[], value=[], estimate=[],
                                              color=[], label=[], ink=[], shown=[]))
        f, bars = _log_bars(self.rank_src, "", 400, fill="color", ink="ink")
        f.add_tools(HoverTool(renderers=[bars], tooltips=[("term", "@name"),
                                                          ("measured", "@shown"),
                                                          ("a priori", "@estimate{0.0e} m s-2")]))
        f.xaxis.axis_label = "m s-2"
        style_figure(f)
        self.rank_fig = f
        self.rank_pane = pn.Column(_heading("Terms, largest first",
                                            "bars: measured in the region; diamonds: a priori, "
                                            "from the region's own scales"),
                                   pn.pane.Bokeh(f), loading=True, margin=0)
        self.der_src = ColumnDataSource(dict(name=[], left=[], value=[], estimate=[], label=[]))
        d, _ = _log_bars(self.der_src, "", 190, fill=SKY, ink="black")
        style_figure(d)
        self.der_fig = d
        self.derived_pane = pn.Column(_heading("Derived views", "not part of the sum"),
                                      pn.pane.Bokeh(d), loading=True, margin=0)
        self.bal_src = ColumnDataSource(dict(name=[], value=[], color=[], label=[], x=[]))
        b = figure(width=WIDTH, height=210, y_range=FactorRange(factors=[]), x_range=(0, 1.9),
                   tools="", toolbar_location=None)
        b.hbar(y="name", left=0, right="value", height=0.6, source=self.bal_src,
               fill_color="color", line_color=None)
        b.add_layout(LabelSet(x="x", y="name", text="label", source=self.bal_src,
                              text_font_size="15px", text_baseline="middle", x_offset=8,
                              text_color=INK))
        b.add_layout(Span(location=self.thresholds.balanced, dimension="height",
                          line_color="black", line_dash="dashed", line_width=2))
        b.xaxis.axis_label = f"smaller holds better (dashed: {self.thresholds.balanced:g})"
        style_figure(b, "16px")
        self.bal_fig = b
        self.bal_pane = pn.Column(_heading("Candidate balances",
                                           "|sum of their terms| / |pressure gradient|"),
                                  pn.pane.Bokeh(b), loading=True, margin=0)

    # -- showing --------------------------------------------------------------------------------
    def busy(self, on: bool = True):
        for p in (self.verdict, self.rank_pane, self.derived_pane, self.bal_pane):
            p.loading = on

    def show_error(self, text):
        self.report = None
        self.alert.object = alert(text, "error")
        self.verdict.object = ""
        self.rank_src.data = {k: [] for k in self.rank_src.data}
        self.der_src.data = {k: [] for k in self.der_src.data}
        self.bal_src.data = {k: [] for k in self.bal_src.data}
        self.numbers.object = ""
        self.unavailable.object = ""
        self.busy(False)

    def show(self, rep):
        self.report = rep
        self.alert.object = ""
        v = rep["verdict"]
        share = rep.get("valid_share")
        valid = (f"{rep['points']} of {rep.get('region_points', rep['points'])} points valid"
                 + (f" ({100 * share:.0f} %)" if share is not None else ""))
        why = (f"<div style='font-size:16px;margin-top:6px'><b>Why:</b> {esc(v['why'])}</div>"
               if v.get("why") else "")
        mark = ("<div style='margin-top:6px;font-size:15px;color:#5c0a5c;font-weight:700'>"
                "Invented demo data</div>") if rep.get("invented") else ""
        edge = ORANGE if v["balance"] != "none" else GREY
        self.verdict.object = (
            f"<div class='bd-verdict' style='font-size:19px;line-height:1.35;color:{INK};"
            f"border-left:6px solid {edge};padding:6px 10px;background:#fafafa'>"
            f"<div style='font-size:24px;font-weight:700'>{esc(vocab.balance_name(v['balance']))}"
            f"</div>{esc(v['text'])}{why}<div style='font-size:15px;color:{MUTED};margin-top:4px'>"
            f"{rep['level_hpa']:g} hPa &middot; {esc(rep.get('when', rep['valid_time']))} "
            f"&middot; {esc(rep.get('region_text', ''))} &middot; {esc(valid)}</div>{mark}</div>")
        avail = [t for t in rep["terms"] if t["magnitude"] is not None]
        mags = [t["magnitude"] for t in avail] + [t["estimate"] for t in avail if t["estimate"]]
        mags = [m for m in mags if m and m > 0]
        hi = 10.0 ** math.ceil(math.log10(max(mags))) if mags else 1e-2
        # six decades below the largest: smaller terms sit at the left edge (their values are
        # in the exports and on hover)
        lo = max(10.0 ** math.floor(math.log10(min(mags))) / 10 if mags else 1e-12, hi * 1e-6)
        pairs = {"pressure_gradient", "coriolis"}
        self.rank_fig.y_range.factors = [vocab.term_name(t["name"]) for t in avail][::-1]
        self.rank_src.data = dict(
            name=[vocab.term_name(t["name"]) for t in avail],
            left=[lo] * len(avail),
            value=[max(t["magnitude"], lo) for t in avail],
            estimate=[max(t["estimate"], lo) if t["estimate"] and t["estimate"] > 0 else np.nan
                      for t in avail],
            color=[BLUE if t["name"] in pairs else (VERMILION if t["name"] == "residual" else GREEN)
                   for t in avail],
            label=[(f"{t['magnitude']:.1e}" if t["magnitude"] > 0 else "0 (none in the data)")
                   if t["magnitude"] >= lo * 30 or t["magnitude"] == 0 else "" for t in avail],
            ink=["white" if t["magnitude"] >= lo * 30 else "black" for t in avail],
            shown=[f"{t['magnitude']:.2e} m s-2" for t in avail])
        self.rank_fig.x_range.start, self.rank_fig.x_range.end = lo, hi * 3
        self.rank_fig.height = 110 + 36 * max(len(avail), 1)
        self.unavailable.object = ("<div style='font-size:15px'><b>Unavailable:</b> " + "; ".join(
            f"{esc(vocab.term_name(t['name']))} ({esc(t['note'])})" for t in rep["unavailable"])
            + "</div>") if rep.get("unavailable") else ""
        der = [t for t in rep["derived"] if t["magnitude"] is not None]
        self.der_fig.y_range.factors = [vocab.term_name(t["name"]) for t in der][::-1]
        self.der_src.data = dict(name=[vocab.term_name(t["name"]) for t in der],
                                 left=[lo] * len(der),
                                 value=[max(t["magnitude"], lo) for t in der],
                                 estimate=[max(t["estimate"], lo) if t["estimate"] else np.nan
                                           for t in der],
                                 label=[f"{t['magnitude']:.1e}" for t in der])
        self.der_fig.x_range.start, self.der_fig.x_range.end = lo, hi * 3
        self._show_balances(rep)
        self.numbers.object = self._numbers_html(rep)
        self.busy(False)

    def _show_balances(self, rep):
        bal = [(k, r) for k, r in rep["balances"].items() if r is not None]
        chosen = rep["verdict"]["balance"]
        th = self.thresholds.balanced
        names = [vocab.balance_name(k) for k, _ in bal]
        self.bal_fig.y_range.factors = names[::-1]
        # the label sits past both the bar and the dashed line, so it never crosses it
        self.bal_src.data = dict(
            name=names, value=[min(r, 1.5) for _, r in bal],
            color=[ORANGE if k == chosen else "#8a8a8a" for k, _ in bal],
            label=[f"{100 * r:.0f} %" + ("  (the verdict)" if k == chosen else "")
                   for k, r in bal],
            x=[max(min(r, 1.5), th) + 0.02 for _, r in bal])

    def _numbers_html(self, rep):
        rows = []
        explain = rep.get("explain", {})
        for k, (label, unit, meaning) in vocab.NUMBERS.items():
            val = rep["numbers"].get(k)
            txt = "n/a" if val is None else (f"{val:.3g}")
            said = explain.get(k)
            line = (f"<tr><td colspan='2' style='font-size:14px;color:{MUTED};"
                    f"padding:0 0 6px 8px'>{esc(said)}</td></tr>") if said else ""
            rows.append(f"<tr><td style='padding:2px 12px 2px 0;border-bottom:1px dotted #999'>"
                        f"{esc(label)}</td><td style='text-align:right'><b>{esc(txt)}</b> "
                        f"{esc(unit)}</td></tr>{line}")
        w = rep.get("winds", {})
        unit = self.state.wind_units
        k = vocab.WIND_UNITS[unit][1]
        for key, label, meaning in (("speed_rms", "wind speed", "RMS in the region"),
                                    ("geostrophic_speed_rms", "geostrophic speed",
                                     "RMS, from the height gradient")):
            val = w.get(key)
            if val is None:
                continue
            warn = (" <span style='color:#a30000'>(far above the wind: geostrophy fails here)"
                    "</span>" if key == "geostrophic_speed_rms" and w.get("speed_rms") and
                    val > 2 * w["speed_rms"] else "")
            rows.append(f"<tr><td>{label} ({meaning})</td><td style='text-align:right'>"
                        f"<b>{val * k:.1f}</b> {esc(unit)}{warn}</td></tr>")
        more = "".join(f"<li><b>{esc(label)}</b>: {esc(meaning)}</li>"
                       for key, (label, _, meaning) in vocab.NUMBERS.items() if key not in explain)
        return (f"<div style='font-size:16px;color:{INK}'><b>Numbers</b>"
                "<table style='font-size:16px'>" + "".join(rows) + "</table>"
                "<details style='font-size:15px'><summary>What the other numbers mean</summary>"
                f"<ul>{more}</ul></details></div>")

    def __panel__(self):
        return self.layout
