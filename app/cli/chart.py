"""`lowgmap chart`: draw the regime chart of a case to PNG, SVG or PDF."""
from __future__ import annotations

from pathlib import Path

from lowgmap.app.cli.common import CliError, clean, emit, load_case_file

__all__ = ["add_arguments", "run"]


def add_arguments(parser) -> None:
    from lowgmap.physics.chart.composition import AXIS_KINDS

    parser.add_argument("-o", "--output", required=True, metavar="FILE", help="output file: .png, .svg or .pdf")
    parser.add_argument("--axes", choices=AXIS_KINDS, default=None,
                        help="axes kind (default: the case's [chart] axes)")
    parser.add_argument("--linear", action="store_true", help="linear axes instead of logarithmic")
    parser.add_argument("--no-point", action="store_true", help="leave the operating point off")
    parser.add_argument("--points", metavar="CSV", help="test-point file to draw over the chart")


def run(args) -> int:
    doc = load_case_file(args.case)
    out = Path(args.output)
    if out.suffix.lower().lstrip(".") not in ("png", "svg", "pdf"):
        raise CliError(f"--output must end in .png, .svg or .pdf, got {args.output!r}")
    points = None
    if args.points:
        from lowgmap.app.files.testpoints import read_test_points

        f = doc.case.fluid
        points = read_test_points(args.points, pressure=f.pressure, temperature=f.temperature).points
    from lowgmap.app.outputs.exports import write_chart

    chart, margins = write_chart(doc, out, axes=args.axes, log_axes=False if args.linear else None,
                                 with_point=not args.no_point, test_points=points)
    data = {"output": str(out), "regimes": list(chart.regime_names),
            "boundaries": [{"name": b.name, "label": b.label, "role": b.role, "source": b.citation}
                           for b in chart.boundaries],
            "warnings": list(chart.warnings),
            "symmetric_margin": None if margins is None else margins.symmetric_margin}
    text = [f"wrote {out}", "regimes: " + ", ".join(chart.regime_names)]
    text += [f"warning: {w}" for w in chart.warnings]
    emit(args, clean(data), "\n".join(text))
    return 0
