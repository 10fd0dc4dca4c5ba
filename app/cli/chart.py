"""`lowgmap chart`: draw the regime chart of a case to PNG, SVG or PDF.

The output path is checked before anything is computed (:func:`lowgmap.app.cli.common.check_output`),
an existing file is replaced only with ``--force``, and the file is written atomically.

``--compare G`` draws the same case at a second residual acceleration beside the first (the case's, or
``--gravity``'s): a ground test beside the flight prediction, each test point on the chart of its own
gravity level (:mod:`lowgmap.app.outputs.gravity_pair`). For a closed conduit the hand-over sentence
(:func:`lowgmap.physics.models.tube_gravity.handover`: which family of lines defines the regions at this
gravity level and orientation) is printed as a note.
"""
from __future__ import annotations

import argparse

from lowgmap.app.cli import common
from lowgmap.app.cli.common import clean, emit, load_case_file

__all__ = ["add_arguments", "run", "FORMATS", "chart_notes"]

#: Suffixes of ``-o``.
FORMATS = (".png", ".svg", ".pdf")


def add_arguments(parser) -> None:
    from lowgmap.physics.chart.composition import AXIS_KINDS

    parser.add_argument("-o", "--output", required=True, metavar="FILE", help="output file: .png, .svg or .pdf")
    parser.add_argument("--force", action="store_true", help="replace FILE if it exists")
    parser.add_argument("--axes", choices=AXIS_KINDS, default=None,
                        help="axes kind (default: the case's [chart] axes)")
    parser.add_argument("--linear", action="store_true", help="linear axes instead of logarithmic")
    parser.add_argument("--no-point", action="store_true", help="leave the operating point off")
    parser.add_argument("--points", metavar="CSV", help="test-point file to draw over the chart")
    parser.add_argument("--bands", action=argparse.BooleanOptionalAction, default=None,
                        help="draw each boundary's uncertainty band (its constants over their ranges); default: "
                             "drawn when some line has an uncertain constant")
    parser.add_argument("--compare", metavar="G",
                        help="draw the case again at this residual acceleration, side by side (e.g. \"1e-6 g0\" "
                             "beside --gravity \"1 g0\"); each test point goes on the chart of the level closest to "
                             "its own")


def chart_notes(case) -> list[str]:
    """Notes the command prints with a chart: the hand-over sentence of a closed conduit (empty for an open one)."""
    from lowgmap.app.outputs.gravity_pair import handover_note

    message = handover_note(case)
    return [message] if message else []


def run(args) -> int:
    out = common.check_output(args.output, option="-o", formats=FORMATS, force=args.force,
                              inputs=(args.case, args.points))
    doc = load_case_file(args.case)
    compare = None
    if args.compare is not None:
        from lowgmap.app.files.casefile import check_bounds, with_conduit
        from lowgmap.app.files.units import parse_gravity

        check_bounds("acceleration", parse_gravity(args.compare, "--compare"), "--compare")
        compare = with_conduit(doc, residual_acceleration=args.compare)
    points = None
    if args.points:
        from lowgmap.app.cli.points import load_points

        points = load_points(args.points, doc).points
    if compare is not None:
        return _run_pair(args, out, doc, compare, points)
    from lowgmap.app.outputs.exports import chart_bytes
    from lowgmap.app.outputs.report import review_inputs

    study, settings, invented = review_inputs(doc, test_points=points)
    data = chart_bytes(study, out.suffix.lstrip(".").lower(), axes=args.axes,
                       log_axes=False if args.linear else None, with_point=not args.no_point, settings=settings,
                       invented=invented, document=doc, bands=args.bands)
    common.write_output(out, data, force=args.force, option="-o")
    chart, margins = study.chart, study.margins
    notes = chart_notes(doc.case)
    data = {"output": str(out), "regimes": list(chart.regime_names),
            "boundaries": [{"name": b.name, "label": b.label, "role": b.role, "source": b.citation}
                           for b in chart.boundaries],
            "warnings": list(chart.warnings), "notes": notes,
            "residual_acceleration_m_s2": doc.case.g, "orientation": doc.case.orientation.describe(),
            "symmetric_margin": None if margins is None else margins.symmetric_margin}
    text = [f"wrote {out}", "regimes: " + ", ".join(chart.regime_names)]
    text += [f"warning: {w}" for w in chart.warnings]
    text += [f"note: {n}" for n in notes]
    emit(args, clean(data), "\n".join(text))
    return 0


def _run_pair(args, out, doc, compare, points) -> int:
    """Both gravity levels side by side (``--compare``)."""
    from lowgmap.app.outputs.gravity_pair import gravity_pair, pair_bytes

    pair = gravity_pair(doc, compare, points=points)
    data = pair_bytes(pair, out.suffix.lstrip(".").lower(), axes=args.axes, log_axes=False if args.linear else None,
                      with_point=not args.no_point, bands=args.bands)
    common.write_output(out, data, force=args.force, option="-o")
    panels = []
    text = [f"wrote {out} (the case at two gravity levels, side by side)"]
    for p in pair.panels:
        chart, margins = p.study.chart, p.study.margins
        panels.append({"residual_acceleration_m_s2": p.g, "g_over_g0": p.document.case.g_over_g0,
                       "orientation": p.document.case.orientation.describe(), "caption": p.caption,
                       "regimes": list(chart.regime_names), "warnings": list(chart.warnings),
                       "notes": [p.handover] if p.handover else [],
                       "test_points": None if p.points is None else len(p.points),
                       "symmetric_margin": None if margins is None else margins.symmetric_margin})
        text.append(p.caption.replace("\n", "; "))
        text.append("  regimes: " + ", ".join(chart.regime_names))
        text += [f"  warning: {w}" for w in chart.warnings]
        if p.handover:
            text.append(f"  note: {p.handover}")
    if pair.unplaced:
        text.append(f"{pair.unplaced} test point(s) have no residual acceleration (given or from their platform) "
                    f"and are on neither chart")
    emit(args, clean({"output": str(out), "panels": panels, "test_points_unplaced": pair.unplaced}), "\n".join(text))
    return 0
