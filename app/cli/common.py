"""What every command of the ``lowgmap`` command line shares: exit codes, the input error, output
checks and safe writes, the limits of what a user can ask for, and run-time estimates.

Standard library only at import: the command line imports this module at start, before it knows
which command runs (numbers from numpy are turned into plain JSON values without importing numpy
here). :class:`CliError` is an :class:`lowgmap.physics.validate.InputError`; it is made on first use
(``common.CliError``), so that ``lowgmap --version`` and ``lowgmap --help`` load no physics.

Output files
------------
Every command that writes a file checks the path *before* it computes anything
(:func:`check_output`): the suffix gives a format the command writes, the path is not a folder, no
part of the folder path is a file, the folder (made when missing) can be written to, the path is
none of the command's input files nor another output of the same run, and an existing file is
replaced only with ``--force``. The file is then written atomically (:func:`write_output`, through
:func:`lowgmap.app.files.atomic.write_atomic`): flushed to disk, renamed into place, no temporary
file left behind.
"""
from __future__ import annotations

import json
import math
import os
from contextlib import contextmanager
from contextvars import ContextVar
from pathlib import Path

__all__ = ["EXIT_OK", "EXIT_FAIL", "EXIT_INVALID", "CliError", "emit",  # noqa: F822 (CliError: __getattr__) "clean", "json_default", "json_text",
           "load_case_file", "case_overrides", "check_output", "write_output", "input_errors", "check_count", "estimate_text",
           "format_seconds", "MAX_SAMPLES", "MAX_CHART_DRAWS", "MAX_WORKERS", "SCHEDULER_TIMEOUT"]

#: Exit codes: success, unexpected failure (a defect of lowgmap), invalid input (every problem printed).
EXIT_OK, EXIT_FAIL, EXIT_INVALID = 0, 1, 2

#: Most Monte Carlo samples of ``lowgmap uncertainty --samples``.
MAX_SAMPLES = 10_000_000
#: Most property/geometry draws of ``lowgmap uncertainty --chart-draws`` (each rebuilds the chart's lines).
MAX_CHART_DRAWS = 100_000
#: Most worker processes of ``--workers``.
MAX_WORKERS = 256
#: Seconds to wait for a dask scheduler (``--scheduler``) to answer.
SCHEDULER_TIMEOUT = 10.0

_CLI_ERROR = None


def _cli_error_class():
    """:class:`CliError`, made on first use (it needs the physics' :class:`InputError`)."""
    global _CLI_ERROR
    if _CLI_ERROR is None:
        from lowgmap.physics.validate import InputError

        class CliError(InputError):
            """Bad input from the command line (an option, a path, a combination); printed without a
            traceback, exit code 2. An :class:`lowgmap.physics.validate.InputError`."""

        CliError.__module__ = __name__
        CliError.__qualname__ = "CliError"
        _CLI_ERROR = CliError
    return _CLI_ERROR


def __getattr__(name):                     # PEP 562: ``common.CliError`` and ``from ... import CliError``
    if name == "CliError":
        return _cli_error_class()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def json_default(obj):
    """JSON value of numpy scalars and arrays and of paths (for :func:`json.dumps`)."""
    if isinstance(obj, Path):
        return str(obj)
    if type(obj).__module__ == "numpy":
        if hasattr(obj, "tolist"):          # numpy scalars and arrays
            return obj.tolist()
    raise TypeError(f"not JSON serialisable: {type(obj).__name__}")


def json_text(data) -> str:
    """Strict JSON (no NaN) of ``data``, indented for reading."""
    return json.dumps(data, indent=2, default=json_default, allow_nan=False)


def emit(args, data: dict, text: str) -> None:
    """Print ``data`` as JSON when the command was given ``--json``, else the text for a person."""
    if getattr(args, "json", False):
        print(json_text(data))
    else:
        print(text)


def clean(obj):
    """Replace NaN/inf by None (recursively in dicts, lists, tuples) so the JSON stays strict.

    >>> clean({"a": float("nan"), "b": [1.0, float("inf")], "c": "x"})
    {'a': None, 'b': [1.0, None], 'c': 'x'}
    """
    if isinstance(obj, dict):
        return {k: clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [clean(v) for v in obj]
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


#: ``--gravity`` and ``--orientation`` of the running command (None: the case file's own values).
_CASE_OVERRIDES: ContextVar = ContextVar("lowgmap_case_overrides", default=None)


@contextmanager
def case_overrides(gravity: str | None = None, orientation: str | None = None):
    """While the block runs, :func:`load_case_file` replaces the case's residual acceleration and/or
    orientation by these texts (``--gravity``, ``--orientation``), checked here first so a bad
    option is reported under its own name (exit 2)."""
    from lowgmap.app.files.casefile import check_bounds
    from lowgmap.app.files.units import parse_gravity, parse_orientation

    if gravity is not None:
        check_bounds("acceleration", parse_gravity(gravity, "--gravity"), "--gravity")
    if orientation is not None:
        parse_orientation(orientation, "--orientation")
    given = {k: v for k, v in (("residual_acceleration", gravity), ("orientation", orientation)) if v is not None}
    token = _CASE_OVERRIDES.set(given or None)
    try:
        yield
    finally:
        _CASE_OVERRIDES.reset(token)


def load_case_file(path: str):
    """Load a case file (:func:`lowgmap.app.files.casefile.load_case`); problems end the command with exit 2.

    Inside :func:`case_overrides` (the ``--gravity``/``--orientation`` options of the computing commands)
    the case's conduit values are replaced in the document (:func:`lowgmap.app.files.casefile.with_conduit`),
    so every output of the command shows the values it used.
    """
    from lowgmap.app.files.casefile import load_case, with_conduit

    doc = load_case(path)
    given = _CASE_OVERRIDES.get()
    if given:
        doc = with_conduit(doc, **given)
    return doc


# --------------------------------------------------------------------------------------------- counts
def check_count(option: str, value, low: int, high: int, *, hint: str = "") -> int:
    """``value`` as an int within [low, high]; :class:`CliError` naming ``option`` and the range otherwise.

    >>> check_count("--samples", 400, 2, 10_000_000)
    400
    """
    if isinstance(value, bool) or not isinstance(value, int):
        raise _cli_error_class()(f"{option} must be a whole number, got {value!r}")
    if not low <= value <= high:
        raise _cli_error_class()(f"{option} must be within [{low:,}, {high:,}], got {value:,}"
                                 + (f"; {hint}" if hint else ""))
    return value


@contextmanager
def input_errors(what: str = ""):
    """Turn the :class:`ValueError`/:class:`TypeError` of a physics call whose documented errors mean
    "this input is wrong" into a :class:`CliError` (exit 2, the message kept).

    Use it around one call at a time, for calls that the command line cannot check fully beforehand
    (e.g. a fit that finds no usable test point). Other exceptions pass unchanged: they are defects.
    """
    from lowgmap.physics.validate import InputError

    try:
        yield
    except InputError:
        raise
    except (ValueError, TypeError) as exc:
        raise _cli_error_class()(f"{what}: {exc}" if what else str(exc)) from exc


# --------------------------------------------------------------------------------------------- outputs
def check_output(path, *, option: str, formats, force: bool = False, inputs=(), outputs=(),
                 formats_text: str | None = None) -> Path:
    """Check an output path before anything is computed; return it as a :class:`~pathlib.Path`.

    Parameters
    ----------
    path : str or path-like   the file to write
    option : str              the option that named it (``-o``, ``--plot``), for messages
    formats : iterable of str suffixes the command writes (``".png"``, ``".csv"``); the message lists them
    force : bool              replace an existing file (``--force``)
    inputs : iterable         the command's input files: the output may not be one of them
    outputs : iterable        the run's other output files: the output may not be one of them
    formats_text : str, optional  the formats as messages name them (default: every suffix)

    Raises
    ------
    CliError
        unknown suffix, a folder, a path under a file, a folder that cannot be written or made, an
        input file, a second output of the same run, or an existing file without ``force``.
    """
    err = _cli_error_class()
    formats = [f.lower() for f in formats]
    allowed = formats_text or _suffixes(formats)
    p = Path(path)
    shown = str(path)
    if not shown or shown.endswith(("/", os.sep)) or p.name in ("", ".", ".."):
        raise err(f"{option} needs a file name ending in {allowed}, got {shown!r}")
    if p.suffix.lower() not in formats:
        raise err(f"{option} must end in {allowed}, got {shown!r}")
    if p.is_dir():
        raise err(f"{option} {shown} is a folder; give a file name ending in {allowed}")
    if p.exists() and not p.is_file():
        raise err(f"{option} {shown} exists and is not a regular file (a device, pipe or socket); "
                  f"choose another {option} path")
    for other, kind in [(q, "an input") for q in inputs if q] + [(q, "another output") for q in outputs if q]:
        if _same_file(p, Path(other)):
            raise err(f"{option} {shown} is also {kind} of this command ({other}); write to another file")
    folder = p.parent if str(p.parent) else Path(".")
    probe = folder
    while not probe.exists():
        if probe.parent == probe:
            break
        probe = probe.parent
    if probe.exists() and not probe.is_dir():
        raise err(f"{option} {shown}: {probe} is a file, not a folder")
    if not os.access(probe, os.W_OK | os.X_OK):
        where = "folder" if probe == folder else "folder (to make the missing folders in it)"
        raise err(f"{option} {shown}: cannot write into the {where} {probe} (permission denied)")
    if p.exists() and not force:
        raise err(f"{shown} exists; add --force to replace it (or choose another {option} path)")
    return p


def write_output(path, data, *, force: bool = False, option: str = "-o") -> Path:
    """Write ``data`` (bytes or text) to ``path`` atomically; an existing file only with ``force``.

    A file that appeared after :func:`check_output` is not replaced without ``force`` either.
    Operating-system errors (disk full, permission) become a :class:`CliError` naming the path.
    """
    from lowgmap.app.files.atomic import write_atomic

    err = _cli_error_class()
    try:
        return write_atomic(path, data, overwrite=force)
    except FileExistsError:
        raise err(f"{path} exists; add --force to replace it (or choose another {option} path)") from None
    except OSError as exc:
        raise err(f"cannot write {option} {path}: {exc.strerror or exc}") from None


def _suffixes(formats) -> str:
    f = list(formats)
    return f[0] if len(f) == 1 else ", ".join(f[:-1]) + " or " + f[-1]


def _same_file(a: Path, b: Path) -> bool:
    try:
        if a.exists() and b.exists():
            return os.path.samefile(a, b)
        return a.resolve() == b.resolve()
    except OSError:
        return False


# --------------------------------------------------------------------------------------------- run time
def format_seconds(t: float) -> str:
    """A duration as a person reads it.

    >>> format_seconds(0.04), format_seconds(12.3), format_seconds(600), format_seconds(9000)
    ('< 1 s', '12 s', '10 min', '2.5 h')
    """
    if t < 1:
        return "< 1 s"
    if t < 90:
        return f"{t:.0f} s"
    if t < 5400:
        return f"{t / 60:.2g} min"
    return f"{t / 3600:.2g} h"


def estimate_text(count: int, what: str, seconds: float) -> str:
    """The line printed before a long run.

    >>> estimate_text(12000, "designs", 95.0), estimate_text(3, "designs", 0.2)
    ('about 12,000 designs, estimated ~1.6 min', 'about 3 designs, estimated under 1 s')
    """
    when = "under 1 s" if seconds < 1 else "~" + format_seconds(seconds)
    return f"about {count:,} {what}, estimated {when}"
