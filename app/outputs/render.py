"""Static chart export with matplotlib (headless, deterministic): PNG, SVG, PDF.

The figure shows the regime regions (colour plus hatching), every boundary (region-defining lines
solid and dark, comparison lines dashed and coloured, the parts outside a source's validity range
dotted and faint), the regime names inside their regions, a legend naming each model with its
source, the operating point, the chart's warnings and a title block with the caution line.
"""
from __future__ import annotations

import datetime as _dt
import io
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import Patch  # noqa: E402

from lowgmap.app import CAUTION

from lowgmap.app import __version__  # noqa: E402
from lowgmap.app.files.atomic import write_atomic  # noqa: E402
from lowgmap.app.outputs.chartview import ChartView, line_label_positions  # noqa: E402

__all__ = ["render_chart", "FORMATS"]

FORMATS = ("png", "svg", "pdf")

#: Fixed metadata so the same inputs give the same bytes (no timestamps in SVG/PDF).
_METADATA = {
    "svg": {"Date": None, "Creator": f"lowgmap {__version__}"},
    "pdf": {"CreationDate": None, "ModDate": None, "Creator": f"lowgmap {__version__}", "Producer": "lowgmap"},
    "png": {"Software": f"lowgmap {__version__}"},
}


def render_chart(view: ChartView, target=None, *, fmt: str | None = None, title: str = "",
                 title_block: list[tuple[str, str]] | None = None, point_label: str | None = None,
                 extra_points: list[dict] | None = None, dpi: int = 150):
    """Draw ``view`` and write it to ``target`` (path or binary file); return bytes when target is None.

    Parameters
    ----------
    view : ChartView        display data (:func:`lowgmap.app.outputs.chartview.chart_view`)
    target : path, file or None
    fmt : "png" | "svg" | "pdf"   default: from the file suffix
    title : str             figure title (the case title)
    title_block : list of (field, value)   rows of the title block (case inputs, margins, ...)
    point_label : str       text next to the operating point
    extra_points : list of dict   test points: {"x", "y", "label", "marker", "colour", "edge"}
    """
    if fmt is None:
        if target is None or not hasattr(target, "__fspath__") and not isinstance(target, str):
            raise ValueError("fmt must be given when writing to a file object or returning bytes")
        fmt = Path(target).suffix.lstrip(".").lower()
    if fmt not in FORMATS:
        raise ValueError(f"output format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    plt.rcParams["svg.hashsalt"] = "lowgmap"
    plt.rcParams["svg.fonttype"] = "none"  # keep text as text: labels stay searchable in the SVG
    fig = plt.figure(figsize=(11.69, 8.27))  # A4 landscape
    try:
        _draw(fig, view, title, title_block or [], point_label, extra_points or [])
        buf = io.BytesIO()
        fig.savefig(buf, format=fmt, dpi=dpi, metadata=_METADATA[fmt])
    finally:
        plt.close(fig)
    data = buf.getvalue()
    if target is None:
        return data
    if hasattr(target, "write"):
        target.write(data)
        return None
    write_atomic(target, data)
    return None


def _draw(fig, view: ChartView, title, title_block, point_label, extra_points):
    ax = fig.add_axes((0.075, 0.40, 0.56, 0.53))
    if view.log_axes:
        ax.set_xscale("log")
        ax.set_yscale("log")
    ax.set_xlim(*view.x_range)
    ax.set_ylim(*view.y_range)
    handles = []
    regime_done = set()
    for r in view.regions:
        ax.fill(r.x, r.y, facecolor=r.colour, alpha=0.35, edgecolor="none", zorder=1)
        if r.hatch:
            ax.fill(r.x, r.y, facecolor="none", edgecolor=r.colour, hatch=r.hatch, linewidth=0, alpha=0.8, zorder=1)
        if r.show_label:
            fx = _axis_fraction(view, r.label_x, 0)
            ha = "right" if fx > 0.72 else ("left" if fx < 0.28 else "center")
            name = r.name if len(r.name) <= 24 else _wrap(r.name, 24)
            ax.text(r.label_x, r.label_y, name, ha=ha, va="center", fontsize=10, weight="bold",
                    color="#111111", zorder=6, multialignment="center",
                    bbox=dict(boxstyle="round,pad=0.25", facecolor="white", edgecolor="none", alpha=0.75))
        if r.name not in regime_done:
            regime_done.add(r.name)
            handles.append(Patch(facecolor=r.colour, alpha=0.5, hatch=r.hatch, edgecolor=r.colour,
                                 label=f"regime: {r.name}"))
    any_invalid = False
    positions = line_label_positions(view)
    for c in view.curves:
        ls = "-" if c.dash == "solid" else (0, (6, 3))
        lw = 2.2 if c.role == "regions" else 1.6
        for x, y in c.pieces(True):
            ax.plot(x, y, color=c.colour, linestyle=ls, linewidth=lw, zorder=4)
        for x, y in c.pieces(False):
            any_invalid = True
            ax.plot(x, y, color=c.colour, linestyle=(0, (1, 2)), linewidth=lw, alpha=0.6, zorder=4)
        _label_curve(ax, c, positions.get(c.name))
        role = "" if c.role == "regions" else " (comparison line)"
        handles.append(Line2D([], [], color=c.colour, linestyle=ls, linewidth=lw,
                              label=_wrap(f"{c.label}{role}", 44)))
    if any_invalid:
        handles.append(Line2D([], [], color="#444444", linestyle=(0, (1, 2)), linewidth=1.8,
                              label="outside the source's validity range"))
    for p in extra_points:
        ax.scatter([p["x"]], [p["y"]], marker=p.get("marker", "o"), s=p.get("size", 36),
                   facecolor=p.get("colour", "white"), edgecolor=p.get("edge", "black"), linewidth=1.0, zorder=7)
    if view.point is not None:
        ax.scatter([view.point[0]], [view.point[1]], marker="*", s=260, facecolor="#D55E00", edgecolor="black",
                   linewidth=1.0, zorder=8)
        handles.append(Line2D([], [], marker="*", color="none", markerfacecolor="#D55E00", markeredgecolor="black",
                              markersize=14, label="operating point"))
        if point_label:
            fx, fy = ax.transAxes.inverted().transform(ax.transData.transform(view.point))
            right = fx > 0.55
            ax.annotate(point_label, view.point, xytext=(-14 if right else 14, 12 if fy < 0.5 else -14),
                        textcoords="offset points", fontsize=9, ha="right" if right else "left",
                        va="bottom" if fy < 0.5 else "top", zorder=9,
                        bbox=dict(boxstyle="round,pad=0.3", facecolor="white", edgecolor="#D55E00"))
    ax.set_xlabel(view.x_label, fontsize=11)
    ax.set_ylabel(view.y_label, fontsize=11)
    ax.tick_params(labelsize=9)
    ax.grid(True, which="major", color="#bbbbbb", linewidth=0.6, alpha=0.7, zorder=0)
    ax.set_title(title or "regime chart", fontsize=13, loc="left", pad=10)
    leg_ax = fig.add_axes((0.655, 0.40, 0.335, 0.53))
    leg_ax.axis("off")
    leg = leg_ax.legend(handles=handles, loc="upper left", fontsize=8.5, frameon=False, title="key",
                        title_fontsize=9.5, alignment="left")
    # warnings under the key, in the right-hand column ----------------------------------------------
    fig.canvas.draw()
    bbox = leg.get_window_extent().transformed(fig.transFigure.inverted())
    y = bbox.y0 - 0.02
    if view.warnings:
        fig.text(0.66, y, "Warnings:", fontsize=8.5, weight="bold", va="top", color="#8B0000")
        y -= 0.022
        for w in view.warnings:
            text = _wrap("• " + w, 68)
            n = text.count("\n") + 1
            if y - 0.0135 * n < 0.30:
                fig.text(0.66, y, "• (more warnings in the report)", fontsize=7.2, va="top", color="#8B0000")
                break
            fig.text(0.66, y, text, fontsize=7.2, va="top", color="#8B0000", linespacing=1.15)
            y -= 0.0135 * n + 0.006
    _title_block(fig, title_block, 0.30)


def _title_block(fig, rows, top):
    rows = list(rows) + [("lowgmap", f"version {__version__}, drawn {_dt.date.today().isoformat()}")]
    wrapped = [(k, _wrap(str(v), 150).split("\n")[:2]) for k, v in rows]
    n_lines = sum(len(v) for _, v in wrapped)
    line_h = min(0.018, (top - 0.055) / max(n_lines, 1))
    y = top
    for key, lines in wrapped:
        fig.text(0.075, y, f"{key}:", fontsize=7.8, weight="bold", va="top")
        for line in lines:
            fig.text(0.20, y, line, fontsize=7.8, va="top")
            y -= line_h
    fig.text(0.075, 0.02, "CAUTION: " + CAUTION, fontsize=8, weight="bold", color="#8B0000")


def _axis_fraction(view, value, axis: int) -> float:
    import math

    lo, hi = view.x_range if axis == 0 else view.y_range
    if view.log_axes:
        return (math.log10(value) - math.log10(lo)) / (math.log10(hi) - math.log10(lo))
    return (value - lo) / (hi - lo)


def _wrap(text: str, width: int) -> str:
    import textwrap

    return "\n".join(textwrap.wrap(text, width)) or text


def _label_curve(ax, c, pos):
    """Write the model's short label at its placed position (see chartview.line_label_positions)."""
    if pos is None:
        return
    ax.annotate(c.label.split(" (")[0], pos, xytext=(4, 4), textcoords="offset points", fontsize=7.5,
                color=c.colour, zorder=5,
                bbox=dict(boxstyle="round,pad=0.15", facecolor="white", edgecolor="none", alpha=0.8))
