"""A dense gas: liquid nitrogen with its saturated vapour, where rho_G/rho_L is a few per cent.

Every place where the gas density enters must use it: the Eötvös/Bond groups (density difference), the
validity flags built on them, the gas groups, and the mixture density that loads the open channel. Each
check sets the inputs so that a formula that dropped rho_G (rho_L alone in place of rho_L - rho_G, or a
mixture density without the gas) gives a different answer by far more than the tolerance.

Property values come from CoolProp (saturated liquid and vapour of nitrogen at 100 K); they are inputs, not
check values. The check values are the closed forms written beside each assertion.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from lowgmap.physics.case import Case, FlowRange
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.summary import section_report
from lowgmap.physics.geometry.sections import Circle, Groove
from lowgmap.physics.models import bubbles as bb
from lowgmap.physics.models import corner as cm
from lowgmap.physics.models.boundary import get_model
from lowgmap.physics.models.open_channel import WedgeChannel as OpenWedge
from lowgmap.physics.models.open_channel import critical_flow_rate
from lowgmap.physics.models.tube import gravity_check
from lowgmap.physics.properties.fluids import make_fluid_pair
from lowgmap.physics.properties.groups import evaluate_group
from lowgmap.physics.properties.wetting import Wetting
from lowgmap.physics.studies.agreement import point_validity

N2 = make_fluid_pair("nitrogen", 100.0)          # saturated liquid and vapour (CoolProp), about 7.8 bar
X = N2.rho_g / N2.rho_l
D = 0.005
RANGE = FlowRange(1e-9, 1e-5, 1e-9, 1e-5)


def tube(g):
    return Case(N2, Circle(D), Wetting(0.0), 0.5, g, RANGE)


ALPHA = math.radians(15.0)


def groove(g=1e-6, length=0.02, depth=0.004, alpha=ALPHA):
    return Case(N2, Groove(alpha, depth), Wetting(0.0), length, g, RANGE)


def between(rho_len2_over_sigma):
    """g at which the Bond number with rho_L - rho_G is below 1 and with rho_L alone above 1."""
    return 1.0 / (rho_len2_over_sigma * (N2.rho_l - 0.5 * N2.rho_g))


def test_the_gas_is_dense_enough_for_the_checks_to_bite():
    # the checks below need rho_G/rho_L of a few per cent (far above their tolerances)
    assert 0.02 < X < 0.1


def test_eotvos_group_and_gravity_check_use_the_density_difference():
    g = 0.3
    case = tube(g)
    eo = (N2.rho_l - N2.rho_g) * g * D ** 2 / N2.sigma            # Eo = (rho_L - rho_G) g D^2 / sigma
    assert evaluate_group("eotvos", case, 1e-6, 1e-6) == pytest.approx(eo, rel=1e-12)
    assert gravity_check(case).eotvos == pytest.approx(eo, rel=1e-12)
    assert section_report(case)["gravity"]["bond_number"] == pytest.approx(eo, rel=1e-12)
    # rho_L alone would be off by the density ratio
    assert abs(N2.rho_l * g * D ** 2 / N2.sigma / eo - 1) > 100 * 1e-12 and abs(1 / (1 - X) - 1) > 0.02


def test_gas_groups_carry_the_gas_density():
    case = tube(1e-4)
    ql, qg = 2e-6, 3e-6
    u = qg / case.section.area
    assert evaluate_group("we_sg", case, ql, qg) == pytest.approx(N2.rho_g * u ** 2 * D / N2.sigma, rel=1e-12)
    assert evaluate_group("re_sg", case, ql, qg) == pytest.approx(N2.rho_g * u * D / N2.mu_g, rel=1e-12)
    assert evaluate_group("density_ratio", case, ql, qg) == pytest.approx(X, rel=1e-12)


def test_validity_flags_switch_where_the_density_difference_says():
    # g set so that Eo = 1 falls between the rho_L - rho_G and the rho_L-only values (Brauner 1990: Eo < 1)
    g = between(D ** 2 / N2.sigma)
    case = tube(g)
    assert (N2.rho_l - N2.rho_g) * g * D ** 2 / N2.sigma < 1.0 < N2.rho_l * g * D ** 2 / N2.sigma
    assert gravity_check(case).negligible
    assert section_report(case)["gravity"]["gravity_negligible"]
    # the tube criteria's case-level validity range (Eo within [0, 1])
    assert get_model("bubble_slug_dukler_1988").validity_problems(case) == []
    # a test point at this g: its Bond number passes (Bond number on the tube diameter)
    v = point_validity(case, {"ql_m3_s": [1e-6], "qg_m3_s": [1e-6], "g_m_s2": [g], "duration_s": [1e6]})
    assert v.bond[0] == pytest.approx((N2.rho_l - N2.rho_g) * g * D ** 2 / N2.sigma, rel=1e-12)
    assert not any("Bond number" in r for r in v.reasons[0])
    # a little more gravity (within the density ratio) and every flag trips
    g2 = g * (1 + X)
    case2 = tube(g2)
    assert not gravity_check(case2).negligible and get_model("bubble_slug_dukler_1988").validity_problems(case2)


def test_corner_gravity_note_uses_the_density_difference():
    # corner family note (theory manual): buoyancy / capillary push = (rho_L - rho_G) g h_max^2 / (c_cap sigma h')
    # for a V-groove h_max = 2 S sin(a), h' = 2 sin(a): ratio = (rho_L - rho_G) g S^2 sin(a) / sigma, warned >= 0.1
    S, a = 0.004, math.radians(15.0)
    g = 0.1 * between(S ** 2 * math.sin(a) / N2.sigma)
    quiet = Chart.build(groove(g=g, depth=S, alpha=a))
    assert not any("Gravity NOT negligible" in w for w in quiet.warnings)
    loud = Chart.build(groove(g=g * (1 + X), depth=S, alpha=a))
    assert any("Gravity NOT negligible" in w for w in loud.warnings)


def test_open_channel_load_uses_the_mixture_density_with_the_gas():
    # (1 + r) Q_L = Q_crit(rho_m), rho_m = (rho_L + r rho_G)/(1 + r) (no-slip mixture, gas share 1);
    # a short channel of a low-viscosity liquid is inertia-dominated, Q_crit ~ rho^(-1/2)
    case = groove(length=0.01)
    ch = OpenWedge(math.radians(15.0), 0.004 / math.cos(math.radians(15.0)), 0.0)
    K_e = cm.OPEN_CHANNEL_INGESTION.defaults["entrance_loss"]
    r = 1.0
    rho_m = (N2.rho_l + r * N2.rho_g) / (1 + r)
    assert bb.mixture_density(1.0, r, N2.rho_l, N2.rho_g) == pytest.approx(rho_m, rel=1e-15)
    q_mix = critical_flow_rate(ch, 0.01, rho=rho_m, mu=N2.mu_l, sigma=N2.sigma, K_e=K_e).Q_crit
    got = cm.ingestion_liquid_flow(case, r) * (1 + r)
    assert got == pytest.approx(q_mix, rel=2e-3)                  # table over density: 2e-3
    # the same load without the gas density would differ by far more than that tolerance
    q_no_gas = critical_flow_rate(ch, 0.01, rho=N2.rho_l / (1 + r), mu=N2.mu_l, sigma=N2.sigma, K_e=K_e).Q_crit
    assert abs(q_no_gas / got - 1) > 5 * 2e-3
    # and the implicit function is zero on that line
    m = get_model("open_channel_ingestion")
    ql = got / (1 + r)
    assert abs(m.implicit(case, ql, r * ql, **m.defaults)) < 1e-9


def test_dense_gas_chart_builds_and_its_lines_see_rho_g():
    # the whole corner chart with the dense gas: the ingestion line at r = 1 moves when rho_G is dropped
    case = groove(length=0.01)
    ch = Chart.build(case)
    assert ch.regime_names and ch.regions
    stripped = Case(dataclasses.replace(N2, rho_g=1e-6 * N2.rho_l), case.section, case.wetting, case.length, case.g,
                    case.flow_range)
    a = cm.ingestion_liquid_flow(case, np.array([1.0, 3.0]))
    b = cm.ingestion_liquid_flow(stripped, np.array([1.0, 3.0]))
    assert np.all(np.abs(a / b - 1) > 5 * 2e-3)
