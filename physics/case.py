"""The case: one study's physical inputs, all in SI units.

A :class:`Case` is what every model receives. It is built by :mod:`lowgmap.app.files.casefile` from a TOML case
file (units converted there) or directly in Python. It is frozen, so it can key caches.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Mapping

from lowgmap.physics.validate import InputError, InputTypeError, finite, non_negative, positive

if TYPE_CHECKING:  # pragma: no cover - typing only
    from lowgmap.physics.properties.fluids import FluidPair
    from lowgmap.physics.geometry.sections import Section
    from lowgmap.physics.properties.wetting import Wetting

__all__ = ["FlowRange", "OperatingPoint", "ModelChoice", "Case", "Orientation", "STANDARD_GRAVITY",
           "LUNAR_SURFACE_GRAVITY", "MARTIAN_SURFACE_GRAVITY", "GROUND_GRAVITY"]

#: Standard acceleration of gravity g0 [m/s^2] (CGPM 1901; exact by definition). Used only to
#: express residual acceleration as a multiple of g0; models always receive ``Case.g``.
STANDARD_GRAVITY = 9.80665

#: Gravity of a ground test [m/s^2]: standard gravity g0 (see :mod:`lowgmap.physics.properties.gravity`
#: for the named levels with their sources).
GROUND_GRAVITY = STANDARD_GRAVITY
#: Mean surface gravity of the Moon [m/s^2] (NASA GSFC Moon Fact Sheet, D. R. Williams: 1.62 m/s^2).
LUNAR_SURFACE_GRAVITY = 1.62
#: Mean surface gravity of Mars [m/s^2] (NASA GSFC Mars Fact Sheet, D. R. Williams: 3.71 m/s^2).
MARTIAN_SURFACE_GRAVITY = 3.71


@dataclass(frozen=True)
class Orientation:
    """Direction of the conduit axis (the direction of the net flow) relative to the residual acceleration.

    Build it with the constructors :meth:`unspecified`, :meth:`vertical_up`, :meth:`vertical_down`,
    :meth:`horizontal` and :meth:`inclined`; parsing text such as "vertical upward" or "30 deg" is the
    job of the case-file and command-line layers.

    Parameters
    ----------
    kind : str   one of :attr:`KINDS`: "unspecified", "vertical upward", "vertical downward",
                 "horizontal", "inclined"
    angle_rad : float or None   inclination of the flow direction above the horizontal plane [rad],
                 within [-pi/2, pi/2]: +pi/2 vertical upward flow (buoyancy pushes the gas along the
                 flow), -pi/2 vertical downward flow, 0 horizontal; None when unspecified

    Notes
    -----
    "unspecified" (the default of :class:`Case`) keeps the behaviour of a case without orientation:
    the chart uses the low-gravity models only, and gravity enters through the Eötvös-number check.
    The acceleration components used by the buoyancy models are ``g * axial_fraction`` (along the
    axis, against the flow for upward flow) and ``g * transverse_fraction`` (across the axis).

    Examples
    --------
    >>> import math
    >>> Orientation.vertical_up().axial_fraction
    1.0
    >>> Orientation.inclined(math.radians(30)).describe()
    'inclined 30 deg above the horizontal (upward flow)'
    >>> Orientation.inclined(0.0) == Orientation.horizontal()
    True
    """

    kind: str = "unspecified"
    angle_rad: float | None = None

    UNSPECIFIED = "unspecified"
    VERTICAL_UP = "vertical upward"
    VERTICAL_DOWN = "vertical downward"
    HORIZONTAL = "horizontal"
    INCLINED = "inclined"
    #: Accepted kinds.
    KINDS = (UNSPECIFIED, VERTICAL_UP, VERTICAL_DOWN, HORIZONTAL, INCLINED)

    def __post_init__(self):
        if self.kind not in self.KINDS:
            raise InputError(f"orientation must be one of {', '.join(repr(k) for k in self.KINDS)}, "
                             f"got {self.kind!r}")
        fixed = {self.VERTICAL_UP: math.pi / 2, self.VERTICAL_DOWN: -math.pi / 2, self.HORIZONTAL: 0.0}
        if self.kind == self.UNSPECIFIED:
            if self.angle_rad is not None:
                raise InputError(f"orientation 'unspecified' takes no angle, got {self.angle_rad!r} rad")
            return
        if self.angle_rad is None and self.kind in fixed:
            object.__setattr__(self, "angle_rad", fixed[self.kind])
        angle = finite("orientation angle", self.angle_rad, "rad")
        if not -math.pi / 2 <= angle <= math.pi / 2:
            raise InputError(f"orientation angle must be within [-90, 90] deg (above the horizontal, positive for "
                             f"upward flow), got {math.degrees(angle):.6g} deg")
        if self.kind in fixed and angle != fixed[self.kind]:
            raise InputError(f"orientation {self.kind!r} has the angle {math.degrees(fixed[self.kind]):g} deg, "
                             f"got {math.degrees(angle):.6g} deg")
        object.__setattr__(self, "angle_rad", angle)

    # -- constructors ----------------------------------------------------------------------
    @classmethod
    def unspecified(cls) -> "Orientation":
        """No orientation given: the chart behaves as for a case without gravity direction."""
        return cls(cls.UNSPECIFIED, None)

    @classmethod
    def vertical_up(cls) -> "Orientation":
        """Vertical upward flow (angle +pi/2)."""
        return cls(cls.VERTICAL_UP, math.pi / 2)

    @classmethod
    def vertical_down(cls) -> "Orientation":
        """Vertical downward flow (angle -pi/2)."""
        return cls(cls.VERTICAL_DOWN, -math.pi / 2)

    @classmethod
    def horizontal(cls) -> "Orientation":
        """Horizontal flow (angle 0)."""
        return cls(cls.HORIZONTAL, 0.0)

    @classmethod
    def inclined(cls, angle_rad: float) -> "Orientation":
        """Flow inclined ``angle_rad`` above the horizontal [rad] (negative: downward flow).

        The angles 0 and +-pi/2 give the named kinds (horizontal, vertical upward/downward).
        """
        angle = finite("orientation angle", angle_rad, "rad")
        if angle == 0.0:
            return cls.horizontal()
        if angle == math.pi / 2:
            return cls.vertical_up()
        if angle == -math.pi / 2:
            return cls.vertical_down()
        return cls(cls.INCLINED, angle)

    # -- use ---------------------------------------------------------------------------------
    @property
    def is_known(self) -> bool:
        """False for "unspecified"."""
        return self.kind != self.UNSPECIFIED

    def _angle(self) -> float:
        if self.angle_rad is None:
            raise ValueError("orientation is unspecified: the buoyancy models need the conduit's orientation "
                             "(vertical upward, vertical downward, horizontal or an inclination)")
        return float(self.angle_rad)

    @property
    def axial_fraction(self) -> float:
        """sin(angle): the share of g acting along the axis, against the flow (+1 upward flow, -1 downward)."""
        a = self._angle()
        return {math.pi / 2: 1.0, -math.pi / 2: -1.0, 0.0: 0.0}.get(a, math.sin(a))

    @property
    def transverse_fraction(self) -> float:
        """cos(angle): the share of g acting across the axis (1 horizontal, 0 vertical)."""
        a = self._angle()
        return 0.0 if abs(a) == math.pi / 2 else math.cos(a)

    def describe(self) -> str:
        """Plain words: "vertical upward flow", "inclined 30 deg above the horizontal (upward flow)"..."""
        if self.kind == self.INCLINED:
            deg = math.degrees(self._angle())
            way = "upward" if deg > 0 else "downward"
            return f"inclined {abs(deg):.4g} deg {'above' if deg > 0 else 'below'} the horizontal ({way} flow)"
        if self.kind == self.UNSPECIFIED:
            return "orientation unspecified"
        return f"{self.kind} flow"


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
    orientation : Orientation   conduit axis relative to the residual acceleration (default
        unspecified: the chart is the low-gravity chart, as for a case without orientation)
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
    orientation: Orientation = Orientation()

    def __post_init__(self):
        positive("length", self.length, "m")
        if not isinstance(self.orientation, Orientation):
            raise InputTypeError(f"orientation must be an Orientation (e.g. Orientation.vertical_up()), "
                                 f"got {self.orientation!r}")
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
