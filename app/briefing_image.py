"""The briefing image: the chart as it is on screen and the ranked terms in one PNG.

Drawn with matplotlib on the server (no browser needed) from the same data the
page shows: the field, its units and colour range, the height contours, the
vectors and their reference arrow, the points without data, and the region's
outline as it is now (box or drawn area, on every projection). Stamped with the
case, level, valid time with its run and lead time, the region and the verdict,
the caution, and for invented cases a clear mark.
"""

from __future__ import annotations

import io
import math
import textwrap

import numpy as np

from . import wording
from .outside import FIGURE_RC, figure_text

__all__ = ["briefing_png", "briefing_figure", "OUTLINE_RGB", "INVENTED_RGB"]

#: the region's outline colour (Okabe-Ito orange), which tests look for in the image
OUTLINE_RGB = (0xE6, 0x9F, 0x00)
#: the invented-data mark's background, which tests look for too
INVENTED_RGB = (0x5C, 0x0A, 0x5C)
INVENTED_RGB_HEX = "#{:02X}{:02X}{:02X}".format(*INVENTED_RGB)


def briefing_png(
    chart,
    report,
    outline,
    *,
    region_text: str,
    caution: str,
    invented_text: str,
    notes=(),
    room_notes=(),
    balanced: float | None = None,
) -> bytes:
    """A PNG of the chart beside the ranked term magnitudes (see the module docstring).

    ``outline`` is the region's (x, y) in the chart's view coordinates, or None
    for the whole case. ``room_notes`` are a review room's notes, (label, (x, y) or
    None, text): marked on the chart where they have a point, and listed in full below.
    ``balanced`` is the imbalance a balance may leave (the verdict's limit, a share).
    """
    if balanced is None:
        from balance_core.verdict import Thresholds

        balanced = Thresholds().balanced
    import matplotlib

    matplotlib.use("Agg")

    # every text drawn as plain text: a "$" in a note or a file name is a dollar sign, never
    # mathematics that could fail to parse and break the image for the whole room
    with matplotlib.rc_context(FIGURE_RC):
        return _briefing_png(
            chart,
            report,
            outline,
            region_text=region_text,
            caution=caution,
            invented_text=invented_text,
            notes=notes,
            room_notes=room_notes,
            balanced=balanced,
        )


def _briefing_png(chart, report, outline, **kw) -> bytes:
    import matplotlib.pyplot as plt

    sheet = briefing_figure(chart, report, outline, **kw)
    buf = io.BytesIO()
    sheet.savefig(buf, format="png")
    plt.close(sheet)
    return buf.getvalue()


def briefing_figure(
    chart,
    report,
    outline,
    *,
    region_text,
    caution,
    invented_text,
    notes,
    room_notes,
    balanced,
    size=(16.0, 9.0),
    list_room_notes=True,
):
    """The briefing's matplotlib figure (the PNG's, and the first page of the briefing sheet,
    :mod:`app.briefing_sheet`, at the paper's size): ``size`` in inches; the room's notes
    listed in a band below unless ``list_room_notes`` is false (the sheet lists them on its
    second page). Call inside ``matplotlib.rc_context(FIGURE_RC)``."""
    import matplotlib.pyplot as plt

    listed = room_note_lines(room_notes) if list_room_notes else []
    # the room's notes, in full, in a band below the briefing that grows with them
    band = 0.0 if not listed else 0.45 + NOTE_LINE_IN * len(listed)
    sheet = plt.figure(figsize=(size[0], size[1] + band), dpi=110)
    sheet.patch.set_facecolor("white")
    if listed:
        fig, below = sheet.subfigures(2, 1, height_ratios=[9, band])
        _list_room_notes(below, listed, band)
    else:
        fig = sheet
    ax = fig.add_axes([0.04, 0.12, 0.55, 0.72])
    axr = fig.add_axes([0.77, 0.41, 0.21, 0.31])
    axb = fig.add_axes([0.77, 0.12, 0.21, 0.14])
    title = "balance-desk"
    if chart is not None:
        _draw_chart(fig, ax, chart, outline)
        title = figure_text(chart.title)
    fig.suptitle(title, fontsize=17, fontweight="bold", x=0.04, y=0.975, ha="left")
    fig.text(0.04, 0.905, f"Region: {figure_text(region_text)}", fontsize=13)
    if invented_text and (chart is not None and chart.invented or (report or {}).get("invented")):
        # on the region's line, right-aligned: clear of the title however long it is
        fig.text(
            0.985,
            0.915,
            invented_text,
            fontsize=13,
            fontweight="bold",
            color="white",
            ha="right",
            va="center",
            bbox=dict(facecolor=INVENTED_RGB_HEX, edgecolor="none", pad=6),
        )
    if report and report.get("terms"):
        _draw_ranking(fig, axr, axb, report, balanced)
    else:
        axr.set_axis_off()
        axb.set_axis_off()
    for i, n in enumerate(notes[:3]):
        fig.text(0.04, 0.072 - 0.02 * i, figure_text(n), fontsize=10.5, color="#333333")
    if room_notes and chart is not None:
        _mark_room_notes(ax, room_notes)
    fig.text(0.04, 0.012, "Caution: " + caution, fontsize=11, color="#5a4500")
    return sheet


#: the height of one line of the room's notes (inches, at 10 pt)
NOTE_LINE_IN = 0.2
#: characters in one line of the room's notes across the image
NOTE_WIDTH = 180
#: at most this many lines of notes; the rest are named, to be read in the notes export
NOTE_LINES_MAX = 150


def room_note_lines(room_notes) -> list[str]:
    """The lines listing a review room's notes: each note in full, wrapped, its label first
    and its following lines indented under its text."""
    lines: list[str] = []
    for i, (label, _xy, text) in enumerate(room_notes):
        wrapped = textwrap.wrap(
            f"{label} {figure_text(text)}",
            NOTE_WIDTH,
            subsequent_indent=" " * (len(label) + 1),
            break_long_words=True,
        )
        if len(lines) + len(wrapped) > NOTE_LINES_MAX:
            lines.append(f"... and {len(room_notes) - i} more note(s), in full in the notes export")
            break
        lines.extend(wrapped)
    return lines


def _list_room_notes(band, lines, height_in):
    """The room's notes, listed in the band below the briefing."""
    top = 1.0 - 0.22 / height_in
    band.text(0.04, top, "Room notes", fontsize=11.5, fontweight="bold", va="top")
    for i, line in enumerate(lines):
        y = top - (0.3 + NOTE_LINE_IN * i) / height_in
        band.text(0.04, y, line, fontsize=10, va="top", color="#1a1a1a")


def _mark_room_notes(ax, room_notes):
    """A review room's notes with a point: numbered marks on the chart."""
    for label, xy, _text in room_notes:
        if ax is not None and xy is not None:
            ax.plot(*xy, marker="s", ms=9, color="#1a1a1a", mec="white", mew=1.5)
            ax.annotate(
                label,
                xy,
                xytext=(7, 3),
                textcoords="offset points",
                fontsize=11,
                color="white",
                fontweight="bold",
                bbox=dict(facecolor="#1a1a1a", lw=0, pad=1.5),
            )


def _draw_chart(fig, ax, chart, outline):
    g = chart.geom
    x0, x1, y0, y1 = g.extent
    data = chart.raster.astype(float)
    if chart.color_kind == "log":
        from matplotlib.colors import LogNorm

        data = np.where(data > 0, data, np.nan)
        im = ax.imshow(
            data,
            origin="lower",
            extent=(x0, x1, y0, y1),
            cmap="cividis",
            norm=LogNorm(*chart.color_range),
            aspect="auto",
        )
    elif chart.color_kind == "classes":
        from matplotlib.colors import ListedColormap

        from balance_core.vocabulary import BALANCE_CLASSES

        im = ax.imshow(
            data,
            origin="lower",
            extent=(x0, x1, y0, y1),
            cmap=ListedColormap([b.colour for b in BALANCE_CLASSES]),
            vmin=chart.color_range[0],
            vmax=chart.color_range[1],
            aspect="auto",
            interpolation="nearest",
        )
    else:
        cmap = "RdBu_r" if chart.color_kind == "diverging" else "cividis"
        im = ax.imshow(
            data,
            origin="lower",
            extent=(x0, x1, y0, y1),
            cmap=cmap,
            vmin=chart.color_range[0],
            vmax=chart.color_range[1],
            aspect="auto",
        )
    if chart.masked is not None:
        ax.imshow(
            np.where(np.isfinite(chart.masked), 1.0, np.nan),
            origin="lower",
            extent=(x0, x1, y0, y1),
            cmap="Greys",
            vmin=0,
            vmax=1.8,
            alpha=0.6,
            aspect="auto",
        )
    below, above = chart.color_cut
    extend = {(True, True): "both", (True, False): "min", (False, True): "max"}
    # the colour bar's pointed ends mark values beyond the scale (drawn in its end colours)
    cb = fig.colorbar(
        im, ax=ax, fraction=0.035, pad=0.01, extend=extend.get((below > 0, above > 0), "neither")
    )
    cb.set_label(chart.field_label + (f" ({chart.units})" if chart.units else ""), fontsize=13)
    cb.ax.tick_params(labelsize=12)
    if chart.color_kind == "classes":  # one band per verdict class, named
        from balance_core.vocabulary import BALANCE_CLASSES

        cb.set_ticks(range(len(BALANCE_CLASSES)), labels=[b.display for b in BALANCE_CLASSES])
    if chart.overlay is not None:
        # the second field, dashed in vermilion as on the page
        ox, oy, _, olabels = chart.overlay
        for xs, ys in zip(ox, oy):
            ax.plot(xs, ys, color="#D55E00", lw=1.2, ls="--")
        _contour_labels(ax, olabels, "{:g}", 10, "#D55E00")
    lx, ly, lv, labels = chart.contours
    for xs, ys in zip(lx, ly):
        ax.plot(xs, ys, color="black", lw=1.0)
    digits = 1 if chart.contour_units == "dam" and chart.contour_interval < 1.5 else 0
    _contour_labels(ax, labels, f"{{:.{digits}f}}", 11, "black")
    if chart.coast is not None:
        for xs, ys in zip(*chart.coast):
            ax.plot(xs, ys, color="#222222", lw=1.2)
    if chart.land is not None:
        for xs, ys in zip(*chart.land):
            ax.plot(xs, ys, color="#5b3a1a", lw=2, ls="--")
    gx, gy, glab = chart.graticule
    for xs, ys in zip(gx, gy):
        ax.plot(xs, ys, color="#555555", lw=0.8, ls=":")
    for x, y, text, _ in glab:
        ax.text(
            x,
            y,
            text,
            fontsize=10,
            color="#1a1a1a",
            bbox=dict(facecolor="white", alpha=0.85, lw=0, pad=1),
        )
    if chart.barbs is not None:
        # the same barbs as the page's (render.wind_barbs), in knots
        from matplotlib.collections import LineCollection, PolyCollection

        (lx, ly), (fx, fy), (cx, cy) = (
            chart.barbs["lines"],
            chart.barbs["pennants"],
            chart.barbs["calm"],
        )
        ax.add_collection(
            LineCollection([list(zip(a, b)) for a, b in zip(lx, ly)], colors="black", lw=1.2)
        )
        ax.add_collection(
            PolyCollection([list(zip(a, b)) for a, b in zip(fx, fy)], facecolors="black")
        )
        ax.scatter(cx, cy, s=18, facecolors="none", edgecolors="black", linewidths=1.2)
    elif chart.vectors is not None:
        v = chart.vectors
        ax.quiver(
            v["x0"],
            v["y0"],
            v["x1"] - v["x0"],
            v["y1"] - v["y0"],
            angles="xy",
            scale_units="xy",
            scale=1,
            width=0.0022,
            color="black",
        )
    a = chart.reference_arrow
    if a is not None:
        ax.annotate(
            "",
            xy=(a["x1"], a["y1"]),
            xytext=(a["x0"], a["y0"]),
            arrowprops=dict(arrowstyle="-|>", lw=2.2, color="black"),
        )
        ax.text(
            a["x0"],
            a["y0"] + 0.025 * (y1 - y0),
            f"arrow: {a['text']}",
            fontsize=11,
            bbox=dict(facecolor="white", alpha=0.9, lw=0, pad=2),
        )
    if outline is not None:
        ax.plot(*outline, color="white", lw=5)
        ax.plot(*outline, color="#{:02X}{:02X}{:02X}".format(*OUTLINE_RGB), lw=3)
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    if g.kind != "plate_carree":
        ax.set_xticks([])
        ax.set_yticks([])
    else:
        ax.grid(color="#555555", alpha=0.45, ls=":")
        ax.xaxis.set_major_formatter(lambda x, _: wording.lon(x, 0))
        ax.yaxis.set_major_formatter(lambda y, _: wording.lat(y, 0))
    ax.tick_params(labelsize=12)
    interval = (
        ""
        if not math.isfinite(chart.contour_interval)
        else f" every {chart.contour_interval:g} {chart.contour_units}"
    )
    dashed = f"; dashed: {chart.overlay_label}" if chart.overlay_label else ""
    ax.set_title(
        f"{chart.field_label}; {chart.contour_label}{interval}{dashed}; {g.label}", fontsize=13
    )


def _contour_labels(ax, labels, fmt, size, colour):
    """Contour labels ((x, y, value) each, written with ``fmt``) on a white box."""
    for x, y, v in labels:
        ax.text(
            x,
            y,
            fmt.format(v),
            fontsize=size,
            color=colour,
            ha="center",
            va="center",
            bbox=dict(facecolor="white", alpha=0.85, lw=0, pad=1),
        )


def _draw_balances(axb, report, balanced):
    """The candidate balances as on the page: what each leaves over, in % of the pressure
    gradient, cut at 150 % (the value written beside the bar), the limit dashed; candidates
    not tested are not drawn."""
    not_tested = report["verdict"].get("not_tested") or {}
    bal = [(k, r) for k, r in report["balances"].items() if r is not None and k not in not_tested]
    chosen = report["verdict"]["balance"]
    names = [wording.balance_name(k) for k, _ in bal]
    axb.barh(
        names,
        [min(100 * r, 150) for _, r in bal],
        color=["#E69F00" if k == chosen else "#8a8a8a" for k, _ in bal],
    )
    for name, (k, r) in zip(names, bal):
        label = f"{100 * r:.0f} %" + (" (verdict)" if k == chosen else "")
        axb.text(min(100 * r, 150) + 2, name, label, va="center", fontsize=11)
    axb.axvline(100 * balanced, color="black", ls="--")
    axb.set_xlim(0, 175)
    axb.set_xticks([0, 50, 100, 150], ["0", "50 %", "100 %", "150 %"])
    axb.tick_params(labelsize=12)
    axb.set_title(
        "Candidate balances: what is left over\n"
        f"(% of the pressure gradient; dashed: the limit, {100 * balanced:.0f} %)",
        fontsize=11.5,
        loc="right",
    )


def _draw_ranking(fig, axr, axb, report, balanced):
    avail = [t for t in report["terms"] if t["magnitude"] is not None and t["magnitude"] > 0][::-1]
    names = [wording.term_name(t["name"]) for t in avail]
    vals = [t["magnitude"] for t in avail]
    est = [t["estimate"] or np.nan for t in avail]
    if vals:
        lo = 10.0 ** math.floor(math.log10(min(vals))) / 10
        axr.barh(names, [v - lo for v in vals], left=lo, color="#0072B2")
        axr.scatter(
            est,
            names,
            marker="D",
            facecolor="white",
            edgecolor="black",
            zorder=3,
            label="a priori (region's scales)",
        )
        axr.set_xscale("log")
        # plain "1e-4" labels: the log scale's own labels are mathematics, which the
        # image never parses (outside text must stay text), so they would show as code
        from matplotlib.ticker import FuncFormatter, NullFormatter

        axr.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"1e{math.log10(v):.0f}"))
        axr.xaxis.set_minor_formatter(NullFormatter())
        axr.legend(fontsize=11, loc="lower right")
    axr.set_xlabel("m s-2 (area-weighted RMS)", fontsize=12)
    axr.tick_params(labelsize=12)
    axr.set_title("Terms in the region", fontsize=14)
    _draw_balances(axb, report, balanced)
    v = report["verdict"]
    name = wording.balance_name(v["balance"])
    # the verdict's sentence names its balance first ("Geostrophic: ..."); it is not repeated
    text = v["text"] if v["text"].lower().startswith(name.lower()) else f"{name}. {v['text']}"
    fig.text(
        0.655,
        0.85,
        textwrap.fill(text, 62),
        fontsize=12,
        va="top",
        ha="left",
        bbox=dict(facecolor="#fafafa", edgecolor="#E69F00", lw=2, pad=6),
    )
