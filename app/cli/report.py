"""`lowgmap report`: the review pack of a case, as a multi-page PDF or one self-contained HTML page.

One study is built (:func:`lowgmap.physics.studies.study.run_study`: the chart once, the operating point's
margins, the test points' agreement) and both the chart page and every table of the pack are drawn
from it (:func:`lowgmap.app.outputs.report.review_pack`). The HTML is the page the dashboard's report
download gives for the same study. The output name is checked before anything is computed and the
file is written atomically; an existing file is replaced only with ``--force``
(:func:`lowgmap.app.cli.common.check_output`, :func:`lowgmap.app.cli.common.write_output`, as for every
command that writes a file).
"""
from __future__ import annotations

import dataclasses
from pathlib import Path

from lowgmap.app.cli import common
from lowgmap.app.cli.common import CliError, clean, emit, load_case_file

__all__ = ["add_arguments", "run", "FORMATS"]

#: Output suffixes and the format each one writes.
FORMATS = {".pdf": "pdf", ".html": "html", ".htm": "html"}


def add_arguments(parser) -> None:
    parser.add_argument("-o", "--output", required=True, metavar="FILE",
                        help="review pack to write: .pdf (multi-page) or .html (self-contained page)")
    parser.add_argument("--points", metavar="CSV",
                        help="test-point file (.csv or .xlsx) to compare with the chart (default: the files of the "
                             "case's [test_points], if any)")
    parser.add_argument("--map", action="append", metavar="LABEL=REGIME",
                        help="rename an observed label to a chart regime (repeatable), e.g. \"annular=annular (gas "
                             "core)\"")
    parser.add_argument("--length", metavar="LENGTH",
                        help="distance from the inlet to where the test regimes were observed, e.g. \"0.3 m\" "
                             "(default: the conduit length)")
    parser.add_argument("--required-margin", metavar="M",
                        help="required symmetric margin, e.g. \"30 %%\" or 0.3 (default: the case's [chart] "
                             "required_margin)")
    parser.add_argument("--force", action="store_true", help="replace FILE if it exists")
    parser.add_argument("--nominal-only", action="store_true",
                        help="leave out the worst-case margin over the constants' uncertainty bands (up to about a "
                             "minute for corner lines); the bands are still drawn and listed")
    parser.add_argument("--no-bands", action="store_true",
                        help="leave the boundaries' uncertainty bands off the chart (tens of seconds for corner "
                             "lines); the constants table still lists each constant's band")


def _output(args) -> tuple[Path, str]:
    """The output path and format, checked before anything is computed (:func:`common.check_output`)."""
    out = common.check_output(args.output, option="--output", formats=tuple(FORMATS), force=args.force,
                              inputs=(args.case, getattr(args, "points", None)), formats_text=".pdf or .html")
    return out, FORMATS[out.suffix.lower()]


def _required_margin(text, doc):
    if text is None:
        return doc.settings
    from lowgmap.app.files.units import UnitError, to_si

    try:
        m = to_si(text, "dimensionless", "--required-margin")
    except (UnitError, ValueError) as exc:
        raise CliError(str(exc)) from None
    if not 0 <= m < 1:
        raise CliError(f"--required-margin must be within [0, 1) (e.g. \"30 %\" or 0.3), got {text!r}")
    return dataclasses.replace(doc.settings, required_margin=m)


def _points(args, doc):
    """The test-point set to compare (None without one): --points, else the case's [test_points] files."""
    from lowgmap.app.cli.points import load_points

    if args.points:
        return load_points(args.points, doc)
    files = list(doc.test_point_files)
    if not files:
        if args.map or args.length:
            raise CliError("--map and --length apply to test points: give --points CSV")
        return None
    if len(files) > 1:
        raise CliError(f"the case lists {len(files)} test-point files; choose one with --points")
    return load_points(files[0], doc)


def run(args) -> int:
    out, fmt = _output(args)
    doc = load_case_file(args.case)
    settings = _required_margin(args.required_margin, doc)
    tps = _points(args, doc)
    from lowgmap.physics.studies.study import run_study

    from lowgmap.app.cli.points import criteria_from_args, parse_regime_map
    from lowgmap.app.outputs.report import review_pack

    regime_map = parse_regime_map(args.map)
    criteria = criteria_from_args(args) if tps is not None else None
    study = run_study(doc.case, points=tps, regime_map=regime_map or None, criteria=criteria)
    with common.input_errors("worst-case margin"):
        pack = review_pack(study, settings=settings, invented=doc.invented, document=doc, point_file=tps,
                           worst_case=not getattr(args, "nominal_only", False))
    from lowgmap.app.outputs.exports import chart_bytes

    png = chart_bytes(study, "png", settings=settings, invented=doc.invented,     # the same study: never rebuilt
                      bands=False if getattr(args, "no_bands", False) else None)
    if fmt == "pdf":
        from lowgmap.app.outputs.pdf import review_pdf

        data = review_pdf(pack, png)
    else:                                 # the page of exports.report_html (the dashboard's download)
        from lowgmap.app.outputs.exports import render_review_html

        data = render_review_html(pack, png).encode("utf-8")
    common.write_output(out, data, force=args.force, option="--output")
    summary = {"output": str(out), "format": fmt, "bytes": len(data), **pack.verdict_dict()}
    lines = [f"wrote {out} ({fmt.upper()}, {len(data) // 1024} kB): {pack.title}, revision {pack.revision}",
             pack.headline]
    if pack.agreement is not None:
        lines.append(pack.agreement.summary)
    emit(args, clean(summary), "\n".join(lines))
    return 0
