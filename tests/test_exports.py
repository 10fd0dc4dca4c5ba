"""Exports (chart files, review report) take a Study: one chart, never rebuilt, the same numbers as the screen.

Wiring tests: each check value is what the physics functions give on the same chart (point_margins,
agreement) or what the other input path exports; none is a physical number of our own.
"""
import ast
import dataclasses
import re
import sys
from pathlib import Path

import pytest

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.app.files.testpoints import read_test_points
from lowgmap.app.outputs.exports import chart_bytes, report_html, write_chart
from lowgmap.app.outputs.report import document_study
from lowgmap.app.outputs.tables import margin_table_html
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.margins import point_margins
from lowgmap.physics.studies.agreement import agreement

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def doc():
    return load_case(sample_case_path("condensate_line"))


@pytest.fixture(scope="module")
def study(doc):
    return document_study(doc)


def worst_case_chart() -> bool:
    """True when Chart.build is called by the worst-case search of the bands (``chart_with_constants``): a chart
    with the worst constants, whose lines differ from the study's, built to confirm the worst-case margin. That is
    not a rebuild of the study's chart."""
    f = sys._getframe(1)
    while f is not None:
        if f.f_code.co_name == "chart_with_constants" and f.f_globals.get("__name__", "").endswith("chart.bands"):
            return True
        f = f.f_back
    return False


@pytest.fixture
def no_rebuild(monkeypatch):
    """Make any chart build fail: a test using this proves the code path reuses the study's chart."""
    build = Chart.build

    def refuse(*args, **kwargs):
        if worst_case_chart():
            return build(*args, **kwargs)
        raise AssertionError("Chart.build was called: the export rebuilt the chart")
    monkeypatch.setattr(Chart, "build", refuse)


@pytest.fixture
def build_count(monkeypatch):
    calls = []
    build = Chart.build

    def counting(*args, **kwargs):
        if not worst_case_chart():
            calls.append(1)
        return build(*args, **kwargs)
    monkeypatch.setattr(Chart, "build", counting)
    return calls


def test_exports_from_a_study_never_build_the_chart(study, doc, tmp_path, no_rebuild):
    # catches an export that rebuilds the chart from the case instead of using the session's study
    svg = chart_bytes(study, "svg", settings=doc.settings)
    assert b"<svg" in svg
    page = report_html(study, settings=doc.settings)
    assert "margin-table" in page
    chart, margins = write_chart(study, tmp_path / "c.pdf", settings=doc.settings)
    assert chart is study.chart and margins is study.margins
    assert (tmp_path / "c.pdf").read_bytes()[:5] == b"%PDF-"  # PDF header (ISO 32000-1, 7.5.2)


def test_exports_from_a_document_build_the_chart_once(doc, tmp_path, build_count):
    # catches the report building the chart once for its table and again for its embedded chart
    report_html(doc)
    assert len(build_count) == 1
    write_chart(doc, tmp_path / "c.svg")
    assert len(build_count) == 2
    assert not list(tmp_path.glob(".*.tmp"))  # the atomic writer left no temporary file


def test_document_and_study_paths_export_the_same_bytes(doc, study):
    # catches the two input paths drifting apart (different title block, point or settings); the study
    # path is given the case file it came from, whose flows are shown as typed ("400 sccm (...)")
    assert chart_bytes(doc, "svg") == chart_bytes(study, "svg", settings=doc.settings, invented=doc.invented,
                                                  document=doc)


def test_export_shows_the_studys_point_and_the_required_margin_set(doc, study, no_rebuild):
    # catches an export that shows the case file's operating point or required margin instead of the
    # point and margin the person is looking at
    moved = study.with_point(2e-5, 3e-5)
    settings = dataclasses.replace(doc.settings, required_margin=0.5)
    page = report_html(moved, settings=settings)
    pm = point_margins(study.chart, 2e-5, 3e-5)
    assert margin_table_html(pm, 0.5) in page
    assert "required ±50 %" in page
    assert f"data-ql='{doc.case.operating_point.ql:.12g}'" not in page


def test_report_test_points_are_the_agreement_result(tmp_path):
    # catches a report that counts agreement its own way instead of using the study's agreement
    d = load_case(sample_case_path("drop_tower_silicone"))
    f = d.case.fluid
    tps = read_test_points(ROOT / "sample_cases" / "drop_tower_points.csv", pressure=f.pressure,
                           temperature=f.temperature)
    page = report_html(d, test_points=tps.points)
    expected = agreement(Chart.build(d.case), tps.points).confusion_all
    m = re.search(r"class='agreement' data-agree='(\d+)' data-total='(\d+)'", page)
    assert m is not None
    assert (int(m.group(1)), int(m.group(2))) == (expected.agreeing, expected.compared)
    assert expected.compared > 0


def test_dashboard_export_panel_passes_the_sessions_study(doc, monkeypatch):
    # catches the dashboard re-reading the case and rebuilding the chart for each download
    from lowgmap.app.dashboard.panels import ExportPanel
    from lowgmap.app.dashboard.state import Session

    session = Session(doc)
    session.move_point(2e-5, 3e-5)
    panel = ExportPanel(session)

    build = Chart.build

    def refuse(*args, **kwargs):
        if worst_case_chart():
            return build(*args, **kwargs)
        raise AssertionError("Chart.build was called: the export rebuilt the chart")
    monkeypatch.setattr(Chart, "build", refuse)
    assert session.study.chart is session.chart and session.study.margins is session.margins
    page = panel._report().getvalue().decode("utf-8")
    assert margin_table_html(session.margins, session.required_margin) in page
    assert panel._chart("svg").getvalue().lstrip().startswith(b"<?xml")


def test_export_refuses_other_inputs():
    with pytest.raises(TypeError, match="Study or a CaseDocument"):
        chart_bytes("condensate_line.toml", "svg")


def test_outputs_never_import_the_dashboard_or_the_cli():
    # catches a layer reaching sideways: exports must work without panel/bokeh and without the CLI
    bad = []
    for path in sorted((ROOT / "app" / "outputs").glob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names = [a.name for a in node.names] if isinstance(node, ast.Import) else \
                [node.module or ""] if isinstance(node, ast.ImportFrom) else []
            bad += [f"{path.name}: {n}" for n in names
                    if n.startswith(("lowgmap.app.dashboard", "lowgmap.app.cli"))]
    assert bad == []
