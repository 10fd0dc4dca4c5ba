"""Pause points of long computations, for callers that run them next to more urgent work.

Some computations take seconds: the bands of a chart's lines, the worst-case margin over them. They
call :func:`checkpoint` between their steps (each step a few milliseconds to a few tens of
milliseconds). By default a checkpoint does nothing. A caller that runs such a computation in the
background, beside work a person is waiting for (a server drawing the chart of a slider being
dragged), installs a *pacer* for it with :func:`paced`: a function called at every checkpoint, which

* returns at once when there is nothing more urgent;
* may block (releasing the processor and, while it waits on a lock or an event, Python's global
  interpreter lock) until the urgent work is done;
* may raise :class:`Abandoned` when the result is no longer wanted (the computation stops at that
  checkpoint; nothing half-done is cached).

The pacer is held in a context variable: it applies to the thread or task that installed it and to
nothing else, so two computations running at once each have their own (or none).

>>> calls = []
>>> with paced(lambda: calls.append(1)):
...     checkpoint(); checkpoint()
>>> checkpoint()                      # outside the block: nothing is called
>>> len(calls)
2
"""
from __future__ import annotations

import contextlib
import contextvars
from typing import Callable

__all__ = ["Abandoned", "checkpoint", "paced"]

_PACER: contextvars.ContextVar[Callable[[], None] | None] = contextvars.ContextVar("lowgmap_pacer", default=None)


class Abandoned(Exception):
    """A pacer stopped the computation: its result is no longer wanted.

    Deliberately not a subclass of ValueError, ArithmeticError or RuntimeError: the models' own failures
    (:data:`lowgmap.physics.chart.lines.MODEL_ERRORS`) are caught and turned into "not available" along
    the way, and an abandoned computation must stop, not go on with a gap.
    """


def checkpoint() -> None:
    """A place where a long computation may be paused or abandoned by its caller's pacer (see module)."""
    pacer = _PACER.get()
    if pacer is not None:
        pacer()


@contextlib.contextmanager
def paced(pacer: Callable[[], None] | None):
    """Call ``pacer()`` at every :func:`checkpoint` reached inside the ``with`` block (None: no pacing)."""
    token = _PACER.set(pacer)
    try:
        yield
    finally:
        _PACER.reset(token)
