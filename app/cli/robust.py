"""`lowgmap robust`: the point of a regime with the largest symmetric margin.

The point comes from :func:`lowgmap.physics.chart.margins.robust_point` on the chart of the case.
"""
from __future__ import annotations

from lowgmap.app import CAUTION
from lowgmap.app.cli import common, operating
from lowgmap.app.cli.common import clean, emit, load_case_file
from lowgmap.app.formatting import format_percent

__all__ = ["add_arguments", "run"]


def add_arguments(parser) -> None:
    parser.add_argument("--regime", required=True, metavar="NAME", help="regime name as shown on the chart")
    parser.add_argument("--ql-range", nargs=2, metavar=("LOW", "HIGH"),
                        help="liquid flows searched (default: a decade either side of the operating point, "
                             "Q_L/10 to 10 Q_L; the chart range when the case has no operating point)")
    parser.add_argument("--qg-range", nargs=2, metavar=("LOW", "HIGH"),
                        help="gas flows searched (default: a decade either side of the operating point, "
                             "Q_G/10 to 10 Q_G; the chart range when the case has no operating point)")


def run(args) -> int:
    from lowgmap.physics.chart.margins import robust_point

    doc = load_case_file(args.case)
    chart = operating.case_chart(doc)
    regime = operating.regime_name(chart, args.regime)
    ql_range = operating.flow_range(args, "ql-range", False, doc)
    qg_range = operating.flow_range(args, "qg-range", True, doc)
    with common.input_errors("robust"):
        rp = robust_point(chart, regime, ql_range, qg_range)
    st = doc.settings
    flow = operating.flow_text
    data = rp.to_dict()
    data["case"] = {"title": doc.case.title, "revision": doc.case.revision}
    data["caution"] = CAUTION
    lims = {m.name: m.label for m, _ in chart.region_models}
    lines = [f"Case: {doc.case.title} (revision {doc.case.revision})",
             f"Most robust point in \"{regime}\" within Q_L {flow(rp.ql_range[0], st.liquid_flow_unit)} to "
             f"{flow(rp.ql_range[1], st.liquid_flow_unit)}, Q_G {flow(rp.qg_range[0], st.gas_flow_unit)} to "
             f"{flow(rp.qg_range[1], st.gas_flow_unit)}:",
             f"  Q_L {flow(rp.ql, st.liquid_flow_unit)} ({rp.ql:.4g} m^3/s), "
             f"Q_G {flow(rp.qg, st.gas_flow_unit)} ({rp.qg:.4g} m^3/s)"]
    if rp.limiting:
        lines.append(f"  symmetric margin ±{format_percent(rp.margin)}, limited by: "
                     + "; ".join(lims.get(n, n) for n in rp.limiting))
    else:
        lines.append(f"  symmetric margin at least ±{format_percent(rp.margin)} (no boundary comes closer)")
    lines.append(f"  {rp.search_note}")
    if not rp.established:
        lines.append("  Margin NOT ESTABLISHED:")
        lines += [f"    - {r}" for r in rp.reasons]
    if rp.outside_chart:
        lines.append(f"  Outside the chart: {rp.outside_chart_note}")
    if rp.caveats:
        lines.append("  Caveats:")
        lines += [f"    - {c}" for c in rp.caveats]
    lines.append(CAUTION)
    emit(args, clean(data), "\n".join(lines))
    return 0
