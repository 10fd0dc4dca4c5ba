"""Boundary models: regime transitions as curves in the (Q_L, Q_G) plane, and their registry.

A boundary model takes a :class:`~lowgmap.physics.case.Case` and describes one transition line:

- ``implicit(case, ql, qg, **consts)``: a signed function g(Q_L, Q_G), vectorised, zero on the
  line, **negative below it** ("below" = smaller gas flow at fixed liquid flow) and positive above;
- ``qg_of_ql(case, ql, **consts)``: the line as Q_G(Q_L) (NaN where the line has no point);
- ``regime_below`` / ``regime_above``: the regime names on each side;
- ``constants``: adjustable constants (:class:`Constant`) with defaults, ranges and sources;
- ``validity``: the range of the source's data in terms of dimensionless groups
  (:class:`Validity`, group names from :data:`lowgmap.physics.properties.groups.GROUPS`);
- ``applies_to(case)``: None when the model can be used for the case, else the reason;
- ``citation``: the full reference.

Models are registered by name in :data:`BOUNDARY_MODELS` (:func:`register`, :func:`get_model`).
Engineers add measured boundaries of their own as :class:`PowerLawBoundary` (Q_G = a Q_L^b) or
:class:`TableBoundary` (points joined in log-log), built from case-file entries with
:func:`boundary_from_spec` and carried by the case (:func:`case_boundaries`).

Uncertainty bands of the constants
----------------------------------
Besides its *allowed* range (``low`` .. ``high``: the values the model accepts), a constant may carry
an *uncertainty band* (``band`` with its ``band_reason``): the values it may really take, from the
published scatter, the stated spread of the data, or, for a value recalled from memory or set by
order of magnitude, a deliberately wide range. A constant whose ``source`` says it is recalled from
memory or set by order of magnitude (:data:`DEFAULT_BAND_WORDS`) and has no band of its own gets
the default band ×/÷ :data:`DEFAULT_BAND_FACTOR` about the value in use, cut to the allowed range
(:meth:`Constant.band_for`). A case may replace a band (e.g. by the 95 % interval of a calibration):
:func:`case_bands`, :func:`with_case_bands`. :meth:`BoundaryModel.constant_bands` resolves them all
into :class:`ConstantBand` objects, which :mod:`lowgmap.physics.chart.bands` sweeps.

All flows are volumetric flow rates at local conditions [m^3/s]. In vectorised evaluation a point
whose flow rates are not finite and > 0 gives NaN.
"""
from __future__ import annotations

import abc
import importlib
import math
import re
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from lowgmap.physics.properties.groups import GROUPS, evaluate_group, group_names, positive_flows
from lowgmap.physics.validate import finite, in_range, positive

__all__ = [
    "Constant", "Validity", "BoundaryModel", "ExplicitBoundary", "PowerLawBoundary", "TableBoundary",
    "BOUNDARY_MODELS", "register", "get_model", "model_names", "usable_models",
    "boundary_from_spec", "case_boundaries", "resolve_model", "CASE_BOUNDARIES_KEY",
    "ConstantBand", "DEFAULT_BAND_FACTOR", "DEFAULT_BAND_REASON", "DEFAULT_BAND_WORDS", "CASE_BANDS_KEY",
    "case_bands", "with_case_bands",
]

_NAME_RE = re.compile(r"^[a-z][a-z0-9_]*$")


#: Factor of the default band: a constant recalled from memory or set by order of magnitude may lie
#: anywhere from value / 2 to value x 2 (cut to its allowed range). A choice, no source.
DEFAULT_BAND_FACTOR = 2.0
#: Reason given for the default band.
DEFAULT_BAND_REASON = "order of magnitude, from memory (default band)"
#: Words in a constant's ``source`` that give it the default band when it has none of its own.
DEFAULT_BAND_WORDS = ("from memory", "order of magnitude", "of order", "uncertain")


@dataclass(frozen=True)
class Constant:
    """An adjustable constant of a boundary model.

    Parameters
    ----------
    name : str       identifier used in case files (``ModelChoice`` params) and keyword arguments
    default : float  default value (SI)
    unit : str       unit of the value ("-" for dimensionless)
    source : str     where the default comes from; "from memory" or "common practice" when the
                     published value was not in hand
    low, high : float  allowed range (inclusive): the values the model accepts
    doc : str        one-line meaning
    band : (float, float) or None   uncertainty band: the values the constant may really take
                     (inside the allowed range, containing the default); None when it has none of
                     its own (see :meth:`band_for` for the default band)
    band_reason : str   why the band is what it is ("published scatter ...", "stated spread of the
                     data ...", "order of magnitude, from memory ..."); required with a band

    Examples
    --------
    >>> c = Constant("we_sg", 1.0, "-", "from memory", 0.01, 1000.0, band=(0.5, 2.0),
    ...              band_reason="order of magnitude, from memory")
    >>> c.band_for()
    (0.5, 2.0, 'order of magnitude, from memory')
    >>> Constant("k", 3.0, "-", "order of magnitude", 0.1, 5.0).band_for()     # default band, cut at 5
    (1.5, 5.0, 'order of magnitude, from memory (default band)')
    """

    name: str
    default: float
    unit: str
    source: str
    low: float
    high: float
    doc: str = ""
    band: tuple[float, float] | None = None
    band_reason: str = ""

    def __post_init__(self):
        if not _NAME_RE.match(self.name):
            raise ValueError(f"constant name must be snake_case, got {self.name!r}")
        if not self.low <= self.high:
            raise ValueError(f"constant {self.name}: low must be <= high, got [{self.low:g}, {self.high:g}]")
        self.check(self.default, "default")
        if self.band is not None:
            try:
                lo, hi = (float(v) for v in self.band)
            except (TypeError, ValueError):
                raise ValueError(f"constant {self.name}: band must be a pair (low, high), got {self.band!r}") from None
            what = f"constant {self.name}: band"
            if not (math.isfinite(lo) and math.isfinite(hi) and lo <= hi):
                raise ValueError(f"{what} must be two finite numbers, low <= high, got [{lo:g}, {hi:g}]")
            if lo < self.low or hi > self.high:
                raise ValueError(f"{what} [{lo:g}, {hi:g}] must lie within the allowed range "
                                 f"[{self.low:g}, {self.high:g}]")
            if not lo <= self.default <= hi:
                raise ValueError(f"{what} [{lo:g}, {hi:g}] must contain the default {self.default:g}")
            if not (isinstance(self.band_reason, str) and self.band_reason.strip()):
                raise ValueError(f"{what} needs its reason (band_reason)")
            object.__setattr__(self, "band", (lo, hi))

    def check(self, value, model_name: str) -> float:
        """Return ``value`` as a float; raise ValueError naming model and constant if out of range."""
        return in_range(f"{model_name}: constant {self.name}", value, self.low, self.high,
                        "" if self.unit == "-" else self.unit)

    @property
    def default_band_applies(self) -> bool:
        """True when the constant has no band of its own and its source says it is recalled from memory
        or set by order of magnitude (:data:`DEFAULT_BAND_WORDS`)."""
        src = self.source.lower()
        return self.band is None and any(w in src for w in DEFAULT_BAND_WORDS)

    def band_for(self, value: float | None = None) -> tuple[float, float, str] | None:
        """Uncertainty band (low, high, reason) of the constant when it takes ``value`` (default: its default).

        Its own :attr:`band`, widened to contain ``value`` when the value lies outside it; else, when
        :attr:`default_band_applies`, the default band [value / f, value f] (f =
        :data:`DEFAULT_BAND_FACTOR`; [f value, value / f] for a negative value) cut to the allowed
        range; else None (a design input, a choice, or a value given with its source). A value of 0
        has no default band.
        """
        v = float(self.default if value is None else value)
        if self.band is not None:
            lo, hi = self.band
            if lo <= v <= hi:
                return lo, hi, self.band_reason
            return min(lo, v), max(hi, v), self.band_reason + "; widened to contain the value in use"
        if not self.default_band_applies or v == 0.0:
            return None
        f = DEFAULT_BAND_FACTOR
        lo, hi = (v / f, v * f) if v > 0 else (v * f, v / f)
        return max(lo, self.low), min(hi, self.high), DEFAULT_BAND_REASON


@dataclass(frozen=True)
class ConstantBand:
    """The uncertainty band of one constant of one line, as used for a chart.

    Attributes
    ----------
    model : str    registry name of the model (the line)
    name : str     constant name
    unit : str
    value : float  value in use on the chart (the nominal line)
    low, high : float   band (SI); ``low <= value <= high``
    reason : str   why (published scatter, spread of the data, order of magnitude, calibration)
    origin : str   "model" (the constant's own band), "default rule" (:data:`DEFAULT_BAND_REASON`),
                   or "case" (given by the case, e.g. a calibrated 95 % interval)
    """

    model: str
    name: str
    unit: str
    value: float
    low: float
    high: float
    reason: str
    origin: str

    @property
    def key(self) -> str:
        """``"model.constant"``."""
        return f"{self.model}.{self.name}"

    @property
    def width(self) -> float:
        """high - low (SI)."""
        return self.high - self.low

    def to_dict(self) -> dict:
        return {"model": self.model, "constant": self.name, "unit": self.unit, "value": self.value,
                "band": [self.low, self.high], "reason": self.reason, "origin": self.origin}


@dataclass(frozen=True)
class Validity:
    """Range of a dimensionless group covered by a model's source data.

    Parameters
    ----------
    group : str   name of a group in :data:`lowgmap.physics.properties.groups.GROUPS` (e.g. "suratman", "re_sl")
    low, high : float   inclusive range (``-inf``/``inf`` for open ends)
    source : str  where the range comes from ("from memory" when the data table was not in hand)
    """

    group: str
    low: float
    high: float
    source: str

    def __post_init__(self):
        if self.group not in GROUPS:
            raise ValueError(f"validity group {self.group!r} is unknown; known groups: {', '.join(group_names())}")
        if not self.low < self.high:
            raise ValueError(f"validity of {self.group}: low must be < high, got [{self.low:g}, {self.high:g}]")

    @property
    def point(self) -> bool:
        """True when the group depends on the flow rates (else it is a property of the case)."""
        return GROUPS[self.group].point

    def values(self, case, ql, qg):
        """Group values at the points [-]."""
        return evaluate_group(self.group, case, ql, qg)

    def mask(self, case, ql, qg) -> np.ndarray:
        """True where the group lies within [low, high] (False at NaN points)."""
        v = np.asarray(self.values(case, ql, qg), dtype=float)
        return (v >= self.low) & (v <= self.high)

    def describe(self) -> str:
        return f"{GROUPS[self.group].symbol} in [{self.low:.3g}, {self.high:.3g}]"


class BoundaryModel(abc.ABC):
    """A transition line between two regimes in the (Q_L, Q_G) plane.

    Subclasses set the class or instance attributes below and implement :meth:`implicit`;
    they may implement :meth:`qg_of_ql` (otherwise it is found by bisection on :meth:`implicit`).

    Attributes
    ----------
    name : str          registry key, snake_case after the source (``bubble_slug_dukler_1988``)
    label : str         short label for the chart legend
    citation : str      full reference (with DOI where known)
    regime_below : str  regime on the side of smaller gas flow (g < 0)
    regime_above : str  regime on the side of larger gas flow (g > 0)
    constants : tuple of Constant
    validity : tuple of Validity
    low_gravity : bool  True if the model assumes that gravity is negligible (the chart then
                        reports the Eötvös-number check for the case)
    notes : str         assumptions in a sentence or two (shown with the model)
    """

    name: str = ""
    label: str = ""
    citation: str = ""
    regime_below: str = ""
    regime_above: str = ""
    constants: tuple[Constant, ...] = ()
    validity: tuple[Validity, ...] = ()
    low_gravity: bool = False
    notes: str = ""

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.name!r}>"

    # -- constants ------------------------------------------------------------------------
    def constant(self, name: str) -> Constant:
        """The :class:`Constant` called ``name``."""
        for c in self.constants:
            if c.name == name:
                return c
        known = ", ".join(c.name for c in self.constants) or "none"
        raise ValueError(f"{self.name} has no constant {name!r}; its constants are: {known}")

    @property
    def defaults(self) -> dict[str, float]:
        """Default values of the constants."""
        return {c.name: float(c.default) for c in self.constants}

    def resolve_constants(self, params: Mapping[str, float] | None = None) -> dict[str, float]:
        """Defaults overridden by ``params``, each checked against its range.

        Raises ValueError naming the model and the constant for an unknown name or a value out of
        range, and for combinations the model cannot use (:meth:`check_constants`).
        """
        values = self.defaults
        for key, value in (params or {}).items():
            values[key] = self.constant(key).check(value, self.name)
        self.check_constants(values)
        return values

    def check_constants(self, values: dict[str, float]) -> None:
        """Hook for checks that involve several constants (raise ValueError)."""

    def constant_bands(self, values: Mapping[str, float] | None = None,
                       overrides: Mapping[str, tuple] | None = None) -> tuple["ConstantBand", ...]:
        """Uncertainty bands of the constants with the values ``values`` (default: the defaults).

        Parameters
        ----------
        values : mapping, optional   constant values in use (missing ones take their defaults)
        overrides : mapping, optional   constant name -> (low, high, reason): bands given by the case
            (:func:`case_bands`), which replace the constant's own or default band

        Returns
        -------
        tuple of ConstantBand   one per constant with a band (own, default rule or override), in the
        model's order; constants without one are left out. A band is widened to contain the value in
        use (and its reason says so).
        """
        vals = self.defaults
        vals.update({k: float(v) for k, v in (values or {}).items()})
        overrides = dict(overrides or {})
        unknown = sorted(set(overrides) - {c.name for c in self.constants})
        if unknown:
            self.constant(unknown[0])                       # ValueError listing the known constants
        out = []
        for c in self.constants:
            v = vals[c.name]
            if c.name in overrides:
                lo, hi, why = overrides[c.name]
                if not lo <= v <= hi:
                    lo, hi, why = min(lo, v), max(hi, v), why + "; widened to contain the value in use"
                out.append(ConstantBand(self.name, c.name, c.unit, v, float(lo), float(hi), why, "case"))
                continue
            got = c.band_for(v)
            if got is None:
                continue
            origin = "model" if c.band is not None else "default rule"
            out.append(ConstantBand(self.name, c.name, c.unit, v, got[0], got[1], got[2], origin))
        return tuple(out)

    # -- use ------------------------------------------------------------------------------
    def applies_to(self, case) -> str | None:
        """None if the model can be used for ``case``, else the reason it cannot."""
        return None

    @abc.abstractmethod
    def implicit(self, case, ql, qg, **consts):
        """Signed function of (Q_L, Q_G) [m^3/s]: zero on the line, < 0 below it, > 0 above; vectorised."""

    def qg_of_ql(self, case, ql, **consts):
        """Gas flow rate on the line at liquid flow rate ``ql`` [m^3/s]; NaN where there is none.

        Default: bisection in log Q_G on :meth:`implicit` over the chart range widened by 10^6
        each way; NaN where g does not change sign from negative to positive in that bracket.
        """
        ql = np.asarray(ql, dtype=float)
        fr = case.flow_range
        lo = np.full(ql.shape, math.log(fr.qg_min) - 6 * math.log(10))
        hi = np.full(ql.shape, math.log(fr.qg_max) + 6 * math.log(10))
        ok = (np.asarray(self.implicit(case, ql, np.exp(lo), **consts)) < 0) & \
             (np.asarray(self.implicit(case, ql, np.exp(hi), **consts)) > 0)
        for _ in range(60):
            mid = 0.5 * (lo + hi)
            below = np.asarray(self.implicit(case, ql, np.exp(mid), **consts)) < 0
            lo = np.where(below, mid, lo)
            hi = np.where(below, hi, mid)
        out = np.where(ok, np.exp(0.5 * (lo + hi)), np.nan)
        return float(out) if out.ndim == 0 else out

    def breakpoints(self, case, **consts) -> np.ndarray:
        """Liquid flow rates where the line has a kink (sampled exactly by the chart) [m^3/s]."""
        return np.empty(0)

    def validity_mask(self, case, ql, qg) -> np.ndarray:
        """True where every :attr:`validity` range holds at (Q_L, Q_G); vectorised."""
        ql, qg = positive_flows(ql, qg)
        mask = np.isfinite(ql) & np.isfinite(qg)
        for v in self.validity:
            mask &= v.mask(case, ql, qg)
        return mask

    def validity_problems(self, case) -> list[str]:
        """Case-level validity ranges (groups that do not depend on the flows) the case misses."""
        out = []
        for v in self.validity:
            if v.point:
                continue
            value = float(v.values(case, 1.0, 1.0))
            if not (v.low <= value <= v.high):
                out.append(f"{GROUPS[v.group].symbol} = {value:.3g} outside [{v.low:.3g}, {v.high:.3g}] ({v.source})")
        return out


class ExplicitBoundary(BoundaryModel):
    """A boundary given explicitly as Q_G = f(Q_L).

    Its implicit function is the signed distance in log gas flow,

    .. math:: g(Q_L, Q_G) = \\ln\\left(Q_G / f(Q_L)\\right)

    (dimensionless; g = 0.1 means 10.5 % more gas flow than on the line), NaN where f has no value.
    """

    @abc.abstractmethod
    def qg_of_ql(self, case, ql, **consts):
        """Gas flow rate on the line [m^3/s]."""

    def implicit(self, case, ql, qg, **consts):
        ql, qg = positive_flows(ql, qg)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = np.log(qg) - np.log(np.asarray(self.qg_of_ql(case, ql, **consts), dtype=float))
        return float(out) if out.ndim == 0 else out


# ------------------------------------------------------------------------------------------
# Registry

#: Boundary models by registry name.
BOUNDARY_MODELS: dict[str, BoundaryModel] = {}

#: Modules whose import registers the built-in models (loaded on first look-up).
_BUILTIN_MODULES = ("lowgmap.physics.models.tube", "lowgmap.physics.models.tube_gravity",
                    "lowgmap.physics.models.corner")
_builtins_loaded = False


def _load_builtins() -> None:
    global _builtins_loaded
    if not _builtins_loaded:
        _builtins_loaded = True
        for mod in _BUILTIN_MODULES:
            importlib.import_module(mod)


def _check_model(model) -> None:
    if not isinstance(model, BoundaryModel):
        raise TypeError(f"a boundary model must be a BoundaryModel, got {type(model).__name__}")
    if not isinstance(model.name, str) or not _NAME_RE.match(model.name):
        raise ValueError(f"boundary model name must be snake_case (letters, digits, _), got {model.name!r}")
    for attr in ("label", "citation", "regime_below", "regime_above"):
        value = getattr(model, attr)
        if not isinstance(value, str) or not value.strip():
            raise ValueError(f"boundary model {model.name}: {attr} must be a non-empty string")
    if model.regime_below == model.regime_above:
        raise ValueError(f"boundary model {model.name}: regime_below and regime_above must differ, "
                         f"both are {model.regime_below!r}")
    names = [c.name for c in model.constants]
    if len(set(names)) != len(names):
        raise ValueError(f"boundary model {model.name}: constant names repeat: {names}")


def register(model: BoundaryModel, *, replace: bool = False) -> BoundaryModel:
    """Add ``model`` to :data:`BOUNDARY_MODELS` under ``model.name`` and return it.

    Raises ValueError if the name is taken (unless ``replace``) or the model is incomplete.
    """
    _check_model(model)
    if model.name in BOUNDARY_MODELS and not replace and BOUNDARY_MODELS[model.name] is not model:
        raise ValueError(f"boundary model {model.name!r} is already registered")
    BOUNDARY_MODELS[model.name] = model
    return model


def model_names() -> list[str]:
    """Registered model names, sorted."""
    _load_builtins()
    return sorted(BOUNDARY_MODELS)


def get_model(name: str) -> BoundaryModel:
    """The registered model called ``name``; ValueError listing the known names otherwise."""
    _load_builtins()
    try:
        return BOUNDARY_MODELS[name]
    except (KeyError, TypeError):
        raise ValueError(f"unknown boundary model {name!r}; known models: {', '.join(model_names())}") from None


def usable_models(case) -> dict[str, str | None]:
    """For each registered model, None if it can be used for ``case``, else the reason."""
    _load_builtins()
    return {name: BOUNDARY_MODELS[name].applies_to(case) for name in sorted(BOUNDARY_MODELS)}


# ------------------------------------------------------------------------------------------
# Empirical boundaries

_USER_CITATION = "empirical boundary supplied in the case file"


def _range_mask(ql, lo, hi):
    ql = np.asarray(ql, dtype=float)
    return np.isfinite(ql) & (ql >= lo * (1 - 1e-12)) & (ql <= hi * (1 + 1e-12))


class PowerLawBoundary(ExplicitBoundary):
    r"""Empirical boundary :math:`Q_G = a\, Q_L^{\,b}` in SI units (flows in m^3/s).

    Parameters
    ----------
    name : str            snake_case name (used in the case's model list)
    a : float             coefficient, > 0 [m^(3(1-b))/s^(1-b)], so that Q_G comes out in m^3/s
    b : float             exponent [-], within [-10, 10]
    regime_below, regime_above : str   regime names on each side
    label : str, optional      chart label (default: the name)
    citation : str, optional   where the line comes from
    ql_range : (float, float), optional   liquid flow range of the data behind the line [m^3/s];
                           outside it the line is drawn as "outside validity"

    Examples
    --------
    >>> line = PowerLawBoundary("our_rig_2024", 2.0, 1.0, "bubbles", "slugs")
    >>> float(line.qg_of_ql(None, 1e-5))
    2e-05
    >>> bool(line.implicit(None, 1e-5, 1e-5) < 0)
    True
    """

    def __init__(self, name: str, a: float, b: float, regime_below: str, regime_above: str,
                 label: str | None = None, citation: str | None = None,
                 ql_range: tuple[float, float] | None = None):
        self.name = name
        a = positive(f"power-law boundary {name!r}: a", a, "SI")
        b = in_range(f"power-law boundary {name!r}: b", b, -10.0, 10.0)
        self.label = label or name
        self.citation = citation or _USER_CITATION
        self.regime_below = regime_below
        self.regime_above = regime_above
        self.constants = (
            Constant("a", a, "SI", "case file", 0.0, math.inf, "coefficient of Q_G = a Q_L^b (SI)"),
            Constant("b", b, "-", "case file", -10.0, 10.0, "exponent of Q_G = a Q_L^b"),
        )
        self.ql_range = None
        if ql_range is not None:
            lo = positive(f"power-law boundary {name!r}: ql_range[0]", ql_range[0], "m^3/s")
            hi = positive(f"power-law boundary {name!r}: ql_range[1]", ql_range[1], "m^3/s")
            if lo >= hi:
                raise ValueError(f"power-law boundary {name!r}: ql_range must be increasing, got [{lo:g}, {hi:g}] m^3/s")
            self.ql_range = (lo, hi)
        _check_model(self)

    def check_constants(self, values):
        if not values["a"] > 0:
            raise ValueError(f"{self.name}: constant a must be > 0, got {values['a']:g}")

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        ql = np.asarray(ql, dtype=float)
        with np.errstate(invalid="ignore", divide="ignore"):
            out = np.where(ql > 0, c["a"] * np.abs(ql) ** c["b"], np.nan)
        return float(out) if out.ndim == 0 else out

    def validity_mask(self, case, ql, qg):
        ql, qg = positive_flows(ql, qg)
        mask = np.isfinite(ql) & np.isfinite(qg)
        if self.ql_range is not None:
            mask &= _range_mask(ql, *self.ql_range)
        return mask


class TableBoundary(ExplicitBoundary):
    """Empirical boundary through measured points, joined by straight lines in log-log axes.

    Parameters
    ----------
    name : str      snake_case name
    points : sequence of (Q_L, Q_G)   at least two points [m^3/s], all > 0, Q_L strictly increasing
    regime_below, regime_above : str
    label, citation : str, optional

    Notes
    -----
    Beyond the first and last points the end segments are extended (same log-log slope) so that
    the line covers the whole chart, and those parts are flagged outside validity.

    Examples
    --------
    >>> line = TableBoundary("rig_b", [(1e-6, 1e-6), (1e-4, 1e-3)], "bubbles", "slugs")
    >>> round(float(line.qg_of_ql(None, 1e-5)) * 1e5, 9)   # halfway in log: 10^-4.5
    3.16227766
    """

    def __init__(self, name: str, points, regime_below: str, regime_above: str,
                 label: str | None = None, citation: str | None = None):
        self.name = name
        what = f"table boundary {name!r}"
        try:
            rows = [tuple(p) for p in points]
        except TypeError:
            raise TypeError(f"{what}: points must be a sequence of (Q_L, Q_G) pairs") from None
        if len(rows) < 2:
            raise ValueError(f"{what}: needs at least 2 points, got {len(rows)}")
        clean = []
        for i, row in enumerate(rows, start=1):
            if len(row) != 2:
                raise ValueError(f"{what}: point {i} must be a (Q_L, Q_G) pair, got {row!r}")
            clean.append((positive(f"{what}: point {i} Q_L", row[0], "m^3/s"),
                          positive(f"{what}: point {i} Q_G", row[1], "m^3/s")))
        for i in range(1, len(clean)):
            if not clean[i][0] > clean[i - 1][0]:
                raise ValueError(
                    f"{what}: Q_L must increase strictly from point to point; point {i + 1} "
                    f"(Q_L = {clean[i][0]:.6g} m^3/s) follows point {i} (Q_L = {clean[i - 1][0]:.6g} m^3/s)")
        self.points = tuple(clean)
        self.label = label or name
        self.citation = citation or _USER_CITATION
        self.regime_below = regime_below
        self.regime_above = regime_above
        self.constants = ()
        arr = np.log(np.array(clean))
        self._x = arr[:, 0]
        self._y = arr[:, 1]
        self._s0 = (self._y[1] - self._y[0]) / (self._x[1] - self._x[0])
        self._s1 = (self._y[-1] - self._y[-2]) / (self._x[-1] - self._x[-2])
        _check_model(self)

    def qg_of_ql(self, case, ql, **consts):
        self.resolve_constants(consts)
        ql = np.asarray(ql, dtype=float)
        with np.errstate(invalid="ignore", divide="ignore"):
            x = np.log(np.where(ql > 0, ql, np.nan))
        y = np.interp(x, self._x, self._y)
        y = np.where(x < self._x[0], self._y[0] + self._s0 * (x - self._x[0]), y)
        y = np.where(x > self._x[-1], self._y[-1] + self._s1 * (x - self._x[-1]), y)
        out = np.exp(y)
        return float(out) if out.ndim == 0 else out

    def breakpoints(self, case, **consts):
        return np.exp(self._x)

    def validity_mask(self, case, ql, qg):
        ql, qg = positive_flows(ql, qg)
        return np.isfinite(qg) & _range_mask(ql, math.exp(self._x[0]), math.exp(self._x[-1]))


def boundary_from_spec(spec: Mapping) -> BoundaryModel:
    """Build an empirical boundary from a case-file entry (SI units, already converted).

    ``spec`` keys: ``name``, ``kind`` ("power_law" or "table"), ``regime_below``,
    ``regime_above``; for "power_law" ``a``, ``b`` and optionally ``ql_range``; for "table"
    ``points`` (list of [Q_L, Q_G]); optional ``label``, ``citation``.

    Examples
    --------
    >>> m = boundary_from_spec({"name": "rig", "kind": "power_law", "a": 1.0, "b": 1.0,
    ...                         "regime_below": "bubbles", "regime_above": "slugs"})
    >>> type(m).__name__, m.name
    ('PowerLawBoundary', 'rig')
    """
    if not isinstance(spec, Mapping):
        raise TypeError(f"an empirical boundary must be a table of keys, got {type(spec).__name__}")
    name = spec.get("name")
    where = f"empirical boundary {name!r}" if name else "empirical boundary"
    kind = spec.get("kind")
    required = {"power_law": ("name", "a", "b", "regime_below", "regime_above"),
                "table": ("name", "points", "regime_below", "regime_above")}
    if kind not in required:
        raise ValueError(f"{where}: kind must be 'power_law' or 'table', got {kind!r}")
    missing = [k for k in required[kind] if k not in spec]
    if missing:
        raise ValueError(f"{where}: missing {', '.join(missing)}")
    allowed = set(required[kind]) | {"kind", "label", "citation"} | ({"ql_range"} if kind == "power_law" else set())
    extra = sorted(set(spec) - allowed)
    if extra:
        raise ValueError(f"{where}: unknown keys {', '.join(extra)}; allowed: {', '.join(sorted(allowed))}")
    common = dict(regime_below=str(spec["regime_below"]), regime_above=str(spec["regime_above"]),
                  label=spec.get("label"), citation=spec.get("citation"))
    if kind == "power_law":
        return PowerLawBoundary(str(name), finite(f"{where}: a", spec["a"]), finite(f"{where}: b", spec["b"]),
                                ql_range=spec.get("ql_range"), **common)
    return TableBoundary(str(name), spec["points"], **common)


#: Key in ``Case.extra`` under which a case carries its own empirical boundaries: a tuple of
#: BoundaryModel objects or of :func:`boundary_from_spec` entries (mappings, or mappings frozen
#: as tuples of (key, value) pairs, lists as tuples, as the case-file reader stores them).
CASE_BOUNDARIES_KEY = "custom_boundaries"


def _thaw(obj):
    """Undo the freezing of a case-file entry: tuples of (str, value) pairs -> dict, tuples -> list."""
    if isinstance(obj, tuple):
        if obj and all(isinstance(p, tuple) and len(p) == 2 and isinstance(p[0], str) for p in obj):
            return {k: _thaw(v) for k, v in obj}
        return [_thaw(v) for v in obj]
    return obj


def case_boundaries(case) -> dict[str, BoundaryModel]:
    """The empirical boundaries a case carries in ``case.extra[CASE_BOUNDARIES_KEY]``, by name."""
    extra = dict(getattr(case, "extra", ()) or ())
    items = extra.get(CASE_BOUNDARIES_KEY, ())
    out: dict[str, BoundaryModel] = {}
    for item in items:
        model = item if isinstance(item, BoundaryModel) else boundary_from_spec(_thaw(item))
        _check_model(model)
        if model.name in out:
            raise ValueError(f"the case defines the empirical boundary {model.name!r} twice")
        out[model.name] = model
    return out


def resolve_model(name: str, case=None) -> BoundaryModel:
    """Model called ``name``: the case's own empirical boundaries first, then the registry."""
    if case is not None:
        local = case_boundaries(case)
        if name in local:
            return local[name]
    return get_model(name)



# ------------------------------------------------------------------------------------------
# Bands given by the case (e.g. calibrated 95 % intervals)

#: Key in ``Case.extra`` under which a case carries bands of its own for model constants: a tuple of
#: entries (model, constant, low, high, reason), or mappings with those keys ("model", "constant",
#: "low", "high", "reason"), possibly frozen as tuples of (key, value) pairs. They replace the
#: constants' own or default bands (:meth:`BoundaryModel.constant_bands`).
CASE_BANDS_KEY = "constant_bands"


def case_bands(case) -> dict[str, dict[str, tuple[float, float, str]]]:
    """Bands the case gives for model constants: {model: {constant: (low, high, reason)}}.

    Entries come from ``case.extra[CASE_BANDS_KEY]``. Raises ValueError for an entry that is not a
    (model, constant, low, high[, reason]) entry or whose low > high.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> case = with_case_bands(example_case(), [("bubble_slug_dukler_1988", "alpha_c", 0.43, 0.47,
    ...                                          "calibrated: 95 % interval")])
    >>> case_bands(case)
    {'bubble_slug_dukler_1988': {'alpha_c': (0.43, 0.47, 'calibrated: 95 % interval')}}
    """
    extra = dict(getattr(case, "extra", ()) or ())
    out: dict[str, dict[str, tuple[float, float, str]]] = {}
    for item in extra.get(CASE_BANDS_KEY, ()) or ():
        item = _thaw(item)
        if isinstance(item, Mapping):
            parts = [item.get(k) for k in ("model", "constant", "low", "high")] + [item.get("reason", "")]
        elif isinstance(item, (list, tuple)) and len(item) in (4, 5):
            parts = list(item) + ([""] if len(item) == 4 else [])
        else:
            raise ValueError(f"a constant band of the case must be (model, constant, low, high, reason), got {item!r}")
        model, const, lo, hi, why = parts
        if not isinstance(model, str) or not isinstance(const, str):
            raise ValueError(f"a constant band of the case must name its model and constant, got {item!r}")
        lo = finite(f"band of {model}.{const}: low", lo)
        hi = finite(f"band of {model}.{const}: high", hi)
        if lo > hi:
            raise ValueError(f"band of {model}.{const}: low must be <= high, got [{lo:g}, {hi:g}]")
        out.setdefault(model, {})[const] = (lo, hi, str(why or "given by the case"))
    return out


def with_case_bands(case, entries):
    """A copy of ``case`` whose bands (``extra[CASE_BANDS_KEY]``) are updated by ``entries``.

    ``entries``: (model, constant, low, high, reason) tuples; an entry for a constant that already has
    a case band replaces it. The result is checked with :func:`case_bands`.
    """
    current = case_bands(case)
    for model, const, lo, hi, why in entries:
        current.setdefault(str(model), {})[str(const)] = (float(lo), float(hi), str(why))
    frozen = tuple((m, c, lo, hi, why) for m, cs in current.items() for c, (lo, hi, why) in cs.items())
    extra = tuple((k, v) for k, v in (getattr(case, "extra", ()) or ()) if k != CASE_BANDS_KEY)
    new = case.with_(extra=extra + ((CASE_BANDS_KEY, frozen),))
    case_bands(new)
    return new
