"""Exports for a design review: annotated chart (PNG/SVG/PDF) and the review report (HTML).

Each export takes a :class:`lowgmap.physics.studies.study.Study` (the dashboard passes its session's
study, so an export never rebuilds the chart) or a case document (the CLI; its study is built once,
see :func:`lowgmap.app.outputs.report.review_inputs`). A file exported from either shows the same
numbers as the screen.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from lowgmap.app.files.atomic import write_atomic
from lowgmap.app.outputs import styles as _styles
from lowgmap.app.outputs.chartview import chart_view
from lowgmap.app.outputs.report import case_rows, format_flow, review_inputs
from lowgmap.app.outputs.tables import MARGIN_CSS, margin_table_html

__all__ = ["compose", "chart_bytes", "chart_figure", "write_chart", "report_html", "render_review_html",
           "test_point_marks", "human_rows", "study_bands"]


def compose(doc):
    """(chart, margins) of a case document or study; margins is None without an operating point or regimes."""
    study, _, _ = review_inputs(doc)
    return study.chart, study.margins


def _marks(view, ql, qg, observed, predicted, platforms, valid, agrees, regimes) -> list[dict]:
    """Marks of test points for :func:`lowgmap.app.outputs.render.chart_figure` (see :func:`test_point_marks`)."""
    x, y = view.to_display(np.asarray(ql, dtype=float), np.asarray(qg, dtype=float))
    out = []
    for xi, yi, o, p, pl, ok, ag in zip(np.atleast_1d(x), np.atleast_1d(y), observed, predicted, platforms, valid,
                                        agrees):
        o = str(o or "")
        if o and o in regimes:
            colour, fill_key = (view.regime_styles.get(o) or _styles.regime_style(o))[0], o
        elif o:
            colour, fill_key = "#ffffff", "observed label is not a regime of this chart"
        else:
            colour, fill_key = "#dddddd", "no observed regime"
        marker = _styles.platform_marker(pl)
        out.append({"x": float(xi), "y": float(yi), "kind": "test point", "marker": marker.mpl,
                    "platform": marker.label, "colour": colour, "fill_key": fill_key, "edge": "#222222",
                    "size": 44, "ring": ag is False, "faded": not bool(ok)})
    return out


def test_point_marks(chart, view, points) -> list[dict]:
    """Marks for test points: marker = platform class, fill = observed regime, ring = disagrees.

    ``points`` is an :class:`~lowgmap.physics.studies.agreement.Agreement` (its points: platform,
    observed regime after the regime map, the chart's regime, whether the point is valid and whether
    it agrees, all as the agreement module decided them) or a plain test-point table (``ql_m3_s``,
    ``qg_m3_s``, ``observed_regime``, optionally ``platform``; compared here only by regime name).
    Markers come from :func:`lowgmap.app.outputs.styles.platform_marker`, fills from the regime's
    style on ``view``; points that are not valid for a low-gravity conclusion are drawn faded.
    """
    if points is None:
        return []
    regimes = set(chart.regime_names)
    if hasattr(points, "confusion_all"):  # an Agreement: one source for every per-point result
        pts = points.points
        return _marks(view, [p.ql for p in pts], [p.qg for p in pts], [p.observed for p in pts],
                      [p.predicted for p in pts], [p.platform for p in pts], [p.valid for p in pts],
                      [p.agrees for p in pts], regimes)
    if len(points) == 0:
        return []
    ql = points["ql_m3_s"].to_numpy()
    qg = points["qg_m3_s"].to_numpy()
    obs = points["observed_regime"].fillna("").astype(str).tolist()
    pred = [str(p) for p in np.atleast_1d(chart.classify(ql, qg))]
    plat = points["platform"].fillna("").astype(str).tolist() if "platform" in points else [""] * len(obs)
    agrees = [(o == p) if o in regimes else None for o, p in zip(obs, pred)]
    return _marks(view, ql, qg, obs, pred, plat, [True] * len(obs), agrees, regimes)


def _typed_flow(text, q: float, unit: str) -> str:
    """A flow as the engineer typed it, with the display-unit value when the units differ:
    '400 sccm (0.4323 L/min)'; '3 L/min' as it is."""
    shown = format_flow(q, unit)
    t = " ".join(str(text).split())
    parts = t.split(None, 1)
    if len(parts) == 2 and parts[1] == unit:
        return t
    return f"{t} ({shown})"


def _typed_flows(study, st, document):
    """(Q_L text, Q_G text) as typed in the case file, when the study shows the file's operating point."""
    if document is None or study.point is None:
        return None
    op = getattr(document.case, "operating_point", None)
    if op is None or tuple(study.point) != (float(op.ql), float(op.qg)):
        return None
    try:
        tl, tg = document.data["operating_point"]["liquid_flow"], document.data["operating_point"]["gas_flow"]
    except (KeyError, TypeError):
        return None
    if not isinstance(tl, str) or not isinstance(tg, str):
        return None
    ql, qg = study.point
    return _typed_flow(tl, ql, st.liquid_flow_unit), _typed_flow(tg, qg, st.gas_flow_unit)


def _flow_texts(study, st, document):
    typed = _typed_flows(study, st, document)
    if typed is not None:
        return typed
    ql, qg = study.point
    return format_flow(ql, st.liquid_flow_unit), format_flow(qg, st.gas_flow_unit)


def _verdict(study, st):
    """The verdict every review output shows (:func:`lowgmap.app.outputs.report.report_verdict`)."""
    from lowgmap.app.outputs import report as _report

    try:
        if hasattr(_report, "report_verdict"):
            return _report.report_verdict(study, st)
        return study.verdict(st.required_margin, getattr(st, "intended_regime", None) or None)
    except ValueError:  # an intended regime the chart does not have: the title block says so
        return None


def _point_label(study, settings, document=None):
    """Callout text of the operating point and whether a verdict fails (drawn in red)."""
    from lowgmap.app.formatting import format_percent

    ql, qg = study.point
    tl, tg = _flow_texts(study, settings, document)
    lines = [study.chart.regime_at(ql, qg), f"Q_L {tl}", f"Q_G {tg}"]
    alert = False
    if study.margins is not None:
        v = _verdict(study, settings)
        m = study.margins.symmetric_margin
        if v is None:
            lines.append(f"margin ±{format_percent(m)}")
        else:
            shown = (f"at least ±{format_percent(v.margin)}" if v.limiting_boundary is None
                     else f"±{format_percent(v.margin)}")
            lines.append(f"margin {shown}, required ±{format_percent(v.required)}: {v.margin_status}")
            if v.intended_regime:
                lines.append(v.regime_status)
            alert = v.margin_status != "met" or v.in_intended_regime is False
    return "\n".join(lines), alert


def _chart_rows(study, st, invented, document=None) -> list[tuple[str, str]]:
    """The title block: :func:`lowgmap.app.outputs.report.case_rows` in human words (:func:`human_rows`)."""
    flows = _flow_texts(study, st, document) if study.point is not None else None
    return human_rows(case_rows(study, settings=st, invented=invented), study.case, document=document, flows=flows)


def human_rows(rows, case, *, document=None, flows=None) -> list[tuple[str, str]]:
    """Title-block rows with the section kind by its name, and flows and fluids as typed in the case file.

    ``rows`` are (field, value) pairs of :func:`lowgmap.app.outputs.report.case_rows`; ``document``
    the case file (fluid names as written), ``flows`` the (Q_L, Q_G) texts of the operating point.
    Rows this does not know are kept as they are.
    """
    from lowgmap.physics.geometry.sections import section_label

    kind = case.section.kind
    out = []
    for k, v in rows:
        v = str(v)
        if k == "section" and v.startswith(f"{kind}:"):
            try:
                v = section_label(kind) + v[len(kind):]
            except ValueError:
                pass
        elif k == "operating point" and flows is not None:
            rest = v[v.index(" -> "):] if " -> " in v else ""
            v = f"Q_L {flows[0]}, Q_G {flows[1]}{rest}"
        elif k == "fluid" and document is not None:
            f = case.fluid
            try:
                typed = (str(document.data["fluid"]["liquid"]), str(document.data["fluid"]["gas"]))
            except (KeyError, TypeError):
                typed = None
            head = f"{f.liquid} / {f.gas}"
            src = getattr(getattr(document, "case", None), "fluid", None)
            same = src is not None and (src.liquid, src.gas) == (f.liquid, f.gas)  # names typed for this fluid
            if typed and same and v.startswith(head):
                v = f"{typed[0]} / {typed[1]}" + v[len(head):]
        out.append((k, v))
    return out


def chart_bytes(source, fmt: str, *, axes=None, log_axes=None, with_point=True, test_points=None,
                settings=None, invented=None, document=None, bands=None) -> bytes:
    """The annotated chart as PNG (300 dpi), SVG or PDF bytes (title block and caution included).

    Parameters
    ----------
    source : Study or CaseDocument   what to draw (a study's chart is used as it is, never rebuilt)
    fmt : "png" | "svg" | "pdf"
    axes, log_axes : optional        override the settings' axes kind and scale
    with_point : bool                draw the operating point
    test_points : table, optional    test points to draw (compared on the study's chart); default:
                                     the study's agreement, if any
    settings, invented : optional    see :func:`lowgmap.app.outputs.report.review_inputs`
    document : CaseDocument, optional   the case file behind a study: the flows and fluids are shown
                                     as typed there (default: ``source`` when it is a document)
    bands : bool, optional           draw each boundary's band (the region its line sweeps as its
                                     constants move over their ranges, :attr:`Study.bands
                                     <lowgmap.physics.studies.study.Study.bands>`); default (None): drawn
                                     whenever some line of the chart has a banded constant. The bands of
                                     the corner family take tens of seconds the first time (then cached
                                     with the study's chart); ``bands=False`` skips them.

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
    return _chart_bytes(study, st, inv, fmt, axes=axes, log_axes=log_axes, with_point=with_point,
                        document=_document_of(source, document), bands=bands)


def _document_of(source, document):
    if document is not None:
        return document
    return source if hasattr(source, "data") and hasattr(source, "settings") else None


def chart_figure(source, *, axes=None, log_axes=None, with_point=True, test_points=None, settings=None,
                 invented=None, document=None, bands=None):
    """The annotated chart as a matplotlib Figure (what :func:`chart_bytes` writes); arguments as there."""
    study, st, inv = review_inputs(source, settings=settings, invented=invented, test_points=test_points)
    return _chart_figure(study, st, inv, axes=axes, log_axes=log_axes, with_point=with_point,
                         document=_document_of(source, document), bands=bands)


def study_bands(study, bands=None):
    """The bands an export of ``study`` draws: the study's own (:attr:`Study.bands
    <lowgmap.physics.studies.study.Study.bands>`) unless ``bands`` is False; None when there are none.

    ``bands`` None (the default of every export) draws them whenever some line has a banded constant.
    """
    if bands is False or (bands is None and not getattr(study, "has_bands", False)):
        return None
    return getattr(study, "bands", None)


def _chart_figure(study, st, invented, *, axes=None, log_axes=None, with_point=True, document=None, bands=None):
    from lowgmap.app.outputs.render import chart_figure as _figure

    chart = study.chart
    show_point = study.point is not None and with_point
    view = chart_view(chart, axes=axes or st.axes, log_axes=st.log_axes if log_axes is None else log_axes,
                      ql_unit=st.liquid_flow_unit, qg_unit=st.gas_flow_unit,
                      point=study.point if show_point else None, bands=study_bands(study, bands))
    rows = _chart_rows(study, st, invented, document)
    label, alert = _point_label(study, st, document) if show_point else (None, False)
    return _figure(view, title=study.case.title, title_block=rows, point_label=label, point_alert=alert,
                   extra_points=test_point_marks(chart, view, study.agreement))


def _chart_bytes(study, st, invented, fmt, *, axes=None, log_axes=None, with_point=True, document=None,
                 dpi=None, bands=None) -> bytes:
    from lowgmap.app.outputs.render import EXPORT_DPI, FORMATS, figure_bytes

    if fmt not in FORMATS:
        raise ValueError(f"output format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    fig = _chart_figure(study, st, invented, axes=axes, log_axes=log_axes, with_point=with_point,
                        document=document, bands=bands)
    return figure_bytes(fig, fmt, dpi=dpi or EXPORT_DPI)


def write_chart(source, path, *, settings=None, invented=None, test_points=None, **kwargs):
    """Write the chart to ``path`` (format from the suffix) atomically; returns (chart, margins).

    ``source``, ``settings``, ``invented``, ``test_points`` and the other keywords (``document`` and
    ``bands`` included) as for :func:`chart_bytes`.
    """
    p = Path(path)
    fmt = p.suffix.lstrip(".").lower()
    study, st, inv = review_inputs(source, settings=settings, invented=invented, test_points=test_points)
    kwargs["document"] = _document_of(source, kwargs.get("document"))
    data = _chart_bytes(study, st, inv, fmt, **kwargs)
    write_atomic(p, data)
    return study.chart, study.margins


def report_html(source, *, test_points=None, settings=None, invented=None, document=None, point_file=None,
                date=None) -> str:
    """The review pack as one self-contained HTML page (the chart embedded as a PNG data URI).

    The page is the template ``templates/review.html`` (Jinja2, autoescaping on) filled with
    :func:`lowgmap.app.outputs.report.review_pack`; the dashboard's report download and
    ``lowgmap report -o review.html`` both come here, so for the same study they are the same page.

    Parameters
    ----------
    source : Study or CaseDocument   a study is used as it is (its chart is never rebuilt); a case
                                     document's study is built once
    test_points, settings, invented : optional   as for :func:`chart_bytes`; the test-point section shows
                                     the study's agreement (:func:`lowgmap.physics.studies.agreement.agreement`)
    document, point_file, date : optional   the case file behind a study (inputs as written, revision
                                     history), the test-point file read (rows set aside), the date printed;
                                     see :func:`lowgmap.app.outputs.report.review_pack`

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.studies.study import run_study
    >>> page = report_html(run_study(example_case(point=(1e-5, 1e-6))))
    >>> page.startswith("<!DOCTYPE html>"), "margin-table" in page, 'src="data:image/png;base64,' in page
    (True, True, True)
    """
    from lowgmap.app.outputs.report import review_pack

    study, st, inv = review_inputs(source, settings=settings, invented=invented, test_points=test_points)
    pack = review_pack(study, settings=st, invented=inv, document=document if document is not None else
                       (None if source is study else source), point_file=point_file, date=date)
    return render_review_html(pack, _chart_bytes(study, st, inv, "png"))


def render_review_html(pack, chart_png: bytes) -> str:
    """Fill the review template with ``pack`` (:class:`~lowgmap.app.outputs.report.ReviewPack`) and the chart PNG."""
    import base64

    from markupsafe import Markup

    template = _templates().get_template("review.html")
    margins = pack.study.margins if pack.study is not None else None
    # the margin table the dashboard shows (lowgmap.app.outputs.tables, which escapes every value it writes)
    table = None if margins is None else Markup(margin_table_html(margins, pack.settings.required_margin))
    return template.render(pack=pack, chart_uri="data:image/png;base64," + base64.b64encode(chart_png).decode("ascii"),
                           margin_table=table, margin_css=Markup(MARGIN_CSS))


def _templates():
    """The Jinja2 environment of the report templates (autoescaping on for every template)."""
    import jinja2

    global _ENV
    if _ENV is None:
        _ENV = jinja2.Environment(loader=jinja2.FileSystemLoader(str(Path(__file__).with_name("templates"))),
                                  autoescape=True, undefined=jinja2.StrictUndefined, keep_trailing_newline=True)
    return _ENV


_ENV = None
