"""Units at the edges: text with units in, SI floats out (pint).

Every user-facing quantity (case files, CLI options, CSV headers, dashboard fields) is written as a
number with a unit, e.g. ``"120 mL/min"``, ``"2 mm"``, ``"25 degC"``, ``"30 deg"``, ``"1e-4 g0"``.
:func:`to_si` checks that the unit has the expected dimension and returns the value in SI units
(angles in radians, temperatures in kelvin).

Gas flow in standard units
--------------------------
``sccm`` (standard cubic centimetres per minute), ``slpm``/``slm`` (standard litres per minute) and
``scfm``-free variants measure a gas *mass* flow as the volume it would occupy at standard reference
conditions. lowgmap converts them to the actual volumetric flow at the local pressure ``p`` and
temperature ``T`` with the ideal-gas law:

    Q_actual = Q_std * (p_std / p) * (T / T_std)

Reference conditions used: **T_std = 273.15 K (0 degC), p_std = 101 325 Pa (1 atm)**, the convention
of SEMI E12 for mass-flow controllers. Other conventions exist (e.g. 20 degC or 25 degC); a flow meter
calibrated to one of them can be stated with ``standard_conditions=(T, p)``.
"""
from __future__ import annotations

import math
import re
from functools import lru_cache

import pint

from lowgmap.physics.validate import InputError

__all__ = [
    "UnitError", "MAX_QUANTITY_CHARS", "ureg", "to_si", "parse_flow", "standard_to_actual_flow", "format_quantity",
    "STANDARD_TEMPERATURE", "STANDARD_PRESSURE", "KINDS", "STANDARD_FLOW_UNITS", "is_standard_flow",
    "parse_gravity", "gravity_names", "parse_orientation", "ORIENTATION_WORDS", "orientation_text",
]

#: Standard reference temperature for sccm/slpm [K] (SEMI E12: 0 degC).
STANDARD_TEMPERATURE = 273.15
#: Standard reference pressure for sccm/slpm [Pa] (SEMI E12: 1 atm).
STANDARD_PRESSURE = 101_325.0

#: Standard-volume flow units and their volume per minute at reference conditions [m^3/min].
STANDARD_FLOW_UNITS = {
    "sccm": 1e-6,
    "slpm": 1e-3,
    "slm": 1e-3,
    "sccs": 1e-6 * 60.0,  # standard cm^3 per second
}


class UnitError(InputError):
    """A quantity could not be read or has the wrong dimension. The message names the field.

    An :class:`~lowgmap.physics.validate.InputError` (so also a :class:`ValueError`).
    """


#: Longest text read as a quantity ("12.7 mm"); a longer text is refused before it is parsed.
MAX_QUANTITY_CHARS = 200


ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
ureg.define("g0 = 9.80665 m/s^2")  # standard gravity (CGPM 1901), for residual acceleration
ureg.define("percent_ = 0.01 = pct")

#: Quantity kinds: SI unit, pint dimensionality and an example for error messages.
KINDS: dict[str, tuple[str, str, str]] = {
    "length": ("m", "[length]", "2 mm"),
    "area": ("m^2", "[length] ** 2", "3 mm^2"),
    "flow": ("m^3/s", "[length] ** 3 / [time]", "120 mL/min"),
    "velocity": ("m/s", "[length] / [time]", "0.1 m/s"),
    "angle": ("rad", "", "30 deg"),
    "temperature": ("K", "[temperature]", "25 degC"),
    "pressure": ("Pa", "[mass] / [length] / [time] ** 2", "101.325 kPa"),
    "acceleration": ("m/s^2", "[length] / [time] ** 2", "1e-4 g0"),
    "density": ("kg/m^3", "[mass] / [length] ** 3", "998 kg/m^3"),
    "viscosity": ("Pa*s", "[mass] / [length] / [time]", "1.0 mPa*s"),
    "kinematic_viscosity": ("m^2/s", "[length] ** 2 / [time]", "2 cSt"),
    "surface_tension": ("N/m", "[mass] / [time] ** 2", "72 mN/m"),
    "time": ("s", "[time]", "10 s"),
    "dimensionless": ("", "", "0.45"),
}

_NUMBER = re.compile(r"([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*)", re.DOTALL)


@lru_cache(maxsize=512)
def _unit(text: str):
    return ureg.Unit(text)


def _split(text: str, field: str) -> tuple[float, str]:
    text = text.strip()
    if len(text) > MAX_QUANTITY_CHARS:
        raise UnitError(f"{field}: a number with a unit is at most {MAX_QUANTITY_CHARS} characters, got "
                        f"{len(text)} ({text[:20]!r}...)")
    m = _NUMBER.fullmatch(text)
    if not m:
        raise UnitError(f"{field}: cannot read {text!r} as a number with a unit (e.g. '2 mm')")
    return float(m.group(1)), m.group(2)


def to_si(value, kind: str, field: str = "value", *, default_unit: str | None = None) -> float:
    """Convert ``value`` (text with a unit, or a bare number in ``default_unit``) to SI.

    Parameters
    ----------
    value : str or float    e.g. ``"2 mm"``; a bare number is accepted only when ``default_unit``
                            is given (or the kind is dimensionless)
    kind : str              one of :data:`KINDS`
    field : str             name used in error messages (e.g. the case-file key path)

    Examples
    --------
    >>> round(to_si("120 mL/min", "flow"), 12)
    2e-06
    >>> to_si("25 degC", "temperature")
    298.15
    >>> round(to_si("30 deg", "angle"), 6)
    0.523599
    >>> round(to_si("1e-4 g0", "acceleration"), 9)
    0.000980665
    """
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {sorted(KINDS)}, got {kind!r}")
    si_unit, dim, example = KINDS[kind]
    if isinstance(value, bool):
        raise UnitError(f"{field}: expected a {kind.replace('_', ' ')} such as {example!r}, got {value!r}")
    if isinstance(value, (int, float)):
        if kind == "dimensionless":
            return _finite(float(value), field)
        if default_unit is None:
            raise UnitError(
                f"{field}: {value!r} has no unit; write it with a unit, e.g. {example!r}")
        number, unit_text = float(value), default_unit
    elif isinstance(value, str):
        number, unit_text = _split(value, field)
        if not unit_text:
            if kind == "dimensionless":
                return _finite(number, field)
            if default_unit is None:
                raise UnitError(f"{field}: {value!r} has no unit; write it with a unit, e.g. {example!r}")
            unit_text = default_unit
    else:
        raise UnitError(f"{field}: expected text such as {example!r}, got {type(value).__name__} {value!r}")
    if unit_text.lower() in STANDARD_FLOW_UNITS:
        raise UnitError(
            f"{field}: {unit_text!r} is a standard-volume flow; it needs the local pressure and "
            "temperature and is accepted only for gas flow rates")
    try:
        unit = _unit(unit_text.replace("·", "*"))
    except Exception:
        raise UnitError(f"{field}: unknown unit {unit_text!r} in {value!r} (expected a {kind.replace('_', ' ')} "
                        f"such as {example!r})") from None
    q = ureg.Quantity(number, unit)
    if kind == "angle" and not q.dimensionless:
        raise UnitError(f"{field}: {value!r} is not an angle (expected e.g. {example!r})")
    if kind == "dimensionless":
        if not q.dimensionless:
            raise UnitError(f"{field}: {value!r} should be a plain number or a percentage, "
                            f"got units of {q.units:~}")
        return _finite(float(q.to("dimensionless").magnitude), field)
    if kind != "angle" and q.dimensionality != ureg.Quantity(1, si_unit).dimensionality:
        raise UnitError(
            f"{field}: {value!r} has units of {_dim_name(q)}, expected a {kind.replace('_', ' ')} "
            f"such as {example!r}")
    return _finite(float(q.to(si_unit).magnitude), field)


def _dim_name(q) -> str:
    for kind, (si, _, _) in KINDS.items():
        if kind in ("dimensionless", "angle"):
            continue
        if q.dimensionality == ureg.Quantity(1, si).dimensionality:
            return f"{kind.replace('_', ' ')} ({q.units:~})"
    return f"{q.units:~}"


def _finite(x: float, field: str) -> float:
    if not math.isfinite(x):
        raise UnitError(f"{field}: must be a finite number, got {x!r}")
    return x


def standard_to_actual_flow(q_std_m3_s: float, pressure: float, temperature: float, *,
                            standard_conditions: tuple[float, float] | None = None) -> float:
    """Actual volumetric gas flow [m^3/s] from a standard-volume flow [m^3/s at T_std, p_std].

    .. math:: Q = Q_{std}\\,\\frac{p_{std}}{p}\\,\\frac{T}{T_{std}}

    Ideal gas; ``pressure`` [Pa] and ``temperature`` [K] are the local conditions.

    Examples
    --------
    >>> round(standard_to_actual_flow(1e-6 / 60, 2 * 101325.0, 273.15) * 60e6, 9)  # 1 sccm at 2 atm, 0 degC
    0.5
    """
    t_std, p_std = standard_conditions or (STANDARD_TEMPERATURE, STANDARD_PRESSURE)
    if not (pressure > 0 and math.isfinite(pressure)):
        raise ValueError(f"pressure must be > 0 Pa for a standard-flow conversion, got {pressure!r}")
    if not (temperature > 0 and math.isfinite(temperature)):
        raise ValueError(f"temperature must be > 0 K for a standard-flow conversion, got {temperature!r}")
    return q_std_m3_s * (p_std / pressure) * (temperature / t_std)


def is_standard_flow(value) -> bool:
    """Whether ``value`` is a flow written in a standard-volume unit (sccm, slpm, ...), as :func:`parse_flow` reads it.

    >>> is_standard_flow("400sccm"), is_standard_flow("0.4 L/min"), is_standard_flow("not a flow")
    (True, False, False)
    """
    if not isinstance(value, str):
        return False
    try:
        _, unit_text = _split(value, "flow")
    except UnitError:
        return False
    return unit_text.strip().lower() in STANDARD_FLOW_UNITS


def parse_flow(value, field: str = "flow", *, pressure: float | None = None, temperature: float | None = None,
               gas: bool = False, standard_conditions: tuple[float, float] | None = None) -> float:
    """Volumetric flow rate [m^3/s] from text; for gas, standard units (sccm, slpm) are allowed.

    Standard units are converted to the actual flow at ``pressure`` [Pa] and ``temperature`` [K]
    (see :func:`standard_to_actual_flow`).

    Examples
    --------
    >>> round(parse_flow("100 sccm", gas=True, pressure=101325.0, temperature=273.15) * 6e7, 9)
    100.0
    """
    if isinstance(value, str):
        number, unit_text = _split(value, field)
        key = unit_text.strip().lower()
        if key in STANDARD_FLOW_UNITS:
            if not gas:
                raise UnitError(f"{field}: standard-volume unit {unit_text!r} is only valid for a gas flow; "
                                "give a liquid flow as a volume per time, e.g. '120 mL/min'")
            if pressure is None or temperature is None:
                raise UnitError(f"{field}: {value!r} needs the local pressure and temperature to convert")
            q_std = number * STANDARD_FLOW_UNITS[key] / 60.0
            return standard_to_actual_flow(q_std, pressure, temperature, standard_conditions=standard_conditions)
    return to_si(value, "flow", field)


def format_quantity(value_si: float, kind: str, unit: str, digits: int = 4) -> str:
    """Format an SI value in ``unit`` (e.g. ``format_quantity(2e-6, "flow", "mL/min") == '120 mL/min'``).

    >>> format_quantity(2e-6, "flow", "mL/min")
    '120 mL/min'
    """
    si_unit = KINDS[kind][0]
    q = ureg.Quantity(value_si, si_unit if si_unit else "dimensionless").to(unit)
    return f"{q.magnitude:.{digits}g} {unit}"


def convert(value_si, kind: str, unit: str):
    """Convert an SI value (scalar or array) to ``unit``; returns the magnitude."""
    si_unit = KINDS[kind][0]
    return ureg.Quantity(value_si, si_unit if si_unit else "dimensionless").to(unit).magnitude


def check_unit(unit: str, kind: str, field: str = "unit") -> str:
    """Raise :class:`UnitError` unless ``unit`` is a valid unit of ``kind``; return it."""
    try:
        to_si(f"1 {unit}", kind, field)
    except UnitError as exc:
        raise UnitError(f"{field}: {unit!r} is not a {kind.replace('_', ' ')} unit ({exc})") from None
    return unit


# --------------------------------------------------------------------------------------------- gravity
def gravity_names() -> tuple[str, ...]:
    """The named gravity levels a case file, a study file or ``--gravity`` accepts (from
    :data:`lowgmap.physics.properties.gravity.GRAVITY_LEVELS`, where each has its source).

    >>> gravity_names()
    ('ground', 'lunar surface', 'Martian surface')
    """
    from lowgmap.physics.properties.gravity import GRAVITY_LEVELS

    return tuple(lv.name for lv in GRAVITY_LEVELS.values())


def parse_gravity(value, field: str = "residual_acceleration") -> float:
    """Residual acceleration [m/s^2] from an acceleration with units or a named level.

    A named level (case-insensitive; :func:`gravity_names`) gives the value of
    :func:`lowgmap.physics.properties.gravity.gravity_level`; anything else is read by :func:`to_si`
    as an acceleration. The error names the field, the value and both ways of writing it.

    Examples
    --------
    >>> parse_gravity("lunar surface"), parse_gravity("1 g0"), parse_gravity("9.81 m/s^2")
    (1.62, 9.80665, 9.81)
    >>> parse_gravity("moon", "conduit.residual_acceleration")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    lowgmap.app.files.units.UnitError: conduit.residual_acceleration: 'moon' is neither an acceleration ... \
nor a named level ('ground', 'lunar surface', 'Martian surface')
    """
    from lowgmap.physics.properties.gravity import GRAVITY_LEVELS

    if isinstance(value, str) and " ".join(value.split()).lower() in GRAVITY_LEVELS:
        return GRAVITY_LEVELS[" ".join(value.split()).lower()].value
    try:
        return to_si(value, "acceleration", field)
    except UnitError:
        if isinstance(value, str) and not _NUMBER.match(value.strip()):
            names = ", ".join(repr(n) for n in gravity_names())
            raise UnitError(f"{field}: {value[:60]!r} is neither an acceleration with units (e.g. '1e-6 g0', "
                            f"'1.62 m/s^2') nor a named level ({names})") from None
        raise


# --------------------------------------------------------------------------------------------- orientation
#: Words for the orientation of the conduit axis to the residual acceleration -> Orientation kind.
#: The short forms without "flow" are accepted too; an angle ("30 deg", above the horizontal,
#: positive for upward flow) gives an inclination.
ORIENTATION_WORDS = {
    "unspecified": "unspecified",
    "vertical upward flow": "vertical upward",
    "vertical downward flow": "vertical downward",
    "horizontal": "horizontal",
}


def parse_orientation(value, field: str = "orientation"):
    """The :class:`lowgmap.physics.case.Orientation` of a text: one of :data:`ORIENTATION_WORDS`
    (case-insensitive, "flow" optional) or an angle above the horizontal within [-90, 90] deg
    (positive: upward flow; "90 deg" is vertical upward flow, "0 deg" horizontal).

    Examples
    --------
    >>> parse_orientation("Vertical upward flow").describe()
    'vertical upward flow'
    >>> parse_orientation("30 deg").describe()
    'inclined 30 deg above the horizontal (upward flow)'
    >>> parse_orientation("120 deg", "conduit.orientation")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    lowgmap.app.files.units.UnitError: conduit.orientation: an angle must be within [-90, 90] deg ... got '120 deg'
    """
    from lowgmap.physics.case import Orientation

    choices = ", ".join(repr(w) for w in ORIENTATION_WORDS)
    hint = f"one of {choices}, or an angle above the horizontal such as '30 deg' (positive for upward flow)"
    if not isinstance(value, str) or not value.strip():
        raise UnitError(f"{field}: must be {hint}, got {value!r}"[:400])
    words = " ".join(value.split()).lower()
    for text, kind in ORIENTATION_WORDS.items():
        if words in (text, kind):
            return {"unspecified": Orientation.unspecified, "vertical upward": Orientation.vertical_up,
                    "vertical downward": Orientation.vertical_down, "horizontal": Orientation.horizontal}[kind]()
    if not _NUMBER.match(value.strip()):
        raise UnitError(f"{field}: must be {hint}, got {value[:60]!r}")
    angle = to_si(value, "angle", field)
    if not -math.pi / 2 - 1e-12 <= angle <= math.pi / 2 + 1e-12:
        raise UnitError(f"{field}: an angle must be within [-90, 90] deg above the horizontal (positive for upward "
                        f"flow), got {value[:60]!r}")
    if abs(abs(angle) - math.pi / 2) <= 1e-12:
        angle = math.copysign(math.pi / 2, angle)
    return Orientation.inclined(angle)


def orientation_text(orientation) -> str:
    """The case-file text of an :class:`~lowgmap.physics.case.Orientation` (read back by :func:`parse_orientation`).

    >>> from lowgmap.physics.case import Orientation
    >>> orientation_text(Orientation.vertical_down()), orientation_text(Orientation.inclined(-0.5236))
    ('vertical downward flow', '-30.0001 deg')
    """
    if orientation.kind == orientation.INCLINED:
        return f"{math.degrees(orientation.angle_rad):.6g} deg"
    for text, kind in ORIENTATION_WORDS.items():
        if kind == orientation.kind:
            return text
    raise ValueError(f"unknown orientation kind {orientation.kind!r}")
