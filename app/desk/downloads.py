"""For the briefing: the chart as a PNG, the briefing sheet as a PDF of two landscape pages,
the region's report as CSV and JSON.

Every export is made from what the page shows at the moment it is asked for --
the chart and report on screen, the region's outline as it is now -- stamped
with the view's context (case, level, times, region, units).
"""

from __future__ import annotations

import io

import panel as pn

from .. import compute, report_files, wording
from ..briefing_image import briefing_png
from ..briefing_sheet import PAPERS, briefing_pdf
from .look import CAUTION, INVENTED, WIDGET_CSS

__all__ = ["Downloads"]


class Downloads(pn.viewable.Viewer):
    """The download buttons; ``page`` gives the chart, the report and the state."""

    def __init__(self, page, width=250, **params):
        super().__init__(**params)
        self.page = page
        css = [WIDGET_CSS]
        self.png = pn.widgets.FileDownload(
            callback=self.png_bytes,
            filename="briefing.png",
            label="Briefing image (PNG)",
            width=width,
            color="success",
            stylesheets=css,
        )
        self.paper = pn.widgets.RadioButtonGroup(
            options=list(PAPERS), value="A4", width=width, stylesheets=css
        )
        self.pdf = pn.widgets.FileDownload(
            callback=self.pdf_bytes,
            filename="briefing.pdf",
            label="Briefing sheet (PDF, 2 pages)",
            width=width,
            stylesheets=css,
        )
        self.csv = pn.widgets.FileDownload(
            callback=self.csv_text,
            filename="terms.csv",
            label="Term table (CSV)",
            width=width,
            stylesheets=css,
        )
        self.json = pn.widgets.FileDownload(
            callback=self.json_text,
            filename="terms.json",
            label="Term table (JSON)",
            width=width,
            stylesheets=css,
        )
        self.layout = pn.Column(
            self.png,
            self.pdf,
            pn.pane.HTML("Sheet paper (landscape):", margin=(4, 5, 0, 5)),
            self.paper,
            self.csv,
            self.json,
            margin=0,
        )

    def _context(self):
        st = self.page.state
        rep = self.page.report or {}
        case_title = None
        try:
            case_title = self.page.library.get(st.case).title
        except Exception:  # noqa: BLE001 - a case that failed has no title
            pass
        return report_files.context_of(
            rep,
            region_text=st.region_text(),
            wind_units=st.wind_units,
            height_units=st.height_units,
            case_title=case_title,
            invented=bool(rep.get("invented")),
        )

    def _outline(self):
        chart = self.page.chart.data
        spec = self.page.state.region_spec()
        if chart is None or spec is None:
            return None
        return compute.region_outline(chart.geom, spec)

    def _name(self, widget, extension):
        """Name the file for the view it is made of (case, level, valid time, region)."""
        ctx = self._context()
        if not ctx.get("case"):  # no report yet: the case on screen
            ctx = dict(ctx, case=self.page.state.case)
        widget.filename = f"{report_files.export_stem(ctx)}.{extension}"

    def png_bytes(self):
        chart = self.page.chart.data
        rep = self.page.report
        self._name(self.png, "png")
        notes = []
        if rep and rep.get("reference_time"):
            notes.append(f"Valid {wording.when(rep['valid_time'], rep['reference_time'])}")
        if rep:
            notes.append(report_files.settings_text(self._context()))
        return io.BytesIO(
            briefing_png(
                chart,
                rep,
                self._outline(),
                region_text=self.page.state.region_text(),
                caution=CAUTION,
                invented_text=INVENTED,
                notes=notes,
                room_notes=self._room_notes(chart),
                balanced=self.page.thresholds.balanced,
            )
        )

    def pdf_bytes(self):
        """The briefing sheet of the view on screen (app.briefing_sheet): the chart, verdict
        and terms on page one; the verdict with why, the levels, the systems and every note
        on page two."""
        page, chart, rep = self.page, self.page.chart.data, self.page.report
        self._name(self.pdf, "pdf")
        ctx = self._context()
        notes = list(chart.notes) if chart is not None else []
        notes += [n for n in (rep or {}).get("notes", []) if n not in notes]
        return io.BytesIO(
            briefing_pdf(
                chart,
                rep,
                self._outline(),
                region_text=page.state.region_text(),
                caution=CAUTION,
                invented_text=INVENTED,
                notes=notes,
                room_notes=self._room_notes(chart),
                levels=self._levels(),
                systems_text=self._systems_text(),
                settings=report_files.settings_text(ctx) if rep else "",
                balanced=page.thresholds.balanced,
                paper=self.paper.value,
            )
        )

    def _levels(self):
        """The region through the levels (as the levels tab has it; None where it fails)."""
        try:
            return compute.levels_data(self.page.library, self.page.state)
        except Exception:  # noqa: BLE001 - the sheet is made without the levels, and says so
            return None

    def _systems_text(self) -> str:
        page = self.page
        try:
            out = compute.systems_data(page.library, page.state, page.thresholds)
        except Exception as exc:  # noqa: BLE001 - the sheet says why instead
            return f"No systems: {exc}"
        rows = out.get("systems") or []
        st = page.state
        lines = [report_files.rules_text(out, st.wind_units, st.height_units)]
        lines += list(out.get("notes") or [])
        if not rows:
            lines.append("No systems found on this level at this time.")
        for r in rows:
            lines.append(
                f"{r['label']} {wording.system_name(r['kind'])} at {wording.lat(r['lat'])} "
                f"{wording.lon(r['lon'])}: {r['intensity_text']}; {r['region_text']}; "
                f"{wording.balance_name(r['verdict'])}. {r['verdict_text']}"
            )
        return "\n".join(lines)

    def _room_notes(self, chart):
        """A review room's notes for the image: (label, (x, y) on the chart or None, text)."""
        out = []
        for label, point, text in self.page.briefing_notes:
            xy = None
            if point is not None and chart is not None:
                x, y = chart.geom.to_view([point[0]], [point[1]])
                xy = (float(x[0]), float(y[0]))
            out.append((label, xy, text))
        return out

    def csv_text(self):
        rep = self.page.report
        self._name(self.csv, "csv")
        if not rep:
            return io.StringIO("no region report yet\n")
        return io.StringIO(report_files.export_csv(rep, self._context()))

    def json_text(self):
        rep = self.page.report or {}
        self._name(self.json, "json")
        return io.StringIO(report_files.export_json(rep, self._context()))

    def __panel__(self):
        return self.layout
