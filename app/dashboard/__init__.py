"""The lowgmap browser dashboard (panel + param + bokeh).

:func:`create_app` is the factory served by ``lowgmap serve``: it builds a fresh session state and
fresh views for every browser session, so two users never see each other's changes. Only immutable
presets (the default case path) and the shared pool of worker threads
(:mod:`lowgmap.app.dashboard.background`) live at module level.

Serving (:func:`serve`):

* **No request blocks the server.** Chart builds, margins, test-point parsing, the robust point,
  calibrations and exports run on worker threads; results come back on each session's own thread.
* **Uploads are bounded before the transport is.** Files travel in chunks of
  :data:`~lowgmap.app.dashboard.uploads.CHUNK_BYTES`; the websocket accepts messages up to
  :data:`~lowgmap.app.dashboard.uploads.WEBSOCKET_MAX_MESSAGE_BYTES`; files above
  :data:`~lowgmap.app.dashboard.uploads.UPLOAD_MAX_BYTES` are refused with a message and the
  session goes on.
* **Host check.** Only the host names and port the server was started for are answered
  (:mod:`lowgmap.app.dashboard.hosts`); the same list is the allowed websocket origins.
* **Memory returns.** A closed browser session is discarded after :data:`SESSION_LIFETIME_MS`
  without a connection; its state drops every reference on the way out (``on_session_destroyed``).

The page (:func:`create_app`) fits a 1280 x 800 window without horizontal scrolling: the case inputs in
the side bar, the chart beside a narrow column with the verdict and the operating point, the margin
table, the test points and the downloads below at full width. Every control has an accessible name
(bokeh's checkbox, slider handles and spinner buttons draw none: the page gives them their widget's
label). ``?sample=NAME`` in the address opens a bundled sample case.

Live geometry: the geometry inputs and the gravity level have sliders beside their typed fields; while one
is dragged the chart morphs (new data in the existing sources, prepared on a worker thread, the latest
value only) and a label in the plot gives the operating point's regime and margin on the chart drawn; on
release the value is applied as if typed (:mod:`lowgmap.app.dashboard.inputs`,
:meth:`lowgmap.app.dashboard.state.Session.preview`). Above the chart: the bands of the lines and the
full solves (exact) switches; the worst-case margin over the bands is computed in the background and
shown under the margin table.
"""
from __future__ import annotations

import html
import logging
import weakref
from pathlib import Path

import panel as pn

from lowgmap.app import CAUTION, __version__
from lowgmap.app.dashboard.display import HIDDEN, set_shown

from lowgmap.app.files.casefile import load_case, sample_case_path

__all__ = ["create_app", "serve", "SESSION_LIFETIME_MS", "SESSION_CHECK_MS"]

#: A session without a browser connection is discarded after this time [ms] (the gap between a
#: page load and its websocket connecting is well below it).
SESSION_LIFETIME_MS = 10_000
#: How often the server looks for such sessions [ms].
SESSION_CHECK_MS = 2_000

_LOG = logging.getLogger("lowgmap.dashboard")

#: document -> function showing an unexpected error of that session's callbacks (weak: no leak)
_ERROR_SINKS: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def _callback_error(exc: BaseException) -> None:
    """panel's exception handler: show an error of a callback in its own session's page."""
    _LOG.error("dashboard callback failed", exc_info=(type(exc), exc, exc.__traceback__))
    doc = pn.state.curdoc
    sink = _ERROR_SINKS.get(doc) if doc is not None else None
    if sink is not None:
        sink(exc)


def _requested_case(default: Path | None):
    """The case of a new session: ``?sample=NAME`` in the address opens a bundled sample case by name
    (only bundled samples: never a path on the server); otherwise the case the server was started with."""
    from lowgmap.app.files.samples import sample_cases

    args = getattr(pn.state, "session_args", None) or {}
    wanted = args.get("sample") if hasattr(args, "get") else None
    if wanted:
        name = wanted[0].decode("utf-8", "replace") if isinstance(wanted[0], bytes) else str(wanted[0])
        if name in sample_cases():
            return sample_case_path(name)
    return default or sample_case_path()


#: Page layout: the chart takes what the side columns leave; nothing is wider than the window.
_LAYOUT_CSS = """
.lowgmap-caution {background: #fff3cd; border: 2px solid #8B0000; color: #8B0000; font-weight: bold;
                  padding: 3px 8px; border-radius: 4px; font-size: 12px;}
.lowgmap-warnings {background: #fff3cd; border: 1px solid #f0d68a; color: #664d03; border-radius: 4px;
                   margin: 0; padding: 10px 12px 10px 30px; font-size: 13px; line-height: 1.45;}
"""

#: Bokeh writes the text of a view's own style sheets each time it paints it (the position of every glyph and
#: annotation view, bokeh 3.9 ``InlineStyleSheet._update``), even when the text is the same; each write makes the
#: page's styles stale, and the next colour bokeh reads from the computed style (a glyph's fill, a label's text)
#: makes the browser work the styles of the page out again: a hundred times or more per frame of a slider drag.
#: Writing only a changed text leaves the styles as they are (same-hour trace of a wedge drag: style
#: recalculations 283 -> 107, their time 275 -> 127 ms, script time 732 -> 520 ms).
_STYLE_WRITE_JS = """
function ownerOf(obj, name) {
  let p = obj ? Object.getPrototypeOf(obj) : null;
  while (p && !Object.prototype.hasOwnProperty.call(p, name)) p = Object.getPrototypeOf(p);
  return p;
}
for (const v of Object.values(window.Bokeh ? Bokeh.index : {})) {
  const proto = ownerOf(v.style, "_update");
  if (proto && !proto._lowgmapSameTextKept) {
    const write = proto._update;
    proto._update = function(css) { if (this.el.textContent !== css) write.call(this, css); };
    proto._lowgmapSameTextKept = true;
  }
}
"""

#: Accessible names for the controls of the page whose widgets draw none themselves (bokeh's checkbox,
#: slider handle and spinner buttons, the search box of a multiple choice): each gets an ``aria-label``
#: from its widget's own label. Runs when the page is ready and whenever a part of it is drawn anew.
_LABEL_JS = """
function nameOf(view) {
  for (const k of ["label", "title"]) {
    const t = view.model[k];
    if (typeof t === "string" && t.trim()) return t.trim();
  }
  return "";
}
function unnamed(el) {
  const a = el.getAttribute("aria-label");
  if (a && a !== "null" && a !== "undefined" && a.trim()) return false;
  if (el.getAttribute("aria-labelledby")) return false;
  if (el.labels && el.labels.length && Array.from(el.labels).some(l => l.textContent.trim())) return false;
  if ((el.tagName === "BUTTON" || el.getAttribute("role") === "button") && el.textContent.trim()) return false;
  return true;
}
function labelView(view, seen) {
  if (!view || seen.has(view)) return;
  seen.add(view);
  const root = view.shadow_el;
  if (root && view.model) {
    const base = nameOf(view);
    root.querySelectorAll("input, select, textarea, button, [role=slider], [role=combobox], [role=textbox]").forEach(el => {
      if (!unnamed(el)) return;
      let text = base || el.getAttribute("title") || el.getAttribute("placeholder") || "";
      if (el.classList.contains("bk-spin-btn-up")) text = "increase " + text;
      else if (el.classList.contains("bk-spin-btn-down")) text = "decrease " + text;
      else if (el.getAttribute("role") === "slider") text = text + " (slider)";
      if (text.trim()) el.setAttribute("aria-label", text.trim());
    });
  }
  let kids = [];
  try { kids = Array.from(view.child_views || []); } catch (e) {}
  for (const c of kids) labelView(c, seen);
}
function labelAll() {
  if (!window.Bokeh) return;
  const seen = new Set();
  for (const v of Object.values(Bokeh.index)) labelView(v, seen);
}
labelAll();
if (!window._lowgmapLabeller) {
  window._lowgmapLabeller = new MutationObserver(() => {
    if (window._lowgmapLabelPending) return;
    window._lowgmapLabelPending = true;
    requestAnimationFrame(() => { window._lowgmapLabelPending = false; labelAll(); });
  });
  window._lowgmapLabeller.observe(document.body, {subtree: true, childList: true, attributes: true,
                                                  attributeFilter: ["class", "style"]});
}
"""


def create_app(case_path: str | Path | None = None):
    """Build one session's dashboard for the case at ``case_path`` (default: the bundled tube case).

    ``?sample=NAME`` in the page address opens the bundled sample case NAME instead.
    """
    from lowgmap.app.dashboard.background import DocumentRunner, InlineRunner
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.design_tab import DesignTab
    from lowgmap.app.dashboard.gravity_tab import GravityTab
    from lowgmap.app.dashboard.inputs import SetupPanel
    from lowgmap.app.dashboard.panels import (ExportPanel, MarginTable, PointPanel, TestPointsPanel, VerdictPanel,
                                              Working)
    from lowgmap.app.dashboard.state import Session

    doc = load_case(_requested_case(Path(case_path) if case_path else None))
    bokeh_doc = pn.state.curdoc if pn.state.curdoc is not None and pn.state.curdoc.session_context else None
    runner = DocumentRunner(bokeh_doc) if bokeh_doc is not None else InlineRunner()
    session = Session(doc, runner=runner)
    chart = ChartPane(session)
    setup = SetupPanel(session, chart)
    point = PointPanel(session, chart)
    verdict = VerdictPanel(session)
    margins = MarginTable(session)
    points = TestPointsPanel(session, chart)
    export = ExportPanel(session, points)
    # a text widget shown and hidden by style: its words change with most edits, and a pane's change (or a
    # change of `visible`) lays the whole page out again (display.py)
    warnings = pn.widgets.StaticText(value="", sizing_mode="stretch_width", css_classes=["chart-warnings"],
                                     stylesheets=[_LAYOUT_CSS], styles=dict(HIDDEN), margin=(6, 10))
    activity = Working("session-activity")
    chart.add_status(activity)
    unexpected = pn.pane.Alert("", alert_type="danger", visible=False, sizing_mode="stretch_width",
                               css_classes=["unexpected-problem"])

    def show_warnings(*_):
        if session.closed:
            return
        w = session.chart.warnings
        if w:
            text = "".join(f"<li>{html.escape(x)}</li>" for x in w)
            text = f"<ul class='lowgmap-warnings'>{text}</ul>"
            if warnings.value != text:
                warnings.value = text
        set_shown(warnings, bool(w))

    def show_activity(*_):
        activity.show(session.activity if session.busy else "")

    show_warnings()
    session.param.watch(show_warnings, ["revision_counter"])
    session.param.watch(show_activity, ["busy", "activity"])
    caution = pn.pane.HTML(f"<div class='lowgmap-caution'>CAUTION: {CAUTION}</div>", sizing_mode="stretch_width",
                           stylesheets=[_LAYOUT_CSS], css_classes=["caution"], margin=(2, 10))
    invented = (pn.pane.Markdown("*This sample case is an invented scenario for demonstration.*")
                if doc.invented else pn.pane.Markdown(""))
    design_tab = DesignTab(session)
    # the chart takes the width the point column leaves; the margin table and test points run the full
    # width below it, so nothing is wider than a 1280 px window
    chart_tab = pn.Column(
        pn.Row(pn.Column(chart, warnings, sizing_mode="stretch_width", min_width=360),
               pn.Column(verdict, point, width=330, css_classes=["point-column"]), sizing_mode="stretch_width"),
        margins,
        pn.Row(pn.Column(points, sizing_mode="stretch_width", min_width=300),
               pn.Column(export, width=260), sizing_mode="stretch_width"),
        name="Regime chart", sizing_mode="stretch_width")
    design = pn.Column(design_tab, name="Design map", sizing_mode="stretch_width")
    gravity = pn.Column(GravityTab(session), name="Two gravity levels", sizing_mode="stretch_width")
    tabs = pn.Tabs(chart_tab, design, gravity, sizing_mode="stretch_width", css_classes=["main-tabs"])
    # the design map's worker processes start while the person sets up the map
    tabs.param.watch(lambda e: design_tab.prepare() if e.new == 1 else None, "active")
    main = pn.Column(caution, unexpected, tabs, sizing_mode="stretch_width")
    template = pn.template.BootstrapTemplate(
        title=f"lowgmap {__version__} — low-gravity regime charts", sidebar=[invented, setup], main=[main],
        sidebar_width=300, header_background="#1f3b57",
        # no page-wide busy spinner: panel flips it around every event from the page (a dragged slider sends
        # about 20 a second), each flip costing the server about 8 ms and the page a relayout of its header;
        # the "working" line under the chart says when edits are being worked on
        busy_indicator=None)
    template.lowgmap_session = session  # for tests and debugging: the session's state object

    if bokeh_doc is not None:
        from bokeh.models import CustomJS

        bokeh_doc.js_on_event("document_ready", CustomJS(code=_STYLE_WRITE_JS))
        bokeh_doc.js_on_event("document_ready", CustomJS(code=_LABEL_JS))

        def show_unexpected(exc):
            unexpected.object = (f"Something went wrong while handling your last action ({type(exc).__name__}: "
                                 f"{html.escape(str(exc))}). The values shown are the ones in effect; please "
                                 "report this as a bug.")
            unexpected.visible = True
        _ERROR_SINKS[bokeh_doc] = show_unexpected

        def destroyed(session_context):
            # drop every reference the session holds: queued work, results to come, files, the study
            session.close()
            points.close()
            export.close()
            template.lowgmap_session = None
            _ERROR_SINKS.pop(bokeh_doc, None)
        pn.state.on_session_destroyed(destroyed)
    return template


def serve(case_path=None, port: int = 5006, address: str = "127.0.0.1", show: bool = False, *,
          allow_hosts=(), start: bool = True, **kwargs):
    """Start the dashboard server (blocking unless ``start=False``). Each browser session gets its own app.

    Parameters
    ----------
    case_path : path, optional   case file (default: the bundled tube sample)
    port : int                   port to listen on
    address : str                address to listen on (default: loopback only)
    show : bool                  open a browser window
    allow_hosts : iterable of str   further host names (``name`` or ``name:port``) to answer to,
                                 e.g. behind a proxy; see :func:`lowgmap.app.dashboard.hosts.allowed_hosts`
    start : bool                 run the server (blocking); False returns it unstarted (tests)
    kwargs                       passed to :func:`panel.serve` (e.g. ``extra_patterns``)

    Returns
    -------
    the bokeh server (when ``start`` is False, or after it stops)
    """
    from lowgmap.app.dashboard.hosts import allowed_hosts, install_host_check, websocket_origins
    from lowgmap.app.dashboard.uploads import WEBSOCKET_MAX_MESSAGE_BYTES

    case = Path(case_path) if case_path else sample_case_path()
    load_case(case)  # fail early, with all problems listed, before the server starts

    def factory():
        return create_app(case)

    hosts = allowed_hosts(address, port, allow_hosts)
    pn.config.exception_handler = _callback_error
    opts = dict(websocket_max_message_size=WEBSOCKET_MAX_MESSAGE_BYTES,
                unused_session_lifetime_milliseconds=SESSION_LIFETIME_MS,
                check_unused_sessions_milliseconds=SESSION_CHECK_MS)
    opts.update(kwargs)
    server = pn.serve({"/": factory}, port=port, address=address, show=False, start=False, verbose=False,
                      title="lowgmap", websocket_origin=websocket_origins(hosts), **opts)
    install_host_check(server._tornado, hosts, port)
    if start:
        server.start()
        if show:
            server.io_loop.add_callback(server.show, "/")
        try:
            server.io_loop.start()
        except KeyboardInterrupt:
            pass
    return server
