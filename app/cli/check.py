"""`lowgmap check`: validate a case file; exit 0 when valid, 2 with every problem when not.

"Valid" means what the computing commands need: the file loads (every key, unit, bound, model name,
constant and band, :func:`lowgmap.app.files.casefile.load_case`), its test-point files exist, and a stated
intended regime is a regime of the case's chart (built as ``margin``, ``chart`` and the others build it,
:meth:`lowgmap.physics.chart.composition.Chart.build`; only then). The notes say how a
``[[models]]`` list combines with the section's default models (which defaults it keeps, or which
``models_replace_defaults = true`` leaves out and how to keep them) and what a command will need that the
file does not give (an operating point).
"""
from __future__ import annotations

import sys

from lowgmap.app.cli.common import EXIT_INVALID, EXIT_OK, clean, emit, json_text, load_case_file

__all__ = ["add_arguments", "run", "chart_problems", "model_notes"]


def add_arguments(parser) -> None:
    """``check`` takes only the case file and ``--json``."""


def _problem_json(p) -> dict:
    return {"path": p.path, "line": p.line, "message": p.message, "value": _value(p.value)}


def _print_invalid(args, problems, notes=()) -> int:
    if args.json:
        print(json_text(clean({"valid": False, "file": args.case, "problems": [_problem_json(p) for p in problems],
                               "notes": list(notes)})))
    else:
        print(f"{args.case}: INVALID, {len(problems)} problem(s):", file=sys.stderr)
        for p in problems:
            print(f"  - {p}", file=sys.stderr)
    return EXIT_INVALID


def chart_problems(doc) -> list:
    """Problems the computing commands would meet after the file loads: the intended regime the file states
    is not a regime of the case's chart (or the chart does not build). A list of
    :class:`lowgmap.app.files.problems.Problem`.

    The chart is built only when the file states an intended regime (the one check of the file that
    needs the chart's regimes); otherwise ``check`` stays as light as loading the file.
    """
    intended = doc.case.intended_regime or doc.settings.intended_regime or None
    if intended is None:
        return []
    from lowgmap.physics.chart.composition import Chart

    from lowgmap.app.files.problems import ProblemCollector, line_index

    col = ProblemCollector(line_index(doc.text) if doc.text else {}, source=str(doc.path or "case"))
    chart = col.run("(chart)", lambda: Chart.build(doc.case))
    if chart is not None:
        if chart.regime_names and intended not in chart.regime_names:
            col.add("chart.intended_regime", f"{intended!r} is not a regime of this chart; its regimes: "
                                             f"{', '.join(chart.regime_names)}", intended)
    return list(col.problems)


def model_notes(doc) -> list[str]:
    """How the file's [[models]] combine with the section's default models, in words (empty without a list)."""
    data = doc.data.unwrap() if hasattr(doc.data, "unwrap") else dict(doc.data)
    listed = [m.get("name") for m in data.get("models", []) or [] if isinstance(m, dict)]
    if not listed:
        return []
    from lowgmap.physics.chart.composition import default_models

    defaults = list(default_models(doc.case))
    if data.get("models_replace_defaults", False):
        dropped = [n for n in defaults if n not in listed]
        if not dropped:
            return ["models_replace_defaults = true: the listed [[models]] include every default model of this "
                    "section, so none is left out."]
        return [f"models_replace_defaults = true: the chart uses only the {len(listed)} listed model(s); the default "
                f"model(s) of this section left out: {', '.join(dropped)}. To keep them, list them under [[models]] "
                f"or remove models_replace_defaults (the listed models are then merged onto the defaults)."]
    kept = [n for n in defaults if n not in listed]
    return ["The [[models]] list is merged onto the section's default models: "
            + (f"the defaults it does not name are kept ({', '.join(kept)})." if kept else
               "it names every default model.")
            + " Write models_replace_defaults = true to use only the listed models."]


def _command_notes(doc) -> list[str]:
    if doc.case.operating_point is None:
        return ["No [operating_point]: margin, robust and uncertainty need --ql and --qg."]
    return []


def run(args) -> int:
    from lowgmap.app.files.problems import CaseFileError

    try:
        doc = load_case_file(args.case)
    except CaseFileError as exc:
        return _print_invalid(args, exc.problems)
    case = doc.case
    notes = model_notes(doc) + _command_notes(doc)
    problems = chart_problems(doc)
    if problems:
        return _print_invalid(args, problems, notes)
    missing = [str(f) for f in doc.test_point_files if not f.exists()]
    data = {"valid": not missing, "file": args.case, "title": case.title, "revision": case.revision,
            "invented": doc.invented, "missing_test_point_files": missing, "notes": notes,
            "residual_acceleration_m_s2": case.g, "orientation": case.orientation.describe()}
    text = f"{args.case}: valid - {case.title} (revision {case.revision})"
    if missing:
        text = f"{args.case}: INVALID - test-point file(s) not found: {', '.join(missing)}"
    text = "\n".join([text] + [f"note: {n}" for n in notes])
    emit(args, data, text)
    return EXIT_INVALID if missing else EXIT_OK


def _value(value):
    """A problem's value for JSON: numbers and short texts as they are, anything else as short text."""
    from lowgmap.app.files.problems import MAX_VALUE_CHARS, short_value

    if isinstance(value, (int, float, bool, type(None))) or (isinstance(value, str) and len(value) <= MAX_VALUE_CHARS):
        return value
    return short_value(value)
