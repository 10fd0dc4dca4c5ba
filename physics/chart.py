"""Chart composition: from a case to boundary curves, regime regions and point classification.

:meth:`Chart.build` is the one path from a :class:`~physics.case.Case` to a regime chart; the
dashboard, the command line and the report exporter all use it. Expensive work (sampling the
boundary curves, intersections, region polygons) happens in ``build``; :meth:`Chart.classify`
is cheap and vectorised, for moving operating points.

Which boundaries define the regions (the "sequence rule")
---------------------------------------------------------
Each boundary model separates ``regime_below`` (less gas) from ``regime_above`` (more gas).
The chosen models are read in order and chained by their regime names:

1. the first usable model starts the sequence [regime_below, regime_above];
2. a later model joins when its ``regime_below`` is the last regime of the sequence (it is
   appended) or its ``regime_above`` is the first (it is prepended), and its other regime is not
   in the sequence yet; this is repeated until no model joins;
3. every other model is a *comparison* line: drawn, intersected, flagged for validity, but it
   neither bounds a region nor changes a classification. A model with the same pair of regimes
   as one already in the sequence (a second model for the same transition) is therefore always
   a comparison line: the first one listed wins.

A point is classified by walking the sequence in order of increasing gas fraction: its regime is
``regime_below`` of the first region-defining line it lies below (g < 0), or ``regime_above`` of
the last line if it lies above all of them. A point exactly on a line counts as above it. Where two
region-defining lines cross, this keeps the lower-gas-fraction regime past the crossing; the chart
warns when that happens inside the chart range. The region polygons follow the same rule.

Default models: for a closed section, the void-fraction bubble–slug and slug–annular lines
(Dukler et al. 1988) define the regions; the Suratman bubble–slug line and the two Weber-number
zone lines are comparison lines (:data:`DEFAULT_MODELS`).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Mapping, Sequence

import numpy as np
from scipy.optimize import brentq

from . import tube_models
from .boundary import BoundaryModel, resolve_model
from .case import ModelChoice
from .groups import conduit_diameter, positive_flows

__all__ = ["BoundaryCurve", "Intersection", "Region", "Axes", "Chart", "AXIS_KINDS", "DEFAULT_MODELS",
           "default_models"]

#: Default model names by section family ("closed" tubes and ducts, "open" channels). The first
#: models that chain by regime names define the regions; the rest are comparison lines.
DEFAULT_MODELS: dict[str, tuple[str, ...]] = {
    "closed": tube_models.TUBE_MODEL_NAMES,
    "open": (),
}

#: Axis kinds accepted by :meth:`Chart.axes`.
AXIS_KINDS = ("flow", "superficial_velocity", "reynolds", "weber", "flow_ratio")

_N_START = 25          # initial samples per curve (uniform in log Q_L)
_TOL = 1e-3            # allowed chord deviation, as a fraction of the chart's log Q_G span
_MAX_POINTS = 4000     # cap on samples per curve
_DEPTH = 14            # refinement passes


def _ro(a) -> np.ndarray:
    a = np.array(a, dtype=float)
    a.flags.writeable = False
    return a


@dataclass(frozen=True, eq=False)
class BoundaryCurve:
    """One boundary line as drawn on the chart.

    ``ql``, ``qg`` [m^3/s] are the samples inside the chart range (dense where the line bends, with
    its crossings of the range edges and its intersections with other lines included); NaN rows
    separate pieces when the line leaves and re-enters the range. ``valid_mask`` is False where
    the case or the point lies outside the source's validity range (and at separators).
    ``role`` is "regions" (defines regions and classification) or "comparison".
    """

    name: str
    label: str
    citation: str
    ql: np.ndarray
    qg: np.ndarray
    valid_mask: np.ndarray
    regime_below: str
    regime_above: str
    constants: tuple[tuple[str, float], ...]
    role: str = "regions"


@dataclass(frozen=True)
class Intersection:
    """A point where two boundary lines cross inside the chart range [m^3/s]."""

    first: str
    second: str
    ql: float
    qg: float


@dataclass(frozen=True, eq=False)
class Region:
    """A regime region: a closed polygon in the flow plane [m^3/s] (first vertex not repeated).

    The edges are straight in log-log axes. A regime cut into pieces by crossing lines appears
    as several regions with the same name.
    """

    name: str
    polygon_ql: np.ndarray
    polygon_qg: np.ndarray


@dataclass(frozen=True)
class Axes:
    """Chart axes of one kind: ``to_xy(ql, qg) -> (x, y)``, its inverse ``to_flow(x, y)``, labels.

    Labels carry SI units in brackets; ``x_unit``/``y_unit`` give the unit alone ("-" if none).
    """

    kind: str
    x_label: str
    y_label: str
    x_unit: str
    y_unit: str
    to_xy: Callable
    to_flow: Callable

    def __call__(self, ql, qg):
        return self.to_xy(ql, qg)


def default_models(case) -> tuple[str, ...]:
    """Default model names for the case's section family (open or closed)."""
    family = "open" if getattr(case.section, "is_open", False) else "closed"
    return DEFAULT_MODELS[family]


# --------------------------------------------------------------------------------------------
# helpers

def _resolve(case, models):
    """List of (model, params, explicit) from the ``models`` argument of :meth:`Chart.build`."""
    explicit = True
    if models is None:
        models = case.models
        if not models:
            models = default_models(case)
            explicit = False
    if isinstance(models, (str, ModelChoice, BoundaryModel)):
        models = (models,)
    out = []
    for item in models:
        params: Mapping = {}
        if isinstance(item, tuple) and len(item) == 2 and not isinstance(item, ModelChoice):
            item, params = item
        if isinstance(item, ModelChoice):
            model, params = resolve_model(item.name, case), item.param_dict
        elif isinstance(item, str):
            model = resolve_model(item, case)
        elif isinstance(item, BoundaryModel):
            model = item
        else:
            raise TypeError(f"a chart model must be a registry name, a ModelChoice or a BoundaryModel, "
                            f"got {type(item).__name__}")
        out.append((model, dict(params), explicit))
    names = [m.name for m, _, _ in out]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ValueError(f"boundary model listed more than once: {', '.join(dup)}")
    return out


def _sequence(models: Sequence[BoundaryModel]) -> list[int]:
    """Indices of the region-defining models in order of increasing gas fraction (sequence rule)."""
    if not models:
        return []
    chain = [0]
    regimes = [models[0].regime_below, models[0].regime_above]
    pairs = {(models[0].regime_below, models[0].regime_above)}
    changed = True
    while changed:
        changed = False
        for i, m in enumerate(models):
            if i in chain or (m.regime_below, m.regime_above) in pairs:
                continue
            if m.regime_below == regimes[-1] and m.regime_above not in regimes:
                chain.append(i)
                regimes.append(m.regime_above)
            elif m.regime_above == regimes[0] and m.regime_below not in regimes:
                chain.insert(0, i)
                regimes.insert(0, m.regime_below)
            else:
                continue
            pairs.add((m.regime_below, m.regime_above))
            changed = True
    return chain


def _log_curve(model, case, consts):
    """x = log10 Q_L  ->  y = log10 Q_G on the line (NaN where none)."""
    def f(x):
        q = np.asarray(model.qg_of_ql(case, 10.0 ** np.asarray(x, dtype=float), **consts), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(q > 0, np.log10(np.where(q > 0, q, 1.0)), np.nan)
    return f


def _sample(f, x0, x1, tol, extra):
    x = np.linspace(x0, x1, _N_START)
    extra = np.asarray(extra, dtype=float)
    extra = extra[(extra > x0) & (extra < x1)]
    if extra.size:
        x = np.unique(np.concatenate([x, extra]))
    y = f(x)
    min_dx = 1e-7 * (x1 - x0)
    for _ in range(_DEPTH):
        xm = 0.5 * (x[:-1] + x[1:])
        ym = f(xm)
        with np.errstate(invalid="ignore"):
            err = np.abs(ym - 0.5 * (y[:-1] + y[1:]))
        need = (err > tol) | (np.isnan(y[:-1]) != np.isnan(y[1:]))
        need &= (x[1:] - x[:-1]) > min_dx
        if not need.any() or x.size > _MAX_POINTS:
            break
        x = np.concatenate([x, xm[need]])
        y = np.concatenate([y, ym[need]])
        order = np.argsort(x, kind="stable")
        x, y = x[order], y[order]
    return x, y


def _roots(h, x, d):
    """Roots of the scalar function h between consecutive samples x where the values d change sign."""
    out = []
    ok = np.isfinite(d)
    for i in range(len(x) - 1):
        if not (ok[i] and ok[i + 1]):
            continue
        if d[i] == 0.0:
            out.append(x[i])
        elif d[i] * d[i + 1] < 0:
            out.append(brentq(h, x[i], x[i + 1], xtol=1e-13, rtol=1e-13))
    if ok[-1] and d[-1] == 0.0:
        out.append(x[-1])
    return out


def _clip(x, y, ylo, yhi):
    """Keep the samples inside [ylo, yhi] (log10); NaN rows between pieces. Returns (ql, qg) [m^3/s]."""
    span = 1e-9 * (yhi - ylo)
    inside = np.isfinite(y) & (y >= ylo - span) & (y <= yhi + span)
    y = np.clip(y, ylo, yhi)
    qx, qy = [], []
    for i in range(len(x)):
        if inside[i]:
            qx.append(x[i])
            qy.append(y[i])
        elif qx and not math.isnan(qx[-1]):
            qx.append(math.nan)
            qy.append(math.nan)
    while qx and math.isnan(qx[-1]):
        qx.pop()
        qy.pop()
    return 10.0 ** np.array(qx, dtype=float), 10.0 ** np.array(qy, dtype=float)


def _scalar(f):
    return lambda t: float(f(np.array([t]))[0])


# --------------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class Chart:
    """A regime chart for one case (immutable; build it with :meth:`Chart.build`).

    Attributes
    ----------
    case : Case
    boundaries : tuple of BoundaryCurve   every chosen line (region-defining first, in sequence order)
    intersections : tuple of Intersection   crossings of any two lines inside the chart range
    regions : tuple of Region   regime regions clipped to the chart range
    warnings : tuple of str     things the engineer must know (gravity, duct approximation, validity…)
    regime_names : tuple of str   regimes of the region-defining sequence, by increasing gas fraction
    region_models : tuple of (BoundaryModel, constants)   the region-defining lines, in sequence
    comparison_models : tuple of (BoundaryModel, constants)
    """

    case: object
    boundaries: tuple
    intersections: tuple
    regions: tuple
    warnings: tuple
    regime_names: tuple
    region_models: tuple
    comparison_models: tuple

    # ----------------------------------------------------------------------------------------
    @classmethod
    def build(cls, case, models=None) -> "Chart":
        """Compose the chart of ``case``.

        Parameters
        ----------
        case : Case
        models : sequence, optional
            Registry names, :class:`~physics.case.ModelChoice` objects (name + constant
            overrides), :class:`~physics.boundary.BoundaryModel` objects or (model, params)
            pairs. Default: ``case.models``, or when that is empty the defaults for the section
            (:func:`default_models`). Names are looked up first among the case's own empirical
            boundaries (:func:`physics.boundary.case_boundaries`), then in the registry.

        Returns
        -------
        Chart

        Raises
        ------
        ValueError
            Unknown model or constant, constant out of range, model listed twice, or a model the
            caller chose explicitly that does not apply to the case (e.g. a closed-tube model
            for an open section). Default models that do not apply are left out with a warning.

        Examples
        --------
        >>> from physics.case import Case, FlowRange
        >>> from physics.fluids import FluidPair
        >>> from physics.sections import Circle
        >>> from physics.wetting import Wetting
        >>> air_water = FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5,
        ...                       "user", "user")
        >>> case = Case(air_water, Circle(0.0127), Wetting(0.0), 1.0, 1e-4 * 9.80665,
        ...             FlowRange(1e-7, 1e-3, 1e-7, 1e-2))
        >>> chart = Chart.build(case)
        >>> chart.regime_names
        ('dispersed bubbles', 'elongated bubbles / slugs', 'annular (gas core)')
        >>> str(chart.classify(1e-4, 1e-5))
        'dispersed bubbles'
        """
        fr = case.flow_range
        x0, x1 = math.log10(fr.ql_min), math.log10(fr.ql_max)
        ylo, yhi = math.log10(fr.qg_min), math.log10(fr.qg_max)
        warnings: list[str] = []

        chosen = []
        for model, params, explicit in _resolve(case, models):
            reason = model.applies_to(case)
            if reason is not None:
                if explicit:
                    raise ValueError(f"boundary model {model.name} does not apply to this case: {reason}")
                warnings.append(f"Left out {model.label}: {reason}")
                continue
            chosen.append((model, model.resolve_constants(params)))
        if not chosen:
            why = ""
            if getattr(case.section, "is_open", False):
                why = (f" Open section ({getattr(case.section, 'kind', 'open')}): the closed-tube criteria do "
                       f"not apply.")
            warnings.append("No boundary model applies to this case: the chart shows no regimes." + why)

        seq = _sequence([m for m, _ in chosen])
        ordered = [chosen[i] for i in seq] + [c for i, c in enumerate(chosen) if i not in seq]
        n_reg = len(seq)
        roles = ["regions"] * n_reg + ["comparison"] * (len(ordered) - n_reg)
        regime_names: tuple[str, ...] = ()
        if n_reg:
            regime_names = tuple([ordered[0][0].regime_below] + [m.regime_above for m, _ in ordered[:n_reg]])

        # sample every line over the liquid range ----------------------------------------
        tol = _TOL * (yhi - ylo)
        fns, samples = [], []
        for model, consts in ordered:
            f = _log_curve(model, case, consts)
            bp = np.asarray(model.breakpoints(case, **consts), dtype=float)
            bp = np.log10(bp[bp > 0]) if bp.size else bp
            fns.append(f)
            samples.append(_sample(f, x0, x1, tol, bp))

        # intersections of every pair ------------------------------------------------------
        intersections = []
        crossing_x: list[list[float]] = [[] for _ in ordered]
        for i in range(len(ordered)):
            for j in range(i + 1, len(ordered)):
                xu = np.union1d(samples[i][0], samples[j][0])
                d = fns[i](xu) - fns[j](xu)
                fin = d[np.isfinite(d)]
                if fin.size and np.all(np.abs(fin) < 1e-12):
                    warnings.append(f"{ordered[i][0].label} and {ordered[j][0].label} coincide on this chart.")
                    continue
                fi, fj = fns[i], fns[j]
                h = _scalar(lambda t, fi=fi, fj=fj: fi(t) - fj(t))
                for xr in _roots(h, xu, d):
                    crossing_x[i].append(xr)
                    crossing_x[j].append(xr)
                    yr = float(fi(np.array([xr]))[0])
                    if ylo - 1e-12 <= yr <= yhi + 1e-12:
                        intersections.append(Intersection(ordered[i][0].name, ordered[j][0].name,
                                                          10.0 ** xr, 10.0 ** yr))
                        if i < n_reg and j < n_reg:
                            warnings.append(
                                f"Region-defining lines {ordered[i][0].label} and {ordered[j][0].label} cross at "
                                f"Q_L = {10.0 ** xr:.3g} m^3/s, Q_G = {10.0 ** yr:.3g} m^3/s; past the crossing "
                                f"the regime of lower gas fraction is kept (sequence rule).")

        # crossings of the range's top and bottom edges -------------------------------------
        edge_x: list[list[float]] = []
        for f, (xs, ys) in zip(fns, samples):
            ex = []
            for level in (ylo, yhi):
                ex += _roots(_scalar(lambda t, f=f, level=level: f(t) - level), xs, ys - level)
            edge_x.append(ex)

        # boundary curves clipped to the chart range ----------------------------------------
        curves = []
        for k, ((model, consts), f, (xs, _)) in enumerate(zip(ordered, fns, samples)):
            x = np.unique(np.concatenate([xs, np.asarray(edge_x[k] + crossing_x[k], dtype=float)]))
            x = x[(x >= x0) & (x <= x1)]
            ql, qg = _clip(x, f(x), ylo, yhi)
            valid = np.asarray(model.validity_mask(case, ql, qg), dtype=bool) & np.isfinite(ql)
            curves.append(BoundaryCurve(
                model.name, model.label, model.citation, _ro(ql), _ro(qg), _readonly_bool(valid),
                model.regime_below, model.regime_above, tuple(sorted(consts.items())), roles[k]))

        # regions -----------------------------------------------------------------------------
        regions = _regions(case, ordered[:n_reg], fns[:n_reg], samples[:n_reg], crossing_x[:n_reg],
                           edge_x[:n_reg], regime_names, (x0, x1, ylo, yhi))

        # warnings ----------------------------------------------------------------------------
        if any(m.low_gravity for m, _ in ordered):
            check = tube_models.gravity_check(case)
            if not check.negligible:
                warnings.insert(0, check.message)
            note = tube_models.duct_note(case.section)
            if note:
                warnings.append(note)
        outside: dict[str, list[str]] = {}
        for (model, _), curve in zip(ordered, curves):
            problems = model.validity_problems(case)
            if problems:
                outside.setdefault("; ".join(problems), []).append(model.label)
                continue
            drawn = np.isfinite(curve.ql)
            if drawn.any() and not curve.valid_mask[drawn].all():
                frac = 1.0 - curve.valid_mask[drawn].mean()
                ranges = ", ".join(v.describe() for v in model.validity) or "the range of its data"
                warnings.append(f"{model.label}: {frac:.0%} of the drawn line lies outside the source's "
                                f"validity range ({ranges}); that part is flagged.")
        for problems, labels in outside.items():
            warnings.append(f"The case lies outside the validity range of the sources ({problems}); these "
                            f"lines are flagged: {'; '.join(labels)}.")

        return cls(case, tuple(curves), tuple(intersections), tuple(regions), tuple(warnings), regime_names,
                   tuple((m, tuple(sorted(c.items()))) for m, c in ordered[:n_reg]),
                   tuple((m, tuple(sorted(c.items()))) for m, c in ordered[n_reg:]))

    # ----------------------------------------------------------------------------------------
    def classify(self, ql, qg) -> np.ndarray:
        """Regime name at each point (Q_L, Q_G) [m^3/s], vectorised (sequence rule).

        Returns an array of str with the broadcast shape of the inputs (0-d for scalars). Points
        whose flow rates are not finite and > 0, and every point of a chart without regimes, give
        "" (empty string). Points outside the chart range are classified too (the lines extend).
        """
        ql, qg = positive_flows(ql, qg)
        n = len(self.region_models)
        idx = np.full(ql.shape, n, dtype=np.intp)
        decided = np.zeros(ql.shape, dtype=bool)
        for k, (model, consts) in enumerate(self.region_models):
            with np.errstate(invalid="ignore"):
                g = np.asarray(model.implicit(self.case, ql, qg, **dict(consts)), dtype=float)
            below = (g < 0) & ~decided
            idx[below] = k
            decided |= below
        names = np.array(list(self.regime_names) + [""]) if n else np.array([""])
        idx[~(np.isfinite(ql) & np.isfinite(qg))] = len(names) - 1
        return names[idx]

    def regime_at(self, ql: float, qg: float) -> str:
        """Regime name at one point (convenience wrapper of :meth:`classify`)."""
        return str(self.classify(float(ql), float(qg)))

    # ----------------------------------------------------------------------------------------
    def axes(self, kind: str) -> Axes:
        """Axis converters for ``kind`` in :data:`AXIS_KINDS`.

        "flow": (Q_L, Q_G) [m^3/s]; "superficial_velocity": (U_SL, U_SG) [m/s];
        "reynolds": (Re_SL, Re_SG); "weber": (We_SL, We_SG); "flow_ratio": (Q_L [m^3/s], Q_G/Q_L).
        Groups use the hydraulic diameter and the flow area of the section.
        """
        f = self.case.fluid
        area = float(self.case.section.area)
        d = conduit_diameter(self.case)
        arr = lambda v: np.asarray(v, dtype=float)  # noqa: E731
        if kind == "flow":
            return Axes(kind, "liquid flow rate Q_L [m^3/s]", "gas flow rate Q_G [m^3/s]", "m^3/s", "m^3/s",
                        lambda ql, qg: (arr(ql), arr(qg)), lambda x, y: (arr(x), arr(y)))
        if kind == "superficial_velocity":
            return Axes(kind, "superficial liquid velocity U_SL [m/s]", "superficial gas velocity U_SG [m/s]",
                        "m/s", "m/s", lambda ql, qg: (arr(ql) / area, arr(qg) / area),
                        lambda x, y: (arr(x) * area, arr(y) * area))
        if kind == "reynolds":
            cl = f.rho_l * d / (f.mu_l * area)
            cg = f.rho_g * d / (f.mu_g * area)
            return Axes(kind, "superficial liquid Reynolds number Re_SL [-]",
                        "superficial gas Reynolds number Re_SG [-]", "-", "-",
                        lambda ql, qg: (arr(ql) * cl, arr(qg) * cg), lambda x, y: (arr(x) / cl, arr(y) / cg))
        if kind == "weber":
            cl = f.rho_l * d / (f.sigma * area ** 2)
            cg = f.rho_g * d / (f.sigma * area ** 2)
            return Axes(kind, "superficial liquid Weber number We_SL [-]",
                        "superficial gas Weber number We_SG [-]", "-", "-",
                        lambda ql, qg: (arr(ql) ** 2 * cl, arr(qg) ** 2 * cg),
                        lambda x, y: (np.sqrt(arr(x) / cl), np.sqrt(arr(y) / cg)))
        if kind == "flow_ratio":
            return Axes(kind, "liquid flow rate Q_L [m^3/s]", "gas-to-liquid flow ratio Q_G/Q_L [-]", "m^3/s", "-",
                        lambda ql, qg: (arr(ql), arr(qg) / arr(ql)), lambda x, y: (arr(x), arr(y) * arr(x)))
        raise ValueError(f"axes kind must be one of {', '.join(AXIS_KINDS)}, got {kind!r}")


def _readonly_bool(a) -> np.ndarray:
    a = np.array(a, dtype=bool)
    a.flags.writeable = False
    return a


def _regions(case, chain, fns, samples, crossing_x, edge_x, regime_names, box):
    """Region polygons by the sequence rule, computed column-wise in log-log space."""
    x0, x1, ylo, yhi = box
    if not chain:
        return []
    grid = [np.array([x0, x1])] + [s[0] for s in samples]
    grid += [np.asarray(c, dtype=float) for c in crossing_x] + [np.asarray(e, dtype=float) for e in edge_x]
    X = np.unique(np.concatenate(grid))
    X = X[(X >= x0) & (X <= x1)]
    ymid = 10.0 ** (0.5 * (ylo + yhi))
    rows = []
    for (model, consts), f in zip(chain, fns):
        y = f(X)
        nan = ~np.isfinite(y)
        if nan.any():
            # no line at these Q_L: the whole column is on one side; NaN g counts as "above the line"
            g = np.asarray(model.implicit(case, 10.0 ** X[nan], ymid, **consts), dtype=float)
            y[nan] = np.where(g < 0, np.inf, -np.inf)
        rows.append(np.clip(y, ylo, yhi))
    Y = np.array(rows)
    eps = 1e-9 * (yhi - ylo)
    out = []
    n = len(chain)
    for k in range(n + 1):
        lower = np.full(X.shape, ylo) if k == 0 else np.maximum(Y[:k].max(axis=0), ylo)
        upper = np.full(X.shape, yhi) if k == n else Y[k]
        w = upper - lower
        pos = w > eps
        i = 0
        while i < len(X):
            if not pos[i]:
                i += 1
                continue
            j = i
            while j + 1 < len(X) and pos[j + 1]:
                j += 1
            top_x, top_y, bot_x, bot_y = [], [], [], []
            if i > 0:  # closing point where the region pinches off on the left
                t = w[i - 1] / (w[i - 1] - w[i])
                xs = X[i - 1] + t * (X[i] - X[i - 1])
                top_x.append(xs)
                top_y.append(upper[i - 1] + t * (upper[i] - upper[i - 1]))
            top_x += list(X[i:j + 1])
            top_y += list(upper[i:j + 1])
            if j + 1 < len(X):  # pinch on the right
                t = w[j] / (w[j] - w[j + 1])
                top_x.append(X[j] + t * (X[j + 1] - X[j]))
                top_y.append(upper[j] + t * (upper[j + 1] - upper[j]))
            bot_x = list(X[i:j + 1][::-1])
            bot_y = list(lower[i:j + 1][::-1])
            px = np.array(top_x + bot_x)
            py = np.array(top_y + bot_y)
            keep = np.ones(px.size, dtype=bool)
            keep[1:] = (np.abs(np.diff(px)) > 1e-15) | (np.abs(np.diff(py)) > 1e-15)
            px, py = px[keep], py[keep]
            if px.size >= 3:
                out.append(Region(regime_names[k], _ro(10.0 ** px), _ro(10.0 ** py)))
            i = j + 1
    return out
