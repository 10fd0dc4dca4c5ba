"""Operating point, margin table, test points and export panels of the dashboard.

Long work runs off the server's event loop through the session's runner
(:mod:`lowgmap.app.dashboard.background`): parsing an uploaded file, comparing test points with the
chart, the robust point, a calibration, rendering an export. A visible "working" line says what
is being done; results and problems come back next to the control that asked for them.
"""
from __future__ import annotations

import asyncio
import html
import io
import threading

import numpy as np
import panel as pn

from lowgmap.app.dashboard import uploads
from lowgmap.app.dashboard.background import worker_pool
from lowgmap.app.dashboard.inputs import FIELD_CSS, FieldView
from lowgmap.app.files.units import UnitError, convert
from lowgmap.app.outputs.tables import MARGIN_CSS, margin_table_html

__all__ = ["PointPanel", "MarginTable", "TestPointsPanel", "ExportPanel", "Working", "outside_chart_words"]

_RENDER_LOCK = threading.Lock()   # matplotlib exports one at a time (rc settings are process-wide)

_NOTE_CSS = """
.outside-chart {background: #fff3cd; border: 1px solid #b8860b; color: #5c4400; padding: 6px 8px;
                border-radius: 4px; font-size: 13px; margin: 4px 0;}
.margin-verdict {padding: 6px 8px; border-radius: 4px; font-size: 13px; margin: 4px 0;}
.margin-verdict.met {background: #eef6ee;}
.margin-verdict.not-met {background: #fde0dc; border: 2px solid #C00000;}
.margin-verdict.not-established {background: #fff3cd; border: 2px solid #b8860b;}
.margin-verdict ul {margin: 2px 0 0 0; padding-left: 18px; font-size: 12px;}
"""


class Working(pn.viewable.Viewer):
    """A "working…" line: a spinner and what is being done (hidden when idle)."""

    def __init__(self, css: str, **params):
        super().__init__(**params)
        self.spinner = pn.indicators.LoadingSpinner(value=False, size=18, visible=False, margin=(4, 6))
        self.text = pn.pane.HTML("", visible=False, css_classes=[css], margin=(4, 0))

    def show(self, text: str) -> None:
        self.text.object = f"<span>{html.escape(text)}</span>" if text else ""
        self.spinner.value = self.spinner.visible = self.text.visible = bool(text)

    def __panel__(self):
        return pn.Row(self.spinner, self.text, sizing_mode="stretch_width")


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
    """Typed operating-point fields (with units), live readout, required margin, robust point, uncertainty.

    The required margin is one control (a slider with a number box) bound to the session's
    ``required_margin``, which is the case's ``chart.required_margin``: the margin table, the
    exports and the downloaded case file all read that one value.
    """

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
        self.readout = pn.pane.Markdown(chart_pane.param.readout, css_classes=["point-readout"],
                                        sizing_mode="stretch_width")
        # one value, two views kept in step by the session: a slider and a number box
        # (not panel's EditableFloatSlider: its browser-side link keeps every session's widgets alive)
        rm = round(100 * session.required_margin, 4)
        self.required = pn.widgets.FloatSlider(label="Required margin ± [%]", start=0, end=90, step=0.5, value=rm,
                                               sizing_mode="stretch_width", css_classes=["required-margin"])
        self.required_box = pn.widgets.FloatInput(label="± [%]", start=0, end=99, step=0.5, value=rm, width=90,
                                                  css_classes=["required-margin-input"])
        self.required_message = pn.pane.HTML("", visible=False, stylesheets=[FIELD_CSS],
                                             css_classes=["field-message", "message-required-margin"])
        self._pushing = False
        self.required.param.watch(self._required_changed, "value_throttled")
        self.required_box.param.watch(self._required_changed, "value")
        self.uncertainty = pn.widgets.Checkbox(label="Show flow-rate uncertainty box", value=False,
                                               css_classes=["uncertainty-toggle"])
        self.uncertainty.param.watch(lambda e: setattr(session, "show_uncertainty", e.new), "value")
        self.regime_select = pn.widgets.Select(label="Regime for the robust point", options=[],
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
                for w in (self.required, self.required_box):
                    if w.value != value:
                        w.value = value
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
        intended = st.intended_regime
        if names and self.regime_select.value not in names:
            self.regime_select.value = intended if intended in names else (s.regime_at(s.ql, s.qg) or names[0])

    def _required_changed(self, event):
        if self._pushing or event.new is None:
            return
        other = self.required_box if event.obj is self.required else self.required
        self._pushing = True
        try:
            other.value = event.new  # the other view follows at once
        finally:
            self._pushing = False
        self.session.set_required_margin(float(event.new) / 100.0)

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

    def _robust(self, event):
        self.robust_note.object = "<span>Searching for the most robust point…</span>"
        self.robust_note.visible = True
        self.session.request_robust_point(self.regime_select.value)

    def __panel__(self):
        return pn.Column(pn.pane.Markdown("#### Operating point"), self.readout, self.ql_input, self.qg_input,
                         self.message, pn.Row(self.required, self.required_box, sizing_mode="stretch_width"),
                         self.required_message, self.uncertainty,
                         self.regime_select, self.robust_button, self.robust_note, sizing_mode="stretch_width")


class MarginTable(pn.viewable.Viewer):
    """Margins of the operating point to every boundary (recomputed on release, never on drag).

    Above the table: the verdict against the required margin (:meth:`Session.verdict`, "met" only
    when the margin is established) and, when the point lies outside the drawn chart range, a
    statement saying so.
    """

    def __init__(self, session, **params):
        super().__init__(**params)
        self.session = session
        self.pane = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["margin-pane"],
                                 stylesheets=[MARGIN_CSS])
        self.verdict = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["margin-verdict-pane"],
                                    stylesheets=[_NOTE_CSS], visible=False)
        self.outside = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["outside-chart-pane"],
                                    stylesheets=[_NOTE_CSS], visible=False)
        session.param.watch(lambda *_: self.refresh(), ["margins", "required_margin"])
        self.refresh()

    def refresh(self):
        s = self.session
        if s.closed:
            return
        self.pane.object = margin_table_html(s.margins, s.required_margin)
        words = outside_chart_words(s.margins, s.doc)
        self.outside.object = f"<div class='outside-chart'>{html.escape(words)}</div>" if words else ""
        self.outside.visible = bool(words)
        v = s.verdict()
        if v is None:
            self.verdict.object, self.verdict.visible = "", False
            return
        cls = {"met": "met", "NOT MET": "not-met"}.get(v.margin_status, "not-established")
        notes = list(v.limits[:-1]) if v.margin_status == "not established" else []
        items = "".join(f"<li>{html.escape(n)}</li>" for n in notes if n and n != s.margins.outside_chart_note)
        self.verdict.object = (f"<div class='margin-verdict {cls}' data-status='{html.escape(v.margin_status)}'>"
                               f"{html.escape(v.headline)}" + (f"<ul>{items}</ul>" if items else "") + "</div>")
        self.verdict.visible = True

    def __panel__(self):
        return pn.Column(pn.pane.Markdown("#### Margins to every boundary"), self.verdict, self.outside, self.pane,
                         sizing_mode="stretch_width")


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
        session.param.watch(lambda *_: (self._redraw(), self._refresh_fit_options()), ["revision_counter"])

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
            self.chart_pane._held(self.chart_pane.show_test_points, None, [], {})
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
        # compared on the session's chart (the study's agreement), on a worker thread, in edit order
        self.session.set_test_points(tps, on_done=lambda ok, msgs: self._compared(token, tps))

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
                               "</p><pre style='font-size:11px;max-height:140px;overflow:auto'>"
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
        from lowgmap.app.outputs.chartview import regime_style

        tps = self.points
        study = self.session.study
        if tps is None or study is None or study.agreement is None:
            return
        chart = study.chart
        pts = tps.points
        res = study.agreement  # lowgmap.physics.studies.agreement.agreement, as in `lowgmap compare`
        predicted = [p.predicted for p in res.points]
        styles = {name: regime_style(i)[0] for i, name in enumerate(chart.regime_names)}
        self.chart_pane._held(self.chart_pane.show_test_points, pts, predicted, styles)
        ca, cv = res.confusion_all, res.confusion_valid
        n_valid = sum(p.valid for p in res.points)

        def pct(f):
            return "—" if f is None else f"{100 * f:.0f} %"

        invalid = [p for p in res.points if not p.valid]
        reasons = "".join(f"<li>{html.escape(p.test_id)}: {html.escape('; '.join(p.reasons))}</li>"
                          for p in invalid[:8])
        more = f"<li>… and {len(invalid) - 8} more</li>" if len(invalid) > 8 else ""
        matrix = html.escape(ca.format()) if ca.compared else ""
        self.summary.object = (
            f"<div class='agreement' data-agree='{ca.agreeing}' data-total='{ca.compared}' "
            f"data-valid='{n_valid}'>"
            f"<b>Agreement:</b> {ca.agreeing} of {ca.compared} labelled points ({pct(ca.fraction)}) fall in the "
            f"regime they were observed in; valid points only: {cv.agreeing} of {cv.compared} "
            f"({pct(cv.fraction)}). {len(pts)} points drawn; disagreements outlined in red."
            + (f"<br>Labels not on this chart (left out until mapped): "
               f"{html.escape(', '.join(f'{u[0]} ({u[1]})' for u in res.unknown_labels))}"
               if res.unknown_labels else "")
            + (f"<br><b>{len(invalid)} point(s) cannot support a low-gravity conclusion:</b><ul>{reasons}{more}</ul>"
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
        return pn.Column(pn.pane.Markdown("#### Test points (CSV or Excel)"), self.upload, self.limits, self.working,
                         self.preview, self.mapping_box, self.summary, self.problems,
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

        study, kw = self.session.study, self._export_args()
        return io.BytesIO(report_html(study, **kw).encode("utf-8"))

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
