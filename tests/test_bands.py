"""Model-form bands, worst-case margins, model uncertainty in Monte Carlo and calibrated bands.

Modules: lowgmap.physics.chart.bands, the band fields of lowgmap.physics.models.boundary.Constant,
lowgmap.physics.studies.uncertainty (model_uncertainty) and lowgmap.physics.studies.calibration (band).

Check values are closed forms derived here: the drift-flux line of Dukler et al. (1988),
Q_G/Q_L = C0 alpha_c / (1 - C0 alpha_c), the Weber-number line of Zhao & Rezkallah (1993),
Q_G proportional to sqrt(We_SG), the symmetric margin to a straight line of slope 1 in log-log axes,
(r - rho)/(r + rho) for a point at flow ratio rho below the line Q_G = r Q_L, and uniform
probabilities. Where no closed form exists the reference is a brute-force search over a dense grid
of the constants (an independent path: plain enumeration, no optimiser), and the test model is built
so that its line moves NON-monotonically with its constants (interior extremes), so that a band or a
worst case found at the corners of the box alone fails. The labelled calibration points are
SYNTHETIC (generated from the line itself), not measurements. Each test names the bug it catches.
"""
import math

import numpy as np
import pytest

from lowgmap.physics.case import ModelChoice
from lowgmap.physics.chart.bands import (Band, band_variables, boundary_band, chart_bands, chart_constant_bands,
                                         worst_case_margins, latin_hypercube)
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.margins import point_margins
from lowgmap.physics.examples import example_case
from lowgmap.physics.models.boundary import (DEFAULT_BAND_REASON, Constant, ExplicitBoundary, PowerLawBoundary,
                                             case_bands, with_case_bands)
from lowgmap.physics.studies.calibration import calibrate
from lowgmap.physics.studies.uncertainty import Uncertainty, model_variables, monte_carlo

BS = "bubble_slug_dukler_1988"
SA = "slug_annular_dukler_1988"
WE1 = "slug_transitional_zhao_rezkallah_1993"


def ratio_line(p):
    """Q_G/Q_L on the drift-flux line for C0 alpha_c = p (Dukler et al. 1988, closed form)."""
    return p / (1.0 - p)


def box_margin_below(r, rho):
    """Symmetric margin of a point at Q_G/Q_L = rho below the line Q_G = r Q_L (closed form):
    (1 + m) rho = r (1 - m)."""
    return (r - rho) / (r + rho)


class WavyLine(ExplicitBoundary):
    """Test model, closed form, NON-monotonic in its constants:

    log10 Q_G = log10 Q_L + 0.3 sin(3 a + 2 (log10 Q_L + 5)) + 0.1 (b - 1)^2

    a in [0, 2] makes 3a sweep almost a whole period, so the extremes in a are interior at most Q_L
    and move with Q_L; b in [0, 3] has its minimum at b = 1, inside the band.
    """

    name = "wavy_test_line"
    label = "wavy test line"
    citation = "closed-form test model"
    regime_below = "bubbles"
    regime_above = "slugs"

    def __init__(self, b_band=True, b=2.0):
        self.constants = (
            Constant("a", 0.5, "-", "test value", 0.0, 2.0, band=(0.0, 2.0), band_reason="test band"),
            Constant("b", b, "-", "test value", 0.0, 3.0, band=(0.0, 3.0) if b_band else None,
                     band_reason="test band" if b_band else ""),
        )

    @staticmethod
    def log_qg(x, a, b):
        return x + 0.3 * np.sin(3.0 * a + 2.0 * (x + 5.0)) + 0.1 * (b - 1.0) ** 2

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        ql = np.asarray(ql, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = np.where(ql > 0, 10.0 ** self.log_qg(np.log10(np.where(ql > 0, ql, 1.0)), c["a"], c["b"]), np.nan)
        return float(out) if out.ndim == 0 else out


class ScaledLine(ExplicitBoundary):
    """Test model Q_G = k Q_L with an uncertain k (a straight line of slope 1 in log-log axes)."""

    citation = "closed-form test model"
    regime_below = "bubbles"
    regime_above = "slugs"

    def __init__(self, name, k=2.5, band=(1.0, 3.0)):
        self.name = name
        self.label = name
        self.constants = (Constant("k", k, "-", "test value", 0.1, 10.0, band=band,
                                   band_reason="test band" if band else ""),)

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        out = c["k"] * np.asarray(ql, dtype=float)
        return float(out) if out.ndim == 0 else out


# --- constants and their bands ---------------------------------------------------------------

def test_constant_band_rules_and_errors():
    # bug caught: the default band applied to design inputs or choices, or not cut to the allowed range
    c = Constant("k", 3.0, "-", "order of magnitude", 0.1, 5.0)
    assert c.band_for() == (1.5, 5.0, DEFAULT_BAND_REASON)                 # x/÷ 2, cut at the allowed 5
    assert c.band_for(0.1) == (0.1, 0.2, DEFAULT_BAND_REASON)             # about the value in use, cut at 0.1
    assert Constant("n", -0.5, "-", "from memory", -2.0, 0.0).band_for() == (-1.0, -0.25, DEFAULT_BAND_REASON)
    assert Constant("w", 0.2, "-", "design input", 1e-3, 10.0).band_for() is None
    assert Constant("z", 0.0, "-", "from memory", 0.0, 1.0).band_for() is None   # no relative band about 0
    own = Constant("we", 1.0, "-", "from memory", 0.01, 1000.0, band=(0.5, 2.0), band_reason="spread")
    assert own.band_for() == (0.5, 2.0, "spread")
    lo, hi, why = own.band_for(3.0)                                        # a value outside: widened, said so
    assert (lo, hi) == (0.5, 3.0) and "widened" in why
    with pytest.raises(ValueError, match="constant we: band .* must lie within the allowed range"):
        Constant("we", 1.0, "-", "src", 0.5, 10.0, band=(0.1, 2.0), band_reason="r")
    with pytest.raises(ValueError, match="must contain the default"):
        Constant("we", 1.0, "-", "src", 0.01, 10.0, band=(2.0, 3.0), band_reason="r")
    with pytest.raises(ValueError, match="needs its reason"):
        Constant("we", 1.0, "-", "src", 0.01, 10.0, band=(0.5, 2.0))


def test_tube_constants_carry_bands_with_reasons():
    # bug caught: a constant recalled from memory drawn as a sharp line (no band), or a band without its reason
    chart = Chart.build(example_case())
    bands = chart_constant_bands(chart)
    for name in (BS, SA, WE1, "bubble_slug_jayawardena_1997", "transitional_annular_zhao_rezkallah_1993"):
        assert bands[name], name
        for b in bands[name]:
            assert b.low < b.value < b.high and b.reason.strip() and b.origin == "model"


def test_case_bands_replace_the_model_bands():
    # bug caught: a case's own band (e.g. calibrated) ignored in favour of the model's prior band
    case = with_case_bands(example_case(), [(BS, "alpha_c", 0.44, 0.46, "calibrated: test")])
    assert case_bands(case) == {BS: {"alpha_c": (0.44, 0.46, "calibrated: test")}}
    got = {b.name: b for b in chart_constant_bands(Chart.build(case, [BS]), BS)}
    assert (got["alpha_c"].low, got["alpha_c"].high, got["alpha_c"].origin) == (0.44, 0.46, "case")
    assert got["c0"].origin == "model"
    with pytest.raises(ValueError, match="low must be <= high"):
        case_bands(with_case_bands(example_case(), [(BS, "alpha_c", 0.5, 0.4, "bad")]))
    with pytest.raises(ValueError, match="has no constant 'alpha'"):
        chart_constant_bands(Chart.build(with_case_bands(example_case(), [(BS, "alpha", 0.4, 0.5, "typo")]), [BS]))


def test_latin_hypercube_fills_every_stratum():
    # bug caught: a screen that leaves strata of a constant unsampled
    u = latin_hypercube(16, 3, seed=4)
    for j in range(3):
        assert sorted((u[:, j] * 16).astype(int).tolist()) == list(range(16))


# --- band of a boundary ----------------------------------------------------------------------

def test_drift_flux_band_closed_form():
    # Dukler et al. (1988) line Q_G/Q_L = p/(1 - p), p = C0 alpha_c; over alpha_c in [0.35, 0.55] and C0 in
    # [1.0, 1.35] the edges are p = 0.35 and p = 0.7425 (closed form). Bug caught: a band that moves one
    # constant only, or mixes the edges up.
    band = boundary_band(Chart.build(example_case(), [BS]), BS)
    assert np.allclose(band.qg_lower / band.ql, ratio_line(0.35), rtol=1e-9)
    assert np.allclose(band.qg_upper / band.ql, ratio_line(0.55 * 1.35), rtol=1e-9)
    assert np.allclose(band.qg_nominal / band.ql, ratio_line(0.45 * 1.2), rtol=1e-12)
    assert np.allclose(band.lower_values, [0.35, 1.0]) and np.allclose(band.upper_values, [0.55, 1.35])
    # the move of alpha_c alone (0.45 -> 0.55) shifts the line more than that of C0 (1.2 -> 1.35): closed form
    assert ratio_line(0.55 * 1.2) > ratio_line(0.45 * 1.35)
    assert set(band.upper_setter) == {"alpha_c"} and band.setters("upper") == pytest.approx({"alpha_c": 1.0})


def test_weber_band_scales_as_sqrt_of_the_weber_number():
    # Zhao & Rezkallah (1993) line: Q_G = A sqrt(We_SG sigma / (rho_G D)); We_SG from 0.5 to 2 -> x/÷ sqrt(2)
    band = boundary_band(Chart.build(example_case(), [WE1]), WE1)
    assert np.allclose(band.qg_upper / band.qg_nominal, math.sqrt(2.0), rtol=1e-9)
    assert np.allclose(band.qg_nominal / band.qg_lower, math.sqrt(2.0), rtol=1e-9)


def test_band_edges_match_brute_force_on_a_non_monotonic_line():
    # bug caught: extremes taken at the corners of the box (a monotonic-response assumption), or a local
    # search that stops in the wrong basin
    chart = Chart.build(example_case(), [WavyLine()])
    band = boundary_band(chart, "wavy_test_line")
    x = np.log10(band.ql)
    a = np.linspace(0.0, 2.0, 801)
    b = np.linspace(0.0, 3.0, 121)
    A, B, X = np.meshgrid(a, b, x, indexing="ij")
    Y = WavyLine.log_qg(X, A, B).reshape(-1, x.size)
    brute_lo, brute_hi = Y.min(axis=0), Y.max(axis=0)
    lo, hi = np.log10(band.qg_lower), np.log10(band.qg_upper)
    # the band contains every sampled line, and the grid misses the true extreme by less than its
    # resolution: 0.3 (3 da / 2)^2 / 2 + 0.1 (db / 2)^2 < 2e-5 decade for da = 0.0025, db = 0.025
    assert np.all(lo <= brute_lo + 1e-9) and np.all(hi >= brute_hi - 1e-9)
    assert np.all(lo >= brute_lo - 2e-5) and np.all(hi <= brute_hi + 2e-5)
    # the same test on a band from the corners of the box alone fails: the check can fail
    corners = [WavyLine.log_qg(x, ca, cb) for ca in (0.0, 2.0) for cb in (0.0, 3.0)]
    assert np.max(np.min(corners, axis=0) - brute_lo) > 0.1
    # the constants reported at an edge do put the line there
    for i in (0, x.size // 2, x.size - 1):
        assert WavyLine.log_qg(x[i], *band.lower_values[i]) == pytest.approx(lo[i], abs=1e-12)
        assert WavyLine.log_qg(x[i], *band.upper_values[i]) == pytest.approx(hi[i], abs=1e-12)


def test_a_line_without_banded_constants_is_its_own_band():
    # bug caught: the default band given to constants with a source (a measured power law from the case file)
    line = PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")
    band = boundary_band(Chart.build(example_case(), [line]), "rig_line")
    assert band.known_exactly and band.notes
    assert np.array_equal(band.qg_lower, band.qg_nominal) and np.array_equal(band.qg_upper, band.qg_nominal)


def test_bands_are_cached_per_chart_and_name_the_lines():
    # bug caught: the band recomputed at every call (the dashboard toggles it), or an unknown line accepted
    chart = Chart.build(example_case(), [BS, SA])
    assert boundary_band(chart, BS) is boundary_band(chart, BS)
    assert [b.name for b in chart_bands(chart)] == [BS, SA]
    with pytest.raises(ValueError, match="no boundary 'nope' on this chart; boundaries: bubble_slug"):
        boundary_band(chart, "nope")
    polys = boundary_band(chart, BS).outline((1e-7, 1e-3))
    assert len(polys) == 1 and np.all((polys[0][1] >= 1e-7) & (polys[0][1] <= 1e-3))


def test_band_notes_rejected_combinations():
    # Slug–annular line: C0 alpha_c reaches 1.35 x 0.85 > 1, where the model rejects the constants. Bug
    # caught: rejected combinations silently dropped (the engineer is not told the edge may be open)
    band = boundary_band(Chart.build(example_case(), [SA]), SA)
    assert band.rejected > 0 and "rejected by the model" in band.notes[0]
    assert np.all(band.qg_upper / band.ql > 100 * ratio_line(0.96))        # the edge runs far above the line


# --- shared constants ------------------------------------------------------------------------

def test_a_constant_shared_by_lines_moves_for_all_of_them():
    # bug caught: one physical constant moved differently in two lines of a family (an inconsistent chart)
    first, second = ScaledLine("line_one"), ScaledLine("line_two", k=2.5)
    second.regime_below, second.regime_above = "slugs", "annular"
    chart = Chart.build(example_case(), [first, second])
    (v,) = band_variables(chart)
    assert v.lines == ("line_one", "line_two") and (v.low, v.high) == (1.0, 3.0)
    # a different band is another quantity (the two C0 of the drift-flux lines)
    keys = [v.key for v in band_variables(Chart.build(example_case(), [BS, SA]))]
    assert f"{BS}.c0" in keys and f"{SA}.c0" in keys


# --- worst-case margin -----------------------------------------------------------------------

def test_worst_case_margin_closed_form_on_the_drift_flux_line():
    # point at Q_G/Q_L = 0.5 below the bubble–slug line (Dukler et al. 1988); the line can come down to
    # Q_G/Q_L = 0.35/0.65 (alpha_c 0.35, C0 1.0). Bug caught: the margin measured to the nominal line only
    chart = Chart.build(example_case(), [BS])
    wc = worst_case_margins(chart, 1e-5, 0.5e-5)
    assert wc.nominal == pytest.approx(box_margin_below(ratio_line(0.54), 0.5), abs=1e-6)
    assert wc.worst_case == pytest.approx(box_margin_below(ratio_line(0.35), 0.5), abs=1e-6)
    assert wc.worst_case <= wc.nominal and wc.established
    assert (wc.limiting_boundary, wc.limiting_constant) == (BS, "alpha_c")
    assert wc.constants[BS] == pytest.approx({"alpha_c": 0.35, "c0": 1.0}, abs=1e-6)
    assert wc is worst_case_margins(chart, 1e-5, 0.5e-5)                  # cached per point


def test_worst_case_margin_is_negative_when_the_band_covers_the_point():
    # point at Q_G/Q_L = 0.9: below the nominal line (1.174) but above the lowest (0.538); the worst case puts
    # it in slugs at margin (0.9 - 0.538)/(0.9 + 0.538) (closed form). Bug caught: a worst case clipped at 0
    chart = Chart.build(example_case(), [BS])
    wc = worst_case_margins(chart, 1e-5, 0.9e-5)
    r = ratio_line(0.35)
    assert wc.leaves_regime and wc.worst_regime == "elongated bubbles / slugs"
    assert wc.worst_case == pytest.approx(-(0.9 - r) / (0.9 + r), abs=1e-6)


def test_worst_case_margin_never_exceeds_the_nominal_margin():
    # bug caught: a search that reports the margin of other constants even when the nominal ones are worse
    chart = Chart.build(example_case())                   # the closed-tube default lines
    for ql, qg in [(1e-5, 0.3e-5), (1e-5, 3e-5), (3e-6, 1e-4), (1e-4, 1e-6)]:
        wc = worst_case_margins(chart, ql, qg)
        assert wc.worst_case <= wc.nominal
        assert wc.nominal == pytest.approx(point_margins(chart, ql, qg).symmetric_margin, abs=1e-12)


def test_zero_width_bands_give_worst_equal_to_nominal():
    # bug caught: a worst case that differs from the nominal margin though nothing is uncertain
    case = with_case_bands(example_case(), [(BS, "alpha_c", 0.45, 0.45, "fixed"), (BS, "c0", 1.2, 1.2, "fixed")])
    chart = Chart.build(case, [BS])
    wc = worst_case_margins(chart, 1e-5, 0.5e-5)
    assert wc.worst_case == wc.nominal and wc.limiting_boundary is None and wc.constants == {}
    assert boundary_band(chart, BS).known_exactly


def test_worst_case_margin_equals_the_minimum_over_a_dense_grid_of_constants():
    # The wavy line moves non-monotonically with a; the minimum of the margin over a lies inside the band.
    # Reference: point_margins on charts rebuilt at 161 values of a (brute force, no optimiser). Bug caught:
    # a worst case searched at the band ends (or the band edges near the point) only
    line = WavyLine(b_band=False, b=1.0)
    case = example_case()
    chart = Chart.build(case, [line])
    ql, qg = 1e-5, 10 ** -5.5
    wc = worst_case_margins(chart, ql, qg)
    grid = np.linspace(0.0, 2.0, 161)
    m = []
    for a in grid:
        pm = point_margins(Chart.build(case, [(line, {"a": a, "b": 1.0})]), ql, qg)
        m.append(pm.symmetric_margin if pm.regime == wc.regime else -pm.symmetric_margin)
    m = np.array(m)
    # the grid step 0.0125 in a misses the true minimum by < 1e-3 in m (smooth minimum); the search must
    # find at least the grid's minimum and not go below the continuous one
    assert wc.worst_case <= m.min() + 1e-6
    assert wc.worst_case >= m.min() - 1e-3
    assert 0.05 < wc.constants["wavy_test_line"]["a"] < 1.95            # an interior worst case
    ends = min(m[0], m[-1])
    assert ends - wc.worst_case > 0.02                                    # the band ends alone would miss it


# --- Monte Carlo with model uncertainty -------------------------------------------------------

def test_monte_carlo_reports_model_uncertainty_separately():
    # line Q_G = k Q_L with k uniform on [1, 3]; point at Q_G/Q_L = 2.2, gas flow uniform +-20 %.
    # Closed forms: inputs only (k = 2.5): P(2.2 (1 + 0.2 u) < 2.5) = (2.5 - 1.76)/0.88;
    # constants only: P(k > 2.2) = 0.4; both: E_u[(3 - 2.2 (1 + 0.2 u))/2] = 0.4.
    # Bugs caught: constants drawn into the input-only result, probabilities mixed up, or the input draws
    # changed by the option (the input-only result must not depend on it)
    case = example_case(point=(1e-5, 2.2e-5))
    chart = Chart.build(case, [ScaledLine("rig")])
    unc = [Uncertainty("gas_flow", "uniform", 0.2, True)]
    plain = monte_carlo(case, unc, n=2000, seed=3, chart=chart)
    res = monte_carlo(case, unc, n=2000, seed=3, chart=chart, model_uncertainty=True, model_draws=500,
                      required_margin=0.0)
    assert res.probability == plain.probability and np.array_equal(res.margins, plain.margins, equal_nan=True)
    assert plain.model is None
    p_in = (2.5 - 1.76) / 0.88
    assert abs(res.probability - p_in) < 4 * math.sqrt(p_in * (1 - p_in) / 2000)
    mod = res.model
    assert mod.draws == 500 and [v.key for v in mod.variables] == ["rig.k"]
    assert abs(mod.probability_model - 0.4) < 4 * mod.std_error_model
    assert abs(mod.probability_both - 0.4) < 4 * max(mod.std_error_both, 0.01)
    assert mod.margins_model.shape == (500,) and mod.margins_both.shape == (2000,)
    assert mod.probability_required_model == pytest.approx(mod.probability_model)
    d = res.to_dict()["model_uncertainty"]
    assert set(d) >= {"model_only", "inputs_and_model", "constants"}
    # only the listed constants are drawn; an unknown one is named with the known ones
    assert [v.key for v in model_variables(chart, ["rig.k"])] == ["rig.k"]
    with pytest.raises(ValueError, match="'rig.q' is not a constant with an uncertainty band.*rig.k"):
        model_variables(chart, ["rig.q"])


# --- calibration narrows the band ------------------------------------------------------------

def test_calibrated_interval_replaces_the_band():
    # SYNTHETIC points labelled by the drift-flux line with alpha_c = 0.5 (C0 = 1.2 fixed): Q_G/Q_L = 1.5.
    # Bug caught: the calibrated chart still drawn with the prior (wider) band
    case = example_case(length=0.05)
    chart = Chart.build(case, [BS])
    ratio = np.geomspace(0.2, 10.0, 41)
    pts = {"ql_m3_s": np.full(41, 1e-5), "qg_m3_s": 1e-5 * ratio, "platform": ["orbital station"] * 41,
           "observed_regime": np.where(ratio < ratio_line(0.6), "dispersed bubbles", "elongated bubbles / slugs")}
    cal = calibrate(chart, pts, [f"{BS}.alpha_c"], starts=0, folds=3)
    c = cal.constant(f"{BS}.alpha_c")
    assert c.prior_band == (0.35, 0.55)
    lo, hi = c.interval
    assert c.band == (lo, hi) and lo < 0.5 < hi and hi - lo < 0.2
    assert cal.band_entries() == ((BS, "alpha_c", lo, hi, c.band_reason),)
    after = {b.name: b for b in chart_constant_bands(cal.chart_after, BS)}
    assert (after["alpha_c"].low, after["alpha_c"].high, after["alpha_c"].origin) == (lo, hi, "case")
    assert after["alpha_c"].reason.startswith("calibrated")
    band = boundary_band(cal.chart_after, BS)
    assert isinstance(band, Band)
    assert band.qg_lower[0] / band.ql[0] == pytest.approx(ratio_line(lo * 1.0), rel=1e-9)   # C0 keeps its band


def test_model_choice_values_keep_their_band():
    # a value chosen by the case inside the band keeps the band; outside it the band is widened to contain it.
    # Bug caught: a nominal line outside its own band (worst case above nominal)
    chart = Chart.build(example_case(), [ModelChoice.of(BS, {"alpha_c": 0.6})])
    got = {b.name: b for b in chart_constant_bands(chart, BS)}
    assert (got["alpha_c"].low, got["alpha_c"].high) == (0.35, 0.6) and "widened" in got["alpha_c"].reason
