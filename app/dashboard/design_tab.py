"""Design tab of the dashboard: the margin of the operating point over two case inputs, refined near its contours.

:class:`DesignTab` is a self-contained view: two inputs of the current case with ranges (text with
units, defaults ±50 % around the case's values), the number of designs to evaluate (25 to 400), a Run
button, progress, and the margin map (matplotlib PNG: filled contours with the zero and required-margin
lines, every evaluated design and the current design marked with its margin) with the result table for
download. The map is :func:`lowgmap.physics.studies.sweep.sweep_map`: a starting grid that has the
current design as a node, refined where the zero or the required-margin contour crosses a cell, each
design evaluated by the engine of ``lowgmap sweep``. So the map's value at the current design is the
margin table's, and a contour is drawn between designs on either side of it at the final spacing, not
interpolated across a line between coarse grid nodes.

The map runs on a worker thread (``asyncio.to_thread``), so the server keeps answering other
sessions, and its designs are split over :data:`MAP_WORKERS` worker processes (those of one value of the
first input in one process, which keeps that value's tables), started in the background when the tab
is first shown; the progress bar follows the designs evaluated. The table is the same as in one
process.
"""
from __future__ import annotations

import asyncio
import html
import io
import math
import os
import threading

import numpy as np
import panel as pn
import param

from lowgmap.app.files.units import UnitError, convert, to_si

__all__ = ["DesignTab", "MAX_DESIGNS", "MIN_DESIGNS", "MAP_WORKERS", "design_inputs"]

#: Most designs of one map (and the default).
MAX_DESIGNS = 400
#: Fewest designs of one map (a 3 x 3 starting grid and room to refine it).
MIN_DESIGNS = 25
#: Worker processes of a map (1: in the server's own process). Two on a machine with two cores or more: a map
#: of the wedge sample's 400 designs 3.4 -> 2.1 s in a slow hour of a 2-core machine.
MAP_WORKERS = min(2, os.cpu_count() or 1)
_WARMED = threading.Event()


def _warm(warm_map_pools, case) -> None:
    """Warm the map workers with the case's chart; a case whose chart fails there only loses the head start (the
    map itself reports its own errors)."""
    try:
        warm_map_pools(MAP_WORKERS, case)
    except Exception:           # noqa: BLE001 - a background head start, never an error shown
        try:
            warm_map_pools(MAP_WORKERS)
        except Exception:       # noqa: BLE001
            pass

#: Inputs offered, with their quantity kind and display unit.
_INPUTS = {
    "half_angle": ("corner half-angle", "angle", "deg"),
    "contact_angle": ("contact angle", "angle", "deg"),
    "length": ("conduit length", "length", "mm"),
    "size": ("hydraulic diameter (section scaled)", "length", "mm"),
    "residual_acceleration": ("residual acceleration", "acceleration", "g0"),
    "temperature": ("temperature", "temperature", "degC"),
}


class _Superseded(Exception):
    """A newer map (or a change of the case) replaced the one being computed: stop it."""


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
        self.x_var = pn.widgets.Select(label="first input (x axis)", css_classes=["design-x"], width=270)
        self.y_var = pn.widgets.Select(label="second input (y axis)", css_classes=["design-y"], width=270)
        self.x_from = pn.widgets.TextInput(label="x from", css_classes=["design-x-from"], width=115)
        self.x_to = pn.widgets.TextInput(label="x to", css_classes=["design-x-to"], width=115)
        self.y_from = pn.widgets.TextInput(label="y from", css_classes=["design-y-from"], width=115)
        self.y_to = pn.widgets.TextInput(label="y to", css_classes=["design-y-to"], width=115)
        self.budget = pn.widgets.IntSlider(label="designs to evaluate (refined near the contours)", start=MIN_DESIGNS,
                                           end=MAX_DESIGNS, step=25, value=MAX_DESIGNS, css_classes=["design-budget"])
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

    def ranges(self) -> dict:
        """The two inputs and their ranges (SI) from the form: {name: (low, high)}; ValueError/UnitError with a
        plain message."""
        xv, yv = self.x_var.value, self.y_var.value
        if xv == yv:
            raise ValueError("choose two different inputs")
        n = int(self.budget.value)
        if not MIN_DESIGNS <= n <= MAX_DESIGNS:
            raise ValueError(f"designs to evaluate must be within [{MIN_DESIGNS}, {MAX_DESIGNS}], got {n}")
        out = {}
        for name, lo_t, hi_t in ((xv, self.x_from.value, self.x_to.value), (yv, self.y_from.value, self.y_to.value)):
            _, kind, _, _ = self.inputs[name]
            lo = to_si(lo_t, kind, f"{name} from")
            hi = to_si(hi_t, kind, f"{name} to")
            if not hi > lo:
                raise ValueError(f"{name}: 'to' must be above 'from' (got {lo_t!r} to {hi_t!r})")
            out[name] = (float(lo), float(hi))
        return out

    def _log(self, name: str, rng) -> bool:
        """Geometric spacing for a residual acceleration spanning more than a decade."""
        return name == "residual_acceleration" and rng[0] > 0 and rng[1] / rng[0] > 10.0

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
    def _compute(self, ranges, doc, kw, progress=None):
        """The map (worker thread): (DesignMap, DataFrame) of :func:`~lowgmap.physics.studies.sweep.sweep_map`."""
        from lowgmap.physics.studies.sweep import sweep_map

        from lowgmap.app.files.studyfiles import fluid_spec

        (xv, xr), (yv, yr) = ranges.items()
        return sweep_map(doc.case, xv, xr, yv, yr, n_max=int(self.budget.value), log_x=self._log(xv, xr),
                         log_y=self._log(yv, yr), progress=progress, fluid_spec=fluid_spec(doc),
                         workers=MAP_WORKERS, **kw)

    def prepare(self) -> None:
        """Start the map's worker processes in the background (once per server), each building the chart of the
        case in effect once (tables and code loaded), so that a first map does not wait for them: called when the
        tab is first shown."""
        from lowgmap.physics.studies.sweep import warm_map_pools

        if MAP_WORKERS > 1 and not _WARMED.is_set():
            _WARMED.set()
            threading.Thread(target=_warm, args=(warm_map_pools, self.session.doc.case), name="lowgmap-map-start",
                             daemon=True).start()

    def run_sync(self):
        """Compute the map in this thread (tests, scripts); returns the result DataFrame."""
        ranges = self.ranges()
        doc, kw = self._spec_args()
        _, df = self._compute(ranges, doc, kw)
        self._show(df, kw, ranges)
        return df

    async def _on_run(self, event=None):
        if self.running:
            return
        try:
            ranges = self.ranges()
        except (ValueError, UnitError) as exc:
            self.status.object = f"<p class='design-error' style='color:#8B0000'>{html.escape(str(exc))}</p>"
            return
        doc, kw = self._spec_args()
        self._task_token += 1
        token = self._task_token
        self.running = True
        self.run_button.disabled = True
        self.progress.value, self.progress.visible = 0, True
        self.status.object = f"<p>Running up to {int(self.budget.value)} designs…</p>"
        done = [0, 1]

        def progress(k, n):
            if token != self._task_token:
                raise _Superseded()
            done[:] = [k, n]
        try:
            job = asyncio.ensure_future(asyncio.to_thread(self._compute, ranges, doc, kw, progress))
            while not job.done():               # the progress bar follows the designs evaluated so far
                await asyncio.wait({job}, timeout=0.25)
                self.progress.value = int(100 * min(done[0], done[1]) / max(done[1], 1))
            _, df = job.result()
            if token != self._task_token:
                return
            png = await asyncio.to_thread(self._map_png, df, kw, ranges)   # matplotlib off the event loop too
            if token != self._task_token:
                return
            self._show(df, kw, ranges, png)
        except _Superseded:
            return
        except Exception as exc:  # shown in the page, never as a traceback
            self.status.object = f"<p class='design-error' style='color:#8B0000'>{html.escape(str(exc))}</p>"
        finally:
            self.running = False
            self.run_button.disabled = False
            self.progress.visible = False

    def _map_png(self, df, kw, ranges) -> bytes:
        """The margin map as PNG bytes (matplotlib; may run on a worker thread)."""
        from lowgmap.physics.studies.design import nominal_design_value

        from lowgmap.app.outputs.maps import margin_map_png

        xv, yv = self.x_var.value, self.y_var.value
        kinds = {n: self.inputs[n][1] for n in (xv, yv)}
        units = {n: self.inputs[n][2] for n in (xv, yv)}
        case = self.session.doc.case
        base = (nominal_design_value(case, xv), nominal_design_value(case, yv))
        log = tuple(self._log(n, r) for n, r in ranges.items())
        return margin_map_png(df, xv, yv, column="margin", required=kw["required_margin"], kinds=kinds,
                              units=units, title=f"{case.title}: margin at the operating point", base=base, log=log)

    def _show(self, df, kw, ranges, png: bytes | None = None):
        self.result = df
        xv, yv = self.x_var.value, self.y_var.value
        kinds = {n: self.inputs[n][1] for n in (xv, yv)}
        units = {n: self.inputs[n][2] for n in (xv, yv)}
        words = {n: self.inputs[n][0] for n in (xv, yv)}
        self.image.object = png if png is not None else self._map_png(df, kw, ranges)
        ok = df[df["status"] == "ok"]
        meets = int(df["meets_required"].sum()) if "meets_required" in df else 0
        best = ok.loc[ok["margin"].idxmax()] if len(ok) and ok["margin"].notna().any() else None
        added = int((df["level"] > 0).sum()) if "level" in df else 0
        text = (f"<div class='design-summary' data-designs='{len(df)}' data-meets='{meets}'>"
                f"{len(df)} designs ({len(df) - added} on the starting grid, {added} added where a contour crosses "
                f"a cell), {len(ok)} evaluated; <b>{meets}</b> keep the point in "
                f"<i>{html.escape(str(kw['regime'] or 'its own regime'))}</i> with at least "
                f"±{100 * kw['required_margin']:.0f} %.")
        from lowgmap.physics.studies.design import nominal_design_value

        case = self.session.doc.case
        bx, by = nominal_design_value(case, xv), nominal_design_value(case, yv)
        here = df[(df[xv] == bx) & (df[yv] == by)]
        if len(here) and np.isfinite(here["margin"].iloc[0]):
            m = float(here["margin"].iloc[0])
            text += (f"<br>Current design ({words[xv]} {_text(bx, kinds[xv], units[xv])}, {words[yv]} "
                     f"{_text(by, kinds[yv], units[yv])}): <span class='design-current'>{100 * m:+.1f} %</span> "
                     f"(the margin table's margin; negative: outside the wanted regime).")
        elif len(here):
            text += f"<br>The current design has no margin: {html.escape(str(here['status'].iloc[0]))}"
        else:
            text += (f"<br>The current design ({words[xv]} {_text(bx, kinds[xv], units[xv])}, {words[yv]} "
                     f"{_text(by, kinds[yv], units[yv])}) lies outside the map's ranges: not on the map.")
        if best is not None:
            lines = {b.name: b.label for b in self.session.chart.boundaries}
            limiting = lines.get(str(best["limiting"]), str(best["limiting"]))
            text += (f"<br>Best: {words[xv]} {_text(best[xv], kinds[xv], units[xv])}, {words[yv]} "
                     f"{_text(best[yv], kinds[yv], units[yv])} → ±{100 * best['margin']:.1f} % "
                     f"(limited by {html.escape(limiting)}).")
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
            self.budget, pn.Row(self.run_button, self.download), self.progress, self.status,
            width=520)
        # the map under the form, as wide as it reads well (beside the form it was too small to read at 1280 px)
        return pn.Column(form, self.image, sizing_mode="stretch_width")
