"""Operating point, margin table, test points and export panels of the dashboard."""
from __future__ import annotations

import html
import io

import numpy as np
import panel as pn
import param

from lowgmap.app.files.units import UnitError, convert
from lowgmap.app.outputs.tables import MARGIN_CSS, margin_table_html

__all__ = ["PointPanel", "MarginTable", "TestPointsPanel", "ExportPanel"]


class PointPanel(pn.viewable.Viewer):
    """Typed operating-point fields (with units), live readout, robust-point and uncertainty controls."""

    def __init__(self, session, chart_pane, **params):
        super().__init__(**params)
        self.session = session
        self.chart_pane = chart_pane
        st = session.doc.settings
        self.ql_input = pn.widgets.TextInput(name=f"Liquid flow rate", sizing_mode="stretch_width",
                                             css_classes=["ql-input"])
        self.qg_input = pn.widgets.TextInput(name=f"Gas flow rate (sccm, slpm allowed)", sizing_mode="stretch_width",
                                             css_classes=["qg-input"])
        self.message = pn.pane.Alert("", alert_type="danger", visible=False, css_classes=["point-problem"],
                                     sizing_mode="stretch_width")
        self.readout = pn.pane.Markdown(chart_pane.param.readout, css_classes=["point-readout"],
                                        sizing_mode="stretch_width")
        self.required = pn.widgets.FloatSlider(name="Required margin ± [%]", start=0, end=90, step=1,
                                               value=round(100 * st.required_margin), sizing_mode="stretch_width")
        self.required.param.watch(lambda e: setattr(session, "required_margin", e.new / 100.0), "value")
        self.uncertainty = pn.widgets.Checkbox(name="Show flow-rate uncertainty box", value=False,
                                               css_classes=["uncertainty-toggle"])
        self.uncertainty.param.watch(lambda e: setattr(session, "show_uncertainty", e.new), "value")
        self.regime_select = pn.widgets.Select(name="Regime for the robust point", options=[],
                                               sizing_mode="stretch_width")
        self.robust_button = pn.widgets.Button(name="Move to the most robust point", button_type="primary",
                                               sizing_mode="stretch_width")
        self.robust_button.on_click(self._robust)
        self._sync_fields()
        for w in (self.ql_input, self.qg_input):
            w.param.watch(self._typed, "value")
        session.param.watch(lambda *_: self._sync_fields(), ["ql", "qg", "revision_counter"])

    def _sync_fields(self):
        s = self.session
        st = s.doc.settings
        self._syncing = True
        try:
            if s.ql is not None:
                self.ql_input.value = f"{convert(s.ql, 'flow', st.liquid_flow_unit):.4g} {st.liquid_flow_unit}"
                self.qg_input.value = f"{convert(s.qg, 'flow', st.gas_flow_unit):.4g} {st.gas_flow_unit}"
            names = list(s.chart.regime_names)
            self.regime_select.options = names
            intended = st.intended_regime
            if names and self.regime_select.value not in names:
                self.regime_select.value = intended if intended in names else (s.regime_at(s.ql, s.qg) or names[0])
        finally:
            self._syncing = False

    def _typed(self, event):
        if getattr(self, "_syncing", False):
            return
        try:
            ql, qg = self.session.parse_point_text(self.ql_input.value, self.qg_input.value)
        except (UnitError, ValueError) as exc:
            self.message.object = f"{exc} — the operating point was not moved."
            self.message.visible = True
            return
        self.message.visible = False
        self.session.move_point(ql, qg)

    def _robust(self, event):
        try:
            rp = self.session.robust_point(self.regime_select.value)
        except (ValueError, RuntimeError) as exc:
            self.message.object = f"No robust point: {exc}"
            self.message.visible = True
            return
        self.message.visible = False
        return rp

    def __panel__(self):
        return pn.Column(pn.pane.Markdown("#### Operating point"), self.readout, self.ql_input, self.qg_input,
                         self.message, self.required, self.uncertainty, self.regime_select, self.robust_button,
                         sizing_mode="stretch_width")


class MarginTable(pn.viewable.Viewer):
    """Margins of the operating point to every boundary (recomputed on release, never on drag)."""

    def __init__(self, session, **params):
        super().__init__(**params)
        self.session = session
        self.pane = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["margin-pane"],
                                 stylesheets=[MARGIN_CSS])
        session.param.watch(lambda *_: self.refresh(), ["margins", "required_margin"])
        self.refresh()

    def refresh(self):
        self.pane.object = margin_table_html(self.session.margins, self.session.required_margin)

    def __panel__(self):
        return pn.Column(pn.pane.Markdown("#### Margins to every boundary"), self.pane, sizing_mode="stretch_width")


class TestPointsPanel(pn.viewable.Viewer):
    """Upload test points (CSV/Excel), map columns when needed, draw them and summarise agreement."""

    MAX_BYTES = 20_000_000

    def __init__(self, session, chart_pane, **params):
        super().__init__(**params)
        self.session = session
        self.chart_pane = chart_pane
        self.upload = pn.widgets.FileInput(accept=".csv,.tsv,.txt,.xlsx", multiple=False,
                                           css_classes=["points-upload"], sizing_mode="stretch_width")
        self.upload.param.watch(self._on_upload, "value")
        self.preview = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["points-preview"])
        self.summary = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["points-summary"])
        self.problems = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["points-problems"])
        self.mapping_box = pn.Column(sizing_mode="stretch_width", visible=False)
        self._raw: bytes | None = None
        self._name = ""
        self.points = None
        self.fit_choice = pn.widgets.MultiChoice(name="Constants to fit to the test points (at most 4)",
                                                 options=[], max_items=4, sizing_mode="stretch_width",
                                                 css_classes=["fit-choice"])
        self.fit_all = pn.widgets.Checkbox(name="Use all labelled points (not only the valid ones)", value=False,
                                           css_classes=["fit-all"])
        self.fit_button = pn.widgets.Button(name="Calibrate", button_type="primary", css_classes=["fit-run"])
        self.fit_button.on_click(self._calibrate)
        self.fit_result = pn.pane.HTML("", sizing_mode="stretch_width", css_classes=["fit-result"])
        self.apply_button = pn.widgets.Button(name="Apply as the next case revision", button_type="success",
                                              visible=False, css_classes=["fit-apply"])
        self.apply_button.on_click(self._apply_fit)
        self._calibration = None
        self._refresh_fit_options()
        session.param.watch(lambda *_: (self._redraw(), self._refresh_fit_options()), ["revision_counter"])

    def _on_upload(self, event):
        if not event.new:
            return
        data = event.new if isinstance(event.new, bytes) else str(event.new).encode()
        if len(data) > self.MAX_BYTES:
            self.problems.object = (f"<p class='err'>File too large ({len(data) / 1e6:.1f} MB); the limit is "
                                    f"{self.MAX_BYTES / 1e6:.0f} MB.</p>")
            return
        self._raw = data
        self._name = self.upload.filename or "uploaded file"
        self.load(mapping=None)

    def load(self, mapping=None, regime_map=None):
        from lowgmap.app.files.testpoints import TestPointError, read_test_points

        f = self.session.doc.case.fluid
        self._show_preview()
        try:
            tps = read_test_points(self._raw, name=self._name, mapping=mapping, regime_map=regime_map,
                                   pressure=f.pressure, temperature=f.temperature)
        except TestPointError as exc:
            self.points = None
            self.session.set_test_points(None)
            self.chart_pane._held(self.chart_pane.show_test_points, None, [], {})
            self.summary.object = ""
            items = "".join(f"<li>{html.escape(str(p))}</li>" for p in getattr(exc, "problems", [])) or \
                f"<li>{html.escape(str(exc))}</li>"
            self.problems.object = f"<p><b>The file could not be read:</b></p><ul>{items}</ul>"
            self._offer_mapping()
            return
        self.mapping_box.visible = False
        self.points = tps
        self.session.set_test_points(tps)  # compared on the session's chart (the study's agreement)
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
            text = self._raw.decode("utf-8-sig", errors="replace")
        except Exception:  # binary (Excel)
            text = ""
        lines = text.splitlines()[:8]
        self.preview.object = ("<p><b>" + html.escape(self._name) + "</b> (first lines, the file is not changed)"
                               "</p><pre style='font-size:11px;max-height:140px;overflow:auto'>"
                               + html.escape("\n".join(lines)) + "</pre>") if lines else ""

    def _offer_mapping(self):
        text = self._raw.decode("utf-8-sig", errors="replace") if self._raw else ""
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
            sel = pn.widgets.Select(name=field.replace("_", " "), options=["(none)"] + cols,
                                    css_classes=[f"map-{field}"])
            u = pn.widgets.TextInput(name="unit", value=unit or "", visible=unit is not None,
                                     css_classes=[f"map-{field}-unit"])
            self._map_widgets[field] = (sel, u)
            widgets.append(pn.Row(sel, u))
        apply = pn.widgets.Button(name="Apply column mapping", button_type="primary", css_classes=["map-apply"])
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
        if tps is None or study.agreement is None:
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
               f"{html.escape(', '.join(f'{u[0]} ({u[1]})' for u in res.unknown_labels))}" if res.unknown_labels else "")
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
        try:
            cal = calibrate(self.session.chart, self.points, list(self.fit_choice.value),
                            use="all" if self.fit_all.value else "valid")
        except ValueError as exc:
            self._calibration = None
            self.apply_button.visible = False
            self.fit_result.object = f"<p class='err'><b>Cannot calibrate:</b> {html.escape(str(exc))}</p>"
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
        if self.session.load_text(dumps_case(data), self.session.source_name):
            self.fit_result.object += f"<p><b>Applied: the case is now revision {html.escape(revision)}</b> " \
                                      "(the previous constants are kept in its [[history]]).</p>"
            self.apply_button.visible = False
            self._calibration = None

    def __panel__(self):
        return pn.Column(pn.pane.Markdown("#### Test points (CSV or Excel)"), self.upload, self.preview,
                         self.mapping_box, self.summary, self.problems,
                         pn.pane.Markdown("**Calibrate boundary constants to these points**"), self.fit_choice,
                         self.fit_all, self.fit_button, self.fit_result, self.apply_button,
                         sizing_mode="stretch_width")


def _fmt_num(x) -> str:
    return "—" if x is None or not np.isfinite(x) else f"{x:.4g}"


class ExportPanel(pn.viewable.Viewer):
    """Downloads for the design review: chart (PNG/SVG/PDF), review report (HTML) and the case file.

    Charts and reports are drawn from the session's :class:`~lowgmap.physics.studies.study.Study`
    (its chart, point, margins and test-point agreement), so a download never rebuilds the chart.
    ``test_points_panel`` is kept for callers that pass it; the test points reach the export
    through the study.
    """

    def __init__(self, session, test_points_panel=None, **params):
        super().__init__(**params)
        self.session = session
        self.tp = test_points_panel
        self.buttons = []
        for fmt in ("png", "svg", "pdf"):
            self.buttons.append(pn.widgets.FileDownload(
                callback=lambda fmt=fmt: self._chart(fmt), filename=f"regime_chart.{fmt}",
                label=f"Chart ({fmt.upper()})", button_type="default", css_classes=[f"export-{fmt}"],
                sizing_mode="stretch_width"))
        self.buttons.append(pn.widgets.FileDownload(callback=self._report, filename="review_report.html",
                                                    label="Review report (HTML)", css_classes=["export-report"],
                                                    sizing_mode="stretch_width"))
        self.buttons.append(pn.widgets.FileDownload(callback=self._case, filename="case.toml",
                                                    label="Case file (TOML)", css_classes=["export-case"],
                                                    sizing_mode="stretch_width"))
        self.case_upload = pn.widgets.FileInput(accept=".toml", css_classes=["case-upload"],
                                                sizing_mode="stretch_width")
        self.case_upload.param.watch(self._open_case, "value")

    def _export_args(self) -> dict:
        """The session's study (its chart already built) and the settings on screen."""
        s = self.session
        return {"settings": s.export_settings(), "invented": s.doc.invented}

    def _chart(self, fmt: str):
        from lowgmap.app.outputs.exports import chart_bytes

        data = chart_bytes(self.session.study, fmt, log_axes=self.session_log(), **self._export_args())
        return io.BytesIO(data)

    def session_log(self):
        return None

    def _report(self):
        from lowgmap.app.outputs.exports import report_html

        return io.BytesIO(report_html(self.session.study, **self._export_args()).encode("utf-8"))

    def _case(self):
        return io.BytesIO(self.session.case_text().encode("utf-8"))

    def _open_case(self, event):
        if not event.new:
            return
        try:
            text = event.new.decode("utf-8-sig")
        except UnicodeDecodeError:
            self.session.problems = {"case": ["the uploaded case file is not UTF-8 text"]}
            return
        self.session.load_text(text, self.case_upload.filename or "uploaded case")

    def __panel__(self):
        return pn.Column(pn.pane.Markdown("#### Export for review"), *self.buttons,
                         pn.pane.Markdown("**Open a case file** (.toml):"), self.case_upload,
                         sizing_mode="stretch_width")
