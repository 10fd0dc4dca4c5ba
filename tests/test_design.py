"""Inverse design (lowgmap.physics.studies.design): optima with known answers, active constraints, sensitivities, errors.

The test lines are straight in log-log axes and move with a design input in a known way, so the best
placement of an operating envelope between them has a closed form (derived in the comments, marked
"closed form"). The drift-flux lines of Dukler et al. (1988) have fixed flow ratios: no geometry
input moves them, which the optimiser must report as zero sensitivity.
"""
import math

import numpy as np
import pytest

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.physics.models.boundary import ExplicitBoundary
from lowgmap.physics.case import Case, FlowRange, ModelChoice
from lowgmap.physics.studies.design import (DesignConstraint, DesignGoal, DesignVariable, nominal_design_value, optimize_design,
                            quantity_value)
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.geometry.sections import Circle
from lowgmap.physics.models.tube import drift_flux_flow_ratio
from lowgmap.physics.properties.wetting import Wetting

FLUID = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
RANGE = FlowRange(1e-7, 1e-3, 1e-7, 1e-3)


class RatioLine(ExplicitBoundary):
    """Test line Q_G = c (L / 1 m)^p (D / 10 mm)^q (sigma / sigma_0)^s Q_L: a flow ratio set by the design."""

    citation = "closed-form test line"
    straight_in_log_log = True

    def __init__(self, name, c, below, above, p=1.0, q=0.0, s=0.0):
        self.name = self.label = name
        self.c, self.p, self.q, self.s = c, p, q, s
        self.regime_below, self.regime_above = below, above

    def ratio(self, case):
        return (self.c * case.length ** self.p * (case.section.hydraulic_diameter / 0.01) ** self.q
                * (case.fluid.sigma / 0.0727) ** self.s)

    def qg_of_ql(self, case, ql, **consts):
        return self.ratio(case) * np.asarray(ql, dtype=float)


def case_with(*lines, length=0.5, diameter=0.01, fluid=FLUID):
    return Case(fluid, Circle(diameter), Wetting(0.0), length, 1e-5, RANGE,
                models=tuple(ModelChoice(m.name) for m in lines), extra=(("custom_boundaries", tuple(lines)),))


QL, QG = (1e-5, 3e-5), (2e-5, 4e-5)
R_LO, R_HI = QG[0] / QL[1], QG[1] / QL[0]          # flow ratios of the envelope: 2/3 .. 4


def m_of(ratio):
    """Closed form: margin m with (1 - m)/(1 + m) = ratio (ratio < 1)."""
    return (1 - ratio) / (1 + ratio)


def test_interior_optimum_between_two_lines_moving_with_length():
    # lines Q_G = 0.1 L Q_L (below) and Q_G = 10 L Q_L (above). Closed form: margin to the lower
    # line (1-m)/(1+m) = 0.1 L / r_lo, to the upper one (1-m)/(1+m) = r_hi / (10 L); the worst case is
    # largest where they are equal: L* = sqrt(r_lo r_hi / (0.1 x 10)), (1-m)/(1+m) = sqrt(0.1 r_hi / (10 r_lo))
    case = case_with(RatioLine("low", 0.1, "a", "b"), RatioLine("high", 10.0, "b", "c"))
    # no regime given: the regime at the envelope centre on the base design (L = 0.5 m: lines at ratios
    # 0.05 and 5, centre at ratio 1.63, so "b")
    goal = DesignGoal(QL, QG, (DesignVariable("length", 0.1, 10.0, "log"),), required_margin=0.5, starts=2)
    res = optimize_design(case, goal)
    L_star = math.sqrt(R_LO * R_HI / 1.0)
    m_star = m_of(math.sqrt(0.1 * R_HI / (10.0 * R_LO)))
    assert res.values["length"] == pytest.approx(L_star, rel=1e-6)
    assert res.margin == pytest.approx(m_star, abs=1e-8)
    assert res.inside and res.meets_required and res.regime == "b"
    assert set(res.limiting) == {"low", "high"} and res.active == ()
    s = res.sensitivity[0]
    assert s.change_up < 0 and s.change_down < 0 and s.at_bound is None       # a peak: both ways lose margin
    assert res.case.length == pytest.approx(L_star, rel=1e-6)
    assert res.to_dict()["values"]["length"] == res.values["length"]


def test_optimum_on_an_upper_bound_and_on_a_constraint():
    case = case_with(RatioLine("low", 0.1, "a", "b"), RatioLine("high", 10.0, "b", "c"))
    # the bound stops the search below L* = 1.633 m: closed form, the upper line limits,
    # (1 - m)/(1 + m) = r_hi / (10 L_max)
    goal = DesignGoal(QL, QG, (DesignVariable("length", 0.5, 1.2),), regime="b", starts=2)
    res = optimize_design(case, goal)
    assert res.values["length"] == pytest.approx(1.2, abs=1e-9)
    assert res.margin == pytest.approx(m_of(R_HI / 12.0), abs=1e-9)
    assert res.active == ("length at its upper bound 1.2",) and res.limiting == ("high",)
    assert res.sensitivity[0].at_bound == "upper" and res.sensitivity[0].change_up > 0
    # the same with a constraint on a derived quantity: volume = area x length <= A x 1.2 m
    area = math.pi / 4 * 0.01 ** 2
    goal = DesignGoal(QL, QG, (DesignVariable("length", 0.5, 5.0),), regime="b", starts=2,
                      constraints=(DesignConstraint("volume", upper=area * 1.2),))
    res = optimize_design(case, goal)
    assert res.values["length"] == pytest.approx(1.2, rel=1e-6)
    assert res.margin == pytest.approx(m_of(R_HI / 12.0), abs=1e-6)
    assert any(a.startswith("volume at its upper limit") for a in res.active)


def test_two_variables_one_binding_one_free():
    # lower line moves with length (Q_G/Q_L = 0.3 L), upper line with diameter (Q_G/Q_L = 8 D/10 mm).
    # Closed form: the upper line's margin grows with D, so D ends on its upper bound, where
    # m_high = m(r_hi / 9.6) = 0.412, below m_low(L) for every L up to L_max: the worst case is
    # m_high, and any length with m_low(L) >= m_high is as good (zero sensitivity to L there)
    case = case_with(RatioLine("low", 0.3, "a", "b"), RatioLine("high", 8.0, "b", "c", p=0.0, q=1.0))
    goal = DesignGoal(QL, QG, (DesignVariable("length", 0.5, 2.0), DesignVariable("size", 0.008, 0.012)),
                      regime="b", starts=3)
    res = optimize_design(case, goal)
    m_high = m_of(R_HI / (8.0 * 1.2))
    ratio = (1 - m_high) / (1 + m_high)                  # the lower line may come as close as this
    L_max = ratio * R_LO / 0.3
    assert res.values["size"] == pytest.approx(0.012, abs=1e-8)
    assert res.margin == pytest.approx(m_high, abs=1e-8)
    assert 0.5 - 1e-9 <= res.values["length"] <= L_max + 1e-6
    assert res.active[-1] == "size at its upper bound 0.012" and res.limiting == ("high",)
    sens = {s.variable: s for s in res.sensitivity}
    assert sens["size"].change_down < 0 and sens["size"].at_bound == "upper"
    if res.values["length"] < 0.99 * L_max:
        assert sens["length"].change_up == 0.0 and sens["length"].change_down == 0.0


def test_drift_flux_envelope_margin_is_fixed_by_the_line_ratios():
    # Dukler et al. (1988): lines of constant Q_G/Q_L = C0 a/(1 - C0 a); an envelope in the slug regime
    # keeps the same margin whatever the tube size (closed form from the two line ratios)
    doc = load_case(sample_case_path("condensate_line"))
    k1, k2 = drift_flux_flow_ratio(0.45, 1.2), drift_flux_flow_ratio(0.8, 1.2)
    ql, qg = (1e-5, 1.5e-5), (2.5e-5, 3e-5)
    r_lo, r_hi = qg[0] / ql[1], qg[1] / ql[0]
    assert k1 < r_lo and r_hi < k2
    goal = DesignGoal(ql, qg, (DesignVariable("size", 0.006, 0.03, "log"),),
                      regime="elongated bubbles / slugs", starts=1, screen=8, max_evaluations=20)
    res = optimize_design(doc.case, goal)
    assert res.margin == pytest.approx(min(m_of(k1 / r_lo), m_of(r_hi / k2)), abs=1e-9)
    assert res.sensitivity[0].change_up == 0.0 and res.sensitivity[0].change_down == 0.0


def test_best_fluid_is_chosen():
    # upper line moves with surface tension: Q_G/Q_L = 10 L sigma/sigma_0 (test line); water's surface
    # tension falls with temperature (IAPWS R1-76), so the warmer water brings the line closer
    case = case_with(RatioLine("low", 0.1, "a", "b"), RatioLine("high", 10.0, "b", "c", s=1.0), length=1.0)
    goal = DesignGoal(QL, QG, (DesignVariable("length", 0.8, 1.0),), regime="b", starts=1, screen=8,
                      fluids=({"temperature": 293.15}, {"temperature": 353.15}))
    res = optimize_design(case, goal)
    assert res.fluid == {"temperature": 293.15}
    assert len(res.candidates) == 2 and set(res.candidates["fluid"]) == {"temperature=293.15", "temperature=353.15"}
    sigma = res.case.fluid.sigma
    L = res.values["length"]
    expected = min(m_of(0.1 * L / R_LO), m_of(R_HI / (10.0 * L * sigma / 0.0727)))
    assert res.margin == pytest.approx(expected, abs=1e-8)


def test_invalid_designs_are_avoided():
    # below L = 0.3 m the upper line's model refuses the design (a value out of its range)
    class Refusing(RatioLine):
        def qg_of_ql(self, case, ql, **consts):
            if case.length < 0.3:
                raise ValueError("length below the model's range")
            return super().qg_of_ql(case, ql)

    case = case_with(RatioLine("low", 0.1, "a", "b"), Refusing("high", 10.0, "b", "c"), length=1.0)
    goal = DesignGoal(QL, QG, (DesignVariable("length", 0.1, 10.0, "log"),), regime="b", starts=2)
    res = optimize_design(case, goal)
    assert res.values["length"] == pytest.approx(math.sqrt(R_LO * R_HI), rel=1e-6)


def test_quantities_and_nominal_values():
    doc = load_case(sample_case_path("wedge_separator"))
    case = doc.case
    s = case.section
    assert quantity_value(case, "flow_area") == pytest.approx(s.area)
    assert quantity_value(case, "volume") == pytest.approx(s.area * case.length)
    assert quantity_value(case, "section.wall_length") == s.wall_length
    assert nominal_design_value(case, "half_angle") == pytest.approx(math.radians(6.0))
    assert nominal_design_value(case, "constant.injector_width_ratio") == 0.15
    assert nominal_design_value(case, "model.corner_separation.safety_factor") == 2.0
    assert nominal_design_value(case, "liquid") is None
    with pytest.raises(ValueError, match="unknown constrained quantity"):
        quantity_value(case, "mass")


def test_errors():
    with pytest.raises(ValueError, match="low must be < high"):
        DesignVariable("length", 2.0, 1.0)
    with pytest.raises(ValueError, match="log scale"):
        DesignVariable("contact_angle", 0.0, 1.0, "log")
    with pytest.raises(ValueError, match="list fluids"):
        DesignVariable("liquid", 0.0, 1.0)
    with pytest.raises(ValueError, match="at least one design variable"):
        DesignGoal(QL, QG, ())
    with pytest.raises(ValueError, match="required_margin must be within"):
        DesignGoal(QL, QG, (DesignVariable("length", 1, 2),), required_margin=1.5)
    with pytest.raises(ValueError, match="upper or a lower limit"):
        DesignConstraint("length")
    with pytest.raises(ValueError, match="fluid option"):
        DesignGoal(QL, QG, (DesignVariable("length", 1, 2),), fluids=({"sigma": 0.05},))
    case = case_with(RatioLine("low", 0.1, "a", "b"), RatioLine("high", 10.0, "b", "c"))
    with pytest.raises(ValueError, match="unknown sweep variable"):
        optimize_design(case, DesignGoal(QL, QG, (DesignVariable("bore", 1, 2),)))
    with pytest.raises(ValueError, match="unknown regime 'd'; regimes on this chart: a; b; c"):
        optimize_design(case, DesignGoal(QL, QG, (DesignVariable("length", 1, 2),), regime="d"))
    infeasible = DesignGoal(QL, QG, (DesignVariable("length", 1.0, 2.0),), regime="b", starts=1, screen=4,
                            max_evaluations=5, constraints=(DesignConstraint("length", upper=0.5),))
    with pytest.raises(ValueError, match="no feasible design"):
        optimize_design(case, infeasible)
