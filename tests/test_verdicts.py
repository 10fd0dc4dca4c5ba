"""Verdicts on margins (lowgmap.physics.chart.margins): ranges that follow the query, "established", words.

Each test names the bug it catches. Check values are closed forms for straight lines in log-log
axes (marked "closed form", derived in tests/test_margins.py and physics/manual/margins.md) or
invariants (the margin of a point does not depend on the chart range). The fluid pair only carries
the empirical lines (their flows do not depend on it).
"""
import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.physics.case import Case, FlowRange, OperatingPoint
from lowgmap.physics.chart import lines
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.margins import (MARGIN_STATUSES, MAX_MARGIN, REGIME_STATUSES, envelope_check,
                                           margin_verdict, point_margins, robust_point, symmetric_margins)
from lowgmap.physics.geometry.sections import Circle
from lowgmap.physics.models.boundary import ExplicitBoundary, PowerLawBoundary
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.properties.wetting import Wetting

FLUID = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
RANGE = FlowRange(1e-7, 1e-3, 1e-7, 1e-3)
WIDE = FlowRange(1e-9, 1e-1, 1e-9, 1e-1)


def make_case(flow_range=RANGE, point=None):
    op = None if point is None else OperatingPoint(*point)
    return Case(FLUID, Circle(0.01), Wetting(0.0), 1.0, 1e-5, flow_range, operating_point=op)


def chart_of(*models, flow_range=RANGE, point=None):
    return Chart.build(make_case(flow_range, point), list(models))


def line(name, a, b, below, above):
    return PowerLawBoundary(name, a, b, below, above)


class DomainLine(ExplicitBoundary):
    """Test model: Q_G = 0.1 Q_L, with no value at all (line and implicit NaN) for Q_L > q_end."""

    name = "domain_line_test"
    label = "domain test line"
    citation = "test model"
    regime_below = "b"
    regime_above = "c"

    def __init__(self, q_end=1e-2):
        self.q_end = q_end

    def qg_of_ql(self, case, ql, **consts):
        ql = np.asarray(ql, dtype=float)
        out = np.where(ql <= self.q_end, 0.1 * ql, np.nan)
        return float(out) if out.ndim == 0 else out


class RaisingLine(ExplicitBoundary):
    """Test model: Q_G = 0.1 Q_L that raises ValueError when asked about any Q_L > q_end."""

    name = "raising_line_test"
    label = "raising test line"
    citation = "test model"
    regime_below = "b"
    regime_above = "c"

    def __init__(self, q_end=1e-2):
        self.q_end = q_end

    def qg_of_ql(self, case, ql, **consts):
        ql = np.asarray(ql, dtype=float)
        if np.any(ql > self.q_end):
            raise ValueError(f"raising test line: Q_L beyond {self.q_end:g} m^3/s")
        out = 0.1 * ql
        return float(out) if out.ndim == 0 else out


@pytest.fixture(scope="module")
def condensate():
    doc = load_case(sample_case_path("condensate_line"))
    return doc, Chart.build(doc.case)


# ---------------------------------------------------------------------------------------------
# never "met" on a capped value, a model without values, or a model that raises

def test_far_point_is_not_met_on_a_capped_margin(condensate):
    # bug caught (issue 14): Q_G = 1e12 L/min on the condensate line read "at least ±99.9 % - met"
    doc, chart = condensate
    op = doc.case.operating_point
    qg = 1e12 / 60000.0                                     # 1e12 L/min in m^3/s
    pm = point_margins(chart, op.ql, qg)
    assert pm.symmetric_margin == MAX_MARGIN and pm.limiting_boundary is None
    assert not pm.established and pm.outside_chart
    assert any("±99.9 %" in r and pm.regime in r for r in pm.reasons)
    assert "outside the drawn chart range" in pm.outside_chart_note and "gas flow above it" in pm.outside_chart_note
    assert pm.search_qg == pytest.approx((qg * (1 - MAX_MARGIN), qg * (1 + MAX_MARGIN)), rel=1e-12)
    v = margin_verdict(pm, doc.settings.required_margin)
    assert v.margin_status == "not established" and not v.met
    assert v.regime_status == "no intended regime stated" and v.in_intended_regime is None
    assert v.outside_chart and pm.outside_chart_note in v.limits
    data = json.loads(json.dumps(pm.to_dict(), allow_nan=False))
    assert data["margin_established"] is False and data["outside_chart"] is True


def test_operating_point_of_sample_case_is_met(condensate):
    # Dukler et al. (1988) bubble-slug line Q_G/Q_L = C0 a_c/(1 - C0 a_c); the margin is the closed form
    # of tests/test_margins.py (about ±78 %), above the case's required ±30 %: established and met
    doc, chart = condensate
    op = doc.case.operating_point
    pm = point_margins(chart, op.ql, op.qg)
    assert pm.established and pm.reasons == () and not pm.outside_chart
    v = margin_verdict(pm, doc.settings.required_margin, "dispersed bubbles")
    assert (v.regime_status, v.margin_status) == ("in the intended regime", "met")
    assert v.limiting_boundary == "bubble_slug_dukler_1988" and v.margin == pm.symmetric_margin
    assert v.basis.startswith("Symmetric ±m box on the sampled lines over Q_L ")
    assert "m³/s" in v.basis and '"dispersed bubbles"' in v.basis
    # the comparison lines are named among the limits; the verdict is JSON-ready
    assert any(s.startswith("Comparison lines") and "Zhao & Rezkallah" in s for s in v.limits)
    assert json.loads(json.dumps(v.to_dict(), allow_nan=False))["margin_status"] == "met"


def test_line_without_values_is_not_established():
    # bug caught: a chain line with no value (NaN) beyond its domain silently counted as "above the line"
    chart = chart_of(line("low", 1e-3, 1.0, "a", "b"), DomainLine(q_end=1e-2))
    # inside the chart, far from the domain edge: established; closed form below Q_G = 0.1 Q_L, k = 0.5
    pm = point_margins(chart, 1e-4, 0.5e-5)
    assert pm.regime == "b" and pm.established
    assert pm.symmetric_margin == pytest.approx(1 / 3, abs=1e-9)     # (1 + m)/(1 - m) = 2
    # beyond Q_L = 1e-2 the line has no value: the ±m box reaches there, so the margin is not established
    pm = point_margins(chart, 8e-3, 0.4e-3)
    assert not pm.established and pm.outside_chart
    assert any("domain test line" in r and "gives no value" in r for r in pm.reasons)
    assert margin_verdict(pm, 0.01).margin_status == "not established"
    # the box is stopped by the edge of the line's domain at Q_L = 1e-2 (m = 1e-2/8e-3 - 1 = 0.25, closed
    # form): that edge is assumed, not computed, so neither "met" nor "NOT MET" is established
    assert pm.symmetric_margin == pytest.approx(0.25, abs=1e-9)
    assert margin_verdict(pm, 0.5).margin_status == "not established"


def test_model_that_raises_outside_its_domain_is_reported_not_raised():
    # bugs caught: a model raising outside its domain ended the margins in a traceback; the failed
    # sampling must not spoil the cached lines for the next point inside the chart
    chart = chart_of(line("low", 1e-3, 1.0, "a", "b"), RaisingLine(q_end=1e-2))
    inside = point_margins(chart, 1e-4, 0.5e-5)
    assert inside.established
    far = point_margins(chart, 1.0, 0.05)
    assert not far.established
    assert any("raising test line" in r for r in far.reasons)
    assert margin_verdict(far, 0.0).margin_status != "met"
    again = point_margins(chart, 1e-4, 0.5e-5)
    assert again.established and again.symmetric_margin == inside.symmetric_margin
    m, _, _ = symmetric_margins(chart, [1e-4], [0.5e-5])
    assert m[0] == pytest.approx(inside.symmetric_margin, abs=1e-12)


def test_regime_not_determined_is_not_established():
    # bug caught: a point whose regime cannot be computed (r = -1) got "at least ±99.9 %"
    chart = chart_of(line("low", 1e-3, 1.0, "a", "b"), RaisingLine(q_end=1e-2))
    pm = point_margins(chart, 0.5, 1e-6)
    assert pm.regime == "" and not pm.regime_determined and not pm.established
    v = margin_verdict(pm, 0.1, "a")
    assert v.margin_status == "not established" and v.regime_status == "NOT IN THE INTENDED REGIME"
    assert v.in_intended_regime is False
    assert any("could not be determined" in s for s in v.limits)


def test_chart_without_regimes_is_not_established():
    pm = point_margins(Chart.build(make_case(), []), 1e-5, 1e-6)
    assert not pm.established and "no regimes" in pm.reasons[0]
    assert margin_verdict(pm, 0.1).margin_status == "not established"


# ---------------------------------------------------------------------------------------------
# the range follows the query: the margin does not depend on the chart range

def test_point_just_outside_the_chart_gets_the_margin_of_a_chart_that_includes_it(monkeypatch):
    # bug caught: lines sampled only over the chart range. Closed form: below Q_G = Q_L at Q_G/Q_L = 1/3,
    # (1 + m)/(1 - m) = 3, m = 0.5; the box touches the line at (1.5e-3, 1.5e-3), beyond the chart's 1e-3
    ql, qg = 3e-3, 1e-3
    narrow = chart_of(line("rig", 1.0, 1.0, "bubbles", "slugs"))
    wide = chart_of(line("rig", 1.0, 1.0, "bubbles", "slugs"), flow_range=WIDE)
    a, b = point_margins(narrow, ql, qg), point_margins(wide, ql, qg)
    assert a.symmetric_margin == pytest.approx(0.5, abs=1e-9)
    assert b.symmetric_margin == pytest.approx(a.symmetric_margin, abs=1e-12)
    assert a.outside_chart and not b.outside_chart and a.established and b.established
    assert a.limiting.touch_ql == pytest.approx(1.5e-3, rel=1e-9)
    # the check can fail: a sampler that covers only the chart range sees the line end at (1e-3, 1e-3),
    # where the box reaches it at m = 1 - 1e-3/3e-3 = 2/3 (closed form)
    fr = RANGE
    box_only = (math.log10(fr.ql_min), math.log10(fr.ql_max), math.log10(fr.qg_min), math.log10(fr.qg_max))
    monkeypatch.setattr(lines, "coverage", lambda chart, x=(), y=(): box_only)
    fresh = chart_of(line("rig", 1.0, 1.0, "bubbles", "slugs"))
    assert point_margins(fresh, ql, qg).symmetric_margin == pytest.approx(2 / 3, abs=1e-9)


def test_margin_does_not_depend_on_the_chart_range(condensate):
    # invariant: the same case on two chart ranges gives the same margins, verdict inputs and regimes
    doc, chart = condensate
    other = Chart.build(doc.case.with_(flow_range=FlowRange(1e-6, 1e-4, 1e-6, 1e-4)))
    rng = np.random.default_rng(4)
    ql = 10.0 ** rng.uniform(-9, 1, 30)
    qg = 10.0 ** rng.uniform(-10, 1, 30)
    for a_ql, a_qg in zip(ql, qg):
        a, b = point_margins(chart, a_ql, a_qg), point_margins(other, a_ql, a_qg)
        assert a.regime == b.regime and a.limiting_boundary == b.limiting_boundary
        assert a.symmetric_margin == pytest.approx(b.symmetric_margin, abs=1e-9)
        assert a.established == b.established and a.search_ql == b.search_ql
    m1, _, _ = symmetric_margins(chart, ql, qg)
    m2, _, _ = symmetric_margins(other, ql, qg)
    assert np.allclose(m1, m2, atol=1e-9, rtol=0)


# ---------------------------------------------------------------------------------------------
# verdict words

def test_verdict_words_in_and_out_of_regime_met_and_not_met():
    # closed form: below Q_G = Q_L at Q_G/Q_L = 1/2, (1 + m)/(1 - m) = 2, m = 1/3
    chart = chart_of(line("rig", 1.0, 1.0, "bubbles", "slugs"))
    pm = point_margins(chart, 1e-5, 0.5e-5)
    assert pm.symmetric_margin == pytest.approx(1 / 3, abs=1e-9) and pm.established
    v = margin_verdict(pm, 0.3, "bubbles")
    assert (v.in_intended_regime, v.regime_status, v.margin_status) == (True, "in the intended regime", "met")
    v = margin_verdict(pm, 0.34, "bubbles")
    assert v.margin_status == "NOT MET" and not v.met
    v = margin_verdict(pm, 0.0, "slugs")                     # wrong regime: never met, whatever the margin
    assert (v.in_intended_regime, v.regime_status, v.margin_status) == (False, "NOT IN THE INTENDED REGIME",
                                                                         "NOT MET")
    v = margin_verdict(pm, 0.3)
    assert v.regime_status == "no intended regime stated" and v.margin_status == "met"
    assert "NOT MET" in margin_verdict(pm, 0.5).headline and "±50 %" in margin_verdict(pm, 0.5).headline
    assert set(REGIME_STATUSES) == {"in the intended regime", "NOT IN THE INTENDED REGIME",
                                    "no intended regime stated"}
    assert set(MARGIN_STATUSES) == {"met", "NOT MET", "not established"}


def test_verdict_errors():
    chart = chart_of(line("rig", 1.0, 1.0, "bubbles", "slugs"))
    pm = point_margins(chart, 1e-5, 0.5e-5)
    with pytest.raises(ValueError, match="required_margin"):
        margin_verdict(pm, 1.0)
    with pytest.raises(ValueError, match="required_margin"):
        margin_verdict(pm, -0.1)
    with pytest.raises(ValueError, match="intended regime 'froth'.*bubbles; slugs"):
        margin_verdict(pm, 0.3, "froth")


_PROPERTY_CHART = {}


def _property_chart():
    if not _PROPERTY_CHART:
        _PROPERTY_CHART["c"] = chart_of(line("low", 1e-3, 1.0, "a", "b"), DomainLine(q_end=1e-2))
    return _PROPERTY_CHART["c"]


@settings(max_examples=60, deadline=None)
@given(x=st.floats(-12.0, 3.0), d=st.floats(-5.0, 1.0), req=st.floats(0.0, 0.998),
       intended=st.sampled_from([None, "a", "b", "c"]))
def test_met_implies_established_and_enough_margin(x, d, req, intended):
    # property (bug caught: "met" on a capped or unestablished margin, or in the wrong regime); points
    # anywhere in Q_L, at gas/liquid ratios 1e-5..10 around the two lines (ratios 1e-3 and 0.1)
    pm = point_margins(_property_chart(), 10.0 ** x, 10.0 ** (x + d))
    v = margin_verdict(pm, req, intended)
    assert v.margin_status in MARGIN_STATUSES and v.regime_status in REGIME_STATUSES
    if v.met:
        assert pm.established and v.established and pm.symmetric_margin >= req
        assert pm.symmetric_margin < MAX_MARGIN and pm.limiting_boundary is not None
        assert intended is None or pm.regime == intended
    if pm.symmetric_margin >= MAX_MARGIN:
        assert not pm.established and v.margin_status != "met"
    json.dumps(v.to_dict(), allow_nan=False)


# ---------------------------------------------------------------------------------------------
# envelope and robust point

def test_envelope_outside_the_chart_is_flagged():
    # bug caught: an envelope beyond the chart range was checked without saying so
    chart = chart_of(line("rig", 1.0, 1.0, "bubbles", "slugs"))
    inside = envelope_check(chart, (1e-5, 3e-5), (1e-6, 5e-6))
    assert not inside.outside_chart and inside.established and inside.status == "wholly inside one regime"
    env = envelope_check(chart, (1e-4, 5e-3), (1e-6, 5e-6))     # closed form: Q_G < Q_L at every corner
    assert env.wholly_inside and env.regimes == ("bubbles",) and env.established
    assert env.outside_chart and "liquid flow above it" in env.outside_chart_note
    assert env.to_dict()["outside_chart"] is True


def test_envelope_over_a_line_without_values_is_not_established():
    # bug caught: "wholly inside" claimed over flows where a bounding line has no value
    chart = chart_of(line("low", 1e-3, 1.0, "a", "b"), DomainLine(q_end=1e-2))
    env = envelope_check(chart, (5e-3, 5e-2), (1e-4, 2e-4), reference=(6e-3, 1e-4))
    assert env.regime == "b" and not env.established and env.status == "not established"
    assert any("domain test line" in r and "gives no value" in r for r in env.reasons)
    assert env.to_dict()["established"] is False
    # within the line's domain the same kind of rectangle is established (closed form: Q_G < 0.1 Q_L)
    env = envelope_check(chart, (2e-3, 8e-3), (1e-4, 1.5e-4))
    assert env.established and env.wholly_inside and env.status == "wholly inside one regime"


def test_robust_point_searches_a_decade_around_the_operating_point():
    # closed form: between Q_G = c1 Q_L and Q_G = c2 Q_L the best ratio is sqrt(c1 c2), (1-m)/(1+m) = sqrt(c1/c2)
    c1, c2 = 0.05, 2.0
    op = (2e-5, 1e-6)
    chart = chart_of(line("low", c1, 1.0, "a", "b"), line("high", c2, 1.0, "b", "c"), point=op)
    rp = robust_point(chart, "b")
    assert rp.ql_range == pytest.approx((op[0] / 10, op[0] * 10)) and rp.qg_range == pytest.approx((op[1] / 10, op[1] * 10))
    assert rp.range_basis == "a decade either side of the operating point"
    assert "a decade either side" in rp.search_note and "m³/s" in rp.search_note
    assert op[0] / 10 <= rp.ql <= op[0] * 10 and op[1] / 10 <= rp.qg <= op[1] * 10
    assert rp.qg / rp.ql == pytest.approx(math.sqrt(c1 * c2), rel=1e-5)
    q = math.sqrt(c1 / c2)
    assert rp.margin == pytest.approx((1 - q) / (1 + q), abs=1e-6)
    assert rp.established and rp.margins is not None and rp.margins.established
    assert rp.to_dict()["margin_established"] is True
    # explicit ranges are used as given; a regime absent from the default range says how to widen it
    rp = robust_point(chart, "b", ql_range=(1e-6, 1e-4), qg_range=(1e-7, 1e-5))
    assert rp.range_basis == "given"
    with pytest.raises(ValueError, match="give ql_range and qg_range"):
        robust_point(chart, "c", around=(1e-3, 1e-6))


def test_capped_robust_point_is_not_established():
    # bug caught (issue 14): the robust point reported "at least ±99.9 %" as a plain margin
    chart = chart_of(line("rig", 1.0, 1.0, "bubbles", "slugs"))
    rp = robust_point(chart, "bubbles")                 # no operating point: the chart range
    assert rp.range_basis.startswith("the chart range")
    assert rp.margin == MAX_MARGIN and not rp.limiting
    assert not rp.established and any("±99.9 %" in r for r in rp.reasons)
    assert margin_verdict(rp.margins, 0.3).margin_status == "not established"
