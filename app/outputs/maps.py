"""Margin maps of design sweeps and the chart of a best design (matplotlib, headless).

:func:`margin_map_figure` draws the symmetric (or worst-case envelope) margin of every design of a
sweep over one or two design variables; :func:`margin_map_png` gives it as PNG bytes (the dashboard's
design tab, ``lowgmap sweep --plot``). :func:`design_chart_bytes` draws the regime chart of the
best design of an inverse design with the operating envelope marked (``lowgmap design --plot``).
Values arrive in SI and are shown in the units of the study file
(:func:`lowgmap.app.files.studyfiles.to_display`). Variables are named in words
(:func:`variable_label`), symbols are typeset, and every figure carries the version and the caution
line; PNG files are written at 300 dpi (:func:`figure_file_bytes`).
"""
from __future__ import annotations

import math
import textwrap
from dataclasses import replace

import numpy as np

from lowgmap.app.files.studyfiles import to_display

__all__ = ["margin_map_figure", "margin_map_png", "design_chart_bytes", "variable_label", "figure_file_bytes",
           "map_triangles"]


#: Design variables in words (keys of :data:`lowgmap.physics.studies.design_space.VARIABLES`).
_VARIABLE_WORDS = {
    "half_angle": "corner half-angle", "contact_angle": "contact angle", "length": "conduit length",
    "size": "hydraulic diameter (section scaled)", "residual_acceleration": "residual acceleration",
    "temperature": "temperature", "pressure": "pressure", "liquid": "liquid", "gas": "gas",
    "surface_tension": "surface tension", "liquid_density": "liquid density", "liquid_viscosity": "liquid viscosity",
    "gas_density": "gas density", "gas_viscosity": "gas viscosity", "liquid_flow": "liquid flow rate Q_L",
    "gas_flow": "gas flow rate Q_G",
}


def _constant_words(model_name: str | None, const: str) -> str:
    from lowgmap.physics.models.boundary import BOUNDARY_MODELS

    models = [BOUNDARY_MODELS[model_name]] if model_name in BOUNDARY_MODELS else list(BOUNDARY_MODELS.values())
    for m in models:
        for c in m.constants:
            if c.name == const:
                words = c.doc.split(";")[0].strip() if c.doc else const.replace("_", " ")
                if len(words) > 48:
                    words = const.replace("_", " ")
                where = f" of {m.label.split(' (')[0]}" if model_name in BOUNDARY_MODELS else ""
                return f"{words}{where}"
    return const.replace("_", " ")


def variable_label(name: str, unit: str = "") -> str:
    """A design variable in words with its unit, for axis labels: ``"contact_angle"`` -> "contact angle [deg]".

    ``section.<field>`` keys use the section field's words, ``model.<name>.<constant>`` and
    ``constant.<constant>`` the constant's meaning (its name when the meaning is long).

    >>> variable_label("contact_angle", "deg"), variable_label("half_angle", "deg")
    ('contact angle [deg]', 'corner half-angle [deg]')
    >>> variable_label("section.wall_length", "mm")
    'wall length [mm]'
    """
    if name in _VARIABLE_WORDS:
        words = _VARIABLE_WORDS[name]
    elif name.startswith("section."):
        field_name = name.split(".", 1)[1]
        words = field_name.replace("_", " ")
        try:
            from lowgmap.physics.geometry.sections import SECTION_KINDS, section_fields

            labels = {f.name: f.label for k in SECTION_KINDS for f in section_fields(k)}
            words = labels.get(field_name, words)
        except (ImportError, ValueError):  # pragma: no cover - the table is part of the physics
            pass
    elif name.startswith("model.") and name.count(".") >= 2:
        _, model, const = name.split(".", 2)
        words = _constant_words(model, const)
    elif name.startswith("constant."):
        words = _constant_words(None, name.split(".", 1)[1])
    else:
        words = name.replace("_", " ")
    return words + (f" [{unit}]" if unit and unit != "-" else "")


def margin_map_figure(df, xvar: str, yvar: str | None, *, column: str = "margin", required: float | None = None,
                      kinds=None, units=None, log=(False, False), title: str = "", base=None):
    """Margin map over two design variables (filled contours, required-margin and zero lines).

    With ``yvar`` None a margin-versus-variable plot. Designs without a margin are hatched grey.
    Returns a matplotlib Figure (not attached to pyplot).
    """
    from matplotlib.figure import Figure

    kinds = kinds or {}
    units = units or {}

    def disp(name, v):
        k = kinds.get(name, "dimensionless")
        u = units.get(name, "")
        return np.asarray(to_display(np.asarray(v, dtype=float), k, u), dtype=float) if k != "name" else v

    from lowgmap.app.outputs.render import add_footer, typeset

    def label(name):
        return typeset(variable_label(name, units.get(name, "")))

    fig = Figure(figsize=(7.5, 6.0), layout="constrained")
    fig.get_layout_engine().set(rect=(0.0, 0.075, 1.0, 0.925))  # room for the caution line
    ax = fig.add_subplot()
    what = "worst-case margin over the envelope" if column == "envelope_margin" else "symmetric margin"
    if yvar is None:
        x = disp(xvar, df[xvar].to_numpy())
        m = df[column].to_numpy(dtype=float)
        order = np.argsort(x)
        ax.plot(x[order], 100 * m[order], "-o", color="#0072B2", label=what)
        if required is not None:
            ax.axhline(100 * required, color="black", linewidth=1.6, label=f"required ±{100 * required:.0f} %")
        ax.axhline(0.0, color="#444444", linewidth=1.0, linestyle="--", label="regime boundary reached")
        ax.set_xlabel(label(xvar))
        ax.set_ylabel(f"{what} [%]")
        if log[0]:
            ax.set_xscale("log")
        ax.legend(fontsize=8, loc="best")
    elif "level" in df.columns:
        _scattered_map(fig, ax, df, xvar, yvar, column, required, disp, what, log)
    else:
        xs = np.unique(df[xvar].to_numpy(dtype=float))
        ys = np.unique(df[yvar].to_numpy(dtype=float))
        M = np.full((ys.size, xs.size), np.nan)
        ix = np.searchsorted(xs, df[xvar].to_numpy(dtype=float))
        iy = np.searchsorted(ys, df[yvar].to_numpy(dtype=float))
        M[iy, ix] = df[column].to_numpy(dtype=float)
        X, Y = np.meshgrid(disp(xvar, xs), disp(yvar, ys))
        P = 100 * M
        finite = np.isfinite(P)
        lim = max(1.0, float(np.nanmax(np.abs(P)))) if finite.any() else 100.0
        lim = 10.0 * math.ceil(lim / 10.0)
        levels = np.linspace(-lim, lim, 21)
        if finite.sum() >= 4 and xs.size >= 2 and ys.size >= 2:
            cs = ax.contourf(X, Y, np.where(finite, P, np.nan), levels=levels, cmap="RdBu", extend="both")
            cb = fig.colorbar(cs, ax=ax)
            cb.set_label(f"{what} [%] (negative: outside the wanted regime)")
            if required is not None and np.nanmin(P) < 100 * required < np.nanmax(P):
                c1 = ax.contour(X, Y, P, levels=[100 * required], colors="black", linewidths=2.0)
                ax.clabel(c1, fmt=lambda _v: f"required ±{100 * required:.0f} %", fontsize=8)
            if np.nanmin(P) < 0 < np.nanmax(P):
                c0 = ax.contour(X, Y, P, levels=[0.0], colors="#444444", linewidths=1.2, linestyles="dashed")
                ax.clabel(c0, fmt=lambda _v: "0 (boundary)", fontsize=8)
        ax.scatter(X[finite], Y[finite], s=6, color="#222222", zorder=3)
        if (~finite).any():
            ax.scatter(X[~finite], Y[~finite], s=40, marker="x", color="#888888", zorder=3,
                       label="no margin (design invalid)")
            ax.legend(fontsize=8, loc="best")
    if yvar is not None:
        if base is not None:
            bx, by = base
            inside = bx is not None and by is not None and (
                "level" not in df.columns or (df[xvar].min() <= bx <= df[xvar].max()
                                              and df[yvar].min() <= by <= df[yvar].max()))
            if inside:                  # a refined map marks the current design only within its ranges
                here = df[(df[xvar] == bx) & (df[yvar] == by)][column].to_numpy(dtype=float)
                words = (f"current design: {100 * here[0]:+.1f} %" if here.size and np.isfinite(here[0])
                         else "current design")
                ax.scatter(disp(xvar, [bx]), disp(yvar, [by]), marker="*", s=200, color="#D55E00",
                           edgecolor="black", zorder=4, label=words)
        if "level" in df.columns:
            ax.legend(fontsize=7.5, loc="upper left", bbox_to_anchor=(0.0, -0.09), ncols=2, frameon=False)
        ax.set_xlabel(label(xvar))
        ax.set_ylabel(label(yvar))
        if log[0]:
            ax.set_xscale("log")
        if log[1]:
            ax.set_yscale("log")
    ax.set_title(textwrap.fill(title or f"{what} by design", 80), fontsize=11, loc="left")   # long case titles wrap
    add_footer(fig, fontsize=6.5)
    return fig


def map_triangles(x, y, log=(False, False)) -> np.ndarray:
    """Triangles (index triples) joining the designs of a refined map: a Delaunay triangulation of the points
    scaled to the unit square of their ranges (geometric for a log axis), so that inputs of different units
    and sizes give well-shaped triangles.

    >>> map_triangles([0.0, 1.0, 0.0, 1.0], [0.0, 0.0, 10.0, 10.0]).shape
    (2, 3)
    """
    from scipy.spatial import Delaunay

    pts = []
    for v, lg in zip((x, y), log):
        v = np.log10(np.asarray(v, dtype=float)) if lg else np.asarray(v, dtype=float)
        span = float(v.max() - v.min()) or 1.0
        pts.append((v - v.min()) / span)
    return Delaunay(np.column_stack(pts)).simplices


def _scattered_map(fig, ax, df, xvar, yvar, column, required, disp, what, log) -> None:
    """Filled contours of a map refined near its contours (designs not on a grid; ``level`` column present).

    The margin is interpolated linearly on triangles joining the evaluated designs
    (:func:`map_triangles`), so every design's own value is drawn at it, and a contour runs between two
    designs of opposite sign only, at the final spacing of the refinement there.
    """
    from matplotlib.tri import Triangulation

    x = df[xvar].to_numpy(dtype=float)
    y = df[yvar].to_numpy(dtype=float)
    P = 100 * df[column].to_numpy(dtype=float)
    finite = np.isfinite(P)
    X, Y = disp(xvar, x), disp(yvar, y)
    lim = max(1.0, float(np.nanmax(np.abs(P)))) if finite.any() else 100.0
    lim = 10.0 * math.ceil(lim / 10.0)
    levels = np.linspace(-lim, lim, 21)
    if finite.sum() >= 3:
        tri = Triangulation(X[finite], Y[finite], map_triangles(x[finite], y[finite], log))
        Pf = P[finite]
        cs = ax.tricontourf(tri, Pf, levels=levels, cmap="RdBu", extend="both")
        cb = fig.colorbar(cs, ax=ax)
        cb.set_label(f"{what} [%] (negative: outside the wanted regime)")
        texts = []
        if required is not None and Pf.min() < 100 * required < Pf.max():
            c1 = ax.tricontour(tri, Pf, levels=[100 * required], colors="black", linewidths=2.0, zorder=4)
            texts += ax.clabel(c1, fmt=lambda _v: f"required ±{100 * required:.0f} %", fontsize=8)
        if Pf.min() < 0 < Pf.max():
            c0 = ax.tricontour(tri, Pf, levels=[0.0], colors="#444444", linewidths=1.2, linestyles="dashed",
                               zorder=4)
            texts += ax.clabel(c0, fmt=lambda _v: "0 (boundary)", fontsize=8)
        for t in texts:                       # readable over the designs packed along the contours
            t.set_bbox(dict(facecolor="white", alpha=0.8, edgecolor="none", pad=0.6))
            t.set_zorder(5)
    refined = finite & (df["level"].to_numpy() > 0)
    ax.scatter(X[finite & ~refined], Y[finite & ~refined], s=6, color="#222222", zorder=3,
               label="design of the starting grid")
    if refined.any():
        ax.scatter(X[refined], Y[refined], s=2, color="#555555", alpha=0.6, zorder=3,
                   label="design added near a contour")
    if (~finite).any():
        ax.scatter(X[~finite], Y[~finite], s=40, marker="x", color="#888888", zorder=3,
                   label="no margin (design invalid)")


def figure_file_bytes(fig, fmt: str = "png") -> bytes:
    """A map figure as PNG (300 dpi), SVG or PDF bytes with the export settings of the charts."""
    from lowgmap.app.outputs.render import figure_bytes

    return figure_bytes(fig, fmt)


def margin_map_png(df, xvar, yvar, **kwargs) -> bytes:
    """:func:`margin_map_figure` as PNG bytes (300 dpi)."""
    return figure_file_bytes(margin_map_figure(df, xvar, yvar, **kwargs), "png")


def design_chart_bytes(doc, result, goal, fmt: str = "png") -> bytes:
    """The best design's regime chart with the envelope's corners marked (PNG/SVG/PDF bytes)."""
    from lowgmap.physics.chart.composition import Chart

    from lowgmap.app.outputs.chartview import chart_view
    from lowgmap.app.outputs.exports import human_rows
    from lowgmap.app.outputs.render import render_chart
    from lowgmap.app.outputs.report import case_rows, format_flow

    st = doc.settings
    best_doc = replace(doc, case=result.case)
    chart = Chart.build(result.case)
    view = chart_view(chart, axes="flow", log_axes=st.log_axes, ql_unit=st.liquid_flow_unit, qg_unit=st.gas_flow_unit)
    (a, b), (c, d) = goal.ql_range, goal.qg_range
    xs, ys = view.to_display(np.array([a, b, b, a]), np.array([c, c, d, d]))
    marks = [{"x": float(x), "y": float(y), "marker": "s", "colour": "#F0E442", "edge": "#000000", "size": 46,
              "kind": "envelope corner", "kind_plural": "envelope corners", "key": "corner of the operating envelope"}
             for x, y in zip(np.asarray(xs), np.asarray(ys))]
    labels = {b.name: b.label for b in chart.boundaries}
    limiting = [labels.get(n, n) for n in result.limiting]
    rows = human_rows(case_rows(best_doc, chart), result.case, document=doc)
    rows.append(("envelope", f"Q_L {format_flow(a, st.liquid_flow_unit)} to {format_flow(b, st.liquid_flow_unit)}, "
                             f"Q_G {format_flow(c, st.gas_flow_unit)} to {format_flow(d, st.gas_flow_unit)} "
                             f"(yellow squares)"))
    rows.append(("worst-case margin", f"±{100 * result.margin:.1f} % in {result.regime}"
                                      + (f", limited by {'; '.join(limiting)}" if limiting else "")
                                      + f"; required ±{100 * result.required_margin:.0f} %"))
    return render_chart(view, None, fmt=fmt, title=f"{doc.case.title}: best design", title_block=rows,
                        extra_points=marks)
