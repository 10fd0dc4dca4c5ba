r"""Flow-rate limit of open capillary channels (gas ingestion at the outlet).

An open capillary channel carries liquid along walls with one or more free surfaces held by
surface tension. Pulling more liquid through it lowers the liquid pressure, curves the free
surfaces further into the channel and narrows the flow area, which speeds the liquid up and lowers
the pressure further. Above a critical flow rate no steady surface exists: the surface collapses at
the outlet and gas is drawn into the outlet duct. This module computes that critical flow rate.

Steady one-dimensional model along the open length :math:`0 \le z \le l` (Rosendahl, Ohlhoff &
Dreyer 2004; Haake et al. 2010; Klatte et al. 2008):

.. math::

    Q = v A, \qquad
    \rho v \frac{\mathrm{d}v}{\mathrm{d}z} = -\frac{\mathrm{d}p}{\mathrm{d}z} - \frac{K \mu Q}{A^2},
    \qquad p - p_g = -\sigma\Bigl(\frac{1}{R_1} + \frac{1}{R_2}\Bigr), \qquad A = A(R_1),

with the inlet fed from a reservoir at total pressure :math:`p_0`,
:math:`p(0) = p_0 - (1 + K_e)\,\rho v(0)^2/2`. :math:`K(R_1)` is the dimensionless viscous
resistance of the cross-section, from the fully developed Stokes problem solved by
:mod:`lowgmap.physics.geometry.stokes` (:math:`K = A/\bar w`, :math:`\bar w` the mean of :math:`-\nabla^2 w = 1`,
:math:`w = 0` on walls, :math:`\partial_n w = 0` on the free surfaces). Eliminating v,

.. math::

    \frac{\mathrm{d}p}{\mathrm{d}z} = -\frac{K \mu Q}{A^2 (1 - S^2)}, \qquad
    S = \frac{v}{v_c}, \quad v_c = \sqrt{\frac{A}{\rho\, \mathrm{d}A/\mathrm{d}p}},

(streamwise curvature :math:`1/R_2` neglected), so the pressure gradient is singular where the
speed index S reaches 1. The critical flow rate is the largest Q for which the surface exists
with S < 1 over the whole length; at that flow S = 1 at the outlet.

Solution: with the curvature :math:`\kappa = 1/R_1` as variable,
:math:`\mathrm{d}z/\mathrm{d}\kappa = \sigma A^2 (1 - S^2)/(K\mu Q)` integrates in closed form
over tables built once per channel (area, resistance and two cumulative integrals), so the search
for the critical flow does no mesh solve and no ODE step (see the theory manual,
physics/manual/open_channel.md). With ``streamwise_curvature=True`` the surface shape is a
boundary-value problem solved with :func:`scipy.integrate.solve_bvp` and continuation in Q.

Viscous resistance convention (also for a user-supplied ``resistance``): the viscous pressure
gradient is :math:`K \mu Q / A^2` with K dimensionless (K = 12 b/a for plates with flat surfaces).

Channels (surfaces are circular arcs in the section; pinned at the wall edges except in a corner):

* :class:`ParallelPlates` gap a, breadth b: two free surfaces spanning the gap;
* :class:`RectangularGroove` width w, depth d: one free surface across the top (a V-groove pinned
  at its top edges is a :class:`WedgeChannel`);
* :class:`WedgeChannel` half-angle α, plate length L, surface pinned at the plate edges until it
  meets the plates at the contact angle, then a free corner filament;
* :class:`CornerFilament` unbounded interior corner, free contact lines (needs an inlet radius or
  an inlet pressure below the gas pressure: it has no size of its own).

Conventions: SI units, angles in radians, pressures relative to the gas, :math:`R_1 > 0` for a
surface curved into the liquid (liquid pressure below the gas pressure). Functions of ``R1`` accept
arrays; an ``R1`` outside the channel's range gives NaN.
"""
from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import dataclass, field
from functools import lru_cache
from typing import ClassVar

import numpy as np
from scipy.integrate import solve_bvp
from scipy.interpolate import BarycentricInterpolator, CubicSpline
from scipy.optimize import brentq

from lowgmap.physics.validate import angle_deg_in_range, finite, non_negative, positive

__all__ = [
    "OpenChannel",
    "ParallelPlates",
    "RectangularGroove",
    "WedgeChannel",
    "CornerFilament",
    "Profile",
    "CriticalFlow",
    "CriticalFlowCurve",
    "speed_index",
    "surface_profile",
    "critical_flow_rate",
    "critical_flow_curve",
    "LIMITS",
]

#: Values of :attr:`CriticalFlow.limited_by` and what they mean.
LIMITS = {
    "speed_index": "the speed index reaches 1 at the outlet (the surface collapses there)",
    "inlet": "no steadier inlet state: the reservoir cannot push more through the entrance loss "
             "(the speed index at the outlet stays below 1; only with K_e > 0 or mu = 0)",
    "meniscus_limit": "the surface reaches its smallest radius at the outlet (it leaves the edges "
                      "or touches the opposite wall or surface) before the speed index reaches 1",
    "no_solution": "streamwise-curvature model: the boundary-value problem has no solution for a "
                   "larger flow (fold of the solution branch)",
}

#: Chebyshev nodes (in the arc half-angle) of the Stokes resistance tables. Largest interpolation
#: error against direct solves (measured): 11 nodes 1e-3, 15 nodes 8e-5, 21 nodes 2e-6 for plates
#: b/a = 1 (the two surfaces close in on each other); 21 are used (about 1 s per shape).
_TABLE_NODES = 21

#: The resistance tables stop this far (in arc half-angle, rad) before an arc becomes tangent to
#: a wall (a cusp the mesh cannot resolve) and before a surface touches a wall or another surface
#: (liquid neck below 5 % of the half span). K is held constant over the last stretch.
_TABLE_END_MARGIN = 0.05

#: Streamwise-curvature model: collocation tolerance of scipy's solve_bvp, and the relative step in
#: the flow rate at which the continuation stops (the accuracy of Q_crit).
_BVP_TOL = 1e-5
_CONT_RTOL = 1e-5

#: Points of the fine arc-angle grid on which the cumulative integrals are tabulated.
_GRID = 801


def _fmt(x) -> str:
    return f"{float(x):.6g}"


# =============================================================================================
# arc-segment geometry
# =============================================================================================
def _g(beta):
    """beta - sin(beta) cos(beta), with a series near 0 (no cancellation)."""
    b = np.asarray(beta, dtype=float)
    small = np.abs(b) < 1e-2
    b2 = b * b
    series = b * b2 * (2.0 / 3.0 - b2 * (2.0 / 15.0 - b2 * 4.0 / 315.0))
    with np.errstate(invalid="ignore"):
        direct = b - 0.5 * np.sin(2.0 * b)
    return np.where(small, series, direct)


def _seg_over_c2(beta):
    """Area of a circular segment of half-angle beta over its half-chord squared: g/sin^2."""
    b = np.asarray(beta, dtype=float)
    small = np.abs(b) < 1e-2
    b2 = b * b
    # g/sin^2 = (2/3) b (1 + b^2/10 + ...) from the series of g and sin
    series = (2.0 / 3.0) * b * (1.0 + b2 / 10.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        direct = _g(b) / np.sin(b) ** 2
    return np.where(small, series, direct)


def _fcos(beta):
    """1 - g(beta) cos(beta)/sin^3(beta) = cos(beta) * (1/cos - g/sin^3); finite on [0, pi/2]."""
    b = np.asarray(beta, dtype=float)
    small = np.abs(b) < 1e-2
    b2 = b * b
    series = (1.0 / 3.0 + 0.3 * b2) * np.cos(b)
    with np.errstate(invalid="ignore", divide="ignore"):
        direct = 1.0 - _g(b) * np.cos(b) / np.sin(b) ** 3
    return np.where(small, series, direct)


def _corner_area_factor(alpha, theta):
    r"""Corner meniscus area factor F = A/R^2, from :func:`lowgmap.physics.geometry.corner.meniscus_area_factor`."""
    from lowgmap.physics.geometry.corner import meniscus_area_factor
    return float(meniscus_area_factor(alpha, theta))


# =============================================================================================
# channels
# =============================================================================================
class OpenChannel(ABC):
    """Cross-section of an open capillary channel: flow area as a function of the surface radius.

    Sub-classes are frozen dataclasses in SI units. The internal variable is the surface
    curvature ``kappa = 1/R1`` [1/m] (0 for a flat surface), the liquid pressure is
    ``p - p_gas = -sigma * kappa`` when the streamwise curvature is neglected.
    """

    kind: ClassVar[str] = ""

    # ---- what each kind provides ---------------------------------------------------------
    @property
    @abstractmethod
    def length_scale(self) -> float | None:
        """Length used to make results dimensionless [m] (None for a corner filament)."""

    @property
    @abstractmethod
    def _kappa_max(self) -> float:
        """Largest surface curvature [1/m] (inf if the area goes to 0 only as R1 -> 0)."""

    @abstractmethod
    def _A(self, kappa):
        """Flow area [m^2] at curvature kappa (array), valid on [0, kappa_max]."""

    @abstractmethod
    def _Ak(self, kappa):
        """dA/dkappa [m^3] (negative)."""

    # ---- public geometry ------------------------------------------------------------------
    @property
    def min_radius(self) -> float:
        """Smallest surface radius R1 the channel can hold [m] (0 if none)."""
        km = self._kappa_max
        return 0.0 if math.isinf(km) else 1.0 / km

    def _kappa(self, R1):
        r = np.asarray(R1, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            k = np.where(r > 0, 1.0 / r, np.nan)
        k = np.where(k <= self._kappa_max * (1 + 1e-12), k, np.nan)
        return k

    def area(self, R1):
        r"""Liquid flow area A(R1) [m^2] for a surface radius R1 [m] (``np.inf`` = flat surface).

        Returns NaN where R1 <= 0 or R1 < :attr:`min_radius`.
        """
        k = self._kappa(R1)
        with np.errstate(invalid="ignore", divide="ignore"):
            out = np.where(np.isnan(k), np.nan, self._A(np.nan_to_num(k, nan=self._safe_kappa())))
        return float(out) if out.ndim == 0 else out

    def dA_dp(self, R1, sigma):
        r"""Compliance of the flow area with the liquid pressure [m^2/Pa].

        .. math:: \frac{\mathrm{d}A}{\mathrm{d}p} = -\frac{1}{\sigma}\frac{\mathrm{d}A}{\mathrm{d}\kappa},
                  \qquad p - p_g = -\sigma\kappa, \ \kappa = 1/R_1

        Parameters
        ----------
        R1 : float or array   surface radius in the cross-section [m]
        sigma : float         surface tension [N/m]
        """
        sigma = positive("sigma", sigma, "N/m")
        k = self._kappa(R1)
        with np.errstate(invalid="ignore", divide="ignore"):
            out = np.where(np.isnan(k), np.nan, -self._Ak(np.nan_to_num(k, nan=self._safe_kappa())) / sigma)
        return float(out) if out.ndim == 0 else out

    def _safe_kappa(self) -> float:
        return 1.0 / self.length_scale if self.length_scale else 1.0

    def resistance(self, R1):
        r"""Viscous resistance K(R1) of the section from the Stokes problem (dimensionless).

        .. math:: -\frac{\mathrm{d}p}{\mathrm{d}z}\Big|_\mathrm{visc} = \frac{K \mu Q}{A^2},
                  \qquad K = \frac{A}{\bar w}

        with :math:`\bar w` the mean of :math:`-\nabla^2 w = 1` (no slip on walls, shear-free
        surfaces), from :func:`lowgmap.physics.geometry.stokes.solve_poisson` tabulated over the arc angle.
        NaN outside the channel's radius range.
        """
        hyd = _hydraulics(self, None)
        k = self._kappa(R1)
        out = np.where(np.isnan(k), np.nan, hyd.K(np.nan_to_num(k, nan=self._safe_kappa())))
        return float(out) if out.ndim == 0 else out


class _Pinned(OpenChannel):
    """Channels whose free surfaces are circular arcs pinned at two wall edges a chord 2c apart."""

    # provided by sub-classes
    @property
    @abstractmethod
    def _c(self) -> float:
        """Half chord of each free surface [m]."""

    @property
    @abstractmethod
    def _n(self) -> int:
        """Number of free surfaces."""

    @property
    @abstractmethod
    def flat_area(self) -> float:
        """Flow area with flat surfaces, A(R1 = inf) [m^2]."""

    @property
    @abstractmethod
    def _beta_touch(self) -> float:
        """Arc half-angle at which a surface touches a wall or the other surface [rad]."""

    @property
    @abstractmethod
    def _beta_pin(self) -> float:
        """Arc half-angle at which the surface leaves the edges (meets the wall at theta) [rad]."""

    @property
    def _beta_max(self) -> float:
        return min(self._beta_touch, self._beta_pin)

    @property
    def _kappa_pin_end(self) -> float:
        return math.sin(self._beta_max) / self._c

    @property
    def _kappa_max(self) -> float:
        return self._kappa_pin_end

    def _beta(self, kappa):
        x = np.clip(np.asarray(kappa, dtype=float) * self._c, -1.0, 1.0)
        return np.arcsin(x)

    def _A(self, kappa):
        b = self._beta(kappa)
        return self.flat_area - self._n * self._c**2 * _seg_over_c2(b)

    def _Ak(self, kappa):
        # d(segment)/dkappa = 2 c^3 (1/cos b - g/sin^3 b) = 2 c^3 fcos(b)/cos(b)
        b = self._beta(kappa)
        with np.errstate(divide="ignore"):
            return -self._n * 2.0 * self._c**3 * _fcos(b) / np.cos(b)

    def centre_depth(self, R1):
        """Depth of the surface on its symmetry line below the edge chord [m] (c tan(beta/2))."""
        k = self._kappa(R1)
        return self._depth(k)

    def _depth(self, kappa):
        b = self._beta(kappa)
        return self._c * np.tan(0.5 * b)

    def _kappa_of_depth(self, k):
        k = np.asarray(k, dtype=float)
        c = self._c
        return 2.0 * k / (c * c + k * k)

    def _dkappa_ddepth(self, k):
        k = np.asarray(k, dtype=float)
        c = self._c
        return 2.0 * (c * c - k * k) / (c * c + k * k) ** 2

    # Stokes domain (a symmetric part of the section; K = A/mean is the same for the part)
    @abstractmethod
    def _stokes_pieces(self, beta: float):
        """Boundary pieces of a symmetric part of the section at arc half-angle beta."""

    @abstractmethod
    def _normalized(self):
        """The same shape scaled to length scale 1 (key of the Stokes resistance table)."""

    @property
    def _table_beta_end(self) -> float:
        """Arc angle where the Stokes table stops (margin before cusps and contacts)."""
        return max(min(self._beta_max, self._beta_touch - _TABLE_END_MARGIN,
                       self._beta_tangent - _TABLE_END_MARGIN), 0.0)

    @property
    @abstractmethod
    def _beta_tangent(self) -> float:
        """Arc angle at which the arc becomes tangent to the wall at the edge [rad]."""


def _check_contact_angle(name, theta, hi_deg):
    theta = finite(name, theta, "rad")
    angle_deg_in_range(name, theta, 0.0, hi_deg, hi_open=True)
    return theta


@dataclass(frozen=True)
class ParallelPlates(_Pinned):
    r"""Two parallel plates of breadth b a gap a apart; two free surfaces span the gap.

    .. math::

        A = a b - 2 R_1^2 (\beta - \sin\beta\cos\beta), \qquad \sin\beta = \frac{a}{2R_1}

    Parameters
    ----------
    gap : float            distance a between the plates [m] (chord of each free surface)
    breadth : float        plate breadth b [m] (distance between the two free surfaces)
    contact_angle : float  contact angle theta on the plates [rad], in [0, 90) deg (default 0)

    Notes
    -----
    The surfaces stay pinned at the plate edges down to :math:`\beta = \pi/2 - \theta` (they then
    meet the plate faces at theta and would slide into the gap: gas breaks in) or until the two
    surfaces touch, :math:`\tan(\beta/2) = b/a`. For theta = 0 and b >= a the area compliance
    dA/dp grows without bound as beta -> 90 deg, so the flow always chokes (S = 1) first.
    Length scale: the gap a. Geometry of Rosendahl, Ohlhoff & Dreyer (2004).

    Examples
    --------
    >>> pp = ParallelPlates(gap=0.005, breadth=0.025)
    >>> round(pp.area(float("inf")) * 1e6, 6), round(pp.min_radius * 1e3, 6)
    (125.0, 2.5)
    """

    kind: ClassVar[str] = "parallel_plates"
    gap: float
    breadth: float
    contact_angle: float = 0.0

    def __post_init__(self):
        object.__setattr__(self, "gap", positive("gap", self.gap, "m"))
        object.__setattr__(self, "breadth", positive("breadth", self.breadth, "m"))
        object.__setattr__(self, "contact_angle", _check_contact_angle("contact_angle", self.contact_angle, 90.0))

    @property
    def length_scale(self) -> float:
        """Gap a [m]."""
        return self.gap

    @property
    def _c(self):
        return 0.5 * self.gap

    @property
    def _n(self):
        return 2

    @property
    def flat_area(self):
        return self.gap * self.breadth

    @property
    def _beta_touch(self):
        return 2.0 * math.atan(self.breadth / self.gap)

    @property
    def _beta_pin(self):
        return 0.5 * math.pi - self.contact_angle

    @property
    def _beta_tangent(self):
        return 0.5 * math.pi

    def _normalized(self):
        return ParallelPlates(1.0, round(self.breadth / self.gap, 12), self.contact_angle)

    def _stokes_pieces(self, beta):
        from lowgmap.physics.geometry.stokes import Arc, Line
        c, hb = 0.5, 0.5 * self.breadth / self.gap         # gap scaled to 1
        if beta <= 0.0:
            top = [Line((c, hb), (0.0, hb), "free")]
            s = 0.0
        else:
            R = c / math.sin(beta)
            s = c * math.tan(0.5 * beta)
            top = [Arc((c, hb), (0.0, hb - s), (0.0, hb - s + R), "free")]
        return [Line((0.0, 0.0), (c, 0.0), "free"), Line((c, 0.0), (c, hb), "wall"), *top,
                Line((0.0, hb - s), (0.0, 0.0), "free")]


@dataclass(frozen=True)
class RectangularGroove(_Pinned):
    r"""Rectangular groove of width w and depth d, open across the top (one free surface).

    .. math::

        A = w d - R_1^2 (\beta - \sin\beta\cos\beta), \qquad \sin\beta = \frac{w}{2R_1}

    Parameters
    ----------
    width : float          groove width w [m] (chord of the free surface)
    depth : float          groove depth d [m]
    contact_angle : float  contact angle theta on the side walls [rad], in [0, 90) deg (default 0)

    Notes
    -----
    Surface pinned at the two top edges down to :math:`\beta = \pi/2 - \theta` or until it touches
    the groove bottom, :math:`(w/2)\tan(\beta/2) = d`. Length scale: the width w. Groove geometry
    of Haake et al. (2010). A V-groove pinned at its top edges is a :class:`WedgeChannel`.

    Examples
    --------
    >>> g = RectangularGroove(width=0.004, depth=0.001)
    >>> round(g.min_radius * 1e3, 6)   # surface touches the bottom: R1 = (c^2 + d^2)/(2d)
    2.5
    """

    kind: ClassVar[str] = "rectangular_groove"
    width: float
    depth: float
    contact_angle: float = 0.0

    def __post_init__(self):
        object.__setattr__(self, "width", positive("width", self.width, "m"))
        object.__setattr__(self, "depth", positive("depth", self.depth, "m"))
        object.__setattr__(self, "contact_angle", _check_contact_angle("contact_angle", self.contact_angle, 90.0))

    @property
    def length_scale(self) -> float:
        """Width w [m]."""
        return self.width

    @property
    def _c(self):
        return 0.5 * self.width

    @property
    def _n(self):
        return 1

    @property
    def flat_area(self):
        return self.width * self.depth

    @property
    def _beta_touch(self):
        return 2.0 * math.atan(2.0 * self.depth / self.width)

    @property
    def _beta_pin(self):
        return 0.5 * math.pi - self.contact_angle

    @property
    def _beta_tangent(self):
        return 0.5 * math.pi

    def _normalized(self):
        return RectangularGroove(1.0, round(self.depth / self.width, 12), self.contact_angle)

    def _stokes_pieces(self, beta):
        from lowgmap.physics.geometry.stokes import Arc, Line
        c, d = 0.5, self.depth / self.width                # width scaled to 1
        if beta <= 0.0:
            top = [Line((c, d), (0.0, d), "free")]
            s = 0.0
        else:
            R = c / math.sin(beta)
            s = c * math.tan(0.5 * beta)
            top = [Arc((c, d), (0.0, d - s), (0.0, d - s + R), "free")]
        return [Line((0.0, 0.0), (c, 0.0), "wall"), Line((c, 0.0), (c, d), "wall"), *top,
                Line((0.0, d - s), (0.0, 0.0), "free")]


@dataclass(frozen=True)
class WedgeChannel(_Pinned):
    r"""Wedge channel: two plates of length L at half-angle alpha, surface pinned at the plate edges.

    .. math::

        A = L^2 \sin\alpha\cos\alpha - R_1^2 (\beta - \sin\beta\cos\beta),
        \qquad \sin\beta = \frac{L \sin\alpha}{R_1}
        \quad (R_1 \ge R_t), \qquad
        A = F(\alpha,\theta) R_1^2 \quad (R_1 < R_t)

    Parameters
    ----------
    half_angle : float     half-angle alpha between the plates [rad], in (0, 90) deg
    wall_length : float    plate length L from the apex to the edge [m]
    contact_angle : float  contact angle theta [rad], theta + alpha < 90 deg (default 0)

    Notes
    -----
    The surface stays pinned at the plate edges until it meets the plates at the contact angle,
    :math:`\beta_t = \pi/2 - \alpha - \theta`, i.e. :math:`R_t = L\sin\alpha/\cos(\alpha+\theta)`.
    For smaller radii the contact lines leave the edges and the liquid is a corner filament with
    :math:`F = \cos\theta\cos(\theta+\alpha)/\sin\alpha - (\pi/2 - \theta - \alpha)` (its wetted
    wall length at :math:`R_t` is exactly L, and A and dA/dR1 are continuous there). A and the
    corner filament need the Concus–Finn condition :math:`\theta + \alpha < 90°`.
    ``min_radius`` is 0. Length scale: the plate length L. A V-groove of depth d pinned at its top
    edges is a wedge channel with L = d/cos(alpha). Geometry of Klatte et al. (2008).

    Examples
    --------
    >>> import math
    >>> w = WedgeChannel(math.radians(30.0), 0.01)
    >>> round(w.area(float("inf")) * 1e6, 4), round(w.transition_radius * 1e3, 4)
    (43.3013, 5.7735)
    """

    kind: ClassVar[str] = "wedge_channel"
    half_angle: float
    wall_length: float
    contact_angle: float = 0.0

    def __post_init__(self):
        a = finite("half_angle", self.half_angle, "rad")
        angle_deg_in_range("half_angle", a, 0.0, 90.0, lo_open=True, hi_open=True)
        object.__setattr__(self, "half_angle", a)
        object.__setattr__(self, "wall_length", positive("wall_length", self.wall_length, "m"))
        t = _check_contact_angle("contact_angle", self.contact_angle, 90.0)
        if t + a >= 0.5 * math.pi - 1e-12:
            raise ValueError(f"contact_angle + half_angle must be < 90 deg (Concus-Finn) for a wedge channel, "
                             f"got {math.degrees(t):.6g} + {math.degrees(a):.6g} deg")
        object.__setattr__(self, "contact_angle", t)

    @property
    def length_scale(self) -> float:
        """Plate length L [m]."""
        return self.wall_length

    @property
    def _c(self):
        return self.wall_length * math.sin(self.half_angle)

    @property
    def _n(self):
        return 1

    @property
    def flat_area(self):
        return self.wall_length**2 * math.sin(self.half_angle) * math.cos(self.half_angle)

    @property
    def _beta_touch(self):
        return math.pi - 2.0 * self.half_angle          # arc would reach the apex (never first)

    @property
    def _beta_pin(self):
        return 0.5 * math.pi - self.half_angle - self.contact_angle

    @property
    def _beta_tangent(self):
        return 0.5 * math.pi - self.half_angle

    @property
    def transition_radius(self) -> float:
        """Surface radius R_t [m] below which the contact lines leave the plate edges."""
        return 1.0 / self._kappa_pin_end

    @property
    def _F(self):
        return _corner_area_factor(self.half_angle, self.contact_angle)

    @property
    def _kappa_max(self):
        return math.inf

    def _A(self, kappa):
        k = np.asarray(kappa, dtype=float)
        kt = self._kappa_pin_end
        with np.errstate(divide="ignore"):
            tail = self._F / np.maximum(k, kt) ** 2
        return np.where(k <= kt, _Pinned._A(self, np.minimum(k, kt)), tail)

    def _Ak(self, kappa):
        k = np.asarray(kappa, dtype=float)
        kt = self._kappa_pin_end
        tail = -2.0 * self._F / np.maximum(k, kt) ** 3
        return np.where(k <= kt, _Pinned._Ak(self, np.minimum(k, kt)), tail)

    def _q(self):
        a, t = self.half_angle, self.contact_angle
        return (math.cos(t) - math.sin(a)) / math.sin(a)

    def _depth(self, kappa):
        k = np.asarray(kappa, dtype=float)
        kt = self._kappa_pin_end
        h0 = self.wall_length * math.cos(self.half_angle)
        with np.errstate(divide="ignore"):
            tail = h0 - self._q() / np.maximum(k, kt)
        return np.where(k <= kt, _Pinned._depth(self, np.minimum(k, kt)), tail)

    def _kappa_of_depth(self, k):
        k = np.asarray(k, dtype=float)
        kd = float(_Pinned._depth(self, self._kappa_pin_end))
        h0 = self.wall_length * math.cos(self.half_angle)
        with np.errstate(divide="ignore", invalid="ignore"):
            tail = self._q() / np.maximum(h0 - np.maximum(k, kd), 1e-300)
        return np.where(k <= kd, _Pinned._kappa_of_depth(self, np.minimum(k, kd)), tail)

    def _dkappa_ddepth(self, k):
        k = np.asarray(k, dtype=float)
        kd = float(_Pinned._depth(self, self._kappa_pin_end))
        h0 = self.wall_length * math.cos(self.half_angle)
        with np.errstate(divide="ignore", invalid="ignore"):
            tail = self._q() / np.maximum(h0 - np.maximum(k, kd), 1e-300) ** 2
        return np.where(k <= kd, _Pinned._dkappa_ddepth(self, np.minimum(k, kd)), tail)

    def _normalized(self):
        return WedgeChannel(self.half_angle, 1.0, self.contact_angle)

    def _stokes_pieces(self, beta):
        from lowgmap.physics.geometry.stokes import Arc, Line
        a = self.half_angle
        ex, ey = math.sin(a), math.cos(a)                 # plate length scaled to 1
        if beta <= 0.0:
            top = [Line((ex, ey), (0.0, ey), "free")]
            s = 0.0
        else:
            R = ex / math.sin(beta)
            s = ex * math.tan(0.5 * beta)
            top = [Arc((ex, ey), (0.0, ey - s), (0.0, ey - s + R), "free")]
        return [Line((0.0, 0.0), (ex, ey), "wall"), *top, Line((0.0, ey - s), (0.0, 0.0), "free")]


@dataclass(frozen=True)
class CornerFilament(OpenChannel):
    r"""Liquid filament in an unbounded interior corner, free contact lines at the contact angle.

    .. math::

        A = F R_1^2, \qquad
        F = \frac{\cos\theta\cos(\theta+\alpha)}{\sin\alpha} - \Bigl(\frac{\pi}{2} - \theta - \alpha\Bigr)

    Parameters
    ----------
    half_angle : float     corner half-angle alpha [rad], in (0, 90) deg
    contact_angle : float  contact angle theta [rad], theta + alpha < 90 deg (Concus–Finn)

    Notes
    -----
    The section is self-similar: the resistance K = F beta_c (beta_c the corner flow resistance,
    :math:`\bar u = R_1^2 (-\mathrm{d}p/\mathrm{d}z)/(\beta_c \mu)`) is the same at every radius,
    and the corner has no size of its own, so a flow problem needs an inlet radius or a reservoir
    pressure below the gas pressure. Fed from a reservoir at the gas pressure, the inlet state
    :math:`\sigma/R_1 = (1+K_e)\rho v^2/2` has speed index :math:`2/\sqrt{1+K_e}` at any flow
    (derived in the theory manual): the area never saturates, there is no inviscid maximum
    flow, and the entry is supercritical for K_e < 3. Area factor: Concus & Finn (1969) geometry.

    Examples
    --------
    >>> import math
    >>> cf = CornerFilament(math.radians(45.0), 0.0)
    >>> round(cf.area(1e-3) / 1e-6, 6)    # F(45 deg, 0) = 1 - pi/4
    0.214602
    """

    kind: ClassVar[str] = "corner_filament"
    half_angle: float
    contact_angle: float = 0.0

    def __post_init__(self):
        a = finite("half_angle", self.half_angle, "rad")
        angle_deg_in_range("half_angle", a, 0.0, 90.0, lo_open=True, hi_open=True)
        object.__setattr__(self, "half_angle", a)
        t = finite("contact_angle", self.contact_angle, "rad")
        angle_deg_in_range("contact_angle", t, 0.0, 180.0)
        if t + a >= 0.5 * math.pi - 1e-12:
            raise ValueError(f"contact_angle + half_angle must be < 90 deg (Concus-Finn) for a corner filament, "
                             f"got {math.degrees(t):.6g} + {math.degrees(a):.6g} deg")
        object.__setattr__(self, "contact_angle", t)

    @property
    def length_scale(self):
        """None: a corner has no size of its own."""
        return None

    @property
    def area_factor(self) -> float:
        """F = A/R1^2 (dimensionless)."""
        return _corner_area_factor(self.half_angle, self.contact_angle)

    @property
    def _kappa_max(self):
        return math.inf

    def _A(self, kappa):
        with np.errstate(divide="ignore"):
            return self.area_factor / np.asarray(kappa, dtype=float) ** 2

    def _Ak(self, kappa):
        with np.errstate(divide="ignore"):
            return -2.0 * self.area_factor / np.asarray(kappa, dtype=float) ** 3

    def _kappa(self, R1):
        r = np.asarray(R1, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where((r > 0) & np.isfinite(r), 1.0 / r, np.nan)


# =============================================================================================
# Stokes resistance tables
# =============================================================================================
@lru_cache(maxsize=64)
def _stokes_table(norm):
    """(beta nodes, K values) of a pinned channel's resistance over its arc angle.

    ``norm`` is the channel scaled to length scale 1 (the table depends on the shape only).
    """
    from lowgmap.physics.geometry.stokes import Domain, solve_poisson
    beta_end = norm._table_beta_end
    n = _TABLE_NODES
    j = np.arange(n)
    nodes = 0.5 * beta_end * (1.0 - np.cos(np.pi * j / (n - 1)))
    K = np.empty(n)
    for i, b in enumerate(nodes):
        d = Domain(norm._stokes_pieces(float(b)))
        sol = solve_poisson(d, interface="free")     # on a symmetric part: same mean as the whole
        K[i] = float(norm._A(math.sin(b) / norm._c)) / sol.mean
    return nodes, K


@lru_cache(maxsize=64)
def _corner_K(alpha: float, theta: float) -> float:
    """K = F beta of a corner filament (self-similar), beta from :func:`lowgmap.physics.geometry.corner.flow_resistance`."""
    from lowgmap.physics.geometry import corner
    lo, hi = corner.TABLE_HALF_ANGLE_DEG
    if lo <= math.degrees(alpha) <= hi:
        beta = float(corner.flow_resistance(alpha, theta, "free"))
    else:
        beta = float(corner.flow_resistance_direct(alpha, theta, "free"))
    return _corner_area_factor(alpha, theta) * beta


# =============================================================================================
# hydraulics of one channel: A, dA/dkappa, K and the cumulative integrals I1, I2
# =============================================================================================
class _Hydraulics:
    r"""Tabulated functions of the curvature for one channel and one resistance model.

    Length along the channel between curvatures k_a < k_b at flow Q (no streamwise curvature):

    .. math:: z_b - z_a = \frac{\sigma}{\mu Q}\Bigl[\Delta I_1 - \frac{\rho Q^2}{\sigma}\Delta I_2\Bigr],
              \quad I_1 = \int \frac{A^2}{K}\,\mathrm{d}\kappa,
              \quad I_2 = \int \frac{-A_\kappa}{A K}\,\mathrm{d}\kappa
    """

    def __init__(self, channel: OpenChannel, resistance):
        self.ch = channel
        self.kmax = channel._kappa_max
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
            self.F = _corner_area_factor(a, t)
            if self._Kconst is not None:
                self.Kc = self._Kconst
            elif self._Kfun is not None:                  # wedge: callable evaluated at R_t
                self.Kc = float(self._Kfun(channel.transition_radius))
            else:
                self.Kc = _corner_K(a, t)
        if isinstance(channel, CornerFilament):
            self.kt = 0.0
            return
        # pinned part: fine grid in beta
        c = channel._c
        bmax = channel._beta_max
        self.kt = channel._kappa_pin_end
        u = np.linspace(0.0, 1.0, _GRID)
        beta = 0.5 * bmax * (1.0 - np.cos(np.pi * u))
        kap = np.sin(beta) / c
        A = channel._A(kap)
        dA_db = -channel._n * 2.0 * c**2 * _fcos(beta)     # dA/dbeta (finite at 90 deg)
        K = self._K_pinned(beta, kap)
        if not np.all(np.isfinite(K)) or np.any(K <= 0):
            raise ValueError("resistance must return finite values > 0 over the channel's radius range")
        self.Kspl = CubicSpline(beta, K)
        i1 = A * A / K * np.cos(beta) / c
        i2 = -dA_db / (A * K)
        self.I1 = CubicSpline(beta, i1).antiderivative()
        self.I2 = CubicSpline(beta, i2).antiderivative()
        # choke function H = A^3/(-A_kappa) on the grid (decreasing), for the S = 1 search
        with np.errstate(divide="ignore"):
            self.Hgrid = A**3 / (channel._n * 2.0 * c**3 * _fcos(beta) / np.cos(beta))
        self.kgrid = kap

    def _K_pinned(self, beta, kap):
        ch = self.ch
        if self._Kconst is not None:
            return np.full_like(beta, self._Kconst)
        if self._Kfun is not None:
            with np.errstate(divide="ignore"):
                R = np.where(kap > 0, 1.0 / np.maximum(kap, 1e-300), np.inf)
            return np.asarray(self._Kfun(R), dtype=float) * np.ones_like(beta)
        nodes, Kn = _stokes_table(ch._normalized())
        f = BarycentricInterpolator(nodes, Kn)
        bend = nodes[-1]
        out = f(np.minimum(beta, bend))
        if isinstance(ch, WedgeChannel) and ch._beta_max > bend:
            # blend linearly to the corner-filament value at the transition (continuity)
            kc = _corner_K(ch.half_angle, ch.contact_angle)
            w = np.clip((beta - bend) / (ch._beta_max - bend), 0.0, 1.0)
            out = (1 - w) * out + w * kc
        return out

    # ---- functions of kappa ------------------------------------------------------------------
    def A(self, k):
        return self.ch._A(k)

    def Ak(self, k):
        return self.ch._Ak(k)

    def K(self, k):
        k = np.asarray(k, dtype=float)
        if isinstance(self.ch, CornerFilament):
            return np.full_like(k, self.Kc)
        kk = np.minimum(k, self.kt)
        out = self.Kspl(self.ch._beta(kk))
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
        b_lo, b_hi = self.ch._beta(lo), self.ch._beta(hi)
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
        # corner-filament part: H = F^2 / (2 kappa^3). For a wedge with theta > 0 the speed index
        # jumps up where the contact lines leave the edges, so the choke may sit at kt itself.
        return max((self.F**2 / (2.0 * target)) ** (1.0 / 3.0), float(k_from), float(self.kt))


@lru_cache(maxsize=64)
def _hydraulics_cached(channel, resistance):
    return _Hydraulics(channel, resistance)


def _hydraulics(channel, resistance):
    try:
        return _hydraulics_cached(channel, resistance)
    except TypeError as e:
        if "unhashable" in str(e):
            return _Hydraulics(channel, resistance)
        raise


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
    limited_by : key of :data:`LIMITS` ("speed_index", "inlet", "meniscus_limit", "no_solution")
    outlet_speed_index : speed index at the outlet at Q_crit (1 when limited by the speed index)
    profile : :class:`Profile` at Q_crit

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
    profile: Profile


@dataclass(frozen=True)
class CriticalFlowCurve:
    """Critical flow rate over channel lengths.

    lengths : channel lengths [m]
    Q_crit : critical flow rates [m^3/s]
    limited_by : list of :data:`LIMITS` keys, one per length
    """

    lengths: np.ndarray
    Q_crit: np.ndarray
    limited_by: tuple


# =============================================================================================
# the steady 1-D problem (no streamwise curvature)
# =============================================================================================
class _Problem:
    def __init__(self, channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance):
        if not isinstance(channel, OpenChannel):
            raise TypeError(f"channel must be an OpenChannel (ParallelPlates, RectangularGroove, WedgeChannel, "
                            f"CornerFilament), got {type(channel).__name__}")
        self.ch = channel
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
                raise ValueError(f"inlet_radius must be >= the channel's smallest radius {_fmt(channel.min_radius)} m, "
                                 f"got {_fmt(R)} m")
            self.kin_fixed = 1.0 / R
        elif inlet_pressure is not None:
            p0 = finite("inlet_pressure", inlet_pressure, "Pa")
            if p0 > 0:
                raise ValueError(f"inlet_pressure (reservoir minus gas pressure) must be <= 0 Pa, got {_fmt(p0)} Pa")
            self.k0 = -p0 / self.sigma
            if self.k0 >= channel._kappa_max:
                raise ValueError(f"inlet_pressure must be > {_fmt(-self.sigma * channel._kappa_max)} Pa (the "
                                 f"surface would be beyond its smallest radius), got {_fmt(p0)} Pa")
        if isinstance(channel, CornerFilament) and self.kin_fixed is None and self.k0 == 0.0:
            raise ValueError("a CornerFilament has no size of its own: give inlet_radius, or an inlet_pressure "
                             "below the gas pressure (inlet_pressure < 0)")
        self.hyd = _hydraulics(channel, resistance) if self.mu > 0 else None
        self._fold = None

    # ---- inlet -------------------------------------------------------------------------------
    def Q_in(self, k):
        """Flow through the entrance when the surface at z = 0 has curvature k (reservoir mode)."""
        A = self.ch._A(k)
        return A * np.sqrt(np.maximum(2.0 * self.sigma * (k - self.k0), 0.0) / ((1.0 + self.K_e) * self.rho))

    def fold(self):
        """(kappa, Q) of the largest inlet flow on the subcritical branch, or the S = 1 inlet state."""
        if self._fold is not None:
            return self._fold
        ch = self.ch
        if self.kin_fixed is not None:
            k = self.kin_fixed
            Q = math.sqrt(self.sigma * float(self._H(k)) / self.rho)
            self._fold = (k, Q)
            return self._fold
        G = lambda k: float(ch._A(k) + 2.0 * ch._Ak(k) * (k - self.k0))
        kmax = ch._kappa_max
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
            return self.ch._A(k) ** 3 / (-self.ch._Ak(k))

    def kappa_in(self, Q):
        if self.kin_fixed is not None:
            return self.kin_fixed
        kf, Qf = self.fold()
        if Q >= Qf:
            return kf
        return brentq(lambda k: float(self.Q_in(k)) - Q, self.k0, kf, xtol=1e-15 * kf, rtol=1e-14)

    def S(self, k, Q):
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.sqrt(self.rho * Q * Q / (self.sigma * self._H(k)))

    # ---- along the channel -------------------------------------------------------------------
    def choke(self, Q):
        """(kappa_in, kappa_end, length to kappa_end) at flow Q; kappa_end is S = 1 or kappa_max."""
        kin = self.kappa_in(Q)
        if self.hyd is None:
            return kin, kin, math.inf
        kend = self.hyd.kappa_choke(kin, self.rho * Q * Q / self.sigma)
        L = self.z_of_kappa(kin, kend, Q)
        return kin, kend, float(L)

    def z_of_kappa(self, kin, k, Q):
        d1, d2 = self.hyd.dI(kin, k)
        return self.sigma / (self.mu * Q) * (d1 - self.rho * Q * Q / self.sigma * d2)

    def profile(self, Q, length, n):
        ch = self.ch
        kin, kend, Lc = self.choke(Q)
        z = np.linspace(0.0, length, n)
        if self.hyd is None:
            k = np.full(n, kin)
        else:
            if Lc < length * (1 - 1e-9):
                raise ValueError(f"flow_rate {_fmt(Q)} m^3/s is above what this channel carries over length "
                                 f"{_fmt(length)} m: the flow chokes at z = {_fmt(Lc)} m "
                                 f"({'speed index 1' if self.S(kend, Q) >= 1 - 1e-9 else 'smallest surface radius reached'})")
            lo = np.full(n, kin)
            hi = np.full(n, kend)
            for _ in range(60):                            # vectorised bisection of z(kappa) = z
                mid = 0.5 * (lo + hi)
                zm = self.z_of_kappa(kin, mid, Q)
                below = zm < z
                lo = np.where(below, mid, lo)
                hi = np.where(below, hi, mid)
            k = 0.5 * (lo + hi)
            k[0] = kin
        A = ch._A(k)
        with np.errstate(divide="ignore"):
            R1 = np.where(k > 0, 1.0 / np.maximum(k, 1e-300), np.inf)
        depth = ch._depth(k) if isinstance(ch, _Pinned) else np.full(n, np.nan)
        return Profile(z=z, R1=R1, area=A, velocity=Q / A, pressure=-self.sigma * k,
                       speed_index=self.S(k, Q), flow_rate=float(Q), centre_depth=depth)

    def critical(self, length):
        kf, Qup = self.fold()
        S_up = float(self.S(kf, Qup))
        at_fold = True
        if self.hyd is not None:
            kin, kend, L_up = self.choke(Qup)
            if L_up < length:
                f = lambda q: math.log(max(self.choke(q)[2], 1e-300 * length)) - math.log(length)
                q_lo = 0.5 * Qup
                while f(q_lo) < 0:
                    q_lo *= 0.5
                Q = brentq(f, q_lo, Qup, xtol=1e-14 * Qup, rtol=1e-12)
                at_fold = False
        if at_fold:
            Q = Qup
            prof = self.profile(Q, length, 201) if self.hyd is None else self._profile_at_limit(Q, length)
            if kf >= self.ch._kappa_max * (1 - 1e-12):
                lim = "meniscus_limit"
            elif S_up >= 1.0 - 1e-9:
                lim = "speed_index"
            else:
                lim = "inlet"
        else:
            prof = self._profile_at_limit(Q, length)
            kin, kend, _ = self.choke(Q)
            lim = "speed_index" if kend < self.ch._kappa_max * (1 - 1e-12) else "meniscus_limit"
        return CriticalFlow(Q_crit=float(Q), limited_by=lim, outlet_speed_index=float(prof.speed_index[-1]),
                            profile=prof)

    def _profile_at_limit(self, Q, length):
        # at Q_crit the choke length equals `length` to rounding: stretch the check slightly
        kin, kend, Lc = self.choke(Q)
        length_eff = Lc if abs(Lc - length) <= 1e-8 * length else min(Lc, length)
        p = self.profile(Q, length_eff, 201)
        if length_eff != length:
            p = Profile(z=p.z * (length / length_eff), R1=p.R1, area=p.area, velocity=p.velocity,
                        pressure=p.pressure, speed_index=p.speed_index, flow_rate=p.flow_rate,
                        centre_depth=p.centre_depth)
        return p


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


def surface_profile(channel: OpenChannel, flow_rate: float, length: float, rho: float, mu: float,
                    sigma: float, *, K_e: float = 0.0, inlet_pressure: float | None = None,
                    inlet_radius: float | None = None, streamwise_curvature: bool = False,
                    resistance=None, n: int = 201) -> Profile:
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
    >>> pp = ParallelPlates(gap=0.005, breadth=0.025)
    >>> pr = surface_profile(pp, 2e-6, 0.05, rho=1000.0, mu=1e-3, sigma=0.07, resistance=60.0)
    >>> bool(pr.speed_index.max() < 1), bool(pr.R1[-1] < pr.R1[0])
    (True, True)
    """
    Q = positive("flow_rate", flow_rate, "m^3/s")
    length = positive("length", length, "m")
    n = _check_n(n)
    if streamwise_curvature:
        return _curved_profile(channel, Q, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius,
                               resistance, n)
    pb = _Problem(channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance)
    kf, Qf = pb.fold()
    if Q > Qf * (1 + 1e-12):
        what = ("speed index 1 at the inlet radius" if pb.kin_fixed is not None
                else "the largest flow the reservoir pushes through the entrance")
        raise ValueError(f"flow_rate must be <= {_fmt(Qf)} m^3/s ({what}), got {_fmt(Q)} m^3/s")
    return pb.profile(min(Q, Qf), length, n)


def _check_n(n):
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 2:
        raise ValueError(f"n must be an integer >= 2, got {n!r}")
    return int(n)


def critical_flow_rate(channel: OpenChannel, length: float, rho: float, mu: float, sigma: float, *,
                       K_e: float = 0.0, inlet_pressure: float | None = None,
                       inlet_radius: float | None = None, streamwise_curvature: bool = False,
                       resistance=None) -> CriticalFlow:
    r"""Critical flow rate of an open capillary channel: the largest steady flow, S < 1 throughout.

    .. math::

        l = \int_{\kappa_\mathrm{in}(Q)}^{\kappa^*(Q)}
            \frac{\sigma A^2 (1 - S^2)}{K \mu Q}\,\mathrm{d}\kappa,
        \qquad S(\kappa^*) = 1

    solved for Q (Q_crit decreases with the length l).

    Parameters
    ----------
    channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, streamwise_curvature, resistance
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
    >>> pp = ParallelPlates(gap=1.0, breadth=1.0)
    >>> round(critical_flow_rate(pp, 10.0, rho=1.0, mu=0.0, sigma=1.0).Q_crit, 4)
    1.2053
    """
    length = positive("length", length, "m")
    if streamwise_curvature:
        return _curved_critical(channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance)
    pb = _Problem(channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance)
    return pb.critical(length)


def critical_flow_curve(channel: OpenChannel, lengths, rho: float, mu: float, sigma: float, *,
                        K_e: float = 0.0, inlet_pressure: float | None = None,
                        inlet_radius: float | None = None, resistance=None) -> CriticalFlowCurve:
    r"""Critical flow rate over a set of channel lengths (for charts).

    .. math:: Q_\mathrm{crit}(l_i), \quad i = 1 \ldots n

    Parameters
    ----------
    channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance
        as in :func:`critical_flow_rate` (no streamwise curvature)
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
        raise ValueError(f"lengths must be finite and > 0 [m], got {_fmt(ls[bad][0])} m")
    pb = _Problem(channel, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance)
    Q = np.empty(ls.size)
    lim = []
    for i, l in enumerate(ls):
        r = pb.critical(float(l))
        Q[i] = r.Q_crit
        lim.append(r.limited_by)
    return CriticalFlowCurve(lengths=ls, Q_crit=Q, limited_by=tuple(lim))


# =============================================================================================
# streamwise curvature: boundary-value problem, surface flat at both ends
# =============================================================================================
class _Curved:
    """Dimensionless BVP in y = (k, dk/dx, p) with x = z/L, k = depth/L, p in sigma/L, Q in L^2 U."""

    def __init__(self, channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance):
        if not isinstance(channel, _Pinned):
            raise ValueError("streamwise_curvature needs a channel with pinned surfaces (ParallelPlates, "
                             f"RectangularGroove, WedgeChannel), got {type(channel).__name__}")
        if inlet_radius is not None:
            raise ValueError("inlet_radius is not used with streamwise_curvature (the surface is flat at both "
                             "ends of the open section); give inlet_pressure instead")
        self.pb = _Problem(channel, rho, mu, sigma, K_e, inlet_pressure, None, resistance)
        self.ch = channel
        L = channel.length_scale
        self.L = L
        self.U = math.sqrt(sigma / (rho * L))
        self.Oh = self.pb.mu / math.sqrt(rho * sigma * L)
        self.lam = length / L
        self.p0 = -self.pb.k0 * L
        self.Ke = self.pb.K_e
        self.A0 = channel.flat_area / L**2
        self.kmax_t = channel._kappa_max * L
        self.hyd = self.pb.hyd

    def _geo(self, k):
        """kappa, A, dA/dk (dimensionless) at depth k."""
        ch, L = self.ch, self.L
        kd = k * L
        kap = ch._kappa_of_depth(kd)
        kap_c = np.minimum(kap, ch._kappa_max)
        A = ch._A(kap_c) / L**2
        Ak = ch._Ak(kap_c) * ch._dkappa_ddepth(kd) / L       # (dA/dk [m]) / L: dimensionless
        return kap * L, A, Ak

    def rhs(self, Q):
        def f(x, y):
            k, kp, p = y
            kap, A, Ak = self._geo(k)
            kpp = (1.0 + np.minimum(kp * kp, 1e6)) ** 1.5 * (p + kap)
            if self.hyd is not None:
                K = self.hyd.K(np.maximum(kap, 0.0) / self.L)
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
            H = A**3 / (-self.ch._Ak(np.minimum(kap / self.L, self.ch._kappa_max)) / self.L**3)
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
        L, U, sig = self.L, self.U, self.pb.sigma
        Qd = Q * L * L * U
        Ad = A * L * L
        with np.errstate(divide="ignore"):
            R1 = np.where(kap > 0, L / np.maximum(kap, 1e-300), np.inf)
        return Profile(z=x * L, R1=R1, area=Ad, velocity=Qd / Ad, pressure=p * sig / L, speed_index=S,
                       flow_rate=float(Qd), centre_depth=k * L)

    def continuation(self, Q_target=None):
        """Follow the solution from a small flow up to Q_target, or up to the largest flow (critical)."""
        pb = self.pb
        scale = self.L**2 * self.U
        Q_nc = pb.critical(self.lam * self.L).Q_crit / scale     # no-curvature estimate
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
                               f"({_fmt(q * scale)} m^3/s)")
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
            raise ValueError(f"flow_rate {_fmt(Q_target * scale)} m^3/s is above the critical flow rate "
                             f"{_fmt(last[0] * scale)} m^3/s of this channel with streamwise curvature "
                             f"({LIMITS[why_fail]})")
        return last, why_fail


def _curved_profile(channel, Q, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance, n):
    cv = _Curved(channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance)
    (q, sol), _ = cv.continuation(Q_target=Q / (cv.L**2 * cv.U))
    return cv.profile(q, sol, n)


def _curved_critical(channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance):
    cv = _Curved(channel, length, rho, mu, sigma, K_e, inlet_pressure, inlet_radius, resistance)
    (q, sol), why = cv.continuation()
    prof = cv.profile(q, sol, 201)
    # the surface is flat at the outlet itself: report the largest speed index (just upstream)
    return CriticalFlow(Q_crit=float(prof.flow_rate), limited_by=why,
                        outlet_speed_index=float(np.max(prof.speed_index)), profile=prof)
