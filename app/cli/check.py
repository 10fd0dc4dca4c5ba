"""`lowgmap check`: validate a case file; exit 0 when valid, 2 with every problem when not."""
from __future__ import annotations

import sys

from lowgmap.app.cli.common import EXIT_INVALID, EXIT_OK, clean, emit, json_text, load_case_file

__all__ = ["add_arguments", "run"]


def add_arguments(parser) -> None:
    """``check`` takes only the case file and ``--json``."""


def run(args) -> int:
    from lowgmap.app.files.problems import CaseFileError

    try:
        doc = load_case_file(args.case)
    except CaseFileError as exc:
        if args.json:
            print(json_text(clean({"valid": False, "file": args.case, "problems": [
                {"path": p.path, "line": p.line, "message": p.message, "value": _value(p.value)}
                for p in exc.problems]})))
        else:
            print(f"{args.case}: INVALID, {len(exc.problems)} problem(s):", file=sys.stderr)
            for p in exc.problems:
                print(f"  - {p}", file=sys.stderr)
        return EXIT_INVALID
    case = doc.case
    missing = [str(f) for f in doc.test_point_files if not f.exists()]
    data = {"valid": not missing, "file": args.case, "title": case.title, "revision": case.revision,
            "invented": doc.invented, "missing_test_point_files": missing}
    text = f"{args.case}: valid - {case.title} (revision {case.revision})"
    if missing:
        text = f"{args.case}: INVALID - test-point file(s) not found: {', '.join(missing)}"
    emit(args, data, text)
    return EXIT_INVALID if missing else EXIT_OK


def _value(value):
    """A problem's value for JSON: numbers and short texts as they are, anything else as short text."""
    from lowgmap.app.files.problems import MAX_VALUE_CHARS, short_value

    if isinstance(value, (int, float, bool, type(None))) or (isinstance(value, str) and len(value) <= MAX_VALUE_CHARS):
        return value
    return short_value(value)
