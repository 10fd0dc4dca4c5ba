"""Buoyancy in the corner separator (lowgmap.physics.models.corner, lowgmap.physics.models.bubbles): limits, sign by
orientation, scaling, monotonic trends, the dense-gas Δρ, the stall (infinite migration time) and the bubble Bond
number validity.

Checks against closed forms and an independent quadrature of our own force balance (our derivation, theory manual
physics/manual/bubbles.md, section 3): no published value of buoyant migration in a corner was found, so none is
used as a check value.
"""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from lowgmap.physics.case import Case, FlowRange, ModelChoice, Orientation
from lowgmap.physics.chart.composition import build_chart
from lowgmap.physics.geometry.sections import Groove, WedgeChannel
from lowgmap.physics.models import bubbles as bb
from lowgmap.physics.models import corner as cm
from lowgmap.physics.models.boundary import get_model
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.properties.wetting import Wetting

# A 5 cSt silicone oil and air (property values typical, from memory; inputs here, not checks).
OIL = FluidPair("silicone oil 5 cSt", "air", 298.15, 101325.0, 913.0, 4.565e-3, 0.0197, 1.184, 1.85e-5,
                "typical, from memory", "typical, from memory")
G0 = 9.80665
RANGE = FlowRange(1e-9, 1e-4, 1e-10, 1e-4)
RATIOS = np.geomspace(1e-3, 3.0, 40)
# Design inputs of the wedge sample (sample_cases/wedge_separator.toml)
SAMPLE = {"injector_width_ratio": 0.15, "squeeze_a": 2.0, "injection_position": 0.1}


UNSPECIFIED = Orientation.unspecified()


def wedge_case(g=1e-6 * G0, orientation=UNSPECIFIED, fluid=OIL, length=0.04):
    return Case(fluid, WedgeChannel(math.radians(6.0), 0.04), Wetting(math.radians(5.0)), length, g, RANGE,
                orientation=orientation)


def sep(case, **consts):
    return np.asarray(cm.separation_liquid_flow(case, RATIOS, **{**SAMPLE, **consts}), dtype=float)


ORIENTATIONS = [Orientation.horizontal(), Orientation.vertical_up(), Orientation.vertical_down(),
                Orientation.inclined(math.radians(30.0)), Orientation.inclined(math.radians(-60.0))]


# -- limits ----------------------------------------------------------------------------------------------
def test_unspecified_orientation_ignores_g_bit_for_bit():
    # catches buoyancy leaking into the low-gravity chart (no orientation: the chart must be exactly today's)
    a = build_chart(wedge_case(g=0.0, orientation=Orientation()))
    b = build_chart(wedge_case(g=G0, orientation=Orientation()))
    for ca, cb in zip(a.boundaries, b.boundaries):
        assert ca.name == cb.name
        assert np.array_equal(ca.ql, cb.ql, equal_nan=True) and np.array_equal(ca.qg, cb.qg, equal_nan=True)
        assert np.array_equal(ca.valid_mask, cb.valid_mask)
    assert [r.name for r in a.regions] == [r.name for r in b.regions]


def test_zero_buoyancy_component_is_the_low_gravity_code_path_exactly():
    # catches a changed quadrature when there is no buoyancy (g = 0 with an orientation, or horizontal flow
    # with the open side at 90 deg from upward: a_m = a_z = 0 exactly)
    ref = sep(wedge_case(g=G0))
    assert np.array_equal(sep(wedge_case(g=0.0, orientation=Orientation.horizontal())), ref, equal_nan=True)
    assert np.array_equal(sep(wedge_case(g=0.0, orientation=Orientation.vertical_up())), ref, equal_nan=True)
    side = sep(wedge_case(g=G0, orientation=Orientation.horizontal()), open_side_roll=math.pi / 2)
    assert np.array_equal(side, ref, equal_nan=True)            # open side sideways: nothing along the path
    p = cm.corner_geometry(wedge_case()).path
    kw = dict(injection=0.1, rho=913.0, mu=4.565e-3, sigma=0.0197)
    d = np.linspace(1.001, 3.0, 7) * p.reach_diameter(0.1)
    t0 = bb.migration_time(p, d, **kw)
    assert np.array_equal(t0, bb.migration_time(p, d, **kw, rho_gas=1.2, buoyancy_acceleration=0.0))
    t1, q1 = bb.migration_time(p, d, **kw, rho_gas=1.2, with_drift=True)
    assert np.array_equal(t0, t1) and np.all(q1 == 0.0)


@pytest.mark.parametrize("orientation", ORIENTATIONS)
@pytest.mark.parametrize("roll", [0.0, math.pi])
def test_one_micro_g_stays_on_the_low_gravity_line(orientation, roll):
    # catches buoyancy that does not vanish as g -> 0 (e.g. g0 used instead of g, a constant term).
    # Within 1e-3 wherever the bubble is at least 0.1 % above the reach diameter; closer to the confinement
    # line the push has faded to the size of a 1e-6 g0 buoyancy (theory manual), and there the difference
    # falls in proportion to g: within 1e-3 everywhere at 1e-7 g0.
    base = wedge_case(g=0.0)
    ref = sep(base)
    ok = np.isfinite(ref) & (ref > 0)
    state = cm.bubble_state(base, 1e-6, RATIOS * 1e-6, **SAMPLE)
    margin = state["effective_diameter"] / state["reach_diameter"] - 1.0
    for g, where in ((1e-6 * G0, ok & (margin >= 1e-3)), (1e-7 * G0, ok)):
        got = sep(wedge_case(g=g, orientation=orientation), open_side_roll=roll)
        assert where.sum() > 10 and np.array_equal(np.isfinite(got), np.isfinite(ref))
        assert np.max(np.abs(got[where] / ref[where] - 1.0)) < 1e-3


# -- sign by orientation -----------------------------------------------------------------------------------
def test_sign_by_orientation_across_the_axis():
    # catches a wrong sign of the buoyancy across the axis, or the axial share taken for it: in horizontal
    # flow buoyancy helps with the open side up (line higher than at g = 0) and opposes it facing down
    base = sep(wedge_case(g=0.0))
    ok = np.isfinite(base) & (base > 0)
    o = Orientation.horizontal()
    up = sep(wedge_case(g=1.62, orientation=o))                                 # lunar surface
    down = sep(wedge_case(g=0.01, orientation=o), open_side_roll=math.pi)       # at 0.17 g0 all would stall
    assert np.all(up[ok] > base[ok])
    assert np.all(np.nan_to_num(down[ok]) <= base[ok]) and np.all(down[ok][-10:] < base[ok][-10:])


def test_up_down_horizontal_order_of_the_separation_line():
    # catches the axial share of buoyancy ignored or with the wrong sign: with no share across the path
    # (open side at 90 deg from upward) the line falls monotonically from downward through horizontal
    # (= the g = 0 line) to upward flow; upward flow the bubbles drift with the stream and leave sooner
    base = sep(wedge_case(g=0.0))
    ok = np.isfinite(base) & (base > 0)
    lines = [sep(wedge_case(g=0.01, orientation=Orientation.inclined(math.radians(a))), open_side_roll=math.pi / 2)
             for a in (-90.0, -45.0, 0.0, 45.0, 90.0)]
    assert np.array_equal(lines[2], base, equal_nan=True)
    for a, b in zip(lines[:-1], lines[1:]):
        assert np.all(a[ok] > np.nan_to_num(b[ok]))


def test_axial_drift_against_independent_quadrature():
    # catches a drift with the wrong weight (time instead of path), sign or density: 30 deg groove, Hele-Shaw
    # drag alone, U = sigma c_cap phi/(c_hs mu), U_z = drho a_z h^2/(c_hs mu), D_z = int U_z/U ds (scipy quad)
    S, s_inj, mu, sigma, rho_l, rho_g, a_z = 0.004, 0.001, 0.01, 0.02, 1000.0, 30.0, 2.0
    p = bb.taper_path(Groove(math.radians(30.0), S))
    for d in (0.0031, 0.004, 0.0055):
        t, q = bb.migration_time(p, d, injection=s_inj / S, rho=rho_l, mu=mu, sigma=sigma, film_drag=0.0,
                                 form_drag=0.0, rho_gas=rho_g, axial_acceleration=a_z, with_drift=True)
        s_t = S - d / 2

        def u(s, d=d):
            return sigma * 2.0 * (1.0 - (s / d) ** 3) / (12.0 * mu)
        T = quad(lambda s: 1.0 / u(s), s_inj, s_t, limit=400, epsrel=1e-11)[0]
        Dz = quad(lambda s: (rho_l - rho_g) * a_z * s * s / (12.0 * mu) / u(s), s_inj, s_t, limit=400,
                  epsrel=1e-11)[0]
        assert t == pytest.approx(T, rel=2e-6) and q == pytest.approx(Dz / T, rel=2e-6)


def test_separation_line_with_drift_matches_its_formula():
    # catches the drift added to the residence time with the wrong sign or scale: Q_L = A (l/(s_f t) - q)/(1 + r)
    case = wedge_case(g=0.01, orientation=Orientation.vertical_up())
    geom = cm.corner_geometry(case)
    d = cm.bubble_state(case, 1e-6, RATIOS * 1e-6, **SAMPLE)["effective_diameter"]
    ok = d > 1.01 * geom.path.reach_diameter(0.1)
    f = case.fluid
    t, q = bb.migration_time(geom.path, d[ok], injection=0.1, rho=f.rho_l, mu=f.mu_l, sigma=f.sigma,
                             contact_angle=geom.contact_angle, rho_gas=f.rho_g, axial_acceleration=0.01,
                             with_drift=True)
    want = geom.area * np.maximum(case.length / (2.0 * t) - q, 0.0) / (1.0 + RATIOS[ok])
    np.testing.assert_allclose(sep(case)[ok], want, rtol=2e-5)        # table interpolation, < 1e-5 measured


def test_open_side_roll_between_helps_less():
    # catches the roll entering with the wrong function (cos psi): 90 deg must be exactly neutral
    case = wedge_case(g=1.62, orientation=Orientation.horizontal())
    assert cm.migration_buoyancy(case) == 1.62
    assert cm.migration_buoyancy(case, open_side_roll=math.pi) == -1.62
    assert cm.migration_buoyancy(case, open_side_roll=math.pi / 2) == 0.0
    assert cm.migration_buoyancy(case, open_side_roll=math.pi / 3) == pytest.approx(0.81, rel=1e-12)


# -- independent quadrature ------------------------------------------------------------------------------
def _independent_time(d, S, s_inj, mu, sigma, c_cap, c_hs, drho, a_m):
    """30 deg groove (h = s, h' = 1), Hele-Shaw drag alone: U = sigma (c_cap phi + drho a_m h^2/sigma)/(c_hs mu)."""
    def inv_u(s):
        phi = max(0.0, 1.0 - (s / d) ** 3)
        return c_hs * mu / (sigma * (c_cap * phi + drho * a_m * s * s / sigma))
    s_touch = S - d / 2.0
    return quad(inv_u, s_inj, s_touch, limit=400, epsabs=0.0, epsrel=1e-11)[0]


@pytest.mark.parametrize("a_m", [3.0, 0.5, -0.5])
def test_migration_time_with_buoyancy_against_independent_quadrature(a_m):
    # catches buoyancy added on the wrong scale (V instead of V/h^2 normalisation, d instead of h, rho_L
    # instead of rho_L - rho_G); our force balance (theory manual), integrated by scipy quad
    S, s_inj, mu, sigma, rho_l, rho_g = 0.004, 0.001, 0.01, 0.02, 1000.0, 50.0
    p = bb.taper_path(Groove(math.radians(30.0), S))
    sizes = np.array([0.0031, 0.0036, 0.0045, 0.0055])
    got = bb.migration_time(p, sizes, injection=s_inj / S, rho=rho_l, mu=mu, sigma=sigma, film_drag=0.0,
                            form_drag=0.0, rho_gas=rho_g, buoyancy_acceleration=a_m)
    ref = np.array([_independent_time(d, S, s_inj, mu, sigma, 2.0, 12.0, rho_l - rho_g, a_m) for d in sizes])
    np.testing.assert_allclose(got, ref, rtol=2e-6)
    wrong = np.array([_independent_time(d, S, s_inj, mu, sigma, 2.0, 12.0, rho_l, a_m) for d in sizes])
    assert np.max(np.abs(wrong / ref - 1.0)) > 1e-3            # dropping rho_G would fail the check above


# -- dense gas ------------------------------------------------------------------------------------------
def test_dense_gas_changes_the_buoyancy_term_by_the_density_difference():
    # catches rho_G dropped in the buoyancy term: with rho_G = 4 % of rho_L (a cryogenic liquid with its
    # vapour) the migration equals that of a negligible gas density at g (rho_L - rho_G)/rho_L
    rho_l = 913.0
    dense = OIL.__class__(**{**OIL.__dict__, "rho_g": 0.04 * rho_l})
    light = OIL.__class__(**{**OIL.__dict__, "rho_g": 1e-9 * rho_l})
    o = Orientation.horizontal()
    factor = (rho_l - 0.04 * rho_l) / rho_l
    for roll, g, o in ((0.0, 1.62, o), (math.pi, 0.01, o), (0.0, 0.01, Orientation.inclined(math.radians(40.0)))):
        a = sep(wedge_case(g=g, orientation=o, fluid=dense), open_side_roll=roll)
        b = sep(wedge_case(g=g * factor, orientation=o, fluid=light), open_side_roll=roll)
        c = sep(wedge_case(g=g, orientation=o, fluid=light), open_side_roll=roll)
        ok = np.isfinite(a) & (a > 0)
        np.testing.assert_allclose(a[ok], b[ok], rtol=1e-6)
        assert np.max(np.abs(c[ok] / a[ok] - 1.0)) > 1e-3      # the gas density matters: the check can fail


def test_gas_density_is_required_with_buoyancy():
    # catches a silent default rho_G = 0 (the gas density must never be dropped)
    p = bb.taper_path(Groove(math.radians(30.0), 0.004))
    with pytest.raises(ValueError, match="rho_gas"):
        bb.migration_time(p, 0.003, injection=0.25, rho=1000.0, mu=0.01, sigma=0.02, buoyancy_acceleration=1.0)
    with pytest.raises(ValueError, match="rho_gas"):
        bb.stall_diameter(p, injection=0.25, rho=1000.0, sigma=0.02, buoyancy_acceleration=-1.0)
    with pytest.raises(ValueError, match="buoyancy_acceleration"):
        bb.migration_time(p, 0.003, injection=0.25, rho=1000.0, mu=0.01, sigma=0.02, rho_gas=1.0,
                          buoyancy_acceleration=math.nan)


# -- scaling and trends -------------------------------------------------------------------------------------
@pytest.mark.parametrize("k,s,m", [(3.0, 1.0, 1.0), (0.2, 2.5, 0.4), (10.0, 0.5, 7.0)])
def test_dimensional_scaling_at_fixed_bond_and_laplace_numbers(k, s, m):
    # catches a dimensionally wrong buoyancy term: lengths x k, sigma x s, mu x m with rho chosen to keep
    # La = rho sigma h / mu^2 and g to keep Bo = (rho_L - rho_G) g h^2/sigma: t sigma/(mu L) is unchanged
    S, rho, rho_g, mu, sigma, a_m = 0.004, 1000.0, 20.0, 0.01, 0.02, -0.8
    sizes = np.array([0.0032, 0.004, 0.005])
    kw = dict(injection=0.25, film_drag=1.0, form_drag=1.0, contact_angle=0.2)
    t1 = bb.migration_time(bb.taper_path(Groove(math.radians(20.0), S)), sizes, rho=rho, mu=mu, sigma=sigma,
                           rho_gas=rho_g, buoyancy_acceleration=a_m, **kw)
    p = m * m / (s * k)                                        # density factor keeping La
    a2 = a_m * s / (p * k * k)                                 # acceleration keeping Bo
    t2 = bb.migration_time(bb.taper_path(Groove(math.radians(20.0), k * S)), k * sizes, rho=p * rho,
                           mu=m * mu, sigma=s * sigma, rho_gas=p * rho_g, buoyancy_acceleration=a2, **kw)
    np.testing.assert_allclose(t2, t1 * m * k / s, rtol=1e-9)


@settings(max_examples=25, deadline=None)
@given(g1=st.floats(0.0, 9.81), g2=st.floats(0.0, 9.81), roll=st.sampled_from([0.0, math.pi]),
       angle=st.floats(-80.0, 80.0))
def test_migration_time_is_monotonic_in_g(g1, g2, roll, angle):
    # catches a buoyancy term whose effect does not grow with g, or changes sign along the way
    lo, hi = sorted((g1, g2))
    o = Orientation.inclined(math.radians(angle))
    cases = [wedge_case(g=g, orientation=o) for g in (lo, hi)]
    geom = cm.corner_geometry(cases[0])
    c = cm.CORNER_SEPARATION.resolve_constants({**SAMPLE, "open_side_roll": roll})
    d = np.linspace(1.0005, 2.5, 9) * geom.path.reach_diameter(0.1)
    t_lo, t_hi = (np.asarray(cm._t_mig(cs, geom, d, c)) for cs in cases)
    if roll == 0.0:
        assert np.all(t_hi <= t_lo * (1 + 1e-9))
    else:
        assert np.all(t_hi >= t_lo * (1 - 1e-9))


# -- stall: buoyancy stronger than the push ------------------------------------------------------------------
def test_opposing_buoyancy_stalls_small_bubbles_and_the_chart_says_so():
    # catches a finite migration time where buoyancy exceeds the fading push (bubble counted as separated)
    case = wedge_case(g=0.05, orientation=Orientation.horizontal())
    consts = {**SAMPLE, "open_side_roll": math.pi}
    geom = cm.corner_geometry(case)
    d_reach = geom.path.reach_diameter(0.1)
    d_arr = cm.arrival_diameter(case, **consts)
    assert d_arr > 1.01 * d_reach
    c = cm.CORNER_SEPARATION.resolve_constants(consts)
    t = np.asarray(cm._t_mig(case, geom, np.array([1.001 * d_reach, 0.5 * (d_reach + d_arr), 1.01 * d_arr]), c))
    assert np.isinf(t[0]) and np.isinf(t[1]) and np.isfinite(t[2])
    # the stall diameter: the net drive at the touching point vanishes there (wedge: drive falls along the path)
    p = geom.path
    st_ = float(p.travel(d_arr, 0.1)[1][0])
    h = float(np.interp(st_, p.s, p.gap))
    hp = float(np.interp(st_, p.s, p.taper))
    f = case.fluid
    drive = 2.0 * math.cos(geom.contact_angle) * hp * (1 - (h / d_arr) ** 3)
    bond = (f.rho_l - f.rho_g) * 0.05 * h * h / f.sigma
    assert drive == pytest.approx(bond, rel=1e-6)
    choice = tuple(ModelChoice.of(n, {k: v for k, v in consts.items() if k in {x.name for x in get_model(n).constants}})
                   for n in cm.CORNER_MODEL_NAMES)
    chart = build_chart(case.with_(models=choice))
    assert any("never arrive" in w for w in chart.warnings)
    assert "held back by buoyancy" in chart.regime_info(cm.ISOLATED_CARRIED).description


def test_stall_time_diverges_continuously():
    # catches a jump from a finite time to inf at the stall diameter (a silent jump on the chart)
    p = bb.taper_path(Groove(math.radians(30.0), 0.004))
    kw = dict(injection=0.25, rho=1000.0, rho_gas=1.2, sigma=0.02, buoyancy_acceleration=-2.0)
    d_arr = bb.stall_diameter(p, **kw)
    kw.pop("sigma")
    t = bb.migration_time(p, d_arr * (1 + np.array([1e-2, 1e-3, 1e-4, 1e-5])), sigma=0.02, mu=0.01, **kw)
    assert np.all(np.isfinite(t)) and np.all(np.diff(t) > 0)
    assert t[-1] > 1.5 * t[0]


# -- validity: bubble Bond number -------------------------------------------------------------------------------
def test_bubble_bond_number_flags_the_lines_only_with_an_orientation():
    # catches the capillary models drawn as valid where buoyancy shapes the bubble (Eo_b > 1, Brauner 1990),
    # or the flag changing the low-gravity chart
    ql, qg = np.full(5, 1e-7), np.geomspace(1e-9, 1e-6, 5)
    case = wedge_case(g=G0, orientation=Orientation.horizontal())
    eo = cm.bubble_bond_number(case, ql, qg, **SAMPLE)
    geom = cm.corner_geometry(case)
    d = cm.bubble_state(case, ql, qg, **SAMPLE)["effective_diameter"]
    f = OIL
    np.testing.assert_allclose(eo, (f.rho_l - f.rho_g) * G0 * d ** 2 / f.sigma, rtol=1e-12)
    assert np.all(eo > 1.0)
    mask = cm.CORNER_SEPARATION.validity_mask(case, ql, qg, **cm.CORNER_SEPARATION.resolve_constants(SAMPLE))
    assert not mask.any()
    low = wedge_case(g=1e-6 * G0, orientation=Orientation.horizontal())
    assert cm.CORNER_SEPARATION.validity_mask(low, ql, qg, **cm.CORNER_SEPARATION.resolve_constants(SAMPLE)).all()
    free = wedge_case(g=G0)
    assert cm.CORNER_SEPARATION.validity_mask(free, ql, qg, **cm.CORNER_SEPARATION.resolve_constants(SAMPLE)).all()
    assert geom.reason is None


@settings(max_examples=12, deadline=None)
@given(g1=st.floats(1e-4, 0.05), g2=st.floats(1e-4, 0.05), up=st.booleans())
def test_separation_line_is_monotonic_in_g_along_the_axis(g1, g2, up):
    # catches an axial drift that does not grow with g: in upward flow the line falls as g grows (the bubbles
    # drift out with the stream), in downward flow it rises
    lo, hi = sorted((g1, g2))
    o = Orientation.vertical_up() if up else Orientation.vertical_down()
    a, b = (sep(wedge_case(g=g, orientation=o)) for g in (lo, hi))
    ok = np.isfinite(a) & (a > 0)
    if up:
        assert np.all(np.nan_to_num(b[ok]) <= a[ok] * (1 + 1e-12))
    else:
        assert np.all(b[ok] >= a[ok] * (1 - 1e-12))


# -- charts with buoyancy: regions, lines and classification agree --------------------------------------------
def _near_drawn_line(chart, ql, qg, dist):
    """Points within ``dist`` (fraction of the log box) of a drawn polyline, measured to its segments (not only to
    its vertices: a gently curved line has vertices far apart, and the chord lies within the sampling tolerance)."""
    fr = chart.case.flow_range
    sx, sy = math.log10(fr.ql_max / fr.ql_min), math.log10(fr.qg_max / fr.qg_min)
    px, py = (np.log10(ql) / sx)[:, None], (np.log10(qg) / sy)[:, None]
    near = np.zeros(np.shape(ql), dtype=bool)
    for b in chart.boundaries:
        with np.errstate(invalid="ignore", divide="ignore"):
            x, y = np.log10(b.ql) / sx, np.log10(b.qg) / sy
        seg = np.isfinite(x[:-1]) & np.isfinite(x[1:])          # NaN separates the runs of a line
        if not seg.any():
            continue
        ax, ay, bx, by = x[:-1][seg], y[:-1][seg], x[1:][seg], y[1:][seg]
        dx, dy = bx - ax, by - ay
        n2 = np.where(dx * dx + dy * dy > 0, dx * dx + dy * dy, 1.0)
        t = np.clip(((px - ax) * dx + (py - ay) * dy) / n2, 0.0, 1.0)
        near |= np.min(np.hypot(px - ax - t * dx, py - ay - t * dy), axis=1) < dist
    return near


def _sample_models(roll):
    consts = {**SAMPLE, "open_side_roll": roll}
    return tuple(ModelChoice.of(n, {k: v for k, v in consts.items() if k in {x.name for x in get_model(n).constants}})
                 for n in cm.CORNER_MODEL_NAMES)


@pytest.mark.parametrize("orientation,g,roll", [(Orientation.horizontal(), 0.02, math.pi),
                                                (Orientation.vertical_up(), 0.02, 0.0),
                                                (Orientation.vertical_up(), 0.1, 0.0),
                                                (Orientation.vertical_down(), 0.3, 0.0),
                                                (Orientation.horizontal(), 1.62, 0.0),
                                                (Orientation.inclined(math.radians(-30.0)), 0.3, 0.0)])
def test_buoyant_charts_are_consistent(orientation, g, roll):
    # catches a stall or drift that the lines, the regions and the classification treat differently (e.g. a
    # separation line drawn where the implicit function says "never arrives", or regions that do not tile)
    from matplotlib.path import Path
    chart = build_chart(wedge_case(g=g, orientation=orientation).with_(models=_sample_models(roll)))
    case = chart.case
    fr = case.flow_range
    sx, sy = math.log10(fr.ql_max / fr.ql_min), math.log10(fr.qg_max / fr.qg_min)
    for b, (m, consts) in zip(chart.boundaries, chart.region_models):
        ok = np.isfinite(b.ql)
        if ok.sum() < 2:
            continue
        gv = m.implicit(case, b.ql[ok], b.qg[ok], **dict(consts))
        fin = np.isfinite(gv)
        assert fin.mean() > 0.9 and np.max(np.abs(gv[fin])) < 1e-6, b.name
    area = 0.0
    for r in chart.regions:
        x, y = np.log10(r.polygon_ql), np.log10(r.polygon_qg)
        area += 0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))
    assert area == pytest.approx(sx * sy, rel=1e-9)
    rng = np.random.default_rng(7)
    ql = 10 ** rng.uniform(math.log10(fr.ql_min), math.log10(fr.ql_max), 3000)
    qg = 10 ** rng.uniform(math.log10(fr.qg_min), math.log10(fr.qg_max), 3000)
    names = chart.classify(ql, qg)
    near = _near_drawn_line(chart, ql, qg, 3e-3)
    pts = np.column_stack([np.log10(ql), np.log10(qg)])
    for r in chart.regions:
        inside = Path(np.column_stack([np.log10(r.polygon_ql), np.log10(r.polygon_qg)])).contains_points(pts)
        assert np.all(names[inside & ~near] == r.name)
    assert any("Buoyancy in the corner migration" in w for w in chart.warnings)


# -- the open channel's critical flow with gravity (issue 18 item 3) -------------------------------------------
def ing(case, **consts):
    return np.asarray(cm.ingestion_liquid_flow(case, RATIOS, **consts), dtype=float)


def test_axial_gravity_moves_the_ingestion_line_the_physical_way():
    # catches the hydrostatic term of the open channel ignored, with the wrong sign (upward flow must lower the
    # critical flow: the liquid climbs against g; downward flow raises it) or taken from the transverse share
    # (horizontal flow has no axial share: exactly the low-gravity line)
    base = ing(wedge_case(g=0.0))
    for g in (1e-6 * G0, 0.01, 0.1):
        up = ing(wedge_case(g=g, orientation=Orientation.vertical_up()))
        down = ing(wedge_case(g=g, orientation=Orientation.vertical_down()))
        assert np.all(up < base) and np.all(down > base), g
    assert np.array_equal(ing(wedge_case(g=G0, orientation=Orientation.horizontal())), base)
    assert np.array_equal(ing(wedge_case(g=G0)), base)                     # orientation unspecified
    # monotonic in g along the axis, and with the axial share: 30 deg upward lies between horizontal and vertical
    lines = [ing(wedge_case(g=g, orientation=Orientation.vertical_up())) for g in (0.001, 0.01, 0.1)]
    assert np.all(lines[0] > lines[1]) and np.all(lines[1] > lines[2])
    tilted = ing(wedge_case(g=0.1, orientation=Orientation.inclined(math.radians(30.0))))
    assert np.all(tilted < base) and np.all(tilted > lines[2])
    assert np.allclose(tilted, ing(wedge_case(g=0.05, orientation=Orientation.vertical_up())), rtol=1e-9)  # sin 30


def test_ingestion_line_leaves_the_low_gravity_line_continuously():
    # catches a jump between the low-gravity line (similarity surrogate) and a line with axial gravity (root
    # search): at 1e-6 g0 the line equals the unspecified one within 1e-6 once the first-order hydrostatic term is
    # removed (the mean of upward and downward flow), and that term is linear in g. The hydrostatic term itself
    # is physical and larger than 1e-6 here: rho g l / (sigma/R) ~ 1e-4 at 1e-6 g0 for this 40 mm wedge
    base = ing(wedge_case(g=0.0))
    dev = {}
    for g in (1e-6 * G0, 1e-5 * G0):
        up = ing(wedge_case(g=g, orientation=Orientation.vertical_up()))
        down = ing(wedge_case(g=g, orientation=Orientation.vertical_down()))
        assert np.max(np.abs(0.5 * (up + down) / base - 1.0)) < 1e-6
        dev[g] = up / base - 1.0
    assert np.max(np.abs(dev[1e-6 * G0])) < 1e-4
    np.testing.assert_allclose(dev[1e-5 * G0] / dev[1e-6 * G0], 10.0, rtol=1e-2)
    # the liquid-only limit and what limits it follow the same path
    tiny = wedge_case(g=1e-6 * G0, orientation=Orientation.vertical_up())
    q, lim = get_model("open_channel_ingestion").critical_flow(tiny)
    assert q == pytest.approx(cm.ingestion_liquid_flow(tiny, 1e-12), rel=1e-9)
    assert lim == get_model("open_channel_ingestion").critical_flow(wedge_case(g=0.0))[1]


def test_upward_flow_that_cannot_hold_the_liquid_draws_gas_in_everywhere():
    # catches a hydrostatic limit (critical flow 0: the rise over the length exceeds what the surface holds at its
    # smallest radius) turned into NaN or a crash instead of the gas-ingestion regime over the chart.
    # Rectangular groove 4 x 2 mm, 0.5 m long: rho g l = 4.5 kPa at 1 g, the surface holds sigma/R of order 10 Pa
    from lowgmap.physics.geometry.sections import Polygon
    rect = Polygon([(0, 0), (0.004, 0), (0.004, 0.002), (0, 0.002)], open_edges=(2,))
    case = Case(OIL, rect, Wetting(math.radians(30.0)), 0.5, G0, RANGE, orientation=Orientation.vertical_up())
    assert get_model("open_channel_ingestion").critical_flow(case) == (0.0, "hydrostatic")
    assert np.all(ing(case) == 0.0)
    chart = build_chart(case, models=["open_channel_ingestion"])
    assert [r.name for r in chart.regions] == [cm.INGESTION]
    assert any(w.startswith("LIQUID NOT HELD") for w in chart.warnings)


def test_transverse_bond_number_flags_the_ingestion_line():
    # catches the circular-arc open-channel model drawn as valid where gravity across the channel shapes the free
    # surface (Bo_perp > 0.1, common practice, no source), or the flag leaking into the low-gravity chart.
    # Closed form: Bo_perp = (rho_L - rho_G) g cos(beta) L^2 / sigma, L the wall length of the wedge (40 mm)
    o = Orientation.inclined(math.radians(30.0))
    want = (OIL.rho_l - OIL.rho_g) * G0 * math.cos(math.radians(30.0)) * 0.04 ** 2 / OIL.sigma
    assert cm.transverse_bond(wedge_case(g=G0, orientation=o)) == pytest.approx(want, rel=1e-12)
    assert cm.transverse_bond(wedge_case(g=G0)) == 0.0                           # orientation unspecified
    flagged, clean = (build_chart(wedge_case(g=g, orientation=Orientation.horizontal()),
                                  models=["open_channel_ingestion"]) for g in (G0, 1e-6 * G0))
    assert not flagged.boundaries[0].valid_mask.any()
    assert any("Transverse Bond number" in w for w in flagged.warnings)
    assert any("outside the validity range" in w and "transverse Bond" in w for w in flagged.warnings)
    assert clean.boundaries[0].valid_mask.all() and flagged.boundaries[0].ql.size > 2
    assert not any("Transverse Bond number" in w for w in clean.warnings)
    # at 1e-6 g0 the number is 7e-4, far below the limit
    assert cm.transverse_bond(clean.case) == pytest.approx(want / math.cos(math.radians(30.0)) * 1e-6, rel=1e-12)
    assert np.array_equal(ing(clean.case), ing(wedge_case(g=0.0)))            # no axial share: the same line


def test_where_the_separation_line_ends_follows_the_length_only_with_an_axial_drift():
    # the ends of the separation line are kept per corner shape when nothing along the axis acts (designs of
    # other lengths share them); with an axial drift the line ends where the drift outruns the migration,
    # which depends on the length. Catches the kept ends reused for a drifting case of another length, and
    # kept ends that differ from a fresh computation.
    def spans(case):
        return [(p.t0, p.t1) for p in cm.CORNER_SEPARATION.line_pieces(case, **SAMPLE)]

    def fresh(case):
        c = cm.CORNER_SEPARATION.resolve_constants(SAMPLE)
        lo, hi = cm.CORNER_SEPARATION._r_range(case)
        d_low = cm._table_for(case, cm.corner_geometry(case), c)[2]
        return list(cm._separation_spans(case, c, lo, hi, math.log(d_low))[0])

    def same(a, b):          # the kept ends are found on a finer scan of a wider range: equal to rounding
        return len(a) == len(b) and all(x == pytest.approx(y, rel=1e-12, abs=1e-12) for x, y in zip(a, b))

    still = [wedge_case(g=1e-5, length=L) for L in (0.01, 0.2)]
    assert spans(still[0]) == spans(still[1])
    assert same(spans(still[1]), fresh(still[1]))
    narrow = still[0].with_(flow_range=FlowRange(1e-7, 1e-6, 1e-6, 1e-5))      # ratio range cuts the line at -1
    assert spans(narrow)[0][0] == -1.0 and same(spans(narrow), fresh(narrow))
    up = [wedge_case(g=0.2, orientation=Orientation.vertical_up(), length=L) for L in (0.01, 0.04, 0.2)]
    got = [spans(c) for c in up]
    assert got == [fresh(c) for c in up]
    starts = [s[0][0] for s in got]
    assert starts[0] > starts[1] > starts[2]          # a shorter conduit loses the slow-migrating bubbles sooner
