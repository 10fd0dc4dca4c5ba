"""Design tab of the dashboard: a small sweep over two case inputs and its margin map.

:class:`DesignTab` is a self-contained view: two inputs of the current case with ranges (text with
units, defaults ±50 % around the case's values), a grid of at most 12 x 12 designs, a Run button,
progress, and the margin map (matplotlib PNG, filled contours with the required-margin line and the
current design marked) with the result table for download. The numbers come from
:func:`lowgmap.physics.studies.sweep.sweep`'s engine, as for ``lowgmap sweep``.

The sweep runs in worker threads, a few designs at a time (``asyncio.to_thread``), so the server
keeps answering other sessions; the progress bar moves between chunks. Open-section inputs that
change the corner shape (half-angle, contact angle) build new open-channel tables (about 1.5 s per
new value), so such a map takes some tens of seconds the first time.
"""
from __future__ import annotations

import asyncio
import html
import io
import math

import numpy as np
import panel as pn
import param

from lowgmap.app.files.units import UnitError, convert, to_si

__all__ = ["DesignTab", "MAX_STEPS", "design_inputs"]

#: Largest number of grid points per variable.
MAX_STEPS = 12

#: Inputs offered, with their quantity kind and display unit.
_INPUTS = {
    "half_angle": ("corner half-angle", "angle", "deg"),
    "contact_angle": ("contact angle", "angle", "deg"),
    "length": ("conduit length", "length", "mm"),
    "size": ("hydraulic diameter (section scaled)", "length", "mm"),
    "residual_acceleration": ("residual acceleration", "acceleration", "g0"),
    "temperature": ("temperature", "temperature", "degC"),
}
_CHUNK = 6          # designs per worker-thread call


def design_inputs(case) -> dict[str, tuple[str, str, str, float]]:
    """Inputs a design map can vary for ``case``: name -> (label, kind, unit, current SI value)."""
    from lowgmap.physics.studies.design import nominal_design_value

    out = {}
    for name, (label, kind, unit) in _INPUTS.items():
        if name == "half_angle" and getattr(case.section, "half_angle", None) is None:
            continue
        v = nominal_design_value(case, name)
        if v is not None:
            out[name] = (label, kind, unit, float(v))
    return out


def _default_range(name: str, kind: str, value: float) -> tuple[float, float]:
    if kind == "temperature":
        return value - 20.0, value + 20.0
    if name == "contact_angle":
        lo, hi = max(0.0, value - math.radians(30)), min(math.radians(89.0), value + math.radians(30))
        return (lo, hi) if hi > lo else (0.0, math.radians(60))
    if name == "half_angle":
        return max(math.radians(1.0), 0.5 * value), min(math.radians(60.0), 1.5 * value)
    if value > 0:
        return 0.5 * value, 1.5 * value
    return 0.0, 1.0


def _text(value_si: float, kind: str, unit: str) -> str:
    return f"{float(convert(value_si, kind, unit)):.4g} {unit}"


class DesignTab(pn.viewable.Viewer):
    """Margin map over two inputs of the session's case (see the module notes).

    Parameters
    ----------
    session : lowgmap.app.dashboard.state.Session   its ``doc``, ``chart``, ``ql``/``qg`` and ``required_margin``
    """

    running = param.Boolean(default=False, doc="a sweep is running")

    def __init__(self, session, **params):
        super().__init__(**params)
        self.session = session
        self.result = None          # DataFrame of the last map
        self._task_token = 0
        self.x_var = pn.widgets.Select(label="first input (x axis)", css_classes=["design-x"])
        self.y_var = pn.widgets.Select(label="second input (y axis)", css_classes=["design-y"])
        self.x_from = pn.widgets.TextInput(label="x from", css_classes=["design-x-from"], width=130)
        self.x_to = pn.widgets.TextInput(label="x to", css_classes=["design-x-to"], width=130)
        self.y_from = pn.widgets.TextInput(label="y from", css_classes=["design-y-from"], width=130)
        self.y_to = pn.widgets.TextInput(label="y to", css_classes=["design-y-to"], width=130)
        self.steps = pn.widgets.IntSlider(label="grid points per input", start=3, end=MAX_STEPS, value=8,
                                          css_classes=["design-steps"])
        self.run_button = pn.widgets.Button(label="Run design map", color="primary", css_classes=["design-run"])
        self.progress = pn.indicators.Progress(value=0, max=100, visible=False, sizing_mode="stretch_width",
                                               css_classes=["design-progress"])
        self.status = pn.pane.HTML("", css_classes=["design-status"], sizing_mode="stretch_width")
        self.image = pn.pane.PNG(None, sizing_mode="scale_width", max_width=760, css_classes=["design-map"])
        self.download = pn.widgets.FileDownload(callback=self._csv, filename="design_map.csv",
                                                label="Map results (CSV)", disabled=True,
                                                css_classes=["design-download"])
        self._fill_choices()
        self.x_var.param.watch(lambda e: self._set_range("x"), "value")
        self.y_var.param.watch(lambda e: self._set_range("y"), "value")
        self.run_button.on_click(self._on_run)
        session.param.watch(self._case_changed, ["revision_counter"])

    # ----------------------------------------------------------------------------------- form
    def _fill_choices(self):
        self.inputs = design_inputs(self.session.doc.case)
        options = {f"{lab} ({name})": name for name, (lab, _, _, _) in self.inputs.items()}
        names = list(self.inputs)
        x0 = "half_angle" if "half_angle" in names else ("size" if "size" in names else names[0])
        y0 = "length" if "length" in names and x0 != "length" else next(n for n in names if n != x0)
        with param.parameterized.discard_events(self.x_var), param.parameterized.discard_events(self.y_var):
            self.x_var.options = options
            self.y_var.options = options
            self.x_var.value = x0
            self.y_var.value = y0
        self._set_range("x")
        self._set_range("y")

    def _set_range(self, axis: str):
        name = (self.x_var if axis == "x" else self.y_var).value
        if name not in self.inputs:
            return
        _, kind, unit, value = self.inputs[name]
        lo, hi = _default_range(name, kind, value)
        lo_w, hi_w = (self.x_from, self.x_to) if axis == "x" else (self.y_from, self.y_to)
        lo_w.value = _text(lo, kind, unit)
        hi_w.value = _text(hi, kind, unit)

    def _case_changed(self, *_):
        keep = (self.x_var.value, self.y_var.value)
        texts = (self.x_from.value, self.x_to.value, self.y_from.value, self.y_to.value)
        self._fill_choices()
        if keep[0] in self.inputs and keep[1] in self.inputs and keep[0] != keep[1]:
            self.x_var.value, self.y_var.value = keep
            self.x_from.value, self.x_to.value, self.y_from.value, self.y_to.value = texts

    def designs(self) -> list[dict]:
        """The grid of designs (SI) from the form; ValueError/UnitError with a plain message."""
        from lowgmap.physics.studies.sweep import grid

        xv, yv = self.x_var.value, self.y_var.value
        if xv == yv:
            raise ValueError("choose two different inputs")
        n = int(self.steps.value)
        if not 2 <= n <= MAX_STEPS:
            raise ValueError(f"grid points per input must be within [2, {MAX_STEPS}], got {n}")
        values = {}
        for name, lo_t, hi_t in ((xv, self.x_from.value, self.x_to.value), (yv, self.y_from.value, self.y_to.value)):
            _, kind, _, _ = self.inputs[name]
            lo = to_si(lo_t, kind, f"{name} from")
            hi = to_si(hi_t, kind, f"{name} to")
            if not hi > lo:
                raise ValueError(f"{name}: 'to' must be above 'from' (got {lo_t!r} to {hi_t!r})")
            values[name] = [float(v) for v in np.linspace(lo, hi, n)]
        return grid(values)

    def _spec_args(self):
        s = self.session
        doc = s.doc
        regime = doc.settings.intended_regime
        if regime is not None and regime not in s.chart.regime_names:
            regime = None
        if regime is None and s.ql is not None:
            regime = s.regime_at(s.ql, s.qg) or None
        point = (s.ql, s.qg) if s.ql is not None else None
        return doc, dict(point=point, regime=regime, required_margin=float(s.required_margin))

    # ----------------------------------------------------------------------------------- running
    def run_sync(self):
        """Compute the map in this thread (tests, scripts); returns the result DataFrame."""
        from lowgmap.physics.studies.sweep import sweep

        from lowgmap.app.files.studyfiles import fluid_spec

        designs = self.designs()
        doc, kw = self._spec_args()
        df = sweep(doc.case, designs, fluid_spec=fluid_spec(doc), **kw)
        self._show(df, kw)
        return df

    async def _on_run(self, event=None):
        from lowgmap.physics.studies.sweep import SweepSpec, DesignEvaluator, tidy_results

        from lowgmap.app.files.studyfiles import fluid_spec

        if self.running:
            return
        try:
            designs = self.designs()
        except (ValueError, UnitError) as exc:
            self.status.object = f"<p class='design-error' style='color:#8B0000'>{html.escape(str(exc))}</p>"
            return
        doc, kw = self._spec_args()
        self._task_token += 1
        token = self._task_token
        self.running = True
        self.run_button.disabled = True
        self.progress.value, self.progress.visible = 0, True
        self.status.object = f"<p>Running {len(designs)} designs…</p>"
        try:
            spec = SweepSpec(doc.case, fluid_spec=fluid_spec(doc), **kw)
            ev = DesignEvaluator(spec)
            parts = []
            for a in range(0, len(designs), _CHUNK):
                part = await asyncio.to_thread(ev.evaluate_many, designs[a:a + _CHUNK], None, a)
                if token != self._task_token:
                    return
                parts.append(part)
                self.progress.value = int(100 * min(len(designs), a + _CHUNK) / len(designs))
            import pandas as pd

            df = tidy_results(pd.concat(parts, ignore_index=True), designs, spec)
            png = await asyncio.to_thread(self._map_png, df, kw)   # matplotlib off the event loop too
            if token != self._task_token:
                return
            self._show(df, kw, png)
        except Exception as exc:  # shown in the page, never as a traceback
            self.status.object = f"<p class='design-error' style='color:#8B0000'>{html.escape(str(exc))}</p>"
        finally:
            self.running = False
            self.run_button.disabled = False
            self.progress.visible = False

    def _map_png(self, df, kw) -> bytes:
        """The margin map as PNG bytes (matplotlib; may run on a worker thread)."""
        from lowgmap.physics.studies.design import nominal_design_value

        from lowgmap.app.outputs.maps import margin_map_png

        xv, yv = self.x_var.value, self.y_var.value
        kinds = {n: self.inputs[n][1] for n in (xv, yv)}
        units = {n: self.inputs[n][2] for n in (xv, yv)}
        case = self.session.doc.case
        base = (nominal_design_value(case, xv), nominal_design_value(case, yv))
        return margin_map_png(df, xv, yv, column="margin", required=kw["required_margin"], kinds=kinds,
                              units=units, title=f"{case.title}: margin at the operating point", base=base)

    def _show(self, df, kw, png: bytes | None = None):
        self.result = df
        xv, yv = self.x_var.value, self.y_var.value
        kinds = {n: self.inputs[n][1] for n in (xv, yv)}
        units = {n: self.inputs[n][2] for n in (xv, yv)}
        self.image.object = png if png is not None else self._map_png(df, kw)
        ok = df[df["status"] == "ok"]
        meets = int(df["meets_required"].sum()) if "meets_required" in df else 0
        best = ok.loc[ok["margin"].idxmax()] if len(ok) and ok["margin"].notna().any() else None
        text = (f"<div class='design-summary' data-designs='{len(df)}' data-meets='{meets}'>"
                f"{len(df)} designs, {len(ok)} evaluated; <b>{meets}</b> keep the point in "
                f"<i>{html.escape(str(kw['regime'] or 'its own regime'))}</i> with at least "
                f"±{100 * kw['required_margin']:.0f} %.")
        if best is not None:
            text += (f"<br>Best: {xv} {_text(best[xv], kinds[xv], units[xv])}, {yv} "
                     f"{_text(best[yv], kinds[yv], units[yv])} → ±{100 * best['margin']:.1f} % "
                     f"(limited by {html.escape(str(best['limiting']))}).")
        bad = df[df["status"] != "ok"]
        if len(bad):
            text += f"<br>{len(bad)} designs could not be evaluated: {html.escape(str(bad.iloc[0]['status']))}"
        self.status.object = text + "</div>"
        self.download.disabled = False

    def _csv(self):
        if self.result is None:
            return io.BytesIO(b"")
        return io.BytesIO(self.result.to_csv(index=False).encode("utf-8"))

    def __panel__(self):
        form = pn.Column(
            pn.pane.Markdown("#### Design map\nMargin of the operating point over two inputs of the case "
                             "(other inputs as in the case)."),
            pn.Row(self.x_var, self.x_from, self.x_to),
            pn.Row(self.y_var, self.y_from, self.y_to),
            self.steps, pn.Row(self.run_button, self.download), self.progress, self.status,
            width=520)
        return pn.Row(form, self.image, sizing_mode="stretch_width")
