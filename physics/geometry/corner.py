r"""Liquid filaments in interior corners: meniscus geometry and axial flow resistance.

A wetting liquid in a straight interior corner (two plane walls meeting at an angle
:math:`2\alpha`, contact angle :math:`\theta`) forms a filament whose free surface, in the
cross-section, is a circular arc of radius R meeting each wall at :math:`\theta`. Such a meniscus
exists when :math:`\theta + \alpha < 90°` (Concus & Finn 1969). This module gives its closed-form
geometry and its viscous flow resistance :math:`\beta`, defined by

.. math:: \bar u = \frac{R^2}{\beta\,\mu}\left(-\frac{\mathrm{d}p}{\mathrm{d}z}\right)

(Ransohoff & Radke 1988), computed by solving the cross-section Stokes problem with
:mod:`lowgmap.physics.geometry.stokes` and served from a precomputed table (physics/data/corner_beta.npz).

Table: half-angle 1–89 deg, contact angle from 0 up to the Concus–Finn limit (including the flat
interface limit), interface shear-free ("free") or no-slip ("noslip"). It stores
:math:`g = \ln(\beta\,(b/R)^2\,\sin^2 2\alpha)` (b the wetted wall length) on a grid in
:math:`\alpha` and :math:`y = \theta/(90° - \alpha)`; g stays bounded up to the flat-interface
limit y = 1, where :math:`\beta` itself diverges like :math:`(R/b)^2`. Rebuild with
``python -m lowgmap.physics.geometry.corner --rebuild-table``.
"""
from __future__ import annotations

import functools
import math
import os
import sys

import numpy as np

from lowgmap.physics.validate import angle_deg_in_range, positive_array
from lowgmap.physics.properties.wetting import concus_finn_wets

__all__ = [
    "concus_finn_wets",
    "meniscus_area_factor",
    "wetted_wall_length",
    "bisector_height",
    "meniscus_pressure",
    "flow_resistance",
    "flow_resistance_direct",
    "build_beta_table",
    "meniscus_angles",
]

TABLE_PATH = os.path.join(os.path.dirname(os.path.dirname(__file__)), "data", "corner_beta.npz")
TABLE_HALF_ANGLE_DEG = (1.0, 89.0)        # tabulated range of the half-angle
_TABLE_LO, _TABLE_HI = (math.radians(v) for v in TABLE_HALF_ANGLE_DEG)
_INTERFACES = ("free", "noslip")
_HALF_PI = math.pi / 2


# ----------------------------------------------------------------------------------------------
# input checks
# ----------------------------------------------------------------------------------------------

def meniscus_angles(half_angle, contact_angle):
    """Check a corner's half-angle and contact angle for the corner-filament functions.

    Parameters
    ----------
    half_angle : float or array      corner half-angle alpha [rad], in (0, 90) deg
    contact_angle : float or array   contact angle theta [rad], in [0, 180] deg

    Returns
    -------
    (alpha, theta, ok, scalar)
        the angles as broadcast float arrays [rad], the mask of pairs that hold a meniscus
        (Concus–Finn, theta + alpha < 90 deg) and whether both inputs were scalars.

    Raises
    ------
    ValueError
        an angle outside its range, or a scalar pair that cannot hold a meniscus (in arrays such
        pairs are masked instead, so the caller can return NaN there).

    Examples
    --------
    >>> import math
    >>> a, t, ok, scalar = meniscus_angles(math.radians(30.0), [0.0, math.radians(70.0)])
    >>> ok.tolist(), scalar
    ([True, False], False)
    """
    if isinstance(half_angle, (float, int)) and isinstance(contact_angle, (float, int)) \
            and not isinstance(half_angle, bool) and not isinstance(contact_angle, bool) \
            and 0.0 < half_angle < _HALF_PI and 0.0 <= contact_angle <= math.pi:
        # fast path for plain numbers inside the allowed ranges (same results as below)
        a, t = np.float64(half_angle), np.float64(contact_angle)
        ok = a + t < _HALF_PI - 1e-12
        scalar = True
    else:
        a = angle_deg_in_range("half_angle", half_angle, 0.0, 90.0, lo_open=True, hi_open=True)
        t = angle_deg_in_range("contact_angle", contact_angle, 0.0, 180.0)
        a, t = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(t, dtype=float))
        ok = a + t < _HALF_PI - 1e-12
        scalar = a.ndim == 0
    if scalar and not ok:
        lim = 90.0 - math.degrees(float(a))
        raise ValueError(
            f"contact_angle must be < 90 deg - half_angle = {lim:.6g} deg for a corner meniscus "
            f"(Concus-Finn: contact_angle + half_angle < 90 deg), got {math.degrees(float(t)):.6g} deg")
    return a, t, ok, scalar


def _out(x, scalar):
    return float(x) if scalar else x


def _masked(fun, a, t, ok):
    out = np.full(a.shape, np.nan)
    out[ok] = fun(a[ok], t[ok])
    return out


# ----------------------------------------------------------------------------------------------
# closed-form meniscus geometry
# ----------------------------------------------------------------------------------------------

def meniscus_area_factor(half_angle, contact_angle):
    r"""Cross-section area of a corner filament divided by R² (the factor F).

    .. math:: F = \frac{A}{R^2} = \frac{\cos\theta\,\cos(\theta+\alpha)}{\sin\alpha}
              - \left(\frac{\pi}{2} - \theta - \alpha\right)

    Parameters
    ----------
    half_angle : float or array   corner half-angle alpha [rad], in (0, 90) deg
    contact_angle : float or array   contact angle theta [rad], in [0, 180) deg

    Returns
    -------
    float or array
        F [-]. In arrays, points with theta + alpha >= 90 deg give NaN; a scalar such point raises
        ValueError.

    Notes
    -----
    Circular-arc meniscus (zero gravity, or Bond number on R small; no axial curvature) in a
    corner with straight walls. Area between the two walls and the arc.

    References
    ----------
    P. Concus and R. Finn, PNAS 63(2):292-299, 1969. doi:10.1073/pnas.63.2.292.
    T. C. Ransohoff and C. J. Radke, J. Colloid Interface Sci. 121(2):392-401, 1988.
    doi:10.1016/0021-9797(88)90442-0

    Examples
    --------
    >>> import math
    >>> round(meniscus_area_factor(math.radians(45), 0.0), 6)   # 1 - pi/4
    0.214602
    """
    a, t, ok, scalar = meniscus_angles(half_angle, contact_angle)
    out = _masked(lambda a, t: np.cos(t) * np.cos(t + a) / np.sin(a) - (np.pi / 2 - t - a), a, t, ok)
    return _out(out, scalar)


def wetted_wall_length(R, half_angle, contact_angle):
    r"""Length of each wall wetted by a corner filament, from the corner to the contact line.

    .. math:: b = R\,\frac{\cos(\theta+\alpha)}{\sin\alpha}

    Parameters
    ----------
    R : float or array   meniscus radius of curvature [m], > 0
    half_angle : float or array   corner half-angle alpha [rad], in (0, 90) deg
    contact_angle : float or array   contact angle theta [rad]

    Returns
    -------
    float or array
        b [m] (NaN in arrays where theta + alpha >= 90 deg).

    References
    ----------
    T. C. Ransohoff and C. J. Radke, J. Colloid Interface Sci. 121(2):392-401, 1988.
    doi:10.1016/0021-9797(88)90442-0

    Examples
    --------
    >>> import math
    >>> round(wetted_wall_length(1e-3, math.radians(45), 0.0), 9)   # R cot(alpha)
    0.001
    """
    R = positive_array("R", R, "m")
    a, t, ok, scalar = meniscus_angles(half_angle, contact_angle)
    out = _masked(lambda a, t: np.cos(t + a) / np.sin(a), a, t, ok) * R
    return _out(out, scalar and R.ndim == 0)


def bisector_height(R, half_angle, contact_angle):
    r"""Distance along the corner bisector from the corner line to the free surface.

    .. math:: h = R\,\frac{\cos\theta - \sin\alpha}{\sin\alpha}

    Parameters
    ----------
    R : float or array   meniscus radius of curvature [m], > 0
    half_angle : float or array   corner half-angle alpha [rad], in (0, 90) deg
    contact_angle : float or array   contact angle theta [rad]

    Returns
    -------
    float or array
        h [m] (NaN in arrays where theta + alpha >= 90 deg).

    Notes
    -----
    The arc's centre lies on the bisector at R cos(theta)/sin(alpha) from the corner.

    References
    ----------
    M. M. Weislogel and S. Lichter, J. Fluid Mech. 373:349-378, 1998

    Examples
    --------
    >>> import math
    >>> round(bisector_height(1.0, math.radians(30), 0.0), 12)   # (1 - 1/2) / (1/2)
    1.0
    """
    R = positive_array("R", R, "m")
    a, t, ok, scalar = meniscus_angles(half_angle, contact_angle)
    out = _masked(lambda a, t: (np.cos(t) - np.sin(a)) / np.sin(a), a, t, ok) * R
    return _out(out, scalar and R.ndim == 0)


def meniscus_pressure(R, sigma):
    r"""Liquid pressure relative to the gas in a corner filament (Young–Laplace, one curvature).

    .. math:: p - p_\text{gas} = -\frac{\sigma}{R}

    Parameters
    ----------
    R : float or array   meniscus radius of curvature in the cross-section [m], > 0
    sigma : float or array   surface tension [N/m], > 0

    Returns
    -------
    float or array
        p - p_gas [Pa] (negative: the liquid is below the gas pressure).

    Notes
    -----
    The axial curvature of a slender filament is neglected.

    Examples
    --------
    >>> meniscus_pressure(1e-3, 0.072)
    -72.0
    """
    R = positive_array("R", R, "m")
    s = positive_array("sigma", sigma, "N/m")
    out = -s / R
    return float(out) if np.ndim(out) == 0 else out


# ----------------------------------------------------------------------------------------------
# flow resistance
# ----------------------------------------------------------------------------------------------

def _corner_domain(alpha, theta):
    """Liquid cross-section scaled on the wetted wall length b = 1: apex at the origin, bisector on +x.

    Returns (domain, R/b); R/b is inf for the flat-interface limit theta + alpha = 90 deg.
    """
    from lowgmap.physics.geometry.stokes import Arc, Domain, Line

    ca, sa = math.cos(alpha), math.sin(alpha)
    c1, c2 = (ca, -sa), (ca, sa)
    eps = math.pi / 2 - alpha - theta
    if eps <= 1e-9:
        mid, r = Line(c1, c2, "free"), math.inf
    else:
        r = sa / math.cos(theta + alpha)
        mid = Arc(c1, c2, (r * math.cos(theta) / sa, 0.0), "free")
    return Domain([Line((0.0, 0.0), c1, "wall"), mid, Line(c2, (0.0, 0.0), "wall")]), r


def _beta_b(alpha, theta, interface, mesh_size):
    """beta (b/R)^2 = A_b / flux_b on the b = 1 section, and the mesh size used."""
    from lowgmap.physics.geometry.stokes import solve_poisson

    dom, _ = _corner_domain(alpha, theta)
    sol = solve_poisson(dom, interface=interface, h=mesh_size * math.sqrt(dom.area))
    return sol.area / sol.flux, sol


def flow_resistance_direct(half_angle, contact_angle, interface="free", mesh_size=0.06):
    r"""Corner flow resistance :math:`\beta` by solving the cross-section (finite elements).

    .. math::

        \bar u = \frac{R^2}{\beta\mu}\Big(-\frac{\mathrm{d}p}{\mathrm{d}z}\Big), \qquad
        \beta = \frac{F R^2}{\int w\,\mathrm{d}A}, \quad -\nabla^2 w = 1

    Parameters
    ----------
    half_angle : float   corner half-angle alpha [rad], in (0, 90) deg
    contact_angle : float   contact angle theta [rad], theta + alpha < 90 deg
    interface : {"free", "noslip"}   shear-free (clean) or no-slip liquid/gas interface
    mesh_size : float   largest element size relative to sqrt(filament area); default 0.06
        (mesh error below 1e-4 relative, see physics/manual/corner.md)

    Returns
    -------
    float
        beta [-]

    Notes
    -----
    Scalar only (about 0.05-0.3 s a call). Walls no-slip, straight corner, circular-arc meniscus,
    creeping fully developed flow. Use :func:`flow_resistance` for fast (tabulated) evaluation.

    References
    ----------
    T. C. Ransohoff and C. J. Radke, J. Colloid Interface Sci. 121(2):392-401, 1988.
    doi:10.1016/0021-9797(88)90442-0

    Examples
    --------
    >>> import math
    >>> b = flow_resistance_direct(math.radians(45), 0.0)
    >>> 91.0 < b < 92.0
    True
    """
    if np.ndim(half_angle) or np.ndim(contact_angle):
        raise TypeError("flow_resistance_direct takes scalar angles; use flow_resistance for arrays")
    a, t, _, _ = meniscus_angles(half_angle, contact_angle)
    if interface not in _INTERFACES:
        raise ValueError(f"interface must be one of {_INTERFACES}, got {interface!r}")
    if not (isinstance(mesh_size, (int, float)) and 0 < mesh_size <= 0.5):
        raise ValueError(f"mesh_size must be within (0, 0.5], got {mesh_size!r}")
    a, t = float(a), float(t)
    bb, _ = _beta_b(a, t, interface, mesh_size)
    r_over_b = math.sin(a) / math.cos(t + a)
    return bb * r_over_b ** 2


def _table_value(bb, alpha):
    return math.log(bb * math.sin(2 * alpha) ** 2)


def build_beta_table(path=TABLE_PATH, alpha_deg=None, y=None, mesh_size=0.04, check_mesh_size=0.02,
                     verbose=False):
    """Compute the flow-resistance table by direct solves and save it as a .npz file.

    Parameters
    ----------
    path : str   output file (default physics/data/corner_beta.npz)
    alpha_deg : array, optional   half-angle grid [deg]; default 1..89 deg (see code)
    y : array, optional   grid of theta/(90 deg - alpha) in [0, 1]; default 0..1 (see code)
    mesh_size : float   element size relative to sqrt(area) for the tabulated values
    check_mesh_size : float   finer mesh for the convergence check (every 4th node in each
        direction); the largest relative change is stored as ``mesh_change``
    verbose : bool   print progress

    Returns
    -------
    dict   the arrays written
    """
    if alpha_deg is None:
        alpha_deg = np.concatenate([[1.0, 1.5, 2.0, 3.0, 4.0], np.arange(5.0, 86.0, 2.5), [86.5, 88.0, 89.0]])
    if y is None:
        y = np.concatenate([np.linspace(0.0, 0.9, 19), [0.95, 1.0]])
    alpha_deg = np.asarray(alpha_deg, float)
    y = np.asarray(y, float)
    g = {k: np.empty((len(alpha_deg), len(y))) for k in _INTERFACES}
    worst = 0.0
    for i, ad in enumerate(alpha_deg):
        a = math.radians(ad)
        for j, yy in enumerate(y):
            t = yy * (math.pi / 2 - a)
            for k in _INTERFACES:
                bb, _ = _beta_b(a, t, k, mesh_size)
                g[k][i, j] = _table_value(bb, a)
                if i % 4 == 0 and j % 4 == 0:
                    bf, _ = _beta_b(a, t, k, check_mesh_size)
                    worst = max(worst, abs(bb / bf - 1.0))
        if verbose:
            print(f"alpha = {ad:5.1f} deg done; largest mesh change so far {worst:.2e}", flush=True)
    data = dict(alpha_deg=alpha_deg, y=y, g_free=g["free"], g_noslip=g["noslip"],
                mesh_size=np.float64(mesh_size), check_mesh_size=np.float64(check_mesh_size),
                mesh_change=np.float64(worst),
                description=np.array("g = ln(beta (b/R)^2 sin(2 alpha)^2), b wetted wall length; "
                                     "y = theta/(pi/2 - alpha); beta from lowgmap.physics.geometry.stokes finite elements"))
    if path:
        os.makedirs(os.path.dirname(os.path.abspath(path)), exist_ok=True)
        np.savez_compressed(path, **data)
    return data


@functools.lru_cache(maxsize=1)
def _splines():
    from scipy.interpolate import RectBivariateSpline

    with np.load(TABLE_PATH) as d:
        ad, y = d["alpha_deg"], d["y"]
        return {k: RectBivariateSpline(np.radians(ad), y, d[f"g_{k}"], kx=3, ky=3, s=0)
                for k in _INTERFACES}


def flow_resistance(half_angle, contact_angle, interface="free"):
    r"""Corner flow resistance :math:`\beta` (tabulated finite-element solutions, interpolated).

    .. math:: \bar u = \frac{R^2}{\beta\,\mu}\left(-\frac{\mathrm{d}p}{\mathrm{d}z}\right)

    Parameters
    ----------
    half_angle : float or array   corner half-angle alpha [rad], within [1, 89] deg
    contact_angle : float or array   contact angle theta [rad], theta + alpha < 90 deg
    interface : {"free", "noslip"}   shear-free (clean) or no-slip liquid/gas interface

    Returns
    -------
    float or array
        beta [-]. In arrays, points with theta + alpha >= 90 deg give NaN; a scalar such point
        raises ValueError.

    Notes
    -----
    Bicubic spline of ln(beta (b/R)^2 sin^2(2 alpha)) over half-angle and theta/(90 deg - alpha),
    from physics/data/corner_beta.npz (built by :func:`build_beta_table`). Measured against
    direct solves at 276 off-grid points: largest interpolation error 1e-5 relative
    (physics/manual/corner.md); the finite-element values themselves are mesh-converged to 1e-5.
    Assumptions as in :func:`flow_resistance_direct`. The flow rate of one filament is
    Q = F R^4 (-dp/dz) / (beta mu).

    References
    ----------
    T. C. Ransohoff and C. J. Radke, J. Colloid Interface Sci. 121(2):392-401, 1988.
    doi:10.1016/0021-9797(88)90442-0

    Examples
    --------
    >>> import math
    >>> round(flow_resistance(math.radians(45), 0.0), 1)
    91.4
    """
    a, t, ok, scalar = meniscus_angles(half_angle, contact_angle)
    if interface not in _INTERFACES:
        raise ValueError(f"interface must be one of {_INTERFACES}, got {interface!r}")
    spl = _splines()[interface]
    if scalar and _TABLE_LO <= a <= _TABLE_HI:
        # fast path: one point inside the table (ok is True here: meniscus_angles raised otherwise)
        y = t / (_HALF_PI - a)
        g = float(spl.ev(a, y)[()]) if y <= 1.0 else math.nan
        s2a = math.sin(2.0 * a)
        rb = math.sin(a) / math.cos(t + a)
        return math.exp(g) / (s2a * s2a) * rb * rb
    lo, hi = TABLE_HALF_ANGLE_DEG
    angle_deg_in_range("half_angle", a, lo, hi)
    out = np.full(a.shape, np.nan)
    aa, tt = a[ok], t[ok]
    yy = tt / (np.pi / 2 - aa)
    g = spl.ev(aa, yy)
    r_over_b = np.sin(aa) / np.cos(tt + aa)
    out[ok] = np.exp(g) / np.sin(2 * aa) ** 2 * r_over_b ** 2
    return _out(out, scalar)


def _main(argv=None):
    import argparse

    p = argparse.ArgumentParser(prog="python -m lowgmap.physics.geometry.corner",
                                description="Corner flow-resistance table tools.")
    p.add_argument("--rebuild-table", action="store_true", help=f"recompute {TABLE_PATH}")
    p.add_argument("--output", default=TABLE_PATH, help="output path for --rebuild-table")
    args = p.parse_args(argv)
    if not args.rebuild_table:
        p.print_help()
        return 0
    d = build_beta_table(args.output, verbose=True)
    print(f"wrote {args.output}: {d['g_free'].shape} grid, mesh change {float(d['mesh_change']):.2e}")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(_main())
