r"""Calibration against labelled test points: fitted model constants, and empirical boundaries.

Likelihood of the observed regimes
----------------------------------
Each region-defining line k of a chart has an implicit function :math:`g_k(Q_L, Q_G)`, negative
below the line and positive above it (:class:`~lowgmap.physics.models.boundary.BoundaryModel`). For an explicit
line it is the signed distance along the gas axis in natural-log units,
:math:`g = \ln(Q_G / f(Q_L))`; the corner models use logarithms of physical ratios. A point is taken
to lie above line k with the probability

.. math:: p_k = \frac{1}{1 + e^{-\beta g_k}}

(a logistic smoothing of the sharp sides; :math:`\beta` is a fitted sharpness, 1/β the width of the
transition in log units). The lines are taken as independent, so every combination of sides
:math:`c \in \{\text{below}, \text{above}\}^n` has the probability :math:`\prod_k p_k^{[c_k]}(1 -
p_k)^{1 - [c_k]}`, and the chart's own rule (``chart.scheme``: the sequence rule, or a partition
scheme) turns each combination into a regime. The probability of the observed regime r is the sum
over the combinations that give r. A floor ε for mislabelled observations keeps single wrong labels
from dominating:

.. math:: P(r \mid Q_L, Q_G) = (1 - \varepsilon) \sum_{c \to r} \prod_k p_k(c_k) + \frac{\varepsilon}{R},
          \qquad -\ln L = -\sum_i \ln P(r_i \mid Q_{L,i}, Q_{G,i})

with R the number of chart regimes. Where a line's implicit function is undefined (NaN) the
combination keeps NaN for it and the scheme decides (the sequence rule counts it as "above").
In the sharp limit β → ∞, ε → 0 the most likely regime is the chart's classification.

Fit
---
The chosen constants (a few at a time, each within its :class:`~lowgmap.physics.models.boundary.Constant` range),
ln β (within [ln 0.1, ln 100]) and, unless fixed, ε (within [1e-4, 0.3], logit scale) minimise
−ln L with scipy's bounded SLSQP from several starts: the current values, the best points of a coarse
scan of each constant over its range, and random points of the ranges (seeded). Constants that span
three decades or more, or are unbounded above, are fitted in log scale. The cap β ≤ 100 (a transition
1 % wide in flow, below what flow meters resolve) also keeps −ln L informative when the labels are
cleanly separated: the fitted line then sits between the nearest opposite points instead of anywhere
in the gap.

Confidence intervals (95 %) come from the **profile likelihood**: for each constant, the values
whose profile −ln L (the other constants, β and ε re-optimised at each value) lies within
χ²₁(0.95)/2 = 1.92 of the minimum (Wilks' theorem); an interval that reaches the constant's allowed
range ends there. Intervals from the observed information (the inverse Hessian of −ln L) are not
offered: with sharply separated labels β is large, −ln L is nearly piecewise constant in the
constants, and a numerical Hessian is meaningless there, while the profile still follows the gap
between the nearest opposite points. Constants of one line whose effect on it is confounded (e.g.
α_c and C0 of a drift-flux line, which enter only as their product: their sensitivities
∂g/∂θ over the points are collinear) are flagged; their profile intervals then span their ranges.

Calibrated bands: the 95 % interval of a fitted constant is its new uncertainty band
(:attr:`FittedConstant.band`, replacing the prior band of the model or the default band). The fitted
chart (:attr:`Calibration.chart_after`) carries these bands in its case
(:func:`lowgmap.physics.models.boundary.with_case_bands`), so its band drawing, worst-case margins and
model-uncertainty Monte Carlo use them; :meth:`Calibration.band_entries` gives what a revised case
file stores. An end of the interval the profile did not find (NaN) falls back to the constant's prior
band end, else to its allowed limit; an end that stays infinite leaves the constant without a
calibrated band (its prior band is kept, with a warning).

Over-fitting: the agreement of the fitted chart is reported on the points used, and by k-fold
cross-validation (each fold classified with constants fitted to the other folds; leave-one-out
when there are fewer points than folds).

Empirical boundary
------------------
When no model fits, a power law :math:`Q_G = a Q_L^b` between two observed regimes is fitted by the
same likelihood with one :class:`~lowgmap.physics.models.boundary.PowerLawBoundary` line: a logistic regression in
(ln Q_L, ln Q_G) whose decision line is straight in log-log axes.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from lowgmap.physics.studies.agreement import (ValidityCriteria, agreement, map_regimes, per_point_gravity, point_arrays,
                                               point_validity)
from lowgmap.physics.models.boundary import PowerLawBoundary, with_case_bands
from lowgmap.physics.chart.composition import CHAIN

__all__ = ["MAX_FIT", "FittedConstant", "Calibration", "calibrate", "parse_fit_spec", "EmpiricalFit",
           "fit_empirical_boundary", "chart_with_boundary", "empirical_name"]

#: Most constants fitted at once.
MAX_FIT = 4
_BETA_BOUNDS = (0.1, 100.0)
_EPS_BOUNDS = (1e-4, 0.3)
_BETA_START = 3.0
_EPS_START = 0.02
_CHI2_95_HALF = 1.9207294103470688          # chi2.ppf(0.95, 1) / 2
_MAX_LINES = 8


def _logit(p):
    return math.log(p / (1.0 - p))


def _expit(x):
    return 1.0 / (1.0 + math.exp(-x))


# =============================================================================================
# parameters and transforms

@dataclass(frozen=True)
class _Param:
    """One fitted constant: line index, constant, allowed range, scale of the fit."""

    line: int
    model: str
    name: str
    unit: str
    low: float
    high: float
    start: float
    log: bool

    def to_x(self, v):
        return math.log(v) if self.log else v / self._scale

    def to_v(self, x):
        return math.exp(x) if self.log else x * self._scale

    @property
    def _scale(self):
        s = abs(self.start)
        if s > 0:
            return s
        return (self.high - self.low) if math.isfinite(self.high - self.low) and self.high > self.low else 1.0

    def bounds_x(self):
        if self.log:
            lo = math.log(self.low) if self.low > 0 else math.log(self.start) - 12.0 * math.log(10.0)
            hi = math.log(self.high) if math.isfinite(self.high) else math.log(self.start) + 12.0 * math.log(10.0)
            return lo, hi
        lo = self.low / self._scale if math.isfinite(self.low) else None
        hi = self.high / self._scale if math.isfinite(self.high) else None
        return lo, hi

    def start_range_x(self):
        lo, hi = self.bounds_x()
        x0 = self.to_x(self.start)
        width = 2.0 * math.log(10.0) if self.log else 1.0
        return (lo if lo is not None else x0 - width), (hi if hi is not None else x0 + width)


def _make_param(k, model, const, start) -> _Param:
    lo, hi = float(const.low), float(const.high)
    use_log = start > 0 and lo >= 0 and (not math.isfinite(hi) or (lo > 0 and hi / lo >= 1e3))
    return _Param(k, model.name, const.name, const.unit, lo, hi, float(start), use_log)


def parse_fit_spec(spec: str) -> tuple[str, str | None]:
    """Split ``"MODEL.CONSTANT"`` (or ``"MODEL"``: all its constants) into its parts.

    >>> parse_fit_spec("bubble_slug_dukler_1988.alpha_c")
    ('bubble_slug_dukler_1988', 'alpha_c')
    >>> parse_fit_spec("bubble_slug_dukler_1988")
    ('bubble_slug_dukler_1988', None)
    """
    if not isinstance(spec, str) or not spec.strip():
        raise ValueError(f"a fit target must be MODEL or MODEL.CONSTANT, got {spec!r}")
    name, _, const = spec.strip().partition(".")
    if not name or (const == "" and spec.strip().endswith(".")) or "." in const:
        raise ValueError(f"a fit target must be MODEL or MODEL.CONSTANT, got {spec!r}")
    return name, (const or None)


def _targets(chart, lines, fit) -> list[_Param]:
    """Resolve fit targets against the chart's region-defining lines."""
    if isinstance(fit, str):
        fit = [fit]
    specs = []
    for item in fit:
        if isinstance(item, tuple) and len(item) == 2:
            specs.append((str(item[0]), None if item[1] is None else str(item[1])))
        else:
            specs.append(parse_fit_spec(item))
    if not specs:
        raise ValueError("nothing to fit: give at least one MODEL or MODEL.CONSTANT")
    region = [m.name for m, _ in lines]
    comparison = [m.name for m, _ in getattr(chart, "comparison_models", ())]
    out: list[_Param] = []
    for name, const in specs:
        if name not in region:
            if name in comparison:
                raise ValueError(
                    f"{name} is a comparison line on this chart: it does not classify points, so test points "
                    f"cannot calibrate it (list it first among the case's models to make it region-defining); "
                    f"region-defining models: {', '.join(region) or 'none'}")
            from lowgmap.physics.models.boundary import model_names
            known = model_names()
            what = "is not on this chart" if name in known else "is not a known boundary model"
            raise ValueError(f"unknown model {name!r} for calibration: it {what}; the chart's region-defining "
                             f"models are: {', '.join(region) or 'none'}")
        k = region.index(name)
        model, consts = lines[k]
        if const is None:
            if not model.constants:
                raise ValueError(f"{name} has no adjustable constants")
            chosen = list(model.constants)
        else:
            chosen = [model.constant(const)]      # ValueError naming the known constants
        for c in chosen:
            if any(p.line == k and p.name == c.name for p in out):
                continue
            out.append(_make_param(k, model, c, consts[c.name]))
    if len(out) > MAX_FIT:
        raise ValueError(f"fit at most {MAX_FIT} constants at a time, got {len(out)}: "
                         + ", ".join(f"{p.model}.{p.name}" for p in out))
    return out


# =============================================================================================
# likelihood

class _Stub:
    """Stand-in line whose implicit function returns given values (to evaluate a scheme's rule)."""

    def __init__(self, name, values):
        self.name = name
        self._v = values

    def implicit(self, case, ql, qg, **consts):
        return self._v


class _Likelihood:
    """Negative log-likelihood of observed regimes for a set of lines with some constants free."""

    def __init__(self, case, scheme, lines, regimes, ql, qg, obs, params, eps_fixed):
        self.case = case
        self.scheme = scheme
        self.lines = [(m, dict(c)) for m, c in lines]
        self.regimes = tuple(regimes)
        self.ql = np.asarray(ql, dtype=float)
        self.qg = np.asarray(qg, dtype=float)
        self.obs = np.asarray(obs, dtype=int)
        self.params = list(params)
        self.eps_fixed = eps_fixed
        n = len(self.lines)
        if n > _MAX_LINES:
            raise ValueError(f"calibration handles charts of up to {_MAX_LINES} region-defining lines, got {n}")
        self.combos = ((np.arange(2 ** n)[:, None] >> np.arange(n)[None, :]) & 1) * 2.0 - 1.0
        self.free_lines = sorted({p.line for p in self.params})
        self._fixed_s = {}
        for k, (m, c) in enumerate(self.lines):
            if k not in self.free_lines:
                self._fixed_s[k] = self._implicit(k, c)
        self._tables: dict[bytes, np.ndarray] = {}
        self.nx = len(self.params) + 1 + (0 if eps_fixed is not None else 1)

    # -- parameters ----------------------------------------------------------------------------
    def bounds(self):
        b = [p.bounds_x() for p in self.params] + [tuple(math.log(v) for v in _BETA_BOUNDS)]
        if self.eps_fixed is None:
            b.append(tuple(_logit(v) for v in _EPS_BOUNDS))
        return b

    def decode(self, x):
        consts = [dict(c) for _, c in self.lines]
        for p, xv in zip(self.params, x):
            consts[p.line][p.name] = p.to_v(float(xv))
        beta = math.exp(float(x[len(self.params)]))
        eps = self.eps_fixed if self.eps_fixed is not None else _expit(float(x[len(self.params) + 1]))
        return consts, beta, eps

    def start(self, beta=_BETA_START, eps=_EPS_START):
        x = [p.to_x(p.start) for p in self.params] + [math.log(beta)]
        if self.eps_fixed is None:
            x.append(_logit(eps))
        return np.array(x, dtype=float)

    # -- evaluation ----------------------------------------------------------------------------
    def _implicit(self, k, consts, idx=None):
        m = self.lines[k][0]
        ql = self.ql if idx is None else self.ql[idx]
        qg = self.qg if idx is None else self.qg[idx]
        with np.errstate(all="ignore"):
            s = np.asarray(m.implicit(self.case, ql, qg, **consts), dtype=float)
        return np.broadcast_to(s, ql.shape).astype(float)

    def s_matrix(self, consts):
        cols = []
        for k in range(len(self.lines)):
            cols.append(self._fixed_s[k] if k in self._fixed_s else self._implicit(k, consts[k]))
        return np.column_stack(cols) if cols else np.zeros((self.ql.size, 0))

    def _table(self, pattern):
        key = pattern.tobytes()
        t = self._tables.get(key)
        if t is None:
            vals = np.where(pattern[None, :], self.combos, np.nan)
            ones = np.ones(vals.shape[0])
            stubs = tuple((_Stub(m.name, vals[:, k].copy()), ()) for k, (m, _) in enumerate(self.lines))
            names = np.asarray(self.scheme.classify(self.case, stubs, self.regimes, ones, ones)).astype(str)
            index = {r: i for i, r in enumerate(self.regimes)}
            t = np.array([index.get(nm, -1) for nm in names], dtype=int)
            self._tables[key] = t
        return t

    def point_logp(self, s, beta, eps, idx=None):
        """ln P(observed regime) of each point (idx: a subset)."""
        obs = self.obs if idx is None else self.obs[idx]
        finite = np.isfinite(s)
        sw = np.where(finite, s, 0.0)
        z = beta * self.combos[None, :, :] * sw[:, None, :]
        logw = -np.logaddexp(0.0, -z).sum(axis=2)                       # (N, combos)
        out = np.empty(s.shape[0])
        if finite.all():
            groups = [(finite[0] if finite.size else np.ones(len(self.lines), dtype=bool), slice(None))]
        else:
            pats, inv = np.unique(finite, axis=0, return_inverse=True)
            inv = np.asarray(inv).reshape(-1)
            groups = [(pat, np.flatnonzero(inv == j)) for j, pat in enumerate(pats)]
        for pat, rows in groups:
            t = self._table(pat)
            hit = t[None, :] == obs[rows, None]
            lw = np.where(hit, logw[rows], -np.inf)
            mx = lw.max(axis=1)
            with np.errstate(invalid="ignore", divide="ignore"):
                lse = np.where(np.isfinite(mx), mx + np.log(np.exp(lw - np.where(np.isfinite(mx), mx, 0.0)[:, None])
                                                             .sum(axis=1)), -np.inf)
            out[rows] = lse
        R = max(len(self.regimes), 1)
        with np.errstate(divide="ignore"):
            return np.logaddexp(math.log1p(-eps) + out, math.log(eps / R))

    def nll(self, x, idx=None):
        try:
            consts, beta, eps = self.decode(x)
            if idx is None:
                s = self.s_matrix(consts)
            else:
                s = np.column_stack([self._fixed_s[k][idx] if k in self._fixed_s else self._implicit(k, consts[k], idx)
                                     for k in range(len(self.lines))])
        except (ValueError, OverflowError):     # a combination the model rejects (e.g. c0 * alpha_c >= 1)
            return 1e12
        v = -float(np.sum(self.point_logp(s, beta, eps, idx)))
        return v if math.isfinite(v) else 1e12

    def classify(self, consts, idx=None):
        """Sharp classification (the chart's rule) with the given constants, as regime indices."""
        ql = self.ql if idx is None else self.ql[idx]
        qg = self.qg if idx is None else self.qg[idx]
        rm = tuple((m, tuple(sorted(c.items()))) for (m, _), c in zip(self.lines, consts))
        names = np.asarray(self.scheme.classify(self.case, rm, self.regimes, ql, qg)).astype(str).reshape(-1)
        index = {r: i for i, r in enumerate(self.regimes)}
        return np.array([index.get(nm, -1) for nm in names], dtype=int)


def _minimize(lik, starts, idx=None, fixed=None):
    """Best bounded SLSQP solution from several starts; ``fixed`` = {coordinate: value}."""
    from scipy.optimize import minimize

    bounds = lik.bounds()
    free = [i for i in range(lik.nx) if not fixed or i not in fixed]

    def full(y):
        x = np.empty(lik.nx)
        x[free] = y
        for i, v in (fixed or {}).items():
            x[i] = v
        return x

    best = None
    for x0 in starts:
        y0 = np.array([x0[i] for i in free], dtype=float)
        b = [bounds[i] for i in free]
        y0 = np.array([min(max(v, lo if lo is not None else -np.inf), hi if hi is not None else np.inf)
                       for v, (lo, hi) in zip(y0, b)])
        if lik.nll(full(y0), idx) >= 1e12:
            continue
        if not free:
            val = lik.nll(full(y0), idx)
            cand = (val, full(y0))
        else:
            bb = [(-np.inf if lo is None else lo, np.inf if hi is None else hi) for lo, hi in b]
            res = minimize(lambda y: lik.nll(full(y), idx), y0, method="SLSQP", bounds=bb,
                           options={"maxiter": 300, "ftol": 1e-10})
            cand = (float(res.fun), full(res.x))
        if best is None or cand[0] < best[0]:
            best = cand
    if best is None:
        raise ValueError("no start point gives a usable likelihood (every start violates a model's constraints)")
    return best[1], best[0]


def _grid_starts(lik, n=9, keep=2):
    """Best points of a coarse scan of each constant over its range (the others at their start values)."""
    cands = []
    nb = len(lik.params)
    for j, p in enumerate(lik.params):
        lo, hi = p.start_range_x()
        for v in np.linspace(lo, hi, n):
            for beta in (_BETA_START, 30.0):
                x = lik.start()
                x[j] = v
                x[nb] = math.log(beta)
                cands.append((lik.nll(x), x))
    cands.sort(key=lambda t: t[0])
    return [x for f, x in cands[:keep] if f < 1e12]


def _starts(lik, rng, n_random, around=None):
    out = [lik.start()] if around is None else [np.asarray(around, dtype=float), lik.start()]
    if around is None:
        out += _grid_starts(lik)
    for _ in range(max(0, n_random)):
        x = lik.start()
        for i, p in enumerate(lik.params):
            lo, hi = p.start_range_x()
            x[i] = rng.uniform(lo, hi)
        x[len(lik.params)] = math.log(rng.choice([1.0, 3.0, 10.0, 30.0]))
        out.append(x)
    return out


def _at_bound(x, bounds, i, tol=1e-6) -> bool:
    lo, hi = bounds[i]
    return bool((lo is not None and x[i] - lo < tol) or (hi is not None and hi - x[i] < tol))


def _confounded(lik, x) -> list[str]:
    """Warnings for fitted constants of one line whose sensitivities over the points are collinear."""
    out = []
    consts, _, _ = lik.decode(x)
    by_line: dict[int, list[int]] = {}
    for j, p in enumerate(lik.params):
        by_line.setdefault(p.line, []).append(j)
    for k, js in by_line.items():
        if len(js) < 2:
            continue
        cols = []
        for j in js:
            h = 1e-5 * max(1.0, abs(x[j]))
            xp, xm = x.copy(), x.copy()
            xp[j] += h
            xm[j] -= h
            try:
                gp = lik._implicit(k, lik.decode(xp)[0][k])
                gm = lik._implicit(k, lik.decode(xm)[0][k])
            except (ValueError, OverflowError):
                cols.append(None)
                continue
            cols.append((gp - gm) / (2 * h))
        for a in range(len(js)):
            for b in range(a + 1, len(js)):
                u, v = cols[a], cols[b]
                if u is None or v is None:
                    continue
                ok = np.isfinite(u) & np.isfinite(v)
                nu, nv = np.linalg.norm(u[ok]), np.linalg.norm(v[ok])
                if ok.sum() < 2 or nu == 0 or nv == 0:
                    continue
                cos = float(np.dot(u[ok], v[ok]) / (nu * nv))
                if abs(cos) > 0.999:
                    pa, pb = lik.params[js[a]], lik.params[js[b]]
                    out.append(f"{pa.model}.{pa.name} and {pb.name} are confounded: they move the line the same "
                               f"way at every point (sensitivity correlation {cos:+.4f}), so the points fix only a "
                               f"combination of them (e.g. alpha_c and c0 of a drift-flux line enter as their "
                               f"product); fit one of them")
    return out


def _profile(lik, x_opt, f_opt, j):
    """(lo, hi) in x of the profile-likelihood interval of coordinate j (Wilks, 95 %)."""
    from scipy.optimize import brentq

    bounds = lik.bounds()
    lo_b, hi_b = bounds[j]
    thr = f_opt + _CHI2_95_HALF
    cache = {}
    last = [x_opt.copy()]

    def prof(v):
        key = round(float(v), 12)
        if key not in cache:
            starts = []
            for base in (last[0], x_opt):
                x0 = base.copy()
                x0[j] = v
                starts.append(x0)
            if len(lik.params) > 1:            # other constants: also start from a soft transition
                x0 = starts[-1].copy()         # (at a large sharpness -ln L is nearly flat in them)
                nb = len(lik.params)
                x0[nb] = min(x0[nb], math.log(_BETA_START))
                starts.append(x0)
            xs, fv = _minimize(lik, starts, fixed={j: v})
            last[0] = xs
            cache[key] = fv
        return cache[key] - thr

    p = lik.params[j]
    step0 = 0.02
    ends = []
    for sign, bound in ((-1, lo_b), (1, hi_b)):
        prev = x_opt[j]
        step = step0 * max(1.0, abs(x_opt[j])) if not p.log else step0
        found = None
        for _ in range(40):
            cand = prev + sign * step
            if bound is not None and (cand - bound) * sign >= 0:
                cand = bound
            try:
                val = prof(cand)
            except ValueError:
                val = math.inf
            if val >= 0:
                a, b = (prev, cand) if sign > 0 else (cand, prev)
                try:
                    found = brentq(prof, a, b, xtol=1e-4 * max(1.0, abs(x_opt[j])), rtol=1e-6)
                except ValueError:
                    found = cand
                break
            if bound is not None and cand == bound:
                found = bound
                break
            prev = cand
            step *= 2.0
        ends.append(found if found is not None else (bound if bound is not None else math.nan))
    return tuple(ends)


# =============================================================================================
# results

@dataclass(frozen=True)
class FittedConstant:
    """One fitted constant: start and fitted value, 95 % interval, allowed range (SI).

    ``prior_band``: the constant's uncertainty band before the fit ((low, high) or None), used where
    the interval has no end; ``n_points``: test points of the fit (for the band's reason).
    """

    model: str
    name: str
    unit: str
    start: float
    value: float
    interval: tuple
    low: float
    high: float
    at_limit: bool
    prior_band: tuple | None = None
    n_points: int = 0

    @property
    def key(self) -> str:
        return f"{self.model}.{self.name}"

    @property
    def band(self) -> tuple[float, float] | None:
        """The calibrated uncertainty band: the 95 % interval, containing the fitted value.

        An end the profile did not find (NaN) falls back to the prior band's end, else to the allowed
        limit; None when an end stays infinite (no band can be drawn from).

        >>> FittedConstant("m", "k", "-", 1.0, 2.0, (1.8, float("nan")), 0.0, 10.0, False, (0.5, 4.0)).band
        (1.8, 4.0)
        """
        ends = []
        for i, (v, prior, limit) in enumerate(zip(self.interval, self.prior_band or (None, None),
                                                  (self.low, self.high))):
            v = float(v) if v is not None else math.nan
            if not math.isfinite(v):
                v = prior if prior is not None else limit
            ends.append(float(v))
        lo, hi = min(ends[0], self.value), max(ends[1], self.value)
        if not (math.isfinite(lo) and math.isfinite(hi)):
            return None
        return lo, hi

    @property
    def band_reason(self) -> str:
        """Why the calibrated band is what it is (stored with the band)."""
        return (f"calibrated: 95 % profile-likelihood interval from {self.n_points} test points "
                f"(fitted value {self.value:.4g})")

    def contains(self, v: float) -> bool:
        lo, hi = self.interval
        return bool(lo <= v <= hi)

    def to_dict(self) -> dict:
        def num(x):
            return None if x is None or not math.isfinite(x) else float(x)
        band = self.band
        return {"model": self.model, "constant": self.name, "unit": self.unit, "start": self.start,
                "value": self.value, "interval_95": [num(self.interval[0]), num(self.interval[1])],
                "allowed_range": [num(self.low), num(self.high)], "at_limit": self.at_limit,
                "band": [num(band[0]), num(band[1])] if band else None,
                "band_reason": self.band_reason if band else None,
                "prior_band": [num(v) for v in self.prior_band] if self.prior_band else None}


@dataclass(frozen=True, eq=False)
class Calibration:
    """Result of :func:`calibrate`.

    Attributes
    ----------
    constants : tuple of FittedConstant
    sharpness : float          fitted β [1/(log unit)]: 1/β is the width of a transition
    label_error : float        ε (fitted or fixed)
    interval_method : str      "profile likelihood"
    n_points : int             points used in the fit
    points_used : tuple of str test ids of those points
    nll_start, nll : float     −ln L at the start values (β, ε re-fitted) and at the optimum
    agreement_before, agreement_after : float   sharp-rule agreement on the points used
    cv_agreement : float or None   cross-validated agreement of the fitted chart
    cv_method : str            "5-fold", "leave-one-out", ...
    warnings : tuple of str
    models : tuple of (name, dict)   every line of the chart with its constants after the fit
    chart_before, chart_after : Chart   ``chart_after`` carries the calibrated bands in its case (each
                         fitted constant's band is its 95 % interval, :attr:`FittedConstant.band`)
    check_before, check_after : Agreement   :func:`lowgmap.physics.studies.agreement.agreement` of both charts
    """

    constants: tuple
    sharpness: float
    label_error: float
    interval_method: str
    n_points: int
    points_used: tuple
    nll_start: float
    nll: float
    agreement_before: float
    agreement_after: float
    cv_agreement: float | None
    cv_method: str
    warnings: tuple
    models: tuple
    chart_before: object = field(default=None, repr=False)
    chart_after: object = field(default=None, repr=False)
    check_before: object = field(default=None, repr=False)
    check_after: object = field(default=None, repr=False)

    def constant(self, key: str) -> FittedConstant:
        """The :class:`FittedConstant` ``"model.constant"``."""
        for c in self.constants:
            if c.key == key:
                return c
        raise ValueError(f"no fitted constant {key!r}; fitted: {', '.join(c.key for c in self.constants)}")

    def params(self) -> dict:
        """{model: {constant: fitted value}} of the fitted constants."""
        out: dict = {}
        for c in self.constants:
            out.setdefault(c.model, {})[c.name] = c.value
        return out

    def band_entries(self) -> tuple:
        """(model, constant, low, high, reason) of every calibrated band: what a revised case stores
        (:data:`lowgmap.physics.models.boundary.CASE_BANDS_KEY`); constants without a band are left out."""
        return tuple((c.model, c.name, c.band[0], c.band[1], c.band_reason) for c in self.constants
                     if c.band is not None)

    def to_dict(self) -> dict:
        return {
            "constants": [c.to_dict() for c in self.constants], "sharpness": self.sharpness,
            "label_error": self.label_error, "interval_method": self.interval_method,
            "confidence": 0.95, "n_points": self.n_points, "points_used": list(self.points_used),
            "neg_log_likelihood_start": self.nll_start, "neg_log_likelihood": self.nll,
            "agreement_before": self.agreement_before, "agreement_after": self.agreement_after,
            "cv_agreement": self.cv_agreement, "cv_method": self.cv_method, "warnings": list(self.warnings),
            "agreement_all_before": self.check_before.fraction_all if self.check_before else None,
            "agreement_all_after": self.check_after.fraction_all if self.check_after else None,
            "agreement_valid_before": self.check_before.fraction_valid if self.check_before else None,
            "agreement_valid_after": self.check_after.fraction_valid if self.check_after else None,
            "models": [{"name": n, "constants": dict(c)} for n, c in self.models],
        }


def _case_band_overrides(case, model_name):
    from lowgmap.physics.models.boundary import case_bands
    return case_bands(case).get(model_name)


# =============================================================================================
# common preparation

#: Relative tolerance within which a test point's residual acceleration counts as the chart's own gravity
#: level when the case states an orientation (a choice: equal values up to rounding of the unit conversion).
GRAVITY_LEVEL_RTOL = 1e-9

def _labelled(chart, points, regime_map, criteria, use, regimes=None):
    """(arrays, mask of the points used, observed regime index) for the fit."""
    if use not in ("valid", "all"):
        raise ValueError(f"use must be 'valid' or 'all', got {use!r}")
    d = point_arrays(points)
    regimes = tuple(regimes if regimes is not None else chart.regime_names)
    obs = map_regimes(d["observed_regime"], regime_map, regimes)
    own = per_point_gravity(chart.case)
    val = point_validity(chart.case, d, criteria, chart=chart, own_gravity=own)
    with np.errstate(invalid="ignore"):
        flows = np.isfinite(d["ql_m3_s"]) & np.isfinite(d["qg_m3_s"]) & (d["ql_m3_s"] > 0) & (d["qg_m3_s"] > 0)
        if own:
            # buoyancy-inclusive chart: a point observed at another gravity level lies on another chart
            # (agreement.chart_at_gravity), so only points at this chart's own level fit its constants
            g_used = np.where(np.isfinite(val.g), val.g, chart.case.g)   # as agreement groups the levels
            flows &= np.isclose(g_used, chart.case.g, rtol=GRAVITY_LEVEL_RTOL, atol=0.0)
    known = np.array([o in regimes for o in obs], dtype=bool) & flows
    mask = known & (val.valid if use == "valid" else True)
    idx = np.array([regimes.index(o) if o in regimes else -1 for o in obs], dtype=int)
    return d, mask, idx, obs, val


def _no_points_message(n_total, n_known, n_valid_known, use):
    if n_total == 0:
        return "no test points given"
    if n_known == 0:
        return ("none of the test points has an observed regime that is a regime of this chart "
                "(map the labels with regime_map / --map)")
    return (f"none of the {n_known} test point(s) with a chart regime is valid for a conclusion "
            f"({'Bond number or low-g time, see compare' if use == 'valid' else ''}); use all points "
            f"(use='all', --all-points) to fit anyway")


def _cv(lik, x_best, n, folds, rng):
    """Cross-validated agreement (sharp rule) and the method's name."""
    if n < 3:
        return None, "none (fewer than 3 points)"
    if folds == "loo" or folds is None or int(folds) >= n or n < 10:
        k = n
    else:
        k = int(folds)
        if k < 2:
            raise ValueError(f"folds must be >= 2 or 'loo', got {folds!r}")
    perm = rng.permutation(n)
    parts = np.array_split(perm, k)
    agree = 0
    for part in parts:
        train = np.setdiff1d(perm, part)
        x, _ = _minimize(lik, [x_best, lik.start()], idx=train)
        consts, _, _ = lik.decode(x)
        pred = lik.classify(consts, part)
        agree += int(np.sum(pred == lik.obs[part]))
    return agree / n, ("leave-one-out" if k == n else f"{k}-fold")


# =============================================================================================
# calibration of model constants

def calibrate(chart, points, fit, *, regime_map: Mapping[str, str] | None = None,
              criteria: ValidityCriteria | None = None, use: str = "valid", label_error: float | None = None,
              starts: int = 4, folds=5, seed: int = 0) -> Calibration:
    r"""Fit constants of a chart's region-defining boundary models to labelled test points.

    .. math:: \min_{\theta, \beta, \varepsilon}\ -\sum_i \ln\Big[(1-\varepsilon)\sum_{c \to r_i}
              \prod_k \sigma\big(\pm\beta\, g_k(Q_{L,i}, Q_{G,i}; \theta)\big) + \frac{\varepsilon}{R}\Big]

    Parameters
    ----------
    chart : Chart        the chart as built from the case (its region-defining lines and rule are used)
    points : table       test points (see :func:`lowgmap.physics.studies.agreement.point_arrays`)
    fit : str or sequence   ``"MODEL.CONSTANT"`` or ``"MODEL"`` (all its constants), or (model, constant)
                         pairs; at most :data:`MAX_FIT` constants
    regime_map : dict, optional   file label -> chart regime
    criteria : ValidityCriteria, optional   which points are valid (see :mod:`lowgmap.physics.studies.agreement`)
    use : {"valid", "all"}   fit the valid points only (default) or every point with a chart regime
    label_error : float or None   fix ε (e.g. 0.02); None fits it within [1e-4, 0.3]
    starts : int          random starts in addition to the current constants
    folds : int or "loo"  cross-validation folds (default 5; leave-one-out for fewer than 10 points)
    seed : int            seed of the random starts and fold split (results are reproducible)

    Returns
    -------
    Calibration

    Raises
    ------
    ValueError
        unknown model (not on the chart, or a comparison line) or constant (the message lists the known
        ones), too many constants, no usable test points, a fitted line without observed points on both
        of its sides, or test points that do not constrain a constant.

    Examples
    --------
    >>> from lowgmap.physics.chart.composition import Chart
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.models.boundary import PowerLawBoundary, with_case_bands
    >>> case = example_case(length=0.05)                        # water/air, 10 mm tube, 5 cm
    >>> chart = Chart.build(case, [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])
    >>> qg = np.geomspace(1e-6, 1e-4, 21)                       # Q_L = 1e-5; truth: a = 2 (Q_G = 2 Q_L)
    >>> pts = {"ql_m3_s": np.full(21, 1e-5), "qg_m3_s": qg, "platform": ["orbital station"] * 21,
    ...        "observed_regime": np.where(qg < 2e-5, "bubbles", "slugs")}
    >>> cal = calibrate(chart, pts, ["rig_line.a"], starts=0, folds=3)
    >>> c = cal.constant("rig_line.a")
    >>> c.interval[0] < 2.0 < c.interval[1], cal.agreement_before < cal.agreement_after == 1.0
    (True, True)
    """
    if label_error is not None and not (0.0 <= float(label_error) < 1.0):
        raise ValueError(f"label_error must be within [0, 1), got {label_error!r}")
    if not chart.region_models:
        raise ValueError("the chart has no region-defining lines: nothing to calibrate")
    lines = [(m, dict(c)) for m, c in chart.region_models]
    params = _targets(chart, lines, fit)
    d, mask, idx, obs, _ = _labelled(chart, points, regime_map, criteria, use)
    n_known = int(sum(1 for o in obs if o in chart.regime_names))
    if not mask.any():
        raise ValueError(_no_points_message(len(obs), n_known, 0, use))
    regimes = tuple(chart.regime_names)
    used = np.flatnonzero(mask)
    seen = {regimes[i] for i in idx[used]}
    # every fitted line needs observations on both of its sides (sequence rule), or two regimes at least
    for p in params:
        model = lines[p.line][0]
        if chart.scheme is CHAIN or getattr(chart.scheme, "kind", "") == "chain":
            missing = [r for r in (model.regime_below, model.regime_above) if r not in seen]
            if missing:
                raise ValueError(
                    f"{p.model}.{p.name}: no {'valid ' if use == 'valid' else ''}test points observed as "
                    f"{' or '.join(repr(r) for r in missing)}; a constant of a line needs observed points on "
                    f"both of its sides ({model.regime_below!r} below, {model.regime_above!r} above)")
        elif len(seen) < 2:
            raise ValueError(f"{p.model}.{p.name}: the test points show only one regime ({', '.join(seen)}); "
                             f"a boundary needs observations on both sides")
    eps_fixed = None if label_error is None else max(float(label_error), 1e-12)
    lik = _Likelihood(chart.case, chart.scheme, lines, regimes, d["ql_m3_s"][used], d["qg_m3_s"][used],
                      idx[used], params, eps_fixed)
    # a constant the points cannot see
    for j, p in enumerate(params):
        x = lik.start()
        lo, hi = p.start_range_x()
        vals = []
        for v in np.linspace(lo, hi, 7):
            x[j] = v
            f = lik.nll(x)
            if f < 1e12:
                vals.append(f)
        if len(vals) >= 2 and max(vals) - min(vals) < 1e-9:
            raise ValueError(f"{p.model}.{p.name}: the test points do not constrain this constant (the likelihood "
                             f"does not change over its range)")
    rng = np.random.default_rng(seed)
    x_best, f_best = _minimize(lik, _starts(lik, rng, starts))
    warnings: list[str] = []
    # start value with the nuisance parameters fitted (for the likelihood-ratio report)
    fixed = {j: lik.start()[j] for j in range(len(params))}
    _, f_start = _minimize(lik, [lik.start()], fixed=fixed)
    # constants of one line that the points cannot tell apart (collinear sensitivities)
    warnings += _confounded(lik, x_best)
    ints = {j: _profile(lik, x_best, f_best, j) for j in range(len(params))}
    method = "profile likelihood"
    bounds = lik.bounds()
    consts_after, beta, eps = lik.decode(x_best)
    if _at_bound(x_best, bounds, len(params), 1e-3):
        lim = "upper" if x_best[len(params)] > 0 else "lower"
        warnings.append(f"the sharpness reached its {lim} limit ({beta:.3g} per log unit): "
                        + ("apart from the points counted as mislabelled, the regimes are cleanly separated; the "
                           "fitted line sits in the gap between the nearest opposite points, and the intervals "
                           "span that gap" if lim == "upper" else "the labels are barely related to the lines"))
    fitted = []
    for j, p in enumerate(params):
        lo_x, hi_x = ints[j]
        lo_v = p.to_v(lo_x) if math.isfinite(lo_x) else math.nan
        hi_v = p.to_v(hi_x) if math.isfinite(hi_x) else math.nan
        lo_v = max(lo_v, p.low) if math.isfinite(lo_v) else lo_v
        hi_v = min(hi_v, p.high) if math.isfinite(hi_v) else hi_v
        v = consts_after[p.line][p.name]
        at = bool(_at_bound(x_best, bounds, j, 1e-6))
        if at:
            warnings.append(f"{p.model}.{p.name} = {v:.4g} is at the limit of its allowed range "
                            f"[{p.low:g}, {p.high:g}]")
        model = lines[p.line][0]
        prior = next((b for b in model.constant_bands(lines[p.line][1], _case_band_overrides(chart.case, model.name))
                      if b.name == p.name), None)
        fc = FittedConstant(p.model, p.name, p.unit, p.start, float(v), (lo_v, hi_v), p.low, p.high, at,
                            (prior.low, prior.high) if prior is not None else None, int(used.size))
        if fc.band is None:
            warnings.append(f"{p.model}.{p.name}: the 95 % interval has an open end, so it gives no band; the "
                            f"band before the fit is kept")
        fitted.append(fc)
    consts_before = [dict(c) for _, c in lines]
    pred_before = lik.classify(consts_before)
    pred_after = lik.classify(consts_after)
    a_before = float(np.mean(pred_before == lik.obs))
    a_after = float(np.mean(pred_after == lik.obs))
    cv, cv_method = _cv(lik, x_best, used.size, folds, np.random.default_rng(seed + 1))
    if cv is not None and cv < a_after - 0.1:
        warnings.append(f"cross-validated agreement ({cv:.0%}) is well below the agreement on the fitted points "
                        f"({a_after:.0%}): the fit may follow noise; fit fewer constants or add points")
    # every line of the chart, with the fitted constants
    after = {m.name: c for (m, _), c in zip(lines, consts_after)}
    models = []
    build = []
    for m, c in list(chart.region_models) + list(chart.comparison_models):
        cc = dict(after.get(m.name, dict(c)))
        models.append((m.name, cc))
        build.append((m, cc))
    from lowgmap.physics.chart.composition import Chart
    bands = tuple((c.model, c.name, c.band[0], c.band[1], c.band_reason) for c in fitted if c.band is not None)
    case_after = with_case_bands(chart.case, bands) if bands else chart.case
    chart_after = Chart.build(case_after, build)
    crit = criteria
    check_before = agreement(chart, points, regime_map=regime_map, criteria=crit)
    check_after = agreement(chart_after, points, regime_map=regime_map, criteria=crit)
    return Calibration(tuple(fitted), beta, eps, method, int(used.size), tuple(str(t) for t in d["test_id"][used]),
                       float(f_start), float(f_best), a_before, a_after, cv, cv_method, tuple(warnings),
                       tuple(models), chart, chart_after, check_before, check_after)


# =============================================================================================
# empirical boundary

def _slug(text: str, words: int = 3) -> str:
    parts = re.findall(r"[a-z0-9]+", str(text).lower())
    return "_".join(parts[:words]) or "regime"


def empirical_name(regime_below: str, regime_above: str) -> str:
    """Default registry-style name of a fitted boundary between two regimes.

    >>> empirical_name("dispersed bubbles", "elongated bubbles / slugs")
    'fitted_dispersed_bubbles_elongated_bubbles_slugs'
    """
    return f"fitted_{_slug(regime_below)}_{_slug(regime_above)}"


@dataclass(frozen=True, eq=False)
class EmpiricalFit:
    r"""Result of :func:`fit_empirical_boundary`: the power law :math:`Q_G = a\,Q_L^{\,b}` (SI).

    ``a_interval``, ``b_interval``: 95 % intervals (method in ``interval_method``); ``agreement``: the
    share of the used points on their observed side; ``cv_agreement``: cross-validated; ``model``: the
    :class:`~lowgmap.physics.models.boundary.PowerLawBoundary`; :meth:`spec` gives the case-file entry.
    """

    name: str
    regime_below: str
    regime_above: str
    a: float
    b: float
    a_interval: tuple
    b_interval: tuple
    sharpness: float
    label_error: float
    interval_method: str
    n_below: int
    n_above: int
    agreement: float
    cv_agreement: float | None
    cv_method: str
    ql_range: tuple
    label: str
    citation: str
    warnings: tuple
    model: object = field(default=None, repr=False)

    def spec(self) -> dict:
        """The ``[[custom_boundaries]]`` entry (SI numbers) that :func:`lowgmap.physics.models.boundary.boundary_from_spec` reads."""
        return {"name": self.name, "kind": "power_law", "a": self.a, "b": self.b,
                "ql_range": [float(self.ql_range[0]), float(self.ql_range[1])],
                "regime_below": self.regime_below, "regime_above": self.regime_above,
                "label": self.label, "citation": self.citation}

    def to_dict(self) -> dict:
        def pair(t):
            return [None if not math.isfinite(v) else float(v) for v in t]
        return {"name": self.name, "regime_below": self.regime_below, "regime_above": self.regime_above,
                "a": self.a, "b": self.b, "a_interval_95": pair(self.a_interval),
                "b_interval_95": pair(self.b_interval), "sharpness": self.sharpness,
                "label_error": self.label_error, "interval_method": self.interval_method,
                "n_below": self.n_below, "n_above": self.n_above, "agreement": self.agreement,
                "cv_agreement": self.cv_agreement, "cv_method": self.cv_method,
                "ql_range_m3_s": list(self.ql_range), "label": self.label, "citation": self.citation,
                "warnings": list(self.warnings), "spec": self.spec()}


def fit_empirical_boundary(chart, points, regimes, *, name: str | None = None,
                           regime_map: Mapping[str, str] | None = None, criteria: ValidityCriteria | None = None,
                           use: str = "valid", label_error: float | None = None, starts: int = 4, folds=5,
                           seed: int = 0, source: str = "") -> EmpiricalFit:
    r"""Fit a power-law boundary :math:`Q_G = a\,Q_L^{\,b}` between two observed regimes.

    .. math:: P(\text{above}) = \sigma\!\big(\beta\,(\ln Q_G - \ln a - b \ln Q_L)\big)

    (logistic regression in log flow space, with the mislabel floor of the module notes), fitted to the
    points observed in either regime.

    Parameters
    ----------
    chart : Chart      supplies the case (validity of the points); its lines are not used
    points : table     test points (see :func:`lowgmap.physics.studies.agreement.point_arrays`)
    regimes : str or (str, str)   ``"BELOW|ABOVE"`` or a pair: the regime at smaller gas flow first
    name : str, optional   snake_case name (default :func:`empirical_name`)
    regime_map, criteria, use, label_error, starts, folds, seed : see :func:`calibrate`
    source : str       where the points come from (file name), put in the citation

    Returns
    -------
    EmpiricalFit

    Raises
    ------
    ValueError   fewer than one usable point in either regime, or a malformed regime pair

    Examples
    --------
    >>> from lowgmap.physics.chart.composition import Chart
    >>> from lowgmap.physics.examples import example_case
    >>> case = example_case(length=0.05)                        # water/air, 10 mm tube, 5 cm
    >>> chart = Chart.build(case, [])
    >>> ql, qg = np.meshgrid(np.geomspace(1e-6, 1e-4, 5), np.geomspace(1e-6, 1e-3, 6))
    >>> lab = np.where(qg.ravel() < 0.3 * ql.ravel() ** 0.9, "wet", "dry")          # truth a = 0.3, b = 0.9
    >>> fit = fit_empirical_boundary(chart, {"ql_m3_s": ql.ravel(), "qg_m3_s": qg.ravel(),
    ...     "observed_regime": lab, "platform": ["orbital station"] * lab.size}, "wet|dry", starts=0, folds=3)
    >>> fit.agreement, fit.spec()["kind"]
    (1.0, 'power_law')
    """
    if isinstance(regimes, str):
        parts = [p.strip() for p in regimes.split("|")]
    else:
        parts = [str(p).strip() for p in regimes]
    if len(parts) != 2 or not all(parts) or parts[0] == parts[1]:
        raise ValueError(f"regimes must be two different names 'BELOW|ABOVE' (smaller gas flow first), got {regimes!r}")
    below, above = parts
    d, mask, idx, obs, _ = _labelled(chart, points, regime_map, criteria, use, regimes=(below, above))
    n_b = int(np.sum(mask & (idx == 0)))
    n_a = int(np.sum(mask & (idx == 1)))
    if n_b == 0 or n_a == 0:
        missing = [r for r, k in ((below, n_b), (above, n_a)) if k == 0]
        seen = sorted({o for o in obs if o})
        raise ValueError(f"no {'valid ' if use == 'valid' else ''}test points observed as "
                         f"{' or '.join(repr(m) for m in missing)}; observed labels (after the map): "
                         f"{', '.join(repr(s) for s in seen) or 'none'}")
    used = np.flatnonzero(mask)
    ql, qg = d["ql_m3_s"][used], d["qg_m3_s"][used]
    y = idx[used]
    lq, lg = np.log(ql), np.log(qg)
    # start: slope 1 through the middle of the two groups' median log ratios
    r_b, r_a = np.median((lg - lq)[y == 0]), np.median((lg - lq)[y == 1])
    a0 = float(np.exp(0.5 * (r_b + r_a)))
    nm = name or empirical_name(below, above)
    line = PowerLawBoundary(nm, a0, 1.0, below, above)
    a_c, b_c = line.constant("a"), line.constant("b")
    params = [_make_param(0, line, a_c, a0), _make_param(0, line, b_c, 1.0)]
    eps_fixed = None if label_error is None else max(float(label_error), 1e-12)
    lik = _Likelihood(chart.case, CHAIN, [(line, {"a": a0, "b": 1.0})], (below, above), ql, qg, y, params, eps_fixed)
    rng = np.random.default_rng(seed)
    sts = _starts(lik, rng, 0)
    for b0 in (0.0, 0.5, 1.5, 2.0):                    # slopes around 1, each through the groups' middle
        x = lik.start()
        mid = 0.5 * (np.median((lg - b0 * lq)[y == 0]) + np.median((lg - b0 * lq)[y == 1]))
        x[0], x[1] = mid, b0
        sts.append(x)
    sts += _starts(lik, rng, starts)[1:]
    x_best, f_best = _minimize(lik, sts)
    ints = {j: _profile(lik, x_best, f_best, j) for j in (0, 1)}
    method = "profile likelihood"
    consts, beta, eps = lik.decode(x_best)
    a, b = float(consts[0]["a"]), float(consts[0]["b"])
    warnings = []
    if _at_bound(x_best, lik.bounds(), 2, 1e-3) and x_best[2] > 0:
        warnings.append("the two regimes are cleanly separated (apart from points counted as mislabelled): the "
                        "line sits in the gap between the nearest opposite points, and the intervals span that gap")
    pred = lik.classify([{"a": a, "b": b}])
    agree = float(np.mean(pred == y))
    cv, cv_method = _cv(lik, x_best, used.size, folds, np.random.default_rng(seed + 1))
    a_int = tuple(params[0].to_v(v) if math.isfinite(v) else math.nan for v in ints[0])
    b_int = tuple(params[1].to_v(v) if math.isfinite(v) else math.nan for v in ints[1])
    ql_range = (float(ql.min()), float(ql.max()))
    if not ql_range[1] > ql_range[0]:
        ql_range = (ql_range[0] / 1.01, ql_range[1] * 1.01)
    label = f"{below} | {above} (fitted from test points)"
    citation = (f"fitted from data: {used.size} test points" + (f" of {source}" if source else "")
                + f" observed as {below!r} or {above!r}; logistic fit in log flow space (lowgmap calibration), "
                  f"95 % intervals a [{a_int[0]:.4g}, {a_int[1]:.4g}] (SI, flows in m^3/s), "
                  f"b [{b_int[0]:.4g}, {b_int[1]:.4g}]")
    model = PowerLawBoundary(nm, a, b, below, above, label=label, citation=citation, ql_range=ql_range)
    return EmpiricalFit(nm, below, above, a, b, a_int, b_int, beta, eps, method, n_b, n_a, agree, cv, cv_method,
                        ql_range, label, citation, tuple(warnings), model)


def chart_with_boundary(chart, model):
    """The chart rebuilt with ``model`` added as a region-defining line where it chains.

    The new line is listed first, so that under the sequence rule it replaces a line with the same
    pair of regimes (which becomes a comparison line) and chains with the others by regime names.
    On a partition-scheme chart it is a comparison line.
    """
    from lowgmap.physics.chart.composition import Chart

    items = [(model, {})] + [(m, dict(c)) for m, c in list(chart.region_models) + list(chart.comparison_models)
                             if m.name != model.name]
    return Chart.build(chart.case, items)
