r"""Lines of a chart in the log plane: sampled polylines, their chords, coverage and the geometry cache.

The margins (:mod:`lowgmap.physics.chart.margins`) and the studies built on them measure distances
from operating points to the boundary lines of a chart in the plane (log10 Q_L, log10 Q_G). This
module turns each line into a polyline there, once per chart, and keeps the chords with what they
separate (:class:`LineGeometry`):

* a line with its own parametric pieces (``line_pieces``) is sampled piece by piece, chords
  refined until they lie within ``tol`` of the line (distance from the chord segment);
* a line given only by ``qg_of_ql`` is sampled column by column in log10 Q_L. Where ``qg_of_ql``
  has no value the whole column lies on one side of the line (the sign of ``implicit`` decides:
  +inf above, -inf below); a change of side between columns is located to ``wall_dx`` by bisection
  and drawn as a vertical piece;
* under a scheme other than the sequence rule the region lines are split where they cross, and
  every chord is probed on both sides (which regimes it separates); for regimes that are the
  intersection of one side of each of their lines (:func:`conjunction_lines`) the studies take those
  lines whole instead, refined only where the points' margins can lie (``focus``).

Both samplings use the one adaptive sampler of :mod:`lowgmap.physics.chart.sampling`. The lines must
cover the chart range and the margin window of every point, :data:`WINDOW_LO` .. :data:`WINDOW_HI`
decades around it (the box of half-size :data:`MAX_MARGIN`): :func:`coverage`. :func:`geometry_of`
keeps one geometry per chart (weakly, it dies with the chart), rebuilt wider when a point needs it,
so the lines follow every query wherever it lies, inside or far outside the drawn chart range.

Where a line cannot be evaluated the margins must say so rather than count on it:

* with ``keep_going`` (as the margins ask), a model that raises while its line is sampled leaves
  that line empty and is recorded in :attr:`LineGeometry.failed` (such a geometry is not kept in
  the cache); without it (the studies) the model's error propagates as before;
* :func:`evaluation_gaps` probes the region lines and the classification on a log grid over a
  box of flows and reports where they give no value (:class:`EvaluationGap`).

Examples
--------
>>> from lowgmap.physics.examples import example_case
>>> from lowgmap.physics.chart.composition import Chart
>>> from lowgmap.physics.models.boundary import PowerLawBoundary
>>> chart = Chart.build(example_case(), [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])
>>> holder, g = geometry_of(chart, [-5.0], [-5.0])
>>> g.n_lines, bool(np.allclose(g.ya, g.xa)), bool(np.allclose(g.yb, g.xb))     # Q_G = Q_L: y = x
(1, True, True)
"""
from __future__ import annotations

import math
import threading
import weakref
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from lowgmap.physics.chart.sampling import finite_runs, sample_line

__all__ = ["MAX_MARGIN", "LN10", "WINDOW_LO", "WINDOW_HI", "GEOMETRY_CACHE", "MODEL_ERRORS", "column_function",
           "piece_function", "end_samples", "line_runs", "is_chain", "bounding_lines", "conjunction_lines",
           "FOCUS_MAX_POINTS", "LineGeometry", "make_geometry", "coverage", "margin_window", "ChartGeometry",
           "geometry_of", "regime_indices", "EvaluationGap", "evaluation_gaps", "chart_lines"]

#: Largest symmetric margin reported; a point with this margin has no boundary within ±99.9 %.
MAX_MARGIN = 0.999

#: ln 10, to turn decades into natural logs of flow ratios.
LN10 = math.log(10.0)
#: Margin window below a point [decade]: log10(1 - MAX_MARGIN).
WINDOW_LO = math.log10(1.0 - MAX_MARGIN)
#: Margin window above a point [decade]: log10(1 + MAX_MARGIN).
WINDOW_HI = math.log10(1.0 + MAX_MARGIN)

_N_START = 65                                 # initial samples of a line
_TOL = 1e-7                                   # chord tolerance [decade]
_WALL_DX = 1e-11                              # width at which a vertical piece is located [decade]
_MIN_DX = 1e-9                                # narrowest cell refined for curvature [decade]
_DEPTH = 60                                   # refinement passes
#: Shares of a piece's parameter range (1e-2, 1e-4 .. 1e-10) at which it is sampled from the start next to each
#: end: a line that ends on another line (or runs off to infinity) usually bends sharply there, and these samples
#: let the refinement work on that stretch in a few passes instead of halving toward the end pass by pass.
_END_STEPS = 10.0 ** -np.arange(2.0, 12.0, 2.0)
_MAX_SAMPLES = 20000                          # cap on samples per line piece
_FAR = 8.0                                    # decades beyond the coverage where open columns are closed
_PROBE = 1e-6                                 # side-probe distance from a chord [decade] (at least 10 tol)
_GAP_N = 25                                   # grid of the evaluation probe: _GAP_N x _GAP_N points
#: Chord tolerance of the lines of a preview chart (``Chart.build(..., preview=True)``) [decade]: the margins
#: of a preview are then within about ln(10) x 1e-5 x (1 + m) <= 5e-5 of the released value (as a fraction).
PREVIEW_TOL = 1e-5
_PREVIEW_N_START = 17

#: Errors a model may raise where it cannot be evaluated (outside its domain, overflow); a line
#: that raises one of these is reported as not evaluable instead of stopping the margins.
MODEL_ERRORS = (ArithmeticError, ValueError, RuntimeError)


# =============================================================================================
# Sampling one line in log-log axes

def column_function(case, model, consts: Mapping[str, float], y_ref: float):
    """The line as ``x = log10 Q_L (array) -> log10 Q_G`` from ``qg_of_ql``, +-inf in columns without a line.

    Parameters
    ----------
    case : Case
    model : BoundaryModel
    consts : mapping   the model's constants
    y_ref : float      log10 Q_G [decade] at which ``implicit`` decides the side of a column
                       without a line: +inf when the column lies below the line there, else -inf

    Returns
    -------
    callable
    """
    q_ref = 10.0 ** y_ref

    def f(x):
        x = np.asarray(x, dtype=float)
        ql = 10.0 ** x
        with np.errstate(all="ignore"):
            q = np.broadcast_to(np.asarray(model.qg_of_ql(case, ql, **consts), dtype=float), x.shape)
            ok = np.isfinite(q) & (q > 0)
            y = np.where(ok, np.log10(np.where(ok, q, 1.0)), np.nan)
        bad = ~ok
        if bad.any():
            with np.errstate(all="ignore"):
                g = np.asarray(model.implicit(case, ql[bad], np.full(int(bad.sum()), q_ref), **consts), dtype=float)
            y[bad] = np.where(g < 0, np.inf, -np.inf)
        return y

    return f


def _column_trace(f, x_lo: float, x_hi: float, breakpoints=(), tol: float = _TOL, wall_dx: float = _WALL_DX,
                  n_start: int = _N_START, y_window=None, settled=None):
    """Samples (x, y) of y = f(x) on [x_lo, x_hi], y = +-inf in columns without a line.

    Refined until chords are within ``tol``; a change of side between columns is located to
    ``wall_dx`` and made vertical (two samples at the same x). ``y_window`` (lo, hi): an interval whose
    ends and middle all lie below lo, or all above hi, is not refined (a line far beyond the box, or a
    column without a line on the side where the line runs beyond it: nothing there reaches the box).
    ``settled``: see :func:`lowgmap.physics.chart.sampling.sample_line` (e.g. :func:`_near_points`).
    """
    window = None if y_window is None else (tuple(y_window),)
    x, (y,) = sample_line(lambda t: (f(t),), x_lo, x_hi, tol=tol, n_start=n_start, breakpoints=breakpoints,
                          min_step=_MIN_DX, jump_step=wall_dx, window=window, window_middle=True,
                          max_passes=_DEPTH, max_points=_MAX_SAMPLES, settled=settled)
    y = np.array(y)
    c = np.where(np.isfinite(y), 0, np.sign(y))
    change = np.nonzero(c[:-1] != c[1:])[0]
    if change.size:
        mid = 0.5 * (x[change] + x[change + 1])
        x = x.copy()
        x[change] = mid
        x[change + 1] = mid
    return x, y


def piece_function(piece):
    """The piece as ``t -> (log10 Q_L, log10 Q_G)`` [decade], NaN where it has no point.

    Parameters
    ----------
    piece : LinePiece   (:class:`lowgmap.physics.models.regimes.LinePiece`)

    Returns
    -------
    callable   vectorised over an array of parameter values

    Examples
    --------
    >>> from lowgmap.physics.models.regimes import LinePiece
    >>> f = piece_function(LinePiece(-6.0, -4.0, lambda t: (10.0 ** t, 2.0 * 10.0 ** t)))
    >>> x, y = f([-5.0])
    >>> float(x[0]), round(float(y[0] - x[0]), 6)           # log10 2
    (-5.0, 0.30103)
    """
    def f(t):
        t = np.atleast_1d(np.asarray(t, dtype=float))
        with np.errstate(all="ignore"):
            ql, qg = piece.func(t)
            ql, qg = np.asarray(ql, dtype=float), np.asarray(qg, dtype=float)
            if ql.shape != t.shape:
                ql = np.broadcast_to(ql, t.shape)
            if qg.shape != t.shape:
                qg = np.broadcast_to(qg, t.shape)
            ok = np.isfinite(ql) & np.isfinite(qg) & (ql > 0) & (qg > 0)
            x = np.where(ok, np.log10(np.where(ok, ql, 1.0)), np.nan)
            y = np.where(ok, np.log10(np.where(ok, qg, 1.0)), np.nan)
        return x, y
    return f


def _jump_step(tol: float) -> float:
    """Where a piece stops having values, the share of its parameter range to which the end is located:
    1 % of the chord tolerance (per decade of parameter), so that the end moves a line by far less than its
    chords may; 1e-12 at most."""
    return max(1e-12, 1e-2 * tol)


#: Most points a sampled line is focused on (:func:`_near_points`); with more, the lines are refined everywhere.
FOCUS_MAX_POINTS = 256


def _box_margins(xs, ys, px, py):
    """Box margins max(|10^dx - 1|, |10^dy - 1|) of samples (xs, ys) seen from points (px, py) [decade]: (points,
    samples)."""
    with np.errstate(over="ignore", invalid="ignore"):
        return np.maximum(np.abs(np.expm1((xs[None, :] - px) * LN10)), np.abs(np.expm1((ys[None, :] - py) * LN10)))


def _near_points(focus, tol: float, explicit: bool = False, cap=None, own: bool = True):
    r"""``settled`` function of the sampler: chords that cannot hold the box margin of any point of ``focus``.

    ``focus`` = (x, y) arrays of points [decade]. A sample (on the line) at offsets (dx, dy) from a point has
    the box margin :math:`\max(|10^{dx} - 1|, |10^{dy} - 1|)`: the smallest over the samples so far, capped at
    :data:`MAX_MARGIN`, is an upper bound *u* of the point's margin to the line. The line between two samples
    lies within :math:`\delta` = 2 dev + ``tol`` of their chord (dev: the deviation of its middle), so inside
    the chord's x and y ranges widened by :math:`\delta`; every point there has a box margin of at least the
    larger of the smallest :math:`|10^{dx} - 1|` over the widened x range (0 when it contains the point's x)
    and the same in y. When that bound exceeds *u* for every point, refining the chord cannot change any
    point's margin to this line (its smallest value is at least as small elsewhere). The chords that can hold
    it are refined to ``tol`` as before, so the margin to the line is that of the unfocused sampling; chords
    outside the box of half-size *u* around every point stay coarse. Only for margins to whole lines (the
    sequence rule, or a regime that is an intersection of sides: :func:`conjunction_lines`). ``explicit``:
    the line is y(t) with x = t (column trace).

    ``cap``: an upper bound of every point's margin known beforehand (:data:`MAX_MARGIN`, where margins are
    capped), used when it is smaller; with ``own`` False the line's own samples are not used (a line split and
    probed bounds the regime only in parts: a sample on another part says nothing about the margin), so only
    chords beyond ``cap`` stay coarse.
    """
    px = np.asarray(focus[0], dtype=float).ravel()[:, None]
    py = np.asarray(focus[1], dtype=float).ravel()[:, None]
    cap_ = np.minimum(np.broadcast_to(np.asarray(MAX_MARGIN if cap is None else cap, dtype=float), px.shape),
                      MAX_MARGIN)

    def low(a, b, p, delta):
        lo, hi = np.minimum(a, b)[None, :] - delta, np.maximum(a, b)[None, :] + delta
        with np.errstate(over="ignore", invalid="ignore"):
            far = np.minimum(np.abs(np.expm1((lo - p) * LN10)), np.abs(np.expm1((hi - p) * LN10)))
        return np.where((lo <= p) & (hi >= p), 0.0, far)

    def settled(t, coords, idx, dev, tm, cm):
        if explicit:
            x, y, xm, ym = t, coords[0], tm, cm[0]
        else:
            (x, y), (xm, ym) = coords, cm
        ub = cap_
        if own:
            ok = np.isfinite(x) & np.isfinite(y)
            xs = np.concatenate([x[ok], xm])
            ys = np.concatenate([y[ok], ym])
            ub = np.minimum(_box_margins(xs, ys, px, py).min(axis=1, initial=np.inf)[:, None], cap_)
        delta = 2.0 * np.asarray(dev, dtype=float)[None, :] + tol
        lb = np.maximum(low(x[idx], x[idx + 1], px, delta), low(y[idx], y[idx + 1], py, delta))
        return np.all(lb > ub, axis=0)

    return settled


def end_samples(t0: float, t1: float, step: float = 0.0) -> np.ndarray:
    """Parameter values next to both ends of [t0, t1] at the shares :data:`_END_STEPS` of its range (those not
    below ``step``), sampled from the start by the line samplers.

    >>> [round(float(v), 12) for v in end_samples(0.0, 1.0, 1e-4)]
    [0.01, 0.0001, 0.99, 0.9999]
    """
    span = t1 - t0
    steps = _END_STEPS[_END_STEPS >= step] * span
    return np.concatenate([t0 + steps, t1 - steps])


def _piece_runs(piece, cov, tol: float = _TOL, n_start: int = _N_START, settled=None, whole: bool = False):
    """Polylines (x, y) of a parametric piece, refined to ``tol``; NaN gaps split runs.

    Chords more than a decade beyond one edge of the coverage ``cov`` are not refined, nor those
    ``settled`` leaves alone (:func:`_near_points`). With ``whole`` (the line bounds its regimes as a whole:
    its chords are neither split at crossings nor probed) a ``straight`` piece is its two ends.
    """
    t0, t1 = float(piece.t0), float(piece.t1)
    if not (math.isfinite(t0) and math.isfinite(t1) and t1 > t0):
        return []
    if whole and getattr(piece, "straight", False):
        x, y = piece_function(piece)(np.array([t0, t1]))
        if np.all(np.isfinite(x) & np.isfinite(y)):
            return [(x, y)]
    X0, X1, Y0, Y1 = cov
    bps = np.concatenate([np.asarray(getattr(piece, "breakpoints", ()) or (), dtype=float).ravel(),
                          end_samples(t0, t1)])
    t, (x, y) = sample_line(piece_function(piece), t0, t1, tol=tol, n_start=n_start,
                            breakpoints=bps, deviation="segment",
                            min_step=1e-12 * (t1 - t0), jump_step=_jump_step(tol) * (t1 - t0),
                            window=((X0 - 1, X1 + 1), (Y0 - 1, Y1 + 1)),
                            max_passes=_DEPTH, max_points=_MAX_SAMPLES, settled=settled)
    return [xy for _, xy in finite_runs(t, (x, y))]


def _y_ref(case) -> float:
    fr = case.flow_range
    return 0.5 * (math.log10(fr.qg_min) + math.log10(fr.qg_max))


def _widened(case, cov):
    """The case with its chart range widened to the coverage (the physics is unchanged)."""
    from lowgmap.physics.case import FlowRange

    X0, X1, Y0, Y1 = cov
    return case.with_(flow_range=FlowRange(10.0 ** X0, 10.0 ** X1, 10.0 ** Y0, 10.0 ** Y1))


def line_runs(case, model, consts, cov, *, tol=_TOL, wall_dx=_WALL_DX, n_start=_N_START, wide=None, focus=None,
              whole=False, cap=None, own=True):
    """Polylines ``[(x, y), ...]`` of one line over the coverage box ``cov`` = (x0, x1, y0, y1) [decade].

    From the model's ``line_pieces`` (asked for the case widened to ``cov``, or ``wide``) when it
    has them, else one column trace of ``qg_of_ql`` whose columns without a line lie 8 decades
    beyond the coverage. ``tol`` [decade] chord tolerance, ``wall_dx`` [decade] width at which a
    vertical piece is located, ``n_start`` initial samples. ``focus`` = (x, y) arrays [decade]: only
    the margins of these points to the whole line are wanted, so chords that cannot hold them are left
    coarse (:func:`_near_points`; at most :data:`FOCUS_MAX_POINTS` points, else ignored). ``whole``: the line
    bounds regimes as a whole (sequence rule, or a regime that is an intersection of sides), so a straight
    piece needs no samples between its ends. ``cap``, ``own``: see :func:`_near_points`.
    """
    wide = wide if wide is not None else _widened(case, cov)
    use = focus is not None and 0 < np.size(focus[0]) <= FOCUS_MAX_POINTS
    own = getattr(model, "line_pieces", None)
    if callable(own):
        runs = []
        near = _near_points(focus, tol, cap=cap, own=own) if use else None
        for piece in own(wide, **consts):
            runs += _piece_runs(piece, cov, tol, n_start, near, whole)
        return runs
    bp = np.asarray(model.breakpoints(wide, **consts), dtype=float)
    bp = np.log10(bp[bp > 0]) if bp.size else bp
    x, y = _column_trace(column_function(wide, model, consts, _y_ref(case)), cov[0], cov[1], bp, tol, wall_dx,
                         n_start, (cov[2] - 1.0, cov[3] + 1.0),
                         settled=_near_points(focus, tol, explicit=True, cap=cap, own=own) if use else None)
    return [(x, np.clip(y, cov[2] - _FAR, cov[3] + _FAR))]


# =============================================================================================
# Geometry: the segments of every line, with what they separate

def is_chain(chart) -> bool:
    """True when the chart's regimes follow the sequence rule (no scheme, or a scheme of kind "chain")."""
    scheme = getattr(chart, "scheme", None)
    return scheme is None or getattr(scheme, "kind", "chain") == "chain"


def bounding_lines(chart, regime: str) -> tuple[int, ...]:
    """Indices into ``chart.region_models`` of the lines whose crossing can change ``regime``.

    From ``chart.bounding_models`` when the chart has it, else by the sequence rule (lines 0..i for
    the regime i); empty for a regime the chart does not have.
    """
    f = getattr(chart, "bounding_models", None)
    if callable(f):
        return tuple(int(i) for i in f(regime))
    names = list(chart.regime_names)
    if regime not in names:
        return ()
    return tuple(range(min(names.index(regime) + 1, len(chart.region_models))))


def conjunction_lines(chart, regime: str) -> tuple[int, ...] | None:
    """Indices into ``chart.region_models`` of the lines of which ``regime`` is the intersection of one side each.

    Under the sequence rule every regime is (lines 0..i: :func:`bounding_lines`); under another scheme as
    its :meth:`~lowgmap.physics.models.regimes.RegimeScheme.conjunction` says (e.g. the corner family's separating
    regimes: below the ingestion, blow-through and merging lines, above the confinement line and left of the
    separation line). The margin of a point in such a regime is its smallest margin to any of these lines as
    a whole. None when the regime is not such an intersection (its bounding parts must then be found by
    splitting the lines and probing their sides).
    """
    scheme = getattr(chart, "scheme", None)
    if scheme is None or getattr(scheme, "kind", "chain") == "chain":
        got = bounding_lines(chart, regime)
        return got if got else None
    f = getattr(scheme, "conjunction", None)
    return f(chart.region_models, chart.regime_names, regime) if callable(f) else None


def _insert_points(x, y, px, py):
    """Insert points lying on the polyline (x, y) as vertices (in order along it)."""
    if px.size == 0 or x.size < 2:
        return x, y
    ax, ay, dx, dy = x[:-1], y[:-1], np.diff(x), np.diff(y)
    L2 = dx * dx + dy * dy
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.clip(((px[:, None] - ax) * dx + (py[:, None] - ay) * dy) / np.where(L2 > 0, L2, 1.0), 0.0, 1.0)
    d2 = (ax + w * dx - px[:, None]) ** 2 + (ay + w * dy - py[:, None]) ** 2
    k = np.argmin(d2, axis=1)
    rows = np.arange(px.size)
    wk = w[rows, k]
    keep = (d2[rows, k] < 1e-14) & (wk > 1e-9) & (wk < 1 - 1e-9)
    if not keep.any():
        return x, y
    pos = np.concatenate([np.arange(x.size, dtype=float), k[keep] + wk[keep]])
    order = np.argsort(pos, kind="stable")
    return np.concatenate([x, px[keep]])[order], np.concatenate([y, py[keep]])[order]


def _split_at_crossings(lines_runs):
    """Insert the crossings of every pair of lines into both (so that each chord has one pair of sides)."""
    from shapely.geometry import MultiLineString

    geoms = []
    for runs in lines_runs:
        parts = [np.column_stack(r) for r in runs if len(r[0]) >= 2]
        geoms.append(MultiLineString(parts) if parts else None)
    pts: list[list] = [[] for _ in lines_runs]
    for i in range(len(geoms)):
        for j in range(i + 1, len(geoms)):
            if geoms[i] is None or geoms[j] is None or not geoms[i].intersects(geoms[j]):
                continue
            hit = geoms[i].intersection(geoms[j])
            coords = []
            for g in getattr(hit, "geoms", [hit]):
                if g.is_empty:
                    continue
                if g.geom_type == "Point":
                    coords.append((g.x, g.y))
                else:                                   # overlap: its ends
                    for h in getattr(g, "geoms", [g]):
                        b = h.boundary
                        coords += [(p.x, p.y) for p in getattr(b, "geoms", [b]) if not p.is_empty]
            pts[i] += coords
            pts[j] += coords
    out = []
    for runs, p in zip(lines_runs, pts):
        if not p:
            out.append(runs)
            continue
        P = np.array(p, dtype=float)
        out.append([_insert_points(x, y, P[:, 0], P[:, 1]) for x, y in runs])
    return out


@dataclass(frozen=True, eq=False)
class LineGeometry:
    """Chords of every line in (log10 Q_L, log10 Q_G) [decade] and what they separate.

    ``xa, ya, xb, yb``: chord ends; ``line``: index of the line (region lines first, grouped by
    line); ``usable``: the chord is part of the boundary as drawn; ``left``/``right``: regime
    indices on the two sides (-2: not probed, -1: no regime); ``n_lines``, ``n_region``: number of
    lines and of region lines; ``chain``: sequence rule; ``bounding``: regime index -> region lines
    that can change it; ``cov``: the box the lines cover [decade]; ``failed``: (line index, message)
    of every line whose model raised while it was sampled (the line has no chords).
    """

    xa: np.ndarray
    ya: np.ndarray
    xb: np.ndarray
    yb: np.ndarray
    line: np.ndarray
    usable: np.ndarray
    left: np.ndarray
    right: np.ndarray
    n_lines: int
    n_region: int
    chain: bool
    bounding: dict
    cov: tuple
    failed: tuple = ()

    def __post_init__(self):
        counts = np.bincount(self.line, minlength=self.n_lines) if self.line.size else np.zeros(self.n_lines, int)
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.intp)
        object.__setattr__(self, "_nonempty", np.nonzero(counts > 0)[0])
        object.__setattr__(self, "_starts", starts[counts > 0])
        object.__setattr__(self, "_adjacent", {})

    def adjacent(self, r: int) -> np.ndarray:
        """Chords that bound the regime of index ``r`` (read-only, cached)."""
        got = self._adjacent.get(r)
        if got is None:
            lines = self.bounding.get(r, ())
            got = self.usable & np.isin(self.line, np.asarray(lines, dtype=np.intp))
            if not self.chain:
                got &= (self.left == r) | (self.right == r)
            got.flags.writeable = False
            self._adjacent[r] = got
        return got

    def line_min(self, values):
        """(minimum, index of the minimum) of per-chord ``values`` for each line (inf, -1 if none)."""
        best = np.full(self.n_lines, np.inf)
        arg = np.full(self.n_lines, -1, dtype=np.intp)
        if values.size:
            best[self._nonempty] = np.minimum.reduceat(values, self._starts)
            hit = np.flatnonzero(values == best[self.line])
            lines, first = np.unique(self.line[hit], return_index=True)
            arg[lines] = hit[first]
            arg[~np.isfinite(best)] = -1
        return best, arg


def make_geometry(chart, case, lines, n_region, cov, *, tol=_TOL, wall_dx=_WALL_DX, n_start=_N_START,
                   only=None, keep_going=False, bounding=None, focus=None) -> LineGeometry:
    """Sample ``lines`` [(model, consts dict)] of ``chart`` over ``cov`` into a :class:`LineGeometry`.

    ``case``: the case whose physics the lines follow (the chart's, or a perturbed one);
    ``n_region``: how many of ``lines`` (the first) are region lines, probed on both sides with
    ``chart.classify`` under a scheme other than the sequence rule; ``cov`` = (x0, x1, y0, y1)
    [decade]; ``tol``, ``wall_dx``, ``n_start``: sampling (see :func:`line_runs`); ``only``: indices
    of the lines to sample (others are left empty); ``keep_going``: a line whose model raises one of
    :data:`MODEL_ERRORS` is left empty and recorded in ``failed`` instead of raising.

    ``bounding``: {regime index: line indices} for regimes that are intersections of one side of each of
    their lines (:func:`conjunction_lines`): those lines bound the regime as wholes, so they are neither
    split at their crossings nor probed (the geometry answers only for those regimes). ``focus`` = (x, y)
    [decade]: only the regime margins of these points are wanted (:func:`line_runs`): when every line bounds
    as a whole (the sequence rule or ``bounding``) each line is refined where it can hold a point's margin to
    it; otherwise (lines split and probed) only where it comes within the ±:data:`MAX_MARGIN` box of a point
    (a chord farther out cannot change a margin, which is capped there).
    """
    chain = is_chain(chart) or bounding is not None
    wide = _widened(case, cov)
    runs_all: list[list] = [[] for _ in lines]
    failed: list[tuple[int, str]] = []
    for k, (model, consts) in enumerate(lines):
        if only is not None and k not in only:
            continue
        try:
            runs_all[k] = line_runs(case, model, consts, cov, tol=tol, wall_dx=wall_dx, n_start=n_start, wide=wide,
                                    focus=focus, whole=chain, cap=None if chain else MAX_MARGIN, own=chain)
        except MODEL_ERRORS as exc:
            if not keep_going:
                raise
            failed.append((k, f"{type(exc).__name__}: {exc}"))
    if not chain and n_region > 1:
        runs_all[:n_region] = _split_at_crossings(runs_all[:n_region])
    parts: dict[str, list] = {k: [] for k in ("xa", "ya", "xb", "yb", "line")}
    for k, runs in enumerate(runs_all):
        for x, y in runs:
            if x.size < 2:
                continue
            keep = (np.diff(x) != 0) | (np.diff(y) != 0)
            parts["xa"].append(x[:-1][keep])
            parts["ya"].append(y[:-1][keep])
            parts["xb"].append(x[1:][keep])
            parts["yb"].append(y[1:][keep])
            parts["line"].append(np.full(int(keep.sum()), k, dtype=np.intp))
    arr = {k: (np.concatenate(v) if v else np.empty(0)) for k, v in parts.items()}
    line = arr.pop("line").astype(np.intp)
    s = line.size
    left = np.full(s, -2, dtype=np.intp)
    right = np.full(s, -2, dtype=np.intp)
    usable = np.ones(s, dtype=bool)
    names = list(chart.regime_names)
    if not chain:
        reg = line < n_region
        if reg.any():
            xa, ya, xb, yb = (arr[k][reg] for k in ("xa", "ya", "xb", "yb"))
            mx, my = 0.5 * (xa + xb), 0.5 * (ya + yb)
            dx, dy = xb - xa, yb - ya
            nrm = np.hypot(dx, dy)
            nx, ny = -dy / nrm, dx / nrm
            probe = max(_PROBE, 10.0 * tol)             # beyond the chord's own distance from the line
            px = np.concatenate([mx + probe * nx, mx - probe * nx])
            py = np.concatenate([my + probe * ny, my - probe * ny])
            sides = regime_indices(names, np.asarray(chart.classify(10.0 ** px, 10.0 ** py)))
            half = reg.sum()
            left[reg], right[reg] = sides[:half], sides[half:]
            usable[reg] = left[reg] != right[reg]
    if bounding is None:
        bounding = {r: bounding_lines(chart, name) for r, name in enumerate(names)}
    return LineGeometry(arr["xa"], arr["ya"], arr["xb"], arr["yb"], line, usable, left, right, len(lines),
                        n_region, chain, dict(bounding), tuple(cov), tuple(failed))


def chart_lines(chart):
    """(model, consts dict, role) of every line of ``chart``, region lines first (the order of the geometry)."""
    return ([(m, dict(c), "regions") for m, c in chart.region_models]
            + [(m, dict(c), "comparison") for m, c in chart.comparison_models])


def coverage(chart, x_points=(), y_points=()) -> tuple[float, float, float, float]:
    """Box the lines must cover: the chart range and the margin windows of every point [decades].

    The windows follow the points wherever they lie, so a point far outside the chart range gets
    its lines sampled where it needs them (its margin does not depend on the chart range).
    """
    fr = chart.case.flow_range
    xs = [math.log10(fr.ql_min), math.log10(fr.ql_max)] + [float(v) for v in np.ravel(x_points)]
    ys = [math.log10(fr.qg_min), math.log10(fr.qg_max)] + [float(v) for v in np.ravel(y_points)]
    return (min(xs) + WINDOW_LO - 1e-9, max(xs) + WINDOW_HI + 1e-9,
            min(ys) + WINDOW_LO - 1e-9, max(ys) + WINDOW_HI + 1e-9)


def margin_window(x0: float, y0: float, m: float = MAX_MARGIN) -> tuple[float, float, float, float]:
    """The box of half-size ``m`` around the point (x0, y0) = (log10 Q_L, log10 Q_G), in decades.

    The box [(1 - m) Q_L, (1 + m) Q_L] x [(1 - m) Q_G, (1 + m) Q_G] as (x_lo, x_hi, y_lo, y_hi).

    >>> [round(v, 6) for v in margin_window(0.0, -5.0, 0.5)]
    [-0.30103, 0.176091, -5.30103, -4.823909]
    """
    lo, hi = math.log10(1.0 - m), math.log10(1.0 + m)
    return (x0 + lo, x0 + hi, y0 + lo, y0 + hi)


class ChartGeometry:
    """The geometry of one chart, kept while the chart lives (rebuilt wider when a point needs it).

    ``lines``: (model, consts dict, role) of every line of the chart, region lines first. A geometry
    in which a line could not be sampled (:attr:`LineGeometry.failed`) is returned but not kept, so
    one query far outside a model's domain does not spoil the lines for the next.
    """

    def __init__(self, chart):
        self.lines = chart_lines(chart)
        self.geom: LineGeometry | None = None
        self.lock = threading.Lock()

    def get(self, chart, cov, keep_going: bool = False) -> LineGeometry:
        """The geometry covering ``cov`` (the kept one, or a new one covering both).

        ``keep_going``: a line whose model raises is left empty and named in ``failed`` (else the
        model's error propagates).
        """
        g = self.geom
        if g is not None and _covers(g.cov, cov):
            return g
        with self.lock:
            g = self.geom
            if g is not None and _covers(g.cov, cov):
                return g
            if g is not None:
                cov = (min(cov[0], g.cov[0]), max(cov[1], g.cov[1]), min(cov[2], g.cov[2]), max(cov[3], g.cov[3]))
            fine = {} if not getattr(chart, "preview", False) else {"tol": PREVIEW_TOL, "n_start": _PREVIEW_N_START,
                                                                     "wall_dx": 1e-2 * PREVIEW_TOL}
            new = make_geometry(chart, chart.case, [(m, c) for m, c, _ in self.lines], len(chart.region_models), cov,
                                keep_going=keep_going, **fine)
            if not new.failed:
                self.geom = new
            return new


def _covers(have, need) -> bool:
    return have[0] <= need[0] and have[1] >= need[1] and have[2] <= need[2] and have[3] >= need[3]


#: chart -> :class:`ChartGeometry`; weak keys, so a chart that is no longer used is not kept alive.
GEOMETRY_CACHE: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()
_CACHE_LOCK = threading.Lock()


def geometry_of(chart, x_points=(), y_points=(), *, keep_going: bool = False) -> tuple[ChartGeometry, LineGeometry]:
    """The cached lines of ``chart``, covering the chart range and the windows of the points.

    ``x_points``, ``y_points``: log10 Q_L and log10 Q_G of the points [decade]. Returns the
    chart's :class:`ChartGeometry` (its ``lines``) and a :class:`LineGeometry` that covers them.
    ``keep_going``: a line whose model raises one of :data:`MODEL_ERRORS` is left empty and named
    in :attr:`LineGeometry.failed` (the margins then say so) instead of raising.
    """
    with _CACHE_LOCK:
        holder = GEOMETRY_CACHE.get(chart)
        if holder is None:
            holder = ChartGeometry(chart)
            GEOMETRY_CACHE[chart] = holder
    if getattr(chart, "preview", False) and len(np.ravel(x_points)):
        # a preview asks for one point's margins: its lines are sampled over that point's window only
        xs, ys = np.ravel(x_points).astype(float), np.ravel(y_points).astype(float)
        cov = (float(xs.min()) + WINDOW_LO - 1e-9, float(xs.max()) + WINDOW_HI + 1e-9,
               float(ys.min()) + WINDOW_LO - 1e-9, float(ys.max()) + WINDOW_HI + 1e-9)
    else:
        cov = coverage(chart, x_points, y_points)
    return holder, holder.get(chart, cov, keep_going)


def regime_indices(names, regimes):
    """Index of each regime name in ``names`` (-1 if absent), vectorised.

    >>> regime_indices(["a", "b"], np.array(["b", "x", "a"])).tolist()
    [1, -1, 0]
    """
    regimes = np.asarray(regimes)
    if regimes.size == 0:
        return np.empty(0, dtype=np.intp)
    out = np.full(regimes.shape, -1, dtype=np.intp)
    if regimes.dtype.kind not in "US":
        regimes = regimes.astype(str)
    for i, n in enumerate(names):                 # a few names: one comparison each (no sort of the strings)
        out[regimes == n] = i
    return out



# =============================================================================================
# Where the lines cannot be evaluated

@dataclass(frozen=True)
class EvaluationGap:
    """A region line, or the classification, without a value over part of a box of flows.

    ``line``: index of the line in :func:`chart_lines` order (-1: the chart's classification);
    ``label``: its chart label (or "the regime classification"); ``bad``, ``total``: test points
    without a value and test points probed; ``error``: the message when the model raised.
    """

    line: int
    label: str
    bad: int
    total: int
    error: str | None = None


def evaluation_gaps(chart, box, lines=(), *, n: int = _GAP_N, undefined_ok: bool | None = None,
                    points=None) -> tuple[EvaluationGap, ...]:
    """Where the region lines ``lines`` or the classification of ``chart`` give no value in ``box``.

    Parameters
    ----------
    chart : Chart
    box : (x0, x1, y0, y1)   the flows probed, log10 Q_L and log10 Q_G [decade]
    lines : sequence of int  indices into ``chart.region_models`` of the lines that matter (e.g. the
                             lines bounding a regime)
    n : int                  the box is probed on an n x n grid, log-spaced, edges included
    undefined_ok : bool, optional   a NaN value of a line's implicit function counts as a gap
                             unless this is True; default: True under a scheme other than the
                             sequence rule (whose rule maps a member's NaN, "undefined", to a regime)
                             and False under the sequence rule (where a NaN would silently count as
                             "above the line")
    points : (x, y), optional   more points to probe, log10 Q_L and log10 Q_G [decade] (arrays)

    Returns
    -------
    tuple of EvaluationGap   empty when every probed value exists

    Notes
    -----
    A probe, not a proof: a patch without values narrower than the grid spacing can be missed.
    A model that raises one of :data:`MODEL_ERRORS` gives a gap over the whole box.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.chart.composition import Chart
    >>> from lowgmap.physics.models.boundary import PowerLawBoundary
    >>> chart = Chart.build(example_case(), [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])
    >>> evaluation_gaps(chart, (-6.0, -4.0, -6.0, -4.0), [0])
    ()
    """
    if undefined_ok is None:
        undefined_ok = not is_chain(chart)
    x0, x1, y0, y1 = (float(v) for v in box)
    u = np.linspace(x0, x1, n) if x1 > x0 else np.array([x0])
    v = np.linspace(y0, y1, n) if y1 > y0 else np.array([y0])
    GU, GV = np.meshgrid(10.0 ** u, 10.0 ** v)
    U, V = GU.ravel(), GV.ravel()
    if points is not None:
        px, py = (np.ravel(np.asarray(c, dtype=float)) for c in points)
        U, V = np.concatenate([U, 10.0 ** px]), np.concatenate([V, 10.0 ** py])
    total = int(U.size)
    out = []
    region = list(chart.region_models)
    for k in sorted(set(int(i) for i in lines)):
        if not 0 <= k < len(region):
            continue
        model, consts = region[k]
        try:
            with np.errstate(all="ignore"):
                g = np.broadcast_to(np.asarray(model.implicit(chart.case, U, V, **dict(consts)), dtype=float),
                                    U.shape)
        except MODEL_ERRORS as exc:
            out.append(EvaluationGap(k, model.label, total, total, f"{type(exc).__name__}: {exc}"))
            continue
        bad = 0 if undefined_ok else int(np.count_nonzero(np.isnan(g)))
        if bad:
            out.append(EvaluationGap(k, model.label, bad, total))
    if chart.regime_names:
        try:
            with np.errstate(all="ignore"):
                reg = np.asarray(chart.classify(U, V)).ravel()
        except MODEL_ERRORS as exc:
            out.append(EvaluationGap(-1, "the regime classification", total, total, f"{type(exc).__name__}: {exc}"))
        else:
            names = set(chart.regime_names)
            bad = int(sum(1 for r in reg.tolist() if r not in names))
            if bad:
                out.append(EvaluationGap(-1, "the regime classification", bad, total))
    return tuple(out)
