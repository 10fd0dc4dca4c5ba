r"""Uncertainty propagation: Monte Carlo over the uncertain inputs of a case.

A case lists uncertainties on its inputs (:class:`Uncertainty`): flow rates, fluid properties,
contact angle, geometry. :func:`monte_carlo` draws them (seeded, reproducible), classifies every
drawn operating point and computes its symmetric margin (:mod:`lowgmap.physics.chart.margins`), and reports

- the probability that the point lies in the intended regime, with its standard error;
- the distribution of the symmetric margin (signed: negative when the point left the regime);
- a sensitivity ranking: the change of the margin per standard uncertainty of each input.

How the chart follows the inputs
--------------------------------
Flow-rate uncertainties move only the point: those samples are classified and measured on one
chart, fully vectorised. Property and geometry uncertainties move the lines. Rebuilding a chart
for each of 10 000 samples would cost tens of seconds, so the property/geometry inputs are drawn
K times (K = ceil(N/16) by default, ``chart_draws``) and each draw is shared by N/K consecutive
samples with their own flow draws. For each draw only what the margins need is recomputed: the
case, its classification (the nominal chart's models, constants and regime scheme with the drawn
case) and the region lines near the points (sampled to 1e-6 decade; when the points' regimes are
intersections of one side of each of their lines, as under the sequence rule or for the corner family's
separating regimes, those lines whole, refined only where a point's margin can lie; otherwise also split
at their crossings and probed for the regimes they separate, refined only within the points' ±99.9 %
boxes). The
approximation is in the sampling, not in the physics: every sample is evaluated exactly for its
draw, but the property part of the variance is sampled K times, not N. The standard error is
therefore computed from the K groups (ratio-estimator formula), so it stays honest and still falls
as 1/sqrt(N) when K grows with N.

Cost: a draw costs what the models need to set up a new case. The closed-tube lines cost well
under a millisecond, so 10 000 samples take about 0.3 s; models that build tables for each case
(e.g. the open-channel critical flow, several seconds per case) make each draw that expensive:
choose a small ``chart_draws`` for them (the standard error says what that costs in precision).

Model uncertainty
-----------------
The constants behind the lines are uncertain too (their bands:
:func:`lowgmap.physics.chart.bands.band_variables`). With ``model_uncertainty`` the region lines'
constants (all of them, or those listed) are drawn uniformly over their bands, a constant shared by
several lines once for all of them, and the study reports, apart from the input-only result
above: the probability and margins with the model constants alone drawn (inputs at their nominal
values, one margin per constant draw), and with inputs and constants drawn together (each
property/geometry draw, or each block of N/K flow draws, shares one constant draw). The input-only
result keeps its own random stream, so it is the same with or without the option; the constants use
a second stream of the same seed. A constant draw the model rejects (e.g. C0 α_c >= 1) makes its
samples invalid (counted).

Distributions: "normal" (``size`` = one standard deviation) or "uniform" (``size`` = half-width);
``relative`` sizes are fractions of the nominal value, absolute ones are in SI units (radians
for angles). A drawn value outside the physical domain is handled as follows: angles are clipped
to their range ([0, 180] deg contact angle, (0, 90) deg half-angle); a non-positive flow rate,
property or size makes the sample invalid; invalid samples are counted (``n_invalid``) and left
out of every statistic.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace
from typing import Callable, Mapping, Sequence

import numpy as np

from lowgmap.physics.chart import lines as _lines
from lowgmap.physics.chart import margins as _mg
from lowgmap.physics.validate import finite, non_negative

__all__ = ["Uncertainty", "TARGETS", "POINT_TARGETS", "DISTRIBUTIONS", "MonteCarloResult", "monte_carlo",
           "nominal_value", "perturbed_case", "FLOWS_PER_CHART_DRAW", "QUANTILES", "ModelUncertaintyResult",
           "model_variables", "DRAWS_PER_BLOCK"]

#: Inputs that can carry an uncertainty, with what they mean (SI unit of an absolute size).
TARGETS: dict[str, str] = {
    "liquid_flow": "liquid flow rate at the operating point [m^3/s]",
    "gas_flow": "gas flow rate at the operating point [m^3/s]",
    "surface_tension": "surface tension sigma [N/m]",
    "liquid_density": "liquid density rho_L [kg/m^3]",
    "liquid_viscosity": "liquid viscosity mu_L [Pa s]",
    "gas_density": "gas density rho_G [kg/m^3]",
    "gas_viscosity": "gas viscosity mu_G [Pa s]",
    "contact_angle": "static contact angle [rad] (advancing/receding shift with it)",
    "size": "section size: the whole section scaled, an absolute size applies to D_h [m]",
    "length": "conduit length [m]",
    "half_angle": "corner half-angle of a groove or wedge channel [rad]",
    "residual_acceleration": "residual acceleration g [m/s^2]",
}

#: Targets that move the operating point (the others move the lines).
POINT_TARGETS = ("liquid_flow", "gas_flow")

#: Accepted distributions.
DISTRIBUTIONS = ("normal", "uniform")

#: Flow draws per property/geometry draw in :func:`monte_carlo` (default of ``chart_draws``).
FLOWS_PER_CHART_DRAW = 16

#: Quantiles of the margin distribution reported by :func:`monte_carlo`.
QUANTILES = (0.05, 0.25, 0.5, 0.75, 0.95)

_FLUID_FIELDS = {"surface_tension": "sigma", "liquid_density": "rho_l", "liquid_viscosity": "mu_l",
                 "gas_density": "rho_g", "gas_viscosity": "mu_g"}
_SQRT3 = math.sqrt(3.0)
_CHART_FIELDS = ("fluid", "section", "wetting", "length", "g", "flow_range", "models")   # what a chart depends on
_MC_TOL = 1e-6          # chord tolerance of the lines sampled per property/geometry draw [decade]
_MC_WALL_DX = 1e-8      # location of vertical pieces per draw [decade]
_MC_N_START = 17        # initial samples per line per draw
#: Property/geometry draws computed together (their margins' closed-form step in one batch): in this process
#: block after block, or with ``workers`` the blocks shared out to worker processes. The blocks do not depend on
#: the number of workers, so neither do the numbers.
DRAWS_PER_BLOCK = 32


@dataclass(frozen=True)
class Uncertainty:
    """Uncertainty of one input.

    Parameters
    ----------
    target : str         one of :data:`TARGETS`
    distribution : str   "normal" (size = one standard deviation) or "uniform" (size = half-width)
    size : float         >= 0; a fraction of the nominal value when ``relative``, else SI units
    relative : bool

    Examples
    --------
    >>> u = Uncertainty("gas_flow", "uniform", 0.1, True)
    >>> round(u.standard_deviation(2.0), 6)      # 0.1 * 2 / sqrt(3)
    0.11547
    """

    target: str
    distribution: str
    size: float
    relative: bool

    def __post_init__(self):
        if self.target not in TARGETS:
            raise ValueError(f"uncertainty target must be one of {', '.join(TARGETS)}, got {self.target!r}")
        if self.distribution not in DISTRIBUTIONS:
            raise ValueError(f"uncertainty of {self.target}: distribution must be 'normal' or 'uniform', "
                             f"got {self.distribution!r}")
        object.__setattr__(self, "size", non_negative(f"uncertainty of {self.target}: size", self.size))
        if not isinstance(self.relative, (bool, np.bool_)):
            raise TypeError(f"uncertainty of {self.target}: relative must be True or False, got {self.relative!r}")
        object.__setattr__(self, "relative", bool(self.relative))

    @classmethod
    def of(cls, obj) -> "Uncertainty":
        """An :class:`Uncertainty` from any object with the same four fields (e.g. the case file's)."""
        if isinstance(obj, cls):
            return obj
        try:
            return cls(obj.target, obj.distribution, obj.size, obj.relative)
        except AttributeError:
            raise TypeError(f"an uncertainty needs target, distribution, size and relative, got {obj!r}") from None

    def unit_draws(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """n draws of the unit variable: standard normal, or uniform on [-1, 1]."""
        if self.distribution == "normal":
            return rng.standard_normal(n)
        return rng.uniform(-1.0, 1.0, n)

    def values(self, nominal: float, unit: np.ndarray) -> np.ndarray:
        """Input values for unit draws ``unit`` around ``nominal`` (SI)."""
        if self.relative:
            return nominal * (1.0 + self.size * unit)
        return nominal + self.size * unit

    def standard_deviation(self, nominal: float) -> float:
        """Standard deviation of the input (SI) at ``nominal``."""
        s = self.size * (abs(nominal) if self.relative else 1.0)
        return s if self.distribution == "normal" else s / _SQRT3

    @property
    def unit_std(self) -> float:
        """Standard deviation of the unit variable (1 for normal, 1/sqrt(3) for uniform)."""
        return 1.0 if self.distribution == "normal" else 1.0 / _SQRT3


# ---------------------------------------------------------------------------------------------
# Inputs of a case

def nominal_value(case, target: str, point: tuple[float, float] | None = None) -> float:
    """Nominal value of an uncertain input in SI units (``point`` = (Q_L, Q_G) for flows).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> case = example_case()                   # water/air, 10 mm tube
    >>> nominal_value(case, "surface_tension"), nominal_value(case, "size")
    (0.0727, 0.01)
    """
    if target not in TARGETS:
        raise ValueError(f"uncertainty target must be one of {', '.join(TARGETS)}, got {target!r}")
    if target in POINT_TARGETS:
        if point is None:
            raise ValueError(f"{target}: an operating point is needed")
        return float(point[0] if target == "liquid_flow" else point[1])
    if target in _FLUID_FIELDS:
        return float(getattr(case.fluid, _FLUID_FIELDS[target]))
    if target == "contact_angle":
        return float(case.wetting.contact_angle)
    if target == "size":
        return float(case.section.hydraulic_diameter)
    if target == "length":
        return float(case.length)
    if target == "residual_acceleration":
        return float(case.g)
    value = getattr(case.section, "half_angle", None)
    if value is None:
        raise ValueError(f"half_angle uncertainty needs a section with a corner half-angle (groove, wedge_channel), "
                         f"got a {getattr(case.section, 'kind', type(case.section).__name__)} section")
    return float(value)


def _scaled_section(section, factor: float):
    """The section scaled by ``factor`` (every length field; angles, counts and indices kept)."""
    changes = {}
    for fld in fields(section):
        value = getattr(section, fld.name)
        if "angle" in fld.name or isinstance(value, (bool, int, np.integer)):
            continue
        if isinstance(value, float):
            changes[fld.name] = value * factor
        elif fld.name == "vertices":
            changes[fld.name] = tuple((x * factor, y * factor) for x, y in value)
    return replace(section, **changes)


def perturbed_case(case, values: Mapping[str, float]):
    """A copy of ``case`` with inputs replaced (SI values by target name; flows are ignored here).

    Angles are clipped to their physical range; other invalid values raise ValueError.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> case = example_case()                   # water/air, 10 mm tube
    >>> c2 = perturbed_case(case, {"size": 0.011, "surface_tension": 0.07})
    >>> round(c2.section.diameter, 9), c2.fluid.sigma
    (0.011, 0.07)
    """
    changes = {}
    fluid_changes = {_FLUID_FIELDS[t]: float(v) for t, v in values.items() if t in _FLUID_FIELDS}
    if fluid_changes:
        changes["fluid"] = replace(case.fluid, **fluid_changes)
    if "contact_angle" in values:
        w = case.wetting
        theta = float(np.clip(values["contact_angle"], 0.0, math.pi))
        shift = theta - w.contact_angle

        def moved(a):
            return None if a is None else float(np.clip(a + shift, 0.0, math.pi))
        changes["wetting"] = replace(w, contact_angle=theta, advancing=moved(w.advancing), receding=moved(w.receding))
    section = case.section
    if "half_angle" in values:
        nominal_value(case, "half_angle")
        eps = 1e-9
        section = replace(section, half_angle=float(np.clip(values["half_angle"], eps, math.pi / 2 - eps)))
    if "size" in values:
        new = finite("size", values["size"], "m")
        if not new > 0:
            raise ValueError(f"size must be > 0 m, got {new:g} m")
        section = _scaled_section(section, new / float(case.section.hydraulic_diameter))
    if section is not case.section:
        changes["section"] = section
    if "length" in values:
        changes["length"] = float(values["length"])
    if "residual_acceleration" in values:
        changes["g"] = float(values["residual_acceleration"])
    return case.with_(**changes) if changes else case


# ---------------------------------------------------------------------------------------------
# Monte Carlo

@dataclass(frozen=True, eq=False)
class MonteCarloResult:
    """Result of :func:`monte_carlo`.

    Attributes
    ----------
    probability : float        fraction of valid samples in the intended regime
    std_error : float          its standard error (binomial, or from the property/geometry groups)
    ci95 : (float, float)      Wilson 95 % interval on the effective sample size (when every sample
                               agrees, on N, or on the number of property/geometry draws)
    margins : ndarray          signed symmetric margin of every sample [fraction]: +m in the
                               intended regime, -m (its margin in the other regime) outside, NaN
                               for invalid samples
    margin_quantiles : tuple of (q, value)   quantiles :data:`QUANTILES` of the valid margins
    sensitivity : tuple of (input, effect)   change of the margin per standard uncertainty of
                               each input (least-squares slope on standardised draws), largest
                               |effect| first
    n : int                    samples drawn
    n_invalid : int            samples outside the physical domain (left out)
    intended_regime : str
    regime_counts : dict       regime -> number of valid samples
    chart_draws : int          distinct property/geometry draws (1 if none is uncertain)
    nominal_margin : float     symmetric margin of the nominal point (signed as above)
    required_margin : float or None
    probability_required : float or None   fraction of valid samples with margin >= required
    seed : int
    model : ModelUncertaintyResult or None   the same with the model constants drawn (constants alone,
                               and with the inputs), when ``model_uncertainty`` was asked for; the
                               fields above are always the input-only result
    processes : int            processes that computed the property/geometry draws (``workers``)
    """

    probability: float
    std_error: float
    ci95: tuple[float, float]
    margins: np.ndarray
    margin_quantiles: tuple
    sensitivity: tuple
    n: int
    n_invalid: int
    intended_regime: str
    regime_counts: dict
    chart_draws: int
    nominal_margin: float
    required_margin: float | None
    probability_required: float | None
    seed: int
    model: "ModelUncertaintyResult | None" = None
    processes: int = 1

    def to_dict(self) -> dict:
        """JSON-ready summary (without the per-sample margins)."""
        out = {
            "probability": self.probability, "std_error": self.std_error, "ci95": list(self.ci95),
            "intended_regime": self.intended_regime, "n": self.n, "n_invalid": self.n_invalid,
            "seed": self.seed, "chart_draws": self.chart_draws, "nominal_margin": self.nominal_margin,
            "margin_quantiles": {f"{q:g}": v for q, v in self.margin_quantiles},
            "sensitivity": [{"input": k, "effect": v} for k, v in self.sensitivity],
            "regime_counts": dict(self.regime_counts),
            "required_margin": self.required_margin, "probability_required": self.probability_required,
        }
        if self.model is not None:
            out["model_uncertainty"] = self.model.to_dict()
        return out


@dataclass(frozen=True, eq=False)
class ModelUncertaintyResult:
    """Model uncertainty in :func:`monte_carlo`: the region lines' constants drawn over their bands.

    Attributes
    ----------
    variables : tuple of BandVariable   the constants drawn (uniformly over their bands)
    draws : int                constant draws of the constants-only study
    probability_model : float  fraction of valid constant draws that keep the nominal point in the
                               intended regime (inputs at their nominal values)
    std_error_model : float    its standard error (binomial)
    ci95_model : (float, float)   Wilson 95 % interval
    margins_model : ndarray    signed symmetric margin of the nominal point for every constant draw
                               (NaN for rejected draws)
    margin_quantiles_model : tuple of (q, value)
    probability_both : float   fraction of valid samples in the intended regime with inputs and
                               constants drawn together
    std_error_both : float     its standard error (from the groups of samples that share a draw)
    ci95_both : (float, float)
    margins_both : ndarray     signed margin of every sample (NaN for invalid samples)
    margin_quantiles_both : tuple of (q, value)
    groups_both : int          distinct constant (and property/geometry) draws of the joint study
    n_rejected_model : int     constant draws the model rejected (left out)
    n_invalid_both : int       joint samples left out (invalid inputs or rejected constants)
    sensitivity : tuple of (constant, effect)   change of the margin per standard uncertainty of each
                               constant (constants-only study), largest |effect| first
    probability_required_model, probability_required_both : float or None   fraction with margin >=
                               the required margin
    """

    variables: tuple
    draws: int
    probability_model: float
    std_error_model: float
    ci95_model: tuple
    margins_model: np.ndarray
    margin_quantiles_model: tuple
    probability_both: float
    std_error_both: float
    ci95_both: tuple
    margins_both: np.ndarray
    margin_quantiles_both: tuple
    groups_both: int
    n_rejected_model: int
    n_invalid_both: int
    sensitivity: tuple
    probability_required_model: float | None = None
    probability_required_both: float | None = None

    def to_dict(self) -> dict:
        """JSON-ready summary (without the per-sample margins)."""
        return {
            "constants": [v.to_dict() for v in self.variables], "draws": self.draws,
            "model_only": {"probability": self.probability_model, "std_error": self.std_error_model,
                           "ci95": list(self.ci95_model),
                           "margin_quantiles": {f"{q:g}": v for q, v in self.margin_quantiles_model},
                           "n_rejected": self.n_rejected_model,
                           "probability_required": self.probability_required_model},
            "inputs_and_model": {"probability": self.probability_both, "std_error": self.std_error_both,
                                 "ci95": list(self.ci95_both), "groups": self.groups_both,
                                 "margin_quantiles": {f"{q:g}": v for q, v in self.margin_quantiles_both},
                                 "n_invalid": self.n_invalid_both,
                                 "probability_required": self.probability_required_both},
            "sensitivity": [{"constant": k, "effect": v} for k, v in self.sensitivity],
        }


def _wilson(p: float, n_eff: float, z: float = 1.959963984540054) -> tuple[float, float]:
    if not n_eff > 0:
        return (0.0, 1.0)
    den = 1.0 + z * z / n_eff
    centre = (p + z * z / (2 * n_eff)) / den
    half = z * math.sqrt(max(p * (1 - p) / n_eff + z * z / (4 * n_eff * n_eff), 0.0)) / den
    return (max(0.0, centre - half), min(1.0, centre + half))


def _light_chart(chart, case):
    """The chart's models and regime sequence with another case (classification only, no curves)."""
    return replace(chart, case=case, boundaries=(), intersections=(), regions=(), warnings=())


def monte_carlo(case, uncertainties: Sequence, n: int = 10_000, seed: int = 0, intended_regime: str | None = None,
                progress: Callable[[int, int], None] | None = None, *, chart=None, point=None,
                chart_draws: int | None = None, required_margin: float | None = None,
                model_uncertainty: bool | Sequence[str] = False, model_draws: int | None = None,
                workers: int = 1) -> MonteCarloResult:
    r"""Probability of staying in the intended regime, margin distribution and sensitivities.

    .. math:: P = \frac{1}{N} \sum_{j=1}^{N} [\,\mathrm{regime}(x_j) = R\,], \qquad
              \mathrm{s.e.}(P) = \sqrt{P (1 - P) / N} \ \text{(flow inputs only)}

    Parameters
    ----------
    case : Case
    uncertainties : sequence of Uncertainty (or objects with the same fields)
    n : int            number of samples N (>= 2)
    seed : int         seed of ``numpy.random.default_rng``: the same seed gives the same result
    intended_regime : str, optional   default: the regime of the nominal point
    progress : callable(done, total), optional   called as samples are finished
    chart : Chart, optional   the nominal chart of ``case`` (built with defaults if omitted)
    point : (float, float), optional   nominal (Q_L, Q_G) [m^3/s]; default: the case's operating point
    chart_draws : int, optional   number K of property/geometry draws (default ceil(N/16))
    required_margin : float, optional   also report the probability of a margin >= this value
    model_uncertainty : bool or sequence of str, optional
        Also draw the region lines' constants uniformly over their bands (True: every banded
        constant; or keys as :func:`model_variables` takes them, e.g. ``"bubble_slug_dukler_1988.c0"``)
        and report the result separately (:attr:`MonteCarloResult.model`). Default False.
    model_draws : int, optional   constant draws K_m of the constants-only study (default: K when an
        input moves the lines, else ceil(N/16)); the joint study shares one constant draw per
        property/geometry draw (or per block of N/K_m flow draws)
    workers : int   processes that compute the property/geometry draws (default 1: this process); with more,
        the draws are shared out in blocks to the study worker processes
        (:func:`lowgmap.physics.studies.workers.pools`, started on first use and kept): the same samples and the
        same numbers, in less time on a machine with the cores (the model-uncertainty study stays in this process)

    Returns
    -------
    MonteCarloResult

    Notes
    -----
    Draws are made in the order the uncertainties are listed, N values for each flow input and K
    for each other input, from one generator. See the module notes for how the chart follows
    the property and geometry draws; each sample's regime and margin are exact for its draw
    (margins to the sampled lines within about 1e-5 in m).

    Examples
    --------
    >>> from lowgmap.physics.models.boundary import PowerLawBoundary
    >>> from lowgmap.physics.chart.composition import Chart
    >>> from lowgmap.physics.examples import example_case
    >>> case = example_case(point=(1e-5, 0.5e-5))
    >>> chart = Chart.build(case, [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])
    >>> res = monte_carlo(case, [Uncertainty("gas_flow", "normal", 0.0, True)], n=100, chart=chart)
    >>> res.probability, res.std_error, round(res.nominal_margin, 6)
    (1.0, 0.0, 0.333333)

    With the drift-flux bubble–slug line, the constants alone can move the line across the point:

    >>> chart = Chart.build(case, ["bubble_slug_dukler_1988"])      # the line at Q_G = 1.17 Q_L
    >>> res = monte_carlo(case, [Uncertainty("gas_flow", "normal", 0.0, True)], n=200, chart=chart,
    ...                   model_uncertainty=True)
    >>> res.probability, res.model.probability_model == 1.0, len(res.model.variables)
    (1.0, True, 2)
    """
    from lowgmap.physics.chart.composition import Chart

    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 2:
        raise ValueError(f"n (number of samples) must be an integer >= 2, got {n!r}")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)):
        raise TypeError(f"seed must be an integer, got {seed!r}")
    n = int(n)
    if chart is None:
        chart = Chart.build(case)
    elif chart.case is not case and any(getattr(chart.case, f) != getattr(case, f) for f in _CHART_FIELDS):
        raise ValueError("chart was built for another case: pass the chart of this case (or none)")
    if point is None:
        op = getattr(case, "operating_point", None)
        if op is None:
            raise ValueError("monte_carlo needs an operating point: the case has none and no point was given")
        point = (op.ql, op.qg)
    ql0, qg0 = _mg.check_point(*point)
    if not chart.regime_names:
        raise ValueError("the chart has no regimes: there is nothing to stay in (no boundary model applies)")
    if intended_regime is None:
        intended_regime = chart.regime_at(ql0, qg0)
    _mg.regime_index(chart, intended_regime)
    if required_margin is not None:
        required_margin = finite("required_margin", required_margin)
    uncs = [Uncertainty.of(u) for u in uncertainties]
    seen = set()
    for u in uncs:
        if u.target in seen:
            raise ValueError(f"uncertainty of {u.target} is listed more than once")
        seen.add(u.target)
    case_uncs = [u for u in uncs if u.target not in POINT_TARGETS]
    nominal = {u.target: nominal_value(case, u.target, (ql0, qg0)) for u in uncs}

    if case_uncs:
        k = int(chart_draws) if chart_draws is not None else math.ceil(n / FLOWS_PER_CHART_DRAW)
        if k < 1:
            raise ValueError(f"chart_draws must be >= 1, got {chart_draws!r}")
        k = min(k, n)
    else:
        k = 1
    rng = np.random.default_rng(int(seed))
    unit = {}
    for u in uncs:
        unit[u.target] = u.unit_draws(rng, n if u.target in POINT_TARGETS else k)
    block = (np.arange(n) * k) // n                       # property/geometry draw of each sample

    ql = _value(uncs, "liquid_flow", ql0, unit)
    qg = _value(uncs, "gas_flow", qg0, unit)
    ql = np.full(n, ql0) if ql is None else np.asarray(ql, dtype=float)
    qg = np.full(n, qg0) if qg is None else np.asarray(qg, dtype=float)
    with np.errstate(invalid="ignore"):
        valid = np.isfinite(ql) & np.isfinite(qg) & (ql > 0) & (qg > 0)
    regimes = np.full(n, "", dtype=object)
    m = np.full(n, np.nan)

    workers = int(workers)
    if workers < 1:
        raise ValueError(f"workers must be >= 1, got {workers}")
    processes = 1
    nominal_m, _, _ = _mg.symmetric_margins(chart, ql0, qg0, regime=intended_regime)
    if k == 1 and not case_uncs:
        step = 2500
        for s in range(0, n, step):
            sl = np.arange(s, min(n, s + step))
            sl = sl[valid[sl]]
            if sl.size:
                reg = np.asarray(chart.classify(ql[sl], qg[sl]))
                regimes[sl] = reg
                m[sl], _ = _mg.symmetric_margins(chart, ql[sl], qg[sl])[:2]
            if progress is not None:
                progress(min(n, s + step), n)
    else:
        starts = np.searchsorted(block, np.arange(k + 1))
        draws = [{u.target: float(u.values(nominal[u.target], unit[u.target][b:b + 1])[0]) for u in case_uncs}
                 for b in range(k)]
        light0 = _light_chart(chart, case)
        edges = list(range(0, k, DRAWS_PER_BLOCK)) + [k]
        if workers > 1 and len(edges) > 2:          # two blocks or more (one block: no gain from a worker)
            processes = _draws_in_workers(light0, case, draws, starts, edges, ql, qg, valid, regimes, m, workers,
                                          progress, n)
        else:
            every = max(1, k // 50)
            for b0, b1 in zip(edges[:-1], edges[1:]):
                s0, s1 = int(starts[b0]), int(starts[b1])

                def done(j, b0=b0):
                    b = b0 + j
                    if progress is not None and ((b + 1) % every == 0 or b + 1 == k):
                        progress(int(starts[b + 1]), n)
                regimes[s0:s1], m[s0:s1], valid[s0:s1] = _run_draws(light0, case, draws[b0:b1], starts[b0:b1 + 1],
                                                                    ql[s0:s1], qg[s0:s1], valid[s0:s1], done)

    ok = valid & np.isfinite(m)
    inside = regimes == intended_regime
    signed = np.where(inside, m, -m)
    signed[~ok] = np.nan
    n_ok = int(ok.sum())
    if n_ok == 0:
        raise ValueError("every sample was invalid (non-positive flow, property or size): the uncertainties "
                         "are too large for their distributions")
    p, se, ci = _probability(inside, ok, block, k)
    vals = signed[ok]
    quant = tuple((q, float(v)) for q, v in zip(QUANTILES, np.quantile(vals, QUANTILES)))
    sens = _sensitivity(uncs, unit, block, ok, signed)
    counts = {}
    for name in chart.regime_names:
        c = int(np.sum((regimes == name) & ok))
        if c:
            counts[name] = c
    p_req = float(np.mean(vals >= required_margin)) if required_margin is not None else None
    model = None
    if model_uncertainty is not False and model_uncertainty is not None:
        model = _model_study(case, chart, point=(ql0, qg0), intended_regime=intended_regime, which=model_uncertainty,
                             n=n, k=k, case_uncs=case_uncs, nominal=nominal, unit=unit, ql=ql, qg=qg,
                             valid_flows=np.isfinite(ql) & np.isfinite(qg) & (ql > 0) & (qg > 0),
                             seed=int(seed), model_draws=model_draws, required_margin=required_margin)
    return MonteCarloResult(p, se, ci, signed, quant, sens, n, int(n - n_ok), intended_regime, counts, k,
                            float(nominal_m), required_margin, p_req, int(seed), model, processes)


def _run_draws(light0, case, draws, bounds, ql, qg, valid, done=None):
    """Regimes, margins and validity of the samples of the property/geometry draws ``draws`` (dicts of drawn
    values; draw j holds the samples bounds[j] - bounds[0] .. bounds[j + 1] - bounds[0] of ``ql``, ``qg``,
    ``valid``, which hold only these samples). ``light0``: the nominal chart without its curves; ``done(j)`` is
    called after each draw. Runs in this process or in a worker (:func:`_draws_in_workers`)."""
    size = len(ql)
    regimes = np.full(size, "", dtype=object)
    m = np.full(size, np.nan)
    valid = np.array(valid, dtype=bool)
    names = list(light0.regime_names)
    pending: list = []
    for j, values in enumerate(draws):
        sl = np.arange(bounds[j] - bounds[0], bounds[j + 1] - bounds[0])
        try:
            case_b = perturbed_case(case, values)
        except (ValueError, TypeError):
            valid[sl] = False
            continue
        sl = sl[valid[sl]]
        if sl.size:
            light = replace(light0, case=case_b)
            reg = np.asarray(light.classify(ql[sl], qg[sl]))
            regimes[sl] = reg
            m[sl], _ = _mg.uncached_regime_margins(light, case_b, np.log10(ql[sl]), np.log10(qg[sl]),
                                                   _lines.regime_indices(names, reg), pending, sl, tol=_MC_TOL,
                                                   wall_dx=_MC_WALL_DX, n_start=_MC_N_START)
        if done is not None:
            done(j)
    _mg.resolve_deferred(pending, m)       # the closed-form step of the block's draws in one batch
    return regimes, m, valid


def _draws_in_worker(light0, case, draws, bounds, ql, qg, valid, exact):
    """:func:`_run_draws` in a worker process under the caller's choice of full solves or surrogates (a setting of
    the calling context, which a worker does not inherit), with the worker's process id."""
    import os

    from lowgmap.physics import surrogates

    with surrogates.exact(exact):
        return _run_draws(light0, case, draws, bounds, ql, qg, valid) + (os.getpid(),)


def _draws_in_workers(light0, case, draws, starts, edges, ql, qg, valid, regimes, m, workers, progress, n) -> int:
    """Share the blocks of draws (``edges``: the draw numbers where blocks start, then K) out to the study workers,
    round robin, and fill ``regimes``, ``m`` and ``valid`` in place; returns the number of processes that
    computed draws."""
    from concurrent.futures import as_completed

    from lowgmap.physics import surrogates
    from lowgmap.physics.studies import workers as _workers

    pools = _workers.pools(workers)
    n_blocks = len(edges) - 1
    exact = surrogates.exact_requested()
    jobs = {}
    for i in range(n_blocks):
        b0, b1 = edges[i], edges[i + 1]
        s0, s1 = int(starts[b0]), int(starts[b1])
        fut = pools[i % workers].submit(_draws_in_worker, light0, case, draws[b0:b1], starts[b0:b1 + 1],
                                        ql[s0:s1], qg[s0:s1], valid[s0:s1], exact)
        jobs[fut] = (s0, s1)
    pids = set()
    finished = 0
    for fut in as_completed(jobs):
        s0, s1 = jobs[fut]
        regimes[s0:s1], m[s0:s1], valid[s0:s1], pid = fut.result()
        pids.add(pid)
        finished += s1 - s0
        if progress is not None:
            progress(finished, n)
    return len(pids)


def _probability(inside, ok, block, k):
    """(P, standard error, Wilson 95 % interval) of samples in the intended regime, samples grouped in
    k blocks that share a draw (binomial for k = 1, else the ratio-estimator formula over the blocks)."""
    n_ok = int(ok.sum())
    hits = (inside & ok).astype(float)
    p = float(hits.sum() / n_ok)
    if k == 1:
        se = math.sqrt(p * (1.0 - p) / n_ok)
    else:
        nb = np.bincount(block, weights=ok.astype(float), minlength=k)
        sb = np.bincount(block, weights=hits, minlength=k)
        used = nb > 0
        kk = int(used.sum())
        se = math.sqrt(kk / (kk - 1) * float(np.sum((sb[used] - p * nb[used]) ** 2)) / n_ok ** 2) if kk > 1 else 0.0
    if se > 0:
        n_eff = p * (1 - p) / se ** 2
    else:                     # all samples agree: the draws of the shared inputs are what was tried
        n_eff = float(n_ok if k == 1 else int(np.count_nonzero(np.bincount(block, weights=ok.astype(float),
                                                                           minlength=k))))
    return p, se, _wilson(p, n_eff)


def _value(uncs, target, nominal, unit):
    for u in uncs:
        if u.target == target:
            return u.values(nominal, unit[target])
    return None


def _sensitivity(uncs, unit, block, ok, signed):
    """Least-squares slopes of the margin on the standardised draws of each input."""
    names, cols = [], []
    for u in uncs:
        z = unit[u.target] / u.unit_std
        z = z if u.target in POINT_TARGETS else z[block]
        names.append(u.target)
        cols.append(z * (1.0 if u.size > 0 else 0.0))
    if not names:
        return ()
    Z = np.stack(cols, axis=1)[ok]
    y = signed[ok]
    live = Z.std(axis=0) > 0
    effect = np.zeros(len(names))
    if live.any() and y.size > live.sum() + 1 and np.ptp(y) > 0:
        A = np.column_stack([np.ones(y.size), Z[:, live]])
        coef, *_ = np.linalg.lstsq(A, y, rcond=None)
        effect[live] = coef[1:]
    order = sorted(range(len(names)), key=lambda i: -abs(effect[i]))
    return tuple((names[i], float(effect[i])) for i in order)


# ---------------------------------------------------------------------------------------------
# Model uncertainty: the constants of the lines drawn over their bands

def model_variables(chart, which=True) -> tuple:
    """The uncertain constants of the chart's region lines to draw (:func:`~lowgmap.physics.chart.bands.band_variables`).

    Parameters
    ----------
    chart : Chart
    which : True or sequence of str
        True: every region-line constant with a band of width > 0. Otherwise keys ``"model.constant"``
        (that constant of that line, and of the lines sharing it) or a bare constant name (that
        constant in every region line).

    Returns
    -------
    tuple of BandVariable

    Raises
    ------
    ValueError   a key that names no banded constant of a region line (the message lists them)

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.chart.composition import Chart
    >>> chart = Chart.build(example_case())
    >>> [v.key for v in model_variables(chart, ["bubble_slug_dukler_1988.c0"])]
    ['bubble_slug_dukler_1988.c0']
    """
    from lowgmap.physics.chart.bands import band_variables

    every = band_variables(chart)
    if which is True:
        return every
    if isinstance(which, str):
        which = [which]
    out = []
    for key in which:
        line, _, const = str(key).partition(".")
        if not const:
            hit = [v for v in every if v.name == line]
        else:
            hit = [v for v in every if v.name == const and line in v.lines]
        if not hit:
            known = ", ".join(f"{ln}.{v.name}" for v in every for ln in v.lines) or "none"
            raise ValueError(f"model uncertainty: {key!r} is not a constant with an uncertainty band on a "
                             f"region-defining line of this chart; such constants: {known}")
        for v in hit:
            if v not in out:
                out.append(v)
    return tuple(out)


def _constant_sets(chart, variables, U):
    """Region-line constants (one list of dicts per row of unit draws U)."""
    from lowgmap.physics.chart.bands import variable_changes

    lo = np.array([v.low for v in variables])
    hi = np.array([v.high for v in variables])
    base = [dict(c) for _, c in chart.region_models]
    out = []
    for u in U:
        consts = [dict(c) for c in base]
        for k, ch in variable_changes(chart, variables, lo + u * (hi - lo)).items():
            consts[k].update(ch)
        out.append(consts)
    return out


def _grouped(chart, case, case_uncs, nominal, unit, ql, qg, valid, block, k, const_sets):
    """Regimes and margins of samples in k blocks; block b: the b-th property/geometry draw (if any) and
    the region constants ``const_sets[b]``. Returns (regimes, m, valid, rejected blocks)."""
    from lowgmap.physics.chart.bands import light_chart

    n = ql.size
    valid = valid.copy()
    regimes = np.full(n, "", dtype=object)
    m = np.full(n, np.nan)
    names = list(chart.regime_names)
    starts = np.searchsorted(block, np.arange(k + 1))
    pending: list = []
    rejected = 0
    for b in range(k):
        sl = np.arange(starts[b], starts[b + 1])
        if not sl.size:
            continue
        try:
            values = {u.target: float(u.values(nominal[u.target], unit[u.target][b:b + 1])[0]) for u in case_uncs}
            case_b = perturbed_case(case, values) if values else case
        except (ValueError, TypeError):
            valid[sl] = False
            continue
        consts = const_sets[b]
        try:
            for (mdl, _), c in zip(chart.region_models, consts):
                mdl.resolve_constants(c)
        except (ValueError, TypeError):
            valid[sl] = False
            rejected += 1
            continue
        sl = sl[valid[sl]]
        if not sl.size:
            continue
        light = replace(light_chart(chart, consts), case=case_b)
        reg = np.asarray(light.classify(ql[sl], qg[sl]))
        regimes[sl] = reg
        m[sl], _ = _mg.uncached_regime_margins(light, case_b, np.log10(ql[sl]), np.log10(qg[sl]),
                                               _lines.regime_indices(names, reg), pending, sl, tol=_MC_TOL,
                                               wall_dx=_MC_WALL_DX, n_start=_MC_N_START)
    _mg.resolve_deferred(pending, m)
    return regimes, m, valid, rejected


def _model_study(case, chart, *, point, intended_regime, which, n, k, case_uncs, nominal, unit, ql, qg, valid_flows,
                 seed, model_draws, required_margin) -> ModelUncertaintyResult:
    variables = model_variables(chart, which)
    if not variables:
        raise ValueError("model uncertainty: no region-defining line of this chart has a constant with an "
                         "uncertainty band (design inputs and values given with their source have none)")
    d = len(variables)
    km = int(model_draws) if model_draws is not None else (k if case_uncs else math.ceil(n / FLOWS_PER_CHART_DRAW))
    if km < 1:
        raise ValueError(f"model_draws must be >= 1, got {model_draws!r}")
    km = min(km, n)
    rng = np.random.default_rng([int(seed), 1])          # a stream of its own: the input draws are unchanged
    U_model = rng.uniform(size=(km, d))
    # constants alone: the nominal point and case, one margin per draw
    ql0, qg0 = point
    ones = np.arange(km)
    reg_m, m_m, ok_m, rej_m = _grouped(chart, case, [], nominal, unit, np.full(km, ql0), np.full(km, qg0),
                                       np.ones(km, dtype=bool), ones, km, _constant_sets(chart, variables, U_model))
    ok_m &= np.isfinite(m_m)
    if not ok_m.any():
        raise ValueError("model uncertainty: every constant draw was rejected by the models")
    in_m = reg_m == intended_regime
    signed_m = np.where(in_m, m_m, -m_m)
    signed_m[~ok_m] = np.nan
    p_m, se_m, ci_m = _probability(in_m, ok_m, ones, 1)
    q_m = tuple((q, float(v)) for q, v in zip(QUANTILES, np.quantile(signed_m[ok_m], QUANTILES)))
    # inputs and constants together: one constant draw per property/geometry draw (or per block of flows)
    kb = k if case_uncs else km
    U_both = U_model if kb == km else rng.uniform(size=(kb, d))
    block = (np.arange(n) * kb) // n
    reg_b, m_b, ok_b, _ = _grouped(chart, case, case_uncs, nominal, unit, np.asarray(ql, dtype=float),
                                   np.asarray(qg, dtype=float), valid_flows, block, kb,
                                   _constant_sets(chart, variables, U_both))
    ok_b &= np.isfinite(m_b)
    if not ok_b.any():
        raise ValueError("model uncertainty: every joint sample was invalid")
    in_b = reg_b == intended_regime
    signed_b = np.where(in_b, m_b, -m_b)
    signed_b[~ok_b] = np.nan
    p_b, se_b, ci_b = _probability(in_b, ok_b, block, kb)
    q_b = tuple((q, float(v)) for q, v in zip(QUANTILES, np.quantile(signed_b[ok_b], QUANTILES)))
    # sensitivity to the constants (constants-only study): standardised uniform draws
    sens: tuple = ()
    Z = (2.0 * U_model - 1.0) * math.sqrt(3.0)
    y = signed_m
    if ok_m.sum() > d + 1 and np.ptp(y[ok_m]) > 0:
        A = np.column_stack([np.ones(int(ok_m.sum())), Z[ok_m]])
        coef, *_ = np.linalg.lstsq(A, y[ok_m], rcond=None)
        order = sorted(range(d), key=lambda j: -abs(coef[1 + j]))
        sens = tuple((variables[j].key, float(coef[1 + j])) for j in order)
    else:
        sens = tuple((v.key, 0.0) for v in variables)
    p_req_m = p_req_b = None
    if required_margin is not None:
        p_req_m = float(np.mean(signed_m[ok_m] >= required_margin))
        p_req_b = float(np.mean(signed_b[ok_b] >= required_margin))
    return ModelUncertaintyResult(tuple(variables), km, p_m, se_m, ci_m, signed_m, q_m, p_b, se_b, ci_b, signed_b, q_b,
                                  kb, int(km - ok_m.sum()), int(n - ok_b.sum()), sens, p_req_m, p_req_b)
