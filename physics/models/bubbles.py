r"""Bubble sub-models for capillary phase separation in tapering conduits.

The pieces the corner regime chart (:mod:`lowgmap.physics.models.corner`) is composed of, each a plain
function in SI units that accepts numpy arrays:

* **film thickness** of a long bubble (Bretherton 1961; Aussillous & Quéré 2000);
* **bubble size at injection**: squeezing law of a T-junction or co-flow injector
  (Garstecki et al. 2006), equivalent sphere diameter, formation frequency;
* **spacing and merging**: bubble spacing along the stream from the flow-rate ratio, merging
  ratio, merged bubble volume;
* **void fraction, mixture density, residence time** (no-slip mixture);
* **capillary migration**: force balance on a bubble squeezed in a tapering gap, giving its
  migration capillary number and speed; the push acts on the part of the bubble pressed flat
  (:func:`squeezed_fraction`) and fades to zero as the bubble size approaches the local gap;
* **taper path**: the local gap of a section along the bisector of its apex corner toward the
  open side (:func:`taper_path`), the smallest bubble that reaches the open side
  (:meth:`TaperPath.reach_diameter`) and the migration time (:func:`migration_time`), which
  diverges (logarithmically) at the reach diameter.

Conventions: SI units, angles in radians; flow ratios r = Q_G/Q_L. In vectorised evaluation a
point outside the physics domain (a flow rate that is not > 0, a bubble that never reaches the
open side) gives NaN, as documented per function.

The force balance, its terms and the constants are derived in physics/manual/bubbles.md.
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from lowgmap.physics.validate import in_range, positive

__all__ = [
    "BRETHERTON_COEFFICIENT", "AQ_COEFFICIENT", "AQ_DENOMINATOR",
    "bretherton_film", "aussillous_quere_film",
    "squeezing_length", "squeezing_volume", "squeezing_volume_at_ratio", "sphere_volume", "equivalent_diameter", "bubble_frequency",
    "bubble_spacing", "merging_ratio", "merged_volume",
    "homogeneous_void_fraction", "mixture_density", "residence_time",
    "squeezed_fraction", "migration_capillary_number", "migration_speed",
    "TaperPath", "taper_path", "migration_time", "stall_diameter",
]

#: Bretherton (1961) film coefficient: h/R = 1.3375 Ca^(2/3) (= 0.643 * 3^(2/3)).
BRETHERTON_COEFFICIENT = 1.3375
#: Aussillous & Quéré (2000): h/R = 1.34 Ca^(2/3) / (1 + 3.35 Ca^(2/3)).
AQ_COEFFICIENT = 1.34
AQ_DENOMINATOR = 3.35

BRETHERTON_1961 = ("F. P. Bretherton, \"The motion of long bubbles in tubes\", J. Fluid Mech. 10(2):166-188, "
                   "1961. doi:10.1017/S0022112061000160 (DOI from memory)")
AUSSILLOUS_QUERE_2000 = ("P. Aussillous and D. Quéré, \"Quick deposition of a fluid on the wall of a tube\", "
                         "Phys. Fluids 12(10):2367-2371, 2000. doi:10.1063/1.1289396 (DOI from memory)")
GARSTECKI_2006 = ("P. Garstecki, M. J. Fuerstman, H. A. Stone and G. M. Whitesides, \"Formation of droplets and "
                  "bubbles in a microfluidic T-junction - scaling and mechanism of break-up\", Lab Chip "
                  "6:437-446, 2006. doi:10.1039/b510841a (DOI from memory)")
REYSSAT_2014 = ("E. Reyssat, \"Drops and bubbles in wedges\", J. Fluid Mech. 748:641-662, 2014. "
                "doi:10.1017/jfm.2014.200 (DOI from memory)")


def _arr(x):
    return np.asarray(x, dtype=float)


def _out(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def _flows(ql, qg):
    """Broadcast flow rates; entries that are not finite and > 0 become NaN (Q_G may be 0)."""
    ql, qg = np.broadcast_arrays(_arr(ql), _arr(qg))
    bad = ~(np.isfinite(ql) & np.isfinite(qg) & (ql > 0) & (qg >= 0))
    if np.any(bad):
        ql = np.where(bad, np.nan, ql)
        qg = np.where(bad, np.nan, qg)
    return ql, qg


# =============================================================================================
# film thickness
# =============================================================================================
def bretherton_film(ca):
    r"""Film thickness left by a long bubble moving in a tube, low capillary number.

    .. math:: \frac{h}{R} = 1.3375\, Ca^{2/3}, \qquad Ca = \mu U / \sigma

    Parameters
    ----------
    ca : float or array   capillary number of the bubble [-], >= 0

    Returns
    -------
    float or array   film thickness over tube radius h/R [-] (NaN where Ca < 0)

    Notes
    -----
    Asymptotic result for Ca -> 0 (in practice Ca below about 1e-3); clean interfaces, no inertia.
    For a plane gap R is the half-gap.

    References
    ----------
    F. P. Bretherton, J. Fluid Mech. 10(2):166-188, 1961.

    Examples
    --------
    >>> round(bretherton_film(1e-3), 6)
    0.013375
    """
    ca = _arr(ca)
    with np.errstate(invalid="ignore"):
        out = np.where(ca >= 0, BRETHERTON_COEFFICIENT * np.abs(ca) ** (2.0 / 3.0), np.nan)
    return _out(out)


def aussillous_quere_film(ca):
    r"""Film thickness left by a long bubble, interpolation valid up to capillary numbers of order 1.

    .. math:: \frac{h}{R} = \frac{1.34\, Ca^{2/3}}{1 + 3.35\, Ca^{2/3}}

    Parameters
    ----------
    ca : float or array   capillary number [-], >= 0

    Returns
    -------
    float or array   h/R [-] (NaN where Ca < 0)

    Notes
    -----
    Tends to Bretherton's law at small Ca and to a third of the radius at large Ca (viscous
    regime, negligible inertia).

    References
    ----------
    P. Aussillous and D. Quéré, Phys. Fluids 12(10):2367-2371, 2000.

    Examples
    --------
    >>> round(aussillous_quere_film(1e-2), 5)
    0.05383
    """
    ca = _arr(ca)
    with np.errstate(invalid="ignore"):
        c23 = np.abs(ca) ** (2.0 / 3.0)
        out = np.where(ca >= 0, AQ_COEFFICIENT * c23 / (1.0 + AQ_DENOMINATOR * c23), np.nan)
    return _out(out)


# =============================================================================================
# bubble size at injection
# =============================================================================================
def squeezing_length(ql, qg, a=1.0):
    r"""Bubble length over channel width at a T-junction in the squeezing regime.

    .. math:: \frac{L}{w} = 1 + a\,\frac{Q_G}{Q_L}

    Parameters
    ----------
    ql, qg : float or array   liquid and gas flow rates [m^3/s] (Q_G may be 0)
    a : float                 coefficient of order 1 set by the junction geometry [-], >= 0

    Returns
    -------
    float or array   L/w [-] (NaN where Q_L <= 0 or Q_G < 0)

    Notes
    -----
    Squeezing regime: the emerging bubble blocks the channel and is pinched off by the upstream
    liquid pressure; valid at low capillary number of the continuous phase (about Ca < 1e-2, from
    memory). The same scaling is used here for a co-flow injector.

    References
    ----------
    P. Garstecki, M. J. Fuerstman, H. A. Stone and G. M. Whitesides, Lab Chip 6:437-446, 2006.

    Examples
    --------
    >>> squeezing_length(1e-6, 5e-7, a=1.0)
    1.5
    """
    a = in_range("a", a, 0.0, math.inf)
    ql, qg = _flows(ql, qg)
    return _out(1.0 + a * qg / ql)


def squeezing_volume(ql, qg, width, height=None, a=1.0):
    r"""Bubble volume from the squeezing law: a plug filling the injector channel.

    .. math:: V = w\, h_c\, L = w^2 h_c \left(1 + a\,\frac{Q_G}{Q_L}\right)

    Parameters
    ----------
    ql, qg : float or array   flow rates [m^3/s]
    width : float             injector channel width w [m], > 0
    height : float, optional  injector channel height h_c [m] (default: w, a square channel)
    a : float                 squeezing coefficient [-]

    Returns
    -------
    float or array   bubble volume V [m^3]

    Notes
    -----
    The plug is taken as a box w x h_c x L; its rounded ends and corner gutters are neglected.

    References
    ----------
    Garstecki et al. (2006), Lab Chip 6:437-446 (length law).

    Examples
    --------
    >>> round(squeezing_volume(1e-6, 1e-6, 1e-3) * 1e9, 9)     # 1 mm^3 x (1 + 1)
    2.0
    """
    w = positive("width", width, "m")
    hc = w if height is None else positive("height", height, "m")
    return _out(w * w * hc * _arr(squeezing_length(ql, qg, a)))


def squeezing_volume_at_ratio(ratio, width, a=1.0):
    r"""Bubble volume from the squeezing law at flow ratios r = Q_G/Q_L, for the chart lines.

    .. math:: V = w^3 (1 + a\, r)

    The same numbers as ``squeezing_volume(1.0, ratio, width, a=a)`` (a square injector), for callers that
    evaluate the law thousands of times with constants they have already checked: ``width`` and ``a`` are not
    checked again here.

    Parameters
    ----------
    ratio : float or array   r = Q_G/Q_L [-]
    width : float            injector channel width w [m], > 0 (not checked)
    a : float                squeezing coefficient [-], >= 0 (not checked)

    Returns
    -------
    array   bubble volume V [m^3] (NaN where r is not finite and >= 0)

    References
    ----------
    Garstecki et al. (2006), Lab Chip 6:437-446 (length law).

    Examples
    --------
    >>> import numpy as np
    >>> r = np.array([0.0, 0.5, 2.0, -1.0])
    >>> v = squeezing_volume_at_ratio(r, 1e-3, 0.7)
    >>> bool(np.array_equal(v, squeezing_volume(1.0, r, 1e-3, a=0.7), equal_nan=True))
    True
    """
    r = np.asarray(ratio, dtype=float)
    w3 = width * width * width
    with np.errstate(invalid="ignore"):
        v = w3 * (1.0 + a * r)
        bad = ~(r >= 0) | (r == math.inf)          # not finite and >= 0 (the chart lines call this thousands of
        return np.where(bad, np.nan, v) if bad.any() else np.asarray(v)    # times per chart: no copy if all good


def sphere_volume(diameter):
    r"""Volume of a sphere of diameter d.

    .. math:: V = \pi d^3 / 6

    Parameters
    ----------
    diameter : float or array   d [m]

    Returns
    -------
    float or array   V [m^3]

    Examples
    --------
    >>> round(sphere_volume(2.0), 6)
    4.18879
    """
    return _out(math.pi * _arr(diameter) ** 3 / 6.0)


def equivalent_diameter(volume):
    r"""Diameter of the sphere with the bubble's volume.

    .. math:: d = (6 V / \pi)^{1/3}

    Parameters
    ----------
    volume : float or array   bubble volume V [m^3], >= 0 (NaN otherwise)

    Returns
    -------
    float or array   d [m]

    Examples
    --------
    >>> round(equivalent_diameter(math.pi / 6.0), 12)
    1.0
    """
    v = _arr(volume)
    with np.errstate(invalid="ignore"):
        out = np.where(v >= 0, np.cbrt(6.0 * np.abs(v) / math.pi), np.nan)
    return _out(out)


def bubble_frequency(qg, volume):
    r"""Bubble formation frequency at the injector.

    .. math:: f = Q_G / V

    Parameters
    ----------
    qg : float or array       gas flow rate [m^3/s]
    volume : float or array   bubble volume [m^3], > 0

    Returns
    -------
    float or array   f [1/s]

    Examples
    --------
    >>> round(bubble_frequency(1e-7, 1e-9), 9)
    100.0
    """
    return _out(_arr(qg) / _arr(volume))


def bubble_spacing(ql, qg, volume, area):
    r"""Distance between consecutive bubbles along the stream (centre to centre).

    Bubbles formed at frequency f = Q_G/V travel with the mixture at j = (Q_L + Q_G)/A, so

    .. math:: \lambda = \frac{j}{f} = \frac{V (Q_L + Q_G)}{A\, Q_G}
              = \frac{V}{A}\left(1 + \frac{1}{r}\right), \qquad r = Q_G / Q_L

    Parameters
    ----------
    ql, qg : float or array   flow rates [m^3/s]
    volume : float or array   bubble volume [m^3]
    area : float              conduit flow area A [m^2]

    Returns
    -------
    float or array   lambda [m] (inf where Q_G = 0; NaN where Q_L <= 0)

    Notes
    -----
    No slip between bubbles and liquid (low gravity, no buoyant drift).

    Examples
    --------
    >>> round(bubble_spacing(1e-6, 1e-6, 1e-9, 1e-5), 9)   # V/A (1 + 1)
    0.0002
    """
    area = positive("area", area, "m^2")
    ql, qg = _flows(ql, qg)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = _arr(volume) * (ql + qg) / (area * qg)
    return _out(out)


def merging_ratio(diameter, spacing, merge_length_ratio=2.0):
    r"""Merging ratio: bubbles merge where it exceeds 1.

    .. math:: N = k_m\, d / \lambda

    Parameters
    ----------
    diameter : float or array   bubble (equivalent) diameter d [m]
    spacing : float or array    bubble spacing lambda [m]
    merge_length_ratio : float  k_m [-]: bubbles closer than k_m d merge

    Returns
    -------
    float or array   N [-] (0 for an infinite spacing)

    Notes
    -----
    Our closure: bubbles whose centres are closer than k_m diameters touch while they deform and
    jostle, and merge. N also counts the bubbles that one merged bubble gathers
    (:func:`merged_volume`).

    Examples
    --------
    >>> merging_ratio(1e-3, 4e-3, 2.0)
    0.5
    """
    k = positive("merge_length_ratio", merge_length_ratio)
    with np.errstate(divide="ignore", invalid="ignore"):
        return _out(k * _arr(diameter) / _arr(spacing))


def merged_volume(volume, diameter, spacing, merge_length_ratio=2.0):
    r"""Volume of the bubbles after merging: the gas within a stretch of k_m d gathers in one bubble.

    .. math:: V_m = V \max(1, N), \qquad N = k_m d / \lambda

    Parameters
    ----------
    volume : float or array     injected bubble volume V [m^3]
    diameter : float or array   its equivalent diameter d [m]
    spacing : float or array    spacing lambda [m]
    merge_length_ratio : float  k_m [-]

    Returns
    -------
    float or array   V_m [m^3]

    Notes
    -----
    Our closure, continuous at the merging onset N = 1; V_m = k_m d A alpha with alpha the
    no-slip void fraction. Larger merged bubbles are more confined and migrate faster.

    Examples
    --------
    >>> merged_volume(1e-9, 1e-3, 1e-3, 4.0)
    4e-09
    """
    n = _arr(merging_ratio(diameter, spacing, merge_length_ratio))
    return _out(_arr(volume) * np.maximum(1.0, np.nan_to_num(n, nan=1.0, posinf=np.inf)))


# =============================================================================================
# void fraction, mixture, residence time
# =============================================================================================
def homogeneous_void_fraction(ql, qg, c0=1.0):
    r"""Void fraction of a bubbly mixture without buoyant drift (drift-flux form).

    .. math:: \alpha = \frac{Q_G}{C_0 (Q_L + Q_G)}

    Parameters
    ----------
    ql, qg : float or array   flow rates [m^3/s]
    c0 : float                distribution parameter [-] (1: no slip)

    Returns
    -------
    float or array   alpha [-]

    References
    ----------
    Drift-flux relation with zero drift velocity, as used by Dukler et al. (1988),
    Int. J. Multiphase Flow 14(4):389-400.

    Examples
    --------
    >>> homogeneous_void_fraction(3.0, 1.0)
    0.25
    """
    c0 = positive("c0", c0)
    ql, qg = _flows(ql, qg)
    return _out(qg / (c0 * (ql + qg)))


def mixture_density(ql, qg, rho_l, rho_g):
    r"""Density of a no-slip bubbly mixture.

    .. math:: \rho_m = \frac{\rho_L Q_L + \rho_G Q_G}{Q_L + Q_G}

    Parameters
    ----------
    ql, qg : float or array   flow rates [m^3/s]
    rho_l, rho_g : float      liquid and gas densities [kg/m^3]

    Returns
    -------
    float or array   rho_m [kg/m^3]

    Examples
    --------
    >>> mixture_density(1.0, 1.0, 1000.0, 2.0)
    501.0
    """
    ql, qg = _flows(ql, qg)
    return _out((rho_l * ql + rho_g * qg) / (ql + qg))


def residence_time(length, area, ql, qg):
    r"""Time a bubble spends in the conduit, moving with the mean liquid speed in the liquid-filled area.

    .. math:: t_\mathrm{res} = \frac{l}{\bar u_L}, \qquad
              \bar u_L = \frac{Q_L}{A (1 - \alpha)} = \frac{Q_L + Q_G}{A}
              \quad (\alpha = Q_G/(Q_L + Q_G))

    Parameters
    ----------
    length : float   conduit length l [m]
    area : float     flow area A [m^2]
    ql, qg : float or array   flow rates [m^3/s]

    Returns
    -------
    float or array   t_res [s]

    Notes
    -----
    No-slip void fraction; the gas fraction at the inlet is used all along (bubbles that leave
    on the way would slow the liquid down and lengthen the time: conservative).

    Examples
    --------
    >>> round(residence_time(0.1, 1e-5, 1e-6, 0.0), 12)
    1.0
    """
    length = positive("length", length, "m")
    area = positive("area", area, "m^2")
    ql, qg = _flows(ql, qg)
    return _out(length * area / (ql + qg))


# =============================================================================================
# capillary migration
# =============================================================================================
def squeezed_fraction(diameter, gap, confinement_ratio=1.0):
    r"""Share of a bubble's volume pressed flat between the walls: what the capillary push acts on.

    .. math:: \phi = \frac{V_c}{V} = 1 - \left(\frac{k_c h}{d}\right)^3, \qquad
              V_c = V - \frac{\pi (k_c h)^3}{6}, \quad V = \frac{\pi d^3}{6}

    (0 where the bubble fits the gap, :math:`d \le k_c h`).

    Parameters
    ----------
    diameter : float or array           bubble (equivalent sphere) diameter d [m], > 0
    gap : float or array                local gap h [m], >= 0
    confinement_ratio : float           k_c [-], > 0 (1: the bubble is squeezed once it is larger than
                                        the gap)

    Returns
    -------
    float or array   phi in [0, 1) [-]; NaN where d is not finite and > 0 or h is not finite and >= 0

    Notes
    -----
    Derivation (theory manual, physics/manual/bubbles.md, section 3). A bubble of diameter d in a gap
    h < d is modelled as a sphere cut by the two walls (a sphere zone of radius R_s, height h): its
    volume :math:`\pi h R_s^2 - \pi h^3/12 = \pi a_f^2 h + \pi h^3/6` splits into the flattened
    part between the two contact patches of radius :math:`a_f` and the inscribed sphere
    :math:`\pi h^3/6`. Only the flattened part is pressed on the walls; the push along a tapering gap
    is the gap taper times the normal force on the walls, the capillary pressure over the patches,
    :math:`\approx (2\sigma\cos\theta/h)\,\pi a_f^2 = 2\sigma\cos\theta\, V_c/h^2`. So the push
    :math:`c_\mathrm{cap}\sigma\cos\theta V h'/h^2` of a flattened bubble is multiplied by phi: it
    tends to the full value for d >> h (phi -> 1) and vanishes linearly at the confinement line,
    :math:`\phi \approx 3 (d - k_c h)/d`. With k_c != 1 the same form fades at d = k_c h.

    Examples
    --------
    >>> squeezed_fraction(2.0, 1.0)                 # 1 - 1/8
    0.875
    >>> squeezed_fraction(1.0, 1.0), squeezed_fraction(0.5, 1.0)
    (0.0, 0.0)
    """
    k = positive("confinement_ratio", confinement_ratio)
    d, h = np.broadcast_arrays(_arr(diameter), _arr(gap))
    ok = np.isfinite(d) & (d > 0) & np.isfinite(h) & (h >= 0)
    with np.errstate(all="ignore"):
        q = np.where(ok, k * h / np.where(ok, d, 1.0), 0.0)
        out = np.where(ok, np.where(q < 1.0, 1.0 - q ** 3, 0.0), np.nan)
    return _out(out)


def migration_capillary_number(taper, contact_angle=0.0, gap_over_radius=0.0, laplace_gap=0.0, *,
                               capillary_coefficient=2.0, hele_shaw_drag=12.0, film_drag=1.0, form_drag=1.0,
                               squeezed=1.0, buoyancy=0.0):
    r"""Capillary number Ca = mu U / sigma of a bubble squeezed in a tapering gap, from a force balance.

    Driving force (capillary pressure on the flattened part of the bubble, :func:`squeezed_fraction`)
    against three drags: Hele-Shaw flow of the liquid round the bubble, shear in the wetting films
    between the flattened faces and the walls (thickness from Aussillous & Quéré 2000 with the
    half-gap as radius), and form drag:

    .. math::

        c_\mathrm{cap}\,\sigma\cos\theta\,\frac{\phi V h'}{h^2}
        = c_\mathrm{HS}\,\frac{\mu U V}{h^2}
        + c_f\,\frac{4 \mu U \phi V}{h^2\, f(Ca)}
        + C_D\,\tfrac12 \rho U^2\, 2 a h,
        \qquad f(Ca) = \frac{1.34\, Ca^{2/3}}{1 + 3.35\, Ca^{2/3}}

    Dividing by :math:`\sigma V / h^2` and writing :math:`y = Ca^{1/3}`:

    .. math:: \frac{C_D}{\pi}\frac{h}{a_*} La_h\, y^6 + (c_\mathrm{HS} + 10\, c_f \phi)\, y^3
              + \frac{4 c_f \phi}{1.34}\, y = c_\mathrm{cap} \cos\theta\, h' \phi,
              \qquad La_h = \frac{\rho \sigma h}{\mu^2}, \quad \frac{h}{a_*} = \frac{\pi a h^2}{V}

    (:math:`h/a_* = h/a` for a flattened bubble, V = pi a^2 h), which has one positive root (solved
    by Newton from an upper bound).

    With a residual acceleration, buoyancy :math:`(\rho_L - \rho_G)\, a_m V` acts on the whole bubble
    along the migration direction (:math:`a_m` the component toward the open side of the acceleration
    buoyancy gives, see :func:`migration_time`) and adds to the right-hand side the Bond number of the gap

    .. math:: Bo_m = \frac{(\rho_L - \rho_G)\, a_m h^2}{\sigma}

    (``buoyancy``; negative where buoyancy opposes the push).

    Parameters
    ----------
    taper : float or array            dh/ds, growth of the local gap along the path [-]
    contact_angle : float or array    theta [rad]
    gap_over_radius : float or array  h/a_* [-] (0: no form drag); h/a for a flattened bubble
    laplace_gap : float or array      La_h = rho sigma h / mu^2 [-] (0: no inertia)
    capillary_coefficient : float     c_cap [-] (default 2)
    hele_shaw_drag : float            c_HS [-] (default 12)
    film_drag : float                 c_f [-], 1 = films sheared over both faces, 0 = clean interface
    form_drag : float                 C_D [-]
    squeezed : float or array         phi, share of the volume pressed flat [-] in [0, 1]
                                      (default 1: a fully flattened bubble; see :func:`squeezed_fraction`)
    buoyancy : float or array         Bo_m = (rho_L - rho_G) a_m h^2 / sigma [-], buoyancy along the
                                      migration direction (default 0: no buoyancy, the low-gravity balance)

    Returns
    -------
    float or array   Ca [-]; 0 where the drive is not positive (taper <= 0, theta >= 90 deg, a bubble
    that fits the gap, phi = 0, or buoyancy that opposes the push and is at least as strong: the bubble
    does not move toward the open side)

    Notes
    -----
    Derivation, assumptions and the sources of each term in physics/manual/bubbles.md. The push on a
    flattened bubble, 2 sigma cos(theta) V h'/h^2 (c_cap = 2), follows from the normal force of the
    walls on its flattened faces times the taper (our derivation; the same order as the estimate
    after Reyssat 2014); c_HS = 12 is our derivation for Darcy flow round a circular flattened
    bubble. The push and the film drag act on the flattened part only (phi V); the Hele-Shaw and form
    drags on the whole bubble. All coefficients are uncertain and meant to be calibrated.

    References
    ----------
    E. Reyssat, J. Fluid Mech. 748:641-662, 2014 (bubbles move to the wide end of a wedge).
    P. Aussillous and D. Quéré, Phys. Fluids 12(10):2367-2371, 2000 (film thickness).

    Examples
    --------
    Hele-Shaw drag alone: Ca = c_cap h' phi / c_HS:

    >>> round(migration_capillary_number(0.5, film_drag=0.0, form_drag=0.0), 6)
    0.083333
    >>> round(migration_capillary_number(0.5, film_drag=0.0, form_drag=0.0, squeezed=0.5), 6)
    0.041667
    >>> round(migration_capillary_number(0.5, film_drag=0.0, form_drag=0.0, buoyancy=-0.25), 6)   # (1 - 0.25)/12
    0.0625
    """
    c_cap = in_range("capillary_coefficient", capillary_coefficient, 0.0, math.inf)
    c_hs = in_range("hele_shaw_drag", hele_shaw_drag, 0.0, math.inf)
    c_f = in_range("film_drag", film_drag, 0.0, math.inf)
    c_d = in_range("form_drag", form_drag, 0.0, math.inf)
    if c_hs == 0 and c_f == 0 and c_d == 0:
        raise ValueError("at least one of hele_shaw_drag, film_drag, form_drag must be > 0")
    # element-wise arithmetic on the arguments as given (a scalar stays a scalar until it meets an array)
    taper, theta, hr, la, phi, bo = (_arr(v) for v in (taper, contact_angle, gap_over_radius, laplace_gap, squeezed,
                                                       buoyancy))
    shape = np.broadcast_shapes(taper.shape, theta.shape, hr.shape, la.shape, phi.shape, bo.shape)
    with np.errstate(invalid="ignore"):
        phi = np.where(np.isfinite(phi), np.clip(phi, 0.0, 1.0), np.nan)
    drive = c_cap * np.cos(theta) * taper * phi
    if np.any(bo != 0.0):
        drive = drive + bo
    if drive.shape != shape:
        drive = np.broadcast_to(drive, shape)
    k6 = (c_d / math.pi) * hr * la
    k3 = c_hs + c_f * 4.0 * AQ_DENOMINATOR / AQ_COEFFICIENT * phi
    k1 = c_f * 4.0 / AQ_COEFFICIENT * phi
    with np.errstate(invalid="ignore"):
        pos = np.isfinite(drive) & (drive > 0)
    if pos.all():                                   # only points with a drive move: solve there
        sel = slice(None)
        d = drive.ravel()
        a6, a3, a1 = (np.broadcast_to(k, shape).ravel() for k in (k6, k3, k1))
    else:
        sel = np.flatnonzero(pos)
        d = drive.ravel()[sel]
        a6, a3, a1 = (np.broadcast_to(k, shape).ravel()[sel] for k in (k6, k3, k1))
    big = np.inf
    with np.errstate(all="ignore"):
        # upper bounds: the root of each drag term alone (only where that term is present)
        y = np.full(d.shape, big)
        if np.all(a6 > 0):
            y = np.minimum(y, np.sqrt(np.cbrt(d / a6)))
        else:
            y = np.minimum(y, np.where(a6 > 0, np.sqrt(np.cbrt(d / np.where(a6 > 0, a6, 1.0))), big))
        if np.all(a3 > 0):
            y = np.minimum(y, np.cbrt(d / a3))
        else:
            y = np.minimum(y, np.where(a3 > 0, np.cbrt(d / np.where(a3 > 0, a3, 1.0)), big))
        if np.all(a1 > 0):
            y = np.minimum(y, d / a1)
        else:
            y = np.minimum(y, np.where(a1 > 0, d / np.where(a1 > 0, a1, 1.0), big))
        # Newton from above on a convex increasing function: monotone convergence, y > 0 and P'(y) > 0
        # all the way (an entry with no drag term at all keeps y = inf)
        y = _newton_drag_root(y, d, a6, a3, a1)
        out = np.zeros(drive.size)
        out[sel] = y * y * y
    out = np.where(np.isfinite(drive), out.reshape(shape), np.nan)
    return _out(out)


#: Entries solved together by :func:`_newton_drag_root`: a block's working arrays stay in the processor's
#: cache (a migration table solves about 10^5 entries at once; streaming them all through memory on each
#: iteration costs about twice as much).
_NEWTON_BLOCK = 16384


def _newton_drag_root(y, d, a6, a3, a1, max_iter=60):
    """Root y > 0 of a6 y^6 + a3 y^3 + a1 y = d by Newton from the upper bounds y (entries with y = inf kept).

    Each entry stops once its step is within 1e-14 of y (convergence is monotone from above); the entries
    still moving are gathered so that the last iterations cost only what they change. Solved in blocks of
    :data:`_NEWTON_BLOCK` entries (1-d arrays of equal size).
    """
    y = np.array(y, dtype=float)
    if y.size <= _NEWTON_BLOCK:
        return _newton_block(y, d, a6, a3, a1, max_iter)
    for start in range(0, y.size, _NEWTON_BLOCK):
        part = slice(start, start + _NEWTON_BLOCK)
        y[part] = _newton_block(y[part].copy(), d[part], a6[part], a3[part], a1[part], max_iter)
    return y


def _newton_block(y, d, a6, a3, a1, max_iter):
    act = np.flatnonzero(np.isfinite(y))
    if act.size == y.size:
        act = slice(None)
    ya, da, b6, b3, b1 = y[act], d[act], a6[act], a3[act], a1[act]
    b6x6, b3x3 = 6.0 * b6, 3.0 * b3
    # step = ((a6 y^3 + a3) y^3 + a1 y - d) / ((6 a6 y^3 + 3 a3) y^2 + a1), in place (the same operations in
    # the same order: large temporaries cost more than the arithmetic)
    y2, y3, num, den = (np.empty_like(ya) for _ in range(4))
    for _ in range(max_iter):
        np.multiply(ya, ya, out=y2)
        np.multiply(y2, ya, out=y3)
        np.multiply(b6, y3, out=num)
        num += b3
        num *= y3
        np.multiply(b1, ya, out=den)
        num += den
        num -= da
        np.multiply(b6x6, y3, out=den)
        den += b3x3
        den *= y2
        den += b1
        num /= den                                  # the step
        ya -= num
        np.abs(num, out=num)
        np.multiply(ya, 1e-14, out=den)
        moving = ~(num <= den)
        n_moving = int(np.count_nonzero(moving))
        if n_moving == 0:
            break
        if 2 * n_moving < ya.size:                  # gather the entries still moving
            y[act] = ya
            act = (np.arange(y.size) if isinstance(act, slice) else act)[moving]
            ya, da, b6, b3, b1, b6x6, b3x3 = (v[moving] for v in (ya, da, b6, b3, b1, b6x6, b3x3))
            y2, y3, num, den = (np.empty_like(ya) for _ in range(4))
    y[act] = ya
    return y


def migration_speed(sigma, mu, ca):
    r"""Migration speed from the migration capillary number.

    .. math:: U = \sigma\, Ca / \mu

    Parameters
    ----------
    sigma : float   surface tension [N/m]
    mu : float      liquid viscosity [Pa s]
    ca : float or array   capillary number [-]

    Returns
    -------
    float or array   U [m/s]

    Examples
    --------
    >>> round(migration_speed(0.02, 0.01, 0.005), 6)
    0.01
    """
    sigma = positive("sigma", sigma, "N/m")
    mu = positive("mu", mu, "Pa s")
    return _out(sigma * _arr(ca) / mu)


# =============================================================================================
# taper path: local gap along the bisector of the apex corner
# =============================================================================================
_PATH_POINTS = 401


@dataclass(frozen=True, eq=False)
class TaperPath:
    """The local gap of an open section along the bisector of its apex corner, up to the open side.

    Attributes
    ----------
    corner_index : int    vertex index of the apex corner in the section's outline
    half_angle : float    apex corner half-angle alpha [rad]
    length : float        path length S from the apex to the open side [m]
    area : float          section flow area A [m^2]
    s : ndarray           positions along the path from the apex [m] (0 .. S)
    gap : ndarray         local gap h(s) = 2 x distance to the nearest wall [m] (the diameter of
                          the largest sphere centred there)
    taper : ndarray       dh/ds [-]
    open_distance : ndarray   distance to the open side [m]

    For a V-groove or a wedge channel h = 2 s sin(alpha) and the open distance is S - s exactly.
    """

    corner_index: int
    half_angle: float
    length: float
    area: float
    s: np.ndarray
    gap: np.ndarray
    taper: np.ndarray
    open_distance: np.ndarray

    # ---- along the path -------------------------------------------------------------------
    def _sub(self, s_inj):
        """Arrays from s_inj to the first local maximum of the gap after it (where a bubble is trapped)."""
        s, h, od = self.s, self.gap, self.open_distance
        i = int(np.searchsorted(s, s_inj, side="right"))
        ss = np.concatenate([[s_inj], s[i:]])
        hh = np.concatenate([[np.interp(s_inj, s, h)], h[i:]])
        oo = np.concatenate([[np.interp(s_inj, s, od)], od[i:]])
        dec = np.nonzero(np.diff(hh) <= 0)[0]
        end = int(dec[0]) + 1 if dec.size else len(ss)
        return ss, hh, oo, end

    def travel(self, diameter, injection=0.5, confinement_ratio=1.0):
        r"""Where a bubble injected at s_inj = injection x S is pushed, and whether it reaches the open side.

        .. math::

            s_\mathrm{stop} = \min\{s \ge s_\mathrm{inj} : k_c h(s) \ge d \text{ or } h'(s) \le 0\}, \quad
            s_\mathrm{touch} = \min\{s \ge s_\mathrm{inj} : \mathrm{dist}_\mathrm{open}(s) \le d/2\}

        The bubble reaches the open side if it touches it at injection, or if it is confined there
        (d > k_c h(s_inj)) and :math:`s_\mathrm{touch} \le s_\mathrm{stop}`.

        Parameters
        ----------
        diameter : float or array   bubble diameter d [m]
        injection : float           s_inj / S, in [0, 1)
        confinement_ratio : float   k_c [-]: the bubble is pushed while d > k_c h

        Returns
        -------
        (reaches, s_touch, touches_at_injection) : bool array, float array [m], bool array
        """
        d = np.atleast_1d(_arr(diameter))
        s_inj = float(injection) * self.length
        return _travel(_travel_setup(self, s_inj), d, float(confinement_ratio), s_inj)

    def reach_diameter(self, injection=0.5, confinement_ratio=1.0) -> float:
        r"""Smallest bubble diameter that is pushed all the way to the open side [m].

        For a V-groove or wedge of depth S and half-angle alpha:

        .. math:: d_\mathrm{reach} = \min\left(\frac{2 k_c S \sin\alpha}{1 + k_c \sin\alpha},\;
                  2 (S - s_\mathrm{inj})\right)

        (with k_c = 1 the first term is the inscribed-circle diameter of the section).

        Parameters
        ----------
        injection : float          s_inj / S, in [0, 1)
        confinement_ratio : float  k_c [-]

        Returns
        -------
        float   d_reach [m] (found by bisection on :meth:`travel`, which is exact for straight walls)
        """
        return _reach_diameter(self, float(injection), float(confinement_ratio))


@functools.lru_cache(maxsize=256)
def _travel_setup(path, s_inj):
    """The path from s_inj on, as :meth:`TaperPath.travel` reads it (kept per path and injection point: the
    reach diameter's bisection and every migration table ask for it again)."""
    ss, hh, oo, end = path._sub(s_inj)
    # first s where the open distance falls to d/2 (running minimum, reversed to increasing)
    om = np.minimum.accumulate(oo) - 1e-15 * path.length * np.arange(len(oo))
    hs, sh = hh[:end], ss[:end]
    hs = hs + 1e-15 * path.length * np.arange(len(hs))
    out = (oo[0], om[::-1].copy(), ss[::-1].copy(), om[-1], hs, sh, hh[0])
    for a in out:
        if isinstance(a, np.ndarray):
            a.flags.writeable = False
    return out


def _travel(setup, d, confinement_ratio, s_inj):
    """(reaches, s_touch, touches_at_injection) of bubbles d (1-d array) from :func:`_travel_setup`."""
    oo0, om_r, ss_r, om_end, hs, sh, hh0 = setup
    touch0 = 0.5 * d >= oo0
    s_touch = np.interp(0.5 * d, om_r, ss_r)
    s_touch = np.where(0.5 * d >= om_end, s_touch, np.inf)
    s_stop = np.interp(d / confinement_ratio, hs, sh)
    confined = d > confinement_ratio * hh0
    reaches = touch0 | (confined & (s_touch <= s_stop * (1.0 + 1e-12)))
    return reaches, np.where(touch0, s_inj, s_touch), touch0


@functools.lru_cache(maxsize=256)
def _reach_diameter(path, injection, k_c):
    s_inj = injection * path.length
    hi = 2.0 * float(np.interp(s_inj, path.s, path.open_distance))
    if hi <= 0:
        return 0.0
    lo = 0.0
    setup = _travel_setup(path, float(injection) * path.length)
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        if bool(_travel(setup, np.array([mid]), k_c, s_inj)[0][0]):
            hi = mid
        else:
            lo = mid
        if hi - lo <= 1e-13 * hi:
            break
    return hi


def _bisector(v, i):
    n = len(v)
    p, a, b = v[i], v[(i - 1) % n], v[(i + 1) % n]
    e1 = (a - p) / np.linalg.norm(a - p)
    e2 = (b - p) / np.linalg.norm(b - p)
    d = e1 + e2
    return d / np.linalg.norm(d)


def taper_path(section, n: int = _PATH_POINTS, *, contact_angle=None) -> TaperPath | None:
    r"""Local gap along the bisector of the section's apex corner, from the apex to the open side.

    .. math:: h(s) = 2\,\mathrm{dist}(\mathbf p(s), \text{walls}), \qquad
              \mathbf p(s) = \mathbf v_\mathrm{apex} + s\,\mathbf e_\mathrm{bisector}

    Parameters
    ----------
    section : Section   an open section (:class:`~lowgmap.physics.geometry.sections.Groove`,
        :class:`~lowgmap.physics.geometry.sections.WedgeChannel`, :class:`~lowgmap.physics.geometry.sections.Polygon` with open edges)
    n : int             points along the path (default 401)
    contact_angle : float, optional   theta [rad]: when given, only corners that hold liquid
        (Concus–Finn, theta + alpha < 90 deg) can be the apex

    Returns
    -------
    TaperPath or None
        None when the section has no wall corner whose bisector leaves the section through an open
        edge (closed sections, slots whose corners all face a wall), or, with ``contact_angle``, no
        such corner that holds liquid.

    Notes
    -----
    The apex is the wall corner whose bisector reaches an open edge farthest from the corner (the
    deepest taper); ties go to the sharper corner. A corner where the Concus–Finn condition fails
    holds no liquid below the gas pressure (gas fills it), so a bubble cannot be squeezed toward
    the open side from it; with ``contact_angle`` such corners are skipped. Distances are computed with shapely. For a
    V-groove or wedge channel h = 2 s sin(alpha) exactly.

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.geometry.sections import Groove
    >>> p = taper_path(Groove(math.radians(30.0), 0.004))
    >>> round(p.length * 1e3, 9), round(float(p.gap[-1]) * 1e3, 9)      # depth; 2 d sin(30 deg)
    (4.0, 4.0)
    """
    theta = None if contact_angle is None else float(contact_angle)
    try:
        return _taper_path(section, int(n), theta)
    except TypeError:                      # unhashable section: no cache
        return _taper_path_among.__wrapped__(section, int(n), _apex_candidates(section, theta))


@functools.lru_cache(maxsize=64)
def _taper_path(section, n, theta=None):
    return _taper_path_among(section, n, _apex_candidates(section, theta))


def _apex_candidates(section, theta):
    """Indices of the corners that can be the apex: all of them, or with a contact angle those that hold liquid
    (Concus–Finn)."""
    return tuple(c.index for c in getattr(section, "corners", ())
                 if theta is None or theta + c.half_angle < 0.5 * math.pi - 1e-12)


@functools.lru_cache(maxsize=64)
def _taper_path_among(section, n, candidates):
    """The path from the best apex among the corners ``candidates`` (one object for every contact angle that
    leaves the same corners: the reach diameter, the travel set-up and the migration nodes are kept per path)."""
    import shapely
    from shapely.geometry import LineString, MultiLineString

    if not getattr(section, "is_open", False):
        return None
    v = np.asarray(section.outline(), dtype=float)
    m = len(v)
    opened = set(section.open_edges())
    edges = [(k, v[k], v[(k + 1) % m]) for k in range(m)]
    walls = MultiLineString([LineString([a, b]) for k, a, b in edges if k not in opened])
    opens = MultiLineString([LineString([a, b]) for k, a, b in edges if k in opened])
    span = float(np.max(v.max(axis=0) - v.min(axis=0)))
    best = None
    for c in section.corners:
        if c.index not in candidates:
            continue                      # Concus–Finn fails: the corner holds no liquid
        i = c.index
        d = _bisector(v, i)
        p0 = v[i]
        ray = LineString([p0 + 1e-9 * span * d, p0 + 4.0 * span * d])
        boundary = MultiLineString([LineString([a, b]) for _, a, b in edges])
        hit = ray.intersection(boundary)
        if hit.is_empty:
            continue
        pts = [np.array(g.coords[0]) for g in getattr(hit, "geoms", [hit]) if g.geom_type == "Point"]
        pts += [np.array(cc) for g in getattr(hit, "geoms", [hit]) if g.geom_type != "Point" for cc in g.coords]
        if not pts:
            continue
        dist = [float(np.dot(q - p0, d)) for q in pts]
        k = int(np.argmin(dist))
        q, S = pts[k], dist[k]
        if opens.is_empty or opens.distance(shapely.Point(q)) > 1e-9 * span:
            continue                      # the bisector meets a wall first
        key = (S, -c.half_angle)
        if best is None or key > best[0]:
            best = (key, i, c.half_angle, p0, d, S)
    if best is None:
        return None
    _, i, alpha, p0, d, S = best
    s = np.linspace(0.0, S, n)
    pts = shapely.points(p0[0] + s * d[0], p0[1] + s * d[1])
    gap = 2.0 * shapely.distance(pts, walls)
    od = shapely.distance(pts, opens)
    taper = np.gradient(gap, s)
    ro = []
    for a in (s, gap, taper, od):
        a = np.array(a, dtype=float)
        a.flags.writeable = False
        ro.append(a)
    return TaperPath(int(i), float(alpha), float(S), float(section.area), *ro)


#: Nodes of the migration-time quadrature per bubble: Gauss-Legendre in u = ln(1 + x/x0), x the distance before
#: the touching point and x0 the distance over which the confinement margin doubles ("simpson" with an odd
#: number of nodes is the rule used before: 401 nodes, four times the cost for the same accuracy, see
#: migration_time).
_MIG_NODES = 96
_MIG_RULE = "gauss"


def migration_time(path: TaperPath, diameter, *, injection=0.5, confinement_ratio=1.0, rho, mu, sigma,
                   contact_angle=0.0, capillary_coefficient=2.0, hele_shaw_drag=12.0, film_drag=1.0,
                   form_drag=1.0, rho_gas=None, buoyancy_acceleration=0.0, axial_acceleration=0.0,
                   with_drift=False):
    r"""Time a squeezed bubble takes to migrate from its injection point to the open side.

    .. math:: t_\mathrm{mig} = \int_{s_\mathrm{inj}}^{s_\mathrm{touch}} \frac{\mathrm{d}s}{U(s)},
              \qquad U = \frac{\sigma}{\mu}\, Ca\!\left(h'(s), \theta, \frac{h}{a_*}, La_h,
              \phi(s)\right), \qquad \phi = 1 - \left(\frac{k_c h(s)}{d}\right)^3

    with Ca from :func:`migration_capillary_number`, phi from :func:`squeezed_fraction`, footprint
    radius :math:`a = \max(d/2, \sqrt{V/(\pi h)})`, :math:`h/a_* = \pi a h^2/V`,
    :math:`La_h = \rho\sigma h/\mu^2` and, with a residual acceleration, the Bond number of the gap
    :math:`Bo_m = (\rho_L - \rho_G)\, a_m h^2/\sigma` (buoyancy along the path).

    Parameters
    ----------
    path : TaperPath             from :func:`taper_path`
    diameter : float or array    bubble diameter d [m]
    injection : float            s_inj / S, in [0, 1)
    confinement_ratio : float    k_c [-]
    rho, mu, sigma : float       liquid density [kg/m^3], viscosity [Pa s], surface tension [N/m]
    contact_angle : float        theta [rad]
    capillary_coefficient, hele_shaw_drag, film_drag, form_drag : float   see
        :func:`migration_capillary_number`
    rho_gas : float, optional    gas density [kg/m^3]; required when ``buoyancy_acceleration`` is not 0
                                 (buoyancy is (rho_L - rho_G) a_m V: the gas density is never dropped)
    buoyancy_acceleration : float   a_m [m/s^2]: component along the migration direction (along the path
                                 from the apex toward the open side) of the acceleration buoyancy gives a
                                 bubble, i.e. of minus the residual acceleration; > 0 when buoyancy helps
                                 the capillary push, < 0 when it opposes it (default 0: low gravity)
    axial_acceleration : float   a_z [m/s^2]: component along the conduit axis, in the direction of the
                                 flow, of the acceleration buoyancy gives a bubble (> 0 in upward flow);
                                 used only for the drift (``with_drift``)
    with_drift : bool            also return the mean axial drift speed of the bubble relative to the
                                 liquid during the migration (see Notes)

    Returns
    -------
    float or array   t_mig [s]; 0 where the bubble touches the open side at injection, inf on the
    confinement line itself (d = d_reach, the bubble only just fits where it would touch) and where
    buoyancy opposes the push at least as strongly somewhere on the path (the bubble stalls and never
    arrives, see :func:`stall_diameter`), NaN where it does not reach the open side (too small: it
    stops where the gap equals its size). With ``with_drift``: (t_mig, q) with q [m/s] the mean axial drift
    speed D_z / t_mig (0 where t_mig is 0, NaN where it is not finite)

    Notes
    -----
    Quasi-steady migration; the bubble keeps its volume; the liquid around it is at rest on
    average across the section (the stream carries bubble and liquid along the conduit together).
    The push fades where the bubble only just fills the gap (phi -> 0): near the confinement line
    the margin :math:`\delta = d - k_c h` is smallest where the bubble touches the open side, and
    with Hele-Shaw drag (c_HS > 0) :math:`U \propto \phi \propto \delta` there, so
    :math:`t_\mathrm{mig} \simeq \frac{c_\mathrm{HS}\mu d}{3\sigma c_\mathrm{cap}\cos\theta\, k_c h'^2}
    \ln\frac{1}{\delta_\mathrm{end}} + O(1)` diverges logarithmically as d -> d_reach (theory manual).
    Quadrature: Gauss-Legendre on 96 nodes in :math:`u = \ln(1 + x/x_0)`, x the distance before the
    touching point and :math:`x_0 = \delta_\mathrm{end}/(k_c h')` (measured against the closed form of
    the Hele-Shaw-only wedge: 5e-13; against an adaptive quadrature of the force balance with form drag,
    whose footprint radius has a kink: 1.1e-6); the gap and its taper are interpolated on the path. With buoyancy the nodes also
    crowd over the distance in which the net drive at the touching point doubles, so the time stays
    accurate as it diverges at the stall diameter.

    Axial drift (``with_drift``): the share of buoyancy along the conduit axis,
    :math:`(\rho_L - \rho_G) a_z V`, moves the squeezed bubble along the stream relative to the liquid at
    :math:`U_z = \sigma Ca_z/\mu`, with :math:`Ca_z` from the same drag law driven by
    :math:`Bo_z = (\rho_L - \rho_G) a_z h^2/\sigma` alone (the two directions are solved separately:
    exact for the linear Hele-Shaw drag, an approximation with film and form drag). Over the migration the
    bubble drifts :math:`D_z = \int U_z/U\, \mathrm{d}s`; q = D_z / t_mig, on the same nodes.

    Examples
    --------
    Groove of half-angle 30 deg (h = s, h' = 1), Hele-Shaw drag alone:
    :math:`U = \sigma c_\mathrm{cap}\phi/(c_\mathrm{HS}\mu)`, so
    :math:`t = (c_\mathrm{HS}\mu d/(c_\mathrm{cap}\sigma)) \int \mathrm{d}x/(1 - x^3)` with x = s/d:

    >>> import math
    >>> from lowgmap.physics.geometry.sections import Groove
    >>> p = taper_path(Groove(math.radians(30.0), 0.004))
    >>> t = migration_time(p, 0.003, injection=0.25, rho=1000.0, mu=0.01, sigma=0.02,
    ...                    film_drag=0.0, form_drag=0.0)
    >>> G = lambda x: (-math.log(1 - x) / 3 + math.log(x * x + x + 1) / 6
    ...                + math.atan((2 * x + 1) / math.sqrt(3)) / math.sqrt(3))
    >>> exact = 12 * 0.01 * 0.003 / (2 * 0.02) * (G(2.5 / 3) - G(1 / 3))
    >>> round(t / exact, 6)
    1.0
    """
    d = np.atleast_1d(_arr(diameter)).ravel()
    scalar = np.ndim(diameter) == 0
    k_c = positive("confinement_ratio", confinement_ratio)
    bond_per_h2 = _buoyancy_factor(rho, rho_gas, sigma, buoyancy_acceleration)
    axial_per_h2 = _buoyancy_factor(rho, rho_gas, sigma, axial_acceleration) if with_drift else 0.0
    # the nodes and the gap along them depend on the drag constants only through the drive-doubling
    # distance with buoyancy: kept per path, diameters and fluid (the band searches vary the constants)
    drive_key = (float(contact_angle), float(capillary_coefficient)) if bond_per_h2 != 0.0 else None
    nodes = _migration_nodes(path, d.tobytes(), float(injection), k_c, float(rho), float(mu), float(sigma),
                             bond_per_h2, drive_key)
    t = nodes.t0.copy()
    drift = nodes.drift0.copy()
    if nodes.go.size:
        res = nodes.res0.copy()
        res_q = nodes.res_q0.copy()
        ok = nodes.ok
        if ok.any():
            drifts = with_drift and axial_per_h2 != 0.0
            f = np.empty(nodes.hj.shape)
            fz = np.empty(nodes.hj.shape) if drifts else np.empty(0)
            rows = max(1, _NEWTON_BLOCK // _QUAD_NODES.size)     # a few bubbles at a time: the arrays stay in cache
            for r0 in range(0, f.shape[0], rows):
                b = slice(r0, r0 + rows)
                hj = nodes.hj[b]
                with np.errstate(divide="ignore", invalid="ignore"):
                    ca = migration_capillary_number(nodes.hpj[b], contact_angle, nodes.hr[b], nodes.la[b],
                                                    capillary_coefficient=capillary_coefficient,
                                                    hele_shaw_drag=hele_shaw_drag, film_drag=film_drag,
                                                    form_drag=form_drag, squeezed=nodes.phi[b],
                                                    buoyancy=bond_per_h2 * hj ** 2 if bond_per_h2 != 0.0 else 0.0)
                    f[b] = np.where(ca > 0, mu / (sigma * np.where(ca > 0, ca, 1.0)), np.inf) * nodes.x_shift[b]
                    if drifts:
                        bz = axial_per_h2 * hj ** 2
                        ca_z = migration_capillary_number(0.0, 0.0, nodes.hr[b], nodes.la[b],
                                                          capillary_coefficient=0.0, hele_shaw_drag=hele_shaw_drag,
                                                          film_drag=film_drag, form_drag=form_drag,
                                                          squeezed=nodes.phi[b], buoyancy=np.abs(bz))
                        fz[b] = np.sign(bz) * ca_z * (sigma / mu) * f[b]          # U_z / U ds/du
            wts = _QUAD_WEIGHTS
            span = nodes.span
            with np.errstate(invalid="ignore"):
                res[ok] = (f @ wts) * span
                if with_drift:
                    if axial_per_h2 != 0.0:
                        res_q[ok] = (fz @ wts) * span / res[ok]
                    else:
                        res_q[ok] = 0.0
        t[nodes.go] = res
        drift[nodes.go] = res_q
    if with_drift:
        drift = np.where(np.isfinite(t), drift, np.nan)
        return (float(t[0]), float(drift[0])) if scalar else (t, drift)
    return float(t[0]) if scalar else t


def _quadrature(rule: str, n: int):
    """(nodes on [0, 1], weights summing to 1) of the migration-time quadrature."""
    if rule == "simpson":
        w = np.ones(n)
        w[1:-1:2], w[2:-1:2] = 4.0, 2.0
        return np.linspace(0.0, 1.0, n), w / (3.0 * (n - 1))
    x, w = np.polynomial.legendre.leggauss(n)
    return 0.5 * (x + 1.0), 0.5 * w


_QUAD_NODES, _QUAD_WEIGHTS = _quadrature(_MIG_RULE, _MIG_NODES)
for _a in (_QUAD_NODES, _QUAD_WEIGHTS):
    _a.flags.writeable = False


@dataclass(frozen=True, eq=False)
class _MigrationNodes:
    """Quadrature nodes of :func:`migration_time` for a set of bubbles, and the gap there (read-only).

    ``t0``, ``drift0``: the results known without a solve (touching at injection, not reaching);
    ``go``: bubbles that migrate; ``res0``, ``res_q0``: their results where the quadrature is not used;
    ``ok``: which of them the quadrature serves, with per node: ``x_shift`` = x + x0, gap ``hj``, taper ``hpj``,
    ``hr`` = pi a h^2 / V (a the footprint radius, V the volume), ``la`` = La_h, ``phi``; ``span`` per bubble.
    The fields after ``go`` are arrays, None when no bubble migrates (typed ``Any`` for that reason).
    """

    t0: np.ndarray
    drift0: np.ndarray
    go: np.ndarray
    res0: Any = None
    res_q0: Any = None
    ok: Any = None
    x_shift: Any = None
    hj: Any = None
    hpj: Any = None
    hr: Any = None
    la: Any = None
    phi: Any = None
    span: Any = None


@functools.lru_cache(maxsize=4)
def _migration_nodes(path, d_bytes, injection, k_c, rho, mu, sigma, bond_per_h2, drive_key):
    """The nodes of :func:`migration_time` (see :class:`_MigrationNodes`); ``drive_key``: (contact angle, c_cap)
    with buoyancy (they set the drive-doubling distance), else None. A few entries: each holds some MB."""
    d = np.frombuffer(d_bytes, dtype=float)
    reaches, s_touch, touch0 = path.travel(d, injection, k_c)
    s_inj = float(injection) * path.length
    s, h, taper = path.s, path.gap, path.taper
    t = np.where(touch0, 0.0, np.where(reaches, np.inf, np.nan))
    drift = np.where(touch0, 0.0, np.nan)
    go = np.nonzero(reaches & ~touch0 & np.isfinite(s_touch) & np.isfinite(d) & (d > 0))[0]
    fields = {}
    if go.size:
        dd, st = d[go], np.minimum(s_touch[go], s[-1])
        X = np.maximum(st - s_inj, 0.0)
        delta_end = dd - k_c * np.interp(st, s, h)
        slope = k_c * np.interp(st, s, taper)
        with np.errstate(divide="ignore", invalid="ignore"):
            x0 = np.where(slope > 0, delta_end / np.where(slope > 0, slope, 1.0), np.inf)
        if bond_per_h2 != 0.0:
            theta, c_cap = drive_key
            x0 = np.minimum(x0, _drive_doubling(path, dd, st, X, k_c, theta, c_cap, bond_per_h2))
        x0 = np.minimum(x0, 10.0 * np.maximum(X, 1e-300))       # far from the line: nearly uniform nodes
        ok = (delta_end > 0) & (X > 0) & (x0 > 0)
        fields.update(res0=np.where(X > 0, np.inf, 0.0), res_q0=np.where(X > 0, np.nan, 0.0), ok=ok)
        if ok.any():
            x0k, Xk, stk, dk = x0[ok, None], X[ok, None], st[ok, None], dd[ok, None]
            w = _QUAD_NODES[None, :]
            span = np.log1p(Xk / x0k)                         # u = ln(1 + x/x0) from 0 to span
            x = x0k * np.expm1(w * span)
            sj = stk - x
            hj = np.maximum(np.interp(sj, s, h), 1e-12 * path.length)
            hpj = np.interp(sj, s, taper)
            V = math.pi * dk ** 3 / 6.0
            with np.errstate(divide="ignore", invalid="ignore"):
                a = np.maximum(0.5 * dk, np.sqrt(V / (math.pi * hj)))
                phi = squeezed_fraction(dk, hj, k_c)
                hr = math.pi * a * hj ** 2 / V
                la = rho * sigma * hj / mu ** 2
            fields.update(x_shift=x + x0k, hj=hj, hpj=hpj, hr=hr, la=la, phi=np.asarray(phi, dtype=float),
                          span=span[:, 0])
    out = _MigrationNodes(t, drift, go, **fields)
    for v in vars(out).values():
        if isinstance(v, np.ndarray):
            v.flags.writeable = False
    return out


def _buoyancy_factor(rho, rho_gas, sigma, acceleration) -> float:
    """(rho_L - rho_G) a_m / sigma [1/m^2] (0 without acceleration); checks that rho_gas is given."""
    a = float(acceleration)
    if not math.isfinite(a):
        raise ValueError(f"buoyancy_acceleration must be finite, got {acceleration!r} m/s^2")
    if a == 0.0:
        return 0.0
    if rho_gas is None:
        raise ValueError("rho_gas is required with a buoyancy_acceleration: buoyancy is (rho_L - rho_G) a V, "
                         "the gas density is not dropped")
    rho_g = in_range("rho_gas", rho_gas, 0.0, math.inf, "kg/m^3")
    return (float(rho) - rho_g) * a / positive("sigma", sigma, "N/m")


def _net_drive(path, d, s_at, k_c, theta, c_cap, bond_per_h2):
    """Net drive c_cap cos(theta) h' phi + Bo_m at positions s_at for bubbles d (same shapes) [-]."""
    h = np.interp(s_at, path.s, path.gap)
    hp = np.interp(s_at, path.s, path.taper)
    phi = np.asarray(squeezed_fraction(d, h, k_c), dtype=float)
    return c_cap * math.cos(theta) * hp * phi + bond_per_h2 * h * h


def _drive_doubling(path, d, st, X, k_c, theta, c_cap, bond_per_h2):
    """Distance before the touching point over which the net drive doubles (inf where it does not grow)."""
    eps = 1e-4 * X
    with np.errstate(all="ignore"):
        end = _net_drive(path, d, st, k_c, theta, c_cap, bond_per_h2)
        back = _net_drive(path, d, st - eps, k_c, theta, c_cap, bond_per_h2)
        slope = (back - end) / eps
        return np.where((slope > 0) & (end > 0), end / np.where(slope > 0, slope, 1.0), np.inf)


def stall_diameter(path: TaperPath, *, injection=0.5, confinement_ratio=1.0, rho, sigma, contact_angle=0.0,
                   capillary_coefficient=2.0, rho_gas=None, buoyancy_acceleration=0.0) -> float:
    r"""Smallest bubble that buoyancy lets reach the open side [m] (the reach diameter when buoyancy helps).

    .. math:: d_\mathrm{arr} = \min\{d \ge d_\mathrm{reach} :\ c_\mathrm{cap}\cos\theta\, h'(s)\,\phi(s)
              + \frac{(\rho_L - \rho_G)\, a_m h(s)^2}{\sigma} > 0
              \ \text{for } s_\mathrm{inj} \le s \le s_\mathrm{touch}(d)\}

    A bubble between d_reach and d_arr is confined but stalls where buoyancy (a_m < 0) balances the
    fading capillary push: it never arrives (:func:`migration_time` gives inf).

    Parameters
    ----------
    path : TaperPath
    injection, confinement_ratio, contact_angle, capillary_coefficient : see :func:`migration_time`
    rho, rho_gas : float   liquid and gas densities [kg/m^3] (``rho_gas`` required when a_m != 0)
    sigma : float          surface tension [N/m]
    buoyancy_acceleration : float   a_m [m/s^2] (see :func:`migration_time`)

    Returns
    -------
    float   d_arr [m]; :meth:`TaperPath.reach_diameter` when a_m >= 0; 2 dist_open(s_inj) (touching at
    injection) when no smaller bubble gets through

    Notes
    -----
    Found by bisection on the sign of the net drive along the path (path points and the touching point);
    for a straight wedge the drive falls monotonically along the path, so its minimum is at the touching
    point and the bisection is exact to 1e-12.

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.geometry.sections import Groove
    >>> p = taper_path(Groove(math.radians(30.0), 0.004))
    >>> kw = dict(injection=0.25, rho=1000.0, rho_gas=1.2, sigma=0.02)
    >>> stall_diameter(p, **kw, buoyancy_acceleration=1.0) == p.reach_diameter(0.25)
    True
    >>> stall_diameter(p, **kw, buoyancy_acceleration=-1.0) > p.reach_diameter(0.25)
    True
    """
    k_c = positive("confinement_ratio", confinement_ratio)
    b = _buoyancy_factor(rho, rho_gas, sigma, buoyancy_acceleration)
    d_reach = path.reach_diameter(injection, k_c)
    if b >= 0.0:
        return d_reach
    s_inj = float(injection) * path.length
    hi = 2.0 * float(np.interp(s_inj, path.s, path.open_distance))
    c_cap = float(capillary_coefficient)
    theta = float(contact_angle)

    def arrives(d):
        reaches, s_touch, touch0 = path.travel(d, injection, k_c)
        if bool(touch0[0]):
            return True
        if not bool(reaches[0]):
            return False
        st = float(s_touch[0])
        inner = path.s[(path.s > s_inj) & (path.s < st)]
        nodes = np.concatenate([[s_inj], inner, [st]])
        return bool(np.all(_net_drive(path, np.full(nodes.shape, d), nodes, k_c, theta, c_cap, b) > 0))

    lo = d_reach
    if arrives(lo * (1.0 + 1e-12)) and lo > 0:
        return lo
    for _ in range(100):
        mid = 0.5 * (lo + hi)
        if arrives(mid):
            hi = mid
        else:
            lo = mid
        if hi - lo <= 1e-12 * hi:
            break
    return hi
