r"""Open capillary channels: cross-section geometry and flow area as a function of the surface radius.

Channels (surfaces are circular arcs in the section; pinned at the wall edges except in a corner):

* :class:`ParallelPlates` gap a, breadth b: two free surfaces spanning the gap;
* :class:`RectangularGroove` width w, depth d: one free surface across the top (a V-groove pinned
  at its top edges is a :class:`WedgeChannel`);
* :class:`WedgeChannel` half-angle α, plate length L, surface pinned at the plate edges until it
  meets the plates at the contact angle, then a free corner filament;
* :class:`CornerFilament` unbounded interior corner, free contact lines.

Each channel gives its flow area A and viscous resistance K as functions of the surface radius
:math:`R_1` (:meth:`OpenChannel.area`, :meth:`OpenChannel.dA_dp`, :meth:`OpenChannel.resistance`),
and, for the flow model of :mod:`lowgmap.physics.models.open_channel.hydraulics`, the same as
functions of the surface curvature :math:`\kappa = 1/R_1` (:meth:`OpenChannel.area_at`,
:meth:`OpenChannel.dA_dkappa`, :attr:`OpenChannel.kappa_max`; pinned channels also the arc
half-angle β with :math:`\sin\beta = c\kappa`, c the half chord). The area lost to a surface curved
into the liquid is a circular segment:

.. math:: A_\mathrm{seg} = R_1^2(\beta - \sin\beta\cos\beta) = c^2\,\frac{\beta - \sin\beta\cos\beta}{\sin^2\beta}

Conventions: SI units, angles in radians, :math:`R_1 > 0` for a surface curved into the liquid
(liquid pressure below the gas pressure). Functions of ``R1`` accept arrays; an ``R1`` outside the
channel's range gives NaN.
"""
from __future__ import annotations

import dataclasses
import math
from abc import ABC, abstractmethod
from functools import cached_property
from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from lowgmap.physics.geometry.corner import meniscus_area_factor
from lowgmap.physics.validate import angle_deg_in_range, finite, positive

__all__ = [
    "OpenChannel",
    "PinnedChannel",
    "ParallelPlates",
    "RectangularGroove",
    "WedgeChannel",
    "CornerFilament",
    "corner_area_factor",
    "segment_area_factor",
    "segment_slope_factor",
]


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


def segment_area_factor(beta):
    r"""Area of a circular segment of arc half-angle beta over its half chord squared.

    .. math:: \frac{A_\mathrm{seg}}{c^2} = \frac{\beta - \sin\beta\cos\beta}{\sin^2\beta}

    Parameters
    ----------
    beta : float or array   arc half-angle [rad], in [0, pi/2]

    Returns
    -------
    float or array   dimensionless (a series near 0 avoids the cancellation)

    Examples
    --------
    >>> round(float(segment_area_factor(math.pi / 2)), 6)    # half disc over its radius squared
    1.570796
    """
    b = np.asarray(beta, dtype=float)
    small = np.abs(b) < 1e-2
    b2 = b * b
    # g/sin^2 = (2/3) b (1 + 2 b^2/15 + 2 b^4/105 + ...) from the series of g and sin
    # (truncation at the switch b = 1e-2: 3e-15 relative)
    series = (2.0 / 3.0) * b * (1.0 + b2 * (2.0 / 15.0 + b2 * 2.0 / 105.0))
    with np.errstate(invalid="ignore", divide="ignore"):
        direct = _g(b) / np.sin(b) ** 2
    return np.where(small, series, direct)


def segment_slope_factor(beta):
    r"""Slope factor f of the segment area against the curvature, finite on [0, pi/2].

    .. math:: f(\beta) = 1 - \frac{(\beta - \sin\beta\cos\beta)\cos\beta}{\sin^3\beta},
              \qquad \frac{\mathrm{d}A_\mathrm{seg}}{\mathrm{d}\kappa} = \frac{2c^3 f(\beta)}{\cos\beta},
              \qquad \frac{\mathrm{d}A_\mathrm{seg}}{\mathrm{d}\beta} = 2c^2 f(\beta)

    Parameters
    ----------
    beta : float or array   arc half-angle [rad], in [0, pi/2]

    Returns
    -------
    float or array   dimensionless (1/3 at beta = 0, 1 at pi/2)

    Examples
    --------
    >>> round(float(segment_slope_factor(0.0)), 6), round(float(segment_slope_factor(math.pi / 2)), 6)
    (0.333333, 1.0)
    """
    b = np.asarray(beta, dtype=float)
    small = np.abs(b) < 1e-2
    b2 = b * b
    # f/cos = 1/3 + 3 b^2/10 + 47 b^4/280 + ... (truncation at the switch b = 1e-2: 3e-13 relative)
    series = (1.0 / 3.0 + b2 * (0.3 + b2 * 47.0 / 280.0)) * np.cos(b)
    with np.errstate(invalid="ignore", divide="ignore"):
        direct = 1.0 - _g(b) * np.cos(b) / np.sin(b) ** 3
    return np.where(small, series, direct)


def _segment_factors_scalar(b: float) -> tuple[float, float]:
    """(:func:`segment_area_factor`, :func:`segment_slope_factor`) of one arc half-angle, with the math module
    (the same series below 1e-2 rad)."""
    b2 = b * b
    if abs(b) < 1e-2:
        return ((2.0 / 3.0) * b * (1.0 + b2 * (2.0 / 15.0 + b2 * 2.0 / 105.0)),
                (1.0 / 3.0 + b2 * (0.3 + b2 * 47.0 / 280.0)) * math.cos(b))
    g = b - 0.5 * math.sin(2.0 * b)
    sb = math.sin(b)
    return g / sb**2, 1.0 - g * math.cos(b) / sb**3


def corner_area_factor(alpha, theta) -> float:
    r"""Corner meniscus area factor F = A/R1^2 as a float, from :func:`lowgmap.physics.geometry.corner.meniscus_area_factor`.

    .. math:: F = \frac{\cos\theta\cos(\theta+\alpha)}{\sin\alpha} - \Bigl(\frac{\pi}{2} - \theta - \alpha\Bigr)

    Parameters
    ----------
    alpha : float   corner half-angle [rad]
    theta : float   contact angle [rad], theta + alpha < 90 deg

    Examples
    --------
    >>> round(corner_area_factor(math.radians(45.0), 0.0), 6)    # 1 - pi/4
    0.214602
    """
    return float(meniscus_area_factor(alpha, theta))


# =============================================================================================
# channels
# =============================================================================================
class OpenChannel(ABC):
    """Cross-section of an open capillary channel: flow area as a function of the surface radius.

    Sub-classes are frozen dataclasses in SI units. The flow model works in the surface
    curvature ``kappa = 1/R1`` [1/m] (0 for a flat surface; the liquid pressure is
    ``p - p_gas = -sigma * kappa`` when the streamwise curvature is neglected): :meth:`area_at`,
    :meth:`dA_dkappa` and :attr:`kappa_max` are that interface; :meth:`area`, :meth:`dA_dp` and
    :meth:`resistance` take the radius R1 and give NaN outside the channel's range.
    """

    kind: ClassVar[str] = ""

    # ---- what each kind provides ---------------------------------------------------------
    @property
    @abstractmethod
    def length_scale(self) -> float | None:
        """Length used to make results dimensionless [m] (None for a corner filament)."""

    @property
    @abstractmethod
    def kappa_max(self) -> float:
        """Largest surface curvature [1/m] (inf if the area goes to 0 only as R1 -> 0)."""

    @abstractmethod
    def area_at(self, kappa):
        """Flow area [m^2] at curvature kappa (array), valid on [0, kappa_max]."""

    @abstractmethod
    def dA_dkappa(self, kappa):
        """dA/dkappa [m^3] (negative)."""

    def area_slope(self, kappa: float) -> tuple[float, float]:
        """(:meth:`area_at`, :meth:`dA_dkappa`) at one curvature, as floats (the scalar path of root searches:
        sub-classes compute it with the math module, tens of times faster than a numpy call on one value)."""
        return float(self.area_at(kappa)), float(self.dA_dkappa(kappa))

    # ---- public geometry ------------------------------------------------------------------
    @property
    def min_radius(self) -> float:
        """Smallest surface radius R1 the channel can hold [m] (0 if none)."""
        km = self.kappa_max
        return 0.0 if math.isinf(km) else 1.0 / km

    def _kappa(self, R1):
        r = np.asarray(R1, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            k = np.where(r > 0, 1.0 / r, np.nan)
        k = np.where(k <= self.kappa_max * (1 + 1e-12), k, np.nan)
        return k

    def area(self, R1):
        r"""Liquid flow area A(R1) [m^2] for a surface radius R1 [m] (``np.inf`` = flat surface).

        Returns NaN where R1 <= 0 or R1 < :attr:`min_radius`.
        """
        k = self._kappa(R1)
        with np.errstate(invalid="ignore", divide="ignore"):
            out = np.where(np.isnan(k), np.nan, self.area_at(np.nan_to_num(k, nan=self._safe_kappa())))
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
            out = np.where(np.isnan(k), np.nan, -self.dA_dkappa(np.nan_to_num(k, nan=self._safe_kappa())) / sigma)
        return float(out) if out.ndim == 0 else out

    def _safe_kappa(self) -> float:
        return 1.0 / self.length_scale if self.length_scale else 1.0

    def resistance(self, R1):
        r"""Viscous resistance K(R1) of the section from the Stokes problem (dimensionless).

        .. math:: -\frac{\mathrm{d}p}{\mathrm{d}z}\Big|_\mathrm{visc} = \frac{K \mu Q}{A^2},
                  \qquad K = \frac{A}{\bar w}

        with :math:`\bar w` the mean of :math:`-\nabla^2 w = 1` (no slip on walls, shear-free
        surfaces), from :func:`lowgmap.physics.geometry.stokes.solve_poisson` tabulated over the arc angle
        (:mod:`lowgmap.physics.models.open_channel.tables`). NaN outside the channel's radius range.
        """
        # imported here: the tables module builds on the channel classes of this module
        from lowgmap.physics.models.open_channel.tables import section_tables

        tables = section_tables(self, None)
        k = self._kappa(R1)
        out = np.where(np.isnan(k), np.nan, tables.K(np.nan_to_num(k, nan=self._safe_kappa())))
        return float(out) if out.ndim == 0 else out


class PinnedChannel(OpenChannel):
    r"""Channels whose free surfaces are circular arcs pinned at two wall edges a chord 2c apart.

    Arc half-angle beta and curvature: :math:`\sin\beta = c\kappa`; each surface removes the segment
    :math:`c^2 f_\mathrm{seg}(\beta)` from :attr:`flat_area` (:func:`segment_area_factor`).
    """

    # provided by sub-classes
    @property
    @abstractmethod
    def half_chord(self) -> float:
        """Half chord of each free surface [m]."""

    @property
    @abstractmethod
    def n_surfaces(self) -> int:
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
    def arc_angle_max(self) -> float:
        """Largest arc half-angle of the pinned surface [rad] (it touches a wall or leaves the edges)."""
        return min(self._beta_touch, self._beta_pin)

    @property
    def kappa_pinned(self) -> float:
        """Curvature at :attr:`arc_angle_max` [1/m]: the end of the pinned range."""
        return math.sin(self.arc_angle_max) / self.half_chord

    @property
    def kappa_max(self) -> float:
        return self.kappa_pinned

    def arc_angle(self, kappa):
        """Arc half-angle beta [rad] of a pinned surface of curvature kappa [1/m]: sin(beta) = c kappa."""
        x = np.clip(np.asarray(kappa, dtype=float) * self.half_chord, -1.0, 1.0)
        return np.arcsin(x)

    def area_at(self, kappa):
        b = self.arc_angle(kappa)
        return self.flat_area - self.n_surfaces * self.half_chord**2 * segment_area_factor(b)

    def dA_dkappa(self, kappa):
        # d(segment)/dkappa = 2 c^3 (1/cos b - g/sin^3 b) = 2 c^3 fcos(b)/cos(b)
        b = self.arc_angle(kappa)
        with np.errstate(divide="ignore"):
            return -self.n_surfaces * 2.0 * self.half_chord**3 * segment_slope_factor(b) / np.cos(b)

    def area_slope(self, kappa: float) -> tuple[float, float]:
        c = self.half_chord
        b = math.asin(min(max(float(kappa) * c, -1.0), 1.0))
        saf, ssf = _segment_factors_scalar(b)
        cb = math.cos(b)
        slope = -self.n_surfaces * 2.0 * c**3 * ssf / cb if cb != 0.0 else -math.inf
        return self.flat_area - self.n_surfaces * c**2 * saf, slope

    def centre_depth(self, R1):
        """Depth of the surface on its symmetry line below the edge chord [m] (c tan(beta/2))."""
        k = self._kappa(R1)
        return self.depth_at(k)

    def depth_at(self, kappa):
        """Centre depth [m] of the surface of curvature kappa [1/m] below the edge chord."""
        b = self.arc_angle(kappa)
        return self.half_chord * np.tan(0.5 * b)

    def kappa_of_depth(self, k):
        """Curvature [1/m] of the surface whose centre depth is k [m] (inverse of :meth:`depth_at`)."""
        k = np.asarray(k, dtype=float)
        c = self.half_chord
        return 2.0 * k / (c * c + k * k)

    def dkappa_ddepth(self, k):
        """d(kappa)/d(depth) [1/m^2] at centre depth k [m]."""
        k = np.asarray(k, dtype=float)
        c = self.half_chord
        return 2.0 * (c * c - k * k) / (c * c + k * k) ** 2

    # Stokes domain (a symmetric part of the section; K = A/mean is the same for the part)
    @abstractmethod
    def stokes_pieces(self, beta: float):
        """Boundary pieces of a symmetric part of the section at arc half-angle beta."""

    @abstractmethod
    def normalized(self):
        """The same channel scaled to length scale 1 (contact angle kept)."""

    def stokes_shape(self):
        """The shape scaled to length scale 1 with contact angle 0: the key of the Stokes resistance table.

        The cross-section Stokes problem at a given arc half-angle depends on the walls and the arc only;
        the contact angle only decides where the pinned range ends, which the zero-angle table covers.
        """
        return dataclasses.replace(self.normalized(), contact_angle=0.0)

    def table_end(self, margin: float) -> float:
        """Arc half-angle [rad] where a resistance table stops: ``margin`` [rad] before the arc becomes
        tangent to a wall (a cusp) or touches a wall or the other surface (never beyond :attr:`arc_angle_max`)."""
        return max(min(self.arc_angle_max, self._beta_touch - margin, self._beta_tangent - margin), 0.0)

    @property
    @abstractmethod
    def _beta_tangent(self) -> float:
        """Arc angle at which the arc becomes tangent to the wall at the edge [rad]."""


def _check_contact_angle(name, theta, hi_deg):
    theta = finite(name, theta, "rad")
    angle_deg_in_range(name, theta, 0.0, hi_deg, hi_open=True)
    return theta


@dataclass(frozen=True)
class ParallelPlates(PinnedChannel):
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
    def half_chord(self):
        return 0.5 * self.gap

    @property
    def n_surfaces(self):
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

    def normalized(self):
        return ParallelPlates(1.0, round(self.breadth / self.gap, 12), self.contact_angle)

    def stokes_pieces(self, beta):
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
class RectangularGroove(PinnedChannel):
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
    def half_chord(self):
        return 0.5 * self.width

    @property
    def n_surfaces(self):
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

    def normalized(self):
        return RectangularGroove(1.0, round(self.depth / self.width, 12), self.contact_angle)

    def stokes_pieces(self, beta):
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
class WedgeChannel(PinnedChannel):
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
    def half_chord(self):
        return self.wall_length * math.sin(self.half_angle)

    @property
    def n_surfaces(self):
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
        return 1.0 / self.kappa_pinned

    @cached_property
    def area_factor(self) -> float:
        """Area factor F = A/R1^2 of the corner filament below :attr:`transition_radius` (dimensionless)."""
        return corner_area_factor(self.half_angle, self.contact_angle)

    @property
    def kappa_max(self):
        return math.inf

    def area_at(self, kappa):
        k = np.asarray(kappa, dtype=float)
        kt = self.kappa_pinned
        with np.errstate(divide="ignore"):
            tail = self.area_factor / np.maximum(k, kt) ** 2
        return np.where(k <= kt, PinnedChannel.area_at(self, np.minimum(k, kt)), tail)

    def dA_dkappa(self, kappa):
        k = np.asarray(kappa, dtype=float)
        kt = self.kappa_pinned
        tail = -2.0 * self.area_factor / np.maximum(k, kt) ** 3
        return np.where(k <= kt, PinnedChannel.dA_dkappa(self, np.minimum(k, kt)), tail)

    def area_slope(self, kappa: float) -> tuple[float, float]:
        k = float(kappa)
        kt = self.kappa_pinned
        if k <= kt:
            return PinnedChannel.area_slope(self, k)
        return self.area_factor / k**2, -2.0 * self.area_factor / k**3

    def _q(self):
        a, t = self.half_angle, self.contact_angle
        return (math.cos(t) - math.sin(a)) / math.sin(a)

    def depth_at(self, kappa):
        k = np.asarray(kappa, dtype=float)
        kt = self.kappa_pinned
        h0 = self.wall_length * math.cos(self.half_angle)
        with np.errstate(divide="ignore"):
            tail = h0 - self._q() / np.maximum(k, kt)
        return np.where(k <= kt, PinnedChannel.depth_at(self, np.minimum(k, kt)), tail)

    def kappa_of_depth(self, k):
        k = np.asarray(k, dtype=float)
        kd = float(PinnedChannel.depth_at(self, self.kappa_pinned))
        h0 = self.wall_length * math.cos(self.half_angle)
        with np.errstate(divide="ignore", invalid="ignore"):
            tail = self._q() / np.maximum(h0 - np.maximum(k, kd), 1e-300)
        return np.where(k <= kd, PinnedChannel.kappa_of_depth(self, np.minimum(k, kd)), tail)

    def dkappa_ddepth(self, k):
        k = np.asarray(k, dtype=float)
        kd = float(PinnedChannel.depth_at(self, self.kappa_pinned))
        h0 = self.wall_length * math.cos(self.half_angle)
        with np.errstate(divide="ignore", invalid="ignore"):
            tail = self._q() / np.maximum(h0 - np.maximum(k, kd), 1e-300) ** 2
        return np.where(k <= kd, PinnedChannel.dkappa_ddepth(self, np.minimum(k, kd)), tail)

    def normalized(self):
        return WedgeChannel(self.half_angle, 1.0, self.contact_angle)

    def stokes_pieces(self, beta):
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

    @cached_property
    def area_factor(self) -> float:
        """F = A/R1^2 (dimensionless)."""
        return corner_area_factor(self.half_angle, self.contact_angle)

    @property
    def kappa_max(self):
        return math.inf

    def area_at(self, kappa):
        with np.errstate(divide="ignore"):
            return self.area_factor / np.asarray(kappa, dtype=float) ** 2

    def dA_dkappa(self, kappa):
        with np.errstate(divide="ignore"):
            return -2.0 * self.area_factor / np.asarray(kappa, dtype=float) ** 3

    def _kappa(self, R1):
        r = np.asarray(R1, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where((r > 0) & np.isfinite(r), 1.0 / r, np.nan)
