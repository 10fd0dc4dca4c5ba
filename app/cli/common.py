"""What every command of the ``lowgmap`` command line shares: exit codes, the input error, output.

Standard library only: the command line imports this module at start, before it knows which command
runs (numbers from numpy are turned into plain JSON values without importing numpy here).
"""
from __future__ import annotations

import json
import math
from pathlib import Path

__all__ = ["EXIT_OK", "EXIT_FAIL", "EXIT_INVALID", "CliError", "emit", "clean", "json_default", "json_text",
           "load_case_file"]

#: Exit codes: success, unexpected failure, invalid input (every problem printed).
EXIT_OK, EXIT_FAIL, EXIT_INVALID = 0, 1, 2


class CliError(Exception):
    """Bad input from the command line; printed without a traceback, exit code 2."""


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


def load_case_file(path: str):
    """Load a case file (:func:`lowgmap.app.files.casefile.load_case`); problems end the command with exit 2."""
    from lowgmap.app.files.casefile import load_case

    return load_case(path)

