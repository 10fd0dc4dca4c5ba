r"""Surrogates of the expensive solves and the switch that turns them off.

Geometry inputs (half-angle, wall length, depth, conduit length, contact angle) move the open-channel
lines through two expensive solves: the cross-section Stokes resistance (a finite-element mesh per
arc angle) and the critical flow rate (a root search per length and density). Both are served from
smooth tables built once (:mod:`lowgmap.physics.models.open_channel.surrogate`); the corner flow
resistance β is a shipped table too (:func:`lowgmap.physics.geometry.corner.flow_resistance`).

The full solves stay available:

* ``build_chart(case, exact=True)`` (:func:`lowgmap.physics.chart.composition.build_chart`) builds a
  chart, and later its margins, with the full solves;
* ``with exact(): ...`` does the same for any code inside the block (a context variable: it holds
  for the current thread or task only, so two dashboard sessions do not see each other's choice).

:data:`SURROGATE_ERRORS` holds the largest errors measured against the full solves over the whole
parameter box (random points between the table nodes); :func:`surrogate_errors` gives them as rows
for ``lowgmap models`` and the theory manual (physics/manual/surrogates.md) reports the same numbers.
"""
from __future__ import annotations

import contextlib
import contextvars
import functools

__all__ = ["exact", "exact_requested", "in_chart_solves", "SURROGATE_ERRORS", "surrogate_errors"]

_EXACT = contextvars.ContextVar("lowgmap_exact_solves", default=False)


def exact_requested() -> bool:
    """Whether the full solves are asked for in the current context (see :func:`exact`).

    >>> exact_requested()
    False
    """
    return _EXACT.get()


@contextlib.contextmanager
def exact(on: bool = True):
    """Use the full solves instead of the surrogates inside the ``with`` block (``on=False``: the surrogates).

    >>> with exact():
    ...     exact_requested()
    True
    >>> exact_requested()
    False
    """
    token = _EXACT.set(bool(on))
    try:
        yield
    finally:
        _EXACT.reset(token)


def in_chart_solves(fn):
    """Decorator for functions ``fn(chart, ...)``: evaluate with the solves the chart was built with
    (the full solves for a chart built with ``exact=True``, see ``Chart.solves``)."""
    @functools.wraps(fn)
    def wrapper(chart, *args, **kwargs):
        solves = getattr(chart, "solves", None)
        if solves is None:
            return fn(chart, *args, **kwargs)
        with solves():
            return fn(chart, *args, **kwargs)
    return wrapper


#: Largest relative errors of each surrogate against its full solve, measured at seeded random points
#: between the table nodes over the whole parameter box (tests/test_surrogates.py repeats a subset).
#: Keys: quantity; values: dict with ``max_rel_error``, ``points`` (how many were checked), ``box``
#: (the parameter range) and ``limit`` (the accuracy target it must stay within).
SURROGATE_ERRORS = {
    "open-channel Stokes resistance K (wedge channel, over half-angle and arc angle)": {
        "max_rel_error": 6.8e-6, "points": 2400,
        "box": "half-angle 2-80 deg (12 random), arc half-angle 0 to the table end (200 each)", "limit": 0.005},
    "critical flow rate (similarity curve over Lambda, wedge channel)": {
        "max_rel_error": 1.3e-4, "points": 192,
        "box": "half-angle 2-80 deg, contact angle 0-60 deg (Concus-Finn), K_e 0-1, Lambda 1e-4 to 1e3 "
               "(24 random shapes x 8 random Lambda)",
        "limit": 0.005},
    "open-channel Stokes resistance K (rectangular groove, over depth/width and arc angle)": {
        "max_rel_error": 3.4e-6, "points": 1200,
        "box": "depth/width 0.1-0.5 and 0.5-5 (6 random), arc half-angle 0 to the table end", "limit": 0.005},
    "open-channel Stokes resistance K (parallel plates, over breadth/gap and arc angle)": {
        "max_rel_error": 2.7e-5, "points": 1200,
        "box": "breadth/gap 0.2-1 and 1-10 (6 random), arc half-angle 0 to the table end", "limit": 0.005},
    "critical flow rate (similarity curve, grooves and plates)": {
        "max_rel_error": 5.4e-5, "points": 96,
        "box": "aspect ratios as above, contact angle 0-60 deg, K_e 0-1, Lambda 1e-4 to 1e3 (12 shapes x 8)",
        "limit": 0.005},
    "corner flow resistance beta (shipped table)": {
        "max_rel_error": 1e-5, "points": 276, "box": "half-angle 1-89 deg, contact angle 0 to 90 deg - alpha",
        "limit": 0.005},
    "boundary position: gas-ingestion line Q_L (wedge and groove samples)": {
        "max_rel_error": 1.3e-5, "points": 320,
        "box": "half-angle 2-30 deg, contact angle 0-20 deg (8 random), flow ratio 1e-4 to 1e3 (40 each)",
        "limit": 0.01},
}


def surrogate_errors() -> list[dict]:
    """The measured surrogate errors as rows (quantity, max_rel_error, points, box, limit) for listings.

    >>> rows = surrogate_errors()
    >>> all(r["max_rel_error"] is None or r["max_rel_error"] < r["limit"] for r in rows)
    True
    """
    return [{"quantity": k, **v} for k, v in SURROGATE_ERRORS.items()]
