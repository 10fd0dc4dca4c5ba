"""Tests for the surrogates of the open-channel solves and the exact switch.

lowgmap.physics.surrogates (exact switch, measured errors) and
lowgmap.physics.models.open_channel.surrogate (wedge Stokes table over the half-angle, critical-flow
similarity curve). The checks are against our own full solves (finite elements, root search): the
surrogates must reproduce them between their nodes, which is what a table can get wrong. Similarity
is a physical invariant (dimensional analysis of the 1-D model of Rosendahl, Ohlhoff & Dreyer,
J. Fluid Mech. 518:187-214, 2004): the same Lambda gives the same dimensionless critical flow.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.interpolate import BarycentricInterpolator

from lowgmap.physics import surrogates
from lowgmap.physics.chart.composition import build_chart
from lowgmap.physics.examples import example_case
from lowgmap.physics.geometry import sections
from lowgmap.physics.models.open_channel import WedgeChannel, critical_flow_rate, tables
from lowgmap.physics.models.open_channel.hydraulics import SteadyFlow
from lowgmap.physics.models.open_channel.surrogate import (
    WEDGE_HALF_ANGLE_DEG,
    critical_flow_rates,
    similarity_curve,
    wedge_stokes_table,
)

DEG = math.pi / 180.0
K_KEY = "open-channel Stokes resistance K (wedge channel, over half-angle and arc angle)"
Q_KEY = "critical flow rate (similarity curve over Lambda, wedge channel)"


def _k_on_grid(nodes, K, b):
    return BarycentricInterpolator(nodes, K)(b)


#: One seeded random half-angle between the surrogate's nodes, shared by the tests below so that one
#: finite-element table serves them all (the table is cached per process under the exact switch).
ALPHA = float(np.radians(np.random.default_rng(20261205).uniform(3.0, 12.0)))


def _fe_table(alpha):
    with surrogates.exact():
        return tables.stokes_table(WedgeChannel(alpha, 1.0, 0.0))


def test_wedge_stokes_surrogate_matches_finite_elements_between_nodes():
    """Surrogate K at a seeded random half-angle (off the table nodes) vs the finite-element table.

    Catches: a wrong node layout in the half-angle, a wrong sin^2 scaling, a stale shipped table.
    The recorded maximum over 12 random half-angles is in SURROGATE_ERRORS.
    """
    fe_nodes, fe_K = _fe_table(ALPHA)
    nodes, K = wedge_stokes_table(ALPHA)
    b = np.linspace(0.0, fe_nodes[-1], 200)
    err = np.max(np.abs(_k_on_grid(nodes, K, b) / _k_on_grid(fe_nodes, fe_K, b) - 1.0))
    assert err < surrogates.SURROGATE_ERRORS[K_KEY]["limit"]
    # the recorded maximum (a larger seeded set) must cover this point, with room for mesh noise
    assert err < 3.0 * surrogates.SURROGATE_ERRORS[K_KEY]["max_rel_error"]


def test_wedge_surrogate_outside_its_box_gives_none():
    """Catches a surrogate extrapolating beyond its half-angle box (it must hand over to the mesh solve)."""
    assert wedge_stokes_table(math.radians(WEDGE_HALF_ANGLE_DEG[1] + 1.0)) is None
    assert wedge_stokes_table(math.radians(WEDGE_HALF_ANGLE_DEG[0] - 0.5)) is None


def test_stokes_table_does_not_depend_on_the_contact_angle():
    """A table solved for the contact-angle shape (nodes up to its own end) equals the zero-angle table
    interpolated there. Catches a table keyed on the contact angle giving other numbers than the shared one.
    """
    w = WedgeChannel(ALPHA, 1.0, 30.0 * DEG)
    own = tables.build_stokes_table(w)                     # nodes up to beta_pin = 60 deg - alpha
    nodes, K = _fe_table(ALPHA)                             # zero-angle shape, finite elements
    b = np.linspace(0.0, own["nodes"][-1], 50)
    err = np.max(np.abs(_k_on_grid(nodes, K, b) / _k_on_grid(own["nodes"], own["K"], b) - 1.0))
    assert err < 1e-5          # interpolation of a 21-node Chebyshev table (2e-6 measured) [calc]


@pytest.mark.parametrize("alpha_deg, theta_deg, K_e", [(6.0, 5.0, 0.0), (15.0, 0.0, 0.5), (45.0, 30.0, 0.2)])
def test_similarity_exact_solve_is_invariant_under_rescaling(alpha_deg, theta_deg, K_e):
    """Q_crit / sqrt(sigma L^3/rho) depends on Lambda = mu l/(L sqrt(rho sigma L)) only (dimensional analysis
    of the 1-D model). Exact root search at two scalings with the same Lambda, to 1e-9.
    Catches a length or property entering the model other than through Lambda (e.g. a dimensional tolerance).
    """
    def dimless(L, rho, sigma, mu, lam):
        ch = WedgeChannel(alpha_deg * DEG, L, theta_deg * DEG)
        length = lam * L * math.sqrt(rho * sigma * L) / mu
        q, _ = SteadyFlow(ch, rho, mu, sigma, K_e).critical(length)
        return q / math.sqrt(sigma * L ** 3 / rho)

    for lam in (0.03, 3.0):
        a = dimless(0.02, 1000.0, 0.07, 1e-3, lam)
        b = dimless(0.5, 13.0, 0.009, 0.4, lam)
        assert abs(a / b - 1.0) < 1e-9


def test_similarity_curve_matches_root_search_off_nodes():
    """Similarity curve vs the root search of SteadyFlow.critical (same section tables) at seeded random
    shapes, entrance losses and lengths. Catches interpolation or branch errors in F(Lambda) and a wrong
    Lambda in the conversion to flow units.
    """
    rng = np.random.default_rng(7)
    worst = 0.0
    for _ in range(6):
        a = rng.uniform(*WEDGE_HALF_ANGLE_DEG)
        t = rng.uniform(0.0, min(60.0, 89.0 - a))
        K_e = rng.uniform(0.0, 1.0)
        ch = WedgeChannel(a * DEG, 0.01, t * DEG)
        lam = 10.0 ** rng.uniform(-4.0, 3.0, 4)
        rho, mu, sigma = 900.0, 5e-3, 0.02
        lengths = lam * 0.01 * math.sqrt(rho * sigma * 0.01) / mu
        q, lim = critical_flow_rates(ch, lengths, rho, mu, sigma, K_e=K_e)
        flow = SteadyFlow(ch, rho, mu, sigma, K_e)
        for i, length in enumerate(lengths):
            qe, le = flow.critical(float(length))
            worst = max(worst, abs(q[i] / qe - 1.0))
            assert lim[i] == le
    assert worst < surrogates.SURROGATE_ERRORS[Q_KEY]["limit"]


def test_critical_flow_rates_agree_with_critical_flow_rate_and_vectorise():
    """Broadcasting over density and the exact switch. Catches a switch that is ignored (exact path must
    equal critical_flow_rate to rounding) and a broadcasting error over the mixture densities."""
    ch = WedgeChannel(10.0 * DEG, 0.02, 5.0 * DEG)
    rhos = np.array([1.2, 100.0, 1000.0])
    q, lim = critical_flow_rates(ch, 0.1, rhos, 1e-3, 0.07)
    assert q.shape == (3,) and lim.shape == (3,)
    assert np.all(np.diff(q) < 0)                   # heavier liquid, lower critical flow (F ~ rho^-1/2 or less)
    with surrogates.exact():
        qe, _ = critical_flow_rates(ch, 0.1, rhos, 1e-3, 0.07)
        ref = [critical_flow_rate(ch, 0.1, float(r), 1e-3, 0.07).Q_crit for r in rhos]
    np.testing.assert_allclose(qe, ref, rtol=1e-12)
    np.testing.assert_allclose(q, ref, rtol=5e-3)


def test_critical_flow_rates_errors():
    """Catches missing input checks (the message names the field)."""
    ch = WedgeChannel(10.0 * DEG, 0.02)
    with pytest.raises(ValueError, match="length"):
        critical_flow_rates(ch, -1.0, 1000.0, 1e-3, 0.07)
    with pytest.raises(ValueError, match="mu"):
        critical_flow_rates(ch, 0.1, 1000.0, -1e-3, 0.07)
    with pytest.raises(ValueError, match="K_e"):
        similarity_curve(ch, -0.1)


def test_exact_switch_is_scoped():
    """Catches global state leaking out of the with block."""
    assert not surrogates.exact_requested()
    with surrogates.exact():
        assert surrogates.exact_requested()
        with surrogates.exact(False):
            assert not surrogates.exact_requested()
        assert surrogates.exact_requested()
    assert not surrogates.exact_requested()


def test_measured_errors_within_targets():
    """The published error table (lowgmap models, theory manual) is within its own targets."""
    rows = surrogates.surrogate_errors()
    assert rows and all(r["max_rel_error"] is not None and r["points"] > 0 for r in rows)
    assert all(r["max_rel_error"] < r["limit"] for r in rows)


def _wedge_case():
    sec = sections.WedgeChannel(half_angle=ALPHA, wall_length=0.03)
    return example_case(sec, contact_angle=5.0 * DEG, length=0.05, g=1e-6 * 9.80665,
                        flow_range=(1e-8, 3e-5, 1e-10, 3e-5), models=("open_channel_ingestion",))


def test_exact_and_surrogate_charts_classify_alike(monkeypatch):
    """A chart with surrogates and one with full solves classify a dense grid identically except within
    the stated boundary error (1 %) of a line. Catches a surrogate that moves a line by more than stated
    and an exact switch that does not reach the models.
    """
    monkeypatch.setenv("LOWGMAP_CACHE", "off")              # no table from another run or mode
    case = _wedge_case()
    fast = build_chart(case)
    full = build_chart(case, exact=True)
    assert full.exact and not fast.exact
    ql, qg = np.meshgrid(np.geomspace(1e-8, 3e-5, 60), np.geomspace(1e-10, 3e-5, 60))
    a, b = fast.classify(ql, qg), full.classify(ql, qg)
    differ = a != b
    if differ.any():
        # every differing point lies within 1 % in Q_L of the ingestion line of the exact chart
        near = (full.classify(ql * 1.01, qg) != full.classify(ql / 1.01, qg))
        assert np.all(near[differ])


def test_damaged_shipped_table_is_not_used(tmp_path, monkeypatch):
    """A shipped table whose arrays no longer match their SHA-256 is ignored (the mesh solve takes over).
    Catches trusting a truncated or edited package-data file."""
    from lowgmap.physics.models.open_channel import surrogate

    with np.load(surrogate.WEDGE_TABLE_PATH) as d:
        data = {k: d[k] for k in d.files}
    data["g"] = data["g"] + 1e-3                               # edited values, old digest
    bad = tmp_path / "wedge.npz"
    np.savez(bad, **data)
    monkeypatch.setattr(surrogate, "WEDGE_TABLE_PATH", str(bad))
    surrogate._wedge_data.cache_clear()
    try:
        assert surrogate.wedge_stokes_table(ALPHA) is None
    finally:
        monkeypatch.undo()
        surrogate._wedge_data.cache_clear()
    assert surrogate.wedge_stokes_table(ALPHA) is not None


def test_chart_margins_follow_the_chart_mode(monkeypatch):
    """Margins of a chart built with exact=True are computed with the full solves (the chart's mode), not
    the caller's. Catches margins that silently mix surrogate lines into an exact chart."""
    from lowgmap.physics.chart import margins

    seen = []
    real = margins.geometry_of

    def spy(chart, *a, **k):
        seen.append(surrogates.exact_requested())
        return real(chart, *a, **k)

    monkeypatch.setattr(margins, "geometry_of", spy)
    case = _wedge_case()
    chart = build_chart(case, exact=True)
    margins.point_margins(chart, 1e-6, 1e-8)
    assert seen and all(seen)


@pytest.mark.parametrize("kind", ["rectangular_groove", "parallel_plates"])
def test_ratio_stokes_surrogate_matches_finite_elements_between_nodes(kind):
    """Groove and plates tables over the aspect ratio at a seeded random ratio (off the nodes) vs a fresh
    finite-element table. Catches a box boundary in the wrong place (the table end has a kink there) and a
    wrong node layout. Recorded maxima over more ratios are in SURROGATE_ERRORS."""
    from lowgmap.physics.models.open_channel.surrogate import RATIO_BOXES, _ratio_channel, ratio_stokes_table

    rng = np.random.default_rng(11)
    lo, hi = RATIO_BOXES[kind][1][rng.integers(2)]
    shape = _ratio_channel(kind, float(np.exp(rng.uniform(np.log(lo), np.log(hi)))))
    full = tables.build_stokes_table(shape)
    nodes, K = ratio_stokes_table(shape)
    b = np.linspace(0.0, full["nodes"][-1], 200)
    err = np.max(np.abs(_k_on_grid(nodes, K, b) / _k_on_grid(full["nodes"], full["K"], b) - 1.0))
    key = next(k for k in surrogates.SURROGATE_ERRORS if kind.replace("_", " ") in k and "resistance K" in k)
    assert err < surrogates.SURROGATE_ERRORS[key]["limit"]
    assert err < 3.0 * surrogates.SURROGATE_ERRORS[key]["max_rel_error"]


def test_similarity_for_grooves_and_plates_matches_root_search():
    """Similarity curve vs the root search for a shallow groove (the inlet fold at the smallest radius, once a
    crash in the choke search) and plates. Catches a curve built only for wedges."""
    from lowgmap.physics.models.open_channel import ParallelPlates, RectangularGroove

    for ch in (RectangularGroove(0.004, 0.0004, 0.0), RectangularGroove(0.004, 0.002, 0.3),
               ParallelPlates(0.005, 0.025, 0.2)):
        lengths = np.array([0.005, 0.05, 0.5])
        q, lim = critical_flow_rates(ch, lengths, 1000.0, 1e-3, 0.07, K_e=0.5)
        flow = SteadyFlow(ch, 1000.0, 1e-3, 0.07, 0.5)
        for i, length in enumerate(lengths):
            qe, le = flow.critical(float(length))
            assert q[i] == pytest.approx(qe, rel=surrogates.SURROGATE_ERRORS[Q_KEY]["limit"])
            assert lim[i] == le
