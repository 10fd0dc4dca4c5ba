"""The lowgmap browser dashboard (panel + param + bokeh).

:func:`create_app` is the factory served by ``lowgmap serve``: it builds a fresh session state and
fresh views for every browser session, so two users never see each other's changes. Only immutable
presets (the default case path) live at module level.
"""
from __future__ import annotations

from pathlib import Path

import panel as pn

from lowgmap.app import CAUTION, __version__

from lowgmap.app.files.casefile import load_case, sample_case_path

__all__ = ["create_app", "serve"]

_CSS = """
.lowgmap-caution {background: #fff3cd; border: 2px solid #8B0000; color: #8B0000; font-weight: bold;
                  padding: 4px 10px; border-radius: 4px; font-size: 13px;}
"""


def create_app(case_path: str | Path | None = None):
    """Build one session's dashboard for the case at ``case_path`` (default: the bundled tube case)."""
    from lowgmap.app.dashboard.chartpane import ChartPane
    from lowgmap.app.dashboard.inputs import SetupPanel
    from lowgmap.app.dashboard.panels import ExportPanel, MarginTable, PointPanel, TestPointsPanel
    from lowgmap.app.dashboard.state import Session

    doc = load_case(case_path or sample_case_path())
    session = Session(doc)
    chart = ChartPane(session)
    setup = SetupPanel(session, chart)
    point = PointPanel(session, chart)
    margins = MarginTable(session)
    points = TestPointsPanel(session, chart)
    export = ExportPanel(session, points)
    warnings = pn.pane.Alert("", alert_type="warning", sizing_mode="stretch_width", css_classes=["chart-warnings"])

    def show_warnings(*_):
        w = session.chart.warnings
        warnings.object = "\n".join(f"- {x}" for x in w)
        warnings.visible = bool(w)

    show_warnings()
    session.param.watch(show_warnings, ["revision_counter"])
    caution = pn.pane.HTML(f"<div class='lowgmap-caution'>CAUTION: {CAUTION}</div>", sizing_mode="stretch_width",
                           stylesheets=[_CSS], css_classes=["caution"])
    invented = (pn.pane.Markdown("*This sample case is an invented scenario for demonstration.*")
                if doc.invented else pn.pane.Markdown(""))
    from lowgmap.app.dashboard.design_tab import DesignTab

    chart_tab = pn.Column(
        pn.Row(pn.Column(chart, warnings, sizing_mode="stretch_width", min_width=600),
               pn.Column(point, margins, width=500), sizing_mode="stretch_width"),
        pn.Row(pn.Column(points, sizing_mode="stretch_width"), pn.Column(export, width=300),
               sizing_mode="stretch_width"),
        name="Regime chart", sizing_mode="stretch_width")
    design = pn.Column(DesignTab(session), name="Design map", sizing_mode="stretch_width")
    main = pn.Column(caution, pn.Tabs(chart_tab, design, sizing_mode="stretch_width", css_classes=["main-tabs"]),
                     sizing_mode="stretch_width")
    template = pn.template.BootstrapTemplate(
        title=f"lowgmap {__version__} — low-gravity regime charts", sidebar=[invented, setup], main=[main],
        sidebar_width=380, header_background="#1f3b57")
    template.lowgmap_session = session  # for tests and debugging: the session's state object
    return template


def serve(case_path=None, port: int = 5006, address: str = "127.0.0.1", show: bool = False, **kwargs):
    """Start the dashboard server (blocking). Each browser session gets its own app."""
    case = Path(case_path) if case_path else sample_case_path()
    load_case(case)  # fail early, with all problems listed, before the server starts

    def factory():
        return create_app(case)

    origins = [f"{address}:{port}", f"localhost:{port}", f"127.0.0.1:{port}"]
    return pn.serve({"/": factory}, port=port, address=address, show=show, title="lowgmap",
                    websocket_origin=origins, **kwargs)
