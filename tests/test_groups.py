"""Tests of lowgmap.physics.properties.groups: dimensionless groups and their evaluation for a case."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lowgmap.physics.case import Case, FlowRange
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.properties.groups import (GROUPS, capillary, eotvos, evaluate_group, group_names, ohnesorge,
                            positive_flows, reynolds, suratman, superficial_velocity, weber)
from lowgmap.physics.geometry.sections import Circle, Rectangle
from lowgmap.physics.properties.wetting import Wetting

# Water at 20 degC, 1 atm: rho 998.207 kg/m^3 (IAPWS-95), mu 1.0016 mPa s (IAPWS 2008),
# sigma 72.74 mN/m (IAPWS R1-76(2014)).
# Air at 20 degC, 1 atm: rho 1.205 kg/m^3 (handbook value, from memory; used by the [calc] checks below);
# mu 1.81e-5 Pa s (from memory, handbook value).
WATER_AIR = FluidPair("water", "air", 293.15, 101325.0, 998.207, 1.0016e-3, 0.07274, 1.205, 1.81e-5,
                      "IAPWS-95 / IAPWS 2008 / IAPWS R1-76", "from memory")


def tube_case(section=None, g=0.0):
    return Case(WATER_AIR, section or Circle(0.0127), Wetting(0.0), 1.0, g,
                FlowRange(1e-7, 1e-3, 1e-7, 1e-2))


def test_suratman_air_water_12_7_mm():
    # check value [calc] from Su = rho_L sigma D / mu_L^2 (Jayawardena, Balakotaiah & Witte 1997):
    # air/water 20 degC, D 12.7 mm -> Su 9.19e5
    assert suratman(998.207, 0.07274, 0.0127, 1.0016e-3) == pytest.approx(9.19e5, rel=1e-3)


def test_eotvos_water_one_centimetre_one_g():
    # check value [calc] from Bo = delta_rho g L^2 / sigma: water, L 1 cm, Bo(1 g) = 13.45
    # (13.45 is rounded to 4 figures: tolerance 1e-3)
    assert eotvos(998.207, 9.80665, 0.01, 0.07274) == pytest.approx(13.45, rel=1e-3)


def test_weber_one_at_2_18_m_per_s():
    # check value [calc] from We_SG = rho_G U_SG^2 D / sigma (Zhao & Rezkallah 1993): air 1.205 kg/m^3,
    # sigma 0.072736 N/m, D 12.7 mm:
    # We_SG = 1 at U_SG = 2.18 m/s and = 20 at 9.75 m/s (3 figures)
    assert weber(1.205, 2.18, 0.0127, 0.072736) == pytest.approx(1.0, rel=2e-3)
    assert weber(1.205, 9.75, 0.0127, 0.072736) == pytest.approx(20.0, rel=2e-3)


def test_closed_forms_reynolds_capillary_superficial():
    # closed forms: Re = rho U L / mu, Ca = mu U / sigma, U_S = Q / A
    assert reynolds(998.207, 1.0, 0.0127, 1.0016e-3) == pytest.approx(998.207 * 0.0127 / 1.0016e-3, rel=1e-15)
    assert capillary(1.0016e-3, 0.5, 0.07274) == pytest.approx(1.0016e-3 * 0.5 / 0.07274, rel=1e-15)
    assert superficial_velocity(2e-4, 1e-4) == pytest.approx(2.0, rel=1e-15)


@settings(max_examples=60, deadline=None)
@given(rho=st.floats(0.1, 2e4), mu=st.floats(1e-6, 10.0), sigma=st.floats(1e-3, 1.0),
       length=st.floats(1e-5, 1.0), u=st.floats(1e-4, 100.0))
def test_group_identities(rho, mu, sigma, length, u):
    # identities: We = Re^2 / Su and Oh = Su^(-1/2), for any consistent set of properties
    re = reynolds(rho, u, length, mu)
    su = suratman(rho, sigma, length, mu)
    assert weber(rho, u, length, sigma) == pytest.approx(re ** 2 / su, rel=1e-10)
    assert ohnesorge(mu, rho, sigma, length) == pytest.approx(su ** -0.5, rel=1e-10)


def test_vectorised_functions_keep_shape():
    u = np.array([[0.1, 1.0], [2.0, 3.0]])
    out = weber(1.2, u, 0.01, 0.07)
    assert out.shape == (2, 2)
    assert out[1, 1] == pytest.approx(1.2 * 9.0 * 0.01 / 0.07)
    assert isinstance(weber(1.2, 1.0, 0.01, 0.07), float)


def test_evaluate_group_matches_formulas_for_a_tube():
    case = tube_case()
    area = math.pi * 0.0127 ** 2 / 4
    ql, qg = 2e-5, 3e-4
    assert evaluate_group("re_sl", case, ql, qg) == pytest.approx(
        reynolds(998.207, ql / area, 0.0127, 1.0016e-3), rel=1e-12)
    assert evaluate_group("re_sg", case, ql, qg) == pytest.approx(
        reynolds(1.205, qg / area, 0.0127, 1.81e-5), rel=1e-12)
    assert evaluate_group("we_sg", case, ql, qg) == pytest.approx(
        weber(1.205, qg / area, 0.0127, 0.07274), rel=1e-12)
    assert evaluate_group("we_sl", case, ql, qg) == pytest.approx(
        weber(998.207, ql / area, 0.0127, 0.07274), rel=1e-12)
    assert evaluate_group("flow_ratio", case, ql, qg) == pytest.approx(15.0, rel=1e-12)
    assert evaluate_group("suratman", case, ql, qg) == pytest.approx(9.19e5, rel=1e-3)
    assert evaluate_group("density_ratio", case, ql, qg) == pytest.approx(1.205 / 998.207)
    assert evaluate_group("viscosity_ratio", case, ql, qg) == pytest.approx(1.81e-5 / 1.0016e-3)


def test_evaluate_group_uses_hydraulic_diameter_for_ducts():
    rect = Rectangle(0.004, 0.002)
    case = tube_case(rect)
    dh = 2 * 0.004 * 0.002 / 0.006  # Shah & London: D_h = 2wh/(w+h)
    assert evaluate_group("suratman", case, 1e-6, 1e-6) == pytest.approx(
        suratman(998.207, 0.07274, dh, 1.0016e-3), rel=1e-12)


def test_eotvos_of_case_scales_with_g():
    # Eo is proportional to g (invariant), and zero at g = 0
    e1 = evaluate_group("eotvos", tube_case(g=9.80665), 1e-5, 1e-5)
    e2 = evaluate_group("eotvos", tube_case(g=9.80665e-3), 1e-5, 1e-5)
    assert e2 == pytest.approx(e1 * 1e-3, rel=1e-12)
    assert evaluate_group("eotvos", tube_case(g=0.0), 1e-5, 1e-5) == 0.0


def test_evaluate_group_broadcasts_and_gives_nan_outside_domain():
    case = tube_case()
    ql = np.array([1e-6, -1.0, np.nan, 1e-5])
    out = evaluate_group("re_sl", case, ql, 1e-5)
    assert out.shape == (4,)
    assert np.isnan(out[1]) and np.isnan(out[2])
    assert np.all(np.isfinite(out[[0, 3]]))
    grid = evaluate_group("we_sg", case, np.ones((3, 1)) * 1e-5, np.array([1e-5, 2e-5]))
    assert grid.shape == (3, 2)


def test_case_level_groups_do_not_depend_on_flows():
    case = tube_case(g=0.01)
    for name, group in GROUPS.items():
        v = evaluate_group(name, case, np.array([1e-6, 1e-4]), np.array([1e-5, 1e-3]))
        if not group.point:
            assert v[0] == v[1], name


def test_unknown_group_names_the_known_ones():
    with pytest.raises(ValueError, match="unknown dimensionless group 'reynolds'.*re_sl"):
        evaluate_group("reynolds", tube_case(), 1e-5, 1e-5)
    assert group_names() == sorted(GROUPS)


def test_positive_flows_masks_bad_entries():
    ql, qg = positive_flows([1.0, 0.0, 2.0], [1.0, 1.0, np.inf])
    assert np.isnan(ql[1]) and np.isnan(qg[2]) and ql[0] == 1.0
