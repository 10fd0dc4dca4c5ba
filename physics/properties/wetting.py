"""Wetting: contact angles of the liquid on the conduit wall and the Concus–Finn corner condition."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lowgmap.physics.validate import angle_deg_in_range

__all__ = ["Wetting", "concus_finn_wets", "concus_finn_critical_contact_angle"]


def concus_finn_wets(half_angle, contact_angle):
    r"""Whether liquid wicks without bound along an interior corner (Concus–Finn condition).

    .. math:: \theta + \alpha < \pi/2

    Parameters
    ----------
    half_angle : float or array   corner half-angle alpha [rad], in (0, 90) deg
    contact_angle : float or array   static contact angle theta [rad], in [0, 180] deg

    Returns
    -------
    bool or bool array
        True where the corner wicks (a meniscus of any length exists and spreads along the corner).

    Notes
    -----
    Static, zero-gravity statement for a straight corner with a homogeneous wall. At exactly
    theta + alpha = 90 deg the interface is flat and the corner does not wick (returned False).

    References
    ----------
    P. Concus and R. Finn, "On the behavior of a capillary surface in a wedge",
    PNAS 63(2):292-299, 1969. doi:10.1073/pnas.63.2.292

    Examples
    --------
    >>> import math
    >>> bool(concus_finn_wets(math.radians(7.9), math.radians(82.0)))
    True
    >>> bool(concus_finn_wets(math.radians(7.9), math.radians(82.2)))
    False
    """
    a = angle_deg_in_range("half_angle", half_angle, 0.0, 90.0, lo_open=True, hi_open=True)
    t = angle_deg_in_range("contact_angle", contact_angle, 0.0, 180.0)
    out = (np.asarray(a) + np.asarray(t)) < (math.pi / 2 - 1e-12)
    return bool(out) if out.ndim == 0 else out


def concus_finn_critical_contact_angle(half_angle):
    """Largest contact angle [rad] for which a corner of ``half_angle`` [rad] wicks: pi/2 - alpha."""
    a = angle_deg_in_range("half_angle", half_angle, 0.0, 90.0, lo_open=True, hi_open=True)
    return math.pi / 2 - a if np.ndim(a) == 0 else np.pi / 2 - np.asarray(a)


@dataclass(frozen=True)
class Wetting:
    """Contact angles of the liquid on the wall [rad].

    ``contact_angle`` is the static value used by the models; ``advancing`` and ``receding``, when
    given, bound it (receding <= static <= advancing) and are reported for hysteresis checks.
    """

    contact_angle: float
    advancing: float | None = None
    receding: float | None = None

    def __post_init__(self):
        angle_deg_in_range("wetting.contact_angle", self.contact_angle, 0.0, 180.0)
        for name in ("advancing", "receding"):
            v = getattr(self, name)
            if v is not None:
                angle_deg_in_range(f"wetting.{name}", v, 0.0, 180.0)
        if self.advancing is not None and self.advancing + 1e-12 < self.contact_angle:
            raise ValueError(
                f"wetting.advancing must be >= contact_angle ({math.degrees(self.contact_angle):g} deg), "
                f"got {math.degrees(self.advancing):g} deg")
        if self.receding is not None and self.receding > self.contact_angle + 1e-12:
            raise ValueError(
                f"wetting.receding must be <= contact_angle ({math.degrees(self.contact_angle):g} deg), "
                f"got {math.degrees(self.receding):g} deg")

    def corners_that_wick(self, section) -> list[tuple[int, float, bool]]:
        """Concus–Finn per corner of ``section``: list of (corner index, half-angle [rad], wicks)."""
        return [(c.index, c.half_angle, bool(concus_finn_wets(c.half_angle, self.contact_angle)))
                for c in section.corners]
