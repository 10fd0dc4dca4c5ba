"""Chart composition: from a case to boundary curves, regime regions and point classification.

:meth:`Chart.build` is the one path from a :class:`~lowgmap.physics.case.Case` to a regime chart; the
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
zone lines are comparison lines (:data:`DEFAULT_MODELS`). When the case states vertical upward or
(near-)horizontal flow, the buoyancy-inclusive lines of that orientation are added and the
hand-over rule of :mod:`lowgmap.physics.models.tube_gravity` decides which family defines the
regions (Eötvös number below or above 1; :func:`default_models`). For an open section (groove, wedge
channel, polygon with an open side) the corner capillary-separation family of
:mod:`lowgmap.physics.models.corner` is the default.

Regime schemes: the sequence rule is one scheme among others
-------------------------------------------------------------
How region-defining lines make regimes is a :class:`RegimeScheme`. The sequence rule above is
:data:`CHAIN`, used whenever no chosen model belongs to another scheme. A model family whose
regimes form a two-dimensional partition (e.g. bubbles isolated or merging x separated or carried
through, plus blow-through and gas ingestion) supplies a :class:`PartitionScheme`: its member
models (set as the ``scheme`` attribute of each model) and a *rule*, a vectorised function from the
values of the members' implicit functions (negative below a line, positive on or above it, NaN
where undefined) to a regime name. With such a scheme:

1. the chosen models that belong to it define the regions (in the scheme's member order); every
   other chosen model is a comparison line;
2. :meth:`Chart.classify` evaluates the members' implicit functions and applies the rule;
3. each line is sampled adaptively in log-log axes, from the model's own parametric pieces
   (``line_pieces(case, **constants)`` returning :class:`LinePiece` objects) when it has them, else
   from ``qg_of_ql``; lines are clipped to the chart range (crossings of the range edges and of
   other lines located by root finding on the exact line);
4. the region polygons are the faces of the chart box cut by all region-defining lines
   (``shapely.ops.polygonize`` of their union with the box, in log-log space), each named by
   classifying a point inside it, and faces of the same regime merged;
5. a region-defining line is drawn only where it separates two different regimes (elsewhere it
   lies inside one regime and bounds nothing).

Regimes carry flags (:class:`RegimeInfo`, e.g. ``separates_gas``) shown by :attr:`Chart.separates_gas`.
The scheme types and :class:`LinePiece` belong to the model layer (:mod:`lowgmap.physics.models.regimes`);
they are re-exported here for existing callers.

Every line is sampled by the one adaptive sampler of :mod:`lowgmap.physics.chart.sampling` (the
margins use it too), each use with its own tolerance.
"""
from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np

from lowgmap.physics import surrogates
from lowgmap.physics.case import ModelChoice
from lowgmap.physics.chart.lines import end_samples, piece_function
from lowgmap.physics.chart.sampling import mask_runs, sample_line
from lowgmap.physics.models import tube as tube_models
from lowgmap.physics.models import tube_gravity
from lowgmap.physics.models.boundary import BoundaryModel, resolve_model
from lowgmap.physics.models.regimes import (CHAIN, ChainScheme, LinePiece, PartitionScheme, RegimeInfo,
                                            RegimeScheme)
from lowgmap.physics.properties.groups import conduit_diameter, positive_flows
from lowgmap.physics.roots import brentq_known, illinois

__all__ = ["BoundaryCurve", "Intersection", "Region", "Axes", "Chart", "AXIS_KINDS", "DEFAULT_MODELS",
           "default_models", "RegimeInfo", "RegimeScheme", "ChainScheme", "PartitionScheme", "CHAIN",
           "LinePiece"]

#: Default model names by section family ("closed" tubes and ducts, "open" channels) and, for closed
#: sections with a stated orientation, the buoyancy-inclusive family of that orientation ("vertical
#: upward", "horizontal"; :mod:`lowgmap.physics.models.tube_gravity`). For closed sections the first
#: models that chain by regime names define the regions and the rest are comparison lines; the
#: open-section models form a partition scheme (:mod:`lowgmap.physics.models.corner`).
DEFAULT_MODELS: dict[str, tuple[str, ...]] = {
    "closed": tube_models.TUBE_MODEL_NAMES,
    "open": ("corner_confinement", "corner_separation", "corner_merging", "corner_blow_through",
             "open_channel_ingestion"),
    "vertical upward": tube_gravity.VERTICAL_UPWARD_MODEL_NAMES,
    "horizontal": tube_gravity.HORIZONTAL_MODEL_NAMES,
}

#: Axis kinds accepted by :meth:`Chart.axes`.
AXIS_KINDS = ("flow", "superficial_velocity", "reynolds", "weber", "flow_ratio")

_N_START = 25          # initial samples per curve (uniform in log Q_L)
_TOL = 1e-3            # allowed chord deviation, as a fraction of the chart's log Q_G span
_MAX_POINTS = 4000     # cap on samples per curve
_DEPTH = 14            # refinement passes
_SCHEME_TOL = 2e-4     # chord deviation allowed on partition charts, fraction of the chart box (log-log)
_SCHEME_N0 = 33        # initial samples of a line piece
_SCHEME_DEPTH = 22     # refinement passes of a line piece
_SCHEME_MAX = 6000     # cap on samples per piece
_PREVIEW_STEP = 1e-4   # a preview locates the ends of a piece's stretches to this share of its parameter range
#: Chord tolerances of a preview chart (``Chart.build(..., preview=True)``) are this many times the usual ones:
#: 2e-3 of the chart box on partition charts, about one pixel of a 600-pixel plot.
PREVIEW_FACTOR = 10.0
_OFFSET = 1e-6         # side-probe distance for "does this line separate two regimes" (box units)


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
    """Default model names for the case's section family (open or closed) and orientation.

    Open sections: the corner family. Closed sections without orientation (or with one that has no
    buoyancy-inclusive family: vertical downward flow, inclinations other than vertical upward and
    within 10 deg of horizontal): the low-gravity lines, exactly as before orientation existed.
    Otherwise both families, ordered by the hand-over rule
    (:func:`lowgmap.physics.models.tube_gravity.handover`): below Eötvös number 1 the low-gravity lines
    come first and define the regions, at or above it the buoyancy-inclusive lines do; the other
    family follows as comparison lines, flagged outside their validity.
    """
    if getattr(case.section, "is_open", False):
        return DEFAULT_MODELS["open"]
    if not tube_gravity.gravity_family(case):
        return DEFAULT_MODELS["closed"]
    h = tube_gravity.handover(case)
    return h.region_models + h.comparison_models


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


def _log_curve(model, case, consts):
    """x = log10 Q_L  ->  y = log10 Q_G on the line (NaN where none)."""
    def f(x):
        q = np.asarray(model.qg_of_ql(case, 10.0 ** np.asarray(x, dtype=float), **consts), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(q > 0, np.log10(np.where(q > 0, q, 1.0)), np.nan)
    return f


def _sample(f, x0, x1, tol, extra):
    """Samples (x, y) of y = f(x) on [x0, x1], chords within ``tol`` vertically (NaN where no line)."""
    x, (y,) = sample_line(lambda t: (f(t),), x0, x1, tol=tol, n_start=_N_START, breakpoints=extra,
                          min_step=1e-7 * (x1 - x0), max_passes=_DEPTH, max_points=_MAX_POINTS)
    return x, np.array(y)


def _sign_change_roots(fns, problems, xtol: float = 1e-13, rtol: float = 1e-13):
    """Roots of many problems at once: ``problems`` are (i, j, level, x, d) with d = f_i(x) - f_j(x)
    (``j`` None: d = f_i(x) - level) on the samples x; ``fns`` the vectorised line functions. Returns the
    roots of each problem in increasing x: samples where d is exactly 0, and between consecutive samples
    where d changes sign the root to ``xtol + rtol |x|`` (:func:`lowgmap.physics.roots.illinois`).
    """
    out: list[list] = [[] for _ in problems]
    brackets = []                              # (problem, slot in its list, end with d < 0, end with d > 0, ...)
    for p, (_, _, _, x, d) in enumerate(problems):
        ok = np.isfinite(d)
        for s in range(len(x) - 1):
            if not (ok[s] and ok[s + 1]):
                continue
            if d[s] == 0.0:
                out[p].append(x[s])
            elif d[s] * d[s + 1] < 0:
                lo, hi = (s, s + 1) if d[s] < 0 else (s + 1, s)
                out[p].append(math.nan)
                brackets.append((p, len(out[p]) - 1, x[lo], x[hi], d[lo], d[hi]))
        if len(x) and ok[-1] and d[-1] == 0.0:
            out[p].append(x[-1])
    if not brackets:
        return out
    owner = np.array([b[0] for b in brackets])
    lines: dict[int, list[int]] = {}       # line -> positions of the brackets whose function reads it
    for q, p in enumerate(owner):
        i, j = problems[p][0], problems[p][1]
        lines.setdefault(i, []).append(q)
        if j is not None:
            lines.setdefault(j, []).append(q)

    def g(xc, idx):
        at = dict(zip(idx.tolist(), xc.tolist()))
        val = {}
        for k, qs in lines.items():            # each line once, at the points of all its open brackets
            qs = [q for q in qs if q in at]
            if qs:
                v = fns[k](np.array([at[q] for q in qs]))
                for q, vq in zip(qs, np.asarray(v, dtype=float).tolist()):
                    val[(k, q)] = vq
        res = np.empty(len(idx))
        for n, q in enumerate(idx.tolist()):
            i, j, level = problems[owner[q]][:3]
            res[n] = val[(i, q)] - (level if j is None else val[(j, q)])
        return res

    roots = illinois(g, [b[2] for b in brackets], [b[3] for b in brackets], [b[4] for b in brackets],
                     [b[5] for b in brackets], iterations=200, xtol=xtol, rtol=rtol, pick="closer")
    for (p, slot, *_), r in zip(brackets, roots.tolist()):
        out[p][slot] = r
    return out


def _clip(x, y, ylo, yhi):
    """Keep the samples inside [ylo, yhi] (log10); NaN rows between pieces. Returns (ql, qg) [m^3/s]."""
    span = 1e-9 * (yhi - ylo)
    with np.errstate(invalid="ignore"):
        inside = np.isfinite(y) & (y >= ylo - span) & (y <= yhi + span)
    y = np.clip(y, ylo, yhi)
    qx, qy = [], []
    for i, j in mask_runs(inside):
        if qx:
            qx.append([math.nan])
            qy.append([math.nan])
        qx.append(x[i:j])
        qy.append(y[i:j])
    if not qx:
        return np.empty(0), np.empty(0)
    return 10.0 ** np.concatenate(qx), 10.0 ** np.concatenate(qy)


# --------------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class Chart:
    """A regime chart for one case (immutable; build it with :meth:`Chart.build`).

    Attributes
    ----------
    case : Case
    boundaries : tuple of BoundaryCurve   every chosen line (region-defining first, in sequence order;
        with a partition scheme a region-defining line is drawn only where it separates two regimes)
    intersections : tuple of Intersection   crossings of any two lines inside the chart range
    regions : tuple of Region   regime regions clipped to the chart range
    warnings : tuple of str     things the engineer must know (gravity, duct approximation, validity…)
    regime_names : tuple of str   regimes of the region-defining sequence, by increasing gas fraction
    region_models : tuple of (BoundaryModel, constants)   the region-defining lines, in sequence
        (chain scheme) or in the scheme's member order (partition scheme)
    comparison_models : tuple of (BoundaryModel, constants)
    scheme : RegimeScheme   how the region-defining lines make regimes (:data:`CHAIN` unless the
        chosen models belong to a :class:`PartitionScheme`)
    exact : bool   built with the full solves instead of the surrogates (:mod:`lowgmap.physics.surrogates`);
        later evaluations of its models (margins, classification) use the same (:meth:`solves`)
    preview : bool   built at preview resolution for a slider being dragged (:meth:`build` with
        ``preview=True``): the lines of a partition chart drawn to :data:`PREVIEW_FACTOR` times the usual chord
        tolerance, the ends of their stretches and their crossings of the box edges located to
        :data:`_PREVIEW_STEP` of the piece's parameter range, and their crossings left where the chords
        cross; its margins are computed at preview resolution too
        (:data:`lowgmap.physics.chart.lines.PREVIEW_TOL`) and say so. Never the basis of a verdict.
    """

    case: object
    boundaries: tuple
    intersections: tuple
    regions: tuple
    warnings: tuple
    regime_names: tuple
    region_models: tuple
    comparison_models: tuple
    scheme: RegimeScheme = None
    exact: bool = False
    preview: bool = False

    def __post_init__(self):
        if self.scheme is None:
            object.__setattr__(self, "scheme", CHAIN)

    def solves(self):
        """Context in which this chart's models are evaluated again (margins, classification): the full
        solves when the chart was built with ``exact=True`` (:func:`lowgmap.physics.surrogates.exact`),
        otherwise the caller's setting."""
        return surrogates.exact() if self.exact else contextlib.nullcontext()

    # ----------------------------------------------------------------------------------------
    @classmethod
    def build(cls, case, models=None, *, exact: bool = False, preview: bool = False) -> "Chart":
        """Compose the chart of ``case``.

        Parameters
        ----------
        case : Case
        models : sequence, optional
            Registry names, :class:`~lowgmap.physics.case.ModelChoice` objects (name + constant
            overrides), :class:`~lowgmap.physics.models.boundary.BoundaryModel` objects or (model, params)
            pairs. Default: ``case.models``, or when that is empty the defaults for the section
            (:func:`default_models`). Names are looked up first among the case's own empirical
            boundaries (:func:`lowgmap.physics.models.boundary.case_boundaries`), then in the registry. When a
            chosen model belongs to a :class:`PartitionScheme` (its ``scheme`` attribute), that
            scheme makes the regimes (see the module notes); otherwise the sequence rule does.
        exact : bool, optional
            True: use the full solves instead of the surrogates of
            :mod:`lowgmap.physics.surrogates` (open-channel Stokes resistance over the half-angle,
            critical-flow similarity curve), for this chart and every later evaluation of its models
            (margins, classification). Also True inside ``with lowgmap.physics.surrogates.exact():``.
        preview : bool, optional
            True: preview resolution, for the frames drawn while a slider is dragged (see the class
            attribute ``preview``); the physics, the models and the surrogates are the same, only the
            sampling of the lines is coarser. The chart of the value released is built without it.

        Returns
        -------
        Chart

        Raises
        ------
        ValueError
            Unknown model or constant, constant out of range, model listed twice, or a model the
            caller chose explicitly that does not apply to the case (e.g. a closed-tube model
            for an open section). Default models that do not apply are left out with a warning
            (one warning for all models left out for the same reason), and so are models chosen
            explicitly whose mechanism is physically absent for the case (their optional
            ``inactive_reason(case)`` returns the reason, e.g. a corner that does not wet).

        Examples
        --------
        >>> from lowgmap.physics.examples import example_case
        >>> from lowgmap.physics.geometry.sections import Circle
        >>> case = example_case(Circle(0.0127), g=1e-4 * 9.80665, flow_range=(1e-7, 1e-3, 1e-7, 1e-2))
        >>> chart = Chart.build(case)
        >>> chart.regime_names
        ('dispersed bubbles', 'elongated bubbles / slugs', 'annular (gas core)')
        >>> str(chart.classify(1e-4, 1e-5))
        'dispersed bubbles'
        """
        exact = bool(exact) or surrogates.exact_requested()
        with surrogates.exact(exact):
            chart = cls._build(case, models, bool(preview))
        object.__setattr__(chart, "exact", exact)
        object.__setattr__(chart, "preview", bool(preview))
        return chart

    @classmethod
    def _build(cls, case, models, preview: bool = False) -> "Chart":
        fr = case.flow_range
        x0, x1 = math.log10(fr.ql_min), math.log10(fr.ql_max)
        ylo, yhi = math.log10(fr.qg_min), math.log10(fr.qg_max)
        warnings: list[str] = []

        chosen = []
        left_out: dict[str, list[str]] = {}
        for model, params, explicit in _resolve(case, models):
            reason = model.applies_to(case)
            if reason is not None:
                inactive = getattr(model, "inactive_reason", None)
                if explicit and not (callable(inactive) and inactive(case)):
                    raise ValueError(f"boundary model {model.name} does not apply to this case: {reason}")
                left_out.setdefault(reason, []).append(model.label)
                continue
            chosen.append((model, model.resolve_constants(params)))
        for reason, labels in left_out.items():
            warnings.append(f"Left out {'; '.join(labels)}: {reason}")
        scheme = next((getattr(m, "scheme") for m, _ in chosen
                       if isinstance(getattr(m, "scheme", None), RegimeScheme)
                       and getattr(m, "scheme") is not CHAIN), None)
        if scheme is not None:
            return cls._build_scheme(case, chosen, scheme, warnings, preview)
        if not chosen:
            why = ""
            if getattr(case.section, "is_open", False) and (
                    not left_out or any("open section" in r for r in left_out)):
                why = (f" Open section ({getattr(case.section, 'kind', 'open')}): the closed-tube criteria do "
                       f"not apply.")
            warnings.append("No boundary model applies to this case: the chart shows no regimes." + why)

        seq = CHAIN.region_indices([m for m, _ in chosen])
        ordered = [chosen[i] for i in seq] + [c for i, c in enumerate(chosen) if i not in seq]
        n_reg = len(seq)
        roles = ["regions"] * n_reg + ["comparison"] * (len(ordered) - n_reg)
        regime_names: tuple[str, ...] = ()
        if n_reg:
            regime_names = tuple([ordered[0][0].regime_below] + [m.regime_above for m, _ in ordered[:n_reg]])

        # sample every line over the liquid range ----------------------------------------
        tol = _TOL * (yhi - ylo)               # (sequence-rule charts are cheap: a preview samples them as usual)
        fns, samples = [], []
        for model, consts in ordered:
            f = _log_curve(model, case, consts)
            bp = np.asarray(model.breakpoints(case, **consts), dtype=float)
            bp = np.log10(bp[bp > 0]) if bp.size else bp
            fns.append(f)
            samples.append(_sample(f, x0, x1, tol, bp))

        # intersections of every pair, crossings of the range's top and bottom edges -----------
        # (all the root searches of the chart in one batch: each line is evaluated once per step for all
        # the brackets that need it, instead of one scalar search per bracket)
        pairs = []                             # (i, j, x, d), d = None where the two lines coincide
        for i in range(len(ordered)):
            for j in range(i + 1, len(ordered)):
                xu = np.union1d(samples[i][0], samples[j][0])
                d = fns[i](xu) - fns[j](xu)
                fin = d[np.isfinite(d)]
                pairs.append((i, j, xu, None if fin.size and np.all(np.abs(fin) < 1e-12) else d))
        edges = [(k, level, xs, ys - level) for k, (xs, ys) in enumerate(samples) for level in (ylo, yhi)]
        found = _sign_change_roots(fns, [(i, j, 0.0, x, d) for i, j, x, d in pairs if d is not None]
                                   + [(k, None, level, x, d) for k, level, x, d in edges])
        intersections = []
        crossing_x: list[list[float]] = [[] for _ in ordered]
        for i, j, xu, d in pairs:
            if d is None:
                warnings.append(f"{ordered[i][0].label} and {ordered[j][0].label} coincide on this chart.")
                continue
            fi = fns[i]
            for xr in found.pop(0):
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
        edge_x: list[list[float]] = [[] for _ in ordered]
        for (k, _, _, _), xs_found in zip(edges, found):
            edge_x[k] += xs_found

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

    @classmethod
    def _build_scheme(cls, case, chosen, scheme: RegimeScheme, warnings: list, preview: bool = False) -> "Chart":
        """Chart of models that belong to a :class:`PartitionScheme` (see the module notes)."""
        fr = case.flow_range
        box = (math.log10(fr.ql_min), math.log10(fr.ql_max), math.log10(fr.qg_min), math.log10(fr.qg_max))
        idx = scheme.region_indices([m for m, _ in chosen])
        ordered = [chosen[i] for i in idx] + [c for i, c in enumerate(chosen) if i not in idx]
        n_reg = len(idx)
        region_models = tuple((m, tuple(sorted(c.items()))) for m, c in ordered[:n_reg])
        comparison_models = tuple((m, tuple(sorted(c.items()))) for m, c in ordered[n_reg:])
        regime_names = scheme.regime_names(region_models)

        def classify_uv(u, v):
            ql, qg = _uv_to_flow(np.asarray(u, dtype=float), np.asarray(v, dtype=float), box)
            ql, qg = positive_flows(ql, qg)
            return scheme.classify(case, region_models, regime_names, ql, qg)

        # lines: sampled pieces, clipped to the chart range -------------------------------------
        lines = []
        for model, consts in ordered:
            runs = []
            for piece in _model_pieces(model, case, consts, box):
                f = _piece_uv(piece, box)
                t, u, v = (_sample_piece(f, piece, _SCHEME_TOL * PREVIEW_FACTOR, _PREVIEW_STEP) if preview
                           else _sample_piece(f, piece, _SCHEME_TOL))
                runs += _clip_runs(f, t, u, v, _PREVIEW_STEP if preview else 1e-14)
            lines.append(runs)

        # intersections of every pair, refined on the exact lines ----------------------------------
        intersections = []
        for i in range(len(ordered)):
            for j in range(i + 1, len(ordered)):
                for p_u, p_v, overlap in _crossings(lines[i], lines[j]):
                    if overlap:
                        warnings.append(f"{ordered[i][0].label} and {ordered[j][0].label} coincide over part "
                                        f"of this chart.")
                        continue
                    # a preview leaves the crossing where the chords cross (within its coarser tolerance)
                    pt = _refine_crossing(lines[i], None if preview else ordered[j], case, box, p_u, p_v)
                    _refine_crossing(lines[j], None, case, box, *pt)
                    ql, qg = _uv_to_flow(np.array([pt[0]]), np.array([pt[1]]), box)
                    intersections.append(Intersection(ordered[i][0].name, ordered[j][0].name,
                                                      float(ql[0]), float(qg[0])))

        # regions: faces of the box cut by the region-defining lines --------------------------------
        regions = _faces(lines[:n_reg], classify_uv, box) if n_reg else []

        # curves: region-defining lines where they separate two regimes; comparison lines whole -------
        curves = []
        active = _active_runs_of(lines[:n_reg], classify_uv)    # one classification for all region lines
        for k, ((model, consts), runs) in enumerate(zip(ordered, lines)):
            if k < n_reg:
                runs = active[k]
            ql, qg = _runs_to_flow(runs, box)
            if getattr(model, "validity_uses_constants", False):
                valid = np.asarray(model.validity_mask(case, ql, qg, **consts), dtype=bool)
            else:
                valid = np.asarray(model.validity_mask(case, ql, qg), dtype=bool)
            valid &= np.isfinite(ql)
            curves.append(BoundaryCurve(
                model.name, model.label, model.citation, _ro(ql), _ro(qg), _readonly_bool(valid),
                model.regime_below, model.regime_above, tuple(sorted(consts.items())),
                "regions" if k < n_reg else "comparison"))

        # warnings ---------------------------------------------------------------------------------
        notes = list(scheme.notes(case, region_models))
        for (model, _), curve in zip(ordered, curves):
            problems = model.validity_problems(case)
            if problems:
                warnings.append(f"The case lies outside the validity range of the sources of {model.label} "
                                f"({'; '.join(problems)}); the line is flagged.")
                continue
            drawn = np.isfinite(curve.ql)
            if drawn.any() and not curve.valid_mask[drawn].all():
                frac = 1.0 - curve.valid_mask[drawn].mean()
                ranges = getattr(model, "validity_note", "") or \
                    ", ".join(v.describe() for v in model.validity) or "the range of its data"
                warnings.append(f"{model.label}: {frac:.0%} of the drawn line lies outside the validity "
                                f"range of its sub-models ({ranges}); that part is flagged.")
        return cls(case, tuple(curves), tuple(intersections), tuple(regions), tuple(notes + warnings),
                   regime_names, region_models, comparison_models, scheme)

    # ----------------------------------------------------------------------------------------
    def classify(self, ql, qg) -> np.ndarray:
        """Regime name at each point (Q_L, Q_G) [m^3/s], vectorised (by the chart's :attr:`scheme`).

        Returns an array of str with the broadcast shape of the inputs (0-d for scalars). Points
        whose flow rates are not finite and > 0, and every point of a chart without regimes, give
        "" (empty string). Points outside the chart range are classified too (the lines extend).
        """
        ql, qg = positive_flows(ql, qg)
        with self.solves():
            return self.scheme.classify(self.case, self.region_models, self.regime_names, ql, qg)

    def regime_at(self, ql: float, qg: float) -> str:
        """Regime name at one point (convenience wrapper of :meth:`classify`)."""
        return str(self.classify(float(ql), float(qg)))

    @property
    def separates_gas(self) -> dict[str, bool]:
        """For each regime of the chart, whether it separates all the gas (from the scheme's flags)."""
        return {name: bool(self.scheme.info(name).separates_gas) for name in self.regime_names}

    def regime_info(self, name: str) -> RegimeInfo:
        """Flags and description of the regime ``name`` (:class:`RegimeInfo`)."""
        return self.scheme.info(name)

    def bounding_models(self, regime: str) -> tuple[int, ...]:
        """Indices into :attr:`region_models` of the lines whose crossing can change a point of ``regime``.

        Sequence rule: lines 0..i for the regime i of the sequence. Partition scheme: every
        region-defining line. Empty for a regime the chart does not have.
        """
        return self.scheme.bounding_indices(self.region_models, self.regime_names, regime)

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
        for i, stop in mask_runs(pos):
            j = stop - 1
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
    return out


# --------------------------------------------------------------------------------------------
# partition-scheme helpers: lines in box units u = (log10 Q_L - x0)/(x1 - x0), v likewise

def _uv_to_flow(u, v, box):
    x0, x1, ylo, yhi = box
    return 10.0 ** (x0 + u * (x1 - x0)), 10.0 ** (ylo + v * (yhi - ylo))


def _model_pieces(model, case, consts, box):
    """The model's own parametric pieces, or one piece t = log10 Q_L from ``qg_of_ql``."""
    own = getattr(model, "line_pieces", None)
    if callable(own):
        return list(own(case, **consts))
    x0, x1, _, _ = box
    bp = np.asarray(model.breakpoints(case, **consts), dtype=float)
    bp = tuple(np.log10(bp[bp > 0])) if bp.size else ()

    def func(t):
        ql = 10.0 ** np.asarray(t, dtype=float)
        return ql, np.asarray(model.qg_of_ql(case, ql, **consts), dtype=float)
    return [LinePiece(x0, x1, func, bp)]


def _piece_uv(piece, box):
    """t -> (u, v) of a line piece in box units (NaN where it has no point)."""
    x0, x1, ylo, yhi = box
    xy = piece_function(piece)

    def f(t):
        x, y = xy(t)
        return (x - x0) / (x1 - x0), (y - ylo) / (yhi - ylo)
    return f


def _sample_piece(f, piece, tol, step: float = 1e-10):
    """Adaptive samples (t, u, v) of a piece: chords straight to ``tol`` box units inside the box.

    Chords whose ends and middle lie more than 5 % of the box beyond one of its edges are not refined; the
    end of a stretch where the piece has values is located to ``step`` times the piece's parameter range. The
    piece is sampled from the start next to its ends (:func:`lowgmap.physics.chart.lines.end_samples`). A
    ``straight`` piece is sampled too: its samples are where the lines ending on it meet it and where the
    regimes on its sides change, which the regions and the drawn boundary parts need.
    """
    t0, t1 = float(piece.t0), float(piece.t1)
    bps = np.concatenate([np.asarray(piece.breakpoints or (), dtype=float).ravel(), end_samples(t0, t1, step)])
    t, uv = sample_line(f, t0, t1, tol=tol, n_start=_SCHEME_N0, breakpoints=bps,
                        min_step=step * (t1 - t0), window=((-0.05, 1.05), (-0.05, 1.05)), window_middle=True,
                        max_passes=_SCHEME_DEPTH, max_points=_SCHEME_MAX)
    if not t.size:
        return np.empty(0), np.empty(0), np.empty(0)
    return t, uv[0], uv[1]


def _outside(u, v):
    return np.maximum(np.maximum(-u, u - 1.0), np.maximum(-v, v - 1.0))


def _snap(u, v):
    """Put a point found on the box edge exactly on it."""
    u, v = min(max(u, 0.0), 1.0), min(max(v, 0.0), 1.0)
    d = [u, 1.0 - u, v, 1.0 - v]
    k = int(np.argmin(d))
    if d[k] < 1e-9:
        if k == 0:
            u = 0.0
        elif k == 1:
            u = 1.0
        elif k == 2:
            v = 0.0
        else:
            v = 1.0
    return u, v


def _clip_runs(f, t, u, v, xtol: float = 1e-14):
    """Runs (t, u, v) of the samples inside the box; crossings of the box edges found on the line (to ``xtol``
    relative in t)."""
    runs: list = []
    if t.size < 2:
        return runs
    fin = np.isfinite(u) & np.isfinite(v)
    with np.errstate(invalid="ignore"):
        inside = fin & (_outside(u, v) <= 1e-12)

    def edge(a, b):
        h = lambda tt: float(_outside(*[w[0] for w in f(np.array([tt]))]))  # noqa: E731
        ha, hb = h(a), h(b)
        if not (math.isfinite(ha) and math.isfinite(hb)) or ha * hb > 0:
            tt = b if abs(hb) < abs(ha) else a
        else:
            tt = brentq_known(h, a, b, ha, hb, xtol=xtol * max(1.0, abs(a)), rtol=max(1e-13, xtol))
        uu, vv = f(np.array([tt]))
        su, sv = _snap(float(uu[0]), float(vv[0]))
        return tt, su, sv

    n = t.size
    for i, j in mask_runs(inside):             # samples i..j-1 inside; edges found where a neighbour is finite
        cur = [edge(t[i - 1], t[i])] if i > 0 and fin[i - 1] else []
        cur += list(zip(t[i:j], u[i:j], v[i:j]))
        if j < n and fin[j]:
            cur.append(edge(t[j - 1], t[j]))
        runs.append(cur)
        # two samples outside in a row: a chord cutting a corner of the box is ignored (within tolerance)
    out = []
    for r in runs:
        arr = np.array(r, dtype=float)
        keep = np.ones(len(arr), dtype=bool)
        keep[1:] = np.diff(arr[:, 0]) > 0
        arr = arr[keep]
        if len(arr) >= 2:
            out.append({"t": arr[:, 0], "u": arr[:, 1], "v": arr[:, 2], "f": f})
    return out


def _extended(r):
    """(u, v) of a run with its free ends (not on the box edge) extended by a hair, so that a line
    ending on another line crosses it."""
    u, v = r["u"].copy(), r["v"].copy()
    for end, nxt in ((0, 1), (-1, -2)):
        if min(u[end], 1.0 - u[end], v[end], 1.0 - v[end]) > 1e-9:
            du, dv = u[end] - u[nxt], v[end] - v[nxt]
            nrm = math.hypot(du, dv)
            if nrm > 0:
                u[end] += 1e-7 * du / nrm
                v[end] += 1e-7 * dv / nrm
    return u, v


def _crossings(runs_a, runs_b):
    """Approximate crossing points (u, v, overlap) of two lines from their sampled runs."""
    from shapely.geometry import LineString

    out = []
    for ra in runs_a:
        la = LineString(np.column_stack(_extended(ra)))
        for rb in runs_b:
            lb = LineString(np.column_stack(_extended(rb)))
            if not la.intersects(lb):
                continue
            hit = la.intersection(lb)
            for g in getattr(hit, "geoms", [hit]):
                if g.is_empty:
                    continue
                if g.geom_type == "Point":
                    out.append((g.x, g.y, False))
                elif g.length > 1e-6:
                    out.append((g.centroid.x, g.centroid.y, True))
                else:
                    out.append((g.centroid.x, g.centroid.y, False))
    uniq = []
    for p in out:                              # one crossing found twice (at a shared vertex): keep one
        if all(math.hypot(p[0] - q[0], p[1] - q[1]) > 1e-9 for q in uniq):
            uniq.append(p)
    return uniq


def _refine_crossing(runs, other, case, box, pu, pv):
    """Put the crossing with ``other`` (model, consts) exactly on the line of ``runs``; insert it there.

    Returns the refined (u, v); the approximate point when the other line's implicit function does
    not change sign across the segment (or is undefined there). With ``other`` None the point
    (already on both lines) is only inserted, its parameter interpolated along the segment.
    """
    best = None
    for r in runs:
        u, v = r["u"], r["v"]
        du, dv = np.diff(u), np.diff(v)
        L2 = du * du + dv * dv
        with np.errstate(invalid="ignore", divide="ignore"):
            w = np.clip(((pu - u[:-1]) * du + (pv - v[:-1]) * dv) / np.where(L2 > 0, L2, 1.0), 0.0, 1.0)
        d2 = (u[:-1] + w * du - pu) ** 2 + (v[:-1] + w * dv - pv) ** 2
        k = int(np.argmin(d2))
        if best is None or d2[k] < best[0]:
            best = (float(d2[k]), r, k, float(w[k]))
    if best is None:
        return pu, pv
    _, r, k, w = best
    f, t = r["f"], r["t"]
    span = 1e-12 * max(1.0, abs(float(t[-1]) - float(t[0])))
    if other is None:
        tt = float(t[k] + w * (t[k + 1] - t[k]))
        if t[k] + span < tt < t[k + 1] - span:
            r["t"] = np.insert(t, k + 1, tt)
            r["u"] = np.insert(r["u"], k + 1, pu)
            r["v"] = np.insert(r["v"], k + 1, pv)
        return pu, pv
    model, consts = other

    def g(tt):
        uu, vv = f(np.array([tt]))
        ql, qg = _uv_to_flow(uu, vv, box)
        with np.errstate(all="ignore"):
            return float(np.asarray(model.implicit(case, ql, qg, **consts), dtype=float).ravel()[0])
    ta, tb = float(t[k]), float(t[k + 1])
    ga, gb = g(ta), g(tb)
    if math.isfinite(ga) and math.isfinite(gb) and ga * gb < 0:
        tt = brentq_known(g, ta, tb, ga, gb, xtol=1e-14 * max(1.0, abs(ta)), rtol=1e-13)
        uu, vv = f(np.array([tt]))
        nu, nv = float(uu[0]), float(vv[0])
        if not (math.isfinite(nu) and math.isfinite(nv)) or _outside(nu, nv) > 1e-9:
            nu, nv, tt = pu, pv, ta + w * (tb - ta)
    else:
        nu, nv, tt = pu, pv, ta + w * (tb - ta)
    if ta + span < tt < tb - span:
        pos = k + 1
        r["t"] = np.insert(t, pos, tt)
        r["u"] = np.insert(r["u"], pos, nu)
        r["v"] = np.insert(r["v"], pos, nv)
    return nu, nv


def _split_holes(poly):
    """Split a polygon with holes into polygons without holes (vertical cuts through the holes)."""
    from shapely.geometry import LineString
    from shapely.ops import split

    if not poly.interiors:
        return [poly]
    hole = poly.interiors[0]
    x = hole.centroid.x
    y0, y1 = poly.bounds[1] - 1.0, poly.bounds[3] + 1.0
    parts = split(poly, LineString([(x, y0), (x, y1)]))
    out = []
    for p in parts.geoms:
        if p.geom_type == "Polygon" and p.area > 0:
            out += _split_holes(p)
    return out


def _faces(lines, classify_uv, box):
    """Regions: faces of the box cut by the region-defining lines, named by classification, merged."""
    from shapely.geometry import LineString, Polygon as SPolygon
    from shapely.ops import polygonize, unary_union

    geoms = [LineString([(0.0, 0.0), (1.0, 0.0), (1.0, 1.0), (0.0, 1.0), (0.0, 0.0)])]
    for runs in lines:
        for r in runs:
            geoms.append(LineString(np.column_stack(_extended(r))))   # free ends extended: they node
    faces = [p for p in polygonize(unary_union(geoms)) if p.area > 1e-14]
    if not faces:
        return []
    pts = [p.representative_point() for p in faces]
    names = classify_uv(np.array([p.x for p in pts]), np.array([p.y for p in pts]))
    out = []
    for name in dict.fromkeys(names.tolist()):
        merged = unary_union([f for f, n in zip(faces, names) if n == name])
        polys = list(getattr(merged, "geoms", [merged]))
        for p in polys:
            if not isinstance(p, SPolygon) or p.area <= 1e-14:
                continue
            for q in _split_holes(p):
                xy = np.asarray(q.exterior.coords)[:-1]
                if len(xy) >= 3:
                    ql, qg = _uv_to_flow(xy[:, 0], xy[:, 1], box)
                    out.append(Region(name, _ro(ql), _ro(qg)))
    return out


def _active_runs(runs, classify_uv):
    """Parts of the runs that separate two different regimes (side probes at each segment's middle)."""
    return _active_runs_of([runs], classify_uv)[0]


def _active_runs_of(lines, classify_uv):
    """:func:`_active_runs` of several lines, with one classification of all their probes."""
    runs = [r for line in lines for r in line]
    owner = [k for k, line in enumerate(lines) for _ in line]
    out: list[list] = [[] for _ in lines]
    probes = []
    for r in runs:
        t, u, v, f = r["t"], r["u"], r["v"], r["f"]
        tm = 0.5 * (t[:-1] + t[1:])
        um, vm = f(tm)
        bad = ~(np.isfinite(um) & np.isfinite(vm))
        um = np.where(bad, 0.5 * (u[:-1] + u[1:]), um)
        vm = np.where(bad, 0.5 * (v[:-1] + v[1:]), vm)
        du, dv = np.diff(u), np.diff(v)
        nrm = np.hypot(du, dv)
        nrm = np.where(nrm > 0, nrm, 1.0)
        nu, nv = -dv / nrm, du / nrm
        probes.append((um + _OFFSET * nu, vm + _OFFSET * nv, um - _OFFSET * nu, vm - _OFFSET * nv))
    if not probes:
        return out
    both = classify_uv(np.concatenate([p[0] for p in probes] + [p[2] for p in probes]),
                       np.concatenate([p[1] for p in probes] + [p[3] for p in probes]))
    half = len(both) // 2
    active_all = np.asarray(both[:half]) != np.asarray(both[half:])
    pos = 0
    for k, r in zip(owner, runs):
        n = len(r["t"]) - 1
        act = active_all[pos:pos + n]
        pos += n
        for i, j in mask_runs(act):            # segments i..j-1 active: samples i..j
            out[k].append({"t": r["t"][i:j + 1], "u": r["u"][i:j + 1], "v": r["v"][i:j + 1], "f": r["f"]})
    return out


def _runs_to_flow(runs, box):
    """Runs joined with NaN rows between them, as (Q_L, Q_G) [m^3/s]."""
    us, vs = [], []
    for r in runs:
        if us:
            us.append([math.nan])
            vs.append([math.nan])
        us.append(r["u"])
        vs.append(r["v"])
    if not us:
        return np.empty(0), np.empty(0)
    u, v = np.concatenate(us), np.concatenate(vs)
    ql, qg = _uv_to_flow(u, v, box)
    return ql, qg


def build_chart(case, models=None, *, exact: bool = False, preview: bool = False) -> Chart:
    """Compose the regime chart of ``case`` (the same as :meth:`Chart.build`).

    Parameters
    ----------
    case : Case
    models : sequence, optional   boundary models (see :meth:`Chart.build`); default: the case's or the
                                  section's default set
    exact : bool, optional        full solves instead of the surrogates (see :meth:`Chart.build`)
    preview : bool, optional      preview resolution for a slider being dragged (see :meth:`Chart.build`)

    Returns
    -------
    Chart
    """
    return Chart.build(case, models, exact=exact, preview=preview)
