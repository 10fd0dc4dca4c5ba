r"""Adaptive sampling of a line, and its split into runs where it is valid.

One engine for every line the chart and the margins draw: :func:`sample_line` refines a
parametric line ``t -> coordinates`` by halving the parameter intervals until each chord lies
within a tolerance of the line, and :func:`mask_runs` / :func:`finite_runs` split the samples into
the runs where the line exists (or where any other per-sample test holds). The callers keep their
own tolerances: the chart (chords straight to a fraction of the chart box), the margins (chords
within 1e-7 decade) and the quick Monte Carlo or sweep lines (coarser).

Refinement rule for an interval [t_a, t_b] with middle t_m = (t_a + t_b)/2:

* both ends valid (every coordinate finite): split when the middle is not valid, or when its
  deviation from the chord exceeds ``tol`` (``deviation="chord"``: distance from the chord's
  midpoint, :math:`\lVert p(t_m) - (p(t_a) + p(t_b))/2 \rVert`; ``deviation="segment"``: distance
  from the chord segment), as long as :math:`t_b - t_a >` ``min_step``;
* one end valid and the other not, or two invalid ends of different kinds (+inf, -inf, NaN):
  split as long as :math:`t_b - t_a >` ``jump_step``, which locates the edge of the valid stretch
  (or the jump) to within ``jump_step`` by bisection;
* two invalid ends of the same kind: left alone (a valid island narrower than the interval is
  not searched for).

An interval whose ends (and, with ``window_middle``, its middle) all lie beyond the same edge of
``window`` is not refined: it cannot come into view. Breakpoints (kinks) are included exactly.

Examples
--------
A straight line needs no refinement; a parabola is refined until its chords are within tol:

>>> import numpy as np
>>> t, (y,) = sample_line(lambda t: (2.0 * t + 1.0,), 0.0, 1.0, tol=1e-6, n_start=5)
>>> t.size
5
>>> t, (y,) = sample_line(lambda t: (t * t,), 0.0, 1.0, tol=1e-6, n_start=5)
>>> bool(np.max(np.diff(t)) ** 2 / 4 <= 1e-6)      # chord deviation of t^2 is dt^2/4
True
"""
from __future__ import annotations

import numpy as np

__all__ = ["sample_line", "mask_runs", "finite_runs", "segment_distance"]


def segment_distance(px, py, ax, ay, bx, by):
    """Distance of points P to segments AB in a plane (arrays, broadcast).

    Parameters
    ----------
    px, py : array   the points
    ax, ay, bx, by : array   segment ends (a zero-length segment is its point)

    Returns
    -------
    array   Euclidean distance (same units as the coordinates)

    Examples
    --------
    >>> float(segment_distance(0.5, 1.0, 0.0, 0.0, 1.0, 0.0)), float(segment_distance(2.0, 0.0, 0.0, 0.0, 1.0, 0.0))
    (1.0, 1.0)
    """
    dx, dy = bx - ax, by - ay
    L2 = dx * dx + dy * dy
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.where(L2 > 0, np.divide((px - ax) * dx + (py - ay) * dy, L2), 0.0)
    w = np.minimum(np.maximum(w, 0.0), 1.0)
    return np.hypot(ax + w * dx - px, ay + w * dy - py)


def _shaped(c, shape):
    """``c`` as a float array of ``shape`` (broadcast only when it has another shape)."""
    c = np.asarray(c, dtype=float)
    return c if c.shape == shape else np.broadcast_to(c, shape)


def _kind(coords) -> np.ndarray:
    """0 where every coordinate is finite; else +1 (+inf), -1 (-inf) or 2 (NaN) of the first bad one."""
    kind = np.zeros(coords[0].shape, dtype=np.int8)
    for c in reversed(coords):
        bad = ~np.isfinite(c)
        if bad.any():
            kind[bad] = np.where(np.isnan(c[bad]), 2, np.sign(c[bad])).astype(np.int8)
    return kind


def _evaluate(f, t, n_coords=None):
    out = f(t)
    coords = tuple(_shaped(c, t.shape) for c in out)
    if n_coords is not None and len(coords) != n_coords:
        raise ValueError(f"the line function must return {n_coords} coordinate arrays, got {len(coords)}")
    return coords


def _all_beyond(window, *points) -> np.ndarray:
    """Where all the ``points`` (tuples of coordinate arrays) lie strictly beyond the same edge of the window."""
    out = np.zeros(np.shape(points[0][0]), dtype=bool)
    with np.errstate(invalid="ignore"):
        for k, (lo, hi) in enumerate(window):
            below = points[0][k] < lo
            above = points[0][k] > hi
            for p in points[1:]:
                below &= p[k] < lo
                above &= p[k] > hi
            out |= below | above
    return out


def sample_line(f, t0: float, t1: float, *, tol: float, n_start: int = 33, breakpoints=(),
                deviation: str = "chord", min_step: float = 0.0, jump_step: float | None = None,
                window=None, window_middle: bool = False, max_passes: int = 60, max_points: int = 20000,
                settled=None):
    r"""Adaptive samples of a parametric line ``t -> (c_1(t), ..., c_k(t))`` on [t0, t1].

    .. math:: \text{split } [t_a, t_b] \text{ while }
              \operatorname{dev}\big(p(t_m); p(t_a), p(t_b)\big) > \mathrm{tol},
              \quad t_m = \tfrac{1}{2}(t_a + t_b)

    Parameters
    ----------
    f : callable       ``f(t) -> tuple of k arrays`` (vectorised over the array t); a point is
                       valid where all its coordinates are finite. An explicit line y(x) sampled
                       in x is ``f = lambda x: (y(x),)`` (the chord deviation is then vertical).
    t0, t1 : float     parameter range (nothing is sampled unless both are finite and t1 > t0)
    tol : float        allowed deviation of a chord from the line (units of the coordinates)
    n_start : int      uniform samples to start with (>= 2)
    breakpoints : array-like   parameter values included exactly (kinks); those outside (t0, t1)
                       are ignored
    deviation : str    "chord" (distance of the middle sample from the chord's midpoint) or
                       "segment" (distance from the chord segment; two coordinates)
    min_step : float   narrowest interval refined where both ends are valid
    jump_step : float, optional   narrowest interval refined across the edge of a valid stretch
                       or a jump between invalid kinds (default: ``min_step``)
    window : sequence of (lo, hi), optional   one pair per coordinate: intervals whose ends lie
                       beyond the same edge are not refined
    window_middle : bool   with ``window``: the middle sample must lie beyond that edge as well
    max_passes : int   refinement passes (each halves every interval still to refine)
    max_points : int   no pass starts with more samples than this
    settled : callable, optional   ``settled(t, coords, idx, dev, t_mid, c_mid) -> bool array``: of the
                       intervals (idx[i], idx[i] + 1), both ends and middle valid, that would be split
                       only because their chord deviates more than ``tol`` (``dev``: that deviation),
                       those that may stay as they are (e.g. too far from a point to matter to it);
                       ``t, coords`` are the samples so far, ``t_mid, c_mid`` the valid middle samples
                       of this pass

    Returns
    -------
    (t, coords) : array, tuple of arrays   parameter values (increasing; t0 and t1 included) and
                  the k coordinate arrays at them

    Notes
    -----
    Each interval is tested once per pass and never again once it passes, so the samples do not
    depend on the number of passes left over. The result is deterministic for a deterministic f.

    Examples
    --------
    A line y = sqrt(t^2 - 1) that does not exist for |t| < 1: its two valid stretches end within
    ``jump_step`` of t = -1 and t = 1.

    >>> import numpy as np
    >>> f = lambda t: (np.sqrt(t * t - 1.0),)
    >>> with np.errstate(invalid="ignore"):
    ...     t, (y,) = sample_line(f, -3.0, 3.0, tol=1e-3, n_start=8, jump_step=1e-9)
    >>> [(round(float(r[0][0]), 6), round(float(r[0][-1]), 6)) for r in finite_runs(t, (y,))]
    [(-3.0, -1.0), (1.0, 3.0)]
    """
    if deviation not in ("chord", "segment"):
        raise ValueError(f"deviation must be 'chord' or 'segment', got {deviation!r}")
    if int(n_start) < 2:
        raise ValueError(f"n_start must be >= 2, got {n_start}")
    t0, t1 = float(t0), float(t1)
    if not (np.isfinite(t0) and np.isfinite(t1) and t1 > t0):
        return np.empty(0), ()
    jump = min_step if jump_step is None else jump_step
    t = np.linspace(t0, t1, int(n_start))
    bp = np.asarray(breakpoints if breakpoints is not None else (), dtype=float).ravel()
    bp = bp[np.isfinite(bp) & (bp > t0) & (bp < t1)]
    if bp.size:
        t = np.unique(np.concatenate([t, bp]))
    coords = _evaluate(f, t)
    k = len(coords)
    if deviation == "segment" and k != 2:
        raise ValueError(f"deviation='segment' needs a line with two coordinates, got {k}")
    if window is not None and len(window) != k:
        raise ValueError(f"window needs one (lo, hi) pair per coordinate ({k}), got {len(window)}")
    kind = _kind(coords)
    done = np.zeros(t.size, dtype=bool)          # done[i]: interval (i, i+1) needs no more work
    done[-1] = True                              # (no interval starts at the last sample)
    for _ in range(int(max_passes)):
        # only the intervals still open are tested (the others are never tested again)
        cand = np.flatnonzero(~done[:-1])
        ka, kb = kind[cand], kind[cand + 1]
        dt = t[cand + 1] - t[cand]
        both = (ka == 0) & (kb == 0)
        change = ka != kb
        smooth = both & (dt > min_step)
        if window is not None and not window_middle:
            smooth &= ~_all_beyond(window, tuple(c[cand] for c in coords), tuple(c[cand + 1] for c in coords))
        work = smooth | (change & (dt > jump))
        done[cand[~work]] = True
        if not work.any() or t.size > max_points:
            break
        idx = cand[work]
        both, change = both[work], change[work]
        tm = 0.5 * (t[idx] + t[idx + 1])
        cm = _evaluate(f, tm, k)
        km = _kind(cm)
        a = tuple(c[idx] for c in coords)
        b = tuple(c[idx + 1] for c in coords)
        with np.errstate(invalid="ignore"):
            if deviation == "segment":
                dev = segment_distance(cm[0], cm[1], a[0], a[1], b[0], b[1])
            elif k == 1:
                dev = np.abs(cm[0] - 0.5 * (a[0] + b[0]))
            elif k == 2:
                dev = np.hypot(cm[0] - 0.5 * (a[0] + b[0]), cm[1] - 0.5 * (a[1] + b[1]))
            else:
                dev = np.sqrt(sum((c - 0.5 * (p + q)) ** 2 for c, p, q in zip(cm, a, b)))
            split = change | (both & ((km != 0) | (dev > tol)))
        if settled is not None:
            soft = split & both & (km == 0) & ~change
            if soft.any():
                valid = km == 0
                keep = np.asarray(settled(t, coords, idx[soft], dev[soft], tm[valid], tuple(c[valid] for c in cm)),
                                  dtype=bool)
                split[np.flatnonzero(soft)[keep]] = False
        if window is not None and window_middle:
            split &= ~(both & _all_beyond(window, a, b, cm))
        done[idx[~split]] = True
        s = idx[split]
        if s.size == 0:
            continue
        done[s] = False
        tn = tm[split]
        if np.all((tn > t[s]) & (tn < t[s + 1])):
            # each new sample lies strictly inside its interval: insert it after the interval's start
            # (the order a stable sort gives, without sorting)
            at = s + np.arange(1, s.size + 1)            # positions of the new samples in the merged arrays
            old = np.ones(t.size + s.size, dtype=bool)
            old[at] = False
            t = _merged(t, tn, at, old)
            coords = tuple(_merged(c, m[split], at, old) for c, m in zip(coords, cm))
            kind = _merged(kind, km[split], at, old)
            done = _merged(done, np.zeros(s.size, dtype=bool), at, old)
            continue
        t = np.concatenate([t, tn])
        coords = tuple(np.concatenate([c, m[split]]) for c, m in zip(coords, cm))
        kind = np.concatenate([kind, km[split]])
        done = np.concatenate([done, np.zeros(s.size, dtype=bool)])
        order = np.argsort(t, kind="stable")
        t, kind, done = t[order], kind[order], done[order]
        coords = tuple(c[order] for c in coords)
    return t, coords


def _merged(a, b, at, old):
    """``a`` with the values ``b`` inserted at the positions ``at`` of the result (``old``: where ``a`` goes)."""
    out = np.empty(old.size, dtype=a.dtype)
    out[old] = a
    out[at] = b
    return out


def mask_runs(mask) -> list[tuple[int, int]]:
    """Maximal runs of True in a 1-d boolean mask, as (start, stop) index pairs (stop exclusive).

    Examples
    --------
    >>> mask_runs([False, True, True, False, True])
    [(1, 3), (4, 5)]
    """
    m = np.asarray(mask, dtype=bool).ravel()
    d = np.diff(np.concatenate([[0], m.astype(np.int8), [0]]))
    return list(zip(np.flatnonzero(d == 1).tolist(), np.flatnonzero(d == -1).tolist()))


def finite_runs(t, coords, valid=None, min_points: int = 2) -> list[tuple[np.ndarray, tuple]]:
    """Split a sampled line into the runs where it is valid (copies).

    Parameters
    ----------
    t : array              parameter values of the samples
    coords : tuple of arrays   their coordinates
    valid : array of bool, optional   which samples count (default: every coordinate finite)
    min_points : int       shorter runs are dropped

    Returns
    -------
    list of (t_run, coords_run)

    Examples
    --------
    >>> import numpy as np
    >>> runs = finite_runs(np.arange(6.0), (np.array([0.0, 1.0, np.nan, 3.0, 4.0, 5.0]),))
    >>> [r[0].tolist() for r in runs]
    [[0.0, 1.0], [3.0, 4.0, 5.0]]
    """
    t = np.asarray(t, dtype=float)
    coords = tuple(np.asarray(c, dtype=float) for c in coords)
    if valid is None:
        valid = np.ones(t.shape, dtype=bool)
        for c in coords:
            valid &= np.isfinite(c)
    return [(t[i:j].copy(), tuple(c[i:j].copy() for c in coords))
            for i, j in mask_runs(valid) if j - i >= min_points]
