r"""Free-surface shape along an open capillary channel, and the critical flow with its surface.

:func:`surface_profile` gives the steady surface (radius, area, speed, pressure, speed index along
z) for a flow Q; :func:`critical_flow_rate` the largest steady flow of a given length with the
surface at that flow. Two models:

* streamwise curvature neglected (default): the one-dimensional model of
  :mod:`lowgmap.physics.models.open_channel.hydraulics`; the curvature at each z is found by
  inverting the tabulated length :math:`z(\kappa)`;
* ``streamwise_curvature=True``: the surface curvature along z (:math:`1/R_2`) is kept, the surface
  is flat at both ends of the open section (joined to closed ducts), and the shape is a
  boundary-value problem in the centre depth h(z),

  .. math::

      \frac{h''}{(1 + h'^2)^{3/2}} = \frac{p - p_g}{\sigma} + \kappa(h), \qquad
      \frac{\mathrm{d}p}{\mathrm{d}z} = \frac{\rho Q^2}{A^3}\frac{\mathrm{d}A}{\mathrm{d}h}h'
      - \frac{K\mu Q}{A^2}, \qquad h(0) = h(l) = 0,

  solved with :func:`scipy.integrate.solve_bvp` and continuation in Q (pinned channels only).
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np
from scipy.integrate import solve_bvp

from lowgmap.physics.models.open_channel.geometry import OpenChannel, PinnedChannel, WedgeChannel
from lowgmap.physics.models.open_channel.hydraulics import LIMITS, SteadyFlow
from lowgmap.physics.validate import format_number, positive

__all__ = ["Profile", "CriticalFlow", "ChokingMechanism", "surface_profile", "critical_flow_rate", "choking_mechanism"]

#: Streamwise-curvature model: collocation tolerance of scipy's solve_bvp, and the relative step in
#: the flow rate at which the continuation stops (the accuracy of Q_crit).
_BVP_TOL = 1e-5
_CONT_RTOL = 1e-5


# =============================================================================================
# results
# =============================================================================================
@dataclass(frozen=True)
class Profile:
    """Steady surface along the open channel (arrays over z).

    z : positions from the inlet [m]
    R1 : surface radius in the cross-section [m] (inf = flat)
    area : liquid flow area [m^2]
    velocity : mean liquid speed Q/A [m/s]
    pressure : liquid pressure relative to the gas, p - p_gas [Pa]
    speed_index : S = v / v_c
    flow_rate : Q [m^3/s]
    centre_depth : depth of the surface below the edge chord on its symmetry line [m]
        (NaN for a corner filament)
    """

    z: np.ndarray
    R1: np.ndarray
    area: np.ndarray
    velocity: np.ndarray
    pressure: np.ndarray
    speed_index: np.ndarray
    flow_rate: float
    centre_depth: np.ndarray = field(default=None)


@dataclass(frozen=True)
class CriticalFlow:
    """Critical (largest steady) flow rate of an open channel of given length.

    Q_crit : critical flow rate [m^3/s]
    limited_by : key of :data:`~lowgmap.physics.models.open_channel.hydraulics.LIMITS` ("speed_index",
        "inlet", "meniscus_limit", "no_solution")
    outlet_speed_index : speed index at the outlet at Q_crit (1 when limited by the speed index)
    profile : :class:`Profile` at Q_crit (None when no flow is held: ``limited_by`` "hydrostatic")

    With streamwise curvature the surface is flat at the outlet itself and ``outlet_speed_index``
    is the largest speed index along the channel (reached just upstream of the outlet).

    For a :class:`WedgeChannel` with a contact angle > 0 the area compliance dA/dp jumps up where
    the contact lines leave the plate edges, so the speed index jumps there; if it jumps across 1
    the flow chokes at that radius (``limited_by`` "speed_index") and ``outlet_speed_index`` is
    the value on the pinned side, below 1.
    """

    Q_crit: float
    limited_by: str
    outlet_speed_index: float
    profile: Profile | None
    mechanism: "ChokingMechanism | None" = None


@dataclass(frozen=True)
class ChokingMechanism:
    """What chokes an open channel at its critical flow, in numbers consistent with :class:`CriticalFlow`.

    key : key of :data:`~lowgmap.physics.models.open_channel.hydraulics.LIMITS` (``limited_by``)
    description : the mechanism in words, with the numbers
    outlet_radius : surface radius R1 at the outlet at Q_crit [m]
    speed_index : speed index at the outlet (for a depinning choke: on the pinned side, below 1)
    speed_index_beyond : speed index just past the depinning radius (the corner filament; NaN unless
        the choke is by depinning)
    """

    key: str
    description: str
    outlet_radius: float
    speed_index: float
    speed_index_beyond: float


def choking_mechanism(channel: OpenChannel, critical: CriticalFlow, rho: float, sigma: float) -> ChokingMechanism:
    r"""The real choking mechanism of a critical flow: speed index 1, depinning of the free surface, or another limit.

    .. math:: S_\mathrm{pinned} = S(\kappa_t^-) < 1 \le S(\kappa_t^+) = \sqrt{\frac{2\rho Q^2 \kappa_t^3}{\sigma F^2}}
              \quad\Rightarrow\quad \text{depinning}

    (:math:`\kappa_t = 1/R_t` where the contact lines of a wedge channel leave the plate edges, F the
    corner area factor: :math:`A = F/\kappa^2`, :math:`-\mathrm{d}A/\mathrm{d}\kappa = 2F/\kappa^3` beyond).

    Parameters
    ----------
    channel : OpenChannel     the channel of the result
    critical : CriticalFlow   from :func:`critical_flow_rate`
    rho, sigma : float        liquid density [kg/m^3] and surface tension [N/m] used there

    Returns
    -------
    ChokingMechanism

    Notes
    -----
    For a wedge channel with a contact angle > 0, the compliance dA/dp jumps up where the surface
    leaves the plate edges (the contact lines slide toward the apex), so the speed index jumps. When
    it jumps across 1 the flow chokes right there although the speed index on the pinned side, the
    outlet value reported by :func:`critical_flow_rate`, is below 1: the surface collapses because it
    depins. Otherwise the key is ``limited_by`` itself.

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.models.open_channel import WedgeChannel, critical_flow_rate
    >>> w = WedgeChannel(math.radians(6.0), 0.04, math.radians(5.0))
    >>> res = critical_flow_rate(w, 0.04, rho=913.0, mu=4.565e-3, sigma=0.0197)
    >>> m = choking_mechanism(w, res, 913.0, 0.0197)
    >>> m.key, m.speed_index < 1.0 < m.speed_index_beyond
    ('depinning', True)
    """
    rho = positive("rho", rho, "kg/m^3")
    sigma = positive("sigma", sigma, "N/m")
    prof = critical.profile
    R_out = float(prof.R1[-1]) if prof is not None and len(prof.R1) else math.nan
    s_out = float(critical.outlet_speed_index)
    key = critical.limited_by
    beyond = math.nan
    Q = float(critical.Q_crit)
    if isinstance(channel, WedgeChannel) and channel.contact_angle > 0.0 and math.isfinite(R_out):
        kt = channel.kappa_pinned
        if abs(1.0 / R_out - kt) <= 1e-6 * kt:
            F = channel.area_factor
            beyond = math.sqrt(2.0 * rho * Q * Q * kt ** 3 / (sigma * F * F))
            if s_out < 1.0 - 1e-9 and beyond >= 1.0 - 1e-9 and key in ("speed_index", "depinning"):
                key = "depinning"
    text = LIMITS.get(key, key)
    if key == "depinning":
        text = (f"depinning: at the critical flow the free surface reaches the plate edges' limit at the outlet "
                f"(R1 = {format_number(R_out)} m, where it meets the plates at the contact angle); the speed index "
                f"is {s_out:.3g} on the pinned side and {beyond:.3g} once the contact lines slide toward the apex, "
                f"so the surface collapses by leaving the edges, not by the speed index reaching 1 on a pinned "
                f"surface")
    elif key == "speed_index":
        text = f"speed index 1 at the outlet (R1 = {format_number(R_out)} m, S = {s_out:.3g}): " + text
    return ChokingMechanism(key, text, R_out, s_out, beyond)


# =============================================================================================
# the surface without streamwise curvature
# =============================================================================================
def _steady_profile(flow: SteadyFlow, Q, length, n) -> Profile:
    """Surface along z at flow Q: the curvature from z(kappa) = z by vectorised bisection."""
    ch = flow.channel
    kin, kend, Lc = flow.choke(Q)
    z = np.linspace(0.0, length, n)
    if flow.tables is None:
        k = np.full(n, kin)
    else:
        if Lc < length * (1 - 1e-9):
            why = "speed index 1" if flow.S(kend, Q) >= 1 - 1e-9 else "smallest surface radius reached"
            raise ValueError(f"flow_rate {format_number(Q)} m^3/s is above what this channel carries over length "
                             f"{format_number(length)} m: the flow chokes at z = {format_number(Lc)} m ({why})")
        lo = np.full(n, kin)
        hi = np.full(n, kend)
        for _ in range(60):                            # vectorised bisection of z(kappa) = z
            mid = 0.5 * (lo + hi)
            zm = flow.z_of_kappa(kin, mid, Q)
            below = zm < z
            lo = np.where(below, mid, lo)
            hi = np.where(below, hi, mid)
        k = 0.5 * (lo + hi)
        k[0] = kin
    A = ch.area_at(k)
    with np.errstate(divide="ignore"):
        R1 = np.where(k > 0, 1.0 / np.maximum(k, 1e-300), np.inf)
    depth = ch.depth_at(k) if isinstance(ch, PinnedChannel) else np.full(n, np.nan)
    return Profile(z=z, R1=R1, area=A, velocity=Q / A, pressure=-flow.sigma * k,
                   speed_index=flow.S(k, Q), flow_rate=float(Q), centre_depth=depth)


def _critical_profile(flow: SteadyFlow, Q, length) -> Profile:
    """Surface at the critical flow Q over the open length (201 points)."""
    if flow.tables is None:
        return _steady_profile(flow, Q, length, 201)
    # at Q_crit the choke length equals `length` to rounding: stretch the check slightly
    kin, kend, Lc = flow.choke(Q)
    length_eff = Lc if abs(Lc - length) <= 1e-8 * length else min(Lc, length)
    p = _steady_profile(flow, Q, length_eff, 201)
    if length_eff != length:
        p = Profile(z=p.z * (length / length_eff), R1=p.R1, area=p.area, velocity=p.velocity,
                    pressure=p.pressure, speed_index=p.speed_index, flow_rate=p.flow_rate,
                    centre_depth=p.centre_depth)
    return p


# =============================================================================================
# public functions
# =============================================================================================
def surface_profile(channel: OpenChannel, flow_rate: float, length: float, rho: float, mu: float,
                    sigma: float, *, K_e: float = 0.0, inlet_pressure: float | None = None,
                    inlet_radius: float | None = None, streamwise_curvature: bool = False,
                    resistance=None, n: int = 201, g_axial: float = 0.0) -> Profile:
    r"""Steady free-surface shape along an open channel carrying a liquid flow Q.

    .. math::

        \frac{\mathrm{d}p}{\mathrm{d}z} = -\frac{K\mu Q}{A^2(1 - S^2)}, \qquad
        p(0) = p_0 - (1 + K_e)\frac{\rho Q^2}{2 A(0)^2}, \qquad p - p_g = -\frac{\sigma}{R_1}

    Parameters
    ----------
    channel : OpenChannel   :class:`ParallelPlates`, :class:`RectangularGroove`,
        :class:`WedgeChannel` or :class:`CornerFilament`
    flow_rate : float       liquid flow Q [m^3/s], > 0
    length : float          length l of the open section [m], > 0
    rho, mu, sigma : float  density [kg/m^3], viscosity [Pa s] (>= 0; 0 = inviscid), surface
        tension [N/m]
    K_e : float             entrance loss coefficient (>= 0, default 0)
    inlet_pressure : float, optional   reservoir total pressure minus gas pressure p_0 - p_g [Pa],
        <= 0 (default 0)
    inlet_radius : float, optional     surface radius at z = 0 [m] instead of a reservoir
        (then K_e and inlet_pressure are not used)
    streamwise_curvature : bool        include the curvature of the surface along z (1/R_2); the
        surface is then flat at both ends of the open section (joined to closed ducts) and the
        problem is a boundary-value problem (pinned channels only; found by continuation in Q, a
        "no_solution" result is the last converged flow, a lower bound; for wedges whose surface
        leaves the edges the solver may stop early, see the theory manual)
    resistance : None, float or callable   viscous resistance K (viscous pressure gradient
        K mu Q / A^2): None = Stokes tables of :meth:`OpenChannel.resistance`; a number; or
        ``f(R1) -> K`` (vectorised, R1 = inf for a flat surface; not for a CornerFilament, whose K
        is one number; for a WedgeChannel its value at the transition radius is used for the
        corner part)
    n : int                 number of points along z (default 201)
    g_axial : float         component of the residual acceleration along the axis, against the flow
        [m/s^2] (``g * orientation.axial_fraction``; > 0 upward flow), default 0: the hydrostatic term
        :math:`-\rho g_a` of the momentum balance (not with ``streamwise_curvature``)

    Returns
    -------
    Profile

    Raises
    ------
    ValueError
        bad input, or Q above what the channel carries over this length (the message gives the
        position where the flow chokes).

    Notes
    -----
    Fully developed viscous resistance at every z (the entrance region's extra loss is in K_e),
    uniform pressure over the section, gravity and gas flow neglected. See the theory manual.

    Examples
    --------
    >>> from lowgmap.physics.models.open_channel import ParallelPlates
    >>> pp = ParallelPlates(gap=0.005, breadth=0.025)
    >>> pr = surface_profile(pp, 2e-6, 0.05, rho=1000.0, mu=1e-3, sigma=0.07, resistance=60.0)
    >>> bool(pr.speed_index.max() < 1), bool(pr.R1[-1] < pr.R1[0])
    (True, True)
    """
    Q = positive("flow_rate", flow_rate, "m^3/s")
    length = positive("length", length, "m")
    n = _check_n(n)
    if streamwise_curvature:
        _no_gravity_with_curvature(g_axial)
        return _curved_profile(channel, Q, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius,
                               resistance, n)
    flow = SteadyFlow(channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance, g_axial)
    kf, Qf = flow.fold()
    if Q > Qf * (1 + 1e-12):
        what = ("speed index 1 at the inlet radius" if flow.kin_fixed is not None
                else "the largest flow the reservoir pushes through the entrance")
        raise ValueError(f"flow_rate must be <= {format_number(Qf)} m^3/s ({what}), got {format_number(Q)} m^3/s")
    return _steady_profile(flow, min(Q, Qf), length, n)


def _no_gravity_with_curvature(g_axial):
    if g_axial != 0.0:
        raise ValueError(f"g_axial must be 0 with streamwise_curvature (gravity is in the model without "
                         f"streamwise curvature only), got {format_number(g_axial)} m/s^2")


def _check_n(n):
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 2:
        raise ValueError(f"n must be an integer >= 2, got {n!r}")
    return int(n)


def critical_flow_rate(channel: OpenChannel, length: float, rho: float, mu: float, sigma: float, *,
                       K_e: float = 0.0, inlet_pressure: float | None = None,
                       inlet_radius: float | None = None, streamwise_curvature: bool = False,
                       resistance=None, g_axial: float = 0.0) -> CriticalFlow:
    r"""Critical flow rate of an open capillary channel: the largest steady flow, S < 1 throughout.

    .. math::

        l = \int_{\kappa_\mathrm{in}(Q)}^{\kappa^*(Q)}
            \frac{\sigma A^2 (1 - S^2)}{K \mu Q}\,\mathrm{d}\kappa,
        \qquad S(\kappa^*) = 1

    solved for Q (Q_crit decreases with the length l).

    Parameters
    ----------
    channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, streamwise_curvature, resistance, g_axial
        as in :func:`surface_profile`
    length : float          length l of the open section [m], > 0

    Returns
    -------
    CriticalFlow
        Q_crit [m^3/s], ``limited_by`` (see :data:`LIMITS`), outlet speed index, profile at Q_crit.

    Notes
    -----
    Inviscid limit (mu = 0, K_e = 0, p_0 = p_g, R_2 neglected): Q_crit is the maximum over R1 of
    :math:`A(R_1)\sqrt{2\sigma/(\rho R_1)}` and does not depend on l. Long channels
    (viscous-dominated): :math:`Q_\mathrm{crit} l \mu \to \sigma\int_{\kappa_0}^{\kappa_{max}} A^2/K\,\mathrm{d}\kappa`.
    With streamwise curvature, Q_crit is found by continuation in Q (see the theory manual).

    References
    ----------
    U. Rosendahl, A. Ohlhoff and M. E. Dreyer, "Choked flows in open capillary channels: theory,
    experiment and computations", J. Fluid Mech. 518:187-214, 2004 (DOI not checked).
    D. Haake, J. Klatte, A. Grah and M. E. Dreyer, "Flow rate limitation of steady convective
    dominated open capillary channel flows through a groove", Microgravity Sci. Technol.
    22:129-138, 2010. doi:10.1007/s12217-009-9164-2
    J. Klatte et al., "A fast numerical procedure for steady capillary flow in open channels",
    Acta Mech. 201:269-276, 2008. doi:10.1007/s00707-008-0063-1

    Examples
    --------
    >>> from lowgmap.physics.models.open_channel import ParallelPlates
    >>> pp = ParallelPlates(gap=1.0, breadth=1.0)
    >>> round(critical_flow_rate(pp, 10.0, rho=1.0, mu=0.0, sigma=1.0).Q_crit, 4)
    1.2053
    """
    length = positive("length", length, "m")
    if streamwise_curvature:
        _no_gravity_with_curvature(g_axial)
        return _curved_critical(channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance)
    flow = SteadyFlow(channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance, g_axial)
    Q, limited_by = flow.critical(length)
    if Q == 0.0:                                        # hydrostatic: no flow is held over this length
        return CriticalFlow(Q_crit=0.0, limited_by=limited_by, outlet_speed_index=math.nan, profile=None,
                            mechanism=ChokingMechanism(limited_by, LIMITS[limited_by], math.nan, math.nan, math.nan))
    prof = _critical_profile(flow, Q, length)
    res = CriticalFlow(Q_crit=Q, limited_by=limited_by, outlet_speed_index=float(prof.speed_index[-1]),
                       profile=prof)
    return dataclasses.replace(res, mechanism=choking_mechanism(channel, res, flow.rho, flow.sigma))


# =============================================================================================
# streamwise curvature: boundary-value problem, surface flat at both ends
# =============================================================================================
class _CurvedSurface:
    """Dimensionless BVP in y = (k, dk/dx, p) with x = z/L, k = depth/L, p in sigma/L, Q in L^2 U."""

    def __init__(self, channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance):
        if not isinstance(channel, PinnedChannel):
            raise ValueError("streamwise_curvature needs a channel with pinned surfaces (ParallelPlates, "
                             f"RectangularGroove, WedgeChannel), got {type(channel).__name__}")
        if inlet_radius is not None:
            raise ValueError("inlet_radius is not used with streamwise_curvature (the surface is flat at both "
                             "ends of the open section); give inlet_pressure instead")
        self.flow = SteadyFlow(channel, rho, mu, sigma, K_e, inlet_pressure, None, resistance)
        self.ch = channel
        L = channel.length_scale
        self.L = L
        self.U = math.sqrt(sigma / (rho * L))
        self.Oh = self.flow.mu / math.sqrt(rho * sigma * L)
        self.lam = length / L
        self.p0 = -self.flow.k0 * L
        self.Ke = self.flow.K_e
        self.A0 = channel.flat_area / L**2
        self.kmax_t = channel.kappa_max * L
        self.tables = self.flow.tables

    def _geo(self, k):
        """kappa, A, dA/dk (dimensionless) at depth k."""
        ch, L = self.ch, self.L
        kd = k * L
        kap = ch.kappa_of_depth(kd)
        kap_c = np.minimum(kap, ch.kappa_max)
        A = ch.area_at(kap_c) / L**2
        Ak = ch.dA_dkappa(kap_c) * ch.dkappa_ddepth(kd) / L       # (dA/dk [m]) / L: dimensionless
        return kap * L, A, Ak

    def rhs(self, Q):
        def f(x, y):
            k, kp, p = y
            kap, A, Ak = self._geo(k)
            kpp = (1.0 + np.minimum(kp * kp, 1e6)) ** 1.5 * (p + kap)
            if self.tables is not None:
                K = self.tables.K(np.maximum(kap, 0.0) / self.L)
                visc = self.Oh * K * Q / A**2
            else:
                visc = 0.0
            dp = Q * Q * Ak * kp / A**3 - visc
            return np.vstack([kp, kpp, dp])
        return f

    def bc(self, Q):
        pin = self.p0 - (1.0 + self.Ke) * Q * Q / (2.0 * self.A0**2)

        def g(ya, yb):
            return np.array([ya[0], yb[0], ya[2] - pin])
        return g

    def solve(self, Q, guess):
        x, y = guess
        with np.errstate(all="ignore"):
            sol = solve_bvp(self.rhs(Q), self.bc(Q), x, y, tol=_BVP_TOL, max_nodes=max(2000, 3 * len(x)))
        return sol

    def speed(self, Q, k):
        kap, A, _ = self._geo(k)
        with np.errstate(invalid="ignore", divide="ignore"):
            H = A**3 / (-self.ch.dA_dkappa(np.minimum(kap / self.L, self.ch.kappa_max)) / self.L**3)
        return kap, A, np.sqrt(Q * Q / H)

    def ok(self, Q, sol):
        if not sol.success:
            return False, "no_solution"
        x = np.linspace(0.0, self.lam, 401)
        k = sol.sol(x)[0]
        kap, A, S = self.speed(Q, k)
        if np.any(kap >= self.kmax_t * (1 - 1e-9)) or not np.all(np.isfinite(S)):
            return False, "meniscus_limit"
        if np.any(S >= 1.0):
            return False, "speed_index"
        return True, ""

    def first_guess(self, Q):
        x = np.linspace(0.0, self.lam, 81)
        pin = self.p0 - (1.0 + self.Ke) * Q * Q / (2.0 * self.A0**2)
        y = np.vstack([np.zeros_like(x), np.zeros_like(x), np.full_like(x, pin)])
        return x, y

    def profile(self, Q, sol, n):
        x = np.linspace(0.0, self.lam, n)
        k, kp, p = sol.sol(x)
        kap, A, S = self.speed(Q, k)
        L, U, sig = self.L, self.U, self.flow.sigma
        Qd = Q * L * L * U
        Ad = A * L * L
        with np.errstate(divide="ignore"):
            R1 = np.where(kap > 0, L / np.maximum(kap, 1e-300), np.inf)
        return Profile(z=x * L, R1=R1, area=Ad, velocity=Qd / Ad, pressure=p * sig / L, speed_index=S,
                       flow_rate=float(Qd), centre_depth=k * L)

    def continuation(self, Q_target=None):
        """Follow the solution from a small flow up to Q_target, or up to the largest flow (critical)."""
        scale = self.L**2 * self.U
        Q_nc = self.flow.critical(self.lam * self.L)[0] / scale     # no-curvature estimate
        q = 0.2 * Q_nc if Q_target is None else min(0.2 * Q_nc, Q_target)
        guess = self.first_guess(q)
        sol = self.solve(q, guess)
        good, why = self.ok(q, sol)
        while not good and q > 1e-6 * Q_nc:
            q *= 0.5
            sol = self.solve(q, self.first_guess(q))
            good, why = self.ok(q, sol)
        if not good:
            raise RuntimeError("streamwise-curvature model: no converged surface even at a small flow "
                               f"({format_number(q * scale)} m^3/s)")
        if Q_target is not None and q >= Q_target:
            return (q, sol), ""
        step = 0.25 * q
        last = (q, sol)
        why_fail = "no_solution"
        while step > _CONT_RTOL * last[0]:
            q_try = last[0] + step
            if Q_target is not None and q_try >= Q_target:
                q_try = Q_target
            s2 = self.solve(q_try, (last[1].x, last[1].y))
            good, why = self.ok(q_try, s2)
            if good:
                last = (q_try, s2)
                if Q_target is not None and q_try >= Q_target:
                    return last, ""
                step *= 1.5
            else:
                why_fail = why
                step *= 0.5
        if Q_target is not None:
            raise ValueError(f"flow_rate {format_number(Q_target * scale)} m^3/s is above the critical flow rate "
                             f"{format_number(last[0] * scale)} m^3/s of this channel with streamwise curvature "
                             f"({LIMITS[why_fail]})")
        return last, why_fail


def _curved_profile(channel, Q, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance, n):
    cv = _CurvedSurface(channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance)
    (q, sol), _ = cv.continuation(Q_target=Q / (cv.L**2 * cv.U))
    return cv.profile(q, sol, n)


def _curved_critical(channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance):
    cv = _CurvedSurface(channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance)
    (q, sol), why = cv.continuation()
    prof = cv.profile(q, sol, 201)
    # the surface is flat at the outlet itself: report the largest speed index (just upstream)
    return CriticalFlow(Q_crit=float(prof.flow_rate), limited_by=why,
                        outlet_speed_index=float(np.max(prof.speed_index)), profile=prof,
                        mechanism=ChokingMechanism(why, LIMITS.get(why, why), math.nan,
                                                   float(np.max(prof.speed_index)), math.nan))
