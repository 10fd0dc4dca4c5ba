"""The interactive regime chart (bokeh), built once per session and updated in place.

Two figures (log and linear axes) share every data source; switching axes scale toggles which one
is visible, so no figure is ever rebuilt. The operating point is a PointDrawTool point: while it is
dragged, bokeh Pan events give a live readout (flow values and regime); on release the new position
reaches Python and the authoritative margins are computed.
"""
from __future__ import annotations

import math

import numpy as np
import panel as pn
import param
from bokeh.events import Pan, PanEnd, PanStart
from bokeh.models import (ColumnDataSource, HoverTool, Legend, LegendItem, PointDrawTool, Range1d)
from bokeh.plotting import figure

from lowgmap.app.outputs.chartview import chart_view, line_label_positions
from lowgmap.app.files.units import convert

__all__ = ["ChartPane", "BOKEH_HATCH"]

#: matplotlib hatch -> bokeh hatch pattern
BOKEH_HATCH = {"": " ", "//": "/", "..": ".", "\\\\": "\\", "xx": "x", "++": "+", "--": "-", "oo": "o"}

OBS_MARKERS = ("circle", "square", "triangle", "diamond", "inverted_triangle", "hex", "star", "plus")


class ChartPane(pn.viewable.Viewer):
    """Bokeh chart bound to a :class:`~lowgmap.app.dashboard.state.Session`."""

    log_axes = param.Boolean(default=True)
    readout = param.String(default="")

    def __init__(self, session, **params):
        super().__init__(**params)
        self.session = session
        self.log_axes = session.doc.settings.log_axes
        self._dragging = False
        self.src_regions = ColumnDataSource(dict(xs=[], ys=[], colour=[], hatch=[], name=[]))
        self.src_region_labels = ColumnDataSource(dict(x=[], y=[], text=[], align=[]))
        self.src_valid = ColumnDataSource(dict(xs=[], ys=[], colour=[], dash=[], width=[], label=[], source=[]))
        self.src_invalid = ColumnDataSource(dict(xs=[], ys=[], colour=[], width=[], label=[], source=[]))
        self.src_line_labels = ColumnDataSource(dict(x=[], y=[], text=[], colour=[]))
        self.src_point = ColumnDataSource(dict(x=[1.0], y=[1.0]))
        self.src_box = ColumnDataSource(dict(left=[], right=[], bottom=[], top=[]))
        self.src_tests = ColumnDataSource(dict(x=[], y=[], observed=[], predicted=[], platform=[], test_id=[],
                                               marker=[], fill=[], line=[], width=[], agree=[]))
        self.x_range = Range1d(1, 10)
        self.y_range = Range1d(1, 10)
        self.figs = {True: self._figure("log"), False: self._figure("linear")}
        self._layout = pn.Column(pn.pane.Bokeh(self.figs[True], sizing_mode="stretch_width"),
                                 pn.pane.Bokeh(self.figs[False], sizing_mode="stretch_width"),
                                 sizing_mode="stretch_width")
        self.refresh_chart()
        session.param.watch(lambda *_: self._held(self._follow_case), ["revision_counter"])
        session.param.watch(lambda *_: self._held(self.refresh_point), ["ql", "qg", "show_uncertainty"])
        self.param.watch(lambda *_: self._held(self._toggle_scale), ["log_axes"])
        self.src_point.on_change("data", self._on_point_released)
        self._toggle_scale()

    @staticmethod
    def _held(fn, *args):
        """Run a bokeh-model update with document events held and sent together (panel.io.hold)."""
        with pn.io.hold():
            return fn(*args)

    # ----------------------------------------------------------------------------- figures
    def _figure(self, kind: str):
        fig = figure(x_axis_type=kind, y_axis_type=kind, x_range=self.x_range, y_range=self.y_range,
                     height=640, sizing_mode="stretch_width", tools="pan,wheel_zoom,box_zoom,reset,save",
                     active_scroll="wheel_zoom", toolbar_location="above", name=f"regime-chart-{kind}")
        fig.patches("xs", "ys", source=self.src_regions, fill_color="colour", fill_alpha=0.35,
                    hatch_pattern="hatch", hatch_color="colour", hatch_alpha=0.8, hatch_scale=10,
                    line_color=None)
        valid = fig.multi_line("xs", "ys", source=self.src_valid, line_color="colour", line_dash="dash",
                               line_width="width", name="boundaries")
        invalid = fig.multi_line("xs", "ys", source=self.src_invalid, line_color="colour", line_dash="dotted",
                                 line_width="width", line_alpha=0.6, name="boundaries-outside-validity")
        fig.add_tools(HoverTool(renderers=[valid, invalid], line_policy="nearest",
                                tooltips=[("model", "@label"), ("source", "@source")]))
        fig.text("x", "y", text="text", source=self.src_region_labels, text_align="align",
                 text_baseline="middle", text_font_size="13px", text_font_style="bold", text_color="#111111",
                 background_fill_color="white", background_fill_alpha=0.7)
        fig.text("x", "y", text="text", source=self.src_line_labels, text_color="colour", text_font_size="11px",
                 x_offset=4, y_offset=-4, background_fill_color="white", background_fill_alpha=0.75)
        fig.quad(left="left", right="right", bottom="bottom", top="top", source=self.src_box, fill_alpha=0.08,
                 fill_color="#D55E00", line_color="#D55E00", line_dash="dashed", line_width=1.5)
        tests = fig.scatter("x", "y", source=self.src_tests, marker="marker", size=10, fill_color="fill",
                            line_color="line", line_width="width", name="test-points")
        fig.add_tools(HoverTool(renderers=[tests], tooltips=[("test", "@test_id"), ("observed", "@observed"),
                                                             ("chart says", "@predicted"), ("platform", "@platform")]))
        point = fig.scatter("x", "y", source=self.src_point, marker="star", size=24, fill_color="#D55E00",
                            line_color="black", line_width=1.2, name="operating-point")
        draw = PointDrawTool(renderers=[point], add=False, drag=True, description="Drag the operating point")
        fig.add_tools(draw)
        fig.toolbar.active_tap = draw
        fig.toolbar.active_drag = draw
        fig.on_event(PanStart, self._on_pan_start)
        fig.on_event(Pan, self._on_pan)
        fig.on_event(PanEnd, self._on_pan_end)
        fig.xaxis.axis_label_text_font_size = "13px"
        fig.yaxis.axis_label_text_font_size = "13px"
        fig.xaxis.major_label_text_font_size = "12px"
        fig.yaxis.major_label_text_font_size = "12px"
        legend = Legend(items=[], location="top_left", label_text_font_size="12px", click_policy="hide",
                        background_fill_alpha=0.85, spacing=2)
        fig.add_layout(legend, "below")
        fig.legend.visible = True
        return fig

    def _follow_case(self):
        """A new case revision: redraw, with the axes scale the case says (unless a switch is queued)."""
        s = self.session
        if s.closed:
            return
        want = bool(s.doc.settings.log_axes)
        if want != self.log_axes and "chart.log_axes" not in s.pending_keys:
            self.log_axes = want  # redraws through _toggle_scale
        else:
            self.refresh_chart()

    def _toggle_scale(self):
        for log, fig in self.figs.items():
            fig.visible = (log == self.log_axes)
        self.refresh_chart()

    # ----------------------------------------------------------------------------- data
    def view(self, point=None):
        s = self.session
        st = s.doc.settings
        return chart_view(s.chart, axes=st.axes, log_axes=self.log_axes, ql_unit=st.liquid_flow_unit,
                          qg_unit=st.gas_flow_unit, point=point)

    def refresh_chart(self):
        s = self.session
        if s.closed:
            return
        v = self.view()
        self._view = v
        self.src_regions.data = dict(
            xs=[list(r.x) for r in v.regions], ys=[list(r.y) for r in v.regions],
            colour=[r.colour for r in v.regions], hatch=[BOKEH_HATCH.get(r.hatch, " ") for r in v.regions],
            name=[r.name for r in v.regions])
        labelled = [r for r in v.regions if r.show_label]
        self.src_region_labels.data = dict(x=[r.label_x for r in labelled], y=[r.label_y for r in labelled],
                                           text=[r.name for r in labelled],
                                           align=[_text_align(v, r.label_x) for r in labelled])
        vx, vy, vc, vd, vw, vl, vs = [], [], [], [], [], [], []
        ix, iy, ic, iw, il, is_ = [], [], [], [], [], []
        lx, ly, lt, lc = [], [], [], []
        positions = line_label_positions(v)
        for c in v.curves:
            width = 3.0 if c.role == "regions" else 2.0
            for x, y in c.pieces(True):
                vx.append(list(x)); vy.append(list(y)); vc.append(c.colour); vd.append(c.dash)
                vw.append(width); vl.append(c.label); vs.append(c.citation)
            for x, y in c.pieces(False):
                ix.append(list(x)); iy.append(list(y)); ic.append(c.colour); iw.append(width)
                il.append(c.label + " — outside the source's validity range"); is_.append(c.citation)
            pos = positions.get(c.name)
            if pos is not None:
                lx.append(pos[0]); ly.append(pos[1]); lt.append(c.label.split(" (")[0]); lc.append(c.colour)
        self.src_valid.data = dict(xs=vx, ys=vy, colour=vc, dash=vd, width=vw, label=vl, source=vs)
        self.src_invalid.data = dict(xs=ix, ys=iy, colour=ic, width=iw, label=il, source=is_)
        self.src_line_labels.data = dict(x=lx, y=ly, text=lt, colour=lc)
        for log, fig in self.figs.items():
            fig.xaxis.axis_label = v.x_label
            fig.yaxis.axis_label = v.y_label
            fig.title.text = s.doc.case.title
            items = []
            valid_r = fig.select(name="boundaries")[0]
            for c in v.curves:
                suffix = "" if c.role == "regions" else " (comparison)"
                items.append(LegendItem(label=c.label + suffix, renderers=[valid_r],
                                        index=_first_index(vl, c.label)))
            fig.legend.items = [it for it in items if it.index is not None]
        self.x_range.start, self.x_range.end = v.x_range
        self.y_range.start, self.y_range.end = v.y_range
        self.refresh_point()

    def refresh_point(self):
        s = self.session
        if s.ql is None or s.closed:
            return
        x, y = self._to_display(s.ql, s.qg)
        moving = "point" in s.pending_keys  # a dragged point waits for its margins: leave it where it was put
        if not moving and (self.src_point.data.get("x") != [x] or self.src_point.data.get("y") != [y]):
            self._suppress = True
            try:
                self.src_point.data = dict(x=[x], y=[y])
            finally:
                self._suppress = False
        box = s.flow_uncertainty_box() if s.show_uncertainty else None
        if box:
            x0, y0 = self._to_display(box[0], box[2])
            x1, y1 = self._to_display(box[1], box[3])
            self.src_box.data = dict(left=[x0], right=[x1], bottom=[y0], top=[y1])
        else:
            self.src_box.data = dict(left=[], right=[], bottom=[], top=[])
        self.readout = self._readout_text(s.ql, s.qg, moving=False)

    def _to_display(self, ql, qg):
        x, y = self._view.to_display(np.array([ql]), np.array([qg]))
        return float(np.asarray(x).ravel()[0]), float(np.asarray(y).ravel()[0])

    def _to_flow(self, x, y):
        """Display coordinates -> (Q_L, Q_G) [m^3/s]."""
        s = self.session
        st = s.doc.settings
        kind = st.axes
        if kind == "flow":
            return (float(x) / convert(1.0, "flow", st.liquid_flow_unit),
                    float(y) / convert(1.0, "flow", st.gas_flow_unit))
        ax = s.chart.axes(kind)
        if kind == "flow_ratio":
            ql = x / convert(1.0, "flow", st.liquid_flow_unit)
            return float(ql), float(y * ql)
        ql, qg = ax.to_flow(x, y)
        return float(ql), float(qg)

    def _readout_text(self, ql, qg, moving: bool) -> str:
        st = self.session.doc.settings
        regime = self.session.regime_at(ql, qg) or "no regime"
        lead = "moving" if moving else "operating point"
        return (f"**{lead}:** Q_L = {convert(ql, 'flow', st.liquid_flow_unit):.4g} {st.liquid_flow_unit}, "
                f"Q_G = {convert(qg, 'flow', st.gas_flow_unit):.4g} {st.gas_flow_unit} → **{regime}**")

    # ----------------------------------------------------------------------------- events
    def _on_pan_start(self, event):
        # a drag that starts on the star moves the point (PointDrawTool); elsewhere it does nothing
        self._dragging = event.x is not None and self._near_point(event.x, event.y)

    def _on_pan(self, event):
        if not self._dragging or event.x is None or event.y is None:
            return
        ql, qg = self._to_flow(event.x, event.y)
        if ql > 0 and qg > 0 and math.isfinite(ql) and math.isfinite(qg):
            self.readout = self._readout_text(ql, qg, moving=True)

    def _near_point(self, x, y, tol: float = 0.04) -> bool:
        """Whether display point (x, y) is within ``tol`` of the axes spans from the operating point."""
        px, py = self.src_point.data["x"][0], self.src_point.data["y"][0]
        v = self._view
        if v.log_axes:
            if x <= 0 or y <= 0:
                return False
            dx = abs(math.log10(x / px)) / math.log10(v.x_range[1] / v.x_range[0])
            dy = abs(math.log10(y / py)) / math.log10(v.y_range[1] / v.y_range[0])
        else:
            dx = abs(x - px) / (v.x_range[1] - v.x_range[0])
            dy = abs(y - py) / (v.y_range[1] - v.y_range[0])
        return dx < tol and dy < tol

    def _on_pan_end(self, event):
        self._dragging = False

    def _on_point_released(self, attr, old, new):
        if getattr(self, "_suppress", False):
            return
        try:
            x, y = float(new["x"][0]), float(new["y"][0])
        except (IndexError, KeyError, TypeError, ValueError):
            return
        ql, qg = self._to_flow(x, y)
        if not (ql > 0 and qg > 0 and math.isfinite(ql) and math.isfinite(qg)):
            self.refresh_point()
            return
        self._dragging = False
        self.session.move_point(ql, qg)

    # ----------------------------------------------------------------------------- test points
    def show_test_points(self, points, predicted, observed_styles):
        """Draw test points: marker by platform, fill by observed regime, thick red edge on disagreement."""
        if points is None or len(points) == 0:
            self.src_tests.data = {k: [] for k in self.src_tests.data}
            return
        x, y = self._view.to_display(points["ql_m3_s"].to_numpy(), points["qg_m3_s"].to_numpy())
        platforms = sorted(set(points["platform"].fillna("").astype(str)))
        pm = {p: OBS_MARKERS[i % len(OBS_MARKERS)] for i, p in enumerate(platforms)}
        obs = points["observed_regime"].fillna("").astype(str).tolist()
        agree = [o == p for o, p in zip(obs, predicted)]
        self.src_tests.data = dict(
            x=list(np.asarray(x, float)), y=list(np.asarray(y, float)), observed=obs, predicted=list(predicted),
            platform=points["platform"].fillna("").astype(str).tolist(),
            test_id=points["test_id"].astype(str).tolist(),
            marker=[pm[p] for p in points["platform"].fillna("").astype(str)],
            fill=[observed_styles.get(o, "#ffffff") for o in obs],
            line=["#222222" if a else "#C00000" for a in agree], width=[1.0 if a else 3.0 for a in agree],
            agree=agree)

    def __panel__(self):
        return self._layout


def _text_align(v, x: float) -> str:
    """Anchor a region label so it stays inside the plot near the left and right edges."""
    lo, hi = v.x_range
    f = (math.log10(x / lo) / math.log10(hi / lo)) if v.log_axes else (x - lo) / (hi - lo)
    return "right" if f > 0.7 else ("left" if f < 0.3 else "center")


def _first_index(labels: list[str], label: str):
    try:
        return labels.index(label)
    except ValueError:
        return None
