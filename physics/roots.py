"""Roots of many scalar functions at once, each in its own bracket (vectorised false position), and one
bracketed root whose end values the caller already has.

Used where many bracketed roots of cheap vectorised functions are needed together (the inverse of the
stratified-flow line per liquid flow; the crossings of the lines of one chart): one vectorised evaluation
per step for all the brackets still open, instead of one scalar root search each.

Method: the Illinois variant of false position (Dowell, M. and Jarratt, P., 1971, "A modified regula
falsi method for computing the root of an equation", BIT Numerical Mathematics 11, 168-174,
doi:10.1007/BF01934364), with a bisection step wherever a bracket has not halved in two steps, and a step
that lands on an end of its bracket (or within the tolerance of it) moved to the tolerance inside, as in
Brent's method (Brent, R. P., 1973, Algorithms for Minimization without Derivatives, Prentice-Hall, ch. 4).
"""
from __future__ import annotations

import numpy as np

__all__ = ["brentq_known", "illinois"]


def brentq_known(func, a, b, fa, fb, **kwargs):
    """``scipy.optimize.brentq(func, a, b, **kwargs)`` for a caller that has already computed fa = func(a) and
    fb = func(b): those two are not computed again.

    Brent's method (Brent, R. P., 1973, Algorithms for Minimization without Derivatives, Prentice-Hall, ch. 4;
    scipy's implementation) starts by evaluating the function at both ends; each call here answers those two
    from the values given (matched by the exact end values) and evaluates ``func`` for every other point, so
    the root is the one ``brentq`` returns, for two evaluations fewer per root. The values must be the
    function's own at those ends (a sign change, fa * fb < 0, as brentq requires).

    Examples
    --------
    >>> calls = []
    >>> f = lambda x: calls.append(x) or x * x - 2.0
    >>> r = brentq_known(f, 1.0, 2.0, -1.0, 2.0, xtol=1e-15)
    >>> round(r, 12), 1.0 in calls or 2.0 in calls
    (1.414213562373, False)
    """
    from scipy.optimize import brentq

    known = {float(a): float(fa), float(b): float(fb)}

    def f(x):
        v = known.pop(x, None)
        return func(x) if v is None else v
    return brentq(f, a, b, **kwargs)


def illinois(func, a, b, fa, fb, iterations=40, xtol=1e-14, rtol=0.0, pick: str = "middle"):
    """Roots of ``func`` in the brackets [a, b] (fa < 0 <= fb), vectorised (Illinois false position).

    ``func(x, idx)`` evaluates the entries ``idx`` (indices into the brackets) at ``x``. Converges
    superlinearly where func is smooth; where it jumps inside the bracket (a friction-law switch) the
    result is the location of the jump. Each entry stops once its bracket is within
    ``xtol + rtol * max(|a|, |b|)`` (or a value is exactly 0); only the entries still open are evaluated, so
    one slow entry does not make the others pay for its iterations. Every other step, an entry whose bracket
    has not halved since two steps back is bisected, so each bracket at least halves every two steps.
    Returns the middle of each final bracket (``pick="middle"``), or the end of it where ``|func|`` is
    smaller (``pick="closer"``: on a jump, the side nearer to zero, as scipy's brentq returns).

    Examples
    --------
    >>> import numpy as np
    >>> r = illinois(lambda x, idx: x * x - np.array([2.0, 3.0])[idx], [1.0, 1.0], [2.0, 2.0], [-1.0, -2.0],
    ...              [2.0, 1.0], xtol=1e-15)
    >>> [round(float(v), 12) for v in r]
    [1.414213562373, 1.732050807569]
    """
    a, b = np.array(a, dtype=float), np.array(b, dtype=float)
    fa, fb = np.array(fa, dtype=float), np.array(fb, dtype=float)
    ok = np.isfinite(fa) & np.isfinite(fb)
    a, b = np.where(ok, a, 0.5), np.where(ok, b, 0.5)
    fa, fb = np.where(ok, fa, -1.0), np.where(ok, fb, 1.0)
    va, vb = np.abs(fa), np.abs(fb)        # |func| at the ends (fa, fb are scaled by the Illinois steps)
    side = np.zeros(a.shape, dtype=int)

    def still_open(idx):
        return idx[np.abs(b[idx] - a[idx]) > xtol + rtol * np.maximum(np.abs(a[idx]), np.abs(b[idx]))]

    act = still_open(np.arange(a.size))
    width = np.abs(b - a)                  # bracket width two steps back: an entry whose bracket has not halved
    for it in range(iterations):           # since then takes a bisection step (a steep end stalls false position)
        if act.size == 0:
            break
        A, B, FA, FB, S = a[act], b[act], fa[act], fb[act], side[act]
        with np.errstate(invalid="ignore", divide="ignore"):
            c = B - FB * (B - A) / (FB - FA)
        lo, hi = np.minimum(A, B), np.maximum(A, B)
        bad = ~np.isfinite(c)
        if it % 2 == 1:
            w = hi - lo
            bad |= w > 0.5 * width[act]
            width[act] = w
        c = np.where(bad, 0.5 * (A + B), c)
        # a step that lands on an end, or within the tolerance of it, moves to the tolerance (as Brent's method
        # does): at a root next to an end the bracket then closes on it instead of being halved from the far side
        step = 0.5 * (xtol + rtol * np.maximum(np.abs(A), np.abs(B)))
        c = np.where(hi - lo > 4.0 * step, np.clip(c, lo + step, hi - step), 0.5 * (A + B))
        fc = np.asarray(func(c, act), dtype=float)
        fc = np.where(np.isfinite(fc), fc, 1.0)
        neg = fc < 0
        # keep the bracket [a (negative side), b (non-negative side)]; halve the stale end's value (Illinois)
        FB = np.where(neg & (S == -1), 0.5 * FB, FB)
        FA = np.where(~neg & (S == 1), 0.5 * FA, FA)
        side[act] = np.where(neg, -1, 1)
        a[act], fa[act] = np.where(neg, c, A), np.where(neg, fc, FA)
        b[act], fb[act] = np.where(neg, B, c), np.where(neg, FB, fc)
        va[act] = np.where(neg, np.abs(fc), va[act])
        vb[act] = np.where(neg, vb[act], np.abs(fc))
        hit = fc == 0.0
        if hit.any():                      # exactly on the root: the bracket closes on it
            a[act[hit]] = b[act[hit]] = c[hit]
        act = still_open(act)
    if pick == "closer":
        return np.where(va <= vb, a, b)
    return 0.5 * (a + b)
