"""Exports for a design review: annotated chart (PNG/SVG/PDF) and the review report (HTML).

Each export takes a :class:`lowgmap.physics.studies.study.Study` (the dashboard passes its session's
study, so an export never rebuilds the chart) or a case document (the CLI; its study is built once,
see :func:`lowgmap.app.outputs.report.review_inputs`). A file exported from either shows the same
numbers as the screen.
"""
from __future__ import annotations

import datetime as _dt
import html
from pathlib import Path

import numpy as np

from lowgmap.app import CAUTION, __version__

from lowgmap.app.files.atomic import write_atomic
from lowgmap.app.outputs.chartview import chart_view, regime_style
from lowgmap.app.outputs.render import render_chart
from lowgmap.app.outputs.report import case_rows, format_flow, review_inputs
from lowgmap.app.outputs.tables import MARGIN_CSS, margin_table_html

__all__ = ["compose", "chart_bytes", "write_chart", "report_html", "test_point_marks"]


def compose(doc):
    """(chart, margins) of a case document or study; margins is None without an operating point or regimes."""
    study, _, _ = review_inputs(doc)
    return study.chart, study.margins


def _marks(chart, view, ql, qg, observed, predicted) -> list[dict]:
    styles = {name: regime_style(i)[0] for i, name in enumerate(chart.regime_names)}
    x, y = view.to_display(np.asarray(ql, dtype=float), np.asarray(qg, dtype=float))
    out = []
    for xi, yi, o, p in zip(np.asarray(x), np.asarray(y), observed, predicted):
        agree = (o == p) if o else True
        out.append({"x": float(xi), "y": float(yi), "colour": styles.get(o, "#ffffff"),
                    "edge": "#222222" if agree else "#C00000", "marker": "o" if agree else "X",
                    "size": 40 if agree else 70})
    return out


def test_point_marks(chart, view, points) -> list[dict]:
    """Markers for test points: fill = observed regime's colour, red edge where the chart disagrees.

    ``points`` is a test-point table (``ql_m3_s``, ``qg_m3_s``, ``observed_regime``) or an
    :class:`~lowgmap.physics.studies.agreement.Agreement` (its points, observed regimes after the
    regime map, and the regimes it found on ``chart``).
    """
    if points is None:
        return []
    if hasattr(points, "confusion_all"):  # an Agreement: the regimes are already found
        pts = points.points
        return _marks(chart, view, [p.ql for p in pts], [p.qg for p in pts], [p.observed for p in pts],
                      [p.predicted for p in pts])
    if len(points) == 0:
        return []
    ql = points["ql_m3_s"].to_numpy()
    qg = points["qg_m3_s"].to_numpy()
    return _marks(chart, view, ql, qg, points["observed_regime"].fillna("").astype(str), chart.classify(ql, qg))


def _point_label(study, settings):
    ql, qg = study.point
    label = (f"{study.chart.regime_at(ql, qg)}\nQ_L {format_flow(ql, settings.liquid_flow_unit)}, "
             f"Q_G {format_flow(qg, settings.gas_flow_unit)}")
    if study.margins is not None:
        label += f"\n±{100 * study.margins.symmetric_margin:.1f} % margin"
    return label


def chart_bytes(source, fmt: str, *, axes=None, log_axes=None, with_point=True, test_points=None,
                settings=None, invented=None) -> bytes:
    """The annotated chart as PNG, SVG or PDF bytes (title block and caution included).

    Parameters
    ----------
    source : Study or CaseDocument   what to draw (a study's chart is used as it is, never rebuilt)
    fmt : "png" | "svg" | "pdf"
    axes, log_axes : optional        override the settings' axes kind and scale
    with_point : bool                draw the operating point
    test_points : table, optional    test points to draw (compared on the study's chart); default:
                                     the study's agreement, if any
    settings, invented : optional    see :func:`lowgmap.app.outputs.report.review_inputs`

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.studies.study import run_study
    >>> study = run_study(example_case(point=(1e-5, 1e-6), title="10 mm water/air tube"))
    >>> svg = chart_bytes(study, "svg").decode("utf-8")
    >>> "10 mm water/air tube" in svg, "dispersed bubbles" in svg, "CAUTION" in svg
    (True, True, True)
    """
    study, st, inv = review_inputs(source, settings=settings, invented=invented, test_points=test_points)
    return _chart_bytes(study, st, inv, fmt, axes=axes, log_axes=log_axes, with_point=with_point)


def _chart_bytes(study, st, invented, fmt, *, axes=None, log_axes=None, with_point=True) -> bytes:
    chart = study.chart
    show_point = study.point is not None and with_point
    view = chart_view(chart, axes=axes or st.axes, log_axes=st.log_axes if log_axes is None else log_axes,
                      ql_unit=st.liquid_flow_unit, qg_unit=st.gas_flow_unit,
                      point=study.point if show_point else None)
    rows = case_rows(study, settings=st, invented=invented)
    return render_chart(view, None, fmt=fmt, title=study.case.title, title_block=rows,
                        point_label=_point_label(study, st) if show_point else None,
                        extra_points=test_point_marks(chart, view, study.agreement))


def write_chart(source, path, *, settings=None, invented=None, test_points=None, **kwargs):
    """Write the chart to ``path`` (format from the suffix) atomically; returns (chart, margins).

    ``source``, ``settings``, ``invented``, ``test_points`` and the other keywords as for
    :func:`chart_bytes`.
    """
    p = Path(path)
    fmt = p.suffix.lstrip(".").lower()
    study, st, inv = review_inputs(source, settings=settings, invented=invented, test_points=test_points)
    data = _chart_bytes(study, st, inv, fmt, **kwargs)
    write_atomic(p, data)
    return study.chart, study.margins


_REPORT_CSS = """
body {font-family: Helvetica, Arial, sans-serif; max-width: 1100px; margin: 1.5em auto; color: #111;}
h1 {font-size: 1.5em;} h2 {font-size: 1.15em; border-bottom: 1px solid #aaa; padding-bottom: 2px;}
table {border-collapse: collapse; font-size: 13px;} td, th {border: 1px solid #bbb; padding: 3px 7px;}
.caution {border: 2px solid #8B0000; color: #8B0000; padding: 8px; font-weight: bold;}
.warn {color: #8B0000;} .low {background: #fde0dc;}
"""


def report_html(source, *, test_points=None, settings=None, invented=None) -> str:
    """A self-contained HTML review report: chart, margin table, case inputs, assumptions, warnings.

    ``source`` is a :class:`~lowgmap.physics.studies.study.Study` (its chart is used as it is) or a
    case document; ``test_points``, ``settings`` and ``invented`` as for :func:`chart_bytes`. The
    test-point section shows the study's agreement
    (:func:`lowgmap.physics.studies.agreement.agreement`).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.studies.study import run_study
    >>> page = report_html(run_study(example_case(point=(1e-5, 1e-6))))
    >>> page.startswith("<!DOCTYPE html>"), "margin-table" in page, "<svg" in page
    (True, True, True)
    """
    from lowgmap.physics.chart.summary import section_report

    study, st, inv = review_inputs(source, settings=settings, invented=invented, test_points=test_points)
    chart, margins, case = study.chart, study.margins, study.case
    svg = _chart_bytes(study, st, inv, "svg").decode("utf-8")
    svg = svg[svg.index("<svg"):]
    rows = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(str(v))}</td></tr>"
                   for k, v in case_rows(study, settings=st, invented=inv))
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
    sec = section_report(case)
    corners = "".join(f"<li>corner {c['index']}: half-angle {c['half_angle_deg']:.4g} deg — "
                      f"{'wicks' if c['wicks'] else 'does not wick'} (Concus–Finn)</li>" for c in sec["corners"])
    margin_html = margin_table_html(margins, st.required_margin) if margins is not None else \
        "<p>No operating point or no regimes: no margins.</p>"
    tp_html = _agreement_html(study.agreement)
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>{html.escape(case.title)} — lowgmap review report</title>
<style>{_REPORT_CSS}{MARGIN_CSS}</style></head><body>
<h1>{html.escape(case.title)}</h1>
<p>Revision {html.escape(case.revision)} · {_dt.date.today().isoformat()} · lowgmap {__version__}
{' · <b>INVENTED demonstration case</b>' if inv else ''}</p>
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


def _agreement_html(res) -> str:
    """The report's test-point section from an Agreement (empty without test points)."""
    if res is None or res.n_points == 0:
        return ""
    ca, cv = res.confusion_all, res.confusion_valid

    def pct(f):
        return "—" if f is None else f"{100 * f:.0f} %"

    text = (f"<h2>Test points</h2><p class='agreement' data-agree='{ca.agreeing}' data-total='{ca.compared}' "
            f"data-valid='{res.n_valid}'>{ca.agreeing} of {ca.compared} labelled points ({pct(ca.fraction)}) fall "
            f"in the regime they were observed in; valid points only: {cv.agreeing} of {cv.compared} "
            f"({pct(cv.fraction)}). {res.n_points} points in all, {res.n_valid} valid for a low-gravity "
            f"conclusion.</p>")
    if res.unknown_labels:
        text += ("<p>Observed labels that are not regimes of this chart (left out until mapped): "
                 + html.escape(", ".join(f"{k} ({c})" for k, c in res.unknown_labels)) + "</p>")
    return text

