"""The ``lowgmap`` command line.

Every command that prints data accepts ``--json`` for scripting. Exit codes: 0 success, 2 invalid
input (every problem is printed), 1 unexpected failure.
"""
from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

from lowgmap.app import CAUTION, __version__

EXIT_OK, EXIT_FAIL, EXIT_INVALID = 0, 1, 2


class CliError(Exception):
    """Bad input from the command line; printed without a traceback, exit code 2."""


def _emit(args, data: dict, text: str) -> None:
    if getattr(args, "json", False):
        print(json.dumps(data, indent=2, default=_json_default, allow_nan=False))
    else:
        print(text)


def _json_default(obj):
    import numpy as np

    if isinstance(obj, (np.floating, np.integer)):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, Path):
        return str(obj)
    raise TypeError(f"not JSON serialisable: {type(obj).__name__}")


def _clean(obj):
    """Replace NaN/inf by None so the JSON stays strict."""
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def _load(path: str):
    from lowgmap.app.files.casefile import load_case

    return load_case(path)


# ----------------------------------------------------------------------------- commands
def cmd_check(args) -> int:
    from lowgmap.app.files.casefile import CaseFileError

    try:
        doc = _load(args.case)
    except CaseFileError as exc:
        if args.json:
            print(json.dumps({"valid": False, "file": args.case, "problems": [
                {"path": p.path, "line": p.line, "message": p.message,
                 "value": p.value if isinstance(p.value, (str, int, float, bool, type(None))) else str(p.value)}
                for p in exc.problems]}, indent=2))
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
    _emit(args, data, text)
    return EXIT_INVALID if missing else EXIT_OK


def cmd_fluids(args) -> int:
    from lowgmap.physics.properties import fluids

    names = fluids.fluid_names()
    data = {"sources": names, "user": "any liquid, with rho_l, mu_l and sigma given in [fluid.overrides]"}
    lines = ["Fluids lowgmap knows (use the name in [fluid] liquid/gas):"]
    for source, items in names.items():
        lines.append(f"\n{source} ({len(items)}):")
        lines.append("  " + ", ".join(items))
    lines.append("\nuser-defined: set liquid_source = \"user\" and give rho_l, mu_l, sigma (and rho_g, mu_g) "
                 "in [fluid.overrides].")
    _emit(args, data, "\n".join(lines))
    return EXIT_OK


def cmd_section(args) -> int:
    from lowgmap.physics.chart.summary import section_report

    doc = _load(args.case)
    rep = section_report(doc.case)
    _emit(args, _clean(rep), _format_section(rep))
    return EXIT_OK


def _format_section(rep: dict) -> str:
    s = rep["section"]
    lines = [f"Section: {s['kind']}"]
    for key, value in s.items():
        if key in ("kind", "corners") or isinstance(value, (list, dict)):
            continue
        lines.append(f"  {key:<28} {value:.6g}" if isinstance(value, float) else f"  {key:<28} {value}")
    lines.append(f"Corners (Concus–Finn at contact angle {rep['contact_angle_deg']:.3g} deg):")
    if not rep["corners"]:
        lines.append("  none")
    for c in rep["corners"]:
        lines.append(f"  corner {c['index']}: half-angle {c['half_angle_deg']:.4g} deg -> "
                     f"{'wicks' if c['wicks'] else 'does not wick'} (critical contact angle "
                     f"{c['critical_contact_angle_deg']:.4g} deg)")
    b = rep["gravity"]
    lines.append(f"Residual acceleration {b['g_m_s2']:.4g} m/s^2 ({b['g_over_g0']:.3g} g0); "
                 f"Bond number on {b['length_name']} {b['length_m'] * 1e3:.4g} mm: {b['bond_number']:.4g}")
    lines.append(f"  {b['verdict']}")
    for n in rep.get("notes", []):
        lines.append(f"Note: {n}")
    return "\n".join(lines)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="lowgmap",
        description="Regime charts and margins for bubbly liquid flow in low-gravity conduits.",
        epilog=CAUTION)
    p.add_argument("--version", action="version", version=f"lowgmap {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    def add(name, func, help_text, case=True, json_flag=True):
        sp = sub.add_parser(name, help=help_text, description=help_text, epilog=CAUTION)
        if case:
            sp.add_argument("case", metavar="CASE", help="case file (.toml)")
        if json_flag:
            sp.add_argument("--json", action="store_true", help="print JSON for scripting")
        sp.set_defaults(func=func)
        return sp

    add("check", cmd_check, "validate a case file; exit 0 when valid, 2 with every problem when not")
    add("fluids", cmd_fluids, "list the fluid names and property sources", case=False)
    add("section", cmd_section, "geometry of the case's cross-section, Concus–Finn per corner, Bond number")
    for extra in _EXTRA_COMMANDS:
        extra(sub, add)
    return p


#: Later modules append functions ``f(subparsers, add)`` that register more commands.
_EXTRA_COMMANDS: list = []


def main(argv=None) -> int:
    from lowgmap.app.files.casefile import CaseFileError
    from lowgmap.app.files.units import UnitError

    _register_optional_commands()
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_INVALID
    try:
        return int(args.func(args) or 0)
    except CaseFileError as exc:
        print(f"{exc.source}: {len(exc.problems)} problem(s):", file=sys.stderr)
        for pr in exc.problems:
            print(f"  - {pr}", file=sys.stderr)
        return EXIT_INVALID
    except (CliError, UnitError, ValueError, FileNotFoundError) as exc:
        print(f"lowgmap {args.command}: {exc}", file=sys.stderr)
        return EXIT_INVALID


#: Modules that add sub-commands; each has ``register(subparsers, add)``.
_COMMAND_MODULES = ("lowgmap.app.cli.serve", "lowgmap.app.cli.chart", "lowgmap.app.cli.margin", "lowgmap.app.cli.points", "lowgmap.app.cli.design",
                    "lowgmap.app.cli.corner")


def _register_optional_commands() -> None:
    """Import the command modules (chart, margin, serve, ...) and collect their ``register`` functions."""
    import importlib

    for mod in _COMMAND_MODULES:
        reg = importlib.import_module(mod).register
        if reg not in _EXTRA_COMMANDS:
            _EXTRA_COMMANDS.append(reg)


if __name__ == "__main__":  # pragma: no cover - `python -m lowgmap.app.cli`
    from lowgmap.app.cli import main as _main  # the package module, so its exception classes are the ones raised

    sys.exit(_main())
