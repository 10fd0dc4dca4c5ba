"""Case files: one human-readable TOML file per study (load, validate, save).

The file format is lowgmap's own and is documented in README.md ("Case file"). Quantities carry
units as text (``"12.7 mm"``); :mod:`lowgmap.app.files.units` converts them to SI and the physics receives a
:class:`lowgmap.physics.case.Case`.

Loading collects *every* problem before failing (:class:`lowgmap.app.files.problems.ProblemCollector`):
:class:`CaseFileError` holds a list of :class:`Problem` (key path, value, message, line number where
known). The file is read as a regular file of at most 1 MB (:func:`lowgmap.app.files.reading.read_text_file`).

What loads is what the computing commands can use: every value has the kind its key needs (text
with units, a table, a list, a whole number), and every quantity lies within the physical bounds of
:data:`BOUNDS` (lengths 1 µm to 1 km, flows 1e-15 to 1000 m^3/s, residual acceleration 0 to 100 g0,
pressure 1 Pa to 100 MPa, ...), and within the narrower range of the physics where it has one (the
fluid source's temperatures, contact angle [0, 180] deg, corner half-angle (0, 90) deg). Counts are
bounded too (:data:`COUNT_LIMITS`: polygon vertices and sides, models, boundaries, files), and so are
texts (:data:`TEXT_LIMITS`). The boundary models a file lists are looked up, their constants checked
against their ranges and their use for the section checked, as the chart will; an uncertain input must
be one the case has. So ``lowgmap check`` says "valid" only for a file that ``margin``, ``chart`` and
the other commands can compute (the intended regime's name is checked against the chart by the
commands that use it).

Saving writes the document back exactly as held (comments and layout kept, via tomlkit) and
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
from lowgmap.physics.validate import InputError, InputTypeError, format_number

from lowgmap.app.files.atomic import write_atomic
from lowgmap.app.files.samples import sample_dir, sample_path
from lowgmap.app.files.problems import CaseFileError, Problem, ProblemCollector, line_index, short_value
from lowgmap.app.files.reading import MAX_CASE_BYTES, FileReadError, read_text_file
from lowgmap.app.files.units import (UnitError, check_unit, gravity_names, parse_flow, parse_gravity,
                                     parse_orientation, to_si)

__all__ = ["SCHEMA_VERSION", "Problem", "CaseFileError", "CaseDocument", "ChartSettings", "Uncertainty",
           "load_case", "loads_case", "build_case", "save_case", "dumps_case", "with_conduit", "SAMPLE_DIR", "sample_case_path",
           "AXES_KINDS", "BOUNDS", "check_bounds", "COUNT_LIMITS", "TEXT_LIMITS", "MAX_CASE_BYTES"]

#: Version of the case-file layout written by this release.
SCHEMA_VERSION = 1

#: Folder of the bundled sample cases (package data of ``lowgmap.samples``; see :mod:`lowgmap.app.files.samples`).
SAMPLE_DIR = sample_dir()

AXES_KINDS = ("flow", "superficial_velocity", "reynolds", "weber", "flow_ratio")

_G0 = 9.80665
#: Physical bounds of the quantities of a case file: kind -> (low, high) [SI] and the range as shown
#: in messages. Wide enough for any conduit lowgmap's models are meant for (capillaries to long
#: lines, microfluidic to process flows, orbit to 100 g0), narrow enough that no model overflows.
BOUNDS: dict[str, tuple[float, float, str]] = {
    "length": (1e-6, 1e3, "[1 µm, 1 km]"),
    "coordinate": (-1e3, 1e3, "[-1 km, 1 km]"),
    "flow": (1e-15, 1e3, "[1e-15, 1000] m^3/s"),
    "acceleration": (0.0, 100 * _G0, "[0, 100 g0]"),
    "pressure": (1.0, 1e8, "[1 Pa, 100 MPa]"),
    "temperature": (1.0, 5000.0, "[1 K, 5000 K]"),
    "density": (1e-6, 1e5, "[1e-06, 1e+05] kg/m^3"),
    "viscosity": (1e-7, 1e4, "[1e-07, 1e+04] Pa*s"),
    "surface_tension": (1e-5, 10.0, "[1e-05, 10] N/m"),
}
_SI_UNITS = {"length": "m", "coordinate": "m", "flow": "m^3/s", "acceleration": "m/s^2", "pressure": "Pa",
             "temperature": "K", "density": "kg/m^3", "viscosity": "Pa*s", "surface_tension": "N/m"}
#: Most entries of the lists of a case file.
COUNT_LIMITS: dict[str, int] = {"section.vertices": 1000, "section.n_sides": 1000, "section.open_edges": 1000,
                                "models": 50, "custom_boundaries": 50, "custom_boundaries.points": 1000,
                                "test_points.files": 100}
#: Largest exponent b of an empirical power-law boundary Q_G = a Q_L^b in magnitude (the range the physics
#: accepts, checked here before ``a`` is converted to SI, where a larger one would overflow).
MAX_POWER_LAW_EXPONENT = 10.0
#: Longest texts of a case file [characters].
TEXT_LIMITS: dict[str, int] = {"title": 200, "revision": 20, "author": 200, "description": 5000,
                               "chart.intended_regime": 200, "name": 200, "band_reason": 500}


def check_bounds(kind: str, x: float | None, path: str) -> float | None:
    """``x`` (SI) if within :data:`BOUNDS` of ``kind`` (any ``x`` for a kind without bounds); an
    :class:`~lowgmap.physics.validate.InputError` naming ``path`` and the range otherwise.

    >>> check_bounds("length", 0.0127, "section.diameter")
    0.0127
    >>> check_bounds("length", 1e297, "section.diameter")
    Traceback (most recent call last):
    lowgmap.physics.validate.InputError: section.diameter: must be within [1 µm, 1 km], got 1e+297 m
    """
    if x is None or kind not in BOUNDS:
        return x
    lo, hi, shown = BOUNDS[kind]
    if not lo <= x <= hi:
        raise InputError(f"{path}: must be within {shown}, got {format_number(x)} {_SI_UNITS[kind]}")
    return x


def _si(value, kind: str, path: str, *, default_unit: str | None = None, bound: str | None = None):
    """``to_si`` of a case-file value, then checked against :data:`BOUNDS` (of ``bound``, default ``kind``)."""
    return check_bounds(bound or kind, to_si(value, kind, path, default_unit=default_unit), path)

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
    return col.run(full, lambda: _si(value, kind, full), value)


def _build_fluid(col: ProblemCollector, data: dict):
    from lowgmap.physics.properties import fluids

    t = _table(col, data, "fluid")
    if not t:
        return None
    col.unknown_keys(t, "fluid", {"liquid", "gas", "temperature", "pressure", "liquid_source", "gas_model",
                                   "overrides"})
    liquid = t.get("liquid")
    if not isinstance(liquid, str) or not liquid.strip():
        col.add("fluid.liquid", "missing or empty (a fluid name as text; `lowgmap fluids` lists them)", liquid)
        return None
    if len(liquid) > TEXT_LIMITS["name"]:
        col.add("fluid.liquid", f"a fluid name is at most {TEXT_LIMITS['name']} characters", liquid)
        return None
    temperature = _quantity(col, t, "fluid", "temperature", "temperature")
    pressure = _quantity(col, t, "fluid", "pressure", "pressure", required=False)
    gas = t.get("gas")
    if gas is not None and (not isinstance(gas, str) or len(gas) > TEXT_LIMITS["name"]):
        col.add("fluid.gas", "must be a fluid name (text)", gas)
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
        v = col.run(f"fluid.overrides.{key}", lambda k=key, v=value: _si(v, kinds[k], f"fluid.overrides.{k}"),
                    value)
        if v is not None:
            overrides[key] = v
    if temperature is None:
        return None
    kwargs = dict(gas=gas, overrides=overrides or None)
    for opt in ("liquid_source", "gas_model"):
        if opt in t:
            if not isinstance(t[opt], str) or len(t[opt]) > TEXT_LIMITS["name"]:
                col.add(f"fluid.{opt}", "must be a name (text)", t[opt])
                return None
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
    if not isinstance(kind, str) or kind not in sections.SECTION_KINDS:
        col.add("section.kind", f"must be one of {', '.join(sections.SECTION_KINDS)}, got {_short(kind)}", kind)
        return None
    spec = sections.section_fields(kind)
    col.unknown_keys(t, "section", {"kind", "vertices_unit", *(f.name for f in spec)})
    vertices_unit = t.get("vertices_unit")
    if vertices_unit is not None:
        if not isinstance(vertices_unit, str):
            col.add("section.vertices_unit", f"must be a length unit as text such as \"mm\", got {_short(vertices_unit)}",
                    vertices_unit)
            return None
        if col.run("section.vertices_unit",
                   lambda: check_unit(vertices_unit, "length", "section.vertices_unit"), vertices_unit) is None:
            return None
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
        most = COUNT_LIMITS.get(f"section.{key}")
        if quantity == "count":
            if isinstance(value, bool) or not isinstance(value, int):
                col.add(path, f"must be a whole number, got {_short(value)}", value)
                ok = False
            elif most is not None and value > most:
                col.add(path, f"must be at most {most:,}, got {value:,}", value)
                ok = False
            else:
                params[key] = value
        elif quantity == "edges":
            if not isinstance(value, list) or not all(isinstance(v, int) and not isinstance(v, bool)
                                                      for v in value):
                col.add(path, "must be a list of edge numbers (0 = edge from vertex 0 to vertex 1)", value)
                ok = False
            elif most is not None and len(value) > most:
                col.add(path, f"lists {len(value):,} edges; at most {most:,}", value)
                ok = False
            else:
                params[key] = tuple(value)
        elif quantity == "vertices":
            pts = []
            if not isinstance(value, list):
                col.add(path, "must be a list of [x, y] pairs", value)
                ok = False
                continue
            if most is not None and len(value) > most:
                col.add(path, f"lists {len(value):,} vertices; a polygon has at most {most:,}", value)
                ok = False
                continue
            for i, pair in enumerate(value):
                if not (isinstance(pair, list) and len(pair) == 2):
                    col.add(f"{path}[{i}]", "must be an [x, y] pair", pair)
                    ok = False
                    continue
                xy = [col.run(f"{path}[{i}]", lambda c=c: _si(c, "length", f"{path}[{i}]", default_unit=vertices_unit,
                                                               bound="coordinate"), c) for c in pair]
                if None in xy:
                    ok = False
                else:
                    pts.append(tuple(xy))
            params[key] = tuple(pts)
        else:                                    # "length" or "angle": text with units
            v = col.run(path, lambda value=value, quantity=quantity, path=path: _si(value, quantity, path), value)
            if v is None:
                ok = False
            params[key] = v
    if not ok:
        return None
    section = col.run("section", lambda: sections.Section.from_dict({"kind": kind, **params}), t)
    if section is not None:
        dh = col.run("section", lambda: float(section.hydraulic_diameter), t)
        if dh is None or col.run("section", lambda: check_bounds("length", dh, "hydraulic diameter"), t) is None:
            return None
    return section


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


def _build_gravity(col: ProblemCollector, conduit: dict):
    """conduit.residual_acceleration: an acceleration with units or a named level
    (:func:`lowgmap.app.files.units.parse_gravity`), within :data:`BOUNDS`."""
    path = "conduit.residual_acceleration"
    if "residual_acceleration" not in conduit:
        names = ", ".join(repr(n) for n in gravity_names())
        col.add(path, f"missing (an acceleration with units such as \"1e-6 g0\", or a named level: {names})")
        return None
    value = conduit["residual_acceleration"]
    return col.run(path, lambda: check_bounds("acceleration", parse_gravity(value, path), path), value)


def _build_orientation(col: ProblemCollector, conduit: dict):
    """conduit.orientation (optional, default unspecified): words or an angle above the horizontal
    (:func:`lowgmap.app.files.units.parse_orientation`)."""
    from lowgmap.physics.case import Orientation

    if not conduit or "orientation" not in conduit:
        return Orientation.unspecified()
    value = conduit["orientation"]
    got = col.run("conduit.orientation", lambda: parse_orientation(value, "conduit.orientation"), value)
    return got if got is not None else Orientation.unspecified()


def _flow(col, value, path, fluid, gas):
    p = fluid.pressure if fluid is not None else None
    temp = fluid.temperature if fluid is not None else None
    if fluid is None and any(pr.path == "fluid" or pr.path.startswith("fluid.") for pr in col.problems):
        try:                            # a standard-unit gas flow needs the fluid's p and T: the fluid's own
            return check_bounds("flow", parse_flow(value, path, pressure=p, temperature=temp, gas=gas), path)
        except (InputError, ValueError, TypeError) as exc:  # problem is reported; say nothing more about that
            if "needs the local pressure and temperature" in str(exc):
                return None
    return col.run(path, lambda: check_bounds("flow", parse_flow(value, path, pressure=p, temperature=temp, gas=gas), path),
                   value)


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
    if not isinstance(axes, str) or axes not in AXES_KINDS:
        col.add("chart.axes", f"must be one of {', '.join(AXES_KINDS)}, got {_short(axes)}", axes)
    else:
        settings_kwargs["axes"] = axes
    log_axes = t.get("log_axes", True)
    if not isinstance(log_axes, bool):
        col.add("chart.log_axes", f"must be true or false, got {log_axes!r}", log_axes)
    else:
        settings_kwargs["log_axes"] = log_axes
    for key in ("liquid_flow_unit", "gas_flow_unit"):
        if key in t:
            if not isinstance(t[key], str):
                col.add(f"chart.{key}", f"must be a flow unit as text such as \"L/min\", got {_short(t[key])}", t[key])
                continue
            u = col.run(f"chart.{key}", lambda key=key: check_unit(t[key], "flow", f"chart.{key}"), t[key])
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
        if not isinstance(t["intended_regime"], str) or len(t["intended_regime"]) > TEXT_LIMITS["chart.intended_regime"]:
            col.add("chart.intended_regime", "must be a regime name (text)", t["intended_regime"])
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
            raise InputError(f"unknown key(s) {sorted(unknown)}; allowed: size, distribution")
        distribution = spec.get("distribution", "normal")
        if not isinstance(distribution, str) or distribution not in ("normal", "uniform"):
            raise InputError(f"distribution must be 'normal' or 'uniform', got {_short(distribution)}")
        spec = spec.get("size")
        if spec is None:
            raise InputError("missing size (e.g. \"5 %\" or \"2 deg\")")
    if not isinstance(spec, str):
        raise InputTypeError(f"must be text such as \"5 %\" or \"2 deg\", got {_short(spec)}")
    if spec.strip().endswith("%"):
        size = to_si(spec, "dimensionless", path)
        relative = True
        if not 0 <= size <= 1:
            raise InputError(f"a relative size must be within [0, 100] %, got {spec!r}")
    else:
        kind = _UNC_KINDS[key]
        size = to_si(spec, kind, path)
        relative = False
        if not size >= 0:
            raise InputError(f"size must be >= 0, got {spec!r}")
        if kind == "angle" and size > math.pi:
            raise InputError(f"an angle's size must be within [0, 180] deg, got {spec!r}")
        if kind in BOUNDS and size > BOUNDS[kind][1]:
            raise InputError(f"size must be within [0, {BOUNDS[kind][2].split(', ')[1]}, got {spec!r}")
    return Uncertainty(key, distribution, size, relative)


#: Reason of a band a case file gives without ``band_reasons`` for its constant.
DEFAULT_CASE_BAND_REASON = "given by the case file"


@dataclass(frozen=True)
class _BandEntry:
    """A ``bands`` entry of a [[models]] table, read but not yet checked against the model."""

    index: int
    model: str
    constant: str
    low: float
    high: float
    reason: str


def _build_bands(col: ProblemCollector, m: dict, path: str, name: str, index: int) -> list[_BandEntry]:
    """``bands = { alpha_c = [0.30, 0.60] }`` and ``band_reasons = { alpha_c = "..." }`` of one [[models]]
    entry: each band a [low, high] pair of plain numbers (or percentages) with low <= high; each reason
    text for a constant that has a band. The constant names and allowed ranges are checked against
    the model in :func:`_check_models`."""
    bands = m.get("bands", {})
    reasons = m.get("band_reasons", {})
    if not isinstance(bands, dict):
        col.add(f"{path}.bands", "must be a table of constant = [low, high], e.g. { alpha_c = [0.30, 0.60] }", bands)
        return []
    if not isinstance(reasons, dict):
        col.add(f"{path}.band_reasons", "must be a table of constant = \"reason\" (text)", reasons)
        reasons = {}
    out = []
    for key, pair in bands.items():
        where = f"{path}.bands.{key}"
        if not (isinstance(pair, list) and len(pair) == 2):
            col.add(where, f"must be a range [low, high] of plain numbers, got {_short(pair)}", pair)
            continue
        lo, hi = (col.run(where, lambda v=v: _band_end(v, where), v) for v in pair)
        if lo is None or hi is None:
            continue
        if lo > hi:
            col.add(where, f"low must be <= high, got [{format_number(lo)}, {format_number(hi)}]", pair)
            continue
        reason = reasons.get(key, DEFAULT_CASE_BAND_REASON)
        if not isinstance(reason, str) or not reason.strip() or len(reason) > TEXT_LIMITS["band_reason"]:
            col.add(f"{path}.band_reasons.{key}", f"must be text of 1 to {TEXT_LIMITS['band_reason']} characters "
                                                  f"saying why the band is what it is", reason)
            continue
        out.append(_BandEntry(index, name, str(key), float(lo), float(hi), reason.strip()))
    for key in reasons:
        if key not in bands:
            col.add(f"{path}.band_reasons.{key}", f"gives a reason for {key!r}, which has no entry in bands "
                                                  f"(bands = {{ {key} = [low, high] }})", reasons[key])
    return out


def _band_end(value, path: str) -> float:
    """One end of a band: a plain number, or a percentage as text ("45 %")."""
    try:
        return to_si(value, "dimensionless", path)
    except UnitError:
        raise InputError(f"{path}: each end must be a plain number (or a percentage such as \"45 %\"), "
                         f"got {_short(value)}") from None


def _build_models(col: ProblemCollector, data: dict) -> tuple[tuple[ModelChoice, ...], list[_BandEntry]]:
    """[[models]]: the model choices and the bands they give (:func:`_build_bands`)."""
    models = data.get("models", [])
    band_entries: list[_BandEntry] = []
    if not isinstance(models, list):
        col.add("models", "must be an array of tables ([[models]])", models)
        return (), band_entries
    if len(models) > COUNT_LIMITS["models"]:
        col.add("models", f"lists {len(models)} models; at most {COUNT_LIMITS['models']}")
        return (), band_entries
    out = []
    for i, m in enumerate(models):
        path = f"models[{i}]"
        if not isinstance(m, dict) or not isinstance(m.get("name"), str) or len(m["name"]) > TEXT_LIMITS["name"]:
            col.add(f"{path}.name", "each [[models]] entry needs a name (a registered boundary model)", m)
            continue
        col.unknown_keys(m, path, {"name", "constants", "bands", "band_reasons"})
        band_entries += _build_bands(col, m, path, m["name"], i)
        constants = m.get("constants") or {}
        if not isinstance(constants, dict):
            col.add(f"{path}.constants", "must be a table of constant = value", constants)
            continue
        consts = {}
        for key, value in constants.items():
            v = col.run(f"{path}.constants.{key}",
                        lambda value=value, key=key: to_si(value, "dimensionless", f"{path}.constants.{key}"),
                        value)
            if v is not None:
                consts[key] = v
        out.append(ModelChoice.of(m["name"], consts))
    return tuple(out), band_entries


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
    if len(entries) > COUNT_LIMITS["custom_boundaries"]:
        col.add("custom_boundaries", f"lists {len(entries)} boundaries; at most {COUNT_LIMITS['custom_boundaries']}")
        return ()
    out = []
    for i, e in enumerate(entries):
        path = f"custom_boundaries[{i}]"
        if not isinstance(e, dict):
            col.add(path, "must be a table", e)
            continue
        spec = {k: v for k, v in e.items() if k != "flow_unit"}
        unit = e.get("flow_unit", "m^3/s")
        if not isinstance(unit, str):
            col.add(f"{path}.flow_unit", f"must be a flow unit as text such as \"L/min\", got {_short(unit)}", unit)
            continue
        try:
            c = to_si(f"1 {unit}", "flow", f"{path}.flow_unit")
        except UnitError as exc:
            col.add(f"{path}.flow_unit", str(exc).split(": ", 1)[-1], unit)
            continue
        ok = True
        if e.get("kind") == "power_law" and _is_number(e.get("a")) and _is_number(e.get("b")):
            if abs(float(e["b"])) > MAX_POWER_LAW_EXPONENT:
                col.add(f"{path}.b", f"must be within [-{MAX_POWER_LAW_EXPONENT:g}, {MAX_POWER_LAW_EXPONENT:g}], "
                                     f"got {format_number(e['b'])}", e["b"])
                continue
            a_si = col.run(f"{path}.a", lambda e=e, c=c: _finite_product(float(e["a"]), c ** (1.0 - float(e["b"])),
                                                                        f"{path}.a"), e["a"])
            if a_si is None:
                continue
            spec["a"] = a_si
            if "ql_range" in e:
                rng = e["ql_range"]
                if not (isinstance(rng, list) and len(rng) == 2):
                    col.add(f"{path}.ql_range", "must be [low, high] with units", rng)
                    ok = False
                else:
                    vals = [col.run(f"{path}.ql_range", lambda v=v: _si(v, "flow", f"{path}.ql_range",
                                                                        default_unit=unit), v) for v in rng]
                    ok = ok and None not in vals
                    spec["ql_range"] = vals
        elif e.get("kind") == "table" and isinstance(e.get("points"), list):
            if len(e["points"]) > COUNT_LIMITS["custom_boundaries.points"]:
                col.add(f"{path}.points", f"lists {len(e['points']):,} points; at most "
                                          f"{COUNT_LIMITS['custom_boundaries.points']:,}")
                continue
            pts = []
            for j, pair in enumerate(e["points"]):
                if not (isinstance(pair, list) and len(pair) == 2):
                    col.add(f"{path}.points[{j}]", "must be a [liquid flow, gas flow] pair", pair)
                    ok = False
                    continue
                xy = [col.run(f"{path}.points[{j}]", lambda v=v: _si(v, "flow", f"{path}.points[{j}]",
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
             "wetting", "conduit", "chart", "operating_point", "models", "models_replace_defaults",
             "custom_boundaries", "test_points", "history"}


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
    elif isinstance(version, bool) or version != SCHEMA_VERSION:
        col.add("schema_version", f"unsupported version {_short(version)}; this release reads {SCHEMA_VERSION}",
                version)
    for key in ("title", "revision", "author", "description"):
        if key in plain and not isinstance(plain[key], str):
            col.add(key, "must be text", plain[key])
        elif key in plain and len(plain[key]) > TEXT_LIMITS[key]:
            col.add(key, f"is {len(plain[key]):,} characters long; at most {TEXT_LIMITS[key]:,}", plain[key])
    if "invented" in plain and not isinstance(plain["invented"], bool):
        col.add("invented", f"must be true or false, got {_short(plain['invented'])}", plain["invented"])
    fluid = _build_fluid(col, plain)
    section = _build_section(col, plain)
    wetting = _build_wetting(col, plain)
    conduit = _table(col, plain, "conduit")
    col.unknown_keys(conduit, "conduit", {"length", "residual_acceleration", "orientation"})
    length = _quantity(col, conduit, "conduit", "length", "length") if conduit else None
    g = _build_gravity(col, conduit) if conduit else None
    orientation = _build_orientation(col, conduit)
    flow_range, settings = _build_chart(col, plain, fluid)
    if "chart" not in plain:
        pass  # already reported as a missing table
    op, uncertainties = _build_operating_point(col, plain, fluid)
    models, bands = _build_models(col, plain)
    custom = _build_custom_boundaries(col, plain)
    tp = plain.get("test_points", {})
    files: list[Path] = []
    if tp:
        if not isinstance(tp, dict) or not isinstance(tp.get("files", []), list):
            col.add("test_points.files", "must be a list of file paths", tp)
        elif len(tp.get("files", [])) > COUNT_LIMITS["test_points.files"]:
            col.add("test_points.files", f"lists {len(tp['files'])} files; at most {COUNT_LIMITS['test_points.files']}")
        else:
            col.unknown_keys(tp, "test_points", {"files"})
            for i, f in enumerate(tp.get("files", [])):
                if not isinstance(f, str) or not f.strip() or len(f) > 4096 or "\x00" in f:
                    col.add(f"test_points.files[{i}]", "must be a file path (text)", f)
                else:
                    p = Path(f)
                    files.append(p if p.is_absolute() or base_dir is None else base_dir / p)
    case = None
    if col.problems and bands:                         # the case will not be built: check the bands of the
        _precheck_bands(col, plain, bands)              # registered models now, so every problem shows at once
    if not col.problems and None not in (fluid, section, wetting, length, g, flow_range):
        case = col.run("(case)", lambda: Case(
            fluid=fluid, section=section, wetting=wetting, length=length, g=g, flow_range=flow_range,
            operating_point=op, models=models, title=plain.get("title", "untitled case"),
            revision=plain.get("revision", "A"), author=plain.get("author", ""),
            extra=(("custom_boundaries", _freeze(list(custom))),),
            intended_regime=settings.intended_regime or "" if settings is not None else "",
            orientation=orientation))
    if case is not None and models:
        _check_models(col, case, models, bands)
        if bands and not col.problems:
            from lowgmap.physics.models.boundary import with_case_bands

            case = col.run("models", lambda: with_case_bands(
                case, [(b.model, b.constant, b.low, b.high, b.reason) for b in bands]))
        replace = plain.get("models_replace_defaults", False)
        if not isinstance(replace, bool):
            col.add("models_replace_defaults", "must be true or false", replace)
        elif not replace and not col.problems:
            case = col.run("models", lambda: _merged_onto_defaults(case, models))
    if case is not None:
        from lowgmap.physics.studies.uncertainty import POINT_TARGETS, nominal_value

        for u in uncertainties:                        # an uncertain input the case has (e.g. a half-angle)
            if u.target not in POINT_TARGETS:
                col.run(f"operating_point.uncertainty.{u.target}", lambda u=u: nominal_value(case, u.target))
    if col.problems or case is None:
        if not col.problems:
            col.add("(case)", "incomplete case")
        raise CaseFileError(col.listed(), source)
    return CaseDocument(data=data, case=case, settings=settings, uncertainties=uncertainties,
                        test_point_files=tuple(files), text=text, invented=bool(plain.get("invented", False)))


def _merged_onto_defaults(case, models):
    """The case with its listed [[models]] merged onto the section's default set.

    A listed model keeps its place and its constants (constants it does not give keep their defaults);
    the default models it does not name follow, in their default order. So listing one model to change
    one constant keeps the rest of the default set; ``models_replace_defaults = true`` in the file uses
    exactly the listed models instead.
    """
    import dataclasses

    from lowgmap.physics.chart.composition import default_models

    listed = {m.name for m in models}
    extra = tuple(ModelChoice.of(n) for n in default_models(case) if n not in listed)
    return dataclasses.replace(case, models=tuple(models) + extra) if extra else case


def _check_models(col: ProblemCollector, case, models, bands=()) -> None:
    """The [[models]] as the chart will use them: known names (the registry or the file's own
    boundaries), each listed once, constants known and within their ranges, bands for known constants
    within their allowed ranges, and a model that applies to the section (or whose mechanism is only
    absent for this case, which the chart notes)."""
    from lowgmap.physics.models.boundary import resolve_model

    seen: dict[str, int] = {}
    for i, choice in enumerate(models):
        path = f"models[{i}]"
        model = col.run(f"{path}.name", lambda choice=choice: resolve_model(choice.name, case), choice.name)
        if model is None:
            continue
        if choice.name in seen:
            col.add(f"{path}.name", f"model {choice.name!r} is listed twice (also models[{seen[choice.name]}])",
                    choice.name)
            continue
        seen[choice.name] = i
        col.run(f"{path}.constants", lambda model=model, choice=choice: model.resolve_constants(choice.param_dict))
        for b in (b for b in bands if b.index == i):
            _check_band(col, model, b, f"{path}.bands.{b.constant}")
        reason = col.run(path, lambda model=model: model.applies_to(case))
        if reason is not None:
            inactive = getattr(model, "inactive_reason", None)
            absent = col.run(path, lambda: inactive(case)) if callable(inactive) else None
            if not absent:
                col.add(f"{path}.name", f"boundary model {choice.name} does not apply to this case: {reason}",
                        choice.name)


def _precheck_bands(col: ProblemCollector, plain: dict, bands) -> None:
    """Bands of registered models checked without a case (when other problems stop the case being built);
    a model the file defines itself ([[custom_boundaries]]) or an unknown name is left to :func:`_check_models`."""
    from lowgmap.physics.models.boundary import get_model

    own = {str(b.get("name")) for b in plain.get("custom_boundaries", []) or [] if isinstance(b, dict)}
    for b in bands:
        if b.model in own:
            continue
        try:
            model = get_model(b.model)
        except ValueError:
            continue
        _check_band(col, model, b, f"models[{b.index}].bands.{b.constant}")


def _check_band(col: ProblemCollector, model, band: _BandEntry, path: str) -> None:
    """A case band against its model: a constant the model has, both ends within its allowed range."""
    const = col.run(path, lambda: model.constant(band.constant), band.constant)
    if const is None:
        return
    lo, hi = float(const.low), float(const.high)
    if not (lo <= band.low and band.high <= hi):
        unit = "" if const.unit in ("-", "") else f" {const.unit}"
        col.add(path, f"band [{format_number(band.low)}, {format_number(band.high)}]{unit} must lie within the "
                      f"allowed range of {band.constant}, [{format_number(lo)}, {format_number(hi)}]{unit}",
                [band.low, band.high])


def _short(value) -> str:
    return short_value(value)


def _freeze(obj):
    if isinstance(obj, dict):
        return tuple((k, _freeze(v)) for k, v in obj.items())
    if isinstance(obj, list):
        return tuple(_freeze(v) for v in obj)
    return obj


def loads_case(text: str, *, source: str = "case", base_dir: Path | None = None) -> CaseDocument:
    """Parse and validate case-file text."""
    if not isinstance(text, str):
        raise CaseFileError([Problem("(file)", f"the case must be text, got {type(text).__name__}")], source)
    if len(text) > MAX_CASE_BYTES:
        raise CaseFileError([Problem("(file)", f"the case text is {len(text):,} characters; a case file may be at "
                                               f"most {MAX_CASE_BYTES:,} bytes")], source)
    try:
        data = tomlkit.parse(text)
    except ParseError as exc:
        raise CaseFileError([Problem("(syntax)", f"not valid TOML: {_short_text(str(exc))}",
                                     line=getattr(exc, "line", None))], source) from None
    except RecursionError:
        raise CaseFileError([Problem("(syntax)", "not valid TOML here: arrays or tables nested too deeply")],
                            source) from None
    except Exception as exc:       # the parser's own failure on text it cannot read: still the text's fault
        raise CaseFileError([Problem("(syntax)", f"not valid TOML: {_short_text(str(exc)) or type(exc).__name__}")],
                            source) from None
    try:
        return build_case(data, text=text, base_dir=base_dir, source=source)
    except RecursionError:
        raise CaseFileError([Problem("(file)", "values nested too deeply")], source) from None


def _short_text(text: str, limit: int = 300) -> str:
    text = " ".join(text.split())
    return text if len(text) <= limit else text[:limit - 1] + "…"


def load_case(path: str | os.PathLike) -> CaseDocument:
    """Load and validate a case file; raises :class:`CaseFileError` listing every problem."""
    p = Path(path)
    try:
        text = read_text_file(p, what="case file", max_bytes=MAX_CASE_BYTES)
    except FileReadError as exc:
        raise CaseFileError([Problem("(file)", str(exc))], str(p)) from None
    doc = loads_case(text, source=str(p), base_dir=p.parent)
    doc.path = p
    return doc


def with_conduit(doc: CaseDocument, *, residual_acceleration: str | None = None, orientation: str | None = None,
                 source: str | None = None) -> CaseDocument:
    """The case document with ``conduit.residual_acceleration`` and/or ``conduit.orientation`` replaced (as
    text, e.g. ``"1 g0"``, ``"lunar surface"``, ``"vertical upward flow"``, ``"30 deg"``), loaded again.

    The new values are written into a copy of the document, so everything that reads the document (the
    inputs as written in a report, a saved revision) shows them, and the case is built from it as from
    a file (a [[models]] list merged onto the defaults of the new orientation). ``doc`` is not changed.

    Raises
    ------
    CaseFileError
        The changed document does not load (its problems name the conduit keys).

    Examples
    --------
    >>> doc = load_case(sample_case_path("condensate_line"))
    >>> ground = with_conduit(doc, residual_acceleration="ground", orientation="vertical upward flow")
    >>> ground.case.g, ground.case.orientation.describe(), doc.case.g_over_g0
    (9.80665, 'vertical upward flow', 1e-06)
    """
    import tomlkit

    data = tomlkit.parse(dumps_case(doc.data))
    conduit = data.get("conduit")
    if conduit is None:
        data["conduit"] = tomlkit.table()
        conduit = data["conduit"]
    for key, value in (("residual_acceleration", residual_acceleration), ("orientation", orientation)):
        if value is not None:
            old = conduit.get(key)
            item = tomlkit.item(str(value))
            if old is not None and str(old) != str(value):   # the file's own comment described the old value
                item.comment(f"replaced; the file gives {str(old)!r}")
            conduit[key] = item
    base = Path(doc.path).parent if doc.path is not None else None
    new = build_case(data, text=dumps_case(data), base_dir=base, source=source or str(doc.path or "case"))
    new.path = doc.path
    return new


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


def _finite_product(a: float, b: float, path: str) -> float:
    x = a * b
    if not math.isfinite(x):
        raise InputError(f"{path}: too large once converted to m^3/s units ({format_number(a)} x {format_number(b)})")
    return x


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)
