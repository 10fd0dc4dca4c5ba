"""The ``lowgmap`` command line.

Every command that prints data accepts ``--json`` for scripting. Exit codes: 0 success; 2 the
user's input is wrong (every problem is printed in one line each, naming the field, option or path:
an :class:`lowgmap.physics.validate.InputError`, a file that cannot be read or written); 1 a defect of
lowgmap (any other exception: a short message asks for a report, ``--debug`` shows the traceback);
130 interrupted (Ctrl+C); output cut short by a closed pipe (``lowgmap ... | head``) ends quietly
with 141 (128 + SIGPIPE, as a shell reports it). No traceback is printed without ``--debug``.

Commands are listed in :data:`COMMANDS` (name, help line, module). Each command lives in a module of
its own under ``lowgmap.app.cli`` with two functions, ``add_arguments(parser)`` and ``run(args) -> int``,
and that module is imported only when its command runs (or its ``--help`` is asked for). So
``lowgmap --version`` and ``lowgmap --help`` load no numerical, units or plotting library.
"""
from __future__ import annotations

import argparse
import contextlib
import importlib
import os
import sys
from dataclasses import dataclass

from lowgmap.app import CAUTION, __version__
from lowgmap.app.cli.common import EXIT_FAIL, EXIT_INVALID, EXIT_OK

__all__ = ["main", "build_parser", "Command", "COMMANDS", "GRAVITY_COMMANDS", "CliError", "EXIT_OK", "EXIT_FAIL", "EXIT_INVALID",
           "EXIT_BROKEN_PIPE", "EXIT_INTERRUPTED"]

#: Exit code when stdout was closed by the reader (128 + SIGPIPE).
EXIT_BROKEN_PIPE = 141
#: Exit code after Ctrl+C (128 + SIGINT).
EXIT_INTERRUPTED = 130


def __getattr__(name):                     # PEP 562: CliError is made on first use (it needs the physics)
    if name == "CliError":
        from lowgmap.app.cli import common

        return common.CliError
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

DESCRIPTION = "Regime charts and margins for bubbly liquid flow in low-gravity conduits."


@dataclass(frozen=True)
class Command:
    """One command: its name, its help line, and the module under ``lowgmap.app.cli`` that runs it.

    ``case``: the command takes a case file as its first argument; ``json``: it has ``--json``.
    """

    name: str
    help: str
    module: str
    case: bool = True
    json: bool = True

    @property
    def module_name(self) -> str:
        return f"{__name__}.{self.module}"


#: Every command, in the order ``lowgmap --help`` lists them.
COMMANDS: tuple[Command, ...] = (
    Command("check", "validate a case file; exit 0 when valid, 2 with every problem when not", "check"),
    Command("fluids", "list the fluid names and property sources", "fluids", case=False),
    Command("models", "every boundary model: family, regimes, constants (default, range, source), validity, "
                      "citation", "models", case=False),
    Command("section", "geometry of the case's cross-section, Concus–Finn per corner, Bond number", "section"),
    Command("serve", "start the browser dashboard (default: a bundled sample case)", "serve", case=False,
            json=False),
    Command("chart", "draw the regime chart of a case (PNG, SVG or PDF, with title block)", "chart"),
    Command("report", "review pack (PDF or HTML): verdicts, chart, margins, inputs, models and sources, test "
                      "points, revision history", "report"),
    Command("margin", "margins of the operating point to every boundary: axis factors, log distance, symmetric ±m "
                      "margin and the limiting boundary", "margin"),
    Command("robust", "the point of a regime with the largest symmetric margin", "robust"),
    Command("uncertainty", "Monte Carlo over the case's uncertainties: probability of staying in the intended regime, "
                           "margin distribution, sensitivities", "uncertainty"),
    Command("compare", "test points against the chart: validity per point (Bond number, low-g time), confusion "
                       "matrix, agreement, disagreeing points", "compare"),
    Command("calibrate", "fit boundary-model constants to test points (--fit), or fit an empirical power-law boundary "
                         "between two observed regimes (--empirical); -o writes the next case revision", "calibrate"),
    Command("sweep", "sweep case inputs over ranges: regime, symmetric margin and limiting line per design", "sweep"),
    Command("design", "inverse design: the inputs that maximise the worst-case margin of an envelope", "design"),
    Command("corner", "corner meniscus numbers: Concus–Finn, area factor, flow resistance", "corner", case=False),
    Command("limit", "open-channel flow-rate limit (gas ingestion) vs length, and surface shape", "limit"),
    Command("samples", "list the bundled sample files (invented scenarios), or copy them into a folder", "samples",
            case=False),
    Command("cache", "where the persistent table cache is and how big it is; --clear empties it", "cache",
            case=False),
)

_BY_NAME = {c.name: c for c in COMMANDS}

#: Commands that compute from a case and take ``--gravity`` and ``--orientation`` (``check`` validates the
#: file as written; ``calibrate`` writes the next revision of the file, so it computes with the file's values).
GRAVITY_COMMANDS = ("section", "chart", "report", "margin", "robust", "uncertainty", "compare", "sweep", "design",
                    "limit")


def build_parser(command: str | None = None, *, every: bool = False) -> argparse.ArgumentParser:
    """The argument parser: every command with its help line; the options of ``command`` (or of all
    commands with ``every``), which imports the modules concerned.
    """
    p = argparse.ArgumentParser(prog="lowgmap", description=DESCRIPTION, epilog=CAUTION)
    p.add_argument("--version", action="version", version=f"lowgmap {__version__}")
    p.add_argument("--debug", action="store_true",
                   help="on an internal error, print the traceback (may also follow the command)")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    for c in COMMANDS:
        sp = sub.add_parser(c.name, help=c.help, description=c.help, epilog=CAUTION)
        if every or c.name == command:
            _add_arguments(sp, c)
    return p


def _add_arguments(sp: argparse.ArgumentParser, c: Command) -> None:
    if c.case:
        sp.add_argument("case", metavar="CASE", help="case file (.toml)")
    if c.json:
        sp.add_argument("--json", action="store_true", help="print JSON for scripting")
    if c.name in GRAVITY_COMMANDS:
        sp.add_argument("--gravity", metavar="G",
                        help="residual acceleration instead of the case's: a value with units (\"1 g0\", "
                             "\"9.81 m/s^2\", \"1e-6 g0\") or a named level (\"ground\", \"lunar surface\", "
                             "\"Martian surface\")")
        sp.add_argument("--orientation", metavar="O",
                        help="conduit orientation instead of the case's: \"vertical upward flow\", \"vertical "
                             "downward flow\", \"horizontal\", \"unspecified\" or an angle above the horizontal "
                             "(\"30 deg\", positive for upward flow)")
        sp.add_argument("--exact", action="store_true",
                        help="use the full solves (open-channel Stokes and critical-flow solutions) instead of "
                             "their surrogate tables (measured errors: `lowgmap models`); slower")
    importlib.import_module(c.module_name).add_arguments(sp)


def _command_in(argv: list[str]) -> str | None:
    """The command named on the command line (the first word that is not an option), if any."""
    for i, word in enumerate(argv):
        if word == "--":
            return argv[i + 1] if i + 1 < len(argv) and argv[i + 1] in _BY_NAME else None
        if not word.startswith("-"):
            return word if word in _BY_NAME else None
    return None


def main(argv=None) -> int:
    """Run the command line with ``argv`` (default ``sys.argv[1:]``); return the exit code.

    ``--version`` and ``--help`` raise :class:`SystemExit` (argparse), as usual. ``--debug`` may
    stand anywhere before a ``--``.
    """
    argv = sys.argv[1:] if argv is None else list(argv)
    debug, argv = _debug_flag(argv)
    try:
        try:
            return _run(argv, debug)
        finally:
            sys.stdout.flush()
    except BrokenPipeError:
        _stdout_to_devnull()
        return EXIT_BROKEN_PIPE


def _debug_flag(argv: list[str]) -> tuple[bool, list[str]]:
    """(``--debug`` given, the other words): the flag is taken from anywhere before ``--``."""
    end = argv.index("--") if "--" in argv else len(argv)
    debug = "--debug" in argv[:end]
    return debug, [w for i, w in enumerate(argv) if i >= end or w != "--debug"]


def _run(argv: list[str], debug: bool = False) -> int:
    name = _command_in(argv) or ""
    try:
        parser = build_parser(name or None)
        args = parser.parse_args(argv)
        if args.command is None:
            parser.print_help()
            return EXIT_INVALID
        name = args.command
        module = importlib.import_module(_BY_NAME[args.command].module_name)
        gravity, orientation = getattr(args, "gravity", None), getattr(args, "orientation", None)
        with contextlib.ExitStack() as stack:
            if getattr(args, "exact", False):
                from lowgmap.physics.surrogates import exact

                stack.enter_context(exact())
            if gravity is not None or orientation is not None:
                from lowgmap.app.cli.common import case_overrides

                stack.enter_context(case_overrides(gravity, orientation))
            return int(module.run(args) or 0)
    except BrokenPipeError:
        raise
    except KeyboardInterrupt:
        print(f"\n{'lowgmap ' + name if name else 'lowgmap'}: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:
        return _report_error(name, exc, debug)


def _report_error(command: str, exc: BaseException, debug: bool) -> int:
    """Print the error of a command; return its exit code (2 the user's input, 1 a defect)."""
    import traceback

    where = f"lowgmap {command}" if command else "lowgmap"
    if debug:
        traceback.print_exception(exc, file=sys.stderr)
    kind = _error_kind(exc)
    if kind == "problems":
        print(f"{exc.source}: {len(exc.problems)} problem(s):", file=sys.stderr)
        for pr in exc.problems:
            print(f"  - {pr}", file=sys.stderr)
        return EXIT_INVALID
    if kind == "input":
        print(f"{where}: {exc}", file=sys.stderr)
        return EXIT_INVALID
    if kind == "os":
        print(f"{where}: {_os_message(exc)}", file=sys.stderr)
        return EXIT_INVALID
    text = " ".join(str(exc).split())
    if len(text) > 300:
        text = text[:299] + "…"
    detail = f"{type(exc).__name__}: {text}" if text else type(exc).__name__
    print(f"{where}: internal error ({detail}); please report it with the command line and the case file"
          + ("" if debug else "; run with --debug for the details"), file=sys.stderr)
    return EXIT_FAIL


def _error_kind(exc: BaseException) -> str:
    """"problems" (an input file's problems), "input" (the user's input), "os" (a file or the system), "defect"."""
    try:
        from lowgmap.app.files.problems import CaseFileError
        from lowgmap.physics.validate import InputError
    except Exception:                                     # pragma: no cover - a broken installation
        return "os" if isinstance(exc, OSError) else "defect"
    if isinstance(exc, CaseFileError):
        return "problems"
    if isinstance(exc, InputError):
        return "input"
    if isinstance(exc, OSError):
        return "os"
    return "defect"


def _os_message(exc: OSError) -> str:
    """One line for an operating-system error: the path (when known) and what the system said."""
    what = exc.strerror or str(exc) or type(exc).__name__
    if exc.filename is not None:
        path = f"{exc.filename}" + (f" -> {exc.filename2}" if exc.filename2 is not None else "")
        return f"{path}: {what}"
    return what


def _stdout_to_devnull() -> None:
    """Point stdout at the null device, so that the flush at exit does not fail a second time."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        try:
            os.dup2(devnull, sys.stdout.fileno())
        finally:
            os.close(devnull)
    except (OSError, ValueError, AttributeError):  # stdout is not a file (e.g. captured by a test)
        pass
