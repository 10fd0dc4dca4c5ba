"""Validity of test points and agreement with the chart (lowgmap.physics.studies.agreement).

Check values: the Bond number and capillary time of water over 1 cm ([calc] from Bo = delta_rho g L^2 / sigma
and t_ic = sqrt(rho L^3 / sigma): Bo(1 g) = 13.45, t_ic = 0.117 s); platform figures are the typical figures of
each class of facility (entered from memory, as the platform table says); transit times and log distances to straight
lines in log-log axes are closed forms computed by hand in the comments. Test points below are made up
for the purpose of each check; they are inputs, never check values.
"""
import json
import math
from types import SimpleNamespace as NS

import numpy as np
import pytest

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.app.files.testpoints import read_test_points
from lowgmap.physics.studies.agreement import (ValidityCriteria, agreement, confusion_matrix, map_regimes, point_arrays,
                               point_validity)
from lowgmap.physics.models.boundary import PowerLawBoundary
from lowgmap.physics.case import STANDARD_GRAVITY, Case, FlowRange
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.geometry.sections import Circle
from lowgmap.physics.properties.wetting import Wetting

G0 = STANDARD_GRAVITY
D = 0.01
AREA = math.pi * D ** 2 / 4
# water, rounded inputs of the [calc] checks (delta rho = 998.2 kg/m^3, sigma = 72.8 mN/m), 1 cm tube
WATER_1CM = NS(fluid=NS(rho_l=998.2, rho_g=0.0, mu_l=1.0e-3, sigma=0.0728),
               section=NS(length_scale=D, area=AREA), length=0.5)
SAMPLES = sample_case_path().parent


def one_point(platform="", g=math.nan, duration=math.nan, ql=1e-6, qg=0.5e-6):
    return {"ql_m3_s": [ql], "qg_m3_s": [qg], "platform": [platform], "g_m_s2": [g], "duration_s": [duration]}


# ------------------------------------------------------------------------------------------ validity

@pytest.mark.parametrize("platform,g_g0,duration", [
    # typical figures of the class (from memory): upper-end residual acceleration and the short end of
    # the low-g time of one experiment
    ("short drop tower", 1e-3, 2.0),
    ("drop tube", 1e-5, 4.5),
    ("parabolic flight", 1e-2, 22.0),
    ("sounding rocket", 1e-4, 180.0),   # 3-13 min: the short end is used
])
def test_bond_number_and_duration_from_the_platform_table(platform, g_g0, duration):
    v = point_validity(WATER_1CM, one_point(platform))
    assert v.g_from[0] == "platform" and v.duration_from[0] == "platform"
    assert v.g[0] == pytest.approx(g_g0 * G0, rel=1e-12)
    assert v.duration[0] == pytest.approx(duration)
    # [calc] from Bo = delta_rho g L^2 / sigma: water, L = 1 cm, Bo(1 g) = 13.45; Bo scales with g
    assert v.bond[0] == pytest.approx(13.45 * g_g0, rel=2e-3)


def test_capillary_and_transit_times_by_hand():
    v = point_validity(WATER_1CM, one_point("sounding rocket"))
    # [calc] from t_ic = sqrt(rho L^3 / sigma): 0.117 s for water over 1 cm;
    # t_vc = mu L / sigma = 1e-5 / 0.0728 = 1.37e-4 s is smaller, so t_ic counts
    assert v.t_capillary[0] == pytest.approx(0.117, abs=6e-4)
    # closed form: transit = l A / (Q_L + Q_G) = 0.5 * 7.854e-5 / 1.5e-6 = 26.18 s
    assert v.t_transit[0] == pytest.approx(0.5 * AREA / 1.5e-6, rel=1e-12)
    assert v.t_transit[0] == pytest.approx(26.18, abs=5e-3)
    assert v.t_required[0] == pytest.approx(v.t_capillary[0] + v.t_transit[0])
    assert np.isnan(v.t_migration[0])                   # no chart with corner models given
    # 2 x 26.3 s = 52.6 s needed (safety factor 2, common practice, no source): 180 s is enough
    assert v.valid[0] and v.reasons[0] == ()


def test_short_low_g_time_is_flagged_with_the_numbers():
    v = point_validity(WATER_1CM, one_point("short drop tower"))
    assert not v.valid[0]
    (reason,) = v.reasons[0]
    assert "not enough low-g time" in reason and "has 2 s" in reason and "26.2 s" in reason
    # a shorter observation length brings the need below the drop time: 2 (0.117 + 0.5 * 26.18 / 50) = 0.76 s
    v = point_validity(WATER_1CM, one_point("short drop tower"), ValidityCriteria(observation_length=0.01))
    assert v.valid[0]
    assert v.observation_length == 0.01
    assert v.t_transit[0] == pytest.approx(26.18 / 50, abs=1e-4)


def test_safety_factor_is_a_parameter():
    # needs 26.30 s; 30 s is enough with a factor 1, not with 2
    pts = one_point("sounding rocket", duration=30.0)
    assert not point_validity(WATER_1CM, pts).valid[0]
    assert point_validity(WATER_1CM, pts, ValidityCriteria(safety_factor=1.0)).valid[0]


def test_point_values_override_the_platform_and_large_bond_numbers_are_flagged():
    v = point_validity(WATER_1CM, one_point("sounding rocket", g=0.1 * G0))
    assert v.g_from[0] == "point" and v.duration_from[0] == "platform"
    assert v.bond[0] == pytest.approx(1.345, rel=2e-3)            # 13.45 x 0.1 ([calc] from Bo)
    assert not v.valid[0]
    assert any("Bond number 1.34 >= 1" in r and "Brauner 1990" in r for r in v.reasons[0])
    # Brauner (1990) limit Bo < 1 is a parameter
    assert point_validity(WATER_1CM, one_point("sounding rocket", g=0.1 * G0),
                          ValidityCriteria(bond_max=2.0)).valid[0]


def test_unknown_platform_without_values_cannot_support_a_conclusion():
    v = point_validity(WATER_1CM, one_point("balloon"))
    assert not v.valid[0]
    assert v.g_from[0] == "unknown" and v.duration_from[0] == "unknown"
    assert any("'balloon' is not in the built-in table" in r for r in v.reasons[0])
    v = point_validity(WATER_1CM, one_point("balloon", g=1e-4 * G0, duration=600.0))
    assert v.valid[0]


def test_validity_scaling_invariants():
    pts = {"ql_m3_s": [1e-6, 2e-6], "qg_m3_s": [1e-6, 2e-6], "platform": ["orbital station"] * 2,
           "g_m_s2": [1e-5, 1e-4]}
    v = point_validity(WATER_1CM, pts)
    assert v.bond[1] / v.bond[0] == pytest.approx(10.0)          # Bo proportional to g
    assert v.t_transit[0] / v.t_transit[1] == pytest.approx(2.0)  # transit inversely proportional to the flow


@pytest.mark.parametrize("kw,field", [({"bond_max": -1.0}, "bond_max"), ({"safety_factor": 0.5}, "safety_factor"),
                                      ({"observation_length": 0.0}, "observation_length"),
                                      ({"capillary_multiple": -1.0}, "capillary_multiple")])
def test_criteria_errors_name_the_field(kw, field):
    with pytest.raises(ValueError, match=field):
        ValidityCriteria(**kw)


def test_points_need_flow_columns():
    with pytest.raises(ValueError, match="ql_m3_s and qg_m3_s"):
        point_arrays({"ql": [1.0]})
    d = point_arrays({"ql_m3_s": [1e-6, 2e-6], "qg_m3_s": [1e-6, 1e-6]})
    assert d["test_id"].tolist() == ["#1", "#2"]


def test_sample_points_drop_tower_times_by_hand():
    doc = load_case(sample_case_path())
    tps = read_test_points(SAMPLES / "drop_tower_points.csv")
    v = point_validity(doc.case, tps)
    ids = tps.points["test_id"].tolist()
    i = ids.index("DT-08")                                        # 300 + 1.2 mL/min in the 12.7 mm, 1.5 m line
    # closed form: 1.5 m x pi (12.7 mm)^2 / 4 / (301.2 mL/min) = 37.85 s
    assert v.t_transit[i] == pytest.approx(1.5 * math.pi * 0.0127 ** 2 / 4 / (301.2e-6 / 60), rel=1e-9)
    assert v.t_transit[i] == pytest.approx(37.85, abs=0.01)
    drops = [k for k, d in enumerate(tps.points["duration_s"].fillna(2.2)) if d <= 2.2 + 1e-9]
    assert drops and not v.valid[drops].any()                    # short drops (<= 2.2 s): too short for 1.5 m
    k = ids.index("DT-05")                                        # no values in the file: the platform's
    assert v.g_from[k] == "platform" and v.g[k] == pytest.approx(1e-3 * G0)  # short drop tower (from memory)


def test_migration_time_enters_with_corner_models():
    doc = load_case(sample_case_path("wedge_separator"))
    chart = Chart.build(doc.case)
    fr = doc.case.flow_range
    pts = {"ql_m3_s": [1e-7, 3e-7, 1e-6], "qg_m3_s": [5e-9, 1.5e-8, 1e-7], "platform": ["orbital station"] * 3}
    v = point_validity(doc.case, pts, chart=chart)
    assert np.isfinite(v.t_migration).any()
    ok = np.isfinite(v.t_migration)
    assert np.all(v.t_migration[ok] >= 0)
    assert np.all(v.t_required[ok] >= v.t_migration[ok])
    assert fr.ql_min < 1e-7 < fr.ql_max


# ------------------------------------------------------------------------------------------ labels, matrix

def test_confusion_matrix_of_a_hand_made_set():
    obs = ["a", "a", "a", "b", "b", "c", "x", ""]
    pred = ["a", "a", "b", "b", "a", "c", "a", "b"]
    cm = confusion_matrix(obs, pred, ["a", "b", "c"])
    # counted by hand: rows observed a, b, c, then the unknown label x; the empty label is skipped
    assert cm.observed == ("a", "b", "c", "x") and cm.predicted == ("a", "b", "c")
    assert cm.counts == ((2, 1, 0), (1, 1, 0), (0, 0, 1), (1, 0, 0))
    assert cm.agreeing == 4 and cm.compared == 6 and cm.total == 7
    assert cm.fraction == pytest.approx(4 / 6)
    assert cm.count("b", "a") == 1
    assert "observed \\ predicted" in cm.format()


def test_regime_map_ignores_case_and_spaces():
    out = map_regimes(["Bubbly ", "ANNULAR", "foam"], {"bubbly": "dispersed bubbles"},
                      ["dispersed bubbles", "annular"])
    assert out == ["dispersed bubbles", "annular", "foam"]
    with pytest.raises(TypeError, match="regime_map"):
        map_regimes(["a"], {"a": 1}, ["a"])


# ------------------------------------------------------------------------------------------ agreement

FLUID = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
RANGE = FlowRange(1e-7, 1e-3, 1e-7, 1e-3)


def chart_of(*lines):
    return Chart.build(Case(FLUID, Circle(0.01), Wetting(0.0), 0.05, 1e-5, RANGE), list(lines))


def test_agreement_on_a_hand_made_set():
    chart = chart_of(PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs"))     # Q_G = Q_L
    pts = {"test_id": ["p1", "p2", "p3", "p4", "p5", "p6"],
           "ql_m3_s": [1e-5] * 6, "qg_m3_s": [0.5e-5, 2e-5, 0.8e-5, 3e-5, 0.2e-5, 4e-5],
           "observed_regime": ["Bubbly", "slugs", "slugs", "bubbles", "froth", "slugs"],
           "platform": ["short drop tower"] * 5 + ["parabolic flight"],
           "g_m_s2": [np.nan] * 5 + [G0]}                      # p6: 1 g, Bond number far above 1
    res = agreement(chart, pts, regime_map={"bubbly": "bubbles"})
    by = {p.test_id: p for p in res.points}
    assert [by[k].predicted for k in ("p1", "p2", "p3", "p4")] == ["bubbles", "slugs", "bubbles", "slugs"]
    assert [by[k].agrees for k in ("p1", "p2", "p3", "p4", "p5")] == [True, True, False, False, None]
    assert by["p1"].observed == "bubbles" and by["p1"].label == "Bubbly"
    assert not by["p6"].valid and by["p6"].agrees is True
    # all points: 3 agree of 5 compared (froth is not a chart regime); valid points: 2 of 4
    assert res.confusion_all.counts == ((1, 1), (1, 2), (1, 0))
    assert res.fraction_all == pytest.approx(3 / 5) and res.fraction_valid == pytest.approx(2 / 4)
    assert res.unknown_labels == (("froth", 1),)
    assert res.n_points == 6 and res.n_valid == 5
    (b,) = res.by_boundary
    assert b.name == "rig_line" and [q.test_id for q in b.points] == ["p3", "p4"]
    # closed form: distance from (x, y) to the line y = x in log-log axes is |y - x| / sqrt(2)
    assert b.points[0].log_distance == pytest.approx(abs(math.log10(0.8)) / math.sqrt(2), rel=1e-6)
    assert b.points[1].log_distance == pytest.approx(math.log10(3.0) / math.sqrt(2), rel=1e-6)
    assert all(q.crossing_explains for q in b.points)
    json.dumps(res.to_dict(), allow_nan=False)                   # JSON-ready
    assert "6 test point(s), 5 valid" in res.summary()


def test_disagreement_is_attributed_to_the_nearest_line_whose_far_side_is_observed():
    chart = chart_of(PowerLawBoundary("low", 0.1, 1.0, "a", "b"), PowerLawBoundary("high", 10.0, 1.0, "b", "c"))
    pts = {"ql_m3_s": [1e-5, 1e-5, 1e-5], "qg_m3_s": [1e-7, 1e-7, 1e-5], "observed_regime": ["b", "c", "a"],
           "platform": ["orbital station"] * 3}
    res = agreement(chart, pts)
    p_b, p_c, p_a = res.points
    # ratio 0.01 is one decade below Q_G = 0.1 Q_L: distance 1/sqrt(2) decade (closed form)
    assert (p_b.boundary, p_b.crossing_explains) == ("low", True)
    assert p_b.log_distance == pytest.approx(1 / math.sqrt(2), rel=1e-6)
    # "c" lies across both lines: the nearest line whose far side is "c" is "high", 3 decades of ratio away
    assert (p_c.boundary, p_c.crossing_explains) == ("high", True)
    assert p_c.log_distance == pytest.approx(3 / math.sqrt(2), rel=1e-6)
    assert (p_a.boundary, p_a.crossing_explains) == ("low", True)
    assert p_a.log_distance == pytest.approx(1 / math.sqrt(2), rel=1e-6)


def test_agreement_of_the_sample_points_with_a_regime_map():
    doc = load_case(sample_case_path())
    chart = Chart.build(doc.case)
    tps = read_test_points(SAMPLES / "drop_tower_points.csv")
    raw = agreement(chart, tps, regime_map={"annular (gas core)": "annular"})
    mapped = agreement(chart, tps)     # the sample names its annular points as the chart does: no map needed
    labels = tps.points["observed_regime"].tolist()
    assert dict(raw.unknown_labels)["annular"] == labels.count("annular (gas core)")
    # every bundled label maps to a chart regime: nothing is set aside for its label (a sample row
    # relabelled to a name the chart does not draw would fail here)
    assert dict(mapped.unknown_labels) == {}
    assert mapped.confusion_all.compared == len(labels) == 25
    assert mapped.confusion_all.total == len(labels)
    for p in mapped.points:
        assert p.valid == (not p.reasons)
        assert (p.agrees is None) == (p.observed not in chart.regime_names)
    disagree = [p.test_id for p in mapped.points if p.agrees is False]
    assert sorted(disagree) == sorted(q.test_id for b in mapped.by_boundary for q in b.points)


def test_default_validity_criteria_are_pinned_with_their_source():
    crit = ValidityCriteria()
    # Brauner (1990), Int. Commun. Heat Mass Transf. 17(3):271-281: gravity negligible for Eo < 1
    assert crit.bond_max == 1.0 and "Brauner (1990)" in ValidityCriteria.SOURCES["bond_max"]
    # a choice, common practice, no source: twice the required low-g time, one capillary time to settle
    assert crit.safety_factor == 2.0 and "no source" in ValidityCriteria.SOURCES["safety_factor"]
    assert crit.capillary_multiple == 1.0 and "no source" in ValidityCriteria.SOURCES["capillary_multiple"]
    assert crit.observation_length is None                       # design input: the whole conduit
    d = crit.to_dict()
    assert d["bond_max_source"] == "Brauner (1990)" and "choice" in d["safety_factor_source"]
    assert set(ValidityCriteria.SOURCES) == {"bond_max", "safety_factor", "capillary_multiple", "observation_length"}


# ------------------------------------------------------------------------------------------ own gravity level

def _upflow_case(orientation=None):
    from lowgmap.physics.case import Orientation
    from lowgmap.physics.examples import example_case
    o = Orientation.vertical_up() if orientation is None else orientation
    # water/air (example values), 12.7 mm tube, 10 cm observed, flight level 1e-6 g0
    return example_case(Circle(0.0127), length=0.1, g=1e-6 * G0, flow_range=(1e-7, 1e-3, 1e-7, 1e-3), orientation=o)


# a 1-g ground point (twice: one level), a short-drop-tower point at 1e-3 g0 and a point at the flight level
_LEVEL_POINTS = {"test_id": ["G1", "T1", "G2", "F1"], "ql_m3_s": [1e-4, 1e-4, 3e-4, 1e-4],
                 "qg_m3_s": [1e-5, 1e-5, 3e-5, 2e-4],
                 "observed_regime": ["churn (oscillating froth)", "dispersed bubbles", "dispersed bubbles",
                                     "elongated bubbles / slugs"],
                 "platform": ["ground test", "short drop tower", "ground", "orbital station"],
                 "g_m_s2": [G0, 1e-3 * G0, G0, math.nan], "duration_s": [3600.0, 2.2, 3600.0, math.nan]}


def test_each_point_is_classified_on_the_chart_of_its_own_gravity_level():
    # catches every point classified on the flight chart (the 1-g point would read "dispersed bubbles", the
    # regime of the low-gravity lines, instead of the buoyancy-inclusive chart's), ground points set aside
    # by the Bond check although their chart includes buoyancy, or equal levels not grouped into one chart
    from lowgmap.physics.chart.composition import build_chart
    case = _upflow_case()
    flight = build_chart(case)
    res = agreement(flight, _LEVEL_POINTS)
    ground = build_chart(case.with_(g=G0))
    tower = build_chart(case.with_(g=1e-3 * G0))
    g1, t1, g2, f1 = res.points
    assert (g1.chart_g, t1.chart_g, g2.chart_g) == (G0, 1e-3 * G0, G0)
    assert f1.chart_g == 1e-6 * G0                                   # the orbital station's level: the case's
    assert g1.predicted == ground.regime_at(1e-4, 1e-5) == "churn (oscillating froth)"
    assert flight.regime_at(1e-4, 1e-5) == "dispersed bubbles"        # the flight chart would say otherwise
    assert t1.predicted == tower.regime_at(1e-4, 1e-5)
    assert g2.predicted == ground.regime_at(3e-4, 3e-5)
    assert g1.valid and g2.valid and g1.bond > 1.0                   # Bond reported, not a reason any more
    assert res.gravity_levels == (G0, 1e-3 * G0, 1e-6 * G0)          # one chart per level, in order of use
    assert dict(res.level_charts)[1e-6 * G0] is flight
    assert "churn (oscillating froth)" in res.regimes and res.unknown_labels == ()
    assert g1.agrees and t1.agrees and f1.agrees
    assert any("own gravity level" in n for n in g1.notes)
    assert res.to_dict()["points"][0]["chart_g_m_s2"] == G0
    json.dumps(res.to_dict(), allow_nan=False)


def test_unspecified_orientation_keeps_the_bond_rule_and_one_chart():
    # catches the per-level charts leaking into the low-gravity case (today's rule: high-g points set aside)
    from lowgmap.physics.case import Orientation
    from lowgmap.physics.chart.composition import build_chart
    chart = build_chart(_upflow_case(Orientation.unspecified()))
    res = agreement(chart, _LEVEL_POINTS)
    g1, t1, g2, f1 = res.points
    assert not g1.valid and any("Bond number" in r and "Brauner 1990" in r for r in g1.reasons)
    assert not g2.valid and t1.valid
    assert {p.chart_g for p in res.points} == {chart.case.g} and res.gravity_levels == (chart.case.g,)
    assert g1.predicted == chart.regime_at(1e-4, 1e-5) == "dispersed bubbles"
    assert res.regimes == chart.regime_names


def test_chart_at_gravity_follows_the_hand_over_and_keeps_explicit_lines():
    # catches a rebuilt chart that keeps the low-gravity lines as region-defining at 1 g (no hand-over), or
    # that drops lines the caller chose
    from lowgmap.physics.chart.composition import build_chart
    from lowgmap.physics.studies.agreement import chart_at_gravity
    case = _upflow_case()
    flight = build_chart(case)
    ground = chart_at_gravity(flight, G0)
    assert chart_at_gravity(flight, case.g) is flight
    assert ground.region_models[0][0].name == "bubble_slug_taitel_1980"
    assert flight.region_models[0][0].name == "bubble_slug_dukler_1988"
    own = build_chart(case, [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])
    again = chart_at_gravity(own, G0)
    assert [m.name for m, _ in again.region_models] == ["rig_line"] and again.case.g == G0


def test_corner_migration_time_uses_each_points_own_gravity_level():
    # catches the bubble migration time of a corner case taken at the case's gravity level for every point
    # (with an orientation, buoyancy helps the push on the 0.05 m/s^2 point: its bubbles arrive sooner)
    from lowgmap.physics.case import Orientation
    from lowgmap.physics.chart.composition import build_chart
    from lowgmap.physics.geometry.sections import Groove
    from lowgmap.physics.models import bubbles as bb
    from lowgmap.physics.models import corner as cm
    oil = FluidPair("silicone oil 5 cSt", "air", 298.15, 101325.0, 913.0, 4.565e-3, 0.0197, 1.184, 1.85e-5,
                    "typical, from memory", "typical, from memory")         # inputs, not checks
    case = Case(oil, Groove(math.radians(10.0), 0.01), Wetting(0.0), 0.05, 1e-6 * G0,
                FlowRange(1e-9, 1e-4, 1e-10, 1e-4), orientation=Orientation.horizontal())
    chart = build_chart(case)
    pts = {"ql_m3_s": [1e-7, 1e-7], "qg_m3_s": [1e-7, 1e-7], "g_m_s2": [1e-6 * G0, 0.05],
           "duration_s": [1e4, 1e4]}
    v = point_validity(case, pts, chart=chart, own_gravity=True)
    assert v.t_migration[1] < v.t_migration[0]
    d = cm.bubble_state(case, 1e-7, 1e-7)["effective_diameter"]
    geom = cm.corner_geometry(case)
    want = bb.migration_time(geom.path, d, injection=0.5, rho=913.0, mu=4.565e-3, sigma=0.0197, rho_gas=1.184,
                             buoyancy_acceleration=0.05)
    assert v.t_migration[1] == pytest.approx(want, rel=1e-12)
    flat = point_validity(case, pts, chart=chart)                     # one level: the case's for both
    assert flat.t_migration[1] == flat.t_migration[0] == pytest.approx(v.t_migration[0], rel=1e-12)


def test_validity_rule_says_what_decided_validity():
    """The validity sentence every view prints follows the rule applied. Bug caught: a ground-test point with
    Bond number ~500 counted valid (own gravity level) while the printed rule still says 'Bond number below 1'."""
    ground = load_case(sample_case_path("ground_test_loop"))          # invented sample: vertical upflow, 1 g
    pts = read_test_points(SAMPLES / "ground_loop_points.csv")
    own = agreement(Chart.build(ground.case), pts)
    assert own.own_gravity and "own gravity level" in own.validity_rule and "below 1" not in own.validity_rule
    assert any(p.bond > 1 and p.valid for p in own.points)           # consistent with the sentence
    flight = load_case(sample_case_path())                            # orientation unspecified
    plain = agreement(Chart.build(flight.case), read_test_points(SAMPLES / "drop_tower_points.csv"))
    assert not plain.own_gravity and "below 1 (Brauner 1990)" in plain.validity_rule
