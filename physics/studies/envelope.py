r"""Margins of operating points and envelopes on a chart's sampled lines, solved in batches.

A chart's lines near the points of interest are held as chords in log-log axes (a geometry of
:mod:`lowgmap.physics.chart.margins`). On those chords this module measures

* the symmetric margin of a point in its regime (:func:`queue_point_margin`), and
* the worst-case symmetric margin over an operating envelope (:func:`envelope_margin`,
  :func:`queue_envelope_margin`),

each by the closed-form minimiser :func:`lowgmap.physics.chart.margins.box_margin_on_segments`. The
``queue_*`` functions add their chords to a :class:`MarginBatch`, which solves the chords of many
questions (many designs of a sweep) in one vectorised call and then hands each question its answer.

Worst-case margin over an operating envelope
--------------------------------------------
For an envelope :math:`[Q_{L,lo}, Q_{L,hi}] \times [Q_{G,lo}, Q_{G,hi}]` lying in the wanted
regime R, the worst symmetric margin of its points is the largest m for which the grown rectangle

.. math:: [(1-m) Q_{L,lo},\ (1+m) Q_{L,hi}] \times [(1-m) Q_{G,lo},\ (1+m) Q_{G,hi}]

stays in R: the ±m boxes of all points of the envelope together cover exactly that rectangle
(the union of the intervals :math:`[(1-m)q, (1+m)q]` over :math:`q \in [q_{lo}, q_{hi}]` is
:math:`[(1-m)q_{lo}, (1+m)q_{hi}]`). It is found like the point margin, on the same chords of the
lines bounding R: each chord is split where it crosses the four edge lines of the envelope, and on
each piece the distance to the envelope in the maximum norm of relative flow changes,

.. math:: \max\left(d_L, d_G\right), \quad
          d_L = \begin{cases} 1 - Q_L'/Q_{L,lo} & Q_L' < Q_{L,lo} \\ 0 & \text{inside} \\
          Q_L'/Q_{L,hi} - 1 & Q_L' > Q_{L,hi} \end{cases}

has the closed-form minimiser of :func:`lowgmap.physics.chart.margins.box_margin_on_segments` (with the edge as
reference point). A degenerate envelope (a point) gives the point's symmetric margin. When a line
bounding R passes through the envelope, some points of it lie in other regimes; the worst-case
margin is then the most negative signed margin of the envelope's points (-m of a point in another
regime, m being its margin in its own regime), estimated on a grid of the envelope (``envelope_grid``
points a side, corners and edges included) and never above 0.
"""
from __future__ import annotations

import math

import numpy as np

from lowgmap.physics.chart import lines as _lines
from lowgmap.physics.chart import margins as _mg
from lowgmap.physics.studies.design_space import check_flow_range
from lowgmap.physics.surrogates import in_chart_solves

__all__ = ["envelope_margin", "MarginBatch", "queue_point_margin", "queue_envelope_margin"]


class MarginBatch:
    """Closed-form box margins of many chords, solved together (one vectorised call per chunk).

    ``add(lines, la, al, lb, be, finish)`` queues the chords of one question (``la, al, lb, be`` as
    in :func:`lowgmap.physics.chart.margins.box_margin_on_segments`, ``lines`` the line index of
    each chord); :meth:`resolve` solves them all and calls ``finish(m, lines)`` in the order of the
    questions, with the margin of every chord. Small questions cost little this way (the solver
    has a fixed cost per call).

    Examples
    --------
    Two questions, each a horizontal chord above its point: 50 % and 20 % above, so the boxes
    reach them at m = 0.5 and m = 0.2:

    >>> import math
    >>> batch, got = MarginBatch(), []
    >>> batch.add([0], [-1.0], [2.0], [math.log(1.5)], [0.0], lambda m, lines: got.append(float(m[0])))
    >>> batch.add([3], [-1.0], [2.0], [math.log(1.2)], [0.0], lambda m, lines: got.append(float(m[0])))
    >>> batch.resolve()
    >>> [round(m, 12) for m in got]
    [0.5, 0.2]
    """

    def __init__(self):
        self.items: list = []

    def add(self, lines, la, al, lb, be, finish) -> None:
        self.items.append((np.asarray(lines, dtype=np.intp).ravel(), np.ravel(la), np.ravel(al), np.ravel(lb),
                           np.ravel(be), finish))

    def resolve(self) -> None:
        items, self.items = self.items, []
        if not items:
            return
        parts = [np.concatenate([it[i] for it in items]) for i in range(1, 5)]
        if parts[0].size:
            m, _ = _mg.box_margin_on_segments(*parts)
        else:
            m = np.empty(0)
        pos = 0
        for lines, la, *_, finish in items:
            n = la.size
            finish(m[pos:pos + n], lines)
            pos += n


def _best(m, lines) -> tuple[float, int]:
    """(capped minimum, line of the minimum or -1)."""
    if m.size == 0:
        return _mg.MAX_MARGIN, -1
    j = int(np.argmin(m))
    best = float(m[j])
    if not best < _mg.MAX_MARGIN:
        return _mg.MAX_MARGIN, -1
    return best, int(lines[j])


def queue_point_margin(g, x0: float, y0: float, r: int, batch: MarginBatch, finish) -> None:
    """Queue the symmetric margin of a point in regime ``r`` on the chords of ``g``.

    Parameters
    ----------
    g : chord geometry of a chart (:mod:`lowgmap.physics.chart.margins`) covering the point's window
    x0, y0 : float   log10 of the point's Q_L and Q_G [log10(m^3/s)]
    r : int          index of the point's regime in the chart's ``regime_names``
    batch : MarginBatch
    finish : callable(m, line)   called by ``batch.resolve()`` with the margin (capped at
                     :data:`lowgmap.physics.chart.margins.MAX_MARGIN`) and the index of the
                     limiting line (-1 when the margin is capped)
    """
    idx = np.nonzero(g.adjacent(r))[0] if r >= 0 else np.empty(0, dtype=np.intp)
    L = _lines.LN10
    xa, ya, xb, yb = g.xa[idx], g.ya[idx], g.xb[idx], g.yb[idx]
    batch.add(g.line[idx], (xa - x0) * L, (xb - xa) * L, (ya - y0) * L, (yb - ya) * L,
              lambda m, lines: finish(*_best(m, lines)))


def _rect_parts(xa, ya, xb, yb, rect):
    """Chords split at the envelope's edge lines; (la, al, lb, be) of each piece, shape (5, n).

    On a piece the relative distance to the envelope along each axis is 0 (inside the range) or
    that to the nearer edge, which :func:`lowgmap.physics.chart.margins.box_margin_on_segments` minimises with
    the edge as reference point.
    """
    xlo, xhi, ylo, yhi = rect
    dx, dy = xb - xa, yb - ya
    cuts = [np.zeros_like(xa), np.ones_like(xa)]
    with np.errstate(divide="ignore", invalid="ignore"):
        for lev, a, d in ((xlo, xa, dx), (xhi, xa, dx), (ylo, ya, dy), (yhi, ya, dy)):
            t = (lev - a) / d
            cuts.append(np.where(np.isfinite(t) & (t > 0) & (t < 1), t, 0.0))
    T = np.sort(np.stack(cuts), axis=0)
    ta, tb = T[:-1], T[1:]
    L = _lines.LN10

    def parts(a, d, lo, hi):
        A, B = a + ta * d, a + tb * d
        M = 0.5 * (A + B)
        ref = np.where(M < lo, lo, hi)
        inside = (M >= lo) & (M <= hi)
        return np.where(inside, 0.0, (A - ref) * L), np.where(inside, 0.0, (B - A) * L)

    la, al = parts(xa, dx, xlo, xhi)
    lb, be = parts(ya, dy, ylo, yhi)
    return la, al, lb, be


def _rect_on(g, rect, r: int, batch: MarginBatch, finish) -> None:
    """Queue the grown-rectangle margin of regime ``r``: finish(m, line, per-line minima).

    ``rect`` = (x_lo, x_hi, y_lo, y_hi) in log10 flows. m = 0 when a chord bounding r touches the
    rectangle; capped at :data:`lowgmap.physics.chart.margins.MAX_MARGIN` (then the line is -1).
    """
    idx = np.nonzero(g.adjacent(r))[0] if r >= 0 else np.empty(0, dtype=np.intp)
    la, al, lb, be = _rect_parts(g.xa[idx], g.ya[idx], g.xb[idx], g.yb[idx], rect)
    lines = np.broadcast_to(g.line[idx], la.shape)

    def done(m, ln):
        per_line = np.full(g.n_lines, np.inf)
        np.minimum.at(per_line, ln, m)
        best, k = _best(m, ln)
        finish(best, k, np.minimum(per_line, _mg.MAX_MARGIN))
    batch.add(lines, la, al, lb, be, done)


@in_chart_solves
def envelope_margin(chart, ql_range, qg_range, regime: str | None = None, *, grid_points: int = 9) -> dict:
    r"""Worst-case symmetric margin over an operating envelope (a rectangle of flow rates).

    .. math:: m_{env} = \min_{(Q_L, Q_G) \in E} m(Q_L, Q_G)
              = \max\{m : [(1-m)Q_{L,lo}, (1+m)Q_{L,hi}] \times [(1-m)Q_{G,lo}, (1+m)Q_{G,hi}] \subset R\}

    Parameters
    ----------
    chart : Chart
    ql_range, qg_range : (float, float)   the envelope [m^3/s], low <= high (equal: a point)
    regime : str, optional   the wanted regime R (default: the regime at the envelope's centre in
                             log-log axes)
    grid_points : int        points per side of the grid used when a boundary crosses the envelope

    Returns
    -------
    dict
        ``margin`` (signed worst case: > 0 wholly inside R with that margin, <= 0 when a boundary
        of R crosses the envelope, then minus the largest margin of a point of the envelope in
        another regime), ``inside`` (bool), ``regime`` (R), ``centre_regime``, ``limiting`` (name of
        the line that sets the margin or crosses the envelope, None if none), ``line_margins``
        (name -> grown-rectangle margin to that line alone, for the lines bounding R).

    Notes
    -----
    See the module notes. Exact (closed form on the chart's sampled lines) when the envelope lies
    inside R; estimated on the grid otherwise.

    Examples
    --------
    Between the lines Q_G = 0.1 Q_L and Q_G = 10 Q_L an envelope of ratios Q_G/Q_L from 0.5 to 2
    has (1 - m)/(1 + m) = 0.1/0.5 (both lines are as close):

    >>> from lowgmap.physics.models.boundary import PowerLawBoundary
    >>> from lowgmap.physics.chart.composition import Chart
    >>> from lowgmap.physics.examples import example_case
    >>> chart = Chart.build(example_case(), [PowerLawBoundary("low", 0.1, 1.0, "a", "b"),
    ...                            PowerLawBoundary("high", 10.0, 1.0, "b", "c")])
    >>> res = envelope_margin(chart, (1e-5, 2e-5), (1e-5, 2e-5))
    >>> round(res["margin"], 9), round((1 - 0.2) / (1 + 0.2), 9), res["inside"]
    (0.666666667, 0.666666667, True)
    """
    ql_lo, ql_hi = check_flow_range("ql_range", ql_range)
    qg_lo, qg_hi = check_flow_range("qg_range", qg_range)
    rect = (math.log10(ql_lo), math.log10(ql_hi), math.log10(qg_lo), math.log10(qg_hi))
    names = list(chart.regime_names)
    if regime is not None:
        _mg.regime_index(chart, regime)
    _, g = _lines.geometry_of(chart, list(rect[:2]), list(rect[2:]))
    got: list = []
    batch = MarginBatch()
    queue_envelope_margin(chart, g, rect, regime, grid_points, names, batch, got.append)
    batch.resolve()
    out = got[0]
    lm = out.pop("line_margins_idx")
    lines = [m for m, _ in chart.region_models]
    out["line_margins"] = {lines[k].name: float(v) for k, v in enumerate(lm[:len(lines)]) if np.isfinite(v)}
    k = out.pop("limiting_idx")
    out["limiting"] = lines[k].name if k >= 0 else None
    return out


def queue_envelope_margin(chart, g, rect, regime, grid_points, names, batch: MarginBatch, finish) -> None:
    """Queue the worst-case margin of an envelope (see :func:`envelope_margin`) on the chords of ``g``.

    Parameters
    ----------
    chart : Chart
    g : chord geometry of ``chart`` (:mod:`lowgmap.physics.chart.margins`) covering the envelope's window
    rect : (float, float, float, float)   log10 of Q_L,lo, Q_L,hi, Q_G,lo, Q_G,hi [log10(m^3/s)]
    regime : str or None   the wanted regime (None: the regime at the envelope's centre)
    grid_points : int      grid points a side when a boundary crosses the envelope
    names : list of str    the chart's regime names
    batch : MarginBatch
    finish : callable(dict)
        called with ``regime``, ``centre_regime``, ``margin``, ``inside``, ``limiting_idx`` (line
        index or -1) and ``line_margins_idx`` (array over the lines, NaN for lines not bounding the
        regime): at once when the wanted regime is not on the chart, else by ``batch.resolve()``.
    """
    xlo, xhi, ylo, yhi = rect
    xc, yc = 0.5 * (xlo + xhi), 0.5 * (ylo + yhi)
    centre = str(chart.classify(10.0 ** xc, 10.0 ** yc))
    wanted = regime if regime is not None else centre
    r = names.index(wanted) if wanted in names else -1
    res = {"regime": wanted, "centre_regime": centre, "margin": math.nan, "inside": False,
           "limiting_idx": -1, "line_margins_idx": np.full(g.n_lines, np.nan)}
    if r < 0:
        finish(res)
        return

    def done(m, k, per_line):
        res["line_margins_idx"] = np.where(np.isfinite(per_line), per_line, np.nan)
        if centre == wanted and m > 0:
            res.update(margin=float(m), inside=True, limiting_idx=k)
            finish(res)
            return
        n = max(2, int(grid_points))
        X, Y = np.meshgrid(np.linspace(xlo, xhi, n), np.linspace(ylo, yhi, n))
        X, Y = X.ravel(), Y.ravel()
        reg = np.asarray(chart.classify(10.0 ** X, 10.0 ** Y))
        ridx = _lines.regime_indices(names, reg)
        mm, _ = _mg.regime_margins(g, X, Y, ridx)
        signed = np.where(reg == wanted, mm, -mm)
        signed = np.where(ridx >= 0, signed, -_mg.MAX_MARGIN)        # a point without a regime: worst
        res.update(margin=min(float(np.min(signed)), 0.0), inside=False, limiting_idx=k if m <= 0 else -1)
        finish(res)
    _rect_on(g, rect, r, batch, done)
