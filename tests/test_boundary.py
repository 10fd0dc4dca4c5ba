"""Tests of lowgmap.physics.models.boundary: constants, validity ranges, registry and empirical boundaries."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lowgmap.physics.models.boundary import (BOUNDARY_MODELS, BoundaryModel, Constant, PowerLawBoundary, TableBoundary,
                              Validity, boundary_from_spec, case_boundaries, get_model, model_names,
                              register, resolve_model, usable_models)
from lowgmap.physics.case import Case, FlowRange
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.geometry.sections import Circle, Groove
from lowgmap.physics.properties.wetting import Wetting

# Water 20 degC (IAPWS-95, IAPWS 2008 viscosity, IAPWS R1-76(2014)); air 1.205 kg/m^3 (handbook value, from
# memory), mu_g from memory.
WATER_AIR = FluidPair("water", "air", 293.15, 101325.0, 998.207, 1.0016e-3, 0.07274, 1.205, 1.81e-5,
                      "IAPWS", "from memory")
RANGE = FlowRange(1e-7, 1e-3, 1e-7, 1e-2)


def make_case(section=None, g=0.0, extra=()):
    return Case(WATER_AIR, section or Circle(0.0127), Wetting(0.0), 1.0, g, RANGE, extra=extra)


class SquareLaw(BoundaryModel):
    """Implicit-only test model: the line Q_G = k Q_L^2 (closed form for the bisection check)."""

    name = "test_square_law"
    label = "square law"
    citation = "closed form used by the tests"
    regime_below = "low"
    regime_above = "high"
    constants = (Constant("k", 3.0, "SI", "test value", 0.1, 10.0, "coefficient"),)
    validity = (Validity("re_sl", 1e2, 1e4, "test range"),)

    def implicit(self, case, ql, qg, **consts):
        c = self.resolve_constants(consts)
        return np.log(np.asarray(qg, dtype=float)) - np.log(c["k"] * np.asarray(ql, dtype=float) ** 2)


@pytest.fixture
def scratch_registry():
    """Remove the test's own registrations afterwards."""
    before = set(BOUNDARY_MODELS)
    yield
    for name in set(BOUNDARY_MODELS) - before:
        del BOUNDARY_MODELS[name]


# --- Constant, Validity ------------------------------------------------------------------

def test_constant_check_names_model_and_constant():
    c = Constant("alpha_c", 0.45, "-", "from memory", 0.05, 0.95, "critical void fraction")
    assert c.check(0.5, "some_model") == 0.5
    with pytest.raises(ValueError, match=r"some_model: constant alpha_c must be within \[0.05, 0.95\], got 1.5"):
        c.check(1.5, "some_model")
    with pytest.raises(TypeError, match="alpha_c"):
        c.check("a lot", "some_model")


def test_constant_default_must_lie_in_its_range():
    with pytest.raises(ValueError, match="constant x must be within"):
        Constant("x", 5.0, "-", "src", 0.0, 1.0)
    with pytest.raises(ValueError, match="snake_case"):
        Constant("Bad Name", 0.5, "-", "src", 0.0, 1.0)


def test_validity_checks_group_names_and_order():
    with pytest.raises(ValueError, match="validity group 'reynolds' is unknown; known groups: .*re_sl"):
        Validity("reynolds", 1.0, 2.0, "src")
    with pytest.raises(ValueError, match="low must be < high"):
        Validity("re_sl", 2.0, 1.0, "src")


def test_validity_mask_on_a_point_group():
    case = make_case()
    v = Validity("re_sl", 1e2, 1e4, "test range")
    area = math.pi * 0.0127 ** 2 / 4
    # Re_SL = rho U D / mu; Q_L giving Re_SL = 1e3 exactly
    q_at_1e3 = 1e3 * 1.0016e-3 * area / (998.207 * 0.0127)
    m = v.mask(case, np.array([q_at_1e3 / 20, q_at_1e3, q_at_1e3 * 20, np.nan]), 1e-5)
    assert m.tolist() == [False, True, False, False]
    assert v.point


# --- base class behaviour --------------------------------------------------------------------

def test_default_qg_of_ql_bisection_matches_closed_form():
    m = SquareLaw()
    case = make_case()
    ql = np.array([1e-5, 3e-5, 1e-4])
    # closed form of the test line: Q_G = k Q_L^2
    assert np.allclose(m.qg_of_ql(case, ql), 3.0 * ql ** 2, rtol=1e-10, atol=0)
    assert np.allclose(m.qg_of_ql(case, ql, k=0.5), 0.5 * ql ** 2, rtol=1e-10, atol=0)
    # far outside the bracket (chart range widened by 1e6 each way): no line -> NaN
    assert np.isnan(m.qg_of_ql(case, 1e-12))


def test_resolve_constants_unknown_and_out_of_range():
    m = SquareLaw()
    assert m.resolve_constants({"k": 2.0}) == {"k": 2.0}
    with pytest.raises(ValueError, match="test_square_law has no constant 'kk'; its constants are: k"):
        m.resolve_constants({"kk": 2.0})
    with pytest.raises(ValueError, match="test_square_law: constant k must be within"):
        m.resolve_constants({"k": 20.0})


def test_validity_mask_and_problems():
    m = SquareLaw()
    case = make_case()
    mask = m.validity_mask(case, np.array([1e-7, 1e-5, 1e-3]), 1e-5)
    # Re_SL at 1e-5 m^3/s in a 12.7 mm tube is about 1e3 (inside); 1e-7 -> 10, 1e-3 -> 1e5 (outside)
    assert mask.tolist() == [False, True, False]
    assert m.validity_problems(case) == []  # point groups are not case-level problems


# --- registry --------------------------------------------------------------------------------

def test_get_model_lists_known_names():
    with pytest.raises(ValueError, match="unknown boundary model 'bubble_slug'; known models: .*bubble_slug_dukler_1988"):
        get_model("bubble_slug")
    assert get_model("bubble_slug_dukler_1988").name == "bubble_slug_dukler_1988"
    assert "bubble_slug_jayawardena_1997" in model_names()


def test_register_checks_and_refuses_duplicates(scratch_registry):
    m = register(SquareLaw())
    assert BOUNDARY_MODELS["test_square_law"] is m
    with pytest.raises(ValueError, match="already registered"):
        register(SquareLaw())
    assert register(SquareLaw(), replace=True) is BOUNDARY_MODELS["test_square_law"]
    bad = SquareLaw()
    bad.name = "Square Law"
    with pytest.raises(ValueError, match="snake_case"):
        register(bad)
    same = SquareLaw()
    same.name = "test_same_sides"
    same.regime_above = same.regime_below
    with pytest.raises(ValueError, match="regime_below and regime_above must differ"):
        register(same)
    with pytest.raises(TypeError, match="must be a BoundaryModel"):
        register("bubble_slug_dukler_1988")


def test_usable_models_reports_open_sections():
    open_case = make_case(Groove(math.radians(30.0), 0.002))
    reasons = usable_models(open_case)
    assert "open section" in reasons["bubble_slug_dukler_1988"]
    assert usable_models(make_case())["bubble_slug_dukler_1988"] is None


# --- empirical boundaries ----------------------------------------------------------------------

def test_power_law_closed_form_and_sides():
    line = PowerLawBoundary("rig_line", 2.5e-2, 0.5, "bubbles", "slugs", label="rig")
    ql = np.array([1e-6, 1e-5, 1e-4])
    qg = line.qg_of_ql(None, ql)
    assert np.allclose(qg, 2.5e-2 * ql ** 0.5, rtol=1e-14)  # Q_G = a Q_L^b
    assert np.all(line.implicit(None, ql, qg * 0.999) < 0)   # below: negative
    assert np.allclose(line.implicit(None, ql, qg), 0.0, atol=1e-14)
    assert np.all(line.implicit(None, ql, qg * 1.001) > 0)   # above: positive
    # implicit is ln(Q_G / Q_G,line)
    assert line.implicit(None, 1e-6, 2.5e-5 * math.e) == pytest.approx(1.0, rel=1e-12)
    assert np.isnan(line.implicit(None, -1.0, 1e-5))
    assert line.qg_of_ql(None, 1e-4, a=1e-2) == pytest.approx(1e-4, rel=1e-12)


def test_power_law_errors_and_range():
    with pytest.raises(ValueError, match="power-law boundary 'x': a must be > 0"):
        PowerLawBoundary("x", 0.0, 1.0, "a", "b")
    with pytest.raises(ValueError, match="power-law boundary 'x': b must be within"):
        PowerLawBoundary("x", 1.0, 11.0, "a", "b")
    with pytest.raises(ValueError, match="ql_range must be increasing"):
        PowerLawBoundary("x", 1.0, 1.0, "a", "b", ql_range=(1e-4, 1e-5))
    line = PowerLawBoundary("x", 1.0, 1.0, "a", "b", ql_range=(1e-5, 1e-4))
    assert line.validity_mask(None, np.array([1e-6, 5e-5, 1e-3]), 1e-5).tolist() == [False, True, False]


def test_table_boundary_interpolates_in_log_log():
    pts = [(1e-6, 1e-6), (1e-4, 1e-3), (1e-3, 1e-3)]
    line = TableBoundary("rig_table", pts, "bubbles", "slugs")
    ql = np.array([p[0] for p in pts])
    assert np.allclose(line.qg_of_ql(None, ql), [p[1] for p in pts], rtol=1e-12)
    # halfway in log Q_L on the first segment: halfway in log Q_G (10^-4.5)
    assert line.qg_of_ql(None, 1e-5) == pytest.approx(10 ** -4.5, rel=1e-12)
    # end segments extended with their slope: slope 1.5 below, 0 above
    assert line.qg_of_ql(None, 1e-7) == pytest.approx(10 ** -7.5, rel=1e-12)
    assert line.qg_of_ql(None, 1e-2) == pytest.approx(1e-3, rel=1e-12)
    assert line.validity_mask(None, np.array([1e-7, 1e-5, 1e-3, 1e-2]), 1e-5).tolist() == [False, True, True, False]
    assert np.allclose(line.breakpoints(None), ql)


def test_table_boundary_errors_name_the_point():
    with pytest.raises(ValueError, match="needs at least 2 points, got 1"):
        TableBoundary("t", [(1e-6, 1e-6)], "a", "b")
    with pytest.raises(ValueError, match=r"Q_L must increase strictly from point to point; point 3 \(Q_L = 1e-05"):
        TableBoundary("t", [(1e-6, 1e-6), (2e-5, 1e-5), (1e-5, 1e-4)], "a", "b")
    with pytest.raises(ValueError, match="point 2 Q_G must be > 0"):
        TableBoundary("t", [(1e-6, 1e-6), (2e-5, -1e-5)], "a", "b")
    with pytest.raises(ValueError, match="point 1 must be a"):
        TableBoundary("t", [(1e-6, 1e-6, 3.0), (2e-5, 1e-5)], "a", "b")
    with pytest.raises(TypeError, match="points must be a sequence"):
        TableBoundary("t", 5, "a", "b")


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.floats(-8, -2), st.floats(-8, -1)), min_size=2, max_size=8,
                unique_by=lambda p: round(p[0], 3)),
       st.floats(0.0, 1.0))
def test_table_boundary_properties(raw, frac):
    # property: the line passes through every point, and between two points it stays between them
    raw = sorted(raw)
    pts = [(10 ** x, 10 ** y) for x, y in raw]
    line = TableBoundary("prop_table", pts, "a", "b")
    xs = np.array([p[0] for p in pts])
    assert np.allclose(line.qg_of_ql(None, xs), [p[1] for p in pts], rtol=1e-9)
    for (x0, y0), (x1, y1) in zip(raw[:-1], raw[1:]):
        q = line.qg_of_ql(None, 10 ** (x0 + frac * (x1 - x0)))
        lo, hi = sorted((10 ** y0, 10 ** y1))
        assert lo * (1 - 1e-9) <= q <= hi * (1 + 1e-9)


def test_boundary_from_spec_builds_and_reports_errors():
    pl = boundary_from_spec({"name": "rig", "kind": "power_law", "a": 2.0, "b": 1.0,
                             "regime_below": "x", "regime_above": "y", "ql_range": [1e-6, 1e-4]})
    assert isinstance(pl, PowerLawBoundary) and pl.ql_range == (1e-6, 1e-4)
    tb = boundary_from_spec({"name": "rig2", "kind": "table", "points": [[1e-6, 1e-6], [1e-4, 1e-3]],
                             "regime_below": "x", "regime_above": "y", "label": "rig 2"})
    assert isinstance(tb, TableBoundary) and tb.label == "rig 2"
    with pytest.raises(ValueError, match="kind must be 'power_law' or 'table', got 'spline'"):
        boundary_from_spec({"name": "r", "kind": "spline"})
    with pytest.raises(ValueError, match="empirical boundary 'r': missing b, regime_above"):
        boundary_from_spec({"name": "r", "kind": "power_law", "a": 1.0, "regime_below": "x"})
    with pytest.raises(ValueError, match="unknown keys colour"):
        boundary_from_spec({"name": "r", "kind": "power_law", "a": 1.0, "b": 1.0, "regime_below": "x",
                            "regime_above": "y", "colour": "red"})
    with pytest.raises(TypeError, match="table of keys"):
        boundary_from_spec(["r"])


def test_case_carries_its_own_boundaries():
    spec = {"name": "rig", "kind": "power_law", "a": 2.0, "b": 1.0, "regime_below": "x", "regime_above": "y"}
    case = make_case(extra=(("custom_boundaries", (spec,)),))
    assert list(case_boundaries(case)) == ["rig"]
    assert resolve_model("rig", case).qg_of_ql(case, 1e-5) == pytest.approx(2e-5)
    assert resolve_model("bubble_slug_dukler_1988", case) is get_model("bubble_slug_dukler_1988")
    twice = make_case(extra=(("custom_boundaries", (spec, spec)),))
    with pytest.raises(ValueError, match="defines the empirical boundary 'rig' twice"):
        case_boundaries(twice)


def test_case_boundaries_accept_frozen_case_file_entries():
    # the case-file reader stores tables as tuples of (key, value) pairs and arrays as tuples
    frozen = (("name", "rig_t"), ("kind", "table"), ("points", ((1e-6, 1e-6), (1e-4, 1e-3))),
              ("regime_below", "x"), ("regime_above", "y"))
    case = make_case(extra=(("custom_boundaries", (frozen,)),))
    line = case_boundaries(case)["rig_t"]
    assert isinstance(line, TableBoundary) and line.points == ((1e-6, 1e-6), (1e-4, 1e-3))
    with_units = (("name", "rig_u"), ("kind", "power_law"), ("a", "2 l/min"), ("b", 1.0),
                  ("regime_below", "x"), ("regime_above", "y"))
    with pytest.raises(TypeError, match="empirical boundary 'rig_u': a must be a number"):
        case_boundaries(make_case(extra=(("custom_boundaries", (with_units,)),)))
