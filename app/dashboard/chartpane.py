"""The interactive regime chart (bokeh), built once per session and updated in place.

Two figures (log and linear axes) share every data source; switching axes scale toggles which one
is visible, so no figure is ever rebuilt. The operating point is a PointDrawTool point: while it is
dragged, bokeh Pan events give a live readout (flow values and regime); on release the new position
reaches Python and the authoritative margins are computed.

Live morph: a new chart (a new case, or the preview of a slider being dragged,
:attr:`lowgmap.app.dashboard.state.Session.live`) only assigns new ``data`` to the existing sources of
the regions, the lines, the labels, the bands and the point; the key's entries are kept in a pool and
changed in place; the glyphs are found once, when the figure is made. The drawing data of a preview
are prepared on the worker thread (:meth:`ChartPane.frame_of` touches no bokeh model), so the event
loop only hands them over. While a preview is shown, a label drawn in the plot says which value is
drawn, with the operating point's regime and margin on that chart; it is a canvas annotation, so a new
frame repaints the plot without laying out the page again (a changed title or text box would: tens of
ms per frame in the browser). The status line above the chart changes only when the drag starts, is
released or meets a value with no chart. A preview fills the regions in flat colour (their hatching is the
page's slowest fill; it comes back with the chart in effect, see :meth:`ChartPane.preview_frame`).

Toggles above the chart: the bands of the lines (translucent, each in its line's colour, under the
lines; off by default: for the corner family they take seconds, computed in the background with a
"computing bands…" notice) and the full solves (``Chart.build(case, exact=True)``).
"""
from __future__ import annotations

import html
import math

import numpy as np
import panel as pn
import param
from bokeh.events import Pan, PanEnd, PanStart
from bokeh.core.properties import value
from bokeh.models import (ColumnDataSource, CustomJS, HoverTool, Label, Legend, LegendItem, PointDrawTool,
                          Range1d)
from bokeh.plotting import figure

from lowgmap.app.dashboard.display import HIDDEN, set_shown
from lowgmap.app.outputs.chartview import BAND_KEY_TEXT, chart_view, line_label_positions
from lowgmap.app.outputs.styles import DISAGREE_COLOUR, OPERATING_POINT_COLOUR, platform_marker
from lowgmap.app.files.units import convert

__all__ = ["ChartPane", "BOKEH_HATCH", "CHART_HEIGHT", "live_html", "live_label_text", "LIVE_CSS"]

#: matplotlib hatch -> bokeh hatch pattern
BOKEH_HATCH = {"": " ", "//": "/", "..": ".", "\\\\": "\\", "xx": "x", "++": "+", "--": "-", "oo": "o"}

#: Smallest side of the drawn flow-rate uncertainty frame [px] (the operating-point star is 24 px).
BOX_MIN_PX = 36
#: Width of the plot frame assumed when deciding whether the true box is drawn too small [px].
_FRAME_PX = 600
#: Most key entries shown in one column (a longer key takes two, so the plot keeps its height).
LEGEND_ONE_COLUMN = 8
#: Height kept above the plot for the status lines [px]: one preview status line or one "working" line.
STATUS_SLOT_PX = 30
#: Height of the chart with its key [px]: it fits an 800 px window below the header, caution line and tabs.
CHART_HEIGHT = 620

#: Coordinates of each glyph that has entries in the key, and the columns that style each entry (copied from
#: the glyph's source into the key's own source, :meth:`ChartPane._keyed`).
_KEY_COORDS = {"boundaries": ("xs", "ys"), "boundaries-outside-validity": ("xs", "ys"), "bands": ("xs", "ys"),
               "uncertainty-box": ("left", "right", "bottom", "top"), "uncertainty-frame": ("x", "y"),
               "test-points": ("x", "y")}
_KEY_STYLES = {"boundaries": ("colour", "dash", "width"), "boundaries-outside-validity": ("colour", "width"),
               "bands": ("colour",), "uncertainty-box": (), "uncertainty-frame": (),
               "test-points": ("marker", "fill", "line", "width")}

#: A click on a key entry hides (or shows) the entry's stand-in glyph (the key's click policy "hide"); the glyph
#: drawn in the plot takes the same visibility once the click is handled (a microtask: after bokeh toggled it).
_KEY_CLICK_JS = """
const item = cb_obj.item;
queueMicrotask(() => {
  for (const r of item.renderers) {
    const k = twins.indexOf(r);
    if (k >= 0) reals[k].visible = r.visible;
  }
});
"""

LIVE_CSS = """
.live-status {background: #e8f1fa; border: 1px solid #1f3b57; color: #1f3b57; padding: 3px 8px;
              border-radius: 4px; font-size: 13px;}
.live-status.problem {background: #fde0dc; border-color: #B00000; color: #8B0000;}
.extras-notice {color: #1f3b57; font-size: 12px;}
"""


class ChartPane(pn.viewable.Viewer):
    """Bokeh chart bound to a :class:`~lowgmap.app.dashboard.state.Session`."""

    log_axes = param.Boolean(default=True)
    readout = param.String(default="")

    def __init__(self, session, **params):
        super().__init__(**params)
        self.session = session
        self.log_axes = session.doc.settings.log_axes
        self._dragging = False
        self.src_regions = ColumnDataSource(dict(xs=[], ys=[], colour=[], name=[]))
        #: the regions' hatching, a glyph of its own: hidden while a slider is dragged (see :meth:`preview_frame`)
        self.src_region_hatch = ColumnDataSource(dict(xs=[], ys=[], colour=[], hatch=[]))
        self.src_region_labels = ColumnDataSource(dict(x=[], y=[], text=[], align=[]))
        self.src_valid = ColumnDataSource(dict(xs=[], ys=[], colour=[], dash=[], width=[], label=[], source=[]))
        self.src_invalid = ColumnDataSource(dict(xs=[], ys=[], colour=[], width=[], label=[], source=[]))
        self.src_line_labels = ColumnDataSource(dict(x=[], y=[], text=[], colour=[]))
        self.src_point = ColumnDataSource(dict(x=[1.0], y=[1.0]))
        self.src_box = ColumnDataSource(dict(left=[], right=[], bottom=[], top=[]))
        self.src_box_frame = ColumnDataSource(dict(x=[], y=[]))
        self.src_bands = ColumnDataSource(dict(xs=[], ys=[], colour=[], label=[]))
        self.src_tests = ColumnDataSource(dict(x=[], y=[], observed=[], predicted=[], platform=[], test_id=[],
                                               marker=[], fill=[], line=[], width=[], agree=[]))
        #: the sources of the key's twin glyphs (see :meth:`_keyed`): one row per key entry, styles only
        self.src_key = {name: ColumnDataSource({c: [] for c in coords + _KEY_STYLES[name]})
                        for name, coords in _KEY_COORDS.items()}
        self._line_items: list = []
        self._test_items: list = []
        self._key_shown: list | None = None
        self._renderers: dict = {}
        self._key_pool: dict = {True: [], False: []}
        self._showing_preview = False
        self._drawn_preview = -1
        self._live_labels: dict = {}
        self._key_pairs: dict = {}      # figure name -> [(twin, real)] of the key's glyphs (see _keyed)
        self.x_range = Range1d(1, 10)
        self.y_range = Range1d(1, 10)
        self.figs = {True: self._figure("log"), False: self._figure("linear")}
        # the sources every update changes, by glyph name, and an empty stand-in of each for the hidden figure
        self._shared_source = {r.name: r.data_source for r in self.figs[True].renderers
                               if r.name and not r.name.startswith("key: ")}
        self._stand_in = {name: ColumnDataSource({c: [] for c in src.data})
                          for name, src in self._shared_source.items()}
        # texts that change with every frame are widgets: a widget sends only its changed property, while
        # a pane update makes bokeh walk the whole document's model graph (tens of ms per update)
        # shown and hidden by style, not by `visible` (which lays the whole page out again: display.py)
        self.live_status = pn.widgets.StaticText(value="", styles=dict(HIDDEN), sizing_mode="stretch_width",
                                                 stylesheets=[LIVE_CSS], css_classes=["live-status-pane"],
                                                 margin=(2, 10))
        self.bands_toggle = pn.widgets.Checkbox(label="Show uncertainty bands of the lines", value=session.show_bands,
                                                css_classes=["bands-toggle"])
        self.exact_toggle = pn.widgets.Checkbox(label="Full solves (exact, slower)", value=session.exact,
                                                css_classes=["exact-toggle"])
        self.extras_notice = pn.widgets.StaticText(value="", styles=dict(HIDDEN), stylesheets=[LIVE_CSS],
                                                   css_classes=["bands-notice"], margin=(2, 10))
        self.bands_toggle.param.watch(lambda e: setattr(session, "show_bands", bool(e.new)), "value")
        self.exact_toggle.param.watch(self._exact_switched, "value")
        # the chart takes the width the point column leaves, and a height that fits a 800 px window
        # below the header, caution line and tabs
        # one line kept for the status lines above the plot (the preview status and the page's "working" line,
        # :meth:`add_status`), so the plot does not move when one comes or goes
        self.status_slot = pn.Column(self.live_status, min_height=STATUS_SLOT_PX, sizing_mode="stretch_width",
                                     margin=0, css_classes=["chart-status-slot"])
        self._layout = pn.Column(pn.Row(self.bands_toggle, self.exact_toggle, self.extras_notice,
                                        sizing_mode="stretch_width", margin=(0, 0)),
                                 self.status_slot,
                                 pn.pane.Bokeh(self.figs[True], sizing_mode="stretch_width"),
                                 pn.pane.Bokeh(self.figs[False], sizing_mode="stretch_width"),
                                 sizing_mode="stretch_width")
        self.refresh_chart()
        session.param.watch(lambda *_: self._held(self._follow_case), ["revision_counter"])
        session.param.watch(lambda *_: self._held(self.refresh_point), ["ql", "qg", "show_uncertainty"])
        session.param.watch(lambda *_: self._held(self._show_live), ["live"])
        session.param.watch(lambda *_: self._held(self._bands_changed), ["bands", "bands_state", "show_bands"])
        session.param.watch(lambda *_: self._show_exact(), ["exact", "applied_counter"])
        self.param.watch(lambda *_: self._held(self._toggle_scale), ["log_axes"])
        self.src_point.on_change("data", self._on_point_released)
        self._toggle_scale()

    def add_status(self, viewable) -> None:
        """Put a status line of the page (shown and hidden by :func:`~lowgmap.app.dashboard.display.set_shown`)
        in the line kept above the plot, before the preview status."""
        self.status_slot.insert(0, viewable)

    def _exact_switched(self, event):
        if bool(event.new) != self.session.exact:
            self.session.set_exact(bool(event.new))

    def _show_exact(self):
        if self.exact_toggle.value != self.session.exact and "exact" not in self.session.pending_keys:
            self.exact_toggle.value = self.session.exact

    def _bands_changed(self):
        s = self.session
        if s.closed:
            return
        notice = "computing bands…" if s.show_bands and s.bands_state == "computing" else (
            "no line of this chart has a banded constant" if s.show_bands and s.bands_state == "none" else (
                s.extras_problem if s.show_bands and s.bands_state == "failed" else ""))
        if notice:
            self.extras_notice.value = f"<span class='extras-notice'>{html.escape(notice)}</span>"
        set_shown(self.extras_notice, bool(notice))
        if self.bands_toggle.value != s.show_bands:
            self.bands_toggle.value = s.show_bands
        drawn = bool(self.src_bands.data["xs"])
        want = s.show_bands and s.bands_state == "ready"
        if (drawn or want) and not self._showing_preview:
            self.refresh_chart()

    @staticmethod
    def _held(fn, *args):
        """Run a bokeh-model update with document events held and sent together (panel.io.hold)."""
        with pn.io.hold():
            return fn(*args)

    # ----------------------------------------------------------------------------- figures
    def _figure(self, kind: str):
        fig = figure(x_axis_type=kind, y_axis_type=kind, x_range=self.x_range, y_range=self.y_range,
                     height=CHART_HEIGHT, sizing_mode="stretch_width", min_width=300,
                     tools="pan,wheel_zoom,box_zoom,reset,save",
                     active_scroll="wheel_zoom", toolbar_location="above", name=f"regime-chart-{kind}")
        fig.patches("xs", "ys", source=self.src_regions, fill_color="colour", fill_alpha=0.35, line_color=None,
                    name="regions")
        fig.patches("xs", "ys", source=self.src_region_hatch, fill_color=None, hatch_pattern="hatch",
                    hatch_color="colour", hatch_alpha=0.8, hatch_scale=10, line_color=None, name="region-hatching")
        self._keyed(fig, "patches", "bands", self.src_bands, fill_color="colour", fill_alpha=0.28,
                    line_color="colour", line_alpha=0.5, line_width=1.0)
        valid = self._keyed(fig, "multi_line", "boundaries", self.src_valid, line_color="colour", line_dash="dash",
                            line_width="width")
        invalid = self._keyed(fig, "multi_line", "boundaries-outside-validity", self.src_invalid, line_color="colour",
                              line_dash="dotted", line_width="width", line_alpha=0.6)
        fig.add_tools(HoverTool(renderers=[valid, invalid], line_policy="nearest",
                                tooltips=[("model", "@label"), ("source", "@source")]))
        fig.text("x", "y", text="text", source=self.src_region_labels, text_align="align",
                 text_baseline="middle", text_font_size="13px", text_font_style="bold", text_color="#111111",
                 background_fill_color="white", background_fill_alpha=0.7, name="region-labels")
        fig.text("x", "y", text="text", source=self.src_line_labels, text_color="colour", text_font_size="11px",
                 x_offset=4, y_offset=-4, background_fill_color="white", background_fill_alpha=0.75,
                 name="line-labels")
        # the flow-rate uncertainty box: the true box, solid; when it is smaller than the star, a frame of
        # BOX_MIN_PX around the point says where it is (both in the key)
        self._keyed(fig, "quad", "uncertainty-box", self.src_box, fill_alpha=0.15, fill_color=OPERATING_POINT_COLOUR,
                    line_color="#7a2e00", line_width=2.5)
        self._keyed(fig, "rect", "uncertainty-frame", self.src_box_frame, width=BOX_MIN_PX, height=BOX_MIN_PX,
                    width_units="screen", height_units="screen", fill_alpha=0.0, line_color="#7a2e00",
                    line_width=2.0, line_dash=[5, 3])
        tests = self._keyed(fig, "scatter", "test-points", self.src_tests, marker="marker", size=11, fill_color="fill",
                            fill_alpha=0.9, line_color="line", line_width="width")
        fig.add_tools(HoverTool(renderers=[tests], tooltips=[("test", "@test_id"), ("observed", "@observed"),
                                                             ("chart says", "@predicted"), ("platform", "@platform")]))
        point = fig.scatter("x", "y", source=self.src_point, marker="star", size=24, fill_color=OPERATING_POINT_COLOUR,
                            line_color="black", line_width=1.2, name="operating-point")
        live = Label(x=8, y=8, x_units="screen", y_units="screen", text="", text_font_size="13px",
                     text_font_style="bold", text_color="#1f3b57", background_fill_color="white",
                     background_fill_alpha=0.9, border_line_color="#1f3b57", visible=False, name="live-label")
        fig.add_layout(live)
        self._live_labels[kind == "log"] = live
        # every glyph the updates touch, found once here (never searched for on an update)
        self._renderers[kind == "log"] = {r.name: r for r in fig.renderers if r.name}
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
        legend = Legend(items=[], location="top_left", label_text_font_size="11px", click_policy="hide",
                        background_fill_alpha=0.85, spacing=0, padding=4, label_height=14, glyph_height=14,
                        margin=4)
        fig.add_layout(legend, "below")
        fig.legend.visible = True
        twins, reals = zip(*self._key_pairs[fig.name])
        legend.js_on_event("legend_item_click", CustomJS(args=dict(twins=list(twins), reals=list(reals)),
                                                         code=_KEY_CLICK_JS))
        return fig

    def _keyed(self, fig, method: str, name: str, source, **style):
        """A glyph renderer that has entries in the key, and its twin that the key draws from.

        The key's entries refer to the twin, which draws nothing in the plot (its rows have no coordinates) and
        takes its styles from :attr:`src_key`; the key's clicks reach the real glyph through the key's own click
        event (:data:`_KEY_CLICK_JS`, set in :meth:`_figure`). bokeh's key rebuilds its entries (their elements
        and canvases in the page) whenever any model reachable from its entries changes, i.e. on every frame of a
        drag if an entry led to a source the frames fill: so nothing reachable from the twin refers to the real
        glyph (a link from the twin's visibility to it would), and the twin's source changes only with the key.
        """
        coords = _KEY_COORDS[name]
        at = {c: c for c in coords}
        real = getattr(fig, method)(**at, source=source, name=name, **style)
        twin = getattr(fig, method)(**at, source=self.src_key[name], name=f"key: {name}", **style)
        self._key_pairs.setdefault(fig.name, []).append((twin, real))
        return real

    def _follow_case(self):
        """A new case revision: redraw, with the axes scale the case says (unless a switch is queued)."""
        s = self.session
        if s.closed:
            return
        if self._showing_preview and s.live is not None:   # a slider is dragged: its preview stays drawn
            return
        want = bool(s.doc.settings.log_axes)
        if want != self.log_axes and "chart.log_axes" not in s.pending_keys:
            self.log_axes = want  # redraws through _toggle_scale
        else:
            self.refresh_chart()

    def _toggle_scale(self):
        """Show the figure of the axes scale in effect; the hidden one draws from empty stand-in sources.

        A hidden bokeh figure that shares the sources is laid out again on every data change (its panels
        measure zero, so the page takes their size as changed): 7-10 ms of the page's time per frame of a
        dragged slider. Switching scale moves the glyphs of both figures onto the other sources.
        """
        for log, fig in self.figs.items():
            shown = log == self.log_axes
            for r in fig.renderers:
                shared = self._shared_source.get(r.name)
                if shared is None:
                    continue
                want = shared if shown else self._stand_in[r.name]
                if r.data_source is not want:
                    r.data_source = want
            fig.visible = shown
        self.refresh_chart()

    # ----------------------------------------------------------------------------- data
    def view(self, point=None):
        s = self.session
        st = s.doc.settings
        return chart_view(s.chart, axes=st.axes, log_axes=self.log_axes, ql_unit=st.liquid_flow_unit,
                          qg_unit=st.gas_flow_unit, point=point)

    def frame_of(self, doc, chart, bands=None, title: str | None = None) -> dict:
        """Everything drawn for ``chart`` as plain data (no bokeh model is touched: safe on a worker thread).

        Returns the :class:`~lowgmap.app.outputs.chartview.ChartView` (``view``), the new ``data`` of each
        source, the key entries of the lines, the axis labels, the title and the ranges.
        """
        st = doc.settings
        v = chart_view(chart, axes=st.axes, log_axes=self.log_axes, ql_unit=st.liquid_flow_unit,
                       qg_unit=st.gas_flow_unit, bands=bands)
        regions = dict(xs=[list(r.x) for r in v.regions], ys=[list(r.y) for r in v.regions],
                       colour=[r.colour for r in v.regions], hatch=[BOKEH_HATCH.get(r.hatch, " ") for r in v.regions],
                       name=[r.name for r in v.regions])
        labelled = [r for r in v.regions if r.show_label]
        region_labels = dict(x=[r.label_x for r in labelled], y=[r.label_y for r in labelled],
                             text=[r.name for r in labelled], align=[_text_align(v, r.label_x) for r in labelled])
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
        bx, by, bc, bl = [], [], [], []
        for band in v.bands:
            for x, y in band.polygons:
                ok = np.isfinite(x) & np.isfinite(y)
                if ok.sum() >= 3:
                    bx.append(list(x[ok])); by.append(list(y[ok])); bc.append(band.colour); bl.append(band.label)
        key = []   # (label, renderer, index) of the lines' entries in the key
        for c in v.curves:
            index = _first_index(vl, c.label)
            if index is not None:
                key.append((c.label + ("" if c.role == "regions" else " (comparison)"), "boundaries", index))
        if il:
            key.append(("dotted: outside the source's validity range", "boundaries-outside-validity", 0))
        if bx:
            key.append((BAND_KEY_TEXT, "bands", 0))
        return dict(view=v, regions=regions, region_labels=region_labels,
                    valid=dict(xs=vx, ys=vy, colour=vc, dash=vd, width=vw, label=vl, source=vs),
                    invalid=dict(xs=ix, ys=iy, colour=ic, width=iw, label=il, source=is_),
                    line_labels=dict(x=lx, y=ly, text=lt, colour=lc),
                    bands=dict(xs=bx, ys=by, colour=bc, label=bl), key=key,
                    title=doc.case.title if title is None else title, x_label=v.x_label, y_label=v.y_label,
                    x_range=v.x_range, y_range=v.y_range)

    def preview_frame(self, doc, chart) -> dict:
        """:meth:`frame_of` for a preview (handed to :meth:`Session.preview`, run on the worker).

        The regions are drawn in flat colour while a slider is dragged: filling them with their hatching takes
        the page about a sixth of its time per frame on a machine that draws without a graphics processor
        (15-16 against 18 frames per second on the wedge sample, 18 against 22 on the tube sample, measured
        with tests/perf/bench_morph.py). Their colours and names stay; the hatching comes back with the chart
        in effect on release. The hatching is a glyph of its own, hidden when a drag starts and left with the
        data of the chart in effect until the release: bokeh makes a pattern canvas for every region and every
        variant of a hatched glyph (selected, not selected, muted, decimated) whenever its data change, which a
        blank column or a blank pattern of the glyph alone does not avoid. (Emptying its data instead makes
        bokeh 3.9 fail while painting, "Out of bounds: 0 <= 0 < 0", and leave the title and tick labels
        unpainted.)
        """
        return dict(self.frame_of(doc, chart), flat=True)

    def refresh_chart(self):
        """Draw the session's chart (with its bands when they are shown)."""
        s = self.session
        if s.closed:
            return
        bands = s.bands if s.show_bands and s.bands_state == "ready" else None
        self._apply_frame(self.frame_of(s.doc, s.chart, bands))
        self._showing_preview = False
        self._drawn_preview = -1
        self.refresh_point()

    def _apply_frame(self, f: dict) -> None:
        """Put a frame on the chart: new data in the existing sources, the key entries updated in place."""
        self._view = f["view"]
        regions = f["regions"]
        self.src_regions.data = {k: regions[k] for k in ("xs", "ys", "colour", "name")}
        flat = bool(f.get("flat"))
        if not flat:
            self.src_region_hatch.data = {k: regions[k] for k in ("xs", "ys", "colour", "hatch")}
        for renderers in self._renderers.values():     # a preview: the hatching hidden (once per drag), unchanged
            hatching = renderers["region-hatching"]
            if hatching.visible == flat:
                hatching.visible = not flat
        for src, name in ((self.src_region_labels, "region_labels"),
                          (self.src_valid, "valid"), (self.src_invalid, "invalid"),
                          (self.src_line_labels, "line_labels"), (self.src_bands, "bands")):
            src.data = f[name]
        self._line_items = f["key"]
        for fig in self.figs.values():
            fig.xaxis.axis_label = f["x_label"]
            fig.yaxis.axis_label = f["y_label"]
            fig.title.text = f["title"]
        self._show_legends()
        self.x_range.start, self.x_range.end = f["x_range"]
        self.y_range.start, self.y_range.end = f["y_range"]

    def _show_legends(self):
        """The key: boundary lines (and bands), then the uncertainty box and the test points when drawn.

        The key's entries are a pool of LegendItem models changed in place (new ones only when the key
        grows), and nothing is sent when the key is unchanged (a morphing chart keeps its key).
        """
        spec = list(self._line_items)
        if self.src_box.data["left"]:
            spec.append(("flow-rate uncertainty box (±1 standard uncertainty)", "uncertainty-box", 0))
        if self.src_box_frame.data["x"]:
            spec.append((f"frame: uncertainty box under {BOX_MIN_PX} px", "uncertainty-frame", 0))
        for label, index in self._test_items:
            spec.append((label, "test-points", index))
        rows: dict[str, list] = {name: [] for name in _KEY_COORDS}   # rows of the real sources, per twin
        entries = []
        for label, rname, index in spec:
            if index not in rows[rname]:
                rows[rname].append(index)
            entries.append((label, rname, rows[rname].index(index)))
        styles = {name: {c: [self._shared_source[name].data[c][i] for i in rows[name]]
                         for c in _KEY_STYLES[name]} for name in _KEY_COORDS}
        if (entries, styles) == self._key_shown:
            return
        self._key_shown = (entries, styles)
        for name, coords in _KEY_COORDS.items():
            n = len(rows[name])
            empty = [] if coords[0] == "xs" else math.nan
            data = {c: [empty] * n for c in coords} | styles[name]
            old = self.src_key[name].data
            if len(old[coords[0]]) != n or any(list(old[c]) != data[c] for c in _KEY_STYLES[name]):
                self.src_key[name].data = data
        for log, fig in self.figs.items():
            pool = self._key_pool[log]
            renderers = {name: self._renderers[log][f"key: {name}"] for name in _KEY_COORDS}
            while len(pool) < len(entries):
                pool.append(LegendItem(label="", renderers=[renderers["boundaries"]], index=0, visible=False))
            for item in pool[len(entries):]:   # unused entries are hidden, not removed (no new list of models)
                if item.visible:
                    item.visible = False
            for item, (label, rname, index) in zip(pool, entries):
                if not item.visible:
                    item.visible = True
                # only what changed: a new list of model references makes bokeh walk the whole document
                if getattr(item.label, "value", None) != label:
                    item.label = value(label)      # a text, not a column name
                if item.index != index:
                    item.index = index
                if item.renderers[0] is not renderers[rname]:
                    item.renderers = [renderers[rname]]
            if len(fig.legend.items) != len(pool):
                fig.legend.items = list(pool)
            ncols = 1 if len(spec) <= LEGEND_ONE_COLUMN else 2   # a long key in two columns
            if fig.legend.ncols != ncols:
                fig.legend.ncols = ncols

    # ----------------------------------------------------------------------------- live preview
    def _show_live(self):
        """Draw the session's live preview (a slider being dragged), or go back to the chart in effect."""
        s = self.session
        if s.closed:
            return
        live = s.live
        if live is None:
            set_shown(self.live_status, False)   # the words stay while hidden: hiding sends one style
            for label in self._live_labels.values():
                label.visible = False
            if self._showing_preview:
                self._showing_preview = False
                self.refresh_chart()
            return
        if live.chart is not None and live.display is not None and live.seq != self._drawn_preview:
            frame = dict(live.display)
            frame["bands"] = dict(xs=[], ys=[], colour=[], label=[])   # bands are those of the case in effect
            frame["key"] = [k for k in frame["key"] if k[1] != "bands"]
            self._apply_frame(frame)
            self._drawn_preview = live.seq
            self._showing_preview = True
            self.refresh_point()
        text = live_label_text(live)
        for log, label in self._live_labels.items():   # only the shown figure's (a hidden one is laid out again)
            if log == self.log_axes:
                label.update(text=text, visible=True)
            elif label.visible:
                label.visible = False
        status = live_html(live, s.doc.settings)
        if self.live_status.value != status:
            self.live_status.value = status
        set_shown(self.live_status, True)

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
        had = (bool(self.src_box.data["left"]), bool(self.src_box_frame.data["x"]))
        if box:
            x0, y0 = self._to_display(box[0], box[2])
            x1, y1 = self._to_display(box[1], box[3])
            drawn = dict(left=[x0], right=[x1], bottom=[y0], top=[y1])
            small = min(self._frame_share(x0, x1, 0), self._frame_share(y0, y1, 1)) * _FRAME_PX < BOX_MIN_PX
            frame = dict(x=[x], y=[y]) if small else dict(x=[], y=[])
        else:
            drawn, frame = dict(left=[], right=[], bottom=[], top=[]), dict(x=[], y=[])
        for src, data in ((self.src_box, drawn), (self.src_box_frame, frame)):
            if {k: list(v) for k, v in src.data.items()} != data:     # unchanged data is not sent again
                src.data = data
        if had != (bool(self.src_box.data["left"]), bool(self.src_box_frame.data["x"])):
            self._show_legends()
        self.readout = self._readout_text(s.ql, s.qg, moving=False)

    def _frame_share(self, a: float, b: float, axis: int) -> float:
        """Share of the plot frame that the span a..b takes on ``axis`` (0: x, 1: y)."""
        lo, hi = self._view.x_range if axis == 0 else self._view.y_range
        try:
            if self._view.log_axes:
                return abs(math.log10(b / a)) / abs(math.log10(hi / lo))
            return abs(b - a) / abs(hi - lo)
        except (ValueError, ZeroDivisionError):
            return 0.0

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
        text = (f"<b>{html.escape(lead)}:</b> Q_L = {convert(ql, 'flow', st.liquid_flow_unit):.4g} "
                f"{html.escape(st.liquid_flow_unit)}, Q_G = {convert(qg, 'flow', st.gas_flow_unit):.4g} "
                f"{html.escape(st.gas_flow_unit)} → <b>{html.escape(regime)}</b>")
        typed = "" if moving else self._standard_gas_text()
        if typed:        # the field keeps the standard volume typed; say why the readout's gas flow differs
            f = self.session.doc.case.fluid
            text += (f"<br><span class='standard-flow-note'>Q_G typed as {html.escape(typed)} (standard volume), "
                     f"shown at the local {f.temperature - 273.15:.4g} degC and {f.pressure / 1e3:.4g} kPa</span>")
        return text

    def _standard_gas_text(self) -> str:
        """The operating point's gas flow as typed when it is in a standard-volume unit (sccm, slpm...), else ''."""
        from lowgmap.app.files.units import is_standard_flow

        try:
            typed = str(self.session.data["operating_point"]["gas_flow"]).strip()
        except (KeyError, TypeError):
            return ""
        return typed if is_standard_flow(typed) else ""

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
    def show_test_points(self, points, agreement=None):
        """Draw test points: a fixed marker per platform class, the fill of the observed regime (by name),
        a thick red outline where the chart disagrees; each marker, fill and the outline in the key.

        ``agreement``: the study's :class:`lowgmap.physics.studies.agreement.Agreement` of these points
        (per point: the chart's regime and whether it agrees). A label that is not a chart regime is
        drawn white with a grey outline (not compared).
        """
        if points is None or len(points) == 0 or agreement is None:
            self.src_tests.data = {k: [] for k in self.src_tests.data}
            self._test_items = []
            self._show_legends()
            return
        x, y = self._view.to_display(points["ql_m3_s"].to_numpy(), points["qg_m3_s"].to_numpy())
        checks = agreement.points
        fills = self._view.regime_styles
        platforms = points["platform"].fillna("").astype(str).tolist() if "platform" in points else [""] * len(checks)
        markers = [platform_marker(p) for p in platforms]
        obs = [c.observed for c in checks]
        agrees = [c.agrees for c in checks]
        self.src_tests.data = dict(
            x=list(np.asarray(x, float)), y=list(np.asarray(y, float)), observed=[c.label or c.observed for c in checks],
            predicted=[c.predicted for c in checks], platform=platforms, test_id=[c.test_id for c in checks],
            marker=[m.bokeh for m in markers],
            fill=[fills[o][0] if o in fills else "#ffffff" for o in obs],
            line=[DISAGREE_COLOUR if a is False else ("#222222" if a else "#777777") for a in agrees],
            width=[3.0 if a is False else 1.0 for a in agrees], agree=[a is True for a in agrees])
        items, seen = [], set()
        for i, m in enumerate(markers):
            if ("m", m.label) not in seen:
                seen.add(("m", m.label))
                items.append((f"marker: {m.label}", i))
        for i, o in enumerate(obs):
            if o in fills and ("f", o) not in seen:
                seen.add(("f", o))
                items.append((f"fill: observed {o}", i))
        if any(a is False for a in agrees):
            items.append(("red outline: chart disagrees", agrees.index(False)))
        if any(a is None and o for a, o in zip(agrees, obs)):
            items.append(("grey outline: label not a chart regime",
                          next(i for i, (a, o) in enumerate(zip(agrees, obs)) if a is None and o)))
        self._test_items = items
        self._show_legends()

    def __panel__(self):
        return self._layout


def live_label_text(live) -> str:
    """The label drawn in the plot during a preview: the value drawn, the operating point's regime and its margin
    at preview resolution (marked so: the value released is computed at full resolution)."""
    from lowgmap.app.formatting import format_percent

    what = f"{live.label} {live.text}"
    if live.problem:
        return f"{what}: no chart"
    if live.chart is None:
        return f"{what}: computing…"
    if not live.regime:
        return f"{what}: no regimes"
    m = live.margins.symmetric_margin if live.margins is not None else None
    margin = f"±{format_percent(m)}" if m is not None else "margin not available"
    # two lines, so that the longest regime names fit a 600-pixel plot
    return f"{what} (preview)\noperating point in {live.regime}, {margin}"


def live_html(live, settings=None) -> str:
    """The status line above the chart during a preview; it changes only with the phase of the drag (dragging,
    applying, a value with no chart), so it does not make the page lay out again at every frame."""
    label = html.escape(live.label)
    if live.problem:
        return (f"<div class='live-status problem'>No chart for {label} {html.escape(live.text)}: "
                f"{html.escape(live.problem)}</div>")
    if live.released:
        return f"<div class='live-status'>Applying {label} {html.escape(live.text)}…</div>"
    return (f"<div class='live-status'>Preview while {label} is dragged: the chart, its regions and the label "
            "in the plot follow the slider; release to apply.</div>")


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
