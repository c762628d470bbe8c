"""Through the archive: the result of a ``balance-desk batch`` run, as time series.

``balance-desk serve --archive RESULT.parquet`` (or .csv) adds the page ``/archive``:
choose a result, a region and a level, and see the imbalance ratio of each candidate
balance through the valid times, against the limit for a balance, with each time's
verdict as a coloured mark, and the verdict counts of that region and level. It reads
the result file; it computes no physics.
"""

from __future__ import annotations

import os

import numpy as np
import panel as pn
from bokeh.models import ColumnDataSource, CustomJS, HoverTool, Span, TapTool
from bokeh.plotting import figure

from balance_core.vocabulary import BALANCE_CLASSES

from .. import wording
from .look import (
    CAUTION,
    INK,
    INVENTED_BG,
    WIDGET_CSS,
    alert,
    esc,
    style_figure,
    valid_time_ticks,
)
from .systems import VERDICT_COLOURS

__all__ = ["load_result", "ArchivePage", "make_archive_session"]

#: the candidate balances' ratio columns of a batch result: column -> (code name, colour)
RATIOS = {b.column: (b.name, b.colour) for b in BALANCE_CLASSES if b.column is not None}


def load_result(path):
    """A batch result as a pandas DataFrame (Parquet or CSV); ValueError with a sentence."""
    import pandas as pd

    try:
        df = pd.read_parquet(path) if str(path).endswith(".parquet") else pd.read_csv(path)
    except Exception as exc:  # noqa: BLE001 - one sentence
        raise ValueError(
            f"{os.path.basename(str(path))}: not a batch result that can be read "
            f"({type(exc).__name__})"
        ) from None
    need = {"valid_time", "level_hpa", "region", "verdict", "ratio_geostrophic"}
    if not need <= set(df.columns):
        raise ValueError(
            f"{os.path.basename(str(path))}: not a balance-desk batch result "
            f"(it lacks {', '.join(sorted(need - set(df.columns)))})"
        )
    df = df.copy()
    df["valid_time"] = pd.to_datetime(df["valid_time"], utc=True).dt.tz_localize(None)
    return df


class ArchivePage(pn.viewable.Viewer):
    """One session's page of the archive view."""

    def __init__(self, results: dict, desk_cases: dict | None = None, **params):
        super().__init__(**params)
        self.results = results
        #: the desk's case for a file of a result: absolute path or file name -> case name
        #: (serve's cases); a mark of a file the desk holds opens it there
        self.desk_cases = dict(desk_cases or {})
        css = [WIDGET_CSS]
        names = list(results)
        self.w_result = pn.widgets.Select(
            label="Result",
            options=names,
            value=names[0] if names else None,
            width=320,
            stylesheets=css,
        )
        self.w_region = pn.widgets.Select(label="Region", width=320, stylesheets=css)
        self.w_level = pn.widgets.Select(label="Pressure level", width=160, stylesheets=css)
        self.src = ColumnDataSource(
            dict(
                t=[],
                **{k: [] for k in RATIOS},
                verdict=[],
                colour=[],
                y=[],
                file=[],
                run=[],
                data=[],
                link=[],
            )
        )
        fig = figure(
            height=380,
            sizing_mode="stretch_width",
            x_axis_type="datetime",
            y_axis_label="imbalance ratio (smaller holds better)",
            tools="pan,wheel_zoom,reset,save,tap",
            toolbar_location="above",
            output_backend="canvas",
            y_range=(0, 1.5),
        )
        for k, (name, colour) in RATIOS.items():
            fig.line(
                "t",
                k,
                source=self.src,
                line_width=2.5,
                color=colour,
                legend_label=wording.balance_name(name),
            )
        fig.scatter(
            "t",
            "y",
            source=self.src,
            size=11,
            fill_color="colour",
            line_color="white",
            line_width=1.5,
            legend_label="verdict",
        )
        fig.add_layout(
            Span(
                location=0.3,
                dimension="width",
                line_dash="dashed",
                line_color="black",
                line_width=1.5,
            )
        )
        fig.add_tools(
            HoverTool(
                tooltips=[
                    ("time", "@t{%a %d %b %Y %H UTC}"),
                    ("run", "@run"),
                    ("file", "@file"),
                    ("data", "@data"),
                    ("verdict", "@verdict"),
                    *[(name, f"@{col}{{0.00}}") for col, (name, _) in RATIOS.items()],
                ],
                formatters={"@t": "datetime"},
            )
        )
        # a mark opens the desk at its file, time, level and region, in a new tab (a mark of
        # a file this server does not hold has no link and opens nothing)
        fig.select_one(TapTool).callback = CustomJS(
            args=dict(src=self.src),
            code="const i = src.selected.indices[0]; if (i === undefined) return; "
            "const u = src.data.link[i]; if (u) window.open(u, '_blank', 'noopener');",
        )
        fig.xaxis.formatter = valid_time_ticks()
        fig.legend.location = "top_left"
        style_figure(fig)
        self.fig = fig
        self.counts = pn.pane.HTML("", sizing_mode="stretch_width")
        self.note = pn.pane.HTML("", sizing_mode="stretch_width")
        for w in (self.w_result, self.w_region, self.w_level):
            w.param.watch(lambda e: self.update(), "value")
        self.w_result.param.watch(lambda e: self._choices(), "value")
        self.layout = pn.Column(
            pn.pane.HTML(
                f"<div style='color:{INK}'><span style='font-size:26px;font-weight:700'>"
                "balance-desk</span> <span style='font-size:19px'>&middot; through the "
                "archive</span></div>",
                sizing_mode="stretch_width",
            ),
            pn.Row(self.w_result, self.w_region, self.w_level, styles={"flex-wrap": "wrap"}),
            self.note,
            pn.pane.Bokeh(fig, sizing_mode="stretch_width"),
            pn.pane.HTML(
                "<div style='font-size:15px'>Lines: the imbalance ratio of each "
                "candidate balance, one line per run (or per file where a file names no "
                "run): runs are never joined (the dashed line is the limit for a balance, "
                "30 %); marks: the verdict at each time (at the smallest ratio), "
                "filled by balance as on the chart. Click a mark to open the desk at its "
                "time, level and region, where this server holds its file.</div>",
                sizing_mode="stretch_width",
            ),
            self.counts,
            pn.pane.HTML(
                f"<div style='background:#fff3cd;padding:8px;border-top:2px solid "
                f"#856404;font-size:16px'><b>Caution.</b> {esc(CAUTION)}</div>",
                sizing_mode="stretch_width",
            ),
            sizing_mode="stretch_width",
        )
        self._choices()

    def _df(self):
        return self.results.get(self.w_result.value)

    def _choices(self):
        df = self._df()
        if df is None:
            self.note.object = alert(
                "No batch result was given to this server (serve --archive RESULT.parquet).", "info"
            )
            return
        regions = sorted(df["region"].astype(str).unique())
        levels = sorted(df["level_hpa"].unique(), reverse=True)
        self.w_region.options = regions
        if self.w_region.value not in regions:
            self.w_region.value = regions[0] if regions else None
        self.w_level.options = {f"{lv:g} hPa": float(lv) for lv in levels}
        if self.w_level.value not in [float(lv) for lv in levels]:
            self.w_level.value = float(levels[0]) if levels else None
        self.update()

    def update(self):
        df = self._df()
        if df is None or self.w_region.value is None or self.w_level.value is None:
            return
        sel = df[
            (df["region"].astype(str) == self.w_region.value)
            & (np.isclose(df["level_hpa"], self.w_level.value))
        ]
        sel = _in_series(sel)
        n = len(sel)
        data = {"t": sel["valid_time"].to_numpy()}
        for k in RATIOS:
            data[k] = sel[k].to_numpy(dtype=float) if k in sel else np.full(n, np.nan)
        # each time's mark sits on the ratio of its verdict's balance (the smallest ratio
        # where the verdict is no candidate balance)
        ratios = np.vstack([data[k] for k in RATIOS]) if n else np.zeros((len(RATIOS), 0))
        smallest = np.nanmin(np.where(np.isfinite(ratios), ratios, np.inf), axis=0)
        column = {name: i for i, (name, _) in enumerate(RATIOS.values())}
        own = [
            ratios[column[v], i] if v in column else smallest[i]
            for i, v in enumerate(sel["verdict"])
        ]
        data["y"] = np.where(np.isfinite(own), own, 0.0) if n else []
        data["verdict"] = [wording.balance_name(v) for v in sel["verdict"]]
        data["colour"] = [VERDICT_COLOURS.get(v, "#8c8c8c") for v in sel["verdict"]]
        data["file"] = [str(f) for f in sel["file"]] if "file" in sel else [""] * n
        data["run"] = list(sel["_run"])
        invented = _flags(sel, "invented")
        data["data"] = ["invented demo data" if x else "" for x in invented]
        data["link"] = [self._link(row) for row in sel.itertuples(index=False)]
        # the runs apart: a break (no values) between one run's last time and the next's
        # first, so that a line never joins two runs
        self.src.data = _with_breaks(data, list(sel["_run"]))
        counts = sel["verdict"].value_counts()
        total = int(counts.sum())
        items = "".join(
            f"<li><span style='display:inline-block;width:12px;height:12px;background:"
            f"{VERDICT_COLOURS.get(v, '#8c8c8c')};border:1px solid #333'></span> "
            f"{esc(wording.balance_name(v))}: {n} of {total} ({100 * n / total:.0f} %)</li>"
            for v, n in counts.items()
        )
        files = sel["file"].nunique() if "file" in sel else 0
        runs = sel["_run"].nunique()
        mark = (
            f" <span class='bd-invented' style='background:{INVENTED_BG};color:#fff;"
            "padding:2px 8px;border-radius:4px;white-space:nowrap'>invented demo data: "
            f"{int(np.sum(invented))} of {total} times</span>"
            if any(invented)
            else ""
        )
        self.counts.object = (
            f"<div style='font-size:16px;color:{INK}'><b>Verdicts</b> at "
            f"{self.w_level.value:g} hPa in {esc(self.w_region.value)}, "
            f"{_count(total, 'valid time')} from {_count(files, 'file')} in "
            f"{_count(runs, 'run')}:{mark}<ul>{items}</ul></div>"
        )
        self.note.object = ""

    def _link(self, row) -> str:
        """The desk's address at a row's file, time, level and region ('' where this server
        does not hold the file)."""
        from urllib.parse import urlencode

        path = getattr(row, "path", None)
        name = self.desk_cases.get(str(path)) if path is not None else None
        if name is None:
            name = self.desk_cases.get(str(getattr(row, "file", "")))
        if name is None:
            return ""
        query = {"case": name, "level": f"{row.level_hpa:g}", "time": _iso(row.valid_time)}
        box = [getattr(row, f"region_{k}", None) for k in ("west", "east", "south", "north")]
        if all(b is not None and np.isfinite(b) for b in box):
            query["region"] = "box:" + ",".join(f"{b:g}" for b in box)
        return "/?" + urlencode(query)

    def __panel__(self):
        return self.layout


def _count(n: int, thing: str) -> str:
    return f"{n} {thing}" + ("" if n == 1 else "s")


def _iso(t) -> str:
    return np.datetime64(t, "s").astype(str) + "Z"


def _flags(sel, col) -> list:
    """A true/false column as bools (absent in results written before it: all false)."""
    if col not in sel:
        return [False] * len(sel)
    return [str(v).strip().lower() in ("true", "1", "1.0") for v in sel[col]]


def _in_series(sel):
    """The rows by run, then by valid time, with the run's name in ``_run``: the run's
    reference time where the rows give one, else the file (a file of unknown run is its own
    series)."""
    import pandas as pd

    sel = sel.copy()
    ref = sel["reference_time"] if "reference_time" in sel else pd.Series([None] * len(sel))
    ref = pd.to_datetime(ref.to_numpy(), utc=True, errors="coerce")
    files = sel["file"].astype(str).to_numpy() if "file" in sel else [""] * len(sel)
    sel["_run"] = [
        f"run {wording.when_short(np.datetime64(r.tz_localize(None)))}"
        if not pd.isna(r)
        else f"file {f}"
        for r, f in zip(ref, files)
    ]
    sel["_first"] = sel.groupby("_run")["valid_time"].transform("min")
    return sel.sort_values(["_first", "_run", "valid_time"], kind="stable")


def _with_breaks(data: dict, runs: list) -> dict:
    """``data``'s columns with one empty row (NaN ratios, no mark) between two runs."""
    cut = [i for i in range(1, len(runs)) if runs[i] != runs[i - 1]]
    if not cut:
        return data
    out = {}
    for k, v in data.items():
        v = list(v)
        for i in reversed(cut):
            if k == "t":
                gap = v[i - 1]
            elif k in RATIOS or k == "y":
                gap = np.nan
            elif k == "colour":
                gap = "#8c8c8c"
            else:
                gap = ""
            v.insert(i, gap)
        out[k] = np.asarray(v) if k in RATIOS or k in ("t", "y") else v
    return out


def make_archive_session(results: dict, problems=(), desk_cases=None):
    """The archive page of one browser session (never raises)."""
    try:
        page = ArchivePage(results, desk_cases)
        if problems:
            page.note.object = alert("; ".join(problems))
        return page.layout
    except Exception:
        import logging
        import uuid

        eid = uuid.uuid4().hex[:8]
        logging.getLogger(__name__).exception("archive page failed (error id %s)", eid)
        return pn.pane.HTML(
            alert(f"The archive page could not be built (error id {eid}).", "error")
        )
