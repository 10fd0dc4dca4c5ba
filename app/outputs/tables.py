"""HTML tables shared by the dashboard and the review report: the margin table of the operating point.

The dashboard's margin pane and the exported review report show the same table, built here from a
:class:`lowgmap.physics.chart.margins.PointMargins` (the margins of a
:class:`lowgmap.physics.studies.study.Study`), so the two never disagree. No panel or bokeh here.
"""
from __future__ import annotations

import html
import math

from lowgmap.app.formatting import format_factor, format_percent

__all__ = ["margin_table_html", "worst_case_html", "MARGIN_CSS"]

#: Styles of the margin table (the dashboard's pane and the review report).
MARGIN_CSS = """
.margin-table {border-collapse: collapse; font-size: 12px; width: 100%;}
.margin-table th, .margin-table td {border: 1px solid #ccc; padding: 3px 6px; text-align: right;}
.margin-table td:first-child, .margin-table th:first-child {text-align: left;}
.margin-table tr.too-close td {background: #fde0dc;}
.margin-summary {font-size: 14px; margin-bottom: 6px; padding: 6px; border-radius: 4px; background: #eef6ee;}
.margin-summary.below-required {background: #fde0dc; border: 2px solid #C00000;}
.margin-note {font-size: 11px; color: #555;}
.worst-case {font-size: 13px; margin-top: 6px; padding: 6px; border-radius: 4px; background: #f3f0fa;}
.worst-case.leaves-regime {background: #fde0dc; border: 2px solid #C00000;}
"""


def _finite(f) -> bool:
    return f is not None and math.isfinite(f)


def margin_table_html(margins, required: float, worst_case=None) -> str:
    """The margin table as HTML: one row per boundary, the symmetric margin with its limiting line.

    Factors are Q_cross/Q along each axis (the other flow held); a row is highlighted when the
    boundary lies closer than the required margin on either axis. Cells are written with
    :func:`lowgmap.app.formatting.format_factor` (as in ``lowgmap margin``); the exact
    numbers are carried in ``data-`` attributes (for tests and scripts).

    Parameters
    ----------
    margins : PointMargins or None   :func:`lowgmap.physics.chart.margins.point_margins` of the point
    required : float                 required symmetric margin (fraction, 0.2 = ±20 %)
    worst_case : WorstCaseMargins, optional   the point's worst case over the constants' bands
                                     (``Study.worst_case``): written under the table, in the words of
                                     :func:`lowgmap.app.outputs.report.worst_case_rows` (for the
                                     dashboard's margin pane)

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.studies.study import run_study
    >>> study = run_study(example_case(point=(1e-5, 1e-6)))
    >>> text = margin_table_html(study.margins, 0.2)
    >>> "class='margin-table'" in text, "data-regime='dispersed bubbles'" in text
    (True, True)
    >>> margin_table_html(None, 0.2)
    '<p>No regimes on this chart: no margins.</p>'
    """
    if margins is None:
        return "<p>No regimes on this chart: no margins.</p>"
    m = margins.symmetric_margin
    low = m is not None and m < required
    head = (f"<div class='margin-summary{' below-required' if low else ''}' data-margin='{m:.9g}' "
            f"data-regime='{html.escape(margins.regime)}' data-ql='{margins.ql:.12g}' data-qg='{margins.qg:.12g}' "
            f"data-limiting='{html.escape(margins.limiting_boundary or '')}'>"
            f"Regime at the point: <b>{html.escape(margins.regime)}</b><br>"
            f"Symmetric margin: <b class='sym-margin'>±{format_percent(m)}</b> "
            f"(limited by {html.escape(_label_of(margins, margins.limiting_boundary))}); "
            f"required ±{format_percent(required)}"
            + (" — required margin <b>NOT MET</b>" if low else "") + "</div>")
    rows = []
    for b in margins.boundaries:
        close = any(_finite(f) and ((1 <= f < 1 + required) or (1 - required < f < 1))
                    for f in (b.ql_factor_up, b.ql_factor_down, b.qg_factor_up, b.qg_factor_down))
        cls = "margin-row" + (" too-close" if close and b.role == "regions" else "")
        dist = f"{b.log_distance:.3f}" if _finite(b.log_distance) else "—"
        rows.append(
            f"<tr class='{cls}' data-name='{html.escape(b.name)}' data-ql-up='{_num(b.ql_factor_up)}' "
            f"data-ql-down='{_num(b.ql_factor_down)}' data-qg-up='{_num(b.qg_factor_up)}' "
            f"data-qg-down='{_num(b.qg_factor_down)}'>"
            f"<td>{html.escape(b.label)}{'' if b.role == 'regions' else ' <i>(comparison)</i>'}</td>"
            f"<td>{_factor(b.ql_factor_up)}</td><td>{_factor(b.ql_factor_down)}</td>"
            f"<td>{_factor(b.qg_factor_up)}</td><td>{_factor(b.qg_factor_down)}</td>"
            f"<td>{dist}</td></tr>")
    table = ("<table class='margin-table'><thead><tr><th>boundary</th><th>Q_L up</th><th>Q_L down</th>"
             "<th>Q_G up</th><th>Q_G down</th><th>log<sub>10</sub> distance</th></tr></thead><tbody>"
             + "".join(rows) + "</tbody></table>"
             "<p class='margin-note'>Factor = flow at the crossing / present flow, the other flow held "
             "(1.8 = may rise 80 %); — = no crossing inside the chart range.</p>")
    return head + table + worst_case_html(worst_case, {b.name: b.label for b in margins.boundaries})


def worst_case_html(wc, labels=None) -> str:
    """The worst case over the constants' bands as an HTML block (empty without one): the rows of
    :func:`lowgmap.app.outputs.report.worst_case_rows`, every value escaped; the exact margin in ``data-``.
    ``labels``: {line name: label} for the words (default: the names). The review pack shows these rows in
    its point table instead."""
    if wc is None:
        return ""
    from lowgmap.app.outputs.report import worst_case_rows

    rows = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>"
                   for k, v in worst_case_rows(wc, labels=labels))
    cls = "worst-case" + (" leaves-regime" if wc.leaves_regime else "")
    return (f"<div class='{cls}' data-worst-margin='{wc.worst_case:.9g}' "
            f"data-limiting-constant='{html.escape(wc.limiting_constant or '')}'><table>{rows}</table></div>")


def _factor(f) -> str:
    """A factor cell: the one factor formatter of every output, a dash where there is no crossing."""
    return format_factor(f, none="—")


def _num(f) -> str:
    return f"{f:.9g}" if _finite(f) else ""


def _label_of(margins, name) -> str:
    if not name:
        return "no boundary in the chart range"
    for b in margins.boundaries:
        if b.name == name:
            return b.label
    return str(name)
