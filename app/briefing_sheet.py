"""The briefing sheet: two landscape pages (A4 or Letter) as a PDF, made on the server.

Page one is the briefing image (:mod:`app.briefing_image`: the chart as on screen, the
verdict, the ranked terms and the candidate balances, the case, times, region, settings and
the caution), drawn at 200 dots an inch and laid on the page. Page two is text: the verdict
with why and its cautions, the region through the levels, the systems of the level, every
note in full (the chart's, the report's and a review room's) and the settings and caution
again. What does not fit on page two is counted there, never dropped silently.

Paper sizes are ISO 216 A4 (297 x 210 mm) and US Letter (11 x 8.5 in), landscape.
"""

from __future__ import annotations

import io
import textwrap

from . import wording
from .outside import FIGURE_RC, figure_text

__all__ = ["PAPERS", "briefing_pdf", "sheet_lines", "column_chars"]

#: landscape page sizes, inches: ISO 216 A4 (297 x 210 mm) and US Letter (11 x 8.5 in)
PAPERS = {"A4": (297 / 25.4, 210 / 25.4), "Letter": (11.0, 8.5)}

#: the image on page one: the briefing figure's size (inches) and its dots an inch
IMAGE_IN = (16.0, 10.4)
IMAGE_DPI = 200

#: page two: lines a column (two columns), the text's size (points) and a fixed-width
#: character's width in ems (DejaVu Sans Mono's is 0.6)
COLUMN_LINES = 62
TEXT_PT = 7.4
MONO_EM = 0.6


def column_chars(paper: str = "A4") -> int:
    """Characters that fit a line of one of page two's columns (47 % of the page's width)."""
    return int(0.47 * PAPERS[paper][0] * 72 / (MONO_EM * TEXT_PT))


def sheet_lines(
    report, *, levels=None, systems_text="", notes=(), room_notes=(), settings="", chars=88
):
    """Page two's text, as lines of at most ``chars``: the verdict with why, the levels,
    the systems, the notes."""
    out: list[str] = []

    def block(title, lines):
        if not lines:
            return
        out.append(f"## {title}")
        for line in lines:
            out.extend(textwrap.wrap(figure_text(line), chars, subsequent_indent="  ") or [""])
        out.append("")

    if report:
        v = report.get("verdict") or {}
        name, text = wording.balance_name(v.get("balance", "none")), v.get("text", "")
        # the verdict's sentence names its balance first ("Geostrophic: ..."): not repeated
        lines = [text if text.lower().startswith(name.lower()) else f"{name}: {text}"]
        if v.get("why"):
            lines.append(f"Why: {v['why']}")
        lines += [f"Take care: {c}" for c in v.get("cautions") or []]
        block("The verdict", lines)
    if levels and levels.get("rows"):
        rows = sorted(levels["rows"], key=lambda r: -r["level_hpa"])
        lines = [f"{'level':>9}  {'verdict':<13} {'best balance left over':<28} valid"]
        for r in rows:
            if r.get("error"):
                lines.append(f"{r['level_hpa']:>5g} hPa  error: {r['error']}")
                continue
            ratios = {k: x for k, x in (r.get("ratios") or {}).items() if x is not None}
            best = min(ratios.items(), key=lambda kv: kv[1]) if ratios else None
            left = f"{wording.balance_name(best[0])} {100 * best[1]:.0f} %" if best else "n/a"
            share = r.get("valid_share")
            lines.append(
                f"{r['level_hpa']:>5g} hPa  {wording.balance_name(r['balance']):<13} "
                f"{left:<28} {'n/a' if share is None else f'{100 * share:.0f} %'}"
            )
        block("The region through the levels", lines)
    if systems_text:
        block("Systems on this level", systems_text.splitlines())
    block("Notes", list(notes))
    block("The review room's notes", [f"{label}: {text}" for label, _, text in room_notes])
    if settings:
        block("Settings", [settings])
    return out


def briefing_pdf(
    chart,
    report,
    outline,
    *,
    region_text: str,
    caution: str,
    invented_text: str,
    notes=(),
    room_notes=(),
    levels=None,
    systems_text: str = "",
    settings: str = "",
    balanced: float | None = None,
    paper: str = "A4",
) -> bytes:
    """The briefing sheet as PDF bytes (see the module docstring); ``paper`` "A4" or
    "Letter"."""
    import matplotlib

    matplotlib.use("Agg")
    if balanced is None:
        from balance_core.verdict import Thresholds

        balanced = Thresholds().balanced
    width, height = PAPERS[paper]
    with matplotlib.rc_context(FIGURE_RC):
        from matplotlib.backends.backend_pdf import PdfPages

        buf = io.BytesIO()
        with PdfPages(buf, metadata={"Title": "balance-desk briefing sheet"}) as pdf:
            first = _first_page(
                chart,
                report,
                outline,
                (width, height),
                region_text=region_text,
                caution=caution,
                invented_text=invented_text,
                notes=[settings] if settings else [],
                room_notes=room_notes,
                balanced=balanced,
            )
            pdf.savefig(first)
            lines = sheet_lines(
                report,
                levels=levels,
                systems_text=systems_text,
                notes=notes,
                room_notes=room_notes,
                settings=settings,
                chars=column_chars(paper),
            )
            second = _text_page(lines, (width, height), caution, chart)
            pdf.savefig(second)
        import matplotlib.pyplot as plt

        plt.close(first)
        plt.close(second)
        return buf.getvalue()


def _first_page(chart, report, outline, size, **kw):
    """The briefing image, drawn at :data:`IMAGE_DPI` and laid on the page's width."""
    import matplotlib.pyplot as plt
    from PIL import Image

    from .briefing_image import briefing_figure

    image = briefing_figure(chart, report, outline, size=IMAGE_IN, list_room_notes=False, **kw)
    buf = io.BytesIO()
    image.savefig(buf, format="png", dpi=IMAGE_DPI)
    plt.close(image)
    pixels = Image.open(io.BytesIO(buf.getvalue())).convert("RGB")
    page = plt.figure(figsize=size)
    margin = 0.3  # inches each side
    w = size[0] - 2 * margin
    h = w * pixels.height / pixels.width
    if h > size[1] - 2 * margin:  # taller than the page: fit the height instead
        h = size[1] - 2 * margin
        w = h * pixels.width / pixels.height
    ax = page.add_axes(
        [(size[0] - w) / 2 / size[0], (size[1] - h) / 2 / size[1], w / size[0], h / size[1]]
    )
    ax.imshow(pixels, interpolation="lanczos")
    ax.set_axis_off()
    return page


def _text_page(lines, size, caution, chart):
    """Page two: the lines in two columns of :data:`COLUMN_LINES`, in a fixed-width face; a
    last line counts what did not fit."""
    import matplotlib.pyplot as plt

    page = plt.figure(figsize=size)
    title = figure_text(chart.title) if chart is not None else "balance-desk"
    page.text(0.03, 0.965, title, fontsize=13, fontweight="bold", va="top")
    room = 2 * COLUMN_LINES
    shown = lines if len(lines) <= room else lines[: room - 1]
    if len(lines) > room:
        shown.append(f"... and {len(lines) - room + 1} more lines: see the exports")
    for col in range(2):
        part = shown[col * COLUMN_LINES : (col + 1) * COLUMN_LINES]
        for i, line in enumerate(part):
            heading = line.startswith("## ")
            page.text(
                0.03 + 0.485 * col,
                0.925 - i * 0.0135,
                line[3:] if heading else line,
                fontsize=8.6 if heading else TEXT_PT,
                family="DejaVu Sans" if heading else "DejaVu Sans Mono",
                fontweight="bold" if heading else "normal",
                va="top",
            )
    page.text(0.03, 0.02, "Caution: " + caution, fontsize=9, color="#5a4500")
    return page
