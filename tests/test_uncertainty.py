"""Monte Carlo propagation of a case's uncertainties (lowgmap.physics.studies.uncertainty).

Check values are closed forms derived here (normal distributions through straight or horizontal
boundaries), marked "closed form"; the Weber-number lines are those of Zhao & Rezkallah (1993),
Q_G = A sqrt(We_SG sigma / (rho_G D)), so the gas flow on a line scales as sqrt(sigma / rho_G).
The fluid pair only carries the lines.
"""
import math

import numpy as np
import pytest
from scipy.stats import norm

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.physics.models.boundary import PowerLawBoundary
from lowgmap.physics.case import Case, FlowRange, OperatingPoint
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.geometry.sections import Circle, Groove, Polygon, Rectangle
from lowgmap.physics.studies.uncertainty import Uncertainty, monte_carlo, nominal_value, perturbed_case
from lowgmap.physics.properties.wetting import Wetting

FLUID = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
WEBER_MODELS = ["slug_transitional_zhao_rezkallah_1993", "transitional_annular_zhao_rezkallah_1993"]


def make_case(ql=1e-5, qg=0.8e-5, section=None, wetting=None, qg_max=1e-2):
    return Case(FLUID, section or Circle(0.0127), wetting or Wetting(0.0), 1.0, 1e-5,
                FlowRange(1e-7, 1e-3, 1e-7, qg_max), OperatingPoint(ql, qg))


def line_chart(case, c=1.0):
    return Chart.build(case, [PowerLawBoundary("rig", c, 1.0, "bubbles", "slugs")])


def weber_line_flow(case):
    """Q_G on We_SG = 1 (Zhao & Rezkallah 1993): A sqrt(sigma / (rho_G D))."""
    f, s = case.fluid, case.section
    return s.area * math.sqrt(f.sigma / (f.rho_g * s.hydraulic_diameter))


def test_uncertainty_validation():
    with pytest.raises(ValueError, match="target"):
        Uncertainty("temperature", "normal", 0.1, True)
    with pytest.raises(ValueError, match="distribution"):
        Uncertainty("gas_flow", "triangular", 0.1, True)
    with pytest.raises(ValueError, match="size"):
        Uncertainty("gas_flow", "normal", -0.1, True)
    with pytest.raises(TypeError, match="relative"):
        Uncertainty("gas_flow", "normal", 0.1, "yes")
    doc = load_case(sample_case_path("condensate_line"))
    converted = [Uncertainty.of(u) for u in doc.uncertainties]
    assert [u.target for u in converted] == ["liquid_flow", "gas_flow", "surface_tension"]
    # uniform of half-width h has standard deviation h / sqrt(3) (closed form)
    assert Uncertainty("gas_flow", "uniform", 0.3, False).standard_deviation(1.0) == pytest.approx(0.3 / math.sqrt(3))


def test_zero_uncertainty_gives_probability_one_or_zero():
    case = make_case()
    chart = line_chart(case)
    none = [Uncertainty("liquid_flow", "normal", 0.0, True), Uncertainty("surface_tension", "uniform", 0.0, True)]
    res = monte_carlo(case, none, n=300, chart=chart)
    assert res.probability == 1.0 and res.std_error == 0.0
    k = 0.8
    assert np.allclose(res.margins, (1 - k) / (1 + k), atol=1e-6)     # closed form, straight line
    res = monte_carlo(case, none, n=300, chart=chart, intended_regime="slugs")
    assert res.probability == 0.0 and np.all(res.margins < 0)
    # Wilson interval for 0 successes in n: upper bound z^2 / (n + z^2) (closed form); with a property input the
    # n is the number of property draws, ceil(300/16) = 19
    z2 = 1.959963984540054 ** 2
    assert res.chart_draws == 19
    assert res.ci95[0] == pytest.approx(0.0, abs=1e-15)
    assert res.ci95[1] == pytest.approx(z2 / (19 + z2), rel=1e-9)
    res = monte_carlo(case, none[:1], n=300, chart=chart, intended_regime="slugs")
    assert res.chart_draws == 1 and res.ci95[1] == pytest.approx(z2 / (300 + z2), rel=1e-9)


def test_seeded_runs_are_reproducible():
    case = make_case()
    chart = line_chart(case)
    uncs = [Uncertainty("gas_flow", "normal", 0.2, True), Uncertainty("liquid_density", "uniform", 0.05, True)]
    a = monte_carlo(case, uncs, n=500, seed=7, chart=chart)
    b = monte_carlo(case, uncs, n=500, seed=7, chart=chart)
    c = monte_carlo(case, uncs, n=500, seed=8, chart=chart)
    assert np.array_equal(a.margins, b.margins) and a.probability == b.probability
    assert not np.array_equal(a.margins, c.margins)


def test_flow_uncertainty_probability_and_margins_closed_form():
    # closed form: with Q_L = Q_L0 (1 + b x2), Q_G = Q_G0 (1 + a x1), x normal, the point stays below
    # Q_G = Q_L with probability Phi((Q_L0 - Q_G0) / sqrt((a Q_G0)^2 + (b Q_L0)^2))
    ql0, qg0, a, b = 1e-5, 0.8e-5, 0.1, 0.1
    case = make_case(ql0, qg0)
    uncs = [Uncertainty("liquid_flow", "normal", b, True), Uncertainty("gas_flow", "normal", a, True)]
    res = monte_carlo(case, uncs, n=20000, seed=3, chart=line_chart(case))
    expected = norm.cdf((ql0 - qg0) / math.hypot(a * qg0, b * ql0))
    assert res.std_error == pytest.approx(math.sqrt(res.probability * (1 - res.probability) / 20000))
    assert abs(res.probability - expected) < 4 * res.std_error
    # every sample's margin against the closed form, redrawing in the documented order (flows in list order)
    rng = np.random.default_rng(3)
    ql = ql0 * (1 + b * rng.standard_normal(20000))
    qg = qg0 * (1 + a * rng.standard_normal(20000))
    k = qg / ql
    signed = np.where(k < 1, (1 - k) / (1 + k), -(k - 1) / (k + 1))
    ok = ql > 0
    assert np.allclose(res.margins[ok], signed[ok], atol=1e-7)
    assert res.n_invalid == int((~ok).sum())


def test_standard_error_matches_spread_and_falls_as_one_over_sqrt_n():
    case = make_case(1e-5, 0.9e-5)
    chart = line_chart(case)
    uncs = [Uncertainty("gas_flow", "normal", 0.1, True)]
    ps = [monte_carlo(case, uncs, n=400, seed=s, chart=chart) for s in range(40)]
    spread = np.std([r.probability for r in ps], ddof=1)
    reported = np.mean([r.std_error for r in ps])
    assert spread == pytest.approx(reported, rel=0.3)       # 40 replicates: ~11 % scatter of the spread
    big = monte_carlo(case, uncs, n=6400, seed=1, chart=chart)
    assert big.std_error / reported == pytest.approx(0.25, rel=0.1)


def test_property_uncertainty_probability_closed_form():
    # closed form: Q_G on We_SG = 1 scales as sqrt(sigma); with sigma = sigma0 (1 + s x), x normal, a point at
    # Q_G0 = 0.95 Q_line stays below the line with probability 1 - Phi(((Q_G0/Q_line)^2 - 1) / s)
    case = make_case()
    qc = weber_line_flow(case)
    case = case.with_(operating_point=OperatingPoint(1e-5, 0.95 * qc))
    chart = Chart.build(case, WEBER_MODELS)
    s = 0.05
    uncs = [Uncertainty("surface_tension", "normal", s, True)]
    expected = 1 - norm.cdf((0.95 ** 2 - 1) / s)
    res = monte_carlo(case, uncs, n=800, seed=2, chart=chart, chart_draws=800)
    assert res.chart_draws == 800
    assert abs(res.probability - expected) < 4 * res.std_error
    # grouped draws: 16 identical samples per draw, so the standard error is that of K = N/16 draws
    res = monte_carlo(case, uncs, n=3200, seed=4, chart=chart)
    assert res.chart_draws == 200
    assert res.std_error == pytest.approx(math.sqrt(res.probability * (1 - res.probability) / 199), rel=0.02)
    assert abs(res.probability - expected) < 4 * res.std_error


def test_sensitivity_ranking_closed_form():
    # closed form: below a horizontal line the margin is m = Q_line/Q_G - 1 with Q_line ~ sqrt(sigma/rho_G), so
    # per standard uncertainty dm = (Q_line/Q_G) s_sigma / 2 and -(Q_line/Q_G) s_rho / 2; Q_L has no effect
    case = make_case()
    qc = weber_line_flow(case)
    case = case.with_(operating_point=OperatingPoint(1e-5, 0.6 * qc))
    chart = Chart.build(case, WEBER_MODELS)
    uncs = [Uncertainty("liquid_flow", "normal", 0.1, True), Uncertainty("surface_tension", "normal", 0.05, True),
            Uncertainty("gas_density", "uniform", 0.02 * math.sqrt(3), True)]
    res = monte_carlo(case, uncs, n=4000, seed=5, chart=chart)
    names = [k for k, _ in res.sensitivity]
    effect = dict(res.sensitivity)
    assert names == ["surface_tension", "gas_density", "liquid_flow"]
    assert effect["surface_tension"] == pytest.approx(0.05 / 2 / 0.6, rel=0.03)
    assert effect["gas_density"] == pytest.approx(-0.02 / 2 / 0.6, rel=0.03)
    assert abs(effect["liquid_flow"]) < 2e-3
    assert res.nominal_margin == pytest.approx(1 / 0.6 - 1, abs=1e-6)


def test_invalid_draws_are_counted_and_left_out():
    # closed form: with a relative normal size 0.6, P(1 + 0.6 x <= 0) = Phi(-1/0.6) = 4.78 %
    case = make_case()
    res = monte_carlo(case, [Uncertainty("gas_flow", "normal", 0.6, True)], n=2000, seed=1, chart=line_chart(case))
    assert 0.0478 * 2000 - 40 < res.n_invalid < 0.0478 * 2000 + 40
    assert np.isnan(res.margins).sum() == res.n_invalid
    assert sum(res.regime_counts.values()) == 2000 - res.n_invalid


def test_progress_reports_up_to_n():
    case = make_case()
    seen = []
    monte_carlo(case, [Uncertainty("gas_flow", "normal", 0.1, True), Uncertainty("surface_tension", "normal", 0.02,
                                                                                True)],
                n=800, chart=line_chart(case), progress=lambda done, total: seen.append((done, total)))
    assert seen and seen[-1] == (800, 800)
    assert all(a[0] <= b[0] for a, b in zip(seen, seen[1:]))


def test_sample_case_uncertainties_run():
    doc = load_case(sample_case_path("condensate_line"))
    res = monte_carlo(doc.case, doc.uncertainties, n=1000, seed=0, required_margin=0.3)
    assert 0 <= res.probability <= 1 and res.n == 1000
    q = [v for _, v in res.margin_quantiles]
    assert q == sorted(q)
    assert res.probability_required is not None
    assert set(res.to_dict()) >= {"probability", "std_error", "margin_quantiles", "sensitivity", "n"}


def test_draws_shared_out_to_worker_processes_give_the_same_samples_and_numbers():
    # the half-angle draws of the groove sample (each its own corner shape) computed in two worker processes,
    # in blocks of 32 draws: catches a block written back at the wrong samples or given the wrong draws (an
    # off-by-one at a block edge), a draw computed twice or left out, progress that does not reach N, and workers
    # asked for but not used
    doc = load_case(sample_case_path("cryogenic_groove"))
    assert "half_angle" in {u.target for u in doc.uncertainties}
    chart = Chart.build(doc.case)
    kw = dict(n=700, seed=5, chart=chart, chart_draws=70)          # blocks of 32, 32 and 6 draws
    one = monte_carlo(doc.case, doc.uncertainties, **kw)
    seen = []
    two = monte_carlo(doc.case, doc.uncertainties, workers=2, progress=lambda d, t: seen.append((d, t)), **kw)
    assert (one.processes, two.processes) == (1, 2)
    assert np.array_equal(one.margins, two.margins, equal_nan=True)
    assert np.unique(np.round(one.margins, 12)).size > 70          # the samples of one draw differ (their flows)
    assert (two.probability, two.std_error, two.sensitivity, two.regime_counts, two.margin_quantiles) == \
        (one.probability, one.std_error, one.sensitivity, one.regime_counts, one.margin_quantiles)
    assert seen[-1] == (700, 700) and all(a[0] < b[0] for a, b in zip(seen, seen[1:]))
    with pytest.raises(ValueError, match="workers must be >= 1, got 0"):
        monte_carlo(doc.case, doc.uncertainties, workers=0, **kw)


def test_monte_carlo_errors():
    case = make_case()
    chart = line_chart(case)
    with pytest.raises(ValueError, match="operating point"):
        monte_carlo(case.with_(operating_point=None), [], n=10, chart=chart)
    with pytest.raises(ValueError, match="regimes on this chart"):
        monte_carlo(case, [], n=10, chart=chart, intended_regime="annular")
    with pytest.raises(ValueError, match="more than once"):
        monte_carlo(case, [Uncertainty("gas_flow", "normal", 0.1, True)] * 2, n=10, chart=chart)
    with pytest.raises(ValueError, match="n "):
        monte_carlo(case, [], n=1, chart=chart)
    with pytest.raises(ValueError, match="half_angle"):
        monte_carlo(case, [Uncertainty("half_angle", "normal", 0.01, False)], n=10, chart=chart)
    with pytest.raises(ValueError, match="another case"):
        monte_carlo(make_case(section=Circle(0.02)), [], n=10, chart=chart)


# ---------------------------------------------------------------------------------------------
# how inputs change the case

def test_size_scales_every_length_of_the_section():
    # invariant: geometric similarity keeps angles and scales lengths, areas by the square
    for section in (Circle(0.01), Rectangle(0.004, 0.002), Polygon([(0, 0), (0.01, 0), (0.007, 0.006), (0.003, 0.006)]),
                    Groove(math.radians(15), 0.004)):
        case = make_case(section=section)
        d = nominal_value(case, "size")
        c2 = perturbed_case(case, {"size": 1.1 * d})
        assert c2.section.hydraulic_diameter == pytest.approx(1.1 * d, rel=1e-12)
        assert c2.section.area == pytest.approx(1.21 * section.area, rel=1e-12)
        assert [c.half_angle for c in c2.section.corners] == pytest.approx([c.half_angle for c in section.corners])
    with pytest.raises(ValueError, match="size"):
        perturbed_case(make_case(), {"size": -0.01})


def test_angles_are_clipped_and_hysteresis_moves_along():
    case = make_case(wetting=Wetting(math.radians(10), math.radians(20), math.radians(5)))
    c2 = perturbed_case(case, {"contact_angle": math.radians(-4)})
    assert c2.wetting.contact_angle == 0.0
    assert c2.wetting.advancing == pytest.approx(math.radians(10))     # moved by the clipped shift, -10 deg
    assert c2.wetting.receding == 0.0
    g = make_case(section=Groove(math.radians(15), 0.004))
    assert perturbed_case(g, {"half_angle": math.radians(16)}).section.half_angle == pytest.approx(math.radians(16))
    assert 0 < perturbed_case(g, {"half_angle": -0.1}).section.half_angle < 1e-6
    assert perturbed_case(case, {"surface_tension": 0.05, "length": 2.0, "residual_acceleration": 1e-3}).fluid.sigma \
        == 0.05
    with pytest.raises(ValueError, match="rho_g"):
        perturbed_case(case, {"gas_density": 2000.0})


def test_partition_scheme_draws_closed_form():
    # a partition scheme (only the Chart interface is used): below Q_G = Q_L one regime whatever the flat line
    # Q_G = 2e-5 does, so the margins are those of the diagonal alone (closed form per sample)
    from lowgmap.physics.chart.composition import PartitionScheme, RegimeInfo

    def rule(v):
        return np.where(v["diag"] < 0, "liquid side", np.where(v["flat"] < 0, "middle", "top"))
    scheme = PartitionScheme("test partition", ("diag", "flat"),
                             (RegimeInfo("liquid side"), RegimeInfo("middle"), RegimeInfo("top")), rule)
    diag, flat = PowerLawBoundary("diag", 1.0, 1.0, "d-", "d+"), PowerLawBoundary("flat", 2e-5, 0.0, "f-", "f+")
    diag.scheme = flat.scheme = scheme
    ql0, qg0 = 4e-5, 2.4e-5                     # below the diagonal, above the flat line
    case = make_case(ql0, qg0)
    chart = Chart.build(case, [diag, flat])
    uncs = [Uncertainty("gas_flow", "normal", 0.2, True), Uncertainty("liquid_density", "normal", 0.01, True)]
    res = monte_carlo(case, uncs, n=800, seed=6, chart=chart)
    assert res.chart_draws == 50
    rng = np.random.default_rng(6)
    qg = qg0 * (1 + 0.2 * rng.standard_normal(800))
    k = qg / ql0
    signed = np.where(k < 1, (1 - k) / (1 + k), -(k - 1) / (k + 1))
    ok = qg > 0
    assert np.allclose(res.margins[ok], signed[ok], atol=1e-5)


def test_worker_processes_use_the_full_solves_when_the_caller_asks_for_them(monkeypatch):
    # catches the choice of full solves (`--exact`) lost in the worker processes: it is a setting of the calling
    # context, which a process does not inherit, and their margins would come from the surrogate tables instead
    # (about 5e-6 away at this point, where the ingestion line limits the margin)
    from lowgmap.physics import surrogates
    from lowgmap.physics.studies import uncertainty as unc

    doc = load_case(sample_case_path("wedge_separator"))
    monkeypatch.setattr(unc, "DRAWS_PER_BLOCK", 1)              # two draws: two blocks, one per worker
    kw = dict(n=4, seed=1, chart_draws=2, point=(5e-6, 2e-8))
    with surrogates.exact():
        chart = Chart.build(doc.case)
        one = monte_carlo(doc.case, doc.uncertainties, chart=chart, **kw)
        two = monte_carlo(doc.case, doc.uncertainties, chart=chart, workers=2, **kw)
    fast = monte_carlo(doc.case, doc.uncertainties, chart=Chart.build(doc.case), **kw)
    assert (one.processes, two.processes) == (1, 2)
    assert np.array_equal(one.margins, two.margins)
    assert not np.allclose(one.margins, fast.margins, rtol=1e-7, atol=0.0)     # the two modes differ here
