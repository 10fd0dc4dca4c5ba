"""Preview resolution (``Chart.build(..., preview=True)``): the frames drawn while a slider is dragged.

A preview chart has the same physics, models and surrogates as the chart of the released value; only the
sampling of its lines is coarser. What must hold, checked on every bundled sample that has a partition scheme
(the corner family, where previews save time) and on a tube sample:

- the regime of every point is the same (classification reads the models, not the sampled lines);
- the symmetric margin of every point is within the stated preview resolution of the full-resolution one
  (:data:`lowgmap.physics.chart.margins.PREVIEW_CAVEAT`: 5e-5 as a fraction), with the same limiting line;
- the margins of a preview say that they are a preview; those of a full chart do not;
- the drawn lines of a preview stay within the preview tolerance of the full chart's lines.

These are internal-consistency checks of our own sampling (no outside source applies); the numbers the
lines stand for are checked against their sources in the model tests.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.physics.chart.composition import PREVIEW_FACTOR, Chart
from lowgmap.physics.chart.margins import MAX_MARGIN, PREVIEW_CAVEAT, point_margins, preview_margin, symmetric_margins

CORNER_SAMPLES = ("wedge_separator", "cryogenic_groove")


@pytest.fixture(scope="module", params=CORNER_SAMPLES + ("condensate_line",))
def pair(request):
    case = load_case(sample_case_path(request.param)).case
    return request.param, Chart.build(case), Chart.build(case, preview=True)


def _points(full, n, seed):
    """Points spread over the chart range, and points just beside every drawn boundary (where margins are small
    and set by a curved line, not by a straight one)."""
    rng = np.random.default_rng(seed)
    fr = full.case.flow_range
    ql = 10.0 ** rng.uniform(math.log10(fr.ql_min), math.log10(fr.ql_max), n)
    qg = 10.0 ** rng.uniform(math.log10(fr.qg_min), math.log10(fr.qg_max), n)
    near_l, near_g = [], []
    for b in full.boundaries:
        ok = np.flatnonzero(np.isfinite(b.ql) & np.isfinite(b.qg))
        if ok.size:
            pick = rng.choice(ok, size=min(8, ok.size), replace=False)
            f = 10.0 ** rng.uniform(-0.05, 0.05, pick.size)
            near_l.append(b.ql[pick] * f)
            near_g.append(b.qg[pick] / f)
    return np.concatenate([ql, *near_l]), np.concatenate([qg, *near_g])


def test_a_preview_classifies_every_point_as_the_full_chart(pair):
    # Catches: a preview built with other models, constants or solves than the released chart (e.g. the exact
    # switch or the case's constants dropped on the preview path), which would show another regime while dragging.
    name, full, prev = pair
    assert prev.preview and not full.preview
    ql, qg = _points(full, 300, 3)
    assert np.array_equal(np.asarray(full.classify(ql, qg)), np.asarray(prev.classify(ql, qg)))
    assert prev.regime_names == full.regime_names


def test_preview_margins_are_within_the_stated_resolution_with_the_same_limiting_line(pair):
    # Catches: a preview tolerance looser than the caveat states (a margin off in its third digit while
    # dragging), a preview whose margins come from the full chart's cached lines or vice versa (a full chart
    # reading preview-resolution lines), and a limiting line that changes between preview and release.
    name, full, prev = pair
    ql, qg = _points(full, 60, 5)
    m_full, lim_full, _ = symmetric_margins(full, ql, qg)
    m_prev, lim_prev, _ = symmetric_margins(prev, ql, qg)
    ok = np.isfinite(m_full) & np.isfinite(m_prev)
    assert ok.mean() > 0.9
    # 5e-5: the bound stated in PREVIEW_CAVEAT (ln 10 x 1e-5 x (1 + m))
    assert np.max(np.abs(m_full[ok] - m_prev[ok])) <= 5e-5
    close = ok & (np.abs(m_full - m_prev) < 1e-12)
    assert close.mean() < 1.0 or name == "condensate_line"     # the corner lines are sampled differently
    # the limiting line may differ only at a tie (two lines equally close, within the resolution): then the
    # preview's margin to its own limiting line equals the full chart's to another one, as checked above
    same = lim_full[ok] == lim_prev[ok]
    assert same.mean() >= 0.95, (name, int((~same).sum()))


def test_the_margin_a_dragged_slider_shows_is_the_released_one_to_the_preview_resolution(pair):
    # preview_margin (regime and symmetric margin only, the lines bounding the regime sampled near the point:
    # whole and focused when the regime is an intersection of sides, split and probed otherwise) against the
    # full-resolution margins of the released chart, at points spread over the chart and beside every line.
    # Catches a focused refinement that prunes the chord holding the minimum, a regime taken for an intersection
    # of sides when it is not (its margin would count lines that do not bound it), the limiting line read from
    # the wrong list, and a margin shown without its caveat.
    name, full, prev = pair
    ql, qg = _points(full, 40, 7)
    m_full, lim_full, reg_full = symmetric_margins(full, ql, qg)
    n_lines = 0
    for a, b, m, k, r in zip(ql, qg, m_full, lim_full, reg_full):
        got = preview_margin(prev, a, b)
        assert got.regime == r and got.caveats == (PREVIEW_CAVEAT,)
        if not np.isfinite(m):
            continue
        assert abs(got.symmetric_margin - m) <= 5e-5           # PREVIEW_CAVEAT
        want = full.region_models[k][0].name if k >= 0 and m < MAX_MARGIN else None
        n_lines += got.limiting_boundary == want
    assert n_lines >= 0.95 * np.isfinite(m_full).sum()


def test_preview_margins_say_so_and_full_ones_do_not(pair):
    # Catches: a preview margin shown without its resolution (a verdict read off a preview), or the caveat
    # leaking onto the margins of the released chart.
    _, full, prev = pair
    op = full.case.operating_point
    a, b = point_margins(full, op.ql, op.qg), point_margins(prev, op.ql, op.qg)
    assert PREVIEW_CAVEAT in b.caveats and PREVIEW_CAVEAT not in a.caveats
    assert (a.regime, a.limiting_boundary) == (b.regime, b.limiting_boundary)
    assert abs(a.symmetric_margin - b.symmetric_margin) <= 5e-5


@pytest.mark.parametrize("name", CORNER_SAMPLES)
def test_preview_lines_stay_within_the_preview_tolerance_of_the_full_lines(name):
    # Catches: a preview that draws its lines somewhere else (a wrong box scaling of the coarser tolerance, a
    # crossing left far from the lines), which would make the morphing chart jump on release.
    from shapely.geometry import LineString, Point

    case = load_case(sample_case_path(name)).case
    full, prev = Chart.build(case), Chart.build(case, preview=True)
    fr = case.flow_range
    span = max(math.log10(fr.ql_max / fr.ql_min), math.log10(fr.qg_max / fr.qg_min))
    # the chord tolerance of a preview (2e-4 x PREVIEW_FACTOR of the box) plus the full chart's own (2e-4)
    limit = (2e-4 * PREVIEW_FACTOR + 2e-4) * span * 1.01
    assert [b.name for b in prev.boundaries] == [b.name for b in full.boundaries]
    worst = 0.0
    for bf, bp in zip(full.boundaries, prev.boundaries):
        ff = np.isfinite(bf.ql) & np.isfinite(bf.qg)
        fp = np.isfinite(bp.ql) & np.isfinite(bp.qg)
        if ff.sum() < 2:
            assert fp.sum() < 2
            continue
        line = LineString(np.column_stack([np.log10(bf.ql[ff]), np.log10(bf.qg[ff])]))
        for x, y in zip(np.log10(bp.ql[fp]), np.log10(bp.qg[fp])):
            worst = max(worst, line.distance(Point(x, y)))
    assert worst <= limit
    assert len(prev.intersections) == len(full.intersections)


@pytest.mark.parametrize("name", CORNER_SAMPLES)
def test_one_classification_of_all_region_lines_draws_what_one_per_line_draws(name, monkeypatch):
    # Catches: the side probes of one region line credited to another (an offset when the probes of all the
    # lines are classified in one call and split again), which draws a boundary where another line separates.
    import lowgmap.physics.chart.composition as composition

    case = load_case(sample_case_path(name)).case
    together = Chart.build(case)
    one_call = composition._active_runs_of
    monkeypatch.setattr(composition, "_active_runs_of",
                        lambda lines, classify: [one_call([line], classify)[0] for line in lines])
    apart = Chart.build(case)
    assert [c.name for c in together.boundaries] == [c.name for c in apart.boundaries]
    for a, b in zip(together.boundaries, apart.boundaries):
        np.testing.assert_array_equal(a.ql, b.ql)
        np.testing.assert_array_equal(a.qg, b.qg)
    assert sum(np.isfinite(c.ql).sum() for c in together.boundaries) > 0
