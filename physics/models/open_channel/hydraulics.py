r"""Steady one-dimensional flow along an open capillary channel: entrance, speed index, critical flow.

Steady one-dimensional model along the open length :math:`0 \le z \le l` (Rosendahl, Ohlhoff &
Dreyer 2004; Haake et al. 2010; Klatte et al. 2008), streamwise curvature of the surface neglected:

.. math::

    Q = v A, \qquad
    \rho v \frac{\mathrm{d}v}{\mathrm{d}z} = -\frac{\mathrm{d}p}{\mathrm{d}z} - \frac{K \mu Q}{A^2},
    \qquad p - p_g = -\sigma\kappa, \qquad A = A(\kappa),

with the inlet fed from a reservoir at total pressure :math:`p_0` through an entrance loss
:math:`K_e`, :math:`p(0) = p_0 - (1 + K_e)\,\rho v(0)^2/2`. Eliminating v,

.. math::

    \frac{\mathrm{d}p}{\mathrm{d}z} = -\frac{K \mu Q}{A^2 (1 - S^2)}, \qquad
    S = \frac{v}{v_c}, \quad v_c = \sqrt{\frac{A}{\rho\, \mathrm{d}A/\mathrm{d}p}},

so the pressure gradient is singular where the speed index S reaches 1. With κ as variable,
:math:`\mathrm{d}z/\mathrm{d}\kappa = \sigma A^2 (1 - S^2)/(K\mu Q)` integrates in closed form over
the tables of :mod:`lowgmap.physics.models.open_channel.tables`, so the length at which a flow Q
chokes is a difference of table values, and the critical flow rate of a length l (the largest Q for
which S < 1 over the whole length) is a one-dimensional root search.

:class:`SteadyFlow` holds one channel, fluid and inlet; :func:`speed_index` is the local choking
criterion; :func:`critical_flow_curve` gives Q_crit over channel lengths. The surface along z and
the critical flow with its surface (and the streamwise-curvature model) are in
:mod:`lowgmap.physics.models.open_channel.profile`.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from lowgmap.physics.models.open_channel.geometry import CornerFilament, OpenChannel, WedgeChannel
from lowgmap.physics.models.open_channel.tables import section_tables
from lowgmap.physics.validate import finite, format_number, non_negative, positive

__all__ = ["LIMITS", "SteadyFlow", "speed_index", "CriticalFlowCurve", "critical_flow_curve",
           "transverse_bond_number", "TRANSVERSE_BOND_LIMIT"]

#: Largest transverse Bond number for which the section's free surfaces are taken as circular arcs
#: (common practice, no source: gravity across the channel deforms the arcs by about Bo/10 of the width).
TRANSVERSE_BOND_LIMIT = 0.1

#: Values of ``limited_by`` of a critical flow and what they mean.
LIMITS = {
    "speed_index": "the speed index reaches 1 at the outlet (the surface collapses there)",
    "inlet": "no steadier inlet state: the reservoir cannot push more through the entrance loss "
             "(the speed index at the outlet stays below 1; only with K_e > 0 or mu = 0)",
    "meniscus_limit": "the surface reaches its smallest radius at the outlet (it leaves the edges "
                      "or touches the opposite wall or surface) before the speed index reaches 1",
    "no_solution": "streamwise-curvature model: the boundary-value problem has no solution for a "
                   "larger flow (fold of the solution branch)",
    "depinning": "the free surface leaves the plate edges at the outlet: its contact lines slide toward the "
                 "apex, the flow area gives way faster and the speed index jumps past 1 there (wedge "
                 "channel with a contact angle > 0; the speed index on the pinned side stays below 1)",
    "hydrostatic": "the hydrostatic pressure rise over the length (upward flow against the residual "
                   "acceleration) exceeds what the free surface holds at its smallest radius: no steady flow "
                   "reaches the outlet",
    "no_hold": "the free surface cannot curve into the liquid at the open-side edges (contact angle not "
               "below the angle between wall and open side; Concus–Finn for a wedge): no flow is held "
               "below the gas pressure, gas is drawn in at any flow",
}


# =============================================================================================
# the steady 1-D problem (no streamwise curvature)
# =============================================================================================
class SteadyFlow:
    r"""One open channel, one liquid and one inlet condition: the steady 1-D model in the curvature.

    Parameters
    ----------
    channel : OpenChannel
    rho, mu, sigma : float   liquid density [kg/m^3], viscosity [Pa s] (>= 0; 0 = inviscid),
        surface tension [N/m]
    K_e : float              entrance loss coefficient (>= 0)
    inlet_pressure : float or None   reservoir total pressure minus gas pressure [Pa], <= 0
    inlet_radius : float or None     surface radius at z = 0 [m] instead of a reservoir
    resistance : None, float or callable   viscous resistance model (see
        :func:`lowgmap.physics.models.open_channel.surface_profile`)
    g_axial : float          component of the residual acceleration along the channel axis, against the
        flow [m/s^2] (``g * orientation.axial_fraction``: > 0 upward flow, < 0 downward flow; default 0).
        Adds the hydrostatic term :math:`-\rho g_a` to the momentum balance (see :meth:`z_of_kappa`)

    Attributes ``channel``, ``rho``, ``mu``, ``sigma``, ``K_e`` (checked values), ``k0`` (reservoir
    curvature :math:`-p_0/\sigma` [1/m]), ``kin_fixed`` (fixed inlet curvature or None) and ``tables``
    (:class:`~lowgmap.physics.models.open_channel.tables.SectionTables`, None when mu = 0).

    Examples
    --------
    >>> from lowgmap.physics.models.open_channel import ParallelPlates
    >>> flow = SteadyFlow(ParallelPlates(gap=1.0, breadth=1.0), 1.0, 0.0, 1.0)     # inviscid, a = 1
    >>> round(flow.critical(10.0)[0], 4), flow.critical(10.0)[1]
    (1.2053, 'speed_index')
    """

    def __init__(self, channel, rho, mu, sigma, K_e=0.0, inlet_pressure=None, inlet_radius=None,
                 resistance=None, g_axial=0.0):
        if not isinstance(channel, OpenChannel):
            raise TypeError(f"channel must be an OpenChannel (ParallelPlates, RectangularGroove, WedgeChannel, "
                            f"CornerFilament), got {type(channel).__name__}")
        self.channel = channel
        self.rho = positive("rho", rho, "kg/m^3")
        self.mu = non_negative("mu", mu, "Pa s")
        self.sigma = positive("sigma", sigma, "N/m")
        self.K_e = non_negative("K_e", K_e)
        if inlet_pressure is not None and inlet_radius is not None:
            raise ValueError("give inlet_pressure or inlet_radius, not both")
        self.kin_fixed = None
        self.k0 = 0.0
        if inlet_radius is not None:
            R = positive("inlet_radius", inlet_radius, "m")
            if R < channel.min_radius:
                raise ValueError(f"inlet_radius must be >= the channel's smallest radius "
                                 f"{format_number(channel.min_radius)} m, got {format_number(R)} m")
            self.kin_fixed = 1.0 / R
        elif inlet_pressure is not None:
            p0 = finite("inlet_pressure", inlet_pressure, "Pa")
            if p0 > 0:
                raise ValueError(f"inlet_pressure (reservoir minus gas pressure) must be <= 0 Pa, "
                                 f"got {format_number(p0)} Pa")
            self.k0 = -p0 / self.sigma
            if self.k0 >= channel.kappa_max:
                raise ValueError(f"inlet_pressure must be > {format_number(-self.sigma * channel.kappa_max)} Pa "
                                 f"(the surface would be beyond its smallest radius), got {format_number(p0)} Pa")
        if isinstance(channel, CornerFilament) and self.kin_fixed is None and self.k0 == 0.0:
            raise ValueError("a CornerFilament has no size of its own: give inlet_radius, or an inlet_pressure "
                             "below the gas pressure (inlet_pressure < 0)")
        self.g_axial = finite("g_axial", g_axial, "m/s^2")
        if self.mu > 0:
            self.tables = section_tables(channel, resistance)
        elif self.g_axial != 0.0:
            self.tables = section_tables(channel, 1.0)      # area tables only: K is multiplied by mu = 0
        else:
            self.tables = None
        self._fold = None
        self._zgrid = None

    # ---- inlet -------------------------------------------------------------------------------
    def Q_in(self, k):
        """Flow through the entrance [m^3/s] when the surface at z = 0 has curvature k (reservoir mode)."""
        A = self.channel.area_at(k)
        return A * np.sqrt(np.maximum(2.0 * self.sigma * (k - self.k0), 0.0) / ((1.0 + self.K_e) * self.rho))

    def fold(self):
        """(kappa, Q) of the largest inlet flow on the subcritical branch, or the S = 1 inlet state."""
        if self._fold is not None:
            return self._fold
        ch = self.channel
        if self.kin_fixed is not None:
            k = self.kin_fixed
            Q = math.sqrt(self.sigma * float(self._H(k)) / self.rho)
            self._fold = (k, Q)
            return self._fold
        def G(k):
            A, Ak = ch.area_slope(k)
            return A + 2.0 * Ak * (k - self.k0)
        kmax = ch.kappa_max
        if math.isfinite(kmax):
            if G(kmax) >= 0:                               # inlet flow still rising at the smallest radius
                self._fold = (kmax, float(self.Q_in(kmax)))
                return self._fold
            k_hi = kmax
        else:
            k_hi = max(2.0 * self.k0, 1.0 / ch.length_scale if ch.length_scale else 1.0)
            while G(k_hi) > 0:
                k_hi *= 2.0
        k = brentq(G, self.k0, k_hi, xtol=1e-15 * k_hi, rtol=1e-14)
        self._fold = (k, float(self.Q_in(k)))
        return self._fold

    def _H(self, k):
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.channel.area_at(k) ** 3 / (-self.channel.dA_dkappa(k))

    def kappa_in(self, Q):
        """Surface curvature at z = 0 [1/m] for a flow Q [m^3/s] (the subcritical inlet state)."""
        if self.kin_fixed is not None:
            return self.kin_fixed
        kf, Qf = self.fold()
        if Q >= Qf:
            return kf
        return brentq(lambda k: float(self.Q_in(k)) - Q, self.k0, kf, xtol=1e-15 * kf, rtol=1e-14)

    def depins_at(self, k, Q):
        """Whether a flow Q choking at curvature k does so by depinning: a wedge channel whose surface leaves
        the plate edges there, with the speed index below 1 on the pinned side (it jumps past 1 beyond)."""
        ch = self.channel
        if not isinstance(ch, WedgeChannel) or ch.contact_angle <= 0.0:
            return False
        kt = ch.kappa_pinned
        return bool(abs(k - kt) <= 1e-9 * kt and float(self.S(kt, Q)) < 1.0 - 1e-9)

    def S(self, k, Q):
        """Speed index at curvature k [1/m] and flow Q [m^3/s]."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.sqrt(self.rho * Q * Q / (self.sigma * self._H(k)))

    # ---- along the channel -------------------------------------------------------------------
    def choke(self, Q):
        """(kappa_in, kappa_end, length to kappa_end) at flow Q; kappa_end is S = 1 or kappa_max."""
        kin = self.kappa_in(Q)
        if self.tables is None:
            return kin, kin, math.inf
        kend = self.tables.kappa_choke(kin, self.rho * Q * Q / self.sigma)
        L = self.z_of_kappa(kin, kend, Q)
        return kin, kend, float(L)

    def z_of_kappa(self, kin, k, Q):
        r"""Distance from the inlet [m] at which the curvature has grown from kin to k (k may be an array).

        .. math:: \frac{\mathrm{d}z}{\mathrm{d}\kappa} = \frac{\sigma A^2 (1 - S^2)}{K\mu Q + \rho g_a A^2}

        Without gravity (g_a = 0) a difference of the cumulative integrals of the section tables; with
        gravity a cumulative quadrature (inf where the denominator is not positive on the way: the
        hydrostatic gain balances the viscous loss and the surface never reaches k).
        """
        if self.g_axial == 0.0:
            d1, d2 = self.tables.dI(kin, k)
            return self.sigma / (self.mu * Q) * (d1 - self.rho * Q * Q / self.sigma * d2)
        k = np.asarray(k, dtype=float)
        kk, zz = self._gravity_grid(float(kin), float(np.max(k)), float(Q))
        out = np.interp(k, kk, zz)
        return np.where(k > kk[-1] * (1 + 1e-12), np.inf, out)

    #: Points of each piece (pinned part in beta, corner part in ln kappa) of the gravity quadrature.
    _G_POINTS = 1025

    def _gravity_grid(self, kin, kmax, Q):
        """(kappa grid, z at each) from kin to at least kmax at flow Q (trapezoid; cached for the last call)."""
        key = (kin, Q)
        zg = self._zgrid
        if zg is not None and zg[0] == key and zg[1][-1] >= kmax:
            return zg[1], zg[2]
        ch, tab = self.channel, self.tables
        kt = tab.kt
        kmax = max(kmax, kin)
        pieces = []
        if not isinstance(ch, CornerFilament) and kin < kt:
            b = np.linspace(float(ch.arc_angle(kin)), float(ch.arc_angle(min(kmax, kt))), self._G_POINTS)
            c = ch.half_chord
            pieces.append((np.sin(b) / c, np.cos(b) / c, b))           # kappa, dkappa/dbeta, beta
        if kmax > kt and (isinstance(ch, (CornerFilament, WedgeChannel))):
            lo = max(kin, kt) if kt > 0 else kin
            u = np.linspace(math.log(lo), math.log(kmax), self._G_POINTS)
            kap = np.exp(u)
            pieces.append((kap, kap, u))                               # dkappa/d(ln kappa) = kappa
        z0, kk, zz = 0.0, [], []
        for kap, jac, x in pieces:
            A = ch.area_at(kap)
            with np.errstate(divide="ignore", invalid="ignore"):
                S2 = self.rho * Q * Q * (-ch.dA_dkappa(kap)) / (self.sigma * A ** 3)
                den = self.mu * Q * tab.K(kap) + self.rho * self.g_axial * A * A
                f = self.sigma * A * A * (1.0 - S2) / den * jac
            if np.any(den <= 0) or not np.all(np.isfinite(f)):
                f = np.where((den <= 0) | ~np.isfinite(f), np.inf, f)
            with np.errstate(invalid="ignore"):
                seg = 0.5 * (f[1:] + f[:-1]) * np.diff(x)
            z = z0 + np.concatenate([[0.0], np.cumsum(seg)])
            kk.append(kap)
            zz.append(z)
            z0 = float(z[-1])
        kk, zz = np.concatenate(kk), np.concatenate(zz)
        zz = np.where(np.isnan(zz), np.inf, zz)
        self._zgrid = (key, kk, zz)
        return kk, zz

    def critical(self, length):
        """(Q_crit [m^3/s], limited_by) for an open length [m]: the largest Q with S < 1 up to the outlet."""
        kf, Qup = self.fold()
        S_up = float(self.S(kf, Qup))
        if self.tables is not None:
            kin, kend, L_up = self.choke(Qup)
            if L_up < length:
                f = lambda q: math.log(min(max(self.choke(q)[2], 1e-300 * length), 1e300 * length)) - math.log(length)
                q_lo = 0.5 * Qup
                while f(q_lo) < 0:
                    q_lo *= 0.5
                    if q_lo < 1e-12 * Qup:
                        # even a vanishing flow chokes: the hydrostatic rise over the length exceeds what
                        # the surface holds at its smallest radius (upward flow, g_axial > 0)
                        return 0.0, "hydrostatic"
                Q = brentq(f, q_lo, Qup, xtol=1e-14 * Qup, rtol=1e-12)
                kin, kend, _ = self.choke(Q)
                lim = "speed_index" if kend < self.channel.kappa_max * (1 - 1e-12) else "meniscus_limit"
                if lim == "speed_index" and self.depins_at(kend, Q):
                    lim = "depinning"
                return float(Q), lim
        if kf >= self.channel.kappa_max * (1 - 1e-12):
            lim = "meniscus_limit"
        elif S_up >= 1.0 - 1e-9:
            lim = "speed_index"
        elif self.depins_at(kf, Qup):
            lim = "depinning"
        else:
            lim = "inlet"
        return float(Qup), lim


# =============================================================================================
# public functions
# =============================================================================================
def speed_index(channel: OpenChannel, flow_rate, R1, rho, sigma):
    r"""Speed index S = v/v_c of a flow Q through a section with surface radius R1.

    .. math:: S^2 = \frac{\rho v^2}{A}\frac{\mathrm{d}A}{\mathrm{d}p}
              = \frac{\rho Q^2}{\sigma A^3}\Bigl(-\frac{\mathrm{d}A}{\mathrm{d}\kappa}\Bigr),
              \qquad v = Q/A, \ \kappa = 1/R_1

    Parameters
    ----------
    channel : OpenChannel
    flow_rate : float or array   volumetric liquid flow Q [m^3/s]
    R1 : float or array          surface radius in the cross-section [m]
    rho : float                  liquid density [kg/m^3]
    sigma : float                surface tension [N/m]

    Returns
    -------
    float or array   S (NaN where R1 is outside the channel's range or Q < 0)

    Notes
    -----
    :math:`v_c = \sqrt{A/(\rho\,\mathrm{d}A/\mathrm{d}p)}` is the speed of long waves of the
    flow area along the channel (Rosendahl et al. 2004); S = 1 is the choking condition of the
    steady 1-D model.

    Examples
    --------
    >>> from lowgmap.physics.models.open_channel import ParallelPlates
    >>> pp = ParallelPlates(gap=1.0, breadth=1.0)     # the inviscid critical state, b/a = 1
    >>> round(float(speed_index(pp, 1.2052706, 0.7510977, rho=1.0, sigma=1.0)), 5)
    1.0
    """
    rho = positive("rho", rho, "kg/m^3")
    sigma = positive("sigma", sigma, "N/m")
    Q = np.asarray(flow_rate, dtype=float)
    A = np.asarray(channel.area(R1), dtype=float)
    dA = np.asarray(channel.dA_dp(R1, sigma), dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(Q >= 0, np.sqrt(rho * Q * Q * dA / A**3), np.nan)
    return float(out) if out.ndim == 0 else out


@dataclass(frozen=True)
class CriticalFlowCurve:
    """Critical flow rate over channel lengths.

    lengths : channel lengths [m]
    Q_crit : critical flow rates [m^3/s]
    limited_by : tuple of :data:`LIMITS` keys, one per length
    """

    lengths: np.ndarray
    Q_crit: np.ndarray
    limited_by: tuple


def critical_flow_curve(channel: OpenChannel, lengths, rho: float, mu: float, sigma: float, *,
                        K_e: float = 0.0, inlet_pressure: float | None = None,
                        inlet_radius: float | None = None, resistance=None,
                        g_axial: float = 0.0) -> CriticalFlowCurve:
    r"""Critical flow rate over a set of channel lengths (for charts).

    .. math:: Q_\mathrm{crit}(l_i), \quad i = 1 \ldots n

    Parameters
    ----------
    channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance, g_axial
        as in :func:`~lowgmap.physics.models.open_channel.profile.critical_flow_rate` (no streamwise
        curvature)
    lengths : array of float   open lengths l [m], each finite and > 0

    Returns
    -------
    CriticalFlowCurve   lengths [m], Q_crit [m^3/s], limited_by

    Notes
    -----
    The section tables (area, resistance, cumulative integrals) are built once; each length then
    costs a one-dimensional root search.

    Examples
    --------
    >>> from lowgmap.physics.models.open_channel import ParallelPlates
    >>> pp = ParallelPlates(gap=0.005, breadth=0.025)
    >>> cur = critical_flow_curve(pp, [0.02, 0.2], 1000.0, 1e-3, 0.07, resistance=12 * 5.0)
    >>> bool(cur.Q_crit[0] > cur.Q_crit[1])
    True
    """
    ls = np.atleast_1d(np.asarray(lengths, dtype=float))
    if ls.ndim != 1 or ls.size == 0:
        raise ValueError(f"lengths must be a non-empty 1-D sequence of lengths [m], got {lengths!r}")
    bad = ~np.isfinite(ls) | (ls <= 0)
    if np.any(bad):
        raise ValueError(f"lengths must be finite and > 0 [m], got {format_number(ls[bad][0])} m")
    flow = SteadyFlow(channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance, g_axial)
    Q = np.empty(ls.size)
    lim = []
    for i, l in enumerate(ls):
        Q[i], why = flow.critical(float(l))
        lim.append(why)
    return CriticalFlowCurve(lengths=ls, Q_crit=Q, limited_by=tuple(lim))




def transverse_bond_number(channel: OpenChannel, rho: float, sigma: float, g_transverse: float) -> float:
    r"""Bond number of the residual acceleration across the channel: the validity limit of circular-arc sections.

    .. math:: Bo_\perp = \frac{\rho\, |g_\perp|\, L^2}{\sigma}

    Parameters
    ----------
    channel : OpenChannel   its length scale L (gap, groove width, wall length); a corner filament has none
        (then the largest radius of the problem must be used by the caller) and gives NaN
    rho : float             liquid density [kg/m^3] (minus the gas density for a dense gas)
    sigma : float           surface tension [N/m]
    g_transverse : float    component of the residual acceleration across the axis [m/s^2]
        (``g * orientation.transverse_fraction``)

    Returns
    -------
    float   Bo (dimensionless)

    Notes
    -----
    The model takes each free surface as a circular arc in the section (uniform pressure over the
    section). The transverse component of gravity adds a hydrostatic gradient across the section that
    bends the arcs; the model holds while :math:`Bo_\perp` is well below 1 (:data:`TRANSVERSE_BOND_LIMIT`,
    common practice, no source). The axial component enters the momentum balance itself (``g_axial``).

    Examples
    --------
    >>> from lowgmap.physics.models.open_channel import ParallelPlates
    >>> round(transverse_bond_number(ParallelPlates(0.005, 0.025), 1000.0, 0.07, 9.80665), 3)
    3.502
    """
    rho = positive("rho", rho, "kg/m^3")
    sigma = positive("sigma", sigma, "N/m")
    g = finite("g_transverse", g_transverse, "m/s^2")
    L = channel.length_scale
    return math.nan if L is None else rho * abs(g) * L * L / sigma
