"""Case set-up controls, generated from param models, one model per input group.

Each group is a ``param.Parameterized`` class whose parameters declare the fields a person types
(numbers with units, as in the case file): label, kind (text, choice, switch) and help text. The
widgets are generated from these declarations **once per session** and never replaced: a rebuild
of the case only sets values, options and visibility in place (:meth:`SetupPanel.show_state`).

A committed field (Enter or leaving the field) becomes an :class:`~lowgmap.app.dashboard.state.Edit`
on the session's queue, keyed by the field; what comes back is filed under the same key and shown
in the message line right under the field, in the field's own words. When the session shows its
state, a field is left alone while

* an edit of it is queued or being worked on (it shows what was typed until that is applied), or
* the person has typed into it and not yet committed (its ``value_input`` differs from ``value``:
  the server never overwrites text under the cursor);

otherwise it shows the value in effect (after a refused edit: the previous value, with the
message quoting what was typed).
"""
from __future__ import annotations

import html
import math
from dataclasses import dataclass
from typing import Callable

import panel as pn
import param
import tomlkit

from lowgmap.physics.models.boundary import BOUNDARY_MODELS, usable_models
from lowgmap.physics.chart.composition import AXIS_KINDS

from lowgmap.app.dashboard.state import Edit

__all__ = ["SetupPanel", "SECTION_FIELDS", "FieldView", "FIELD_CSS"]

#: Parameters shown for each section kind (besides the kind itself and the conduit length).
SECTION_FIELDS = {
    "circle": ("diameter",),
    "rectangle": ("width", "height"),
    "regular_polygon": ("n_sides", "side"),
    "groove": ("half_angle", "depth"),
    "wedge_channel": ("half_angle", "wall_length"),
    "polygon": ("vertices_unit", "vertices"),
}

#: Style of the message line under a field.
FIELD_CSS = """
.field-message {color: #8B0000; font-size: 12px; margin: -4px 0 6px 0;}
.field-message ul {margin: 0; padding-left: 16px;}
.field-notice {color: #1f3b57; font-size: 12px; margin: -4px 0 6px 0;}
"""


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


def _text(v) -> str:
    if v is None:
        return ""
    return str(v)


def _css_key(key: str) -> str:
    return key.replace(".", "-").replace("_", "-")


def widget_for(p: param.Parameter, value, css: str):
    """The widget of one declared field (text, choice or switch), with its current value."""
    if isinstance(p, param.Selector):
        return pn.widgets.Select(label=p.label, options=list(p.objects), value=value, sizing_mode="stretch_width",
                                 css_classes=[css])
    if isinstance(p, param.Boolean):
        return pn.widgets.Checkbox(label=p.label, value=bool(value), css_classes=[css])
    return pn.widgets.TextInput(label=p.label, value=value, value_input=value, description=p.doc or None,
                                sizing_mode="stretch_width", css_classes=[css])


class FieldView:
    """One input and the message line under it; knows whether the person is typing in it.

    ``dirty``: the person typed into the text box and has not committed it (``value_input`` !=
    ``value``); :meth:`show` never changes a dirty field.
    """

    def __init__(self, key: str, widget, on_commit: Callable[[object], None]):
        self.key = key
        self.widget = widget
        self.message = pn.pane.HTML("", visible=False, sizing_mode="stretch_width", stylesheets=[FIELD_CSS],
                                    css_classes=["field-message", f"message-{_css_key(key)}"])
        self._pushing = False
        self._typing = False
        self._on_commit = on_commit
        widget.param.watch(self._committed, "value")
        if self.is_text:
            widget.param.watch(self._typed, "value_input")

    @property
    def is_text(self) -> bool:
        return isinstance(self.widget, pn.widgets.TextInput)

    @property
    def dirty(self) -> bool:
        """The person has typed here and not committed it (the server must not overwrite the field)."""
        return self._typing or self._browser_typing()

    def _browser_typing(self) -> bool:
        """Typing that reached the page's model but not yet the widget (panel applies browser
        changes after a short debounce; a value shown in that gap would overwrite the typing)."""
        if not self.is_text:
            return False
        committed = self.widget.value or ""
        try:
            models = [m for m, _ in list(self.widget._models.values())]
        except (AttributeError, TypeError, ValueError):
            return False
        return any((getattr(m, "value_input", committed) or "") != committed for m in models)

    def _typed(self, event) -> None:
        if not self._pushing:
            self._typing = (event.new or "") != (self.widget.value or "")

    def _committed(self, event) -> None:
        if self._pushing:
            return
        self._typing = False
        self._on_commit(event.new)

    def show(self, value) -> bool:
        """Show ``value`` unless the person is typing here; returns whether the field shows it."""
        if self.dirty:
            return False
        w = self.widget
        if w.value != value or (self.is_text and w.value_input != value):
            self._pushing = True
            try:
                if self.is_text:
                    w.param.update(value=value, value_input=value)
                else:
                    w.value = value
            finally:
                self._pushing = False
        return True

    def set_messages(self, messages: list[str]) -> None:
        if messages:
            items = "".join(f"<li>{html.escape(m)}</li>" for m in messages)
            self.message.object = f"<ul>{items}</ul>"
        else:
            self.message.object = ""
        self.message.visible = bool(messages)

    @property
    def views(self) -> list:
        return [self.widget, self.message]


@dataclass
class _Spec:
    group: str
    obj: param.Parameterized
    name: str
    key: str
    path: str                       # case-file path of the value in effect


class SetupPanel(pn.viewable.Viewer):
    """All case inputs, grouped, with a message line under each field and an alert per group."""

    def __init__(self, session, chart_pane, **params):
        super().__init__(**params)
        self.session = session
        self.chart_pane = chart_pane
        self.fluid = FluidInputs()
        self.section = SectionInputs()
        self.wetting = WettingInputs()
        self.gravity = GravityInputs()
        self.chart = ChartInputs()
        self.alerts = {key: pn.pane.Alert("", alert_type="danger", visible=False, sizing_mode="stretch_width",
                                          css_classes=[f"problems-{key}"], name=f"problems-{key}")
                       for key in ("fluid", "section", "wetting", "gravity", "models", "chart", "case")}
        specs = []
        for group, obj, prefix in (("fluid", self.fluid, "fluid"), ("wetting", self.wetting, "wetting")):
            specs += [_Spec(group, obj, n, f"{prefix}.{n}", f"{prefix}.{n}") for n in obj.param if n != "name"]
        specs.append(_Spec("section", self.section, "kind", "section.kind", "section.kind"))
        for n in SectionInputs.param:
            if n not in ("name", "kind", "length"):
                specs.append(_Spec("section", self.section, n, f"section.{n}", f"section.{n}"))
        specs.append(_Spec("section", self.section, "length", "conduit.length", "conduit.length"))
        specs.append(_Spec("gravity", self.gravity, "residual_acceleration", "conduit.residual_acceleration",
                           "conduit.residual_acceleration"))
        for n in ChartInputs.param:
            if n == "name":
                continue
            path = ("chart.liquid_flow" if n.startswith("liquid_flow_l") or n.startswith("liquid_flow_h")
                    else "chart.gas_flow" if n.startswith("gas_flow_l") or n.startswith("gas_flow_h") else f"chart.{n}")
            specs.append(_Spec("chart", self.chart, n, f"chart.{n}", path))
        self.specs = {s.key: s for s in specs}
        self.section_draft = False   # a new cross-section kind is being filled in (not yet in effect)
        self.fields: dict[str, FieldView] = {}
        values = self._values()
        for s in specs:
            w = widget_for(s.obj.param[s.name], values[s.key], f"field-{_css_key(s.key)}")
            self.fields[s.key] = FieldView(s.key, w, lambda v, k=s.key: self._commit(k, v))
        self._model_rows: dict[str, dict] = {}
        self._no_models = pn.pane.Markdown("No registered boundary model applies to this section.", visible=False)
        self.models_message = pn.pane.HTML("", visible=False, sizing_mode="stretch_width", stylesheets=[FIELD_CSS],
                                           css_classes=["field-message", "message-models"])
        self.models_box = pn.Column(self._no_models, self.models_message, sizing_mode="stretch_width")
        self.show_state()
        session.param.watch(lambda *_: self.show_state(), ["applied_counter", "revision_counter"])
        session.param.watch(self._on_problems, ["problems"])

    # ------------------------------------------------------------------------------- state -> fields
    def _values(self) -> dict[str, object]:
        """The value in effect of every field, from the session's case document."""
        s = self.session
        st = s.doc.settings
        out = {}
        for key, spec in self.specs.items():
            if key == "section.kind":
                out[key] = s.get("section.kind", "circle")
            elif key == "section.vertices":
                verts = s.get("section.vertices", [])
                out[key] = "; ".join(f"{a}, {b}" for a, b in verts) if verts else ""
            elif key == "section.vertices_unit":
                out[key] = _text(s.get("section.vertices_unit", "mm"))
            elif spec.path in ("chart.liquid_flow", "chart.gas_flow"):
                rng = s.get(spec.path, ["", ""])
                out[key] = _text(rng[0] if key.endswith("_low") else rng[1])
            elif key == "chart.axes":
                out[key] = st.axes
            elif key == "chart.log_axes":
                out[key] = bool(st.log_axes)
            elif key == "chart.liquid_flow_unit":
                out[key] = st.liquid_flow_unit
            elif key == "chart.gas_flow_unit":
                out[key] = st.gas_flow_unit
            else:
                out[key] = _text(s.get(spec.path))
        return out

    def show_state(self) -> None:
        """Show the session's state in place: values, messages, section fields and models."""
        s = self.session
        if s.closed:
            return
        pending = s.pending_keys
        values = self._values()
        problems = s.field_problems
        with pn.io.hold():
            for key, f in self.fields.items():
                held = key in pending or (key.startswith("section.")
                                          and (self.section_draft or "section.kind" in pending))
                if not held:  # a queued edit or a new section being filled in keeps what was typed
                    f.show(values[key])
                f.set_messages(problems.get(key, []))
            self._show_section_fields()
            if "models" not in pending:
                self._show_models()
            msgs = problems.get("models", [])
            self.models_message.object = "".join(f"<p>{html.escape(m)}</p>" for m in msgs)
            self.models_message.visible = bool(msgs)

    def _show_section_fields(self) -> None:
        kind = self.fields["section.kind"].widget.value
        shown = set(SECTION_FIELDS.get(kind, ()))
        for key, f in self.fields.items():
            if key.startswith("section.") and key != "section.kind":
                visible = key.split(".", 1)[1] in shown
                f.widget.visible = visible
                f.message.visible = visible and bool(f.message.object)

    # ------------------------------------------------------------------------------- fields -> edits
    def _commit(self, key: str, value) -> None:
        spec = self.specs[key]
        label = spec.obj.param[spec.name].label
        changes: dict[str, object] = {}
        if key.startswith("section.") and (key == "section.kind" or self.section_draft):
            # a new kind needs its own dimensions: the section is sent whole, as a draft until it is valid
            kind = self.fields["section.kind"].widget.value
            self.section_draft = kind != self.session.get("section.kind", "circle") or self.section_draft
            self._show_section_fields()
            changes["section"] = self._section_table(kind)
            key, label, path = "section.kind", self.specs["section.kind"].obj.param["kind"].label, "section.kind"

            def on_done(ok, msgs):
                if ok:
                    self.section_draft = False
                    self.show_state()
            self.session.submit(Edit(key=key, kind="case", changes=changes, label=label, path=path,
                                     on_done=on_done))
            return
        if key.startswith("section."):
            changes[spec.path] = self._section_value(spec.name, value)
        elif spec.path in ("chart.liquid_flow", "chart.gas_flow"):
            low, high = (self.fields[f"{spec.path}_low"].widget.value, self.fields[f"{spec.path}_high"].widget.value)
            changes[spec.path] = [(low or "").strip(), (high or "").strip()]
        elif key == "chart.log_axes":
            self.chart_pane.log_axes = bool(value)
            changes[spec.path] = bool(value)
        elif key in ("chart.axes",):
            changes[spec.path] = value
        else:
            changes[spec.path] = (value or "").strip() or None
        self.session.edit(changes, key=key, label=label, path=spec.path)

    def _section_value(self, name: str, value):
        value = (value or "").strip()
        if name == "n_sides":
            try:
                return int(value)
            except ValueError:
                return value or None  # the case validation reports it
        if name == "vertices":
            pts = []
            for pair in value.split(";"):
                if pair.strip():
                    pts.append([_num_or_text(p.strip()) for p in pair.split(",")])
            return pts
        return value or None

    def _section_table(self, kind: str):
        t = tomlkit.table()
        t["kind"] = kind
        for name in SECTION_FIELDS.get(kind, ()):
            v = self._section_value(name, self.fields[f"section.{name}"].widget.value)
            if v not in (None, "", []):
                t[name] = v
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
    def _model_row(self, name: str) -> dict:
        """The row of one boundary model (switch, role, constants), built the first time it applies."""
        model = BOUNDARY_MODELS[name]
        box = pn.widgets.Checkbox(label=model.label, value=False, sizing_mode="stretch_width",
                                  css_classes=[f"model-{name}"])
        role = pn.pane.Markdown("", sizing_mode="stretch_width")
        consts = {}
        for c in model.constants:
            consts[c.name] = pn.widgets.FloatInput(label=f"{c.name} ({c.doc})", value=float(c.default),
                                                   start=c.low, end=c.high, step=(c.high - c.low) / 100,
                                                   sizing_mode="stretch_width")
        row = pn.Column(box, role, *consts.values(), sizing_mode="stretch_width")
        entry = {"box": box, "role": role, "consts": consts, "row": row, "pushing": True}
        box.param.watch(lambda e: None if entry["pushing"] else self._models_changed(), "value")
        for w in consts.values():
            w.param.watch(lambda e: None if entry["pushing"] or e.new is None or not math.isfinite(e.new)
                          else self._models_changed(), "value")
        return entry

    def _show_models(self) -> None:
        """Switches and constants of the models that apply to the case, set in place.

        A model's row is built the first time the model applies and kept from then on (hidden
        while it does not apply), so no input is ever replaced.
        """
        s = self.session
        case = s.doc.case
        chosen = {m.name: m.param_dict for m in case.models}
        region = {m.name for m, _ in s.chart.region_models}
        comparison = {m.name for m, _ in s.chart.comparison_models}
        usable = usable_models(case)
        added = False
        for name in BOUNDARY_MODELS:
            if usable.get(name) is None and name not in self._model_rows:
                self._model_rows[name] = self._model_row(name)
                added = True
        any_shown = False
        for name, entry in self._model_rows.items():
            model = BOUNDARY_MODELS[name]
            shown = usable.get(name) is None
            any_shown |= shown
            entry["pushing"] = True
            try:
                entry["row"].visible = shown
                if entry["box"].value != (name in region | comparison):
                    entry["box"].value = name in region | comparison
                role = "defines regions" if name in region else ("comparison line" if name in comparison else "off")
                entry["role"].object = f"<small>{role}; {model.citation}</small>"
                values = chosen.get(name, {})
                for c in model.constants:
                    v = float(values.get(c.name, c.default))
                    if entry["consts"][c.name].value != v:
                        entry["consts"][c.name].value = v
            finally:
                entry["pushing"] = False
        self._no_models.visible = not any_shown
        if added:
            rows = [self._model_rows[n]["row"] for n in BOUNDARY_MODELS if n in self._model_rows]
            self.models_box.objects = rows + [self._no_models, self.models_message]

    def _models_changed(self) -> None:
        """Write the models list as the boxes and constants now show it (the latest state wins)."""
        aot = tomlkit.aot()
        n = 0
        for name, entry in self._model_rows.items():
            if not (entry["row"].visible and entry["box"].value):
                continue
            model = BOUNDARY_MODELS[name]
            t = tomlkit.table()
            t["name"] = name
            consts = {c.name: float(entry["consts"][c.name].value) for c in model.constants
                      if entry["consts"][c.name].value is not None
                      and float(entry["consts"][c.name].value) != float(c.default)}
            if consts:
                ct = tomlkit.inline_table()
                for k, v in consts.items():
                    ct[k] = v
                t["constants"] = ct
            aot.append(t)
            n += 1
        self.session.edit({"models": aot if n else None}, key="models", label="Boundary models", path="models")

    # ------------------------------------------------------------------------------- layout
    def _group_body(self, group: str) -> list:
        out = []
        for key, spec in self.specs.items():
            if spec.group == group:
                out += self.fields[key].views
        return out

    def __panel__(self):
        def group(title, body, key, collapsed=False):
            return pn.Card(*body, self.alerts[key], title=title, collapsed=collapsed, sizing_mode="stretch_width",
                           css_classes=[f"group-{key}"])

        return pn.Column(
            self.alerts["case"],
            group("Fluid and temperature", self._group_body("fluid"), "fluid"),
            group("Cross-section and length", self._group_body("section"), "section"),
            group("Wetting", self._group_body("wetting"), "wetting"),
            group("Residual acceleration", self._group_body("gravity"), "gravity"),
            group("Boundary models and constants", [self.models_box], "models", collapsed=True),
            group("Chart ranges, axes and units", self._group_body("chart"), "chart", collapsed=True),
            sizing_mode="stretch_width")


def _num_or_text(p: str):
    try:
        return float(p)
    except ValueError:
        return p
