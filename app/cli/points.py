"""What `lowgmap compare` and `lowgmap calibrate` share: reading the test-point file, mapping observed
labels to chart regimes, and the validity criteria of a test point.
"""
from __future__ import annotations

import argparse
from pathlib import Path

from lowgmap.app.cli import common

__all__ = ["parse_regime_map", "load_points", "criteria_from_args", "add_point_arguments", "folds_value"]


def parse_regime_map(items) -> dict:
    """``["file label=chart regime", ...]`` -> dict (the first '=' splits).

    >>> parse_regime_map(["annular=annular (gas core)", "bubbly = dispersed bubbles"])
    {'annular': 'annular (gas core)', 'bubbly': 'dispersed bubbles'}
    """
    out = {}
    for item in items or ():
        if "=" not in item:
            raise common.CliError(f"--map takes LABEL=REGIME (file label = chart regime name), got {item!r}")
        k, v = item.split("=", 1)
        if not k.strip() or not v.strip():
            raise common.CliError(f"--map takes LABEL=REGIME with both parts, got {item!r}")
        out[k.strip()] = v.strip()
    return out


def load_points(path, doc):
    """Read a test-point file; standard gas units use the case's pressure and temperature."""
    from lowgmap.app.files.testpoints import read_test_points

    p = Path(path)
    if not p.exists():
        raise common.CliError(f"test-point file not found: {str(p)!r}")
    if p.is_dir():
        raise common.CliError(f"test-point file {str(p)!r} is a folder; give the path of a .csv or .xlsx file")
    if not p.is_file():
        raise common.CliError(f"test-point file {str(p)!r} is not a regular file (a pipe or a device); give the path "
                              f"of a .csv or .xlsx file")
    f = doc.case.fluid
    return read_test_points(p, pressure=f.pressure, temperature=f.temperature)


def criteria_from_args(args):
    """:class:`lowgmap.physics.studies.agreement.ValidityCriteria` from the command-line options."""
    from lowgmap.physics.studies.agreement import ValidityCriteria

    from lowgmap.app.files.casefile import check_bounds
    from lowgmap.app.files.units import to_si

    length = None
    if getattr(args, "length", None):
        length = check_bounds("length", to_si(args.length, "length", "--length"), "--length")
    kw = {"observation_length": length}
    for opt in ("bond_max", "safety_factor", "capillary_multiple"):
        v = getattr(args, opt, None)
        if v is not None:
            kw[opt] = v
    try:
        return ValidityCriteria(**kw)
    except ValueError as exc:
        raise common.CliError(str(exc)) from None


def add_point_arguments(sp) -> None:
    """The test-point file and the options of the validity checks and of label mapping."""
    sp.add_argument("points", metavar="POINTS", help="test-point file (.csv or .xlsx, see `Test points` in the README)")
    sp.add_argument("--map", action="append", metavar="LABEL=REGIME",
                    help="rename an observed label to a chart regime (repeatable), e.g. \"annular=annular (gas core)\"")
    sp.add_argument("--length", metavar="LENGTH",
                    help="distance from the inlet to where the regime was observed, e.g. \"0.3 m\" (default: the "
                         "conduit length)")
    sp.add_argument("--safety-factor", type=float, metavar="S",
                    help="available low-g time must be >= S x required time (default 2, common practice)")
    sp.add_argument("--bond-max", type=float, metavar="BO", help="largest Bond number for a valid point (default 1)")
    sp.add_argument("--capillary-multiple", type=float, metavar="K",
                    help="capillary time scales the interface needs to settle (default 1)")


def folds_value(text: str):
    """``--folds``: a whole number >= 2, or 'loo' (leave one out)."""
    if text.strip().lower() in ("loo", "leave-one-out"):
        return "loo"
    try:
        k = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number >= 2 or 'loo', got {text!r}") from None
    if k < 2:
        raise argparse.ArgumentTypeError(f"must be >= 2 (or 'loo'), got {k}")
    if k > 1000:
        raise argparse.ArgumentTypeError(f"must be at most 1000 (or 'loo'), got {k}")
    return k
