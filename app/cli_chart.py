"""`lowgmap chart`: draw the regime chart of a case to PNG, SVG or PDF."""
from __future__ import annotations

from pathlib import Path

from .cli import CliError, _clean, _emit

__all__ = ["register", "build_chart_export"]


def build_chart_export(doc, target, *, axes=None, log_axes=None, fmt=None, with_point=True):
    """Render the case's chart to ``target``; return (chart, view). Used by the CLI and the dashboard."""
    from physics.chart import Chart

    from .chartview import chart_view
    from .render import render_chart
    from .report import case_rows, format_flow

    chart = Chart.build(doc.case)
    st = doc.settings
    op = doc.case.operating_point
    margins = None
    try:
        from physics.margins import point_margins
    except ImportError:  # margin module not installed in this build
        point_margins = None
    if op is not None and point_margins is not None and chart.regime_names:
        margins = point_margins(chart, op.ql, op.qg)
    view = chart_view(chart, axes=axes or st.axes, log_axes=st.log_axes if log_axes is None else log_axes,
                      ql_unit=st.liquid_flow_unit, qg_unit=st.gas_flow_unit,
                      point=(op.ql, op.qg) if (op is not None and with_point) else None)
    label = None
    if op is not None and with_point:
        label = f"{chart.regime_at(op.ql, op.qg)}\nQ_L {format_flow(op.ql, st.liquid_flow_unit)}, " \
                f"Q_G {format_flow(op.qg, st.gas_flow_unit)}"
        if margins is not None:
            label += f"\n±{100 * margins.symmetric_margin:.1f} % margin"
    data = render_chart(view, target, fmt=fmt, title=doc.case.title, title_block=case_rows(doc, chart, margins),
                        point_label=label)
    return chart, view, data


def cmd_chart(args) -> int:
    from .casefile import load_case

    doc = load_case(args.case)
    out = Path(args.output)
    if out.suffix.lower().lstrip(".") not in ("png", "svg", "pdf"):
        raise CliError(f"--output must end in .png, .svg or .pdf, got {args.output!r}")
    chart, view, _ = build_chart_export(doc, out, axes=args.axes, log_axes=False if args.linear else None,
                                        with_point=not args.no_point)
    data = {"output": str(out), "regimes": list(chart.regime_names),
            "boundaries": [{"name": b.name, "label": b.label, "role": b.role, "source": b.citation}
                           for b in chart.boundaries],
            "warnings": list(chart.warnings)}
    text = [f"wrote {out}", "regimes: " + ", ".join(chart.regime_names)]
    text += [f"warning: {w}" for w in chart.warnings]
    _emit(args, _clean(data), "\n".join(text))
    return 0


def register(sub, add):
    from physics.chart import AXIS_KINDS

    sp = add("chart", cmd_chart, "draw the regime chart of a case (PNG, SVG or PDF, with title block)")
    sp.add_argument("-o", "--output", required=True, metavar="FILE", help="output file: .png, .svg or .pdf")
    sp.add_argument("--axes", choices=AXIS_KINDS, default=None, help="axes kind (default: the case's [chart] axes)")
    sp.add_argument("--linear", action="store_true", help="linear axes instead of logarithmic")
    sp.add_argument("--no-point", action="store_true", help="leave the operating point off")
