"""Study files: the SWEEP and GOAL files that go with a case file (read, checked, converted to SI).

A SWEEP file lists the case inputs to vary (values with units) and what to compute; a GOAL file
states an operating envelope, the wanted regime, a required margin and the design inputs that may
change. Both are TOML and are read against a loaded case (:class:`lowgmap.app.files.casefile.CaseDocument`):
units are converted with :mod:`lowgmap.app.files.units`, variable names are checked with
:func:`lowgmap.physics.studies.design_space.check_key`, and the physics receives SI values
(:func:`lowgmap.physics.studies.sweep.sweep`, :func:`lowgmap.physics.studies.design.optimize_design`).
As for case files, every problem is reported at once, with its key path and line
(:class:`lowgmap.app.files.problems.ProblemCollector`, :class:`lowgmap.app.files.problems.CaseFileError`).

SWEEP file::

    [sweep]
    combine = "grid"              # every combination ("grid") or values paired in order ("paired")
    regime = "dispersed bubbles"  # optional: intended regime (default: each design's own)
    required_margin = "25 %"      # optional (default: the case's [chart] required_margin)
    [envelope]                    # optional: operating envelope, worst-case margin per design
    liquid_flow = ["1 L/min", "4 L/min"]
    gas_flow = ["100 sccm", "600 sccm"]
    [monte_carlo]                 # optional: probability with the case's uncertainties
    samples = 500
    seed = 1
    [[variables]]
    name = "half_angle"           # a lowgmap.physics.studies.sweep.VARIABLES name, section.<field>,
    from = "4 deg"                # model.<name>.<constant> or constant.<constant>
                                  # (residual_acceleration also takes named levels: values = ["ground",
                                  #  "Martian surface", "lunar surface", "1e-6 g0"])
    to = "10 deg"
    steps = 7                     # or: values = ["4 deg", "6 deg"]; spacing = "log" for geometric steps

GOAL file::

    [goal]
    liquid_flow = ["0.2 mL/s", "0.4 mL/s"]    # envelope (required)
    gas_flow = ["0.01 mL/s", "0.02 mL/s"]
    regime = "isolated bubbles separated"     # optional (default: regime at the envelope's centre)
    required_margin = "25 %"                  # optional (default: the case's)
    fluids = ["silicone oil 5 cSt"]           # optional liquids (or tables {liquid, gas, temperature})
    starts = 3                                 # optional search settings: starts, screen, max_evaluations, seed
    [[variables]]
    name = "length"
    low = "20 mm"
    high = "80 mm"
    scale = "log"                              # optional
    [[constraints]]
    quantity = "volume"                        # lowgmap.physics.studies.design.QUANTITIES or section.<field>
    max = "60 mL"                              # and/or min

Limits: a file is at most 1 MB (:data:`lowgmap.app.files.reading.MAX_STUDY_BYTES`); a sweep has at most
:data:`~lowgmap.physics.studies.design_space.MAX_VALUES` values per variable (``steps``) and
:data:`~lowgmap.physics.studies.design_space.MAX_DESIGNS` designs (grid product or paired length), and at
most :data:`~lowgmap.physics.studies.sweep.MAX_MC_SAMPLES` Monte Carlo samples per design; a goal's
search settings are bounded by :class:`lowgmap.physics.studies.design.DesignGoal`. Values are checked
against the physical bounds of case files (:data:`lowgmap.app.files.casefile.BOUNDS`). Every limit is
checked before anything is built.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from lowgmap.app.files.problems import CaseFileError, Problem, ProblemCollector, line_index, short_value
from lowgmap.app.files.reading import MAX_STUDY_BYTES, FileReadError, read_text_file
from lowgmap.app.files.units import MAX_QUANTITY_CHARS, UnitError, convert, parse_flow, parse_gravity, to_si, ureg

__all__ = ["SweepPlan", "read_sweep", "loads_sweep", "read_goal", "loads_goal", "fluid_spec", "variable_kind",
           "to_display", "unit_of_text", "DEFAULT_UNITS"]

#: Quantity kind (lowgmap.app.files.units) of each sweep variable; "name" for fluid names.
_KINDS = {"half_angle": "angle", "contact_angle": "angle", "length": "length", "size": "length",
          "residual_acceleration": "acceleration", "temperature": "temperature", "pressure": "pressure",
          "surface_tension": "surface_tension", "liquid_density": "density", "liquid_viscosity": "viscosity",
          "gas_density": "density", "gas_viscosity": "viscosity", "liquid_flow": "flow", "gas_flow": "flow",
          "liquid": "name", "gas": "name"}
#: Unit a value of each quantity kind is shown in when the file writes none.
DEFAULT_UNITS = {"angle": "deg", "length": "mm", "acceleration": "m/s^2", "temperature": "degC",
                 "pressure": "kPa", "surface_tension": "mN/m", "density": "kg/m^3", "viscosity": "mPa*s",
                 "flow": "mL/min", "dimensionless": "-", "area": "mm^2", "volume": "mL", "name": ""}
#: Quantity kind of each constrained quantity of lowgmap.physics.studies.design.QUANTITIES.
_QUANTITY_KINDS = {"length": "length", "hydraulic_diameter": "length", "flow_area": "area", "volume": "volume",
                   "wetted_perimeter": "length", "half_angle": "angle", "contact_angle": "angle",
                   "residual_acceleration": "acceleration"}
#: Bounds (lowgmap.app.files.casefile.BOUNDS) of the values of each quantity kind of a study file.
_BOUND_OF = {"length": "length", "acceleration": "acceleration", "temperature": "temperature",
             "pressure": "pressure", "surface_tension": "surface_tension", "density": "density",
             "viscosity": "viscosity", "flow": "flow"}
#: Most [[variables]] and [[constraints]] of a study file.
_MAX_ENTRIES = 20


def variable_kind(name: str) -> str:
    """Quantity kind of a sweep variable ("angle", "length", ..., "dimensionless", "name").

    >>> variable_kind("half_angle"), variable_kind("section.wall_length"), variable_kind("constant.c0")
    ('angle', 'length', 'dimensionless')
    """
    if name in _KINDS:
        return _KINDS[name]
    if name.startswith("section."):
        return "angle" if "angle" in name else ("dimensionless" if name.endswith("n_sides") else "length")
    return "dimensionless"


def _si(value, kind: str, path: str, *, fluid=None):
    """A value from a SWEEP/GOAL file in SI (names stay text)."""
    from lowgmap.app.files.casefile import check_bounds

    if kind == "name":
        if not isinstance(value, str) or not value.strip() or len(value) > 200:
            raise UnitError(f"{path}: must be a fluid name, got {short_value(value)}")
        return value.strip()
    if kind == "volume":
        try:
            if not isinstance(value, str) or len(value) > MAX_QUANTITY_CHARS:
                raise ValueError
            q = ureg.Quantity(value)
            if q.dimensionality != ureg.Quantity(1, "m^3").dimensionality:
                raise ValueError
            v = float(q.to("m^3").magnitude)
            if not 0 <= v < float("inf"):
                raise ValueError
            return v
        except Exception:
            raise UnitError(f"{path}: expected a volume such as '50 mL', got {short_value(value)}") from None
    if kind == "flow":
        f = fluid
        v = parse_flow(value, path, gas=True, pressure=getattr(f, "pressure", None),
                       temperature=getattr(f, "temperature", None))
    elif kind == "acceleration":                  # a value with units or a named level ("lunar surface")
        v = parse_gravity(value, path)
    else:
        v = to_si(value, kind, path)
    return check_bounds(_BOUND_OF.get(kind, ""), v, path)


def unit_of_text(value, kind: str) -> str:
    """The unit written with a value ("4 deg" -> "deg"); the default unit of the kind otherwise.

    >>> unit_of_text("4 deg", "angle"), unit_of_text(0.5, "length"), unit_of_text("0.3", "dimensionless")
    ('deg', 'mm', '-')
    """
    if kind == "name":
        return ""
    if isinstance(value, str):
        parts = value.strip().split(None, 1)
        if len(parts) == 2:
            try:
                float(parts[0])
                return parts[1].strip()
            except ValueError:
                pass
    if kind == "dimensionless":
        return "-"
    return DEFAULT_UNITS.get(kind, "")


def to_display(value_si, kind: str, unit: str):
    """SI value(s) in ``unit`` (standard gas units, percent and names handled).

    >>> float(to_display(0.002, "length", "mm")), float(to_display(0.25, "dimensionless", "%"))
    (2.0, 25.0)
    """
    if kind in ("name",) or unit in ("", "-"):
        return value_si
    if kind == "flow" and unit.lower() in ("sccm", "slpm", "slm", "sccs"):
        return value_si                               # shown in m^3/s elsewhere; a standard unit needs p, T
    if kind == "volume":
        return ureg.Quantity(np.asarray(value_si, dtype=float), "m^3").to(unit).magnitude
    if kind == "dimensionless":
        return ureg.Quantity(np.asarray(value_si, dtype=float), "dimensionless").to(unit).magnitude
    return convert(np.asarray(value_si, dtype=float), kind, unit)


def _load_toml(path, what: str) -> tuple[dict, str, str]:
    """(parsed document, source name, text) of a TOML study file; file and syntax errors as problems."""
    import tomllib

    p = Path(path)
    try:
        text = read_text_file(p, what=f"{what} file", max_bytes=MAX_STUDY_BYTES)
    except FileReadError as exc:
        raise CaseFileError([Problem("(file)", str(exc).replace("no such file", f"no such {what} file", 1))],
                            str(p)) from None
    try:
        return tomllib.loads(text), str(p), text
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"at line (\d+)", str(exc))
        raise CaseFileError([Problem("(syntax)", f"not valid TOML: {exc}", line=int(m.group(1)) if m else None)],
                            str(p)) from None
    except RecursionError:
        raise CaseFileError([Problem("(syntax)", "not valid TOML here: arrays or tables nested too deeply")],
                            str(p)) from None


def _table_of(pr: ProblemCollector, data: dict, key: str, what: str) -> dict:
    """``data[key]`` when it is a table (empty when missing); a problem and an empty table otherwise."""
    t = data.get(key)
    if t is None:
        return {}
    if not isinstance(t, dict):
        pr.add(key, f"must be a table ([{key}]: {what}), got {short_value(t)}", t)
        return {}
    return t


def _whole(pr: ProblemCollector, path: str, v, low: int, high: int):
    """``v`` if a whole number within [low, high]; a problem and None otherwise."""
    if isinstance(v, bool) or not isinstance(v, int):
        pr.add(path, f"must be a whole number, got {short_value(v)}", v)
        return None
    if not low <= v <= high:
        pr.add(path, f"must be within [{low:,}, {high:,}], got {v:,}", v)
        return None
    return v


def _check_variable(name: str, case) -> None:
    """A sweep or goal variable name that the case can change (ValueError naming the allowed ones)."""
    from lowgmap.physics.studies.design_space import check_key

    check_key(name, case)


def fluid_spec(doc) -> dict:
    """The case file's [fluid] table as keyword arguments (SI) of
    :func:`lowgmap.physics.properties.fluids.make_fluid_pair`: what a design that changes the fluid starts from."""
    t = doc.data.get("fluid", {})
    t = t.unwrap() if hasattr(t, "unwrap") else dict(t)
    f = doc.case.fluid
    spec = {"liquid": t.get("liquid", f.liquid), "temperature": f.temperature}
    if "pressure" in t:
        spec["pressure"] = to_si(t["pressure"], "pressure", "fluid.pressure")
    if t.get("gas") is not None:
        spec["gas"] = t["gas"]
    for opt in ("liquid_source", "gas_model"):
        if opt in t:
            spec[opt] = t[opt]
    kinds = {"rho_l": "density", "mu_l": "viscosity", "sigma": "surface_tension", "rho_g": "density",
             "mu_g": "viscosity"}
    ov = {k: to_si(v, kinds[k], f"fluid.overrides.{k}") for k, v in (t.get("overrides") or {}).items() if k in kinds}
    if ov:
        spec["overrides"] = ov
    return spec


# ----------------------------------------------------------------------------------------------- sweep file
@dataclass
class SweepPlan:
    """A SWEEP file read and converted: the designs (SI) and how to show them."""

    designs: list
    variables: list                 # names in file order
    kinds: dict                     # name -> quantity kind
    units: dict                     # name -> display unit
    spacing: dict                   # name -> "linear" | "log" | "list"
    regime: str | None = None
    required_margin: float | None = None
    envelope: tuple | None = None
    envelope_units: tuple = ("mL/min", "mL/min")
    mc_samples: int = 0
    seed: int = 0
    method: str = "auto"
    chunk_size: int | None = None
    source: str = "sweep"
    notes: list = field(default_factory=list)


def read_sweep(path, doc) -> SweepPlan:
    """Read a SWEEP file for the case document ``doc``; every problem is reported at once."""
    data, source, text = _load_toml(path, "sweep")
    return loads_sweep(data, doc, source=source, text=text)


def loads_sweep(data: dict, doc, source: str = "sweep", *, text: str = "") -> SweepPlan:
    """A parsed SWEEP document (dict) -> :class:`SweepPlan`.

    ``text`` (the file's text, optional) gives the problems their line numbers.
    """
    from lowgmap.physics.studies.design_space import MAX_DESIGNS, MAX_VALUES, grid, zipped
    from lowgmap.physics.studies.sweep import MAX_MC_SAMPLES

    pr = ProblemCollector(line_index(text) if text else {}, source=source)
    if not isinstance(data, dict):
        raise CaseFileError([Problem("(file)", "a sweep file must be a TOML document")], source)
    pr.unknown_keys(data, "", {"sweep", "envelope", "monte_carlo", "variables", "schema_version", "invented",
                          "description", "title"})
    opts = _table_of(pr, data, "sweep", "combine, regime, required_margin, method, chunk_size")
    pr.unknown_keys(opts, "sweep", {"combine", "regime", "required_margin", "method", "chunk_size"})
    combine = opts.get("combine", "grid")
    if not isinstance(combine, str) or combine not in ("grid", "paired"):
        pr.add("sweep.combine", f"must be 'grid' or 'paired', got {short_value(combine)}", combine)
        combine = "grid"
    fluid = doc.case.fluid
    values: dict = {}
    kinds, units, spacing = {}, {}, {}
    variables = data.get("variables", [])
    if not isinstance(variables, list) or not variables:
        pr.add("variables", "missing: at least one [[variables]] table (name and values, or from/to/steps)")
        variables = []
    elif len(variables) > _MAX_ENTRIES:
        pr.add("variables", f"lists {len(variables)} variables; a sweep varies at most {_MAX_ENTRIES}")
        variables = []
    for i, v in enumerate(variables):
        path = f"variables[{i}]"
        if not isinstance(v, dict) or not isinstance(v.get("name"), str) or len(v["name"]) > 200:
            pr.add(f"{path}.name", "each [[variables]] entry needs a name", v)
            continue
        pr.unknown_keys(v, path, {"name", "values", "from", "to", "steps", "spacing", "unit"})
        name = v["name"]
        if name in values:
            pr.add(f"{path}.name", f"variable {name!r} is listed twice", name)
            continue
        try:
            _check_variable(name, doc.case)
        except ValueError as exc:
            pr.add(f"{path}.name", str(exc), name)
            continue
        kind = variable_kind(name)
        kinds[name] = kind
        if "values" in v:
            raw = v["values"]
            if not isinstance(raw, list) or not raw:
                pr.add(f"{path}.values", "must be a non-empty list of values with units", raw)
                continue
            if len(raw) > MAX_VALUES:
                pr.add(f"{path}.values", f"lists {len(raw):,} values; at most {MAX_VALUES:,} per variable")
                continue
            got = [pr.run(f"{path}.values[{j}]", lambda x=x, j=j: _si(x, kind, f"{path}.values[{j}]", fluid=fluid), x)
                   for j, x in enumerate(raw)]
            if any(g is None for g in got):
                continue
            values[name] = got
            spacing[name] = "list"
            first = raw[0]
        else:
            missing = [k for k in ("from", "to", "steps") if k not in v]
            if missing:
                pr.add(path, f"give values = [...] or from, to and steps (missing {', '.join(missing)})")
                continue
            if kind == "name":
                pr.add(path, "fluid names need values = [...]")
                continue
            a = pr.run(f"{path}.from", lambda: _si(v["from"], kind, f"{path}.from", fluid=fluid), v["from"])
            b = pr.run(f"{path}.to", lambda: _si(v["to"], kind, f"{path}.to", fluid=fluid), v["to"])
            n = v["steps"]
            if isinstance(n, bool) or not isinstance(n, int) or n < 1:
                pr.add(f"{path}.steps", f"must be a whole number >= 1, got {short_value(n)}", n)
                continue
            if n > MAX_VALUES:                         # before any value is made
                pr.add(f"{path}.steps", f"must be at most {MAX_VALUES:,} per variable, got {n:,}", n)
                continue
            sp = v.get("spacing", "linear")
            if not isinstance(sp, str) or sp not in ("linear", "log"):
                pr.add(f"{path}.spacing", f"must be 'linear' or 'log', got {short_value(sp)}", sp)
                continue
            if a is None or b is None:
                continue
            if sp == "log" and not (a > 0 and b > 0):
                pr.add(f"{path}.spacing", "log spacing needs positive from and to", sp)
                continue
            arr = np.geomspace(a, b, n) if sp == "log" else np.linspace(a, b, n)
            values[name] = [float(x) for x in arr]
            spacing[name] = sp
            first = v["from"]
        unit = v.get("unit")
        if unit is not None and (not isinstance(unit, str) or len(unit) > MAX_QUANTITY_CHARS):
            pr.add(f"{path}.unit", f"must be a unit as text, got {short_value(unit)}", unit)
            unit = None
        if unit is not None:
            ok = pr.run(f"{path}.unit", lambda: to_display(1.0, kind, unit), unit)
            if ok is None:
                unit = None
        units[name] = unit or unit_of_text(first, kind)
    required = doc.settings.required_margin
    if "required_margin" in opts:
        required = pr.run("sweep.required_margin",
                          lambda: to_si(opts["required_margin"], "dimensionless", "sweep.required_margin"),
                          opts["required_margin"])
        if required is not None and not 0 <= required < 1:
            pr.add("sweep.required_margin", f"must be within [0, 1) (e.g. \"25 %\"), got {required:g}")
    regime = opts.get("regime", doc.settings.intended_regime)
    if regime is not None and (not isinstance(regime, str) or len(regime) > 200):
        pr.add("sweep.regime", "must be a regime name", regime)
        regime = None
    method = opts.get("method", "auto")
    if not isinstance(method, str) or method not in ("auto", "full"):
        pr.add("sweep.method", f"must be 'auto' or 'full', got {short_value(method)}", method)
        method = "auto"
    chunk = opts.get("chunk_size")
    if chunk is not None:
        chunk = _whole(pr, "sweep.chunk_size", chunk, 1, MAX_DESIGNS)
    envelope, env_units = _read_envelope(pr, data.get("envelope"), "envelope", fluid, doc)
    mc = _table_of(pr, data, "monte_carlo", "samples, seed")
    pr.unknown_keys(mc, "monte_carlo", {"samples", "seed"})
    samples = mc.get("samples", 0)
    if isinstance(samples, bool) or not isinstance(samples, int) or samples < 0 or samples == 1:
        pr.add("monte_carlo.samples", f"must be 0 or a whole number >= 2, got {short_value(samples)}", samples)
        samples = 0
    elif samples > MAX_MC_SAMPLES:
        pr.add("monte_carlo.samples", f"must be at most {MAX_MC_SAMPLES:,} per design, got {samples:,}", samples)
        samples = 0
    seed = mc.get("seed", 0)
    if isinstance(seed, bool) or not isinstance(seed, int) or not 0 <= seed < 2 ** 63:
        pr.add("monte_carlo.seed", f"must be a whole number within [0, 2^63), got {short_value(seed)}", seed)
        seed = 0
    if samples and not doc.uncertainties:
        pr.add("monte_carlo.samples", "the case lists no uncertainties ([operating_point.uncertainty])")
    designs = []
    if values and not pr.problems:
        n = len(next(iter(values.values()))) if combine == "paired" else math.prod(len(x) for x in values.values())
        if n > MAX_DESIGNS:                              # before the designs are made
            how = "paired values" if combine == "paired" else " x ".join(f"{len(x):,}" for x in values.values())
            pr.add("variables", f"{n:,} designs ({how}) is more than {MAX_DESIGNS:,}, the most one sweep "
                                f"evaluates; use fewer steps or split the sweep")
        elif combine == "paired":
            designs = pr.run("variables", lambda: zipped(values)) or []
        else:
            designs = pr.run("variables", lambda: grid(values)) or []
    pr.raise_if_any()
    return SweepPlan(designs, list(values), kinds, units, spacing, regime, required, envelope, env_units,
                     int(samples), int(seed), method, chunk, source)


def _read_envelope(pr: ProblemCollector, t, path: str, fluid, doc):
    if t is None:
        return None, (doc.settings.liquid_flow_unit, doc.settings.gas_flow_unit)
    if not isinstance(t, dict):
        pr.add(path, "must be a table with liquid_flow and gas_flow ranges", t)
        return None, (doc.settings.liquid_flow_unit, doc.settings.gas_flow_unit)
    pr.unknown_keys(t, path, {"liquid_flow", "gas_flow"})
    rng, units = [], []
    for key, gas in (("liquid_flow", False), ("gas_flow", True)):
        v = t.get(key)
        if not (isinstance(v, list) and len(v) == 2):
            pr.add(f"{path}.{key}", "must be a range [low, high] with units", v)
            rng.append(None)
            units.append("")
            continue
        lo = pr.run(f"{path}.{key}[0]", lambda: _envelope_flow(v[0], f"{path}.{key}[0]", gas, fluid), v[0])
        hi = pr.run(f"{path}.{key}[1]", lambda: _envelope_flow(v[1], f"{path}.{key}[1]", gas, fluid), v[1])
        if lo is not None and hi is not None and not 0 < lo <= hi:
            pr.add(f"{path}.{key}", f"must be increasing positive flows, got {v!r}", v)
            lo = None
        rng.append((lo, hi) if lo is not None and hi is not None else None)
        u = unit_of_text(v[0], "flow")
        if u.lower() in ("sccm", "slpm", "slm", "sccs"):       # shown in the case's unit (needs no p, T)
            u = doc.settings.liquid_flow_unit if key == "liquid_flow" else doc.settings.gas_flow_unit
        units.append(u)
    env = tuple(rng) if all(r is not None for r in rng) else None
    return env, tuple(units)


def _envelope_flow(value, path: str, gas: bool, fluid) -> float:
    from lowgmap.app.files.casefile import check_bounds

    return check_bounds("flow", parse_flow(value, path, gas=gas, pressure=fluid.pressure,
                                           temperature=fluid.temperature), path)


# ----------------------------------------------------------------------------------------------- goal file
def read_goal(path, doc):
    """Read a GOAL file: (lowgmap.physics.studies.design.DesignGoal, display info dict); all problems at once."""
    data, source, text = _load_toml(path, "goal")
    return loads_goal(data, doc, source=source, text=text)


def loads_goal(data: dict, doc, source: str = "goal", *, text: str = ""):
    """A parsed GOAL document (dict) -> (DesignGoal, info) with ``info`` = units, seed, method.

    ``text`` (the file's text, optional) gives the problems their line numbers.
    """
    from lowgmap.physics.studies.design import QUANTITIES, DesignConstraint, DesignGoal, DesignVariable

    from lowgmap.physics.studies.design import (MAX_EVALUATIONS, MAX_FLUIDS, MAX_SCREEN, MAX_STARTS,
                                                MAX_VARIABLES)

    pr = ProblemCollector(line_index(text) if text else {}, source=source)
    if not isinstance(data, dict):
        raise CaseFileError([Problem("(file)", "a goal file must be a TOML document")], source)
    pr.unknown_keys(data, "", {"goal", "variables", "constraints", "schema_version", "invented", "description",
                               "title"})
    g = data.get("goal")
    if not isinstance(g, dict):
        pr.add("goal", "missing table [goal] (the envelope, regime and required margin)", g)
        g = {}
    pr.unknown_keys(g, "goal", {"liquid_flow", "gas_flow", "regime", "required_margin", "fluids", "starts", "screen",
                           "max_evaluations", "seed", "method"})
    fluid = doc.case.fluid
    env, env_units = _read_envelope(pr, {k: g.get(k) for k in ("liquid_flow", "gas_flow")}, "goal", fluid, doc)
    required = doc.settings.required_margin
    if "required_margin" in g:
        required = pr.run("goal.required_margin", lambda: to_si(g["required_margin"], "dimensionless",
                                                                "goal.required_margin"), g["required_margin"])
        if required is not None and not 0 <= required < 1:
            pr.add("goal.required_margin", f"must be within [0, 1) (e.g. \"25 %\"), got {required:g}")
            required = None
    regime = g.get("regime", doc.settings.intended_regime)
    if regime is not None and (not isinstance(regime, str) or len(regime) > 200):
        pr.add("goal.regime", "must be a regime name", regime)
        regime = None
    fluids = []
    raw_fluids = g.get("fluids", []) or []
    if not isinstance(raw_fluids, list):
        pr.add("goal.fluids", "must be a list of liquid names or tables {liquid, gas, temperature, pressure}",
               raw_fluids)
        raw_fluids = []
    elif len(raw_fluids) > MAX_FLUIDS:
        pr.add("goal.fluids", f"lists {len(raw_fluids)} fluids; at most {MAX_FLUIDS}")
        raw_fluids = []
    for i, f in enumerate(raw_fluids):
        p = f"goal.fluids[{i}]"
        if isinstance(f, str):
            name = pr.run(p, lambda f=f: _si(f, "name", p), f)
            if name is not None:
                fluids.append({"liquid": name})
        elif isinstance(f, dict):
            pr.unknown_keys(f, p, {"liquid", "gas", "temperature", "pressure"})
            opt = {}
            for k in ("liquid", "gas"):
                if k in f:
                    name = pr.run(f"{p}.{k}", lambda k=k: _si(f[k], "name", f"{p}.{k}"), f[k])
                    if name is not None:
                        opt[k] = name
            for k, kind in (("temperature", "temperature"), ("pressure", "pressure")):
                if k in f:
                    val = pr.run(f"{p}.{k}", lambda k=k, kind=kind: _si(f[k], kind, f"{p}.{k}"), f[k])
                    if val is not None:
                        opt[k] = val
            if opt:
                fluids.append(opt)
        else:
            pr.add(p, "must be a liquid name or a table {liquid, gas, temperature, pressure}", f)
    settings = {}
    for key, low, high in (("starts", 1, MAX_STARTS), ("screen", 0, MAX_SCREEN),
                           ("max_evaluations", 1, MAX_EVALUATIONS), ("seed", 0, 2 ** 63 - 1)):
        if key in g:
            v = _whole(pr, f"goal.{key}", g[key], low, high)
            if v is not None:
                settings[key] = v
    method = g.get("method", "auto")
    if not isinstance(method, str) or method not in ("auto", "full"):
        pr.add("goal.method", f"must be 'auto' or 'full', got {short_value(method)}", method)
        method = "auto"
    variables, units, kinds = [], {}, {}
    raw_vars = data.get("variables", [])
    if not isinstance(raw_vars, list) or not raw_vars:
        pr.add("variables", "missing: at least one [[variables]] table (name, low, high)")
        raw_vars = []
    elif len(raw_vars) > MAX_VARIABLES:
        pr.add("variables", f"lists {len(raw_vars)} variables; a design goal has at most {MAX_VARIABLES}")
        raw_vars = []
    for i, v in enumerate(raw_vars):
        path = f"variables[{i}]"
        if not isinstance(v, dict) or not isinstance(v.get("name"), str) or len(v["name"]) > 200:
            pr.add(f"{path}.name", "each [[variables]] entry needs a name", v)
            continue
        pr.unknown_keys(v, path, {"name", "low", "high", "scale", "unit"})
        name = v["name"]
        try:
            _check_variable(name, doc.case)
        except ValueError as exc:
            pr.add(f"{path}.name", str(exc), name)
            continue
        kind = variable_kind(name)
        if kind == "name":
            pr.add(f"{path}.name", "fluids are not variables here: list them in [goal] fluids", name)
            continue
        lo = pr.run(f"{path}.low", lambda: _si(v["low"], kind, f"{path}.low", fluid=fluid), v.get("low")) \
            if "low" in v else pr.add(f"{path}.low", "missing")
        hi = pr.run(f"{path}.high", lambda: _si(v["high"], kind, f"{path}.high", fluid=fluid), v.get("high")) \
            if "high" in v else pr.add(f"{path}.high", "missing")
        if lo is None or hi is None:
            continue
        scale = v.get("scale", "linear")
        if not isinstance(scale, str) or scale not in ("linear", "log"):
            pr.add(f"{path}.scale", f"must be 'linear' or 'log', got {short_value(scale)}", scale)
            continue
        unit = v.get("unit")
        if unit is not None:
            if not isinstance(unit, str) or len(unit) > MAX_QUANTITY_CHARS:
                pr.add(f"{path}.unit", f"must be a unit as text, got {short_value(unit)}", unit)
                continue
            if pr.run(f"{path}.unit", lambda unit=unit: to_display(1.0, kind, unit), unit) is None:
                continue
        dv = pr.run(path, lambda: DesignVariable(name, lo, hi, scale), v)
        if dv is not None:
            variables.append(dv)
            kinds[name] = kind
            units[name] = unit or unit_of_text(v["low"], kind)
    constraints = []
    raw_constraints = data.get("constraints", []) or []
    if not isinstance(raw_constraints, list):
        pr.add("constraints", "must be an array of tables ([[constraints]])", raw_constraints)
        raw_constraints = []
    elif len(raw_constraints) > _MAX_ENTRIES:
        pr.add("constraints", f"lists {len(raw_constraints)} constraints; at most {_MAX_ENTRIES}")
        raw_constraints = []
    for i, c in enumerate(raw_constraints):
        path = f"constraints[{i}]"
        if not isinstance(c, dict) or not isinstance(c.get("quantity"), str) or len(c["quantity"]) > 200:
            pr.add(f"{path}.quantity", "each [[constraints]] entry needs a quantity", c)
            continue
        pr.unknown_keys(c, path, {"quantity", "max", "min"})
        q = c["quantity"]
        if q not in QUANTITIES and not q.startswith("section."):
            pr.add(f"{path}.quantity", f"unknown quantity {q!r}; known: {', '.join(QUANTITIES)}, section.<field>", q)
            continue
        kind = _QUANTITY_KINDS.get(q, variable_kind(q))
        lims = {}
        for key in ("max", "min"):
            if key in c:
                lims[key] = pr.run(f"{path}.{key}", lambda key=key: _si(c[key], kind, f"{path}.{key}"), c[key])
        if not lims:
            pr.add(path, "give max and/or min")
            continue
        if any(x is None for x in lims.values()):
            continue
        dc = pr.run(path, lambda: DesignConstraint(q, upper=lims.get("max"), lower=lims.get("min")), c)
        if dc is not None:
            constraints.append(dc)
            units[f"constraint:{q}"] = unit_of_text(c.get("max", c.get("min")), kind)
            kinds[f"constraint:{q}"] = kind
    goal = None
    if not pr.problems:
        if env is None:
            pr.add("goal", "missing the envelope: liquid_flow and gas_flow ranges")
        else:
            goal = pr.run("goal", lambda: DesignGoal(env[0], env[1], tuple(variables), regime=regime,
                                                     required_margin=required if required is not None else 0.0,
                                                     constraints=tuple(constraints), fluids=tuple(fluids),
                                                     starts=settings.get("starts", 3),
                                                     screen=settings.get("screen", 0),
                                                     max_evaluations=settings.get("max_evaluations", 80)))
    pr.raise_if_any()
    info = {"units": units, "kinds": kinds, "seed": settings.get("seed", 0), "method": method,
            "envelope_units": env_units, "source": source}
    return goal, info


