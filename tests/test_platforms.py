"""Tests for lowgmap.physics.studies.platforms: the platform table, per-point conditions, Bond numbers and capillary times.

The platform rows describe classes of facility; their figures are typical figures of the class, entered
from memory (no document in hand): tests that compare with them say "from memory". Numbers computed by hand
from the formulas are marked [calc] (regression pins of our own arithmetic).
"""
from __future__ import annotations

import math
import re

import numpy as np
import pytest

from lowgmap.physics.studies.platforms import (PLATFORMS, SOURCE_FROM_MEMORY, CapillaryTimes, Conditions, Platform,
                               capillary_times, find_platform, get_platform, platform_bond_numbers,
                               platform_names, platform_table, point_conditions, points_conditions)
from lowgmap.physics.chart.summary import bond_number

G0 = 9.80665  # standard gravity [m/s^2] (CGPM 1901)

# water at about 20 degC, rounded inputs of the [calc] checks below: rho 998.2 kg/m^3, sigma 72.8 mN/m, gas
# density neglected
RHO_W, SIGMA_W, MU_W = 998.2, 0.0728, 1.0016e-3   # mu: IAPWS 2008 at 20 degC (Huber et al. 2009)


# ---------------------------------------------------------------------------------------------- table

@pytest.mark.parametrize("name,duration,duration_max,g_low_g0,g_high_g0", [
    # typical figures of each class of facility, from memory
    ("short drop tower", 2.0, 2.5, 1e-4, 1e-3),
    ("drop tube", 4.5, 5.5, 1e-7, 1e-5),
    ("launched drop", 9.0, 10.0, 1e-7, 1e-5),
    ("parabolic flight", 22.0, 22.0, 1e-3, 1e-2),
    ("sounding rocket", 180.0, 780.0, math.nan, 1e-4),   # 3-13 min, <= 1e-4 g
    ("orbital station", 30 * 86400.0, math.inf, 1e-6, 1e-6),  # months; ~1e-6 g quasi-steady
])
def test_table_matches_the_typical_class_figures(name, duration, duration_max, g_low_g0, g_high_g0):
    p = get_platform(name)
    assert p.name == name
    assert p.duration_s == duration and p.duration_max_s == duration_max
    assert p.g_high == pytest.approx(g_high_g0 * G0, rel=1e-12)
    if math.isnan(g_low_g0):
        assert math.isnan(p.g_low)
    else:
        assert p.g_low == pytest.approx(g_low_g0 * G0, rel=1e-12)
    assert p.g_typical == p.g_high                    # documented convention: upper end, conservative Bo
    assert p.g_typical_over_g0 == pytest.approx(g_high_g0, rel=1e-12)
    assert p.source == SOURCE_FROM_MEMORY and "from memory" in p.source


def test_ground_test_platform_uses_standard_gravity():
    # catches the table's "upper end" convention applied to the ground test (its points are drawn on the
    # 1-g chart, at g0), or a ground test whose time would run out
    p = get_platform("ground")
    assert p.name == "ground test" and get_platform("1 g") is p
    assert p.g_typical == 9.80665                     # CGPM 1901: standard gravity, exact by definition
    assert p.g_low == 9.780 and p.g_high == 9.832     # equator to poles, from memory
    assert p.duration_max_s == math.inf and p.duration_s >= 86400.0


def test_every_platform_is_tested_and_named_generically():
    assert len(PLATFORMS) == 7 and platform_names() == list(PLATFORMS)
    rows = platform_table()
    assert [r["name"] for r in rows] == platform_names()
    assert set(rows[0]) == {"name", "aliases", "duration_s", "duration_max_s", "g_low_g0", "g_high_g0",
                            "g_typical_g0", "source", "note"}
    for p in PLATFORMS.values():
        # classes of facility: no facility height or size in a name or alias, no digit in a name
        assert not any(ch.isdigit() for ch in p.name)
        for n in (p.name, *p.aliases):
            assert not re.search(r"\d\s*m\b", n), n


@pytest.mark.parametrize("alias,name", [
    ("short drop tower", "short drop tower"),
    ("Short Drop-Tower", "short drop tower"),
    ("short drop tower, ~2 s", "short drop tower"),
    ("2 s drop tower", "short drop tower"),
    ("catapult", "launched drop"),
    ("Launched drop, ~9 s", "launched drop"),
    ("drop tube", "drop tube"),
    ("drop tube, ~5 s", "drop tube"),
    ("Parabolic", "parabolic flight"),
    ("aircraft", "parabolic flight"),
    ("rocket", "sounding rocket"),
    ("space station", "orbital station"),
    ("orbital laboratory", "orbital station"),
])
def test_aliases(alias, name):
    assert get_platform(alias).name == name
    assert find_platform(alias) is PLATFORMS[name]


def test_unknown_platform_lists_known_names():
    with pytest.raises(ValueError,
                       match=r"platform 'balloon' is not known; known platforms: short drop tower, drop tube, "):
        get_platform("balloon")
    assert find_platform("balloon") is None and find_platform(None) is None and find_platform(3) is None
    assert get_platform(PLATFORMS["orbital station"]) is PLATFORMS["orbital station"]


def test_platform_checks_its_figures():
    with pytest.raises(ValueError, match="duration_s"):
        Platform("x", (), -1.0, 1.0, 0.0, 1.0, 1.0)
    with pytest.raises(ValueError, match="g_low"):
        Platform("x", (), 1.0, 1.0, 2.0, 1.0, 1.0)
    with pytest.raises(ValueError, match="g_typical"):
        Platform("x", (), 1.0, 1.0, 0.1, 1.0, 2.0)
    with pytest.raises(ValueError, match="duration_max_s"):
        Platform("x", (), 2.0, 1.0, 0.1, 1.0, 1.0)


# ---------------------------------------------------------------------------------------------- conditions

def test_point_conditions_fall_back_on_platform_and_override_wins():
    # drop tube: 4.5 s (short end of 4.5-5.5 s), 1e-5 g upper end (typical figures, from memory)
    assert point_conditions("drop tube") == Conditions(1e-5 * G0, 4.5)
    assert point_conditions("drop tube", g=2e-5) == Conditions(2e-5, 4.5)
    assert point_conditions("drop tube", duration=3.0) == Conditions(1e-5 * G0, 3.0)
    assert point_conditions("drop tube", g=math.nan, duration=math.nan) == Conditions(1e-5 * G0, 4.5)
    assert point_conditions(None, g=0.0, duration=1.0) == Conditions(0.0, 1.0)
    assert point_conditions("", g=1e-3, duration=1.0) == Conditions(1e-3, 1.0)


def test_point_conditions_errors():
    with pytest.raises(ValueError, match="residual acceleration g is not given"):
        point_conditions(None, duration=2.0)
    with pytest.raises(ValueError, match="low-g duration is not given"):
        point_conditions(None, g=1e-3)
    with pytest.raises(ValueError, match="g must be >= 0"):
        point_conditions("parabolic flight", g=-1.0)
    with pytest.raises(ValueError, match="duration must be > 0"):
        point_conditions("parabolic flight", duration=0.0)
    with pytest.raises(ValueError, match="known platforms"):
        point_conditions("balloon", g=1e-3, duration=2.0)


def test_points_conditions_agrees_with_scalar_version():
    plats = ["short drop tower", "parabolic", None, "balloon", "sounding rocket", "orbital station"]
    g = np.array([np.nan, 0.05, 1e-3, np.nan, -1.0, np.nan])
    d = np.array([1.5, np.nan, 2.0, 3.0, np.nan, 0.0])
    g_out, d_out = points_conditions(plats, g, d)
    assert g_out[0] == point_conditions("short drop tower").g and d_out[0] == 1.5
    assert (g_out[1], d_out[1]) == point_conditions("parabolic", g=0.05)
    assert (g_out[2], d_out[2]) == (1e-3, 2.0)
    assert math.isnan(g_out[3]) and d_out[3] == 3.0    # unknown platform, no g: NaN
    assert math.isnan(g_out[4]) and d_out[4] == 180.0  # invalid given value: NaN
    assert math.isnan(d_out[5])
    g_none, d_none = points_conditions(plats)
    assert g_none[0] == pytest.approx(1e-3 * G0) and math.isnan(g_none[2]) and d_none[1] == 22.0


# ---------------------------------------------------------------------------------------------- Bond numbers

def test_bond_number_water_one_centimetre_one_g():
    # check [calc] from Bo = delta_rho g L^2 / sigma: water, L = 1 cm, Bo(1 g) = 13.45
    assert bond_number(RHO_W, G0, 0.01, SIGMA_W) == pytest.approx(13.45, abs=0.005)
    # [calc] with IAPWS R1-76 sigma(20 degC) = 72.74 mN/m and rho 998.207 kg/m^3: 998.207*9.80665e-4/0.07274
    assert bond_number(998.207, G0, 0.01, 0.07274) == pytest.approx(13.4577, abs=1e-4)


@pytest.mark.parametrize("name,bo_typical", [
    # [calc] Bo = 13.446 * g/g0 with the class's upper-end residual acceleration (typical figures, from memory)
    ("short drop tower", 1.3446e-2),
    ("drop tube", 1.3446e-4),
    ("launched drop", 1.3446e-4),
    ("parabolic flight", 1.3446e-1),
    ("sounding rocket", 1.3446e-3),
    ("orbital station", 1.3446e-5),
])
def test_platform_bond_numbers_water_one_centimetre(name, bo_typical):
    lo, typ, hi = platform_bond_numbers(name, RHO_W, 0.01, SIGMA_W)
    assert typ == pytest.approx(bo_typical, rel=1e-3)
    assert hi == typ
    p = get_platform(name)
    if math.isnan(p.g_low):
        assert math.isnan(lo)
    else:
        assert lo <= typ and lo == pytest.approx(typ * p.g_low / p.g_high, rel=1e-12)
    # every platform keeps a 1 cm water interface surface-tension dominated (Bo < 1; Brauner 1990 criterion
    # quoted in lowgmap.physics.chart.summary); the 1 g value is not
    assert typ < 1 < bond_number(RHO_W, G0, 0.01, SIGMA_W)


def test_bond_number_scaling():
    # invariant: Bo is linear in g and delta_rho, quadratic in L, inverse in sigma
    b = bond_number(RHO_W, 1e-3, 0.01, SIGMA_W)
    assert bond_number(RHO_W, 2e-3, 0.01, SIGMA_W) == pytest.approx(2 * b, rel=1e-12)
    assert bond_number(RHO_W, 1e-3, 0.03, SIGMA_W) == pytest.approx(9 * b, rel=1e-12)
    assert bond_number(RHO_W, 1e-3, 0.01, 2 * SIGMA_W) == pytest.approx(b / 2, rel=1e-12)


def test_platform_bond_numbers_errors():
    with pytest.raises(ValueError, match="length must be > 0"):
        platform_bond_numbers("parabolic flight", RHO_W, 0.0, SIGMA_W)
    with pytest.raises(ValueError, match="sigma"):
        platform_bond_numbers("parabolic flight", RHO_W, 0.01, -1.0)
    with pytest.raises(ValueError, match="known platforms"):
        platform_bond_numbers("balloon", RHO_W, 0.01, SIGMA_W)


# ---------------------------------------------------------------------------------------------- capillary times

def test_capillary_times_water_one_centimetre():
    t = capillary_times(RHO_W, MU_W, SIGMA_W, 0.01)
    assert isinstance(t, CapillaryTimes)
    # check [calc] from t = sqrt(rho L^3/sigma): water, L = 1 cm, t = 0.117 s
    assert t.inertial == pytest.approx(0.117, abs=5e-4)
    # [calc] mu L / sigma = 1.0016e-3 * 0.01 / 0.0728 = 1.3758e-4 s
    assert t.viscous == pytest.approx(1.3758e-4, rel=1e-4)


@pytest.mark.parametrize("name,ratio", [
    # [calc] low-g time over the water 1 cm inertial-capillary time 0.11710 s (class durations, from memory)
    ("short drop tower", 17.08),
    ("drop tube", 38.43),
    ("launched drop", 76.86),
    ("parabolic flight", 187.9),
])
def test_platform_duration_in_capillary_times(name, ratio):
    t_ic = capillary_times(RHO_W, MU_W, SIGMA_W, 0.01).inertial
    assert point_conditions(name).duration / t_ic == pytest.approx(ratio, rel=1e-3)


def test_capillary_time_invariants():
    # scaling: t_ic ~ L^1.5, t_vc ~ L; their ratio is the Ohnesorge number mu/sqrt(rho sigma L)
    a = capillary_times(RHO_W, MU_W, SIGMA_W, 0.01)
    b = capillary_times(RHO_W, MU_W, SIGMA_W, 0.04)
    assert b.inertial / a.inertial == pytest.approx(8.0, rel=1e-12)
    assert b.viscous / a.viscous == pytest.approx(4.0, rel=1e-12)
    oh = MU_W / math.sqrt(RHO_W * SIGMA_W * 0.01)
    assert a.viscous / a.inertial == pytest.approx(oh, rel=1e-12)


def test_capillary_times_arrays_and_errors():
    t = capillary_times(RHO_W, MU_W, SIGMA_W, np.array([0.01, -1.0, np.nan, 0.04]))
    assert t.inertial[0] == pytest.approx(capillary_times(RHO_W, MU_W, SIGMA_W, 0.01).inertial, rel=1e-12)
    assert np.isnan(t.inertial[1:3]).all() and np.isnan(t.viscous[1:3]).all() and np.isfinite(t.viscous[3])
    with pytest.raises(ValueError, match="rho must be > 0"):
        capillary_times(-1.0, MU_W, SIGMA_W, 0.01)
    with pytest.raises(ValueError, match="L must be > 0"):
        capillary_times(RHO_W, MU_W, SIGMA_W, 0.0)
    with pytest.raises(TypeError, match="sigma must be a number"):
        capillary_times(RHO_W, MU_W, "x", 0.01)
