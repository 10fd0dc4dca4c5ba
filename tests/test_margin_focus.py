"""Margins of a few points to whole lines: regimes that are intersections of sides, focused sampling, piece ends.

Check values: the regime rule of the corner family as its module notes state it (gas ingestion first, then
blow-through, then isolated/merging x separated/carried through), closed forms (a parabola's box margin found
by a bounded scalar search on the exact curve), and the margins of the unfocused, split-and-probed lines, which
the focused path must reproduce (consistency between two paths, never pinned values).
"""
import math

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.physics.chart import lines as L
from lowgmap.physics.chart import margins as mg
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.chart.sampling import sample_line, segment_distance
from lowgmap.physics.models import corner as cm
from lowgmap.physics.models.regimes import LinePiece
from lowgmap.physics.studies.design_space import apply_changes

TOL = 1e-6          # chord tolerance of the lines of one Monte Carlo draw or sweep design [decade]


@pytest.fixture(scope="module")
def wedge_chart():
    return Chart.build(load_case(sample_case_path("wedge_separator")).case)


def _box_margin(x, y, x0, y0):
    """Box margin of points (x, y) [decade] seen from (x0, y0): max(|10^dx - 1|, |10^dy - 1|)."""
    return np.maximum(np.abs(10.0 ** (x - x0) - 1.0), np.abs(10.0 ** (y - y0) - 1.0))


# ------------------------------------------------------------------------------------------------ conjunctions
def test_corner_regimes_that_are_intersections_of_sides(wedge_chart):
    # corner module notes: ingestion above its line wins, then blow-through, then merging x (confined AND
    # faster than the stream). So a separating regime needs one side of all five lines, blow-through two
    # (below ingestion, above blow-through), ingestion one; "carried through" is confined-and-slow OR
    # not confined: not one side of each line. Catches a union regime taken for an intersection (its margin
    # would count lines that do not bound it) and line indices off by one against the bit order.
    names = [m.name for m, _ in wedge_chart.region_models]
    got = {r: L.conjunction_lines(wedge_chart, r) for r in wedge_chart.regime_names}
    idx = {n: i for i, n in enumerate(names)}
    every = tuple(sorted(idx.values()))
    assert got[cm.ISOLATED_SEPARATED] == every
    assert got[cm.MERGING_SEPARATED] == every
    assert got[cm.BLOW_THROUGH] == tuple(sorted((idx["corner_blow_through"], idx["open_channel_ingestion"])))
    assert got[cm.INGESTION] == (idx["open_channel_ingestion"],)
    assert got[cm.ISOLATED_CARRIED] is None and got[cm.MERGING_CARRIED] is None


def test_sequence_rule_regimes_are_intersections_of_lines_0_to_i():
    # sequence rule: regime i lies above lines 0..i-1 and below line i (regimes module notes)
    chart = Chart.build(load_case(sample_case_path("condensate_line")).case)
    for r in chart.regime_names:
        assert L.conjunction_lines(chart, r) == L.bounding_lines(chart, r)
    assert L.conjunction_lines(chart, "no such regime") is None


# ------------------------------------------------------------------------------------------------ focused lines
def _points(chart, case, n, seed):
    """Seeded points around the operating point that lie in regimes made of whole lines."""
    op = case.operating_point
    rng = np.random.default_rng(seed)
    ql = op.ql * 10.0 ** rng.uniform(-0.4, 0.4, n)
    qg = op.qg * 10.0 ** rng.uniform(-0.6, 0.6, n)
    reg = np.asarray(chart.classify(ql, qg))
    keep = np.array([L.conjunction_lines(chart, str(r)) is not None for r in reg])
    return np.log10(ql[keep]), np.log10(qg[keep]), L.regime_indices(list(chart.regime_names), reg[keep])


@pytest.mark.parametrize("sample, turn", [("wedge_separator", 0.0), ("wedge_separator", 2.0),
                                          ("cryogenic_groove", 0.0)])
def test_focused_whole_lines_give_the_margins_of_split_and_probed_lines(sample, turn):
    # Three ways to one answer: (a) every line refined everywhere, split at crossings, each chord probed on
    # both sides (the general partition path); (b) the lines of each regime's intersection taken whole;
    # (c) the same, refined only where a point's margin can lie. Catches a lower bound of a chord that
    # forgets the line's deviation from it (a coarse chord would then hold a margin too large), a focus that
    # prunes the chord holding the minimum, and whole lines counted for a regime they do not bound.
    base = load_case(sample_case_path(sample)).case
    case = apply_changes(base, {"contact_angle": base.wetting.contact_angle + math.radians(turn)}) if turn else base
    chart = Chart.build(case)
    x0, y0, ridx = _points(chart, case, 40, seed=11)
    assert x0.size >= 10
    lines = [(m, dict(c)) for m, c in chart.region_models]
    cov = (x0.min() + L.WINDOW_LO, x0.max() + L.WINDOW_HI, y0.min() + L.WINDOW_LO, y0.max() + L.WINDOW_HI)
    probed = L.make_geometry(chart, case, lines, len(lines), cov, tol=TOL, wall_dx=1e-8, n_start=17)
    m_a, lim_a = mg.regime_margins(probed, x0, y0, ridx)
    names = list(chart.regime_names)
    conj = {int(r): L.conjunction_lines(chart, names[int(r)]) for r in np.unique(ridx)}
    for focus in (None, (x0, y0)):
        g = L.make_geometry(chart, case, lines, len(lines), cov, tol=TOL, wall_dx=1e-8, n_start=17,
                            bounding=conj, focus=focus)
        m, lim = mg.regime_margins(g, x0, y0, ridx)
        # chords within 1e-6 decade of the lines: margins within ln(10) x 1e-6 x (1 + m) of each other
        assert m == pytest.approx(m_a, abs=5e-6)
        assert lim.tolist() == lim_a.tolist()
    # the focused path answers with the same chords near the points and fewer elsewhere; a line of constant
    # flow ratio (straight in log-log axes) taken whole is one chord per piece (catches the flag lost on the way)
    assert g.xa.size < 0.5 * probed.xa.size
    for k, (model, consts) in enumerate(lines):
        if getattr(model, "shape", "") == "ratio" and k in set().union(*conj.values()):
            n_pieces = len(model.line_pieces(L._widened(case, cov), **consts))
            assert int(np.sum(g.line == k)) == n_pieces >= 1


def test_uncached_margins_focus_only_regimes_made_of_whole_lines(wedge_chart):
    # the study entry point: focused and unfocused agree; points in a "carried through" regime (not an
    # intersection) fall back to the split-and-probed lines, with the same answer. Catches the fast path taken
    # for a regime whose bounding parts of a line must be found by probing.
    case = wedge_chart.case
    op = case.operating_point
    names = list(wedge_chart.regime_names)
    more = [f * op.ql for f in (1.5, 2.0, 3.0, 5.0, 8.0)]          # more liquid, same gas: carried through
    carried = next(q for q in more if str(wedge_chart.classify(q, op.qg)) == cm.ISOLATED_CARRIED)
    assert str(wedge_chart.classify(op.ql, op.qg)) == cm.ISOLATED_SEPARATED
    for ql in (op.ql, carried):
        reg = str(wedge_chart.classify(ql, op.qg))
        x0, y0 = np.log10([ql]), np.log10([op.qg])
        ridx = L.regime_indices(names, np.array([reg]))
        a, la = mg.uncached_regime_margins(wedge_chart, case, x0, y0, ridx, focused=True)
        b, lb = mg.uncached_regime_margins(wedge_chart, case, x0, y0, ridx, focused=False)
        pm = mg.point_margins(wedge_chart, ql, op.qg)
        assert pm.regime == reg
        assert a[0] == pytest.approx(b[0], abs=5e-6) and la.tolist() == lb.tolist()
        # 1e-6 decade here, 1e-7 on the cached chart geometry
        assert a[0] == pytest.approx(pm.symmetric_margin, abs=2e-5)


def _parabola(t):
    t = np.asarray(t, dtype=float)
    return t, 2.0 * (t - 0.3) ** 2 - 0.4


def _dip(t):
    # flat at 0.5 decade except a parabolic dip toward the origin between two of the first samples (0 and 0.5)
    t = np.asarray(t, dtype=float)
    return t, 0.5 - 0.45 * np.maximum(0.0, 1.0 - ((t - 0.25) / 0.25) ** 2)


@pytest.mark.parametrize("f, bounds", [(_parabola, (-1.0, 1.5)), (_dip, (0.0, 0.5))])
def test_focused_sampler_keeps_the_smallest_box_margin(f, bounds):
    # Seen from the origin, the box margin's minimum on the exact curve by a bounded scalar search (closed-form
    # curves); the focused samples must hold it to the chord tolerance while leaving the far parts coarse.
    # The parabola catches an upper bound taken from a point that is not on the line and a lower bound that
    # prunes the chord holding the minimum; the dip (its first chord flat at 0.5 decade, the curve reaching
    # 0.05 between its ends) catches a lower bound that ignores how far the line strays from its chord.
    exact = minimize_scalar(lambda t: float(_box_margin(*f(np.array([t])), 0.0, 0.0)[0]), bounds=bounds,
                            method="bounded", options={"xatol": 1e-12}).fun
    near = L._near_points((np.array([0.0]), np.array([0.0])), TOL)
    counts = {}
    for name, settled in (("all", None), ("focused", near)):
        t, (x, y) = sample_line(f, -4.0, 4.0, tol=TOL, n_start=17, deviation="segment", settled=settled)
        m, _ = mg.box_margin_on_segments(x[:-1] * L.LN10, np.diff(x) * L.LN10, y[:-1] * L.LN10, np.diff(y) * L.LN10)
        assert float(np.min(m)) == pytest.approx(exact, abs=5e-6)
        counts[name] = t.size
    assert counts["focused"] < 0.25 * counts["all"]


def _power_end_piece(calls):
    """The piece x = t, y = (t - 1)^0.2 on [1, 3] (log10 flows), counting its evaluations in ``calls``."""
    def func(t):
        calls.append(np.size(t))
        t = np.asarray(t, dtype=float)
        return 10.0 ** t, 10.0 ** (np.maximum(t - 1.0, 0.0) ** 0.2)
    return LinePiece(1.0, 3.0, func)


def test_a_piece_that_bends_sharply_at_its_end_is_resolved_in_a_few_passes():
    # x = t, y = (t - t0)^0.2: a power-law end like the separation line where it ends on the confinement line.
    # The samples next to the ends (shares 1e-2, 1e-4 .. 1e-10 of the range) let the refinement run side by side:
    # 11 passes here instead of one per halving toward the end. Catches the end samples dropped (18 passes
    # then) and end samples placed outside the piece (the runs would then start before t0).
    calls = []
    piece = _power_end_piece(calls)
    runs = L._piece_runs(piece, (0.0, 4.0, 0.0, 2.0), tol=TOL, n_start=17)
    assert len(runs) == 1 and runs[0][0][0] == pytest.approx(1.0, abs=1e-15)
    assert len(calls) <= 14
    # and every chord (x = t here) lies within the tolerance of the curve at its middle, up to the end
    x, y = runs[0]
    tm = 0.5 * (x[:-1] + x[1:])
    dev = segment_distance(tm, np.maximum(tm - 1.0, 0.0) ** 0.2, x[:-1], y[:-1], x[1:], y[1:])
    wide = np.diff(x) > 4e-12          # chords narrower than the smallest step refined are left as they are
    assert wide.sum() > 20 and float(np.max(dev[wide])) <= 2 * TOL


def test_the_drawn_chart_samples_piece_ends_from_the_start_too():
    # the chart's own sampler (box units, coarser tolerance) takes the same end samples: the power-law end
    # above is drawn in 11 passes (23 without them, one per halving toward the end), and a
    # preview (ends located to 1e-4 of the range) takes only the end samples not below that step.
    # Catches the drawn chart left without end samples and previews sampling below their own step.
    from lowgmap.physics.chart import composition as C

    calls = []
    piece = _power_end_piece(calls)
    box = (0.0, 4.0, 0.0, 2.0)
    t, u, v = C._sample_piece(C._piece_uv(piece, box), piece, C._SCHEME_TOL)
    assert len(calls) <= 14 and t[0] == 1.0 and t[-1] == 3.0
    assert np.all(np.isin(1.0 + 2.0 * np.array([1e-2, 1e-4, 1e-6, 1e-8, 1e-10]), t))
    calls.clear()
    t, u, v = C._sample_piece(C._piece_uv(piece, box), piece, C._SCHEME_TOL * C.PREVIEW_FACTOR, C._PREVIEW_STEP)
    assert np.all(np.isin(1.0 + 2.0 * np.array([1e-2, 1e-4]), t)) and not np.any(np.isin(1.0 + 2e-6, t))


@pytest.mark.parametrize("sample", ["wedge_separator", "cryogenic_groove"])
def test_probed_lines_refined_only_within_the_points_boxes_keep_the_regime_margins(sample):
    # Points in regimes that are not intersections of sides ("carried through"): the lines are split and
    # probed, and with the focus refined only within the ±MAX_MARGIN box of a point (margins are capped there).
    # Same margins and limiting lines as the lines refined everywhere, with far fewer chords (fewer than 30 %).
    # Catches a cap below MAX_MARGIN (chords that hold a margin left coarse) and the focus lost on this path.
    case = load_case(sample_case_path(sample)).case
    chart = Chart.build(case)
    op = case.operating_point
    rng = np.random.default_rng(5)
    ql = op.ql * 10.0 ** rng.uniform(-0.3, 1.2, 200)
    qg = op.qg * 10.0 ** rng.uniform(-0.6, 0.6, 200)
    reg = np.asarray(chart.classify(ql, qg))
    keep = np.array([str(r) in (cm.ISOLATED_CARRIED, cm.MERGING_CARRIED) for r in reg])
    x0, y0 = np.log10(ql[keep])[:30], np.log10(qg[keep])[:30]
    assert x0.size >= 10
    names = list(chart.regime_names)
    ridx = L.regime_indices(names, reg[keep][:30])
    assert all(L.conjunction_lines(chart, names[int(r)]) is None for r in np.unique(ridx))
    lines = [(m, dict(c)) for m, c in chart.region_models]
    cov = (x0.min() + L.WINDOW_LO, x0.max() + L.WINDOW_HI, y0.min() + L.WINDOW_LO, y0.max() + L.WINDOW_HI)
    every = L.make_geometry(chart, case, lines, len(lines), cov, tol=TOL, wall_dx=1e-8, n_start=17)
    m_a, lim_a = mg.regime_margins(every, x0, y0, ridx)
    for pts in ((x0, y0), (x0[:1], y0[:1])):            # a Monte Carlo block of points; one sweep design
        near = L.make_geometry(chart, case, lines, len(lines), cov, tol=TOL, wall_dx=1e-8, n_start=17, focus=pts)
        m_b, lim_b = mg.regime_margins(near, x0, y0, ridx)
        sel = slice(None) if pts[0].size > 1 else slice(0, 1)
        assert m_b[sel] == pytest.approx(m_a[sel], abs=5e-6)
        assert lim_b[sel].tolist() == lim_a[sel].tolist()
        assert near.xa.size < 0.3 * every.xa.size


def test_a_preview_margin_is_not_available_where_a_bounding_line_cannot_be_evaluated():
    # A line whose model raises below Q_L = 1e-6 m^3/s (outside its domain) while the point's ±99.9 % box
    # reaches 1e-8: the dragged slider's label must say the margin is not available, not stop the preview
    # (the full point margins report such a margin as not established). Catches a model error escaping the
    # preview job (it would show "no chart" for a value that has one).
    from lowgmap.physics.case import Case, FlowRange, ModelChoice
    from lowgmap.physics.geometry.sections import Circle
    from lowgmap.physics.models.boundary import PowerLawBoundary
    from lowgmap.physics.properties.fluids import FluidPair
    from lowgmap.physics.properties.wetting import Wetting

    class Partial(PowerLawBoundary):
        def qg_of_ql(self, case, ql, **consts):
            if np.any(np.asarray(ql) < 1e-6):
                raise RuntimeError("outside the model's domain")
            return super().qg_of_ql(case, ql, **consts)

    line = Partial("partial_line", 1.0, 1.0, "below it", "above it")
    fluid = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
    case = Case(fluid, Circle(0.01), Wetting(0.0), 1.0, 1e-5, FlowRange(1e-6, 1e-3, 1e-6, 1e-3), None,
                models=(ModelChoice(line.name),), extra=(("custom_boundaries", (line,)),))
    chart = Chart.build(case, preview=True)
    got = mg.preview_margin(chart, 1e-5, 2e-5)
    assert got.regime == "above it" and got.symmetric_margin is None and got.limiting_boundary is None
    assert not mg.point_margins(chart, 1e-5, 2e-5).established
    # a point whose box stays above 1e-6: Q_G = 2 Q_L against the line Q_G = Q_L, (1 + m)/(1 - m) = 2, m = 1/3
    # (margins module notes, closed form)
    ok = mg.preview_margin(chart, 1e-2, 2e-2)
    assert ok.symmetric_margin == pytest.approx(1.0 / 3.0, abs=1e-12) and ok.limiting_boundary == "partial_line"
