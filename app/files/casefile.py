"""Case files: one human-readable TOML file per study (load, validate, save).

The file format is lowgmap's own and is documented in README.md ("Case file"). Quantities carry
units as text (``"12.7 mm"``); :mod:`lowgmap.app.files.units` converts them to SI and the physics receives a
:class:`lowgmap.physics.case.Case`.

Loading collects *every* problem before failing (:class:`lowgmap.app.files.problems.ProblemCollector`):
:class:`CaseFileError` holds a list of :class:`Problem` (key path, value, message, line number where
known). Saving writes the document back exactly as held (comments and layout kept, via tomlkit) and
atomically (:func:`lowgmap.app.files.atomic.write_atomic`): the text goes to a temporary file in the
same folder, is flushed to disk, then renamed over the target.
"""
from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import tomlkit
from tomlkit.exceptions import ParseError

from lowgmap.physics.case import Case, FlowRange, ModelChoice, OperatingPoint
from lowgmap.physics.studies.uncertainty import TARGETS as _UNCERTAIN_TARGETS, Uncertainty

from lowgmap.app.files.atomic import write_atomic
from lowgmap.app.files.samples import sample_dir, sample_path
from lowgmap.app.files.problems import CaseFileError, Problem, ProblemCollector, line_index
from lowgmap.app.files.units import UnitError, check_unit, parse_flow, to_si

__all__ = ["SCHEMA_VERSION", "Problem", "CaseFileError", "CaseDocument", "ChartSettings", "Uncertainty",
           "load_case", "loads_case", "build_case", "save_case", "dumps_case", "SAMPLE_DIR", "sample_case_path",
           "AXES_KINDS"]

#: Version of the case-file layout written by this release.
SCHEMA_VERSION = 1

#: Folder of the bundled sample cases (package data of ``lowgmap.samples``; see :mod:`lowgmap.app.files.samples`).
SAMPLE_DIR = sample_dir()

AXES_KINDS = ("flow", "superficial_velocity", "reynolds", "weber", "flow_ratio")

@dataclass(frozen=True)
class ChartSettings:
    """How the chart is shown (app-level; the physics does not need it)."""

    axes: str = "flow"
    log_axes: bool = True
    liquid_flow_unit: str = "mL/min"
    gas_flow_unit: str = "mL/min"
    required_margin: float = 0.2
    intended_regime: str | None = None


@dataclass
class CaseDocument:
    """A loaded case file: the TOML document as written, and what it means."""

    data: tomlkit.TOMLDocument
    case: Case
    settings: ChartSettings
    uncertainties: tuple[Uncertainty, ...] = ()
    test_point_files: tuple[Path, ...] = ()
    path: Path | None = None
    text: str = ""
    invented: bool = False

    def save(self, path: str | os.PathLike | None = None) -> Path:
        target = Path(path) if path is not None else self.path
        if target is None:
            raise ValueError("no path given and the case was not loaded from a file")
        save_case(self.data, target)
        return target


# --------------------------------------------------------------------------- builder
def _plain(obj):
    """tomlkit items → plain Python (dict/list/str/float/int/bool)."""
    if hasattr(obj, "unwrap"):
        return obj.unwrap()
    return obj


def _table(col: ProblemCollector, data: dict, key: str, required: bool = True) -> dict:
    val = data.get(key)
    if val is None:
        if required:
            col.add(key, f"missing table [{key}]")
        return {}
    if not isinstance(val, dict):
        col.add(key, f"must be a table ([{key}]), got {type(val).__name__}", val)
        return {}
    return val


def _quantity(col: ProblemCollector, table: dict, path: str, key: str, kind: str, required: bool = True,
              default=None):
    full = f"{path}.{key}"
    if key not in table:
        if required:
            col.add(full, f"missing (expected a {kind.replace('_', ' ')} with units)")
        return default
    value = table[key]
    return col.run(full, lambda: to_si(value, kind, full), value)


def _build_fluid(col: ProblemCollector, data: dict):
    from lowgmap.physics.properties import fluids

    t = _table(col, data, "fluid")
    if not t:
        return None
    col.unknown_keys(t, "fluid", {"liquid", "gas", "temperature", "pressure", "liquid_source", "gas_model",
                                   "overrides"})
    liquid = t.get("liquid")
    if not isinstance(liquid, str) or not liquid.strip():
        col.add("fluid.liquid", "missing or empty (a fluid name; `lowgmap fluids` lists them)", liquid)
        return None
    temperature = _quantity(col, t, "fluid", "temperature", "temperature")
    pressure = _quantity(col, t, "fluid", "pressure", "pressure", required=False)
    gas = t.get("gas")
    if gas is not None and not isinstance(gas, str):
        col.add("fluid.gas", "must be a fluid name", gas)
        gas = None
    overrides_raw = t.get("overrides", {}) or {}
    overrides = {}
    kinds = {"rho_l": "density", "mu_l": "viscosity", "sigma": "surface_tension", "rho_g": "density",
             "mu_g": "viscosity"}
    if not isinstance(overrides_raw, dict):
        col.add("fluid.overrides", "must be a table", overrides_raw)
        overrides_raw = {}
    for key, value in overrides_raw.items():
        if key not in kinds:
            col.add(f"fluid.overrides.{key}", f"unknown property; allowed: {', '.join(kinds)}", value)
            continue
        v = col.run(f"fluid.overrides.{key}", lambda k=key, v=value: to_si(v, kinds[k], f"fluid.overrides.{k}"),
                    value)
        if v is not None:
            overrides[key] = v
    if temperature is None:
        return None
    kwargs = dict(gas=gas, overrides=overrides or None)
    for opt in ("liquid_source", "gas_model"):
        if opt in t:
            kwargs[opt] = t[opt]
    return col.run("fluid", lambda: fluids.make_fluid_pair(liquid, temperature, pressure, **kwargs), t)


def _build_section(col: ProblemCollector, data: dict):
    """[section]: the kind and its fields as the physics lists them
    (:func:`lowgmap.physics.geometry.sections.section_fields`), converted to SI."""
    from lowgmap.physics.geometry import sections

    t = _table(col, data, "section")
    if not t:
        return None
    kind = t.get("kind")
    if kind not in sections.SECTION_KINDS:
        col.add("section.kind", f"must be one of {', '.join(sections.SECTION_KINDS)}, got {kind!r}", kind)
        return None
    spec = sections.section_fields(kind)
    col.unknown_keys(t, "section", {"kind", "vertices_unit", *(f.name for f in spec)})
    params: dict[str, Any] = {}
    ok = True
    for fld in spec:
        key, quantity = fld.name, fld.quantity
        path = f"section.{key}"
        if key not in t:
            if fld.required:
                col.add(path, f"missing (required for a {kind} section)")
                ok = False
            continue
        value = t[key]
        if quantity == "count":
            if isinstance(value, bool) or not isinstance(value, int):
                col.add(path, f"must be a whole number, got {value!r}", value)
                ok = False
            else:
                params[key] = value
        elif quantity == "edges":
            if not isinstance(value, list) or not all(isinstance(v, int) and not isinstance(v, bool)
                                                      for v in value):
                col.add(path, "must be a list of edge numbers (0 = edge from vertex 0 to vertex 1)", value)
                ok = False
            else:
                params[key] = tuple(value)
        elif quantity == "vertices":
            unit = t.get("vertices_unit")
            pts = []
            if not isinstance(value, list):
                col.add(path, "must be a list of [x, y] pairs", value)
                ok = False
                continue
            for i, pair in enumerate(value):
                if not (isinstance(pair, list) and len(pair) == 2):
                    col.add(f"{path}[{i}]", "must be an [x, y] pair", pair)
                    ok = False
                    continue
                xy = [col.run(f"{path}[{i}]", lambda c=c: to_si(c, "length", f"{path}[{i}]",
                                                                 default_unit=unit), c) for c in pair]
                if None in xy:
                    ok = False
                else:
                    pts.append(tuple(xy))
            params[key] = tuple(pts)
        else:                                    # "length" or "angle": text with units
            v = col.run(path, lambda value=value, quantity=quantity, path=path: to_si(value, quantity, path), value)
            if v is None:
                ok = False
            params[key] = v
    if not ok:
        return None
    return col.run("section", lambda: sections.Section.from_dict({"kind": kind, **params}), t)


def _build_wetting(col: ProblemCollector, data: dict):
    from lowgmap.physics.properties.wetting import Wetting

    t = _table(col, data, "wetting")
    if not t:
        return None
    col.unknown_keys(t, "wetting", {"contact_angle", "advancing", "receding"})
    theta = _quantity(col, t, "wetting", "contact_angle", "angle")
    adv = _quantity(col, t, "wetting", "advancing", "angle", required=False)
    rec = _quantity(col, t, "wetting", "receding", "angle", required=False)
    if theta is None:
        return None
    return col.run("wetting", lambda: Wetting(theta, adv, rec), t)


def _flow(col, value, path, fluid, gas):
    p = fluid.pressure if fluid is not None else None
    temp = fluid.temperature if fluid is not None else None
    return col.run(path, lambda: parse_flow(value, path, pressure=p, temperature=temp, gas=gas), value)


def _build_chart(col: ProblemCollector, data: dict, fluid):
    t = _table(col, data, "chart")
    col.unknown_keys(t, "chart", {"liquid_flow", "gas_flow", "axes", "log_axes", "liquid_flow_unit",
                                   "gas_flow_unit", "required_margin", "intended_regime"})
    rng = {}
    for key, gas in (("liquid_flow", False), ("gas_flow", True)):
        path = f"chart.{key}"
        value = t.get(key)
        if value is None:
            if t:
                col.add(path, "missing: the chart range as [low, high], e.g. [\"1 mL/min\", \"1 L/min\"]")
            continue
        if not (isinstance(value, list) and len(value) == 2):
            col.add(path, "must be a range [low, high] with units", value)
            continue
        lo = _flow(col, value[0], f"{path}[0]", fluid, gas)
        hi = _flow(col, value[1], f"{path}[1]", fluid, gas)
        if lo is not None and hi is not None:
            rng[key] = (lo, hi)
    flow_range = None
    if len(rng) == 2:
        flow_range = col.run("chart", lambda: FlowRange(rng["liquid_flow"][0], rng["liquid_flow"][1],
                                                        rng["gas_flow"][0], rng["gas_flow"][1]), t)
    settings_kwargs: dict[str, Any] = {}
    axes = t.get("axes", "flow")
    if axes not in AXES_KINDS:
        col.add("chart.axes", f"must be one of {', '.join(AXES_KINDS)}, got {axes!r}", axes)
    else:
        settings_kwargs["axes"] = axes
    log_axes = t.get("log_axes", True)
    if not isinstance(log_axes, bool):
        col.add("chart.log_axes", f"must be true or false, got {log_axes!r}", log_axes)
    else:
        settings_kwargs["log_axes"] = log_axes
    for key in ("liquid_flow_unit", "gas_flow_unit"):
        if key in t:
            u = col.run(f"chart.{key}", lambda key=key: check_unit(str(t[key]), "flow", f"chart.{key}"), t[key])
            if u is not None:
                settings_kwargs[key] = u
    if "required_margin" in t:
        m = col.run("chart.required_margin", lambda: to_si(t["required_margin"], "dimensionless",
                                                           "chart.required_margin"), t["required_margin"])
        if m is not None:
            if not 0 <= m < 1:
                col.add("chart.required_margin", f"must be within [0, 1) (e.g. \"30 %\"), got {m:g}", m)
            else:
                settings_kwargs["required_margin"] = m
    if "intended_regime" in t:
        if not isinstance(t["intended_regime"], str):
            col.add("chart.intended_regime", "must be a regime name", t["intended_regime"])
        else:
            settings_kwargs["intended_regime"] = t["intended_regime"]
    return flow_range, ChartSettings(**settings_kwargs)


def _build_operating_point(col: ProblemCollector, data: dict, fluid):
    t = _table(col, data, "operating_point", required=False)
    if not t:
        return None, ()
    col.unknown_keys(t, "operating_point", {"liquid_flow", "gas_flow", "uncertainty"})
    ql = _flow(col, t["liquid_flow"], "operating_point.liquid_flow", fluid, False) if "liquid_flow" in t else None
    qg = _flow(col, t["gas_flow"], "operating_point.gas_flow", fluid, True) if "gas_flow" in t else None
    for key in ("liquid_flow", "gas_flow"):
        if key not in t:
            col.add(f"operating_point.{key}", "missing (a flow rate with units)")
    op = None
    if ql is not None and qg is not None:
        op = col.run("operating_point", lambda: OperatingPoint(ql, qg), t)
    uncertainties = []
    u = t.get("uncertainty", {})
    if not isinstance(u, dict):
        col.add("operating_point.uncertainty", "must be a table", u)
        u = {}
    for key, spec in u.items():
        path = f"operating_point.uncertainty.{key}"
        if key not in _UNCERTAIN_TARGETS:
            col.add(path, f"unknown input; allowed: {', '.join(_UNCERTAIN_TARGETS)}", spec)
            continue
        unc = col.run(path, lambda spec=spec, path=path, key=key: _parse_uncertainty(key, spec, path), spec)
        if unc is not None:
            uncertainties.append(unc)
    return op, tuple(uncertainties)


_UNC_KINDS = {"liquid_flow": "flow", "gas_flow": "flow", "surface_tension": "surface_tension",
              "liquid_density": "density", "liquid_viscosity": "viscosity", "gas_density": "density",
              "gas_viscosity": "viscosity", "contact_angle": "angle", "size": "length", "length": "length",
              "half_angle": "angle", "residual_acceleration": "acceleration"}


def _parse_uncertainty(key: str, spec, path: str) -> Uncertainty:
    """``"5 %"`` (relative, normal) or a table {size = "2 deg", distribution = "uniform"}."""
    distribution = "normal"
    if isinstance(spec, dict):
        unknown = set(spec) - {"size", "distribution"}
        if unknown:
            raise ValueError(f"unknown key(s) {sorted(unknown)}; allowed: size, distribution")
        distribution = spec.get("distribution", "normal")
        if distribution not in ("normal", "uniform"):
            raise ValueError(f"distribution must be 'normal' or 'uniform', got {distribution!r}")
        spec = spec.get("size")
        if spec is None:
            raise ValueError("missing size (e.g. \"5 %\" or \"2 deg\")")
    if not isinstance(spec, str):
        raise ValueError(f"must be text such as \"5 %\" or \"2 deg\", got {spec!r}")
    if spec.strip().endswith("%"):
        size = to_si(spec, "dimensionless", path)
        relative = True
    else:
        size = to_si(spec, _UNC_KINDS[key], path)
        relative = False
    if not size >= 0:
        raise ValueError(f"size must be >= 0, got {spec!r}")
    return Uncertainty(key, distribution, size, relative)


def _build_models(col: ProblemCollector, data: dict) -> tuple[ModelChoice, ...]:
    models = data.get("models", [])
    if not isinstance(models, list):
        col.add("models", "must be an array of tables ([[models]])", models)
        return ()
    out = []
    for i, m in enumerate(models):
        path = f"models[{i}]"
        if not isinstance(m, dict) or not isinstance(m.get("name"), str):
            col.add(f"{path}.name", "each [[models]] entry needs a name (a registered boundary model)", m)
            continue
        col.unknown_keys(m, path, {"name", "constants"})
        consts = {}
        for key, value in (m.get("constants") or {}).items():
            v = col.run(f"{path}.constants.{key}",
                        lambda value=value, key=key: to_si(value, "dimensionless", f"{path}.constants.{key}"),
                        value)
            if v is not None:
                consts[key] = v
        out.append(ModelChoice.of(m["name"], consts))
    return tuple(out)


def _build_custom_boundaries(col: ProblemCollector, data: dict) -> tuple:
    """[[custom_boundaries]]: empirical lines, converted to SI and checked with the physics builder.

    power_law: Q_G = a Q_L^b with both flows in ``flow_unit`` (default m^3/s); table: ``points`` as
    [Q_L, Q_G] pairs, text with units or numbers in ``flow_unit``. Stored in SI.
    """
    from lowgmap.physics.models.boundary import boundary_from_spec

    entries = data.get("custom_boundaries", [])
    if not isinstance(entries, list):
        col.add("custom_boundaries", "must be an array of tables ([[custom_boundaries]])", entries)
        return ()
    out = []
    for i, e in enumerate(entries):
        path = f"custom_boundaries[{i}]"
        if not isinstance(e, dict):
            col.add(path, "must be a table", e)
            continue
        spec = {k: v for k, v in e.items() if k != "flow_unit"}
        unit = e.get("flow_unit", "m^3/s")
        try:
            c = to_si(f"1 {unit}", "flow", f"{path}.flow_unit")
        except UnitError as exc:
            col.add(f"{path}.flow_unit", str(exc).split(": ", 1)[-1], unit)
            continue
        ok = True
        if e.get("kind") == "power_law" and _is_number(e.get("a")) and _is_number(e.get("b")):
            spec["a"] = float(e["a"]) * c ** (1.0 - float(e["b"]))
            if "ql_range" in e:
                rng = e["ql_range"]
                if not (isinstance(rng, list) and len(rng) == 2):
                    col.add(f"{path}.ql_range", "must be [low, high] with units", rng)
                    ok = False
                else:
                    vals = [col.run(f"{path}.ql_range", lambda v=v: to_si(v, "flow", f"{path}.ql_range",
                                                                          default_unit=unit), v) for v in rng]
                    ok = ok and None not in vals
                    spec["ql_range"] = vals
        elif e.get("kind") == "table" and isinstance(e.get("points"), list):
            pts = []
            for j, pair in enumerate(e["points"]):
                if not (isinstance(pair, list) and len(pair) == 2):
                    col.add(f"{path}.points[{j}]", "must be a [liquid flow, gas flow] pair", pair)
                    ok = False
                    continue
                xy = [col.run(f"{path}.points[{j}]", lambda v=v: to_si(v, "flow", f"{path}.points[{j}]",
                                                                       default_unit=unit), v) for v in pair]
                if None in xy:
                    ok = False
                pts.append(xy)
            spec["points"] = pts
        if not ok:
            continue
        if col.run(path, lambda spec=spec: boundary_from_spec(spec), e) is not None:
            out.append(spec)
    return tuple(out)


_TOP_KEYS = {"schema_version", "title", "revision", "author", "description", "invented", "fluid", "section",
             "wetting", "conduit", "chart", "operating_point", "models", "custom_boundaries", "test_points",
             "history"}


def build_case(data: dict, *, text: str = "", base_dir: Path | None = None, source: str = "case"
               ) -> CaseDocument:
    """Validate a parsed case document and build the physics :class:`Case` (all problems at once)."""
    col = ProblemCollector(line_index(text) if text else {}, source=source)
    plain = _plain(data)
    if not isinstance(plain, dict):
        raise CaseFileError([Problem("(file)", "the case file must be a TOML document")], source)
    col.unknown_keys(plain, "", _TOP_KEYS)
    version = plain.get("schema_version")
    if version is None:
        col.add("schema_version", f"missing (this release writes schema_version = {SCHEMA_VERSION})")
    elif version != SCHEMA_VERSION:
        col.add("schema_version", f"unsupported version {version!r}; this release reads {SCHEMA_VERSION}", version)
    for key in ("title", "revision", "author", "description"):
        if key in plain and not isinstance(plain[key], str):
            col.add(key, "must be text", plain[key])
    fluid = _build_fluid(col, plain)
    section = _build_section(col, plain)
    wetting = _build_wetting(col, plain)
    conduit = _table(col, plain, "conduit")
    col.unknown_keys(conduit, "conduit", {"length", "residual_acceleration"})
    length = _quantity(col, conduit, "conduit", "length", "length") if conduit else None
    g = _quantity(col, conduit, "conduit", "residual_acceleration", "acceleration") if conduit else None
    if g is not None and g < 0:
        col.add("conduit.residual_acceleration", f"must be >= 0, got {g:g} m/s^2", g)
    flow_range, settings = _build_chart(col, plain, fluid)
    if "chart" not in plain:
        pass  # already reported as a missing table
    op, uncertainties = _build_operating_point(col, plain, fluid)
    models = _build_models(col, plain)
    custom = _build_custom_boundaries(col, plain)
    tp = plain.get("test_points", {})
    files: list[Path] = []
    if tp:
        if not isinstance(tp, dict) or not isinstance(tp.get("files", []), list):
            col.add("test_points.files", "must be a list of file paths", tp)
        else:
            for i, f in enumerate(tp.get("files", [])):
                if not isinstance(f, str):
                    col.add(f"test_points.files[{i}]", "must be a file path", f)
                else:
                    p = Path(f)
                    files.append(p if p.is_absolute() or base_dir is None else base_dir / p)
    case = None
    if not col.problems and None not in (fluid, section, wetting, length, g, flow_range):
        case = col.run("(case)", lambda: Case(
            fluid=fluid, section=section, wetting=wetting, length=length, g=g, flow_range=flow_range,
            operating_point=op, models=models, title=plain.get("title", "untitled case"),
            revision=plain.get("revision", "A"), author=plain.get("author", ""),
            extra=(("custom_boundaries", _freeze(list(custom))),)))
    if col.problems or case is None:
        if not col.problems:
            col.add("(case)", "incomplete case")
        raise CaseFileError(col.problems, source)
    return CaseDocument(data=data, case=case, settings=settings, uncertainties=uncertainties,
                        test_point_files=tuple(files), text=text, invented=bool(plain.get("invented", False)))


def _freeze(obj):
    if isinstance(obj, dict):
        return tuple((k, _freeze(v)) for k, v in obj.items())
    if isinstance(obj, list):
        return tuple(_freeze(v) for v in obj)
    return obj


def loads_case(text: str, *, source: str = "case", base_dir: Path | None = None) -> CaseDocument:
    """Parse and validate case-file text."""
    try:
        data = tomlkit.parse(text)
    except ParseError as exc:
        raise CaseFileError([Problem("(syntax)", f"not valid TOML: {exc}", line=getattr(exc, "line", None))],
                            source) from None
    return build_case(data, text=text, base_dir=base_dir, source=source)


def load_case(path: str | os.PathLike) -> CaseDocument:
    """Load and validate a case file; raises :class:`CaseFileError` listing every problem."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise CaseFileError([Problem("(file)", f"no such file: {p}")], str(p)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise CaseFileError([Problem("(file)", f"cannot read {p}: {exc}")], str(p)) from None
    doc = loads_case(text, source=str(p), base_dir=p.parent)
    doc.path = p
    return doc


def dumps_case(data) -> str:
    """The case document as TOML text (exactly as held, comments kept)."""
    return tomlkit.dumps(data)


def save_case(data, path: str | os.PathLike) -> None:
    """Write the case document atomically (:func:`lowgmap.app.files.atomic.write_atomic`)."""
    write_atomic(path, dumps_case(data))


def sample_case_path(name: str | None = None) -> Path:
    """Path of a bundled sample file: a case by name (default: the condensate-line tube case), or any
    sample file by its relative name (``"drop_tower_points.csv"``); see :func:`lowgmap.app.files.samples.sample_path`."""
    return sample_path(name)


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)
