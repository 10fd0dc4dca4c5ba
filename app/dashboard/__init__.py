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
"""
from __future__ import annotations

import html
import logging
import weakref
from pathlib import Path

import panel as pn

from lowgmap.app import CAUTION, __version__

from lowgmap.app.files.casefile import load_case, sample_case_path

__all__ = ["create_app", "serve", "SESSION_LIFETIME_MS", "SESSION_CHECK_MS"]

#: A session without a browser connection is discarded after this time [ms] (the gap between a
#: page load and its websocket connecting is well below it).
SESSION_LIFETIME_MS = 10_000
#: How often the server looks for such sessions [ms].
SESSION_CHECK_MS = 2_000

_LOG = logging.getLogger("lowgmap.dashboard")

_CSS = """
.lowgmap-caution {background: #fff3cd; border: 2px solid #8B0000; color: #8B0000; font-weight: bold;
                  padding: 4px 10px; border-radius: 4px; font-size: 13px;}
"""

#: document -> function showing an unexpected error of that session's callbacks (weak: no leak)
_ERROR_SINKS: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def _callback_error(exc: BaseException) -> None:
    """panel's exception handler: show an error of a callback in its own session's page."""
    _LOG.error("dashboard callback failed", exc_info=(type(exc), exc, exc.__traceback__))
    doc = pn.state.curdoc
    sink = _ERROR_SINKS.get(doc) if doc is not None else None
    if sink is not None:
        sink(exc)


def create_app(case_path: str | Path | None = None):
    """Build one session's dashboard for the case at ``case_path`` (default: the bundled tube case)."""
    from lowgmap.app.dashboard.background import DocumentRunner, InlineRunner
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.design_tab import DesignTab
    from lowgmap.app.dashboard.inputs import SetupPanel
    from lowgmap.app.dashboard.panels import ExportPanel, MarginTable, PointPanel, TestPointsPanel, Working
    from lowgmap.app.dashboard.state import Session

    doc = load_case(case_path or sample_case_path())
    bokeh_doc = pn.state.curdoc if pn.state.curdoc is not None and pn.state.curdoc.session_context else None
    runner = DocumentRunner(bokeh_doc) if bokeh_doc is not None else InlineRunner()
    session = Session(doc, runner=runner)
    chart = ChartPane(session)
    setup = SetupPanel(session, chart)
    point = PointPanel(session, chart)
    margins = MarginTable(session)
    points = TestPointsPanel(session, chart)
    export = ExportPanel(session, points)
    warnings = pn.pane.Alert("", alert_type="warning", sizing_mode="stretch_width", css_classes=["chart-warnings"])
    activity = Working("session-activity")
    unexpected = pn.pane.Alert("", alert_type="danger", visible=False, sizing_mode="stretch_width",
                               css_classes=["unexpected-problem"])

    def show_warnings(*_):
        if session.closed:
            return
        w = session.chart.warnings
        warnings.object = "\n".join(f"- {x}" for x in w)
        warnings.visible = bool(w)

    def show_activity(*_):
        activity.show(session.activity if session.busy else "")

    show_warnings()
    session.param.watch(show_warnings, ["revision_counter"])
    session.param.watch(show_activity, ["busy", "activity"])
    caution = pn.pane.HTML(f"<div class='lowgmap-caution'>CAUTION: {CAUTION}</div>", sizing_mode="stretch_width",
                           stylesheets=[_CSS], css_classes=["caution"])
    invented = (pn.pane.Markdown("*This sample case is an invented scenario for demonstration.*")
                if doc.invented else pn.pane.Markdown(""))
    design_tab = DesignTab(session)
    chart_tab = pn.Column(
        pn.Row(pn.Column(activity, chart, warnings, sizing_mode="stretch_width", min_width=600),
               pn.Column(point, margins, width=500), sizing_mode="stretch_width"),
        pn.Row(pn.Column(points, sizing_mode="stretch_width"), pn.Column(export, width=300),
               sizing_mode="stretch_width"),
        name="Regime chart", sizing_mode="stretch_width")
    design = pn.Column(design_tab, name="Design map", sizing_mode="stretch_width")
    main = pn.Column(caution, unexpected, pn.Tabs(chart_tab, design, sizing_mode="stretch_width",
                                                  css_classes=["main-tabs"]),
                     sizing_mode="stretch_width")
    template = pn.template.BootstrapTemplate(
        title=f"lowgmap {__version__} — low-gravity regime charts", sidebar=[invented, setup], main=[main],
        sidebar_width=380, header_background="#1f3b57")
    template.lowgmap_session = session  # for tests and debugging: the session's state object

    if bokeh_doc is not None:
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
