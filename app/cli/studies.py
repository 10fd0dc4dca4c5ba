"""What `lowgmap sweep` and `lowgmap design` share: progress on stderr and values in display units."""
from __future__ import annotations

import sys
import time

__all__ = ["Progress", "format_value", "plain"]


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
