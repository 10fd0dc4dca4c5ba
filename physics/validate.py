"""Input checks shared by every physics module, and the exception type of the user's errors.

Each check raises :class:`InputError` (a :class:`ValueError`) or :class:`InputTypeError` (also a
:class:`TypeError`) whose message names the field, the value and what is allowed, e.g.
``contact_angle must be within [0, 180] deg, got 210 deg``. These two types mean "the input is wrong":
the command line and the dashboard show their message and carry on. Any other exception is a defect
of lowgmap and is reported as one.
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["InputError", "InputTypeError", "finite", "positive", "non_negative", "in_range", "angle_deg_in_range", "positive_array",
           "format_number"]


class InputError(ValueError):
    """The user's input is outside what lowgmap accepts; the message names the field, the value and
    the allowed range (or what to do instead)."""


class InputTypeError(InputError, TypeError):
    """The user's input is of the wrong kind (a text where a number belongs, a list for a table...)."""


def format_number(value) -> str:
    """A value as error messages show it: a number with 6 significant digits, anything else as ``repr``.

    >>> format_number(0.1 + 0.2), format_number("abc")
    ('0.3', "'abc'")
    """
    try:
        return f"{float(value):.6g}"
    except (TypeError, ValueError):
        return repr(value)


def finite(name: str, value, unit: str = "") -> float:
    """Return ``value`` as a float; raise if it is not a finite real number."""
    if isinstance(value, bool):
        raise InputTypeError(f"{name} must be a number{_u(unit)}, got a boolean ({value!r})")
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InputTypeError(f"{name} must be a number{_u(unit)}, got {value!r}") from None
    if not math.isfinite(x):
        raise InputError(f"{name} must be a finite number{_u(unit)}, got {value!r}")
    return x


def _u(unit: str) -> str:
    return f" [{unit}]" if unit else ""


def positive(name: str, value, unit: str = "") -> float:
    """Return ``value`` as a float; raise unless it is finite and > 0."""
    x = finite(name, value, unit)
    if x <= 0:
        raise InputError(f"{name} must be > 0{_u(unit)}, got {format_number(x)} {unit}".rstrip())
    return x


def non_negative(name: str, value, unit: str = "") -> float:
    """Return ``value`` as a float; raise unless it is finite and >= 0."""
    x = finite(name, value, unit)
    if x < 0:
        raise InputError(f"{name} must be >= 0{_u(unit)}, got {format_number(x)} {unit}".rstrip())
    return x


def in_range(name: str, value, lo: float, hi: float, unit: str = "", *,
             lo_open: bool = False, hi_open: bool = False) -> float:
    """Return ``value`` as a float; raise unless lo <= value <= hi (bounds optionally open)."""
    x = finite(name, value, unit)
    bad = (x < lo or (lo_open and x == lo)) or (x > hi or (hi_open and x == hi))
    if bad:
        lb = "(" if lo_open else "["
        rb = ")" if hi_open else "]"
        raise InputError(
            f"{name} must be within {lb}{format_number(lo)}, {format_number(hi)}{rb} {unit}".rstrip()
            + f", got {format_number(x)} {unit}".rstrip()
        )
    return x


def angle_deg_in_range(name: str, value_rad, lo_deg: float, hi_deg: float, *,
                       lo_open: bool = False, hi_open: bool = False):
    """Check an angle given in radians against a range stated in degrees (the message uses degrees).

    Accepts a scalar or an array; returns it unchanged (as float or float array).
    """
    arr = np.asarray(value_rad, dtype=float)
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{name} must be finite, got {value_rad!r}")
    deg = np.degrees(arr)
    lo_bad = deg < lo_deg - 1e-12 if not lo_open else deg <= lo_deg
    hi_bad = deg > hi_deg + 1e-12 if not hi_open else deg >= hi_deg
    bad = lo_bad | hi_bad
    if np.any(bad):
        worst = float(np.atleast_1d(deg)[np.atleast_1d(bad)][0])
        lb = "(" if lo_open else "["
        rb = ")" if hi_open else "]"
        raise InputError(f"{name} must be within {lb}{lo_deg:g}, {hi_deg:g}{rb} deg, got {worst:.6g} deg")
    return float(arr) if arr.ndim == 0 else arr


def positive_array(name: str, value, unit: str):
    """Return ``value`` as a float array (0-d for a scalar); raise unless every element is finite and > 0.

    The message names the first offending element, e.g. ``R must be > 0 [m], got -1 m``.

    >>> positive_array("R", [1e-3, 2e-3], "m")
    array([0.001, 0.002])
    """
    arr = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{name} must be finite [{unit}], got {value!r}")
    if np.any(arr <= 0):
        bad = float(np.atleast_1d(arr)[np.atleast_1d(arr <= 0)][0])
        raise InputError(f"{name} must be > 0 [{unit}], got {bad:.6g} {unit}")
    return arr
