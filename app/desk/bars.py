"""Horizontal bar charts as HTML: the ranked terms, the derived views, the candidate balances.

Plain HTML and CSS, not a plotting canvas: text stays text (readable at any zoom, by a
screen reader and by a test), and a new ranking is one change of one pane, which the
browser draws in a few milliseconds (a canvas figure costs it a layout of the page).

Each row is ``name | bar | value``. On a log axis a bar starts at the axis's low end
and ends at the row's magnitude; an a priori estimate is a white diamond. Every string
that reaches the HTML goes through :func:`app.desk.look.esc`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .look import INK, MUTED, esc

__all__ = ["Bar", "log_range", "log_bars", "linear_bars"]


@dataclass
class Bar:
    name: str  #: the display name (app.wording)
    value: float  #: where the bar ends (axis units)
    label: str  #: the value as shown beside the bar
    colour: str
    estimate: float | None = None  #: a priori estimate (log charts), a diamond
    tip: str = ""  #: the full sentence on hover
    strong: bool = False  #: the chosen row (the verdict), in bold


def log_range(values) -> tuple[float, float]:
    """Decades spanning the positive ``values``: at most six below the largest."""
    vals = [v for v in values if v is not None and v > 0 and math.isfinite(v)]
    if not vals:
        return 1e-8, 1e-2
    hi = 10.0 ** math.ceil(math.log10(max(vals)))
    lo = max(10.0 ** math.floor(math.log10(min(vals))), hi * 1e-6)
    if hi <= lo:
        hi = lo * 10
    return lo, hi


def _pct_log(v, lo, hi) -> float:
    if v is None or not v > 0:
        return 0.0
    return 100.0 * min(
        max((math.log10(v) - math.log10(lo)) / (math.log10(hi) - math.log10(lo)), 0.0), 1.0
    )


def _pct_lin(v, lo, hi) -> float:
    return 100.0 * min(max((v - lo) / (hi - lo), 0.0), 1.0)


def _row(bar: Bar, width: float, diamond: float | None) -> str:
    mark = ""
    if diamond is not None:
        mark = (
            f"<span aria-hidden='true' title='a priori' style='position:absolute;top:50%;"
            f"left:{diamond:.2f}%;width:11px;height:11px;margin:-7px 0 0 -7px;"
            "background:#ffffff;border:2px solid #000000;transform:rotate(45deg)'></span>"
        )
    weight = "700" if bar.strong else "400"
    return (
        f"<div class='bd-bar-row' title='{esc(bar.tip)}' style='display:grid;"
        "grid-template-columns:var(--bd-name) 1fr var(--bd-val);align-items:center;"
        "column-gap:8px;min-height:30px'>"
        f"<span class='bd-bar-name' style='font-size:15px;font-weight:{weight};"
        f"color:{INK};text-align:right;line-height:1.15'>{esc(bar.name)}</span>"
        "<span style='position:relative;height:22px;border-left:1px solid #555'>"
        f"<span aria-hidden='true' style='position:absolute;left:0;top:2px;bottom:2px;"
        f"width:{width:.2f}%;background:{bar.colour}'></span>{mark}</span>"
        f"<span class='bd-bar-value' style='font-size:15px;font-weight:{weight};"
        f"color:{INK};font-variant-numeric:tabular-nums'>{esc(bar.label)}</span></div>"
    )


def _axis(ticks, grid_css: str, caption: str) -> str:
    labels = "".join(
        f"<span style='position:absolute;left:{p:.2f}%;transform:translateX(-50%);"
        f"white-space:nowrap'>{esc(t)}</span>"
        for p, t in ticks
    )
    return (
        f"<div aria-hidden='true' style='display:grid;grid-template-columns:var(--bd-name) "
        "1fr var(--bd-val);column-gap:8px'><span></span>"
        f"<span style='position:relative;height:20px;font-size:14px;color:{INK};"
        f"border-top:1px solid #555;{grid_css}'>{labels}</span><span></span></div>"
        f"<div style='font-size:14px;color:{MUTED};text-align:center'>{esc(caption)}</div>"
    )


def _chart(rows_html: str, axis_html: str, lines: str, name_px: int, value_px: int = 86) -> str:
    return (
        f"<div class='bd-bars' style='--bd-name:{name_px}px;--bd-val:{value_px}px;"
        f"position:relative;margin:4px 0 10px 0'>{lines}{rows_html}{axis_html}</div>"
    )


def _lines(positions, dashed_at=None) -> str:
    """Vertical guides over the track column (decades, or a threshold)."""
    out = []
    for p in positions:
        out.append(
            f"<span style='position:absolute;top:0;bottom:38px;left:calc(var(--bd-name) + "
            f"8px + (100% - var(--bd-name) - var(--bd-val) - 16px) * {p / 100:.4f});"
            "border-left:1px dotted #9a9a9a'></span>"
        )
    if dashed_at is not None:
        out.append(
            f"<span style='position:absolute;top:0;bottom:38px;left:calc(var(--bd-name) + "
            f"8px + (100% - var(--bd-name) - var(--bd-val) - 16px) * {dashed_at / 100:.4f})"
            ";border-left:2px dashed #000000'></span>"
        )
    return "<div aria-hidden='true'>" + "".join(out) + "</div>"


def log_bars(bars: list[Bar], lo: float, hi: float, caption: str, name_px: int = 170) -> str:
    """Bars on a log axis from ``lo`` to ``hi`` (powers of ten), diamonds at the estimates."""
    if not bars:
        return ""
    rows = "".join(
        _row(b, _pct_log(b.value, lo, hi), _pct_log(b.estimate, lo, hi) if b.estimate else None)
        for b in bars
    )
    n = round(math.log10(hi / lo))
    step = 1 if n <= 4 else 2
    decades = [lo * 10.0**k for k in range(0, n + 1, step)]
    ticks = [(_pct_log(d, lo, hi), f"1e{round(math.log10(d))}") for d in decades]
    return _chart(rows, _axis(ticks, "", caption), _lines([p for p, _ in ticks]), name_px)


def linear_bars(
    bars: list[Bar],
    lo: float,
    hi: float,
    ticks,
    caption: str,
    dashed_at: float | None = None,
    name_px: int = 170,
) -> str:
    """Bars on a linear axis; ``ticks`` are (value, text); an optional dashed guide."""
    if not bars:
        return ""
    rows = "".join(_row(b, _pct_lin(min(b.value, hi), lo, hi), None) for b in bars)
    tk = [(_pct_lin(v, lo, hi), t) for v, t in ticks]
    return _chart(
        rows,
        _axis(tk, "", caption),
        _lines([p for p, _ in tk], None if dashed_at is None else _pct_lin(dashed_at, lo, hi)),
        name_px,
        value_px=112,
    )
