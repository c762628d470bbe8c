"""How the desk page looks: colours, type sizes, the caution, and text made safe for HTML.

Colours: Okabe-Ito for lines and marks (safe for colour-blind readers), cividis
and a perceptually uniform diverging map for fields. Text is at least 14 px and
every colour pair meets a contrast of 4.5:1 (WCAG 2.1, success criterion 1.4.3);
keyboard focus shows a 3 px ring.

Whatever the page shows that came from outside -- a file name, a file's
attributes, a link's values, an error message -- goes through :func:`esc` (HTML)
before it reaches an HTML pane; no Markdown pane shows outside text.
"""

from __future__ import annotations

import html

__all__ = [
    "CAUTION",
    "ORANGE",
    "SKY",
    "GREEN",
    "BLUE",
    "VERMILION",
    "PURPLE",
    "GREY",
    "INK",
    "MUTED",
    "esc",
    "GLOBAL_CSS",
    "PRINT_CSS",
    "style_figure",
    "palette",
    "alert",
    "INVENTED",
    "INVENTED_BG",
    "FONT",
    "BUSY",
    "mark_busy",
]

CAUTION = (
    "balance-desk is a diagnostic aid. Official forecasts and warnings come from the "
    "responsible meteorological service; local rules and licensed practice come first."
)
INVENTED = (
    "Invented demo data: a synthetic case made for trying the tool, not weather that happened."
)

# Okabe-Ito colours
ORANGE, SKY, GREEN, BLUE, VERMILION, PURPLE = (
    "#E69F00",
    "#56B4E9",
    "#009E73",
    "#0072B2",
    "#D55E00",
    "#CC79A7",
)
GREY = "#6f6f6f"  # no data; 5.1:1 on white
INK = "#1a1a1a"
MUTED = "#4a4a4a"  # secondary text; 8.9:1 on white
INVENTED_BG = "#5c0a5c"  # behind the invented-data mark (white on it: 13:1); the PNG's too

FONT = {"axis": "16px", "tick": "15px", "title": "18px", "label": "15px"}

#: Document-wide CSS. Panel and Bokeh size their text from --bokeh-font-size, which
#: crosses into their shadow roots; the focus ring and the busy state are ours.
GLOBAL_CSS = """
@page { size: landscape; margin: 8mm; }
@media print { html { zoom: 0.62; } }
:root { --bokeh-font-size: 16px; --design-primary-color: #0b5cad; }
html, body { font-size: 16px; color: #1a1a1a; }
*:focus-visible { outline: 3px solid #0b5cad !important; outline-offset: 2px !important; }
"""

#: Printed, the page is a briefing sheet: the parts that steer it (the controls, the tabs
#: below, the zoom buttons, the room's bar) are left out. A part marked ``bd-no-print`` is
#: hidden by this sheet in the shadow root of the layout that holds it (a page's parts live
#: in their parent's shadow root, where no document-wide rule reaches).
PRINT_CSS = """
@media print { .bd-no-print { display: none !important; } }
"""

#: CSS given to widgets' shadow roots: a selected toggle is unmistakable, text dark enough.
WIDGET_CSS = """
:host { --surface-text-color: #1a1a1a; }
.bk-btn-group .bk-btn.bk-active, .bk-btn.bk-active { background: #0b5cad !important;
  color: #ffffff !important; font-weight: 700; border-color: #0b5cad !important; }
.bk-btn:focus-visible, select:focus-visible, input:focus-visible {
  outline: 3px solid #0b5cad !important; outline-offset: 2px; }
label, .bk-input-group label { color: #1a1a1a; }
"""


#: How a part whose content is out of date looks until it is replaced: faded and grey.
#: Inline styles, not CSS classes or Panel's ``loading``: a change of classes makes the
#: browser lay the whole page out again (about 140 ms for this page), a style does not.
BUSY = {"opacity": "0.3", "filter": "grayscale(100%)"}
#: ... and current (set, not removed: the browser keeps an inline style that is dropped)
CURRENT = {"opacity": "1", "filter": "none"}


def mark_busy(part, on: bool = True):
    """Mark a Panel object as updating (``on``) or current."""
    styles = dict(part.styles or {})
    styles.update(BUSY if on else CURRENT)
    if styles != (part.styles or {}):
        part.styles = styles


def esc(text) -> str:
    """Outside text as HTML text: never markup."""
    return html.escape("" if text is None else str(text), quote=True)


def alert(text: str, kind: str = "warning") -> str:
    """An alert box (HTML) with escaped text; '' when there is nothing to say."""
    if not text:
        return ""
    colours = {
        "warning": ("#fff3cd", "#5c4400", "#856404"),
        "error": ("#fde2e1", "#5c0000", "#a30000"),
        "info": ("#e6f0fa", "#0a2f55", "#0b5cad"),
    }
    bg, fg, edge = colours.get(kind, colours["warning"])
    return (
        f"<div role='status' style='background:{bg};color:{fg};border-left:6px solid {edge};"
        f"padding:8px 12px;font-size:16px'>{esc(text)}</div>"
    )


def style_figure(fig, title_size=FONT["title"]):
    fig.title.text_font_size = title_size
    fig.title.text_color = INK
    for ax in fig.axis:
        ax.axis_label_text_font_size = FONT["axis"]
        ax.major_label_text_font_size = FONT["tick"]
        ax.axis_label_text_font_style = "normal"
        ax.axis_label_text_color = INK
        ax.major_label_text_color = INK
    fig.toolbar.logo = None
    return fig


def palette(kind):
    """The colours of a field's scale: "diverging", "classes" (the verdict classes' own
    colours, balance_core.vocabulary.BALANCE_CLASSES, in the order of their index) or
    sequential."""
    if kind == "classes":
        from balance_core.vocabulary import BALANCE_CLASSES

        return [b.colour for b in BALANCE_CLASSES]
    import colorcet as cc

    if kind == "diverging":
        return cc.CET_D1A if hasattr(cc, "CET_D1A") else cc.coolwarm  # blue-white-red, uniform
    from bokeh.palettes import Cividis256

    return Cividis256


def valid_time_ticks():
    """A time axis's ticks as the page writes valid times ("19 Jan 06 UTC", as
    app.wording.when_short), with no second line in another format under them."""
    from bokeh.models import DatetimeTickFormatter

    stamp = "%d %b %H UTC"
    return DatetimeTickFormatter(
        minutes="%d %b %H:%M UTC",
        hourmin="%d %b %H:%M UTC",
        hours=stamp,
        days=stamp,
        months="%b %Y",
        years="%Y",
        context=None,
    )
