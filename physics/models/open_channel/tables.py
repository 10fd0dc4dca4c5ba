r"""Cross-section tables of an open capillary channel: Stokes resistance, area and cumulative integrals.

The viscous resistance K of a channel section comes from the fully developed Stokes problem
(:func:`lowgmap.physics.geometry.stokes.solve_poisson`: :math:`-\nabla^2 w = 1`, w = 0 on walls,
:math:`\partial_n w = 0` on the free surfaces, :math:`K = A/\bar w`). It is solved once per shape at
21 Chebyshev nodes in the arc half-angle (:func:`stokes_table`, cached by the shape scaled to length
scale 1); a corner filament's K is one number, :math:`K = F\beta_c` with :math:`\beta_c` the corner flow
resistance of :mod:`lowgmap.physics.geometry.corner` (:func:`corner_resistance`).

:class:`SectionTables` then tabulates, for one channel and one resistance model, everything the
steady one-dimensional model needs as a function of the surface curvature κ: A, dA/dκ, K and
the cumulative integrals

.. math:: I_1 = \int \frac{A^2}{K}\,\mathrm{d}\kappa, \qquad
          I_2 = \int \frac{-\mathrm{d}A/\mathrm{d}\kappa}{A K}\,\mathrm{d}\kappa

so that a length along the channel is a difference of table values (no ODE step).
:func:`section_tables` serves them from a cache keyed by channel and resistance.
"""
from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from scipy.interpolate import BarycentricInterpolator, CubicSpline, PPoly
from scipy.optimize import brentq

from lowgmap.physics import cache, surrogates
from lowgmap.physics.models.open_channel.geometry import (
    CornerFilament,
    OpenChannel,
    WedgeChannel,
    corner_area_factor,
    segment_slope_factor,
)
from lowgmap.physics.validate import positive

__all__ = ["stokes_table", "corner_resistance", "SectionTables", "section_tables", "build_stokes_table", "TABLE_NODES",
           "TABLE_END_MARGIN"]

#: Chebyshev nodes (in the arc half-angle) of the Stokes resistance tables. Largest interpolation
#: error against direct solves (measured): 11 nodes 1e-3, 15 nodes 8e-5, 21 nodes 2e-6 for plates
#: b/a = 1 (the two surfaces close in on each other); 21 are used (about 1 s per shape).
TABLE_NODES = 21

#: The resistance tables stop this far (in arc half-angle, rad) before an arc becomes tangent to
#: a wall (a cusp the mesh cannot resolve) and before a surface touches a wall or another surface
#: (liquid neck below 5 % of the half span). K is held constant over the last stretch.
TABLE_END_MARGIN = 0.05

#: Points of the fine arc-angle grid on which the cumulative integrals are tabulated.
_GRID = 801


# =============================================================================================
# Stokes resistance tables
# =============================================================================================
def stokes_table(norm):
    r"""Viscous resistance of a pinned channel at Chebyshev nodes of its arc half-angle.

    .. math:: K(\beta_j) = \frac{A(\beta_j)}{\bar w(\beta_j)}, \qquad
              \beta_j = \frac{\beta_\mathrm{end}}{2}\Bigl(1 - \cos\frac{\pi j}{n - 1}\Bigr)

    Parameters
    ----------
    norm : PinnedChannel   the channel scaled to length scale 1 (:meth:`PinnedChannel.normalized`)

    Returns
    -------
    (nodes, K) : two arrays   arc half-angles [rad] and K (dimensionless). The table belongs to the shape
        with contact angle 0 (:meth:`PinnedChannel.stokes_shape`: the Stokes problem at a given arc angle
        does not depend on the contact angle) and stops 0.05 rad before a cusp or a contact
        (:meth:`PinnedChannel.table_end`); a channel with a contact angle uses it up to its own end.

    Notes
    -----
    A wedge channel with a half-angle inside
    :data:`~lowgmap.physics.models.open_channel.surrogate.WEDGE_HALF_ANGLE_DEG`, and a groove or plates with
    an aspect ratio inside :data:`~lowgmap.physics.models.open_channel.surrogate.RATIO_BOXES`, take their
    table from the shipped surrogates (no mesh solve); other shapes, and every shape under
    :func:`lowgmap.physics.surrogates.exact`, solve one mesh per node (about 1 s per shape), cached in
    memory and on disk (:mod:`lowgmap.physics.cache`, keyed by the shape, the node count and the lowgmap
    version).
    """
    return _stokes_table_of_shape(norm.stokes_shape(), surrogates.exact_requested())


@lru_cache(maxsize=1024)
def _stokes_table_of_shape(shape, exact: bool):
    if not exact:
        from lowgmap.physics.models.open_channel import surrogate

        hit = (surrogate.wedge_stokes_table(shape.half_angle) if isinstance(shape, WedgeChannel)
               else surrogate.ratio_stokes_table(shape))
        if hit is not None:
            return hit
    arrays = cache.cached_arrays("open_channel.stokes_table.v2", (shape, TABLE_NODES, TABLE_END_MARGIN),
                                 lambda: build_stokes_table(shape))
    return arrays["nodes"], arrays["K"]


def stokes_interpolant(norm):
    """:func:`stokes_table` as its barycentric interpolant of K against the arc half-angle (built once per table:
    channels that differ only in the contact angle share it)."""
    return _stokes_interpolant_of_shape(norm.stokes_shape(), surrogates.exact_requested())


@lru_cache(maxsize=1024)
def _stokes_interpolant_of_shape(shape, exact: bool):
    nodes, K = _stokes_table_of_shape(shape, exact)
    return nodes, BarycentricInterpolator(nodes, K)


def build_stokes_table(norm) -> dict:
    # imported here: the mesh solver loads only when a table is built
    from lowgmap.physics.geometry.stokes import Domain, solve_poisson
    beta_end = norm.table_end(TABLE_END_MARGIN)
    n = TABLE_NODES
    j = np.arange(n)
    nodes = 0.5 * beta_end * (1.0 - np.cos(np.pi * j / (n - 1)))
    K = np.empty(n)
    for i, b in enumerate(nodes):
        d = Domain(norm.stokes_pieces(float(b)))
        sol = solve_poisson(d, interface="free")     # on a symmetric part: same mean as the whole
        K[i] = float(norm.area_at(math.sin(b) / norm.half_chord)) / sol.mean
    return {"nodes": nodes, "K": K}


def corner_resistance(alpha: float, theta: float) -> float:
    r"""Viscous resistance K of a corner filament (the same at every radius: the section is self-similar).

    .. math:: K = F(\alpha, \theta)\,\beta_c(\alpha, \theta)

    with F the area factor and :math:`\beta_c` the corner flow resistance with a shear-free surface
    (:func:`lowgmap.physics.geometry.corner.flow_resistance`, its shipped table; outside its tabulated
    half-angles, and under :func:`lowgmap.physics.surrogates.exact`, a direct solve). alpha, theta in rad; cached.
    """
    return _corner_resistance(float(alpha), float(theta), surrogates.exact_requested())


@lru_cache(maxsize=1024)
def _corner_resistance(alpha: float, theta: float, exact: bool) -> float:
    from lowgmap.physics.geometry import corner
    lo, hi = corner.TABLE_HALF_ANGLE_DEG
    if not exact and lo <= math.degrees(alpha) <= hi:
        beta = float(corner.flow_resistance(alpha, theta, "free"))
    else:
        beta = float(corner.flow_resistance_direct(alpha, theta, "free"))
    return corner_area_factor(alpha, theta) * beta


# =============================================================================================
# tables of one channel: A, dA/dkappa, K and the cumulative integrals I1, I2
# =============================================================================================
class SectionTables:
    r"""Tabulated functions of the curvature for one channel and one resistance model.

    ``resistance``: None (Stokes tables), a number K, or a callable ``f(R1) -> K`` (see
    :func:`lowgmap.physics.models.open_channel.surface_profile`).

    Length along the channel between curvatures k_a < k_b at flow Q (no streamwise curvature):

    .. math:: z_b - z_a = \frac{\sigma}{\mu Q}\Bigl[\Delta I_1 - \frac{\rho Q^2}{\sigma}\Delta I_2\Bigr],
              \quad I_1 = \int \frac{A^2}{K}\,\mathrm{d}\kappa,
              \quad I_2 = \int \frac{-A_\kappa}{A K}\,\mathrm{d}\kappa
    """

    def __init__(self, channel: OpenChannel, resistance):
        self.ch = channel
        self.kmax = channel.kappa_max
        self._Kconst = None
        self._Kfun = None
        if resistance is not None and not callable(resistance):
            self._Kconst = positive("resistance", resistance)
        elif callable(resistance):
            if isinstance(channel, CornerFilament):
                raise TypeError("resistance for a CornerFilament must be a number (K is the same at every "
                                "radius), got a callable")
            self._Kfun = resistance
        # tail (corner filament part)
        if isinstance(channel, (CornerFilament, WedgeChannel)):
            a, t = channel.half_angle, channel.contact_angle
            self.F = corner_area_factor(a, t)
            if self._Kconst is not None:
                self.Kc = self._Kconst
            elif self._Kfun is not None:                  # wedge: callable evaluated at R_t
                self.Kc = float(self._Kfun(channel.transition_radius))
            else:
                self.Kc = corner_resistance(a, t)
        if isinstance(channel, CornerFilament):
            self.kt = 0.0
            return
        # pinned part: fine grid in beta
        c = channel.half_chord
        bmax = channel.arc_angle_max
        self.kt = channel.kappa_pinned
        u = np.linspace(0.0, 1.0, _GRID)
        beta = 0.5 * bmax * (1.0 - np.cos(np.pi * u))
        kap = np.sin(beta) / c
        A = channel.area_at(kap)
        dA_db = -channel.n_surfaces * 2.0 * c**2 * segment_slope_factor(beta)     # dA/dbeta (finite at 90 deg)
        K = self._K_pinned(beta, kap)
        if not np.all(np.isfinite(K)) or np.any(K <= 0):
            raise ValueError("resistance must return finite values > 0 over the channel's radius range")
        i1 = A * A / K * np.cos(beta) / c
        i2 = -dA_db / (A * K)
        # one spline of three columns: the same cubic of each (the banded system is solved for the three
        # right-hand sides at once), split into K and the antiderivatives of i1 and i2
        spl = CubicSpline(beta, np.column_stack([K, i1, i2]))
        anti = spl.antiderivative()
        self.Kspl = _column(spl, 0)
        self.I1 = _column(anti, 1)
        self.I2 = _column(anti, 2)
        # choke function H = A^3/(-A_kappa) on the grid (decreasing), for the S = 1 search
        with np.errstate(divide="ignore"):
            self.Hgrid = A**3 / (channel.n_surfaces * 2.0 * c**3 * segment_slope_factor(beta) / np.cos(beta))
        self.kgrid = kap

    def _K_pinned(self, beta, kap):
        ch = self.ch
        if self._Kconst is not None:
            return np.full_like(beta, self._Kconst)
        if self._Kfun is not None:
            with np.errstate(divide="ignore"):
                R = np.where(kap > 0, 1.0 / np.maximum(kap, 1e-300), np.inf)
            return np.asarray(self._Kfun(R), dtype=float) * np.ones_like(beta)
        nodes, f = stokes_interpolant(ch.normalized())
        bend = min(float(nodes[-1]), ch.table_end(TABLE_END_MARGIN))     # this contact angle's end
        out = f(np.minimum(beta, bend))
        if isinstance(ch, WedgeChannel) and ch.arc_angle_max > bend:
            # blend linearly to the corner-filament value at the transition (continuity)
            kc = corner_resistance(ch.half_angle, ch.contact_angle)
            w = np.clip((beta - bend) / (ch.arc_angle_max - bend), 0.0, 1.0)
            out = (1 - w) * out + w * kc
        return out

    # ---- functions of kappa ------------------------------------------------------------------
    def A(self, k):
        return self.ch.area_at(k)

    def Ak(self, k):
        return self.ch.dA_dkappa(k)

    def K(self, k):
        k = np.asarray(k, dtype=float)
        if isinstance(self.ch, CornerFilament):
            return np.full_like(k, self.Kc)
        kk = np.minimum(k, self.kt)
        out = self.Kspl(self.ch.arc_angle(kk))
        if isinstance(self.ch, WedgeChannel):
            out = np.where(k <= self.kt, out, self.Kc)
        return out

    def H(self, k):
        """A^3/(-dA/dkappa) [m^3]: S^2 = rho Q^2 / (sigma H)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.A(k) ** 3 / (-self.Ak(k))

    def dI(self, ka, kb):
        """(I1(kb) - I1(ka), I2(kb) - I2(ka)) for ka <= kb (kb may be an array)."""
        ka = float(ka)
        kb = np.asarray(kb, dtype=float)
        if isinstance(self.ch, CornerFilament):
            return self._tail_dI(ka, kb)
        lo = min(ka, self.kt)
        hi = np.minimum(kb, self.kt)
        b_lo, b_hi = self.ch.arc_angle(lo), self.ch.arc_angle(hi)
        d1 = self.I1(b_hi) - self.I1(b_lo)
        d2 = self.I2(b_hi) - self.I2(b_lo)
        if isinstance(self.ch, WedgeChannel):
            t1, t2 = self._tail_dI(max(ka, self.kt), np.maximum(kb, self.kt))
            d1, d2 = d1 + t1, d2 + t2
        return d1, d2

    def _tail_dI(self, ka, kb):
        F, Kc = self.F, self.Kc
        with np.errstate(divide="ignore"):
            d1 = F * F / (3.0 * Kc) * (ka**-3.0 - kb**-3.0)
            d2 = 2.0 / Kc * np.log(kb / ka)
        return d1, d2

    def kappa_choke(self, k_from, target):
        """Smallest kappa >= k_from where S >= 1, i.e. H(kappa) <= target = rho Q^2/sigma.

        Returns kappa_max when S < 1 up to the smallest radius. H decreases with kappa.
        """
        if self.H(k_from) <= target:
            return float(k_from)
        if not isinstance(self.ch, CornerFilament) and k_from < self.kt:
            if self.H(self.kt) <= target:                  # crossing in the pinned part
                i = int(np.searchsorted(self.kgrid, k_from))
                hit = np.nonzero(self.Hgrid[i:] <= target)[0]
                j = i + int(hit[0]) if len(hit) else len(self.kgrid) - 1
                k_hi = float(self.kgrid[j])
                k_lo = max(float(self.kgrid[max(j - 1, 0)]), float(k_from))
                if not k_lo < k_hi:
                    k_lo = float(k_from)
                return brentq(lambda k: float(self.H(k)) / target - 1.0, k_lo, k_hi,
                              xtol=1e-15 * k_hi, rtol=1e-13)
            if not isinstance(self.ch, WedgeChannel):
                return float(self.kmax)                    # meniscus limit before S = 1
        if not isinstance(self.ch, (CornerFilament, WedgeChannel)):
            return float(self.kmax)                        # starts at the smallest radius with S < 1
        # corner-filament part: H = F^2 / (2 kappa^3). For a wedge with theta > 0 the speed index
        # jumps up where the contact lines leave the edges, so the choke may sit at kt itself.
        return max((self.F**2 / (2.0 * target)) ** (1.0 / 3.0), float(k_from), float(self.kt))


def _column(pp, j):
    """Column j of a piecewise polynomial with vector values, as a scalar-valued PPoly (same coefficients)."""
    return PPoly.construct_fast(np.ascontiguousarray(pp.c[:, :, j]), pp.x, pp.extrapolate)


@lru_cache(maxsize=256)
def _section_tables_cached(channel, resistance, exact):
    return SectionTables(channel, resistance)


def section_tables(channel: OpenChannel, resistance) -> SectionTables:
    """The :class:`SectionTables` of a channel and resistance model, from a cache when both are hashable.

    The cache holds 256 entries (a slider visits many values) and keeps surrogate-based and exact
    tables apart (:func:`lowgmap.physics.surrogates.exact`).
    """
    try:
        return _section_tables_cached(channel, resistance, surrogates.exact_requested())
    except TypeError as e:
        if "unhashable" in str(e):
            return SectionTables(channel, resistance)
        raise
