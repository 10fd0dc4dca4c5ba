"""The Study result: one chart shared by every view, margins and agreement from the physics functions.

These are wiring tests: every check value is the result of the physics function the study must
delegate to (point_margins, envelope_check, agreement) on the same chart, not a number of our own.
The test points below are invented inputs that only exercise the wiring; they are never check values.
"""
import dataclasses

import pytest

from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.margins import envelope_check, point_margins
from lowgmap.physics.examples import example_case
from lowgmap.physics.studies.agreement import ValidityCriteria, agreement
from lowgmap.physics.studies.study import Study, run_study

POINT = (1e-5, 1e-6)                              # m^3/s, inside the example chart's range
ENVELOPE = ((5e-6, 2e-5), (5e-7, 2e-6))          # m^3/s
# invented test points (inputs only): two labelled as the regimes they lie in, one not, one unknown label
POINTS = {"ql_m3_s": [1e-5, 1e-5, 1e-5, 1e-6], "qg_m3_s": [1e-6, 1e-3, 1e-6, 1e-6],
          "observed_regime": ["dispersed bubbles", "annular (gas core)", "annular (gas core)", "froth"],
          "platform": ["orbital station"] * 4}


@pytest.fixture(scope="module")
def case():
    return example_case(point=POINT)


@pytest.fixture(scope="module")
def chart(case):
    return Chart.build(case)


@pytest.fixture
def no_rebuild(monkeypatch):
    """Make any chart build fail: a test using this proves the code path reuses the chart it has."""
    def refuse(*args, **kwargs):
        raise AssertionError("Chart.build was called: the chart was rebuilt")
    monkeypatch.setattr(Chart, "build", refuse)


def _same_margins(a, b):
    assert a.regime == b.regime
    assert a.symmetric_margin == b.symmetric_margin
    assert a.limiting_boundary == b.limiting_boundary
    assert a.to_dict() == b.to_dict()


def test_chart_passed_in_is_reused(case, chart, no_rebuild):
    # catches run_study rebuilding a chart it was given (the export/dashboard double-build bug)
    study = run_study(case, chart=chart)
    assert study.chart is chart
    assert study.case is case


def test_chart_is_built_once_when_not_given(case, monkeypatch):
    # catches run_study building the chart more than once (e.g. once for margins, once for the envelope)
    calls = []
    build = Chart.build

    def counting(*args, **kwargs):
        calls.append(1)
        return build(*args, **kwargs)
    monkeypatch.setattr(Chart, "build", counting)
    run_study(case, envelope=ENVELOPE, points=POINTS)
    assert len(calls) == 1


def test_margins_equal_point_margins_on_the_same_chart(case, chart):
    # catches margins computed at another point, on another chart, or left out
    study = run_study(case, chart=chart)
    assert study.point == POINT
    _same_margins(study.margins, point_margins(chart, *POINT))
    assert study.regime == chart.regime_at(*POINT) == study.margins.regime


def test_with_point_reuses_the_chart_and_recomputes_only_margins(case, chart, no_rebuild):
    # catches with_point rebuilding the chart, keeping the old margins, or dropping envelope/agreement
    study = run_study(case, chart=chart, envelope=ENVELOPE, points=POINTS)
    moved = study.with_point(1e-5, 1e-3)
    assert moved.chart is chart
    assert moved.envelope is study.envelope and moved.agreement is study.agreement
    assert moved.point == (1e-5, 1e-3)
    _same_margins(moved.margins, point_margins(chart, 1e-5, 1e-3))
    assert moved.margins.regime != study.margins.regime  # the point did cross a boundary
    # pure: moving back gives the first study's margins, and the first study is unchanged
    _same_margins(moved.with_point(*POINT).margins, study.margins)
    assert study.point == POINT


def test_agreement_equals_the_agreement_module(case, chart):
    # catches the study calling agreement on another chart or without the caller's map and criteria
    regime_map = {"froth": "dispersed bubbles"}
    criteria = ValidityCriteria(safety_factor=3.0)
    study = run_study(case, chart=chart, points=POINTS, regime_map=regime_map, criteria=criteria)
    expected = agreement(chart, POINTS, regime_map=regime_map, criteria=criteria)
    assert study.agreement.to_dict() == expected.to_dict()
    assert study.agreement.to_dict() != agreement(chart, POINTS).to_dict()  # the map and criteria mattered


def test_with_test_points_reuses_the_chart(case, chart, no_rebuild):
    # catches adding test points through a chart rebuild, or losing the point's margins
    study = run_study(case, chart=chart)
    with_pts = study.with_test_points(POINTS)
    assert with_pts.chart is chart and with_pts.margins is study.margins
    assert with_pts.agreement.to_dict() == agreement(chart, POINTS).to_dict()
    assert with_pts.with_test_points(None).agreement is None


def test_envelope_equals_envelope_check(case, chart):
    # catches the envelope check run with the ranges swapped or on another chart
    study = run_study(case, chart=chart, envelope=ENVELOPE)
    assert study.envelope.to_dict() == envelope_check(chart, *ENVELOPE).to_dict()
    assert run_study(case, chart=chart).envelope is None


def test_case_without_point_has_no_margins_until_one_is_given(chart):
    # catches margins invented for a case that has no operating point
    case = dataclasses.replace(chart.case, operating_point=None)
    study = run_study(case, chart=Chart.build(case))
    assert study.point is None and study.margins is None and study.regime is None
    _same_margins(study.with_point(*POINT).margins, point_margins(study.chart, *POINT))


def test_study_is_immutable(case, chart):
    # catches a view mutating the shared study in place (another view would then show stale numbers)
    study = run_study(case, chart=chart)
    with pytest.raises(dataclasses.FrozenInstanceError):
        study.point = (1.0, 1.0)
    assert isinstance(study, Study)


def test_errors_name_the_input(case, chart):
    other = example_case(point=POINT, length=2.0)
    with pytest.raises(ValueError, match="another case"):
        run_study(other, chart=chart)
    with pytest.raises(ValueError, match="envelope"):
        run_study(case, chart=chart, envelope=(1e-5, 2e-5, 3e-5))
    with pytest.raises(ValueError, match="ql"):
        run_study(case, chart=chart).with_point(-1e-5, 1e-6)
    with pytest.raises(ValueError, match="qg"):
        run_study(case, chart=chart).with_point(1e-5, float("nan"))
