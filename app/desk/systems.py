"""The weather systems of the level shown: a list under the chart, marks on it.

Each system is listed with its label (L1, H1, J1: closed low, closed high, jet streak),
where it is, its intensity and its verdict. Choosing one makes its region the view's
region (so the ranking, the levels view and the link follow), shows its report's
ageostrophic parts and its life through the valid times. On the chart each system is a
mark: the shape says the kind (circle: low, square: high, triangle: jet streak) and
the fill the verdict, in the Okabe-Ito colours (safe for colour-blind readers), with a
white rim and the label beside it in a white box, so that it reads over every field.
A switch hides the marks. It computes nothing itself (see :func:`app.compute.systems_data`).
"""

from __future__ import annotations

import panel as pn
import param

from balance_core.vocabulary import BALANCE_CLASSES

from .. import report_files, wording
from ..state import ViewState
from .look import BLUE, INK, MUTED, WIDGET_CSS, alert, esc

__all__ = ["SystemsPanel", "VERDICT_COLOURS", "KIND_MARKERS"]

#: the fill of a system's mark by its verdict (from the one table of balance classes)
VERDICT_COLOURS = {b.name: b.colour for b in BALANCE_CLASSES}
#: the shape of a system's mark by its kind
KIND_MARKERS = {"low": "circle", "high": "square", "jet_streak": "triangle"}
_SHAPE_TEXT = {"low": "&#9679;", "high": "&#9632;", "jet_streak": "&#9650;"}


def _ro(value) -> str:
    return "n/a" if value is None else format(value, ".2g")


def legend_html() -> str:
    shapes = " ".join(
        f"<span style='white-space:nowrap'>{_SHAPE_TEXT[k]} {esc(wording.system_name(k))}</span>"
        for k in KIND_MARKERS
    )
    colours = " ".join(
        f"<span style='white-space:nowrap'><span style='display:inline-block;width:12px;"
        f"height:12px;background:{c};border:1px solid #333;vertical-align:middle'></span> "
        f"{esc(wording.balance_name(k))}</span>"
        for k, c in VERDICT_COLOURS.items()
    )
    return (
        f"<div style='font-size:14px;color:{INK}'>Marks: {shapes}. Fill: the verdict of "
        f"its region: {colours}</div>"
    )


class SystemsPanel(pn.viewable.Viewer):
    """Under the chart: the systems of the level, the chosen one, the switch for the marks."""

    state = param.ClassSelector(class_=ViewState)

    def __init__(self, state, **params):
        super().__init__(state=state, **params)
        css = [WIDGET_CSS]
        self.data = None
        self.w_marks = pn.widgets.Checkbox(label="Marks on the chart", value=True, stylesheets=css)
        self.w_list = pn.widgets.Select(
            label="Systems on this level (choose one: its region becomes the view's region)",
            options={"(none chosen)": ""},
            value="",
            size=6,
            sizing_mode="stretch_width",
            stylesheets=css,
        )
        self.status = pn.pane.HTML("", sizing_mode="stretch_width")
        self.detail = pn.pane.HTML("", sizing_mode="stretch_width")
        self.life = pn.pane.HTML("", sizing_mode="stretch_width")
        self.on_choose = None  # set by the page: called with the chosen system
        #: until the first systems are shown: a system whose region is the link's is chosen
        self._opening = True
        self._quiet = False
        self.w_list.param.watch(self._chosen, "value")
        self.layout = pn.Column(
            pn.pane.HTML(
                f"<h3 style='margin:6px 0 2px 0;color:{INK}'>Systems on this level</h3>",
                sizing_mode="stretch_width",
            ),
            self.status,
            self.w_list,
            pn.Row(self.w_marks, styles={"flex-wrap": "wrap", "min-width": "0"}),
            pn.pane.HTML(legend_html(), sizing_mode="stretch_width"),
            self.detail,
            self.life,
            sizing_mode="stretch_width",
            styles={"border-top": f"3px solid {BLUE}", "padding": "4px 4px", "min-width": "380px"},
        )

    # -- showing --------------------------------------------------------------------------
    def busy(self):
        self.status.object = (
            f"<div style='font-size:15px;color:{MUTED}'>Finding the systems of this level...</div>"
        )

    def _w(self, value, digits=0):
        """A wind speed (m/s) in the view's unit, as text."""
        v, unit = wording.wind(value, self.state.wind_units)
        return f"{float(v):.{digits}f} {unit}"

    def show(self, data):
        self.data = data
        rows = data["systems"]
        where = "sea level" if data.get("level_hpa") is None else f"{data['level_hpa']:g} hPa"
        rules = report_files.rules_text(data, self.state.wind_units, self.state.height_units)
        notes = "".join(f"<div style='color:{MUTED}'>{esc(n)}</div>" for n in data.get("notes", []))
        self.status.object = (
            f"<div style='font-size:15px;color:{INK}'>{len(rows)} found at {esc(where)}, "
            f"{esc(data['when'])}: {esc(rules)}.{notes}</div>"
        )
        # a first entry meaning "none chosen": a list box takes its first entry when nothing
        # else fits, and choosing a system must be a change
        options = {"(none chosen)": ""}
        for s in rows:
            options[
                (
                    f"{s['label']} · {wording.system_name(s['kind'])} · {wording.lat(s['lat'])} "
                    f"{wording.lon(s['lon'])} · {self._short_intensity(s)} · "
                    f"{wording.balance_name(s['verdict'])}"
                )
            ] = s["label"]
        chosen = self.w_list.value
        # a link to a system's region (a copied link of a page with a system chosen) chooses
        # that system again: its region says which, as no other region is the same
        linked = self._opening and next((s for s in rows if s["region"] == self.state.region), None)
        self._quiet = True
        try:
            self.w_list.options = options
            self.w_list.value = (
                linked["label"] if linked else (chosen if chosen in options.values() else "")
            )
        finally:
            self._quiet = False
        self._detail()
        self._opening = False
        if linked and self.on_choose is not None:
            self.on_choose(linked)

    def show_error(self, text):
        self.data = None
        self._quiet = True
        try:
            self.w_list.options = {"(none chosen)": ""}
            self.w_list.value = ""
        finally:
            self._quiet = False
        self.status.object = alert(text, "error")
        self.detail.object = ""
        self.life.object = ""

    def show_life(self, life, text=None):
        if life is None:
            self.life.object = "" if text is None else alert(text, "info")
            return
        td = "<td style='padding:2px 10px 2px 0'>"
        rows = "".join(
            f"<tr>{td}{esc(wording.when_short(p['valid_time']))}</td>"
            f"{td}{esc(wording.lat(p['lat']))} {esc(wording.lon(p['lon']))}</td>"
            f"{td}{esc(self._amount(p['intensity'], life))}</td>"
            f"{td}"
            f"{_ro(p['rossby_local_median'])}"
            f"</td>{td}{esc(wording.balance_name(p['verdict']))}</td></tr>"
            for p in life["life"]
        )
        what = "peak" if life["kind"] == "jet_streak" else "depth"
        self.life.object = (
            f"<div style='font-size:15px;color:{INK}'><b>{esc(life['label'])} through the "
            f"valid times</b> (matched to the nearest system of its kind within "
            f"{life['match']['speed_kmh']:g} km/h of travel, and at least "
            f"{life['match'].get('spacings', 1.5):g} grid spacings)<table class='bd-life' "
            "style='border-collapse:collapse;margin-top:4px'><tr>"
            + "".join(
                f"<th style='text-align:left;padding:2px 10px 2px 0'>{h}</th>"
                for h in ("time", "centre", what, "local Rossby", "verdict")
            )
            + "</tr>"
            f"{rows}</table>"
            + "".join(f"<div style='color:{MUTED}'>{esc(n)}</div>" for n in life.get("notes", []))
            + "</div>"
        )

    def _amount(self, value, s):
        """A system's intensity (a depth, or a streak's peak) in the view's units."""
        if s["kind"] == "jet_streak":
            return self._w(value)
        return report_files.quantity(value, s.get("units", "m"), self.state.height_units)

    def _short_intensity(self, s):
        if s["kind"] == "jet_streak":
            return self._w(s["value"])
        return f"{self._amount(s['depth'], s)} deep"

    def _intensity(self, s):
        return report_files.intensity_text(s, self.state.wind_units, self.state.height_units)

    def chosen(self):
        if self.data is None:
            return None
        return next((s for s in self.data["systems"] if s["label"] == self.w_list.value), None)

    def _detail(self):
        s = self.chosen()
        if s is None:
            self.detail.object = ""
            self.life.object = ""
            return
        parts = s.get("ageostrophic_parts") or {}
        rows = ""
        if parts.get("measured_rms") is not None:
            rows = "".join(
                f"<tr><td>{esc(wording.part_name(k))}</td><td style='text-align:right'>"
                f"{'n/a' if p['speed_rms'] is None else self._w(p['speed_rms'], 1)}</td>"
                f"<td style='color:{MUTED}'>"
                f"{esc(p['note'] or '') if p['speed_rms'] is None else ''}"
                "</td></tr>"
                for k, p in parts["parts"].items()
            )
            rows = (
                f"<div style='margin-top:4px'><b>Why it is off geostrophy</b>: the "
                f"ageostrophic wind, {self._w(parts['measured_rms'], 1)} RMS, split by the "
                "terms that make it (RMS over the region)"
                f"<table style='border-collapse:collapse'>{rows}</table>"
                + (
                    f"<div style='color:{MUTED}'>{esc(parts['note'])}</div>"
                    if parts.get("note")
                    else ""
                )
                + "</div>"
            )
        elif parts:
            rows = (
                f"<div style='color:{MUTED}'>The ageostrophic parts are not given here: "
                f"{esc(parts.get('note', 'no valid point outside the tropical mask'))}.</div>"
            )
        self.detail.object = (
            f"<div class='bd-system' style='font-size:15px;color:{INK}'><b>{esc(s['label'])}, "
            f"{esc(wording.system_name(s['kind']))}</b> at {esc(wording.lat(s['lat']))} "
            f"{esc(wording.lon(s['lon']))}: {esc(self._intensity(s))}. Region: "
            f"{esc(s['region_text'])} ({s['points']} valid points). "
            f"<b>{esc(wording.balance_name(s['verdict']))}.</b> {esc(s['verdict_text'])}"
            f"{rows}</div>"
        )

    def _chosen(self, event):
        if self._quiet:
            return
        self._detail()
        s = self.chosen()
        if s is not None and self.on_choose is not None:
            self.on_choose(s)

    def pick_near(self, lon, lat, within_deg=3.0):
        """The label of the system nearest to (lon, lat), if one is within ``within_deg``."""
        if self.data is None or not self.w_marks.value:
            return None
        best, dist = None, within_deg
        for s in self.data["systems"]:
            d = abs(((s["lon"] - lon) + 180.0) % 360.0 - 180.0) + abs(s["lat"] - lat)
            if d < dist:
                best, dist = s["label"], d
        return best

    def marks(self):
        """(lon, lat, label, marker, colour) of every system, or [] with the marks off."""
        if self.data is None or not self.w_marks.value:
            return []
        return [
            (
                s["lon"],
                s["lat"],
                s["label"],
                KIND_MARKERS[s["kind"]],
                VERDICT_COLOURS.get(s["verdict"], "#8c8c8c"),
            )
            for s in self.data["systems"]
        ]

    def __panel__(self):
        return self.layout
