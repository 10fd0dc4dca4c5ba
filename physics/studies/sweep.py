r"""Design sweeps: many variants of one case, each classified and measured, as one tidy table.

A sweep takes a base :class:`~lowgmap.physics.case.Case` and a list of *change dicts* (SI units, one dict
per design, keys from :data:`~lowgmap.physics.studies.design_space.VARIABLES`; the design space is
:mod:`lowgmap.physics.studies.design_space`) and returns a :class:`pandas.DataFrame` with one row per
design: the changed inputs, the regime at the operating point, its symmetric margin and limiting
line (:mod:`lowgmap.physics.chart.margins`), optionally the worst-case margin over an operating envelope
(:mod:`lowgmap.physics.studies.envelope`) and the Monte Carlo probability of staying in the intended
regime (:mod:`lowgmap.physics.studies.uncertainty`).

This module runs the designs: :class:`SweepSpec` (what to compute), :class:`DesignEvaluator` (one
chart per structure, the straight-line fast path, the margins of many designs solved in one batch)
and :func:`sweep` (chunks, in this process or on a cluster, one tidy table). :func:`grid`,
:func:`zipped`, :func:`apply_changes` and :func:`envelope_margin` are importable from here too.

How each design is computed (``method``)
----------------------------------------
* ``"full"``: :meth:`lowgmap.physics.chart.composition.Chart.build` for every design, margins on its cached lines (the
  path the dashboard and the command line use). Reference path; slowest.
* ``"auto"`` (default): one chart is built per *structure* (which models apply to the design) and
  reused for every design of that structure with the design's case and model constants (the regime
  sequence or scheme and the classification do not depend on anything else). Then

  - ``"lines"``: when every line that can limit the regime is a straight line in log-log axes
    (power laws: the drift-flux, Weber and Suratman tube lines, :class:`~lowgmap.physics.models.boundary.PowerLawBoundary`)
    under the sequence rule, each line is one exact chord through the margin window: no sampling,
    so the margins equal those of the full path to rounding (this is what makes tube sweeps fast);
  - ``"draw"``: otherwise the lines near the designs' points are sampled as the Monte Carlo does
    per property draw (chords within 1e-6 decade, margin error below about 5e-6); for a point whose
    regime is the intersection of one side of each of some lines
    (:func:`lowgmap.physics.chart.lines.conjunction_lines`) only those lines, whole and refined only
    where the point's margin can lie; for another regime every line, split and probed, refined only
    within the point's ±99.9 % box.

A design whose inputs are invalid (a value out of range, properties unavailable at a temperature,
a model that does not apply) gives a row with ``status`` holding the message and NaN margins; the
sweep goes on.

Running on a cluster
--------------------
:func:`sweep` runs in-process by default. With ``client`` set to a dask ``distributed.Client`` (or
any :class:`concurrent.futures.Executor`) the designs are cut into chunks (a few per worker, at
least 16 designs each, so that scheduling costs little) and each chunk is evaluated by a worker;
the results do not depend on the backend (same code, same order, no random state shared between
designs: Monte Carlo draws use the same seed for every design, common random numbers).
"""
from __future__ import annotations

import math
import threading
import uuid
from collections import OrderedDict
from dataclasses import dataclass, field, replace
from typing import Callable, Mapping, Sequence

import numpy as np
import pandas as pd

from lowgmap.physics.chart import lines as _lines
from lowgmap.physics.case import ModelChoice
from lowgmap.physics.studies.design_space import (FLUID_KEYS, MAX_DESIGNS, VARIABLES, apply_changes, check_flow_range,
                                                  check_key, grid, variable_unit, zipped)
from lowgmap.physics.studies.envelope import (MarginBatch, envelope_margin, queue_envelope_margin,
                                              queue_point_margin)
from lowgmap.physics.studies import workers as _workers
from lowgmap.physics.validate import InputError, finite, positive

__all__ = ["VARIABLES", "FLUID_KEYS", "METHODS", "MAX_DESIGNS", "MAX_MC_SAMPLES", "MAX_ENVELOPE_GRID", "grid", "zipped", "apply_changes", "DesignEvaluator",
           "SweepSpec", "sweep", "sweep_map", "map_start", "map_pools", "warm_map_pools", "envelope_margin", "RESULT_COLUMNS", "tidy_results"]

#: Accepted values of ``method``.
METHODS = ("auto", "full")
#: Most Monte Carlo samples per design (``mc_samples``).
MAX_MC_SAMPLES = 100_000
#: Most grid points a side of the envelope (``envelope_grid``).
MAX_ENVELOPE_GRID = 101

#: Result columns (after the design number and the changed inputs), in order; the envelope and
#: Monte Carlo columns appear only when asked for.
RESULT_COLUMNS = ("status", "regime", "in_regime", "margin", "limiting", "meets_required", "envelope_regime",
                  "envelope_inside", "envelope_margin", "envelope_limiting", "probability",
                  "probability_std_error", "method")

_DRAW_TOL = 1e-6          # chord tolerance of the lines sampled per design [decade] (as the Monte Carlo)
_DRAW_WALL_DX = 1e-8
_DRAW_N_START = 17
_STRAIGHT_TOL = 1e-9      # a line counts as straight when its mid-point is this close to the chord [decade]

# =============================================================================================
# Evaluating designs

@dataclass(frozen=True)
class SweepSpec:
    """What to compute for each design (picklable; shipped once to every worker).

    Parameters
    ----------
    base : Case
    point : (float, float) or None   operating point (Q_L, Q_G) [m^3/s]; default the case's own
                                     (varied by the liquid_flow/gas_flow variables)
    envelope : ((float, float), (float, float)) or None   envelope (Q_L range, Q_G range) [m^3/s]
    regime : str or None    intended regime (default: the regime of each design's point, and of
                            the envelope's centre)
    required_margin : float or None   fraction, adds the column ``meets_required`` (the point's margin,
                            and the envelope's when an envelope is given, reach it in the intended
                            regime)
    fluid_spec : mapping or None   see :func:`apply_changes`
    uncertainties : tuple   :class:`lowgmap.physics.studies.uncertainty.Uncertainty` objects (or same fields)
    mc_samples : int        Monte Carlo samples per design (0: none)
    seed : int              Monte Carlo seed (the same for every design)
    method : str            "auto" or "full" (see the module notes)
    envelope_grid : int     grid points a side when a boundary crosses the envelope
    """

    base: object
    point: tuple | None = None
    envelope: tuple | None = None
    regime: str | None = None
    required_margin: float | None = None
    fluid_spec: tuple | Mapping | None = None
    uncertainties: tuple = ()
    mc_samples: int = 0
    seed: int = 0
    method: str = "auto"
    envelope_grid: int = 9
    token: str = field(default_factory=lambda: uuid.uuid4().hex, compare=False)

    def __post_init__(self):
        if self.method not in METHODS:
            raise ValueError(f"method must be one of {', '.join(METHODS)}, got {self.method!r}")
        if self.point is not None:
            object.__setattr__(self, "point", (positive("point Q_L", self.point[0], "m^3/s"),
                                               positive("point Q_G", self.point[1], "m^3/s")))
        if self.envelope is not None:
            object.__setattr__(self, "envelope", (check_flow_range("envelope Q_L range", self.envelope[0]),
                                                  check_flow_range("envelope Q_G range", self.envelope[1])))
        if self.required_margin is not None:
            m = finite("required_margin", self.required_margin)
            if not 0 <= m < 1:
                raise ValueError(f"required_margin must be within [0, 1), got {m:g}")
            object.__setattr__(self, "required_margin", m)
        if isinstance(self.fluid_spec, Mapping):
            object.__setattr__(self, "fluid_spec", tuple(sorted(self.fluid_spec.items())))
        object.__setattr__(self, "uncertainties", tuple(self.uncertainties))
        if isinstance(self.mc_samples, bool) or not isinstance(self.mc_samples, (int, np.integer)) \
                or self.mc_samples < 0 or self.mc_samples == 1:
            raise ValueError(f"mc_samples must be 0 (none) or an integer >= 2, got {self.mc_samples!r}")
        if self.mc_samples and not self.uncertainties:
            raise ValueError("mc_samples > 0 needs uncertainties")
        if self.mc_samples > MAX_MC_SAMPLES:
            raise InputError(f"mc_samples must be at most {MAX_MC_SAMPLES:,} per design, got {self.mc_samples:,}")
        if isinstance(self.envelope_grid, bool) or not isinstance(self.envelope_grid, (int, np.integer)) \
                or not 1 <= self.envelope_grid <= MAX_ENVELOPE_GRID:
            raise InputError(f"envelope_grid must be an integer within [1, {MAX_ENVELOPE_GRID}], "
                             f"got {self.envelope_grid!r}")


class DesignEvaluator:
    """Evaluates designs (change dicts) of one :class:`SweepSpec`; keeps one chart per structure.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> case = example_case(Circle(0.0127), flow_range=(1e-7, 1e-3, 1e-7, 1e-2), point=(5e-5, 5e-6))
    >>> ev = DesignEvaluator(SweepSpec(case))
    >>> row = ev.evaluate({"size": 0.02})
    >>> row["regime"], row["method"], row["limiting"]
    ('dispersed bubbles', 'lines', 'bubble_slug_dukler_1988')
    """

    _MAX_TEMPLATES = 64

    def __init__(self, spec: SweepSpec):
        self.spec = spec
        self.fluid_spec = dict(spec.fluid_spec) if spec.fluid_spec is not None else None
        self._templates: "OrderedDict[tuple, object]" = OrderedDict()
        self._lock = threading.Lock()

    # ------------------------------------------------------------------------------------
    def case_for(self, changes: Mapping):
        """The design's case (see :func:`apply_changes`)."""
        return apply_changes(self.spec.base, changes, self.fluid_spec)

    def _structure(self, case) -> tuple:
        from lowgmap.physics.models.boundary import resolve_model
        from lowgmap.physics.chart.composition import default_models

        items = case.models or default_models(case)
        key = []
        for it in items:
            name = it.name if isinstance(it, ModelChoice) else str(it)
            key.append((name, resolve_model(name, case).applies_to(case) is None))
        return (bool(case.models), tuple(key))

    def _template(self, case):
        """(chart, fresh) for the structure of ``case``: built once, from the first design that builds.

        A design whose chart cannot be built raises (its own inputs are at fault, e.g. a constant
        out of range); nothing is kept for it, so the next design of the structure tries again.
        """
        from lowgmap.physics.chart.composition import Chart

        key = self._structure(case)
        with self._lock:
            hit = self._templates.get(key)
            if hit is not None:
                self._templates.move_to_end(key)
                return hit, False
        hit = Chart.build(case)
        with self._lock:
            self._templates[key] = hit
            while len(self._templates) > self._MAX_TEMPLATES:
                self._templates.popitem(last=False)
        return hit, True

    def chart_for(self, case):
        """A chart of ``case`` for classification and margins (no drawn curves unless full)."""
        if self.spec.method == "full":
            from lowgmap.physics.chart.composition import Chart

            return Chart.build(case)
        tpl, fresh = self._template(case)
        if fresh:
            return tpl
        params = {c.name: c.param_dict for c in case.models} if case.models else {}

        def with_consts(pairs):
            return tuple((m, tuple(sorted(m.resolve_constants(params.get(m.name, {})).items()))) for m, _ in pairs)
        return replace(tpl, case=case, boundaries=(), intersections=(), regions=(), warnings=(),
                       region_models=with_consts(tpl.region_models),
                       comparison_models=with_consts(tpl.comparison_models))

    # ------------------------------------------------------------------------------------
    def evaluate(self, changes: Mapping) -> dict:
        """One result row (dict) for one design; invalid designs give ``status`` = the message."""
        batch = MarginBatch()
        row: dict = {}
        self._start(changes, batch, row)
        batch.resolve()
        return row

    def evaluate_many(self, designs: Sequence[Mapping], progress: Callable | None = None,
                      start: int = 0) -> pd.DataFrame:
        """Rows for many designs as a DataFrame (design numbers from ``start``).

        The closed-form margin step of all designs is solved in one vectorised call.
        """
        rows = []
        n = len(designs)
        batch = MarginBatch()
        step = max(1, n // 20)
        for i, ch in enumerate(designs):
            row = {"design": start + i}
            row.update(ch)
            self._start(ch, batch, row)
            rows.append(row)
            if len(batch.items) > 4096:
                batch.resolve()
            if progress is not None and ((i + 1) % step == 0 or i + 1 == n):
                progress(i + 1, n)
        batch.resolve()
        return pd.DataFrame(rows)

    # ------------------------------------------------------------------------------------
    def _blank(self) -> dict:
        spec = self.spec
        row = {"status": "ok", "regime": "", "in_regime": False, "margin": math.nan, "limiting": None,
               "method": spec.method}
        if spec.required_margin is not None:
            row["meets_required"] = False
        if spec.envelope is not None:
            row.update(envelope_regime="", envelope_inside=False, envelope_margin=math.nan, envelope_limiting=None)
        if spec.mc_samples:
            row.update(probability=math.nan, probability_std_error=math.nan)
        return row

    def _start(self, changes: Mapping, batch: MarginBatch, row: dict) -> None:
        """Fill ``row`` for one design; its margins are filled in when ``batch`` is resolved."""
        row.update(self._blank())
        try:
            case = self.case_for(changes)
            chart = self.chart_for(case)
            self._fill(row, case, chart, batch)
        except (ValueError, TypeError, ArithmeticError) as exc:
            self._fail(row, exc)

    def _fail(self, row, exc) -> None:
        keep = row.get("method", self.spec.method)
        row.update(self._blank())
        row["method"] = keep
        row["status"] = str(exc) or type(exc).__name__

    def _point(self, case):
        """The design's operating point: the varied one, else the spec's, else the case's."""
        op = case.operating_point
        if self.spec.point is not None and (op is None or op is self.spec.base.operating_point):
            return self.spec.point
        return (op.ql, op.qg) if op is not None else None

    def _fill(self, row, case, chart, batch: MarginBatch) -> None:
        spec = self.spec
        names = list(chart.regime_names)
        if not names:
            raise ValueError("no regimes on this design's chart (no boundary model applies)"
                             + (f": {chart.warnings[0]}" if chart.warnings else ""))
        point = self._point(case)
        if point is None and spec.envelope is None:
            raise ValueError("no operating point: the case has none and neither a point nor an envelope was given")
        xs, ys = [], []
        reg = None
        if point is not None:
            xs.append(math.log10(point[0]))
            ys.append(math.log10(point[1]))
            reg = str(chart.classify(point[0], point[1]))
        if spec.envelope is not None:
            (a, b), (c, d) = spec.envelope
            xs += [math.log10(a), math.log10(b)]
            ys += [math.log10(c), math.log10(d)]
        need_all = spec.envelope is not None
        g, method = self._geometry(chart, case, xs, ys, None if need_all else reg)
        row["method"] = method
        lines = [m for m, _ in chart.region_models]
        state = {}

        def guarded(fn):
            def inner(*args):
                if row["status"] != "ok":
                    return
                try:
                    fn(*args)
                except (ValueError, TypeError, ArithmeticError) as exc:
                    self._fail(row, exc)
            return inner

        if point is not None:
            r = names.index(reg) if reg in names else -1
            wanted = spec.regime if spec.regime is not None else reg
            row["regime"] = reg
            row["in_regime"] = reg == wanted

            @guarded
            def point_done(m, k):
                row["margin"] = m if reg == wanted else -m
                row["limiting"] = lines[k].name if k >= 0 else None
                if spec.required_margin is not None:
                    row["meets_required"] = bool(row["margin"] >= spec.required_margin)
                state["point_ok"] = row["meets_required"] if spec.required_margin is not None else True
            if r >= 0:
                queue_point_margin(g, xs[0], ys[0], r, batch, point_done)
            else:
                state["point_ok"] = False
        if spec.envelope is not None:
            rect = (xs[-2], xs[-1], ys[-2], ys[-1])

            @guarded
            def env_done(env):
                row["envelope_regime"] = env["regime"]
                row["envelope_inside"] = env["inside"]
                row["envelope_margin"] = env["margin"]
                row["envelope_limiting"] = lines[env["limiting_idx"]].name if env["limiting_idx"] >= 0 else None
                if spec.required_margin is not None:
                    ok = env["inside"] and env["margin"] >= spec.required_margin
                    row["meets_required"] = bool(ok and (point is None or state.get("point_ok", False)))
            queue_envelope_margin(chart, g, rect, spec.regime, spec.envelope_grid, names, batch, env_done)
        if spec.mc_samples and point is not None:
            from lowgmap.physics.studies.uncertainty import monte_carlo

            wanted = spec.regime if spec.regime is not None else reg
            res = monte_carlo(case, spec.uncertainties, n=int(spec.mc_samples), seed=int(spec.seed),
                              intended_regime=wanted, chart=chart, point=point)
            row["probability"] = res.probability
            row["probability_std_error"] = res.std_error

    def _geometry(self, chart, case, xs, ys, regime):
        """Chords of the region lines covering the windows of the points (x, y in log10)."""
        cov = (min(xs) + _lines.WINDOW_LO - 1e-9, max(xs) + _lines.WINDOW_HI + 1e-9,
               min(ys) + _lines.WINDOW_LO - 1e-9, max(ys) + _lines.WINDOW_HI + 1e-9)
        if self.spec.method == "full":
            _, g = _lines.geometry_of(chart, xs, ys)
            return g, "full"
        names = list(chart.regime_names)
        lines = [(m, dict(c)) for m, c in chart.region_models]
        only = None
        if regime is not None and _is_chain(chart):
            only = set(_lines.bounding_lines(chart, regime)) if regime in names else set()
        if _is_chain(chart):
            g = _straight_geometry(chart, case, lines, cov, only)
            if g is not None:
                return g, "lines"
        bounding = focus = None
        if regime is not None and regime in names and not _is_chain(chart):
            conj = _lines.conjunction_lines(chart, regime)
            if conj is not None:        # one side of each of some lines: those lines, whole, refined near the point
                only = set(conj)
                bounding = {names.index(regime): conj}
        if regime is not None and regime in names and self.spec.envelope is None:
            focus = (np.asarray(xs[:1]), np.asarray(ys[:1]))     # else split, probed and refined near the point
        g = _lines.make_geometry(chart, case, lines, len(lines), cov, tol=_DRAW_TOL, wall_dx=_DRAW_WALL_DX,
                                 n_start=_DRAW_N_START, only=only, bounding=bounding, focus=focus)
        return g, "draw"


def _is_chain(chart) -> bool:
    return _lines.is_chain(chart)


def _straight_types():
    """Model classes whose lines are power laws Q_G = a Q_L^b (straight in log-log axes).

    A model of another class opts in with the attribute ``straight_in_log_log = True``; the line is
    still checked at three points before it is used as one chord.
    """
    from lowgmap.physics.models import tube as tm
    from lowgmap.physics.models.boundary import PowerLawBoundary

    return (PowerLawBoundary, tm.DriftFluxTransition, tm.WeberZoneBoundary, tm.SuratmanBubbleSlug)


def _straight_geometry(chart, case, lines, cov, only):
    """One exact chord per needed line when all are power laws (None otherwise)."""
    types = _straight_types()
    X0, X1 = cov[0], cov[1]
    xq = 10.0 ** np.array([X0, 0.5 * (X0 + X1), X1])
    parts = {k: [] for k in ("xa", "ya", "xb", "yb", "line")}
    for k, (model, consts) in enumerate(lines):
        if only is not None and k not in only:
            continue
        if not (isinstance(model, types) or getattr(model, "straight_in_log_log", False) is True):
            return None
        with np.errstate(all="ignore"):
            q = np.asarray(model.qg_of_ql(case, xq, **consts), dtype=float)
        if q.shape != (3,) or not np.all(np.isfinite(q) & (q > 0)):
            return None
        y = np.log10(q)
        if abs(y[1] - 0.5 * (y[0] + y[2])) > _STRAIGHT_TOL * max(1.0, abs(y[1])):
            return None
        parts["xa"].append(X0)
        parts["ya"].append(y[0])
        parts["xb"].append(X1)
        parts["yb"].append(y[2])
        parts["line"].append(k)
    arr = {k: np.asarray(v, dtype=float) for k, v in parts.items()}
    line = arr.pop("line").astype(np.intp)
    s = line.size
    names = list(chart.regime_names)
    bounding = {r: _lines.bounding_lines(chart, name) for r, name in enumerate(names)}
    return _lines.LineGeometry(arr["xa"], arr["ya"], arr["xb"], arr["yb"], line, np.ones(s, dtype=bool),
                         np.full(s, -2, dtype=np.intp), np.full(s, -2, dtype=np.intp), len(lines), len(lines),
                         True, bounding, tuple(cov))


# =============================================================================================
# The sweep

_EVALUATORS: "OrderedDict[str, DesignEvaluator]" = OrderedDict()
_EVAL_LOCK = threading.Lock()


def _evaluator(spec: SweepSpec) -> DesignEvaluator:
    """The evaluator of ``spec`` in this process (kept for the spec's later chunks)."""
    with _EVAL_LOCK:
        ev = _EVALUATORS.get(spec.token)
        if ev is None:
            ev = DesignEvaluator(spec)
            _EVALUATORS[spec.token] = ev
            while len(_EVALUATORS) > 8:
                _EVALUATORS.popitem(last=False)
        return ev


def _run_chunk(spec: SweepSpec, designs: list, start: int) -> pd.DataFrame:
    """Evaluate one chunk of designs (runs on a worker)."""
    return _evaluator(spec).evaluate_many(designs, start=start)


def _chunks(n: int, size: int):
    return [(s, min(n, s + size)) for s in range(0, n, size)]


def _n_workers(client) -> int:
    info = getattr(client, "scheduler_info", None)
    if callable(info):
        try:
            return max(1, len(info().get("workers", {})))
        except Exception:  # pragma: no cover - a scheduler that does not answer
            return 1
    return max(1, int(getattr(client, "_max_workers", 1) or 1))


def sweep(base, designs: Sequence[Mapping], *, point=None, envelope=None, regime: str | None = None,
          required_margin: float | None = None, fluid_spec: Mapping | None = None, uncertainties=(),
          mc_samples: int = 0, seed: int = 0, method: str = "auto", client=None, chunk_size: int | None = None,
          progress: Callable[[int, int], None] | None = None, envelope_grid: int = 9) -> pd.DataFrame:
    r"""Evaluate every design of a sweep: regime, symmetric margin, limiting line (and more) per design.

    .. math:: m_d = \max\{m : [(1-m)Q_L, (1+m)Q_L] \times [(1-m)Q_G, (1+m)Q_G] \subset R_d\}

    Parameters
    ----------
    base : Case
    designs : sequence of mapping   one dict of changes per design, SI units, keys of
                                    :data:`VARIABLES` (see :func:`grid`, :func:`zipped`)
    point : (float, float), optional   operating point [m^3/s] (default: the case's)
    envelope : ((float, float), (float, float)), optional   Q_L and Q_G ranges [m^3/s]
    regime : str, optional      intended regime; margins of designs whose point lies elsewhere are
                                negative (default: each design's own regime)
    required_margin : float, optional   adds ``meets_required``
    fluid_spec : mapping, optional   base fluid description for fluid changes
                                     (:func:`~lowgmap.physics.studies.design_space.apply_changes`)
    uncertainties : sequence, optional   for the Monte Carlo probability (with ``mc_samples``)
    mc_samples : int            Monte Carlo samples per design (0: none)
    seed : int                  Monte Carlo seed, the same for every design
    method : {"auto", "full"}   see the module notes
    client : dask ``distributed.Client`` or ``concurrent.futures.Executor``, optional
        where to run the chunks (default: in this process)
    chunk_size : int, optional  designs per chunk (default: 64 in-process; on a cluster about four
                                chunks per worker, at least 16 designs each)
    progress : callable(done, total), optional
    envelope_grid : int         grid points a side when a boundary crosses the envelope (1 to
                                :data:`MAX_ENVELOPE_GRID`)

    Returns
    -------
    pandas.DataFrame
        One row per design, in order: ``design`` (0, 1, ...), the varied inputs (SI), then
        :data:`RESULT_COLUMNS` (those that apply). ``margin`` is the signed symmetric margin at the
        point (fraction), ``limiting`` the name of the line that sets it, ``envelope_margin`` the
        signed worst case over the envelope (:func:`envelope_margin`). ``attrs`` holds
        ``regime``, ``required_margin``, ``point``, ``envelope`` and ``units``.

    Raises
    ------
    ValueError
        an unknown variable, bad options. Invalid values of single designs do not raise: their
        row has the message in ``status``.
    InputError
        more than :data:`MAX_DESIGNS` designs, more than :data:`MAX_MC_SAMPLES` Monte Carlo samples
        per design, a chunk size outside [1, :data:`MAX_DESIGNS`].

    Examples
    --------
    Drift-flux lines are lines of constant Q_G/Q_L (Dukler et al. 1988): the tube size does not
    move them, so the margin of a point stays the same. Here Q_G/Q_L = 0.1 and the bubble–slug line
    has Q_G/Q_L = k = 0.54/0.46; the box reaches it at (1 + m)/(1 - m) = k/0.1:

    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> case = example_case(Circle(0.0127), flow_range=(1e-7, 1e-3, 1e-7, 1e-2), point=(5e-5, 5e-6))
    >>> df = sweep(case, grid({"size": [0.01, 0.02, 0.04]}))
    >>> df["margin"].round(6).tolist(), df["limiting"].unique().tolist()
    ([0.843003, 0.843003, 0.843003], ['bubble_slug_dukler_1988'])
    >>> k = 0.54 / 0.46 / 0.1
    >>> round((k - 1) / (k + 1), 6)
    0.843003
    """
    if hasattr(designs, "__len__") and len(designs) > MAX_DESIGNS:
        raise InputError(f"a sweep evaluates at most {MAX_DESIGNS:,} designs, got {len(designs):,}")
    designs = [dict(d) for d in designs]
    if len(designs) > MAX_DESIGNS:
        raise InputError(f"a sweep evaluates at most {MAX_DESIGNS:,} designs, got {len(designs):,}")
    if chunk_size is not None and (isinstance(chunk_size, bool) or not isinstance(chunk_size, (int, np.integer))
                                   or not 1 <= chunk_size <= MAX_DESIGNS):
        raise InputError(f"chunk_size must be an integer within [1, {MAX_DESIGNS:,}], got {chunk_size!r}")
    for d in designs:
        for key in d:
            check_key(key, base)
    spec = SweepSpec(base, point=point, envelope=envelope, regime=regime, required_margin=required_margin,
                     fluid_spec=fluid_spec, uncertainties=tuple(uncertainties), mc_samples=int(mc_samples),
                     seed=int(seed), method=method, envelope_grid=int(envelope_grid))
    n = len(designs)
    if spec.point is None and spec.envelope is None and base.operating_point is None \
            and not any("liquid_flow" in d and "gas_flow" in d for d in designs):
        raise ValueError("the case has no operating point: give a point or an envelope")
    if client is None:
        size = int(chunk_size) if chunk_size else 64
        parts = []
        ev = DesignEvaluator(spec)
        for a, b in _chunks(n, max(1, size)):
            inner = None if progress is None else (lambda i, _m, a=a: progress(a + i, n))
            parts.append(ev.evaluate_many(designs[a:b], inner, start=a))
    else:
        workers = _n_workers(client)
        size = int(chunk_size) if chunk_size else max(16, math.ceil(n / (4 * workers)))
        parts = _run_on(client, spec, designs, _chunks(n, max(1, size)), progress, n)
    df = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame({"design": []})
    df = df.sort_values("design", kind="stable").reset_index(drop=True)
    df = tidy_results(df, designs, spec)
    return df


def map_pools(workers: int) -> list:
    """The worker processes of margin maps and Monte Carlo studies (:func:`lowgmap.physics.studies.workers.pools`)."""
    return _workers.pools(workers)


def warm_map_pools(workers: int, case=None) -> None:
    """Start the worker processes before a first map, with the case's chart built in each when a case is given
    (:func:`lowgmap.physics.studies.workers.warm`)."""
    _workers.warm(workers, case)


def _parallel_evaluate(spec, workers: int, x_name: str):
    """An ``evaluate(batch, start)`` for :func:`sweep_map` that splits each batch over the map worker processes.

    The designs of one ``x_name`` value go to one process, the same one for every batch of the map (its
    tables stay in that process); values not seen before go to the process with the least work in the batch.
    Rows come back in the batch's order, numbered as :meth:`DesignEvaluator.evaluate_many` numbers them.
    """
    pools = map_pools(workers)
    owner: dict = {}

    def evaluate(batch, start):
        groups: dict = {}
        for i, d in enumerate(batch):
            groups.setdefault(d[x_name], []).append(i)
        load = [0] * len(pools)
        for x, idx in groups.items():
            if x in owner:
                load[owner[x]] += len(idx)
        for x, idx in sorted(((x, idx) for x, idx in groups.items() if x not in owner), key=lambda g: -len(g[1])):
            w = min(range(len(pools)), key=load.__getitem__)
            owner[x] = w
            load[w] += len(idx)
        jobs = []
        for w, pool in enumerate(pools):
            idx = [i for x, ii in groups.items() if owner[x] == w for i in ii]
            if idx:
                jobs.append((idx, pool.submit(_run_chunk, spec, [batch[i] for i in idx], 0)))
        order = np.empty(len(batch), dtype=int)
        parts, at = [], 0
        for idx, fut in jobs:
            part = fut.result()
            parts.append(part)
            order[np.asarray(idx)] = np.arange(at, at + len(idx))
            at += len(idx)
        df = pd.concat(parts, ignore_index=True).iloc[order].reset_index(drop=True)
        df["design"] = np.arange(start, start + len(batch))
        return df
    return evaluate


def map_start(n_max: int) -> int:
    """Nodes a side of the starting grid of a margin map of ``n_max`` designs: about half the budget on the
    starting grid, the rest for refinement near the contours; 3 to 9 a side.

    >>> [map_start(n) for n in (25, 50, 100, 200, 400)]
    [3, 5, 7, 9, 9]
    """
    return max(3, min(9, int(math.sqrt(n_max / 2.0))))


def sweep_map(base, x_name: str, x_range, y_name: str, y_range, *, n_max: int = 400, log_x: bool = False,
              log_y: bool = False, regime: str | None = None, progress: Callable | None = None, workers: int = 1,
              **spec_options) -> tuple:
    r"""Margin map over two inputs, refined near its contours, with every design's row of the sweep.

    :func:`~lowgmap.physics.studies.design_space.adaptive_map` (a starting grid of :func:`map_start` nodes a
    side with the current design as a node, cells that the zero contour or the required-margin contour
    crosses split until ``n_max`` designs are used) evaluated by this module's engine, the same as :func:`sweep`: each design's
    regime, signed symmetric margin, limiting line and (with ``required_margin``) whether it meets it.

    Parameters
    ----------
    base : Case
    x_name, y_name : str        inputs (keys accepted by :func:`apply_changes`)
    x_range, y_range : (float, float)   ranges [SI], low < high
    n_max : int                 most designs evaluated (default 400)
    log_x, log_y : bool         geometric spacing
    regime : str, optional      intended regime (default: the case's, else the regime of the current design)
    progress : callable(done, n_max), optional   called after each batch; an exception it raises stops the map
    workers : int               1: in this process; more: each batch split over that many worker processes
                                (:func:`map_pools`; the designs of one ``x_name`` value stay in one process),
                                the same table
    **spec_options : as for :func:`sweep` (``point``, ``required_margin``, ``fluid_spec``, ``method``)

    Returns
    -------
    (DesignMap, pandas.DataFrame)   the map, and the sweep's table of its designs in the order they were
    evaluated, with a column ``level`` (0: the starting grid)
    """
    from lowgmap.physics.studies.design_space import adaptive_map

    from lowgmap.physics.studies.design_space import map_regime

    regime = map_regime(base, regime, spec_options.get("point"))
    spec = SweepSpec(base, regime=regime, **spec_options)
    parts: list = []
    designs: list = []
    for key in (x_name, y_name):
        check_key(key, base)
    if int(workers) > 1:
        run = _parallel_evaluate(spec, int(workers), x_name)
    else:
        evaluator = DesignEvaluator(spec)

        def run(batch, start):
            return evaluator.evaluate_many(batch, None, start=start)

    def evaluate(batch):
        part = run(batch, len(designs))
        parts.append(part)
        designs.extend(batch)
        if progress is not None:
            progress(len(designs), n_max)
        return part["margin"].to_numpy(dtype=float)

    required = spec_options.get("required_margin")
    contours = (0.0,) if required is None else (0.0, float(required))
    m = adaptive_map(base, x_name, x_range, y_name, y_range, n_max=n_max, start=map_start(n_max), regime=regime,
                     log_x=log_x, log_y=log_y, evaluate=evaluate, contours=contours)
    df = tidy_results(pd.concat(parts, ignore_index=True), designs, spec)
    df["level"] = m.levels                      # the map's designs are those evaluated, in the same order
    return m, df


def _run_on(client, spec, designs, chunks, progress, n):
    """Submit the chunks to a dask client or an executor; gather in any order."""
    if hasattr(client, "scatter"):                     # dask.distributed
        from distributed import as_completed

        spec_f = client.scatter(spec, broadcast=True)
        futures = [client.submit(_run_chunk, spec_f, designs[a:b], a, pure=False) for a, b in chunks]
        done_iter = as_completed(futures)
    else:                                              # concurrent.futures.Executor
        from concurrent.futures import as_completed

        futures = [client.submit(_run_chunk, spec, designs[a:b], a) for a, b in chunks]
        done_iter = as_completed(futures)
    sizes = {id(f): b - a for f, (a, b) in zip(futures, chunks)}
    parts, done = [], 0
    for fut in done_iter:
        parts.append(fut.result())
        done += sizes[id(fut)]
        if progress is not None:
            progress(done, n)
    return parts


def tidy_results(df, designs, spec) -> pd.DataFrame:
    """The sweep's result table in its documented form, from raw rows of :meth:`DesignEvaluator.evaluate_many`.

    Columns ``design``, the varied inputs (in the order they first appear in ``designs``), then the
    :data:`RESULT_COLUMNS` present; missing input columns are filled with NaN, margins and
    probabilities are floats, the yes/no columns booleans (a missing value is False). ``attrs``
    gets ``regime``, ``required_margin``, ``point``, ``envelope``, ``method`` of ``spec`` and the
    SI ``units`` of the columns.

    Parameters
    ----------
    df : pandas.DataFrame   rows of the designs, sorted as wanted
    designs : sequence of mapping   the designs (their keys name the input columns)
    spec : SweepSpec

    Examples
    --------
    >>> import pandas as pd
    >>> from lowgmap.physics.examples import example_case
    >>> raw = pd.DataFrame({"design": [0.0], "length": [2.0], "margin": [1], "status": ["ok"],
    ...                     "in_regime": [None]})
    >>> df = tidy_results(raw, [{"length": 2.0}], SweepSpec(example_case()))
    >>> list(df.columns), df["in_regime"].tolist(), df.attrs["units"]["length"]
    (['design', 'length', 'status', 'in_regime', 'margin'], [False], 'm')
    """
    var_cols = list(dict.fromkeys(k for d in designs for k in d))
    res_cols = [c for c in RESULT_COLUMNS if c in df.columns]
    cols = ["design"] + var_cols + res_cols
    for c in cols:
        if c not in df.columns:
            df[c] = np.nan
    df = df[cols]
    df["design"] = df["design"].astype(int)
    for c in ("margin", "envelope_margin", "probability", "probability_std_error"):
        if c in df.columns:
            df[c] = df[c].astype(float)
    for c in ("in_regime", "meets_required", "envelope_inside"):
        if c in df.columns:
            df[c] = df[c].fillna(False).astype(bool)
    units = {k: variable_unit(k) for k in var_cols}
    units.update({"margin": "-", "envelope_margin": "-", "probability": "-", "probability_std_error": "-"})
    df.attrs.update({"regime": spec.regime, "required_margin": spec.required_margin, "point": spec.point,
                     "envelope": spec.envelope, "units": units, "method": spec.method})
    return df
