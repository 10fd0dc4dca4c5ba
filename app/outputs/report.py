"""Review material: the title block of exported charts and the inputs of the review report.

Every export takes a :class:`lowgmap.physics.studies.study.Study` (the chart, the operating point's
margins and the test-point agreement of one case) together with the chart settings of the case file
(axes, display units, required margin). A case document is accepted too: its study is built once
(:func:`review_inputs`). All numbers come from the same study object the dashboard and the CLI show.
"""
from __future__ import annotations

import math

from lowgmap.app.files.units import convert

__all__ = ["case_rows", "format_flow", "review_inputs", "document_study"]


def document_study(doc, *, test_points=None, chart=None):
    """The :class:`~lowgmap.physics.studies.study.Study` of a case document (its chart built once).

    ``test_points`` (a test-point table, optional) are compared with the chart; ``chart`` reuses a
    chart of ``doc.case`` already built.
    """
    from lowgmap.physics.studies.study import run_study

    return run_study(doc.case, chart=chart, points=test_points)


def review_inputs(source, *, settings=None, invented=None, test_points=None):
    """(study, settings, invented) of what an export shows.

    Parameters
    ----------
    source : Study or CaseDocument   a study (used as it is: its chart is never rebuilt) or a case
                                     document (its study is built once, :func:`document_study`)
    settings : ChartSettings, optional   axes, units and required margin; default: the document's,
                                     or the case-file defaults for a study
    invented : bool, optional        mark the case as an invented demonstration; default: the
                                     document's flag, False for a study
    test_points : table, optional    test points to compare and draw; a study that already holds an
                                     agreement keeps it when this is None

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.studies.study import run_study
    >>> study = run_study(example_case(point=(1e-5, 1e-6)))
    >>> same, settings, invented = review_inputs(study)
    >>> same is study, settings.liquid_flow_unit, invented
    (True, 'mL/min', False)
    """
    from lowgmap.physics.studies.study import Study

    if isinstance(source, Study):
        study = source if test_points is None else source.with_test_points(test_points)
        if settings is None:
            from lowgmap.app.files.casefile import ChartSettings

            settings = ChartSettings()
        return study, settings, bool(invented)
    if not hasattr(source, "case") or not hasattr(source, "settings"):
        raise TypeError(f"an export needs a Study or a CaseDocument, got {type(source).__name__}")
    study = document_study(source, test_points=test_points)
    return (study, source.settings if settings is None else settings,
            bool(source.invented) if invented is None else bool(invented))


def format_flow(q_m3_s: float, unit: str) -> str:
    return f"{convert(q_m3_s, 'flow', unit):.4g} {unit}"


def _deg(x: float) -> str:
    return f"{math.degrees(x):.3g} deg"


def case_rows(source, chart=None, margins=None, *, settings=None, invented=None) -> list[tuple[str, str]]:
    """Rows (field, value) describing the case for a title block or report table.

    ``source`` is a :class:`~lowgmap.physics.studies.study.Study` (its chart, point and margins are
    shown; ``settings`` and ``invented`` as for :func:`review_inputs`) or a case document with,
    optionally, its ``chart`` and the ``margins`` of its operating point.
    """
    from lowgmap.physics.studies.study import Study

    if isinstance(source, Study):
        c = source.case
        chart, margins, point = source.chart, source.margins, source.point
        st = settings
        if st is None:
            from lowgmap.app.files.casefile import ChartSettings

            st = ChartSettings()
        invented = bool(invented)
    else:
        c = source.case
        point = None if c.operating_point is None else (c.operating_point.ql, c.operating_point.qg)
        st = source.settings if settings is None else settings
        invented = bool(source.invented) if invented is None else bool(invented)
    f = c.fluid
    s = c.section
    params = {k: v for k, v in s.to_dict().items() if k != "kind"}
    dims = ", ".join(t for t in (_param_text(k, v) for k, v in params.items()) if t)
    rows = [
        ("title", c.title + (" [INVENTED demonstration case]" if invented and "invented" not in c.title.lower()
                             else "")),
        ("revision", c.revision + (f", author {c.author}" if c.author else "")),
        ("fluid", f"{f.liquid} / {f.gas} at {f.temperature - 273.15:.4g} degC, {f.pressure / 1e3:.4g} kPa "
                  f"(sigma {f.sigma * 1e3:.4g} mN/m, rho_L {f.rho_l:.4g} kg/m^3, mu_L {f.mu_l * 1e3:.4g} mPa s)"),
        ("section", f"{s.kind}: {dims}; length {c.length:.4g} m"),
        ("wetting", f"contact angle {_deg(c.wetting.contact_angle)}"),
        ("residual acceleration", f"{c.g:.3g} m/s^2 ({c.g_over_g0:.3g} g0)"),
    ]
    if chart is not None:
        models = "; ".join(m.label for m, _ in list(chart.region_models) + list(chart.comparison_models))
        rows.append(("models", models or "none"))
    if point is not None:
        ql, qg = point
        rows.append(("operating point", f"Q_L {format_flow(ql, st.liquid_flow_unit)}, "
                                        f"Q_G {format_flow(qg, st.gas_flow_unit)}"
                     + (f" -> {chart.regime_at(ql, qg)}" if chart is not None else "")))
    if margins is not None:
        lim = next((b.label for b in margins.boundaries if b.name == margins.limiting_boundary),
                   margins.limiting_boundary or "no boundary in the chart range")
        rows.append(("symmetric margin", f"±{100 * margins.symmetric_margin:.1f} % (limited by {lim}); "
                                         f"required ±{100 * st.required_margin:.0f} %"))
    return rows


def _param_text(key: str, value) -> str:
    if "angle" in key and isinstance(value, float):
        return f"{key.replace('_', ' ')} {_deg(value)}"
    if isinstance(value, float):
        return f"{key.replace('_', ' ')} {value * 1e3:.4g} mm"
    if key == "open_edges":
        return f"open edges {list(value)}" if value else ""
    if key == "vertices":
        return "vertices [mm] " + " ".join(f"({x * 1e3:.3g}, {y * 1e3:.3g})" for x, y in value)
    return f"{key.replace('_', ' ')} {value}"
