"""Tests for lowgmap.physics.models.open_channel: the flow-rate limit of open capillary channels.

Model form: Rosendahl, Ohlhoff & Dreyer, J. Fluid Mech. 518:187-214 (2004); Haake et al.,
Microgravity Sci. Technol. 22:129-138 (2010); Klatte et al., Acta Mech. 201:269-276 (2008).
No numerical result of those papers is used as a check value: the checks are closed forms derived
here (inviscid maximum of Bernoulli + Young-Laplace, lubrication limits, exact Stokes solutions for
flat surfaces), physical invariants, and labelled [calc] regression pins.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad
from scipy.optimize import minimize_scalar

from lowgmap.physics.geometry.corner import flow_resistance, meniscus_area_factor
from lowgmap.physics.models import open_channel
from lowgmap.physics.models.open_channel import geometry, hydraulics, profile, tables
from lowgmap.physics.models.open_channel import (
    LIMITS,
    CornerFilament,
    ParallelPlates,
    RectangularGroove,
    WedgeChannel,
    critical_flow_curve,
    critical_flow_rate,
    speed_index,
    surface_profile,
)

DEG = math.pi / 180.0


# ---------------------------------------------------------------------------------------------
# closed forms derived for the tests (independent of the module's code)
# ---------------------------------------------------------------------------------------------
def segment(R, chord):
    """Area of the circular segment of radius R over a chord (arc half-angle asin(chord/2R))."""
    b = math.asin(chord / (2.0 * R))
    return R * R * (b - math.sin(b) * math.cos(b))


def plates_area(R, a, b):
    return a * b - 2.0 * segment(R, a) if math.isfinite(R) else a * b


def inviscid_plates(b_over_a):
    """Maximum of Q = A(R) sqrt(2 sigma/(rho R)) over R >= a/2 (a = rho = sigma = 1).

    Derivation: with p0 = p_gas, no entrance loss and mu = 0, the momentum equation integrates to
    Bernoulli p + rho v^2/2 = p_gas, and Young-Laplace (R2 neglected) gives p - p_gas = -sigma/R,
    so v = sqrt(2 sigma/(rho R)) and Q = v A(R). Q vanishes for R -> inf (v -> 0) and has a single
    maximum; dQ/dp = 0 there is the same as v^2 = A/(rho dA/dp), i.e. speed index 1.
    """
    r = minimize_scalar(lambda R: -plates_area(R, 1.0, b_over_a) * math.sqrt(2.0 / R),
                        bounds=(0.5, 50.0), method="bounded", options={"xatol": 1e-12})
    return -r.fun, r.x


def rectangle_mean(w, h, terms=50):
    """Mean of -lap(w) = 1, w = 0 on a w x h rectangle (standard Fourier series, h <= w)."""
    s = sum(math.tanh(n * math.pi * w / (2.0 * h)) / n**5 for n in range(1, 2 * terms, 2))
    return h * h / 12.0 * (1.0 - 192.0 * h / (math.pi**5 * w) * s)


# ---------------------------------------------------------------------------------------------
# geometry
# ---------------------------------------------------------------------------------------------
def test_areas_match_the_arc_formulas():
    # area functions of circular-arc free surfaces (plain plane geometry, no source needed)
    a, b = 0.004, 0.01
    pp = ParallelPlates(a, b)
    for R in (0.003, 0.0025, 0.01, 1.0):
        assert pp.area(R) == pytest.approx(plates_area(R, a, b), rel=1e-12)
    w, d = 0.003, 0.002
    g = RectangularGroove(w, d)
    assert g.area(0.004) == pytest.approx(w * d - segment(0.004, w), rel=1e-12)
    al, L = 25 * DEG, 0.01
    wc = WedgeChannel(al, L)
    h = L * math.cos(al)                       # reference formula uses the depth h = L cos(alpha)
    R = 0.02
    assert wc.area(R) == pytest.approx(h * h * math.tan(al) - segment(R, 2 * h * math.tan(al)), rel=1e-12)
    assert pp.area(np.inf) == pytest.approx(a * b, rel=1e-15)
    # small arc angle: no cancellation (series branch), area deficit ~ (2/3) c^3 kappa per surface
    R = 1e4
    assert a * b - pp.area(R) == pytest.approx(2 * (2 / 3) * (a / 2) ** 3 / R, rel=1e-6)


def test_corner_area_factor_values():
    # [calc] from the circular-arc corner-meniscus area A = R^2 F: F(45,0) = 0.214602, F(30,30) = 0.342427
    assert CornerFilament(45 * DEG).area(1.0) == pytest.approx(0.214602, abs=1e-6)
    assert CornerFilament(30 * DEG, 30 * DEG).area(2.0) == pytest.approx(4 * 0.342427, abs=4e-6)


def test_area_nan_outside_and_dA_dp_by_difference():
    pp = ParallelPlates(1.0, 2.0)
    out = pp.area(np.array([0.4, 0.5, 0.7, -1.0]))
    assert np.isnan(out[0]) and np.isfinite(out[1]) and np.isfinite(out[2]) and np.isnan(out[3])
    sigma, R, e = 0.07, 0.8, 1e-6
    # p = -sigma/R: dA/dp = (dA/dR)/(dp/dR) = (dA/dR) R^2/sigma
    dAdR = (pp.area(R + e) - pp.area(R - e)) / (2 * e)
    assert pp.dA_dp(R, sigma) == pytest.approx(dAdR * R * R / sigma, rel=1e-7)


def test_minimum_radius_from_geometry():
    # semicircle: R = a/2; contact angle theta: the arc meets the plate face at theta when
    # beta = 90 deg - theta, R = (a/2)/cos(theta) (plane geometry)
    assert ParallelPlates(0.002, 0.01).min_radius == pytest.approx(0.001, rel=1e-12)
    assert ParallelPlates(0.002, 0.01, 20 * DEG).min_radius == pytest.approx(0.001 / math.cos(20 * DEG), rel=1e-12)
    # groove: surface touches the bottom, sagitta = d: R = (c^2 + d^2)/(2d)
    g = RectangularGroove(0.004, 0.001)
    assert g.min_radius == pytest.approx((0.002**2 + 0.001**2) / 0.002, rel=1e-12)
    # two plates closer than their gap: the two surfaces touch, sagitta = b/2
    pp = ParallelPlates(0.002, 0.001)
    assert pp.min_radius == pytest.approx((0.001**2 + 0.0005**2) / 0.001, rel=1e-12)


@pytest.mark.parametrize("th_deg", [0.0, 10.0])
def test_wedge_transition(th_deg):
    # at R_t = L sin(a)/cos(a + t) the pinned arc meets the plates at theta: it is the corner
    # meniscus with wetted length L (corner-meniscus formula b = R cos(t + a)/sin(a)), so A is continuous.
    # Derived: pinned dA/dR = 2R(sin^2(b) tan(b) - (b - sin b cos b)) at b = 90 deg - a - t,
    # corner dA/dR = 2RF; equal for theta = 0 (both arcs tangent to the walls), not for theta > 0
    al, th, L = 30 * DEG, th_deg * DEG, 0.01
    wc = WedgeChannel(al, L, th)
    Rt = wc.transition_radius
    assert Rt == pytest.approx(L * math.sin(al) / math.cos(al + th), rel=1e-12)
    assert Rt * math.cos(th + al) / math.sin(al) == pytest.approx(L, rel=1e-12)
    F = meniscus_area_factor(al, th)
    e = 1e-7 * Rt
    assert wc.area(Rt * (1 + 1e-12)) == pytest.approx(F * Rt**2, rel=1e-9)
    up = (wc.area(Rt + 2 * e) - wc.area(Rt + e)) / e
    down = (wc.area(Rt - e) - wc.area(Rt - 2 * e)) / e
    b = math.pi / 2 - al - th
    assert up == pytest.approx(2 * Rt * (math.sin(b) ** 2 * math.tan(b) - (b - math.sin(b) * math.cos(b))), rel=1e-5)
    assert down == pytest.approx(2 * Rt * F, rel=1e-5)
    if th_deg == 0.0:
        assert up == pytest.approx(down, rel=1e-5)
    assert wc.min_radius == 0.0


# ---------------------------------------------------------------------------------------------
# cross-section resistance (Stokes tables)
# ---------------------------------------------------------------------------------------------
def test_plates_flat_resistance_is_plane_poiseuille():
    # flat shear-free surfaces: w = (a^2/4 - x^2)/2 solves the section exactly, mean = a^2/12,
    # K = A/mean = 12 b/a (closed form, plane Poiseuille flow); table from FE, error < 1e-5
    pp = ParallelPlates(1.0, 1.0)
    assert pp.resistance(np.inf) == pytest.approx(12.0, rel=1e-5)


def test_groove_flat_resistance_is_half_rectangle():
    # flat shear-free top = symmetry plane of a closed w x 2d rectangle: K = w d / mean(w, 2d)
    # (rectangular-duct Fourier series, e.g. Shah & London 1978)
    g = RectangularGroove(1.0, 1.0)
    assert g.resistance(np.inf) == pytest.approx(1.0 / rectangle_mean(2.0, 1.0), rel=1e-4)


def pinned_arc_K(wall, edge, beta, parts):
    """K = A/mean of a section made of `parts` copies of: the pieces `wall` ending at `edge`, an arc
    of half-angle beta from the edge to the symmetry line x = 0 (centre on it), the symmetry line
    back to the origin; built here with lowgmap.physics.geometry.stokes directly (not the module's domain code)."""
    from lowgmap.physics.geometry.stokes import Arc, Domain, Line, solve_poisson
    ex, ey = edge
    R = ex / math.sin(beta)
    s = ex * math.tan(beta / 2)
    d = Domain(wall + [Arc((ex, ey), (0.0, ey - s), (0.0, ey - s + R), "free"), Line((0.0, ey - s), (0.0, 0.0), "free")])
    return parts * d.area / solve_poisson(d).mean


def test_wedge_pinned_resistance_approaches_corner_value():
    # just before the contact lines leave the edges the pinned section is (nearly) the corner
    # filament: a direct FE solve of the pinned domain must agree with lowgmap.physics.geometry.corner's table
    # (own domain, own table); K changes ~0.3 per rad there, so 0.005 rad short gives < 1e-4
    from lowgmap.physics.geometry.stokes import Line
    al = 30 * DEG
    edge = (math.sin(al), math.cos(al))
    K = pinned_arc_K([Line((0.0, 0.0), edge, "wall")], edge, math.pi / 2 - al - 0.005, 2)
    Kc = meniscus_area_factor(al, 0.0) * flow_resistance(al, 0.0)
    assert K == pytest.approx(Kc, rel=2e-4)
    wc = WedgeChannel(al, 1.0)
    assert wc.resistance(wc.transition_radius * 0.5) == pytest.approx(Kc, rel=1e-12)
    assert CornerFilament(al).resistance(0.3) == pytest.approx(Kc, rel=1e-12)


def test_resistance_table_between_nodes():
    # the tabulated K(R1) (Chebyshev nodes in the arc angle) against direct FE solves at arbitrary
    # arc angles; quarter of the b/a = 1 plates built here (the hardest shape: surfaces close in)
    from lowgmap.physics.geometry.stokes import Line
    pp = ParallelPlates(1.0, 1.0)
    wall = [Line((0.0, 0.0), (0.5, 0.0), "free"), Line((0.5, 0.0), (0.5, 0.5), "wall")]
    for beta in (0.37, 1.13, 1.45):
        K_direct = pinned_arc_K(wall, (0.5, 0.5), beta, 4)
        assert pp.resistance(0.5 / math.sin(beta)) == pytest.approx(K_direct, rel=1e-5)


# ---------------------------------------------------------------------------------------------
# inviscid limit
# ---------------------------------------------------------------------------------------------
@pytest.mark.parametrize("b_over_a, ref", [(1.0, 1.2053), (2.0, 2.9629), (5.0, 8.7157)])
def test_inviscid_plates_closed_form(b_over_a, ref):
    # [calc, derived, not published] from the steady 1-D speed-index model (S = 1 at the outlet, after
    # Rosendahl, Ohlhoff & Dreyer 2004): Q_crit/(a^2 sqrt(sigma/(rho a)))
    q, R = inviscid_plates(b_over_a)
    assert q == pytest.approx(ref, abs=1e-4)             # 4-decimal reference (2.96285 rounds either way)
    a, rho, sigma = 0.003, 1200.0, 0.02
    r = critical_flow_rate(ParallelPlates(a, b_over_a * a), 0.1, rho, 0.0, sigma)
    scale = a * a * math.sqrt(sigma / (rho * a))
    assert r.Q_crit / scale == pytest.approx(q, rel=1e-9)
    assert r.profile.R1[-1] / a == pytest.approx(R, rel=1e-6)
    assert r.limited_by == "speed_index"
    assert r.outlet_speed_index == pytest.approx(1.0, abs=1e-9)
    if b_over_a == 1.0:
        assert R == pytest.approx(0.751, abs=5e-4)       # [calc] R1/a = 0.751 at b/a = 1


def test_small_viscosity_tends_to_inviscid():
    # Oh -> 0: the viscous model must reach the inviscid closed form (limiting case)
    q, _ = inviscid_plates(1.0)
    pp = ParallelPlates(1.0, 1.0)
    r = critical_flow_rate(pp, 10.0, 1.0, 1e-7, 1.0, resistance=12.0)
    assert r.Q_crit == pytest.approx(q, rel=1e-5)


def test_entrance_loss_inviscid():
    # derived: with mu = 0 the inlet relation is Q = A(R) sqrt(2 sigma/((1+K_e) rho R)), the same
    # function as for K_e = 0 divided by sqrt(1+K_e): Q_crit(K_e) = Q_crit(0)/sqrt(1+K_e), at the
    # same R; there dQ/dR = 0 gives S^2 = 1/(1+K_e) (the entrance, not the speed index, limits)
    q, R = inviscid_plates(2.0)
    K_e = 0.5
    r = critical_flow_rate(ParallelPlates(1.0, 2.0), 5.0, 1.0, 0.0, 1.0, K_e=K_e)
    assert r.Q_crit == pytest.approx(q / math.sqrt(1 + K_e), rel=1e-9)
    assert r.profile.R1[0] == pytest.approx(R, rel=1e-6)
    assert r.limited_by == "inlet"
    assert r.outlet_speed_index == pytest.approx(1 / math.sqrt(1 + K_e), rel=1e-7)
    # viscous, long: the speed index limits again
    r = critical_flow_rate(ParallelPlates(1.0, 2.0), 5.0, 1.0, 0.01, 1.0, K_e=K_e, resistance=24.0)
    assert r.limited_by == "speed_index"


def test_corner_filament_inviscid():
    al = 30 * DEG
    cf = CornerFilament(al)
    F = meniscus_area_factor(al, 0.0)
    # derived: fed from a reservoir at the gas pressure, sigma/R = (1+K_e) rho v^2/2 and
    # A = F R^2 give S = 2/sqrt(1+K_e) at every flow, and Q(R) grows without bound (no maximum)
    for K_e in (0.0, 1.0, 5.0):
        R = np.array([1e-4, 1e-3, 1e-2])
        Q = F * R**2 * np.sqrt(2 * 0.07 / ((1 + K_e) * 1000.0 * R))
        assert np.all(np.diff(Q) > 0)
        assert speed_index(cf, Q, R, 1000.0, 0.07) == pytest.approx(np.full(3, 2 / math.sqrt(1 + K_e)), rel=1e-12)
    with pytest.raises(ValueError, match="inlet_radius"):
        critical_flow_rate(cf, 0.1, 1000.0, 1e-3, 0.07)
    # derived: reservoir at p0 - p_g = -sigma/R0, mu = 0, K_e = 0: Q^2 ~ (1/R - 1/R0) R^4 is
    # largest at R = 3 R0/4, Q = F R^2 sqrt(2 sigma (1/R - 1/R0)/rho)
    R0, sigma, rho = 0.002, 0.05, 800.0
    r = critical_flow_rate(cf, 0.3, rho, 0.0, sigma, inlet_pressure=-sigma / R0)
    Rc = 0.75 * R0
    assert r.Q_crit == pytest.approx(F * Rc**2 * math.sqrt(2 * sigma * (1 / Rc - 1 / R0) / rho), rel=1e-9)
    assert r.limited_by == "speed_index"


# ---------------------------------------------------------------------------------------------
# viscous-dominated limit (lubrication)
# ---------------------------------------------------------------------------------------------
def test_long_plates_reach_lubrication_estimate():
    # derived: for long channels v << v_c except at the outlet, so dp/dz = -K mu Q/A^2; with
    # p from 0 at the inlet to -2 sigma/a at the outlet (S -> inf as the surfaces become
    # semicircles, theta = 0), Q l mu = sigma * integral_0^{2/a} A^2/K dkappa. With the
    # plane-Poiseuille resistance K = 12 A/a^2 this is (sigma a^2/12) * integral A dkappa.
    a, b, mu = 1.0, 1.0, 0.01
    pp = ParallelPlates(a, b)
    I = quad(lambda k: plates_area(1 / k, a, b) if k > 0 else a * b, 0.0, 2 / a, limit=200)[0]
    Q_lub = lambda l: a * a / 12.0 * I / (mu * l)
    ratios = []
    for l in (100.0, 1000.0, 1e4):
        r = critical_flow_rate(pp, l, 1.0, mu, 1.0, resistance=lambda R: 12.0 * pp.area(R) / a**2)
        ratios.append(r.Q_crit / Q_lub(l))
    # inertia correction ~ 1/l^2: ratio -> 1 from below
    assert ratios[0] < ratios[1] < ratios[2] <= 1.0
    assert ratios[2] == pytest.approx(1.0, abs=1e-4)
    # [calc] regression pins (model arithmetic, not published)
    assert ratios[0] == pytest.approx(0.97128, abs=2e-4)


def test_long_plates_with_stokes_resistance():
    # same limit with the FE resistance: quadrature here of the public K(R1) must match
    a, b, mu = 1.0, 1.0, 0.01
    pp = ParallelPlates(a, b)
    J = quad(lambda k: plates_area(1 / k, a, b) ** 2 / pp.resistance(1 / k) if k > 0 else (a * b) ** 2 / 12.0,
             0.0, 2 / a, limit=200)[0]
    r = critical_flow_rate(pp, 1e4, 1.0, mu, 1.0)
    assert r.Q_crit * 1e4 * mu == pytest.approx(J, rel=1e-4)
    # Stokes resistance of the curved section is above 12 A/a^2 (surfaces add wall-bounded
    # corners of slow flow), so the critical flow is below the plane-Poiseuille estimate
    rp = critical_flow_rate(pp, 1e4, 1.0, mu, 1.0, resistance=lambda R: 12.0 * pp.area(R))
    assert r.Q_crit < rp.Q_crit


def test_long_corner_reaches_lubrication_estimate():
    # derived: corner fed at inlet radius R0, A = F R^2, K = F beta constant:
    # Q l mu = sigma integral_{1/R0}^inf F^2 kappa^-4/(F beta) dkappa = sigma F R0^3/(3 beta)
    al, th = 30 * DEG, 15 * DEG
    cf = CornerFilament(al, th)
    F, beta = meniscus_area_factor(al, th), flow_resistance(al, th)
    R0, sigma, mu, rho = 0.001, 0.06, 2e-3, 900.0
    for l, tol in ((10.0, 2e-4), (100.0, 2e-6)):
        r = critical_flow_rate(cf, l, rho, mu, sigma, inlet_radius=R0)
        assert r.Q_crit == pytest.approx(sigma * F * R0**3 / (3 * beta * mu * l), rel=tol)
        assert r.profile.R1[0] == pytest.approx(R0, rel=1e-12)


# ---------------------------------------------------------------------------------------------
# the critical state and trends
# ---------------------------------------------------------------------------------------------
CHANNELS = [
    (ParallelPlates(1.0, 1.0), {}),
    (RectangularGroove(1.0, 1.0), {}),
    (WedgeChannel(30 * DEG, 1.0), {}),
    (CornerFilament(30 * DEG), {"inlet_radius": 1.0}),
]


@pytest.mark.parametrize("channel, kw", CHANNELS, ids=lambda c: type(c).__name__ if not isinstance(c, dict) else "")
def test_speed_index_one_at_outlet_and_below_for_less_flow(channel, kw):
    rho, mu, sigma, l = 1.0, 0.01, 1.0, 20.0
    r = critical_flow_rate(channel, l, rho, mu, sigma, **kw)
    assert r.limited_by == "speed_index"
    assert r.outlet_speed_index == pytest.approx(1.0, abs=1e-5)
    assert r.profile.z[-1] == pytest.approx(l, rel=1e-9)
    # the outlet speed index recomputed from the public function
    S_out = speed_index(channel, r.Q_crit, r.profile.R1[-1], rho, sigma)
    assert S_out == pytest.approx(1.0, abs=1e-5)
    for f in (0.5, 0.99):
        p = surface_profile(channel, f * r.Q_crit, l, rho, mu, sigma, **kw)
        assert np.all(p.speed_index < 1.0)
        assert np.all(np.diff(p.pressure) < 0)           # pressure falls along the flow
        assert np.all(np.diff(p.area) < 0)
        assert p.flow_rate == pytest.approx(f * r.Q_crit)
        assert np.allclose(p.velocity * p.area, f * r.Q_crit, rtol=1e-12)
    with pytest.raises(ValueError, match="chokes at z"):
        surface_profile(channel, 1.01 * r.Q_crit, l, rho, mu, sigma, **kw)


@pytest.mark.parametrize("channel, kw", CHANNELS + [(WedgeChannel(30 * DEG, 1.0, 10 * DEG), {})],
                         ids=lambda c: type(c).__name__ if not isinstance(c, dict) else "")
def test_critical_flow_decreases_with_length(channel, kw):
    ls = np.geomspace(0.1, 1000.0, 12)
    cur = critical_flow_curve(channel, ls, 1.0, 0.01, 1.0, **kw)
    assert np.all(np.diff(cur.Q_crit) < 0)
    assert all(x in LIMITS for x in cur.limited_by)
    r = critical_flow_rate(channel, ls[5], 1.0, 0.01, 1.0, **kw)
    assert cur.Q_crit[5] == pytest.approx(r.Q_crit, rel=1e-12)


def test_depinning_is_reported_as_the_choking_mechanism():
    # wedge with theta > 0 (derived in the theory manual): at R_t = L sin(a)/cos(a + theta) the contact lines
    # leave the plate edges and -dA/dkappa jumps up, so the speed index jumps. Where it jumps across 1 the
    # flow chokes there with S < 1 on the pinned side: the mechanism is depinning, not S = 1.
    w = WedgeChannel(6 * DEG, 0.04, 5 * DEG)
    rho, mu, sigma = 913.0, 4.565e-3, 0.0197
    lengths = np.geomspace(0.004, 0.2, 9)
    cur = critical_flow_curve(w, lengths, rho, mu, sigma)
    assert "depinning" in cur.limited_by and "speed_index" in cur.limited_by
    for l, q, why in zip(lengths, cur.Q_crit, cur.limited_by):
        r = critical_flow_rate(w, float(l), rho, mu, sigma)
        m = r.mechanism
        assert r.limited_by == why and m.key == why and r.Q_crit == pytest.approx(q, rel=1e-12)
        if why == "depinning":
            # the outlet sits at the transition radius; S below 1 on the pinned side, at least 1 beyond
            assert r.profile.R1[-1] == pytest.approx(w.transition_radius, rel=1e-6)
            assert m.speed_index == pytest.approx(r.outlet_speed_index) and m.speed_index < 1.0 <= m.speed_index_beyond
            F = w.area_factor                                  # corner filament beyond: A = F R^2
            kt = 1.0 / w.transition_radius
            assert m.speed_index_beyond == pytest.approx(math.sqrt(2 * rho * q * q * kt ** 3 / (sigma * F * F)),
                                                         rel=1e-12)
            assert "depinning" in m.description and "pinned side" in m.description
        else:
            assert r.outlet_speed_index == pytest.approx(1.0, abs=1e-5) and math.isnan(m.speed_index_beyond)
    # with theta = 0 both branches join smoothly: never depinning
    w0 = WedgeChannel(6 * DEG, 0.04, 0.0)
    assert "depinning" not in critical_flow_curve(w0, lengths, rho, mu, sigma).limited_by
    assert set(LIMITS) >= {"speed_index", "inlet", "meniscus_limit", "no_solution", "depinning", "no_hold"}


def test_entrance_loss_lowers_the_critical_flow():
    # p(0) = p0 - (1 + K_e) rho v^2/2: a larger entrance loss leaves less suction for the channel, so the
    # critical flow falls with K_e (the safe direction for the ingestion line; K_e = 0 is an upper bound)
    for ch in (ParallelPlates(0.004, 0.01), WedgeChannel(15 * DEG, 0.01), RectangularGroove(0.004, 0.004)):
        q = [critical_flow_rate(ch, 0.05, 1000.0, 1e-3, 0.07, K_e=k).Q_crit for k in (0.0, 0.5, 1.0, 3.0)]
        assert np.all(np.diff(q) < 0)


def test_speed_index_rises_with_curvature():
    # S^2 = rho Q^2 (-dA/dkappa)/(sigma A^3) grows as the surface curves in: the choke is at the
    # end of the falling pressure, i.e. the outlet (property the model relies on)
    for ch in (ParallelPlates(1.0, 0.8), RectangularGroove(1.0, 0.3), WedgeChannel(20 * DEG, 1.0),
               CornerFilament(40 * DEG)):
        R = np.geomspace(50.0, max(ch.min_radius, 1e-3) * 1.0001, 400)
        S = speed_index(ch, 0.1, R, 1.0, 1.0)
        assert np.all(np.diff(S) > 0)


def test_meniscus_limit_in_shallow_groove():
    # shallow groove: the surface touches the bottom (R = (c^2 + d^2)/(2d)) before S = 1
    g = RectangularGroove(1.0, 0.2)
    r = critical_flow_rate(g, 100.0, 1.0, 0.01, 1.0, resistance=20.0)
    assert r.limited_by == "meniscus_limit"
    assert r.profile.R1[-1] == pytest.approx(g.min_radius, rel=1e-9)
    assert r.outlet_speed_index < 1.0


def test_dimensionless_scaling():
    # similarity: same b/a, l/a and Oh = mu/sqrt(rho sigma a) give the same Q/(a^2 sqrt(sigma/(rho a)))
    def qdim(a, rho, sigma, Oh, ch_fn, **kw):
        mu = Oh * math.sqrt(rho * sigma * a)
        r = critical_flow_rate(ch_fn(a), 30 * a, rho, mu, sigma, **kw)
        return r.Q_crit / (a * a * math.sqrt(sigma / (rho * a)))

    q1 = qdim(0.004, 1000.0, 0.072, 0.01, lambda a: ParallelPlates(a, a))
    q2 = qdim(0.0157, 1830.0, 0.013, 0.01, lambda a: ParallelPlates(a, a))
    assert q1 == pytest.approx(q2, rel=1e-9)
    q3 = qdim(0.004, 1000.0, 0.072, 0.03, lambda a: ParallelPlates(a, a))
    assert q3 < q1                                          # more viscous: less flow
    c1 = qdim(0.001, 1000.0, 0.072, 0.02, lambda a: CornerFilament(35 * DEG), inlet_radius=0.001)
    c2 = qdim(0.02, 700.0, 0.02, 0.02, lambda a: CornerFilament(35 * DEG), inlet_radius=0.02)
    assert c1 == pytest.approx(c2, rel=1e-9)


def test_regression_pins():
    # [calc] own numbers (guard refactors only): plates b/a = 1, Oh = 0.01, l/a = 10, FE resistance
    r = critical_flow_rate(ParallelPlates(1.0, 1.0), 10.0, 1.0, 0.01, 1.0)
    assert r.Q_crit == pytest.approx(0.66987, rel=2e-4)


# ---------------------------------------------------------------------------------------------
# streamwise curvature
# ---------------------------------------------------------------------------------------------
def test_streamwise_curvature_long_channel_and_symmetry():
    # inviscid, surfaces flat at both ends: Bernoulli makes the problem autonomous and reversible,
    # so the surface is symmetric about mid-length; for a long channel the end regions do not
    # matter and Q_crit tends to the closed form without streamwise curvature (R2 -> inf)
    q, _ = inviscid_plates(2.0)
    pp = ParallelPlates(1.0, 2.0)
    r = critical_flow_rate(pp, 30.0, 1.0, 0.0, 1.0, streamwise_curvature=True)
    assert r.Q_crit == pytest.approx(q, rel=2e-3)
    k = r.profile.centre_depth
    assert k[0] == pytest.approx(0.0, abs=1e-9) and k[-1] == pytest.approx(0.0, abs=1e-9)
    assert np.allclose(k, k[::-1], atol=2e-3 * k.max())
    # a short channel carries more: the streamwise curvature holds the surface ([calc] trend)
    rs = critical_flow_rate(pp, 2.0, 1.0, 0.0, 1.0, streamwise_curvature=True)
    assert rs.Q_crit > 1.05 * q
    p = surface_profile(pp, 0.9 * rs.Q_crit, 2.0, 1.0, 0.0, 1.0, streamwise_curvature=True)
    assert p.speed_index.max() < 1.0


# ---------------------------------------------------------------------------------------------
# input errors
# ---------------------------------------------------------------------------------------------
def test_bad_input_names_the_field():
    with pytest.raises(ValueError, match="gap"):
        ParallelPlates(-1.0, 1.0)
    with pytest.raises(ValueError, match="breadth"):
        ParallelPlates(1.0, 0.0)
    with pytest.raises(ValueError, match="contact_angle"):
        ParallelPlates(1.0, 1.0, 95 * DEG)
    with pytest.raises(ValueError, match="depth"):
        RectangularGroove(1.0, -2.0)
    with pytest.raises(ValueError, match="half_angle"):
        WedgeChannel(95 * DEG, 1.0)
    with pytest.raises(ValueError, match="Concus-Finn"):
        WedgeChannel(50 * DEG, 1.0, 45 * DEG)
    with pytest.raises(ValueError, match="Concus-Finn"):
        CornerFilament(30 * DEG, 70 * DEG)
    with pytest.raises(TypeError, match="wall_length"):
        WedgeChannel(30 * DEG, "long")
    pp = ParallelPlates(1.0, 1.0)
    ok = dict(rho=1.0, mu=0.01, sigma=1.0, resistance=12.0)
    for name, bad in (("rho", 0.0), ("mu", -1.0), ("sigma", -0.1), ("K_e", -0.5)):
        with pytest.raises(ValueError, match=name):
            critical_flow_rate(pp, 1.0, **{**ok, name: bad})
    with pytest.raises(ValueError, match="length"):
        critical_flow_rate(pp, 0.0, **ok)
    with pytest.raises(ValueError, match="inlet_pressure"):
        critical_flow_rate(pp, 1.0, inlet_pressure=10.0, **ok)
    with pytest.raises(ValueError, match="inlet_radius"):
        critical_flow_rate(pp, 1.0, inlet_radius=0.1, **ok)
    with pytest.raises(ValueError, match="not both"):
        critical_flow_rate(pp, 1.0, inlet_radius=1.0, inlet_pressure=-0.1, **ok)
    with pytest.raises(ValueError, match="resistance"):
        critical_flow_rate(pp, 1.0, **{**ok, "resistance": -3.0})
    with pytest.raises(ValueError, match="flow_rate"):
        surface_profile(pp, -1.0, 1.0, **ok)
    with pytest.raises(ValueError, match="flow_rate"):
        surface_profile(pp, 5.0, 1.0, **ok)                 # above the inlet maximum
    with pytest.raises(ValueError, match="lengths"):
        critical_flow_curve(pp, [1.0, -2.0], **ok)
    with pytest.raises(ValueError, match="streamwise_curvature"):
        critical_flow_rate(CornerFilament(30 * DEG), 1.0, inlet_radius=1.0, streamwise_curvature=True, **ok)
    with pytest.raises(TypeError, match="channel"):
        critical_flow_rate("plates", 1.0, **ok)
    with pytest.raises(TypeError, match="CornerFilament"):
        critical_flow_rate(CornerFilament(30 * DEG), 1.0, inlet_radius=1.0,
                           **{**ok, "resistance": lambda R: 20.0 + 0 * R})


# ---------------------------------------------------------------------------------------------
# package layout and the curvature interface the flow model uses
# ---------------------------------------------------------------------------------------------
def test_package_reexports_each_public_name_from_its_module():
    # one definition per name: the package re-exports the sub-modules' objects, nothing of its own
    homes = {}
    for mod in (geometry, tables, hydraulics, profile):
        for name in mod.__all__:
            assert name not in homes, f"{name} defined in {homes.get(name)} and {mod.__name__}"
            homes[name] = mod
    for name in open_channel.__all__:
        assert getattr(open_channel, name) is getattr(homes[name], name)


def test_segment_factors_closed_forms_and_series_join():
    # half disc: segment area pi c^2/2 over c^2; slope factor f = 1 - g cos/sin^3 -> 1/3 (beta -> 0), 1 at pi/2
    assert float(geometry.segment_area_factor(math.pi / 2)) == pytest.approx(math.pi / 2, rel=1e-14)
    assert float(geometry.segment_slope_factor(math.pi / 2)) == pytest.approx(1.0, rel=1e-14)
    assert float(geometry.segment_slope_factor(1e-6)) == pytest.approx(1.0 / 3.0, rel=1e-10)
    # the small-angle series (below 1e-2) and the direct formula (from 1e-2) meet at the switch;
    # the direct formula loses ~1e-12 to cancellation there (beta - sin(beta) cos(beta) ~ beta^3)
    for f in (geometry.segment_area_factor, geometry.segment_slope_factor):
        lo, hi = float(f(np.nextafter(1e-2, 0.0))), float(f(1e-2))
        assert lo == pytest.approx(hi, rel=1e-10)


@pytest.mark.parametrize("channel", [ParallelPlates(0.002, 0.01), RectangularGroove(0.004, 0.001),
                                     WedgeChannel(30 * DEG, 0.01, 10 * DEG)], ids=lambda c: type(c).__name__)
def test_curvature_interface_agrees_with_the_radius_functions(channel):
    kap = np.linspace(0.05, 0.95, 7) * channel.kappa_pinned
    assert channel.area_at(kap) == pytest.approx(channel.area(1.0 / kap), rel=1e-13)
    e = 1e-6 * channel.kappa_pinned                     # central difference of A(kappa)
    slope = (channel.area_at(kap + e) - channel.area_at(kap - e)) / (2 * e)
    assert channel.dA_dkappa(kap) == pytest.approx(slope, rel=1e-6)
    depth = channel.depth_at(kap)                       # depth and curvature are inverse maps
    assert channel.kappa_of_depth(depth) == pytest.approx(kap, rel=1e-12)
    assert channel.arc_angle(channel.kappa_pinned) == pytest.approx(channel.arc_angle_max, rel=1e-12)


# ---------------------------------------------------------------------------------------------
# axial residual acceleration (hydrostatic term of the 1-D momentum balance)
# ---------------------------------------------------------------------------------------------
def inviscid_plates_with_gravity(g_a, l):
    """Q_crit of inviscid plates a = b = 1, rho = sigma = 1, K_e = 0, reservoir at the gas pressure, with the
    axial acceleration g_a against the flow over the length l.

    Derivation: with mu = 0 the momentum equation with the hydrostatic term integrates to Bernoulli
    p + rho v^2/2 + rho g_a z = 0 (p relative to the gas), so at the outlet
    G(kappa) = sigma kappa - rho Q^2/(2 A^2) = rho g_a l. dG/dkappa = sigma (1 - S^2), so the largest Q for
    which G reaches rho g_a l has S = 1 at the outlet: Q^2 = sigma A^3/(rho (-dA/dkappa)) there and
    G = sigma kappa - sigma A/(2 (-dA/dkappa)) = rho g_a l fixes kappa. Area from plates_area (independent of
    the module), dA/dkappa by central differences.
    """
    from scipy.optimize import brentq as _brentq

    A = lambda k: plates_area(1.0 / k, 1.0, 1.0)                     # noqa: E731
    dA = lambda k: (A(k + 1e-6) - A(k - 1e-6)) / 2e-6               # noqa: E731
    G = lambda k: k - A(k) / (2.0 * -dA(k)) - g_a * l               # noqa: E731
    k = _brentq(G, 1e-3, 2.0 - 1e-5)
    return math.sqrt(A(k) ** 3 / -dA(k))


def test_gravity_inviscid_plates_match_bernoulli_with_hydrostatics():
    """Bernoulli + hydrostatics + Young-Laplace closed form (derived above). Catches a wrong sign or factor of
    the hydrostatic term, and a quadrature that is too coarse (trapezoid on 1025 points: error ~1e-6)."""
    pp = ParallelPlates(gap=1.0, breadth=1.0)
    for g_a, l in ((0.05, 2.0), (0.2, 1.5)):
        got = critical_flow_rate(pp, l, rho=1.0, mu=0.0, sigma=1.0, g_axial=g_a)
        assert got.limited_by == "speed_index"
        assert got.Q_crit == pytest.approx(inviscid_plates_with_gravity(g_a, l), rel=1e-4)


def test_gravity_tends_to_the_low_gravity_model_and_orders_by_orientation():
    """g_a -> 0 equals today's model (closed-form integrals) to the quadrature error; upward flow lowers the
    critical flow, downward flow raises it. Catches a discontinuity at g = 0 and a reversed sign."""
    w = WedgeChannel(10.0 * DEG, 0.02, 5.0 * DEG)
    q0 = critical_flow_rate(w, 0.2, 1000.0, 1e-3, 0.07).Q_crit
    q_tiny = critical_flow_rate(w, 0.2, 1000.0, 1e-3, 0.07, g_axial=1e-9).Q_crit
    assert q_tiny == pytest.approx(q0, rel=1e-6)
    up = [critical_flow_rate(w, 0.2, 1000.0, 1e-3, 0.07, g_axial=g).Q_crit for g in (1e-3, 1e-2, 1e-1)]
    down = critical_flow_rate(w, 0.2, 1000.0, 1e-3, 0.07, g_axial=-1e-2).Q_crit
    assert q0 > up[0] > up[1] > up[2] and down > q0


def test_gravity_no_flow_held_above_the_static_rise():
    """Static limit (Young-Laplace + hydrostatics): plates hold a column up to
    l_max = sigma kappa_max/(rho g_a), kappa_max = 2/a (theta = 0, b > a). Longer: no flow reaches the outlet.
    Catches an endless search for a vanishing flow and a wrong hold height."""
    pp = ParallelPlates(gap=0.005, breadth=0.025)
    l_max = 0.07 * (2.0 / 0.005) / (1000.0 * 1.0)                   # 0.028 m
    above = critical_flow_rate(pp, 1.05 * l_max, 1000.0, 1e-3, 0.07, g_axial=1.0)
    below = critical_flow_rate(pp, 0.9 * l_max, 1000.0, 1e-3, 0.07, g_axial=1.0)
    assert above.Q_crit == 0.0 and above.limited_by == "hydrostatic" and "hydrostatic" in LIMITS
    assert below.Q_crit > 0.0


def test_gravity_errors():
    """Catches a gravity value silently dropped by the streamwise-curvature model and a non-finite value."""
    pp = ParallelPlates(gap=0.005, breadth=0.025)
    with pytest.raises(ValueError, match="g_axial"):
        critical_flow_rate(pp, 0.05, 1000.0, 1e-3, 0.07, streamwise_curvature=True, g_axial=1.0)
    with pytest.raises(ValueError, match="g_axial"):
        critical_flow_rate(pp, 0.05, 1000.0, 1e-3, 0.07, g_axial=float("nan"))


# ---------------------------------------------------------------------------------------------
# scalar path of the root searches, and the section tables' splines
# ---------------------------------------------------------------------------------------------
def _channel(kind, theta):
    if kind == "plates":
        return ParallelPlates(0.002, 0.005, theta)
    if kind == "groove":
        return RectangularGroove(0.002, 0.003, theta)
    return WedgeChannel(math.radians(8.0), 0.01, theta)


@settings(max_examples=150, deadline=None)
@given(kind=st.sampled_from(["plates", "groove", "wedge"]), share=st.floats(0.0, 3.0),
       theta_deg=st.floats(0.0, 30.0))
def test_scalar_area_and_slope_equal_the_array_path(kind, share, theta_deg):
    # catches a slip in the scalar path of the fold search (a series coefficient, the half chord squared for
    # cubed, the corner-filament tail taken inside the pinned range): it must give area_at and dA_dkappa
    ch = _channel(kind, math.radians(theta_deg))
    k = share * ch.kappa_pinned if kind == "wedge" else min(share, 1.0) * ch.kappa_max
    A, Ak = ch.area_slope(k)
    assert A == pytest.approx(float(ch.area_at(k)), rel=1e-12, abs=0.0)
    assert Ak == pytest.approx(float(ch.dA_dkappa(k)), rel=1e-12, abs=0.0)


@pytest.mark.parametrize("kind", ["plates", "groove", "wedge"])
def test_scalar_area_near_a_flat_surface_is_the_segment_closed_form(kind):
    # catches a wrong series below the switch (1e-2 rad): A = flat area - n * segment(R, 2c), closed form above
    ch = _channel(kind, 0.0)
    c = ch.half_chord
    for beta in (1e-4, 5e-3, 0.02, 0.3):
        k = math.sin(beta) / c
        A, _ = ch.area_slope(k)
        assert A == pytest.approx(ch.flat_area - ch.n_surfaces * segment(1.0 / k, 2.0 * c), rel=1e-12, abs=0.0)


@pytest.mark.parametrize("kind", ["plates", "groove", "wedge"])
def test_section_tables_splines_are_the_resistance_and_the_integrands(kind):
    # the three splines share one fit (K, the integrands of I1 and I2): catches two columns swapped or the
    # antiderivative of the wrong one. At the grid nodes K is the resistance and dI1/dbeta, dI2/dbeta are
    # A^2 cos(beta)/(c K) and -dA/dbeta/(A K) (definitions of SectionTables)
    ch = _channel(kind, math.radians(3.0))
    tab = tables.SectionTables(ch, None)
    c = ch.half_chord
    k = tab.kgrid[1:-1:37]
    beta = np.arcsin(k * c)
    K = tab.K(k)
    A = ch.area_at(k)
    dA_db = ch.dA_dkappa(k) * np.cos(beta) / c
    from scipy.interpolate import BarycentricInterpolator
    nodes, Kn = tables.stokes_table(ch.normalized())
    inside = beta <= min(float(nodes[-1]), ch.table_end(tables.TABLE_END_MARGIN))
    assert inside.sum() >= 5
    assert np.allclose(K[inside], BarycentricInterpolator(nodes, Kn)(beta[inside]), rtol=1e-9)
    assert np.allclose(tab.I1.derivative()(beta), A * A * np.cos(beta) / (c * K), rtol=1e-9)
    assert np.allclose(tab.I2.derivative()(beta), -dA_db / (A * K), rtol=1e-9)


def test_scalar_segment_factors_equal_the_array_functions_on_both_sides_of_the_series_switch():
    # catches the scalar copy drifting from segment_area_factor / segment_slope_factor (a series term, the
    # switch at 1e-2 rad): the two paths must agree to rounding from 1e-6 rad to a half disc
    for b in np.concatenate([np.geomspace(1e-6, 0.5 * math.pi, 300), [9.999e-3, 1e-2, 1.0001e-2]]):
        saf, ssf = geometry._segment_factors_scalar(float(b))
        assert saf == pytest.approx(float(geometry.segment_area_factor(b)), rel=1e-14, abs=0.0)
        assert ssf == pytest.approx(float(geometry.segment_slope_factor(b)), rel=1e-14, abs=0.0)
