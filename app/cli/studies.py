"""What `lowgmap sweep` and `lowgmap design` share: progress and the run-time estimate on stderr,
and values in display units."""
from __future__ import annotations

import sys
import time

__all__ = ["Progress", "format_value", "plain", "pilot_seconds", "print_estimate"]


def pilot_seconds(case, designs, spec_kwargs: dict) -> tuple[float, float]:
    """(seconds for the first design, seconds for each further one), timed on the first two designs.

    The first includes what every later design of its kind reuses (the chart of its structure,
    property tables); a design that cannot be evaluated is timed all the same (its row would hold
    the message). ``spec_kwargs`` are the keyword arguments of
    :class:`lowgmap.physics.studies.sweep.SweepSpec` the run uses.
    """
    from lowgmap.physics.studies.sweep import DesignEvaluator, SweepSpec

    ev = DesignEvaluator(SweepSpec(case, **spec_kwargs))
    t0 = time.perf_counter()
    ev.evaluate(designs[0])
    first = time.perf_counter() - t0
    if len(designs) < 2:
        return first, first
    t1 = time.perf_counter()
    ev.evaluate(designs[1])
    return first, time.perf_counter() - t1


def print_estimate(count: int, what: str, first: float, each: float, parallel: int = 1, stream=None) -> float:
    """Print "about N <what>, estimated ~T" on stderr; return T [s]."""
    from lowgmap.app.cli.common import estimate_text

    seconds = first + each * max(count - 1, 0) / max(parallel, 1)
    print(estimate_text(count, what, seconds), file=stream or sys.stderr, flush=True)
    return seconds


def format_value(v, kind: str, unit: str) -> str:
    """An SI value of a study variable in its display unit: (0.004, "length", "mm") -> '4 mm'.

    >>> format_value(0.004, "length", "mm"), format_value("water", "name", "")
    ('4 mm', 'water')
    """
    from lowgmap.app.files.studyfiles import to_display

    if kind == "name":
        return str(v)
    return f"{float(to_display(float(v), kind, unit)):.4g} {unit}".rstrip()


def plain(v):
    """A numpy scalar as the Python number it holds (for JSON); other values unchanged."""
    if type(v).__module__ == "numpy" and hasattr(v, "item"):
        return v.item()
    return v


class Progress:
    """Progress on stderr: a rewritten line on a terminal, ten lines otherwise."""

    def __init__(self, what: str, stream=None):
        self.what = what
        self.stream = stream or sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.last = -1
        self.t0 = time.perf_counter()

    def __call__(self, done: int, total: int):
        pct = int(100 * done / max(total, 1))
        if self.tty:
            self.stream.write(f"\r{self.what}: {done}/{total} ({pct} %)")
            if done >= total:
                self.stream.write("\n")
            self.stream.flush()
        elif pct // 10 != self.last // 10 or done >= total:
            if done >= total and self.last >= 100:
                return
            self.last = pct
            self.stream.write(f"{self.what}: {done}/{total} ({pct} %)\n")
