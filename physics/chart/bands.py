r"""Model-form bands: how well each boundary is known, and the margin that survives it.

Most constants behind the regime lines are known only within a range (published scatter, the
spread of the data, or an order of magnitude recalled from memory). Each such constant carries an
uncertainty band (:class:`~lowgmap.physics.models.boundary.Constant`, resolved for a chart into
:class:`~lowgmap.physics.models.boundary.ConstantBand` objects: the model's own band, the default
band of a value recalled from memory, or a band the case gives, e.g. a calibrated 95 % interval).

Band of a boundary
------------------
The band of a line is the region it sweeps as its constants move over their box of bands
:math:`B = \prod_j [c_j^-, c_j^+]`. At each sampled liquid flow :math:`Q_L` (log-spaced over the
chart range) its edges are

.. math:: \log Q_G^-(Q_L) = \min_{c \in B} \log Q_G(Q_L; c), \qquad
          \log Q_G^+(Q_L) = \max_{c \in B} \log Q_G(Q_L; c)

with the line taken as the model's ``qg_of_ql`` (its lowest crossing from below to above at that
liquid flow). A column where the line has no point for some constants lies wholly on one side of it
(the sign of ``implicit`` decides, as for the margins): the edge is then 0 or infinity there (the
band leaves the chart). The box is connected and the line moves continuously with its constants,
so every gas flow between the two edges lies on the line for some constants in the box.

How the extremes are found
--------------------------
Nothing assumes that the line moves monotonically with a constant (a constant can set an interior
extreme, and which constant sets an edge can change along the line). Per line:

1. screen: the nominal constants, every corner of the box (up to 6 constants), the box centre and a
   Latin hypercube of :math:`\max(32, 16 d)` points (seeded), each evaluated at every sampled Q_L at
   once;
2. polish: at every sampled Q_L and for each edge, a bounded quasi-Newton search (SLSQP in the
   unit box) from the best candidate so far and, when it lies elsewhere, from the best screened
   point; each polished optimum joins the candidates and is evaluated at every Q_L;
3. where the model rejects part of the box, each point that sets an edge is moved by bisection toward
   the nearest rejected screened points, up to the border of the accepted combinations (an edge can
   lie there, and run off the chart: e.g. :math:`C_0 \alpha_c \to 1` on a drift-flux line);
4. the edge at each Q_L is the best over all candidates, and the constants there are reported with
   the one that *sets* it: the constant whose move alone, from its nominal value to its value at
   the edge, shifts the line most toward that edge.

Constant combinations that the model rejects (e.g. :math:`C_0 \alpha_c \ge 1` for a drift-flux
line) are left out and counted; the band notes them (its edge next to them may be open).

Worst-case margin
-----------------
For an operating point in regime R, the worst-case symmetric margin is the smallest symmetric
margin (:func:`lowgmap.physics.chart.margins.point_margins`) over the constants of the lines that
bound R, each line's constants anywhere in their box, signed as in the Monte Carlo study: +m while
the point stays in R, -m (its margin in the regime it lies in) when constants within their bands
put the point in another regime. Under the sequence rule the margin is the smallest of the margins
to the lines bounding R, each depending on its own constants only, so this is the margin to the
near edge of each bounding line's band, taken line by line. Per line, a screen of the box (nominal,
corners, Latin hypercube, and the constants that set the line's band edges near the point) is
polished by a bounded Powell search on the margin of charts whose region lines are re-sampled with
those constants (:func:`lowgmap.physics.chart.margins.uncached_regime_margins`); the combination of
every line's worst constants is tried too. The result is confirmed on a chart rebuilt with the
worst constants (:meth:`Chart.build` with (model, constants) pairs) and
:func:`~lowgmap.physics.chart.margins.point_margins`, which also says whether it is established.
The limiting constant is the one whose move alone, to its worst value, lowers the margin most.

Results are cached per chart (weakly: they die with it); a worst-case margin is cached per point.
Each evaluation of a line with other constants and each margin evaluation is a pause point
(:func:`lowgmap.physics.pacing.checkpoint`): a caller running a band or a worst case in the background
can hold it while more urgent work runs, or abandon it (nothing half-done is cached).

Examples
--------
>>> from lowgmap.physics.examples import example_case
>>> from lowgmap.physics.chart.composition import Chart
>>> chart = Chart.build(example_case(), ["bubble_slug_dukler_1988"])
>>> band = boundary_band(chart, "bubble_slug_dukler_1988")
>>> [b.name for b in band.constants]
['alpha_c', 'c0']
>>> r = band.qg_upper / band.ql                     # Q_G/Q_L at the upper edge: C0 alpha_c = 1.35 x 0.55
>>> round(float(r[0]), 4), round(0.7425 / (1 - 0.7425), 4)
(2.8835, 2.8835)
>>> band.upper_setter[0]
'alpha_c'
"""
from __future__ import annotations

import math
import threading
import weakref
from dataclasses import dataclass, replace

import numpy as np

from lowgmap.physics.chart import lines as _lines
from lowgmap.physics.chart import margins as _mg
from lowgmap.physics.chart.sampling import mask_runs
from lowgmap.physics.models.boundary import ConstantBand, case_bands
from lowgmap.physics.pacing import checkpoint
from lowgmap.physics.surrogates import in_chart_solves

__all__ = ["BAND_SAMPLES", "Band", "boundary_band", "chart_bands", "chart_constant_bands", "BandVariable",
           "band_variables", "variable_changes", "GroupWorstCase", "WorstCaseMargins", "worst_case_margins",
           "chart_with_constants", "light_chart", "latin_hypercube"]

#: Liquid flows sampled per band (log-spaced over the chart range, plus the line's kinks).
BAND_SAMPLES = 41

_MAX_CORNERS_D = 6        # every corner of the box is screened up to this many constants
_PENALTY = 1e6            # objective value of a rejected or undefined evaluation
_SAME = 1e-9              # two points of the unit box closer than this are the same candidate
_MC_TOL = 1e-6            # chord tolerance of re-sampled lines in the margin search [decade]
_MC_WALL_DX = 1e-8
_MC_N_START = 17
_EPS_U = 1e-7             # finite-difference step of the band polish (unit box)
_BORDER_TRIES = 4         # rejected screened points bisected toward, per edge-setting point
_BORDER_STEPS = 40        # bisection steps toward the border of the accepted combinations
_SECOND_START = 0.05      # margin search: a screened point this close to the best starts a second polish


# =============================================================================================
# Constants and their bands on a chart

def _lines_of(chart):
    """(model, consts dict, role) of every line, region lines first (as the margins order them)."""
    return _lines.chart_lines(chart)


def _find_line(chart, name: str):
    for k, (model, consts, role) in enumerate(_lines_of(chart)):
        if model.name == name:
            return k, model, consts, role
    known = ", ".join(m.name for m, _, _ in _lines_of(chart)) or "none"
    raise ValueError(f"no boundary {name!r} on this chart; boundaries: {known}")


def chart_constant_bands(chart, name: str | None = None):
    """Uncertainty bands of the constants of the chart's lines (values as on the chart).

    Parameters
    ----------
    chart : Chart
    name : str, optional   one line (registry name); default: every line

    Returns
    -------
    tuple of ConstantBand (one line) or dict {line name: tuple of ConstantBand}
        Constants without a band are left out; the case's own bands
        (:func:`lowgmap.physics.models.boundary.case_bands`) replace the models' bands.
    """
    given = case_bands(chart.case)
    if name is not None:
        _, model, consts, _ = _find_line(chart, name)
        return model.constant_bands(consts, given.get(model.name))
    return {m.name: m.constant_bands(c, given.get(m.name)) for m, c, _ in _lines_of(chart)}


def _varied(bands) -> list[ConstantBand]:
    return [b for b in bands if b.high > b.low]


def light_chart(chart, region_consts):
    """The chart's models and rule with other constants for its region lines (classification only).

    ``region_consts``: one dict of constants per entry of ``chart.region_models``. The result has
    no curves or regions; it classifies points and feeds
    :func:`lowgmap.physics.chart.margins.uncached_regime_margins`.
    """
    rm = tuple((m, tuple(sorted(c.items()))) for (m, _), c in zip(chart.region_models, region_consts))
    return replace(chart, region_models=rm, boundaries=(), intersections=(), regions=(), warnings=())


def chart_with_constants(chart, changes):
    """The chart rebuilt with some constants changed: ``changes`` = {line name: {constant: value}}.

    Every line of ``chart`` is passed to :meth:`~lowgmap.physics.chart.composition.Chart.build` as a
    (model, constants) pair, so the rebuilt chart has the same lines, rule and roles.
    """
    from lowgmap.physics.chart.composition import Chart

    models = []
    for m, c, _ in _lines_of(chart):
        cc = dict(c)
        cc.update(changes.get(m.name, {}))
        models.append((m, cc))
    return Chart.build(chart.case, models)


def _unit_to_values(bands, u):
    lo = np.array([b.low for b in bands])
    hi = np.array([b.high for b in bands])
    return lo + np.asarray(u, dtype=float) * (hi - lo)


def _values_to_unit(bands, v):
    lo = np.array([b.low for b in bands])
    hi = np.array([b.high for b in bands])
    return (np.asarray(v, dtype=float) - lo) / (hi - lo)


def _screen_points(d: int, u0, seed: int, n_lhs: int | None = None) -> np.ndarray:
    """Nominal, corners (d <= 6), centre and a Latin hypercube of the unit box (rows)."""
    pts = [np.asarray(u0, dtype=float)]
    if d <= _MAX_CORNERS_D:
        pts += [((np.arange(2 ** d)[:, None] >> np.arange(d)[None, :]) & 1).astype(float)]
    pts.append(np.full((1, d), 0.5))
    n = n_lhs if n_lhs is not None else max(32, 16 * d)
    if n > 0:
        pts.append(latin_hypercube(n, d, seed))
    return _dedupe(np.vstack([np.atleast_2d(p) for p in pts]))


def latin_hypercube(n: int, d: int, seed: int = 0) -> np.ndarray:
    """n points of a Latin hypercube in the unit box [0, 1]^d (one point per stratum 1/n of each axis).

    >>> u = latin_hypercube(8, 2, seed=1)
    >>> sorted((u[:, 0] * 8).astype(int).tolist()) == list(range(8))
    True
    """
    rng = np.random.default_rng(seed)
    strata = np.stack([rng.permutation(n) for _ in range(d)], axis=1)
    return (strata + rng.uniform(size=(n, d))) / n


def _dedupe(U):
    keep = []
    for i, u in enumerate(U):
        if all(np.max(np.abs(u - U[j])) > _SAME for j in keep):
            keep.append(i)
    return U[keep]


# =============================================================================================
# Band of one line

@dataclass(frozen=True, eq=False)
class Band:
    """The band of one boundary: the region its line sweeps as its constants move over their bands.

    Attributes
    ----------
    name, label : str      model name and chart label of the line
    role : str             "regions" or "comparison" (as on the chart)
    constants : tuple of ConstantBand   the constants varied (band of width > 0), in the model's order
    ql : ndarray           sampled liquid flows [m^3/s]
    qg_nominal : ndarray   the line with the chart's constants [m^3/s]
    qg_lower, qg_upper : ndarray   band edges [m^3/s]; 0 (lower) or inf (upper) where, for some
                           constants, the column has no line and lies wholly on one side; NaN where
                           no accepted combination gives a value
    lower_values, upper_values : ndarray   (n, d) constants at each edge, columns as ``constants``
    lower_setter, upper_setter : tuple of str   per sample, the constant that sets the edge ("" where
                           the edge is the nominal line, or no constant moves it)
    screened : int         constant combinations evaluated over every sample
    rejected : int         of those, combinations the model rejected (left out)
    notes : tuple of str   what the engineer should know (rejected combinations, no band, ...)
    """

    name: str
    label: str
    role: str
    constants: tuple
    ql: np.ndarray
    qg_nominal: np.ndarray
    qg_lower: np.ndarray
    qg_upper: np.ndarray
    lower_values: np.ndarray
    upper_values: np.ndarray
    lower_setter: tuple
    upper_setter: tuple
    screened: int = 0
    rejected: int = 0
    notes: tuple = ()

    @property
    def width_decades(self) -> np.ndarray:
        """log10(Q_G upper / Q_G lower) at each sample [decade] (inf where an edge leaves all flows)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.log10(self.qg_upper) - np.log10(self.qg_lower)

    @property
    def known_exactly(self) -> bool:
        """True when no constant of the line has a band of width > 0 (the band is the line)."""
        return not self.constants

    def setters(self, edge: str) -> dict[str, float]:
        """Share of the samples at which each constant sets the ``edge`` ("lower" or "upper")."""
        if edge not in ("lower", "upper"):
            raise ValueError(f"edge must be 'lower' or 'upper', got {edge!r}")
        names = self.lower_setter if edge == "lower" else self.upper_setter
        out: dict[str, float] = {}
        n = max(len(names), 1)
        for s in names:
            if s:
                out[s] = out.get(s, 0.0) + 1.0 / n
        return out

    def outline(self, qg_range: tuple[float, float] | None = None) -> list[tuple[np.ndarray, np.ndarray]]:
        """Closed polygons (Q_L, Q_G) [m^3/s] of the band for drawing, edges clipped to ``qg_range``.

        One polygon per run of samples where both edges exist: the lower edge left to right, then
        the upper edge right to left (first vertex not repeated).
        """
        lo, hi = self.qg_lower.copy(), self.qg_upper.copy()
        if qg_range is not None:
            a, b = qg_range
            lo, hi = np.clip(lo, a, b), np.clip(hi, a, b)
        ok = np.isfinite(lo) & np.isfinite(hi) & (lo > 0)
        out = []
        for i, j in mask_runs(ok):
            if j - i >= 2:
                out.append((np.concatenate([self.ql[i:j], self.ql[i:j][::-1]]),
                            np.concatenate([lo[i:j], hi[i:j][::-1]])))
        return out

    def to_dict(self) -> dict:
        """JSON-ready dict (SI; None for 0/inf/NaN edges)."""
        def arr(a):
            return [float(v) if np.isfinite(v) and v > 0 else None for v in np.asarray(a, dtype=float)]
        return {"name": self.name, "label": self.label, "role": self.role,
                "constants": [b.to_dict() for b in self.constants],
                "ql_m3_s": arr(self.ql), "qg_nominal_m3_s": arr(self.qg_nominal),
                "qg_lower_m3_s": arr(self.qg_lower), "qg_upper_m3_s": arr(self.qg_upper),
                "lower_setter": list(self.lower_setter), "upper_setter": list(self.upper_setter),
                "screened": self.screened, "rejected": self.rejected, "notes": list(self.notes)}


def _column_values(case, model, consts, names, y_ref):
    """(values (d,), x array) -> log10 Q_G on the line (+-inf in columns wholly on one side).

    Raises one of :data:`lowgmap.physics.chart.lines.MODEL_ERRORS` for combinations the model rejects.
    """
    def f(values, x):
        checkpoint()
        c = dict(consts)
        c.update({k: float(v) for k, v in zip(names, values)})
        c = model.resolve_constants(c)
        return np.asarray(_lines.column_function(case, model, c, y_ref)(np.asarray(x, dtype=float)), dtype=float)
    return f


def _extremes(f, bands, nominal, xs, seed: int = 0, n_lhs: int | None = None):
    """Min and max over the box of bands of f(values, xs) at each x, with their arguments.

    Returns (ymin, ymax, umin, umax, screened, rejected, rejection message).
    """
    from scipy.optimize import minimize

    d = len(bands)
    u0 = np.clip(_values_to_unit(bands, nominal), 0.0, 1.0)
    U = _screen_points(d, u0, seed, n_lhs)
    rows, msg = [], ""
    rejected = 0
    for u in U:
        try:
            with np.errstate(all="ignore"):
                rows.append(f(_unit_to_values(bands, u), xs))
        except _lines.MODEL_ERRORS as exc:
            rejected += 1
            msg = msg or f"{type(exc).__name__}: {exc}"
            rows.append(np.full(xs.shape, np.nan))
    Y = np.array(rows)
    screened = len(U)
    cand_u = [u for u in U]
    cand_y = [y for y in Y]

    def polish(sign, i, start):
        x_i = xs[i:i + 1]

        def h(u):
            try:
                with np.errstate(all="ignore"):
                    v = float(f(_unit_to_values(bands, u), x_i)[0])
            except _lines.MODEL_ERRORS:
                return _PENALTY
            return -sign * v if math.isfinite(v) else _PENALTY
        res = minimize(h, start, method="SLSQP", bounds=[(0.0, 1.0)] * d,
                       options={"maxiter": 60, "ftol": 1e-13, "eps": _EPS_U})
        return np.clip(res.x, 0.0, 1.0)

    def toward_rejected(sign):
        """From each point that sets an edge, bisect toward the nearest rejected screened points: the edge
        may lie on the border of the combinations the model accepts (e.g. C0 alpha_c -> 1)."""
        R = U[np.all(np.isnan(Y), axis=1)]
        if not R.size:
            return
        C = np.array(cand_y)
        col = np.where(np.isnan(C), -np.inf, sign * C)
        for kk in np.unique(np.argmax(col, axis=0)):
            a0 = cand_u[kk]
            near = R[np.argsort(np.max(np.abs(R - a0), axis=1))[:_BORDER_TRIES]]
            for r in near:
                a, b, ya = a0, r, None
                for _ in range(_BORDER_STEPS):
                    mid = 0.5 * (a + b)
                    try:
                        with np.errstate(all="ignore"):
                            y = f(_unit_to_values(bands, mid), xs)
                    except _lines.MODEL_ERRORS:
                        b = mid
                        continue
                    a, ya = mid, y
                if ya is not None and np.any(sign * ya > sign * C[kk]):
                    cand_u.append(a)
                    cand_y.append(ya)

    out = {}
    for sign in (-1.0, 1.0):
        for i in range(xs.size):
            C = np.array(cand_y)
            col = sign * C[:, i]
            col = np.where(np.isnan(col), -np.inf, col)
            best = int(np.argmax(col))
            if not math.isfinite(col[best]):        # +-inf already (or nothing accepted): nothing to polish
                continue
            starts = [cand_u[best]]
            scol = np.where(np.isnan(sign * Y[:, i]), -np.inf, sign * Y[:, i])
            sb = int(np.argmax(scol))
            if math.isfinite(scol[sb]) and np.max(np.abs(U[sb] - cand_u[best])) > 0.05:
                starts.append(U[sb])
            for st in starts:
                u = polish(sign, i, st)
                if any(np.max(np.abs(u - c)) <= _SAME for c in cand_u):
                    continue
                try:
                    with np.errstate(all="ignore"):
                        y = f(_unit_to_values(bands, u), xs)
                except _lines.MODEL_ERRORS:
                    continue
                cand_u.append(u)
                cand_y.append(y)
        toward_rejected(sign)
        C = np.array(cand_y)
        col = np.where(np.isnan(C), -np.inf, sign * C)
        k = np.argmax(col, axis=0)
        val = sign * col[k, np.arange(xs.size)]
        val = np.where(np.all(np.isnan(C), axis=0), np.nan, val)      # no accepted combination
        out[sign] = (val, np.array(cand_u)[k])
    return out[-1.0][0], out[1.0][0], out[-1.0][1], out[1.0][1], screened, rejected, msg


def _setters(f, bands, nominal, xs, y_nom, args, sign):
    """Per sample, the constant whose move alone (nominal -> value at the edge) shifts the line most
    toward the edge ("" when none moves it by more than 1e-12 decade)."""
    names = [b.name for b in bands]
    out = [""] * xs.size
    uniq, inv = np.unique(np.round(args, 12), axis=0, return_inverse=True)
    inv = np.asarray(inv).reshape(-1)
    for g, urow in enumerate(uniq):
        cols = np.flatnonzero(inv == g)
        vals = _unit_to_values(bands, urow)
        best = np.full(cols.size, 1e-12)
        who = np.full(cols.size, -1)
        for j in range(len(bands)):
            if vals[j] == nominal[j]:
                continue
            v = np.array(nominal, dtype=float)
            v[j] = vals[j]
            try:
                with np.errstate(all="ignore"):
                    y = f(v, xs[cols])
            except _lines.MODEL_ERRORS:
                continue
            with np.errstate(invalid="ignore"):
                shift = sign * (y - y_nom[cols])
            shift = np.where(np.isnan(shift), -np.inf, shift)
            better = shift > best
            best = np.where(better, shift, best)
            who = np.where(better, j, who)
        for c, w in zip(cols, who):
            out[c] = names[w] if w >= 0 else ""
    return tuple(out)


def _compute_band(chart, name: str, n: int, seed: int) -> Band:
    k, model, consts, role = _find_line(chart, name)
    case = chart.case
    fr = case.flow_range
    x0, x1 = math.log10(fr.ql_min), math.log10(fr.ql_max)
    xs = np.linspace(x0, x1, int(n))
    bp = np.asarray(model.breakpoints(case, **consts), dtype=float)
    if bp.size:
        bpx = np.log10(bp[bp > 0])
        xs = np.unique(np.concatenate([xs, bpx[(bpx > x0) & (bpx < x1)]]))
    y_ref = 0.5 * (math.log10(fr.qg_min) + math.log10(fr.qg_max))
    bands = _varied(chart_constant_bands(chart, name))
    f_nom = _lines.column_function(case, model, consts, y_ref)
    with np.errstate(all="ignore"):
        y_nom = np.asarray(f_nom(xs), dtype=float)
    ql = 10.0 ** xs
    notes = []
    if not bands:
        notes.append("No constant of this line carries an uncertainty band (design inputs, choices, or values "
                     "given with their source): the band is the line.")
        q = 10.0 ** y_nom
        empty = np.empty((xs.size, 0))
        return Band(model.name, model.label, role, (), _ro(ql), _ro(q), _ro(q), _ro(q), empty, empty,
                    ("",) * xs.size, ("",) * xs.size, 0, 0, tuple(notes))
    names = [b.name for b in bands]
    nominal = np.array([b.value for b in bands])
    f = _column_values(case, model, consts, names, y_ref)
    ymin, ymax, umin, umax, screened, rejected, msg = _extremes(f, bands, nominal, xs, seed)
    # the nominal line lies in the band by construction (the nominal constants are screened)
    ymin = np.where(np.isnan(ymin), ymin, np.fmin(ymin, y_nom))
    ymax = np.where(np.isnan(ymax), ymax, np.fmax(ymax, y_nom))
    lower_set = _setters(f, bands, nominal, xs, y_nom, umin, -1.0)
    upper_set = _setters(f, bands, nominal, xs, y_nom, umax, 1.0)
    if rejected:
        notes.append(f"{rejected} of {screened} screened combinations of the constants were rejected by the model "
                     f"({msg}); the band covers the accepted ones, and its edge next to them may be open "
                     f"(the line can leave the chart).")
    with np.errstate(over="ignore"):
        lower = 10.0 ** ymin
        upper = 10.0 ** ymax
    return Band(model.name, model.label, role, tuple(bands), _ro(ql), _ro(10.0 ** y_nom), _ro(lower), _ro(upper),
                _ro(_unit_to_values(bands, umin)), _ro(_unit_to_values(bands, umax)), lower_set, upper_set,
                screened, rejected, tuple(notes))


def _ro(a) -> np.ndarray:
    a = np.array(a, dtype=float)
    a.flags.writeable = False
    return a


class _ChartBands:
    """Per-chart cache: bands by line name, worst-case margins by point."""

    def __init__(self):
        self.bands: dict = {}
        self.worst: dict = {}
        self.lock = threading.Lock()


_CACHE: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()
_CACHE_LOCK = threading.Lock()
_MAX_POINTS = 64          # worst-case margins kept per chart


def _holder(chart) -> _ChartBands:
    with _CACHE_LOCK:
        h = _CACHE.get(chart)
        if h is None:
            h = _ChartBands()
            _CACHE[chart] = h
    return h


@in_chart_solves
def boundary_band(chart, name: str, *, n: int = BAND_SAMPLES, seed: int = 0) -> Band:
    """Band of the line ``name`` of ``chart``: the region it sweeps as its constants move over their bands.

    .. math:: \\log Q_G^\\mp(Q_L) = \\min_{c \\in B} / \\max_{c \\in B}\\ \\log Q_G(Q_L; c)

    Parameters
    ----------
    chart : Chart
    name : str     registry name of a line of the chart (region-defining or comparison)
    n : int        liquid flows sampled, log-spaced over the chart range (the line's kinks are added)
    seed : int     seed of the Latin-hypercube screen (results are reproducible)

    Returns
    -------
    Band   (cached per chart for the default ``n`` and ``seed``)

    Notes
    -----
    Extremes are searched over the whole box of bands (screen, then a bounded local search at every
    sampled flow; see the module notes), never by assuming a monotonic response. A line whose
    constants have no band gets a band equal to the line.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.chart.composition import Chart
    >>> chart = Chart.build(example_case(), ["slug_transitional_zhao_rezkallah_1993"])
    >>> band = boundary_band(chart, "slug_transitional_zhao_rezkallah_1993")   # We_SG from 0.5 to 2
    >>> round(float(band.qg_upper[0] / band.qg_lower[0]), 6)                  # Q_G ~ sqrt(We_SG): sqrt(4)
    2.0
    """
    n = int(n)
    if n < 2:
        raise ValueError(f"n (samples of a band) must be >= 2, got {n}")
    if n != BAND_SAMPLES or seed != 0:
        return _compute_band(chart, name, n, seed)
    h = _holder(chart)
    with h.lock:
        got = h.bands.get(name)
    if got is None:
        got = _compute_band(chart, name, n, seed)
        with h.lock:
            h.bands[name] = got
    return got


@in_chart_solves
def chart_bands(chart) -> tuple[Band, ...]:
    """Bands of every line of ``chart`` (region-defining first, as the margins order them); cached.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.chart.composition import Chart
    >>> chart = Chart.build(example_case())                   # the closed-tube default lines
    >>> [(b.name, len(b.constants)) for b in chart_bands(chart)][:2]
    [('bubble_slug_dukler_1988', 2), ('slug_annular_dukler_1988', 2)]
    """
    return tuple(boundary_band(chart, m.name) for m, _, _ in _lines_of(chart))


# =============================================================================================
# Constants shared by several lines

@dataclass(frozen=True)
class BandVariable:
    """One uncertain quantity of a chart: a constant with its band, shared by the lines that use it.

    Lines of one model family often use the same constant for the same physics (e.g. the squeezing
    coefficient of the bubble size in every corner line). A constant with the same name, the same
    value and the same band in several lines is one quantity: it moves for all of them at once.
    Otherwise (e.g. the C0 of the two drift-flux lines, whose bands differ) each line's constant
    moves on its own.

    Attributes
    ----------
    name : str      constant name
    unit : str
    value, low, high : float   value in use and band (SI)
    reason, origin : str       as :class:`~lowgmap.physics.models.boundary.ConstantBand`
    lines : tuple of str       the lines (registry names) that use it
    """

    name: str
    unit: str
    value: float
    low: float
    high: float
    reason: str
    origin: str
    lines: tuple

    @property
    def key(self) -> str:
        """``"line.constant"`` for one line, ``"constant (line, line)"`` for a shared one."""
        return f"{self.lines[0]}.{self.name}" if len(self.lines) == 1 else f"{self.name} ({', '.join(self.lines)})"

    def to_dict(self) -> dict:
        return {"constant": self.name, "unit": self.unit, "value": self.value, "band": [self.low, self.high],
                "reason": self.reason, "origin": self.origin, "lines": list(self.lines)}


def band_variables(chart, lines=None) -> tuple[BandVariable, ...]:
    """The uncertain quantities of the chart's lines (bands of width > 0), shared ones merged.

    Parameters
    ----------
    chart : Chart
    lines : sequence of str, optional   line names to include (default: the region-defining lines)

    Returns
    -------
    tuple of BandVariable   in line order, then constant order

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.chart.composition import Chart
    >>> chart = Chart.build(example_case())          # the two drift-flux lines: C0 bands differ
    >>> [v.key for v in band_variables(chart)]
    ['bubble_slug_dukler_1988.alpha_c', 'bubble_slug_dukler_1988.c0', 'slug_annular_dukler_1988.alpha_c', 'slug_annular_dukler_1988.c0']
    """
    names = [m.name for m, _ in chart.region_models] if lines is None else list(lines)
    per_line = chart_constant_bands(chart)
    out: list[BandVariable] = []
    for line in names:
        if line not in per_line:
            _find_line(chart, line)                     # ValueError naming the chart's lines
        for b in _varied(per_line[line]):
            for j, v in enumerate(out):
                if (v.name == b.name and math.isclose(v.value, b.value, rel_tol=1e-12, abs_tol=0.0)
                        and v.low == b.low and v.high == b.high):
                    out[j] = replace(v, lines=v.lines + (line,))
                    break
            else:
                out.append(BandVariable(b.name, b.unit, b.value, b.low, b.high, b.reason, b.origin, (line,)))
    return tuple(out)


def variable_changes(chart, variables, values) -> dict[int, dict[str, float]]:
    """{region line index: {constant: value}} for ``values`` of ``variables`` (one value each)."""
    index = {m.name: k for k, (m, _) in enumerate(chart.region_models)}
    out: dict[int, dict[str, float]] = {}
    for v, x in zip(variables, values):
        for line in v.lines:
            out.setdefault(index[line], {})[v.name] = float(x)
    return out


# =============================================================================================
# Worst-case margin of an operating point

@dataclass(frozen=True)
class GroupWorstCase:
    """The worst case of one group of bounding lines: the lines that share uncertain constants (often
    one line alone), their constants moved over their bands, the other lines nominal.

    Attributes
    ----------
    lines : tuple of str   the lines of the group (registry names)
    constants : tuple of BandVariable   the quantities varied
    margin : float   smallest signed symmetric margin found (fraction; negative: the point can lie in
                     another regime)
    values : dict    {line: {constant: value}} at that worst case
    limiting_constant : str or None   the constant whose move alone (to its worst value) lowers the
                     margin most (None when the worst case is the nominal chart)
    evaluations : int   margins evaluated in the search
    """

    lines: tuple
    constants: tuple
    margin: float
    values: dict
    limiting_constant: str | None
    evaluations: int


@dataclass(frozen=True)
class WorstCaseMargins:
    """Nominal and worst-case symmetric margins of an operating point (see the module notes).

    Attributes
    ----------
    ql, qg : float               the point [m^3/s]
    regime : str                 its regime on the chart (nominal constants)
    nominal : float              symmetric margin to the nominal lines (fraction, as
                                 :func:`~lowgmap.physics.chart.margins.point_margins`)
    nominal_limiting : str or None   line that sets it
    worst_case : float           smallest signed margin with the constants of the bounding lines
                                 anywhere in their bands (<= nominal; negative: constants within their
                                 bands can put the point in another regime, by that margin)
    worst_regime : str           the point's regime at the worst case
    limiting_boundary : str or None   line whose constants set the worst case (None: no constant of a
                                 bounding line has a band, or none lowers the margin)
    limiting_constant : str or None   constant whose move alone lowers the margin most
    constants : dict             {line: {constant: value}} at the worst case (lines whose constants
                                 differ from the chart's)
    groups : tuple of GroupWorstCase   per group of bounding lines with banded constants
    established : bool           both margins are established (point_margins of the nominal chart and
                                 of the chart rebuilt at the worst case; a worst case in another regime
                                 counts as established even when its depth there is capped) and every
                                 search completed
    reasons : tuple of str       why not, in sentences
    variables : tuple of BandVariable   every uncertain quantity varied
    """

    ql: float
    qg: float
    regime: str
    nominal: float
    nominal_limiting: str | None
    worst_case: float
    worst_regime: str
    limiting_boundary: str | None
    limiting_constant: str | None
    constants: dict
    groups: tuple
    established: bool
    reasons: tuple = ()
    variables: tuple = ()

    @property
    def loss(self) -> float:
        """nominal - worst_case: how much margin the uncertainty of the lines takes (fraction)."""
        return self.nominal - self.worst_case

    @property
    def leaves_regime(self) -> bool:
        """True when constants within their bands can put the point in another regime."""
        return self.worst_regime != self.regime

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return {"operating_point": {"ql_m3_s": self.ql, "qg_m3_s": self.qg}, "regime": self.regime,
                "nominal_margin": self.nominal, "nominal_limiting_boundary": self.nominal_limiting,
                "worst_case_margin": self.worst_case, "worst_case_regime": self.worst_regime,
                "limiting_boundary": self.limiting_boundary, "limiting_constant": self.limiting_constant,
                "constants_at_worst_case": {k: dict(v) for k, v in self.constants.items()},
                "groups": [{"lines": list(g.lines), "margin": g.margin,
                            "values": {k: dict(v) for k, v in g.values.items()},
                            "limiting_constant": g.limiting_constant} for g in self.groups],
                "established": self.established, "reasons": list(self.reasons),
                "variables": [v.to_dict() for v in self.variables]}


class _MarginObjective:
    """Signed symmetric margin of one point with some region lines' constants changed (fast path)."""

    def __init__(self, chart, ql, qg, regime):
        self.chart = chart
        self.case = chart.case
        self.x0 = np.array([math.log10(ql)])
        self.y0 = np.array([math.log10(qg)])
        self.ql, self.qg = ql, qg
        self.regime = regime
        self.names = list(chart.regime_names)
        self.nominal = [dict(c) for _, c in chart.region_models]
        self.count = 0

    def __call__(self, changes: dict[int, dict]) -> tuple[float, str]:
        """(signed margin, regime) with ``changes`` = {region line index: {constant: value}}; NaN if rejected."""
        checkpoint()
        self.count += 1
        consts = [dict(c) for c in self.nominal]
        for k, ch in changes.items():
            consts[k].update(ch)
        try:
            for (m, _), c in zip(self.chart.region_models, consts):
                m.resolve_constants(c)
            light = light_chart(self.chart, consts)
            with np.errstate(all="ignore"):
                reg = str(np.asarray(light.classify(self.ql, self.qg)).ravel()[0])
                ridx = _lines.regime_indices(self.names, np.array([reg]))
                m, _ = _mg.uncached_regime_margins(light, self.case, self.x0, self.y0, ridx, tol=_MC_TOL,
                                                   wall_dx=_MC_WALL_DX, n_start=_MC_N_START)
        except _lines.MODEL_ERRORS:
            return math.nan, ""
        v = float(m[0])
        if not math.isfinite(v) or reg not in self.names:
            return math.nan, reg
        return (v if reg == self.regime else -v), reg


def _group_search(obj: _MarginObjective, chart, variables, seed: int, extra_starts=()):
    """Smallest signed margin over the box of ``variables``: (margin, values, evaluations)."""
    from scipy.optimize import minimize

    d = len(variables)
    nominal = np.array([v.value for v in variables])
    u0 = np.clip(_values_to_unit(variables, nominal), 0.0, 1.0)
    cache: dict = {}

    def val(u):
        u = np.clip(np.asarray(u, dtype=float), 0.0, 1.0)
        key = tuple(np.round(u, 12))
        if key not in cache:
            m, _ = obj(variable_changes(chart, variables, _unit_to_values(variables, u)))
            cache[key] = m if math.isfinite(m) else _PENALTY
        return cache[key]

    U = _screen_points(d, u0, seed, n_lhs=2 * d + 2)
    extra = [np.clip(_values_to_unit(variables, v), 0.0, 1.0) for v in extra_starts]
    if extra:
        U = _dedupe(np.vstack([U] + [np.atleast_2d(e) for e in extra]))
    scores = np.array([val(u) for u in U])
    order = np.argsort(scores, kind="stable")
    starts = [U[order[0]]]
    for j in order[1:]:                 # a close competitor elsewhere in the box: a second basin
        if scores[j] > scores[order[0]] + _SECOND_START:
            break
        if np.max(np.abs(U[j] - starts[0])) > 0.1:
            starts.append(U[j])
            break
    best_u, best = U[order[0]], float(scores[order[0]])
    for st in starts:
        res = minimize(val, st, method="Powell", bounds=[(0.0, 1.0)] * d,
                       options={"xtol": 1e-4, "ftol": 1e-8, "maxfev": 30 * d})
        u = np.clip(res.x, 0.0, 1.0)
        v = val(u)
        if v < best:
            best, best_u = v, u
    return best, _unit_to_values(variables, best_u), len(cache)


def _groups(chart, variables, bounding):
    """Bounding lines with banded constants, grouped by shared variables: [(line indices, variables)]."""
    index = {m.name: k for k, (m, _) in enumerate(chart.region_models)}
    parent = {k: k for k in bounding}

    def root(k):
        while parent[k] != k:
            parent[k] = parent[parent[k]]
            k = parent[k]
        return k
    for v in variables:
        ks = [index[ln] for ln in v.lines]
        for k in ks[1:]:
            parent[root(k)] = root(ks[0])
    out: dict[int, tuple[list, list]] = {}
    for v in variables:
        r = root(index[v.lines[0]])
        out.setdefault(r, ([], []))[1].append(v)
        for ln in v.lines:
            if index[ln] not in out[r][0]:
                out[r][0].append(index[ln])
    return [(sorted(ks), vs) for ks, vs in out.values()]


@in_chart_solves
def worst_case_margins(chart, ql: float, qg: float, *, seed: int = 0) -> WorstCaseMargins:
    r"""Nominal and worst-case symmetric margins of the point (Q_L, Q_G) over the constants' bands.

    .. math:: m_\mathrm{worst} = \min_{c \in B}\ \pm m(Q_L, Q_G; c)

    (+ while the point stays in its nominal regime, - with its margin in the regime it then lies in),
    over the bands of the constants of the lines that bound the point's regime.

    Parameters
    ----------
    chart : Chart
    ql, qg : float   flow rates of the point [m^3/s], > 0
    seed : int       seed of the Latin-hypercube screens (results are reproducible)

    Returns
    -------
    WorstCaseMargins   (cached per chart and point for the default seed)

    Notes
    -----
    Method: see the module notes. Lines that share an uncertain constant (:func:`band_variables`)
    are searched together; under the sequence rule the groups do not interact, so searching group
    by group gives the minimum over the whole box; under other schemes the combination of every
    group's worst constants is tried as well. Cost: some tens to a few hundred margins of
    re-sampled lines per group (under a millisecond each for the closed-tube lines, tens of
    milliseconds for the corner family).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.chart.composition import Chart
    >>> chart = Chart.build(example_case(), ["bubble_slug_dukler_1988"])
    >>> wc = worst_case_margins(chart, 1e-5, 0.5e-5)   # dispersed bubbles, below Q_G = 1.174 Q_L
    >>> round(wc.nominal, 4), round(wc.worst_case, 4), wc.limiting_boundary, wc.limiting_constant
    (0.4026, 0.037, 'bubble_slug_dukler_1988', 'alpha_c')
    >>> {k: round(v, 4) for k, v in wc.constants["bubble_slug_dukler_1988"].items()}   # Q_G = 0.538 Q_L
    {'alpha_c': 0.35, 'c0': 1.0}
    """
    ql, qg = _mg.check_point(ql, qg)
    key = (ql, qg)
    h = _holder(chart)
    if seed == 0:
        with h.lock:
            got = h.worst.get(key)
        if got is not None:
            return got
    out = _worst_case(chart, ql, qg, seed)
    if seed == 0:
        with h.lock:
            if len(h.worst) >= _MAX_POINTS:
                h.worst.pop(next(iter(h.worst)))
            h.worst[key] = out
    return out


def _worst_case(chart, ql, qg, seed) -> WorstCaseMargins:
    nominal_pm = _mg.point_margins(chart, ql, qg)
    regime = nominal_pm.regime
    reasons: list[str] = [] if nominal_pm.established else [f"Nominal margin: {r}" for r in nominal_pm.reasons]
    m_nom = float(nominal_pm.symmetric_margin)
    lim_nom = nominal_pm.limiting_boundary

    def result(m_w, reg_w, line, const, named, groups, variables, ok=True):
        return WorstCaseMargins(ql, qg, regime, m_nom, lim_nom, m_w, reg_w, line, const, named, tuple(groups),
                                ok and not reasons, tuple(reasons), tuple(variables))

    if regime not in chart.regime_names:
        reasons.append("The point has no regime on this chart: there is no worst case to search.")
        return result(m_nom, regime, None, None, {}, (), ())
    bounding = [int(k) for k in chart.bounding_models(regime)]
    names = [chart.region_models[k][0].name for k in bounding]
    variables = band_variables(chart, names)
    obj = _MarginObjective(chart, ql, qg, regime)
    groups: list[GroupWorstCase] = []
    found: list[tuple[float, dict, str | None, list]] = []
    for ks, vs in _groups(chart, variables, bounding):
        starts = _band_starts(chart, ks, vs, ql)
        m_g, values, evals = _group_search(obj, chart, vs, seed, starts)
        changes = variable_changes(chart, vs, values)
        named = {chart.region_models[k][0].name: dict(c) for k, c in changes.items()}
        lines = tuple(chart.region_models[k][0].name for k in ks)
        if not m_g < _PENALTY:
            reasons.append(f"The worst case of {', '.join(lines)} could not be searched: the margin could not be "
                           f"computed for any constants in their bands.")
            continue
        lim_c = None
        if m_g < m_nom - 1e-12:
            lim_c = _limiting_constant(obj, chart, vs, values)
            found.append((m_g, changes, lim_c, ks))
        groups.append(GroupWorstCase(lines, tuple(vs), float(m_g), named, lim_c, evals))
    candidates = [(m, ch) for m, ch, _, _ in found]
    if len(found) > 1:                         # every group at its worst at once (schemes where lines interact)
        joint: dict[int, dict] = {}
        for _, ch, _, _ in found:
            for k, c in ch.items():
                joint.setdefault(k, {}).update(c)
        m_joint, _ = obj(joint)
        if math.isfinite(m_joint):
            candidates.append((m_joint, joint))
    if not candidates:
        return result(m_nom, regime, None, None, {}, groups, variables)
    m_best, changes = min(candidates, key=lambda t: t[0])
    named = {chart.region_models[k][0].name: dict(v) for k, v in changes.items()}
    # confirm on a rebuilt chart with the one public path of the margins
    worst_pm = _mg.point_margins(chart_with_constants(chart, named), ql, qg)
    left = worst_pm.regime != regime
    m_worst = -float(worst_pm.symmetric_margin) if left else float(worst_pm.symmetric_margin)
    if not worst_pm.established:
        why = list(worst_pm.reasons)
        if left and worst_pm.regime_determined and worst_pm.symmetric_margin >= _lines.MAX_MARGIN:
            # the point lies in another regime: that is established; only its depth there is capped
            why = [r for r in why if not r.startswith("No boundary of the regime")]
        reasons.extend(f"Worst-case margin: {r}" for r in why)
    m_worst = min(m_worst, m_nom)
    g_best = min(found, key=lambda t: t[0])
    ks = g_best[3]
    lim_line = worst_pm.limiting_boundary if worst_pm.limiting_boundary in named else \
        chart.region_models[ks[0]][0].name
    return result(m_worst, worst_pm.regime, lim_line, g_best[2], named, groups, variables)


def _band_starts(chart, ks, variables, ql):
    """Constants that set the band edges of the group's lines at the sampled flow nearest the point."""
    starts = []
    for k in ks:
        name = chart.region_models[k][0].name
        try:
            band = boundary_band(chart, name)
        except _lines.MODEL_ERRORS:
            continue
        if not band.constants:
            continue
        i = int(np.argmin(np.abs(np.log(band.ql) - math.log(ql))))
        pos = {b.name: j for j, b in enumerate(band.constants)}
        for edge in (band.lower_values[i], band.upper_values[i]):
            starts.append(np.array([edge[pos[v.name]] if (name in v.lines and v.name in pos) else v.value
                                    for v in variables]))
    return starts


def _limiting_constant(obj, chart, variables, values) -> str | None:
    """The constant whose move alone (nominal -> worst value) lowers the margin most."""
    if len(variables) == 1:
        return variables[0].name
    best, who = math.inf, None
    for j, v in enumerate(variables):
        if values[j] == v.value:
            continue
        m, _ = obj(variable_changes(chart, [v], [values[j]]))
        if math.isfinite(m) and m < best:
            best, who = m, v.name
    return who
