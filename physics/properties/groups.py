"""Dimensionless groups of two-phase conduit flow, and their evaluation for a case.

Plain formula functions (SI in, dimensionless out, scalars or numpy arrays), plus a small table
:data:`GROUPS` that evaluates a group for a :class:`~lowgmap.physics.case.Case` at flow rates (Q_L, Q_G).
Boundary models state their validity ranges in terms of these group names
(:class:`lowgmap.physics.models.boundary.Validity`).

Length scale: every group evaluated for a case uses the section's hydraulic diameter
D = 4 A / P (``case.section.hydraulic_diameter``); for a circular tube this is the diameter.
Superficial velocities are U_SL = Q_L / A and U_SG = Q_G / A with A the flow area.

In vectorised evaluation a flow rate that is not finite or not > 0 gives NaN.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

__all__ = [
    "superficial_velocity", "reynolds", "weber", "suratman", "eotvos", "capillary", "ohnesorge",
    "Group", "GROUPS", "group_names", "evaluate_group", "conduit_diameter", "positive_flows",
]


def _arr(x):
    return np.asarray(x, dtype=float)


def _out(x):
    return float(x) if np.ndim(x) == 0 else x


def superficial_velocity(q, area):
    r"""Superficial velocity of one phase: its volumetric flow rate over the whole flow area.

    .. math:: U_S = Q / A

    Parameters
    ----------
    q : float or array   volumetric flow rate of the phase [m^3/s]
    area : float         flow area of the conduit [m^2]

    Returns
    -------
    float or array   superficial velocity [m/s]

    Examples
    --------
    >>> round(superficial_velocity(1e-4, 1e-4), 12)
    1.0
    """
    return _out(_arr(q) / _arr(area))


def reynolds(rho, u, length, mu):
    r"""Reynolds number.

    .. math:: Re = \rho U L / \mu

    Parameters
    ----------
    rho : float or array   density [kg/m^3]
    u : float or array     velocity (superficial velocity for Re_SL, Re_SG) [m/s]
    length : float         length scale (hydraulic diameter for ducts) [m]
    mu : float             dynamic viscosity [Pa s]

    Returns
    -------
    float or array   Re [-]

    Examples
    --------
    >>> round(reynolds(1000.0, 1.0, 0.01, 1e-3))
    10000
    """
    return _out(_arr(rho) * _arr(u) * _arr(length) / _arr(mu))


def weber(rho, u, length, sigma):
    r"""Weber number (inertia over surface tension).

    .. math:: We = \rho U^2 L / \sigma

    Parameters
    ----------
    rho : float or array   density [kg/m^3]
    u : float or array     velocity (superficial velocity for We_SL, We_SG) [m/s]
    length : float         length scale [m]
    sigma : float          surface tension [N/m]

    Returns
    -------
    float or array   We [-]

    Notes
    -----
    The superficial gas Weber number We_SG = rho_G U_SG^2 D / sigma is the coordinate of the
    zones of Zhao & Rezkallah (1993).

    Examples
    --------
    >>> round(weber(1.205, 2.1801, 0.0127, 0.072736), 3)
    1.0
    """
    return _out(_arr(rho) * _arr(u) ** 2 * _arr(length) / _arr(sigma))


def suratman(rho, sigma, length, mu):
    r"""Suratman number (surface tension and inertia over viscosity); Laplace number.

    .. math:: Su = \rho \sigma L / \mu^2 = 1 / Oh^2

    Parameters
    ----------
    rho : float     liquid density [kg/m^3]
    sigma : float   surface tension [N/m]
    length : float  length scale (tube diameter) [m]
    mu : float      liquid dynamic viscosity [Pa s]

    Returns
    -------
    float or array   Su [-]

    Examples
    --------
    >>> f"{suratman(998.207, 0.07274, 0.0127, 1.0016e-3):.3e}"
    '9.192e+05'
    """
    return _out(_arr(rho) * _arr(sigma) * _arr(length) / _arr(mu) ** 2)


def eotvos(delta_rho, g, length, sigma):
    r"""Eötvös number (gravity over surface tension), also called Bond number.

    .. math:: Eo = \Delta\rho\, g\, L^2 / \sigma

    Parameters
    ----------
    delta_rho : float   density difference rho_L - rho_G [kg/m^3]
    g : float           residual acceleration [m/s^2]
    length : float      length scale (tube diameter) [m]
    sigma : float       surface tension [N/m]

    Returns
    -------
    float or array   Eo [-]

    Notes
    -----
    Brauner (1990) defines "microgravity" two-phase systems, in which stratification is absent,
    by Eo < 1.

    Examples
    --------
    Water, L = 1 cm, at standard gravity (check value [calc] from the definition above):

    >>> round(eotvos(998.2, 9.80665, 0.01, 0.07274), 2)
    13.46
    """
    return _out(_arr(delta_rho) * _arr(g) * _arr(length) ** 2 / _arr(sigma))


def capillary(mu, u, sigma):
    r"""Capillary number (viscous over surface tension).

    .. math:: Ca = \mu U / \sigma

    Parameters
    ----------
    mu : float      dynamic viscosity [Pa s]
    u : float or array   velocity [m/s]
    sigma : float   surface tension [N/m]

    Returns
    -------
    float or array   Ca [-]

    Examples
    --------
    >>> round(capillary(1e-3, 0.072, 0.072), 6)
    0.001
    """
    return _out(_arr(mu) * _arr(u) / _arr(sigma))


def ohnesorge(mu, rho, sigma, length):
    r"""Ohnesorge number (viscous over inertia-capillary).

    .. math:: Oh = \mu / \sqrt{\rho \sigma L} = Su^{-1/2}

    Parameters
    ----------
    mu : float      dynamic viscosity [Pa s]
    rho : float     density [kg/m^3]
    sigma : float   surface tension [N/m]
    length : float  length scale [m]

    Returns
    -------
    float or array   Oh [-]

    Examples
    --------
    >>> round(ohnesorge(1e-3, 1000.0, 0.1, 0.01), 6)
    0.001
    """
    return _out(_arr(mu) / np.sqrt(_arr(rho) * _arr(sigma) * _arr(length)))


# --------------------------------------------------------------------------------------------
# Groups of a case at (Q_L, Q_G)


def conduit_diameter(case) -> float:
    """Length scale of the groups for a case: the hydraulic diameter 4A/P of its section [m]."""
    return float(case.section.hydraulic_diameter)


def positive_flows(ql, qg):
    """Broadcast ``ql``, ``qg`` to float arrays; entries that are not finite and > 0 become NaN."""
    ql = _arr(ql)
    qg = _arr(qg)
    ql, qg = np.broadcast_arrays(ql, qg)
    bad = ~(np.isfinite(ql) & np.isfinite(qg) & (ql > 0) & (qg > 0))
    if np.any(bad):
        ql = np.where(bad, np.nan, ql)
        qg = np.where(bad, np.nan, qg)
    return ql, qg


def _re_sl(case, ql, qg):
    f, s = case.fluid, case.section
    return reynolds(f.rho_l, ql / s.area, conduit_diameter(case), f.mu_l) + 0.0 * qg


def _re_sg(case, ql, qg):
    f, s = case.fluid, case.section
    return reynolds(f.rho_g, qg / s.area, conduit_diameter(case), f.mu_g) + 0.0 * ql


def _we_sl(case, ql, qg):
    f, s = case.fluid, case.section
    return weber(f.rho_l, ql / s.area, conduit_diameter(case), f.sigma) + 0.0 * qg


def _we_sg(case, ql, qg):
    f, s = case.fluid, case.section
    return weber(f.rho_g, qg / s.area, conduit_diameter(case), f.sigma) + 0.0 * ql


def _su(case, ql, qg):
    f = case.fluid
    return suratman(f.rho_l, f.sigma, conduit_diameter(case), f.mu_l) + 0.0 * (ql + qg)


def _eo(case, ql, qg):
    f = case.fluid
    return eotvos(f.rho_l - f.rho_g, case.g, conduit_diameter(case), f.sigma) + 0.0 * (ql + qg)


@dataclass(frozen=True)
class Group:
    """A dimensionless group evaluated for a case at (Q_L, Q_G).

    ``point`` is True when the group depends on the flow rates (False: a property of the case).
    """

    name: str
    symbol: str
    description: str
    point: bool
    func: Callable


#: Dimensionless groups by name (the names that :class:`lowgmap.physics.models.boundary.Validity` uses).
GROUPS: dict[str, Group] = {g.name: g for g in (
    Group("re_sl", "Re_SL", "superficial liquid Reynolds number rho_L U_SL D / mu_L", True, _re_sl),
    Group("re_sg", "Re_SG", "superficial gas Reynolds number rho_G U_SG D / mu_G", True, _re_sg),
    Group("we_sl", "We_SL", "superficial liquid Weber number rho_L U_SL^2 D / sigma", True, _we_sl),
    Group("we_sg", "We_SG", "superficial gas Weber number rho_G U_SG^2 D / sigma", True, _we_sg),
    Group("flow_ratio", "Q_G/Q_L", "gas-to-liquid volumetric flow ratio", True,
          lambda case, ql, qg: qg / ql),
    Group("suratman", "Su", "Suratman number rho_L sigma D / mu_L^2", False, _su),
    Group("eotvos", "Eo", "Eötvös number (rho_L - rho_G) g D^2 / sigma", False, _eo),
    Group("density_ratio", "rho_G/rho_L", "gas-to-liquid density ratio", False,
          lambda case, ql, qg: case.fluid.rho_g / case.fluid.rho_l + 0.0 * (ql + qg)),
    Group("viscosity_ratio", "mu_G/mu_L", "gas-to-liquid viscosity ratio", False,
          lambda case, ql, qg: case.fluid.mu_g / case.fluid.mu_l + 0.0 * (ql + qg)),
)}


def group_names() -> list[str]:
    """Names of the groups in :data:`GROUPS`, sorted."""
    return sorted(GROUPS)


def evaluate_group(name: str, case, ql, qg):
    """Value of group ``name`` for ``case`` at flow rates ``ql``, ``qg`` [m^3/s].

    Returns an array broadcast over ``ql`` and ``qg`` (a float for scalar input). Points whose flow
    rates are not finite and > 0 give NaN.

    Examples
    --------
    >>> from types import SimpleNamespace as NS
    >>> case = NS(fluid=NS(rho_l=1000.0, mu_l=1e-3, sigma=0.07, rho_g=1.2, mu_g=1.8e-5),
    ...           section=NS(area=1e-4, hydraulic_diameter=0.01), g=0.0)
    >>> round(evaluate_group("re_sl", case, 1e-4, 1e-4))
    10000
    """
    try:
        group = GROUPS[name]
    except KeyError:
        raise ValueError(f"unknown dimensionless group {name!r}; known groups: {', '.join(group_names())}") from None
    ql, qg = positive_flows(ql, qg)
    return _out(np.asarray(group.func(case, ql, qg), dtype=float))
