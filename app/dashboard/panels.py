"""Operating point, verdict, margin table, test points and export panels of the dashboard.

What a person reads here is what the command line writes: the verdict block (:class:`VerdictPanel`)
uses the sentences of ``lowgmap margin`` with the same formatter (:mod:`lowgmap.app.formatting`), the
test-point summary the counts of ``lowgmap compare`` (its label mapping and observation length are set
in the panel), and the review report is :func:`lowgmap.app.outputs.exports.report_html` with the case
file and the uploaded points, as ``lowgmap report -o review.html``.

Long work runs off the server's event loop through the session's runner
(:mod:`lowgmap.app.dashboard.background`): parsing an uploaded file, comparing test points with the
chart, the robust point, a calibration, rendering an export. A visible "working" line says what
is being done; results and problems come back next to the control that asked for them.
"""
from __future__ import annotations

import asyncio
import html
import io
import math
import threading

import numpy as np
import panel as pn

from lowgmap.app.dashboard import uploads
from lowgmap.app.dashboard.background import worker_pool
from lowgmap.app.dashboard.display import HIDDEN, set_shown
from lowgmap.app.dashboard.inputs import FIELD_CSS, FieldView
from lowgmap.app.files.units import UnitError, convert, parse_flow
from lowgmap.app.outputs.tables import MARGIN_CSS, margin_table_html

__all__ = ["PointPanel", "VerdictPanel", "MarginTable", "TestPointsPanel", "ExportPanel", "Working",
           "outside_chart_words", "verdict_html"]

_RENDER_LOCK = threading.Lock()   # matplotlib exports one at a time (rc settings are process-wide)

_NOTE_CSS = """
.outside-chart {background: #fff3cd; border: 1px solid #b8860b; color: #5c4400; padding: 6px 8px;
                border-radius: 4px; font-size: 13px; margin: 4px 0;}
.margin-verdict {padding: 6px 8px; border-radius: 4px; font-size: 13px; margin: 4px 0;}
.margin-verdict.met {background: #eef6ee;}
.margin-verdict.not-met {background: #fde0dc; border: 2px solid #C00000;}
.margin-verdict.not-established {background: #fff3cd; border: 2px solid #b8860b;}
.margin-verdict ul {margin: 2px 0 0 0; padding-left: 18px; font-size: 12px;}
.point-verdict {font-size: 14px; line-height: 1.45;}
.point-verdict .status {font-weight: bold;}
.point-verdict .status.ok {color: #1b5e20;}
.point-verdict .status.fail {color: #B00000;}
.point-verdict .status.open {color: #7a5200;}
"""


#: The "working" line: a turning ring drawn by CSS before the words (no widget of its own to show and hide).
WORKING_CSS = """
.working-spinner {display: inline-block; box-sizing: border-box; width: 13px; height: 13px; margin-right: 7px;
                  vertical-align: -2px; border: 2px solid #c9d6e3; border-top-color: #1f3b57; border-radius: 50%;
                  animation: lowgmap-turn 0.9s linear infinite;}
@keyframes lowgmap-turn {to {transform: rotate(360deg);}}
"""


class Working(pn.viewable.Viewer):
    """A "working…" line: a turning ring and what is being done (hidden when idle).

    One text element shown and hidden through its ``display`` style (:mod:`~lowgmap.app.dashboard.display`):
    the line comes and goes with every edit, and a change of ``visible`` would lay the whole page out again.
    """

    def __init__(self, css: str, **params):
        super().__init__(**params)
        self.text = pn.widgets.StaticText(value="", css_classes=[css], stylesheets=[WORKING_CSS],
                                          styles=dict(HIDDEN), margin=(4, 6), sizing_mode="stretch_width")

    def show(self, text: str) -> None:
        if text:
            value = f"<span class='working-spinner'></span><span>{html.escape(text)}</span>"
            if self.text.value != value:
                self.text.value = value
        set_shown(self.text, bool(text))      # the words stay while hidden: hiding sends one style

    def __panel__(self):
        return self.text


def outside_chart_words(margins, doc) -> str:
    """The statement shown when the operating point lies outside the drawn chart range ('' inside).

    Whether it lies outside is the margins' own finding (``PointMargins.outside_chart``); the
    words give the side and the range end in the chart's display units.
    """
    if margins is None or not getattr(margins, "outside_chart", False):
        return ""
    fr, st = doc.case.flow_range, doc.settings

    def q(v, unit):
        return f"{convert(v, 'flow', unit):.4g} {unit}"

    parts = []
    if margins.ql < fr.ql_min:
        parts.append(f"Q_L below {q(fr.ql_min, st.liquid_flow_unit)}")
    elif margins.ql > fr.ql_max:
        parts.append(f"Q_L above {q(fr.ql_max, st.liquid_flow_unit)}")
    if margins.qg < fr.qg_min:
        parts.append(f"Q_G below {q(fr.qg_min, st.gas_flow_unit)}")
    elif margins.qg > fr.qg_max:
        parts.append(f"Q_G above {q(fr.qg_max, st.gas_flow_unit)}")
    where = f" ({'; '.join(parts)})" if parts else ""
    return (f"The operating point lies outside the drawn chart range{where}: margins are computed on lines "
            "sampled around the point; widen the chart range to see it.")


class PointPanel(pn.viewable.Viewer):
    """Typed operating-point fields (with units), live readout, required margin, intended regime, robust point.

    The required margin is one value (a slider with a typed box) bound to the session's
    ``required_margin``, which is the case's ``chart.required_margin``: the margin table, the
    exports and the downloaded case file all read that one value. The intended regime is the
    case's ``chart.intended_regime`` ("none": no intended regime). The most robust point is
    searched within the flow ranges typed here (empty: a decade either side of the operating
    point, as ``lowgmap robust``).
    """

    NONE = "none"

    def __init__(self, session, chart_pane, **params):
        super().__init__(**params)
        self.session = session
        self.chart_pane = chart_pane
        self.ql_field = FieldView("point.ql", pn.widgets.TextInput(label="Liquid flow rate",
                                                                   sizing_mode="stretch_width",
                                                                   css_classes=["ql-input"]), self._typed)
        self.qg_field = FieldView("point.qg", pn.widgets.TextInput(label="Gas flow rate (sccm, slpm allowed)",
                                                                   sizing_mode="stretch_width",
                                                                   css_classes=["qg-input"]), self._typed)
        self.ql_input, self.qg_input = self.ql_field.widget, self.qg_field.widget
        self.message = pn.pane.Alert("", alert_type="danger", visible=False, css_classes=["point-problem"],
                                     sizing_mode="stretch_width")
        # a widget, not a pane: it changes with every frame of a drag (see ChartPane.live_status)
        self.readout = pn.widgets.StaticText(value=chart_pane.param.readout, css_classes=["point-readout"],
                                             sizing_mode="stretch_width")
        # one value, two views kept in step by the session: a slider and a typed box
        # (not panel's EditableFloatSlider: its browser-side link keeps every session's widgets alive)
        rm = round(100 * session.required_margin, 4)
        self.required = pn.widgets.FloatSlider(label="Required margin ± [%]", start=0, end=90, step=0.5,
                                               value=rm, sizing_mode="stretch_width", show_value=False,
                                               css_classes=["required-margin"])
        self.required_box = pn.widgets.TextInput(label="typed [%]", value=_pct_text(rm), width=90,
                                                 css_classes=["required-margin-input"])
        self.required_message = pn.pane.HTML("", visible=False, stylesheets=[FIELD_CSS],
                                             css_classes=["field-message", "message-required-margin"])
        self._pushing = False
        self.required.param.watch(self._required_changed, "value_throttled")
        self.required_box.param.watch(self._required_typed, "value")
        self.intended = pn.widgets.Select(label="Intended regime", options=[self.NONE], value=self.NONE,
                                          sizing_mode="stretch_width", css_classes=["intended-regime"])
        self.intended.param.watch(self._intended_changed, "value")
        self.intended_message = pn.pane.HTML("", visible=False, stylesheets=[FIELD_CSS],
                                             css_classes=["field-message", "message-intended-regime"])
        self.uncertainty = pn.widgets.CheckBoxGroup(label="Flow-rate uncertainty",
                                                    options=["Show flow-rate uncertainty box"], value=[],
                                                    css_classes=["uncertainty-toggle"])
        self.uncertainty.param.watch(lambda e: setattr(session, "show_uncertainty", bool(e.new)), "value")
        self.regime_select = pn.widgets.Select(label="Regime for the robust point", options=[],
                                               sizing_mode="stretch_width", css_classes=["robust-regime"])
        self.range_fields = {}
        for key, label in (("ql_lo", "Liquid flow searched, from"), ("ql_hi", "Liquid flow searched, to"),
                           ("qg_lo", "Gas flow searched, from"), ("qg_hi", "Gas flow searched, to")):
            self.range_fields[key] = pn.widgets.TextInput(label=label, sizing_mode="stretch_width",
                                                          css_classes=[f"robust-{key.replace('_', '-')}"])
        self.range_message = pn.pane.HTML("", visible=False, stylesheets=[FIELD_CSS],
                                          css_classes=["field-message", "message-robust-range"],
                                          sizing_mode="stretch_width")
        self.robust_button = pn.widgets.Button(label="Move to the most robust point", color="primary",
                                               sizing_mode="stretch_width", css_classes=["robust-run"])
        self.robust_button.on_click(self._robust)
        self.robust_note = pn.pane.HTML("", visible=False, stylesheets=[FIELD_CSS],
                                        css_classes=["field-notice", "robust-note"], sizing_mode="stretch_width")
        self._sync_fields()
        session.param.watch(lambda *_: self._sync_fields(),
                            ["ql", "qg", "revision_counter", "required_margin", "applied_counter"])

    def _sync_fields(self):
        s = self.session
        if s.closed:
            return
        st = s.doc.settings
        pending = s.pending_keys
        if s.ql is not None and "point" not in pending and "robust" not in pending:
            # the point as written in the case (e.g. "400 sccm"): a rebuild that changes what it
            # means in local flow does not rewrite the field (the readout shows the local flows)
            ql_text = s.get("operating_point.liquid_flow") or \
                f"{convert(s.ql, 'flow', st.liquid_flow_unit):.4g} {st.liquid_flow_unit}"
            qg_text = s.get("operating_point.gas_flow") or \
                f"{convert(s.qg, 'flow', st.gas_flow_unit):.4g} {st.gas_flow_unit}"
            self.ql_field.show(str(ql_text))
            self.qg_field.show(str(qg_text))
        if "required_margin" not in pending:
            value = round(100 * s.required_margin, 4)
            self._pushing = True
            try:
                if self.required.value != value:
                    self.required.value = value
                if self.required_box.value != _pct_text(value):
                    self.required_box.value = _pct_text(value)
            finally:
                self._pushing = False
        msgs = s.field_problems.get("required_margin", [])
        self.required_message.object = "<br>".join(html.escape(m) for m in msgs)
        self.required_message.visible = bool(msgs)
        robust = s.field_problems.get("robust") or ([s.notices["robust"]] if "robust" in s.notices else [])
        self.robust_note.object = "<br>".join(html.escape(m) for m in robust)
        self.robust_note.visible = bool(robust)
        names = list(s.chart.regime_names)
        if list(self.regime_select.options) != names:
            self.regime_select.options = names
        intended = st.intended_regime or None
        if names and self.regime_select.value not in names:
            self.regime_select.value = intended if intended in names else (s.regime_at(s.ql, s.qg) or names[0])
        if "chart.intended_regime" not in pending:
            options = [self.NONE] + names + ([intended] if intended and intended not in names else [])
            self._pushing = True
            try:
                if list(self.intended.options) != options:
                    self.intended.options = options
                if self.intended.value != (intended or self.NONE):
                    self.intended.value = intended or self.NONE
            finally:
                self._pushing = False
        msgs = list(s.field_problems.get("chart.intended_regime", []))
        if intended and intended not in names:
            msgs.append(f"Intended regime: \u201c{intended}\u201d is not a regime of this chart; choose one of its "
                        "regimes or none.")
        self.intended_message.object = "<br>".join(html.escape(m) for m in msgs)
        self.intended_message.visible = bool(msgs)
        self._show_default_ranges()

    def _show_default_ranges(self):
        """Empty range fields show the default search range (a decade either side of the point)."""
        s = self.session
        rng = s.robust_default_ranges()
        if rng is None:
            return
        st = s.doc.settings
        (ql_lo, ql_hi), (qg_lo, qg_hi) = rng
        for key, v, unit in (("ql_lo", ql_lo, st.liquid_flow_unit), ("ql_hi", ql_hi, st.liquid_flow_unit),
                             ("qg_lo", qg_lo, st.gas_flow_unit), ("qg_hi", qg_hi, st.gas_flow_unit)):
            text = f"{convert(v, 'flow', unit):.4g} {unit} (default)"
            if self.range_fields[key].placeholder != text:
                self.range_fields[key].placeholder = text

    def _required_changed(self, event):
        if self._pushing or event.new is None:
            return
        self._pushing = True
        try:
            self.required_box.value = _pct_text(event.new)  # the other view follows at once
        finally:
            self._pushing = False
        self.session.set_required_margin(float(event.new) / 100.0)

    def _required_typed(self, event):
        if self._pushing:
            return
        text = (event.new or "").replace("%", "").replace("±", "").strip()
        try:
            value = float(text)
            if not 0 <= value < 99.95:
                raise ValueError
        except ValueError:
            self.required_message.object = html.escape(
                f"Required margin: must be a number within [0, 99.9] %, got {event.new!r}. Not applied; in effect: "
                f"{_pct_text(100 * self.session.required_margin)} %.")
            self.required_message.visible = True
            return
        self.required_message.visible = False
        self._pushing = True
        try:
            self.required.value = min(value, self.required.end)
        finally:
            self._pushing = False
        self.session.set_required_margin(value / 100.0)

    def _intended_changed(self, event):
        if self._pushing or event.new is None:
            return
        value = None if event.new == self.NONE else str(event.new)
        self.session.edit({"chart.intended_regime": value}, key="chart.intended_regime", label="Intended regime",
                          path="chart.intended_regime")

    def _typed(self, _value=None):
        s = self.session
        try:
            ql, qg = s.parse_point_text(self.ql_input.value, self.qg_input.value)
        except (UnitError, ValueError) as exc:
            st = s.doc.settings
            now = (f"{convert(s.ql, 'flow', st.liquid_flow_unit):.4g} {st.liquid_flow_unit}, "
                   f"{convert(s.qg, 'flow', st.gas_flow_unit):.4g} {st.gas_flow_unit}")
            self.message.object = f"{exc} — the operating point was not moved (in effect: {now})."
            self.message.visible = True
            self._sync_fields()  # the fields show the point in effect
            return
        self.message.visible = False
        s.move_point(ql, qg)

    def search_ranges(self):
        """The typed search ranges (SI) as (ql_range, qg_range); None for an axis left empty.

        Raises UnitError / ValueError with the field's name.
        """
        s = self.session
        f = s.doc.case.fluid
        default = s.robust_default_ranges()
        out = []
        for axis, gas, (lo_key, hi_key) in (("liquid", False, ("ql_lo", "ql_hi")), ("gas", True, ("qg_lo", "qg_hi"))):
            lo_t, hi_t = (self.range_fields[lo_key].value or "").strip(), (self.range_fields[hi_key].value or "").strip()
            if not lo_t and not hi_t:
                out.append(None)
                continue
            d = default[0 if axis == "liquid" else 1]
            vals = []
            for text, key, fallback in ((lo_t, lo_key, d[0]), (hi_t, hi_key, d[1])):
                if not text:
                    vals.append(fallback)
                    continue
                name = self.range_fields[key].name
                v = parse_flow(text, name, gas=gas, pressure=f.pressure, temperature=f.temperature)
                if not (v > 0 and math.isfinite(v)):
                    raise UnitError(f"{name}: must be a positive flow, got {text!r}")
                vals.append(v)
            if not vals[1] > vals[0]:
                raise UnitError(f"{axis.capitalize()} flow searched: 'to' must be above 'from', got "
                                f"{lo_t or 'the default'} to {hi_t or 'the default'}")
            out.append((vals[0], vals[1]))
        return tuple(out)

    def _robust(self, event):
        try:
            ql_range, qg_range = self.search_ranges()
        except (UnitError, ValueError) as exc:
            self.range_message.object = html.escape(f"{exc}. The point was not moved.")
            self.range_message.visible = True
            return
        self.range_message.visible = False
        self.robust_note.object = "<span>Searching for the most robust point…</span>"
        self.robust_note.visible = True
        self.session.request_robust_point(self.regime_select.value, ql_range=ql_range, qg_range=qg_range)

    def __panel__(self):
        robust = pn.Card(self.regime_select,
                         pn.Row(self.range_fields["ql_lo"], self.range_fields["ql_hi"], sizing_mode="stretch_width"),
                         pn.Row(self.range_fields["qg_lo"], self.range_fields["qg_hi"], sizing_mode="stretch_width"),
                         self.range_message, self.robust_button, self.robust_note,
                         title="Most robust point", collapsed=True, sizing_mode="stretch_width",
                         css_classes=["robust-card"])
        return pn.Column(pn.pane.Markdown("#### Operating point", margin=(0, 10)), self.readout, self.ql_input,
                         self.qg_input, self.message,
                         pn.Row(self.required, self.required_box, sizing_mode="stretch_width"),
                         self.required_message, self.intended, self.intended_message, self.uncertainty,
                         robust, sizing_mode="stretch_width")


def _pct_text(value: float) -> str:
    """A required margin in percent as typed text: 30.0 -> '30', 42.5 -> '42.5'."""
    return f"{float(value):.6g}"


class VerdictPanel(pn.viewable.Viewer):
    """The verdict on the operating point in words: regime, intended regime, symmetric margin, required margin.

    The sentences are those of ``lowgmap margin`` (the same :class:`~lowgmap.physics.chart.margins.Verdict`
    and the same number formatter, :mod:`lowgmap.app.formatting`); what fails ("NOT MET", "NOT IN THE
    INTENDED REGIME") is in red, "not established" in amber with its reasons.
    """

    def __init__(self, session, **params):
        super().__init__(**params)
        self.session = session
        # a widget, not an HTML pane: a pane update makes bokeh walk the whole document (tens of ms each)
        self.pane = pn.widgets.StaticText(value="", sizing_mode="stretch_width", css_classes=["verdict-pane"],
                                          stylesheets=[_NOTE_CSS])
        session.param.watch(lambda *_: self.refresh(), ["margins", "required_margin", "revision_counter"])
        self.refresh()

    def refresh(self):
        s = self.session
        if s.closed:
            return
        self.pane.value = verdict_html(s.margins, s.verdict(), s.doc)

    def __panel__(self):
        return self.pane


def verdict_html(margins, v, doc) -> str:
    """The verdict block (HTML) of a point's margins and :class:`~lowgmap.physics.chart.margins.Verdict`."""
    from lowgmap.app.formatting import format_percent

    if margins is None or v is None:
        return "<div class='point-verdict'>No regimes on this chart: no verdict.</div>"
    intended = (doc.settings.intended_regime or getattr(doc.case, "intended_regime", "") or "") if doc else ""

    def status(text):
        cls = "ok" if text in ("met", "in the intended regime") else (
            "fail" if text in ("NOT MET", "NOT IN THE INTENDED REGIME") else "open")
        return f"<span class='status {cls}'>{html.escape(text)}</span>"

    regime = html.escape(margins.regime or "none")
    if v.intended_regime:
        regime_line = (f"Regime: <b class='verdict-regime'>{regime}</b> ({status(v.regime_status)}: "
                       f"{html.escape(v.intended_regime)})")
    else:
        regime_line = f"Regime: <b class='verdict-regime'>{regime}</b> ({status(v.regime_status)})"
    if intended and not v.intended_regime:
        regime_line += (f"<br><span class='status open'>Intended regime \u201c{html.escape(intended)}\u201d is not "
                        "a regime of this chart: judged on the margin alone.</span>")
    m = margins.symmetric_margin
    lim = margins.limiting
    if lim is None:
        margin_line = (f"Symmetric margin: <b class='verdict-margin'>at least ±{format_percent(m)}</b> "
                       "(no boundary comes closer)")
    else:
        margin_line = (f"Symmetric margin: <b class='verdict-margin'>±{format_percent(m)}</b>, limited by "
                       f"<span class='verdict-limiting'>{html.escape(lim.label)}</span>")
    required_line = f"Required margin ±{format_percent(v.required)}: {status(v.margin_status)}"
    notes = list(v.limits[:-1]) if v.margin_status == "not established" else []
    items = "".join(f"<li>{html.escape(n)}</li>" for n in notes if n and n != margins.outside_chart_note)
    cls = {"met": "met", "NOT MET": "not-met"}.get(v.margin_status, "not-established")
    if v.regime_status == "NOT IN THE INTENDED REGIME":
        cls = "not-met"
    return (f"<div class='point-verdict margin-verdict {cls}' data-status='{html.escape(v.margin_status)}' "
            f"data-regime-status='{html.escape(v.regime_status)}'>"
            f"<div class='verdict-line'>{regime_line}</div><div class='verdict-line'>{margin_line}</div>"
            f"<div class='verdict-line verdict-required'>{required_line}</div>"
            + (f"<ul>{items}</ul>" if items else "") + "</div>")


class MarginTable(pn.viewable.Viewer):
    """Margins of the operating point to every boundary (recomputed on release, never on drag).

    Below the table, once computed in the background, the worst case over the constants' bands
    (:attr:`lowgmap.physics.studies.study.Study.worst_case`, in the words of
    :func:`lowgmap.app.outputs.tables.margin_table_html`); a "computing worst case…" notice until then.

    Above the table, when the point lies outside the drawn chart range, a statement saying so. The
    verdict against the required margin is the :class:`VerdictPanel` beside the chart.
    """

    def __init__(self, session, **params):
        super().__init__(**params)
        self.session = session
        # widgets, not HTML panes: a pane update makes bokeh walk the whole document (tens of ms each)
        self.pane = pn.widgets.StaticText(value="", sizing_mode="stretch_width", css_classes=["margin-pane"],
                                          stylesheets=[MARGIN_CSS])
        self.outside = pn.widgets.StaticText(value="", sizing_mode="stretch_width", css_classes=["outside-chart-pane"],
                                             stylesheets=[_NOTE_CSS], styles=dict(HIDDEN))
        # shown and hidden by style: the notice comes and goes after every edit (display.py)
        self.worst_notice = pn.widgets.StaticText(value="", sizing_mode="stretch_width", styles=dict(HIDDEN),
                                                  css_classes=["worst-case-notice"], margin=(0, 10))
        session.param.watch(lambda *_: self.refresh(), ["margins", "required_margin", "worst_case",
                                                        "worst_case_state"])
        session.want_worst_case()     # the worst case over the bands, computed in the background
        self.refresh()

    def refresh(self):
        s = self.session
        if s.closed:
            return
        wc = s.worst_case if s.worst_case_state == "ready" else None
        self.pane.value = margin_table_html(s.margins, s.required_margin, wc)
        notice = ""
        if s.margins is not None and s.worst_case_state == "computing":
            notice = "computing worst case… (the margin to the near edge of each line's band, in the background)"
        elif s.worst_case_state == "failed":
            notice = s.extras_problem
        if notice:
            self.worst_notice.value = f"<i>{html.escape(notice)}</i>"
        set_shown(self.worst_notice, bool(notice))      # the words stay while hidden: hiding sends one style
        words = outside_chart_words(s.margins, s.doc)
        if words:
            self.outside.value = f"<div class='outside-chart'>{html.escape(words)}</div>"
        set_shown(self.outside, bool(words))

    def __panel__(self):
        return pn.Column(pn.pane.Markdown("#### Margins to every boundary", margin=(0, 10)), self.outside, self.pane,
                         self.worst_notice, sizing_mode="stretch_width")


class TestPointsPanel(pn.viewable.Viewer):
    """Upload test points (CSV/Excel), map columns when needed, draw them and summarise agreement.

    The file arrives in chunks (:class:`lowgmap.app.dashboard.uploads.BoundedUpload`, at most
    :data:`~lowgmap.app.dashboard.uploads.UPLOAD_MAX_BYTES`), its lines are counted
    (:data:`~lowgmap.app.dashboard.uploads.UPLOAD_MAX_ROWS`), then it is parsed and compared with
    the chart on worker threads while a "working" line shows what is being done.
    """

    MAX_BYTES = uploads.UPLOAD_MAX_BYTES
    MAX_ROWS = uploads.UPLOAD_MAX_ROWS

    def __init__(self, session, chart_pane, **params):
        super().__init__(**params)
        self.session = session
        self.chart_pane = chart_pane
        self.upload = uploads.BoundedUpload(max_bytes=self.MAX_BYTES, on_file=self._on_file,
                                            on_refused=self._on_refused,
                                            accepted_filetypes=[".csv", ".tsv", ".txt", ".xlsx"],
                                            css_classes=["points-upload"], sizing_mode="stretch_width")
        self.limits = pn.pane.Markdown(f"<small>{html.escape(uploads.limits_text())}</small>",
                                       css_classes=["points-limits"], sizing_mode="stretch_width")
        self.working = Working("points-working")
        self.preview = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["points-preview"])
        self.summary = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["points-summary"])
        self.problems = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["points-problems"])
        self.mapping_box = pn.Column(sizing_mode="stretch_width", visible=False)
        # as `lowgmap compare --map LABEL=REGIME --length L`
        self.label_map = pn.widgets.TextAreaInput(
            label="Label mapping (one per line: label in the file = chart regime)", rows=3, sizing_mode="stretch_width",
            placeholder="e.g. bubbly = dispersed bubbles", css_classes=["label-map"])
        self.obs_length = pn.widgets.TextInput(label="Observation length (inlet to where the regime was seen)",
                                               sizing_mode="stretch_width", css_classes=["observation-length"])
        self.compare_button = pn.widgets.Button(label="Compare again with this mapping and length",
                                                color="primary", css_classes=["compare-run"])
        self.compare_button.on_click(self._apply_compare)
        self.compare_message = pn.pane.HTML("", visible=False, stylesheets=[FIELD_CSS], sizing_mode="stretch_width",
                                            css_classes=["field-message", "message-compare"])
        self._raw: bytes | None = None
        self._name = ""
        self._token = 0
        self.points = None
        self.fit_choice = pn.widgets.MultiChoice(label="Constants to fit to the test points (at most 4)",
                                                 options=[], max_items=4, sizing_mode="stretch_width",
                                                 css_classes=["fit-choice"])
        self.fit_all = pn.widgets.Checkbox(label="Use all labelled points (not only the valid ones)", value=False,
                                           css_classes=["fit-all"])
        self.fit_button = pn.widgets.Button(label="Calibrate", color="primary", css_classes=["fit-run"])
        self.fit_button.on_click(self._calibrate)
        self.fit_working = Working("fit-working")
        self.fit_result = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["fit-result"])
        self.apply_button = pn.widgets.Button(label="Apply as the next case revision", color="success",
                                              visible=False, css_classes=["fit-apply"])
        self.apply_button.on_click(self._apply_fit)
        self._calibration = None
        self._refresh_fit_options()
        self._show_compare_defaults()
        session.param.watch(lambda *_: (self._redraw(), self._refresh_fit_options(), self._show_compare_defaults()),
                            ["revision_counter"])
        session.param.watch(lambda *_: self._compare_applied(), ["compare"])

    # ------------------------------------------------------------------------------- comparison settings
    def _show_compare_defaults(self):
        length = self.session.doc.case.length
        text = f"default: the conduit length, {length:.4g} m"
        if self.obs_length.placeholder != text:
            self.obs_length.placeholder = text

    def compare_settings(self):
        """The label mapping and observation length typed here (ValueError/UnitError naming the field)."""
        from lowgmap.app.dashboard.state import CompareSettings
        from lowgmap.app.files.units import to_si

        pairs = []
        for n, line in enumerate((self.label_map.value or "").splitlines(), start=1):
            if not line.strip():
                continue
            if "=" not in line:
                raise ValueError(f"Label mapping, line {n} of the box: write label = chart regime, got {line.strip()!r}")
            k, v = (x.strip() for x in line.split("=", 1))
            if not k or not v:
                raise ValueError(f"Label mapping, line {n} of the box: both the label and the regime are needed, "
                                 f"got {line.strip()!r}")
            regimes = list(self.session.chart.regime_names)
            if v not in regimes:
                raise ValueError(f"Label mapping: {v!r} is not a regime of this chart; its regimes: {'; '.join(regimes)}")
            pairs.append((k, v))
        length = None
        text = (self.obs_length.value or "").strip()
        if text:
            length = to_si(text, "length", "Observation length")
            if not (length > 0 and math.isfinite(length)):
                raise ValueError(f"Observation length: must be a positive length, got {text!r}")
        return CompareSettings(regime_map=tuple(pairs), observation_length=length)

    def _apply_compare(self, event=None):
        try:
            settings = self.compare_settings()
        except (ValueError, UnitError) as exc:
            self.compare_message.object = html.escape(f"{exc}. Not applied.")
            self.compare_message.visible = True
            return
        self.compare_message.visible = False
        if self.points is not None:
            self.working.show("Comparing the test points with the chart…")
        self.session.set_compare(settings, on_done=lambda ok, msgs: self._compared_again())

    def _compared_again(self):
        self.working.show("")
        self._redraw()

    def _compare_applied(self):
        """The settings in effect are shown in the fields (unless the person is editing them)."""
        c = self.session.compare
        text = "\n".join(f"{k} = {v}" for k, v in c.regime_map)
        if (self.label_map.value or "").strip() != text.strip() and not self.compare_message.visible:
            self.label_map.value = text

    # ------------------------------------------------------------------------------- upload
    def _on_refused(self, name: str, size: int) -> None:
        self._token += 1
        self.working.show("")
        self.problems.object = (f"<p class='err'><b>{html.escape(name)} was not read:</b> it is larger than "
                                f"the {self.MAX_BYTES / 1e6:g} MB limit for uploads (at least {size / 1e6:.1f} MB "
                                f"arrived). {html.escape(uploads.limits_text())}</p>")

    def _on_file(self, name: str, data: bytes) -> None:
        self._token += 1
        too_many = uploads.too_many_rows(data, name)
        if too_many:
            self.working.show("")
            self.problems.object = f"<p class='err'><b>{html.escape(name)} was not read:</b> " \
                                   f"{html.escape(too_many)}</p>"
            return
        self._raw = data
        self._name = name or "uploaded file"
        self.load(mapping=None)

    def load(self, mapping=None, regime_map=None):
        """Parse the uploaded file on a worker thread (``mapping``: columns chosen in the form)."""
        f = self.session.doc.case.fluid
        raw, name = self._raw, self._name
        if raw is None:
            return
        self._token += 1
        token = self._token
        self._show_preview()
        self.working.show(f"Reading {name} ({len(raw) / 1e6:.2g} MB)…")

        def work():
            return uploads.parse_test_points(raw, name, mapping=mapping, regime_map=regime_map,
                                             pressure=f.pressure, temperature=f.temperature)
        self.session.runner.submit(work, lambda tps, error: self._parsed(token, tps, error))

    def _parsed(self, token: int, tps, error) -> None:
        from lowgmap.app.files.testpoints import TestPointError

        if token != self._token or self.session.closed:
            return  # a newer upload replaced this one
        if error is not None:
            self.points = None
            self.session.set_test_points(None)
            self.chart_pane._held(self.chart_pane.show_test_points, None)
            self.summary.object = ""
            self.working.show("")
            if isinstance(error, TestPointError):
                items = "".join(f"<li>{html.escape(str(p))}</li>" for p in getattr(error, "problems", [])) or \
                    f"<li>{html.escape(str(error))}</li>"
                self.problems.object = f"<p><b>The file could not be read:</b></p><ul>{items}</ul>"
                self._offer_mapping()
            else:
                self.problems.object = (f"<p class='err'><b>The file could not be read</b> "
                                        f"({html.escape(type(error).__name__)}: {html.escape(str(error))}); "
                                        "please report this as a bug.</p>")
            return
        if len(tps.points) > self.MAX_ROWS:
            self.working.show("")
            self.problems.object = (f"<p class='err'><b>{html.escape(self._name)} was not read:</b> it has "
                                    f"{len(tps.points):,} rows; the dashboard reads at most {self.MAX_ROWS:,}.</p>")
            return
        self.mapping_box.visible = False
        self.points = tps
        self.working.show(f"Comparing {len(tps.points):,} test points with the chart…")
        try:
            settings = self.compare_settings()
        except (ValueError, UnitError) as exc:
            self.compare_message.object = html.escape(f"{exc}. The points are compared without it.")
            self.compare_message.visible = True
            settings = None
        # compared on the session's chart (the study's agreement), on a worker thread, in edit order
        self.session.set_test_points(tps, on_done=lambda ok, msgs: self._compared(token, tps), compare=settings)

    def _compared(self, token: int, tps) -> None:
        if token != self._token:
            return
        self.working.show("")
        rej = [p for p in tps.problems if getattr(p, "severity", "error") == "error"]
        warn = [p for p in tps.problems if getattr(p, "severity", "error") != "error"]
        rows = "".join(f"<tr><td>{p.row}</td><td>{html.escape(str(p.column))}</td>"
                       f"<td>{html.escape(str(p.value))}</td><td>{html.escape(p.message)}</td></tr>" for p in rej)
        text = ""
        if rej:
            text += (f"<p><b>{len(rej)} row problem(s); those rows are left out, the others kept:</b></p>"
                     "<table class='bad-rows'><tr><th>row</th><th>column</th><th>value</th><th>reason</th></tr>"
                     + rows + "</table>")
        if warn:
            text += "<p>Notes: " + "; ".join(html.escape(str(p)) for p in warn[:10]) + "</p>"
        self.problems.object = text
        self._redraw()

    def _show_preview(self):
        try:
            text = self._raw[:8192].decode("utf-8-sig", errors="replace")
        except Exception:  # binary (Excel)
            text = ""
        lines = text.splitlines()[:8]
        self.preview.object = ("<p><b>" + html.escape(self._name) + "</b> (first lines, the file is not changed)"
                               "</p><pre style='font-size:11px;max-height:140px;overflow-y:auto;white-space:pre-wrap;overflow-wrap:anywhere'>"
                               + html.escape("\n".join(lines)) + "</pre>") if lines else ""

    def _offer_mapping(self):
        text = self._raw[:65536].decode("utf-8-sig", errors="replace") if self._raw else ""
        header = next((ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")), "")
        delim = max([",", ";", "\t"], key=header.count)
        cols = [c.strip().strip('"') for c in header.split(delim)] if header else []
        if not cols:
            self.mapping_box.visible = False
            return
        self._map_widgets = {}
        widgets = [pn.pane.Markdown("**Map the file's columns** (choose the column and its unit):")]
        for field, unit in (("liquid_flow", "mL/min"), ("gas_flow", "mL/min"), ("observed_regime", None),
                            ("platform", None), ("test_id", None)):
            sel = pn.widgets.Select(label=field.replace("_", " "), options=["(none)"] + cols,
                                    css_classes=[f"map-{field}"])
            u = pn.widgets.TextInput(label="unit", value=unit or "", visible=unit is not None,
                                     css_classes=[f"map-{field}-unit"])
            self._map_widgets[field] = (sel, u)
            widgets.append(pn.Row(sel, u))
        apply = pn.widgets.Button(label="Apply column mapping", color="primary", css_classes=["map-apply"])
        apply.on_click(self._apply_mapping)
        widgets.append(apply)
        self.mapping_box.objects = widgets
        self.mapping_box.visible = True

    def _apply_mapping(self, event):
        mapping = {}
        for field, (sel, u) in self._map_widgets.items():
            if sel.value and sel.value != "(none)":
                mapping[sel.value] = f"{field} [{u.value}]" if u.visible and u.value.strip() else field
        self.load(mapping=mapping)

    def _redraw(self):
        from lowgmap.app.formatting import format_share
        from lowgmap.app.outputs.report import suggest_regime

        tps = self.points
        study = self.session.study
        if tps is None or study is None or study.agreement is None:
            return
        pts = tps.points
        res = study.agreement  # lowgmap.physics.studies.agreement.agreement, as in `lowgmap compare`
        self.chart_pane._held(self.chart_pane.show_test_points, pts, res)
        ca, cv = res.confusion_all, res.confusion_valid
        invalid = [p for p in res.points if not p.valid]
        reasons = "".join(f"<li>{html.escape(p.test_id)}: {html.escape('; '.join(p.reasons))}</li>"
                          for p in invalid[:8])
        more = f"<li>… and {len(invalid) - 8} more</li>" if len(invalid) > 8 else ""
        matrix = html.escape(ca.format()) if ca.compared else ""
        unknown = ""
        if res.unknown_labels:
            items = []
            for label, n in res.unknown_labels:
                fix = suggest_regime(label, res.regimes)
                how = (f"map it with “{label} = {fix}”" if fix else "no chart regime matches its words; map it by hand")
                items.append(f"<li>{html.escape(label)} ({n}): {html.escape(how)}</li>")
            unknown = ("<br><b>Labels that are not chart regimes (not compared, not counted as disagreeing):</b>"
                       f"<ul>{''.join(items)}</ul>")
        rows_out = len(getattr(tps, "rejected_rows", ()) or ())
        self.summary.object = (
            f"<div class='agreement' data-agree='{ca.agreeing}' data-total='{ca.compared}' "
            f"data-valid='{res.n_valid}'>"
            f"<p class='agreement-validity'>Validity: {res.n_valid} of {res.n_points} valid "
            f"(observation length {res.observation_length:.4g} m).</p>"
            f"<p class='agreement-words'><b>Agreement with the chart:</b> {format_share(res.fraction_valid)} of "
            f"{cv.compared} valid point(s) ({cv.agreeing} agree); {format_share(res.fraction_all)} of {ca.compared} "
            f"point(s) in all ({ca.agreeing} agree).</p>"
            f"<p>{len(pts)} points drawn; disagreements outlined in red."
            + (f" {rows_out} row(s) of the file set aside (see the problems below)." if rows_out else "") + "</p>"
            + unknown
            + (f"<b>{len(invalid)} point(s) cannot support a low-gravity conclusion:</b><ul>{reasons}{more}</ul>"
               if invalid else "")
            + (f"<details><summary>confusion matrix (rows observed, columns chart)</summary>"
               f"<pre style='font-size:11px'>{matrix}</pre></details>" if matrix else "")
            + "</div>")

    # ------------------------------------------------------------------------------- calibration
    def _refresh_fit_options(self):
        opts = []
        for model, _ in self.session.chart.region_models:
            opts += [f"{model.name}.{c.name}" for c in model.constants]
        self.fit_choice.options = opts
        self.fit_choice.value = [v for v in self.fit_choice.value if v in opts]

    def _calibrate(self, event=None):
        from lowgmap.physics.studies.calibration import calibrate

        if self.points is None:
            self.fit_result.object = "<p>Load test points first.</p>"
            return
        if not self.fit_choice.value:
            self.fit_result.object = "<p>Choose at least one constant to fit.</p>"
            return
        chart, points, keys = self.session.chart, self.points, list(self.fit_choice.value)
        use = "all" if self.fit_all.value else "valid"
        self._token_fit = getattr(self, "_token_fit", 0) + 1
        token = self._token_fit
        self.fit_button.disabled = True
        self.fit_result.object = ""
        self.fit_working.show(f"Calibrating {', '.join(keys)} to {len(points.points):,} points…")
        self.session.runner.submit(lambda: calibrate(chart, points, keys, use=use),
                                   lambda cal, error: self._calibrated(token, cal, error))

    def _calibrated(self, token: int, cal, error) -> None:
        if token != getattr(self, "_token_fit", 0) or self.session.closed:
            return
        self.fit_button.disabled = False
        self.fit_working.show("")
        if error is not None:
            self._calibration = None
            self.apply_button.visible = False
            why = str(error) if isinstance(error, ValueError) else \
                f"{type(error).__name__}: {error} (please report this as a bug)"
            self.fit_result.object = f"<p class='err'><b>Cannot calibrate:</b> {html.escape(why)}</p>"
            return
        self._calibration = cal
        rows = "".join(
            f"<tr data-key='{html.escape(c.key)}' data-value='{c.value:.9g}'><td>{html.escape(c.key)}</td>"
            f"<td>{c.start:.4g}</td><td><b>{c.value:.4g}</b></td>"
            f"<td>[{_fmt_num(c.interval[0])}, {_fmt_num(c.interval[1])}]</td></tr>" for c in cal.constants)
        cv = "—" if cal.cv_agreement is None else f"{100 * cal.cv_agreement:.0f} %"
        warn = "".join(f"<li>{html.escape(w)}</li>" for w in cal.warnings)
        self.fit_result.object = (
            f"<div class='calibration'><table><tr><th>constant</th><th>before</th><th>fitted</th>"
            f"<th>95 % interval ({html.escape(cal.interval_method)})</th></tr>{rows}</table>"
            f"<p>{cal.n_points} points; agreement {100 * cal.agreement_before:.0f} % → "
            f"{100 * cal.agreement_after:.0f} %; cross-validated ({html.escape(cal.cv_method)}): {cv}</p>"
            + (f"<ul>{warn}</ul>" if warn else "") + "</div>")
        self.apply_button.visible = True

    def _apply_fit(self, event=None):
        from lowgmap.app.files.casefile import dumps_case
        from lowgmap.app.files.revisions import calibrated_document

        if self._calibration is None:
            return
        doc = self.session.doc
        data, revision = calibrated_document(doc, self._calibration, points_name=self._name)
        self.apply_button.disabled = True

        def applied(ok, msgs):
            self.apply_button.disabled = False
            if ok:
                self.fit_result.object += f"<p><b>Applied: the case is now revision {html.escape(revision)}</b> " \
                                          "(the previous constants are kept in its [[history]]).</p>"
                self.apply_button.visible = False
                self._calibration = None
            else:
                items = "".join(f"<li>{html.escape(m)}</li>" for m in msgs)
                self.fit_result.object += f"<p class='err'><b>Not applied:</b></p><ul>{items}</ul>"
        self.session.load_text(dumps_case(data), self.session.source_name, on_done=applied)

    def close(self) -> None:
        self.upload.close()
        self._raw = None
        self.points = None
        self._calibration = None

    def __panel__(self):
        compare = pn.Card(self.label_map, self.obs_length, self.compare_button, self.compare_message,
                          title="Label mapping and observation length", collapsed=False, sizing_mode="stretch_width",
                          css_classes=["compare-card"])
        return pn.Column(pn.pane.Markdown("#### Test points (CSV or Excel)", margin=(0, 10)), self.upload,
                         self.limits, self.working, self.preview, self.mapping_box, self.summary, self.problems,
                         compare,
                         pn.pane.Markdown("**Calibrate boundary constants to these points**"), self.fit_choice,
                         self.fit_all, self.fit_button, self.fit_working, self.fit_result, self.apply_button,
                         sizing_mode="stretch_width")


def _fmt_num(x) -> str:
    return "—" if x is None or not np.isfinite(x) else f"{x:.4g}"


class ExportPanel(pn.viewable.Viewer):
    """Downloads for the design review: chart (PNG/SVG/PDF), review report (HTML) and the case file.

    Charts and reports are drawn from the session's :class:`~lowgmap.physics.studies.study.Study`
    (its chart, point, margins and test-point agreement), so a download never rebuilds the chart;
    they are rendered on a worker thread (the server keeps answering meanwhile), with the settings
    on screen (the required margin is the case's, the one control of the point panel).
    ``test_points_panel`` is kept for callers that pass it; the test points reach the export
    through the study.
    """

    def __init__(self, session, test_points_panel=None, **params):
        super().__init__(**params)
        self.session = session
        self.tp = test_points_panel
        self.buttons = []
        self.export_message = pn.pane.HTML("", visible=False, stylesheets=[FIELD_CSS],
                                           css_classes=["field-message", "message-export"], sizing_mode="stretch_width")
        for fmt in ("png", "svg", "pdf"):
            self.buttons.append(pn.widgets.FileDownload(
                callback=self._async(lambda fmt=fmt: self._chart(fmt)), filename=f"regime_chart.{fmt}",
                label=f"Chart ({fmt.upper()})", color="default", css_classes=[f"export-{fmt}"],
                sizing_mode="stretch_width"))
        self.buttons.append(pn.widgets.FileDownload(callback=self._async(self._report), filename="review_report.html",
                                                    label="Review report (HTML)", css_classes=["export-report"],
                                                    sizing_mode="stretch_width"))
        self.buttons.append(pn.widgets.FileDownload(callback=self._case, filename="case.toml",
                                                    label="Case file (TOML)", css_classes=["export-case"],
                                                    sizing_mode="stretch_width"))
        self.case_upload = uploads.BoundedUpload(max_bytes=uploads.CASE_MAX_BYTES, on_file=self._open_case,
                                                 on_refused=self._case_refused, accepted_filetypes=[".toml"],
                                                 css_classes=["case-upload"], sizing_mode="stretch_width")
        self.case_message = pn.pane.HTML("", visible=False, stylesheets=[FIELD_CSS],
                                         css_classes=["field-message", "message-case-upload"],
                                         sizing_mode="stretch_width")

    def _async(self, render):
        """A download callback that renders on a worker thread (the event loop stays free)."""
        async def callback():
            loop = asyncio.get_running_loop()

            def locked():
                with _RENDER_LOCK:
                    return render()
            self.export_message.visible = False
            try:
                return await loop.run_in_executor(worker_pool(), locked)
            except Exception as exc:  # said next to the buttons, then left to the server log
                self.export_message.object = (f"The export could not be made ({html.escape(type(exc).__name__)}: "
                                              f"{html.escape(str(exc))}).")
                self.export_message.visible = True
                raise
        return callback

    def _export_args(self) -> dict:
        """The session's study (its chart already built) and the settings on screen."""
        s = self.session
        return {"settings": s.export_settings(), "invented": s.doc.invented}

    def _chart(self, fmt: str):
        from lowgmap.app.outputs.exports import chart_bytes

        study, kw = self.session.study, self._export_args()
        return io.BytesIO(chart_bytes(study, fmt, log_axes=self.session_log(), **kw))

    def session_log(self):
        return None

    def _report(self):
        from lowgmap.app.outputs.exports import report_html

        s = self.session
        study, kw = s.study, self._export_args()
        tps = self.tp.points if self.tp is not None else None
        page = report_html(study, document=s.doc, point_file=tps if study.agreement is not None else None, **kw)
        return io.BytesIO(page.encode("utf-8"))

    def _case(self):
        return io.BytesIO(self.session.case_text().encode("utf-8"))

    def _case_refused(self, name: str, size: int) -> None:
        self.case_message.object = (f"{html.escape(name)} was not opened: a case file may be at most "
                                    f"{uploads.CASE_MAX_BYTES / 1e6:g} MB.")
        self.case_message.visible = True

    def _open_case(self, name: str, data: bytes):
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError:
            self.case_message.object = f"{html.escape(name)} was not opened: it is not UTF-8 text."
            self.case_message.visible = True
            return
        self.case_message.visible = False
        self.session.load_text(text, name or "uploaded case",
                               on_done=lambda ok, msgs: self._case_opened(name, ok, msgs))

    def _case_opened(self, name: str, ok: bool, msgs: list[str]) -> None:
        if ok:
            self.case_message.object = ""
            self.case_message.visible = False
            return
        items = "".join(f"<li>{html.escape(m)}</li>" for m in msgs)
        self.case_message.object = f"{html.escape(name)} was not opened:<ul>{items}</ul>"
        self.case_message.visible = True

    def close(self) -> None:
        self.case_upload.close()

    def __panel__(self):
        return pn.Column(pn.pane.Markdown("#### Export for review"), *self.buttons, self.export_message,
                         pn.pane.Markdown("**Open a case file** (.toml):"), self.case_upload, self.case_message,
                         sizing_mode="stretch_width")
