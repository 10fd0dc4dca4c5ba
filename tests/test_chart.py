"""Tests of lowgmap.physics.chart.composition: chart composition, regions, intersections, classification, axes."""
import dataclasses
import math

import numpy as np
import pytest
from matplotlib.path import Path

from lowgmap.physics.models.boundary import ExplicitBoundary, PowerLawBoundary, get_model
from lowgmap.physics.case import Case, FlowRange, ModelChoice
from lowgmap.physics.chart.composition import AXIS_KINDS, Chart
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.properties.groups import suratman
from lowgmap.physics.geometry.sections import Circle, Groove, Rectangle
from lowgmap.physics.models.tube import (ANNULAR, BUBBLES, CAPILLARY_ZONE, INERTIA_ZONE, SLUGS, TRANSITIONAL_ZONE,
                                 drift_flux_flow_ratio, suratman_reynolds_ratio, weber_gas_velocity)
from lowgmap.physics.properties.wetting import Wetting

# Water 20 degC, 1 atm (IAPWS-95, IAPWS 2008 viscosity, IAPWS R1-76(2014)); air rho 1.205 kg/m^3 (handbook
# value, from memory), mu 1.81e-5 Pa s (from memory).
WATER_AIR = FluidPair("water", "air", 293.15, 101325.0, 998.207, 1.0016e-3, 0.07274, 1.205, 1.81e-5,
                      "IAPWS", "from memory")
D = 0.0127
RANGE = FlowRange(1e-7, 1e-3, 1e-7, 1e-2)
G_SOUNDING_ROCKET = 1e-4 * 9.80665  # sounding rocket <= 1e-4 g (typical figure, from memory)
DUKLER_PAIR = ("bubble_slug_dukler_1988", "slug_annular_dukler_1988")
WEBER_PAIR = ("slug_transitional_zhao_rezkallah_1993", "transitional_annular_zhao_rezkallah_1993")


def make_case(section=None, g=G_SOUNDING_ROCKET, models=(), extra=(), flow_range=RANGE):
    return Case(WATER_AIR, section or Circle(D), Wetting(0.0), 1.0, g, flow_range, models=models, extra=extra)


def log_area(px, py):
    x, y = np.log10(px), np.log10(py)
    return 0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))


def random_points(n, rng, fr=RANGE):
    ql = 10 ** rng.uniform(math.log10(fr.ql_min), math.log10(fr.ql_max), n)
    qg = 10 ** rng.uniform(math.log10(fr.qg_min), math.log10(fr.qg_max), n)
    return ql, qg


# --- structure of the default chart ---------------------------------------------------------------

def test_default_tube_chart():
    chart = Chart.build(make_case())
    assert chart.regime_names == (BUBBLES, SLUGS, ANNULAR)
    assert [b.name for b in chart.boundaries] == [
        "bubble_slug_dukler_1988", "slug_annular_dukler_1988", "bubble_slug_jayawardena_1997", *WEBER_PAIR]
    assert [b.role for b in chart.boundaries] == ["regions"] * 2 + ["comparison"] * 3
    assert chart.warnings == ()  # Eo = 0.002 at 1e-4 g; Su = 9.2e5 inside the data range
    assert {r.name for r in chart.regions} == set(chart.regime_names)
    for b in chart.boundaries:
        ok = np.isfinite(b.ql)
        assert ok.sum() >= 10 and b.valid_mask[ok].all()
        assert np.all((b.ql[ok] >= RANGE.ql_min * (1 - 1e-12)) & (b.ql[ok] <= RANGE.ql_max * (1 + 1e-12)))
        assert np.all((b.qg[ok] >= RANGE.qg_min * (1 - 1e-12)) & (b.qg[ok] <= RANGE.qg_max * (1 + 1e-12)))
        # every drawn point lies on its model's line
        g = get_model(b.name).implicit(make_case(), b.ql[ok], b.qg[ok], **dict(b.constants))
        assert np.max(np.abs(g)) < 1e-9


def test_curve_reaches_the_edges_of_the_range_exactly():
    chart = Chart.build(make_case(), models=DUKLER_PAIR)
    sa = chart.boundaries[1]  # slug-annular: Q_G = 24 Q_L leaves through the top at Q_L = 1e-2/24
    k = drift_flux_flow_ratio(0.8, 1.2)
    assert sa.ql[-1] == pytest.approx(RANGE.qg_max / k, rel=1e-10)
    assert sa.qg[-1] == pytest.approx(RANGE.qg_max, rel=1e-12)


# --- classification ---------------------------------------------------------------------------------

@pytest.mark.parametrize("models", [
    None,
    ("bubble_slug_jayawardena_1997", "slug_annular_dukler_1988"),
    WEBER_PAIR,
    ("bubble_slug_jayawardena_1997",),
])
def test_points_either_side_of_every_boundary(models):
    case = make_case()
    chart = Chart.build(case, models=models)
    assert chart.region_models
    ql = np.logspace(-6.5, -3.5, 13)
    for model, consts in chart.region_models:
        qg = model.qg_of_ql(case, ql, **dict(consts))
        inside = (qg > RANGE.qg_min) & (qg < RANGE.qg_max)
        assert inside.sum() >= 3
        assert np.all(chart.classify(ql[inside], qg[inside] * (1 - 1e-7)) == model.regime_below)
        assert np.all(chart.classify(ql[inside], qg[inside] * (1 + 1e-7)) == model.regime_above)
        # exactly on the line counts as above it (documented)
        assert np.all(chart.classify(ql[inside], qg[inside]) == model.regime_above)


def test_weber_zone_names():
    chart = Chart.build(make_case(), models=WEBER_PAIR)
    assert chart.regime_names == (CAPILLARY_ZONE, TRANSITIONAL_ZONE, INERTIA_ZONE)
    area = math.pi * D ** 2 / 4
    u1 = weber_gas_velocity(1.0, 1.205, 0.07274, D)
    assert chart.regime_at(1e-5, 0.9 * u1 * area) == CAPILLARY_ZONE
    assert chart.regime_at(1e-5, 1.1 * u1 * area) == TRANSITIONAL_ZONE
    assert chart.regime_at(1e-5, 1.1 * weber_gas_velocity(20.0, 1.205, 0.07274, D) * area) == INERTIA_ZONE


def test_classification_follows_the_void_fraction_definition():
    # independent check: alpha = Q_G / (C0 (Q_L + Q_G)) against alpha_c = 0.45 and 0.8, C0 = 1.2
    chart = Chart.build(make_case(), models=DUKLER_PAIR)
    rng = np.random.default_rng(1)
    ql, qg = random_points(20000, rng)
    alpha = qg / (1.2 * (ql + qg))
    expect = np.where(alpha < 0.45, BUBBLES, np.where(alpha < 0.8, SLUGS, ANNULAR))
    clear = (np.abs(alpha - 0.45) > 1e-9) & (np.abs(alpha - 0.8) > 1e-9)
    assert np.all(chart.classify(ql, qg)[clear] == expect[clear])


def test_vectorised_classification_agrees_with_point_by_point():
    chart = Chart.build(make_case())
    case = chart.case
    rng = np.random.default_rng(7)
    ql, qg = random_points(50000, rng)
    # the other half of the points sit just off the region-defining lines
    ql2 = 10 ** rng.uniform(-7, -3, 50000)
    model_idx = rng.integers(0, 2, 50000)
    line = np.where(model_idx == 0, get_model(DUKLER_PAIR[0]).qg_of_ql(case, ql2),
                    get_model(DUKLER_PAIR[1]).qg_of_ql(case, ql2))
    qg2 = line * (1 + rng.choice([-1.0, 1.0], 50000) * 10 ** rng.uniform(-12, -2, 50000))
    ql = np.concatenate([ql, ql2])
    qg = np.concatenate([qg, qg2])
    assert ql.size == 100000
    vec = chart.classify(ql, qg)
    assert set(np.unique(vec)) == set(chart.regime_names)
    # point by point through the chart (every 10th point: one call costs about 0.1 ms)
    sub = slice(0, None, 10)
    one = np.array([chart.regime_at(a, b) for a, b in zip(ql[sub].tolist(), qg[sub].tolist())])
    assert np.array_equal(vec[sub], one)
    # point by point for all 1e5 points with the void-fraction definition in plain Python
    # (alpha = Q_G / (C0 (Q_L + Q_G)) against 0.45 and 0.8, C0 = 1.2; ties within 1e-12 skipped)
    for a, b, name in zip(ql.tolist(), qg.tolist(), vec.tolist()):
        alpha = b / (1.2 * (a + b))
        if abs(alpha - 0.45) > 1e-12 and abs(alpha - 0.8) > 1e-12:
            assert name == (BUBBLES if alpha < 0.45 else SLUGS if alpha < 0.8 else ANNULAR)


def test_classify_shapes_and_points_outside_the_domain():
    chart = Chart.build(make_case())
    assert chart.classify(1e-5, 1e-6).shape == ()
    grid = chart.classify(np.full((3, 4), 1e-5), np.logspace(-7, -2, 4))
    assert grid.shape == (3, 4)
    bad = chart.classify(np.array([-1.0, np.nan, 1e-5, 1e-5]), np.array([1e-5, 1e-5, 0.0, 1e-6]))
    assert bad.tolist() == ["", "", "", BUBBLES]
    # points outside the chart range are classified too (the lines extend)
    assert chart.regime_at(1e-9, 1e-12) == BUBBLES


# --- regions and intersections ------------------------------------------------------------------------

@pytest.mark.parametrize("models", [None, WEBER_PAIR, ("bubble_slug_jayawardena_1997",)])
def test_regions_tile_the_chart_and_agree_with_classify(models):
    chart = Chart.build(make_case(), models=models)
    box = (math.log10(RANGE.ql_max / RANGE.ql_min)) * (math.log10(RANGE.qg_max / RANGE.qg_min))
    assert sum(log_area(r.polygon_ql, r.polygon_qg) for r in chart.regions) == pytest.approx(box, rel=1e-9)
    rng = np.random.default_rng(3)
    ql, qg = random_points(4000, rng)
    names = chart.classify(ql, qg)
    pts = np.column_stack([np.log10(ql), np.log10(qg)])
    covered = np.zeros(ql.size, dtype=bool)
    for r in chart.regions:
        inside = Path(np.column_stack([np.log10(r.polygon_ql), np.log10(r.polygon_qg)])).contains_points(pts)
        assert np.all(names[inside] == r.name)
        covered |= inside
    assert covered.mean() > 0.999


def test_intersection_of_void_fraction_and_weber_lines_is_exact():
    chart = Chart.build(make_case())
    hit = [i for i in chart.intersections
           if {i.first, i.second} == {"bubble_slug_dukler_1988", "slug_transitional_zhao_rezkallah_1993"}]
    assert len(hit) == 1
    area = math.pi * D ** 2 / 4
    qg_we = weber_gas_velocity(1.0, 1.205, 0.07274, D) * area       # closed form of the We_SG = 1 line
    assert hit[0].qg == pytest.approx(qg_we, rel=1e-12)
    assert hit[0].ql == pytest.approx(qg_we / drift_flux_flow_ratio(0.45, 1.2), rel=1e-10)
    # each curve carries the intersection point among its samples
    b = chart.boundaries[0]
    assert np.min(np.abs(b.ql[np.isfinite(b.ql)] / hit[0].ql - 1)) < 1e-12


def test_crossing_region_lines_follow_the_sequence_rule():
    # two user lines that cross at (1e-6, 1e-6): Q_G = Q_L and Q_G = 1e-3 Q_L^0.5 (closed form)
    a = PowerLawBoundary("line_a", 1.0, 1.0, "r1", "r2")
    b = PowerLawBoundary("line_b", 1e-3, 0.5, "r2", "r3")
    chart = Chart.build(make_case(), models=[a, b])
    assert chart.regime_names == ("r1", "r2", "r3")
    (x,) = chart.intersections
    assert (x.ql, x.qg) == (pytest.approx(1e-6, rel=1e-10), pytest.approx(1e-6, rel=1e-10))
    assert any("cross" in w and "sequence rule" in w for w in chart.warnings)
    assert chart.regime_at(1e-7, 2e-7) == "r2"     # between the lines before the crossing
    assert chart.regime_at(1e-4, 3e-5) == "r1"     # below A, above B: the lower-gas regime is kept
    assert chart.regime_at(1e-4, 1e-3) == "r3"
    box = 4.0 * 5.0
    assert sum(log_area(r.polygon_ql, r.polygon_qg) for r in chart.regions) == pytest.approx(box, rel=1e-9)
    rng = np.random.default_rng(5)
    ql, qg = random_points(3000, rng)
    names = chart.classify(ql, qg)
    pts = np.column_stack([np.log10(ql), np.log10(qg)])
    for r in chart.regions:
        inside = Path(np.column_stack([np.log10(r.polygon_ql), np.log10(r.polygon_qg)])).contains_points(pts)
        assert np.all(names[inside] == r.name)


def test_second_model_of_a_transition_is_a_comparison_line():
    chart = Chart.build(make_case(), models=("bubble_slug_jayawardena_1997", *DUKLER_PAIR))
    roles = {b.name: b.role for b in chart.boundaries}
    assert roles == {"bubble_slug_jayawardena_1997": "regions", "slug_annular_dukler_1988": "regions",
                     "bubble_slug_dukler_1988": "comparison"}
    # prepending: the slug-annular line listed first still ends up second in the sequence
    chart2 = Chart.build(make_case(), models=("slug_annular_dukler_1988", "bubble_slug_dukler_1988"))
    assert [m.name for m, _ in chart2.region_models] == list(DUKLER_PAIR)


# --- adaptive sampling ----------------------------------------------------------------------------------

class BentLine(ExplicitBoundary):
    """Closed-form curved test line: slope 2 at small Q_L, flat at large Q_L, bend at 1e-5 m^3/s."""

    name = "test_bent_line"
    label = "bent line"
    citation = "closed form used by the tests"
    regime_below = "low"
    regime_above = "high"

    def qg_of_ql(self, case, ql, **consts):
        s = np.asarray(ql, dtype=float) / 1e-5
        return 1e-3 * s ** 2 / (1 + s ** 2)


def test_sampling_is_dense_where_the_line_bends():
    case = make_case()
    chart = Chart.build(case, models=[BentLine()])
    b = chart.boundaries[0]
    ok = np.isfinite(b.ql)
    x, y = np.log10(b.ql[ok]), np.log10(b.qg[ok])
    xm = 0.5 * (x[:-1] + x[1:])
    exact = np.log10(BentLine().qg_of_ql(case, 10 ** xm))
    # chord error below the sampling tolerance (1e-3 of the 5-decade Q_G span)
    assert np.max(np.abs(exact - 0.5 * (y[:-1] + y[1:]))) < 5e-3
    dx = np.diff(x)
    near = np.abs(xm + 5.0) < 0.5
    far = np.abs(xm + 5.0) > 1.5
    assert np.median(dx[near]) <= 0.5 * np.median(dx[far]) * (1 + 1e-9)


class HoledLine(ExplicitBoundary):
    """Closed-form test line Q_G = Q_L with no value for 10^-4.95 < Q_L < 10^-4.88 m^3/s."""

    name = "test_holed_line"
    label = "line with a hole"
    citation = "closed form used by the tests"
    regime_below = "low"
    regime_above = "high"

    def qg_of_ql(self, case, ql, **consts):
        ql = np.asarray(ql, dtype=float)
        x = np.log10(ql)
        return np.where((x > -4.95) & (x < -4.88), np.nan, ql)


def test_hole_between_start_samples_is_drawn_with_its_edges():
    # closed form: the hole lies between two of the 25 start samples (1/6 decade apart, at -5 and
    # -4.833) and holds the middle of their interval; the drawn pieces must end on its edges within
    # the width left after the chart's 14 halvings, (1/6)/2^14 = 1.0e-5 decade. Catches a chart
    # sampler that only refines where the two ends differ in validity (it drew one straight chord
    # across the hole).
    chart = Chart.build(make_case(), models=[HoledLine()])
    x = np.log10(chart.boundaries[0].ql)
    gap = np.nonzero(np.isnan(x))[0]
    assert gap.size == 1
    step = (1 / 6) / 2 ** 14
    assert -4.95 - step <= x[gap[0] - 1] <= -4.95 + 1e-12
    assert -4.88 - 1e-12 <= x[gap[0] + 1] <= -4.88 + step


def test_table_breakpoints_are_sampled_exactly():
    spec = {"name": "rig_table", "kind": "table", "points": [[1e-6, 1e-5], [1e-5, 1e-5], [1e-4, 1e-3]],
            "regime_below": BUBBLES, "regime_above": SLUGS, "label": "our rig"}
    case = make_case(models=(ModelChoice.of("rig_table"),), extra=(("custom_boundaries", (spec,)),))
    chart = Chart.build(case)
    b = chart.boundaries[0]
    for q in (1e-6, 1e-5, 1e-4):
        assert np.min(np.abs(b.ql[np.isfinite(b.ql)] / q - 1)) < 1e-12
    # outside the table's Q_L span the line is flagged
    ok = np.isfinite(b.ql)
    inside_table = (b.ql[ok] >= 1e-6 * (1 - 1e-9)) & (b.ql[ok] <= 1e-4 * (1 + 1e-9))
    assert np.array_equal(b.valid_mask[ok], inside_table)
    assert any(w.startswith("our rig:") and "% of the drawn line" in w for w in chart.warnings)


# --- case-driven choices, warnings, errors ------------------------------------------------------------------

def test_model_constants_come_from_the_case():
    case = make_case(models=(ModelChoice.of("bubble_slug_dukler_1988", {"alpha_c": 0.3}),
                             ModelChoice.of("slug_annular_dukler_1988")))
    chart = Chart.build(case)
    b = chart.boundaries[0]
    assert dict(b.constants) == {"alpha_c": 0.3, "c0": 1.2}
    ok = np.isfinite(b.ql)
    assert np.allclose(b.qg[ok] / b.ql[ok], 0.36 / 0.64, rtol=1e-12)  # C0 alpha_c / (1 - C0 alpha_c)
    bad = make_case(models=(ModelChoice.of("bubble_slug_dukler_1988", {"alpha_c": 1.2}),))
    with pytest.raises(ValueError, match=r"bubble_slug_dukler_1988: constant alpha_c must be within \[0.05, 0.95\]"):
        Chart.build(bad)
    unknown = make_case(models=(ModelChoice.of("bubble_slug_dukler_1988", {"alpha": 0.3}),))
    with pytest.raises(ValueError, match="bubble_slug_dukler_1988 has no constant 'alpha'"):
        Chart.build(unknown)


def test_build_errors():
    with pytest.raises(ValueError, match="unknown boundary model 'no_such_model'; known models"):
        Chart.build(make_case(), models=["no_such_model"])
    with pytest.raises(ValueError, match="listed more than once: bubble_slug_dukler_1988"):
        Chart.build(make_case(), models=["bubble_slug_dukler_1988", "bubble_slug_dukler_1988"])
    groove = make_case(Groove(math.radians(30.0), 0.002))
    with pytest.raises(ValueError, match="does not apply to this case: .*open section"):
        Chart.build(groove, models=["bubble_slug_dukler_1988"])
    with pytest.raises(TypeError, match="registry name, a ModelChoice or a BoundaryModel"):
        Chart.build(make_case(), models=[3.0])


def test_open_section_gets_no_tube_models():
    chart = Chart.build(make_case(Groove(math.radians(30.0), 0.002)), models=())
    assert chart.boundaries == () and chart.regions == () and chart.regime_names == ()
    assert any("No boundary model applies" in w and "Open section (groove)" in w for w in chart.warnings)
    assert chart.classify(np.array([1e-5, 1e-4]), 1e-5).tolist() == ["", ""]


def test_gravity_warning_and_validity_flags_at_one_g():
    chart = Chart.build(make_case(g=9.80665))
    assert "NOT negligible" in chart.warnings[0] and "Eötvös" in chart.warnings[0]
    for b in chart.boundaries:
        assert not b.valid_mask.any()
    (flag,) = [w for w in chart.warnings if "outside the validity range of the sources (Eo = 21.7" in w]
    assert all(b.label in flag for b in chart.boundaries)


def test_duct_uses_hydraulic_diameter_with_a_note():
    rect = Rectangle(0.02, 0.005)
    chart = Chart.build(make_case(rect, flow_range=FlowRange(1e-7, 1e-3, 1e-7, 1e-1)))
    notes = [w for w in chart.warnings if "hydraulic diameter" in w]
    assert len(notes) == 1 and "8 mm" in notes[0] and "approximation" in notes[0]
    we1 = next(b for b in chart.boundaries if b.name == WEBER_PAIR[0])
    dh = 2 * 0.02 * 0.005 / 0.025  # D_h = 2wh/(w+h)
    assert np.allclose(we1.qg[np.isfinite(we1.qg)], weber_gas_velocity(1.0, 1.205, 0.07274, dh) * rect.area)


# --- axes and similarity ------------------------------------------------------------------------------------

def test_superficial_velocity_chart_is_independent_of_tube_area():
    # similarity: void-fraction lines depend on U_SG/U_SL only, so in superficial-velocity axes
    # a 12.7 mm and a 25.4 mm tube give the same chart when the flow ranges scale with the area
    small = Chart.build(make_case(Circle(D)), models=DUKLER_PAIR)
    big_range = FlowRange(4e-7, 4e-3, 4e-7, 4e-2)
    big = Chart.build(make_case(Circle(2 * D), flow_range=big_range), models=DUKLER_PAIR)
    us, ub = small.axes("superficial_velocity"), big.axes("superficial_velocity")
    for bs, bb in zip(small.boundaries, big.boundaries):
        xs, ys = us(bs.ql, bs.qg)
        xb, yb = ub(bb.ql, bb.qg)
        assert np.allclose(xs, xb, rtol=1e-9, equal_nan=True) and np.allclose(ys, yb, rtol=1e-9, equal_nan=True)
    for rs, rb in zip(small.regions, big.regions):
        assert rs.name == rb.name
        assert np.allclose(us(rs.polygon_ql, rs.polygon_qg), ub(rb.polygon_ql, rb.polygon_qg), rtol=1e-9)
    rng = np.random.default_rng(11)
    u_l, u_g = 10 ** rng.uniform(-2, 0.5, 2000), 10 ** rng.uniform(-3, 1.5, 2000)
    assert np.array_equal(small.classify(*us.to_flow(u_l, u_g)), big.classify(*ub.to_flow(u_l, u_g)))


def test_weber_and_reynolds_axes_place_lines_at_their_published_values():
    chart = Chart.build(make_case())
    we = chart.axes("weber")
    for name, value in zip(WEBER_PAIR, (1.0, 20.0)):   # Zhao & Rezkallah (1993) zone limits
        b = next(c for c in chart.boundaries if c.name == name)
        _, y = we(b.ql, b.qg)
        assert np.allclose(y[np.isfinite(y)], value, rtol=1e-12)
    re = chart.axes("reynolds")
    b = next(c for c in chart.boundaries if c.name == "bubble_slug_jayawardena_1997")
    x, y = re(b.ql, b.qg)
    ok = np.isfinite(x)
    su = suratman(998.207, 0.07274, D, 1.0016e-3)
    assert np.allclose(y[ok] / x[ok], suratman_reynolds_ratio(su), rtol=1e-12)  # Re_SG/Re_SL = K Su^n
    ratio = chart.axes("flow_ratio")
    b0 = chart.boundaries[0]
    _, r = ratio(b0.ql, b0.qg)
    assert np.allclose(r[np.isfinite(r)], drift_flux_flow_ratio(0.45, 1.2), rtol=1e-12)


@pytest.mark.parametrize("kind", AXIS_KINDS)
def test_axes_round_trip_and_labels(kind):
    chart = Chart.build(make_case(Rectangle(0.01, 0.004)))
    ax = chart.axes(kind)
    ql, qg = np.array([1e-6, 3e-5]), np.array([2e-4, 5e-6])
    back = ax.to_flow(*ax.to_xy(ql, qg))
    assert np.allclose(back[0], ql, rtol=1e-12) and np.allclose(back[1], qg, rtol=1e-12)
    assert ax.x_label.endswith(f"[{ax.x_unit}]") and ax.y_label.endswith(f"[{ax.y_unit}]")
    with pytest.raises(ValueError, match="axes kind must be one of flow, superficial_velocity"):
        chart.axes("log")


def test_chart_is_immutable():
    chart = Chart.build(make_case())
    with pytest.raises(dataclasses.FrozenInstanceError):
        chart.warnings = ("x",)
    with pytest.raises(ValueError, match="read-only"):
        chart.boundaries[0].ql[0] = 1.0
    with pytest.raises(ValueError, match="read-only"):
        chart.regions[0].polygon_qg[0] = 1.0


def test_coinciding_lines_are_reported_not_intersected():
    a = PowerLawBoundary("line_a", 2.0, 1.0, "r1", "r2")
    b = PowerLawBoundary("line_b", 2.0, 1.0, "r1", "r2", label="same line again")
    chart = Chart.build(make_case(), models=[a, b])
    assert chart.intersections == ()
    assert any("coincide" in w and "same line again" in w for w in chart.warnings)
    assert [c.role for c in chart.boundaries] == ["regions", "comparison"]


# --- display data of a chart (lowgmap.app.outputs.chartview; issue 17: chart frames under 50 ms) ------------------

def test_region_labels_lie_inside_their_regions_and_units_convert_exactly():
    # the label position is searched to 1 % of each region's smaller extent (cheaper than a fixed 1e-3
    # decade): it must still lie inside its region, away from the edge (bug caught: a tolerance so coarse that
    # the label lands on or outside the outline); flow units are one factor, the same as the unit library's
    # conversion (bug caught: a factor for the wrong unit, or m^3/s -> mL/min inverted)
    from lowgmap.app.files.casefile import load_case, sample_case_path
    from lowgmap.app.files.units import convert
    from lowgmap.app.outputs import chartview as cv
    from shapely.geometry import Point, Polygon
    from shapely.ops import polylabel

    chart = Chart.build(load_case(sample_case_path("wedge_separator")).case)
    view = cv.chart_view(chart)
    assert len(view.regions) >= 4
    for r in view.regions:
        lx, ly = np.log10(r.x), np.log10(r.y)
        px, py = math.log10(r.label_x), math.log10(r.label_y)
        assert Path(np.column_stack([lx, ly])).contains_point((px, py)), r.name
        # what shapely's polylabel promises (its documentation): the label's distance to the outline is within the
        # tolerance of the largest one, here compared with a fine search (1e-3 decade, the former setting)
        poly = Polygon(np.column_stack([lx, ly]))
        best = poly.exterior.distance(polylabel(poly, tolerance=1e-3))
        tol = max(1e-3, 1e-2 * min(np.ptp(lx), np.ptp(ly)))
        assert poly.exterior.distance(Point(px, py)) >= best - tol - 1e-12, r.name
    q = np.logspace(-10, -3, 50)
    for unit in ("mL/min", "L/min", "m^3/s", "uL/s"):
        np.testing.assert_allclose(cv._to_flow_unit(q, unit), convert(q, "flow", unit), rtol=1e-15, atol=0.0)
    np.testing.assert_allclose(cv._to_flow_unit(1e-6, "mL/min"), 60.0, rtol=1e-15)   # 1 mL/s = 60 mL/min


def test_regime_indices_of_names():
    # index of each regime name in the chart's list, -1 when absent, any shape (bug caught: a comparison
    # that misses a name or breaks on an empty or 2-d array)
    from lowgmap.physics.chart.lines import regime_indices

    names = ["a", "bb", "ccc"]
    got = regime_indices(names, np.array([["ccc", ""], ["a", "bb"], ["x", "a"]]))
    assert got.tolist() == [[2, -1], [0, 1], [-1, 0]]
    assert regime_indices(names, np.array([], dtype=str)).size == 0
    assert regime_indices(names, np.array(["bb", "a"], dtype=object)).tolist() == [1, 0]
