"""The evidence: the verdict and why, the ranked terms with their a priori estimates, the
unavailable terms, the derived views, the candidate balances and the numbers.

It draws the report of :func:`app.compute.box_data` (the same object as
``balance-desk analyze``); it computes nothing itself.
"""

from __future__ import annotations

import panel as pn
import param

from balance_core.verdict import Thresholds

from .. import report_files, wording
from ..state import ViewState
from .bars import Bar, linear_bars, log_bars, log_range
from .look import (
    BLUE,
    BUSY,
    GREEN,
    GREY,
    INK,
    INVENTED_BG,
    MUTED,
    ORANGE,
    SKY,
    VERMILION,
    alert,
    esc,
    mark_busy,
)

__all__ = ["Evidence"]

WIDTH = 470


def _heading(title, sub):
    return (
        f"<div style='font-size:18px;font-weight:700;color:{INK};margin-top:12px'>"
        f"{esc(title)}</div><div style='font-size:15px;color:{MUTED}'>{esc(sub)}</div>"
    )


class Evidence(pn.viewable.Viewer):
    """The right column of the page: one HTML pane, replaced whole for each report."""

    state = param.ClassSelector(class_=ViewState)

    def __init__(self, state, thresholds: Thresholds = Thresholds(), **params):
        super().__init__(state=state, **params)
        self.thresholds = thresholds
        self.report = None
        self.ranking: list[Bar] = []
        self.alert = pn.pane.HTML("", width=WIDTH + 10)
        self.body = pn.pane.HTML(
            f"<div style='font-size:18px;color:{MUTED};padding:12px'>"
            "Computing the region's terms...</div>",
            width=WIDTH + 10,
            styles=dict(BUSY),
        )
        self.layout = pn.Column(self.alert, self.body, width=WIDTH + 20, css_classes=["bd-live"])

    # -- showing --------------------------------------------------------------------------------
    def busy(self, on: bool = True):
        mark_busy(self.body, on)

    def show_error(self, text):
        self.report = None
        self.ranking = []
        self.alert.object = alert(text, "error")
        self.body.object = ""
        self.busy(False)

    def show(self, rep):
        self.report = rep
        self.alert.object = ""
        self.body.object = (
            self._verdict_html(rep)
            + self._surface_html(rep)
            + self._terms_html(rep)
            + self._balances_html(rep)
            + self._numbers_html(rep)
        )
        self.busy(False)

    def _verdict_html(self, rep):
        v = rep["verdict"]
        share = rep.get("valid_share")
        valid = f"{rep['points']} of {rep.get('region_points', rep['points'])} points valid" + (
            f" ({100 * share:.0f} %)" if share is not None else ""
        )
        why = (
            f"<div style='font-size:16px;margin-top:6px'><b>Why:</b> {esc(v['why'])}</div>"
            if v.get("why")
            else ""
        )
        mark = (
            (
                f"<div style='margin-top:6px;font-size:15px;color:{INVENTED_BG};font-weight:700'>"
                "Invented demo data</div>"
            )
            if rep.get("invented")
            else ""
        )
        edge = ORANGE if v["balance"] != "none" else GREY
        return (
            f"<div class='bd-verdict' style='font-size:19px;line-height:1.35;color:{INK};"
            f"border-left:6px solid {edge};padding:6px 10px;background:#fafafa'>"
            f"<div style='font-size:24px;font-weight:700'>{esc(wording.balance_name(v['balance']))}"
            f"</div>{esc(v['text'])}{why}<div class='bd-verdict-where' style='font-size:15px;"
            f"color:{MUTED};margin-top:4px'>"
            f"{esc(report_files.level_text(rep))} &middot; "
            f"{esc(rep.get('when', rep['valid_time']))} "
            f"&middot; {esc(rep.get('region_text', ''))} &middot; {esc(valid)}</div>{mark}</div>"
        )

    def _surface_html(self, rep):
        """At sea level, the region's surface balance in three lines: the pressure gradient
        against the Coriolis force of the 10 m wind, how the wind crosses the isobars, and
        the friction the data imply (the residual)."""
        if rep.get("level") != "msl":
            return ""
        mags = {t["name"]: t["magnitude"] for t in rep.get("terms", [])}
        lines = []
        p, c = mags.get("pressure_gradient"), mags.get("coriolis")
        if p and c is not None:
            lines.append(
                f"Pressure-gradient force {p:.1e} m s-2 against the Coriolis force of the 10 m "
                f"wind {c:.1e} m s-2 ({100 * c / p:.0f} % of it)."
            )
        sf = rep.get("surface") or {}
        ang, rat = sf.get("cross_isobar_angle_median_deg"), sf.get("speed_over_geostrophic_median")
        if ang is not None and rat is not None:
            toward = "toward low" if ang >= 0 else "toward high"
            lines.append(
                f"The 10 m wind crosses the isobars {toward} pressure by {abs(ang):.0f} degrees "
                f"at {rat:.2f} of the geostrophic speed (medians of {sf.get('points', 0)} points)."
            )
        shares = rep.get("shares") or {}
        r, share, align = (
            mags.get("residual"),
            shares.get("residual"),
            shares.get("friction_alignment"),
        )
        if r is not None and share is not None:
            opposes = (
                ""
                if align is None
                else f"; it opposes the wind by {align:.2f} (1: straight against it)"
            )
            lines.append(
                f"Friction the data imply (the residual, all the budget leaves): {r:.1e} m s-2, "
                f"{100 * share:.0f} % of the pressure-gradient force{opposes}."
            )
        if not lines:
            return ""
        return (
            _heading("Near the ground", "the 10 m wind over the sea-level pressure")
            + f"<div class='bd-surface' style='font-size:15px;color:{INK}'>"
            + "<br>".join(esc(line) for line in lines)
            + "</div>"
        )

    def _terms_html(self, rep):
        avail = [t for t in rep["terms"] if t["magnitude"] is not None]
        der = [t for t in rep["derived"] if t["magnitude"] is not None]
        lo, hi = log_range(
            [t["magnitude"] for t in avail + der]
            + [t["estimate"] for t in avail + der if t["estimate"]]
        )
        pairs = {"pressure_gradient", "coriolis"}

        def bar(t, colour):
            m, e = t["magnitude"], t["estimate"]
            name = wording.term_name(t["name"])
            tip = f"{name}: measured {m:.3g} m s-2" + (f", a priori {e:.1g} m s-2" if e else "")
            if t.get("estimate_by_construction"):
                e = None  # made of the same fields: it would agree by construction
                tip += " (no a priori estimate shown: it would be made of the same fields)"
            return Bar(
                name=name,
                value=m,
                label=f"{m:.2g}" if m > 0 else "0 (none)",
                colour=colour,
                estimate=e if e and e > 0 else None,
                tip=tip,
            )

        self.ranking = [
            bar(
                t, BLUE if t["name"] in pairs else (VERMILION if t["name"] == "residual" else GREEN)
            )
            for t in avail
        ]
        out = _heading(
            "Terms, largest first",
            "bars: measured in the region (m s-2); "
            "diamonds: a priori, from the region's own scales (none where the "
            "estimate is made of the same fields as the term)",
        )
        out += log_bars(self.ranking, lo, hi, "magnitude, m s-2 (log scale)")
        if rep.get("unavailable"):
            out += (
                "<div style='font-size:15px;color:"
                + INK
                + "'><b>Unavailable:</b> "
                + "; ".join(
                    f"{esc(wording.term_name(t['name']))} ({esc(t['note'])})"
                    for t in rep["unavailable"]
                )
                + "</div>"
            )
        if der:
            out += _heading("Derived views", "not part of the sum")
            out += log_bars([bar(t, SKY) for t in der], lo, hi, "magnitude, m s-2 (log scale)")
        return out

    def _balances_html(self, rep):
        not_tested = (rep.get("verdict") or {}).get("not_tested", {})
        bal = [(k, r) for k, r in rep["balances"].items() if r is not None and k not in not_tested]
        untested = [k for k in rep["balances"] if k in not_tested]
        if not bal and not untested:
            return ""
        chosen = rep["verdict"]["balance"]
        th = self.thresholds.balanced
        bars = [
            Bar(
                name=wording.balance_name(k),
                value=min(r, 1.5),
                label=f"{100 * r:.0f} %" + (" (verdict)" if k == chosen else ""),
                colour=ORANGE if k == chosen else "#8a8a8a",
                strong=k == chosen,
                tip=f"{wording.balance_name(k)}: what its terms leave over is "
                f"{100 * r:.0f} % of the pressure gradient",
            )
            for k, r in bal
        ]
        out = _heading(
            "Candidate balances", "|sum of their terms| / |pressure gradient|; smaller holds better"
        )
        if bars:
            out += linear_bars(
                bars,
                0.0,
                1.5,
                [(0, "0"), (0.5, "50 %"), (1.0, "100 %"), (1.5, "150 %")],
                f"dashed: the limit for a balance, {100 * th:.0f} %",
                dashed_at=th,
            )
        if untested:
            out += (
                f"<div class='bd-untested' style='font-size:15px;color:{INK}'>"
                "<b>Not tested:</b> "
                + "; ".join(
                    f"{esc(wording.balance_name(k))} ({esc(_after_colon(not_tested[k]))})"
                    for k in untested
                )
                + "</div>"
            )
        curv = rep.get("curvature")
        if curv:
            out += (
                f"<div style='font-size:14px;color:{MUTED}'>The centripetal term takes the "
                f"{esc(curv)} curvature.</div>"
            )
        cautions = (rep.get("verdict") or {}).get("cautions") or []
        if cautions:
            out += (
                "<div class='bd-cautions' style='font-size:15px;color:#7a3d00'>"
                "<b>Take care:</b> " + " ".join(esc(c) for c in cautions) + "</div>"
            )
        return out

    def _numbers_html(self, rep):
        return _numbers_table(rep, self.state.wind_units)

    def __panel__(self):
        return self.layout


def _after_colon(sentence: str) -> str:
    """The reason in a "... was not tested: REASON." sentence."""
    head, _, tail = str(sentence).partition(": ")
    return (tail or head).rstrip(".")


def _numbers_table(rep, wind_units):
    """The numbers of the report, each with its meaning, and the region's wind speeds."""
    rows = []
    explain = rep.get("explain", {})
    for k, (label, unit, _meaning) in wording.NUMBERS.items():
        if k not in rep["numbers"]:
            continue  # a number of the scale sheet only (its deformation radius in m)
        val = rep["numbers"][k]
        txt = "n/a" if val is None else (f"{val:.3g}")
        said = explain.get(k)
        line = (
            (
                f"<tr><td colspan='2' style='font-size:14px;color:{MUTED};"
                f"padding:0 0 6px 8px'>{esc(said)}</td></tr>"
            )
            if said
            else ""
        )
        rows.append(
            f"<tr><td style='padding:2px 12px 2px 0;border-bottom:1px dotted #999'>"
            f"{esc(label)}</td><td style='text-align:right'><b>{esc(txt)}</b> "
            f"{esc(unit)}</td></tr>{line}"
        )
    w = rep.get("winds", {})
    k = wording.WIND_UNITS[wind_units][1]
    for key, label, meaning in (
        ("speed_rms", "wind speed", "RMS in the region"),
        ("geostrophic_speed_rms", "geostrophic speed", "RMS, from the height gradient"),
    ):
        val = w.get(key)
        if val is None:
            continue
        warn = (
            " <span style='color:#a30000'>(more than twice the wind: geostrophy overstates "
            "the flow here)</span>"
            if key == "geostrophic_speed_rms" and w.get("speed_rms") and val > w["speed_rms"] * 2
            else ""
        )
        rows.append(
            f"<tr><td>{label} ({meaning})</td><td style='text-align:right'>"
            f"<b>{val * k:.1f}</b> {esc(wind_units)}{warn}</td></tr>"
        )
    more = "".join(
        f"<li><b>{esc(label)}</b>: {esc(meaning)}</li>"
        for key, (label, _, meaning) in wording.NUMBERS.items()
        if key not in explain and key in rep["numbers"]
    )
    return (
        f"<div style='font-size:16px;color:{INK}'><b>Numbers</b>"
        "<table style='font-size:16px'>" + "".join(rows) + "</table>"
        "<details style='font-size:15px'><summary>What the other numbers mean</summary>"
        f"<ul>{more}</ul></details></div>"
    )
