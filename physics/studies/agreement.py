r"""Test points against a chart: can each point support a conclusion, and does the chart agree with it.

Two questions are asked of every observed test point (flow rates Q_L, Q_G, observed regime, platform,
residual acceleration g, low-g duration):

1. **Validity** (:func:`point_validity`). Could the test show the low-gravity regime at all?

   * Gravity negligible: the Bond number on the conduit's length scale L (``section.length_scale``:
     the tube diameter, the hydraulic diameter of a duct, the depth of an open channel)

     .. math:: Bo = \frac{(\rho_L - \rho_G)\, g\, L^2}{\sigma} < Bo_\mathrm{max} = 1

     (Brauner 1990: no stratification below 1; the same statement as
     :func:`lowgmap.physics.models.tube.gravity_check`).
   * Enough low-g time: the time the flow needs

     .. math:: t_\mathrm{req} = k_\mathrm{cap}\, \max(t_{ic}, t_{vc})
               + \max(t_\mathrm{transit}, t_\mathrm{mig}), \qquad
               t_\mathrm{transit} = \frac{l_\mathrm{obs}}{\bar u_L} = \frac{l_\mathrm{obs} A}{Q_L + Q_G}

     must fit in the available low-g time with a safety factor, :math:`s\, t_\mathrm{req} \le t_\mathrm{avail}`.
     :math:`t_{ic} = \sqrt{\rho_L L^3/\sigma}` and :math:`t_{vc} = \mu_L L/\sigma` are the capillary
     time scales of the interface after the step into low gravity (:func:`lowgmap.physics.studies.platforms.capillary_times`);
     :math:`\bar u_L` is the mean liquid speed in the liquid-filled part of the section with the no-slip
     void fraction (:func:`lowgmap.physics.models.bubbles.residence_time`), so the transit time is the time the liquid
     that entered after the step takes to reach the observation station at :math:`l_\mathrm{obs}` (default:
     the whole conduit); :math:`t_\mathrm{mig}` is the migration time of the (merged) bubbles to the open
     side (:func:`lowgmap.physics.models.bubbles.migration_time`), counted only when the chart has the corner models of
     :mod:`lowgmap.physics.models.corner`.

   Thresholds are parameters (:class:`ValidityCriteria`): Bo_max = 1 (Brauner 1990); the safety factor
   s = 2 and the capillary multiple k_cap = 1 are common practice, no source. The residual acceleration
   and duration of a point are its own values when given, else its platform's (upper-end residual
   acceleration, see :mod:`lowgmap.physics.studies.platforms`). A point that fails a check is *not valid*: it cannot
   support a conclusion, and each failure is stated in its ``reasons``.

2. **Agreement** (:func:`agreement`). The chart's regime at the point (``Chart.classify``) against the
   observed one, after an optional ``regime_map`` from file labels to chart regime names. A confusion
   matrix is given for the valid points and for all points; the agreement fraction counts points whose
   observed regime is a regime of the chart. Observed labels that are not chart regimes are listed
   (they need a ``regime_map`` entry). Each disagreeing point is assigned to a region-defining
   boundary: the nearest one in (log10 Q_L, log10 Q_G) whose crossing alone would put the point in its
   observed regime (else the nearest boundary of its predicted regime), with its log distance from
   :func:`lowgmap.physics.chart.margins.point_margins`.

3. **Each point on the chart of its own gravity level** (issue: ground test vs flight). When the case states
   the conduit's orientation (:class:`lowgmap.physics.case.Orientation`: the buoyancy-inclusive models are on
   the chart), the gravity level of a point (its own residual acceleration, else its platform's) is an input
   of the chart, not a reason to set the point aside: the points are grouped by equal gravity level, one chart
   is built per level with the case's models (:func:`chart_at_gravity`, the public chart builder
   :func:`lowgmap.physics.chart.composition.build_chart`), and each point is classified, given its margin and
   its blamed boundary on the chart of its level; ``PointCheck.chart_g`` reports the level used. The Bond
   number is still reported but no longer makes a point invalid (a 1-g ground-test point is valid on the 1-g
   chart); the low-g time check still applies. When the orientation is unspecified (the low-gravity chart), the
   rule above holds: the Bond-number check sets high-g points aside and every point is classified on the
   case's chart.

All flows are volumetric at local conditions [m^3/s], times in s, accelerations in m/s^2.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import ClassVar, Mapping, Sequence

import numpy as np

from lowgmap.physics.studies.platforms import capillary_times, find_platform, points_conditions
from lowgmap.physics.chart.summary import bond_number
from lowgmap.physics.validate import positive

__all__ = [
    "ValidityCriteria", "PointValidity", "point_validity", "map_regimes", "ConfusionMatrix", "confusion_matrix",
    "PointCheck", "Disagreement", "BoundaryDisagreements", "Agreement", "agreement", "point_arrays",
    "BRAUNER_1990", "chart_at_gravity", "per_point_gravity",
]

BRAUNER_1990 = ("N. Brauner, \"On the relations between two-phase flows under reduced gravity and earth "
                "experiment\", Int. Commun. Heat Mass Transf. 17(3):271-281, 1990")

_G0 = 9.80665
_PROBE = 1e-3            # step past the nearest point of a line when testing "would crossing it help" [decade]


# =============================================================================================
# validity criteria

@dataclass(frozen=True)
class ValidityCriteria:
    """Thresholds that decide whether a test point can support a conclusion.

    Parameters
    ----------
    bond_max : float            largest Bond number at which gravity counts as negligible [-]
                                (default 1, Brauner 1990)
    safety_factor : float       the available low-g time must be at least this many times the required
                                time [-] (default 2: a choice, common practice, no source; larger is
                                stricter)
    capillary_multiple : float  how many capillary time scales the interface needs to settle after the
                                step into low gravity [-] (default 1: a choice, common practice, no
                                source; larger is stricter)
    observation_length : float or None   distance from the conduit inlet (gas injection) to where the
                                regime is observed [m]; None: the case's conduit length (the longest
                                transit, the strict end)

    Notes
    -----
    :attr:`SOURCES` gives the source of each default, or says that it is a choice. The times are
    order-of-magnitude scales, so the two time factors are judgement, not data: a point is
    "valid" only in that sense.
    """

    #: Where each default comes from (a publication, or "a choice ... no source").
    SOURCES: ClassVar[dict] = {
        "bond_max": "Brauner (1990): Eo < 1, no stratification in reduced gravity",
        "safety_factor": "a choice: common practice, no source",
        "capillary_multiple": "a choice: common practice, no source",
        "observation_length": "design input (default: the conduit length)",
    }

    bond_max: float = 1.0
    safety_factor: float = 2.0
    capillary_multiple: float = 1.0
    observation_length: float | None = None

    def __post_init__(self):
        positive("bond_max", self.bond_max)
        if not positive("safety_factor", self.safety_factor) >= 1.0:
            raise ValueError(f"safety_factor must be >= 1, got {self.safety_factor:g}")
        if not (math.isfinite(self.capillary_multiple) and self.capillary_multiple >= 0):
            raise ValueError(f"capillary_multiple must be >= 0, got {self.capillary_multiple!r}")
        if self.observation_length is not None:
            positive("observation_length", self.observation_length, "m")

    def to_dict(self) -> dict:
        return {"bond_max": self.bond_max, "bond_max_source": "Brauner (1990)",
                "safety_factor": self.safety_factor, "capillary_multiple": self.capillary_multiple,
                "time_factors_source": "common practice, no source",
                "safety_factor_source": self.SOURCES["safety_factor"],
                "capillary_multiple_source": self.SOURCES["capillary_multiple"],
                "observation_length_m": self.observation_length}


# =============================================================================================
# points as arrays

_TEXT = ("test_id", "observed_regime", "platform", "notes")


def point_arrays(points) -> dict:
    """Columns of a test-point table as numpy arrays (SI), with defaults for absent optional columns.

    ``points`` is a :class:`lowgmap.app.files.testpoints.TestPointSet` (its ``points``), a pandas DataFrame or a
    mapping with at least ``ql_m3_s`` and ``qg_m3_s``; optional ``observed_regime``, ``test_id``,
    ``row``, ``platform``, ``g_m_s2`` [m/s^2], ``duration_s`` [s], ``notes``.

    >>> d = point_arrays({"ql_m3_s": [1e-6], "qg_m3_s": [2e-6]})
    >>> d["test_id"].tolist(), d["observed_regime"].tolist(), bool(np.isnan(d["g_m_s2"][0]))
    (['#1'], [''], True)
    """
    table = getattr(points, "points", points)
    try:
        ql = np.asarray(table["ql_m3_s"], dtype=float).ravel()
        qg = np.asarray(table["qg_m3_s"], dtype=float).ravel()
    except (KeyError, TypeError, IndexError):
        raise ValueError("test points need the columns ql_m3_s and qg_m3_s (flow rates in m^3/s)") from None
    n = ql.size
    if qg.size != n:
        raise ValueError(f"ql_m3_s and qg_m3_s must have the same length, got {n} and {qg.size}")

    def col(key, default, kind):
        try:
            has = key in table
        except TypeError:
            has = False
        if not has:
            return default
        v = np.asarray(table[key], dtype=kind).ravel() if kind is float else \
            np.array(["" if x is None or (isinstance(x, float) and math.isnan(x)) else str(x)
                      for x in list(table[key])], dtype=object)
        if v.size != n:
            raise ValueError(f"column {key} has {v.size} values, expected {n}")
        return v

    out = {"ql_m3_s": ql, "qg_m3_s": qg}
    for key in _TEXT:
        out[key] = col(key, np.array([""] * n, dtype=object), str)
    rows = col("row", None, float)
    out["row"] = rows if rows is not None else np.arange(1, n + 1, dtype=float)
    empty_id = out["test_id"] == ""
    if empty_id.any():
        ids = out["test_id"].copy()
        ids[empty_id] = [f"#{int(r)}" if np.isfinite(r) else f"#{i + 1}"
                         for i, r in zip(np.flatnonzero(empty_id), out["row"][empty_id])]
        out["test_id"] = ids
    out["g_m_s2"] = col("g_m_s2", np.full(n, np.nan), float)
    out["duration_s"] = col("duration_s", np.full(n, np.nan), float)
    return out


# =============================================================================================
# validity

@dataclass(frozen=True, eq=False)
class PointValidity:
    """Validity of each test point (arrays, one entry per point, in input order).

    Attributes
    ----------
    g : ndarray              residual acceleration used [m/s^2] (NaN: unknown)
    g_from : ndarray of str  "point", "platform" or "unknown"
    duration : ndarray       low-g time used [s] (NaN: unknown)
    duration_from : ndarray of str   "point", "platform" or "unknown"
    bond : ndarray           Bond number on the conduit length scale [-]
    t_transit : ndarray      transit time over the observation length [s]
    t_capillary : ndarray    max(t_ic, t_vc) [s]
    t_migration : ndarray    bubble migration time to the open side [s] (NaN: no corner models, or the
                             bubbles do not reach the open side)
    t_required : ndarray     required low-g time (before the safety factor) [s]
    valid : ndarray of bool  the point can support a conclusion
    reasons : tuple of tuple of str   why each point is not valid (empty when valid)
    length_scale : float     L of the Bond number and capillary times [m]
    observation_length : float   [m]
    criteria : ValidityCriteria
    """

    g: np.ndarray
    g_from: np.ndarray
    duration: np.ndarray
    duration_from: np.ndarray
    bond: np.ndarray
    t_transit: np.ndarray
    t_capillary: np.ndarray
    t_migration: np.ndarray
    t_required: np.ndarray
    valid: np.ndarray
    reasons: tuple
    length_scale: float
    observation_length: float
    criteria: ValidityCriteria


def _fmt_t(t: float) -> str:
    if not math.isfinite(t):
        return "unknown"
    if t >= 86400.0 * 2:
        return f"{t / 86400.0:.3g} d"
    if t >= 600.0:
        return f"{t / 60.0:.3g} min"
    return f"{t:.3g} s"


def _corner_migration(chart, case, ql, qg):
    """Migration time of the (merged) bubbles at each point, when the chart has corner models."""
    try:
        from lowgmap.physics.models import corner as cm
    except ImportError:  # pragma: no cover - the module ships with physics
        return None
    models = list(getattr(chart, "region_models", ())) + list(getattr(chart, "comparison_models", ()))
    corner = [(m, dict(c)) for m, c in models if m.name in cm.CORNER_MODEL_NAMES]
    if not corner:
        return None
    keys = set(cm.CORNER_SEPARATION.defaults)
    consts = dict(cm.CORNER_SEPARATION.defaults)
    by_name = {m.name: c for m, c in corner}
    for m, c in corner:                                     # separation line's constants win
        if m.name != "corner_separation":
            consts.update({k: v for k, v in c.items() if k in keys})
    consts.update({k: v for k, v in by_name.get("corner_separation", {}).items() if k in keys})
    geom = cm.corner_geometry(case)
    if geom.path is None or geom.reason is not None:
        return None
    f = case.fluid
    with np.errstate(all="ignore"):
        state = cm.bubble_state(case, ql, qg, **consts)
        d = np.asarray(state["effective_diameter"], dtype=float)
        ok = np.isfinite(d) & (d > 0)
        t = np.full(d.shape, np.nan)
        if ok.any():
            from lowgmap.physics.models.bubbles import migration_time
            t[ok] = migration_time(geom.path, d[ok], injection=consts["injection_position"],
                                   confinement_ratio=consts["confinement_ratio"], rho=f.rho_l, mu=f.mu_l,
                                   sigma=f.sigma, contact_angle=geom.contact_angle,
                                   capillary_coefficient=consts["capillary_coefficient"],
                                   hele_shaw_drag=consts["hele_shaw_drag"], film_drag=consts["film_drag"],
                                   form_drag=consts["form_drag"], rho_gas=f.rho_g,
                                   buoyancy_acceleration=cm.migration_buoyancy(case, **consts))
    return t


def per_point_gravity(case) -> bool:
    """True when the case states an orientation: each point then goes on the chart of its own gravity level.

    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.case import Orientation
    >>> per_point_gravity(example_case()), per_point_gravity(example_case(orientation=Orientation.vertical_up()))
    (False, True)
    """
    o = getattr(case, "orientation", None)
    return bool(o is not None and o.is_known)


def point_validity(case, points, criteria: ValidityCriteria | None = None, *, chart=None,
                   own_gravity: bool = False) -> PointValidity:
    r"""Whether each test point can support a conclusion: Bond number and low-g time (see the module notes).

    .. math:: Bo = \frac{\Delta\rho\, g\, L^2}{\sigma} < Bo_\mathrm{max}, \qquad
              s\,\Big(k_\mathrm{cap} \max(t_{ic}, t_{vc}) + \max\big(\tfrac{l_\mathrm{obs} A}{Q_L + Q_G},
              t_\mathrm{mig}\big)\Big) \le t_\mathrm{avail}

    Parameters
    ----------
    case : Case            fluid, section (length scale L, flow area A), conduit length
    points : table         see :func:`point_arrays`
    criteria : ValidityCriteria, optional
    chart : Chart, optional   when it has corner models, the bubble migration time is included
    own_gravity : bool        each point is judged on the chart of its own gravity level
                              (:func:`per_point_gravity`): the Bond number is reported but does not make the
                              point invalid, and the migration time uses the point's gravity level

    Returns
    -------
    PointValidity

    Notes
    -----
    A point whose residual acceleration or duration is unknown (an unknown platform and no value in the
    file) is not valid. The times are order-of-magnitude scales; the safety factor covers their
    prefactors. The capillary settling and the transit are added (the pattern forms at the inlet once
    the interface has adapted, then travels to the observation station).

    Examples
    --------
    Water in a 12.7 mm tube, 1 m observed, 100 + 20 mL/min in a short drop tower (2 s, 1e-3 g0):

    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> case = example_case(Circle(0.0127))
    >>> v = point_validity(case, {"ql_m3_s": [100e-6 / 60], "qg_m3_s": [20e-6 / 60],
    ...                           "platform": ["short drop tower"]})
    >>> round(float(v.bond[0]), 4), round(float(v.t_transit[0]), 2), bool(v.valid[0])
    (0.0217, 63.34, False)
    """
    crit = criteria or ValidityCriteria()
    d = point_arrays(points)
    ql, qg = d["ql_m3_s"], d["qg_m3_s"]
    n = ql.size
    f = case.fluid
    L = float(case.section.length_scale)
    area = float(case.section.area)
    l_obs = float(crit.observation_length if crit.observation_length is not None else case.length)
    g, dur = points_conditions(list(d["platform"]), d["g_m_s2"], d["duration_s"])
    own_g = np.isfinite(d["g_m_s2"]) & (d["g_m_s2"] >= 0)
    own_d = np.isfinite(d["duration_s"]) & (d["duration_s"] > 0)
    g_from = np.where(own_g, "point", np.where(np.isfinite(g), "platform", "unknown")).astype(object)
    d_from = np.where(own_d, "point", np.where(np.isfinite(dur), "platform", "unknown")).astype(object)
    with np.errstate(all="ignore"):
        bo = np.asarray(bond_number(f.rho_l - f.rho_g, g, L, f.sigma), dtype=float)
        flows_ok = np.isfinite(ql) & np.isfinite(qg) & (ql > 0) & (qg >= 0)
        t_tr = np.where(flows_ok, l_obs * area / np.where(flows_ok, ql + qg, 1.0), np.nan)
    tc = capillary_times(f.rho_l, f.mu_l, f.sigma, L)
    t_cap = max(float(tc.inertial), float(tc.viscous))
    t_mig = np.full(n, np.nan)
    if chart is not None and n:
        qlm, qgm = np.where(flows_ok, ql, np.nan), np.where(flows_ok, qg, np.nan)
        if own_gravity:
            for level, idx in _levels(g, case.g):
                got = _corner_migration(chart, case.with_(g=level), qlm[idx], qgm[idx])
                if got is not None:
                    t_mig[idx] = np.asarray(got, dtype=float)
        else:
            got = _corner_migration(chart, case, qlm, qgm)
            if got is not None:
                t_mig = np.asarray(got, dtype=float)
    with np.errstate(invalid="ignore"):
        t_flow = np.where(np.isfinite(t_mig), np.fmax(t_tr, t_mig), t_tr)
        t_req = crit.capillary_multiple * t_cap + t_flow
        time_ok = crit.safety_factor * t_req <= dur
        bo_ok = (bo < crit.bond_max) | bool(own_gravity)
    reasons = []
    for i in range(n):
        why = []
        if not flows_ok[i]:
            why.append("flow rates are not usable (Q_L must be > 0 and Q_G >= 0)")
        plat = str(d["platform"][i])
        unknown_pl = (f"platform {plat!r} is not in the built-in table" if plat and find_platform(plat) is None
                      else "no platform given")
        if g_from[i] == "unknown":
            why.append(f"residual acceleration unknown ({unknown_pl} and the point gives no value)")
        elif not bo_ok[i]:
            why.append(f"Bond number {bo[i]:.3g} >= {crit.bond_max:g} at g = {g[i]:.3g} m/s^2 "
                       f"({g[i] / _G0:.3g} g0) over L = {L * 1e3:.4g} mm: gravity not negligible (Brauner 1990)")
        if d_from[i] == "unknown":
            why.append(f"low-g duration unknown ({unknown_pl} and the point gives no value)")
        elif flows_ok[i] and not time_ok[i]:
            parts = [f"capillary settling {_fmt_t(crit.capillary_multiple * t_cap)}",
                     f"transit {_fmt_t(t_tr[i])} over {l_obs:.4g} m at {l_obs / t_tr[i]:.3g} m/s"]
            if np.isfinite(t_mig[i]):
                parts.append(f"bubble migration {_fmt_t(t_mig[i])}")
            why.append(f"not enough low-g time: needs {_fmt_t(t_req[i])} ({', '.join(parts)}) x safety factor "
                       f"{crit.safety_factor:g} = {_fmt_t(crit.safety_factor * t_req[i])}, has {_fmt_t(dur[i])}")
        reasons.append(tuple(why))
    valid = np.array([not r for r in reasons], dtype=bool)
    return PointValidity(g, g_from, dur, d_from, bo, t_tr, np.full(n, t_cap), t_mig, t_req, valid, tuple(reasons),
                         L, l_obs, crit)


def _levels(g, default_g):
    """[(gravity level, indices)] of the points: equal values of g grouped (unknown g: ``default_g``)."""
    g = np.asarray(g, dtype=float)
    used = np.where(np.isfinite(g), g, float(default_g))
    out = []
    for level in dict.fromkeys(used.tolist()):
        out.append((float(level), np.flatnonzero(used == level)))
    return out


def chart_at_gravity(chart, g: float):
    """The chart of the same case and lines at the residual acceleration ``g`` [m/s^2].

    The chart itself when ``g`` is its case's. Otherwise :func:`lowgmap.physics.chart.composition.build_chart`
    of ``chart.case.with_(g=g)``: with the section's default models when the chart uses only those (so the
    hand-over between the low-gravity and the buoyancy-inclusive families follows the gravity level), else
    with the chart's own (model, constants) pairs.

    Examples
    --------
    >>> from lowgmap.physics.chart.composition import build_chart
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> flight = build_chart(example_case(Circle(0.0127), g=1e-6 * 9.80665, orientation=Orientation.vertical_up()))
    >>> ground = chart_at_gravity(flight, 9.80665)
    >>> ground.case.g, ground.region_models[0][0].name
    (9.80665, 'bubble_slug_taitel_1980')
    """
    from lowgmap.physics.chart.composition import build_chart, default_models

    g = float(g)
    if g == float(chart.case.g):
        return chart
    case = chart.case.with_(g=g)
    pairs = list(getattr(chart, "region_models", ())) + list(getattr(chart, "comparison_models", ()))
    names = {m.name for m, _ in pairs}
    if not chart.case.models and names <= set(default_models(chart.case)) | set(default_models(case)):
        return build_chart(case)
    return build_chart(case, [(m, dict(c)) for m, c in pairs])


# =============================================================================================
# labels

def _norm(s: str) -> str:
    return " ".join(str(s).split()).casefold()


def map_regimes(labels, regime_map: Mapping[str, str] | None, chart_regimes: Sequence[str]) -> np.ndarray:
    """Observed labels renamed to chart regimes.

    ``regime_map`` keys are matched exactly, then ignoring case and repeated spaces; a label (or mapped
    label) that equals a chart regime ignoring case and spaces takes the chart's spelling. Other labels
    are kept as they are (and are then not chart regimes).

    >>> map_regimes(["Annular", "bubbly", "x"], {"bubbly": "dispersed bubbles"}, ["dispersed bubbles", "annular"])
    ['annular', 'dispersed bubbles', 'x']
    """
    rmap = dict(regime_map or {})
    for k, v in rmap.items():
        if not isinstance(k, str) or not isinstance(v, str):
            raise TypeError(f"regime_map must map text to text, got {k!r}: {v!r}")
    folded = {_norm(k): v for k, v in rmap.items()}
    chart = {_norm(r): r for r in chart_regimes}
    out = []
    for lab in labels:
        lab = "" if lab is None else str(lab).strip()
        m = rmap.get(lab)
        if m is None:
            m = folded.get(_norm(lab), lab)
        out.append(chart.get(_norm(m), m))
    return out


# =============================================================================================
# confusion matrix

@dataclass(frozen=True)
class ConfusionMatrix:
    """Counts of observed (rows) against predicted (columns) regimes.

    ``observed`` lists the chart regimes first, then observed labels that are not chart regimes;
    ``predicted`` lists the chart regimes. ``counts[i][j]`` points observed as ``observed[i]`` and
    predicted as ``predicted[j]``.
    """

    observed: tuple
    predicted: tuple
    counts: tuple

    @property
    def total(self) -> int:
        return int(sum(sum(r) for r in self.counts))

    @property
    def agreeing(self) -> int:
        """Points on the diagonal (observed = predicted)."""
        return int(sum(self.counts[i][self.predicted.index(o)] for i, o in enumerate(self.observed)
                       if o in self.predicted))

    @property
    def compared(self) -> int:
        """Points whose observed label is a column (a chart regime)."""
        return int(sum(sum(r) for o, r in zip(self.observed, self.counts) if o in self.predicted))

    @property
    def fraction(self) -> float | None:
        """Agreeing / compared (None when nothing is compared)."""
        c = self.compared
        return self.agreeing / c if c else None

    def count(self, observed: str, predicted: str) -> int:
        return int(self.counts[self.observed.index(observed)][self.predicted.index(predicted)])

    def to_dict(self) -> dict:
        return {"observed": list(self.observed), "predicted": list(self.predicted),
                "counts": [list(r) for r in self.counts], "agreeing": self.agreeing, "compared": self.compared,
                "fraction": self.fraction}

    def format(self, width: int = 16) -> str:
        """Plain-text table (column labels shortened to ``width`` characters)."""
        def cut(s):
            return s if len(s) <= width else s[:width - 1] + "\u2026"
        head = "observed \\ predicted"
        first = max([len(head)] + [len(o) for o in self.observed]) + 2
        lines = [head.ljust(first) + " ".join(cut(p).rjust(width) for p in self.predicted)]
        for o, r in zip(self.observed, self.counts):
            lines.append(o.ljust(first) + " ".join(str(c).rjust(width) for c in r))
        return "\n".join(lines)


def confusion_matrix(observed, predicted, regimes: Sequence[str]) -> ConfusionMatrix:
    """Confusion matrix of observed against predicted labels; empty observed labels are skipped.

    >>> cm = confusion_matrix(["a", "a", "b", "c"], ["a", "b", "b", "a"], ["a", "b"])
    >>> cm.observed, cm.counts, cm.fraction
    (('a', 'b', 'c'), ((1, 1), (0, 1), (1, 0)), 0.6666666666666666)
    """
    regimes = list(regimes)
    cols = list(regimes)
    extra_pred = [p for p in dict.fromkeys(str(x) for x in predicted) if p not in cols]
    cols += extra_pred
    rows = list(regimes) + [o for o in dict.fromkeys(str(x) for x in observed) if o and o not in regimes]
    counts = np.zeros((len(rows), len(cols)), dtype=int)
    for o, p in zip(observed, predicted):
        o = str(o)
        if not o:
            continue
        counts[rows.index(o), cols.index(str(p))] += 1
    return ConfusionMatrix(tuple(rows), tuple(cols), tuple(tuple(int(c) for c in r) for r in counts))


# =============================================================================================
# agreement

@dataclass(frozen=True)
class PointCheck:
    """One test point: validity, observed and predicted regime, and (if it disagrees) the boundary to blame.

    Flows [m^3/s], g [m/s^2], times [s], ``margin`` the symmetric margin of the point in its predicted
    regime (fraction, :func:`lowgmap.physics.chart.margins.symmetric_margins`), ``log_distance`` [decade] to
    ``boundary`` (disagreeing points only); ``chart_g`` the gravity level [m/s^2] of the chart the point was
    classified on (its own level when the case states an orientation, else the case's).
    """

    index: int
    test_id: str
    row: int | None
    ql: float
    qg: float
    label: str
    observed: str
    predicted: str
    platform: str
    g: float
    g_from: str
    duration: float
    duration_from: str
    bond: float
    t_transit: float
    t_capillary: float
    t_migration: float
    t_required: float
    valid: bool
    reasons: tuple
    notes: tuple
    comparable: bool
    agrees: bool | None
    margin: float
    boundary: str | None = None
    boundary_label: str | None = None
    log_distance: float | None = None
    crossing_explains: bool | None = None
    chart_g: float = math.nan

    def to_dict(self) -> dict:
        def num(x):
            return None if x is None or (isinstance(x, float) and not math.isfinite(x)) else x
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        d["reasons"], d["notes"] = list(self.reasons), list(self.notes)
        for k in ("ql", "qg", "g", "duration", "bond", "t_transit", "t_capillary", "t_migration", "t_required",
                  "margin", "log_distance", "chart_g"):
            d[k] = num(d[k])
        d["ql_m3_s"], d["qg_m3_s"] = d.pop("ql"), d.pop("qg")
        d["g_m_s2"], d["duration_s"] = d.pop("g"), d.pop("duration")
        d["chart_g_m_s2"] = d.pop("chart_g")
        return d


@dataclass(frozen=True)
class Disagreement:
    """A point whose observed regime differs from the chart's, attributed to one boundary."""

    test_id: str
    observed: str
    predicted: str
    valid: bool
    log_distance: float | None
    crossing_explains: bool


@dataclass(frozen=True)
class BoundaryDisagreements:
    """Disagreeing points attributed to one region-defining boundary (nearest first)."""

    name: str
    label: str
    points: tuple

    def to_dict(self) -> dict:
        return {"name": self.name, "label": self.label, "points": [p.__dict__ for p in self.points]}


@dataclass(frozen=True, eq=False)
class Agreement:
    """Result of :func:`agreement`: everything a test-point panel or report shows.

    Attributes
    ----------
    points : tuple of PointCheck   every point, in input order
    regimes : tuple of str          the chart's regimes
    unknown_labels : tuple of (str, int)   observed labels (after the map) that are not chart regimes,
                                    with their counts
    confusion_valid, confusion_all : ConfusionMatrix   valid points only; all points
    fraction_valid, fraction_all : float or None       agreement fractions (None: nothing compared)
    by_boundary : tuple of BoundaryDisagreements       disagreeing points per boundary
    criteria : ValidityCriteria
    regime_map : tuple of (str, str)
    length_scale, observation_length : float   [m]
    chart : Chart              the chart passed in
    level_charts : tuple of (float, Chart)   the chart of each gravity level used [m/s^2] (one entry, the chart
                               passed in, when the orientation is unspecified)
    """

    points: tuple
    regimes: tuple
    unknown_labels: tuple
    confusion_valid: ConfusionMatrix
    confusion_all: ConfusionMatrix
    fraction_valid: float | None
    fraction_all: float | None
    by_boundary: tuple
    criteria: ValidityCriteria
    regime_map: tuple = ()
    length_scale: float = math.nan
    observation_length: float = math.nan
    chart: object = field(default=None, repr=False, compare=False)
    level_charts: tuple = field(default=(), repr=False, compare=False)

    @property
    def gravity_levels(self) -> tuple:
        """Gravity levels [m/s^2] of the charts the points were classified on, in order of first use."""
        return tuple(g for g, _ in self.level_charts)

    @property
    def own_gravity(self) -> bool:
        """True when each point was classified on the chart of its own gravity level (:func:`per_point_gravity`)."""
        case = getattr(self.chart, "case", None)
        return case is not None and per_point_gravity(case)

    @property
    def validity_rule(self) -> str:
        """The rule that made each point valid or not, in one sentence (the one wording every view prints).

        With the points on the charts of their own gravity levels the Bond number is reported but does not
        decide validity (the buoyancy-inclusive lines account for gravity); otherwise it must be below
        ``bond_max`` (Brauner 1990).
        """
        c = self.criteria
        if self.own_gravity:
            bond = (f"each point is classified on the chart of its own gravity level (the Bond number on "
                    f"L = {self.length_scale * 1e3:.4g} mm is reported, not a condition)")
        else:
            bond = f"the Bond number on L = {self.length_scale * 1e3:.4g} mm is below {c.bond_max:g} (Brauner 1990)"
        return (f"A point is valid when {bond} and the low-g time is at least {c.safety_factor:g} × the time the "
                f"flow needs (capillary settling × {c.capillary_multiple:g} + transit over "
                f"{self.observation_length:.4g} m; factors: common practice, no source).")

    @property
    def n_points(self) -> int:
        return len(self.points)

    @property
    def n_valid(self) -> int:
        return sum(p.valid for p in self.points)

    @property
    def disagreeing(self) -> tuple:
        """Comparable points whose observed regime differs from the chart's."""
        return tuple(p for p in self.points if p.agrees is False)

    def to_dict(self) -> dict:
        """JSON-ready dict (SI units; None where there is no value)."""
        return {
            "regimes": list(self.regimes), "n_points": self.n_points, "n_valid": self.n_valid,
            "fraction_valid": self.fraction_valid, "fraction_all": self.fraction_all,
            "compared_valid": self.confusion_valid.compared, "compared_all": self.confusion_all.compared,
            "unknown_labels": [{"label": k, "count": c} for k, c in self.unknown_labels],
            "confusion_valid": self.confusion_valid.to_dict(), "confusion_all": self.confusion_all.to_dict(),
            "by_boundary": [b.to_dict() for b in self.by_boundary],
            "criteria": self.criteria.to_dict(), "regime_map": dict(self.regime_map),
            "length_scale_m": self.length_scale, "observation_length_m": self.observation_length,
            "gravity_levels_m_s2": list(self.gravity_levels),
            "points": [p.to_dict() for p in self.points],
        }

    def summary(self) -> str:
        """One paragraph in plain words."""
        def pct(x):
            return "n/a" if x is None else f"{100 * x:.0f} %"
        text = (f"{self.n_points} test point(s), {self.n_valid} valid for a conclusion. Agreement with the chart: "
                f"{pct(self.fraction_valid)} of {self.confusion_valid.compared} valid point(s), "
                f"{pct(self.fraction_all)} of {self.confusion_all.compared} point(s) in all.")
        if self.unknown_labels:
            text += " Observed labels that are not chart regimes (map them): " + ", ".join(
                f"{k!r} ({c})" for k, c in self.unknown_labels) + "."
        return text


def _blame(chart, ql, qg, observed):
    """(name, label, log distance, crossing explains) of the boundary to blame for one disagreeing point."""
    from lowgmap.physics.chart.margins import point_margins

    pm = point_margins(chart, ql, qg)
    x0, y0 = math.log10(ql), math.log10(qg)
    cands, fallback = [], []
    for b in pm.boundaries:
        if b.role != "regions" or b.log_distance is None:
            continue
        if b.direction is not None:
            step = b.log_distance + _PROBE
            px, py = x0 + step * b.direction[0], y0 + step * b.direction[1]
            if str(chart.classify(10.0 ** px, 10.0 ** py)) == observed:
                cands.append((b.log_distance, b))
        if b.limits_regime:
            fallback.append((b.log_distance, b))
    if cands:
        d, b = min(cands, key=lambda t: t[0])
        return b.name, b.label, float(d), True
    pool = fallback or [(b.log_distance, b) for b in pm.boundaries
                        if b.role == "regions" and b.log_distance is not None]
    if not pool:
        return None, None, None, False
    d, b = min(pool, key=lambda t: t[0])
    return b.name, b.label, float(d), False


def _model_notes(chart, ql, qg):
    """Per point: region-defining lines whose source validity range the point lies outside."""
    out = [[] for _ in range(ql.size)]
    for model, consts in chart.region_models:
        try:
            if getattr(model, "validity_uses_constants", False):
                mask = np.asarray(model.validity_mask(chart.case, ql, qg, **dict(consts)), dtype=bool)
            else:
                mask = np.asarray(model.validity_mask(chart.case, ql, qg), dtype=bool)
        except (ValueError, TypeError):
            continue
        mask = np.broadcast_to(mask, ql.shape)
        for i in np.flatnonzero(~mask):
            out[i].append(f"outside the validity range of {model.label}")
    return out


def agreement(chart, points, *, regime_map: Mapping[str, str] | None = None,
              criteria: ValidityCriteria | None = None) -> Agreement:
    """Validity of each test point and agreement of the chart with the observed regimes.

    Parameters
    ----------
    chart : Chart           from :meth:`lowgmap.physics.chart.composition.Chart.build`
    points : table          test points (see :func:`point_arrays`); a :class:`lowgmap.app.files.testpoints.TestPointSet` works
    regime_map : dict, optional   ``{"file label": "chart regime"}`` (see :func:`map_regimes`)
    criteria : ValidityCriteria, optional

    Returns
    -------
    Agreement

    Notes
    -----
    Agreement fractions count only points whose observed regime (after the map) is a chart regime;
    the others appear as extra rows of the confusion matrices and in ``unknown_labels``. Each
    disagreeing point is attributed to the nearest region-defining line whose crossing alone puts the
    point in its observed regime (``crossing_explains`` True), else to the nearest line bounding its
    predicted regime (the observed regime is then more than one line away, or the scheme does not
    allow it there).

    Examples
    --------
    >>> from lowgmap.physics.chart.composition import Chart
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.models.boundary import PowerLawBoundary
    >>> case = example_case(length=0.05)                        # water/air, 10 mm tube, 5 cm
    >>> chart = Chart.build(case, [PowerLawBoundary("rig_line", 1.0, 1.0, "bubbles", "slugs")])  # Q_G = Q_L
    >>> pts = {"ql_m3_s": [1e-5, 1e-5, 1e-5], "qg_m3_s": [0.5e-5, 2e-5, 0.8e-5],
    ...        "observed_regime": ["bubbles", "slugs", "slugs"], "platform": ["orbital station"] * 3}
    >>> res = agreement(chart, pts)
    >>> res.fraction_valid, res.by_boundary[0].name, round(res.by_boundary[0].points[0].log_distance, 4)
    (0.6666666666666666, 'rig_line', 0.0685)
    """
    from lowgmap.physics.chart.margins import symmetric_margins

    crit = criteria or ValidityCriteria()
    d = point_arrays(points)
    ql, qg = d["ql_m3_s"], d["qg_m3_s"]
    n = ql.size
    own = per_point_gravity(chart.case)
    val = point_validity(chart.case, d, crit, chart=chart, own_gravity=own)
    # one chart per gravity level (own gravity), else the chart passed in for every point
    groups = _levels(val.g, chart.case.g) if own else [(float(chart.case.g), np.arange(n))]
    level_charts = []
    chart_of = np.zeros(n, dtype=int)
    for k, (level, idx) in enumerate(groups):
        level_charts.append((level, chart_at_gravity(chart, level) if own else chart))
        chart_of[idx] = k
    regimes = tuple(dict.fromkeys(r for _, ch in level_charts for r in ch.regime_names)) if level_charts \
        else tuple(chart.regime_names)
    observed = map_regimes(d["observed_regime"], regime_map, regimes)
    predicted = np.array([""] * n, dtype=object)
    margin = np.full(n, np.nan)
    notes: list = [[] for _ in range(n)]
    for k, (_, ch) in enumerate(level_charts):
        idx = np.flatnonzero(chart_of == k)
        if not idx.size:
            continue
        predicted[idx] = np.asarray(ch.classify(ql[idx], qg[idx])).astype(str).reshape(-1)
        m, _, _ = symmetric_margins(ch, ql[idx], qg[idx])
        margin[idx] = np.asarray(m, dtype=float).reshape(-1)
        for j, note in zip(idx.tolist(), _model_notes(ch, ql[idx], qg[idx])):
            notes[j] = note
    predicted = predicted.astype(str) if n else np.array([], dtype=str)
    checks = []
    for i in range(n):
        level, ch = level_charts[chart_of[i]]
        fr = ch.case.flow_range
        obs = observed[i]
        comparable = bool(obs) and obs in ch.regime_names
        note = list(notes[i])
        if not obs:
            note.insert(0, "no observed regime")
        elif obs not in regimes:
            note.insert(0, f"observed regime {obs!r} is not a regime of this chart (add it to the regime map)")
        elif not comparable:
            note.insert(0, f"observed regime {obs!r} is not a regime of the chart at its gravity level "
                           f"({level:.4g} m/s^2)")
        if own:
            note.append(f"classified on the chart at its own gravity level, {level:.4g} m/s^2 "
                        f"({level / _G0:.3g} g0)")
        if not (fr.ql_min <= ql[i] <= fr.ql_max and fr.qg_min <= qg[i] <= fr.qg_max):
            note.append("outside the chart range (the lines are extended)")
        agrees = (obs == predicted[i]) if comparable else None
        blame = (None, None, None, None)
        if agrees is False and ql[i] > 0 and qg[i] > 0:
            blame = _blame(ch, float(ql[i]), float(qg[i]), obs)
        row = d["row"][i]
        checks.append(PointCheck(
            i, str(d["test_id"][i]), int(row) if np.isfinite(row) else None, float(ql[i]), float(qg[i]),
            str(d["observed_regime"][i]), obs, str(predicted[i]), str(d["platform"][i]),
            float(val.g[i]), str(val.g_from[i]), float(val.duration[i]), str(val.duration_from[i]), float(val.bond[i]),
            float(val.t_transit[i]), float(val.t_capillary[i]), float(val.t_migration[i]), float(val.t_required[i]),
            bool(val.valid[i]), val.reasons[i], tuple(note), comparable, agrees, float(margin[i]), *blame,
            chart_g=float(level)))
    valid = np.array([c.valid for c in checks], dtype=bool)
    obs_arr = np.array(observed, dtype=object)
    cm_all = confusion_matrix(obs_arr, predicted, regimes)
    cm_valid = confusion_matrix(obs_arr[valid] if n else obs_arr, predicted[valid] if n else predicted, regimes)
    unknown: dict[str, int] = {}
    for o in observed:
        if o and o not in regimes:
            unknown[o] = unknown.get(o, 0) + 1
    by_name: dict[str, list] = {}
    labels: dict[str, str] = {}
    for c in checks:
        if c.agrees is False and c.boundary is not None:
            by_name.setdefault(c.boundary, []).append(
                Disagreement(c.test_id, c.observed, c.predicted, c.valid, c.log_distance, bool(c.crossing_explains)))
            labels[c.boundary] = c.boundary_label or c.boundary
    order = list(dict.fromkeys(m.name for _, ch in level_charts for m, _ in ch.region_models))
    by_boundary = tuple(
        BoundaryDisagreements(name, labels[name], tuple(sorted(by_name[name], key=lambda p: (p.log_distance or 0.0))))
        for name in sorted(by_name, key=lambda k: order.index(k) if k in order else len(order)))
    rmap = tuple(sorted((str(k), str(v)) for k, v in (regime_map or {}).items()))
    used = tuple((lv, ch) for k, (lv, ch) in enumerate(level_charts) if (chart_of == k).any()) or \
        ((float(chart.case.g), chart),)
    return Agreement(tuple(checks), regimes, tuple(unknown.items()), cm_valid, cm_all, cm_valid.fraction,
                     cm_all.fraction, by_boundary, crit, rmap, val.length_scale, val.observation_length, chart, used)
