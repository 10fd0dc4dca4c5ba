"""Display-ready chart data shared by the static export (matplotlib) and the dashboard (bokeh).

:func:`chart_view` turns a :class:`lowgmap.physics.chart.composition.Chart` into coordinates in the chosen axes and
display units, with each boundary split into the parts inside and outside its source's validity
range, a label position inside every regime region, and a fixed colour and hatch per regime.
Both views draw from this one object, so the screen and the exported files show the same data.

Colours, dash patterns and hatches come from :mod:`lowgmap.app.outputs.styles`, looked up by the
boundary model's and the regime's *name*: a line keeps its look from one case or revision to the
next, whatever its position in the chart's list of lines.
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field

import numpy as np

from lowgmap.app.files.units import convert
from lowgmap.app.outputs import styles as _styles

__all__ = ["REGIME_COLOURS", "REGIME_HATCHES", "LINE_COLOURS", "CurveView", "RegionView", "BandView", "ChartView",
           "chart_view", "band_views", "regime_style", "line_label_positions", "BAND_KEY_TEXT"]

#: Key text of the band fills (one entry for every band: each is drawn in its line's colour).
BAND_KEY_TEXT = "band: constants over their ranges"

#: Colour-blind-safe qualitative palette (Okabe & Ito, "Color Universal Design", 2008), light to dark.
REGIME_COLOURS = _styles.FILL_COLOURS
#: Second cue for each regime (print in grey still tells them apart).
REGIME_HATCHES = _styles.HATCHES
#: Boundary line colours (see :mod:`lowgmap.app.outputs.styles` for the style of each line by name).
LINE_COLOURS = _styles.LINE_COLOURS


def regime_style(regime) -> tuple[str, str]:
    """(fill colour, hatch) of a regime, by its name (:func:`lowgmap.app.outputs.styles.regime_style`).

    An integer is still accepted for older callers (the position in a chart's regime order), but
    only a name gives the same colour on every chart: pass the name.

    >>> regime_style("dispersed bubbles")
    ('#56B4E9', '')
    """
    if isinstance(regime, str):
        return tuple(_styles.regime_style(regime))
    i = int(regime)
    return REGIME_COLOURS[i % len(REGIME_COLOURS)], REGIME_HATCHES[i % len(REGIME_HATCHES)]


@dataclass(frozen=True)
class CurveView:
    name: str
    label: str
    citation: str
    role: str                     # "regions" or "comparison"
    x: np.ndarray                 # display coordinates; NaN separates pieces
    y: np.ndarray
    valid: np.ndarray             # bool per vertex: inside the source's validity range
    colour: str                   # fixed per boundary name (lowgmap.app.outputs.styles.boundary_style)
    dash: str                     # "solid" or on/off lengths in points, "9 4" (bokeh line_dash notation)
    regime_below: str
    regime_above: str

    def pieces(self, valid: bool) -> list[tuple[np.ndarray, np.ndarray]]:
        """Contiguous runs of the curve whose vertices are (in)side validity; for drawing."""
        ok = np.isfinite(self.x) & np.isfinite(self.y)
        sel = ok & (self.valid if valid else ~self.valid)
        runs, i, n = [], 0, len(self.x)
        while i < n:
            if not sel[i]:
                i += 1
                continue
            j = i
            while j + 1 < n and sel[j + 1]:
                j += 1
            lo, hi = i, j
            # join to the neighbouring vertex so valid and invalid parts meet without a gap
            if lo > 0 and ok[lo - 1]:
                lo -= 1
            if hi + 1 < n and ok[hi + 1]:
                hi += 1
            if hi > lo:
                runs.append((self.x[lo:hi + 1], self.y[lo:hi + 1]))
            i = j + 1
        return runs


@dataclass(frozen=True)
class RegionView:
    name: str
    x: np.ndarray
    y: np.ndarray
    label_x: float
    label_y: float
    colour: str
    hatch: str
    show_label: bool = True


@dataclass(frozen=True)
class BandView:
    """The band of one boundary for drawing: the region its line sweeps as its constants move over
    their bands (:class:`lowgmap.physics.chart.bands.Band`), in display coordinates.

    ``polygons``: closed outlines (x, y) in display units, clipped to the chart's gas-flow range;
    ``colour``: the line's own colour (fixed per boundary name); ``constants``: the constants varied.
    """

    name: str
    label: str
    role: str
    colour: str
    polygons: tuple
    constants: tuple = ()


@dataclass(frozen=True)
class ChartView:
    x_label: str
    y_label: str
    x_unit: str
    y_unit: str
    log_axes: bool
    x_range: tuple[float, float]
    y_range: tuple[float, float]
    regions: tuple[RegionView, ...]
    curves: tuple[CurveView, ...]
    warnings: tuple[str, ...]
    regime_names: tuple[str, ...]
    point: tuple[float, float] | None = None
    axes_kind: str = "flow"
    to_display: object = field(default=None, repr=False, compare=False)
    #: regime name -> (fill colour, hatch) of every regime of the chart (test-point fills use these)
    regime_styles: dict = field(default_factory=dict, repr=False, compare=False)
    #: bands of the boundaries (empty: none drawn); from :func:`band_views`
    bands: tuple = ()


@functools.lru_cache(maxsize=64)
def _flow_factor(unit: str) -> float | None:
    """Display value of 1 m^3/s in ``unit`` (flow units are proportional: one factor, not a unit-library
    conversion per array); None if the unit is not proportional (then :func:`convert` every time)."""
    one, two = float(convert(1.0, "flow", unit)), float(convert(2.0, "flow", unit))
    return one if math.isfinite(one) and abs(two - 2.0 * one) <= 1e-15 * abs(two) else None


def _to_flow_unit(value, unit: str):
    factor = _flow_factor(unit)
    if factor is None:
        return convert(value, "flow", unit)
    return np.asarray(value, float) * factor


def _axis_converters(chart, kind: str, ql_unit: str, qg_unit: str):
    ax = chart.axes(kind)
    if kind == "flow":
        def to_disp(ql, qg):
            return _to_flow_unit(ql, ql_unit), _to_flow_unit(qg, qg_unit)
        xl = f"liquid flow rate Q_L [{ql_unit}]"
        yl = f"gas flow rate Q_G [{qg_unit}]"
        return to_disp, xl, yl, ql_unit, qg_unit
    if kind == "flow_ratio":
        def to_disp(ql, qg):
            x, y = ax.to_xy(ql, qg)
            return _to_flow_unit(x, ql_unit), y
        return to_disp, f"liquid flow rate Q_L [{ql_unit}]", ax.y_label, ql_unit, ax.y_unit
    return ax.to_xy, ax.x_label, ax.y_label, ax.x_unit, ax.y_unit


def chart_view(chart, *, axes: str = "flow", log_axes: bool = True, ql_unit: str = "mL/min",
               qg_unit: str = "mL/min", point: tuple[float, float] | None = None, bands=None) -> ChartView:
    """Display data for ``chart`` in axes ``axes`` (see :data:`lowgmap.physics.chart.composition.AXIS_KINDS`).

    ``bands``: the bands of the chart's lines to draw (:attr:`lowgmap.physics.studies.study.Study.bands`,
    computed by the study, never here); None or empty: no bands. A band whose constants have no width
    (the band is the line) is left out.
    """
    to_disp, xl, yl, xu, yu = _axis_converters(chart, axes, ql_unit, qg_unit)
    fr = chart.case.flow_range
    corners_ql = np.array([fr.ql_min, fr.ql_max, fr.ql_min, fr.ql_max])
    corners_qg = np.array([fr.qg_min, fr.qg_min, fr.qg_max, fr.qg_max])
    cx, cy = to_disp(corners_ql, corners_qg)
    r_styles = _styles.regime_styles(list(chart.regime_names) + [r.name for r in chart.regions])

    regions = []
    seen = set()
    # biggest piece of each regime gets the label
    areas = {}
    for k, r in enumerate(chart.regions):
        lx, ly = np.log10(r.polygon_ql), np.log10(r.polygon_qg)
        a = 0.5 * abs(np.dot(lx, np.roll(ly, 1)) - np.dot(ly, np.roll(lx, 1)))
        if a > areas.get(r.name, (-1, None))[0]:
            areas[r.name] = (a, k)
    for k, r in enumerate(chart.regions):
        x, y = to_disp(r.polygon_ql, r.polygon_qg)
        colour, hatch = r_styles[r.name]
        lq_l, lq_g = _label_point(r.polygon_ql, r.polygon_qg)
        lx, ly = to_disp(lq_l, lq_g)
        show = areas.get(r.name, (0, -1))[1] == k and r.name not in seen
        seen.add(r.name)
        regions.append(RegionView(r.name, np.asarray(x), np.asarray(y), float(lx), float(ly), colour, hatch, show))

    curves = []
    b_styles = _styles.boundary_styles(b.name for b in chart.boundaries)
    for b in chart.boundaries:
        x, y = to_disp(b.ql, b.qg)
        colour, dash = b_styles[b.name].colour, _styles.bokeh_dash(b_styles[b.name].dash)
        curves.append(CurveView(b.name, b.label, b.citation, b.role, np.asarray(x, float), np.asarray(y, float),
                                np.asarray(b.valid_mask, bool), colour, dash, b.regime_below, b.regime_above))
    pt = None
    if point is not None:
        px, py = to_disp(point[0], point[1])
        pt = (float(px), float(py))
    return ChartView(xl, yl, xu, yu, log_axes, (float(np.min(cx)), float(np.max(cx))),
                     (float(np.min(cy)), float(np.max(cy))), tuple(regions), tuple(curves),
                     tuple(chart.warnings), tuple(chart.regime_names), pt, axes, to_disp,
                     {k: tuple(v) for k, v in r_styles.items()}, band_views(chart, bands, to_disp))


def band_views(chart, bands, to_display) -> tuple[BandView, ...]:
    """:class:`BandView` of each band in ``bands`` (Band objects of ``chart``'s lines) with ``to_display``.

    The outlines are the bands' own (:meth:`lowgmap.physics.chart.bands.Band.outline`, clipped to the
    chart's gas-flow range); colours are the lines' (:func:`lowgmap.app.outputs.styles.boundary_styles`).
    Bands of lines whose constants have no width are left out.
    """
    if not bands:
        return ()
    fr = chart.case.flow_range
    b_styles = _styles.boundary_styles(b.name for b in chart.boundaries)
    out = []
    for band in bands:
        if band.known_exactly:
            continue
        polys = []
        for ql, qg in band.outline((fr.qg_min, fr.qg_max)):
            x, y = to_display(ql, qg)
            polys.append((np.asarray(x, float), np.asarray(y, float)))
        if not polys:
            continue
        style = b_styles.get(band.name) or _styles.boundary_style(band.name)
        out.append(BandView(band.name, band.label, band.role, style.colour, tuple(polys),
                            tuple(c.name for c in band.constants)))
    return tuple(out)


#: Tolerance of the label position as a share of the region's smaller extent in log-log space (the
#: pole-of-inaccessibility search costs grow as the tolerance shrinks; 1 % of the region moves a label by
#: no more than a hundredth of the region and keeps it inside).
_LABEL_TOL = 1e-2


def _label_point(ql, qg) -> tuple[float, float]:
    """A point well inside the polygon (pole of inaccessibility in log-log space, to 1 % of its smaller extent)."""
    try:
        from shapely.ops import polylabel
        from shapely.geometry import Polygon

        poly = Polygon(np.column_stack([np.log10(ql), np.log10(qg)]))
        if not poly.is_valid:
            poly = poly.buffer(0)
        if poly.geom_type == "Polygon":
            x0, y0, x1, y1 = poly.bounds
            p = polylabel(poly, tolerance=max(1e-3, _LABEL_TOL * min(x1 - x0, y1 - y0)))
        else:
            p = poly.representative_point()
        return 10.0 ** p.x, 10.0 ** p.y
    except Exception:  # degenerate sliver: fall back to the vertex mean in log space
        return 10.0 ** float(np.mean(np.log10(ql))), 10.0 ** float(np.mean(np.log10(qg)))


def _fractions(view: ChartView, x, y):
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if view.log_axes:
        fx = (np.log10(x) - np.log10(view.x_range[0])) / np.log10(view.x_range[1] / view.x_range[0])
        fy = (np.log10(y) - np.log10(view.y_range[0])) / np.log10(view.y_range[1] / view.y_range[0])
    else:
        fx = (x - view.x_range[0]) / (view.x_range[1] - view.x_range[0])
        fy = (y - view.y_range[0]) / (view.y_range[1] - view.y_range[0])
    return fx, fy


def _from_fractions(view: ChartView, fx: float, fy: float) -> tuple[float, float]:
    if view.log_axes:
        lx0, lx1 = np.log10(view.x_range)
        ly0, ly1 = np.log10(view.y_range)
        return 10.0 ** (lx0 + fx * (lx1 - lx0)), 10.0 ** (ly0 + fy * (ly1 - ly0))
    return (view.x_range[0] + fx * (view.x_range[1] - view.x_range[0]),
            view.y_range[0] + fy * (view.y_range[1] - view.y_range[0]))


def line_label_positions(view: ChartView) -> dict[str, tuple[float, float]]:
    """Where to write each boundary's short label: on the line, as far as possible from region labels
    and from labels already placed (greedy, in axes fractions). Shared by the export and the dashboard."""
    placed = []
    for r in view.regions:
        if r.show_label:
            fx, fy = _fractions(view, [r.label_x], [r.label_y])
            placed.append((float(fx[0]), float(fy[0])))
    out: dict[str, tuple[float, float]] = {}
    for c in view.curves:
        ok = np.isfinite(c.x) & np.isfinite(c.y)
        if ok.sum() < 2:
            continue
        fx, fy = _fractions(view, c.x[ok], c.y[ok])
        idx = np.flatnonzero((fx > 0.06) & (fx < 0.80) & (fy > 0.05) & (fy < 0.93))
        if idx.size == 0:
            continue
        t = np.linspace(0.0, 1.0, 41)
        cand_fx = np.interp(t, np.linspace(0, 1, idx.size), fx[idx])
        cand_fy = np.interp(t, np.linspace(0, 1, idx.size), fy[idx])
        if placed:
            p = np.array(placed)
            d = np.min(np.hypot((cand_fx[:, None] - p[None, :, 0]) * 2.0, cand_fy[:, None] - p[None, :, 1]), axis=1)
            k = int(np.argmax(d - 0.05 * np.abs(t - 0.5)))  # prefer the middle when equally free
        else:
            k = 20
        placed.append((float(cand_fx[k]), float(cand_fy[k])))
        out[c.name] = _from_fractions(view, float(cand_fx[k]), float(cand_fy[k]))
    return out
