"""Tests of lowgmap.physics.chart.sampling: the one adaptive line sampler and the split into valid runs.

Check values are closed forms derived here (marked "closed form"): the chord of y = t^2 over an
interval of width h departs from the curve by h^2/4 at its middle, whatever the interval's position;
a power law is a straight line in log-log axes; y = sqrt(t^2 - 1) exists only for |t| >= 1.
Each test names in a comment the sampler bug it catches.
"""
import math

import numpy as np
import pytest

from lowgmap.physics.chart.sampling import finite_runs, mask_runs, sample_line, segment_distance


def parabola(t):
    return (t * t,)


def test_parabola_is_refined_uniformly_to_the_last_interval():
    # closed form: chord deviation of t^2 over width h is h^2/4 everywhere. From 4 intervals of 0.25,
    # halving stops at h = 0.25/128 (h^2/4 = 9.5e-7 <= 1e-6 < 3.8e-6 for h = 0.25/64): 4 * 128 + 1 samples.
    # Catches a sampler that skips its last interval (it stays 0.25 wide), drops its last point
    # (512 samples, t[-1] < 1) or refines where the tolerance is already met.
    t, (y,) = sample_line(parabola, 0.0, 1.0, tol=1e-6, n_start=5)
    assert t.size == 4 * 128 + 1
    np.testing.assert_allclose(np.diff(t), 0.25 / 128, rtol=1e-12)
    assert t[0] == 0.0 and t[-1] == 1.0
    assert y[-1] == 1.0                        # the last sample is the line's value at t1
    np.testing.assert_array_equal(y, t * t)


def test_chord_deviation_within_tolerance_everywhere():
    # closed form: y = log10(1 + 10^t) (a smooth bend, slope 0 -> 1) at the middle of every interval
    # lies within tol of the chord, and the bend is sampled densest. Catches a refinement that stops
    # early or leaves some intervals (e.g. the last) untested.
    f = lambda t: (np.log10(1.0 + 10.0 ** t),)  # noqa: E731
    tol = 1e-5
    t, (y,) = sample_line(f, -4.0, 4.0, tol=tol, n_start=9)
    tm = 0.5 * (t[:-1] + t[1:])
    assert np.max(np.abs(f(tm)[0] - 0.5 * (y[:-1] + y[1:]))) <= tol
    dt = np.diff(t)
    assert dt[np.abs(tm) < 0.5].max() < dt[np.abs(tm) > 3.5].min()


def test_power_law_needs_no_refinement():
    # closed form: Q_G = 3 Q_L^1.5 is the straight line y = log10 3 + 1.5 x in log-log axes, so every
    # chord lies on it. Catches a sampler that refines straight lines (or loses the start samples).
    f = lambda x: (np.log10(3.0 * (10.0 ** x) ** 1.5),)  # noqa: E731
    t, (y,) = sample_line(f, -7.0, -3.0, tol=1e-9, n_start=17)
    assert t.size == 17
    np.testing.assert_allclose(y, math.log10(3.0) + 1.5 * t, rtol=0, atol=1e-12)


def test_parametric_power_law_with_segment_deviation():
    # closed form: the same power law given as t -> (t, y(t)), sampled with the segment distance.
    f = lambda t: (t, math.log10(3.0) + 1.5 * t)  # noqa: E731
    t, (x, y) = sample_line(f, -7.0, -3.0, tol=1e-9, n_start=5, deviation="segment")
    assert t.size == 5
    np.testing.assert_array_equal(x, t)


def test_line_with_a_hole_runs_end_on_the_domain_edges():
    # closed form: y = sqrt(t^2 - 1) exists for |t| >= 1 only; the runs must end within jump_step of
    # -1 and +1 (on the valid side). Catches a sampler that does not bisect toward the edge of a
    # valid stretch, and a run splitter that drops the last run.
    jump = 1e-9
    with np.errstate(invalid="ignore"):
        t, (y,) = sample_line(lambda t: (np.sqrt(t * t - 1.0),), -3.0, 3.0, tol=1e-3, n_start=8, jump_step=jump)
    runs = finite_runs(t, (y,))
    assert len(runs) == 2
    (ta, _), (tb, (yb,)) = runs
    assert ta[0] == -3.0 and -1.0 - jump <= ta[-1] <= -1.0
    assert 1.0 <= tb[0] <= 1.0 + jump and tb[-1] == 3.0
    assert yb[-1] == pytest.approx(math.sqrt(8.0), rel=1e-15)


def test_hole_between_two_valid_samples_is_found():
    # closed form: the straight line y = t, missing on (0.42, 0.55). With n_start = 2 the only samples
    # (0 and 1) are valid and the hole holds the middle of the one interval. Catches a sampler that
    # only refines an interval whose ends differ in validity (it would draw one chord across the hole).
    def f(t):
        return (np.where((t > 0.42) & (t < 0.55), np.nan, t),)
    t, (y,) = sample_line(f, 0.0, 1.0, tol=1e-6, n_start=2, jump_step=1e-10)
    runs = finite_runs(t, (y,))
    assert len(runs) == 2
    assert 0.42 - 1e-10 <= runs[0][0][-1] <= 0.42
    assert 0.55 <= runs[1][0][0] <= 0.55 + 1e-10


def test_jump_between_invalid_kinds_is_located():
    # closed form: +inf for t < 0.3, -inf above (a column trace whose side changes at t = 0.3).
    # Catches a sampler that treats all invalid values as one kind (the jump would not be found).
    f = lambda t: (np.where(t < 0.3, np.inf, -np.inf),)  # noqa: E731
    t, (y,) = sample_line(f, 0.0, 1.0, tol=1e-6, n_start=4, jump_step=1e-9)
    k = np.nonzero(np.diff(np.sign(y)))[0]
    assert k.size == 1
    assert t[k[0]] < 0.3 <= t[k[0] + 1] and t[k[0] + 1] - t[k[0]] <= 1e-9


def test_breakpoints_are_included_exactly():
    # closed form: |t - 0.3| is straight on both sides of its kink; with the kink as breakpoint no
    # refinement is needed. Catches breakpoints dropped or rounded.
    t, (y,) = sample_line(lambda t: (np.abs(t - 0.3),), 0.0, 1.0, tol=1e-12, n_start=3,
                          breakpoints=[0.3, 2.0, np.nan])
    assert t.tolist() == [0.0, 0.3, 0.5, 1.0]


def test_window_skips_chords_out_of_view():
    # t^2 + 10 lies above the window (0, 1) everywhere: no refinement. A line whose ends are above the
    # window but whose middle dips into it is refined only when the middle is checked too.
    t, _ = sample_line(lambda t: (t, t * t + 10.0), 0.0, 1.0, tol=1e-9, n_start=5, window=((-1, 2), (0.0, 1.0)))
    assert t.size == 5
    dip = lambda t: (t, 2.0 - 40.0 * t * (1.0 - t))  # noqa: E731   ends at 2, middle at -8
    t1, _ = sample_line(dip, 0.0, 1.0, tol=1e-3, n_start=2, window=((-1, 2), (0.0, 1.0)), window_middle=True)
    t2, _ = sample_line(dip, 0.0, 1.0, tol=1e-3, n_start=2, window=((-1, 2), (0.0, 1.0)))
    assert t1.size > 2
    assert t2.size == 2                      # ends only: the chord is skipped (the window must be wide enough)


def test_caps_and_passes():
    # a sampler must stop: at most one more pass once max_points is exceeded, and no more than
    # max_passes halvings of the start interval. Catches an unbounded loop.
    wavy = lambda t: (np.sin(200.0 * t),)  # noqa: E731
    t, _ = sample_line(wavy, 0.0, 1.0, tol=1e-12, n_start=3, max_points=100)
    assert 100 < t.size <= 2 * 100
    t, _ = sample_line(parabola, 0.0, 1.0, tol=0.0, n_start=2, max_passes=3)
    assert t.size == 2 ** 3 + 1


def test_more_passes_than_needed_change_nothing():
    # catches a sampler that re-splits intervals which already met the tolerance in a later pass
    a = sample_line(parabola, 0.0, 1.0, tol=1e-6, n_start=5, max_passes=20)
    b = sample_line(parabola, 0.0, 1.0, tol=1e-6, n_start=5, max_passes=200)
    np.testing.assert_array_equal(a[0], b[0])


def test_empty_and_bad_input():
    t, coords = sample_line(parabola, 1.0, 1.0, tol=1e-3)
    assert t.size == 0 and coords == ()
    t, coords = sample_line(parabola, 0.0, math.inf, tol=1e-3)
    assert t.size == 0
    with pytest.raises(ValueError, match="deviation"):
        sample_line(parabola, 0.0, 1.0, tol=1e-3, deviation="area")
    with pytest.raises(ValueError, match="n_start"):
        sample_line(parabola, 0.0, 1.0, tol=1e-3, n_start=1)
    with pytest.raises(ValueError, match="two coordinates"):
        sample_line(parabola, 0.0, 1.0, tol=1e-3, deviation="segment")
    with pytest.raises(ValueError, match="window"):
        sample_line(parabola, 0.0, 1.0, tol=1e-3, window=((0, 1), (0, 1)))


def test_mask_runs():
    # catches a run splitter that loses a run touching either end of the mask
    assert mask_runs([True, True, False, False, True]) == [(0, 2), (4, 5)]
    assert mask_runs([False, False]) == []
    assert mask_runs([True] * 4) == [(0, 4)]
    assert mask_runs([]) == []


def test_finite_runs_drops_short_runs_and_copies():
    t = np.arange(7.0)
    y = np.array([0.0, np.nan, 2.0, 3.0, np.nan, np.inf, 6.0])
    runs = finite_runs(t, (y,))
    assert [r[0].tolist() for r in runs] == [[2.0, 3.0]]          # single samples are not lines
    assert [r[0].tolist() for r in finite_runs(t, (y,), min_points=1)] == [[0.0], [2.0, 3.0], [6.0]]
    runs[0][1][0][0] = -1.0
    assert y[2] == 2.0                                           # the runs are copies
    valid = np.array([True, True, False, True, True, True, False])
    assert [r[0].tolist() for r in finite_runs(t, (y,), valid=valid)] == [[0.0, 1.0], [3.0, 4.0, 5.0]]


def test_segment_distance():
    # closed form: distances to the segment (0,0)-(3,4) of length 5
    d = segment_distance(np.array([0.0, 3.0, 6.0, 4.0]), np.array([5.0, 4.0, 8.0, -3.0]), 0.0, 0.0, 3.0, 4.0)
    np.testing.assert_allclose(d, [3.0, 0.0, 5.0, 5.0], rtol=1e-15)
    assert segment_distance(1.0, 1.0, 0.0, 0.0, 0.0, 0.0) == pytest.approx(math.sqrt(2.0), rel=1e-15)


def test_new_samples_are_merged_in_order_with_their_values():
    # closed form: y = log10(1 + 10^t) and its mirror as a parametric line, refined unevenly (dense at the
    # bend). Every sample must sit in increasing t with its own coordinates f(t) and kind (bug caught: new
    # samples inserted at the wrong place, or a coordinate array merged in another order than t)
    f = lambda t: (np.log10(1.0 + 10.0 ** t), np.where(t > 2.5, np.nan, -t))  # noqa: E731
    t, (a, b) = sample_line(f, -4.0, 4.0, tol=1e-6, n_start=9, jump_step=1e-9)
    assert np.all(np.diff(t) > 0)
    fa, fb = f(t)
    np.testing.assert_array_equal(a, fa)
    np.testing.assert_array_equal(np.isnan(b), np.isnan(fb))
    np.testing.assert_array_equal(b[~np.isnan(b)], fb[~np.isnan(fb)])
    assert 0.0 < t[np.isnan(b)].min() - t[~np.isnan(b)].max() <= 1e-9     # edge located to jump_step


def test_midpoints_that_round_onto_an_end_keep_the_order():
    # an interval a few ulp wide: its midpoint rounds onto an end. With no floor on the step, the sampler
    # must still return samples in non-decreasing order with their own values (bug caught: the ordered
    # insertion used where a midpoint is not strictly inside its interval)
    t0 = 1.0
    t1 = t0 + 6 * math.ulp(1.0)
    f = lambda t: (np.where(t < t0 + 3.5 * math.ulp(1.0), 0.0, 1.0),)  # noqa: E731
    t, (y,) = sample_line(f, t0, t1, tol=1e-3, n_start=2, min_step=0.0, jump_step=0.0, max_passes=10)
    assert np.all(np.diff(t) >= 0) and t[0] == t0 and t[-1] == t1
    np.testing.assert_array_equal(y, f(t)[0])


@pytest.mark.parametrize("tol", [1e-7, 1e-6, 1e-5])
def test_margin_lines_that_stop_end_within_their_chord_tolerance_of_the_true_end(tol):
    # Catches: the end of a line whose model stops having values (a domain edge) located more coarsely than the
    # line's own chords (the end's search step tied to the parameter range alone, or to a fixed share of it),
    # which shortens the line that the margins measure to by more than the stated sampling error.
    from lowgmap.physics.chart.lines import _piece_runs
    from lowgmap.physics.models.regimes import LinePiece

    t_end = 1.2345678912345

    def func(t):
        t = np.asarray(t, dtype=float)
        q = np.where(t < t_end, 10.0 ** t, np.nan)
        return q, 2.0 * q

    runs = _piece_runs(LinePiece(-3.0, 3.0, func), (-4.0, 4.0, -4.0, 4.0), tol, 17)
    (x, y), = runs
    assert x[-1] <= t_end and t_end - x[-1] <= tol
    assert x[0] == pytest.approx(-3.0, abs=1e-12)
    np.testing.assert_allclose(y - x, np.log10(2.0), atol=1e-12)


def test_column_trace_leaves_a_line_far_below_its_window_coarse_but_still_finds_a_wall_through_it():
    # Catches: the margins' column trace refining a line where it runs far beyond the box its margins can reach
    # (thousands of evaluations of a costly line for nothing), and the opposite mistake, a window that also
    # skips the change of side between a column far below and a column without a line that lies below the
    # line (+inf): that wall crosses the box and must still be located.
    from lowgmap.physics.chart.lines import _column_trace

    def f(x):                                  # a curved line far below [-1, 1]; no line (+inf) beyond x = 0.3
        x = np.asarray(x, dtype=float)
        return np.where(x < 0.3, -20.0 + np.sin(5.0 * x), np.inf)

    x_free, _ = _column_trace(f, -1.0, 1.0, tol=1e-7, n_start=17)
    x_win, y_win = _column_trace(f, -1.0, 1.0, tol=1e-7, n_start=17, y_window=(-2.0, 2.0))
    assert x_free.size > 500 and x_win.size < 0.2 * x_free.size     # the curve below the window is not refined
    wall = x_win[np.flatnonzero(np.diff(np.isfinite(y_win).astype(int)))[0]]
    assert abs(wall - 0.3) < 1e-10                                   # the wall is located as before
