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

Sliders beside the geometry fields (diameter, width, height, side, half-angle, depth, wall length,
conduit length, contact angle) and the gravity level: lengths on a log scale over two decades around the
value in effect (in the field's own unit), angles linearly in degrees over a window around it; the
window moves only when a typed value falls outside it. While a slider is dragged, the typed field shows
its value and the session previews the chart for it (:meth:`~lowgmap.app.dashboard.state.Session.preview`:
coalesced, latest value wins, computed on a worker thread); on release the value is committed exactly
as if it had been typed into the field (same text, same edit, same numbers). A typed value moves the
slider. During a drag the slider shows its value itself (formatted in the page, no server round trip)
and the typed field follows at most every :data:`FIELD_FOLLOW_S` seconds (a changed text box makes the
browser lay out the whole page again, tens of ms each), with the last value shown once that time has passed
when the drag pauses (:class:`FieldFollow`), then exactly on release.

Gravity level and orientation: a named level (orbit, lunar surface, Martian surface, ground), the
typed residual acceleration and a log slider from 1e-6 g0 to 1 g0 all write ``conduit.residual_acceleration``;
the flow direction to the acceleration (and the inclination of an inclined conduit) writes
``conduit.orientation``, read by the case-file layer like every other key.
"""
from __future__ import annotations

import html
import math
import re
import time
from dataclasses import dataclass
from typing import Callable

import panel as pn
import param
import tomlkit

from lowgmap.physics.models.boundary import BOUNDARY_MODELS, usable_models
from lowgmap.physics.chart.composition import AXIS_KINDS

from lowgmap.app.dashboard.state import Edit

__all__ = ["SetupPanel", "SECTION_FIELDS", "SLIDER_FIELDS", "FieldView", "FieldSlider", "FIELD_CSS"]

#: Parameters shown for each section kind (besides the kind itself and the conduit length).
SECTION_FIELDS = {
    "circle": ("diameter",),
    "rectangle": ("width", "height"),
    "regular_polygon": ("n_sides", "side"),
    "groove": ("half_angle", "depth"),
    "wedge_channel": ("half_angle", "wall_length"),
    "polygon": ("vertices_unit", "vertices"),
}

#: Fields with a slider beside the typed field: key -> kind ("length": log scale, two decades around the
#: value in effect; "half_angle" / "contact_angle": linear in degrees within :data:`ANGLE_LIMITS`).
SLIDER_FIELDS = {"section.diameter": "length", "section.width": "length", "section.height": "length",
                 "section.side": "length", "section.half_angle": "half_angle", "section.depth": "length",
                 "section.wall_length": "length", "conduit.length": "length", "wetting.contact_angle": "contact_angle"}
#: Range of the angle sliders [deg] (a corner half-angle is below 90 deg; a contact angle within [0, 180] deg).
ANGLE_LIMITS = {"half_angle": (0.5, 89.5), "contact_angle": (0.0, 180.0)}
#: Slider steps: log10 of a length (0.2 %), an angle [deg], log10(g/g0).
LENGTH_STEP, ANGLE_STEP, LOG_G_STEP = 0.001, 0.05, 0.01
_QUANTITY = re.compile(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*")
_DEGREES = ("deg", "degree", "degrees", "°", "")
#: While a slider is dragged, the typed field shows its value at most this often [s] (and on release).
FIELD_FOLLOW_S = 0.4


class FieldFollow:
    """The typed field beside a dragged slider: shown at most every :data:`FIELD_FOLLOW_S` seconds, and when the
    drag pauses, the last value offered is shown once that time has passed (a trailing update, so the field never
    stays on an older value than the slider and the label in the plot). ``show(text)``: shows a text in the field.
    """

    def __init__(self, show: Callable[[str], object]):
        self.show = show
        self.shown_at = 0.0         # when the field last showed a dragged value (time.monotonic)
        self.latest: str | None = None
        self.pending = False

    def offer(self, text: str) -> None:
        """A new dragged value: shown now, or after the rest of :data:`FIELD_FOLLOW_S` unless a newer one comes."""
        now = time.monotonic()
        if now - self.shown_at >= FIELD_FOLLOW_S:
            self.shown_at, self.latest = now, None
            self.show(text)
            return
        self.latest = text
        if self.pending:
            return
        doc = pn.state.curdoc
        if doc is None or getattr(doc, "session_context", None) is None:
            return                  # no server session (a script or a test): nothing to schedule on
        self.pending = True
        doc.add_timeout_callback(self._trail, max(1, int(1000.0 * (FIELD_FOLLOW_S - (now - self.shown_at))) + 1))

    def _trail(self) -> None:
        self.pending = False
        if self.latest is not None:
            text, self.latest = self.latest, None
            self.shown_at = time.monotonic()
            self.show(text)

    def stop(self) -> None:
        """The slider was released: the release shows the exact value, nothing trails behind it."""
        self.latest = None

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


#: Named gravity levels offered in the page: (words shown, case-file text). The surface values are
#: those of :mod:`lowgmap.physics.properties.gravity` (with their sources); orbit is a typical residual
#: acceleration of an orbiting laboratory, 1e-6 g0 (common practice, no source).
GRAVITY_LEVELS = (("orbit, 1e-6 g0", "1e-6 g0"), ("lunar surface, 1.62 m/s^2", "lunar surface"),
                  ("Martian surface, 3.71 m/s^2", "Martian surface"), ("ground, 1 g0", "ground"))
OTHER_LEVEL = "other (typed below)"
#: Orientation choices: words shown -> case-file text (None: no orientation written).
ORIENTATIONS = {"unspecified": None, "vertical upward flow": "vertical upward flow",
                "vertical downward flow": "vertical downward flow", "horizontal": "horizontal",
                "inclined (angle below)": ""}
INCLINED = "inclined (angle below)"
#: Range of the gravity slider, log10(g/g0).
LOG_G_RANGE = (-6.0, 0.0)


class GravityInputs(param.Parameterized):
    level = param.Selector(default=OTHER_LEVEL, objects=[w for w, _ in GRAVITY_LEVELS] + [OTHER_LEVEL],
                           label="Gravity level")
    residual_acceleration = param.String(default="", label="Residual acceleration",
                                         doc="e.g. 1e-5 g0, 1.62 m/s^2, lunar surface")
    orientation = param.Selector(default="unspecified", objects=list(ORIENTATIONS),
                                 label="Flow direction to the acceleration")
    inclination = param.String(default="", label="Inclination above the horizontal",
                               doc="e.g. 30 deg (positive: upward flow)")


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


class LiveSlider(pn.widgets.FloatSlider):
    """A float slider whose moves reach the server without panel's 50 ms hold.

    panel waits ``_debounce`` ms after a change arrives from the page before handing it on (changes that
    arrive meanwhile are merged, the latest wins); with the default 50 ms a dragged slider reached the
    server about 12 times a second although the page sent about 24 values. The session coalesces the
    previews itself (one job at a time, the latest value next), so nothing is gained by holding them.
    """

    _debounce = 0
    #: moves are not counted in panel's page-wide busy state (the page shows no busy spinner; the count costs
    #: about 2.5 ms of the server's event loop per move)
    _busy__ignore = ["value", "value_throttled"]

    def _update_properties(self, *events, doc):
        # A value from the page (about 20 a second while dragged) needs none of the theme's parameters, which
        # panel resolves on every update (about 2 ms each, several per move: paths looked up on disk); they
        # matter only when the stylesheets change, which then takes panel's own path.
        if all(e.name in ("value", "value_throttled") for e in events):
            return self._process_param_change({e.name: e.new for e in events})
        return super()._update_properties(*events, doc=doc)


class FieldSlider:
    """A slider beside a typed field: dragging calls ``on_move(key, text)``, releasing ``on_release(key, text)``
    with the value written as the field would hold it ("6.35 deg", "12.76 mm").

    ``kind``: "length" (log10 of the value in the field's unit, two decades around the value in
    effect), "half_angle" or "contact_angle" (degrees, linear, within :data:`ANGLE_LIMITS`).
    """

    def __init__(self, key: str, kind: str, label: str, on_move, on_release):
        self.key, self.kind, self.label = key, kind, label
        self.unit = "mm" if kind == "length" else "deg"
        step = LENGTH_STEP if kind == "length" else ANGLE_STEP
        scale = ", log scale" if kind == "length" else ""
        self.widget = LiveSlider(label=f"{label}{scale}", start=0.0, end=1.0,
                                             step=step, value=0.5, show_value=True, format=self._formatter(),
                                             sizing_mode="stretch_width",
                                             css_classes=["geometry-slider", f"slider-{_css_key(key)}"],
                                             margin=(0, 10, 6, 10))
        self._pushing = False
        self._on_move, self._on_release = on_move, on_release
        self.widget.param.watch(self._moved, "value")
        self.widget.param.watch(self._released, "value_throttled")

    def _formatter(self):
        """The slider's own readout, written in the page as the field would hold the value."""
        from bokeh.models import CustomJSTickFormatter

        unit = self.unit.replace("\\", "").replace("'", "")
        if self.kind == "length":
            return CustomJSTickFormatter(code=f"return Number((10 ** tick).toPrecision(4)) + ' {unit}'")
        return CustomJSTickFormatter(code="return Number(tick.toPrecision(4)) + ' deg'")

    def text_of(self, x: float) -> str:
        """The field text of slider position ``x``."""
        if self.kind == "length":
            return f"{10.0 ** float(x):.4g} {self.unit}"
        return f"{float(x):.4g} deg"

    def position_of(self, text: str):
        """(slider position, unit) of a field text, or None when it is not a value the slider can show."""
        m = _QUANTITY.fullmatch(text or "")
        if not m:
            return None
        number, unit = float(m.group(1)), m.group(2)
        if self.kind == "length":
            return (math.log10(number), unit) if number > 0 and unit else None
        if unit in _DEGREES:
            return number, "deg"
        if unit in ("rad", "radian", "radians"):
            return math.degrees(number), "deg"
        return None

    def follow(self, text: str) -> None:
        """Put the slider at the value written in the field (its window moves only when the value is outside)."""
        pos = self.position_of(text)
        if pos is None:
            return
        x, unit = pos
        w = self.widget
        start, end = w.start, w.end
        if self.kind == "length":
            if unit != self.unit or not start <= x <= end:
                if unit != self.unit:
                    self.unit = unit
                    w.format = self._formatter()
                start, end = round(x - 1.0, 3), round(x + 1.0, 3)
        else:
            lo, hi = ANGLE_LIMITS[self.kind]
            x = min(max(x, lo), hi)
            if not start <= x <= end or (start, end) == (0.0, 1.0):
                span = max(10.0, x)
                start, end = max(lo, round(x - span)), min(hi, round(x + span))
        self._pushing = True
        try:
            if (start, end) != (w.start, w.end):
                w.param.update(start=min(start, w.start), end=max(end, w.end))
                w.param.update(value=x, start=start, end=end)
            elif abs(w.value - x) > 1e-12:
                w.value = x
        finally:
            self._pushing = False

    def _moved(self, event) -> None:
        if not self._pushing and event.new is not None:
            self._on_move(self.key, self.text_of(event.new))

    def _released(self, event) -> None:
        if not self._pushing and event.new is not None:
            self._on_release(self.key, self.text_of(event.new))


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
        specs.append(_Spec("gravity", self.gravity, "level", "conduit.gravity_level",
                           "conduit.residual_acceleration"))
        specs.append(_Spec("gravity", self.gravity, "residual_acceleration", "conduit.residual_acceleration",
                           "conduit.residual_acceleration"))
        specs.append(_Spec("gravity", self.gravity, "orientation", "conduit.orientation", "conduit.orientation"))
        specs.append(_Spec("gravity", self.gravity, "inclination", "conduit.inclination", "conduit.orientation"))
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
        # sliders beside the geometry fields
        self.sliders: dict[str, FieldSlider] = {}
        for key, kind in SLIDER_FIELDS.items():
            spec = self.specs[key]
            self.sliders[key] = FieldSlider(key, kind, spec.obj.param[spec.name].label, self._slider_moved,
                                            self._slider_released)
        self._follow = {key: FieldFollow(lambda t, k=key: self.fields[k].show(t)) for key in self.sliders}
        # the gravity level on a log scale beside the typed field (10^-6 g0 to 1 g0)
        self.gravity_slider = LiveSlider(label="Gravity level, log10(g/g0)", start=LOG_G_RANGE[0],
                                                     end=LOG_G_RANGE[1], step=LOG_G_STEP, value=LOG_G_RANGE[0],
                                                     sizing_mode="stretch_width", css_classes=["gravity-slider"],
                                                     format="0.00")
        self._slider_pushing = False
        self._gravity_follow = FieldFollow(lambda t: self.fields["conduit.residual_acceleration"].show(t))
        self.gravity_slider.param.watch(self._slid, "value_throttled")
        self.gravity_slider.param.watch(self._gravity_moved, "value")
        self._model_rows: dict[str, dict] = {}
        self._no_models = pn.pane.Markdown("No registered boundary model applies to this section.", visible=False)
        self.models_message = pn.pane.HTML("", visible=False, sizing_mode="stretch_width", stylesheets=[FIELD_CSS],
                                           css_classes=["field-message", "message-models"])
        self.models_box = pn.Column(self._no_models, self.models_message, sizing_mode="stretch_width")
        self.show_state()
        session.param.watch(lambda *_: self.show_state(), ["applied_counter", "revision_counter"])
        session.param.watch(lambda e: self._show_sliders() if e.new is None else None, ["live"])
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
            elif key == "conduit.gravity_level":
                out[key] = _level_of(s.doc.case.g)
            elif key == "conduit.orientation":
                out[key] = _orientation_choice(s.doc.case)
            elif key == "conduit.inclination":
                o = getattr(s.doc.case, "orientation", None)
                out[key] = (f"{math.degrees(o.angle_rad):.4g} deg" if o is not None and o.kind == o.INCLINED
                            else _text(s.get("conduit.orientation")) if _orientation_choice(s.doc.case) == INCLINED
                            else "")
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
            self._show_sliders(values)
            self._show_gravity()
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
                if key in self.sliders:
                    self.sliders[key].widget.visible = visible and not self.section_draft

    def _show_sliders(self, values=None) -> None:
        """Each slider at the value in effect of its field (not while it is dragged or its edit is queued)."""
        s = self.session
        if s.closed:
            return
        values = values or self._values()
        live = s.live
        pending = s.pending_keys
        for key, slider in self.sliders.items():
            if key in pending or (live is not None and live.key == key):
                continue
            slider.follow(str(values[key]))

    # ------------------------------------------------------------------------------- sliders -> previews, edits
    def _slider_moved(self, key: str, text: str) -> None:
        """A slider being dragged: the field shows its value and the chart previews it (nothing applied)."""
        spec = self.specs[key]
        if self.section_draft or self.fields[key].dirty:
            return
        self._follow[key].offer(text)
        if text == str(self.session.get(spec.path)):
            self.session.cancel_preview()          # back at the value in effect: the chart in effect is drawn
            return
        self.session.preview({spec.path: text}, key=key, label=spec.obj.param[spec.name].label, text=text,
                             display=self.chart_pane.preview_frame)

    def _slider_released(self, key: str, text: str) -> None:
        """A slider released: its value is applied exactly as if it had been typed into the field."""
        if self.section_draft:
            return
        self._follow[key].stop()
        self.fields[key].show(text)
        self.session.end_preview()
        self._commit(key, text)

    def _gravity_moved(self, event) -> None:
        if self._slider_pushing or event.new is None:
            return
        text = f"{10.0 ** float(event.new):.3g} g0"
        key = "conduit.residual_acceleration"
        self._gravity_follow.offer(text)
        if text == str(self.session.get(key)):
            self.session.cancel_preview()
            return
        self.session.preview({key: text}, key=key, label="Residual acceleration", text=text,
                             display=self.chart_pane.preview_frame)

    def _show_gravity(self) -> None:
        """The slider at the case's gravity level; the angle field only for an inclined conduit."""
        s = self.session
        g0 = 9.80665
        dragged = s.live is not None and s.live.key == "conduit.residual_acceleration"
        if ("conduit.residual_acceleration" not in s.pending_keys and "conduit.gravity_level" not in s.pending_keys
                and not dragged):
            g = s.doc.case.g
            v = min(max(math.log10(g / g0), LOG_G_RANGE[0]), LOG_G_RANGE[1]) if g > 0 else LOG_G_RANGE[0]
            if abs(self.gravity_slider.value - v) > 1e-9:
                self._slider_pushing = True
                try:
                    self.gravity_slider.value = round(v, 4)
                finally:
                    self._slider_pushing = False
        f = self.fields["conduit.inclination"]
        refused = "conduit.inclination" in self.session.field_problems
        inclined = self.fields["conduit.orientation"].widget.value == INCLINED or refused
        f.widget.visible = inclined
        f.message.visible = inclined and bool(f.message.object)

    def _slid(self, event) -> None:
        if self._slider_pushing or event.new is None:
            return
        text = f"{10.0 ** float(event.new):.3g} g0"
        self._gravity_follow.stop()
        self.fields["conduit.residual_acceleration"].show(text)
        self.session.end_preview()
        self.session.edit({"conduit.residual_acceleration": text}, key="conduit.residual_acceleration",
                          label="Residual acceleration", path="conduit.residual_acceleration")

    # ------------------------------------------------------------------------------- fields -> edits
    def _commit(self, key: str, value) -> None:
        spec = self.specs[key]
        label = spec.obj.param[spec.name].label
        changes: dict[str, object] = {}
        if key == "conduit.gravity_level":
            text = dict(GRAVITY_LEVELS).get(value)
            if text is None:   # "other": the typed field is where the value goes
                return
            self.fields["conduit.residual_acceleration"].show(text)
            self.session.edit({"conduit.residual_acceleration": text}, key="conduit.residual_acceleration",
                              label="Residual acceleration", path="conduit.residual_acceleration")
            return
        if key in ("conduit.orientation", "conduit.inclination"):
            choice = INCLINED if key == "conduit.inclination" else self.fields["conduit.orientation"].widget.value
            self._show_gravity()
            if choice == INCLINED:
                text = (self.fields["conduit.inclination"].widget.value or "").strip()
                if not text:        # the angle is still to be typed
                    return
            else:
                text = ORIENTATIONS.get(choice)
            label = "Inclination" if key == "conduit.inclination" else "Flow direction"
            self.session.edit({"conduit.orientation": text}, key=key, label=label, path="conduit.orientation")
            return
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
                f = self.fields[key]
                out += [f.widget] + ([self.sliders[key].widget] if key in self.sliders else []) + [f.message]
        return out

    def _gravity_body(self) -> list:
        f = self.fields
        return (f["conduit.gravity_level"].views + f["conduit.residual_acceleration"].views + [self.gravity_slider]
                + f["conduit.orientation"].views + f["conduit.inclination"].views)

    def __panel__(self):
        def group(title, body, key, collapsed=False):
            return pn.Card(*body, self.alerts[key], title=title, collapsed=collapsed, sizing_mode="stretch_width",
                           css_classes=[f"group-{key}"])

        return pn.Column(
            self.alerts["case"],
            group("Fluid and temperature", self._group_body("fluid"), "fluid"),
            group("Cross-section and length", self._group_body("section"), "section"),
            group("Wetting", self._group_body("wetting"), "wetting"),
            group("Gravity level and orientation", self._gravity_body(), "gravity"),
            group("Boundary models and constants", [self.models_box], "models", collapsed=True),
            group("Chart ranges, axes and units", self._group_body("chart"), "chart", collapsed=True),
            sizing_mode="stretch_width")


def _level_of(g: float) -> str:
    """The named level (words shown) of a gravity ``g`` [m/s^2], or "other"."""
    from lowgmap.physics.properties.gravity import GRAVITY_LEVELS as NAMED

    g0 = 9.80665
    values = {"1e-6 g0": 1e-6 * g0}
    values.update({lv.name: lv.value for lv in NAMED.values()})
    for words, text in GRAVITY_LEVELS:
        v = values.get(text)
        if v is not None and math.isclose(g, v, rel_tol=1e-9):
            return words
    return OTHER_LEVEL


def _orientation_choice(case) -> str:
    """The orientation choice (words shown) of a case."""
    o = getattr(case, "orientation", None)
    if o is None or not o.is_known:
        return "unspecified"
    if o.kind == o.INCLINED:
        return INCLINED
    return {o.VERTICAL_UP: "vertical upward flow", o.VERTICAL_DOWN: "vertical downward flow",
            o.HORIZONTAL: "horizontal"}.get(o.kind, "unspecified")


def _num_or_text(p: str):
    try:
        return float(p)
    except ValueError:
        return p
