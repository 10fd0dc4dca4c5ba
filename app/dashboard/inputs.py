"""Case set-up controls, generated from param models, one model per input group.

Each group is a ``param.Parameterized`` class whose parameters hold the text a person types (numbers
with units, as in the case file); :func:`pn.Param` renders the widgets. A change is sent to the
session as an edit of the case document; problems come back filed under the group and are shown
next to its fields while the last good chart stays on screen.
"""
from __future__ import annotations

import math

import panel as pn
import param
import tomlkit

from lowgmap.physics.models.boundary import BOUNDARY_MODELS, usable_models
from lowgmap.physics.chart.composition import AXIS_KINDS

__all__ = ["SetupPanel", "SECTION_FIELDS"]

#: Parameters shown for each section kind (besides the kind itself and the conduit length).
SECTION_FIELDS = {
    "circle": ("diameter",),
    "rectangle": ("width", "height"),
    "regular_polygon": ("n_sides", "side"),
    "groove": ("half_angle", "depth"),
    "wedge_channel": ("half_angle", "wall_length"),
    "polygon": ("vertices_unit", "vertices"),
}


class FluidInputs(param.Parameterized):
    liquid = param.String(default="", label="Liquid", doc="fluid name (see `lowgmap fluids`)")
    gas = param.String(default="", label="Gas", doc="gas name; empty = the liquid's vapour or air")
    temperature = param.String(default="", label="Temperature", doc="e.g. 22 degC or 80 K")
    pressure = param.String(default="", label="Pressure", doc="e.g. 101.3 kPa; empty = saturation")


class SectionInputs(param.Parameterized):
    kind = param.Selector(default="circle", objects=list(SECTION_FIELDS), label="Cross-section")
    diameter = param.String(default="", label="Diameter")
    width = param.String(default="", label="Width")
    height = param.String(default="", label="Height")
    n_sides = param.String(default="", label="Number of sides")
    side = param.String(default="", label="Side length")
    half_angle = param.String(default="", label="Corner half-angle")
    depth = param.String(default="", label="Depth")
    wall_length = param.String(default="", label="Wall length")
    vertices_unit = param.String(default="mm", label="Vertex unit")
    vertices = param.String(default="", label="Vertices (x, y; ...)")
    length = param.String(default="", label="Conduit length")


class WettingInputs(param.Parameterized):
    contact_angle = param.String(default="", label="Contact angle", doc="static, e.g. 20 deg")
    advancing = param.String(default="", label="Advancing angle (optional)")
    receding = param.String(default="", label="Receding angle (optional)")


class GravityInputs(param.Parameterized):
    residual_acceleration = param.String(default="", label="Residual acceleration", doc="e.g. 1e-5 g0")


class ChartInputs(param.Parameterized):
    liquid_flow_low = param.String(default="", label="Liquid flow, low end")
    liquid_flow_high = param.String(default="", label="Liquid flow, high end")
    gas_flow_low = param.String(default="", label="Gas flow, low end")
    gas_flow_high = param.String(default="", label="Gas flow, high end")
    axes = param.Selector(default="flow", objects=list(AXIS_KINDS), label="Axes")
    log_axes = param.Boolean(default=True, label="Logarithmic axes")
    liquid_flow_unit = param.String(default="mL/min", label="Liquid flow unit")
    gas_flow_unit = param.String(default="mL/min", label="Gas flow unit")
    required_margin = param.String(default="20 %", label="Required margin (±)")


def _text(v) -> str:
    if v is None:
        return ""
    return str(v)


class SetupPanel(pn.viewable.Viewer):
    """All case inputs, grouped, with a message area under each group."""

    def __init__(self, session, chart_pane, **params):
        super().__init__(**params)
        self.session = session
        self.chart_pane = chart_pane
        self._loading = False
        self.fluid = FluidInputs()
        self.section = SectionInputs()
        self.wetting = WettingInputs()
        self.gravity = GravityInputs()
        self.chart = ChartInputs()
        self.alerts = {key: pn.pane.Alert("", alert_type="danger", visible=False, sizing_mode="stretch_width",
                                          css_classes=[f"problems-{key}"], name=f"problems-{key}")
                       for key in ("fluid", "section", "wetting", "gravity", "models", "chart", "case")}
        self.models_box = pn.Column(sizing_mode="stretch_width")
        self._section_param = pn.Column(sizing_mode="stretch_width")
        self._pull_from_session()
        for obj in (self.fluid, self.wetting, self.gravity, self.chart):
            obj.param.watch(self._on_change, list(obj.param)[1:])
        self.section.param.watch(self._on_change, list(self.section.param)[1:])
        session.param.watch(self._on_problems, ["problems"])
        session.param.watch(lambda *_: self._pull_from_session(), ["revision_counter"])

    # ------------------------------------------------------------------------------- sync
    def _pull_from_session(self):
        s = self.session
        self._loading = True
        try:
            with param.parameterized.batch_call_watchers(self.fluid):
                self.fluid.param.update(liquid=_text(s.get("fluid.liquid")), gas=_text(s.get("fluid.gas")),
                                        temperature=_text(s.get("fluid.temperature")),
                                        pressure=_text(s.get("fluid.pressure")))
            sec = {k: _text(s.get(f"section.{k}")) for k in SectionInputs.param if k not in ("name", "kind",
                                                                                            "length", "vertices")}
            verts = s.get("section.vertices", [])
            sec["vertices"] = "; ".join(f"{a}, {b}" for a, b in verts) if verts else ""
            self.section.param.update(kind=s.get("section.kind", "circle"), length=_text(s.get("conduit.length")),
                                      **sec)
            self.wetting.param.update(**{k: _text(s.get(f"wetting.{k}")) for k in ("contact_angle", "advancing",
                                                                                   "receding")})
            self.gravity.residual_acceleration = _text(s.get("conduit.residual_acceleration"))
            ql = s.get("chart.liquid_flow", ["", ""])
            qg = s.get("chart.gas_flow", ["", ""])
            st = s.doc.settings
            self.chart.param.update(liquid_flow_low=_text(ql[0]), liquid_flow_high=_text(ql[1]),
                                    gas_flow_low=_text(qg[0]), gas_flow_high=_text(qg[1]), axes=st.axes,
                                    log_axes=st.log_axes, liquid_flow_unit=st.liquid_flow_unit,
                                    gas_flow_unit=st.gas_flow_unit,
                                    required_margin=f"{100 * st.required_margin:g} %")
        finally:
            self._loading = False
        self._render_section_fields()
        self._render_models()

    def _render_section_fields(self):
        shown = ["kind", *SECTION_FIELDS.get(self.section.kind, ()), "length"]
        self._section_param.objects = [pn.Param(self.section, parameters=shown, show_name=False,
                                                sizing_mode="stretch_width")]

    # ------------------------------------------------------------------------------- edits
    def _on_change(self, event):
        if self._loading:
            return
        obj, name, value = event.obj, event.name, event.new
        changes: dict[str, object] = {}
        if obj is self.fluid:
            changes[f"fluid.{name}"] = value.strip() or None
        elif obj is self.section:
            if name == "kind":
                self._render_section_fields()
                kind = value
                changes["section"] = self._section_table(kind)
            elif name == "length":
                changes["conduit.length"] = value.strip() or None
            else:
                changes["section"] = self._section_table(self.section.kind)
        elif obj is self.wetting:
            changes[f"wetting.{name}"] = value.strip() or None
        elif obj is self.gravity:
            changes["conduit.residual_acceleration"] = value.strip() or None
        elif obj is self.chart:
            if name in ("liquid_flow_low", "liquid_flow_high"):
                changes["chart.liquid_flow"] = [self.chart.liquid_flow_low.strip(), self.chart.liquid_flow_high.strip()]
            elif name in ("gas_flow_low", "gas_flow_high"):
                changes["chart.gas_flow"] = [self.chart.gas_flow_low.strip(), self.chart.gas_flow_high.strip()]
            elif name == "log_axes":
                self.chart_pane.log_axes = bool(value)
                changes["chart.log_axes"] = bool(value)
            elif name == "required_margin":
                changes["chart.required_margin"] = value.strip() or None
            else:
                changes[f"chart.{name}"] = value
        if changes:
            self.session.edit(changes)

    def _section_table(self, kind: str):
        t = tomlkit.table()
        t["kind"] = kind
        for field in SECTION_FIELDS.get(kind, ()):
            value = getattr(self.section, field).strip()
            if field == "n_sides":
                try:
                    t[field] = int(value)
                except ValueError:
                    t[field] = value  # the case validation reports it
            elif field == "vertices":
                pts = []
                for pair in value.split(";"):
                    if not pair.strip():
                        continue
                    parts = [p.strip() for p in pair.split(",")]
                    pts.append([_num_or_text(p) for p in parts])
                t[field] = pts
            elif value:
                t[field] = value
        return t

    def _on_problems(self, event):
        problems = event.new or {}
        for key, alert in self.alerts.items():
            msgs = problems.get(key, [])
            if key == "case":
                msgs = msgs + [m for k, v in problems.items() if k not in self.alerts for m in v]
            alert.object = "\n".join(f"- {m}" for m in msgs)
            alert.visible = bool(msgs)

    # ------------------------------------------------------------------------------- models
    def _render_models(self):
        s = self.session
        case = s.doc.case
        chosen = {m.name: m.param_dict for m in case.models}
        region = {m.name for m, _ in s.chart.region_models}
        comparison = {m.name for m, _ in s.chart.comparison_models}
        active = region | comparison
        rows = []
        usable = usable_models(case)
        for name, model in BOUNDARY_MODELS.items():
            if usable.get(name) is not None:
                continue
            box = pn.widgets.Checkbox(name=model.label, value=name in active, sizing_mode="stretch_width")
            box.param.watch(lambda e, n=name: self._toggle_model(n, e.new), "value")
            consts = []
            values = chosen.get(name, {})
            for c in model.constants:
                w = pn.widgets.FloatInput(name=f"{c.name} ({c.doc})", value=float(values.get(c.name, c.default)),
                                          start=c.low, end=c.high, step=(c.high - c.low) / 100,
                                          sizing_mode="stretch_width")
                w.param.watch(lambda e, n=name, cn=c.name: self._set_constant(n, cn, e.new), "value")
                consts.append(w)
            role = "defines regions" if name in region else ("comparison line" if name in comparison else "off")
            rows.append(pn.Column(box, pn.pane.Markdown(f"<small>{role}; {model.citation}</small>",
                                                        sizing_mode="stretch_width"), *consts,
                                  sizing_mode="stretch_width"))
        if not rows:
            rows = [pn.pane.Markdown("No registered boundary model applies to this section.")]
        self.models_box.objects = rows

    def _current_models(self) -> list[tuple[str, dict]]:
        s = self.session
        case = s.doc.case
        if case.models:
            return [(m.name, dict(m.param_dict)) for m in case.models]
        return [(m.name, {}) for m, _ in list(s.chart.region_models) + list(s.chart.comparison_models)]

    def _write_models(self, models: list[tuple[str, dict]]):
        aot = tomlkit.aot()
        for name, consts in models:
            t = tomlkit.table()
            t["name"] = name
            if consts:
                ct = tomlkit.inline_table()
                for k, v in consts.items():
                    ct[k] = float(v)
                t["constants"] = ct
            aot.append(t)
        self.session.edit({"models": aot if models else None})

    def _toggle_model(self, name: str, on: bool):
        models = self._current_models()
        names = [n for n, _ in models]
        if on and name not in names:
            models.append((name, {}))
        elif not on and name in names:
            models = [(n, c) for n, c in models if n != name]
        self._write_models(models)

    def _set_constant(self, name: str, const: str, value):
        if value is None or not math.isfinite(value):
            return
        models = self._current_models()
        if name not in [n for n, _ in models]:
            models.append((name, {}))
        models = [(n, {**c, const: value} if n == name else c) for n, c in models]
        self._write_models(models)

    # ------------------------------------------------------------------------------- layout
    def __panel__(self):
        def group(title, body, key, collapsed=False):
            return pn.Card(body, self.alerts[key], title=title, collapsed=collapsed, sizing_mode="stretch_width",
                           css_classes=[f"group-{key}"])

        return pn.Column(
            self.alerts["case"],
            group("Fluid and temperature", pn.Param(self.fluid, show_name=False, sizing_mode="stretch_width"), "fluid"),
            group("Cross-section and length", self._section_param, "section"),
            group("Wetting", pn.Param(self.wetting, show_name=False, sizing_mode="stretch_width"), "wetting"),
            group("Residual acceleration", pn.Param(self.gravity, show_name=False, sizing_mode="stretch_width"),
                  "gravity"),
            group("Boundary models and constants", self.models_box, "models", collapsed=True),
            group("Chart ranges, axes and units", pn.Param(self.chart, show_name=False, sizing_mode="stretch_width"),
                  "chart", collapsed=True),
            sizing_mode="stretch_width")


def _num_or_text(p: str):
    try:
        return float(p)
    except ValueError:
        return p
