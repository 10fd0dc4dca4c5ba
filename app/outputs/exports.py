"""Exports for a design review: annotated chart (PNG/SVG/PDF) and the review report (HTML).

The CLI (`lowgmap chart`) and the dashboard's download buttons both call these functions with a
case document, so a file exported from either shows the same numbers.
"""
from __future__ import annotations

import datetime as _dt
import html
from pathlib import Path

import numpy as np

from lowgmap.app import CAUTION, __version__

from lowgmap.app.outputs.chartview import chart_view, regime_style
from lowgmap.app.outputs.render import render_chart
from lowgmap.app.outputs.report import case_rows, format_flow

__all__ = ["compose", "chart_bytes", "write_chart", "report_html", "test_point_marks"]


def compose(doc):
    """(chart, margins) of a case document; margins is None without an operating point or regimes."""
    from lowgmap.physics.chart.composition import Chart
    from lowgmap.physics.chart.margins import point_margins

    chart = Chart.build(doc.case)
    op = doc.case.operating_point
    margins = point_margins(chart, op.ql, op.qg) if (op is not None and chart.regime_names) else None
    return chart, margins


def test_point_marks(chart, view, points) -> list[dict]:
    """Markers for test points: fill = observed regime's colour, red edge where the chart disagrees."""
    if points is None or len(points) == 0:
        return []
    styles = {name: regime_style(i)[0] for i, name in enumerate(chart.regime_names)}
    ql = points["ql_m3_s"].to_numpy()
    qg = points["qg_m3_s"].to_numpy()
    pred = chart.classify(ql, qg)
    x, y = view.to_display(ql, qg)
    out = []
    for xi, yi, o, p in zip(np.asarray(x), np.asarray(y), points["observed_regime"].fillna("").astype(str), pred):
        agree = (o == p) if o else True
        out.append({"x": float(xi), "y": float(yi), "colour": styles.get(o, "#ffffff"),
                    "edge": "#222222" if agree else "#C00000", "marker": "o" if agree else "X",
                    "size": 40 if agree else 70})
    return out


def _point_label(chart, doc, margins):
    st = doc.settings
    op = doc.case.operating_point
    label = (f"{chart.regime_at(op.ql, op.qg)}\nQ_L {format_flow(op.ql, st.liquid_flow_unit)}, "
             f"Q_G {format_flow(op.qg, st.gas_flow_unit)}")
    if margins is not None:
        label += f"\n±{100 * margins.symmetric_margin:.1f} % margin"
    return label


def chart_bytes(doc, fmt: str, *, axes=None, log_axes=None, with_point=True, test_points=None,
                composed=None) -> bytes:
    """The annotated chart of ``doc`` as PNG, SVG or PDF bytes (title block and caution included)."""
    chart, margins = composed or compose(doc)
    st = doc.settings
    op = doc.case.operating_point
    show_point = op is not None and with_point
    view = chart_view(chart, axes=axes or st.axes, log_axes=st.log_axes if log_axes is None else log_axes,
                      ql_unit=st.liquid_flow_unit, qg_unit=st.gas_flow_unit,
                      point=(op.ql, op.qg) if show_point else None)
    return render_chart(view, None, fmt=fmt, title=doc.case.title, title_block=case_rows(doc, chart, margins),
                        point_label=_point_label(chart, doc, margins) if show_point else None,
                        extra_points=test_point_marks(chart, view, test_points))


def write_chart(doc, path, **kwargs):
    """Write the chart to ``path`` (format from the suffix) atomically; returns (chart, margins)."""
    import os

    p = Path(path)
    fmt = p.suffix.lstrip(".").lower()
    composed = compose(doc)
    data = chart_bytes(doc, fmt, composed=composed, **kwargs)
    p.parent.mkdir(parents=True, exist_ok=True)
    tmp = p.with_name(f".{p.name}.tmp")
    tmp.write_bytes(data)
    os.replace(tmp, p)
    return composed


_REPORT_CSS = """
body {font-family: Helvetica, Arial, sans-serif; max-width: 1100px; margin: 1.5em auto; color: #111;}
h1 {font-size: 1.5em;} h2 {font-size: 1.15em; border-bottom: 1px solid #aaa; padding-bottom: 2px;}
table {border-collapse: collapse; font-size: 13px;} td, th {border: 1px solid #bbb; padding: 3px 7px;}
.caution {border: 2px solid #8B0000; color: #8B0000; padding: 8px; font-weight: bold;}
.warn {color: #8B0000;} .low {background: #fde0dc;}
"""


def report_html(doc, *, test_points=None) -> str:
    """A self-contained HTML review report: chart, margin table, case inputs, assumptions, warnings."""
    from lowgmap.app.dashboard.panels import margin_table_html

    chart, margins = compose(doc)
    svg = chart_bytes(doc, "svg", test_points=test_points, composed=(chart, margins)).decode("utf-8")
    svg = svg[svg.index("<svg"):]
    st = doc.settings
    rows = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(str(v))}</td></tr>"
                   for k, v in case_rows(doc, chart, margins))
    models = "".join(
        f"<tr><td>{html.escape(m.label)}</td><td>{'defines regions' if role == 'r' else 'comparison'}</td>"
        f"<td>{html.escape(', '.join(f'{k} = {v:g}' for k, v in consts)) or 'defaults'}</td>"
        f"<td>{html.escape(m.citation)}</td></tr>"
        for role, group in (("r", chart.region_models), ("c", chart.comparison_models)) for m, consts in group)
    constants = "".join(
        f"<tr><td>{html.escape(m.label)}</td><td>{html.escape(c.name)}</td><td>{c.default:g}</td>"
        f"<td>{html.escape(c.source)}</td></tr>"
        for m, _ in list(chart.region_models) + list(chart.comparison_models) for c in m.constants)
    warnings = "".join(f"<li class='warn'>{html.escape(w)}</li>" for w in chart.warnings) or "<li>none</li>"
    from lowgmap.physics.chart.summary import section_report

    sec = section_report(doc.case)
    corners = "".join(f"<li>corner {c['index']}: half-angle {c['half_angle_deg']:.4g} deg — "
                      f"{'wicks' if c['wicks'] else 'does not wick'} (Concus–Finn)</li>" for c in sec["corners"])
    margin_html = margin_table_html(margins, st.required_margin) if margins is not None else \
        "<p>No operating point or no regimes: no margins.</p>"
    tp_html = ""
    if test_points is not None and len(test_points):
        pred = chart.classify(test_points["ql_m3_s"].to_numpy(), test_points["qg_m3_s"].to_numpy())
        obs = test_points["observed_regime"].fillna("").astype(str).to_numpy()
        lab = obs != ""
        agree = int(np.sum(obs[lab] == pred[lab]))
        tp_html = (f"<h2>Test points</h2><p>{agree} of {int(lab.sum())} labelled points fall in the regime they "
                   f"were observed in.</p>")
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>{html.escape(doc.case.title)} — lowgmap review report</title>
<style>{_REPORT_CSS}</style></head><body>
<h1>{html.escape(doc.case.title)}</h1>
<p>Revision {html.escape(doc.case.revision)} · {_dt.date.today().isoformat()} · lowgmap {__version__}
{' · <b>INVENTED demonstration case</b>' if doc.invented else ''}</p>
<p class="caution">CAUTION: {html.escape(CAUTION)}</p>
<h2>Regime chart</h2>
<div class="chart">{svg}</div>
<h2>Operating point and margins</h2>
{margin_html}
<h2>Case inputs</h2><table>{rows}</table>
<h2>Geometry and gravity</h2>
<p>{html.escape(sec['gravity']['verdict'])}</p><ul>{corners or '<li>no corners</li>'}</ul>
<h2>Boundary models</h2>
<table><tr><th>model</th><th>role</th><th>constants used</th><th>source</th></tr>{models}</table>
<h3>Default constants and where they come from</h3>
<table><tr><th>model</th><th>constant</th><th>default</th><th>source of the default</th></tr>{constants}</table>
<h2>Assumptions and validity warnings</h2>
<ul>{warnings}</ul>
<p>Boundaries drawn dotted lie outside the range of the data behind their source. Constants marked
"from memory" have not been checked against the document and should be calibrated against test points.</p>
{tp_html}
<p class="caution">CAUTION: {html.escape(CAUTION)}</p>
</body></html>
"""
