r"""Surrogates of the open-channel solves: Stokes resistance over the wedge half-angle, critical-flow similarity.

Two pieces of the open-channel model cost a mesh solve or a root search each time a geometry input
changes; both are replaced here by smooth tables built once.

**Stokes resistance of a wedge channel over its half-angle.** The cross-section Stokes problem of a
pinned wedge channel scaled to wall length 1 depends only on the half-angle α and the arc half-angle β
of the free surface (the contact angle only sets where the pinned range ends, see
:meth:`~lowgmap.physics.models.open_channel.geometry.PinnedChannel.stokes_shape`). With
:math:`s = \beta/\beta_e(\alpha)`, :math:`\beta_e = \pi/2 - \alpha - 0.05`, the table stores

.. math:: g(\alpha_i, s_j) = \ln\bigl(K(\alpha_i, s_j\beta_e(\alpha_i))\,\sin^2\alpha_i\bigr)

at Chebyshev nodes :math:`\alpha_i` over :data:`WEDGE_HALF_ANGLE_DEG` and the 21 Chebyshev nodes
:math:`s_j` of the per-shape tables; a new half-angle costs one barycentric interpolation per
:math:`s_j` instead of 21 mesh solves. The table ships with the package
(physics/data/open_channel_wedge_stokes.npz with a SHA-256 of its arrays, checked on loading; built by
:func:`build_wedge_table`;
``python -m lowgmap.physics.models.open_channel.surrogate --rebuild`` rebuilds it).

**Critical-flow similarity.** Without streamwise curvature, gravity or a fixed inlet radius, the
steady one-dimensional model made dimensionless with the channel's length scale L, σ and ρ
(:math:`\tilde Q = Q/\sqrt{\sigma L^3/\rho}`, :math:`\tilde\kappa = \kappa L`) keeps only the shape
(α, θ or an aspect ratio), the entrance loss :math:`K_e` and one group

.. math:: \Lambda = \frac{\mu\, l}{L\sqrt{\rho\sigma L}}
          = \frac{1}{\tilde Q}\Bigl[\Delta\tilde I_1 - \tilde Q^2\,\Delta\tilde I_2\Bigr]_{\tilde\kappa_\mathrm{in}}
            ^{\tilde\kappa_\mathrm{end}},
          \qquad \frac{Q_\mathrm{crit}}{\sqrt{\sigma L^3/\rho}} = F(\text{shape}, K_e;\ \Lambda)

(l the open length, μ the viscosity; :math:`\tilde I_{1,2}` the cumulative integrals of
:class:`~lowgmap.physics.models.open_channel.tables.SectionTables`). With the inlet curvature as the
parameter, the reservoir inlet gives :math:`\tilde Q` in closed form, the choking curvature follows
from :math:`\tilde H(\tilde\kappa_\mathrm{end}) = \tilde Q^2`, and Λ is a difference of table values:
the whole curve F(Λ) of a shape costs a few vectorised table look-ups (:func:`similarity_curve`),
and a critical flow for any length, density, viscosity or surface tension is one interpolation
(:func:`critical_flow_rates`). The exact path (:class:`~lowgmap.physics.models.open_channel.hydraulics.SteadyFlow`
with a root search per flow) is used under :func:`lowgmap.physics.surrogates.exact`.

Measured errors against the full solves are in :data:`lowgmap.physics.surrogates.SURROGATE_ERRORS`
and in the theory manual (physics/manual/surrogates.md).
"""
from __future__ import annotations

import math
import os
import sys
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
from scipy.interpolate import BarycentricInterpolator

from lowgmap.physics import cache, surrogates
from lowgmap.physics.validate import format_number, non_negative, positive

__all__ = ["WEDGE_HALF_ANGLE_DEG", "WEDGE_TABLE_PATH", "build_wedge_table", "wedge_stokes_table",
           "SimilarityCurve", "similarity_curve", "critical_flow_rates", "similarity_applies", "measure_errors",
           "RATIO_BOXES", "RATIO_TABLE_PATHS", "build_ratio_table", "ratio_stokes_table"]

#: Half-angle range [deg] of the shipped wedge Stokes table; outside it the per-shape solve is used.
WEDGE_HALF_ANGLE_DEG = (2.0, 80.0)

#: Chebyshev nodes in the half-angle of the shipped table.
WEDGE_ALPHA_NODES = 33

WEDGE_TABLE_PATH = os.path.join(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))),
                                "data", "open_channel_wedge_stokes.npz")


def _cheb(lo, hi, n):
    j = np.arange(n)
    return lo + 0.5 * (hi - lo) * (1.0 - np.cos(np.pi * j / (n - 1)))


# =============================================================================================
# wedge Stokes table over the half-angle
# =============================================================================================
def build_wedge_table(path=WEDGE_TABLE_PATH, n_alpha=WEDGE_ALPHA_NODES, verbose=False) -> dict:
    """Solve the wedge Stokes tables at Chebyshev nodes of the half-angle and save them (.npz).

    Parameters
    ----------
    path : str or None   output file (default physics/data/open_channel_wedge_stokes.npz; None: do not write)
    n_alpha : int        Chebyshev nodes over :data:`WEDGE_HALF_ANGLE_DEG`
    verbose : bool       print progress

    Returns
    -------
    dict   ``alpha`` [rad], ``s`` (β/β_e), ``g`` = ln(K sin²α) of shape (n_alpha, n_s), and the settings
    """
    from lowgmap.physics.models.open_channel import tables
    from lowgmap.physics.models.open_channel.geometry import WedgeChannel

    lo, hi = (math.radians(v) for v in WEDGE_HALF_ANGLE_DEG)
    alpha = _cheb(lo, hi, n_alpha)
    n_s = tables.TABLE_NODES
    s = _cheb(0.0, 1.0, n_s)
    g = np.empty((n_alpha, n_s))
    for i, a in enumerate(alpha):
        nodes, K = tables.build_stokes_table(WedgeChannel(float(a), 1.0, 0.0)).values()
        bend = nodes[-1]
        if not np.allclose(nodes, s * bend, rtol=1e-12, atol=1e-15):
            raise RuntimeError("wedge table nodes do not follow the Chebyshev layout")
        g[i] = np.log(K * math.sin(a) ** 2)
        if verbose:
            print(f"alpha = {math.degrees(a):7.3f} deg done", flush=True)
    data = {"alpha": alpha, "s": s, "g": g, "end_margin": np.float64(tables.TABLE_END_MARGIN),
            "n_s": np.int64(n_s)}
    data["sha256"] = np.array(cache.arrays_digest(data))
    if path:
        os.makedirs(os.path.dirname(os.path.abspath(path)), exist_ok=True)
        np.savez_compressed(path, **data)
    return data


@lru_cache(maxsize=1)
def _wedge_data():
    """(alpha nodes, barycentric interpolator of g over alpha) of the shipped table, or None if unusable."""
    from lowgmap.physics.models.open_channel import tables

    try:
        with np.load(WEDGE_TABLE_PATH, allow_pickle=False) as d:
            arrays = {name: d[name] for name in d.files}
        stored = str(arrays.pop("sha256"))
        if stored != cache.arrays_digest(arrays):
            return None                     # damaged file: the mesh solves are used instead
        alpha, s, g = arrays["alpha"], arrays["s"], arrays["g"]
        margin, n_s = float(arrays["end_margin"]), int(arrays["n_s"])
    except (OSError, KeyError, ValueError, EOFError):
        return None
    if n_s != tables.TABLE_NODES or margin != tables.TABLE_END_MARGIN or g.shape != (alpha.size, s.size):
        return None                         # built for other table settings: not used
    return alpha, BarycentricInterpolator(alpha, g)


def wedge_stokes_table(alpha: float):
    r"""Stokes resistance table of a wedge channel (wall length 1, contact angle 0) from the shipped surrogate.

    .. math:: K(\beta_j) = \frac{\exp g(\alpha, s_j)}{\sin^2\alpha}, \qquad \beta_j = s_j\,\beta_e(\alpha)

    Parameters
    ----------
    alpha : float   half-angle [rad]

    Returns
    -------
    (nodes, K) or None   the same layout as
    :func:`~lowgmap.physics.models.open_channel.tables.stokes_table`; None outside
    :data:`WEDGE_HALF_ANGLE_DEG` or when the shipped table is missing

    Examples
    --------
    >>> import math
    >>> nodes, K = wedge_stokes_table(math.radians(30.0))
    >>> len(nodes), bool(K[0] > 0)
    (21, True)
    """
    data = _wedge_data()
    lo, hi = (math.radians(v) for v in WEDGE_HALF_ANGLE_DEG)
    if data is None or not lo <= alpha <= hi:
        return None
    from lowgmap.physics.models.open_channel import tables

    _, interp = data
    g = np.asarray(interp(float(alpha)), dtype=float).ravel()
    bend = 0.5 * math.pi - alpha - tables.TABLE_END_MARGIN
    nodes = _cheb(0.0, bend, g.size)
    return nodes, np.exp(g) / math.sin(alpha) ** 2


# =============================================================================================
# rectangular groove and parallel plates: Stokes tables over the aspect ratio
# =============================================================================================
#: Aspect-ratio boxes of the shipped tables, per channel kind: (ratio name, [(low, high), ...]). The
#: boxes meet where the end of the table switches from "surface touches the bottom / the other surface"
#: to "0.05 rad before the arc is tangent to the wall" (depth/width 0.5, breadth/gap 1): the end, and so
#: the node layout, has a kink there, so each side has its own smooth table.
RATIO_BOXES = {
    "rectangular_groove": ("depth/width", [(0.1, 0.5), (0.5, 5.0)]),
    "parallel_plates": ("breadth/gap", [(0.2, 1.0), (1.0, 10.0)]),
}

#: Chebyshev nodes in ln(ratio) per box of the shipped aspect-ratio tables.
RATIO_NODES = 17

RATIO_TABLE_PATHS = {kind: os.path.join(os.path.dirname(WEDGE_TABLE_PATH), f"open_channel_{kind}_stokes.npz")
                     for kind in RATIO_BOXES}


def _ratio_channel(kind: str, r: float):
    from lowgmap.physics.models.open_channel.geometry import ParallelPlates, RectangularGroove

    return RectangularGroove(1.0, float(r), 0.0) if kind == "rectangular_groove" else ParallelPlates(1.0, float(r), 0.0)


def _ratio_of(shape) -> float:
    return shape.depth / shape.width if shape.kind == "rectangular_groove" else shape.breadth / shape.gap


def build_ratio_table(kind: str, path=None, n_ratio: int = RATIO_NODES, verbose=False) -> dict:
    """Solve the Stokes tables of a groove or plates at Chebyshev nodes of ln(aspect ratio) in each box of
    :data:`RATIO_BOXES` and save them (.npz with a SHA-256 of its arrays).

    Returns
    -------
    dict   per box b: ``x{b}`` = ln ratio nodes, ``g{b}`` = ln K of shape (n_ratio, 21); ``s`` = β/β_e nodes
    """
    from lowgmap.physics.models.open_channel import tables

    if kind not in RATIO_BOXES:
        raise ValueError(f"kind must be one of {sorted(RATIO_BOXES)}, got {kind!r}")
    n_s = tables.TABLE_NODES
    data = {"s": _cheb(0.0, 1.0, n_s), "end_margin": np.float64(tables.TABLE_END_MARGIN), "n_s": np.int64(n_s)}
    for b, (lo, hi) in enumerate(RATIO_BOXES[kind][1]):
        x = _cheb(math.log(lo), math.log(hi), n_ratio)
        g = np.empty((n_ratio, n_s))
        for i, xi in enumerate(x):
            built = tables.build_stokes_table(_ratio_channel(kind, math.exp(xi)))
            g[i] = np.log(built["K"])
            if verbose:
                print(f"{kind} ratio {math.exp(xi):8.4f} done", flush=True)
        data[f"x{b}"], data[f"g{b}"] = x, g
    data["sha256"] = np.array(cache.arrays_digest(data))
    path = RATIO_TABLE_PATHS[kind] if path is None else path
    if path:
        os.makedirs(os.path.dirname(os.path.abspath(path)), exist_ok=True)
        np.savez_compressed(path, **data)
    return data


@lru_cache(maxsize=4)
def _ratio_data(kind: str):
    """Per box: (ln-ratio range, barycentric interpolator of ln K), or None when the shipped file is unusable."""
    from lowgmap.physics.models.open_channel import tables

    try:
        with np.load(RATIO_TABLE_PATHS[kind], allow_pickle=False) as d:
            arrays = {name: d[name] for name in d.files}
        if str(arrays.pop("sha256")) != cache.arrays_digest(arrays):
            return None
        if int(arrays["n_s"]) != tables.TABLE_NODES or float(arrays["end_margin"]) != tables.TABLE_END_MARGIN:
            return None
        out = []
        for b in range(len(RATIO_BOXES[kind][1])):
            x, g = arrays[f"x{b}"], arrays[f"g{b}"]
            out.append(((float(x[0]), float(x[-1])), BarycentricInterpolator(x, g)))
        return tuple(out)
    except (OSError, KeyError, ValueError, EOFError):
        return None


def ratio_stokes_table(shape):
    r"""Stokes resistance table of a rectangular groove or parallel plates (length scale 1, contact angle 0)
    from the shipped surrogate over the aspect ratio.

    .. math:: K(\beta_j) = \exp g(\ln r, s_j), \qquad \beta_j = s_j\,\beta_e(r)

    Parameters
    ----------
    shape : RectangularGroove or ParallelPlates   scaled to length scale 1 (``stokes_shape()``)

    Returns
    -------
    (nodes, K) or None   None outside :data:`RATIO_BOXES` or when the shipped table is missing or damaged

    Examples
    --------
    >>> from lowgmap.physics.models.open_channel import RectangularGroove
    >>> nodes, K = ratio_stokes_table(RectangularGroove(1.0, 0.25))
    >>> len(nodes), bool(K[0] > 0)
    (21, True)
    """
    kind = getattr(shape, "kind", "")
    if kind not in RATIO_BOXES:
        return None
    data = _ratio_data(kind)
    if data is None:
        return None
    x = math.log(_ratio_of(shape))
    for (lo, hi), interp in data:
        if lo <= x <= hi:
            g = np.asarray(interp(x), dtype=float).ravel()
            bend = shape.table_end(_end_margin())
            return _cheb(0.0, bend, g.size), np.exp(g)
    return None


def _end_margin() -> float:
    from lowgmap.physics.models.open_channel import tables

    return tables.TABLE_END_MARGIN


# =============================================================================================
# critical-flow similarity
# =============================================================================================
def similarity_applies(channel, inlet_pressure=None, inlet_radius=None, resistance=None,
                       streamwise_curvature=False, g_axial=0.0) -> bool:
    """Whether the similarity curve gives this channel's critical flow (reservoir at the gas pressure,
    Stokes resistance, no streamwise curvature, no axial gravity, a channel with a length scale)."""
    from lowgmap.physics.models.open_channel.geometry import PinnedChannel

    return (isinstance(channel, PinnedChannel) and inlet_pressure in (None, 0.0) and inlet_radius is None
            and resistance is None and not streamwise_curvature and g_axial == 0.0)


@dataclass(frozen=True)
class SimilarityCurve:
    r"""Dimensionless critical flow :math:`F(\Lambda)` of one channel shape and entrance loss.

    Attributes
    ----------
    log_lam : array   ln Λ at the tabulated points (increasing)
    log_q : array     ln F at those points (decreasing)
    lam_up : float    Λ of the largest inlet flow; for Λ <= lam_up the critical flow is ``q_up``
    q_up : float      F of the largest inlet flow (the fold of the inlet, or speed index 1 at the inlet)
    lim_up : str      what limits the flow for Λ <= lam_up (a key of
                      :data:`~lowgmap.physics.models.open_channel.hydraulics.LIMITS`)
    lim_kind : array of str   what limits the flow at each tabulated point
    """

    log_lam: np.ndarray
    log_q: np.ndarray
    lam_up: float
    q_up: float
    lim_up: str
    lim_kind: np.ndarray
    _pchip: object = field(default=None, repr=False, compare=False)

    def __post_init__(self):
        from scipy.interpolate import PchipInterpolator

        object.__setattr__(self, "_pchip", PchipInterpolator(self.log_lam, self.log_q, extrapolate=False))

    def _log_f(self, x):
        xs, ys = self.log_lam, self.log_q
        out = np.asarray(self._pchip(x), dtype=float)
        lo, hi = x < xs[0], x > xs[-1]
        # beyond the table: straight lines in log-log through the end intervals (viscous limit F ~ 1/Lambda)
        s_lo = (ys[1] - ys[0]) / (xs[1] - xs[0])
        s_hi = (ys[-1] - ys[-2]) / (xs[-1] - xs[-2])
        out = np.where(lo, ys[0] + s_lo * (x - xs[0]), out)
        return np.where(hi, ys[-1] + s_hi * (x - xs[-1]), out)

    def F(self, lam):
        """Dimensionless critical flow at Λ (array; Λ >= 0)."""
        lam = np.asarray(lam, dtype=float)
        with np.errstate(divide="ignore"):
            x = np.log(np.maximum(lam, 1e-300))
        q = np.exp(self._log_f(x))
        return np.where(lam <= self.lam_up, self.q_up, np.minimum(q, self.q_up))

    @staticmethod
    def group(L, length, rho, mu, sigma):
        r"""(scale, Λ): :math:`\sqrt{\sigma L^3/\rho}` [m^3/s] and :math:`\Lambda = \mu l/(L\sqrt{\rho\sigma L})`
        for the length scale ``L`` and open length ``length`` (arrays broadcast; inputs not checked)."""
        return np.sqrt(sigma * L ** 3 / rho), mu * length / (L * np.sqrt(rho * sigma * L))

    def q_crit(self, L, length, rho, mu, sigma):
        """Critical flow rate [m^3/s] = scale F(Λ) (:meth:`group`), for already checked inputs (the fast path
        of the corner family's ingestion line; :func:`critical_flow_rates` checks and adds the mechanism)."""
        scale, lam = self.group(L, length, rho, mu, sigma)
        return scale * self.F(lam)

    def limited_by(self, lam):
        """What limits the critical flow at Λ (array of :data:`LIMITS` keys)."""
        lam = np.asarray(lam, dtype=float)
        with np.errstate(divide="ignore"):
            x = np.log(np.maximum(lam, 1e-300))
        i = np.clip(np.searchsorted(self.log_lam, x), 0, len(self.log_lam) - 1)
        return np.where(lam <= self.lam_up, self.lim_up, self.lim_kind[i])


#: Points of the inlet-curvature grid of a similarity curve.
_SIM_POINTS = 400


@lru_cache(maxsize=256)
def _curve_cached(shape, K_e: float) -> SimilarityCurve:
    return _build_curve(shape, K_e)


def similarity_curve(channel, K_e: float = 0.0) -> SimilarityCurve:
    r"""Dimensionless critical-flow curve :math:`F(\Lambda)` of a pinned channel's shape and entrance loss.

    .. math:: \frac{Q_\mathrm{crit}}{\sqrt{\sigma L^3/\rho}} = F(\text{shape}, K_e;\ \Lambda),
              \qquad \Lambda = \frac{\mu\,l}{L\sqrt{\rho\sigma L}}

    Parameters
    ----------
    channel : PinnedChannel   ParallelPlates, RectangularGroove or WedgeChannel (its size does not matter)
    K_e : float               entrance loss coefficient (>= 0)

    Returns
    -------
    SimilarityCurve

    Notes
    -----
    Reservoir at the gas pressure, Stokes resistance tables (their wedge surrogate unless
    :func:`lowgmap.physics.surrogates.exact` is active), no streamwise curvature. Cached per shape.

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.models.open_channel import WedgeChannel
    >>> cur = similarity_curve(WedgeChannel(math.radians(10.0), 1.0, math.radians(5.0)))
    >>> bool(cur.F(10.0) < cur.F(0.1) <= cur.q_up)
    True
    """
    K_e = non_negative("K_e", K_e)
    if not similarity_applies(channel):
        raise TypeError(f"the similarity curve needs a pinned channel (ParallelPlates, RectangularGroove, "
                        f"WedgeChannel), got {type(channel).__name__}")
    if surrogates.exact_requested():
        return _build_curve(channel.normalized(), float(K_e))
    return _curve_cached(channel.normalized(), float(K_e))


def _build_curve(shape, K_e: float) -> SimilarityCurve:
    """Tabulate Λ against F over the inlet curvature of the channel ``shape`` (length scale 1, ρ = σ = 1)."""
    from lowgmap.physics.models.open_channel.geometry import WedgeChannel
    from lowgmap.physics.models.open_channel.hydraulics import SteadyFlow

    flow = SteadyFlow(shape, 1.0, 1.0, 1.0, K_e)
    tab = flow.tables
    kf, q_up = flow.fold()
    # state at the fold (inviscid-like limit, Λ below lam_up)
    _, _, L_up = flow.choke(q_up)
    lam_up = float(L_up) if math.isfinite(L_up) else math.inf
    S_up = float(flow.S(kf, q_up))
    if kf >= shape.kappa_max * (1 - 1e-12):
        lim_up = "meniscus_limit"
    elif S_up >= 1.0 - 1e-9:
        lim_up = "speed_index"
    elif flow.depins_at(kf, q_up):
        lim_up = "depinning"
    else:
        lim_up = "inlet"
    # inlet curvature grid: geometric near 0 (small flows, long channels), dense near the fold
    t = np.linspace(0.0, 1.0, _SIM_POINTS - 80)
    kin = kf * np.concatenate([np.geomspace(1e-6, 0.02, 80, endpoint=False), 1.0 - 0.98 * (1.0 - t) ** 2])
    q = np.asarray(flow.Q_in(kin), dtype=float)
    target = q * q                                     # rho Q^2 / sigma with rho = sigma = 1
    kend = _kappa_choke_vec(tab, shape, kin, target)
    d1, d2 = _dI_vec(tab, shape, kin, kend)
    lam = (d1 - target * d2) / q                       # mu l / L^1.5 with mu = 1: Lambda
    kmax = shape.kappa_max
    lim = np.where(kend < kmax * (1 - 1e-12), "speed_index", "meniscus_limit").astype("<U16")
    if isinstance(shape, WedgeChannel) and shape.contact_angle > 0.0:
        kt = shape.kappa_pinned
        at_kt = np.abs(kend - kt) <= 1e-9 * kt
        with np.errstate(divide="ignore", invalid="ignore"):
            s_kt = np.sqrt(target / float(tab.H(kt)))
        lim = np.where(at_kt & (s_kt < 1.0 - 1e-9), "depinning", lim)
    ok = np.isfinite(lam) & (lam > 0)
    lam, q, lim = lam[ok], q[ok], lim[ok]
    order = np.argsort(lam)
    lam, q, lim = lam[order], q[order], lim[order]
    keep = np.concatenate([[True], np.diff(np.log(lam)) > 1e-12])
    lam, q, lim = lam[keep], q[keep], lim[keep]
    if np.any(np.diff(q) > 0):
        raise RuntimeError("critical flow is not monotone in the length for this shape; use the exact solve")
    return SimilarityCurve(np.log(lam), np.log(q), lam_up, float(q_up), lim_up, lim)


def _kappa_choke_vec(tab, ch, kin, target):
    """Vectorised :meth:`SectionTables.kappa_choke` (smallest kappa >= kin with H(kappa) <= target)."""
    from lowgmap.physics.models.open_channel.geometry import WedgeChannel

    kin = np.asarray(kin, dtype=float)
    target = np.asarray(target, dtype=float)
    out = np.empty_like(kin)
    kt = tab.kt
    both = np.asarray(tab.H(np.append(kin, kt)), dtype=float)        # one call (its cost is per call, not per value)
    H_in, H_kt = both[:-1], float(both[-1])
    done = H_in <= target
    out[done] = kin[done]
    pinned = ~done & (target >= H_kt)                  # crossing in the pinned part
    if np.any(pinned):
        kg, Hg = tab.kgrid, tab.Hgrid
        good = np.isfinite(Hg) & (Hg > 0)
        kg, lh = kg[good], np.log(Hg[good])
        # H decreases with kappa: interpolate kappa against -ln H, then Newton-polish on the exact H
        k = np.interp(-np.log(target[pinned]), -lh, kg)
        k = np.clip(k, kin[pinned], kt)
        n = k.size
        for _ in range(4):
            dk = 1e-7 * np.maximum(k, 1e-12)
            hh = np.asarray(tab.H(np.concatenate([k, np.minimum(k + dk, kt)])), dtype=float)
            h, h2 = hh[:n], hh[n:]
            slope = (np.log(h2) - np.log(h)) / np.maximum(np.minimum(k + dk, kt) - k, 1e-300)
            with np.errstate(divide="ignore", invalid="ignore"):
                step = (np.log(target[pinned]) - np.log(h)) / slope
            k = np.clip(k + np.nan_to_num(step), kin[pinned], kt)
        out[pinned] = k
    rest = ~done & ~pinned
    if np.any(rest):
        if isinstance(ch, WedgeChannel):
            tail = (tab.F ** 2 / (2.0 * target[rest])) ** (1.0 / 3.0)
            out[rest] = np.maximum(np.maximum(tail, kin[rest]), kt)
        else:
            out[rest] = tab.kmax
    return out


def _dI_vec(tab, ch, ka, kb):
    """Vectorised :meth:`SectionTables.dI` for arrays ka <= kb."""
    from lowgmap.physics.models.open_channel.geometry import WedgeChannel

    kt = tab.kt
    lo = np.minimum(ka, kt)
    hi = np.minimum(kb, kt)
    b_lo, b_hi = ch.arc_angle(lo), ch.arc_angle(hi)
    d1 = tab.I1(b_hi) - tab.I1(b_lo)
    d2 = tab.I2(b_hi) - tab.I2(b_lo)
    if isinstance(ch, WedgeChannel):
        ta, tb = np.maximum(ka, kt), np.maximum(kb, kt)
        F, Kc = tab.F, tab.Kc
        d1 = d1 + F * F / (3.0 * Kc) * (ta ** -3.0 - tb ** -3.0)
        d2 = d2 + 2.0 / Kc * np.log(tb / ta)
    return d1, d2


def critical_flow_rates(channel, length, rho, mu, sigma, *, K_e: float = 0.0, g_axial: float = 0.0):
    r"""Critical flow rates of an open channel over lengths and liquid properties (vectorised).

    .. math:: Q_\mathrm{crit} = \sqrt{\frac{\sigma L^3}{\rho}}\;F\Bigl(\text{shape}, K_e;\
              \frac{\mu\,l}{L\sqrt{\rho\sigma L}}\Bigr)

    Parameters
    ----------
    channel : PinnedChannel   ParallelPlates, RectangularGroove or WedgeChannel
    length : float or array   open length l [m], > 0
    rho : float or array      liquid (or mixture) density [kg/m^3], > 0
    mu : float or array       viscosity [Pa s], >= 0
    sigma : float or array    surface tension [N/m], > 0
    K_e : float               entrance loss coefficient (>= 0)
    g_axial : float           residual acceleration along the axis, against the flow [m/s^2] (see
        :class:`~lowgmap.physics.models.open_channel.hydraulics.SteadyFlow`); not 0: the root search for
        every value (gravity adds a group, the similarity curve is for g_axial = 0)

    Returns
    -------
    (Q_crit, limited_by) : arrays (broadcast shape)   critical flow [m^3/s] and what limits it (keys of
    :data:`~lowgmap.physics.models.open_channel.hydraulics.LIMITS`)

    Notes
    -----
    From :func:`similarity_curve` (one curve per shape); under :func:`lowgmap.physics.surrogates.exact`
    each value is the full root search of
    :meth:`~lowgmap.physics.models.open_channel.hydraulics.SteadyFlow.critical` instead. Reservoir at the
    gas pressure, no streamwise curvature, no gravity.

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.models.open_channel import WedgeChannel, critical_flow_rate
    >>> w = WedgeChannel(math.radians(10.0), 0.02, math.radians(5.0))
    >>> q, lim = critical_flow_rates(w, 0.1, 1000.0, 1e-3, 0.07)
    >>> exact = critical_flow_rate(w, 0.1, 1000.0, 1e-3, 0.07).Q_crit
    >>> bool(abs(float(q) / exact - 1) < 1e-3), str(lim)
    (True, 'speed_index')
    """
    if not similarity_applies(channel):
        raise TypeError(f"critical_flow_rates needs a pinned channel (ParallelPlates, RectangularGroove, "
                        f"WedgeChannel), got {type(channel).__name__}")
    l, r, m, s = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (length, rho, mu, sigma)))
    for name, v, unit in (("length", l, "m"), ("rho", r, "kg/m^3"), ("sigma", s, "N/m")):
        bad = ~np.isfinite(v) | (v <= 0)
        if np.any(bad):
            positive(name, float(v[bad].flat[0]), unit)
    bad = ~np.isfinite(m) | (m < 0)
    if np.any(bad):
        raise ValueError(f"mu must be finite and >= 0 Pa s, got {format_number(float(m[bad].flat[0]))} Pa s")
    K_e = non_negative("K_e", K_e)
    L = channel.length_scale
    g_axial = float(g_axial)
    cur = None
    if not surrogates.exact_requested() and g_axial == 0.0:
        try:
            cur = similarity_curve(channel, K_e)
        except RuntimeError:
            cur = None                      # not monotone in the length: the root search below
    if cur is None:
        from lowgmap.physics.models.open_channel.hydraulics import SteadyFlow

        q = np.empty(l.shape)
        lim = np.empty(l.shape, dtype="<U16")
        for idx in np.ndindex(l.shape):
            flow = SteadyFlow(channel, float(r[idx]), float(m[idx]), float(s[idx]), K_e, g_axial=g_axial)
            q[idx], lim[idx] = flow.critical(float(l[idx]))
        return _out(q), _out(lim)
    scale, lam = cur.group(L, l, r, m, s)
    return _out(scale * cur.F(lam)), _out(cur.limited_by(lam))


def _out(a):
    a = np.asarray(a)
    return a[()] if a.ndim == 0 else a


def measure_errors(n_alpha: int = 12, n_shapes: int = 24, n_lam: int = 8, seed: int = 17, verbose=False) -> dict:
    """Largest relative errors of the surrogates against the full solves at seeded random points.

    Wedge Stokes resistance: ``n_alpha`` random half-angles over :data:`WEDGE_HALF_ANGLE_DEG`, K on 200
    arc angles from 0 to the table end, surrogate vs a fresh finite-element table. Critical flow:
    ``n_shapes`` random (half-angle, contact angle up to 60 deg within Concus-Finn, K_e in [0, 1]), each at
    ``n_lam`` random Λ in [1e-4, 1e3] (log-uniform), similarity curve on surrogate tables vs the root
    search on finite-element tables. Takes about a minute and a half (one mesh table per point).

    Returns
    -------
    dict   ``{"K": (max error, points), "Q": (max error, points)}``
    """
    from lowgmap.physics.models.open_channel import tables
    from lowgmap.physics.models.open_channel.geometry import WedgeChannel

    rng = np.random.default_rng(seed)
    lo, hi = WEDGE_HALF_ANGLE_DEG
    worst_k, n_k = 0.0, 0
    for a in np.radians(rng.uniform(lo, hi, n_alpha)):
        full = tables.build_stokes_table(WedgeChannel(float(a), 1.0, 0.0))
        nodes, K = wedge_stokes_table(float(a))
        b = np.linspace(0.0, full["nodes"][-1], 200)
        ref = BarycentricInterpolator(full["nodes"], full["K"])(b)
        worst_k = max(worst_k, float(np.max(np.abs(BarycentricInterpolator(nodes, K)(b) / ref - 1.0))))
        n_k += b.size
    worst_q, n_q = 0.0, 0
    rho, mu, sigma, L = 1000.0, 1e-3, 0.05, 0.02
    for i in range(n_shapes):
        a = rng.uniform(lo, hi)
        t = rng.uniform(0.0, min(60.0, 89.0 - a))
        K_e = rng.uniform(0.0, 1.0)
        ch = WedgeChannel(math.radians(a), L, math.radians(t))
        lam = 10.0 ** rng.uniform(-4.0, 3.0, n_lam)
        lengths = lam * L * math.sqrt(rho * sigma * L) / mu
        q, _ = critical_flow_rates(ch, lengths, rho, mu, sigma, K_e=K_e)
        with surrogates.exact():
            qe, _ = critical_flow_rates(ch, lengths, rho, mu, sigma, K_e=K_e)
        worst_q = max(worst_q, float(np.max(np.abs(q / qe - 1.0))))
        n_q += lam.size
        if verbose:
            print(f"shape {i + 1}/{n_shapes}: alpha {a:.2f} deg, theta {t:.2f} deg, K_e {K_e:.2f}; "
                  f"worst so far K {worst_k:.2e}, Q {worst_q:.2e}", flush=True)
    out = {"K": (worst_k, n_k), "Q": (worst_q, n_q)}
    # grooves and plates: K over the aspect ratio, critical flow over Lambda
    for kind, (_, boxes) in RATIO_BOXES.items():
        wk, nk, wq, nq = 0.0, 0, 0.0, 0
        for lo, hi in boxes:
            for r in np.exp(rng.uniform(math.log(lo), math.log(hi), max(2, n_alpha // 4))):
                shape = _ratio_channel(kind, float(r))
                full = tables.build_stokes_table(shape)
                nodes, K = ratio_stokes_table(shape)
                b = np.linspace(0.0, full["nodes"][-1], 200)
                ref = BarycentricInterpolator(full["nodes"], full["K"])(b)
                wk = max(wk, float(np.max(np.abs(BarycentricInterpolator(nodes, K)(b) / ref - 1.0))))
                nk += b.size
                t = rng.uniform(0.0, 60.0)
                K_e = rng.uniform(0.0, 1.0)
                ch = type(shape)(L, L * float(r), math.radians(t))
                lam = 10.0 ** rng.uniform(-4.0, 3.0, n_lam)
                lengths = lam * L * math.sqrt(rho * sigma * L) / mu
                q, _ = critical_flow_rates(ch, lengths, rho, mu, sigma, K_e=K_e)
                with surrogates.exact():
                    qe, _ = critical_flow_rates(ch, lengths, rho, mu, sigma, K_e=K_e)
                wq = max(wq, float(np.max(np.abs(q / qe - 1.0))))
                nq += lam.size
                if verbose:
                    print(f"{kind} ratio {r:.3f}: worst so far K {wk:.2e}, Q {wq:.2e}", flush=True)
        out[f"K {kind}"] = (wk, nk)
        out[f"Q {kind}"] = (wq, nq)
    return out


def _main(argv=None):
    import argparse

    p = argparse.ArgumentParser(prog="python -m lowgmap.physics.models.open_channel.surrogate",
                                description="Open-channel surrogate tables.")
    p.add_argument("--rebuild", action="store_true", help=f"recompute {WEDGE_TABLE_PATH}")
    p.add_argument("--rebuild-ratio", choices=sorted(RATIO_BOXES), help="recompute a groove or plates table")
    p.add_argument("--output", default=WEDGE_TABLE_PATH)
    p.add_argument("--errors", action="store_true", help="measure the surrogate errors against the full solves")
    args = p.parse_args(argv)
    if args.errors:
        print(measure_errors(verbose=True))
        return 0
    if args.rebuild_ratio:
        d = build_ratio_table(args.rebuild_ratio, verbose=True)
        print(f"wrote {RATIO_TABLE_PATHS[args.rebuild_ratio]}: {d['g0'].shape} per box")
        return 0
    if not args.rebuild:
        p.print_help()
        return 0
    d = build_wedge_table(args.output, verbose=True)
    print(f"wrote {args.output}: {d['g'].shape}")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(_main())
