"""Gravity levels by name, the capillary length, and where capillary models of open conduits stop applying.

Residual acceleration is always an input of lowgmap (``Case.g`` [m/s^2]); this module gives the named
levels an engineer meets between orbit and the ground test, each with its source, and the Bond numbers
that say whether buoyancy can still be neglected on the scale of a corner or an open channel.

The named levels are mean surface values: the local value on a planet varies with latitude and
altitude by a fraction of a per cent, far less than the other uncertainties of a regime chart.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lowgmap.physics.case import LUNAR_SURFACE_GRAVITY, MARTIAN_SURFACE_GRAVITY, STANDARD_GRAVITY, Orientation
from lowgmap.physics.validate import non_negative, positive

__all__ = [
    "GravityLevel", "GROUND", "LUNAR_SURFACE", "MARTIAN_SURFACE", "GRAVITY_LEVELS", "gravity_level",
    "capillary_length", "OpenConduitGravityCheck", "open_conduit_gravity_check", "BOND_LIMIT",
]


@dataclass(frozen=True)
class GravityLevel:
    """A named residual acceleration: ``value`` [m/s^2], with the ``source`` of the number."""

    name: str
    value: float
    source: str

    @property
    def g_over_g0(self) -> float:
        """The level as a multiple of standard gravity g0 [-]."""
        return self.value / STANDARD_GRAVITY


#: Standard gravity g0 = 9.80665 m/s^2, exact by definition (3rd CGPM, 1901), the level of a ground test.
GROUND = GravityLevel("ground", STANDARD_GRAVITY, "standard gravity, exact by definition (3rd CGPM, 1901)")
#: Mean surface gravity of the Moon, 1.62 m/s^2 (about 0.165 g0).
LUNAR_SURFACE = GravityLevel("lunar surface", LUNAR_SURFACE_GRAVITY,
                             "NASA Goddard Space Flight Center, Moon Fact Sheet (D. R. Williams): surface "
                             "gravity 1.62 m/s^2")
#: Mean surface gravity of Mars, 3.71 m/s^2 (about 0.378 g0).
MARTIAN_SURFACE = GravityLevel("Martian surface", MARTIAN_SURFACE_GRAVITY,
                               "NASA Goddard Space Flight Center, Mars Fact Sheet (D. R. Williams): surface "
                               "gravity 3.71 m/s^2")

#: Named levels by lower-case name.
GRAVITY_LEVELS: dict[str, GravityLevel] = {lv.name.lower(): lv for lv in (GROUND, LUNAR_SURFACE, MARTIAN_SURFACE)}


def gravity_level(name: str) -> GravityLevel:
    """The named gravity level ``name`` (case-insensitive); ValueError listing the known names otherwise.

    Examples
    --------
    >>> gravity_level("Lunar surface").value
    1.62
    >>> round(gravity_level("martian surface").g_over_g0, 3)
    0.378
    """
    key = str(name).strip().lower()
    if key not in GRAVITY_LEVELS:
        known = ", ".join(repr(lv.name) for lv in GRAVITY_LEVELS.values())
        raise ValueError(f"gravity level must be one of {known}, got {name!r}")
    return GRAVITY_LEVELS[key]


def capillary_length(sigma, delta_rho, g):
    r"""Capillary length: the size at which surface tension and buoyancy are equal.

    .. math:: \ell_c = \sqrt{\sigma / (\Delta\rho\, g)}

    Parameters
    ----------
    sigma : float       surface tension [N/m]
    delta_rho : float   density difference rho_L - rho_G [kg/m^3]
    g : float or array  residual acceleration [m/s^2]; 0 gives an infinite length

    Returns
    -------
    float or array   capillary length [m]

    Notes
    -----
    A conduit whose size is well below the capillary length behaves as in weightlessness (Bond
    number :math:`(L/\ell_c)^2 \ll 1`).

    Examples
    --------
    Water (sigma 72.7 mN/m, delta_rho 997 kg/m^3) at standard gravity: 2.7 mm ([calc] from the definition).

    >>> round(capillary_length(0.0727, 997.0, 9.80665) * 1e3, 2)
    2.73
    """
    g = np.asarray(g, dtype=float)
    with np.errstate(divide="ignore"):
        out = np.sqrt(sigma / (delta_rho * g))
    return float(out) if out.ndim == 0 else out


#: Bond number above which buoyancy is no longer negligible against surface tension on the conduit
#: scale (an order-one limit; the closed-tube analogue is Brauner's Eo < 1).
BOND_LIMIT = 1.0


@dataclass(frozen=True)
class OpenConduitGravityCheck:
    """Result of :func:`open_conduit_gravity_check`.

    ``bond_transverse`` weighs the weight of the liquid across the section against its capillary
    pressure; ``bond_axial`` weighs the hydrostatic head along the conduit length. ``capillary_ok`` is
    True when both are below ``limit``.
    """

    bond_transverse: float
    bond_axial: float
    limit: float
    capillary_ok: bool
    message: str


def open_conduit_gravity_check(case, limit: float = BOND_LIMIT) -> OpenConduitGravityCheck:
    r"""Whether the capillary models of corners and open channels still apply at the case's gravity.

    .. math::
        Bo_\perp = \frac{\Delta\rho\, g \cos\beta\, D_h^2}{\sigma}, \qquad
        Bo_\parallel = \frac{\Delta\rho\, g\, |\sin\beta|\, L\, D_h}{\sigma}

    with :math:`D_h` the section's hydraulic diameter (its capillary scale), :math:`L` the conduit
    length and :math:`\beta` the inclination of the conduit axis to the horizontal. When the
    orientation is unspecified the full acceleration is taken for both (the worse case).

    Parameters
    ----------
    case : Case     uses fluid (rho_l, rho_g, sigma), section (hydraulic diameter), length, g, orientation
    limit : float   largest Bond number for which the capillary models are used [-] (default 1)

    Returns
    -------
    OpenConduitGravityCheck

    Notes
    -----
    The corner and open-channel models of lowgmap (Concus-Finn wetting, corner menisci as circular
    arcs, the one-dimensional critical-flow model) hold the interface shape by surface tension
    alone. Buoyancy deforms the meniscus across the section when :math:`Bo_\perp` reaches order one,
    and the hydrostatic head along the conduit competes with the capillary pressure
    :math:`\sigma/D_h` that drives or limits the flow when :math:`Bo_\parallel` reaches order one. The
    limit 1 is an order-of-magnitude choice (common practice), the analogue of the closed-tube
    criterion Eo < 1 of Brauner (1990).

    References
    ----------
    N. Brauner, Int. Commun. Heat Mass Transf. 17(3):271-281, 1990 (the closed-tube criterion).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> chk = open_conduit_gravity_check(example_case(Circle(0.002), g=9.80665))   # 2 mm at 1 g0
    >>> round(chk.bond_transverse, 3), chk.capillary_ok
    (0.538, False)
    """
    limit = positive("bond_limit", limit)
    f = case.fluid
    d = float(case.section.hydraulic_diameter)
    g = non_negative("g", case.g, "m/s^2")
    orientation = getattr(case, "orientation", None)
    if orientation is None:
        orientation = Orientation.unspecified()
    known = orientation.is_known
    cos_b = orientation.transverse_fraction if known else 1.0
    sin_b = abs(orientation.axial_fraction) if known else 1.0
    drho = f.rho_l - f.rho_g
    bo_t = drho * g * cos_b * d * d / f.sigma
    bo_a = drho * g * sin_b * float(case.length) * d / f.sigma
    ok = bo_t < limit and bo_a < limit
    where = orientation.describe() if known else "orientation unspecified: full g taken both ways"
    head = (f"Bond numbers on the conduit scale D_h = {d * 1e3:.4g} mm at g = {g:.3g} m/s^2 ({where}): "
            f"across the section {bo_t:.3g}, along the length {bo_a:.3g}")
    if ok:
        msg = f"{head}; both below {limit:g}: the capillary models apply."
    else:
        msg = (f"{head}; at or above {limit:g}: buoyancy shapes the meniscus or the hydrostatic head competes with "
               f"the capillary pressure, outside the assumptions of the corner and open-channel models "
               f"(use them as indications only).")
    if not math.isfinite(bo_t + bo_a):  # pragma: no cover - inputs are validated finite
        raise ValueError("Bond numbers are not finite; check the case's fluid and section")
    return OpenConduitGravityCheck(bo_t, bo_a, limit, ok, msg)
