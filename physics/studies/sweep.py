r"""Design sweeps: many variants of one case, each classified and measured, as one tidy table.

A sweep takes a base :class:`~lowgmap.physics.case.Case` and a list of *change dicts* (SI units, one dict
per design, keys from :data:`VARIABLES`) and returns a :class:`pandas.DataFrame` with one row per
design: the changed inputs, the regime at the operating point, its symmetric margin and limiting
line (:mod:`lowgmap.physics.chart.margins`), optionally the worst-case margin over an operating envelope and the
Monte Carlo probability of staying in the intended regime (:mod:`lowgmap.physics.studies.uncertainty`).

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
    per property draw (chords within 1e-6 decade, margin error below about 5e-6).

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

import itertools
import math
import threading
import uuid
from collections import OrderedDict
from dataclasses import dataclass, field, fields, replace
from typing import Callable, Mapping, Sequence

import numpy as np
import pandas as pd

from lowgmap.physics.chart import margins as _mg
from lowgmap.physics.case import ModelChoice, OperatingPoint
from lowgmap.physics.validate import angle_deg_in_range, finite, positive

__all__ = ["VARIABLES", "FLUID_KEYS", "METHODS", "grid", "zipped", "apply_changes", "DesignEvaluator",
           "SweepSpec", "sweep", "envelope_margin", "RESULT_COLUMNS"]

#: Inputs a sweep can change, with their meaning and SI unit. ``section.<field>`` (a field of the
#: section, e.g. ``section.wall_length`` [m]), ``model.<name>.<constant>`` (a constant of one chosen
#: boundary model) and ``constant.<constant>`` (that constant in every chosen model that has it)
#: are accepted too.
VARIABLES: dict[str, str] = {
    "half_angle": "corner half-angle of a groove or wedge channel [rad], in (0, 90) deg",
    "contact_angle": "static contact angle [rad], in [0, 180] deg (advancing/receding shift with it)",
    "length": "conduit length [m]",
    "size": "section scaled (every length) so that its hydraulic diameter is this value [m]",
    "residual_acceleration": "residual acceleration g [m/s^2]",
    "temperature": "fluid temperature [K] (properties rebuilt)",
    "pressure": "fluid pressure [Pa] (properties rebuilt)",
    "liquid": "liquid name (properties rebuilt)",
    "gas": "gas name (properties rebuilt)",
    "surface_tension": "surface tension [N/m] (replaces the property)",
    "liquid_density": "liquid density [kg/m^3]",
    "liquid_viscosity": "liquid viscosity [Pa s]",
    "gas_density": "gas density [kg/m^3]",
    "gas_viscosity": "gas viscosity [Pa s]",
    "liquid_flow": "liquid flow rate at the operating point [m^3/s]",
    "gas_flow": "gas flow rate at the operating point [m^3/s]",
}

#: Keys that rebuild the fluid pair with :func:`lowgmap.physics.properties.fluids.make_fluid_pair`.
FLUID_KEYS = ("temperature", "pressure", "liquid", "gas")

#: Accepted values of ``method``.
METHODS = ("auto", "full")

#: Result columns (after the design number and the changed inputs), in order; the envelope and
#: Monte Carlo columns appear only when asked for.
RESULT_COLUMNS = ("status", "regime", "in_regime", "margin", "limiting", "meets_required", "envelope_regime",
                  "envelope_inside", "envelope_margin", "envelope_limiting", "probability",
                  "probability_std_error", "method")

_PROPERTY_KEYS = {"surface_tension": "sigma", "liquid_density": "rho_l", "liquid_viscosity": "mu_l",
                  "gas_density": "rho_g", "gas_viscosity": "mu_g"}
_DRAW_TOL = 1e-6          # chord tolerance of the lines sampled per design [decade] (as the Monte Carlo)
_DRAW_WALL_DX = 1e-8
_DRAW_N_START = 17
_STRAIGHT_TOL = 1e-9      # a line counts as straight when its mid-point is this close to the chord [decade]


# =============================================================================================
# Building the list of designs

def grid(variables: Mapping[str, Sequence]) -> list[dict]:
    """Every combination of the values (first variable varies slowest).

    Examples
    --------
    >>> for d in grid({"length": [0.1, 0.2], "contact_angle": [0.0, 0.5]}):
    ...     print(d)
    {'length': 0.1, 'contact_angle': 0.0}
    {'length': 0.1, 'contact_angle': 0.5}
    {'length': 0.2, 'contact_angle': 0.0}
    {'length': 0.2, 'contact_angle': 0.5}
    """
    names = list(variables)
    values = [list(variables[n]) for n in names]
    for n, v in zip(names, values):
        if not v:
            raise ValueError(f"sweep variable {n} has no values")
    return [dict(zip(names, combo)) for combo in itertools.product(*values)]


def zipped(variables: Mapping[str, Sequence]) -> list[dict]:
    """Designs that pair the i-th values of every variable (all lists of the same length).

    Examples
    --------
    >>> zipped({"length": [0.1, 0.2], "size": [0.01, 0.02]})
    [{'length': 0.1, 'size': 0.01}, {'length': 0.2, 'size': 0.02}]
    """
    names = list(variables)
    lengths = {n: len(list(variables[n])) for n in names}
    if len(set(lengths.values())) > 1:
        raise ValueError(f"paired sweep variables must have the same number of values, got {lengths}")
    return [dict(zip(names, combo)) for combo in zip(*(list(variables[n]) for n in names))]


def _check_key(key: str, case) -> None:
    if not isinstance(key, str):
        raise TypeError(f"a sweep variable name must be text, got {key!r}")
    if key in VARIABLES:
        if key == "half_angle" and getattr(case.section, "half_angle", None) is None:
            raise ValueError(f"half_angle can only be varied for a section with a corner half-angle (groove, "
                             f"wedge_channel), got a {getattr(case.section, 'kind', '?')} section")
        return
    if key.startswith("section."):
        name = key.split(".", 1)[1]
        names = [f.name for f in fields(case.section)]
        if name not in names:
            raise ValueError(f"{key}: the {case.section.kind} section has no field {name!r}; its fields: "
                             f"{', '.join(names)}")
        return
    if key.startswith("model.") and key.count(".") == 2:
        return
    if key.startswith("constant.") and key.count(".") == 1:
        return
    known = ", ".join(list(VARIABLES) + ["section.<field>", "model.<name>.<constant>", "constant.<constant>"])
    raise ValueError(f"unknown sweep variable {key!r}; known: {known}")


# =============================================================================================
# Applying changes to a case

_FLUID_CACHE: "OrderedDict[tuple, object]" = OrderedDict()
_FLUID_LOCK = threading.Lock()


def _fluid(spec: Mapping):
    """make_fluid_pair for a spec, cached (CoolProp look-ups are repeated across a grid)."""
    from lowgmap.physics.properties.fluids import make_fluid_pair

    key = tuple(sorted((k, tuple(sorted(v.items())) if isinstance(v, Mapping) else v) for k, v in spec.items()))
    with _FLUID_LOCK:
        hit = _FLUID_CACHE.get(key)
        if hit is not None:
            _FLUID_CACHE.move_to_end(key)
            return hit
    kw = dict(spec)
    fp = make_fluid_pair(kw.pop("liquid"), kw.pop("temperature"), kw.pop("pressure", None), **kw)
    with _FLUID_LOCK:
        _FLUID_CACHE[key] = fp
        while len(_FLUID_CACHE) > 256:
            _FLUID_CACHE.popitem(last=False)
    return fp


def _default_fluid_spec(fp) -> dict:
    return {"liquid": fp.liquid, "gas": fp.gas, "temperature": fp.temperature, "pressure": fp.pressure}


def _model_choices(case) -> tuple:
    """The case's model choices; the defaults for its section (those that apply) when it lists none."""
    from lowgmap.physics.models.boundary import resolve_model
    from lowgmap.physics.chart.composition import default_models

    if case.models:
        return tuple(case.models)
    return tuple(ModelChoice.of(n) for n in default_models(case) if resolve_model(n, case).applies_to(case) is None)


def apply_changes(case, changes: Mapping, fluid_spec: Mapping | None = None):
    """The case with the inputs in ``changes`` (SI, keys of :data:`VARIABLES`) replaced.

    Parameters
    ----------
    case : Case
    changes : mapping   variable -> value (SI units, radians for angles, names for fluids)
    fluid_spec : mapping, optional
        Keyword arguments of :func:`lowgmap.physics.properties.fluids.make_fluid_pair` (``liquid``, ``temperature``,
        ``pressure``, ``gas``, ``gas_model``, ``liquid_source``, ``overrides``) describing the base
        fluid; needed when ``changes`` holds a key of :data:`FLUID_KEYS`. Default: the base pair's
        liquid, gas, temperature and pressure.

    Returns
    -------
    Case

    Raises
    ------
    ValueError
        unknown variable, or a value outside its range (angles are checked, not clipped).

    Notes
    -----
    Order: fluid rebuilt (temperature, pressure, liquid, gas), single properties, section fields,
    half-angle, size, contact angle, length, residual acceleration, operating point, model constants.
    Flows stay the given volumetric flows when the fluid changes.

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.case import Case, FlowRange
    >>> from lowgmap.physics.properties.fluids import FluidPair
    >>> from lowgmap.physics.geometry.sections import WedgeChannel
    >>> from lowgmap.physics.properties.wetting import Wetting
    >>> f = FluidPair("oil", "air", 298.15, 101325.0, 913.0, 4.6e-3, 0.0197, 1.18, 1.8e-5, "user", "user")
    >>> case = Case(f, WedgeChannel(math.radians(6), 0.04), Wetting(0.1), 0.04, 1e-5,
    ...             FlowRange(1e-8, 1e-5, 1e-9, 1e-5))
    >>> c2 = apply_changes(case, {"half_angle": math.radians(8), "length": 0.06})
    >>> round(math.degrees(c2.section.half_angle), 9), c2.length
    (8.0, 0.06)
    """
    from lowgmap.physics.studies.uncertainty import perturbed_case

    for key in changes:
        _check_key(key, case)
    ch = dict(changes)
    if any(k in ch for k in FLUID_KEYS):
        spec = dict(fluid_spec) if fluid_spec is not None else _default_fluid_spec(case.fluid)
        for k in FLUID_KEYS:
            if k in ch:
                v = ch[k]
                if k in ("liquid", "gas"):
                    if not isinstance(v, str) or not v.strip():
                        raise ValueError(f"{k} must be a fluid name, got {v!r}")
                    if k == "liquid" and "gas" not in ch and spec.get("liquid") != v:
                        spec.pop("liquid_source", None)       # a new liquid: its source found by name
                else:
                    v = positive(k, v, "K" if k == "temperature" else "Pa")
                spec[k] = v
        case = case.with_(fluid=_fluid(spec))
    props = {}
    for key, attr in _PROPERTY_KEYS.items():
        if key in ch:
            props[key] = positive(key, ch[key], "SI")
    for key in ("half_angle", "contact_angle"):
        if key in ch:
            lo_open = key == "half_angle"
            angle_deg_in_range(key, finite(key, ch[key], "rad"), 0.0, 90.0 if lo_open else 180.0,
                               lo_open=lo_open, hi_open=lo_open)
    sec = {k.split(".", 1)[1]: v for k, v in ch.items() if k.startswith("section.")}
    if sec:
        try:
            case = case.with_(section=replace(case.section, **sec))
        except (TypeError, ValueError) as exc:
            raise ValueError(f"section: {exc}") from None
    values = dict(props)
    for key in ("half_angle", "size", "contact_angle", "length", "residual_acceleration"):
        if key in ch:
            values[key] = ch[key]
    if "size" in values:
        positive("size", values["size"], "m")
    if "length" in values:
        positive("length", values["length"], "m")
    if "residual_acceleration" in values:
        if not finite("residual_acceleration", values["residual_acceleration"], "m/s^2") >= 0:
            raise ValueError(f"residual_acceleration must be >= 0 m/s^2, got {values['residual_acceleration']:g}")
    if values:
        case = perturbed_case(case, values)
    if "liquid_flow" in ch or "gas_flow" in ch:
        op = case.operating_point
        ql = ch.get("liquid_flow", op.ql if op is not None else None)
        qg = ch.get("gas_flow", op.qg if op is not None else None)
        if ql is None or qg is None:
            raise ValueError("the case has no operating point: vary liquid_flow and gas_flow together")
        case = case.with_(operating_point=OperatingPoint(ql, qg))
    model_keys = {k: v for k, v in ch.items() if k.startswith(("model.", "constant."))}
    if model_keys:
        case = _with_constants(case, model_keys)
    return case


def _with_constants(case, items: Mapping):
    from lowgmap.physics.models.boundary import resolve_model

    choices = list(_model_choices(case))
    names = [c.name for c in choices]
    params = [dict(c.param_dict) for c in choices]
    for key, value in items.items():
        value = finite(key, value)
        if key.startswith("model."):
            _, name, const = key.split(".")
            if name not in names:
                raise ValueError(f"{key}: model {name!r} is not on this case's chart; its models: {', '.join(names)}")
            i = names.index(name)
            resolve_model(name, case).constant(const)          # unknown constant: ValueError naming them
            params[i][const] = value
        else:
            const = key.split(".", 1)[1]
            hit = False
            for i, name in enumerate(names):
                if any(c.name == const for c in resolve_model(name, case).constants):
                    params[i][const] = value
                    hit = True
            if not hit:
                raise ValueError(f"{key}: no model on this case's chart has a constant {const!r}")
    return case.with_(models=tuple(ModelChoice.of(n, p) for n, p in zip(names, params)))


# =============================================================================================
# Envelope margin on a chart's chords

class _Batch:
    """Closed-form box margins of many chords, solved together (one vectorised call per chunk).

    ``add(lines, la, al, lb, be, finish)`` queues the chords of one question;
    :meth:`resolve` solves them all and calls ``finish(m, lines)`` in the order of the questions, with
    the margin of every chord. Small questions cost little this way (the solver has a fixed cost
    per call).
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


def _point_on(g, x0: float, y0: float, r: int, batch: _Batch, finish) -> None:
    """Queue the symmetric margin of the point (log10 flows) in regime ``r``: finish(m, line)."""
    idx = np.nonzero(g.adjacent(r))[0] if r >= 0 else np.empty(0, dtype=np.intp)
    L = _mg._LN10
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
    L = _mg._LN10

    def parts(a, d, lo, hi):
        A, B = a + ta * d, a + tb * d
        M = 0.5 * (A + B)
        ref = np.where(M < lo, lo, hi)
        inside = (M >= lo) & (M <= hi)
        return np.where(inside, 0.0, (A - ref) * L), np.where(inside, 0.0, (B - A) * L)

    la, al = parts(xa, dx, xlo, xhi)
    lb, be = parts(ya, dy, ylo, yhi)
    return la, al, lb, be


def _rect_on(g, rect, r: int, batch: _Batch, finish) -> None:
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
    >>> from lowgmap.physics.case import Case, FlowRange
    >>> from lowgmap.physics.chart.composition import Chart
    >>> from lowgmap.physics.properties.fluids import FluidPair
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> from lowgmap.physics.properties.wetting import Wetting
    >>> fluid = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
    >>> case = Case(fluid, Circle(0.01), Wetting(0.0), 1.0, 1e-5, FlowRange(1e-7, 1e-3, 1e-7, 1e-3))
    >>> chart = Chart.build(case, [PowerLawBoundary("low", 0.1, 1.0, "a", "b"),
    ...                            PowerLawBoundary("high", 10.0, 1.0, "b", "c")])
    >>> res = envelope_margin(chart, (1e-5, 2e-5), (1e-5, 2e-5))
    >>> round(res["margin"], 9), round((1 - 0.2) / (1 + 0.2), 9), res["inside"]
    (0.666666667, 0.666666667, True)
    """
    (ql_lo, ql_hi), (qg_lo, qg_hi) = _range("ql_range", ql_range), _range("qg_range", qg_range)
    rect = (math.log10(ql_lo), math.log10(ql_hi), math.log10(qg_lo), math.log10(qg_hi))
    names = list(chart.regime_names)
    if regime is not None:
        _mg.regime_index(chart, regime)
    _, g = _mg._geometry_of(chart, list(rect[:2]), list(rect[2:]))
    got: list = []
    batch = _Batch()
    _envelope_on(chart, g, rect, regime, grid_points, names, batch, got.append)
    batch.resolve()
    out = got[0]
    lm = out.pop("line_margins_idx")
    lines = [m for m, _ in chart.region_models]
    out["line_margins"] = {lines[k].name: float(v) for k, v in enumerate(lm[:len(lines)]) if np.isfinite(v)}
    k = out.pop("limiting_idx")
    out["limiting"] = lines[k].name if k >= 0 else None
    return out


def _range(name, rng) -> tuple[float, float]:
    try:
        lo, hi = rng
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a pair (low, high) in m^3/s, got {rng!r}") from None
    lo, hi = positive(f"{name}[0]", lo, "m^3/s"), positive(f"{name}[1]", hi, "m^3/s")
    if hi < lo:
        raise ValueError(f"{name} must be increasing (low <= high), got [{lo:g}, {hi:g}] m^3/s")
    return lo, hi


def _envelope_on(chart, g, rect, regime, grid_points, names, batch: _Batch, finish) -> None:
    """Queue the envelope margin on a geometry ``g`` of ``chart``; finish(result dict)."""
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
        ridx = _mg._index_of(names, reg)
        mm, _ = _mg._margins_many(g, X, Y, ridx)
        signed = np.where(reg == wanted, mm, -mm)
        signed = np.where(ridx >= 0, signed, -_mg.MAX_MARGIN)        # a point without a regime: worst
        res.update(margin=min(float(np.min(signed)), 0.0), inside=False, limiting_idx=k if m <= 0 else -1)
        finish(res)
    _rect_on(g, rect, r, batch, done)


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
    fluid_spec: tuple | None = None
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
            object.__setattr__(self, "envelope", (_range("envelope Q_L range", self.envelope[0]),
                                                  _range("envelope Q_G range", self.envelope[1])))
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


class DesignEvaluator:
    """Evaluates designs (change dicts) of one :class:`SweepSpec`; keeps one chart per structure.

    Examples
    --------
    >>> from lowgmap.physics.case import Case, FlowRange, OperatingPoint
    >>> from lowgmap.physics.properties.fluids import FluidPair
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> from lowgmap.physics.properties.wetting import Wetting
    >>> f = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
    >>> case = Case(f, Circle(0.0127), Wetting(0.0), 1.0, 1e-5, FlowRange(1e-7, 1e-3, 1e-7, 1e-2),
    ...             OperatingPoint(5e-5, 5e-6))
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
        batch = _Batch()
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
        batch = _Batch()
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

    def _start(self, changes: Mapping, batch: _Batch, row: dict) -> None:
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

    def _fill(self, row, case, chart, batch: _Batch) -> None:
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
        need_all = spec.envelope is not None or not _is_chain(chart)
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
                _point_on(g, xs[0], ys[0], r, batch, point_done)
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
            _envelope_on(chart, g, rect, spec.regime, spec.envelope_grid, names, batch, env_done)
        if spec.mc_samples and point is not None:
            from lowgmap.physics.studies.uncertainty import monte_carlo

            wanted = spec.regime if spec.regime is not None else reg
            res = monte_carlo(case, spec.uncertainties, n=int(spec.mc_samples), seed=int(spec.seed),
                              intended_regime=wanted, chart=chart, point=point)
            row["probability"] = res.probability
            row["probability_std_error"] = res.std_error

    def _geometry(self, chart, case, xs, ys, regime):
        """Chords of the region lines covering the windows of the points (x, y in log10)."""
        cov = (min(xs) + _mg._WIN_LO - 1e-9, max(xs) + _mg._WIN_HI + 1e-9,
               min(ys) + _mg._WIN_LO - 1e-9, max(ys) + _mg._WIN_HI + 1e-9)
        if self.spec.method == "full":
            _, g = _mg._geometry_of(chart, xs, ys)
            return g, "full"
        names = list(chart.regime_names)
        lines = [(m, dict(c)) for m, c in chart.region_models]
        only = None
        if regime is not None and _is_chain(chart):
            only = set(_mg._bounding(chart, regime)) if regime in names else set()
        if _is_chain(chart):
            g = _straight_geometry(chart, case, lines, cov, only)
            if g is not None:
                return g, "lines"
        g = _mg._make_geometry(chart, case, lines, len(lines), cov, tol=_DRAW_TOL, wall_dx=_DRAW_WALL_DX,
                               n_start=_DRAW_N_START, only=only)
        return g, "draw"


def _is_chain(chart) -> bool:
    return _mg._is_chain(chart)


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
    bounding = {r: _mg._bounding(chart, name) for r, name in enumerate(names)}
    return _mg._Geometry(arr["xa"], arr["ya"], arr["xb"], arr["yb"], line, np.ones(s, dtype=bool),
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
    fluid_spec : mapping, optional   base fluid description for fluid changes (:func:`apply_changes`)
    uncertainties : sequence, optional   for the Monte Carlo probability (with ``mc_samples``)
    mc_samples : int            Monte Carlo samples per design (0: none)
    seed : int                  Monte Carlo seed, the same for every design
    method : {"auto", "full"}   see the module notes
    client : dask ``distributed.Client`` or ``concurrent.futures.Executor``, optional
        where to run the chunks (default: in this process)
    chunk_size : int, optional  designs per chunk (default: 64 in-process; on a cluster about four
                                chunks per worker, at least 16 designs each)
    progress : callable(done, total), optional
    envelope_grid : int         grid points a side when a boundary crosses the envelope

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

    Examples
    --------
    Drift-flux lines are lines of constant Q_G/Q_L (Dukler et al. 1988): the tube size does not
    move them, so the margin of a point stays the same. Here Q_G/Q_L = 0.1 and the bubble–slug line
    has Q_G/Q_L = k = 0.54/0.46; the box reaches it at (1 + m)/(1 - m) = k/0.1:

    >>> from lowgmap.physics.case import Case, FlowRange, OperatingPoint
    >>> from lowgmap.physics.properties.fluids import FluidPair
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> from lowgmap.physics.properties.wetting import Wetting
    >>> f = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")
    >>> case = Case(f, Circle(0.0127), Wetting(0.0), 1.0, 1e-5, FlowRange(1e-7, 1e-3, 1e-7, 1e-2),
    ...             OperatingPoint(5e-5, 5e-6))
    >>> df = sweep(case, grid({"size": [0.01, 0.02, 0.04]}))
    >>> df["margin"].round(6).tolist(), df["limiting"].unique().tolist()
    ([0.843003, 0.843003, 0.843003], ['bubble_slug_dukler_1988'])
    >>> k = 0.54 / 0.46 / 0.1
    >>> round((k - 1) / (k + 1), 6)
    0.843003
    """
    designs = [dict(d) for d in designs]
    for d in designs:
        for key in d:
            _check_key(key, base)
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
    df = _tidy(df, designs, spec)
    return df


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


def _tidy(df, designs, spec) -> pd.DataFrame:
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
    units = {k: _unit_of(k) for k in var_cols}
    units.update({"margin": "-", "envelope_margin": "-", "probability": "-", "probability_std_error": "-"})
    df.attrs.update({"regime": spec.regime, "required_margin": spec.required_margin, "point": spec.point,
                     "envelope": spec.envelope, "units": units, "method": spec.method})
    return df


def _unit_of(key: str) -> str:
    text = VARIABLES.get(key, "")
    if "[" in text:
        return text[text.index("[") + 1:text.index("]")]
    if key.startswith("section."):
        return "rad" if "angle" in key else "m"
    return "-"
