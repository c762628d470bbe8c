"""The briefing image: the chart and the ranked terms in one PNG, stamped with the view."""

from __future__ import annotations

import io
import math

import numpy as np

__all__ = ["briefing_png"]


def briefing_png(chart, report, state, caution: str) -> bytes:
    """A PNG of the chart beside the ranked term magnitudes.

    Stamped with the case, level, valid time and region, and the caution. Drawn
    with matplotlib on the server (no browser needed), using the same data the
    page shows.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig = plt.figure(figsize=(16, 9), dpi=110)
    fig.patch.set_facecolor("white")
    ax = fig.add_axes([0.04, 0.10, 0.55, 0.76])
    axr = fig.add_axes([0.765, 0.36, 0.215, 0.36])
    axb = fig.add_axes([0.765, 0.10, 0.215, 0.16])
    title = "balance-desk"
    if chart is not None:
        g = chart.geom
        x0, x1, y0, y1 = g.extent
        data = chart.raster.astype(float)
        norm = None
        if chart.color_kind == "log":
            from matplotlib.colors import LogNorm

            data = np.where(data > 0, data, np.nan)
            norm = LogNorm(*chart.color_range)
            im = ax.imshow(data, origin="lower", extent=(x0, x1, y0, y1), cmap="cividis",
                           norm=norm, aspect="auto")
        else:
            cmap = "RdBu_r" if chart.color_kind == "diverging" else "cividis"
            im = ax.imshow(data, origin="lower", extent=(x0, x1, y0, y1), cmap=cmap,
                           vmin=chart.color_range[0], vmax=chart.color_range[1], aspect="auto")
        cb = fig.colorbar(im, ax=ax, fraction=0.035, pad=0.01)
        cb.set_label(chart.field_label + (f" ({chart.units})" if chart.units else ""),
                     fontsize=13)
        cb.ax.tick_params(labelsize=12)
        lx, ly, lv, labels = chart.contours
        for xs, ys in zip(lx, ly):
            ax.plot(xs, ys, color="black", lw=1.0)
        for x, y, v in labels:
            ax.text(x, y, f"{v:.0f}", fontsize=11, ha="center", va="center",
                    bbox=dict(facecolor="white", alpha=0.8, lw=0, pad=1))
        if chart.coast is not None:
            for xs, ys in zip(*chart.coast):
                ax.plot(xs, ys, color="#222222", lw=1.2)
        if chart.land is not None:
            for xs, ys in zip(*chart.land):
                ax.plot(xs, ys, color="#5b3a1a", lw=2, ls="--")
        if chart.vectors is not None:
            v = chart.vectors
            ax.quiver(v["x0"], v["y0"], v["x1"] - v["x0"], v["y1"] - v["y0"], angles="xy",
                      scale_units="xy", scale=1, width=0.0022, color="black")
        if chart.region_xy is not None:
            ax.plot(*chart.region_xy, color="white", lw=5)
            ax.plot(*chart.region_xy, color="#E69F00", lw=3)
        ax.set_xlim(x0, x1)
        ax.set_ylim(y0, y1)
        if g.kind != "plate_carree":
            ax.set_xticks([])
            ax.set_yticks([])
        ax.tick_params(labelsize=12)
        ax.set_title(f"{chart.field_label}; height contours ({chart.contour_units}); "
                     f"{g.label}", fontsize=13)
        title = f"{chart.title}  |  {state.region_text()}"
    fig.suptitle(title, fontsize=17, fontweight="bold", x=0.04, ha="left")
    if report and report.get("terms"):
        avail = [t for t in report["terms"] if t["magnitude"] is not None][::-1]
        names = [t["name"].replace("_", " ") for t in avail]
        vals = [t["magnitude"] for t in avail]
        est = [t["estimate"] or np.nan for t in avail]
        lo = 10.0 ** math.floor(math.log10(min(v for v in vals if v > 0))) / 10
        axr.barh(names, [v - lo for v in vals], left=lo, color="#0072B2")
        axr.scatter(est, names, marker="D", facecolor="white", edgecolor="black", zorder=3,
                    label="a priori (region's scales)")
        axr.set_xscale("log")
        axr.set_xlabel("m s-2 (area-weighted RMS)", fontsize=12)
        axr.tick_params(labelsize=12)
        axr.legend(fontsize=11, loc="lower right")
        axr.set_title("Terms in the region", fontsize=14)
        bal = [(k, r) for k, r in report["balances"].items() if r is not None]
        chosen = report["verdict"]["balance"]
        axb.barh([k for k, _ in bal], [min(r, 1.5) for _, r in bal],
                 color=["#E69F00" if k == chosen else "#9e9e9e" for k, _ in bal])
        axb.axvline(0.3, color="black", ls="--")
        axb.set_xlim(0, 1.6)
        axb.tick_params(labelsize=12)
        axb.set_title("Imbalance ratios (orange: the verdict)", fontsize=13)
        import textwrap

        fig.text(0.655, 0.90, textwrap.fill(report["verdict"]["text"], 62), fontsize=12.5,
                 va="top", ha="left", bbox=dict(facecolor="#fafafa", edgecolor="#E69F00", lw=2,
                                                pad=6))
    fig.text(0.04, 0.03, "Caution: " + caution, fontsize=11, color="#5a4500")
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    plt.close(fig)
    return buf.getvalue()
