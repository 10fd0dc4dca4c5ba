r"""Inverse design: the design inputs that give an operating envelope the largest worst-case margin.

Given an operating envelope (ranges of liquid and gas flow the system must handle), the wanted
regime, a required margin, bounded design inputs (:class:`DesignVariable`: length, size, corner
half-angle, contact angle, model constants that are design inputs, ...), constraints on derived
quantities (:class:`DesignConstraint`, e.g. a maximum length or volume) and one or more fluids,
:func:`optimize_design` looks for

.. math:: \max_{x \in [x_{lo}, x_{hi}],\ c(x) \le 0}\ m_{env}(x), \qquad
          m_{env} = \min_{(Q_L, Q_G) \in E} m_R(Q_L, Q_G; x)

where :math:`m_R` is the signed symmetric margin in the wanted regime R
(:func:`lowgmap.physics.studies.envelope.envelope_margin`: the largest growth of the envelope that stays in R; negative
when a boundary crosses the envelope).

Method
------
1. Screening: a scrambled Sobol sample of the design box (scipy.stats.qmc; seeded, reproducible)
   plus the base design when it lies inside the box, evaluated in one batch by the sweep engine
   (:class:`lowgmap.physics.studies.sweep.DesignEvaluator`).
2. Multiple starts: the best feasible screening points (``starts`` of them, distinct) are polished
   by COBYLA (scipy.optimize.minimize, derivative-free, bounds and inequality constraints; Powell
   1994) in unit coordinates (log coordinates for ``scale="log"`` variables). The margin is a
   minimum of smooth pieces, largest where two boundaries are equally close; a derivative-free
   trust-region method copes with that kink.
3. The best feasible result over starts and fluids is reported with the constraints that are
   active (a variable at a bound, a constraint with no slack), the lines that limit the margin
   (every line within 0.1 % of the worst-case margin: two at an interior optimum), and the
   sensitivity of the margin to each variable (margin change for a ±1 % change of the variable).

Designs the models cannot evaluate (a value out of a model's range, no regime on the chart) count
as a margin of -1.5 (worse than any margin), so the search moves away from them.

References
----------
M. J. D. Powell, "A direct search optimization method that models the objective and constraint
functions by linear interpolation", in Advances in Optimization and Numerical Analysis, Kluwer,
1994, pp. 51-67. doi:10.1007/978-94-015-8330-5_4 (DOI from memory)

I. M. Sobol', "On the distribution of points in a cube and the approximate evaluation of
integrals", USSR Comput. Math. Math. Phys. 7(4):86-112, 1967.
doi:10.1016/0041-5553(67)90144-9 (DOI from memory)
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Mapping

import numpy as np
import pandas as pd

from lowgmap.physics.studies.design_space import FLUID_KEYS, check_flow_range, check_key, model_choices
from lowgmap.physics.studies.envelope import envelope_margin
from lowgmap.physics.studies.sweep import DesignEvaluator, SweepSpec
from lowgmap.physics.validate import InputError, finite, positive

__all__ = ["DesignVariable", "DesignConstraint", "DesignGoal", "Sensitivity", "DesignResult", "QUANTITIES",
           "quantity_value", "nominal_design_value", "optimize_design", "MAX_STARTS", "MAX_SCREEN",
           "MAX_EVALUATIONS", "MAX_VARIABLES", "MAX_FLUIDS", "MAX_PLANNED"]

#: Most local searches of one design search (``starts``).
MAX_STARTS = 100
#: Most screening points (``screen``).
MAX_SCREEN = 100_000
#: Most model evaluations of one local search (``max_evaluations``).
MAX_EVALUATIONS = 10_000
#: Most design variables of one goal.
MAX_VARIABLES = 20
#: Most fluid options of one goal.
MAX_FLUIDS = 50
#: Most model evaluations one search may plan: fluids x (screen + starts x max_evaluations).
MAX_PLANNED = 1_000_000

_INVALID = -1.5          # margin standing for a design the models cannot evaluate
_BOUND_TOL = 1e-6        # a variable within this fraction of its range from a bound is "at the bound"
_SLACK_TOL = 1e-6        # relative slack below which a constraint is active
_LIMIT_TOL = 1e-3        # lines within this relative distance of the worst margin limit it


# ---------------------------------------------------------------------------------------------
# Quantities of a design a constraint can bound

def _area(case) -> float:
    return float(case.section.area)


#: Derived quantities a :class:`DesignConstraint` can bound: name -> (meaning [SI unit], function of a case).
QUANTITIES: dict[str, tuple[str, Callable]] = {
    "length": ("conduit length [m]", lambda c: float(c.length)),
    "hydraulic_diameter": ("hydraulic diameter 4A/P [m]", lambda c: float(c.section.hydraulic_diameter)),
    "flow_area": ("flow area of the section [m^2]", _area),
    "volume": ("conduit volume, flow area x length [m^3]", lambda c: _area(c) * float(c.length)),
    "wetted_perimeter": ("wall perimeter of the section [m]", lambda c: float(c.section.wetted_perimeter)),
    "half_angle": ("corner half-angle [rad]", lambda c: float(c.section.half_angle)),
    "contact_angle": ("static contact angle [rad]", lambda c: float(c.wetting.contact_angle)),
    "residual_acceleration": ("residual acceleration [m/s^2]", lambda c: float(c.g)),
}


def quantity_value(case, quantity: str) -> float:
    """Value of a derived quantity of :data:`QUANTITIES` (or a section field ``section.<field>``) [SI].

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> case = example_case(Circle(0.02), length=2.0, flow_range=(1e-7, 1e-3, 1e-7, 1e-2))
    >>> round(quantity_value(case, "volume") * 1e6, 6)       # pi/4 * 0.02^2 * 2 m^3, in litres x 1000
    628.318531
    """
    if quantity in QUANTITIES:
        try:
            return QUANTITIES[quantity][1](case)
        except AttributeError:
            raise ValueError(f"{quantity} is not defined for a {getattr(case.section, 'kind', '?')} section") from None
    if quantity.startswith("section."):
        name = quantity.split(".", 1)[1]
        v = getattr(case.section, name, None)
        if isinstance(v, (int, float)) and not isinstance(v, bool):
            return float(v)
        raise ValueError(f"{quantity}: the {case.section.kind} section has no numeric field {name!r}")
    raise ValueError(f"unknown constrained quantity {quantity!r}; known: {', '.join(QUANTITIES)}, section.<field>")


def nominal_design_value(case, name: str) -> float | None:
    """The base case's value of a design variable [SI], or None when it has none (e.g. a fluid name).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> case = example_case(Circle(0.02), length=2.0, flow_range=(1e-7, 1e-3, 1e-7, 1e-2))
    >>> nominal_design_value(case, "length"), nominal_design_value(case, "size")
    (2.0, 0.02)
    """
    from lowgmap.physics.studies.uncertainty import nominal_value

    direct = {"half_angle", "contact_angle", "size", "length", "surface_tension", "liquid_density",
              "liquid_viscosity", "gas_density", "gas_viscosity"}
    if name in direct:
        return nominal_value(case, name)
    if name == "residual_acceleration":
        return float(case.g)
    if name in ("temperature", "pressure"):
        return float(getattr(case.fluid, name))
    if name in ("liquid_flow", "gas_flow"):
        op = case.operating_point
        return None if op is None else float(op.ql if name == "liquid_flow" else op.qg)
    if name.startswith("section."):
        v = getattr(case.section, name.split(".", 1)[1], None)
        return float(v) if isinstance(v, (int, float)) and not isinstance(v, bool) else None
    if name.startswith(("model.", "constant.")):
        from lowgmap.physics.models.boundary import resolve_model

        choices = model_choices(case)
        const = name.split(".")[-1]
        for c in choices:
            if name.startswith("model.") and c.name != name.split(".")[1]:
                continue
            model = resolve_model(c.name, case)
            if any(k.name == const for k in model.constants):
                return float(model.resolve_constants(c.param_dict)[const])
        return None
    return None


# ---------------------------------------------------------------------------------------------
# Problem statement

@dataclass(frozen=True)
class DesignVariable:
    """A design input the search may change, within bounds (SI units, radians for angles).

    Parameters
    ----------
    name : str     a sweep variable (:data:`lowgmap.physics.studies.design_space.VARIABLES`, ``section.<field>``,
                   ``model.<name>.<constant>``, ``constant.<constant>``); fluid names are not
                   variables here (list fluids in :class:`DesignGoal` instead)
    low, high : float   bounds, low < high
    scale : str    "linear" or "log" (search in log coordinates; needs low > 0)
    """

    name: str
    low: float
    high: float
    scale: str = "linear"

    def __post_init__(self):
        if not isinstance(self.name, str) or self.name in ("liquid", "gas"):
            raise ValueError(f"design variable must be a numeric input name, got {self.name!r} "
                             f"(list fluids in the goal's fluids)")
        lo = finite(f"{self.name}: low", self.low)
        hi = finite(f"{self.name}: high", self.high)
        if not lo < hi:
            raise ValueError(f"design variable {self.name}: low must be < high, got [{lo:g}, {hi:g}]")
        if self.scale not in ("linear", "log"):
            raise ValueError(f"design variable {self.name}: scale must be 'linear' or 'log', got {self.scale!r}")
        if self.scale == "log":
            positive(f"{self.name}: low (log scale)", lo)
        object.__setattr__(self, "low", lo)
        object.__setattr__(self, "high", hi)

    def value(self, u):
        """Value [SI] at unit coordinate u in [0, 1]."""
        u = np.clip(np.asarray(u, dtype=float), 0.0, 1.0)
        if self.scale == "log":
            out = self.low * (self.high / self.low) ** u
        else:
            out = self.low + u * (self.high - self.low)
        return float(out) if np.ndim(out) == 0 else out

    def unit(self, value) -> float:
        """Unit coordinate of a value (not clipped)."""
        if self.scale == "log":
            return math.log(value / self.low) / math.log(self.high / self.low)
        return (value - self.low) / (self.high - self.low)


@dataclass(frozen=True)
class DesignConstraint:
    """Bounds on a derived quantity of the design (:data:`QUANTITIES` or ``section.<field>``) [SI].

    Examples
    --------
    >>> DesignConstraint("length", upper=0.1).describe()
    'length <= 0.1'
    """

    quantity: str
    upper: float | None = None
    lower: float | None = None

    def __post_init__(self):
        if self.upper is None and self.lower is None:
            raise ValueError(f"constraint on {self.quantity}: give an upper or a lower limit")
        if self.upper is not None:
            object.__setattr__(self, "upper", finite(f"constraint on {self.quantity}: upper", self.upper))
        if self.lower is not None:
            object.__setattr__(self, "lower", finite(f"constraint on {self.quantity}: lower", self.lower))
        if self.upper is not None and self.lower is not None and not self.lower < self.upper:
            raise ValueError(f"constraint on {self.quantity}: lower must be < upper")

    def slacks(self, case) -> list[float]:
        """Relative slacks (>= 0 when satisfied) of each limit."""
        v = quantity_value(case, self.quantity)
        out = []
        if self.upper is not None:
            out.append((self.upper - v) / max(abs(self.upper), 1e-300))
        if self.lower is not None:
            out.append((v - self.lower) / max(abs(self.lower), 1e-300))
        return out

    def describe(self) -> str:
        parts = []
        if self.lower is not None:
            parts.append(f"{self.quantity} >= {self.lower:.6g}")
        if self.upper is not None:
            parts.append(f"{self.quantity} <= {self.upper:.6g}")
        return " and ".join(parts)


@dataclass(frozen=True)
class DesignGoal:
    """What the design must achieve and what may change.

    Parameters
    ----------
    ql_range, qg_range : (float, float)   operating envelope [m^3/s]
    variables : tuple of DesignVariable   at least one
    regime : str or None       wanted regime (default: the regime at the envelope's centre for
                               the base design)
    required_margin : float    fraction, in [0, 1)
    constraints : tuple of DesignConstraint
    fluids : tuple of mapping  fluid options, each a change dict such as ``{"liquid": "water"}``
                               (keys of :data:`lowgmap.physics.studies.design_space.FLUID_KEYS`);
                               empty: the case's fluid
    starts : int               local searches (1 to :data:`MAX_STARTS`)
    screen : int               screening points (0: 16 per variable, at least 16; at most :data:`MAX_SCREEN`)
    max_evaluations : int      model evaluations per local search (1 to :data:`MAX_EVALUATIONS`)

    At most :data:`MAX_VARIABLES` variables and :data:`MAX_FLUIDS` fluid options, and at most
    :data:`MAX_PLANNED` model evaluations planned in all (fluids x (screen + starts x max_evaluations));
    :class:`~lowgmap.physics.validate.InputError` otherwise.
    """

    ql_range: tuple
    qg_range: tuple
    variables: tuple
    regime: str | None = None
    required_margin: float = 0.0
    constraints: tuple = ()
    fluids: tuple = ()
    starts: int = 4
    screen: int = 0
    max_evaluations: int = 150

    def __post_init__(self):
        object.__setattr__(self, "ql_range", check_flow_range("ql_range", self.ql_range))
        object.__setattr__(self, "qg_range", check_flow_range("qg_range", self.qg_range))
        object.__setattr__(self, "variables", tuple(self.variables))
        object.__setattr__(self, "constraints", tuple(self.constraints))
        object.__setattr__(self, "fluids", tuple(dict(f) for f in self.fluids))
        if not self.variables:
            raise ValueError("a design goal needs at least one design variable")
        names = [v.name for v in self.variables]
        if len(set(names)) != len(names):
            raise ValueError(f"design variables repeat: {names}")
        for f in self.fluids:
            bad = [k for k in f if k not in FLUID_KEYS]
            if bad or not f:
                raise ValueError(f"a fluid option must set {', '.join(FLUID_KEYS)} only, got {f!r}")
        m = finite("required_margin", self.required_margin)
        if not 0 <= m < 1:
            raise ValueError(f"required_margin must be within [0, 1), got {m:g}")
        object.__setattr__(self, "required_margin", m)
        for name in ("starts", "max_evaluations"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 1:
                raise ValueError(f"{name} must be an integer >= 1, got {v!r}")
        if isinstance(self.screen, bool) or not isinstance(self.screen, (int, np.integer)) or self.screen < 0:
            raise ValueError(f"screen must be an integer >= 0, got {self.screen!r}")
        for name, most in (("starts", MAX_STARTS), ("screen", MAX_SCREEN), ("max_evaluations", MAX_EVALUATIONS)):
            if getattr(self, name) > most:
                raise InputError(f"{name} must be at most {most:,}, got {getattr(self, name):,}")
        if len(self.variables) > MAX_VARIABLES:
            raise InputError(f"a design goal has at most {MAX_VARIABLES} variables, got {len(self.variables)}")
        if len(self.fluids) > MAX_FLUIDS:
            raise InputError(f"a design goal has at most {MAX_FLUIDS} fluid options, got {len(self.fluids)}")
        planned = max(1, len(self.fluids)) * ((self.screen or max(16, 16 * len(self.variables)))
                                              + self.starts * self.max_evaluations)
        if planned > MAX_PLANNED:
            raise InputError(f"the search would plan {planned:,} model evaluations (fluids x (screen + starts x "
                             f"max_evaluations)); at most {MAX_PLANNED:,}: lower screen, starts or max_evaluations")


# ---------------------------------------------------------------------------------------------
# Results

@dataclass(frozen=True)
class Sensitivity:
    """How the worst-case margin of the best design changes with one variable.

    ``change_up`` / ``change_down``: margin change when the variable is raised / lowered by 1 % of
    its value (1 % of its range when the value is 0); ``slope``: their central difference
    quotient, d margin / d variable [1/SI unit]; ``at_bound``: "lower", "upper" or None.
    """

    variable: str
    value: float
    change_up: float
    change_down: float
    slope: float
    at_bound: str | None

    def to_dict(self) -> dict:
        return {"variable": self.variable, "value": self.value, "change_up_1pct": self.change_up,
                "change_down_1pct": self.change_down, "slope_per_si_unit": self.slope, "at_bound": self.at_bound}


@dataclass(frozen=True, eq=False)
class DesignResult:
    """Result of :func:`optimize_design`.

    Attributes
    ----------
    values : dict          best design: variable -> value [SI]
    fluid : dict           the fluid option of the best design ({} for the case's own fluid)
    margin : float         worst-case signed margin over the envelope [fraction]
    inside : bool          the envelope lies wholly in the wanted regime
    regime : str           the wanted regime
    meets_required : bool  inside and margin >= required margin
    required_margin : float
    limiting : tuple of str   lines within 0.1 % of the worst-case margin (two at an interior optimum)
    active : tuple of str     active constraints and bounds, in words ("length at upper bound 0.08")
    sensitivity : tuple of Sensitivity
    evaluations : int      model evaluations made
    case : Case            the best design's case
    candidates : pandas.DataFrame   best result of every start and fluid (values, margin, feasible)
    """

    values: dict
    fluid: dict
    margin: float
    inside: bool
    regime: str
    meets_required: bool
    required_margin: float
    limiting: tuple
    active: tuple
    sensitivity: tuple
    evaluations: int
    case: object
    candidates: pd.DataFrame = field(repr=False)

    def to_dict(self) -> dict:
        """JSON-ready summary (SI units)."""
        return {"values": dict(self.values), "fluid": dict(self.fluid), "margin": self.margin,
                "inside": self.inside, "regime": self.regime, "meets_required": self.meets_required,
                "required_margin": self.required_margin, "limiting": list(self.limiting),
                "active_constraints": list(self.active),
                "sensitivity": [s.to_dict() for s in self.sensitivity], "evaluations": self.evaluations,
                "candidates": self.candidates.to_dict(orient="records")}


# ---------------------------------------------------------------------------------------------
# The search

class _Problem:
    """Objective and constraints of one fluid option in unit coordinates (evaluations memoised)."""

    def __init__(self, base, goal: DesignGoal, fluid: Mapping, fluid_spec, method: str):
        self.goal = goal
        self.fluid = dict(fluid)
        self.ev = DesignEvaluator(SweepSpec(base, envelope=(goal.ql_range, goal.qg_range), regime=goal.regime,
                                                    required_margin=goal.required_margin, fluid_spec=fluid_spec,
                                                    method=method))
        self.cache: dict = {}
        self.evaluations = 0

    def changes(self, u) -> dict:
        ch = dict(self.fluid)
        for v, x in zip(self.goal.variables, np.clip(np.asarray(u, dtype=float), 0.0, 1.0)):
            ch[v.name] = v.value(x)
        return ch

    def _key(self, u):
        return tuple(np.round(np.clip(np.asarray(u, dtype=float), 0.0, 1.0), 14))

    def evaluate_many(self, U) -> list[dict]:
        """Rows (margin, slacks, ...) of many unit points, one batch for the new ones."""
        keys = [self._key(u) for u in U]
        new = list(dict.fromkeys(k for k in keys if k not in self.cache))
        if new:
            rows = self.ev.evaluate_many([self.changes(k) for k in new]).to_dict(orient="records")
            self.evaluations += len(new)
            for k, row in zip(new, rows):
                row["slacks"] = self._slacks(k)
                m = row.get("envelope_margin", math.nan)
                row["objective"] = _INVALID if (row["status"] != "ok" or not math.isfinite(m)) else float(m)
                self.cache[k] = row
        return [self.cache[k] for k in keys]

    def _slacks(self, key) -> list[float]:
        if not self.goal.constraints:
            return []
        try:
            case = self.ev.case_for(self.changes(key))
            return [s for c in self.goal.constraints for s in c.slacks(case)]
        except (ValueError, TypeError):
            return [-1.0] * sum((c.upper is not None) + (c.lower is not None) for c in self.goal.constraints)

    def objective(self, u) -> float:
        return -self.evaluate_many([u])[0]["objective"]

    def feasible(self, row) -> bool:
        return all(s >= -_SLACK_TOL for s in row["slacks"])


def _screen_points(d: int, n: int, seed: int) -> np.ndarray:
    from scipy.stats import qmc

    m = max(4, int(math.ceil(math.log2(max(n, 2)))))
    pts = qmc.Sobol(d, scramble=True, seed=seed).random_base2(m)
    return pts[:n]


def _local(problem: _Problem, u0, budget: int):
    """COBYLA from u0 in unit coordinates, with the constraints' slacks as inequality constraints."""
    from scipy.optimize import minimize

    goal = problem.goal
    d = len(goal.variables)
    cons = []
    n_slack = sum((c.upper is not None) + (c.lower is not None) for c in goal.constraints)
    for i in range(n_slack):
        cons.append({"type": "ineq", "fun": lambda u, i=i: problem.evaluate_many([u])[0]["slacks"][i]})
    res = minimize(problem.objective, np.asarray(u0, dtype=float), method="COBYLA",
                   bounds=[(0.0, 1.0)] * d, constraints=cons,
                   options={"rhobeg": 0.1, "tol": 1e-9, "maxiter": int(budget), "catol": 1e-9})
    return np.clip(np.asarray(res.x, dtype=float), 0.0, 1.0)


def optimize_design(base, goal: DesignGoal, *, fluid_spec: Mapping | None = None, seed: int = 0,
                    method: str = "auto", progress: Callable[[int, int], None] | None = None) -> DesignResult:
    r"""Find the design inputs that maximise the worst-case margin of an operating envelope.

    .. math:: x^* = \arg\max_{x}\ \min_{(Q_L, Q_G) \in E} m_R(Q_L, Q_G; x)

    Parameters
    ----------
    base : Case
    goal : DesignGoal
    fluid_spec : mapping, optional   base fluid description, needed for fluid options of a user-defined
                                     fluid (see :func:`lowgmap.physics.studies.design_space.apply_changes`)
    seed : int        seed of the Sobol screening (the result is reproducible)
    method : str      evaluation method of :func:`lowgmap.physics.studies.sweep.sweep` ("auto" or "full")
    progress : callable(done, planned), optional   called after the screening and each local search

    Returns
    -------
    DesignResult

    Raises
    ------
    ValueError
        unknown variable or constraint quantity, a wanted regime the base design's chart does not
        have, or no feasible design among the screening points and starts.

    Notes
    -----
    See the module notes. The optimum is a local one polished from several starts; with a margin
    that saturates or with disconnected feasible regions, raise ``starts`` and ``screen``.

    Examples
    --------
    Two boundaries whose flow ratio Q_G/Q_L grows with the conduit length, Q_G = 0.1 (L/1 m) Q_L
    and Q_G = 10 (L/1 m) Q_L, and an envelope of ratios 0.5 to 2 (Q_L 1 to 2e-5, Q_G 1 to 2e-5
    m^3/s): the envelope sits best at L = 1 m, where both lines are as close,
    (1 - m)/(1 + m) = 0.1/0.5:

    >>> from lowgmap.physics.models.boundary import ExplicitBoundary
    >>> from lowgmap.physics.examples import example_case
    >>> class Ratio(ExplicitBoundary):
    ...     citation = "closed-form test line"
    ...     def __init__(self, name, c, below, above):
    ...         self.name, self.label, self.c = name, name, c
    ...         self.regime_below, self.regime_above = below, above
    ...     def qg_of_ql(self, case, ql, **k):
    ...         return self.c * case.length * np.asarray(ql, dtype=float)
    >>> lines = (Ratio("low", 0.1, "a", "b"), Ratio("high", 10.0, "b", "c"))
    >>> case = example_case(length=0.5, models=("low", "high"), extra=(("custom_boundaries", lines),))
    >>> goal = DesignGoal((1e-5, 2e-5), (1e-5, 2e-5), (DesignVariable("length", 0.2, 5.0, "log"),),
    ...                   regime="b", starts=2)
    >>> res = optimize_design(case, goal)
    >>> round(res.values["length"], 5), round(res.margin, 6), round((1 - 0.2) / (1 + 0.2), 6)
    (1.0, 0.666667, 0.666667)
    >>> res.limiting, res.active
    (('low', 'high'), ())
    """
    if not isinstance(goal, DesignGoal):
        raise TypeError(f"goal must be a DesignGoal, got {type(goal).__name__}")
    for v in goal.variables:
        check_key(v.name, base)
    for c in goal.constraints:
        quantity_value(base, c.quantity)
    goal = _with_regime(base, goal)
    fluids = list(goal.fluids) or [{}]
    d = len(goal.variables)
    n_screen = goal.screen or max(16, 16 * d)
    planned = len(fluids) * (n_screen + goal.starts * goal.max_evaluations)
    done = 0
    candidates = []
    best = None
    total_evals = 0
    for fluid in fluids:
        problem = _Problem(base, goal, fluid, fluid_spec, method)
        U = list(_screen_points(d, n_screen, seed))
        nominal = [nominal_design_value(base, v.name) for v in goal.variables]
        if all(x is not None and v.low <= x <= v.high for x, v in zip(nominal, goal.variables)):
            U.append(np.array([v.unit(x) for x, v in zip(nominal, goal.variables)]))
        rows = problem.evaluate_many(U)
        done += n_screen
        if progress is not None:
            progress(done, planned)
        order = sorted(range(len(U)), key=lambda i: (not problem.feasible(rows[i]), -rows[i]["objective"]))
        starts: list[int] = []
        for i in order:
            if not problem.feasible(rows[i]) and starts:
                break
            if all(np.max(np.abs(U[i] - U[j])) > 1e-6 for j in starts):
                starts.append(i)
            if len(starts) >= goal.starts:
                break
        for k, i in enumerate(starts):
            u = _local(problem, U[i], goal.max_evaluations)
            row = problem.evaluate_many([u])[0]
            feas = problem.feasible(row)
            cand = {"fluid": _fluid_text(fluid), "start": k, **problem.changes(u), "margin": row["objective"],
                    "inside": bool(row.get("envelope_inside", False)), "feasible": feas}
            candidates.append(cand)
            if feas and (best is None or row["objective"] > best[0] + 1e-12):
                best = (row["objective"], problem, u, row)
            done += goal.max_evaluations
            if progress is not None:
                progress(min(done, planned), planned)
        total_evals += problem.evaluations
    if best is None:
        raise ValueError("no feasible design: every screened and polished design violates a constraint")
    m_best, problem, u, row = best
    return _report(base, goal, problem, u, row, total_evals, pd.DataFrame(candidates))


def _with_regime(base, goal: DesignGoal) -> DesignGoal:
    """The goal with its wanted regime checked on the base design's chart (default: the regime there
    at the envelope's centre in log-log axes)."""
    from dataclasses import replace

    from lowgmap.physics.chart.composition import Chart
    from lowgmap.physics.chart.margins import regime_index

    chart = Chart.build(base)
    if goal.regime is not None:
        regime_index(chart, goal.regime)
        return goal
    (a, b), (c, d) = goal.ql_range, goal.qg_range
    regime = chart.regime_at(math.sqrt(a * b), math.sqrt(c * d))
    if not regime:
        raise ValueError("the base design's chart has no regimes: give the wanted regime in the goal")
    return replace(goal, regime=regime)


def _fluid_text(fluid: Mapping) -> str:
    return ", ".join(f"{k}={v}" for k, v in fluid.items()) if fluid else "case fluid"


def _report(base, goal, problem, u, row, evaluations, candidates) -> DesignResult:
    from lowgmap.physics.chart.composition import Chart

    values = {v.name: v.value(x) for v, x in zip(goal.variables, u)}
    case = problem.ev.case_for(problem.changes(u))
    margin = row["objective"]
    regime = row.get("envelope_regime") or (goal.regime or "")
    limiting: tuple = ()
    try:
        chart = Chart.build(case)
        env = envelope_margin(chart, goal.ql_range, goal.qg_range, regime or None)
        if env["inside"]:
            tol = _LIMIT_TOL * max(abs(env["margin"]), 1e-12)
            limiting = tuple(n for n, m in env["line_margins"].items() if m <= env["margin"] + tol)
        elif env["limiting"]:
            limiting = (env["limiting"],)
    except (ValueError, TypeError):
        pass
    active = []
    for v, x in zip(goal.variables, u):
        if x <= _BOUND_TOL:
            active.append(f"{v.name} at its lower bound {v.low:.6g}")
        elif x >= 1.0 - _BOUND_TOL:
            active.append(f"{v.name} at its upper bound {v.high:.6g}")
    for c in goal.constraints:
        for s, what in zip(c.slacks(case), [w for w in ("upper", "lower") if getattr(c, w) is not None]):
            if abs(s) <= 1e-4:
                active.append(f"{c.quantity} at its {what} limit {getattr(c, what):.6g}")
    sens = _sensitivity(problem, goal, u, values, margin)
    inside = bool(row.get("envelope_inside", False))
    return DesignResult(values, dict(problem.fluid), float(margin), inside, regime,
                        bool(inside and margin >= goal.required_margin), goal.required_margin, limiting,
                        tuple(active), sens, int(evaluations), case, candidates)


def _sensitivity(problem, goal, u, values, margin) -> tuple:
    """Margin change for ±1 % of each variable (1 % of the range when the value is 0)."""
    pts, steps = [], []
    for v in goal.variables:
        x = values[v.name]
        h = 0.01 * abs(x) if x != 0 else 0.01 * (v.high - v.low)
        steps.append(h)
        for s in (+1, -1):
            ch = problem.changes(u)
            ch[v.name] = x + s * h
            pts.append(ch)
    rows = problem.ev.evaluate_many(pts).to_dict(orient="records")
    out = []
    for i, v in enumerate(goal.variables):
        up, dn = rows[2 * i], rows[2 * i + 1]

        def m(r):
            val = r.get("envelope_margin", math.nan)
            return float(val) if r["status"] == "ok" and math.isfinite(val) else math.nan
        mu, md = m(up), m(dn)
        x = values[v.name]
        at = "lower" if u[i] <= _BOUND_TOL else ("upper" if u[i] >= 1 - _BOUND_TOL else None)
        out.append(Sensitivity(v.name, x, mu - margin, md - margin, (mu - md) / (2.0 * steps[i]), at))
    return tuple(out)
