"""`lowgmap chart`: draw the regime chart of a case to PNG, SVG or PDF.

The output path is checked before anything is computed (:func:`lowgmap.app.cli.common.check_output`),
an existing file is replaced only with ``--force``, and the file is written atomically.
"""
from __future__ import annotations

from lowgmap.app.cli import common
from lowgmap.app.cli.common import clean, emit, load_case_file

__all__ = ["add_arguments", "run", "FORMATS"]

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


def run(args) -> int:
    out = common.check_output(args.output, option="-o", formats=FORMATS, force=args.force,
                              inputs=(args.case, args.points))
    doc = load_case_file(args.case)
    points = None
    if args.points:
        from lowgmap.app.cli.points import load_points

        points = load_points(args.points, doc).points
    from lowgmap.app.outputs.exports import chart_bytes
    from lowgmap.app.outputs.report import review_inputs

    study, settings, invented = review_inputs(doc, test_points=points)
    data = chart_bytes(study, out.suffix.lstrip(".").lower(), axes=args.axes,
                       log_axes=False if args.linear else None, with_point=not args.no_point, settings=settings,
                       invented=invented, document=doc)
    common.write_output(out, data, force=args.force, option="-o")
    chart, margins = study.chart, study.margins
    data = {"output": str(out), "regimes": list(chart.regime_names),
            "boundaries": [{"name": b.name, "label": b.label, "role": b.role, "source": b.citation}
                           for b in chart.boundaries],
            "warnings": list(chart.warnings),
            "symmetric_margin": None if margins is None else margins.symmetric_margin}
    text = [f"wrote {out}", "regimes: " + ", ".join(chart.regime_names)]
    text += [f"warning: {w}" for w in chart.warnings]
    emit(args, clean(data), "\n".join(text))
    return 0
