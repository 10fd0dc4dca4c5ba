r"""Margins of an operating point to the boundaries of a chart, operating envelopes, robust point.

Everything here works on a :class:`~lowgmap.physics.chart.composition.Chart` through its public interface: the
region-defining lines ``chart.region_models``, the comparison lines ``chart.comparison_models``,
``chart.classify``, ``chart.case.flow_range`` and, when the chart has them, ``chart.scheme`` and
``chart.bounding_models``. A line is a :class:`~lowgmap.physics.models.boundary.BoundaryModel` used through its
``implicit`` function and either its own parametric ``line_pieces`` or ``qg_of_ql``; so every model
family (closed tubes, corners, open channels, measured lines) and every regime scheme works.

Quantities (all flows volumetric at local conditions [m^3/s])
-------------------------------------------------------------
*Axis factors.* Along the liquid axis (Q_G held) and the gas axis (Q_L held), the crossing of a
line is reported as the factor :math:`f = Q_\mathrm{cross}/Q`: 1.8 means the flow can rise by 80 %
before it reaches the line, 0.4 that it can fall by 60 %. Only crossings inside the search window
(the chart range, widened to contain the point) count; otherwise the factor is None.

*Log distance.* The shortest Euclidean distance from the point to the line in the plane
(log10 Q_L, log10 Q_G), inside the same window, with the nearest point and the unit vector toward it.

*Symmetric margin.* The largest m in [0, 1) such that every point of the box

.. math:: [(1-m) Q_L, (1+m) Q_L] \times [(1-m) Q_G, (1+m) Q_G]

lies in the regime of the point. The box is connected, so it keeps one regime exactly until it
touches a *regime boundary*: a piece of a region-defining line with different regimes on its two
sides. For one piece the box of half-size m first touches it at

.. math:: m_k = \min_{(Q_L', Q_G') \in \text{piece}}
          \max\left(\left|\frac{Q_L'}{Q_L} - 1\right|, \left|\frac{Q_G'}{Q_G} - 1\right|\right)

(a distance in the maximum norm of relative flow changes), and m is the smallest m_k over the
pieces that bound the point's regime. Under the sequence rule these are the whole lines 0..i
(``chart.bounding_models``); under other schemes the pieces are found by classifying both sides
of every sampled chord (lines are first split where they cross each other). The box is not
limited to the chart range: the lines are sampled over the point's ±:data:`MAX_MARGIN` box
wherever the point lies (:func:`lowgmap.physics.chart.lines.coverage`), as far as the models give
them, as in :meth:`Chart.classify`; so the margin of a point does not depend on the chart range. A
margin of :data:`MAX_MARGIN` means that no boundary comes closer (the box would reach a flow 1000
times smaller); then no boundary is named.

What a result claims
--------------------
:class:`PointMargins`, :class:`EnvelopeCheck` and :class:`RobustPoint` say whether their answer is
*established*, over which flows it was searched, and if not, why (plain sentences naming the line
and the flows): a line that raises or (under the sequence rule) gives NaN over part of the box, a
classification without a regime there, a regime that cannot be computed at the point, or a
margin capped at :data:`MAX_MARGIN` because no boundary was found within the ±99.9 % box. They
also say when the point or envelope lies outside the drawn chart range. :func:`margin_verdict`
turns the margins and the requirement into a :class:`Verdict` in words ("met", "NOT MET", "not
established"; "in the intended regime", "NOT IN THE INTENDED REGIME", "no intended regime
stated") with its basis and limits: the one statement every view shows. It never says "met" for a
margin that is not established.

Which lines are reported: comparison lines whole; region-defining lines where they are drawn as
boundaries: whole under the sequence rule, only where they separate two regimes under other
schemes (as :meth:`Chart.build` draws them).

Method
------
Each line is sampled once per chart (cached while the chart lives; the point can move freely) as
a polyline in (log10 Q_L, log10 Q_G), refined until every chord lies within 1e-7 decade of the
line (:mod:`lowgmap.physics.chart.lines`, with the one adaptive sampler of
:mod:`lowgmap.physics.chart.sampling`): from the model's ``line_pieces`` when it has them (evaluated
for the chart range widened by the margin windows), else from ``qg_of_ql``. Where ``qg_of_ql`` has
no value the whole column lies on one side of the line (decided by the sign of ``implicit``, as the
chart does); a change of side between columns is a vertical piece, located by bisection to 1e-11
decade. Axis crossings found on the chords are polished by secant steps on the model's
``implicit`` function. On each straight chord the box margin has a closed-form
minimiser (:func:`box_margin_on_segments`), so the symmetric margin is exact for the sampled
polyline: its error is that of the sampling, below 5e-7 in m.

Internal interfaces for the studies (Monte Carlo, sweeps): :func:`regime_margins` (margins of many
points on a :class:`~lowgmap.physics.chart.lines.LineGeometry`), its deferred form finished by
:func:`resolve_deferred`, :func:`uncached_regime_margins` (lines sampled afresh, e.g. for a perturbed
case) and :func:`check_point`.

Examples
--------
>>> from lowgmap.physics.examples import example_case
>>> from lowgmap.physics.models.boundary import PowerLawBoundary
>>> from lowgmap.physics.chart.composition import Chart
>>> chart = Chart.build(example_case(), [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])
>>> far = point_margins(chart, 1e-5, 1e3)         # far above the chart, no boundary within ±99.9 %
>>> far.established, far.outside_chart, margin_verdict(far, 0.3).margin_status
(False, True, 'not established')
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lowgmap.physics.chart.lines import (LN10, MAX_MARGIN, MODEL_ERRORS, PREVIEW_TOL, WINDOW_HI, WINDOW_LO,
                                         LineGeometry, bounding_lines, conjunction_lines, evaluation_gaps, geometry_of,
                                         is_chain, make_geometry, margin_window, regime_indices)
from lowgmap.physics.surrogates import in_chart_solves
from lowgmap.physics.validate import finite, positive

__all__ = ["MAX_MARGIN", "DIRECTIONS", "BoundaryMargin", "PointMargins", "point_margins", "symmetric_margins",
           "CornerCheck", "EnvelopeLine", "EnvelopeCheck", "envelope_check", "RobustPoint", "robust_point",
           "Verdict", "margin_verdict", "REGIME_STATUSES", "MARGIN_STATUSES",
           "regime_index", "box_margin_on_segments", "regime_margins", "resolve_deferred",
           "uncached_regime_margins", "check_point", "PREVIEW_CAVEAT", "PreviewMargin", "preview_margin"]

#: The four axis directions of :attr:`PointMargins.limits`.
DIRECTIONS = ("ql_up", "ql_down", "qg_up", "qg_down")

_CHUNK = 2_000_000                            # points x segments per block in vectorised margins
_BEYOND = 1e-6                                # gaps are probed over the ±m (1 + _BEYOND) box: just past the touch

#: The words of :attr:`Verdict.regime_status`: in it, not in it, none stated.
REGIME_STATUSES = ("in the intended regime", "NOT IN THE INTENDED REGIME", "no intended regime stated")
#: Caveat of the margins of a preview chart (``Chart.build(..., preview=True)``, a slider being dragged).
PREVIEW_CAVEAT = ("Preview while a value is being dragged: the lines were sampled to 1e-5 decade, so this margin "
                  "is within about 5e-5 of the value computed once the value is released (to 1e-7 decade); "
                  "the released value is the one to use.")
#: The words of :attr:`Verdict.margin_status`.
MARGIN_STATUSES = ("met", "NOT MET", "not established")


# =============================================================================================
# Words: the sentences of the results (flows with 4 significant digits, percentages with 3)

def _q(v: float) -> str:
    return f"{v:.4g}"


def _pct(m: float) -> str:
    return f"{100.0 * m:.3g} %"


def _flows_text(ql_lo, ql_hi, qg_lo, qg_hi) -> str:
    """'Q_L a to b m³/s, Q_G c to d m³/s'."""
    return f"Q_L {_q(ql_lo)} to {_q(ql_hi)} m³/s, Q_G {_q(qg_lo)} to {_q(qg_hi)} m³/s"


def _box_flows(box) -> tuple[float, float, float, float]:
    return tuple(10.0 ** float(v) for v in box)


def _outside_chart(chart, ql_lo, ql_hi, qg_lo, qg_hi, what: str) -> tuple[bool, str]:
    """Whether flows of [ql_lo, ql_hi] x [qg_lo, qg_hi] lie outside the chart range, with a sentence."""
    fr = chart.case.flow_range
    rel = 1e-9
    parts = []
    if ql_lo < fr.ql_min * (1 - rel):
        parts.append("liquid flow below it")
    if ql_hi > fr.ql_max * (1 + rel):
        parts.append("liquid flow above it")
    if qg_lo < fr.qg_min * (1 - rel):
        parts.append("gas flow below it")
    if qg_hi > fr.qg_max * (1 + rel):
        parts.append("gas flow above it")
    if not parts:
        return False, ""
    return True, (f"{what} lies outside the drawn chart range "
                  f"({_flows_text(fr.ql_min, fr.ql_max, fr.qg_min, fr.qg_max)}), with {' and '.join(parts)}: "
                  f"the chart does not show it, and the sources of the models may not cover it.")


def _gap_reasons(gaps, box) -> list[str]:
    """Sentences for :func:`lowgmap.physics.chart.lines.evaluation_gaps` results over ``box`` [decade]."""
    where = _flows_text(*_box_flows(box))
    out = []
    for gp in gaps:
        name = gp.label if gp.line < 0 else f"the line {gp.label}"
        if gp.error is not None:
            out.append(f"{name[0].upper()}{name[1:]} could not be evaluated over {where} ({gp.error}).")
        else:
            out.append(f"{name[0].upper()}{name[1:]} gives no value at {gp.bad} of {gp.total} test points over "
                       f"{where}, so the regime there is assumed, not computed.")
    return out


def _failed_reasons(holder_lines, g: LineGeometry, wanted) -> list[str]:
    """Sentences for the lines among ``wanted`` that could not be sampled in ``g``."""
    where = _flows_text(*_box_flows(g.cov))
    return [f"The line {holder_lines[k][0].label} could not be sampled over {where} ({msg})."
            for k, msg in g.failed if k in wanted]


def _cap_reason(regime: str, box) -> str:
    return (f"No boundary of the regime \"{regime}\" was found within the searched ±{_pct(MAX_MARGIN)} box "
            f"({_flows_text(*_box_flows(box))}): the margin is at least ±{_pct(MAX_MARGIN)} on the lines as "
            f"modelled, but no boundary limits it, so it is not established.")


# =============================================================================================
# Box margins on chords

def box_margin_on_segments(la, al, lb, be):
    r"""Smallest symmetric box margin reached on straight log-log segments (closed form).

    A segment t in [0, 1] runs from (Q_L/Q_L0, Q_G/Q_G0) = (e^la, e^lb) with log changes al, be:
    :math:`a(t) = e^{la + al\,t} - 1`, :math:`b(t) = e^{lb + be\,t} - 1`. The function
    minimised is

    .. math:: m(t) = \max(|a(t)|, |b(t)|)

    Each of |a|, |b| is monotone or V-shaped, so an interior minimum of their maximum lies where
    |a| = |b|: a = b (closed form) or a = -b (convex equation, Newton from the side where it is
    positive); the ends and the zeros of a and b are checked too.

    Parameters
    ----------
    la, lb : array   natural logs of Q_L/Q_L0 and Q_G/Q_G0 at the segment start [-]
    al, be : array   their changes along the segment [-]

    Returns
    -------
    (m, t) : arrays   the minimum of m(t) and where it is reached

    Examples
    --------
    A horizontal line 50 % above the point, from Q_L/Q_L0 = e^-1 to e^+1: the box reaches it at
    m = 0.5, right above the point:

    >>> m, t = box_margin_on_segments([-1.0], [2.0], [np.log(1.5)], [0.0])
    >>> round(float(m[0]), 12), round(float(t[0]), 12)
    (0.5, 0.5)
    """
    la, al, lb, be = (np.atleast_1d(np.asarray(v, dtype=float)) for v in (la, al, lb, be))
    cands = [np.zeros_like(la), np.ones_like(la)]
    with np.errstate(all="ignore"):
        cands.append(-la / al)                               # a = 0
        cands.append(-lb / be)                               # b = 0
        cands.append((lb - la) / (al - be))                  # a = b
        # a = -b:  h(t) = e^(la + al t) + e^(lb + be t) - 2 = 0, h convex
        ts = (np.log(np.abs(be)) + lb - np.log(np.abs(al)) - la) / (al - be)
        ts = np.where((al * be < 0) & np.isfinite(ts), np.clip(ts, 0.0, 1.0), 1.0)

        def h(t):
            return np.exp(la + al * t) + np.exp(lb + be * t) - 2.0

        def dh(t):
            return al * np.exp(la + al * t) + be * np.exp(lb + be * t)

        for p, q in ((np.zeros_like(la), ts), (ts, np.ones_like(la))):
            hp, hq = h(p), h(q)
            has = (hp * hq <= 0) & (q > p)
            t = np.where(hp >= hq, p, q)                     # start where h is larger (>= 0)
            for _ in range(40):
                d = dh(t)
                step = np.where(d != 0, h(t) / np.where(d != 0, d, 1.0), 0.0)
                t = np.clip(t - step, p, q)
                if not np.any(np.abs(step[has]) > 1e-15):
                    break
            cands.append(np.where(has, t, np.nan))
        T = np.stack(cands)
        T = np.where(np.isfinite(T), np.clip(T, 0.0, 1.0), 0.0)
        M = np.maximum(np.abs(np.expm1(la + al * T)), np.abs(np.expm1(lb + be * T)))
    j = np.argmin(M, axis=0)
    cols = np.arange(la.size)
    return M[j, cols], T[j, cols]


def _seg_bounds(xa, ya, xb, yb, x0, y0):
    """(upper, lower) bounds of the box margin on chords (broadcast): the better end, and a bound below."""
    with np.errstate(over="ignore", invalid="ignore"):
        a0 = np.abs(np.expm1((xa - x0) * LN10))
        a1 = np.abs(np.expm1((xb - x0) * LN10))
        b0 = np.abs(np.expm1((ya - y0) * LN10))
        b1 = np.abs(np.expm1((yb - y0) * LN10))
    upper = np.minimum(np.maximum(a0, b0), np.maximum(a1, b1))
    ma = np.where((np.minimum(xa, xb) <= x0) & (np.maximum(xa, xb) >= x0), 0.0, np.minimum(a0, a1))
    mb = np.where((np.minimum(ya, yb) <= y0) & (np.maximum(ya, yb) >= y0), 0.0, np.minimum(b0, b1))
    return upper, np.maximum(ma, mb)


def _closed(xa, ya, xb, yb, x0, y0):
    """Closed-form box margin on chords: (m, x_touch, y_touch)."""
    m, t = box_margin_on_segments((xa - x0) * LN10, (xb - xa) * LN10, (ya - y0) * LN10, (yb - ya) * LN10)
    return m, xa + t * (xb - xa), ya + t * (yb - ya)


def _per_line_min(values, lines, n):
    """(minimum, index of the minimum) of ``values`` grouped by line index (inf, -1 if none)."""
    best = np.full(n, np.inf)
    arg = np.full(n, -1, dtype=np.intp)
    if values.size:
        order = np.lexsort((values, lines))
        first = np.ones(order.size, dtype=bool)
        first[1:] = lines[order][1:] != lines[order][:-1]
        sel = order[first]
        best[lines[sel]] = values[sel]
        arg[lines[sel]] = sel
    return best, arg


def _point_box(g: LineGeometry, x0: float, y0: float, r: int):
    """Box margins of one point: per line (m, x, y) over its usable chords, and for its regime r."""
    n = g.n_lines
    m_line = np.full(n, np.inf)
    t_line = np.full((n, 2), np.nan)
    reg = (np.inf, -1, math.nan, math.nan)
    if g.xa.size == 0:
        return m_line, t_line, reg
    adj = g.adjacent(r) if r >= 0 else np.zeros(g.xa.size, dtype=bool)
    upper, lower = _seg_bounds(g.xa, g.ya, g.xb, g.yb, x0, y0)
    ub_line, _ = g.line_min(np.where(g.usable, upper, np.inf))
    ub_reg = float(upper[adj].min()) if adj.any() else np.inf
    keep = np.nonzero(g.usable & (lower < 1.0) & ((lower <= ub_line[g.line]) | (adj & (lower <= ub_reg))))[0]
    if keep.size == 0:
        return m_line, t_line, reg
    m, tx, ty = _closed(g.xa[keep], g.ya[keep], g.xb[keep], g.yb[keep], x0, y0)
    best, arg = _per_line_min(m, g.line[keep], n)
    has = arg >= 0
    m_line[has] = best[has]
    t_line[has, 0] = tx[arg[has]]
    t_line[has, 1] = ty[arg[has]]
    a = adj[keep]
    if a.any():
        j = np.nonzero(a)[0][np.argmin(m[a])]
        reg = (float(m[j]), int(g.line[keep][j]), float(tx[j]), float(ty[j]))
    return m_line, t_line, reg


def regime_margins(g: LineGeometry, x0, y0, ridx, pending=None, ids=None):
    """Symmetric margins of many points in their regimes, on the chords of ``g``: (m, limiting line).

    Parameters
    ----------
    g : LineGeometry   the lines (e.g. from :func:`lowgmap.physics.chart.lines.geometry_of`)
    x0, y0 : array     log10 Q_L and log10 Q_G of the points [decade]
    ridx : array of int   regime index of each point in the chart's ``regime_names`` (-1: none)
    pending : list, optional   defer the closed-form step: its inputs are appended here, to be
                       finished by :func:`resolve_deferred` (the limiting lines are then untracked
                       and m is not capped yet)
    ids : array of int, optional   with ``pending``: the number of each point in the caller's array

    Returns
    -------
    (m, line) : arrays   margin [fraction], capped at :data:`MAX_MARGIN`, and the index of the
                  limiting line (-1 for none)

    Notes
    -----
    Per regime, every chord bounding it is bounded below and above for each point; the chords that
    can beat the best end point are solved in closed form (exact global minimum).
    """
    x0 = np.asarray(x0, dtype=float)
    y0 = np.asarray(y0, dtype=float)
    m = np.full(x0.size, np.inf)
    lim = np.full(x0.size, -1, dtype=np.intp)
    for r in np.unique(ridx[ridx >= 0]) if x0.size else ():
        pts = np.nonzero(ridx == r)[0]
        seg = np.nonzero(g.adjacent(int(r)))[0]
        if seg.size == 0:
            continue
        xa, ya, xb, yb, ln = g.xa[seg], g.ya[seg], g.xb[seg], g.yb[seg], g.line[seg]
        step = max(1, _CHUNK // seg.size)
        for s in range(0, pts.size, step):
            p = pts[s:s + step]
            px, py = x0[p, None], y0[p, None]
            upper, lower = _seg_bounds(xa[None, :], ya[None, :], xb[None, :], yb[None, :], px, py)
            jb = np.argmin(upper, axis=1)
            best = upper[np.arange(p.size), jb]
            better = best < m[p]
            m[p[better]] = best[better]
            lim[p[better]] = ln[jb[better]]
            i, j = np.nonzero((lower <= best[:, None]) & (lower < 1.0))
            if i.size == 0:
                continue
            if pending is not None:
                gx, gy = x0[p][i], y0[p][i]
                pending.append((np.asarray(ids)[p][i], (xa[j] - gx) * LN10, (xb[j] - xa[j]) * LN10,
                                (ya[j] - gy) * LN10, (yb[j] - ya[j]) * LN10))
                continue
            mm, _, _ = _closed(xa[j], ya[j], xb[j], yb[j], x0[p][i], y0[p][i])
            order = np.lexsort((mm, i))
            first = np.ones(order.size, dtype=bool)
            first[1:] = i[order][1:] != i[order][:-1]
            sel = order[first]
            q = p[i[sel]]
            better = mm[sel] < m[q]
            m[q[better]] = mm[sel][better]
            lim[q[better]] = ln[j[sel]][better]
    if pending is None:
        lim[m >= MAX_MARGIN] = -1
        np.minimum(m, MAX_MARGIN, out=m)
    return m, lim


def resolve_deferred(pending, m):
    """Finish the margins deferred by :func:`regime_margins` in place and cap them; returns ``m``.

    ``pending``: the list filled by :func:`regime_margins`; ``m``: the margins it returned, indexed
    by the ``ids`` given to it. Sets m[ids] = min(m[ids], closed-form minima), then caps at
    :data:`MAX_MARGIN`.
    """
    if pending:
        ids = np.concatenate([p[0] for p in pending])
        parts = [np.concatenate([p[i] for p in pending]) for i in range(1, 5)]
        mm, _ = box_margin_on_segments(*parts)
        np.minimum.at(m, ids, mm)
    np.minimum(m, MAX_MARGIN, out=m)
    return m


def uncached_regime_margins(chart, case, x0, y0, ridx, pending=None, ids=None, *, tol=1e-6, wall_dx=1e-8,
                            n_start=17, focused=True):
    """Regime margins of points with the region lines of ``chart`` sampled afresh for ``case``.

    For a chart whose lines are not worth caching (one Monte Carlo draw, one design of a sweep):
    only the lines that bound the points' regimes are sampled, at the coarser ``tol`` [decade],
    ``wall_dx`` [decade] and ``n_start``, over the windows of the points. Arguments and result as
    :func:`regime_margins`.

    When every regime of the points is the intersection of one side of each of its lines
    (:func:`lowgmap.physics.chart.lines.conjunction_lines`: every regime of the sequence rule, the separating
    regimes of the corner family) those lines are sampled as wholes, neither split nor probed, and, with
    ``focused``, refined to ``tol`` only where they can hold a point's margin
    (:func:`lowgmap.physics.chart.lines.line_runs`): the margins are those of the lines refined everywhere (to
    the sampling tolerance), for a fraction of the samples. Otherwise the lines are split and probed, and with
    ``focused`` refined only within the ±:data:`MAX_MARGIN` box of a point.
    """
    lines = [(m, dict(c)) for m, c in chart.region_models]
    n_region = len(lines)
    cov = (float(np.min(x0)) + WINDOW_LO - 1e-9, float(np.max(x0)) + WINDOW_HI + 1e-9,
           float(np.min(y0)) + WINDOW_LO - 1e-9, float(np.max(y0)) + WINDOW_HI + 1e-9)
    names = list(chart.regime_names)
    regs = [int(r) for r in np.unique(ridx[ridx >= 0])] if np.size(ridx) else []
    focus = None
    if focused and regs:                  # the points with a regime (the others get no margin)
        keep = np.asarray(ridx) >= 0
        focus = (np.asarray(x0)[keep], np.asarray(y0)[keep])
    conj = {r: conjunction_lines(chart, names[r]) for r in regs}
    if regs and all(v is not None for v in conj.values()):
        only = set().union(*(set(v) for v in conj.values()))
        g = make_geometry(chart, case, lines, n_region, cov, tol=tol, wall_dx=wall_dx, n_start=n_start, only=only,
                          bounding=conj, focus=focus)
        return regime_margins(g, x0, y0, ridx, pending, ids)
    only = None
    if is_chain(chart):
        only = set()
        for r in regs:
            only |= set(bounding_lines(chart, names[r]))
    g = make_geometry(chart, case, lines, n_region, cov, tol=tol, wall_dx=wall_dx, n_start=n_start, only=only,
                      focus=focus)
    return regime_margins(g, x0, y0, ridx, pending, ids)


# =============================================================================================
# Axis crossings and nearest points

def _clip_t(a, d, lo, hi):
    """Parameter interval of a + t d inside [lo, hi] (per element)."""
    inside = (a >= lo) & (a <= hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        t1, t2 = (lo - a) / d, (hi - a) / d
    tlo = np.where(d != 0, np.minimum(t1, t2), np.where(inside, -np.inf, np.inf))
    thi = np.where(d != 0, np.maximum(t1, t2), np.where(inside, np.inf, -np.inf))
    return tlo, thi


def _nearest(g: LineGeometry, sel, x0: float, y0: float, box):
    """Nearest point of every line (chords ``sel``) to (x0, y0) in log-log axes inside box."""
    X0, X1, Y0, Y1 = box
    n = g.n_lines
    d = np.full(n, np.nan)
    nx = np.full(n, np.nan)
    ny = np.full(n, np.nan)
    if not g.xa.size:
        return d, nx, ny
    xa, ya = g.xa, g.ya
    dx, dy = g.xb - xa, g.yb - ya
    txl, txh = _clip_t(xa, dx, X0, X1)
    tyl, tyh = _clip_t(ya, dy, Y0, Y1)
    t0 = np.maximum(0.0, np.maximum(txl, tyl))
    t1 = np.minimum(1.0, np.minimum(txh, tyh))
    keep = sel & (t0 <= t1)
    t0 = np.where(keep, t0, 0.0)
    t1 = np.where(keep, t1, 0.0)
    px, py = xa + t0 * dx, ya + t0 * dy
    qx, qy = (t1 - t0) * dx, (t1 - t0) * dy
    L2 = qx * qx + qy * qy
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(L2 > 0, ((x0 - px) * qx + (y0 - py) * qy) / np.where(L2 > 0, L2, 1.0), 0.0)
    t = np.clip(t, 0.0, 1.0)
    ex, ey = px + t * qx, py + t * qy
    d2 = np.where(keep, (ex - x0) ** 2 + (ey - y0) ** 2, np.inf)
    best, arg = g.line_min(d2)
    has = arg >= 0
    d[has] = np.sqrt(best[has])
    nx[has] = ex[arg[has]]
    ny[has] = ey[arg[has]]
    return d, nx, ny


def _polish(G, s, gs, h=1e-6, iters=8):
    """Roots of G near the estimates s with residuals gs (arrays), by secant steps.

    A step is kept only if it lowers the residual and stays within 1e-4 decade of the estimate
    (where G is undefined or has no root nearby the estimate is kept).
    """
    s = np.asarray(s, dtype=float).copy()
    gs = np.asarray(gs, dtype=float)
    need = np.isfinite(gs) & (np.abs(gs) > 1e-10)
    if not need.any():
        return s
    idx = np.nonzero(need)[0]
    x0, f0 = s[idx], gs[idx]
    x1 = x0 + h
    f1 = G(x1)
    best_x, best_f = x0.copy(), np.abs(f0)
    for _ in range(iters):
        ok = np.isfinite(f1)
        better = ok & (np.abs(f1) < best_f) & (np.abs(x1 - s[idx]) < 1e-4)
        best_x = np.where(better, x1, best_x)
        best_f = np.where(better, np.abs(f1), best_f)
        with np.errstate(divide="ignore", invalid="ignore"):
            x2 = x1 - f1 * (x1 - x0) / (f1 - f0)
        go = ok & np.isfinite(x2) & (best_f > 1e-10) & (np.abs(x2 - x1) > 1e-14)
        if not go.any():
            break
        x0, f0 = x1, f1
        x1 = np.where(go, x2, x1)
        f1 = np.where(go, G(x1), np.nan)
    s[idx] = best_x
    return s


def _nearest_two(v, c, centre, lo, hi, adj):
    """Indices of the crossings worth polishing: nearest above and below, overall and on ``adj`` chords."""
    ok = (v >= lo - 1e-6) & (v <= hi + 1e-6)
    out = set()
    for mask in (ok, ok & adj[c]):
        for side in (v > centre, v < centre):
            w = np.nonzero(mask & side)[0]
            if w.size:
                out.add(int(w[np.argmin(np.abs(v[w] - centre))]))
    return np.array(sorted(out), dtype=np.intp)


def _axis_crossings(g: LineGeometry, sel, lines, case, x0: float, y0: float, box, adj):
    """Crossings of the chords ``sel`` with the vertical x = x0 and the horizontal y = y0.

    Returns (along_y, along_x, g_point): per line, arrays of (value [decade], chord index) — y of the
    nearest crossings at x0 (gas axis) and x of those at y0 (liquid axis) inside ``box``, above and
    below the point, overall and on the chords ``adj`` — polished on each model's implicit
    function; and the implicit function of every line at the point.
    """
    xa, ya, xb, yb = g.xa, g.ya, g.xb, g.yb
    with np.errstate(invalid="ignore", divide="ignore"):
        cv = sel & ((xa - x0) * (xb - x0) <= 0) & (xa != xb)
        ch = sel & ((ya - y0) * (yb - y0) <= 0) & (ya != yb)
        iv, ih = np.nonzero(cv)[0], np.nonzero(ch)[0]
        yv = ya[iv] + (x0 - xa[iv]) / (xb[iv] - xa[iv]) * (yb[iv] - ya[iv])
        xh = xa[ih] + (y0 - ya[ih]) / (yb[ih] - ya[ih]) * (xb[ih] - xa[ih])
    along_y, along_x = {}, {}
    g_point = np.full(len(lines), np.nan)
    for k, (model, consts) in enumerate(lines):
        a = np.nonzero(g.line[iv] == k)[0]
        b = np.nonzero(g.line[ih] == k)[0]
        a = a[_nearest_two(yv[a], iv[a], y0, box[2], box[3], adj)] if a.size else a
        b = b[_nearest_two(xh[b], ih[b], x0, box[0], box[1], adj)] if b.size else b
        na = a.size

        def G(s, na=na, model=model, consts=consts):
            ql = np.concatenate([np.full(na, 10.0 ** x0), 10.0 ** s[na:]])
            qg = np.concatenate([10.0 ** s[:na], np.full(s.size - na, 10.0 ** y0)])
            return _implicit(model, case, ql, qg, consts)

        est = np.concatenate([yv[a], xh[b]])
        vals = _implicit(model, case,                # the point and the estimates in one call
                         np.concatenate([[10.0 ** x0], np.full(na, 10.0 ** x0), 10.0 ** est[na:]]),
                         np.concatenate([[10.0 ** y0], 10.0 ** est[:na], np.full(b.size, 10.0 ** y0)]), consts)
        g_point[k] = vals[0]
        if est.size:
            s = _polish(G, est, vals[1:])
            along_y[k] = (s[:na], iv[a])
            along_x[k] = (s[na:], ih[b])
    return along_y, along_x, g_point


def _implicit(model, case, ql, qg, consts):
    """The model's implicit function at the points, flat; NaN everywhere if it raises one of MODEL_ERRORS."""
    ql = np.atleast_1d(np.asarray(ql, dtype=float))
    try:
        with np.errstate(all="ignore"):
            out = np.asarray(model.implicit(case, ql, np.atleast_1d(np.asarray(qg, dtype=float)), **consts),
                             dtype=float)
        return np.broadcast_to(out, ql.shape).reshape(-1).copy()
    except MODEL_ERRORS:
        return np.full(ql.size, np.nan)


def _nearest_factors(values, chords, centre, lo, hi, allowed=None):
    """(up, down) factors of the crossings nearest above and below ``centre`` within [lo, hi]."""
    v = np.asarray(values, dtype=float)
    ok = (v >= lo) & (v <= hi)
    if allowed is not None:
        ok &= allowed[chords]
    v = v[ok]
    up, dn = v[v > centre], v[v < centre]
    return (10.0 ** (float(up.min()) - centre) if up.size else None,
            10.0 ** (float(dn.max()) - centre) if dn.size else None)


# =============================================================================================
# Results

@dataclass(frozen=True)
class BoundaryMargin:
    """Margins of one operating point to one boundary line.

    Region-defining lines count where they are drawn as boundaries (see the module notes);
    comparison lines count whole.

    Attributes
    ----------
    name, label : str      model name and chart label
    source : str           citation of the model
    role : str             "regions" (bounds regimes) or "comparison" (drawn for comparison only)
    side : str             "below" or "above": where the point lies with respect to the line
                           (sign of its implicit function)
    limits_regime : bool   True when the line (as drawn) bounds the point's regime
    ql_factor_up, ql_factor_down : float or None
        Q_L,cross / Q_L of the nearest crossing at higher / lower liquid flow (Q_G held) [-]
    qg_factor_up, qg_factor_down : float or None   the same along the gas axis (Q_L held) [-]
    log_distance : float or None   shortest distance in (log10 Q_L, log10 Q_G) [decade]
    nearest_ql, nearest_qg : float or None   the nearest point of the line [m^3/s]
    direction : (float, float) or None   unit vector toward it in (log10 Q_L, log10 Q_G)
    margin : float   symmetric margin to this line alone, as drawn (box half-size, fraction),
                     capped at :data:`MAX_MARGIN`
    touch_ql, touch_qg : float or None   where the box of that size touches the line [m^3/s]
    """

    name: str
    label: str
    source: str
    role: str
    side: str
    limits_regime: bool
    ql_factor_up: float | None
    ql_factor_down: float | None
    qg_factor_up: float | None
    qg_factor_down: float | None
    log_distance: float | None
    nearest_ql: float | None
    nearest_qg: float | None
    direction: tuple[float, float] | None
    margin: float
    touch_ql: float | None
    touch_qg: float | None

    def factor(self, direction: str) -> float | None:
        """Factor in one of :data:`DIRECTIONS` ("ql_up", ...)."""
        if direction not in DIRECTIONS:
            raise ValueError(f"direction must be one of {', '.join(DIRECTIONS)}, got {direction!r}")
        return getattr(self, direction.replace("_", "_factor_", 1))

    def to_dict(self) -> dict:
        """JSON-ready dict, flows in m^3/s."""
        return {
            "name": self.name, "label": self.label, "source": self.source, "role": self.role,
            "side": self.side, "limits_regime": self.limits_regime,
            "ql_factor_up": self.ql_factor_up, "ql_factor_down": self.ql_factor_down,
            "qg_factor_up": self.qg_factor_up, "qg_factor_down": self.qg_factor_down,
            "log_distance": self.log_distance, "nearest_ql_m3_s": self.nearest_ql,
            "nearest_qg_m3_s": self.nearest_qg,
            "direction": list(self.direction) if self.direction is not None else None,
            "margin": self.margin, "touch_ql_m3_s": self.touch_ql, "touch_qg_m3_s": self.touch_qg,
        }


@dataclass(frozen=True)
class PointMargins:
    """Margins of one operating point (Q_L, Q_G) [m^3/s] on a chart.

    Attributes
    ----------
    ql, qg : float             the point [m^3/s]
    regime : str               its regime ("" on a chart without regimes)
    boundaries : tuple of BoundaryMargin   every line, region-defining first (chart order)
    symmetric_margin : float   largest m (fraction) with the ±m box in one regime, capped at
                               :data:`MAX_MARGIN`
    limiting_boundary : str or None   name of the line that sets it (None if none comes closer)
    limits : dict              direction ("ql_up", "ql_down", "qg_up", "qg_down") -> name of the
                               line where the regime changes first along that axis, or None
    regime_factors : dict      direction -> factor at which the regime changes first, or None
    established : bool         True when the margin is established: the regime at the point is
                               known, a boundary of it was found within the searched box, every
                               line bounding the regime could be evaluated over the ±m box and just
                               past the point where it touches the boundary, and the classification
                               gives a regime everywhere there
    reasons : tuple of str     why it is not established (plain sentences naming the line and the
                               flows); empty when it is
    search_ql, search_qg : (float, float)   the flows searched for a boundary: the ±MAX_MARGIN box
                               of the point [m^3/s] (independent of the chart range)
    outside_chart : bool       the point lies outside the chart range (``case.flow_range``)
    outside_chart_note : str   a sentence saying so ("" when inside)
    regime_determined : bool   the regime at the point could be computed (every line that decides
                               it has a value there)
    regimes : tuple of str     the regimes of the chart (for checking an intended regime)
    caveats : tuple of str     other limits of the result, e.g. the point outside the range of a
                               source's data
    """

    ql: float
    qg: float
    regime: str
    boundaries: tuple
    symmetric_margin: float
    limiting_boundary: str | None
    limits: dict
    regime_factors: dict
    established: bool = True
    reasons: tuple[str, ...] = ()
    search_ql: tuple[float, float] | None = None
    search_qg: tuple[float, float] | None = None
    outside_chart: bool = False
    outside_chart_note: str = ""
    regime_determined: bool = True
    regimes: tuple[str, ...] = ()
    caveats: tuple[str, ...] = ()

    def boundary(self, name: str) -> BoundaryMargin:
        """The :class:`BoundaryMargin` of the line called ``name``."""
        for b in self.boundaries:
            if b.name == name:
                return b
        known = ", ".join(b.name for b in self.boundaries) or "none"
        raise ValueError(f"no boundary {name!r} on this chart; boundaries: {known}")

    @property
    def limiting(self) -> BoundaryMargin | None:
        """The :class:`BoundaryMargin` of the limiting line (None if there is none)."""
        return self.boundary(self.limiting_boundary) if self.limiting_boundary else None

    def to_dict(self) -> dict:
        """JSON-ready dict (SI units; None where there is no value)."""
        lim = self.limiting
        return {
            "operating_point": {"ql_m3_s": self.ql, "qg_m3_s": self.qg},
            "regime": self.regime,
            "symmetric_margin": self.symmetric_margin,
            "limiting_boundary": self.limiting_boundary,
            "limiting_label": lim.label if lim is not None else None,
            "limits": dict(self.limits),
            "regime_factors": dict(self.regime_factors),
            "boundaries": [b.to_dict() for b in self.boundaries],
            "margin_established": self.established,
            "margin_reasons": list(self.reasons),
            "search_range_m3_s": {"ql": list(self.search_ql) if self.search_ql else None,
                                  "qg": list(self.search_qg) if self.search_qg else None},
            "outside_chart": self.outside_chart,
            "outside_chart_note": self.outside_chart_note,
            "regime_determined": self.regime_determined,
            "caveats": list(self.caveats),
        }


# =============================================================================================
# Public functions

def check_point(ql, qg) -> tuple[float, float]:
    """The operating point (Q_L, Q_G) [m^3/s] as floats; ValueError naming the flow unless both are > 0."""
    return positive("ql", ql, "m^3/s"), positive("qg", qg, "m^3/s")


def regime_index(chart, regime: str) -> int:
    """Position of ``regime`` in ``chart.regime_names``; ValueError listing the known names."""
    names = tuple(chart.regime_names)
    if regime in names:
        return names.index(regime)
    known = "; ".join(names) if names else "none (the chart has no regimes)"
    raise ValueError(f"unknown regime {regime!r}; regimes on this chart: {known}")


@in_chart_solves
def point_margins(chart, ql: float, qg: float) -> PointMargins:
    r"""Margins of the operating point (Q_L, Q_G) to every boundary of ``chart``.

    .. math:: m = \min_{\text{pieces } k \text{ bounding the regime}}\ \min_{(Q_L', Q_G') \in k}
              \max\left(\left|\tfrac{Q_L'}{Q_L} - 1\right|, \left|\tfrac{Q_G'}{Q_G} - 1\right|\right)

    Parameters
    ----------
    chart : Chart   from :meth:`lowgmap.physics.chart.composition.Chart.build` (not rebuilt; the line samples are
                    cached per chart, so moving the point is cheap)
    ql, qg : float  liquid and gas flow rates [m^3/s], > 0

    Returns
    -------
    PointMargins

    Notes
    -----
    Axis factors, nearest points and distances are searched inside the chart range widened to
    contain the point; the symmetric margin uses the lines wherever they run: they are sampled over
    the point's ±:data:`MAX_MARGIN` box wherever the point lies, so the margin does not depend on
    the chart range. Comparison lines get factors and distances but never limit the regime.
    Method and accuracy: see the module notes.

    The result says whether the margin is *established* (see :class:`PointMargins`): not when the
    regime at the point cannot be computed, when a line bounding the regime cannot be evaluated
    (its model raises, or, under the sequence rule, gives NaN) over part of the ±m box or just
    past the point where the box touches the limiting boundary (a boundary that is only the edge
    of a model's domain is assumed, not computed), when the classification gives no regime there,
    or when no boundary was found within the ±MAX_MARGIN box (the margin is then a lower bound that
    no boundary limits). The gaps are probed on a 25 x 25 log grid over the ±m(1 + 1e-6) box and
    just past the touch point (:func:`lowgmap.physics.chart.lines.evaluation_gaps`).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.models.boundary import PowerLawBoundary
    >>> from lowgmap.physics.chart.composition import Chart
    >>> case = example_case()                  # water/air, 10 mm tube, Q_L and Q_G from 1e-7 to 1e-3 m^3/s
    >>> line = PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")   # Q_G = Q_L
    >>> pm = point_margins(Chart.build(case, [line]), 1e-5, 0.5e-5)
    >>> pm.regime, round(pm.symmetric_margin, 6)       # (1 + m) / (1 - m) = 2
    ('bubbles', 0.333333)
    >>> round(pm.boundaries[0].qg_factor_up, 9), round(pm.boundaries[0].ql_factor_down, 9)
    (2.0, 0.5)
    """
    ql, qg = check_point(ql, qg)
    x0, y0 = math.log10(ql), math.log10(qg)
    reasons: list[str] = []
    try:
        with np.errstate(all="ignore"):
            regime = str(chart.classify(ql, qg))
    except MODEL_ERRORS as exc:
        regime = ""
        reasons.append(f"The regime at the point could not be computed ({type(exc).__name__}: {exc}).")
    names = list(chart.regime_names)
    r = names.index(regime) if regime in names else -1
    fr = chart.case.flow_range
    box = (min(math.log10(fr.ql_min), x0), max(math.log10(fr.ql_max), x0),
           min(math.log10(fr.qg_min), y0), max(math.log10(fr.qg_max), y0))
    holder, g = geometry_of(chart, [x0], [y0], keep_going=True)
    lines = [(m, c) for m, c, _ in holder.lines]
    adj = g.adjacent(r) if r >= 0 else np.zeros(g.xa.size, dtype=bool)
    m_line, t_line, reg = _point_box(g, x0, y0, r)
    dist, nx, ny = _nearest(g, g.usable, x0, y0, box)
    along_y, along_x, g_point = _axis_crossings(g, g.usable, lines, chart.case, x0, y0, box, adj)
    out = []
    first: dict[str, tuple[float, str] | None] = {d: None for d in DIRECTIONS}
    for k, (model, consts, role) in enumerate(holder.lines):
        side = "below" if g_point[k] < 0 else "above"
        vy, cy = along_y.get(k, (np.empty(0), np.empty(0, dtype=np.intp)))
        vx, cx = along_x.get(k, (np.empty(0), np.empty(0, dtype=np.intp)))
        g_up, g_dn = _nearest_factors(vy, cy, y0, box[2], box[3])
        l_up, l_dn = _nearest_factors(vx, cx, x0, box[0], box[1])
        if math.isnan(dist[k]):
            d = nq_l = nq_g = direction = None
        else:
            d = float(dist[k])
            nq_l, nq_g = 10.0 ** float(nx[k]), 10.0 ** float(ny[k])
            direction = ((float(nx[k]) - x0) / d, (float(ny[k]) - y0) / d) if d > 0 else None
        m_k = float(m_line[k])
        if m_k < MAX_MARGIN:
            touch = (10.0 ** float(t_line[k, 0]), 10.0 ** float(t_line[k, 1]))
        else:
            m_k, touch = MAX_MARGIN, (None, None)
        limits = bool(np.any(adj & (g.line == k)))
        out.append(BoundaryMargin(model.name, model.label, model.citation, role, side, limits,
                                  l_up, l_dn, g_up, g_dn, d, nq_l, nq_g, direction, m_k, *touch))
        if limits:
            ups = (_nearest_factors(vx, cx, x0, box[0], box[1], adj), _nearest_factors(vy, cy, y0, box[2], box[3], adj))
            for dname, v in (("ql_up", ups[0][0]), ("ql_down", ups[0][1]), ("qg_up", ups[1][0]),
                             ("qg_down", ups[1][1])):
                if v is None:
                    continue
                cur = first[dname]
                if cur is None or abs(math.log(v)) < abs(math.log(cur[0])):
                    first[dname] = (v, model.name)
    m_reg, lim = MAX_MARGIN, None
    if reg[1] >= 0 and reg[0] < MAX_MARGIN:
        m_reg, lim = float(reg[0]), lines[reg[1]][0].name
    touch_at = (reg[2], reg[3]) if lim is not None else None
    determined, more, caveats = _point_evidence(chart, holder.lines, g, regime, r, x0, y0, m_reg, g_point,
                                                touch_at)
    reasons += more
    if getattr(chart, "preview", False):
        caveats.insert(0, PREVIEW_CAVEAT)
    outside, note = _outside_chart(chart, ql, ql, qg, qg,
                                   f"The point (Q_L {_q(ql)} m³/s, Q_G {_q(qg)} m³/s)")
    return PointMargins(ql, qg, regime, tuple(out), m_reg, lim,
                        {d: (first[d][1] if first[d] else None) for d in DIRECTIONS},
                        {d: (first[d][0] if first[d] else None) for d in DIRECTIONS},
                        established=not reasons, reasons=tuple(reasons),
                        search_ql=(ql * (1.0 - MAX_MARGIN), ql * (1.0 + MAX_MARGIN)),
                        search_qg=(qg * (1.0 - MAX_MARGIN), qg * (1.0 + MAX_MARGIN)),
                        outside_chart=outside, outside_chart_note=note, regime_determined=determined,
                        regimes=tuple(names), caveats=tuple(caveats))


def _point_evidence(chart, holder_lines, g: LineGeometry, regime: str, r: int, x0: float, y0: float,
                    m: float, g_point, touch=None) -> tuple[bool, list[str], list[str]]:
    """(regime determined, reasons the margin m is not established, caveats) for one point.

    ``touch``: (x, y) [decade] where the ±m box touches the limiting boundary, or None.
    """
    names = list(chart.regime_names)
    if not names:
        return False, ["The chart has no regimes (no boundary model on it defines regimes), so there is no "
                       "margin to establish."], []
    if r < 0:
        return False, ["The regime at the point could not be determined: the chart's lines give no regime "
                       "there."], []
    wanted = set(g.bounding.get(r, ()))
    reasons = _failed_reasons(holder_lines, g, wanted)
    determined = not reasons
    if g.chain:
        bad = [k for k in sorted(wanted) if not math.isfinite(float(g_point[k]))]
        if bad:
            determined = False
            reasons.append("The regime at the point is assumed, not computed: "
                           + "; ".join(f"the line {holder_lines[k][0].label}" for k in bad)
                           + " gives no value there.")
    box = margin_window(x0, y0, min(m * (1.0 + _BEYOND) + 1e-12, MAX_MARGIN))
    extra = None
    if touch is not None:                       # just past the touch point, away from the point
        tx, ty = touch
        extra = ([x0 + (tx - x0) * (1 + _BEYOND) + math.copysign(1e-9, tx - x0)],
                 [y0 + (ty - y0) * (1 + _BEYOND) + math.copysign(1e-9, ty - y0)])
    reasons += _gap_reasons(evaluation_gaps(chart, box, sorted(wanted), points=extra), box)
    if m >= MAX_MARGIN:
        reasons.append(_cap_reason(regime, margin_window(x0, y0)))
    caveats = []
    ql, qg = 10.0 ** x0, 10.0 ** y0
    for k in sorted(wanted):
        model, consts, _ = holder_lines[k]
        try:
            with np.errstate(all="ignore"):
                if getattr(model, "validity_uses_constants", False):
                    ok = np.asarray(model.validity_mask(chart.case, ql, qg, **consts), dtype=bool)
                else:
                    ok = np.asarray(model.validity_mask(chart.case, ql, qg), dtype=bool)
        except MODEL_ERRORS:
            continue
        if not bool(np.all(ok)):
            caveats.append(f"The point lies outside the range of the source data of the line {model.label}.")
    return determined, reasons, caveats


@in_chart_solves
def symmetric_margins(chart, ql, qg, *, regime=None):
    r"""Symmetric margins of many points at once (vectorised), with the limiting line of each.

    Parameters
    ----------
    chart : Chart
    ql, qg : array   flow rates [m^3/s] (broadcast together)
    regime : str, optional
        If given, a point outside this regime gets the negative of its own margin (how deep it
        lies in the other regime); default: every point's own regime.

    Returns
    -------
    (margin, limiting, regimes) : arrays
        margin [fraction] (NaN for invalid flows), the index of the limiting line in
        ``chart.region_models`` (-1 for none), and each point's regime name.

    Notes
    -----
    Same definition and result as :func:`point_margins` (exact minimum over the sampled lines).
    A point whose regime is bounded by a line that could not be sampled over its window (the model
    raised there) gets NaN. Whether each margin is established is reported by
    :func:`point_margins` only.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.models.boundary import PowerLawBoundary
    >>> from lowgmap.physics.chart.composition import Chart
    >>> case = example_case()                  # water/air, 10 mm tube, Q_L and Q_G from 1e-7 to 1e-3 m^3/s
    >>> chart = Chart.build(case, [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])
    >>> m, lim, reg = symmetric_margins(chart, [1e-5, 1e-5], [0.5e-5, 4e-5])
    >>> np.round(m, 6).tolist(), lim.tolist()
    ([0.333333, 0.6], [0, 0])
    """
    ql, qg = np.broadcast_arrays(np.asarray(ql, dtype=float), np.asarray(qg, dtype=float))
    shape = ql.shape
    ql, qg = ql.ravel(), qg.ravel()
    with np.errstate(all="ignore"):
        ok = np.isfinite(ql) & np.isfinite(qg) & (ql > 0) & (qg > 0)
    regimes = np.asarray(chart.classify(ql, qg)).ravel()
    m = np.full(ql.size, np.nan)
    lim = np.full(ql.size, -1, dtype=np.intp)
    if ok.any():
        x0, y0 = np.log10(ql[ok]), np.log10(qg[ok])
        _, g = geometry_of(chart, [x0.min(), x0.max()], [y0.min(), y0.max()], keep_going=True)
        ridx = regime_indices(list(chart.regime_names), regimes[ok])
        mo, lo = regime_margins(g, x0, y0, ridx)
        if g.failed:
            dead = {k for k, _ in g.failed}
            for r in np.unique(ridx[ridx >= 0]):
                if dead & set(g.bounding.get(int(r), ())):
                    mo[ridx == r] = np.nan
                    lo[ridx == r] = -1
        m[ok], lim[ok] = mo, lo
    if regime is not None:
        regime_index(chart, regime)
        m = np.where(regimes == regime, m, -m)
    return m.reshape(shape), lim.reshape(shape), regimes.reshape(shape)



@dataclass(frozen=True)
class PreviewMargin:
    """The regime of one point and its symmetric margin at preview resolution: what the label of a dragged slider
    shows (:func:`preview_margin`; the released value gets :func:`point_margins`).

    ql, qg : float             the point [m^3/s]
    regime : str               its regime ('' where the classification gives none)
    symmetric_margin : float or None   [fraction], capped at :data:`MAX_MARGIN`; None without a regime or where a
                               line bounding it cannot be evaluated near the point
    limiting_boundary : str or None    name of the line that sets it (None: none within the ±MAX_MARGIN box)
    caveats : tuple of str     :data:`PREVIEW_CAVEAT`
    """

    ql: float
    qg: float
    regime: str
    symmetric_margin: float | None
    limiting_boundary: str | None
    caveats: tuple = (PREVIEW_CAVEAT,)


def preview_margin(chart, ql: float, qg: float) -> PreviewMargin:
    """Regime and symmetric margin of one point, with the lines sampled to
    :data:`lowgmap.physics.chart.lines.PREVIEW_TOL` near it only: the frame of a slider being dragged, which shows
    nothing else.

    The same margin as :func:`point_margins` on a preview chart (the same definition, the lines sampled to the
    same tolerance; within about 5e-5 of the released value, :data:`PREVIEW_CAVEAT`), without what only the margin
    table and the verdict read (per-line factors and distances, the evidence that the margin is established):
    the lines that bound the regime are sampled afresh for the point's window, whole and refined only near the
    point when the regime is the intersection of one side of each of them
    (:func:`lowgmap.physics.chart.lines.conjunction_lines`), split and probed otherwise
    (:func:`uncached_regime_margins`). Where a line bounding the regime cannot be evaluated near the point (its
    model raises) the margin is None: the label then says that it is not available.

    Parameters
    ----------
    chart : Chart
    ql, qg : float   flow rates [m^3/s], > 0

    Returns
    -------
    PreviewMargin
    """
    ql = positive("ql", ql, "m^3/s")
    qg = positive("qg", qg, "m^3/s")
    regime = str(np.asarray(chart.classify(np.array([ql]), np.array([qg]))).ravel()[0])
    names = list(chart.regime_names)
    if regime not in names:
        return PreviewMargin(ql, qg, regime, None, None)
    x0, y0 = np.array([math.log10(ql)]), np.array([math.log10(qg)])
    try:
        m, lim = uncached_regime_margins(chart, chart.case, x0, y0, np.array([names.index(regime)]), tol=PREVIEW_TOL,
                                         wall_dx=1e-2 * PREVIEW_TOL, n_start=17)
    except MODEL_ERRORS:                # a bounding line cannot be evaluated near the point: no margin to show
        return PreviewMargin(ql, qg, regime, None, None)
    if not math.isfinite(float(m[0])):
        return PreviewMargin(ql, qg, regime, None, None)
    k = int(lim[0])
    limiting = chart.region_models[k][0].name if k >= 0 and m[0] < MAX_MARGIN else None
    return PreviewMargin(ql, qg, regime, float(min(m[0], MAX_MARGIN)), limiting)



# ---------------------------------------------------------------------------------------------
# Operating envelope

@dataclass(frozen=True)
class CornerCheck:
    """One corner of an operating envelope: its name, flows [m^3/s] and regime."""

    name: str
    ql: float
    qg: float
    regime: str


@dataclass(frozen=True)
class EnvelopeLine:
    """What one boundary does in an operating envelope.

    ``crosses``: the line passes through the rectangle; ``corners_across``: the corners on the
    other side of the line from the reference point; ``limits_regime``: a region line that can
    change the reference point's regime.
    """

    name: str
    label: str
    role: str
    crosses: bool
    corners_across: tuple[str, ...]
    limits_regime: bool


@dataclass(frozen=True)
class EnvelopeCheck:
    """Result of :func:`envelope_check`.

    Attributes
    ----------
    ql_range, qg_range : (float, float)   the rectangle [m^3/s]
    reference : (float, float)  point whose regime is the intended one [m^3/s]
    regime : str                regime of the reference point
    wholly_inside : bool        every point of the rectangle is in that regime
    regimes : tuple of str      regimes met in the rectangle (exact when wholly inside, otherwise
                                found on a 41 x 41 grid, the corners and beside each crossing line)
    corners : tuple of CornerCheck
    lines : tuple of EnvelopeLine
    established : bool          the answer is established: every line bounding the reference regime
                                could be evaluated over the rectangle and the classification gives a
                                regime everywhere in it
    reasons : tuple of str      why it is not established (plain sentences)
    outside_chart : bool        part of the rectangle (or the reference point) lies outside the chart
                                range (``case.flow_range``)
    outside_chart_note : str    a sentence saying so ("" when inside)
    boundary_inside : bool      a sampled boundary of the reference regime passes through the rectangle
    """

    ql_range: tuple[float, float]
    qg_range: tuple[float, float]
    reference: tuple[float, float]
    regime: str
    wholly_inside: bool
    regimes: tuple[str, ...]
    corners: tuple
    lines: tuple
    established: bool = True
    reasons: tuple[str, ...] = ()
    outside_chart: bool = False
    outside_chart_note: str = ""
    boundary_inside: bool = False

    @property
    def status(self) -> str:
        """'wholly inside one regime', 'NOT WHOLLY INSIDE ONE REGIME' or 'not established'."""
        if not self.established:
            return "not established"
        return "wholly inside one regime" if self.wholly_inside else "NOT WHOLLY INSIDE ONE REGIME"

    def to_dict(self) -> dict:
        return {
            "ql_range_m3_s": list(self.ql_range), "qg_range_m3_s": list(self.qg_range),
            "reference_m3_s": list(self.reference), "regime": self.regime,
            "wholly_inside": self.wholly_inside, "regimes": list(self.regimes),
            "corners": [{"name": c.name, "ql_m3_s": c.ql, "qg_m3_s": c.qg, "regime": c.regime}
                        for c in self.corners],
            "lines": [{"name": ln.name, "label": ln.label, "role": ln.role, "crosses": ln.crosses,
                       "corners_across": list(ln.corners_across), "limits_regime": ln.limits_regime}
                      for ln in self.lines],
            "established": self.established, "reasons": list(self.reasons), "status": self.status,
            "boundary_inside": self.boundary_inside,
            "outside_chart": self.outside_chart, "outside_chart_note": self.outside_chart_note,
        }


def _check_range(name, rng) -> tuple[float, float]:
    try:
        lo, hi = rng
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a pair (low, high) in m^3/s, got {rng!r}") from None
    lo = positive(f"{name}[0]", lo, "m^3/s")
    hi = positive(f"{name}[1]", hi, "m^3/s")
    if not lo < hi:
        raise ValueError(f"{name} must be increasing (low < high), got [{lo:g}, {hi:g}] m^3/s")
    return lo, hi


@in_chart_solves
def envelope_check(chart, ql_range, qg_range, reference=None) -> EnvelopeCheck:
    """Whether an operating envelope (a rectangle of flow rates) lies wholly inside one regime.

    Parameters
    ----------
    chart : Chart
    ql_range, qg_range : (float, float)   the system's range of liquid and gas flow [m^3/s]
    reference : (float, float), optional  the point whose regime is wanted (default: the
                                          rectangle's centre in log-log axes)

    Returns
    -------
    EnvelopeCheck

    Notes
    -----
    The rectangle keeps one regime exactly when no boundary of the reference regime has a point
    in the closed rectangle (the same argument as for the symmetric box). ``corners_across``
    compares the sign of each line's implicit function at the corners with the reference point.
    The lines are sampled over the rectangle wherever it lies (not only over the chart range); the
    result says whether the answer is established (:class:`EnvelopeCheck`) and whether the
    rectangle leaves the chart range.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.models.boundary import PowerLawBoundary
    >>> from lowgmap.physics.chart.composition import Chart
    >>> case = example_case()                  # water/air, 10 mm tube, Q_L and Q_G from 1e-7 to 1e-3 m^3/s
    >>> chart = Chart.build(case, [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])
    >>> env = envelope_check(chart, (1e-5, 2e-5), (1e-6, 3e-5))
    >>> env.wholly_inside, env.lines[0].corners_across
    (False, ('high Q_L, high Q_G', 'low Q_L, high Q_G'))
    """
    ql_lo, ql_hi = _check_range("ql_range", ql_range)
    qg_lo, qg_hi = _check_range("qg_range", qg_range)
    if reference is None:
        ref = (math.sqrt(ql_lo * ql_hi), math.sqrt(qg_lo * qg_hi))
    else:
        ref = check_point(*reference)
    corners = (("low Q_L, low Q_G", ql_lo, qg_lo), ("high Q_L, low Q_G", ql_hi, qg_lo),
               ("high Q_L, high Q_G", ql_hi, qg_hi), ("low Q_L, high Q_G", ql_lo, qg_hi))
    cq_l = np.array([c[1] for c in corners])
    cq_g = np.array([c[2] for c in corners])
    with np.errstate(all="ignore"):
        c_reg = chart.classify(cq_l, cq_g)
        regime = str(chart.classify(*ref))
    names = list(chart.regime_names)
    r = names.index(regime) if regime in names else -1
    box = (math.log10(ql_lo), math.log10(ql_hi), math.log10(qg_lo), math.log10(qg_hi))
    holder, g = geometry_of(chart, box[:2], box[2:], keep_going=True)
    cx, cy = 0.5 * (box[0] + box[1]), 0.5 * (box[2] + box[3])
    d_all, _, _ = _nearest(g, g.usable, cx, cy, box)
    adj = g.adjacent(r) if r >= 0 else np.zeros(g.xa.size, dtype=bool)
    d_adj, _, _ = _nearest(g, adj, cx, cy, box)
    lines = []
    for k, (model, consts, role) in enumerate(holder.lines):
        g_ref = float(_implicit(model, chart.case, ref[0], ref[1], consts)[0])
        g_c = _implicit(model, chart.case, cq_l, cq_g, consts)
        across = tuple(c[0] for c, gc in zip(corners, g_c) if (gc < 0) != (g_ref < 0))
        lines.append(EnvelopeLine(model.name, model.label, role, not math.isnan(d_all[k]), across,
                                  bool(np.any(adj & (g.line == k)))))
    wholly = bool(names) and r >= 0 and bool(np.all(np.isnan(d_adj)))
    if not names:
        regimes = ("",)
    elif wholly:
        regimes = (regime,)
    else:
        u = np.logspace(box[0], box[1], 41)
        v = np.logspace(box[2], box[3], 41)
        U, V = np.meshgrid(u, v)
        found = set(np.unique(chart.classify(U, V)).tolist()) | set(np.asarray(c_reg).tolist()) | {regime}
        sel = g.usable & (g.line < g.n_region)
        xm, ym = 0.5 * (g.xa + g.xb), 0.5 * (g.ya + g.yb)
        sel &= (xm >= box[0]) & (xm <= box[1]) & (ym >= box[2]) & (ym <= box[3])
        if sel.any():
            for dy in (-1e-6, 1e-6):
                found |= set(np.unique(chart.classify(10.0 ** xm[sel], 10.0 ** np.clip(ym[sel] + dy, box[2], box[3])))
                             .tolist())
        regimes = tuple(n for n in names if n in found)
    reasons: list[str] = []
    if not names:
        reasons.append("The chart has no regimes (no boundary model on it defines regimes).")
    elif r < 0:
        reasons.append("The regime at the reference point could not be determined: the chart's lines give no "
                       "regime there.")
    else:
        wanted = set(g.bounding.get(r, ()))
        reasons += _failed_reasons(holder.lines, g, wanted)
        reasons += _gap_reasons(evaluation_gaps(chart, box, sorted(wanted)), box)
    outside, note = _outside_chart(chart, min(ql_lo, ref[0]), max(ql_hi, ref[0]), min(qg_lo, ref[1]),
                                   max(qg_hi, ref[1]), "The operating envelope")
    return EnvelopeCheck((ql_lo, ql_hi), (qg_lo, qg_hi), ref, regime, wholly, regimes,
                         tuple(CornerCheck(c[0], c[1], c[2], str(rg)) for c, rg in zip(corners, c_reg)),
                         tuple(lines), established=not reasons, reasons=tuple(reasons), outside_chart=outside,
                         outside_chart_note=note, boundary_inside=r >= 0 and not bool(np.all(np.isnan(d_adj))))


# ---------------------------------------------------------------------------------------------
# Robust operating point

@dataclass(frozen=True)
class RobustPoint:
    """The point of a regime with the largest symmetric margin.

    ``ql``, ``qg`` [m^3/s]; ``margin`` [fraction]; ``limiting``: names of the lines the ±margin box
    touches (usually two at the optimum), ``regime``; ``ql_range``, ``qg_range``: the flow ranges
    searched [m^3/s]; ``range_basis``: where they come from ("given", "a decade either side of the
    operating point", "the chart range"), one phrase per axis joined by "; " when they differ;
    ``established``: the margin of the point is established and every line bounding the regime could
    be evaluated over the searched ranges; ``reasons``: why not (plain sentences); ``outside_chart``,
    ``outside_chart_note``: the point lies outside the chart range; ``caveats``: other limits (e.g.
    the best point lies on the edge of the searched range); ``margins``: the full
    :class:`PointMargins` of the point (for :func:`margin_verdict`).
    """

    ql: float
    qg: float
    margin: float
    limiting: tuple[str, ...]
    regime: str
    ql_range: tuple[float, float]
    qg_range: tuple[float, float]
    range_basis: str = "given"
    established: bool = True
    reasons: tuple[str, ...] = ()
    outside_chart: bool = False
    outside_chart_note: str = ""
    caveats: tuple[str, ...] = ()
    margins: PointMargins | None = None

    @property
    def search_note(self) -> str:
        """One sentence: the flows searched and where that range comes from."""
        return (f"Searched within {_flows_text(*self.ql_range, *self.qg_range)} "
                f"({self.range_basis}).")

    def to_dict(self) -> dict:
        return {"regime": self.regime, "ql_m3_s": self.ql, "qg_m3_s": self.qg, "symmetric_margin": self.margin,
                "limiting": list(self.limiting), "ql_range_m3_s": list(self.ql_range),
                "qg_range_m3_s": list(self.qg_range), "range_basis": self.range_basis,
                "search_note": self.search_note, "margin_established": self.established,
                "margin_reasons": list(self.reasons), "outside_chart": self.outside_chart,
                "outside_chart_note": self.outside_chart_note, "caveats": list(self.caveats)}


_AROUND = 10.0                                # default search: a factor 10 either side of the operating point


def _search_ranges(chart, ql_range, qg_range, around):
    """The search ranges [m^3/s] of :func:`robust_point` and a phrase saying where they come from."""
    fr = chart.case.flow_range
    if around is None:
        op = getattr(chart.case, "operating_point", None)
        centre = None if op is None else (float(op.ql), float(op.qg))
        what = "the operating point"
    else:
        centre = check_point(*around)
        what = "the given point"
    out, basis = [], []
    for i, (name, rng, lo, hi) in enumerate((("ql_range", ql_range, fr.ql_min, fr.ql_max),
                                              ("qg_range", qg_range, fr.qg_min, fr.qg_max))):
        if rng is not None:
            out.append(_check_range(name, rng))
            basis.append("given")
        elif centre is not None:
            out.append((centre[i] / _AROUND, centre[i] * _AROUND))
            basis.append(f"a decade either side of {what}")
        else:
            out.append((lo, hi))
            basis.append("the chart range (the case has no operating point)")
    phrase = basis[0] if basis[0] == basis[1] else f"Q_L: {basis[0]}; Q_G: {basis[1]}"
    return out[0], out[1], phrase


@in_chart_solves
def robust_point(chart, regime: str, ql_range=None, qg_range=None, *, around=None, grid: int = 25,
                 starts: int = 4) -> RobustPoint:
    r"""The point of ``regime`` with the largest symmetric margin, within stated flow ranges.

    .. math:: \max_{(Q_L, Q_G) \in R \cap [Q_{L,lo}, Q_{L,hi}] \times [Q_{G,lo}, Q_{G,hi}]} m(Q_L, Q_G)

    Parameters
    ----------
    chart : Chart
    regime : str     one of ``chart.regime_names``
    ql_range, qg_range : (float, float), optional   flows searched [m^3/s]; default: a decade either
                     side of ``around`` (Q/10 to 10 Q), or the chart range when there is no such point
    around : (float, float), optional   the point (Q_L, Q_G) [m^3/s] the default ranges are centred
                     on; default: the case's operating point (``chart.case.operating_point``)
    grid : int       start search: margins on a grid x grid of log-spaced points
    starts : int     number of the best grid points polished by Nelder–Mead in (log Q_L, log Q_G)

    Returns
    -------
    RobustPoint      with the ranges searched, where they come from, and whether its margin is
                     established

    Raises
    ------
    ValueError
        unknown regime (the message lists the known ones), bad ranges, or a regime that does
        not occur within the ranges.

    Notes
    -----
    The default range is a decade either side of the operating point, not the chart range: the
    chart range is chosen for the picture, while the robust point is a design suggestion near the
    intended operation. The optimum may lie on the edge of the range (then a caveat says so).

    The margin is a minimum of smooth functions, largest where two lines are equally close; the
    polish (scipy Nelder–Mead, tolerance 1e-8 decade) handles that kink. Between two lines
    Q_G = c_1 Q_L and Q_G = c_2 Q_L the optimum is the ratio Q_G/Q_L = sqrt(c_1 c_2) with
    (1 - m)/(1 + m) = sqrt(c_1/c_2), at any Q_L.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.models.boundary import PowerLawBoundary
    >>> from lowgmap.physics.chart.composition import Chart
    >>> case = example_case()                  # water/air, 10 mm tube, Q_L and Q_G from 1e-7 to 1e-3 m^3/s
    >>> chart = Chart.build(case, [PowerLawBoundary("low", 0.1, 1.0, "a", "b"),
    ...                            PowerLawBoundary("high", 10.0, 1.0, "b", "c")])
    >>> rp = robust_point(chart, "b")
    >>> round(rp.qg / rp.ql, 4), round(rp.margin, 6)     # ratio 1; (1 - m)/(1 + m) = 0.1
    (1.0, 0.818182)
    >>> rp.range_basis, rp.established
    ('the chart range (the case has no operating point)', True)
    """
    from scipy.optimize import minimize

    r_idx = regime_index(chart, regime)
    (ql_lo, ql_hi), (qg_lo, qg_hi), basis = _search_ranges(chart, ql_range, qg_range, around)
    bx = (math.log10(ql_lo), math.log10(ql_hi), math.log10(qg_lo), math.log10(qg_hi))
    holder, g = geometry_of(chart, bx[:2], bx[2:], keep_going=True)

    u = np.linspace(bx[0], bx[1], grid)
    v = np.linspace(bx[2], bx[3], grid)
    GU, GV = np.meshgrid(u, v)
    U, V = GU.ravel(), GV.ravel()
    with np.errstate(all="ignore"):
        reg = np.asarray(chart.classify(10.0 ** U, 10.0 ** V))
    inside = reg == regime
    if not inside.any():                        # a thin region: try the region polygons' vertices
        pu, pv = [], []
        for r in chart.regions:
            if r.name == regime:
                pu.append(np.log10(np.asarray(r.polygon_ql)))
                pv.append(np.log10(np.asarray(r.polygon_qg)))
                pu.append([float(np.mean(pu[-1]))])
                pv.append([float(np.mean(pv[-1]))])
        if pu:
            U = np.clip(np.concatenate(pu), bx[0], bx[1])
            V = np.clip(np.concatenate(pv), bx[2], bx[3])
            reg = np.asarray(chart.classify(10.0 ** U, 10.0 ** V))
            inside = reg == regime
    if not inside.any():
        hint = "" if basis == "given" else f" ({basis}); give ql_range and qg_range to search elsewhere"
        raise ValueError(f"regime {regime!r} does not occur within Q_L [{ql_lo:.4g}, {ql_hi:.4g}] m^3/s, "
                         f"Q_G [{qg_lo:.4g}, {qg_hi:.4g}] m^3/s{hint}")
    U, V = U[inside], V[inside]
    m0, _ = regime_margins(g, U, V, np.full(U.size, r_idx, dtype=np.intp))

    def objective(p):
        x, y = float(p[0]), float(p[1])
        out = max(bx[0] - x, x - bx[1], bx[2] - y, y - bx[3], 0.0)
        if out > 0:
            return 1.0 + out
        if str(chart.classify(10.0 ** x, 10.0 ** y)) != regime:
            return 1.0
        m, _ = regime_margins(g, np.array([x]), np.array([y]), np.array([r_idx], dtype=np.intp))
        return -float(m[0])

    order = np.argsort(-m0)
    chosen: list[int] = []
    for j in order:
        if all(abs(U[j] - U[c]) + abs(V[j] - V[c]) > 1e-9 for c in chosen):
            chosen.append(int(j))
        if len(chosen) >= starts:
            break
    best = (-float(m0[order[0]]), float(U[order[0]]), float(V[order[0]]))
    du = max((bx[1] - bx[0]) / grid, 1e-6)
    dv = max((bx[3] - bx[2]) / grid, 1e-6)
    for j in chosen:
        p0 = np.array([U[j], V[j]])
        simplex = np.array([p0, p0 + [0.5 * du, 0.0], p0 + [0.0, 0.5 * dv]])
        res = minimize(objective, p0, method="Nelder-Mead",
                       options={"xatol": 1e-8, "fatol": 1e-11, "maxiter": 600, "initial_simplex": simplex})
        if res.fun < best[0]:
            best = (float(res.fun), float(res.x[0]), float(res.x[1]))
    ql, qg = 10.0 ** best[1], 10.0 ** best[2]
    pm = point_margins(chart, ql, qg)
    m = pm.symmetric_margin
    touching = tuple(b.name for b in pm.boundaries
                     if b.limits_regime and b.margin < MAX_MARGIN and b.margin <= m * (1 + 1e-4) + 1e-9)
    reasons = list(pm.reasons)
    wanted = set(g.bounding.get(r_idx, ()))
    reasons += [t for t in _failed_reasons(holder.lines, g, wanted) if t not in reasons]
    reasons += _gap_reasons(evaluation_gaps(chart, bx, sorted(wanted)), bx)
    caveats = list(pm.caveats)
    edges = [w for w, hit in (("the lowest Q_L", best[1] - bx[0] < 1e-6), ("the highest Q_L", bx[1] - best[1] < 1e-6),
                              ("the lowest Q_G", best[2] - bx[2] < 1e-6), ("the highest Q_G", bx[3] - best[2] < 1e-6))
             if hit]
    if edges:
        caveats.append(f"The best point lies on the edge of the searched range ({' and '.join(edges)}): a wider "
                       f"range may give a larger margin.")
    return RobustPoint(ql, qg, m, touching, regime, (ql_lo, ql_hi), (qg_lo, qg_hi), basis,
                       established=not reasons, reasons=tuple(reasons), outside_chart=pm.outside_chart,
                       outside_chart_note=pm.outside_chart_note, caveats=tuple(caveats), margins=pm)


# ---------------------------------------------------------------------------------------------
# Verdict: one statement of the margin for every view

@dataclass(frozen=True)
class Verdict:
    """What the margins of an operating point say against the requirement, in words.

    Every view (command line, dashboard, exported chart, review report) shows these words and
    sentences; none decides "met" on its own.

    Attributes
    ----------
    regime : str                  regime at the point ("" when none)
    intended_regime : str or None the regime the design wants (None: none stated)
    in_intended_regime : bool or None   None when no intended regime is stated; False also when the
                                  regime at the point could not be determined
    regime_status : str           "in the intended regime", "NOT IN THE INTENDED REGIME" or "no intended
                                  regime stated" (:data:`REGIME_STATUSES`)
    margin_status : str           "met", "NOT MET" or "not established" (:data:`MARGIN_STATUSES`)
    required : float              required symmetric margin [fraction]
    margin : float                the symmetric margin computed [fraction] (a lower bound when it is
                                  :data:`MAX_MARGIN`)
    limiting_boundary : str or None   name of the line that sets it
    limiting_label : str or None  its chart label
    established : bool            the margin is established (:class:`PointMargins`)
    outside_chart : bool          the point lies outside the drawn chart range
    basis : str                   one sentence: what was computed
    limits : tuple of str         sentences: what the verdict does not cover (why the margin is not
                                  established, the point outside the drawn chart, lines not counted,
                                  effects not included)
    """

    regime: str
    intended_regime: str | None
    in_intended_regime: bool | None
    regime_status: str
    margin_status: str
    required: float
    margin: float
    limiting_boundary: str | None
    limiting_label: str | None
    established: bool
    outside_chart: bool
    basis: str
    limits: tuple[str, ...]

    @property
    def met(self) -> bool:
        """True only when the margin status is "met"."""
        return self.margin_status == "met"

    @property
    def headline(self) -> str:
        """One line for a title block, e.g. 'Required margin ±30 %: met (±78.1 %); in the intended regime'."""
        shown = f"at least ±{_pct(self.margin)}" if self.margin >= MAX_MARGIN else f"±{_pct(self.margin)}"
        return (f"Required margin ±{_pct(self.required)}: {self.margin_status} (symmetric margin {shown}); "
                f"{self.regime_status}")

    def to_dict(self) -> dict:
        """JSON-ready dict (fractions for margins)."""
        return {"regime": self.regime, "intended_regime": self.intended_regime,
                "in_intended_regime": self.in_intended_regime, "regime_status": self.regime_status,
                "margin_status": self.margin_status, "met": self.met, "required_margin": self.required,
                "symmetric_margin": self.margin if math.isfinite(self.margin) else None,
                "limiting_boundary": self.limiting_boundary, "limiting_label": self.limiting_label,
                "margin_established": self.established, "outside_chart": self.outside_chart,
                "basis": self.basis, "limits": list(self.limits), "headline": self.headline}


def margin_verdict(margins: PointMargins, required_margin: float, intended_regime: str | None = None) -> Verdict:
    r"""The verdict on an operating point's margins: intended regime, required margin, basis, limits.

    .. math:: \text{met} \iff \text{established} \wedge m \ge m_\mathrm{req}
              \wedge (\text{no intended regime} \vee \text{regime} = \text{intended})

    Parameters
    ----------
    margins : PointMargins        from :func:`point_margins` (or ``RobustPoint.margins``)
    required_margin : float       required symmetric margin [fraction], in [0, 1)
    intended_regime : str, optional   the regime the design wants; must be a regime of the chart

    Returns
    -------
    Verdict

    Raises
    ------
    ValueError
        ``required_margin`` outside [0, 1), or an intended regime the chart does not have (the
        message lists the known ones).

    Notes
    -----
    Order of the decision: a point determinately in another regime than the intended one is
    "NOT MET" (its margin in the intended regime is below zero); otherwise a margin that is not
    established (see :class:`PointMargins`: a line not evaluable, the regime undetermined, or no
    boundary found within the ±99.9 % box) is "not established", never "met"; otherwise "met" when
    m >= required, else "NOT MET".

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.models.boundary import PowerLawBoundary
    >>> from lowgmap.physics.chart.composition import Chart
    >>> chart = Chart.build(example_case(), [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])
    >>> v = margin_verdict(point_margins(chart, 1e-5, 0.5e-5), 0.3, "bubbles")   # m = 1/3
    >>> v.regime_status, v.margin_status
    ('in the intended regime', 'met')
    >>> margin_verdict(point_margins(chart, 1e-5, 0.5e-5), 0.4).margin_status
    'NOT MET'
    >>> margin_verdict(point_margins(chart, 1e-5, 0.5e-5), 0.3, "slugs").regime_status
    'NOT IN THE INTENDED REGIME'
    """
    req = finite("required_margin", required_margin)
    if not 0.0 <= req < 1.0:
        raise ValueError(f"required_margin must be within [0, 1) (a fraction, 0.3 for ±30 %), got {req:.6g}")
    pm = margins
    if intended_regime is not None:
        intended_regime = str(intended_regime)
        if pm.regimes and intended_regime not in pm.regimes:
            raise ValueError(f"intended regime {intended_regime!r} is not a regime of this chart; regimes: "
                             + "; ".join(pm.regimes))
    if intended_regime is None:
        inside, regime_status = None, REGIME_STATUSES[2]
    else:
        inside = bool(pm.regime_determined and pm.regime == intended_regime)
        regime_status = REGIME_STATUSES[0] if inside else REGIME_STATUSES[1]
    m = float(pm.symmetric_margin)
    established = bool(pm.established) and math.isfinite(m)
    if intended_regime is not None and pm.regime_determined and not inside:
        status = MARGIN_STATUSES[1]
    elif not established:
        status = MARGIN_STATUSES[2]
    else:
        status = MARGIN_STATUSES[0] if m >= req else MARGIN_STATUSES[1]
    lim = pm.limiting
    if pm.search_ql is not None and pm.search_qg is not None:
        where = _flows_text(*pm.search_ql, *pm.search_qg)
    else:
        where = _flows_text(pm.ql * (1 - MAX_MARGIN), pm.ql * (1 + MAX_MARGIN), pm.qg * (1 - MAX_MARGIN),
                            pm.qg * (1 + MAX_MARGIN))
    basis = (f"Symmetric ±m box on the sampled lines over {where} (the point's ±{_pct(MAX_MARGIN)} box): the largest "
             f"m for which every flow pair within ±m of Q_L {_q(pm.ql)} m³/s and Q_G {_q(pm.qg)} m³/s stays in "
             f"the regime \"{pm.regime}\".")
    limits = list(pm.reasons)
    if intended_regime is not None and not pm.regime_determined:
        limits.append(f"Whether the point lies in the intended regime \"{intended_regime}\" could not be "
                      f"determined; it is not counted as in it.")
    if pm.outside_chart:
        limits.append(pm.outside_chart_note)
    limits += list(pm.caveats)
    comparison = [b.label for b in pm.boundaries if b.role == "comparison"]
    if comparison:
        limits.append("Comparison lines are drawn for reference and not counted: " + "; ".join(comparison) + ".")
    limits.append("The margin measures changes of the flow rates only, on the boundary lines as modelled: the "
                  "scatter of the models and the uncertainty of fluid properties, geometry and residual "
                  "acceleration are not included.")
    return Verdict(pm.regime, intended_regime, inside, regime_status, status, req, m, pm.limiting_boundary,
                   lim.label if lim is not None else None, established, bool(pm.outside_chart), basis,
                   tuple(limits))
