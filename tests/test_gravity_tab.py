"""Gravity tab of the dashboard without a browser: the session's case at two gravity levels.

Wiring checks, not physics: the numbers come from the chart, margin and gravity-pair modules, which have
their own tests against published sources. Here the tab must show what ``lowgmap margin --gravity G
--nominal-only --json`` gives at each level, place the test points by level, keep its figure when a field
is wrong, and take the figure off when the case changes. Sessions run their work at once (inline runner);
the tab's own worker thread is awaited with ``asyncio.run``.
"""
from __future__ import annotations

import asyncio
import concurrent.futures
import contextlib
import io
import json

import numpy as np
import pytest

from lowgmap.app.dashboard.gravity_tab import SECOND_FIELD, GravityTab, default_second_level
from lowgmap.app.dashboard.state import Session
from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.app.files.testpoints import read_test_points
from lowgmap.app.formatting import format_percent
from lowgmap.physics.case import STANDARD_GRAVITY

CASE = sample_case_path("ground_test_loop")
POINTS = sample_case_path("ground_loop_points.csv")
DPI = 40          # a small picture: the wiring is the same at any resolution


def _await(coro):
    """Run the tab's coroutine to its end on a loop of its own, in a worker thread: the test process may
    already run an event loop in this thread (the browser tests' session-wide playwright driver)."""
    with concurrent.futures.ThreadPoolExecutor(max_workers=1) as pool:
        return pool.submit(asyncio.run, coro).result()


def _session(with_points: bool = False) -> Session:
    doc = load_case(CASE)
    s = Session(doc)                                    # inline runner: edits are applied at once
    if with_points:
        f = doc.case.fluid
        s.set_test_points(read_test_points(POINTS, pressure=f.pressure, temperature=f.temperature))
    return s


def _cli_margin(gravity: str) -> dict:
    """``lowgmap margin CASE --gravity G --nominal-only --json`` run in-process."""
    from lowgmap.app.cli import main

    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        code = main(["margin", str(CASE), "--gravity", gravity, "--nominal-only", "--json"])
    assert code == 0
    return json.loads(out.getvalue())


@pytest.fixture(scope="module")
def plain():
    """A session of the sample case that the tests only read (its tabs do not edit it)."""
    return _session()


@pytest.fixture(scope="module")
def drawn():
    """A session with the sample test points and its tab drawn at "1e-6 g0" through the Draw button's path."""
    session = _session(with_points=True)
    tab = GravityTab(session, dpi=DPI)
    tab.level.value = "1e-6 g0"
    _await(tab._on_draw())
    return session, tab


def test_default_second_level_is_the_other_side(plain):
    # Bug caught: a ground-test case offered "ground" again (the pair would show the same chart twice).
    assert default_second_level(STANDARD_GRAVITY) == "1e-6 g0"
    assert default_second_level(1.62) == "1e-6 g0"            # lunar surface: still >= 0.01 g0
    assert default_second_level(1e-6 * STANDARD_GRAVITY) == "ground"
    tab = GravityTab(plain, dpi=DPI)
    assert tab.level.value == "1e-6 g0"                       # the sample is a 1-g ground loop


def test_pair_is_a_png_with_both_levels_named(drawn):
    # Bug caught: the worker's result not shown (empty pane), the download holding other bytes than the
    # picture shown, or captions that do not say which level each chart is at.
    session, tab = drawn
    assert tab.view is not None and not tab.stale
    png = tab.image.object
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    from matplotlib.image import imread

    img = imread(io.BytesIO(png), format="png")
    assert img.shape[1] > img.shape[0] > 100                   # side by side: wider than tall
    assert tab._png().getvalue() == png and not tab.download.disabled
    captions = [p.caption for p in tab.view.pair.panels]
    assert captions[0].startswith("Left") and "1 g0" in captions[0]
    assert captions[1].startswith("Right") and "1e-06 g0" in captions[1]
    shown = tab.captions.object
    assert "1 g0" in shown and "1e-06 g0" in shown
    assert "Hand-over" in shown                                 # the closed tube's hand-over sentence per panel


def test_margins_equal_the_margin_command_at_each_level(drawn):
    # Bug caught: the tab recomputing margins its own way (another chart, the session's point instead of the
    # case's, the left case at the second level) so that the dashboard and `lowgmap margin` disagree.
    session, tab = drawn
    rows = tab.view.margins()
    for row, gravity in zip(rows, ("ground", "1e-6 g0")):
        cli = _cli_margin(gravity)
        assert row["regime"] == cli["regime"]
        assert row["symmetric_margin"] == pytest.approx(cli["symmetric_margin"], rel=1e-12)
        assert f"±{format_percent(cli['symmetric_margin'])}" in tab.captions.object
    assert rows[0]["g"] == pytest.approx(STANDARD_GRAVITY)
    assert rows[1]["g"] == pytest.approx(1e-6 * STANDARD_GRAVITY)


def test_test_points_go_to_the_chart_of_their_own_level(drawn):
    # Bug caught: the session's test points dropped (not passed to the pair) or all drawn on both charts.
    session, tab = drawn
    table = session.test_points.points
    left, right = (p.points for p in tab.view.pair.panels)
    assert left is not None and right is not None
    assert len(left) + len(right) + tab.view.pair.unplaced == len(table)
    # the sample file: ground-loop points (GL-) at 1 g0, drop-tube points (DT-) at 1e-6 g0
    assert set(left["test_id"].str[:3]) == {"GL-"} and set(right["test_id"].str[:3]) == {"DT-"}
    assert np.all(left["g_m_s2"].to_numpy() > 0.5 * STANDARD_GRAVITY)    # file gives 1 g0 for the ground loop
    assert np.all(~(right["g_m_s2"].to_numpy() > 0.5 * STANDARD_GRAVITY))


def test_bad_level_is_said_under_its_field_and_the_figure_stays(drawn):
    # Bug caught: a level that is not an acceleration dropping the figure shown, raising into the page,
    # or a message that does not say which field is wrong.
    session, tab = drawn
    before = tab.image.object
    tab.level.value = "12 parsecs"
    try:
        _await(tab._on_draw())
        assert tab.level_message.visible
        assert SECOND_FIELD in tab.level_message.object and "parsecs" in tab.level_message.object
        assert not tab.left_message.visible                    # the left field is not blamed
        assert tab.image.object is before and tab.view is not None and not tab.download.disabled
        tab.level.value = "-1 g0"                              # a number, but outside the accepted range
        assert tab.draw_sync() is None
        assert SECOND_FIELD in tab.level_message.object and "100 g0" in tab.level_message.object
    finally:
        tab.level.value = "1e-6 g0"
    assert tab.image.object is before


def test_named_level_select_fills_the_field(plain):
    # Bug caught: choosing a named level in the select not reaching the text field that is drawn from.
    tab = GravityTab(plain, dpi=DPI)
    tab.named.value = "lunar surface"
    assert tab.level.value == "lunar surface"
    tab.level.value = "0.5 g0"
    assert tab.named.value == ""
    left, right = tab.documents()
    assert right.case.g == pytest.approx(0.5 * STANDARD_GRAVITY) and left.case.g == pytest.approx(STANDARD_GRAVITY)


def test_case_change_takes_the_stale_figure_off(drawn, monkeypatch):
    # Bug caught: a pair drawn for the case as it was staying on screen (and in the download) after the
    # case was edited, or a pair still being drawn for the old case shown when it arrives.
    import lowgmap.app.dashboard.gravity_tab as module

    view = drawn[1].view                                   # a pair of this case (drawing it again costs seconds)
    session = _session()
    tab = GravityTab(session, dpi=DPI)
    tab._show(view)
    assert not tab.stale and tab.image.object is view.png
    assert session.edit({"conduit.length": "3 m"}, key="length", label="Conduit length")
    assert tab.stale and tab.view is None and tab.image.object is None and tab.download.disabled
    assert "Case changed: draw again" in tab.status.object

    tab._show(view)

    def drawn_while_edited(*args, **kwargs):               # the case changes while the worker draws
        session.edit({"conduit.length": "2.5 m"}, key="length", label="Conduit length")
        return object()                                    # for the case as it was: must never be shown

    monkeypatch.setattr(module, "draw_pair", drawn_while_edited)
    _await(tab._on_draw())
    assert tab.stale and tab.view is None and tab.image.object is None
    assert "Case changed: draw again" in tab.status.object
    assert not tab.running and not tab.draw_button.disabled


def test_moved_point_is_the_point_of_both_panels():
    # Bug caught: the pair drawn from the case as loaded (session.doc) and not as edited, so a point moved
    # on the chart is not the point of the pair.
    session = _session()
    tab = GravityTab(session, dpi=DPI)
    ql, qg = session.ql * 1.5, session.qg * 0.5
    session.move_point(ql, qg)
    left, right = tab.documents()
    for d in (left, right):
        assert d.case.operating_point.ql == pytest.approx(ql, rel=1e-5)
        assert d.case.operating_point.qg == pytest.approx(qg, rel=1e-5)


def test_every_control_has_a_name(plain):
    # Bug caught: a control without an accessible name (a screen reader says only "edit text" or "button").
    tab = GravityTab(plain, dpi=DPI)
    for w in (tab.level, tab.named, tab.left, tab.draw_button, tab.full_size):
        assert w.label.strip()
    assert tab.download.label.strip()
    tab.__panel__()                                          # the layout builds


def test_failed_draw_is_said_and_the_figure_stays(drawn, monkeypatch):
    # Bug caught: a chart that cannot be built at the second level ending as a traceback in the server log
    # with a spinner that never stops, or taking the figure shown with it.
    import lowgmap.app.dashboard.gravity_tab as module

    view = drawn[1].view
    tab = GravityTab(_session(), dpi=DPI)
    tab._show(view)

    def cannot_build(*args, **kwargs):
        raise ValueError("the chart cannot be built at this level")

    monkeypatch.setattr(module, "draw_pair", cannot_build)
    _await(tab._on_draw())
    assert tab.level_message.visible and tab.level_message.object.startswith(f"<p>{SECOND_FIELD}: ")
    assert "could not be drawn" in tab.status.object
    assert tab.view is view and tab.image.object is view.png
    assert not tab.running and not tab.draw_button.disabled and not tab.progress.visible
