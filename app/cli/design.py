"""`lowgmap sweep` (design sweeps) and `lowgmap design` (inverse design), with their file formats.

A SWEEP file lists the case inputs to vary (values with units) and what to compute; a GOAL file
states an operating envelope, the wanted regime, a required margin and the design inputs that may
change. Both are TOML, read here (units converted with :mod:`lowgmap.app.files.units`); the physics receives SI
values (:func:`lowgmap.physics.studies.sweep.sweep`, :func:`lowgmap.physics.studies.design.optimize_design`).

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
"""
from __future__ import annotations

import contextlib
import io
import math
import sys
import time
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from lowgmap.app import CAUTION
from lowgmap.app.files.casefile import CaseFileError, Problem
from lowgmap.app.cli import CliError, _clean, _emit
from lowgmap.app.files.units import UnitError, convert, parse_flow, to_si, ureg

__all__ = ["register", "SweepPlan", "read_sweep", "loads_sweep", "read_goal", "loads_goal", "fluid_spec",
           "variable_kind", "margin_map_figure", "margin_map_png", "design_chart_bytes", "cluster", "to_display",
           "display_table"]

#: Quantity kind (lowgmap.app.files.units) of each sweep variable; "name" for fluid names.
_KINDS = {"half_angle": "angle", "contact_angle": "angle", "length": "length", "size": "length",
          "residual_acceleration": "acceleration", "temperature": "temperature", "pressure": "pressure",
          "surface_tension": "surface_tension", "liquid_density": "density", "liquid_viscosity": "viscosity",
          "gas_density": "density", "gas_viscosity": "viscosity", "liquid_flow": "flow", "gas_flow": "flow",
          "liquid": "name", "gas": "name"}
_DEFAULT_UNITS = {"angle": "deg", "length": "mm", "acceleration": "m/s^2", "temperature": "degC",
                  "pressure": "kPa", "surface_tension": "mN/m", "density": "kg/m^3", "viscosity": "mPa*s",
                  "flow": "mL/min", "dimensionless": "-", "area": "mm^2", "volume": "mL", "name": ""}
#: Quantity kind of each constrained quantity of lowgmap.physics.studies.design.QUANTITIES.
_QUANTITY_KINDS = {"length": "length", "hydraulic_diameter": "length", "flow_area": "area", "volume": "volume",
                   "wetted_perimeter": "length", "half_angle": "angle", "contact_angle": "angle",
                   "residual_acceleration": "acceleration"}
_MAX_DESIGNS = 1_000_000


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
    if kind == "name":
        if not isinstance(value, str) or not value.strip():
            raise UnitError(f"{path}: must be a fluid name, got {value!r}")
        return value.strip()
    if kind == "volume":
        try:
            q = ureg.Quantity(value) if isinstance(value, str) else None
            if q is None or q.dimensionality != ureg.Quantity(1, "m^3").dimensionality:
                raise ValueError
            return float(q.to("m^3").magnitude)
        except Exception:
            raise UnitError(f"{path}: expected a volume such as '50 mL', got {value!r}") from None
    if kind == "flow":
        f = fluid
        return parse_flow(value, path, gas=True, pressure=getattr(f, "pressure", None),
                          temperature=getattr(f, "temperature", None))
    return to_si(value, kind, path)


def _unit_of_text(value, kind: str) -> str:
    """The unit written with a value ("4 deg" -> "deg"); the default unit of the kind otherwise."""
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
    return _DEFAULT_UNITS.get(kind, "")


def to_display(value_si, kind: str, unit: str):
    """SI value(s) in ``unit`` (standard gas units, percent and names handled)."""
    if kind in ("name",) or unit in ("", "-"):
        return value_si
    if kind == "flow" and unit.lower() in ("sccm", "slpm", "slm", "sccs"):
        return value_si                               # shown in m^3/s elsewhere; a standard unit needs p, T
    if kind == "volume":
        return ureg.Quantity(np.asarray(value_si, dtype=float), "m^3").to(unit).magnitude
    if kind == "dimensionless":
        return ureg.Quantity(np.asarray(value_si, dtype=float), "dimensionless").to(unit).magnitude
    return convert(np.asarray(value_si, dtype=float), kind, unit)


def _load_toml(path, what: str):
    import tomllib

    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise CaseFileError([Problem("(file)", f"no such {what} file: {p}")], str(p)) from None
    try:
        return tomllib.loads(text), str(p)
    except tomllib.TOMLDecodeError as exc:
        raise CaseFileError([Problem("(syntax)", f"not valid TOML: {exc}")], str(p)) from None


class _Problems:
    def __init__(self, source: str):
        self.items: list[Problem] = []
        self.source = source

    def add(self, path: str, message: str, value=None):
        self.items.append(Problem(path, message, value))

    def run(self, path: str, fn, value=None):
        try:
            return fn()
        except (UnitError, ValueError, TypeError) as exc:
            msg = str(exc)
            if msg.startswith(path + ": "):
                msg = msg[len(path) + 2:]
            self.add(path, msg, value)
            return None

    def raise_if_any(self):
        if self.items:
            raise CaseFileError(self.items, self.source)


def _known(pr: _Problems, table: dict, path: str, allowed) -> None:
    for key in table:
        if key not in allowed:
            pr.add(f"{path}.{key}" if path else key, f"unknown key; allowed here: {', '.join(sorted(allowed))}",
                   table[key])


def fluid_spec(doc) -> dict:
    """The case file's [fluid] table as keyword arguments of :func:`lowgmap.physics.properties.fluids.make_fluid_pair` (SI)."""
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
    data, source = _load_toml(path, "sweep")
    return loads_sweep(data, doc, source=source)


def loads_sweep(data: dict, doc, source: str = "sweep") -> SweepPlan:
    """A parsed SWEEP document (dict) -> :class:`SweepPlan`."""
    from lowgmap.physics.studies.sweep import grid, zipped

    pr = _Problems(source)
    _known(pr, data, "", {"sweep", "envelope", "monte_carlo", "variables", "schema_version", "invented",
                          "description", "title"})
    opts = data.get("sweep", {}) or {}
    _known(pr, opts, "sweep", {"combine", "regime", "required_margin", "method", "chunk_size"})
    combine = opts.get("combine", "grid")
    if combine not in ("grid", "paired"):
        pr.add("sweep.combine", f"must be 'grid' or 'paired', got {combine!r}", combine)
    fluid = doc.case.fluid
    values: dict = {}
    kinds, units, spacing = {}, {}, {}
    variables = data.get("variables", [])
    if not isinstance(variables, list) or not variables:
        pr.add("variables", "missing: at least one [[variables]] table (name and values, or from/to/steps)")
        variables = []
    for i, v in enumerate(variables):
        path = f"variables[{i}]"
        if not isinstance(v, dict) or not isinstance(v.get("name"), str):
            pr.add(f"{path}.name", "each [[variables]] entry needs a name", v)
            continue
        _known(pr, v, path, {"name", "values", "from", "to", "steps", "spacing", "unit"})
        name = v["name"]
        if name in values:
            pr.add(f"{path}.name", f"variable {name!r} is listed twice", name)
            continue
        try:
            from lowgmap.physics.studies.sweep import _check_key

            _check_key(name, doc.case)
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
                pr.add(f"{path}.steps", f"must be a whole number >= 1, got {n!r}", n)
                continue
            sp = v.get("spacing", "linear")
            if sp not in ("linear", "log"):
                pr.add(f"{path}.spacing", f"must be 'linear' or 'log', got {sp!r}", sp)
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
        if unit is not None:
            ok = pr.run(f"{path}.unit", lambda: to_display(1.0, kind, unit), unit)
            if ok is None:
                unit = None
        units[name] = unit or _unit_of_text(first, kind)
    required = doc.settings.required_margin
    if "required_margin" in opts:
        required = pr.run("sweep.required_margin",
                          lambda: to_si(opts["required_margin"], "dimensionless", "sweep.required_margin"),
                          opts["required_margin"])
        if required is not None and not 0 <= required < 1:
            pr.add("sweep.required_margin", f"must be within [0, 1) (e.g. \"25 %\"), got {required:g}")
    regime = opts.get("regime", doc.settings.intended_regime)
    if regime is not None and not isinstance(regime, str):
        pr.add("sweep.regime", "must be a regime name", regime)
    method = opts.get("method", "auto")
    if method not in ("auto", "full"):
        pr.add("sweep.method", f"must be 'auto' or 'full', got {method!r}", method)
    chunk = opts.get("chunk_size")
    if chunk is not None and (isinstance(chunk, bool) or not isinstance(chunk, int) or chunk < 1):
        pr.add("sweep.chunk_size", f"must be a whole number >= 1, got {chunk!r}", chunk)
    envelope, env_units = _read_envelope(pr, data.get("envelope"), "envelope", fluid, doc)
    mc = data.get("monte_carlo") or {}
    _known(pr, mc, "monte_carlo", {"samples", "seed"})
    samples = mc.get("samples", 0)
    if isinstance(samples, bool) or not isinstance(samples, int) or samples < 0 or samples == 1:
        pr.add("monte_carlo.samples", f"must be 0 or a whole number >= 2, got {samples!r}", samples)
        samples = 0
    seed = mc.get("seed", 0)
    if isinstance(seed, bool) or not isinstance(seed, int):
        pr.add("monte_carlo.seed", f"must be a whole number, got {seed!r}", seed)
        seed = 0
    if samples and not doc.uncertainties:
        pr.add("monte_carlo.samples", "the case lists no uncertainties ([operating_point.uncertainty])")
    designs = []
    if values and not pr.items:
        if combine == "paired":
            designs = pr.run("variables", lambda: zipped(values)) or []
        else:
            n = math.prod(len(x) for x in values.values())
            if n > _MAX_DESIGNS:
                pr.add("variables", f"{n} designs is more than {_MAX_DESIGNS}; use fewer steps")
            else:
                designs = grid(values)
    pr.raise_if_any()
    return SweepPlan(designs, list(values), kinds, units, spacing, regime, required, envelope, env_units,
                     int(samples), int(seed), method, chunk, source)


def _read_envelope(pr: _Problems, t, path: str, fluid, doc):
    if t is None:
        return None, (doc.settings.liquid_flow_unit, doc.settings.gas_flow_unit)
    if not isinstance(t, dict):
        pr.add(path, "must be a table with liquid_flow and gas_flow ranges", t)
        return None, ("", "")
    _known(pr, t, path, {"liquid_flow", "gas_flow"})
    rng, units = [], []
    for key, gas in (("liquid_flow", False), ("gas_flow", True)):
        v = t.get(key)
        if not (isinstance(v, list) and len(v) == 2):
            pr.add(f"{path}.{key}", "must be a range [low, high] with units", v)
            rng.append(None)
            units.append("")
            continue
        lo = pr.run(f"{path}.{key}[0]", lambda: parse_flow(v[0], f"{path}.{key}[0]", gas=gas, pressure=fluid.pressure,
                                                            temperature=fluid.temperature), v[0])
        hi = pr.run(f"{path}.{key}[1]", lambda: parse_flow(v[1], f"{path}.{key}[1]", gas=gas, pressure=fluid.pressure,
                                                            temperature=fluid.temperature), v[1])
        if lo is not None and hi is not None and not 0 < lo <= hi:
            pr.add(f"{path}.{key}", f"must be increasing positive flows, got {v!r}", v)
            lo = None
        rng.append((lo, hi) if lo is not None and hi is not None else None)
        u = _unit_of_text(v[0], "flow")
        if u.lower() in ("sccm", "slpm", "slm", "sccs"):       # shown in the case's unit (needs no p, T)
            u = doc.settings.liquid_flow_unit if key == "liquid_flow" else doc.settings.gas_flow_unit
        units.append(u)
    env = tuple(rng) if all(r is not None for r in rng) else None
    return env, tuple(units)


# ----------------------------------------------------------------------------------------------- goal file
def read_goal(path, doc):
    """Read a GOAL file: (lowgmap.physics.studies.design.DesignGoal, display info dict); all problems at once."""
    data, source = _load_toml(path, "goal")
    return loads_goal(data, doc, source=source)


def loads_goal(data: dict, doc, source: str = "goal"):
    """A parsed GOAL document (dict) -> (DesignGoal, info) with ``info`` = units, seed, method."""
    from lowgmap.physics.studies.design import QUANTITIES, DesignConstraint, DesignGoal, DesignVariable

    pr = _Problems(source)
    _known(pr, data, "", {"goal", "variables", "constraints", "schema_version", "invented", "description", "title"})
    g = data.get("goal")
    if not isinstance(g, dict):
        pr.add("goal", "missing table [goal] (the envelope, regime and required margin)")
        g = {}
    _known(pr, g, "goal", {"liquid_flow", "gas_flow", "regime", "required_margin", "fluids", "starts", "screen",
                           "max_evaluations", "seed", "method"})
    fluid = doc.case.fluid
    env, env_units = _read_envelope(pr, {k: g.get(k) for k in ("liquid_flow", "gas_flow")}, "goal", fluid, doc)
    required = doc.settings.required_margin
    if "required_margin" in g:
        required = pr.run("goal.required_margin", lambda: to_si(g["required_margin"], "dimensionless",
                                                                "goal.required_margin"), g["required_margin"])
    regime = g.get("regime", doc.settings.intended_regime)
    if regime is not None and not isinstance(regime, str):
        pr.add("goal.regime", "must be a regime name", regime)
    fluids = []
    for i, f in enumerate(g.get("fluids", []) or []):
        p = f"goal.fluids[{i}]"
        if isinstance(f, str):
            fluids.append({"liquid": f})
        elif isinstance(f, dict):
            _known(pr, f, p, {"liquid", "gas", "temperature", "pressure"})
            opt = {}
            for k in ("liquid", "gas"):
                if k in f:
                    opt[k] = f[k]
            for k, kind in (("temperature", "temperature"), ("pressure", "pressure")):
                if k in f:
                    val = pr.run(f"{p}.{k}", lambda k=k, kind=kind: to_si(f[k], kind, f"{p}.{k}"), f[k])
                    if val is not None:
                        opt[k] = val
            if opt:
                fluids.append(opt)
        else:
            pr.add(p, "must be a liquid name or a table {liquid, gas, temperature, pressure}", f)
    settings = {}
    for key in ("starts", "screen", "max_evaluations", "seed"):
        if key in g:
            v = g[key]
            if isinstance(v, bool) or not isinstance(v, int) or v < 0:
                pr.add(f"goal.{key}", f"must be a whole number, got {v!r}", v)
            else:
                settings[key] = v
    method = g.get("method", "auto")
    if method not in ("auto", "full"):
        pr.add("goal.method", f"must be 'auto' or 'full', got {method!r}", method)
    variables, units, kinds = [], {}, {}
    raw_vars = data.get("variables", [])
    if not isinstance(raw_vars, list) or not raw_vars:
        pr.add("variables", "missing: at least one [[variables]] table (name, low, high)")
        raw_vars = []
    for i, v in enumerate(raw_vars):
        path = f"variables[{i}]"
        if not isinstance(v, dict) or not isinstance(v.get("name"), str):
            pr.add(f"{path}.name", "each [[variables]] entry needs a name", v)
            continue
        _known(pr, v, path, {"name", "low", "high", "scale", "unit"})
        name = v["name"]
        try:
            from lowgmap.physics.studies.sweep import _check_key

            _check_key(name, doc.case)
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
        dv = pr.run(path, lambda: DesignVariable(name, lo, hi, v.get("scale", "linear")), v)
        if dv is not None:
            variables.append(dv)
            kinds[name] = kind
            units[name] = v.get("unit") or _unit_of_text(v["low"], kind)
    constraints = []
    for i, c in enumerate(data.get("constraints", []) or []):
        path = f"constraints[{i}]"
        if not isinstance(c, dict) or not isinstance(c.get("quantity"), str):
            pr.add(f"{path}.quantity", "each [[constraints]] entry needs a quantity", c)
            continue
        _known(pr, c, path, {"quantity", "max", "min"})
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
            units[f"constraint:{q}"] = _unit_of_text(c.get("max", c.get("min")), kind)
            kinds[f"constraint:{q}"] = kind
    goal = None
    if not pr.items:
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


# ----------------------------------------------------------------------------------------------- cluster
@contextlib.contextmanager
def cluster(workers: int | None = None, scheduler: str | None = None):
    """A dask client: a local cluster of ``workers`` processes, or the scheduler at ``scheduler``.

    Yields None when neither is given (in-process). The cluster and client are closed on exit.
    """
    if not workers and not scheduler:
        yield None
        return
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise CliError("--workers/--scheduler need dask.distributed: pip install 'lowgmap[cluster]'") from None
    if scheduler:
        with Client(scheduler, timeout="20s") as client:
            yield client
        return
    if isinstance(workers, bool) or int(workers) < 1:
        raise CliError(f"--workers must be >= 1, got {workers!r}")
    with LocalCluster(n_workers=int(workers), threads_per_worker=1, processes=True, dashboard_address=":0") as lc, \
            Client(lc) as client:
        yield client


class _Progress:
    """Progress on stderr: a rewritten line on a terminal, ten lines otherwise."""

    def __init__(self, what: str, stream=None):
        self.what = what
        self.stream = stream or sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.last = -1
        self.t0 = time.perf_counter()

    def __call__(self, done: int, total: int):
        pct = int(100 * done / max(total, 1))
        if self.tty:
            self.stream.write(f"\r{self.what}: {done}/{total} ({pct} %)")
            if done >= total:
                self.stream.write("\n")
            self.stream.flush()
        elif pct // 10 != self.last // 10 or done >= total:
            if done >= total and self.last >= 100:
                return
            self.last = pct
            self.stream.write(f"{self.what}: {done}/{total} ({pct} %)\n")


# ----------------------------------------------------------------------------------------------- output
def display_table(df, plan: SweepPlan):
    """The result table with the varied inputs in their display units and unit-labelled headers."""
    out = df.copy()
    rename = {}
    for name in plan.variables:
        kind, unit = plan.kinds[name], plan.units[name]
        if kind != "name":
            out[name] = to_display(out[name].to_numpy(dtype=float), kind, unit)
            rename[name] = f"{name} [{unit}]"
    for col in ("margin", "envelope_margin", "probability", "probability_std_error"):
        if col in out.columns:
            rename[col] = f"{col} [-]"
    out.attrs = dict(df.attrs)
    return out.rename(columns=rename)


def _write_table(table, path: Path) -> None:
    import os

    suffix = path.suffix.lower()
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.tmp")
    if suffix == ".csv":
        table.to_csv(tmp, index=False)
    elif suffix in (".parquet", ".pq"):
        try:
            table.to_parquet(tmp, index=False)
        except ImportError:
            raise CliError("writing Parquet needs pyarrow (pip install pyarrow); or write .csv") from None
    else:
        raise CliError(f"-o must end in .csv or .parquet, got {path.name!r}")
    os.replace(tmp, path)


def margin_map_figure(df, xvar: str, yvar: str | None, *, column: str = "margin", required: float | None = None,
                      kinds=None, units=None, log=(False, False), title: str = "", base=None):
    """Margin map over two design variables (filled contours, required-margin and zero lines).

    With ``yvar`` None a margin-versus-variable plot. Designs without a margin are hatched grey.
    Returns a matplotlib Figure (not attached to pyplot).
    """
    from matplotlib.figure import Figure

    kinds = kinds or {}
    units = units or {}

    def disp(name, v):
        k = kinds.get(name, "dimensionless")
        u = units.get(name, "")
        return np.asarray(to_display(np.asarray(v, dtype=float), k, u), dtype=float) if k != "name" else v

    def label(name):
        u = units.get(name, "")
        return f"{name.replace('_', ' ')}" + (f" [{u}]" if u and u != "-" else "")

    fig = Figure(figsize=(7.5, 5.6), layout="constrained")
    ax = fig.add_subplot()
    what = "worst-case margin over the envelope" if column == "envelope_margin" else "symmetric margin"
    if yvar is None:
        x = disp(xvar, df[xvar].to_numpy())
        m = df[column].to_numpy(dtype=float)
        order = np.argsort(x)
        ax.plot(x[order], 100 * m[order], "-o", color="#0072B2", label=what)
        if required is not None:
            ax.axhline(100 * required, color="black", linewidth=1.6, label=f"required ±{100 * required:.0f} %")
        ax.axhline(0.0, color="#444444", linewidth=1.0, linestyle="--", label="regime boundary reached")
        ax.set_xlabel(label(xvar))
        ax.set_ylabel(f"{what} [%]")
        if log[0]:
            ax.set_xscale("log")
        ax.legend(fontsize=8, loc="best")
    else:
        xs = np.unique(df[xvar].to_numpy(dtype=float))
        ys = np.unique(df[yvar].to_numpy(dtype=float))
        M = np.full((ys.size, xs.size), np.nan)
        ix = np.searchsorted(xs, df[xvar].to_numpy(dtype=float))
        iy = np.searchsorted(ys, df[yvar].to_numpy(dtype=float))
        M[iy, ix] = df[column].to_numpy(dtype=float)
        X, Y = np.meshgrid(disp(xvar, xs), disp(yvar, ys))
        P = 100 * M
        finite = np.isfinite(P)
        lim = max(1.0, float(np.nanmax(np.abs(P)))) if finite.any() else 100.0
        lim = 10.0 * math.ceil(lim / 10.0)
        levels = np.linspace(-lim, lim, 21)
        if finite.sum() >= 4 and xs.size >= 2 and ys.size >= 2:
            cs = ax.contourf(X, Y, np.where(finite, P, np.nan), levels=levels, cmap="RdBu", extend="both")
            cb = fig.colorbar(cs, ax=ax)
            cb.set_label(f"{what} [%] (negative: outside the wanted regime)")
            if required is not None and np.nanmin(P) < 100 * required < np.nanmax(P):
                c1 = ax.contour(X, Y, P, levels=[100 * required], colors="black", linewidths=2.0)
                ax.clabel(c1, fmt=lambda _v: f"required ±{100 * required:.0f} %", fontsize=8)
            if np.nanmin(P) < 0 < np.nanmax(P):
                c0 = ax.contour(X, Y, P, levels=[0.0], colors="#444444", linewidths=1.2, linestyles="dashed")
                ax.clabel(c0, fmt=lambda _v: "0 (boundary)", fontsize=8)
        ax.scatter(X[finite], Y[finite], s=6, color="#222222", zorder=3)
        if (~finite).any():
            ax.scatter(X[~finite], Y[~finite], s=40, marker="x", color="#888888", zorder=3,
                       label="no margin (design invalid)")
            ax.legend(fontsize=8, loc="best")
        if base is not None:
            bx, by = base
            if bx is not None and by is not None:
                ax.scatter(disp(xvar, [bx]), disp(yvar, [by]), marker="*", s=200, color="#D55E00",
                           edgecolor="black", zorder=4)
        ax.set_xlabel(label(xvar))
        ax.set_ylabel(label(yvar))
        if log[0]:
            ax.set_xscale("log")
        if log[1]:
            ax.set_yscale("log")
    ax.set_title(title or f"{what} by design", fontsize=11, loc="left")
    return fig


def margin_map_png(df, xvar, yvar, **kwargs) -> bytes:
    """:func:`margin_map_figure` as PNG bytes."""
    fig = margin_map_figure(df, xvar, yvar, **kwargs)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, metadata={"Software": "lowgmap"})
    return buf.getvalue()


def design_chart_bytes(doc, result, goal, fmt: str = "png") -> bytes:
    """The best design's regime chart with the envelope's corners marked (PNG/SVG/PDF bytes)."""
    from lowgmap.physics.chart.composition import Chart

    from lowgmap.app.outputs.chartview import chart_view
    from lowgmap.app.outputs.render import render_chart
    from lowgmap.app.outputs.report import case_rows, format_flow

    st = doc.settings
    best_doc = replace(doc, case=result.case)
    chart = Chart.build(result.case)
    view = chart_view(chart, axes="flow", log_axes=st.log_axes, ql_unit=st.liquid_flow_unit, qg_unit=st.gas_flow_unit)
    (a, b), (c, d) = goal.ql_range, goal.qg_range
    xs, ys = view.to_display(np.array([a, b, b, a]), np.array([c, c, d, d]))
    marks = [{"x": float(x), "y": float(y), "marker": "s", "colour": "#F0E442", "edge": "#000000", "size": 46}
             for x, y in zip(np.asarray(xs), np.asarray(ys))]
    rows = case_rows(best_doc, chart)
    rows.append(("envelope", f"Q_L {format_flow(a, st.liquid_flow_unit)} to {format_flow(b, st.liquid_flow_unit)}, "
                             f"Q_G {format_flow(c, st.gas_flow_unit)} to {format_flow(d, st.gas_flow_unit)} "
                             f"(yellow squares)"))
    rows.append(("worst-case margin", f"±{100 * result.margin:.1f} % in {result.regime}"
                                      + (f", limited by {', '.join(result.limiting)}" if result.limiting else "")
                                      + f"; required ±{100 * result.required_margin:.0f} %"))
    return render_chart(view, None, fmt=fmt, title=f"{doc.case.title}: best design", title_block=rows,
                        extra_points=marks)


# ----------------------------------------------------------------------------------------------- commands
def cmd_sweep(args) -> int:
    from lowgmap.physics.studies.sweep import sweep
    from lowgmap.physics.studies.uncertainty import Uncertainty

    from lowgmap.app.files.casefile import load_case

    doc = load_case(args.case)
    plan = read_sweep(args.sweep, doc)
    if args.workers and args.scheduler:
        raise CliError("give --workers or --scheduler, not both")
    progress = None if args.quiet else _Progress(f"sweep {Path(args.sweep).name}")
    uncs = [Uncertainty.of(u) for u in doc.uncertainties] if plan.mc_samples else ()
    t0 = time.perf_counter()
    with cluster(args.workers, args.scheduler) as client:
        df = sweep(doc.case, plan.designs, envelope=plan.envelope, regime=plan.regime,
                   required_margin=plan.required_margin, fluid_spec=fluid_spec(doc), uncertainties=uncs,
                   mc_samples=plan.mc_samples, seed=plan.seed, method=plan.method, client=client,
                   chunk_size=plan.chunk_size, progress=progress)
    elapsed = time.perf_counter() - t0
    backend = (f"dask scheduler {args.scheduler}" if args.scheduler else
               f"local dask cluster, {args.workers} workers" if args.workers else "in-process")
    table = display_table(df, plan)
    if args.output:
        _write_table(table, Path(args.output))
    if args.plot:
        _write_plot(df, plan, args.plot, doc)
    col = "envelope_margin" if plan.envelope is not None else "margin"
    ok = df[df["status"] == "ok"]
    best = ok.loc[ok[col].idxmax()] if len(ok) and ok[col].notna().any() else None
    summary = {"case": args.case, "sweep": args.sweep, "designs": int(len(df)), "valid": int(len(ok)),
               "backend": backend, "seconds": elapsed, "designs_per_second": len(df) / elapsed if elapsed else None,
               "required_margin": plan.required_margin, "regime": plan.regime,
               "meets_required": int(df["meets_required"].sum()) if "meets_required" in df else None,
               "output": args.output, "plot": args.plot, "units": {n: plan.units[n] for n in plan.variables},
               "best": None if best is None else {k: _plain(best[k]) for k in df.columns},
               "caution": CAUTION}
    if args.json:
        summary["rows"] = [{k: _plain(v) for k, v in r.items()} for r in df.to_dict(orient="records")]
    lines = [f"{doc.case.title}: {len(df)} designs ({len(ok)} valid), {backend}, {elapsed:.2f} s "
             f"({len(df) / max(elapsed, 1e-9):.0f} designs/s)"]
    if plan.required_margin is not None and "meets_required" in df:
        lines.append(f"  {int(df['meets_required'].sum())} meet the required margin "
                     f"±{100 * plan.required_margin:.0f} %" + (f" in {plan.regime}" if plan.regime else ""))
    if best is not None:
        desc = ", ".join(_fmt_value(best[n], plan.kinds[n], plan.units[n]) + f" {n}" for n in plan.variables)
        lines.append(f"  best: {desc} -> {col.replace('_', ' ')} ±{100 * best[col]:.1f} %"
                     + (f", limited by {best['envelope_limiting' if col == 'envelope_margin' else 'limiting']}"
                        if best['envelope_limiting' if col == 'envelope_margin' else 'limiting'] else ""))
    bad = df[df["status"] != "ok"]
    if len(bad):
        lines.append(f"  {len(bad)} designs could not be evaluated, e.g. design {int(bad.iloc[0]['design'])}: "
                     f"{bad.iloc[0]['status']}")
    lines.append("")
    lines.append(_text_table(table, 12))
    if args.output:
        lines.append(f"\nwrote {args.output}")
    if args.plot:
        lines.append(f"wrote {args.plot}")
    lines += ["", CAUTION]
    _emit(args, _clean(summary), "\n".join(lines))
    return 0


def _plain(v):
    if isinstance(v, (np.floating, float)):
        return float(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, np.bool_):
        return bool(v)
    return v


def _fmt_value(v, kind, unit) -> str:
    if kind == "name":
        return str(v)
    return f"{float(to_display(float(v), kind, unit)):.4g} {unit}".rstrip()


def _text_table(table, n: int) -> str:
    import pandas as pd

    show = table.drop(columns=[c for c in ("method",) if c in table.columns])
    if "status" in show.columns:
        show = show.assign(status=show["status"].astype(str).map(lambda t: t if len(t) <= 40 else t[:39] + "…"))
    with pd.option_context("display.max_columns", 30, "display.width", 160, "display.precision", 4):
        text = show.head(n).to_string(index=False)
    more = len(table) - n
    return text + (f"\n... {more} more rows (write them with -o FILE)" if more > 0 else "")


def _write_plot(df, plan: SweepPlan, target: str, doc) -> None:
    import os

    p = Path(target)
    if p.suffix.lower() not in (".png", ".svg", ".pdf"):
        raise CliError(f"--plot must end in .png, .svg or .pdf, got {target!r}")
    num = [n for n in plan.variables if plan.kinds[n] != "name"]
    if not num:
        raise CliError("--plot needs a numeric sweep variable")
    xvar = num[0]
    yvar = num[1] if len(num) > 1 else None
    col = "envelope_margin" if plan.envelope is not None else "margin"
    from lowgmap.physics.studies.design import nominal_design_value

    base = (nominal_design_value(doc.case, xvar), nominal_design_value(doc.case, yvar) if yvar else None)
    fig = margin_map_figure(df, xvar, yvar, column=col, required=plan.required_margin, kinds=plan.kinds,
                            units=plan.units, log=(plan.spacing.get(xvar) == "log",
                                                   plan.spacing.get(yvar) == "log" if yvar else False),
                            title=f"{doc.case.title}", base=base if yvar else None)
    p.parent.mkdir(parents=True, exist_ok=True)
    tmp = p.with_name(f".{p.name}.tmp")
    fig.savefig(tmp, format=p.suffix.lstrip(".").lower(), dpi=110)
    os.replace(tmp, p)


def cmd_design(args) -> int:
    from lowgmap.physics.studies.design import optimize_design

    from lowgmap.app.files.casefile import load_case

    doc = load_case(args.case)
    goal, info = read_goal(args.goal, doc)
    progress = None if args.quiet else _Progress(f"design {Path(args.goal).name}")
    t0 = time.perf_counter()
    res = optimize_design(doc.case, goal, fluid_spec=fluid_spec(doc), seed=info["seed"], method=info["method"],
                          progress=progress)
    elapsed = time.perf_counter() - t0
    if args.plot:
        p = Path(args.plot)
        fmt = p.suffix.lstrip(".").lower()
        if fmt not in ("png", "svg", "pdf"):
            raise CliError(f"--plot must end in .png, .svg or .pdf, got {args.plot!r}")
        import os

        data = design_chart_bytes(doc, res, goal, fmt)
        p.parent.mkdir(parents=True, exist_ok=True)
        tmp = p.with_name(f".{p.name}.tmp")
        tmp.write_bytes(data)
        os.replace(tmp, p)
    units, kinds = info["units"], info["kinds"]
    data = res.to_dict()
    data.update({"case": args.case, "goal": args.goal, "seconds": elapsed, "units": units,
                 "envelope_m3_s": {"ql": list(goal.ql_range), "qg": list(goal.qg_range)},
                 "constraints": [c.describe() for c in goal.constraints], "plot": args.plot, "caution": CAUTION})
    lu, gu = info["envelope_units"]
    (a, b), (c, d) = goal.ql_range, goal.qg_range
    lines = [f"{doc.case.title}: inverse design ({res.evaluations} evaluations, {elapsed:.1f} s)",
             f"  envelope: Q_L {_fmt_value(a, 'flow', lu)} to {_fmt_value(b, 'flow', lu)}, "
             f"Q_G {_fmt_value(c, 'flow', gu)} to {_fmt_value(d, 'flow', gu)}; wanted regime: {res.regime}",
             "  best design:"]
    for name, v in res.values.items():
        lines.append(f"    {name:<34} {_fmt_value(v, kinds[name], units[name])}")
    if res.fluid:
        lines.append(f"    fluid: {', '.join(f'{k} {v}' for k, v in res.fluid.items())}")
    verdict = "met" if res.meets_required else "NOT met"
    state = "inside the wanted regime" if res.inside else "CROSSED by a boundary"
    lines.append(f"  worst-case margin over the envelope: ±{100 * res.margin:.2f} % (envelope {state}); "
                 f"required ±{100 * res.required_margin:.0f} %: {verdict}")
    lines.append(f"  limited by: {', '.join(res.limiting) if res.limiting else 'no boundary'}")
    lines.append(f"  active constraints: {'; '.join(res.active) if res.active else 'none (interior optimum)'}")
    lines.append("  sensitivity (margin change for +1 % / -1 % of each variable):")
    for s in res.sensitivity:
        lines.append(f"    {s.variable:<34} {100 * s.change_up:+.3f} % / {100 * s.change_down:+.3f} %"
                     + (f"  (at its {s.at_bound} bound)" if s.at_bound else ""))
    if args.plot:
        lines.append(f"wrote {args.plot}")
    lines += ["", CAUTION]
    _emit(args, _clean(data), "\n".join(lines))
    return 0


def register(sub, add):
    sp = add("sweep", cmd_sweep, "sweep case inputs over ranges: regime, symmetric margin and limiting line per design")
    sp.add_argument("sweep", metavar="SWEEP", help="sweep file (.toml): variables, envelope, options")
    sp.add_argument("-o", "--output", metavar="FILE", help="write every design to .csv or .parquet")
    sp.add_argument("--plot", metavar="FILE", help="margin map over the first two variables (.png, .svg, .pdf)")
    grp = sp.add_mutually_exclusive_group()
    grp.add_argument("--workers", type=int, metavar="N", help="run on a local dask cluster of N worker processes")
    grp.add_argument("--scheduler", metavar="ADDR", help="run on the dask scheduler at ADDR (tcp://host:8786)")
    sp.add_argument("--quiet", action="store_true", help="no progress on stderr")
    sp = add("design", cmd_design, "inverse design: the inputs that maximise the worst-case margin of an envelope")
    sp.add_argument("goal", metavar="GOAL", help="goal file (.toml): envelope, regime, variables, constraints")
    sp.add_argument("--plot", metavar="FILE", help="the best design's chart with the envelope (.png, .svg, .pdf)")
    sp.add_argument("--quiet", action="store_true", help="no progress on stderr")
