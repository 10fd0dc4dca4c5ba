"""`lowgmap compare`: test points against the chart.

Validity of each point (Bond number, low-g time), confusion matrix, agreement and the disagreeing
points by boundary, all from :func:`lowgmap.physics.studies.agreement.agreement` on the chart built by
:meth:`lowgmap.physics.chart.composition.Chart.build`, as in the dashboard's test-point panel.
"""
from __future__ import annotations

import re
from pathlib import Path

from lowgmap.app import CAUTION
from lowgmap.app.cli import common
from lowgmap.app.cli.common import clean, emit, load_case_file
from lowgmap.app.cli.points import add_point_arguments, criteria_from_args, load_points, parse_regime_map
from lowgmap.app.formatting import format_share

__all__ = ["add_arguments", "run", "compare_report", "format_compare", "format_confusion", "set_aside_lines"]


def add_arguments(parser) -> None:
    add_point_arguments(parser)


def run(args) -> int:
    from lowgmap.physics.chart.composition import Chart
    from lowgmap.physics.studies.agreement import agreement

    doc = load_case_file(args.case)
    tps = load_points(args.points, doc)
    chart = Chart.build(doc.case)
    regime_map, criteria = parse_regime_map(args.map), criteria_from_args(args)
    with common.input_errors("compare"):
        res = agreement(chart, tps, regime_map=regime_map, criteria=criteria)
    emit(args, compare_report(doc, tps, res, args.points), format_compare(doc, tps, res, args.points))
    return 0


def compare_report(doc, tps, res, points_path: str = "") -> dict:
    """JSON-ready report of :func:`lowgmap.physics.studies.agreement.agreement`, with the file and the case named."""
    d = res.to_dict()
    d.update({"case": str(doc.path) if doc.path else "", "title": doc.case.title, "revision": doc.case.revision,
              "points_file": str(points_path), "rows_set_aside": tps.rejected_rows,
              "read_problems": [str(p) for p in tps.problems]})
    return clean(d)


def format_compare(doc, tps, res, points_path) -> str:
    """The comparison as text for a person: per-point table, confusion matrices, disagreeing points."""
    st = doc.settings
    ul, ug = st.liquid_flow_unit, st.gas_flow_unit
    from lowgmap.app.files.units import convert

    c = res.criteria
    lines = [f"{doc.case.title} (revision {doc.case.revision}): {res.n_points} test point(s) from "
             f"{Path(points_path).name}" + (f"; {len(tps.rejected_rows)} row(s) set aside" if tps.rejected_rows
                                            else "")]
    lines.append(f"Validity: {res.n_valid} of {res.n_points} valid. {res.validity_rule}")
    # column widths follow the longest entry, headers included: a header is never cut or run into its neighbour
    hl, hg = f"Q_L [{ul}]", f"Q_G [{ug}]"
    wi = max([len("test id")] + [len(str(p.test_id)) for p in res.points])
    wl, wg = max(13, len(hl)), max(13, len(hg))
    head = (f"  {'test id':<{wi}} {hl:>{wl}} {hg:>{wg}} {'Bo':>9} {'needs [s]':>10} "
            f"{'has [s]':>9}  valid  observed -> chart")
    lines.append(head)
    for p in res.points:
        mark = (("  not compared: label not a chart regime" if p.observed else "") if p.agrees is None
                else ("  ok" if p.agrees else "  DIFFERS"))
        obs = p.observed or "(none)"
        lines.append(f"  {str(p.test_id):<{wi}} {convert(p.ql, 'flow', ul):{wl}.4g} {convert(p.qg, 'flow', ug):{wg}.4g} "
                     f"{p.bond:9.3g} {c.safety_factor * p.t_required:10.3g} {p.duration:9.3g}  "
                     f"{'yes' if p.valid else 'no ':<5}  {obs} -> {p.predicted}{mark}")
    lines.append(f"Agreement with the chart: {format_share(res.fraction_valid)} of {res.confusion_valid.compared} "
                 f"valid point(s); {format_share(res.fraction_all)} of {res.confusion_all.compared} point(s) in all")
    lines.append("Confusion matrix, valid points (rows observed, columns chart; column key below):")
    lines += ["  " + ln for ln in format_confusion(res.confusion_valid).splitlines()]
    lines.append("Confusion matrix, all points:")
    lines += ["  " + ln for ln in format_confusion(res.confusion_all).splitlines()]
    if res.unknown_labels:
        lines.append("Observed labels that are not chart regimes (map them with --map \"LABEL=REGIME\"): "
                     + ", ".join(f"{k!r} ({n})" for k, n in res.unknown_labels)
                     + f". Chart regimes: {'; '.join(res.regimes)}")
    lines += set_aside_lines(tps, res)
    if res.by_boundary:
        lines.append("Disagreeing points by boundary (log distance to the line in decades):")
        for b in res.by_boundary:
            lines.append(f"  {b.label}:")
            for q in b.points:
                how = "" if q.crossing_explains else " (crossing this line alone does not give the observed regime)"
                lines.append(f"    {q.test_id:<10} observed {q.observed}, chart {q.predicted}; "
                             f"{q.log_distance:.3g} decade{'' if q.valid else '; point not valid'}{how}")
    lines += ["", CAUTION]
    return "\n".join(lines)



def format_confusion(cm) -> str:
    """A confusion matrix as text with numbered chart columns and a key, so no regime name is cut.

    >>> from lowgmap.physics.studies.agreement import confusion_matrix
    >>> print(format_confusion(confusion_matrix(["a", "b"], ["a", "a"], ["a", "b"])))
    observed \\ chart  [1]  [2]
    a                  1    0
    b                  1    0
    [1] a; [2] b
    """
    head = "observed \\ chart"
    first = max([len(head)] + [len(o) for o in cm.observed]) + 2
    width = max([3 + len(str(len(cm.predicted)))] + [len(str(c)) for r in cm.counts for c in r]) + 2
    cols = [f"[{i}]" for i in range(1, len(cm.predicted) + 1)]
    lines = [head.ljust(first) + "".join(c.rjust(width) for c in cols).rstrip()]
    for o, r in zip(cm.observed, cm.counts):
        lines.append(o.ljust(first) + "".join(str(c).rjust(width) for c in r))
    lines.append("; ".join(f"{c} {p}" for c, p in zip(cols, cm.predicted)))
    return "\n".join(lines)


def set_aside_lines(tps, res) -> list[str]:
    """Why rows of the file are left out of the comparison: rows not read (with the reader's reason), points
    not valid for their platform (with the reasons) and labels that are not chart regimes (with the ``--map``
    that would fix them, when a regime matches the label's words)."""
    from lowgmap.app.outputs.report import suggest_regime

    out = []
    rejected = list(tps.rejected_rows)
    invalid = [p for p in res.points if not p.valid]
    unknown = [p for p in res.points if p.observed and p.agrees is None]
    if not (rejected or invalid or unknown):
        return ["Rows set aside: none"]
    out.append(f"Rows set aside: {len(rejected)} not read, {len(invalid)} not valid for their platform, "
               f"{len(unknown)} with a label that is not a chart regime")
    if rejected:
        out.append("  Not read from the file:")
        problems = [str(q) for q in tps.problems]
        for row in rejected:
            why = [q for q in problems if re.search(rf"\b(row|line) {row}\b", q)]
            out += [f"    {q}" for q in why] or [f"    file row {row}: row not read"]
    if invalid:
        out.append("  Not valid for their platform (compared in 'all points' only):")
        for p in invalid:
            out.append(f"    {p.test_id}: " + "; ".join(p.reasons))
    if unknown:
        out.append("  Label not a chart regime (not compared):")
        for label, n in res.unknown_labels:
            ids = [p.test_id for p in unknown if p.observed == label]
            fix = suggest_regime(label, res.regimes)
            how = (f'fix: --map "{label}={fix}"' if fix else
                   f'no chart regime matches its words; map it by hand with --map "{label}=REGIME"')
            out.append(f"    {label!r} ({n}: {', '.join(ids)}): {how}")
    return out
