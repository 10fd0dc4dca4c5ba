"""Numbers as text: crossing factors, margins and shares, written the same way in every output.

One formatter per kind of number, so the command line, the dashboard and the reports never show the
same margin two ways. Negative numbers use the minus sign (U+2212), as in print.
Standard library only.
"""
from __future__ import annotations

import math

__all__ = ["MINUS", "format_factor", "format_percent", "format_share", "format_point_change"]

#: The minus sign used for negative numbers in text output.
MINUS = "\u2212"


def _minus(text: str) -> str:
    return text.replace("-", MINUS)


def format_factor(f: float | None, *, none: str = "none") -> str:
    """A crossing factor as a percentage change and the raw factor: 1.8 -> '+80 % (1.8)'.

    A crossing factor is the flow at which a boundary is crossed divided by the present flow, the
    other flow held. Changes of 1000 % and more are written with thousands separators.

    Parameters
    ----------
    f : float or None   the factor [-]; None (no crossing) or a non-finite value gives ``none``
    none : str          text for "no crossing" (default ``"none"``)

    Examples
    --------
    >>> format_factor(1.8), format_factor(0.4), format_factor(None)
    ('+80 % (1.8)', '\u221260 % (0.4)', 'none')
    >>> format_factor(166.5), format_factor(float("nan"), none="-")
    ('+16,550 % (166.5)', '-')
    """
    if f is None or not math.isfinite(f):
        return none
    pct = 100.0 * (f - 1.0)
    text = f"{pct:+,.0f}" if abs(pct) >= 1000 else f"{pct:+.3g}"
    return f"{_minus(text)} % ({f:.4g})"


def format_percent(x: float) -> str:
    """A fraction as a percentage with three significant digits: 0.25 -> '25 %' (margins, sizes).

    >>> format_percent(0.25), format_percent(-0.0312), format_percent(1.5)
    ('25 %', '\u22123.12 %', '150 %')
    """
    return _minus(f"{100.0 * x:.3g} %")


def format_share(x: float | None) -> str:
    """A share of points as a whole percentage: 0.847 -> '85 %'; None -> 'n/a'.

    >>> format_share(0.847), format_share(1.0), format_share(None)
    ('85 %', '100 %', 'n/a')
    """
    return "n/a" if x is None else f"{100.0 * x:.0f} %"


def format_point_change(x: float) -> str:
    """A change of a fraction in percentage points, signed: -0.042 -> '−4.2 points'.

    >>> format_point_change(-0.042), format_point_change(0.1)
    ('\u22124.2 points', '+10 points')
    """
    return _minus(f"{100.0 * x:+.3g} points")
