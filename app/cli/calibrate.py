"""`lowgmap calibrate`: fit boundary-model constants to test points, or an empirical boundary.

``--fit`` fits model constants (:func:`lowgmap.physics.studies.calibration.calibrate`); ``--empirical``
fits a power-law line between two observed regimes
(:func:`lowgmap.physics.studies.calibration.fit_empirical_boundary`). With ``-o`` the result is written
as the case's next revision (:mod:`lowgmap.app.files.revisions`): the constants in force before, and
the date, go to a ``[[history]]`` entry, and the revision letter moves on (A -> B). The ``-o`` path is
checked before the fit runs (a ``.toml`` file, not one of the inputs; an existing file only with
``--force``) and written atomically.
"""
from __future__ import annotations

from pathlib import Path

from lowgmap.app import CAUTION
from lowgmap.app.cli.common import clean, emit, load_case_file
from lowgmap.app.cli.points import (add_point_arguments, criteria_from_args, folds_value, load_points,
                                    parse_regime_map)
from lowgmap.app.files.revisions import (calibrated_document, document_with_boundary, operating_verdict,
                                         relocate_test_points, verdict_change, verdict_words)
from lowgmap.app.formatting import format_share
from lowgmap.app.cli import common

__all__ = ["add_arguments", "run", "MAX_STARTS"]

#: Most random starts of a fit (``--starts``).
MAX_STARTS = 100


def add_arguments(parser) -> None:
    add_point_arguments(parser)
    parser.add_argument("--fit", nargs="+", action="extend", metavar="NAME[.CONSTANT]",
                        help="model constants to fit, e.g. bubble_slug_dukler_1988.alpha_c (a model name alone: all "
                             "its constants)")
    parser.add_argument("--empirical", metavar="BELOW|ABOVE",
                        help="fit Q_G = a Q_L^b between two observed regimes, the one at smaller gas flow first")
    parser.add_argument("--name", metavar="NAME", help="name of the empirical boundary (snake_case)")
    parser.add_argument("-o", "--output", metavar="NEW_CASE", help="write the calibrated case (next revision) here")
    parser.add_argument("--force", action="store_true", help="replace NEW_CASE if it exists")
    parser.add_argument("--all-points", action="store_true",
                        help="fit every point with a chart regime, not only the valid ones")
    parser.add_argument("--label-error", type=float, metavar="EPS",
                        help="fix the share of mislabelled points (default: fitted within [1e-4, 0.3])")
    parser.add_argument("--starts", type=int, default=4, metavar="N",
                        help=f"random starts of the fit, 1 to {MAX_STARTS} (default 4)")
    parser.add_argument("--folds", type=folds_value, default=5, metavar="K",
                        help="cross-validation folds, or 'loo' (default 5)")
    parser.add_argument("--seed", type=int, default=0, metavar="S", help="seed of the random starts and folds")


def run(args) -> int:
    from lowgmap.physics.chart.composition import Chart
    from lowgmap.physics.studies.calibration import calibrate, fit_empirical_boundary

    if bool(args.fit) == bool(args.empirical):
        raise common.CliError("give either --fit MODEL[.CONSTANT] ... or --empirical \"BELOW|ABOVE\"")
    common.check_count("--starts", args.starts, 1, MAX_STARTS)
    common.check_count("--seed", args.seed, 0, 2 ** 63 - 1)
    if args.output is not None:
        common.check_output(args.output, option="-o", formats=(".toml",), force=args.force,
                            inputs=(args.case, args.points))
    doc = load_case_file(args.case)
    tps = load_points(args.points, doc)
    chart = Chart.build(doc.case)
    kw = dict(regime_map=parse_regime_map(args.map), criteria=criteria_from_args(args),
              use="all" if args.all_points else "valid", label_error=args.label_error, starts=args.starts,
              folds=args.folds, seed=args.seed)
    name = Path(args.points).name
    if args.fit:
        with common.input_errors():
            cal = calibrate(chart, tps, args.fit, **kw)
        written = None
        if args.output is not None:
            data, rev = calibrated_document(doc, cal, points_name=name)
            written = (_write(data, args, doc), rev)
        out = cal.to_dict()
        out.update({"case": args.case, "points_file": args.points, "revision_before": doc.case.revision,
                    "written": str(written[0]) if written else None,
                    "revision_after": written[1] if written else None})
        change = _verdicts(doc, cal.chart_before, cal.chart_after, written[1] if written else None)
        out.update(change)
        emit(args, clean(out), _format_calibration(doc, cal, args.points, written, change))
        return 0
    with common.input_errors():
        fit = fit_empirical_boundary(chart, tps, args.empirical, name=args.name, source=name, **kw)
    from lowgmap.app.files.revisions import chart_of_document

    written = None
    data, rev, bname = document_with_boundary(doc, fit, chart, points_name=name)
    if args.output is not None:
        written = (_write(data, args, doc), rev, bname)
    out = fit.to_dict()
    out.update({"case": args.case, "points_file": args.points, "revision_before": doc.case.revision,
                "written": str(written[0]) if written else None, "revision_after": written[1] if written else None,
                "boundary_name": written[2] if written else fit.name})
    change = _verdicts(doc, chart, chart_of_document(data, doc), written[1] if written else None)
    out.update(change)
    emit(args, clean(out), _format_empirical(doc, fit, args.points, written, change))
    return 0


def _verdicts(doc, chart_before, chart_after, rev_after) -> dict:
    """The verdict at the operating point before and after, and the sentence when it changes."""
    from lowgmap.app.files.revisions import next_revision

    rev_after = rev_after or next_revision(str(doc.case.revision))
    try:
        vb = operating_verdict(doc, chart_before)
        va = operating_verdict(doc, chart_after) if chart_after is not None else None
    except ValueError:
        vb = va = None
    return {"verdict_before": vb.to_dict() if vb is not None else None,
            "verdict_after": va.to_dict() if va is not None else None,
            "verdict_before_text": verdict_words(vb) if vb is not None else None,
            "verdict_after_text": verdict_words(va) if va is not None else None,
            "verdict_change": verdict_change(vb, va, str(doc.case.revision), rev_after) or None}


def _verdict_lines(doc, change) -> list[str]:
    if change.get("verdict_before_text") is None:
        return []
    lines = [f"  operating point, revision {doc.case.revision}: {change['verdict_before_text']}"]
    if change.get("verdict_after_text") is not None:
        lines.append(f"  operating point, new revision: {change['verdict_after_text']}")
    if change.get("verdict_change"):
        lines.append(change["verdict_change"])
    else:
        lines.append("  The regime and the margin verdict at the operating point do not change.")
    return lines


def _write(data, args, doc) -> Path:
    """Check the new revision loads, then write it (atomically) to -o."""
    from lowgmap.app.files.casefile import dumps_case, loads_case

    out = common.check_output(args.output, option="-o", formats=(".toml",), force=args.force,
                              inputs=(args.case, args.points))
    relocate_test_points(data, doc.path, out)
    text = dumps_case(data)
    loads_case(text, source=str(out), base_dir=out.resolve().parent)   # must load before writing
    common.write_output(out, text, force=args.force, option="-o")
    return out


def _format_calibration(doc, cal, points_path, written, change=None) -> str:
    lines = [f"Calibration of {doc.case.title} (revision {doc.case.revision}) against {cal.n_points} test point(s) "
             f"from {Path(points_path).name}"]
    for c in cal.constants:
        lines.append(f"  {c.key}: {c.start:.4g} -> {c.value:.4g}, 95 % interval [{c.interval[0]:.4g}, "
                     f"{c.interval[1]:.4g}] ({cal.interval_method}); allowed [{c.low:.4g}, {c.high:.4g}]")
    lines.append(f"  transition sharpness {cal.sharpness:.3g} per log unit; share of points counted as mislabelled "
                 f"{100 * cal.label_error:.2g} %")
    share = format_share
    lines.append(f"  agreement on the fitted points: {share(cal.agreement_before)} before -> "
                 f"{share(cal.agreement_after)} after; cross-validated ({cal.cv_method}): {share(cal.cv_agreement)}")
    if cal.check_before is not None:
        lines.append(f"  all points with a chart regime: {share(cal.check_before.fraction_all)} -> "
                     f"{share(cal.check_after.fraction_all)}; valid points: {share(cal.check_before.fraction_valid)} "
                     f"-> {share(cal.check_after.fraction_valid)}")
    for w in cal.warnings:
        lines.append(f"  note: {w}")
    lines += _verdict_lines(doc, change or {})
    if written:
        lines.append(f"Wrote {written[0]} (revision {written[1]}; revision {doc.case.revision} kept in [[history]])")
    else:
        lines.append("Not written (give -o NEW_CASE to write the calibrated case).")
    lines += ["", CAUTION]
    return "\n".join(lines)


def _format_empirical(doc, fit, points_path, written, change=None) -> str:
    lines = [f"Empirical boundary for {doc.case.title} (revision {doc.case.revision}) from {Path(points_path).name}: "
             f"{fit.regime_below} (below) | {fit.regime_above} (above)",
             f"  Q_G = a Q_L^b (SI, m^3/s): a = {fit.a:.4g} (95 % [{fit.a_interval[0]:.4g}, {fit.a_interval[1]:.4g}]), "
             f"b = {fit.b:.4g} (95 % [{fit.b_interval[0]:.4g}, {fit.b_interval[1]:.4g}]) ({fit.interval_method})",
             f"  points: {fit.n_below} below, {fit.n_above} above; on their observed side: "
             f"{format_share(fit.agreement)}; cross-validated ({fit.cv_method}): {format_share(fit.cv_agreement)}",
             f"  liquid flow range of the points: {fit.ql_range[0]:.4g} to {fit.ql_range[1]:.4g} m^3/s"]
    for w in fit.warnings:
        lines.append(f"  note: {w}")
    lines += _verdict_lines(doc, change or {})
    if written:
        lines.append(f"Wrote {written[0]} (revision {written[1]}, boundary {written[2]}; revision "
                     f"{doc.case.revision} kept in [[history]])")
    else:
        lines.append("Not written (give -o NEW_CASE to add the boundary to the case).")
    lines += ["", CAUTION]
    return "\n".join(lines)
