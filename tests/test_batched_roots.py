"""The root searches of a sequence-rule chart in one batch (``composition._sign_change_roots``) and the
vectorised false-position solver behind it (``lowgmap.physics.roots.illinois``).

Check values are closed forms derived here (marked "closed form"); the chart-level check compares the
batch with one scalar search per bracket (scipy's brentq, the method it replaced) on the bundled gravity
samples, whose stratified-flow line is the costliest to evaluate and has a jump (the liquid friction law
switches): an internal-consistency check, no outside source applies.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from lowgmap.app.files.casefile import load_case, sample_case_path
from lowgmap.physics.chart import composition
from lowgmap.physics.chart.composition import Chart, _sign_change_roots
from lowgmap.physics.roots import brentq_known, illinois


def test_brentq_with_known_ends_is_brentq_with_two_evaluations_fewer():
    # closed form: x^3 = c has the root c^(1/3). Catches a wrapper that answers an end with the other end's
    # value (the bracket's signs swapped: another root, or an error), one that still evaluates the ends
    # (nothing saved), and one that keeps answering from the given values after the first two calls.
    for c, lo, hi in ((2.0, 1.0, 2.0), (10.0, 3.0, 2.0), (0.5, 0.1, 1.0)):
        f_calls, k_calls = [], []

        def f(x, calls):
            calls.append(x)
            return x ** 3 - c
        ref = brentq(lambda x: f(x, f_calls), lo, hi, xtol=1e-15, rtol=1e-15)
        got = brentq_known(lambda x: f(x, k_calls), lo, hi, lo ** 3 - c, hi ** 3 - c, xtol=1e-15, rtol=1e-15)
        assert got == ref and abs(got - c ** (1 / 3)) < 1e-14
        assert len(k_calls) == len(f_calls) - 2 and lo not in k_calls and hi not in k_calls
        assert k_calls == f_calls[2:]


def test_illinois_finds_each_root_in_its_own_bracket_whatever_the_ends_order():
    # closed form: x^3 = c has the root c^(1/3). Catches a solver that mixes up the entries (each bracket
    # evaluated with another's constant), that needs a < b (here one bracket is given as [b, a]), or that
    # stops before the stated tolerance.
    c, s = np.array([2.0, 10.0, 0.5]), np.array([1.0, -1.0, 1.0])  # the second decreases through its root
    a, b = np.array([1.0, 3.0, 0.1]), np.array([2.0, 2.0, 1.0])   # so its negative end is the larger
    root = illinois(lambda x, idx: s[idx] * (x ** 3 - c[idx]), a, b, s * (a ** 3 - c), s * (b ** 3 - c), xtol=1e-14)
    np.testing.assert_allclose(root, np.cbrt(c), rtol=0, atol=1e-13)


def test_illinois_closes_on_a_root_that_false_position_finds_at_once():
    # closed form: a straight line's root is hit by the first false-position step (the crossings of two power
    # laws in log-log axes are such). Catches a solver that then treats the bracket end lying on the root as a
    # failed step and halves the bracket from the far side (about 40 evaluations instead of 2 or 3).
    calls = []

    def f(x, idx):
        calls.append(len(idx))
        return 3.0 * (x - np.array([0.1, -2.0 / 3.0, 1.0 / 7.0])[idx])
    root = illinois(f, [-1.0, -1.0, -1.0], [1.0, 1.0, 1.0], 3.0 * (-1.0 - np.array([0.1, -2 / 3, 1 / 7])),
                    3.0 * (1.0 - np.array([0.1, -2 / 3, 1 / 7])), iterations=100, xtol=1e-13, rtol=1e-13)
    np.testing.assert_allclose(root, [0.1, -2.0 / 3.0, 1.0 / 7.0], atol=1e-13)
    assert len(calls) <= 3, calls


def test_illinois_locates_a_jump_inside_the_bracket():
    # closed form: sign(x - 0.3) changes sign only by jumping at 0.3. Catches a false-position step that stalls
    # at one end of a bracket (it never halves) instead of closing on the jump.
    root = illinois(lambda x, idx: np.where(x < 0.3, -1.0, 2.0), [0.0], [1.0], [-1.0], [2.0], iterations=200,
                    xtol=1e-12)
    assert abs(root[0] - 0.3) < 1e-12
    closer = illinois(lambda x, idx: np.where(x < 0.3, -1.0, 2.0), [0.0], [1.0], [-1.0], [2.0], iterations=200,
                      xtol=1e-12, pick="closer")        # the side where |f| = 1, below the jump
    assert closer[0] < 0.3 and 0.3 - closer[0] < 1e-12


def test_batched_roots_match_one_search_per_bracket_and_keep_each_problems_order():
    # closed forms: f0 = 2x + 1 and f1 = 4 - x cross at x = 1; f0 = 0 at x = -1/2 and f0 = 2.5 at x = 3/4;
    # sin(3x) = 0 at x = 0, pi/3, 2 pi/3 in [-0.5, 2.5]. Catches roots credited to the wrong problem (a shift
    # when the brackets of all the problems are solved together), a lost root where a sample lies exactly on
    # it, and brackets oriented the wrong way (f decreasing through the root).
    fns = [lambda x: 2.0 * np.asarray(x) + 1.0, lambda x: 4.0 - np.asarray(x), lambda x: np.sin(3.0 * np.asarray(x))]
    x = np.linspace(-0.5, 2.5, 31)                                   # x = 0 is a sample (exact zero of sin)
    problems = [(0, 1, 0.0, x, fns[0](x) - fns[1](x)), (0, None, 0.0, x, fns[0](x)),
                (2, None, 0.0, x, fns[2](x)), (0, None, 2.5, x, fns[0](x) - 2.5)]
    got = _sign_change_roots(fns, problems)
    assert len(got) == 4
    np.testing.assert_allclose(got[0], [1.0], atol=1e-12)
    np.testing.assert_allclose(got[1], [-0.5], atol=1e-12)
    np.testing.assert_allclose(got[2], [0.0, math.pi / 3, 2 * math.pi / 3], atol=1e-12)
    np.testing.assert_allclose(got[3], [0.75], atol=1e-12)
    for (i, j, level, xs, d), roots in zip(problems, got):           # the scalar method it replaced
        h = (lambda t, i=i, j=j, level=level: float(fns[i](t) - (level if j is None else fns[j](t))))
        ref = [brentq(h, xs[k], xs[k + 1], xtol=1e-13, rtol=1e-13) for k in range(len(xs) - 1) if d[k] * d[k + 1] < 0]
        ref += [xs[k] for k in range(len(xs)) if d[k] == 0.0]
        np.testing.assert_allclose(roots, sorted(ref), atol=1e-12)


def _scalar_searches(fns, problems, xtol=1e-13, rtol=1e-13):
    """The method replaced: one scalar brentq search per bracket (reference for the chart check)."""
    out = []
    for i, j, level, x, d in problems:
        def h(t, i=i, j=j, level=level):
            t = np.array([t])
            return float((fns[i](t) - (level if j is None else fns[j](t)))[0])
        found, ok = [], np.isfinite(d)
        for k in range(len(x) - 1):
            if not (ok[k] and ok[k + 1]):
                continue
            if d[k] == 0.0:
                found.append(x[k])
            elif d[k] * d[k + 1] < 0:
                found.append(brentq(h, x[k], x[k + 1], xtol=xtol, rtol=rtol))
        if ok[-1] and d[-1] == 0.0:
            found.append(x[-1])
        out.append(found)
    return out


@pytest.mark.parametrize("name", ["lunar_separator", "ground_test_loop"])
def test_a_gravity_chart_from_the_batch_equals_the_chart_from_one_search_per_bracket(name, monkeypatch):
    # Catches: a crossing of two lines, or of a line and the chart's top or bottom edge, found elsewhere than the
    # scalar searches found it (a shifted problem, a lost bracket, a looser tolerance), which moves intersections,
    # line ends and regions.
    case = load_case(sample_case_path(name)).case
    batch = Chart.build(case)
    monkeypatch.setattr(composition, "_sign_change_roots", _scalar_searches)
    scalar = Chart.build(case)
    assert len(batch.intersections) == len(scalar.intersections) > 0
    for a, b in zip(batch.intersections, scalar.intersections):
        assert (a.first, a.second) == (b.first, b.second)
        assert a.ql == pytest.approx(b.ql, rel=1e-11) and a.qg == pytest.approx(b.qg, rel=1e-9)
    for a, b in zip(batch.boundaries, scalar.boundaries):
        assert a.name == b.name and a.ql.shape == b.ql.shape
        np.testing.assert_allclose(a.ql, b.ql, rtol=1e-11)
        np.testing.assert_allclose(a.qg, b.qg, rtol=1e-9)
    assert [r.name for r in batch.regions] == [r.name for r in scalar.regions]
