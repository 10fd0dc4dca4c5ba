"""Tests of lowgmap.physics.geometry.corner: corner meniscus geometry and flow resistance beta."""
import math

import numpy as np
import pytest

import lowgmap.physics.properties.wetting
from lowgmap.physics.geometry.corner import (
    _corner_domain,
    bisector_height,
    concus_finn_wets,
    flow_resistance,
    flow_resistance_direct,
    meniscus_area_factor,
    meniscus_pressure,
    wetted_wall_length,
)
from lowgmap.physics.geometry.stokes import solve_poisson

D = math.radians


def test_area_factor_regression_pins():
    # [calc] regression pins of the closed form F = cos(t) cos(t + a)/sin(a) - (pi/2 - t - a) (plane geometry of
    # the circular-arc meniscus), not published numbers
    assert meniscus_area_factor(D(45), 0.0) == pytest.approx(0.214602, abs=1e-6)   # = 1 - pi/4
    assert meniscus_area_factor(D(30), 0.0) == pytest.approx(0.684853, abs=1e-6)
    assert meniscus_area_factor(D(15), 0.0) == pytest.approx(2.423054, abs=1e-6)
    assert meniscus_area_factor(D(30), D(30)) == pytest.approx(0.342427, abs=1e-6)


@pytest.mark.parametrize("alpha,theta", [(45, 0), (30, 30), (15, 0), (10, 20), (60, 5)])
def test_area_factor_against_meshed_section(alpha, theta):
    # independent check: the area of the finite-element mesh of the meniscus section (curved
    # elements on the arc) and the Green's-theorem area of its boundary equal F R^2
    a, t = D(alpha), D(theta)
    dom, r_over_b = _corner_domain(a, t)        # section scaled on the wetted wall length b = 1
    F = meniscus_area_factor(a, t)
    assert dom.area / r_over_b ** 2 == pytest.approx(F, rel=1e-12)
    sol = solve_poisson(dom, h=0.1 * math.sqrt(dom.area))
    assert sol.area / r_over_b ** 2 == pytest.approx(F, rel=1e-6)


def test_wall_length_and_bisector_height_geometry():
    # closed forms (plane geometry of the circular-arc meniscus) checked against the construction: the contact
    # point at distance b from the corner lies on the meniscus circle, which meets the wall at theta,
    # and the circle crosses the bisector at height h
    R, a, t = 2.0, D(25), D(20)
    b = wetted_wall_length(R, a, t)
    h = bisector_height(R, a, t)
    d = R * math.cos(t) / math.sin(a)                        # centre on the bisector
    c = np.array([d, 0.0])
    p = b * np.array([math.cos(a), -math.sin(a)])            # contact point on the lower wall
    assert np.linalg.norm(p - c) == pytest.approx(R, rel=1e-12)
    wall = np.array([math.cos(a), -math.sin(a)])
    radial = (p - c) / R                                     # normal of the circle at p
    assert math.degrees(math.acos(abs(radial @ np.array([-wall[1], wall[0]])))) == pytest.approx(20.0)
    assert h == pytest.approx(d - R, rel=1e-12)
    # [calc] pins: b = R cot(alpha) for theta = 0; h = R for alpha = 30, theta = 0
    assert wetted_wall_length(1.0, D(45), 0.0) == pytest.approx(1.0, rel=1e-12)
    assert bisector_height(1.0, D(30), 0.0) == pytest.approx(1.0, rel=1e-12)


def test_meniscus_pressure():
    # Young-Laplace with one curvature: p - p_gas = -sigma/R
    assert meniscus_pressure(1e-3, 0.072) == pytest.approx(-72.0)
    np.testing.assert_allclose(meniscus_pressure(np.array([1e-3, 2e-3]), 0.072), [-72.0, -36.0])
    with pytest.raises(ValueError, match="sigma"):
        meniscus_pressure(1e-3, -0.07)
    with pytest.raises(ValueError, match="R"):
        meniscus_pressure(0.0, 0.07)


def test_concus_finn_reexport():
    assert concus_finn_wets is lowgmap.physics.properties.wetting.concus_finn_wets
    # Concus & Finn (1969): 7.9 deg half-angle wicks for theta < 82.1 deg
    assert concus_finn_wets(D(7.9), D(82.0)) and not concus_finn_wets(D(7.9), D(82.2))


def test_beta_table_values_regression():
    # [calc] regression pins of our own finite-element solutions (mesh change < 1e-5, manual table)
    assert flow_resistance(D(45), 0.0) == pytest.approx(91.369, rel=1e-4)
    assert flow_resistance(D(30), 0.0) == pytest.approx(30.088, rel=1e-4)
    assert flow_resistance(D(10), 0.0) == pytest.approx(9.6217, rel=1e-4)
    assert flow_resistance(D(45), 0.0, "noslip") == pytest.approx(246.67, rel=1e-4)


def test_beta_trends_ransohoff_radke():
    # Ransohoff & Radke (1988): beta grows with the half-angle and with the contact angle, and a
    # no-slip interface resists more than a shear-free one
    alphas = np.radians(np.arange(2.0, 88.0, 3.0))
    for iface in ("free", "noslip"):
        b = flow_resistance(alphas, 0.0, iface)
        assert np.all(np.diff(b) > 0)
        for a in (D(5), D(30), D(60)):
            th = np.linspace(0.0, 0.95 * (math.pi / 2 - a), 12)
            assert np.all(np.diff(flow_resistance(a, th, iface)) > 0)
    grid_a, grid_t = np.meshgrid(np.radians(np.arange(2.0, 88.0, 5.0)), np.radians(np.arange(0.0, 88.0, 5.0)))
    free = flow_resistance(grid_a, grid_t, "free")
    noslip = flow_resistance(grid_a, grid_t, "noslip")
    ok = np.isfinite(free)
    assert ok.sum() > 100
    assert np.all(noslip[ok] > free[ok])


def test_zhou_blunt_orr_fit_within_its_stated_accuracy():
    # Zhou, Blunt & Orr (1997) closed-form fit, as written in Piri & Blunt (2005) eqs. B10-B15;
    # transcribed from a public pore-network code, NOT checked against the paper itself.
    # From memory: the fit deviates from full numerical solutions by up to tens of per cent for some angles.
    # Measured ratio beta/beta_fit over alpha 10-45 deg, theta 0-30 deg: 0.68 ... 1.26. Tolerance 35 %.
    def fit(a, t, f):
        f1 = math.pi / 2 - a - t
        f2 = math.cos(t) / math.tan(a) - math.sin(t)
        f3 = (math.pi / 2 - a) * math.tan(a)
        F = f2 * math.cos(t) - f1
        return 12 * math.sin(a) ** 2 * (1 - f3) ** 2 * (f2 + f * f1) ** 2 / (F ** 2 * (1 - math.sin(a)) ** 2 * f3 ** 2)

    for a in (10, 15, 30, 45):
        for t in (0, 30):
            assert flow_resistance(D(a), D(t), "free") == pytest.approx(fit(D(a), D(t), 0), rel=0.35)
            assert flow_resistance(D(a), D(t), "noslip") == pytest.approx(fit(D(a), D(t), 1), rel=0.35)


def test_limits_with_closed_forms():
    # flat interface (theta + alpha -> 90 deg): beta (b/R)^2 -> A_b/flux_b of the triangle.
    # alpha 45, shear-free: half of the square duct (mirror symmetry) -> 1/mean_square,
    # mean_square = D_h^2/(2 fRe) = 1/(2 x 14.2271)  (Shah & London 1978, square)
    def beta_b(a, t, iface):
        return flow_resistance(a, t, iface) * (math.cos(t + a) / math.sin(a)) ** 2

    a = D(45)
    assert beta_b(a, a - 1e-9, "free") == pytest.approx(2 * 14.2271, rel=2e-3)
    # alpha 30, no-slip interface: the equilateral triangle duct of side b: A/flux = 2 fRe / D_h^2
    # with fRe = 13.333 (Shah & London 1978) and D_h^2 = 1/3
    a = D(30)
    assert beta_b(a, D(60) - 1e-9, "noslip") == pytest.approx(2 * 13.333 * 3, rel=2e-3)
    # thin-film limit alpha -> 90 deg: a film with a free surface carries 4 times the flow of the
    # same film between no-slip surfaces (lubrication: h^3/3 vs h^3/12 per unit width)
    assert flow_resistance(D(89), 0.0, "noslip") / flow_resistance(D(89), 0.0, "free") == pytest.approx(4.0, rel=5e-3)
    # narrow wedge alpha -> 0 with a flat end: lubrication gives A_b/flux_b = 6/alpha^2 (manual)
    a = D(1)
    assert beta_b(a, math.pi / 2 - a - 1e-9, "free") * math.sin(2 * a) ** 2 == pytest.approx(24.0, rel=5e-3)


def test_direct_solve_mesh_convergence_and_interpolation():
    # two meshes agree within 1 % (requirement); measured changes ~1e-5 (manual)
    for a, t, iface in ((D(20), D(10), "free"), (D(50), D(25), "noslip")):
        coarse = flow_resistance_direct(a, t, iface, mesh_size=0.12)
        fine = flow_resistance_direct(a, t, iface, mesh_size=0.06)
        assert abs(coarse / fine - 1) < 1e-2
        assert abs(coarse / fine - 1) < 2e-4
        # off-grid interpolation of the table vs the direct solve; measured max 1e-5 over 276 points
        assert flow_resistance(a, t, iface) == pytest.approx(fine, rel=2e-4)


def test_arrays_and_nan_outside_meniscus_domain():
    a = np.radians([30.0, 30.0, 45.0])
    t = np.radians([0.0, 70.0, 10.0])
    for fun in (meniscus_area_factor, flow_resistance):
        out = fun(a, t)
        assert out.shape == (3,) and np.isnan(out[1]) and np.all(np.isfinite(out[[0, 2]]))
        assert out[0] == pytest.approx(fun(D(30), 0.0))
    assert np.isnan(wetted_wall_length(1.0, a, t)[1])
    assert np.isnan(bisector_height(np.array([1.0, 2.0, 3.0]), a, t)[1])


def test_errors():
    with pytest.raises(ValueError, match="contact_angle"):
        flow_resistance(D(30), D(60))
    with pytest.raises(ValueError, match="contact_angle"):
        meniscus_area_factor(D(30), D(75))
    with pytest.raises(ValueError, match="contact_angle"):
        flow_resistance_direct(D(45), D(50))
    with pytest.raises(ValueError, match="contact_angle"):
        wetted_wall_length(1.0, D(10), D(-5))
    with pytest.raises(ValueError, match="half_angle"):
        bisector_height(1.0, D(90), 0.0)
    with pytest.raises(ValueError, match="half_angle"):
        meniscus_area_factor(0.0, 0.0)
    with pytest.raises(ValueError, match="half_angle"):
        flow_resistance(D(0.5), 0.0)      # outside the tabulated range 1-89 deg
    with pytest.raises(ValueError, match="interface"):
        flow_resistance(D(30), 0.0, "slip")
    with pytest.raises(ValueError, match="R"):
        wetted_wall_length(-1.0, D(30), 0.0)
    with pytest.raises(TypeError, match="scalar"):
        flow_resistance_direct(np.radians([30.0, 40.0]), 0.0)
