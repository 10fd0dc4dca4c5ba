r"""Capillary wicking of a liquid filament along an interior corner (lubrication model).

Model (Weislogel & Lichter 1998, written here in the meniscus radius R(z, t)): a slender filament
in a corner of half-angle :math:`\alpha` with contact angle :math:`\theta` has a circular-arc
section of area :math:`A = F R^2` (:func:`lowgmap.physics.geometry.corner.meniscus_area_factor`), liquid pressure
:math:`p = p_\text{gas} - \sigma/R` and mean velocity
:math:`\bar u = -R^2\,\partial_z p/(\beta\mu)` (:func:`lowgmap.physics.geometry.corner.flow_resistance`). Mass
conservation :math:`\partial_t A + \partial_z(A\bar u) = 0` gives the nonlinear diffusion equation

.. math:: \frac{\partial R^2}{\partial t} = \frac{\sigma}{\beta\mu}
          \frac{\partial}{\partial z}\Big(R^2 \frac{\partial R}{\partial z}\Big)
          = \frac{\sigma}{3\beta\mu}\frac{\partial^2 R^3}{\partial z^2}.

(a) Constant radius :math:`R_0` at the inlet z = 0 (a reservoir at fixed pressure), dry corner ahead:
:math:`R = R_0 f(\eta)`, :math:`\eta = z/\sqrt{\sigma R_0 t/(\beta\mu)}`,
:math:`(f^2 f')' + \eta f f' = 0`, :math:`f(0) = 1`, f = 0 at the tip :math:`\eta_a`:

.. math:: z_\text{tip} = \eta_a \sqrt{\frac{\sigma R_0 t}{\beta\mu}}, \qquad \eta_a = 1.70211

(b) Constant inflow Q into the corner: :math:`R = R_s(t) f(\eta)`, :math:`\eta = z/\ell(t)`,
:math:`\ell = (\sigma/(\beta\mu))^{2/5} (Q/F)^{1/5} t^{3/5}`, :math:`R_s^2 = Q t/(F\ell)`,
:math:`(f^2 f')' = \tfrac{2}{5} f^2 - \tfrac{6}{5}\eta f f'`, :math:`f^2 f'(0) = -1`:

.. math:: z_\text{tip} = \eta_b \Big(\frac{\sigma}{\beta\mu}\Big)^{2/5}
          \Big(\frac{Q}{F}\Big)^{1/5} t^{3/5}, \qquad \eta_b = 1.63285

The derivation, the numerical solution of the two similarity equations (shooting from the tip,
where f is linear) and how the coefficients map to the paper's are in physics/manual/corner.md.
"""
from __future__ import annotations

import functools

import numpy as np

from lowgmap.physics.geometry.corner import flow_resistance, meniscus_angles, meniscus_area_factor
from lowgmap.physics.validate import positive_array

__all__ = ["wicking_front", "time_to_wick", "wicking_front_constant_inflow"]


@functools.lru_cache(maxsize=2)
def _similarity(case: str):
    """Solve the similarity equation of ``case`` ("height" or "inflow").

    Returns (eta_tip, eta, f) with the profile f(eta) on [0, eta_tip] (f(0) = 1 for "height";
    f^2 f'(0) = -1 for "inflow").

    The equation is integrated from a tip placed at eta = 1, starting from the two-term expansion
    f = a s + b s^2 (s = 1 - eta); a rescaling f -> lam^2 f(eta/lam), which leaves both equations
    unchanged, then meets the inlet condition.
    """
    from scipy.integrate import solve_ivp

    if case == "height":
        a, b = 0.5, -1.0 / 6.0

        def rhs(eta, y):
            f, fp = y
            return [fp, (-eta * fp - 2.0 * fp * fp) / f]
    elif case == "inflow":
        a, b = 0.6, -2.0 / 15.0

        def rhs(eta, y):
            f, fp = y
            return [fp, (0.4 * f - 1.2 * eta * fp - 2.0 * fp * fp) / f]
    else:  # pragma: no cover
        raise ValueError(case)
    s0 = 1e-5
    sol = solve_ivp(rhs, [1.0 - s0, 0.0], [a * s0 + b * s0 * s0, -(a + 2.0 * b * s0)],
                    method="Radau", rtol=1e-12, atol=1e-14, dense_output=True)
    f0, fp0 = sol.y[:, -1]
    lam = f0 ** -0.5 if case == "height" else (-(f0 * f0 * fp0)) ** -0.2
    eta = np.linspace(0.0, 1.0, 401)
    g = np.where(eta < 1.0 - s0, sol.sol(np.minimum(eta, 1.0 - s0))[0], a * (1.0 - eta))
    return float(lam), eta * lam, lam * lam * g


def _setup(half_angle, contact_angle, interface):
    a, t, ok, scalar = meniscus_angles(half_angle, contact_angle)
    beta = flow_resistance(a, t, interface=interface)
    return np.asarray(beta, dtype=float), scalar


def _result(x, *scalars):
    return float(x) if all(scalars) and np.ndim(x) == 0 else x


def wicking_front(t, half_angle, contact_angle, sigma, mu, inlet_radius, interface="free"):
    r"""Front position of a liquid wicking along a corner from an inlet held at a fixed radius.

    .. math:: z_\text{tip} = \eta_a \sqrt{\frac{\sigma R_0\, t}{\beta(\alpha,\theta)\,\mu}},
              \qquad \eta_a = 1.70211

    Parameters
    ----------
    t : float or array   time since the liquid reached the corner [s], >= 0
    half_angle : float or array   corner half-angle alpha [rad], within [1, 89] deg
    contact_angle : float or array   contact angle theta [rad], theta + alpha < 90 deg
    sigma : float   surface tension [N/m]
    mu : float   liquid dynamic viscosity [Pa s]
    inlet_radius : float   meniscus radius R0 held at the inlet z = 0 [m]
    interface : {"free", "noslip"}   liquid/gas interface condition for beta

    Returns
    -------
    float or array
        z_tip [m]. In arrays, angle pairs with theta + alpha >= 90 deg give NaN.

    Notes
    -----
    Lubrication (slender filament, |dR/dz| << 1), creeping flow, zero gravity, static contact
    angle along the whole filament, dry corner ahead of the front, inlet radius fixed from t = 0.
    Early times, when the filament is not yet slender (z_tip of a few R0), are outside the model.

    References
    ----------
    M. M. Weislogel and S. Lichter, "Capillary flow in an interior corner", J. Fluid Mech.
    373:349-378, 1998

    Examples
    --------
    >>> import math
    >>> z = wicking_front(1.0, math.radians(45), 0.0, 0.02, 1e-3, 1e-3)
    >>> round(z, 4)   # 1.70211 * sqrt(0.02 * 1e-3 * 1 / (91.37 * 1e-3)) [m]
    0.0252
    """
    tt = np.asarray(t, dtype=float)
    if not np.all(np.isfinite(tt)) or np.any(tt < 0):
        raise ValueError(f"t must be finite and >= 0 [s], got {t!r}")
    s = positive_array("sigma", sigma, "N/m")
    m = positive_array("mu", mu, "Pa s")
    r0 = positive_array("inlet_radius", inlet_radius, "m")
    beta, scalar = _setup(half_angle, contact_angle, interface)
    eta_a = _similarity("height")[0]
    z = eta_a * np.sqrt(s * r0 * tt / (beta * m))
    return _result(z, scalar, tt.ndim == 0, s.ndim == 0, m.ndim == 0, r0.ndim == 0)


def time_to_wick(length, half_angle, contact_angle, sigma, mu, inlet_radius, interface="free"):
    r"""Time for the wicking front (inlet at fixed radius R0) to travel ``length`` along a corner.

    .. math:: t = \frac{\beta\mu}{\sigma R_0}\Big(\frac{L}{\eta_a}\Big)^2, \qquad \eta_a = 1.70211

    Parameters
    ----------
    length : float or array   distance along the corner [m], >= 0
    half_angle, contact_angle, sigma, mu, inlet_radius, interface
        as in :func:`wicking_front`

    Returns
    -------
    float or array
        t [s]

    Notes
    -----
    Inverse of :func:`wicking_front`; same assumptions.

    References
    ----------
    M. M. Weislogel and S. Lichter, J. Fluid Mech. 373:349-378, 1998

    Examples
    --------
    >>> import math
    >>> t = time_to_wick(0.1, math.radians(30), 0.0, 0.02, 1e-3, 1e-3)
    >>> z = wicking_front(t, math.radians(30), 0.0, 0.02, 1e-3, 1e-3)
    >>> round(z, 12)
    0.1
    """
    L = np.asarray(length, dtype=float)
    if not np.all(np.isfinite(L)) or np.any(L < 0):
        raise ValueError(f"length must be finite and >= 0 [m], got {length!r}")
    s = positive_array("sigma", sigma, "N/m")
    m = positive_array("mu", mu, "Pa s")
    r0 = positive_array("inlet_radius", inlet_radius, "m")
    beta, scalar = _setup(half_angle, contact_angle, interface)
    eta_a = _similarity("height")[0]
    t = beta * m / (s * r0) * (L / eta_a) ** 2
    return _result(t, scalar, L.ndim == 0, s.ndim == 0, m.ndim == 0, r0.ndim == 0)


def wicking_front_constant_inflow(t, half_angle, contact_angle, sigma, mu, Q, interface="free"):
    r"""Front position of a corner filament fed at a constant volume flow rate.

    .. math:: z_\text{tip} = \eta_b \Big(\frac{\sigma}{\beta\mu}\Big)^{2/5}
              \Big(\frac{Q}{F}\Big)^{1/5} t^{3/5}, \qquad \eta_b = 1.63285

    Parameters
    ----------
    t : float or array   time since the inflow started [s], >= 0
    half_angle : float or array   corner half-angle alpha [rad], within [1, 89] deg
    contact_angle : float or array   contact angle theta [rad], theta + alpha < 90 deg
    sigma : float   surface tension [N/m]
    mu : float   liquid dynamic viscosity [Pa s]
    Q : float   volume flow rate into this one corner [m³/s]
    interface : {"free", "noslip"}   liquid/gas interface condition for beta

    Returns
    -------
    float or array
        z_tip [m]. In arrays, angle pairs with theta + alpha >= 90 deg give NaN.

    Notes
    -----
    Same assumptions as :func:`wicking_front`; the inlet radius grows as t^(1/5).
    F is the area factor of :func:`lowgmap.physics.geometry.corner.meniscus_area_factor`.

    References
    ----------
    M. M. Weislogel and S. Lichter, J. Fluid Mech. 373:349-378, 1998

    Examples
    --------
    >>> import math
    >>> z1 = wicking_front_constant_inflow(1.0, math.radians(30), 0.0, 0.02, 1e-3, 1e-9)
    >>> z2 = wicking_front_constant_inflow(2.0, math.radians(30), 0.0, 0.02, 1e-3, 1e-9)
    >>> round(math.log(z2 / z1, 2), 12)
    0.6
    """
    tt = np.asarray(t, dtype=float)
    if not np.all(np.isfinite(tt)) or np.any(tt < 0):
        raise ValueError(f"t must be finite and >= 0 [s], got {t!r}")
    s = positive_array("sigma", sigma, "N/m")
    m = positive_array("mu", mu, "Pa s")
    q = positive_array("Q", Q, "m^3/s")
    beta, scalar = _setup(half_angle, contact_angle, interface)
    F = np.asarray(meniscus_area_factor(half_angle, contact_angle), dtype=float)
    eta_b = _similarity("inflow")[0]
    z = eta_b * (s / (beta * m)) ** 0.4 * (q / F) ** 0.2 * tt ** 0.6
    return _result(z, scalar, tt.ndim == 0, s.ndim == 0, m.ndim == 0, q.ndim == 0)
