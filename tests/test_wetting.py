"""Tests for lowgmap.physics.properties.wetting: Concus–Finn corner condition and contact-angle validation."""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from lowgmap.physics.geometry.sections import Circle, Groove, Polygon, Rectangle, RegularPolygon
from lowgmap.physics.properties.wetting import Wetting, concus_finn_critical_contact_angle, concus_finn_wets

R = math.radians
# Concus & Finn, PNAS 63(2):292-299, 1969, doi:10.1073/pnas.63.2.292: a corner of half-angle alpha
# wicks without bound iff theta + alpha < 90 deg.


# ---- the condition ------------------------------------------------------------------------------
def test_concus_finn_7_9_deg_corner():
    # Concus & Finn (1969): 7.9 deg half-angle wicks for theta < 82.1 deg
    assert concus_finn_wets(R(7.9), R(82.0)) is True
    assert concus_finn_wets(R(7.9), R(82.2)) is False
    assert math.degrees(concus_finn_critical_contact_angle(R(7.9))) == pytest.approx(82.1, abs=1e-12)


@pytest.mark.parametrize("alpha_deg,theta_deg", [(7.9, 82.1), (45.0, 45.0), (30.0, 60.0), (60.0, 30.0)])
def test_exact_boundary_is_flat_and_does_not_wick(alpha_deg, theta_deg):
    # Concus & Finn (1969): at theta + alpha = 90 deg the surface is flat; documented as "does not wick"
    assert concus_finn_wets(R(alpha_deg), R(theta_deg)) is False
    assert concus_finn_wets(R(alpha_deg), R(theta_deg) - 1e-9) is True


@pytest.mark.parametrize("alpha_deg", [0.5, 15.0, 45.0, 75.0, 89.5])
def test_critical_contact_angle_is_complement(alpha_deg):
    # Concus & Finn (1969): theta_c = 90 deg - alpha
    assert math.degrees(concus_finn_critical_contact_angle(R(alpha_deg))) == pytest.approx(90.0 - alpha_deg)


def test_limiting_cases():
    alphas = np.radians(np.linspace(0.5, 89.5, 50))
    # perfectly wetting liquid (theta = 0) wicks in every corner with alpha < 90 deg (Concus & Finn 1969)
    assert np.all(concus_finn_wets(alphas, 0.0))
    # theta >= 90 deg never wicks, whatever the corner (Concus & Finn 1969)
    for theta in (90.0, 120.0, 180.0):
        assert not np.any(concus_finn_wets(alphas, R(theta)))


def test_vectorised_agrees_with_scalar_and_is_monotonic():
    a = np.radians(np.linspace(1.0, 89.0, 23))[:, None]
    t = np.radians(np.linspace(0.0, 180.0, 37))[None, :]
    grid = concus_finn_wets(a, t)
    assert grid.shape == (23, 37) and grid.dtype == bool
    for i in (0, 7, 22):
        for j in (0, 10, 36):
            assert grid[i, j] == concus_finn_wets(float(a[i, 0]), float(t[0, j]))
    # monotonic: wicking is lost as theta grows (rows) and as alpha grows (columns), never regained
    assert np.all(np.diff(grid.astype(int), axis=1) <= 0)
    assert np.all(np.diff(grid.astype(int), axis=0) <= 0)
    crit = concus_finn_critical_contact_angle(a[:, 0])
    assert isinstance(crit, np.ndarray) and crit.shape == (23,)
    assert crit == pytest.approx(np.pi / 2 - a[:, 0])


@pytest.mark.parametrize("alpha_deg", [0.0, 90.0, -1.0, 120.0])
def test_half_angle_out_of_range(alpha_deg):
    with pytest.raises(ValueError, match=rf"half_angle must be within \(0, 90\) deg, got {alpha_deg:g} deg"):
        concus_finn_wets(R(alpha_deg), R(30))
    with pytest.raises(ValueError, match="half_angle"):
        concus_finn_critical_contact_angle(R(alpha_deg))


@pytest.mark.parametrize("theta_deg", [-5.0, 181.0, 210.0])
def test_contact_angle_out_of_range(theta_deg):
    with pytest.raises(ValueError, match=rf"contact_angle must be within \[0, 180\] deg, got {theta_deg:g} deg"):
        concus_finn_wets(R(30), R(theta_deg))


def test_non_finite_angles():
    with pytest.raises(ValueError, match="half_angle must be finite"):
        concus_finn_wets(math.nan, 0.5)
    with pytest.raises(ValueError, match="contact_angle must be finite"):
        concus_finn_wets(0.5, [0.1, math.inf])


# ---- Wetting dataclass -------------------------------------------------------------------------
def test_wetting_validation_messages():
    # message format stated in the project rules
    with pytest.raises(ValueError, match=r"^wetting.contact_angle must be within \[0, 180\] deg, got 210 deg$"):
        Wetting(R(210))
    with pytest.raises(ValueError, match=r"wetting.advancing must be within \[0, 180\] deg, got 190 deg"):
        Wetting(R(30), advancing=R(190))
    with pytest.raises(ValueError, match=r"wetting.receding must be within \[0, 180\] deg, got -10 deg"):
        Wetting(R(30), receding=R(-10))
    with pytest.raises(ValueError, match=r"wetting.advancing must be >= contact_angle \(30 deg\), got 20 deg"):
        Wetting(R(30), advancing=R(20))
    with pytest.raises(ValueError, match=r"wetting.receding must be <= contact_angle \(30 deg\), got 40 deg"):
        Wetting(R(30), receding=R(40))


def test_wetting_accepts_hysteresis_bounds_and_is_frozen():
    w = Wetting(R(30), advancing=R(40), receding=R(20))
    assert (w.receding, w.contact_angle, w.advancing) == (R(20), R(30), R(40))
    Wetting(R(30), advancing=R(30), receding=R(30))      # equal bounds are allowed
    Wetting(0.0)
    Wetting(math.pi)
    with pytest.raises(dataclasses.FrozenInstanceError):
        w.contact_angle = 0.1
    assert hash(w) == hash(Wetting(R(30), advancing=R(40), receding=R(20)))


# ---- per corner of a section ---------------------------------------------------------------------
def test_corners_that_wick_regular_sections():
    # Concus & Finn (1969): triangle (alpha 30 deg) wicks below theta 60 deg, square (45) below 45,
    # hexagon (60) below 30
    cases = [(RegularPolygon(3, 1e-3), 60.0), (RegularPolygon(4, 1e-3), 45.0), (RegularPolygon(6, 1e-3), 30.0),
             (Rectangle(3e-3, 1e-3), 45.0)]
    for sec, theta_c in cases:
        n = len(sec.corners)
        assert [w for _, _, w in Wetting(R(theta_c - 0.5)).corners_that_wick(sec)] == [True] * n
        assert [w for _, _, w in Wetting(R(theta_c + 0.5)).corners_that_wick(sec)] == [False] * n


def test_corners_that_wick_uses_static_angle_only():
    g = Groove(R(7.9), 1e-3)
    # the static angle decides; advancing/receding are carried for hysteresis checks only
    assert Wetting(R(80), advancing=R(85)).corners_that_wick(g) == [(0, R(7.9), True)]
    assert Wetting(R(84), receding=R(70)).corners_that_wick(g) == [(0, R(7.9), False)]


def test_corners_that_wick_no_corners_and_reflex_vertices():
    assert Wetting(R(10)).corners_that_wick(Circle(0.01)) == []
    # L-shape: reflex vertex 3 (270 deg) is not a corner; the five 90-deg corners wick below 45 deg
    p = Polygon([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)])
    res = Wetting(R(40)).corners_that_wick(p)
    assert [i for i, _, _ in res] == [0, 1, 2, 4, 5]
    assert all(w for _, _, w in res)
