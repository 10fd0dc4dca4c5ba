"""The case: one study's physical inputs, all in SI units.

A :class:`Case` is what every model receives. It is built by :mod:`lowgmap.app.files.casefile` from a TOML case
file (units converted there) or directly in Python. It is frozen, so it can key caches.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Mapping

from lowgmap.physics.validate import InputTypeError, non_negative, positive

if TYPE_CHECKING:  # pragma: no cover - typing only
    from lowgmap.physics.properties.fluids import FluidPair
    from lowgmap.physics.geometry.sections import Section
    from lowgmap.physics.properties.wetting import Wetting

__all__ = ["FlowRange", "OperatingPoint", "ModelChoice", "Case", "STANDARD_GRAVITY"]

#: Standard acceleration of gravity g0 [m/s^2] (CGPM 1901; exact by definition). Used only to
#: express residual acceleration as a multiple of g0; models always receive ``Case.g``.
STANDARD_GRAVITY = 9.80665


@dataclass(frozen=True)
class FlowRange:
    """Rectangle of the (Q_L, Q_G) plane that a chart covers [m^3/s]."""

    ql_min: float
    ql_max: float
    qg_min: float
    qg_max: float

    def __post_init__(self):
        for name in ("ql_min", "ql_max", "qg_min", "qg_max"):
            positive(f"flow_range.{name}", getattr(self, name), "m^3/s")
        if self.ql_min >= self.ql_max:
            raise ValueError(f"flow_range.ql_min must be < ql_max, got {self.ql_min:g} >= {self.ql_max:g} m^3/s")
        if self.qg_min >= self.qg_max:
            raise ValueError(f"flow_range.qg_min must be < qg_max, got {self.qg_min:g} >= {self.qg_max:g} m^3/s")


@dataclass(frozen=True)
class OperatingPoint:
    """Liquid and gas volumetric flow rates at local (actual) conditions [m^3/s]."""

    ql: float
    qg: float

    def __post_init__(self):
        positive("operating_point.ql", self.ql, "m^3/s")
        positive("operating_point.qg", self.qg, "m^3/s")


@dataclass(frozen=True)
class ModelChoice:
    """A boundary model picked for the chart, by registry name, with constant overrides (SI)."""

    name: str
    params: tuple[tuple[str, float], ...] = ()

    @classmethod
    def of(cls, name: str, params: Mapping[str, float] | None = None) -> "ModelChoice":
        return cls(name, tuple(sorted((params or {}).items())))

    @property
    def param_dict(self) -> dict[str, float]:
        return dict(self.params)


@dataclass(frozen=True)
class Case:
    """Physical inputs of one study, SI units.

    Parameters
    ----------
    fluid : FluidPair       liquid/gas properties at the case temperature and pressure
    section : Section       conduit cross-section
    wetting : Wetting       contact angle(s) of the liquid on the wall
    length : float          conduit length [m]
    g : float               residual acceleration magnitude [m/s^2] (never assumed to be 9.81)
    flow_range : FlowRange  chart extent [m^3/s]
    operating_point : OperatingPoint or None
    models : tuple of ModelChoice   boundary models on the chart (empty: the defaults for the section)
    title, revision, author : str   identification, carried into reports
    intended_regime : str   the regime the device must run in (a regime name of the chart), or "" when
        the case does not state one; verdicts say whether the operating point is in it
    """

    fluid: "FluidPair"
    section: "Section"
    wetting: "Wetting"
    length: float
    g: float
    flow_range: FlowRange
    operating_point: OperatingPoint | None = None
    models: tuple[ModelChoice, ...] = ()
    title: str = "untitled case"
    revision: str = "A"
    author: str = ""
    extra: tuple[tuple[str, object], ...] = field(default=(), compare=False)
    intended_regime: str = ""

    def __post_init__(self):
        positive("length", self.length, "m")
        if not isinstance(self.intended_regime, str):
            raise InputTypeError(f"intended_regime must be a regime name (text), got {self.intended_regime!r}")
        non_negative("g", self.g, "m/s^2")

    def with_(self, **changes) -> "Case":
        """Return a copy with fields replaced (validated again)."""
        return replace(self, **changes)

    @property
    def g_over_g0(self) -> float:
        """Residual acceleration as a multiple of standard gravity g0."""
        return self.g / STANDARD_GRAVITY
