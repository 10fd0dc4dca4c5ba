r"""The design space of a sweep: which inputs of a case can change, and the case with them changed.

A *design* is a dict of changes to a base :class:`~lowgmap.physics.case.Case`: SI units, radians for
angles, one key per changed input. The keys are those of :data:`VARIABLES` and three families named
by pattern: ``section.<field>`` (a field of the section), ``model.<name>.<constant>`` (a constant
of one chosen boundary model) and ``constant.<constant>`` (that constant in every chosen model that
has it). :func:`grid` and :func:`zipped` build lists of designs, :func:`check_key` checks a key
against a case, and :func:`apply_changes` returns the case of one design.

Used by the sweep engine (:mod:`lowgmap.physics.studies.sweep`), the inverse design
(:mod:`lowgmap.physics.studies.design`) and the sweep and goal file readers.
"""
from __future__ import annotations

import itertools
import math
import threading
from collections import OrderedDict
from dataclasses import dataclass, fields, replace
from typing import Mapping, Sequence

import numpy as np

from lowgmap.physics.case import ModelChoice, OperatingPoint
from lowgmap.physics.validate import InputError, angle_deg_in_range, finite, positive

__all__ = ["VARIABLES", "FLUID_KEYS", "MAX_DESIGNS", "MAX_VALUES", "grid", "zipped", "check_key", "variable_unit",
           "check_flow_range", "fluid_from_spec", "default_fluid_spec", "model_choices", "apply_changes",
           "DesignMap", "adaptive_map", "map_regime"]

#: Most designs of one sweep: the product of the value counts of a grid, the common length of paired values.
MAX_DESIGNS = 100_000
#: Most values of one sweep variable.
MAX_VALUES = 10_000

#: Inputs a design can change, with their meaning and SI unit. ``section.<field>`` (a field of the
#: section, e.g. ``section.wall_length`` [m]), ``model.<name>.<constant>`` (a constant of one chosen
#: boundary model) and ``constant.<constant>`` (that constant in every chosen model that has it)
#: are accepted too.
VARIABLES: dict[str, str] = {
    "half_angle": "corner half-angle of a groove or wedge channel [rad], in (0, 90) deg",
    "contact_angle": "static contact angle [rad], in [0, 180] deg (advancing/receding shift with it)",
    "length": "conduit length [m]",
    "size": "section scaled (every length) so that its hydraulic diameter is this value [m]",
    "residual_acceleration": "residual acceleration g [m/s^2]",
    "temperature": "fluid temperature [K] (properties rebuilt)",
    "pressure": "fluid pressure [Pa] (properties rebuilt)",
    "liquid": "liquid name (properties rebuilt)",
    "gas": "gas name (properties rebuilt)",
    "surface_tension": "surface tension [N/m] (replaces the property)",
    "liquid_density": "liquid density [kg/m^3]",
    "liquid_viscosity": "liquid viscosity [Pa s]",
    "gas_density": "gas density [kg/m^3]",
    "gas_viscosity": "gas viscosity [Pa s]",
    "liquid_flow": "liquid flow rate at the operating point [m^3/s]",
    "gas_flow": "gas flow rate at the operating point [m^3/s]",
}

#: Keys that rebuild the fluid pair with :func:`lowgmap.physics.properties.fluids.make_fluid_pair`.
FLUID_KEYS = ("temperature", "pressure", "liquid", "gas")

_PROPERTY_KEYS = {"surface_tension": "sigma", "liquid_density": "rho_l", "liquid_viscosity": "mu_l",
                  "gas_density": "rho_g", "gas_viscosity": "mu_g"}


# =============================================================================================
# Building the list of designs

def grid(variables: Mapping[str, Sequence]) -> list[dict]:
    """Every combination of the values (first variable varies slowest).

    At most :data:`MAX_VALUES` values per variable and :data:`MAX_DESIGNS` designs in all
    (:class:`~lowgmap.physics.validate.InputError` otherwise, raised before any design is built).

    Examples
    --------
    >>> for d in grid({"length": [0.1, 0.2], "contact_angle": [0.0, 0.5]}):
    ...     print(d)
    {'length': 0.1, 'contact_angle': 0.0}
    {'length': 0.1, 'contact_angle': 0.5}
    {'length': 0.2, 'contact_angle': 0.0}
    {'length': 0.2, 'contact_angle': 0.5}
    """
    names = list(variables)
    counts = [_count(n, variables[n]) for n in names]         # checked before anything is built
    if math.prod(counts) > MAX_DESIGNS:
        shown = " x ".join(f"{k:,}" for k in counts)
        raise InputError(f"a grid of {shown} values has more than {MAX_DESIGNS:,} designs (the most one sweep "
                         f"evaluates); use fewer values or split the sweep")
    values = [list(variables[n]) for n in names]
    for n, v in zip(names, values):
        if not v:
            raise ValueError(f"sweep variable {n} has no values")
    return [dict(zip(names, combo)) for combo in itertools.product(*values)]


def _count(name: str, values, most: int = MAX_VALUES) -> int:
    """Number of values of a variable (a sequence is not copied to count it), at most ``most``."""
    n = len(values) if hasattr(values, "__len__") else len(list(values))
    if n > most:
        raise InputError(f"sweep variable {name} has {n:,} values; at most {most:,}")
    return n


def zipped(variables: Mapping[str, Sequence]) -> list[dict]:
    """Designs that pair the i-th values of every variable (all lists of the same length, at most
    :data:`MAX_DESIGNS`).

    Examples
    --------
    >>> zipped({"length": [0.1, 0.2], "size": [0.01, 0.02]})
    [{'length': 0.1, 'size': 0.01}, {'length': 0.2, 'size': 0.02}]
    """
    names = list(variables)
    lengths = {n: _count(n, variables[n], MAX_DESIGNS) for n in names}     # before anything is built
    if len(set(lengths.values())) > 1:
        raise ValueError(f"paired sweep variables must have the same number of values, got {lengths}")
    return [dict(zip(names, combo)) for combo in zip(*(list(variables[n]) for n in names))]


def check_key(key: str, case) -> None:
    """Check that ``key`` names an input a design of ``case`` can change; raise otherwise.

    Parameters
    ----------
    key : str    a name of :data:`VARIABLES`, ``section.<field>``, ``model.<name>.<constant>`` or
                 ``constant.<constant>``
    case : Case  the base case (its section decides which ``section.<field>`` names and whether
                 ``half_angle`` exist)

    Raises
    ------
    TypeError
        ``key`` is not text.
    ValueError
        an unknown name (the message lists the known ones), a section field the section lacks, or
        ``half_angle`` for a section without a corner half-angle.

    Notes
    -----
    Only the form of ``model.<name>.<constant>`` and ``constant.<constant>`` is checked here; whether
    the model is on the case's chart and has that constant is checked by :func:`apply_changes`.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> case = example_case()                       # a 10 mm circular tube
    >>> check_key("section.diameter", case) is None
    True
    >>> check_key("half_angle", case)
    Traceback (most recent call last):
    ValueError: half_angle can only be varied for a section with a corner half-angle (...), got a circle section
    """
    if not isinstance(key, str):
        raise TypeError(f"a sweep variable name must be text, got {key!r}")
    if key in VARIABLES:
        if key == "half_angle" and getattr(case.section, "half_angle", None) is None:
            raise ValueError(f"half_angle can only be varied for a section with a corner half-angle (groove, "
                             f"wedge_channel), got a {getattr(case.section, 'kind', '?')} section")
        return
    if key.startswith("section."):
        name = key.split(".", 1)[1]
        names = [f.name for f in fields(case.section)]
        if name not in names:
            raise ValueError(f"{key}: the {case.section.kind} section has no field {name!r}; its fields: "
                             f"{', '.join(names)}")
        return
    if key.startswith("model.") and key.count(".") == 2:
        return
    if key.startswith("constant.") and key.count(".") == 1:
        return
    known = ", ".join(list(VARIABLES) + ["section.<field>", "model.<name>.<constant>", "constant.<constant>"])
    raise ValueError(f"unknown sweep variable {key!r}; known: {known}")


def variable_unit(key: str) -> str:
    """SI unit of a design variable as text (``"-"`` for names and model constants).

    Examples
    --------
    >>> variable_unit("length"), variable_unit("residual_acceleration"), variable_unit("section.half_angle")
    ('m', 'm/s^2', 'rad')
    >>> variable_unit("liquid"), variable_unit("constant.safety_factor")
    ('-', '-')
    """
    text = VARIABLES.get(key, "")
    if "[" in text:
        return text[text.index("[") + 1:text.index("]")]
    if key.startswith("section."):
        return "rad" if "angle" in key else "m"
    return "-"


def check_flow_range(name: str, rng) -> tuple[float, float]:
    """A flow range (low, high) [m^3/s] checked and returned as floats: both > 0, low <= high.

    Parameters
    ----------
    name : str   the field named in error messages (e.g. ``"ql_range"``)
    rng : pair of float   (low, high) [m^3/s]; low == high is a single flow

    Examples
    --------
    >>> check_flow_range("ql_range", (1e-6, 2e-6))
    (1e-06, 2e-06)
    >>> check_flow_range("ql_range", (2e-6, 1e-6))
    Traceback (most recent call last):
    ValueError: ql_range must be increasing (low <= high), got [2e-06, 1e-06] m^3/s
    """
    try:
        lo, hi = rng
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a pair (low, high) in m^3/s, got {rng!r}") from None
    lo, hi = positive(f"{name}[0]", lo, "m^3/s"), positive(f"{name}[1]", hi, "m^3/s")
    if hi < lo:
        raise ValueError(f"{name} must be increasing (low <= high), got [{lo:g}, {hi:g}] m^3/s")
    return lo, hi


# =============================================================================================
# Applying changes to a case

_FLUID_CACHE: "OrderedDict[tuple, object]" = OrderedDict()
_FLUID_LOCK = threading.Lock()


def fluid_from_spec(spec: Mapping):
    """The fluid pair of a fluid description, cached (CoolProp look-ups repeat across a grid).

    Parameters
    ----------
    spec : mapping   keyword arguments of :func:`lowgmap.physics.properties.fluids.make_fluid_pair`:
                     ``liquid`` and ``temperature`` [K] required; ``pressure`` [Pa], ``gas``,
                     ``gas_model``, ``liquid_source``, ``overrides`` optional

    Returns
    -------
    FluidPair
        The same object for equal descriptions (the last 256 are kept).

    Examples
    --------
    >>> spec = {"liquid": "oil", "temperature": 298.15, "pressure": 101325.0, "liquid_source": "user",
    ...         "overrides": {"rho_l": 913.0, "mu_l": 4.6e-3, "sigma": 0.0197, "rho_g": 1.18, "mu_g": 1.8e-5}}
    >>> fp = fluid_from_spec(spec)
    >>> fp.sigma, fp is fluid_from_spec(dict(spec))
    (0.0197, True)
    """
    from lowgmap.physics.properties.fluids import make_fluid_pair

    key = tuple(sorted((k, tuple(sorted(v.items())) if isinstance(v, Mapping) else v) for k, v in spec.items()))
    with _FLUID_LOCK:
        hit = _FLUID_CACHE.get(key)
        if hit is not None:
            _FLUID_CACHE.move_to_end(key)
            return hit
    kw = dict(spec)
    fp = make_fluid_pair(kw.pop("liquid"), kw.pop("temperature"), kw.pop("pressure", None), **kw)
    with _FLUID_LOCK:
        _FLUID_CACHE[key] = fp
        while len(_FLUID_CACHE) > 256:
            _FLUID_CACHE.popitem(last=False)
    return fp


def default_fluid_spec(fp) -> dict:
    """The description of a fluid pair that :func:`fluid_from_spec` rebuilds it from by name
    (liquid, gas, temperature [K], pressure [Pa]); user property values are not carried.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_fluid
    >>> default_fluid_spec(example_fluid())
    {'liquid': 'water', 'gas': 'air', 'temperature': 293.15, 'pressure': 101325.0}
    """
    return {"liquid": fp.liquid, "gas": fp.gas, "temperature": fp.temperature, "pressure": fp.pressure}


def model_choices(case) -> tuple:
    """The case's model choices; the defaults for its section (those that apply) when it lists none.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> [c.name for c in model_choices(example_case())][:2]         # a tube: the tube defaults
    ['bubble_slug_dukler_1988', 'slug_annular_dukler_1988']
    >>> [c.name for c in model_choices(example_case(models=["bubble_slug_dukler_1988"]))]
    ['bubble_slug_dukler_1988']
    """
    from lowgmap.physics.models.boundary import resolve_model
    from lowgmap.physics.chart.composition import default_models

    if case.models:
        return tuple(case.models)
    return tuple(ModelChoice.of(n) for n in default_models(case) if resolve_model(n, case).applies_to(case) is None)


def apply_changes(case, changes: Mapping, fluid_spec: Mapping | None = None):
    """The case with the inputs in ``changes`` (SI, keys of :data:`VARIABLES`) replaced.

    Parameters
    ----------
    case : Case
    changes : mapping   variable -> value (SI units, radians for angles, names for fluids)
    fluid_spec : mapping, optional
        Keyword arguments of :func:`lowgmap.physics.properties.fluids.make_fluid_pair` (``liquid``, ``temperature``,
        ``pressure``, ``gas``, ``gas_model``, ``liquid_source``, ``overrides``) describing the base
        fluid; needed when ``changes`` holds a key of :data:`FLUID_KEYS`. Default: the base pair's
        liquid, gas, temperature and pressure.

    Returns
    -------
    Case

    Raises
    ------
    ValueError
        unknown variable, or a value outside its range (angles are checked, not clipped).

    Notes
    -----
    Order: fluid rebuilt (temperature, pressure, liquid, gas), single properties, section fields,
    half-angle, size, contact angle, length, residual acceleration, operating point, model constants.
    Flows stay the given volumetric flows when the fluid changes.

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import WedgeChannel
    >>> case = example_case(WedgeChannel(math.radians(6), 0.04), contact_angle=0.1, length=0.04)
    >>> c2 = apply_changes(case, {"half_angle": math.radians(8), "length": 0.06})
    >>> round(math.degrees(c2.section.half_angle), 9), c2.length
    (8.0, 0.06)
    """
    from lowgmap.physics.studies.uncertainty import perturbed_case

    for key in changes:
        check_key(key, case)
    ch = dict(changes)
    if any(k in ch for k in FLUID_KEYS):
        spec = dict(fluid_spec) if fluid_spec is not None else default_fluid_spec(case.fluid)
        for k in FLUID_KEYS:
            if k in ch:
                v = ch[k]
                if k in ("liquid", "gas"):
                    if not isinstance(v, str) or not v.strip():
                        raise ValueError(f"{k} must be a fluid name, got {v!r}")
                    if k == "liquid" and "gas" not in ch and spec.get("liquid") != v:
                        spec.pop("liquid_source", None)       # a new liquid: its source found by name
                else:
                    v = positive(k, v, "K" if k == "temperature" else "Pa")
                spec[k] = v
        case = case.with_(fluid=fluid_from_spec(spec))
    props = {}
    for key, attr in _PROPERTY_KEYS.items():
        if key in ch:
            props[key] = positive(key, ch[key], "SI")
    for key in ("half_angle", "contact_angle"):
        if key in ch:
            lo_open = key == "half_angle"
            angle_deg_in_range(key, finite(key, ch[key], "rad"), 0.0, 90.0 if lo_open else 180.0,
                               lo_open=lo_open, hi_open=lo_open)
    sec = {k.split(".", 1)[1]: v for k, v in ch.items() if k.startswith("section.")}
    if sec:
        try:
            case = case.with_(section=replace(case.section, **sec))
        except (TypeError, ValueError) as exc:
            raise ValueError(f"section: {exc}") from None
    values = dict(props)
    for key in ("half_angle", "size", "contact_angle", "length", "residual_acceleration"):
        if key in ch:
            values[key] = ch[key]
    if "size" in values:
        positive("size", values["size"], "m")
    if "length" in values:
        positive("length", values["length"], "m")
    if "residual_acceleration" in values:
        if not finite("residual_acceleration", values["residual_acceleration"], "m/s^2") >= 0:
            raise ValueError(f"residual_acceleration must be >= 0 m/s^2, got {values['residual_acceleration']:g}")
    if values:
        case = perturbed_case(case, values)
    if "liquid_flow" in ch or "gas_flow" in ch:
        op = case.operating_point
        ql = ch.get("liquid_flow", op.ql if op is not None else None)
        qg = ch.get("gas_flow", op.qg if op is not None else None)
        if ql is None or qg is None:
            raise ValueError("the case has no operating point: vary liquid_flow and gas_flow together")
        case = case.with_(operating_point=OperatingPoint(ql, qg))
    model_keys = {k: v for k, v in ch.items() if k.startswith(("model.", "constant."))}
    if model_keys:
        case = _with_constants(case, model_keys)
    return case


def _with_constants(case, items: Mapping):
    """The case with ``model.<name>.<constant>`` / ``constant.<constant>`` values set in its model choices."""
    from lowgmap.physics.models.boundary import resolve_model

    choices = list(model_choices(case))
    names = [c.name for c in choices]
    params = [dict(c.param_dict) for c in choices]
    for key, value in items.items():
        value = finite(key, value)
        if key.startswith("model."):
            _, name, const = key.split(".")
            if name not in names:
                raise ValueError(f"{key}: model {name!r} is not on this case's chart; its models: {', '.join(names)}")
            i = names.index(name)
            resolve_model(name, case).constant(const)          # unknown constant: ValueError naming them
            params[i][const] = value
        else:
            const = key.split(".", 1)[1]
            hit = False
            for i, name in enumerate(names):
                if any(c.name == const for c in resolve_model(name, case).constants):
                    params[i][const] = value
                    hit = True
            if not hit:
                raise ValueError(f"{key}: no model on this case's chart has a constant {const!r}")
    return case.with_(models=tuple(ModelChoice.of(n, p) for n, p in zip(names, params)))


# =============================================================================================
# Margin map over two inputs, refined near the zero-margin contour

@dataclass(frozen=True)
class DesignMap:
    """Signed margins of designs over two inputs, refined where the margin changes sign.

    Attributes
    ----------
    x_name, y_name : str   the two inputs (keys of :data:`VARIABLES` or ``section.<field>`` ...)
    x, y : arrays          input values of every evaluated design [SI]
    margin : array         signed symmetric margin at the operating point (fraction; negative outside the
                           intended regime; NaN where the design failed)
    regime : str           the intended regime the margins refer to
    current : (float, float, float)   the base case's (x, y, margin): an evaluated design of the map
    levels : array of int  refinement level of each design (0: the starting grid)
    """

    x_name: str
    y_name: str
    x: np.ndarray
    y: np.ndarray
    margin: np.ndarray
    regime: str
    current: tuple
    levels: np.ndarray

    def to_frame(self):
        """The designs as a pandas DataFrame (x_name, y_name, margin, level)."""
        import pandas as pd

        return pd.DataFrame({self.x_name: self.x, self.y_name: self.y, "margin": self.margin, "level": self.levels})


def _axis_nodes(lo: float, hi: float, n: int, log: bool, current: float | None) -> np.ndarray:
    t = np.linspace(0.0, 1.0, n)
    nodes = np.exp(np.log(lo) + t * (np.log(hi) - np.log(lo))) if log else lo + t * (hi - lo)
    if current is not None and lo <= current <= hi:
        i = int(np.argmin(np.abs(nodes - current)))
        nodes[i] = current                          # the current design is a node of the map
        nodes = np.unique(nodes)
    return nodes


def map_regime(base, regime: str | None = None, point=None) -> str:
    """The regime a margin map measures its margins in: ``regime``, else the case's intended regime, else the
    regime of ``point`` (default: the case's operating point) on the case's chart."""
    regime = regime or getattr(base, "intended_regime", "") or None
    if regime is not None:
        return regime
    from lowgmap.physics.chart.composition import build_chart

    op = base.operating_point
    point = point or (None if op is None else (op.ql, op.qg))
    if point is None:
        raise ValueError("the case has no operating point: give one (the map measures its margin)")
    return str(build_chart(base).classify(*point))


def adaptive_map(base, x_name: str, x_range, y_name: str, y_range, *, n_max: int = 400, start: int = 9,
                 regime: str | None = None, log_x: bool = False, log_y: bool = False, evaluate=None,
                 contours: Sequence[float] = (0.0,), **sweep_options) -> DesignMap:
    r"""Margin map over two inputs: a coarse grid refined where the margin changes sign.

    .. math:: m(x, y) = \pm\max\{m : [(1-m)Q_L, (1+m)Q_L] \times [(1-m)Q_G, (1+m)Q_G] \subset R\}

    A ``start`` x ``start`` grid (with the base case's own values as nodes, so the current design is a
    design of the map) is evaluated; then every cell whose corners lie on both sides of one of the
    ``contours`` (default: the zero margin only; or where one failed) is split in four, smallest level first
    within the remaining budget, until no such cell is left or ``n_max`` designs are used. Those contours (the
    zero contour, and the required margin when it is one of them) are then resolved to the final cell size
    instead of being interpolated across a line.

    Parameters
    ----------
    base : Case
    x_name, y_name : str   inputs (keys accepted by :func:`apply_changes`)
    x_range, y_range : (float, float)   ranges [SI], low < high
    n_max : int            most designs evaluated (default 400)
    start : int            nodes a side of the starting grid (default 9)
    regime : str, optional   intended regime (default: the case's, else the regime of the current design)
    log_x, log_y : bool    geometric spacing (positive ranges only)
    evaluate : callable, optional   ``evaluate(list of change dicts) -> array of signed margins``;
        default: :func:`lowgmap.physics.studies.sweep.sweep` with ``sweep_options``
    contours : sequence of float   margin values (fractions) whose contours are resolved (default (0.0,))
    **sweep_options : passed to :func:`~lowgmap.physics.studies.sweep.sweep` (``fluid_spec``, ``client`` ...)

    Returns
    -------
    DesignMap

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> case = example_case(point=(1e-5, 1e-6))
    >>> fake = lambda designs: np.array([d["length"] - 1.0 for d in designs])   # zero contour at length 1
    >>> m = adaptive_map(case, "length", (0.5, 2.0), "size", (0.005, 0.02), n_max=120, evaluate=fake)
    >>> len(m.x) <= 120, m.current[:2] == (1.0, 0.01), int(m.levels.max()) > 0
    (True, True, True)
    """
    from lowgmap.physics.studies.design import nominal_design_value

    if not isinstance(n_max, int) or n_max < 4:
        raise ValueError(f"n_max must be an integer >= 4, got {n_max!r}")
    if not isinstance(start, int) or not 2 <= start <= 64:
        raise ValueError(f"start must be an integer within [2, 64], got {start!r}")
    ranges = []
    for name, rng_, log in ((x_name, x_range, log_x), (y_name, y_range, log_y)):
        lo, hi = (finite(name, v) for v in rng_)
        if not lo < hi:
            raise ValueError(f"{name}: range must be (low, high) with low < high, got ({lo:g}, {hi:g})")
        if log and lo <= 0:
            raise ValueError(f"{name}: a geometric range must be positive, got ({lo:g}, {hi:g})")
        ranges.append((lo, hi))
    xc, yc = nominal_design_value(base, x_name), nominal_design_value(base, y_name)
    if regime is None:
        regime = getattr(base, "intended_regime", "") or None
    if evaluate is None:
        from lowgmap.physics.studies.sweep import sweep

        regime = map_regime(base, regime)

        def evaluate(designs):
            df = sweep(base, designs, regime=regime, **sweep_options)
            return df["margin"].to_numpy(dtype=float)

    resolved = sorted({float(finite("contours", c)) for c in contours}) or [0.0]
    xs = _axis_nodes(*ranges[0], start, log_x, xc)
    ys = _axis_nodes(*ranges[1], start, log_y, yc)
    done: dict[tuple[float, float], tuple[float, int]] = {}

    def run(points, level):
        points = [p for p in dict.fromkeys(points) if p not in done][: max(n_max - len(done), 0)]
        if not points:
            return
        vals = np.asarray(evaluate([{x_name: px, y_name: py} for px, py in points]), dtype=float)
        for p, v in zip(points, vals):
            done[p] = (float(v), level)

    run([(float(a), float(b)) for b in ys for a in xs], 0)
    cells = [((float(xs[i]), float(xs[i + 1])), (float(ys[j]), float(ys[j + 1])), 0)
             for i in range(len(xs) - 1) for j in range(len(ys) - 1)]

    def mid(a, b, log):
        return float(math.sqrt(a * b)) if log else 0.5 * (a + b)

    while len(done) < n_max:
        flagged = []
        for (x0, x1), (y0, y1), lev in cells:
            corners = [done.get(p, (math.nan, 0))[0] for p in ((x0, y0), (x1, y0), (x0, y1), (x1, y1))]
            known = [v for v in corners if not math.isnan(v)]
            crossed = any(len({v > c for v in known}) > 1 for c in resolved)
            if crossed or (len(known) < 4 and known):
                flagged.append(((x0, x1), (y0, y1), lev))
        if not flagged:
            break
        flagged.sort(key=lambda c: c[2])
        new_cells, points = [], []
        budget = n_max - len(done)
        for (x0, x1), (y0, y1), lev in flagged:
            xm, ym = mid(x0, x1, log_x), mid(y0, y1, log_y)
            pts = [(xm, y0), (x0, ym), (xm, ym), (x1, ym), (xm, y1)]
            fresh = [p for p in pts if p not in done and p not in points]
            if len(fresh) > budget:
                break
            budget -= len(fresh)
            points += fresh
            new_cells.append(((x0, x1), (y0, y1), lev))
        if not new_cells:
            break
        level = 1 + max(c[2] for c in new_cells)
        run(points, level)
        split = set(new_cells)
        nxt = [c for c in cells if c not in split]
        for (x0, x1), (y0, y1), lev in new_cells:
            xm, ym = mid(x0, x1, log_x), mid(y0, y1, log_y)
            nxt += [((x0, xm), (y0, ym), lev + 1), ((xm, x1), (y0, ym), lev + 1),
                    ((x0, xm), (ym, y1), lev + 1), ((xm, x1), (ym, y1), lev + 1)]
        cells = nxt
    keys = list(done)
    x = np.array([k[0] for k in keys])
    y = np.array([k[1] for k in keys])
    margin = np.array([done[k][0] for k in keys])
    levels = np.array([done[k][1] for k in keys], dtype=int)
    cur = (xc, yc, done[(xc, yc)][0]) if (xc, yc) in done else (xc, yc, math.nan)
    return DesignMap(x_name, y_name, x, y, margin, regime or "", cur, levels)
