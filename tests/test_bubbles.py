"""Tests of lowgmap.physics.models.bubbles: film thickness, bubble size, spacing and merging, migration, taper path."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lowgmap.physics.models import bubbles as bb
from lowgmap.physics.geometry.sections import Circle, Groove, Polygon, WedgeChannel

# --- film thickness ---------------------------------------------------------------------------------


def test_bretherton_film_check_value():
    # Bretherton (1961), h/R = 1.3375 Ca^(2/3); check value [calc] from that law: Ca 1e-3 -> 0.013375
    assert bb.bretherton_film(1e-3) == pytest.approx(0.013375, rel=1e-12)


def test_aussillous_quere_film_check_value():
    # Aussillous & Quere (2000), h/R = 1.34 Ca^(2/3)/(1 + 3.35 Ca^(2/3)); [calc] from that law: Ca 1e-2 -> 0.05383
    assert bb.aussillous_quere_film(1e-2) == pytest.approx(0.05383, abs=5e-6)


def test_film_laws_agree_at_small_ca_and_saturate_at_large_ca():
    # limiting cases of the interpolation (closed forms): ratio 1.34/1.3375 as Ca -> 0; h/R -> 1.34/3.35
    ca = np.array([1e-9, 1e-7])
    assert np.allclose(bb.aussillous_quere_film(ca) / bb.bretherton_film(ca), 1.34 / 1.3375, rtol=1e-4)
    assert bb.aussillous_quere_film(1e9) == pytest.approx(1.34 / 3.35, rel=1e-5)
    assert np.isnan(bb.bretherton_film(-1.0)) and np.isnan(bb.aussillous_quere_film(-1.0))


# --- bubble size at injection ---------------------------------------------------------------------------

def test_squeezing_law_hand_point():
    # Garstecki et al. (2006), Lab Chip 6:437: L/w = 1 + a Q_G/Q_L; a = 1, Q_G/Q_L = 0.5 -> 1.5 (hand computed)
    assert bb.squeezing_length(2e-6, 1e-6, a=1.0) == pytest.approx(1.5, rel=1e-15)
    # a = 2.3, Q_G/Q_L = 4 -> 10.2
    assert bb.squeezing_length(1e-7, 4e-7, a=2.3) == pytest.approx(10.2, rel=1e-14)
    # plug w x h x L (hand computed): w = 0.1 mm, h = 0.05 mm, L/w = 3 -> 1.5e-12 m^3
    assert bb.squeezing_volume(1.0, 2.0, 1e-4, 5e-5, a=1.0) == pytest.approx(1.5e-12, rel=1e-12)


def test_size_frequency_spacing_closed_forms():
    v = bb.sphere_volume(2e-3)
    assert v == pytest.approx(math.pi * 8e-9 / 6, rel=1e-15)            # pi d^3 / 6
    assert bb.equivalent_diameter(v) == pytest.approx(2e-3, rel=1e-14)
    # f = Q_G / V; lambda = j / f = V (Q_L + Q_G) / (A Q_G) (closed forms, hand numbers)
    assert bb.bubble_frequency(3e-8, 1e-9) == pytest.approx(30.0, rel=1e-14)
    assert bb.bubble_spacing(3e-7, 1e-7, 2e-9, 1e-5) == pytest.approx(2e-9 * 4e-7 / (1e-5 * 1e-7), rel=1e-14)
    assert np.isinf(bb.bubble_spacing(1e-6, 0.0, 1e-9, 1e-5))          # no gas: bubbles infinitely far apart
    assert np.isnan(bb.bubble_spacing(-1e-6, 1e-7, 1e-9, 1e-5))


def test_merged_volume_is_continuous_at_onset_and_grows_with_merging_ratio():
    d = 1e-3
    v = bb.sphere_volume(d)
    lam = np.array([4e-3, 2e-3 * (1 + 1e-12), 2e-3, 1e-3, 0.25e-3])   # k_m d = 2e-3
    vm = bb.merged_volume(v, d, lam, 2.0)
    assert np.allclose(vm[:3], v, rtol=1e-9)                             # N <= 1: no merging
    assert vm[3] == pytest.approx(2 * v) and vm[4] == pytest.approx(8 * v)
    assert bb.merging_ratio(d, np.inf, 2.0) == 0.0


def test_void_fraction_density_residence_time():
    # drift-flux void fraction without drift (Dukler et al. 1988 form): Q_G / (C0 (Q_L + Q_G))
    assert bb.homogeneous_void_fraction(1.0, 1.0, c0=1.25) == pytest.approx(0.4, rel=1e-15)
    assert bb.mixture_density(3.0, 1.0, 1000.0, 1.0) == pytest.approx(750.25, rel=1e-15)
    # l A / (Q_L + Q_G): liquid speed in the liquid-filled area Q_L / (A (1 - alpha)), alpha = Q_G/(Q_L + Q_G)
    ql, qg, area, length = 2e-6, 1e-6, 1e-5, 0.3
    alpha = qg / (ql + qg)
    assert bb.residence_time(length, area, ql, qg) == pytest.approx(length / (ql / (area * (1 - alpha))), rel=1e-14)


# --- migration force balance ------------------------------------------------------------------------------

def test_migration_capillary_number_single_drag_limits():
    # closed forms of the force balance with one drag term each (theory manual, our derivation)
    taper, theta = 0.4, math.radians(20.0)
    drive = 2.0 * math.cos(theta) * taper
    hs = bb.migration_capillary_number(taper, theta, film_drag=0.0, form_drag=0.0)
    assert hs == pytest.approx(drive / 12.0, rel=1e-13)
    # inertia alone: (C_D/pi)(h/a) La Ca^2 = drive
    ine = bb.migration_capillary_number(taper, theta, 0.5, 1e6, hele_shaw_drag=0.0, film_drag=0.0, form_drag=1.5)
    assert ine == pytest.approx(math.sqrt(drive / (1.5 / math.pi * 0.5 * 1e6)), rel=1e-12)


def test_migration_force_balance_residual_with_independent_film_law():
    # the solved Ca satisfies c_cap cos(theta) h' = c_HS Ca + 4 c_f Ca / f(Ca) + (C_D/pi)(h/a) La Ca^2,
    # f from aussillous_quere_film (Aussillous & Quere 2000)
    taper = np.array([0.05, 0.2, 1.0, 1.7])
    hr, la = np.array([0.3, 1.0, 2.0, 0.7]), np.array([0.0, 1e3, 1e5, 3e6])
    ca = bb.migration_capillary_number(taper, 0.1, hr, la, capillary_coefficient=1.7, hele_shaw_drag=9.0,
                                       film_drag=0.6, form_drag=0.8)
    rhs = 9.0 * ca + 4 * 0.6 * ca / bb.aussillous_quere_film(ca) + 0.8 / math.pi * hr * la * ca ** 2
    assert np.allclose(rhs, 1.7 * math.cos(0.1) * taper, rtol=1e-11)


def test_migration_without_drive_is_zero_and_errors():
    assert bb.migration_capillary_number(-0.1) == 0.0
    assert bb.migration_capillary_number(0.5, math.radians(90.0)) == pytest.approx(0.0, abs=1e-15)
    with pytest.raises(ValueError, match="at least one of hele_shaw_drag"):
        bb.migration_capillary_number(0.5, hele_shaw_drag=0.0, film_drag=0.0, form_drag=0.0)
    with pytest.raises(ValueError, match="film_drag"):
        bb.migration_capillary_number(0.5, film_drag=-1.0)
    with pytest.raises(ValueError, match="mu must be > 0"):
        bb.migration_speed(0.02, 0.0, 0.01)
    with pytest.raises(ValueError, match="width must be > 0"):
        bb.squeezing_volume(1e-6, 1e-6, 0.0)


@settings(max_examples=60, deadline=None)
@given(taper=st.floats(0.01, 2.0), factor=st.floats(1.01, 5.0), film=st.floats(0.0, 1.0),
       la=st.floats(0.0, 1e7), hr=st.floats(0.05, 5.0))
def test_migration_trends(taper, factor, film, la, hr):
    # force balance: a steeper taper pushes harder (faster); more film drag or inertia slows the bubble
    ca = bb.migration_capillary_number(taper, 0.0, hr, la, film_drag=film)
    assert bb.migration_capillary_number(taper * factor, 0.0, hr, la, film_drag=film) > ca
    assert bb.migration_capillary_number(taper, 0.0, hr, la * factor + 1.0, film_drag=film) < ca
    if film < 0.99:
        assert bb.migration_capillary_number(taper, 0.0, hr, la, film_drag=min(1.0, film + 0.01)) < ca


# --- taper path ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("section, depth", [
    (Groove(math.radians(15.0), 0.004), 0.004),
    (WedgeChannel(math.radians(30.0), 0.01), 0.01 * math.cos(math.radians(30.0))),
])
def test_taper_path_of_v_groove_and_wedge_is_exact(section, depth):
    # geometry of a straight wedge (closed form): h = 2 s sin(alpha), open side at S = depth
    p = bb.taper_path(section)
    a = section.half_angle
    assert p.length == pytest.approx(depth, rel=1e-12)
    assert np.allclose(p.gap, 2 * p.s * math.sin(a), rtol=1e-12, atol=1e-15)
    assert np.allclose(p.open_distance, depth - p.s, rtol=1e-12, atol=1e-15)
    assert np.allclose(p.taper, 2 * math.sin(a), rtol=1e-9)
    assert p.half_angle == pytest.approx(a, rel=1e-15) and p.area == pytest.approx(section.area, rel=1e-15)


def test_taper_path_of_a_polygon_groove_equals_the_groove():
    g = Groove(math.radians(20.0), 0.003)
    poly = Polygon(g.outline(), open_edges=(1,))
    a, b = bb.taper_path(g), bb.taper_path(poly)
    assert np.allclose(a.gap, b.gap, rtol=1e-12, atol=1e-16) and a.length == pytest.approx(b.length, rel=1e-12)


def test_taper_path_of_a_shallow_rectangular_slot():
    # rectangle 4 x 1 open on top: the 45 deg bisector of a bottom corner meets the open side at (1, 1);
    # on it the nearest walls are the bottom and the side: h = 2 s sin(45 deg) (closed form)
    poly = Polygon([(0, 0), (4, 0), (4, 1), (0, 1)], open_edges=(2,))
    p = bb.taper_path(poly)
    assert p.length == pytest.approx(math.sqrt(2.0), rel=1e-12)
    assert np.allclose(p.gap, math.sqrt(2.0) * p.s, rtol=1e-12, atol=1e-15)


def test_contact_angles_that_leave_the_same_apex_corners_share_one_path_and_others_get_their_own():
    # the path is kept per set of corners that hold liquid (so a contact-angle draw reuses the reach diameter
    # and the migration nodes kept per path): catches a path cached across contact angles that change the apex
    # (corner 0, half-angle 71 deg, holds liquid below a 19 deg contact angle; corner 1, 65.3 deg, below 24.7 deg)
    poly = Polygon([(0, 0), (2.2, 0), (2.8, 0.7), (-2.3, 1.8)], open_edges=(2,))
    a = bb.taper_path(poly, contact_angle=math.radians(5.0))
    assert bb.taper_path(poly, contact_angle=math.radians(15.0)) is a
    b = bb.taper_path(poly, contact_angle=math.radians(21.0))
    assert (a.corner_index, b.corner_index) == (0, 1)
    fresh = bb._taper_path_among.__wrapped__(poly, len(b.s), (1,))      # built afresh from corner 1 alone
    assert np.array_equal(b.gap, fresh.gap) and b.length == fresh.length
    assert bb.taper_path(poly, contact_angle=math.radians(23.0)) is b
    assert bb.taper_path(poly, contact_angle=math.radians(26.0)) is None


def test_closed_sections_have_no_taper_path():
    assert bb.taper_path(Circle(0.01)) is None
    assert bb.taper_path(Polygon([(0, 0), (1, 0), (1, 1), (0, 1)])) is None


@pytest.mark.parametrize("injection, k_c", [(0.0, 1.0), (0.5, 1.0), (0.5, 0.6), (0.3, 2.5), (0.9, 1.0)])
def test_reach_diameter_closed_form(injection, k_c):
    # our geometry (theory manual): a bubble pushed from s_inj stops where k_c h = d unless it touches the
    # open side first: d_reach = min(2 k_c S sin a / (1 + k_c sin a), 2 (S - s_inj))
    a, S = math.radians(12.0), 0.005
    p = bb.taper_path(Groove(a, S))
    exact = min(2 * k_c * S * math.sin(a) / (1 + k_c * math.sin(a)), 2 * (S - injection * S))
    assert p.reach_diameter(injection, k_c) == pytest.approx(exact, rel=1e-9)
    # with k_c = 1 the first term is the inscribed-circle diameter of the groove (sections.Groove)
    if k_c == 1.0 and injection < 0.5:
        assert p.reach_diameter(injection, 1.0) == pytest.approx(2 * Groove(a, S).inscribed_radius, rel=1e-9)


def fade_integral(x0, x1):
    """Closed form of the integral of dx/(1 - x^3) (partial fractions)."""
    G = lambda x: (-math.log(1 - x) / 3 + math.log(x * x + x + 1) / 6  # noqa: E731
                   + math.atan((2 * x + 1) / math.sqrt(3)) / math.sqrt(3))
    return G(x1) - G(x0)


def test_migration_time_closed_form_and_domain():
    # Hele-Shaw drag only: U = sigma c_cap h' phi / (c_HS mu) with the fading push phi = 1 - (h/d)^3 along a
    # wedge (h = 2 s sin a): t = (c_HS mu d / (c_cap sigma h'^2)) int_{x_inj}^{x_touch} dx/(1 - x^3), x = h/d,
    # s_touch = S - d/2 (our derivation, theory manual; closed form by partial fractions)
    a, S = math.radians(20.0), 0.004
    p = bb.taper_path(Groove(a, S))
    sigma, mu = 0.02, 0.01
    hp = 2 * math.sin(a)
    d = np.array([0.0026, 0.003, 0.004, 0.0059])
    t = bb.migration_time(p, d, injection=0.25, rho=950.0, mu=mu, sigma=sigma, film_drag=0.0, form_drag=0.0)
    exact = [12.0 * mu * dd / (2.0 * sigma * hp ** 2) * fade_integral(hp * 0.25 * S / dd, hp * (S - dd / 2) / dd)
             for dd in d]
    assert np.allclose(t, exact, rtol=1e-9, atol=0.0)
    # without the fade (phi = 1) the old constant-speed time would be shorter by more than the tolerance
    assert np.all(t > (S - d / 2 - 0.25 * S) / (sigma * 2.0 * hp / (12.0 * mu)) * (1 + 1e-3))
    # too small to reach (NaN), touching the open side at injection (0)
    small, touching = bb.migration_time(p, [1e-4, 0.0061], injection=0.25, rho=950.0, mu=mu, sigma=sigma)
    assert math.isnan(small) and touching == 0.0


def test_squeezed_fraction_closed_forms_and_limits():
    # truncated-sphere split of the volume (our derivation): V_c / V = 1 - (k_c h / d)^3
    assert bb.squeezed_fraction(2.0, 1.0) == pytest.approx(7 / 8, rel=1e-15)
    assert bb.squeezed_fraction(3.0, 1.0, confinement_ratio=2.0) == pytest.approx(1 - 8 / 27, rel=1e-15)
    assert bb.squeezed_fraction(1.0, 1.0) == 0.0 and bb.squeezed_fraction(0.5, 1.0) == 0.0
    # linear fade at the confinement line: phi ~ 3 delta / d
    delta = np.array([1e-6, 1e-8])
    assert np.allclose(bb.squeezed_fraction(1.0 + delta, 1.0) / (3 * delta / (1 + delta)), 1.0, rtol=1e-5)
    # flattened limit d >> h: phi -> 1
    assert bb.squeezed_fraction(1e3, 1.0) == pytest.approx(1.0, abs=1e-9)
    assert np.isnan(bb.squeezed_fraction(-1.0, 1.0)) and np.isnan(bb.squeezed_fraction(1.0, np.nan))
    with pytest.raises(ValueError, match="confinement_ratio"):
        bb.squeezed_fraction(1.0, 1.0, confinement_ratio=0.0)


def test_fading_push_and_film_drag_act_on_the_flattened_part():
    # Hele-Shaw drag alone: Ca proportional to phi; film drag alone: push and film both ~ phi, Ca independent
    # of phi (closed forms of the balance, our derivation)
    taper, theta = 0.6, math.radians(10.0)
    full = bb.migration_capillary_number(taper, theta, film_drag=0.0, form_drag=0.0)
    half = bb.migration_capillary_number(taper, theta, film_drag=0.0, form_drag=0.0, squeezed=0.5)
    assert half == pytest.approx(0.5 * full, rel=1e-13)
    kw = dict(hele_shaw_drag=0.0, film_drag=1.0, form_drag=0.0)
    assert bb.migration_capillary_number(taper, theta, squeezed=0.01, **kw) == \
        pytest.approx(bb.migration_capillary_number(taper, theta, **kw), rel=1e-12)
    assert bb.migration_capillary_number(taper, theta, squeezed=0.0) == 0.0


@pytest.mark.parametrize("film", [0.0, 1.0])
def test_migration_time_diverges_logarithmically_at_the_confinement_line(film):
    # our derivation (theory manual): near d_reach the margin delta = d - k_c h is smallest at the touching
    # point, phi ~ 3 delta/d and (Hele-Shaw drag dominating at low speed) U ~ phi, so
    # t ~ C ln(1/(d - d_reach)) + O(1),  C = c_HS mu d / (3 sigma c_cap cos(theta) k_c h'^2)
    a, S, theta, k_c = math.radians(15.0), 0.004, math.radians(10.0), 1.0
    p = bb.taper_path(Groove(a, S))
    mu, sigma = 0.05, 0.02
    kw = dict(injection=0.2, rho=950.0, mu=mu, sigma=sigma, contact_angle=theta, film_drag=film, form_drag=1.0)
    d_reach = 2 * S * math.sin(a) / (1 + math.sin(a))          # closed form of the reach diameter
    eps = np.array([1e-4, 1e-6, 1e-8])
    t = bb.migration_time(p, d_reach * (1 + eps), **kw)
    assert np.all(np.diff(t) > 0) and np.all(np.isfinite(t))
    C = 12.0 * mu * d_reach / (3 * sigma * 2.0 * math.cos(theta) * k_c * (2 * math.sin(a)) ** 2)
    slope = (t[2] - t[1]) / math.log(100.0)
    # Hele-Shaw alone: exact leading term; with films the correction decays as phi^(1/3) (1 % at eps 1e-6)
    assert slope == pytest.approx(C, rel=2e-3 if film == 0 else 3e-2)
    # not a power law: t (d - d_reach)^n -> 0 for any n > 0 (here n = 0.1 over four decades)
    assert t[2] * (1e-8) ** 0.1 < t[0] * (1e-4) ** 0.1
    # below the line the bubble never arrives (NaN)
    assert math.isnan(bb.migration_time(p, d_reach * (1 - 1e-6), **kw))


def _independent_migration_time(d, S, alpha, s_inj, rho, mu, sigma, theta, c_cap, c_hs, c_f, c_d, radius_factor=1.0):
    """Quadrature (scipy quad) of ds/U along a V-groove, U from the dimensional force balance (brentq):

    c_cap sigma cos(theta) V_c h'/h^2 = c_HS mu U V/h^2 + c_f 4 mu U V_c/(h^2 f(Ca)) + C_D rho U^2 a h,
    V = pi d^3/6, V_c = V - pi h^3/6, a = max(d/2, sqrt(V/(pi h))) (footprint RADIUS), h = 2 s sin(alpha),
    f = Aussillous & Quere (2000) law. ``radius_factor`` = 2 plants a radius-for-diameter error.
    """
    from scipy.integrate import quad
    from scipy.optimize import brentq

    hp = 2 * math.sin(alpha)
    V = math.pi * d ** 3 / 6

    def speed(s):
        h = hp * s
        Vc = V - math.pi * h ** 3 / 6
        a = radius_factor * max(d / 2, math.sqrt(V / (math.pi * h)))
        push = c_cap * sigma * math.cos(theta) * Vc * hp / h ** 2

        def balance(U):
            ca = mu * U / sigma
            film = c_f * 4 * mu * U * Vc / (h ** 2 * bb.aussillous_quere_film(ca)) if c_f else 0.0
            return c_hs * mu * U * V / h ** 2 + film + 0.5 * c_d * rho * U ** 2 * 2 * a * h - push
        return brentq(balance, 1e-14, 1e3, xtol=1e-300, rtol=1e-14)

    val, _ = quad(lambda s: 1.0 / speed(s), s_inj, S - d / 2, epsabs=0.0, epsrel=1e-11, limit=200)
    return val


def test_migration_time_against_independent_path_quadrature_with_form_drag():
    # water-like liquid in a 4 mm groove: inertia matters (form drag on), three bubble sizes above d_reach
    a, S, theta = math.radians(15.0), 0.004, math.radians(20.0)
    rho, mu, sigma = 998.0, 1.0e-3, 0.072
    p = bb.taper_path(Groove(a, S))
    consts = dict(capillary_coefficient=2.0, hele_shaw_drag=12.0, film_drag=1.0, form_drag=1.0)
    sizes = np.array([0.5, 0.8, 1.2]) * S
    got = bb.migration_time(p, sizes, injection=0.2, rho=rho, mu=mu, sigma=sigma, contact_angle=theta, **consts)
    args = (S, a, 0.2 * S, rho, mu, sigma, theta, 2.0, 12.0, 1.0, 1.0)
    ref = np.array([_independent_migration_time(d, *args) for d in sizes])
    assert np.allclose(got, ref, rtol=2e-6, atol=0.0)         # Gauss-Legendre, 96 graded nodes vs adaptive quad
    # the check can fail on the bugs it targets: form drag matters here, and a radius/diameter mix-up in the
    # form drag (or in the footprint) moves the time far beyond the tolerance
    no_form = np.array([_independent_migration_time(d, *args[:-1], 0.0) for d in sizes])
    assert np.all(np.abs(no_form / ref - 1) > 0.05)
    wrong = np.array([_independent_migration_time(d, *args, radius_factor=2.0) for d in sizes])
    assert np.all(np.abs(wrong / got - 1) > 1e3 * 2e-6)


def test_migration_time_scales_with_viscosity_in_the_viscous_limit():
    # no inertia: Ca depends on geometry only, so t ~ mu / sigma (visco-capillary time)
    p = bb.taper_path(Groove(math.radians(10.0), 0.006))
    kw = dict(injection=0.2, rho=1000.0, form_drag=0.0)
    t1 = bb.migration_time(p, 0.005, mu=0.01, sigma=0.02, **kw)
    t2 = bb.migration_time(p, 0.005, mu=0.03, sigma=0.05, **kw)
    assert t2 / t1 == pytest.approx(3.0 * 0.02 / 0.05, rel=1e-10)


# --- fast paths used by the chart lines (issue 17: chart frames under 50 ms) ----------------------------------

def test_squeezing_volume_at_ratio_matches_the_squeezing_law():
    # Garstecki et al. (2006) length law through both entry points: the fast one must give the same numbers,
    # NaN included (bug caught: the fast path drifting from squeezing_volume, or dropping its NaN rule)
    r = np.array([0.0, 1e-6, 0.37, 2.0, 1e4, -0.5, np.inf, np.nan])
    fast = bb.squeezing_volume_at_ratio(r, 2.5e-4, 0.8)
    slow = bb.squeezing_volume(1.0, r, 2.5e-4, a=0.8)
    assert np.array_equal(fast, slow, equal_nan=True)
    # hand computed: w = 1 mm, a = 1, r = 1 -> 2 mm^3
    assert float(bb.squeezing_volume_at_ratio(1.0, 1e-3, 1.0)) == pytest.approx(2e-9, rel=1e-15)


@pytest.mark.parametrize("block", [37, 16384])
def test_drag_root_newton_agrees_with_a_bracketing_solve(block, monkeypatch):
    # the root of a6 y^6 + a3 y^3 + a1 y = d, against scipy's brentq one entry at a time; entries that converge
    # at different iterations (wide spread of coefficients) exercise the gathering of the entries still moving,
    # and a small block size the solve in blocks with a short last one (bug caught: a gathered entry or a
    # block written back to the wrong place, or not at all)
    monkeypatch.setattr(bb, "_NEWTON_BLOCK", block)
    from scipy.optimize import brentq

    rng = np.random.default_rng(5)
    n = 400
    a6 = 10 ** rng.uniform(-4, 4, n) * (rng.random(n) < 0.8)
    a3 = 10 ** rng.uniform(-2, 2, n)
    a1 = 10 ** rng.uniform(-3, 3, n) * (rng.random(n) < 0.7)
    d = 10 ** rng.uniform(-6, 2, n)
    with np.errstate(all="ignore"):
        y0 = np.minimum.reduce([np.where(a6 > 0, np.sqrt(np.cbrt(d / np.where(a6 > 0, a6, 1.0))), np.inf),
                                np.cbrt(d / a3), np.where(a1 > 0, d / np.where(a1 > 0, a1, 1.0), np.inf)])
    y = bb._newton_drag_root(y0, d, a6, a3, a1)
    ref = np.array([brentq(lambda t, k=k: (a6[k] * t ** 3 + a3[k]) * t ** 3 + a1[k] * t - d[k], 0.0, 2.0 * y0[k],
                           xtol=1e-300, rtol=1e-15) for k in range(n)])   # bracket [0, 2 y0]: P(2 y0) > d
    assert np.allclose(y, ref, rtol=1e-13, atol=0.0)
    # an entry without any drag term keeps its upper bound (inf) and the others are still solved
    y_inf = bb._newton_drag_root(np.array([np.inf, np.cbrt(d[0] / a3[0])]), np.full(2, d[0]), np.zeros(2), np.array([0.0, a3[0]]),
                                 np.zeros(2))
    assert math.isinf(y_inf[0]) and y_inf[1] == pytest.approx(np.cbrt(d[0] / a3[0]), rel=1e-14)


def test_migration_capillary_number_scalars_and_arrays_agree():
    # element-wise law: a broadcast call gives, entry by entry, what the scalar calls give (bug caught: a
    # scalar argument not broadcast over the others, e.g. the contact angle or the buoyancy)
    taper = np.array([0.1, 0.3, 0.5])
    hr = np.array([[0.5], [2.0]])
    kw = dict(capillary_coefficient=2.0, hele_shaw_drag=12.0, film_drag=1.0, form_drag=1.0)
    got = bb.migration_capillary_number(taper, 0.3, hr, 50.0, squeezed=0.7, buoyancy=0.01, **kw)
    assert got.shape == (2, 3)
    for i in range(2):
        for j in range(3):
            one = bb.migration_capillary_number(float(taper[j]), 0.3, float(hr[i, 0]), 50.0, squeezed=0.7,
                                                buoyancy=0.01, **kw)
            assert got[i, j] == pytest.approx(one, rel=1e-14)


def test_migration_time_node_cache_follows_every_input():
    # the quadrature nodes are kept between calls: a later call with other drag constants, another contact
    # angle with buoyancy (it sets the node grading) or another fluid must give what a fresh call gives
    # (bug caught: a cache key that misses one of them and serves stale nodes)
    p = bb.taper_path(Groove(math.radians(12.0), 0.004))
    sizes = np.array([0.0012, 0.002, 0.003])
    base = dict(injection=0.3, rho=950.0, mu=5e-3, sigma=0.02, rho_gas=1.2)
    calls = [dict(base, contact_angle=0.2, film_drag=1.0),
             dict(base, contact_angle=0.2, film_drag=0.3, hele_shaw_drag=20.0),
             dict(base, contact_angle=0.2, buoyancy_acceleration=-2.0),
             dict(base, contact_angle=0.5, buoyancy_acceleration=-2.0),
             dict(base, contact_angle=0.5, buoyancy_acceleration=-2.0, capillary_coefficient=3.0),
             dict(base, contact_angle=0.5, mu=2e-3)]
    warm = [bb.migration_time(p, sizes, **kw) for kw in calls]
    fresh = []
    for kw in calls:
        bb._migration_nodes.cache_clear()
        fresh.append(bb.migration_time(p, sizes, **kw))
    for w, f in zip(warm, fresh):
        assert np.array_equal(w, f, equal_nan=True)
    assert not np.allclose(fresh[2], fresh[3])        # the contact angle matters with buoyancy (test can fail)


def test_migration_quadrature_rule_against_a_fine_simpson_rule_on_a_sample_path(monkeypatch):
    # Catches: Gauss-Legendre nodes mapped onto [0, 1] wrongly or weights not summing to the interval (times off
    # by a constant factor), or a node count too small for the kinked integrand of a real case. Reference:
    # Simpson's rule on 6401 nodes of the same integrand (an independent rule, [calc]); the table built from the
    # times promises 1e-5 (theory manual).
    from lowgmap.app.files.casefile import load_case, sample_case_path
    from lowgmap.physics.models import corner as cm

    x, w = bb._quadrature("gauss", bb._MIG_NODES)
    assert w.sum() == pytest.approx(1.0, rel=1e-14) and 0.0 < x.min() < x.max() < 1.0
    assert float(w @ x ** 5) == pytest.approx(1.0 / 6.0, rel=1e-13)        # exact for polynomials
    case = load_case(sample_case_path("wedge_separator")).case
    geom = cm._usable_geometry(case)
    c = cm.CORNER_SEPARATION.resolve_constants(dict(case.models[1].param_dict))
    f = case.fluid
    d_reach = geom.path.reach_diameter(c["injection_position"], c["confinement_ratio"])
    d = d_reach * np.array([1.0 + 1e-6, 1.001, 1.05, 1.3, 1.8])
    kw = dict(injection=c["injection_position"], confinement_ratio=c["confinement_ratio"], rho=f.rho_l, mu=f.mu_l,
              sigma=f.sigma, contact_angle=geom.contact_angle, capillary_coefficient=c["capillary_coefficient"],
              hele_shaw_drag=c["hele_shaw_drag"], film_drag=c["film_drag"], form_drag=c["form_drag"])
    got = bb.migration_time(geom.path, d, **kw)
    nodes, weights = bb._quadrature("simpson", 6401)
    monkeypatch.setattr(bb, "_QUAD_NODES", nodes)
    monkeypatch.setattr(bb, "_QUAD_WEIGHTS", weights)
    bb._migration_nodes.cache_clear()
    ref = bb.migration_time(geom.path, d, **kw)
    bb._migration_nodes.cache_clear()
    assert np.all(np.isfinite(ref)) and np.allclose(got, ref, rtol=1e-5, atol=0.0)
