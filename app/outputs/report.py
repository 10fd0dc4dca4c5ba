"""Review material: the title block of exported charts and the content of the review pack.

Every export takes a :class:`lowgmap.physics.studies.study.Study` (the chart, the operating point's
margins and the test-point agreement of one case) together with the chart settings of the case file
(axes, display units, required margin). A case document is accepted too: its study is built once
(:func:`review_inputs`). All numbers come from the same study object the dashboard and the CLI show.

The review pack (``lowgmap report``, the dashboard's report download) is collected here once, as
plain text and rows (:func:`review_pack`), and written by two renderers that only lay it out: the
HTML template (:func:`lowgmap.app.outputs.exports.report_html`) and the PDF writer
(:mod:`lowgmap.app.outputs.pdf`). Every verdict word comes from
:meth:`lowgmap.physics.studies.study.Study.verdict`, every agreement count from the study's
:class:`~lowgmap.physics.studies.agreement.Agreement`, and every number is written by the formatters
of :mod:`lowgmap.app.formatting`, so the two documents, the command line and the screen read
the same.
"""
from __future__ import annotations

import datetime as _dt
import difflib
import math
import re
from dataclasses import dataclass, field

from lowgmap.app import CAUTION, __version__
from lowgmap.app.files.units import convert
from lowgmap.app.formatting import format_factor, format_percent, format_point_change, format_share

__all__ = ["case_rows", "format_flow", "review_inputs", "document_study", "review_pack", "ReviewPack",
           "VerdictLine", "AgreementSection", "report_verdict", "suggest_regime", "FAILING_WORDS",
           "worst_case_margin_text", "worst_case_rows", "constant_band_rows"]


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
        ("orientation", c.orientation.describe()),
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


# =============================================================================================
# the review pack

#: Verdict words that mean the design fails a check (shown in red, bold, in every document).
FAILING_WORDS = ("NOT MET", "NOT IN THE INTENDED REGIME", "not established")

#: Text colour of a failing verdict (the same red as the margin table's "below required" frame).
FAIL_COLOUR = "#C00000"


@dataclass(frozen=True)
class VerdictLine:
    """One verdict in words: what is judged, the word, whether it fails, and the numbers behind it."""

    label: str
    status: str
    failing: bool
    detail: str = ""


@dataclass(frozen=True)
class AgreementSection:
    """The test-point part of the review pack, every count read from one
    :class:`~lowgmap.physics.studies.agreement.Agreement`.

    Attributes
    ----------
    counts : dict       n_points, n_valid, agreeing/compared for the valid points and for all points
                        (the agreement's confusion matrices), not_compared (points whose label is not a
                        chart regime or is empty)
    summary : str       the counts in one sentence
    criteria : str      the validity checks applied (Bond number, low-g time), with their sources
    regime_map : list of (str, str)   file label -> chart regime used
    points : list of tuples   per point: test id, Q_L, Q_G, platform, observed, chart regime, valid, result
    set_aside : list of (str, str, str)   (what, kind, reason) for every row or point set aside:
                        file rows the reader set aside, points not valid for their platform, labels that
                        are not chart regimes (with the mapping that would fix them)
    confusion_valid, confusion_all : (header, rows)   confusion matrices as tables
    disagreeing : list of (str, list of str)   boundary label, disagreeing points attributed to it
    """

    counts: dict
    summary: str
    criteria: str
    regime_map: list
    points: list
    set_aside: list
    confusion_valid: tuple
    confusion_all: tuple
    disagreeing: list
    source: str = ""


@dataclass(frozen=True)
class ReviewPack:
    """Everything a review pack shows, as text and rows (see :func:`review_pack`).

    Both renderers (HTML template, PDF) only lay these fields out; none computes or rewords a number.
    """

    title: str
    case_title: str
    case_file: str
    revision: str
    author: str
    date: str
    version: str
    caution: str
    invented: bool
    description: str
    headline: str
    verdicts: list
    verdict_basis: str
    verdict_limits: list
    point_rows: list
    regime: str | None
    symmetric_margin: str | None
    limiting_boundary: str | None
    margin_rows: list
    margin_note: str
    inputs: list
    inputs_note: str
    fluid_rows: list
    geometry: list
    models: list
    constants: list
    validity_ranges: list
    scheme: str
    warnings: list
    agreement: AgreementSection | None
    assumptions: list
    history: list
    history_note: str
    worst_case: str | None = None
    worst_case_limiting: str | None = None
    settings: object = field(default=None, repr=False, compare=False)
    study: object = field(default=None, repr=False, compare=False)

    @property
    def failing(self) -> bool:
        """True when any verdict fails."""
        return any(v.failing for v in self.verdicts)

    def verdict_dict(self) -> dict:
        """The verdicts and the point's numbers as printed (for ``--json`` output and tests)."""
        return {"regime": self.regime, "symmetric_margin": self.symmetric_margin,
                "limiting_boundary": self.limiting_boundary, "worst_case_margin": self.worst_case,
                "worst_case_limiting_constant": self.worst_case_limiting,
                "verdicts": {v.label: v.status for v in self.verdicts}, "headline": self.headline,
                "agreement": None if self.agreement is None else dict(self.agreement.counts)}


def report_verdict(study, settings):
    """The :class:`~lowgmap.physics.chart.margins.Verdict` a review pack shows (None without margins).

    The required margin is the settings' (the case file's, or the value set on screen or with
    ``--required-margin``); the intended regime is the case's (``case.intended_regime``), else the one
    the settings carry (``[chart] intended_regime``), else none.
    """
    if study.margins is None:
        return None
    intended = (getattr(study.case, "intended_regime", "") or getattr(settings, "intended_regime", None)
                or None)
    return study.verdict(settings.required_margin, intended)


def _margin_text(m: float, cap: bool) -> str:
    """The symmetric margin as every output prints it: '±31.6 %', 'at least ±99.9 %' at the cap."""
    return f"at least ±{format_percent(m)}" if cap else f"±{format_percent(m)}"


# -- worst case over the constants' bands ------------------------------------------------------

def worst_case_margin_text(wc) -> str:
    """The worst-case margin as every output prints it: '±57.8 %'; a negative one with the regime the
    constants can put the point in: '−26.5 %, in gas blow-through'.

    ``wc`` is a :class:`~lowgmap.physics.chart.bands.WorstCaseMargins` (``Study.worst_case``).
    """
    if wc.worst_case >= 0:
        return f"±{format_percent(wc.worst_case)}"
    return f"{format_percent(wc.worst_case)}, in {wc.worst_regime}"


def _line_label(chart, name, labels=None) -> str:
    if labels and name in labels:
        return str(labels[name])
    if chart is not None:
        for m, _ in list(chart.region_models) + list(chart.comparison_models):
            if m.name == name:
                return m.label
    return str(name)


def _limiting_constant_text(wc, chart, labels=None) -> str | None:
    """'alpha_c of <line label> at 0.35 (band [0.35, 0.55])' for the limiting constant."""
    if wc.limiting_constant is None or wc.limiting_boundary is None:
        return None
    c, line = wc.limiting_constant, wc.limiting_boundary
    value = (wc.constants.get(line) or {}).get(c)
    if value is None:                              # the constant is shared: its value sits under another line
        value = next((v[c] for v in wc.constants.values() if c in v), None)
    var = next((v for v in wc.variables if v.name == c and line in v.lines), None) or \
        next((v for v in wc.variables if v.name == c), None)
    text = f"{c} of {_line_label(chart, line, labels)}"
    if value is not None:
        text += f" at {_num_text(value)}" + (f" {var.unit}" if var is not None and var.unit not in ("", "-") else "")
    if var is not None:                           # its reason: in the constants table
        text += f" (band {_range_text(var.low, var.high)})"
    return text


def worst_case_rows(wc, chart=None, labels=None) -> list[tuple[str, str]]:
    """Rows (quantity, value) of the worst-case margin, for the margin text, the PDF and the HTML pack.

    ``wc``: :class:`~lowgmap.physics.chart.bands.WorstCaseMargins` (``Study.worst_case``) or None (no rows);
    ``chart`` (or ``labels``, {line name: label}) gives the lines' labels.
    Every number is written by :mod:`lowgmap.app.formatting`. The worst case takes the constants of the
    lines that bound the point's regime anywhere in their bands; a negative margin means constants within
    their bands put the point in another regime (named).
    """
    if wc is None:
        return []
    rows = [("worst-case margin", worst_case_margin_text(wc) + " (constants of the lines bounding the regime "
                                                               "anywhere in their bands)")]
    lim = _limiting_constant_text(wc, chart, labels)
    if lim is None:
        rows.append(("limiting constant", "none: no banded constant of a bounding line lowers the margin"))
    else:
        rows.append(("limiting constant", lim))
        rows.append(("margin taken by the bands", f"{format_point_change(-wc.loss)} from the nominal "
                                                  f"±{format_percent(wc.nominal)}"))
    if not wc.established:
        rows.append(("worst case established", "no: " + " ".join(wc.reasons)))
    return rows


def constant_band_rows(chart) -> dict:
    """{(model, constant): (band text, reason)} of every constant of the chart's lines with a band."""
    from lowgmap.physics.chart.bands import chart_constant_bands

    try:
        per_line = chart_constant_bands(chart)
    except ValueError as exc:                     # a case band the models refuse: say so in every row
        return {None: ("—", f"the case's bands could not be used: {exc}")}
    out = {}
    for line, bands in per_line.items():
        for b in bands:
            band = _range_text(b.low, b.high) if b.high > b.low else "none (exact)"
            out[(line, b.name)] = (band, f"{b.reason} [{b.origin}]" if b.origin else str(b.reason))
    return out


def _norm_words(text: str) -> list[str]:
    return [w for w in re.split(r"[^0-9a-z]+", str(text).casefold()) if w]


def suggest_regime(label: str, regimes) -> str | None:
    """The chart regime a file label most likely means, judged by its words only; None when unclear.

    A regime whose words include every word of the label is taken when it is the only one; else a
    regime whose name is very close in spelling (a ratio of 0.8 or more, :mod:`difflib`). The result is
    a suggestion for ``--map``: the person decides.

    >>> regimes = ["dispersed bubbles", "elongated bubbles / slugs", "annular (gas core)"]
    >>> suggest_regime("annular", regimes), suggest_regime("dispersed bubble", regimes)
    ('annular (gas core)', 'dispersed bubbles')
    >>> suggest_regime("slug-annular transition", regimes) is None
    True
    """
    words = set(_norm_words(label))
    if not words:
        return None
    hits = [r for r in regimes if words <= set(_norm_words(r))]
    if len(hits) == 1:
        return hits[0]
    folded = {" ".join(_norm_words(r)): r for r in regimes}
    close = difflib.get_close_matches(" ".join(_norm_words(label)), list(folded), n=2, cutoff=0.8)
    if len(close) == 1:
        return folded[close[0]]
    return None


def _flow_pair(ql: float, qg: float, st) -> tuple[str, str]:
    return format_flow(ql, st.liquid_flow_unit), format_flow(qg, st.gas_flow_unit)


def _written_flows(doc, study):
    """The operating point's flows as written in the case file, when the study examines that point."""
    if doc is None or study.point is None:
        return None
    op = doc.case.operating_point
    if op is None or (float(op.ql), float(op.qg)) != tuple(study.point):
        return None
    t = doc.data.get("operating_point") or {}
    ql, qg = t.get("liquid_flow"), t.get("gas_flow")
    return (None if ql is None else str(ql)), (None if qg is None else str(qg))


def _point_rows(study, st, verdict, doc) -> list[tuple[str, str]]:
    if study.point is None:
        return [("operating point", "none: the case gives no operating point")]
    ql, qg = study.point
    lq, gq = _flow_pair(ql, qg, st)
    written = _written_flows(doc, study)
    if written is not None:
        wl, wg = written
        lq = lq if wl is None or wl.replace(" ", "") == lq.replace(" ", "") else f"{wl} ({lq})"
        gq = gq if wg is None or wg.replace(" ", "") == gq.replace(" ", "") else f"{wg} ({gq})"
    rows = [("liquid flow rate Q_L", f"{lq} = {ql:.4g} m³/s"), ("gas flow rate Q_G", f"{gq} = {qg:.4g} m³/s")]
    if doc is not None and written is None and doc.case.operating_point is not None:
        op = doc.case.operating_point
        wl, wg = _flow_pair(op.ql, op.qg, st)
        rows.append(("note", f"the point examined differs from the case file's operating point "
                             f"(Q_L {wl}, Q_G {wg})"))
    pm = study.margins
    if pm is None:
        rows.append(("regime", "none: no boundary model on this chart defines regimes"))
        return rows
    rows.append(("regime at the point", str(pm.regime)))
    if verdict is not None and verdict.intended_regime:
        rows.append(("intended regime", verdict.intended_regime))
    lim = pm.limiting
    rows.append(("symmetric margin", _margin_text(pm.symmetric_margin, lim is None)))
    rows.append(("limiting boundary", "none within the ±99.9 % box" if lim is None else f"{lim.label} ({lim.name})"))
    rows.append(("required margin", f"±{format_percent(st.required_margin)}"))
    words = {"ql_up": "Q_L up", "ql_down": "Q_L down", "qg_up": "Q_G up", "qg_down": "Q_G down"}
    for d, w in words.items():
        name = pm.limits.get(d)
        if name is None:
            rows.append((w, "no regime change inside the chart range"))
        else:
            rows.append((w, f"regime changes at {format_factor(pm.regime_factors[d])} ({pm.boundary(name).label})"))
    return rows


def _verdict_lines(study, verdict, st) -> list[VerdictLine]:
    if study.point is None:
        return [VerdictLine("Operating point", "not established", True, "the case gives no operating point")]
    if verdict is None:
        return [VerdictLine("Required margin", "not established", True,
                            "no boundary model on this chart defines regimes: no margins")]
    if verdict.intended_regime:
        detail = (f"intended: {verdict.intended_regime}; at the point: {verdict.regime or 'undetermined'}")
    else:
        detail = (f"at the point: {verdict.regime}; state the intended regime ([chart] intended_regime) "
                  "to have it checked")
    regime_line = VerdictLine("Intended regime", verdict.regime_status,
                              verdict.regime_status in FAILING_WORDS, detail)
    lim = verdict.limiting_label or "no boundary within the ±99.9 % box"
    shown = _margin_text(verdict.margin, verdict.limiting_boundary is None) if math.isfinite(verdict.margin) \
        else "not computed"
    margin_line = VerdictLine(f"Required margin ±{format_percent(verdict.required)}", verdict.margin_status,
                              verdict.margin_status in FAILING_WORDS,
                              f"symmetric margin {shown}, limited by {lim}")
    return [regime_line, margin_line]


def _margin_rows(pm) -> list[tuple]:
    rows = []
    if pm is None:
        return rows
    for b in pm.boundaries:
        dist = f"{b.log_distance:.3f}" if b.log_distance is not None and math.isfinite(b.log_distance) else "—"
        rows.append((b.label + ("" if b.role == "regions" else " (comparison)") + (" *" if b.limits_regime else ""),
                     format_factor(b.ql_factor_up, none="—"), format_factor(b.ql_factor_down, none="—"),
                     format_factor(b.qg_factor_up, none="—"), format_factor(b.qg_factor_down, none="—"), dist))
    return rows


# -- inputs as written ------------------------------------------------------------------------

_SKIP_TABLES = ("history", "models", "custom_boundaries", "schema_version", "title", "revision", "author",
                "description", "invented")


def _written(value) -> str:
    """A case-file value as the engineer wrote it (text stays text; lists and tables in TOML-like form)."""
    if hasattr(value, "unwrap"):
        value = value.unwrap()
    if isinstance(value, str):
        return value
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{k} = {_written(v)}" for k, v in value.items()) + "}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_written(v) for v in value) + "]"
    return str(value)


def _used(case, st, path: str) -> str:
    """The value the physics used for a case-file entry (SI, with degrees for angles), '' when not a number."""
    f = case.fluid
    used = {
        "fluid.liquid": f.liquid, "fluid.gas": f.gas,
        "fluid.temperature": f"{f.temperature:.6g} K", "fluid.pressure": f"{f.pressure:.6g} Pa",
        "wetting.contact_angle": _deg(case.wetting.contact_angle),
        "conduit.length": f"{case.length:.6g} m",
        "conduit.residual_acceleration": f"{case.g:.4g} m/s² ({case.g_over_g0:.3g} g0)",
        "conduit.orientation": case.orientation.describe(),
        "chart.required_margin": f"±{format_percent(st.required_margin)}",
        "chart.liquid_flow": f"[{case.flow_range.ql_min:.4g}, {case.flow_range.ql_max:.4g}] m³/s",
        "chart.gas_flow": f"[{case.flow_range.qg_min:.4g}, {case.flow_range.qg_max:.4g}] m³/s",
    }
    if case.operating_point is not None:
        used["operating_point.liquid_flow"] = f"{case.operating_point.ql:.4g} m³/s"
        used["operating_point.gas_flow"] = f"{case.operating_point.qg:.4g} m³/s"
    if path in used:
        return used[path]
    if path.startswith("section."):
        key = path.split(".", 1)[1]
        params = case.section.to_dict()
        if key == "vertices" and "vertices" in params:
            return "[mm] " + " ".join(f"({x * 1e3:.4g}, {y * 1e3:.4g})" for x, y in params["vertices"])
        value = params.get(key)
        if isinstance(value, float):
            return _deg(value) if "angle" in key else f"{value:.6g} m"
    return ""


def _input_rows(doc, study, st) -> list[tuple[str, str, str]]:
    """(entry, as written, value used) for every entry of the case file but models and history."""
    rows = []

    def walk(prefix, table):
        for key, value in table.items():
            path = f"{prefix}.{key}" if prefix else str(key)
            if hasattr(value, "unwrap"):
                plain = value.unwrap()
            else:
                plain = value
            if isinstance(plain, dict) and not (prefix and "uncertainty" in prefix):
                walk(path, value)
                continue
            rows.append((path, _written(value), _used(study.case, st, path)))

    for key, value in doc.data.items():
        if key in _SKIP_TABLES:
            continue
        if hasattr(value, "unwrap") and isinstance(value.unwrap(), dict):
            walk(str(key), value)
        else:
            rows.append((str(key), _written(value), ""))
    return rows


def _fluid_rows(case) -> list[tuple[str, str]]:
    f = case.fluid
    rows = [("surface tension σ", f"{f.sigma * 1e3:.4g} mN/m"),
            ("liquid density ρ_L", f"{f.rho_l:.5g} kg/m³"),
            ("liquid viscosity μ_L", f"{f.mu_l * 1e3:.4g} mPa s"),
            ("gas density ρ_G", f"{f.rho_g:.4g} kg/m³"),
            ("gas viscosity μ_G", f"{f.mu_g * 1e6:.4g} µPa s"),
            ("liquid properties from", str(f.liquid_source)),
            ("gas properties from", str(f.gas_source))]
    rows += [("note", str(n)) for n in getattr(f, "notes", ())]
    return rows


def _geometry_lines(case) -> list[str]:
    from lowgmap.physics.chart.summary import section_report

    sec = section_report(case)
    s = sec["section"]
    out = [f"Section: {s['kind'].replace('_', ' ')}; area {s['area_m2'] * 1e6:.4g} mm², hydraulic diameter "
           f"{s['hydraulic_diameter_m'] * 1e3:.4g} mm, length scale {s['length_scale_m'] * 1e3:.4g} mm "
           f"({s['length_scale_name']}); conduit length {case.length:.4g} m.",
           sec["gravity"]["verdict"]]
    for c in sec["corners"]:
        out.append(f"Corner {c['index']}: half-angle {c['half_angle_deg']:.4g} deg, critical contact angle "
                   f"{c['critical_contact_angle_deg']:.4g} deg: {'wicks' if c['wicks'] else 'does not wick'} "
                   f"(Concus–Finn).")
    out += [str(n) for n in sec.get("notes", ())]
    return out


# -- models and constants -----------------------------------------------------------------------

def _family(model) -> str:
    mod = type(model).__module__
    return mod.rsplit(".", 1)[-1] if mod.startswith("lowgmap.physics.models.") else "case file (empirical)"


def _num_text(v) -> str:
    return f"{float(v):.6g}"


def _range_text(low, high) -> str:
    return f"[{_num_text(low)}, {_num_text(high)}]"


def _model_rows(chart):
    models, constants, validity = [], [], []
    bands = constant_band_rows(chart)
    pairs = [(m, c, "defines regions") for m, c in chart.region_models] + \
            [(m, c, "comparison") for m, c in chart.comparison_models]
    for m, consts, role in pairs:
        used = dict(consts)
        changed = [k for k, v in used.items()
                   if any(c.name == k for c in m.constants) and float(v) != float(m.constant(k).default)]
        ctext = ", ".join(f"{k} = {_num_text(v)}" for k, v in used.items()) or "none"
        models.append({"name": m.name, "label": m.label, "role": role, "family": _family(m),
                       "regimes": f"{m.regime_below} → {m.regime_above}", "constants": ctext,
                       "changed": ", ".join(changed) or "none (all defaults)",
                       "citation": m.citation, "notes": str(getattr(m, "notes", "") or "")})
        for c in m.constants:
            band, why = bands.get((m.name, c.name)) or bands.get(None) or ("none", "no uncertainty band")
            constants.append((m.name, c.name, _num_text(used.get(c.name, c.default)), _num_text(c.default),
                              c.unit, _range_text(c.low, c.high), band, why, c.source, c.doc))
        for v in getattr(m, "validity", ()):
            validity.append((m.name, v.describe(), v.source))
        note = getattr(m, "validity_note", "")
        if note:
            validity.append((m.name, str(note), "see the model's source"))
    return models, constants, validity


# -- test points ----------------------------------------------------------------------------------

def _agreement_section(res, st, point_file=None) -> AgreementSection:
    ca, cv = res.confusion_all, res.confusion_valid
    not_compared = sum(1 for p in res.points if not p.comparable)
    counts = {"n_points": res.n_points, "n_valid": res.n_valid,
              "agreeing_valid": cv.agreeing, "compared_valid": cv.compared, "fraction_valid": cv.fraction,
              "agreeing_all": ca.agreeing, "compared_all": ca.compared, "fraction_all": ca.fraction,
              "not_compared": not_compared}
    summary = (f"{res.n_points} test point(s), {res.n_valid} valid for a low-gravity conclusion. Agreement with "
               f"the chart: {cv.agreeing} of {cv.compared} valid point(s) ({format_share(cv.fraction)}); "
               f"{ca.agreeing} of {ca.compared} point(s) in all ({format_share(ca.fraction)}). "
               f"{not_compared} point(s) not compared (observed label not a chart regime, or none).")
    criteria = res.validity_rule
    rows, set_aside = [], []
    if point_file is not None:
        for pr in getattr(point_file, "problems", ()):
            if getattr(pr, "severity", "error") == "error":
                set_aside.append((f"file row {pr.row}", "row not read", f"{pr.column}: {pr.message}"))
    for p in res.points:
        if p.agrees is None:
            result = "no observed regime" if not p.observed else "not compared: label not a chart regime"
        else:
            result = "agrees" if p.agrees else "DIFFERS"
        observed = p.label if p.label == p.observed or not p.label else f"{p.label} → {p.observed}"
        rows.append((p.test_id, _flow_value(p.ql, st.liquid_flow_unit), _flow_value(p.qg, st.gas_flow_unit),
                     p.platform or "—", observed or "—", p.predicted or "—", "yes" if p.valid else "no", result))
        if not p.valid:
            for r in p.reasons:
                set_aside.append((p.test_id, "not valid for the platform (counted among all points only)", str(r)))
    regimes = list(res.regimes)
    for label, count in res.unknown_labels:
        ids = ", ".join(p.test_id for p in res.points if p.observed == label)
        hint = suggest_regime(label, regimes)
        fix = (f"--map \"{label}={hint}\" (case file or dashboard: the same label mapping)" if hint else
               f"no chart regime matches it by name: map it with --map \"{label}=REGIME\" to one of: "
               + "; ".join(regimes) if regimes else "this chart has no regimes")
        set_aside.append((ids or label, "label not a chart regime (not compared)",
                          f"observed label \"{label}\" ({count} point(s)) is not a regime of this chart; not counted "
                          f"as agreeing or disagreeing. Fix: {fix}"))
    for p in res.points:
        if not p.observed:
            set_aside.append((p.test_id, "no observed regime", "the row gives no observed regime; not compared"))

    def matrix(cm):
        head = ["observed \\ chart"] + list(cm.predicted)
        return head, [[o] + [str(n) for n in r] for o, r in zip(cm.observed, cm.counts)]

    dis = [(b.label, [f"{q.test_id}: observed {q.observed}, chart {q.predicted}; "
                      f"{q.log_distance:.3g} decade" + ("" if q.valid else "; point not valid")
                      + ("" if q.crossing_explains else " (crossing this line alone does not give the observed "
                                                       "regime)") for q in b.points])
           for b in res.by_boundary]
    source = ""
    if point_file is not None:
        source = str(getattr(point_file, "source_name", "") or "")
    return AgreementSection(counts, summary, criteria, [list(kv) for kv in res.regime_map], rows, set_aside,
                            matrix(cv), matrix(ca), dis, source)


def _flow_value(q: float, unit: str) -> str:
    return "—" if q is None or not math.isfinite(q) else format_flow(q, unit)


# -- history ----------------------------------------------------------------------------------

def _history(doc) -> list[dict]:
    if doc is None:
        return []
    hist = doc.data.get("history")
    out = []
    for entry in hist or ():
        e = entry.unwrap() if hasattr(entry, "unwrap") else dict(entry)
        models = []
        for m in e.get("models", ()) or ():
            if isinstance(m, dict):
                consts = m.get("constants") or {}
                models.append(f"{m.get('name', '?')}" + (" (" + ", ".join(f"{k} = {_written(v)}"
                                                                         for k, v in consts.items()) + ")"
                                                          if consts else ""))
        extra = {k: _written(v) for k, v in e.items() if k not in ("revision", "date", "change", "models")}
        out.append({"revision": _written(e.get("revision", "")), "date": _written(e.get("date", "")),
                    "change": _written(e.get("change", "")), "models": models,
                    "other": [f"{k}: {v}" for k, v in extra.items()]})
    return out


# -- the pack ---------------------------------------------------------------------------------

def review_pack(source, *, settings=None, invented=None, test_points=None, document=None, point_file=None,
                date=None, worst_case: bool = True) -> ReviewPack:
    """Collect the review pack of a study: verdicts, point, margins, inputs, models, agreement, history.

    Parameters
    ----------
    source : Study or CaseDocument   as for :func:`review_inputs` (a study is used as it is: its chart
                                     is never rebuilt)
    settings, invented, test_points : optional   as for :func:`review_inputs`
    document : CaseDocument, optional   the case file behind a study: its ``[[history]]`` entries are
                                     listed, and its inputs shown as written when its case is the study's
                                     case (else as the calculation used them); a document given as
                                     ``source`` is used directly
    point_file : TestPointSet, optional   the test-point file read: its rows set aside by the reader are
                                     listed with the points set aside
    date : datetime.date or str, optional   the date printed (default today)
    worst_case : bool   show the worst-case margin over the constants' bands (:attr:`Study.worst_case
                        <lowgmap.physics.studies.study.Study.worst_case>`, tens of seconds for the corner
                        family); the constants table lists each constant's band and its reason either way

    Returns
    -------
    ReviewPack

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.studies.study import run_study
    >>> pack = review_pack(run_study(example_case(point=(1e-5, 1e-6))), date="2026-01-05")
    >>> pack.regime, pack.symmetric_margin, [v.status for v in pack.verdicts]
    ('dispersed bubbles', '±84.3 %', ['no intended regime stated', 'met'])
    """
    from lowgmap.physics.studies.study import Study

    if document is None and not isinstance(source, Study):
        document = source
    study, st, inv = review_inputs(source, settings=settings, invented=invented, test_points=test_points)
    doc = document if document is not None and (document.case is study.case
                                                or _same_case(document.case, study.case)) else None
    case, chart, pm = study.case, study.chart, study.margins
    verdict = report_verdict(study, st)
    verdicts = _verdict_lines(study, verdict, st)
    if verdict is not None:
        headline = verdict.headline
    else:
        headline = "; ".join(f"{v.label}: {v.status}" for v in verdicts)
    lim = None if pm is None else pm.limiting
    if doc is not None:
        inputs = _input_rows(doc, study, st)
        inputs_note = "Each entry as written in the case file, and the value the calculation used (SI; angles in deg)."
    else:
        inputs = [(k, v, "") for k, v in case_rows(study, settings=st, invented=inv)]
        inputs_note = ("The case file was not available to this export: the inputs are shown as the calculation "
                       "used them.")
    models, constants, validity = _model_rows(chart)
    wc = study.worst_case if worst_case else None
    scheme = chart.scheme
    scheme_text = (f"{scheme.name}: {getattr(scheme, 'description', '')}".rstrip(": ") if scheme is not None else "")
    assumptions = [f"{m['label']}: {m['notes']}" for m in models if m["notes"]]
    assumptions.append("Flows are volumetric flow rates at the local pressure and temperature of the case; gas "
                       "flows in standard units (sccm, slpm) are converted with the ideal-gas law.")
    assumptions.append("Boundaries drawn dotted or faint lie outside the range of the data behind their source; "
                       "constants whose source says \"from memory\" or \"common practice\" have not been checked "
                       "against a document and should be calibrated against test points.")
    hist = _history(document)       # the file's record of earlier revisions, even when fields were edited since
    if document is None:
        history_note = "The case file was not available to this export: no revision history."
    elif not hist:
        history_note = f"No earlier revision recorded: revision {case.revision} is the first."
    else:
        history_note = f"Revision {case.revision} is current; the revisions it replaced:"
    when = date if date is not None else _dt.date.today()
    title = case.title + (" [INVENTED demonstration case]" if inv and "invented" not in case.title.lower() else "")
    return ReviewPack(
        title=title, case_title=case.title,
        case_file="" if doc is None or doc.path is None else str(doc.path.name),
        revision=str(case.revision), author=str(getattr(case, "author", "") or ""),
        date=when.isoformat() if hasattr(when, "isoformat") else str(when), version=__version__, caution=CAUTION,
        invented=inv, description=str(doc.data.get("description", "")) if doc is not None else "",
        headline=headline, verdicts=verdicts, verdict_basis="" if verdict is None else verdict.basis,
        verdict_limits=[] if verdict is None else list(verdict.limits),
        point_rows=_point_rows(study, st, verdict, doc) + worst_case_rows(wc, chart),
        regime=None if pm is None else str(pm.regime),
        symmetric_margin=None if pm is None else _margin_text(pm.symmetric_margin, lim is None),
        limiting_boundary=None if pm is None else pm.limiting_boundary,
        margin_rows=_margin_rows(pm),
        margin_note=("Factor = flow at the crossing / present flow, the other flow held (1.8 = may rise 80 %); "
                     "— = no crossing inside the chart range; * = limits the present regime; log distance: "
                     "shortest distance to the line in decades of flow."),
        inputs=inputs, inputs_note=inputs_note, fluid_rows=_fluid_rows(case), geometry=_geometry_lines(case),
        models=models, constants=constants, validity_ranges=validity, scheme=scheme_text,
        warnings=[str(w) for w in chart.warnings],
        agreement=None if study.agreement is None else _agreement_section(study.agreement, st, point_file),
        assumptions=assumptions, history=hist, history_note=history_note,
        worst_case=None if wc is None else worst_case_margin_text(wc),
        worst_case_limiting=None if wc is None else wc.limiting_constant, settings=st, study=study)


def _same_case(a, b) -> bool:
    try:
        return bool(a == b)
    except (TypeError, ValueError):
        return False
