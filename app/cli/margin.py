"""`lowgmap margin`: margins of the operating point to every boundary.

All numbers come from the :class:`~lowgmap.physics.studies.study.Study` of the case (its chart built
once by :meth:`lowgmap.physics.chart.composition.Chart.build`, the point's margins by
:func:`lowgmap.physics.chart.margins.point_margins`, the worst-case margin over the constants' bands by
:attr:`Study.worst_case <lowgmap.physics.studies.study.Study.worst_case>`), as in the dashboard and the
exported reports. The worst case takes under a second for the closed-tube lines and tens of seconds for
the corner family; ``--nominal-only`` leaves it out.
"""
from __future__ import annotations

from lowgmap.app import CAUTION
from lowgmap.app.cli import operating
from lowgmap.app.cli.common import clean, emit, load_case_file
from lowgmap.app.formatting import format_factor, format_percent

__all__ = ["add_arguments", "run", "margin_report", "format_margin", "format_factor"]


def add_arguments(parser) -> None:
    parser.add_argument("--ql", metavar="VALUE",
                        help="liquid flow rate with units (default: the case's operating point)")
    parser.add_argument("--qg", metavar="VALUE",
                        help="gas flow rate with units, sccm/slpm allowed (default: the case's operating point)")
    parser.add_argument("--nominal-only", action="store_true",
                        help="margins to the nominal lines only: leave out the worst-case margin over the "
                             "constants' uncertainty bands (up to about a minute for corner lines)")


def run(args) -> int:
    from lowgmap.physics.studies.study import run_study

    doc = load_case_file(args.case)
    ql, qg = operating.operating_point(args, doc)
    chart = operating.case_chart(doc)
    study = run_study(doc.case, chart=chart).with_point(ql, qg)
    pm = study.margins
    if pm is None:                         # a chart without regimes: the margins still list every line
        from lowgmap.physics.chart.margins import point_margins

        pm = point_margins(chart, ql, qg)
    wc = None if getattr(args, "nominal_only", False) else _worst_case(study, show=not args.json)
    emit(args, clean(margin_report(doc, chart, pm, worst_case=wc)), format_margin(doc, chart, pm, worst_case=wc))
    return 0


def _worst_case(study, show: bool = False):
    import sys

    from lowgmap.app.cli import common

    if show and study.has_bands and sys.stderr.isatty():
        print("  searching the worst-case margin over the constants' bands (corner lines: up to a minute; "
              "--nominal-only leaves it out)", file=sys.stderr, flush=True)
    with common.input_errors("worst-case margin"):
        return study.worst_case


def verdict_of(doc, chart, pm):
    """The verdict in words on the point's margins (None on a chart without regimes): the one function
    every output uses (:func:`lowgmap.physics.chart.margins.margin_verdict`)."""
    from lowgmap.physics.chart.margins import margin_verdict

    if not chart.regime_names:
        return None
    intended = doc.case.intended_regime or doc.settings.intended_regime or None
    if intended is not None and intended not in chart.regime_names:
        from lowgmap.app.cli.common import CliError

        raise CliError(f"chart.intended_regime: {intended!r} is not a regime of this chart; "
                       f"its regimes: {', '.join(chart.regime_names)}")
    return margin_verdict(pm, doc.settings.required_margin, intended)


def margin_report(doc, chart, pm, worst_case=None) -> dict:
    """JSON-ready margins of a point (the CLI's --json output).

    ``worst_case``: the point's :class:`~lowgmap.physics.chart.bands.WorstCaseMargins` (its
    ``to_dict()`` goes under ``"worst_case"``; None there when not computed or without banded constants).
    """
    data = pm.to_dict()
    data["worst_case"] = None if worst_case is None else worst_case.to_dict()
    if not chart.regime_names:
        data["symmetric_margin"] = None
    st = doc.settings
    verdict = verdict_of(doc, chart, pm)
    data["required_margin"] = st.required_margin
    data["verdict"] = verdict.to_dict() if verdict is not None else None
    data["meets_required_margin"] = verdict.met if verdict is not None else None
    data["regimes"] = list(chart.regime_names)
    data["warnings"] = list(chart.warnings)
    data["case"] = {"title": doc.case.title, "revision": doc.case.revision}
    data["caution"] = CAUTION
    return data


def format_margin(doc, chart, pm, worst_case=None) -> str:
    """The margins of a point as text for a person (with the worst case over the bands when given)."""
    from lowgmap.app.outputs.report import worst_case_rows

    st = doc.settings
    lu, gu = st.liquid_flow_unit, st.gas_flow_unit
    flow = operating.flow_text
    lines = [f"Case: {doc.case.title} (revision {doc.case.revision})",
             f"Operating point: Q_L {flow(pm.ql, lu)}, Q_G {flow(pm.qg, gu)} "
             f"({pm.ql:.4g} m^3/s, {pm.qg:.4g} m^3/s)"]
    if not chart.regime_names:
        lines.append("Regime: none - no boundary model on this chart defines regimes.")
    else:
        verdict = verdict_of(doc, chart, pm)
        lines.append(f"Regime: {pm.regime}" + (f" ({verdict.regime_status}: {verdict.intended_regime})"
                                               if verdict.intended_regime else f" ({verdict.regime_status})"))
        lim = pm.limiting
        if lim is None:
            lines.append(f"Symmetric margin: at least ±{format_percent(pm.symmetric_margin)} "
                         f"(no boundary comes closer)")
        else:
            lines.append(f"Symmetric margin: ±{format_percent(pm.symmetric_margin)}, limited by {lim.label}")
        for k, v in worst_case_rows(worst_case, chart):
            lines.append(f"{k[0].upper()}{k[1:]}: {v}")
        lines.append(f"Required margin ±{format_percent(st.required_margin)}: {verdict.margin_status}"
                     + (" (judged on the nominal margin)" if worst_case is not None else ""))
        lines.append(f"  basis: {verdict.basis}")
        for limit in verdict.limits:
            lines.append(f"  limit: {limit}")
        words = {"ql_up": "Q_L up", "ql_down": "Q_L down", "qg_up": "Q_G up", "qg_down": "Q_G down"}
        for d, w in words.items():
            name = pm.limits[d]
            if name is None:
                lines.append(f"  {w:<9} no regime change inside the chart range")
            else:
                lines.append(f"  {w:<9} regime changes at {format_factor(pm.regime_factors[d])} "
                             f"({pm.boundary(name).label})")
    if pm.boundaries:
        lines.append("")
        head = (f"{'boundary':<46} {'role':<11} {'Q_L up':<19} {'Q_L down':<19} {'Q_G up':<19} "
                f"{'Q_G down':<19} {'log dist':>8}")
        lines.append(head)
        lines.append("-" * len(head))
        for b in pm.boundaries:
            label = b.label if len(b.label) <= 45 else b.label[:44] + "…"
            role = b.role + ("*" if b.limits_regime else "")
            dist = f"{b.log_distance:.3f}" if b.log_distance is not None else "none"
            lines.append(f"{label:<46} {role:<11} {format_factor(b.ql_factor_up):<19} "
                         f"{format_factor(b.ql_factor_down):<19} {format_factor(b.qg_factor_up):<19} "
                         f"{format_factor(b.qg_factor_down):<19} {dist:>8}")
        lines.append("* limits the present regime. Factors: crossing flow / present flow with the other flow "
                     "held, inside the chart range; log dist: shortest distance in decades of flow.")
    for w in chart.warnings:
        lines.append(f"Warning: {w}")
    lines.append(CAUTION)
    return "\n".join(lines)
