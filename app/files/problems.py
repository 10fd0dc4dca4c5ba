"""Every problem of an input file at once: key path, message, value written and line number.

The case-file reader (:mod:`lowgmap.app.files.casefile`) and the study-file readers
(:mod:`lowgmap.app.files.studyfiles`: sweep and goal files) check a whole document before they
fail. Each check files what is wrong with a :class:`ProblemCollector`; at the end
:meth:`ProblemCollector.raise_if_any` raises one :class:`CaseFileError` listing all of them, so an
engineer fixes a file in one pass instead of one error per run.

Key paths are dotted TOML paths with array indices (``section.diameter``, ``variables[1].from``);
:func:`line_index` maps them to the line of the file where they are written, so a problem can name
its line as a text editor shows it.

:class:`CaseFileError` is an :class:`~lowgmap.physics.validate.InputError`: the command line and the
dashboard show its problems and carry on. A value written is quoted up to :data:`MAX_VALUE_CHARS`
characters and at most :data:`MAX_PROBLEMS` problems are listed (then a count of the rest), so a
hostile file cannot make a message larger than the file.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Mapping

from lowgmap.physics.validate import InputError

__all__ = ["Problem", "CaseFileError", "ProblemCollector", "line_index", "short_value", "MAX_PROBLEMS",
           "MAX_VALUE_CHARS"]

#: Problems listed for one file; the rest are counted in a last line.
MAX_PROBLEMS = 100
#: Characters of a written value quoted in a problem.
MAX_VALUE_CHARS = 80
_MAX_MESSAGE_CHARS = 2000


def short_value(value: Any, limit: int = MAX_VALUE_CHARS) -> str:
    """``repr`` of a value as a problem quotes it: at most ``limit`` characters.

    >>> short_value("2 mm"), short_value("x" * 200)[-11:]
    ("'2 mm'", '(200 chars)')
    """
    text = repr(value)
    if len(text) <= limit:
        return text
    size = f" ({len(value)} chars)" if isinstance(value, (str, list, dict)) else ""
    return text[:limit - 1] + "…" + size


@dataclass(frozen=True)
class Problem:
    """One thing wrong in an input file.

    Attributes
    ----------
    path : str        dotted key path (``"section.diameter"``), or ``"(file)"``/``"(syntax)"``
    message : str     what is wrong and what is allowed
    value : object    the value as written, when there is one
    line : int or None   1-based line of the file where the key is written, when known

    Examples
    --------
    >>> str(Problem("section.diameter", "must be > 0", "-2 mm", line=13))
    "line 13: section.diameter: must be > 0 (written: '-2 mm')"
    """

    path: str
    message: str
    value: Any = None
    line: int | None = None

    def __str__(self) -> str:
        where = f"line {self.line}: " if self.line else ""
        written = ""
        if isinstance(self.value, str) and self.value not in self.message:
            written = f" (written: {short_value(self.value)})"
        return f"{where}{self.path}: {self.message}{written}"


class CaseFileError(InputError):
    """An input file (a case file, or a sweep or goal file read against a case) has problems.

    ``problems`` lists all of them (:class:`Problem`); ``source`` names the file. An
    :class:`~lowgmap.physics.validate.InputError` (so also a :class:`ValueError`).
    """

    def __init__(self, problems: list[Problem], source: str = "case"):
        self.problems = problems
        self.source = source
        lines = "\n".join(f"  - {p}" for p in problems)
        super().__init__(f"{source}: {len(problems)} problem(s)\n{lines}")


# --------------------------------------------------------------------------------- line numbers
def line_index(text: str) -> dict[str, int]:
    """Map dotted key paths to the 1-based line where they are written (best effort).

    Tables (``[fluid]``), arrays of tables (``[[models]]`` -> ``models[0]``, ``models[1]``, ...), their
    sub-tables and ``key = value`` lines are indexed; the first occurrence of a path wins.

    Examples
    --------
    >>> text = '[section]\\nkind = "circle"\\n[[models]]\\nname = "a"\\n[[models]]\\nname = "b"\\n'
    >>> idx = line_index('title = "t"\\n' + text)
    >>> idx["section.kind"], idx["models[1]"], idx["models[1].name"]
    (3, 6, 7)
    """
    index: dict[str, int] = {}
    table = ""
    counts: dict[str, int] = {}
    for n, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        m = re.match(r"^\[\[\s*([^\]]+?)\s*\]\]", line)
        if m:
            name = m.group(1)
            i = counts.get(name, 0)
            counts[name] = i + 1
            table = f"{name}[{i}]"
            index.setdefault(table, n)
            continue
        m = re.match(r"^\[\s*([^\]]+?)\s*\]", line)
        if m:
            name = m.group(1)
            # a sub-table of an array of tables: [models.constants] inside [[models]]
            parent = name.split(".")[0]
            if parent in counts and "." in name:
                table = f"{parent}[{counts[parent] - 1}]." + name.split(".", 1)[1]
            else:
                table = name
            index.setdefault(table, n)
            continue
        m = re.match(r'^([A-Za-z0-9_\-"\.]+)\s*=', line)
        if m:
            key = m.group(1).strip('"')
            index.setdefault(f"{table}.{key}" if table else key, n)
    return index


# --------------------------------------------------------------------------------- collector
#: A model error that names a field: "wetting.contact_angle must be ...", "diameter is ...".
_FIELD_MESSAGE = re.compile(r"^(?:[A-Za-z_]+\.)?([A-Za-z_]+)\s+(must|is|has|should)\b")


class ProblemCollector:
    """Collects the problems of one input file, each with its key path and line number.

    Parameters
    ----------
    lines : mapping, optional   key path -> line number (:func:`line_index` of the file's text)
    source : str                file name used in the error raised by :meth:`raise_if_any`

    Examples
    --------
    >>> text = '[conduit]\\nlength = "1 s"\\n'
    >>> col = ProblemCollector(line_index(text), source="tube.toml")
    >>> col.run("conduit.length", lambda: float("1 s"), "1 s") is None
    True
    >>> col.unknown_keys({"length": "1 s", "colour": "red"}, "conduit", {"length"})
    >>> [(p.path, p.line) for p in col.problems]
    [('conduit.length', 2), ('conduit.colour', 1)]
    """

    #: Errors a check may raise that become problems (unit errors are ValueErrors; an overflow while a
    #: written value is converted is that value's problem too).
    CAUGHT: tuple[type[BaseException], ...] = (ValueError, TypeError, ArithmeticError)

    def __init__(self, lines: Mapping[str, int] | None = None, source: str = "case"):
        self.problems: list[Problem] = []
        self.lines = dict(lines or {})
        self.source = source
        self.more = 0

    def __bool__(self) -> bool:
        return bool(self.problems)

    def line_of(self, path: str) -> int | None:
        """Line of ``path``, else of the nearest enclosing key written in the file."""
        line = self.lines.get(path)
        parts = path.split(".")
        while line is None and parts:
            parts.pop()
            line = self.lines.get(".".join(parts))
        return line

    def add(self, path: str, message: str, value: Any = None) -> None:
        """File a problem at ``path`` (its line looked up); past :data:`MAX_PROBLEMS` only counted."""
        if len(self.problems) >= MAX_PROBLEMS:
            self.more += 1
            return
        if len(message) > _MAX_MESSAGE_CHARS:                    # a message quoting a huge value
            message = message[:_MAX_MESSAGE_CHARS - 1] + "…"
        self.problems.append(Problem(path, message, value, self.line_of(path)))

    def run(self, path: str, fn: Callable[[], Any], value: Any = None):
        """Call ``fn``; a ValueError/TypeError/ArithmeticError becomes a problem at ``path`` and None is returned.

        A leading ``"<path>: "`` in the message is dropped. A message that names a field of the table
        at ``path`` ("contact_angle must be ...") is filed under that key when the file has it.
        """
        try:
            return fn()
        except self.CAUGHT as exc:
            msg = str(exc)
            if msg.startswith(path + ": "):
                msg = msg[len(path) + 2:]
            m = _FIELD_MESSAGE.match(msg)
            if m and f"{path}.{m.group(1)}" in self.lines:
                path = f"{path}.{m.group(1)}"
                msg = msg[m.start(2):]
                if isinstance(value, dict):
                    value = value.get(m.group(1), value)
            self.add(path, msg, value)
            return None

    def unknown_keys(self, table: Mapping, path: str, allowed: Iterable[str]) -> None:
        """File every key of ``table`` that is not in ``allowed``."""
        allowed = set(allowed)
        for key in table:
            if key not in allowed:
                self.add(f"{path}.{key}" if path else key,
                         f"unknown key; allowed here: {', '.join(sorted(allowed))}", table[key])

    def raise_if_any(self) -> None:
        """Raise :class:`CaseFileError` with every problem filed, if there is one."""
        if self.problems:
            raise CaseFileError(self.listed(), self.source)

    def listed(self) -> list[Problem]:
        """The problems filed, and a last line counting those past :data:`MAX_PROBLEMS`."""
        if not self.more:
            return list(self.problems)
        return self.problems + [Problem("(file)", f"{self.more} more problem(s) not listed; fix these first")]
