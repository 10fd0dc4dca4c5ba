"""Margins of an operating point, operating envelopes and the robust point (lowgmap.physics.chart.margins).

Check values are closed forms derived here for straight boundaries in log-log axes (marked
"closed form") and the drift-flux line of Dukler et al. (1988); consistency checks use the
chart's own classification (an independent path: the implicit functions of the models).
The fluid pair below only carries the empirical lines (their flows do not depend on it).
"""
import gc
import math
import weakref

import numpy as np
import pytest
from scipy.optimize import brentq

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.physics.chart import lines, margins as mg
from lowgmap.physics.models.boundary import BoundaryModel, ExplicitBoundary, PowerLawBoundary, TableBoundary
from lowgmap.physics.case import Case, FlowRange
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.chart.margins import (MAX_MARGIN, box_margin_on_segments, envelope_check, point_margins, robust_point,
                             symmetric_margins)
from lowgmap.physics.geometry.sections import Circle
from lowgmap.physics.models.tube import drift_flux_flow_ratio
from lowgmap.physics.properties.wetting import Wetting

# carrier fluid for empirical lines (any valid pair; the lines below do not use it)
FLUID = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
RANGE = FlowRange(1e-7, 1e-3, 1e-7, 1e-3)


def make_case(section=None, flow_range=RANGE):
    return Case(FLUID, section or Circle(0.01), Wetting(0.0), 1.0, 1e-5, flow_range)


def line(name, a, b, below, above):
    return PowerLawBoundary(name, a, b, below, above)


def chart_of(*models, flow_range=RANGE):
    return Chart.build(make_case(flow_range=flow_range), list(models))


class VerticalLine(BoundaryModel):
    """Test model: a vertical boundary Q_L = q_c (no Q_G(Q_L) function: columns wholly on one side)."""

    name = "vertical_line_test"
    label = "vertical test line"
    citation = "test model"
    regime_below = "left"
    regime_above = "right"

    def __init__(self, qc):
        self.qc = qc

    def implicit(self, case, ql, qg, **consts):
        ql, qg = np.broadcast_arrays(np.asarray(ql, dtype=float), np.asarray(qg, dtype=float))
        return np.log(ql / self.qc)


class EndingLine(ExplicitBoundary):
    """Test model: Q_G = a Q_L^0.3 for Q_L < q_end, no line beyond (those columns count as above)."""

    name = "ending_line_test"
    label = "ending test line"
    citation = "test model"

    def __init__(self, below, above, a=3e-4 / (1e-4) ** 0.3, q_end=2e-4):
        self.regime_below, self.regime_above, self.a, self.q_end = below, above, a, q_end

    def qg_of_ql(self, case, ql, **consts):
        ql = np.asarray(ql, dtype=float)
        out = np.where(ql < self.q_end, self.a * np.abs(ql) ** 0.3, np.nan)
        return float(out) if out.ndim == 0 else out


class WavyLine(ExplicitBoundary):
    """Test model: a line that is not monotone in log-log axes."""

    name = "wavy_line_test"
    label = "wavy test line"
    citation = "test model"

    def __init__(self, below, above):
        self.regime_below, self.regime_above = below, above

    def qg_of_ql(self, case, ql, **consts):
        ql = np.asarray(ql, dtype=float)
        out = 3e-5 * (ql / 1e-5) ** 0.5 * (1 + 0.6 * np.sin(3 * np.log(ql)))
        return float(out) if out.ndim == 0 else out


@pytest.fixture(scope="module")
def sample_chart():
    doc = load_case(sample_case_path("condensate_line"))
    return doc, Chart.build(doc.case)


@pytest.fixture(scope="module")
def odd_chart():
    """Vertical, wavy and ending lines in sequence (walls, non-monotone line, line with an end)."""
    return chart_of(VerticalLine(3e-5), WavyLine("right", "c"), EndingLine("c", "d"))


# ---------------------------------------------------------------------------------------------
# closed forms for straight lines

@pytest.mark.parametrize("k", [0.1, 0.3, 0.8, 0.999])
def test_point_below_straight_line_closed_form(k):
    # closed form: line Q_G = c Q_L, point at Q_G = k c Q_L (k < 1): Q_G can rise by 1/k, Q_L fall to k;
    # the box's upper-left corner reaches the line when (1 + m)/(1 - m) = 1/k
    c = 0.5
    chart = chart_of(line("rig", c, 1.0, "bubbles", "slugs"))
    ql = 2e-5
    pm = point_margins(chart, ql, k * c * ql)
    b = pm.boundaries[0]
    assert pm.regime == "bubbles" and b.side == "below"
    assert b.qg_factor_up == pytest.approx(1 / k, rel=1e-12)
    assert b.ql_factor_down == pytest.approx(k, rel=1e-12)
    assert b.ql_factor_up is None and b.qg_factor_down is None
    m = (1 - k) / (1 + k)
    assert pm.symmetric_margin == pytest.approx(m, abs=1e-9)
    assert pm.limiting_boundary == "rig"
    # closed form: perpendicular distance to y = x + log10 c in log-log axes, toward upper left
    assert b.log_distance == pytest.approx(abs(math.log10(k)) / math.sqrt(2), abs=1e-12)
    assert b.direction == pytest.approx((-1 / math.sqrt(2), 1 / math.sqrt(2)), abs=1e-9)
    assert math.log10(b.nearest_qg) == pytest.approx(math.log10(b.nearest_ql) + math.log10(c), abs=1e-12)
    assert pm.limits == {"ql_up": None, "ql_down": "rig", "qg_up": "rig", "qg_down": None}


@pytest.mark.parametrize("k", [1.5, 4.0, 30.0])
def test_point_above_straight_line_closed_form(k):
    # closed form: above the line (k > 1) the lower-right corner reaches it when (1 - m)/(1 + m) = 1/k
    c = 2.0
    chart = chart_of(line("rig", c, 1.0, "bubbles", "slugs"))
    pm = point_margins(chart, 1e-5, k * c * 1e-5)
    b = pm.boundaries[0]
    assert b.side == "above" and pm.regime == "slugs"
    assert b.qg_factor_down == pytest.approx(1 / k, rel=1e-12)
    assert b.ql_factor_up == pytest.approx(k, rel=1e-12)
    assert pm.symmetric_margin == pytest.approx((k - 1) / (k + 1), abs=1e-9)


@pytest.mark.parametrize("a,b,q", [(3e-5 / math.sqrt(1e-5), 0.5, (1e-5, 1e-5)), (1e3, 2.0, (1e-4, 1e-6)),
                                   (1e-6 * math.sqrt(1e-5), -0.5, (1e-5, 5e-7))])
def test_power_law_line_margin_solves_corner_equation(a, b, q):
    # closed form: point below Q_G = a Q_L^b; the box first meets the line at its upper corner on the side
    # where the line is lowest: (1 + m) Q_G = a ((1 - m) Q_L)^b for b > 0, a ((1 + m) Q_L)^b for b < 0
    chart = chart_of(line("rig", a, b, "bubbles", "slugs"))
    ql, qg = q
    assert qg < a * ql ** b
    sign = -1.0 if b > 0 else 1.0
    m = brentq(lambda m: (1 + m) * qg - a * ((1 + sign * m) * ql) ** b, 0.0, 0.999999, xtol=1e-15)
    pm = point_margins(chart, ql, qg)
    assert pm.symmetric_margin == pytest.approx(m, abs=1e-9)
    b0 = pm.boundaries[0]
    assert b0.qg_factor_up == pytest.approx(a * ql ** b / qg, rel=1e-12)
    # closed form: the liquid-axis crossing is at Q_L' = (Q_G/a)^(1/b)
    f = (qg / a) ** (1 / b) / ql
    assert (b0.ql_factor_down if f < 1 else b0.ql_factor_up) == pytest.approx(f, rel=1e-10)


def test_horizontal_line_closed_form():
    # closed form: Q_G = H (b = 0): m = H/Q_G - 1 below it; no crossing along the liquid axis
    chart = chart_of(line("flat", 4e-5, 0.0, "low", "high"))
    pm = point_margins(chart, 1e-5, 3e-5)
    b = pm.boundaries[0]
    assert pm.symmetric_margin == pytest.approx(1 / 3, abs=1e-9)
    assert b.qg_factor_up == pytest.approx(4 / 3, rel=1e-12)
    assert b.ql_factor_up is None and b.ql_factor_down is None
    assert b.direction == pytest.approx((0.0, 1.0), abs=1e-12)


def test_drift_flux_line_on_sample_case(sample_chart):
    # Dukler et al. (1988): bubble-slug at a critical void fraction, Q_G/Q_L = C0 a_c / (1 - C0 a_c) with the
    # model's constants (a_c 0.45, C0 1.2; from memory); the operating point sits at k times that ratio
    doc, chart = sample_chart
    op = doc.case.operating_point
    consts = dict(chart.region_models[0][1])
    r = drift_flux_flow_ratio(consts["alpha_c"], consts["c0"])
    k = (op.qg / op.ql) / r
    pm = point_margins(chart, op.ql, op.qg)
    assert pm.regime == "dispersed bubbles"
    assert pm.limiting_boundary == "bubble_slug_dukler_1988"
    assert pm.symmetric_margin == pytest.approx((1 - k) / (1 + k), abs=1e-9)
    b = pm.boundary("bubble_slug_dukler_1988")
    assert b.qg_factor_up == pytest.approx(1 / k, rel=1e-10)
    assert b.ql_factor_down == pytest.approx(k, rel=1e-10)


def test_margin_is_scale_free_for_lines_through_origin(sample_chart):
    # invariant: lines Q_G = r Q_L are unchanged by scaling both flows, so the margins are too
    _, chart = sample_chart
    base = point_margins(chart, 2e-5, 1e-6)
    for s in (0.3, 3.0):
        pm = point_margins(chart, 2e-5 * s, 1e-6 * s)
        assert pm.symmetric_margin == pytest.approx(base.symmetric_margin, abs=1e-9)
        assert pm.boundaries[0].qg_factor_up == pytest.approx(base.boundaries[0].qg_factor_up, rel=1e-10)


# ---------------------------------------------------------------------------------------------
# consistency with the classification

def _sign(model, consts, case, ql, qg):
    return float(np.asarray(model.implicit(case, ql, qg, **consts))) < 0


def _check_flips(chart, ql, qg):
    pm = point_margins(chart, ql, qg)
    lines = list(chart.region_models) + list(chart.comparison_models)
    checked = 0
    for b, (model, consts) in zip(pm.boundaries, lines):
        consts = dict(consts)
        here = _sign(model, consts, chart.case, ql, qg)
        for d in mg.DIRECTIONS:
            f = b.factor(d)
            if f is None:
                continue
            near, far = (f * 0.995, f * 1.005) if f > 1 else (f * 1.005, f * 0.995)
            pts = [(ql * near, qg), (ql * far, qg)] if d.startswith("ql") else [(ql, qg * near), (ql, qg * far)]
            assert _sign(model, consts, chart.case, *pts[0]) == here, (b.name, d, f)
            assert _sign(model, consts, chart.case, *pts[1]) != here, (b.name, d, f)
            if pm.limits[d] == b.name:
                assert chart.regime_at(*pts[0]) == pm.regime
                assert chart.regime_at(*pts[1]) != pm.regime
            checked += 1
    return checked


def test_factors_flip_the_side_on_sample_chart(sample_chart):
    _, chart = sample_chart
    rng = np.random.default_rng(11)
    total = 0
    for ql, qg in zip(10 ** rng.uniform(-6.4, -3.2, 25), 10 ** rng.uniform(-7, -2.8, 25)):
        total += _check_flips(chart, ql, qg)
    assert total > 40


def test_factors_flip_the_side_on_odd_lines(odd_chart):
    rng = np.random.default_rng(5)
    total = 0
    for ql, qg in zip(10 ** rng.uniform(-6.8, -3.2, 25), 10 ** rng.uniform(-6.8, -3.2, 25)):
        total += _check_flips(odd_chart, ql, qg)
    assert total > 40


def _box(ql, qg, m, n):
    u = np.linspace(1 - m, 1 + m, n)
    return np.meshgrid(ql * u, qg * u)


def _perimeter(ql, qg, m, n):
    t = np.linspace(1 - m, 1 + m, n)
    e = np.full(n, 1 - m)
    f = np.full(n, 1 + m)
    return ql * np.concatenate([t, t, e, f]), qg * np.concatenate([e, f, t, t])


@pytest.mark.parametrize("which", ["sample", "odd"])
def test_box_touches_the_limiting_line(which, sample_chart, odd_chart):
    chart = sample_chart[1] if which == "sample" else odd_chart
    rng = np.random.default_rng(21)
    done = 0
    for ql, qg in zip(10 ** rng.uniform(-6.5, -3.5, 12), 10 ** rng.uniform(-6.5, -3.3, 12)):
        pm = point_margins(chart, ql, qg)
        m = pm.symmetric_margin
        if pm.limiting is None or m < 1e-3:
            continue
        t = pm.limiting
        # the touch point is on the box edge ...
        assert max(abs(t.touch_ql / ql - 1), abs(t.touch_qg / qg - 1)) == pytest.approx(m, abs=1e-9)
        # ... and no regime change inside a slightly smaller box (dense grid and edges) ...
        gx, gy = _box(ql, qg, m * (1 - 1e-3), 120)
        px, py = _perimeter(ql, qg, m * (1 - 1e-3), 3000)
        inside = set(np.unique(chart.classify(gx, gy))) | set(np.unique(chart.classify(px, py)))
        assert inside == {pm.regime}
        # ... while a slightly larger box reaches another regime
        px, py = _perimeter(ql, qg, min(m * 1.01, 0.9999), 6000)
        assert set(np.unique(chart.classify(px, py))) - {pm.regime}
        done += 1
    assert done >= 6


def test_vertical_line_closed_form():
    # closed form: boundary Q_L = q_c, point at Q_L = q_c/1.5: Q_L can rise by 1.5, m = 0.5, distance log10 1.5
    chart = chart_of(VerticalLine(3e-5))
    pm = point_margins(chart, 2e-5, 1e-5)
    b = pm.boundaries[0]
    assert pm.regime == "left"
    assert b.ql_factor_up == pytest.approx(1.5, rel=1e-9)
    assert b.qg_factor_up is None and b.qg_factor_down is None
    assert pm.symmetric_margin == pytest.approx(0.5, abs=1e-9)
    assert b.log_distance == pytest.approx(math.log10(1.5), abs=1e-9)
    assert b.direction == pytest.approx((1.0, 0.0), abs=1e-9)


def test_line_ending_inside_the_chart_closed_form():
    # closed form: a line that stops at Q_L = 2e-4; beyond it the columns count as "above" (NaN line), so a
    # point below the line meets a vertical boundary at 2e-4 under the end of the line
    chart = chart_of(EndingLine("c", "d"))
    pm = point_margins(chart, 1.6e-4, 1e-5)
    b = pm.boundaries[0]
    assert b.ql_factor_up == pytest.approx(2e-4 / 1.6e-4, rel=1e-9)
    assert pm.symmetric_margin == pytest.approx(0.25, abs=1e-9)
    assert chart.regime_at(1.6e-4 * 1.25 * 1.001, 1e-5) == "d"


def test_comparison_lines_do_not_limit():
    # a second line for the same pair of regimes is a comparison line, even when it is closer
    chart = chart_of(line("main", 1.0, 1.0, "bubbles", "slugs"), line("other", 0.2, 1.0, "bubbles", "slugs"))
    pm = point_margins(chart, 1e-5, 1.5e-6)
    main, other = pm.boundary("main"), pm.boundary("other")
    assert other.role == "comparison" and not other.limits_regime
    assert other.margin < main.margin
    assert pm.limiting_boundary == "main"
    assert pm.symmetric_margin == pytest.approx((1 - 0.15) / (1 + 0.15), abs=1e-9)  # closed form, k = 0.15
    assert other.qg_factor_up == pytest.approx(0.2 / 0.15, rel=1e-12)
    assert "other" not in pm.limits.values()


def test_lines_above_in_the_sequence_do_not_limit():
    # sequence rule: below the first line the regime is its lower one whatever the later lines do
    chart = chart_of(line("first", 1.0, 1.0, "a", "b"), line("second", 2e-6, 0.0, "b", "c"))
    pm = point_margins(chart, 1e-5, 2.2e-6)
    assert pm.regime == "a"
    second = pm.boundary("second")
    assert not second.limits_regime and second.margin == pytest.approx(0.2e-6 / 2.2e-6, abs=1e-9)
    k = 0.22
    assert pm.symmetric_margin == pytest.approx((1 - k) / (1 + k), abs=1e-9)   # closed form, first line
    gx, gy = _box(1e-5, 2.2e-6, pm.symmetric_margin * 0.999, 150)
    assert set(np.unique(chart.classify(gx, gy))) == {"a"}


def test_many_points_agree_with_single_point(sample_chart, odd_chart):
    # regression between our two code paths (vectorised and per point)
    rng = np.random.default_rng(2)
    for chart in (sample_chart[1], odd_chart):
        ql = 10 ** rng.uniform(-6.8, -3.2, 80)
        qg = 10 ** rng.uniform(-6.8, -3.2, 80)
        m, lim, reg = symmetric_margins(chart, ql, qg)
        for j in range(ql.size):
            pm = point_margins(chart, ql[j], qg[j])
            assert m[j] == pytest.approx(pm.symmetric_margin, abs=1e-9)
            assert reg[j] == pm.regime
            names = [mm.name for mm, _ in chart.region_models]
            assert (names[lim[j]] if lim[j] >= 0 else None) == pm.limiting_boundary


def test_symmetric_margins_signed_for_intended_regime():
    chart = chart_of(line("rig", 1.0, 1.0, "bubbles", "slugs"))
    m, _, reg = symmetric_margins(chart, [1e-5, 1e-5], [0.5e-5, 2e-5], regime="bubbles")
    assert m[0] == pytest.approx(1 / 3, abs=1e-9) and m[1] == pytest.approx(-1 / 3, abs=1e-9)  # closed form
    assert reg.tolist() == ["bubbles", "slugs"]


def test_closed_form_segment_minimum_against_dense_sampling():
    # the closed-form minimiser on a straight log-log segment equals a dense search (within its spacing)
    rng = np.random.default_rng(0)
    n = 400
    la, lb = rng.uniform(-3, 1, n), rng.uniform(-3, 1, n)
    al, be = rng.uniform(0.01, 2, n), rng.uniform(-3, 3, n)
    be[:40] = 0.0
    m, t = box_margin_on_segments(la, al, lb, be)
    ts = np.linspace(0, 1, 20001)[:, None]
    dense = np.maximum(np.abs(np.expm1(la + al * ts)), np.abs(np.expm1(lb + be * ts)))
    best = dense.min(axis=0)
    assert np.all(m <= best + 1e-12)
    slope = np.abs(al) * np.exp(la + al) + np.abs(be) * np.exp(np.maximum(lb, lb + be))
    assert np.all(best - m <= slope * 5e-5 + 1e-12)
    again = np.maximum(np.abs(np.expm1(la + al * t)), np.abs(np.expm1(lb + be * t)))
    assert np.allclose(again, m, atol=1e-12)


def test_no_regimes_and_bad_points():
    chart = Chart.build(make_case(), [])          # no model: no regimes
    pm = point_margins(chart, 1e-5, 1e-6)
    assert pm.regime == "" and pm.boundaries == () and pm.symmetric_margin == MAX_MARGIN
    assert pm.limiting_boundary is None
    with pytest.raises(ValueError, match="ql"):
        point_margins(chart, -1e-5, 1e-6)
    with pytest.raises(ValueError, match="qg"):
        point_margins(chart, 1e-5, float("nan"))
    with pytest.raises(ValueError, match="direction"):
        point_margins(chart_of(line("rig", 1.0, 1.0, "a", "b")), 1e-5, 1e-6).boundaries[0].factor("up")


def test_factor_none_when_crossing_is_outside_chart_range():
    # the line Q_G = 100 Q_L leaves the chart top at Q_L = 1e-5: a point at Q_L = 1e-4 has no gas crossing
    chart = chart_of(line("steep", 100.0, 1.0, "a", "b"))
    b = point_margins(chart, 1e-4, 1e-5).boundaries[0]
    assert b.qg_factor_up is None
    assert b.ql_factor_down == pytest.approx(1e-5 / 100 / 1e-4, rel=1e-12)
    assert b.margin == pytest.approx((1 - 1e-3) / (1 + 1e-3), abs=1e-9)   # the line extends beyond the chart


def test_cache_does_not_keep_charts_alive():
    chart = chart_of(line("rig", 1.0, 1.0, "a", "b"))
    point_margins(chart, 1e-5, 1e-6)
    assert chart in lines.GEOMETRY_CACHE
    ref = weakref.ref(chart)
    del chart
    gc.collect()
    assert ref() is None


def test_to_dict_is_plain():
    chart = chart_of(line("rig", 1.0, 1.0, "a", "b"))
    d = point_margins(chart, 1e-5, 1e-6).to_dict()
    assert d["operating_point"] == {"ql_m3_s": 1e-5, "qg_m3_s": 1e-6}
    assert set(d["boundaries"][0]) >= {"name", "source", "ql_factor_up", "ql_factor_down", "qg_factor_up",
                                       "qg_factor_down", "log_distance"}


# ---------------------------------------------------------------------------------------------
# operating envelope

def test_envelope_inside_and_across_straight_line():
    chart = chart_of(line("rig", 1.0, 1.0, "bubbles", "slugs"))
    env = envelope_check(chart, (1e-5, 3e-5), (1e-6, 5e-6))
    assert env.wholly_inside and env.regimes == ("bubbles",)
    # closed form: a corner is across Q_G = Q_L when its Q_G > Q_L
    env = envelope_check(chart, (1e-5, 3e-5), (1e-6, 2e-5))
    assert not env.wholly_inside
    assert env.lines[0].crosses
    assert env.lines[0].corners_across == ("low Q_L, high Q_G",)
    assert set(env.regimes) == {"bubbles", "slugs"}
    assert [c.regime for c in env.corners] == ["bubbles", "bubbles", "bubbles", "slugs"]


def test_envelope_line_dipping_in_without_corner_across():
    # a V-shaped measured line whose tip (1e-5, 2e-5) enters the rectangle from above: no corner is across
    v = TableBoundary("v_line", [(1e-6, 1e-3), (1e-5, 2e-5), (1e-4, 1e-3)], "low", "high")
    chart = chart_of(v)
    env = envelope_check(chart, (5e-6, 2e-5), (1e-6, 3e-5), reference=(1e-5, 2e-6))
    assert env.lines[0].crosses and env.lines[0].corners_across == ()
    assert not env.wholly_inside
    assert set(env.regimes) == {"low", "high"}
    with pytest.raises(ValueError, match="ql_range"):
        envelope_check(chart, (2e-5, 5e-6), (1e-6, 3e-5))


# ---------------------------------------------------------------------------------------------
# robust point

def test_robust_point_between_two_lines_through_origin():
    # closed form: between Q_G = c1 Q_L and Q_G = c2 Q_L the best ratio is sqrt(c1 c2), (1-m)/(1+m) = sqrt(c1/c2)
    c1, c2 = 0.05, 2.0
    chart = chart_of(line("low", c1, 1.0, "a", "b"), line("high", c2, 1.0, "b", "c"))
    rp = robust_point(chart, "b")
    assert rp.qg / rp.ql == pytest.approx(math.sqrt(c1 * c2), rel=1e-5)
    q = math.sqrt(c1 / c2)
    assert rp.margin == pytest.approx((1 - q) / (1 + q), abs=1e-6)
    assert set(rp.limiting) == {"low", "high"}
    assert chart.regime_at(rp.ql, rp.qg) == "b"


def test_robust_point_with_a_binding_flow_range():
    # closed form: between Q_G = c Q_L (below) and Q_G = H (above), with Q_L >= a the optimum is at Q_L = a,
    # (1 + m) Q_G = H and (1 - m) Q_G = c (1 + m) a, i.e. k m^2 + (2k + 1) m + k - 1 = 0 with k = c a / H
    c, H, a = 1.0, 1e-5, 1e-6
    chart = chart_of(line("slope", c, 1.0, "a", "b"), line("flat", H, 0.0, "b", "c"))
    rp = robust_point(chart, "b", ql_range=(a, 1e-4), qg_range=(1e-7, 1e-3))
    k = c * a / H
    m = (-(2 * k + 1) + math.sqrt((2 * k + 1) ** 2 - 4 * k * (k - 1))) / (2 * k)
    assert rp.margin == pytest.approx(m, abs=1e-5)
    assert rp.ql == pytest.approx(a, rel=1e-5)
    assert rp.qg == pytest.approx(H / (1 + m), rel=1e-4)


def test_robust_point_errors():
    chart = chart_of(line("low", 0.1, 1.0, "a", "b"), line("high", 10.0, 1.0, "b", "c"))
    with pytest.raises(ValueError, match="regimes on this chart: a; b; c"):
        robust_point(chart, "slugs")
    with pytest.raises(ValueError, match="does not occur"):
        robust_point(chart, "c", ql_range=(1e-5, 1e-4), qg_range=(1e-7, 1e-6))
    with pytest.raises(ValueError, match="qg_range"):
        robust_point(chart, "b", qg_range=(1e-5, 1e-6))


# ---------------------------------------------------------------------------------------------
# other regime schemes and parametric lines (only the Chart interface is used)

def _partition_chart(rule, regimes):
    """Line 'diag' Q_G = Q_L and line 'flat' Q_G = 1e-5 in a partition scheme with the given rule."""
    from lowgmap.physics.chart.composition import PartitionScheme, RegimeInfo

    scheme = PartitionScheme("test partition", ("diag", "flat"), tuple(RegimeInfo(r) for r in regimes), rule)
    diag, flat = line("diag", 1.0, 1.0, "d-", "d+"), line("flat", 1e-5, 0.0, "f-", "f+")
    diag.scheme = flat.scheme = scheme
    return Chart.build(make_case(), [diag, flat])


def test_partition_scheme_counts_only_separating_parts():
    # rule: below the diagonal one regime whatever the flat line does; above it, the flat line splits two
    def rule(v):
        return np.where(v["diag"] < 0, "liquid side", np.where(v["flat"] < 0, "middle", "top"))
    chart = _partition_chart(rule, ("liquid side", "middle", "top"))
    assert type(chart.scheme).__name__ == "PartitionScheme"
    # below the diagonal, 10 % under the flat line: the flat line does not bound this regime there
    pm = point_margins(chart, 3e-5, 0.9e-5)
    assert pm.regime == "liquid side"
    k = 0.3
    assert pm.symmetric_margin == pytest.approx((1 - k) / (1 + k), abs=1e-9)   # closed form, diagonal only
    assert pm.limiting_boundary == "diag"
    flat = pm.boundary("flat")
    assert not flat.limits_regime
    assert flat.qg_factor_up is None                                # the flat line is no boundary at Q_L = 3e-5
    # closed form: its separating part starts at Q_L = 1e-5, so the box reaches it at m = 1 - 1e-5/3e-5
    assert flat.margin == pytest.approx(2 / 3, abs=1e-9)
    gx, gy = _box(3e-5, 0.9e-5, pm.symmetric_margin * 0.999, 150)
    assert set(np.unique(chart.classify(gx, gy))) == {"liquid side"}
    # above the diagonal the flat line bounds the regime: closed form m = 1e-5/Q_G - 1 when it is nearest
    pm = point_margins(chart, 1e-6, 8e-6)
    assert pm.regime == "middle" and pm.limiting_boundary == "flat"
    assert pm.symmetric_margin == pytest.approx(0.25, abs=1e-9)
    m, lim, _ = symmetric_margins(chart, [3e-5, 1e-6], [0.9e-5, 8e-6])
    assert m == pytest.approx([(1 - k) / (1 + k), 0.25], abs=1e-9) and lim.tolist() == [0, 1]


def test_partition_scheme_flips_and_envelope():
    def rule(v):
        return np.where(v["diag"] < 0, "liquid side", np.where(v["flat"] < 0, "middle", "top"))
    chart = _partition_chart(rule, ("liquid side", "middle", "top"))
    rng = np.random.default_rng(8)
    total = 0
    for ql, qg in zip(10 ** rng.uniform(-6.8, -3.2, 20), 10 ** rng.uniform(-6.8, -3.2, 20)):
        pm = point_margins(chart, ql, qg)
        for d in mg.DIRECTIONS:
            f = pm.regime_factors[d]
            if f is None:
                continue
            near, far = (f * 0.995, f * 1.005) if f > 1 else (f * 1.005, f * 0.995)
            pts = [(ql * near, qg), (ql * far, qg)] if d.startswith("ql") else [(ql, qg * near), (ql, qg * far)]
            assert chart.regime_at(*pts[0]) == pm.regime and chart.regime_at(*pts[1]) != pm.regime
            total += 1
    assert total > 15
    # an envelope below the diagonal that the flat line crosses keeps one regime (the flat part bounds nothing)
    env = envelope_check(chart, (2e-5, 4e-5), (5e-6, 1.5e-5))
    assert env.wholly_inside and env.regimes == ("liquid side",)
    assert not env.lines[1].crosses and env.lines[1].corners_across   # corners across the (inactive) flat line


class ParametricVertical(BoundaryModel):
    """Test model: Q_L = q_c given only as a parametric piece (t = log10 Q_G), no Q_G(Q_L)."""

    name = "parametric_vertical_test"
    label = "parametric vertical"
    citation = "test model"
    regime_below = "left"
    regime_above = "right"

    def __init__(self, qc):
        self.qc = qc

    def implicit(self, case, ql, qg, **consts):
        ql, qg = np.broadcast_arrays(np.asarray(ql, dtype=float), np.asarray(qg, dtype=float))
        return np.log(ql / self.qc)

    def qg_of_ql(self, case, ql, **consts):
        return np.full(np.shape(ql), np.nan)

    def line_pieces(self, case, **consts):
        from lowgmap.physics.chart.composition import LinePiece

        fr = case.flow_range
        return [LinePiece(math.log10(fr.qg_min), math.log10(fr.qg_max),
                          lambda t: (np.full(np.shape(t), self.qc), 10.0 ** np.asarray(t, dtype=float)))]


def test_parametric_piece_line_closed_form():
    # closed form: boundary Q_L = q_c drawn from its own piece; point at q_c/1.25 -> factor 1.25, m = 0.25
    chart = chart_of(ParametricVertical(4e-5))
    pm = point_margins(chart, 3.2e-5, 1e-6)
    b = pm.boundaries[0]
    assert b.ql_factor_up == pytest.approx(1.25, rel=1e-12)
    assert pm.symmetric_margin == pytest.approx(0.25, abs=1e-9)
    assert b.log_distance == pytest.approx(math.log10(1.25), abs=1e-12)
    # the line is followed beyond the chart range (the margin window): a point near the chart's bottom edge
    pm = point_margins(chart, 3.2e-5, 1.2e-7)
    assert pm.symmetric_margin == pytest.approx(0.25, abs=1e-9)
