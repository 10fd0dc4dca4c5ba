"""Low-gravity test platforms: typical low-g time and residual acceleration, and capillary time scales.

A built-in table :data:`PLATFORMS` gives, for each class of platform (short drop tower, drop tube,
launched drop, parabolic flight, sounding rocket, orbital station, and the 1-g ground test), the
low-gravity time of one experiment and the residual acceleration as ranges typical of the class. The figures are typical
figures, entered from memory, not from a document in hand, and each row says so in ``source``. Rows
describe classes of facility, never one facility (no facility names or heights): for a particular
facility, name it in the test-point file and give each point its own residual acceleration and
low-g duration (an unknown platform name is kept as written).

Conventions
-----------
- Accelerations are in m/s^2 (the table is stated in multiples of standard gravity
  g0 = 9.80665 m/s^2 and converted on import).
- ``g_typical`` is the **upper end** of the stated range, so that a Bond number computed with it is
  not underestimated (conservative for a "surface tension dominates" claim); for the ground test it is
  standard gravity g0 (the test is not a low-gravity one, and its points are drawn on the 1-g chart).
- ``duration_s`` is the low-g time used by default: the short end of the class's range (conservative
  for an "enough low-g time" check; for parabolic flight the usual longest parabola, so give each
  point's own duration); ``duration_max_s`` is the long end.
- A figure that is not stated is NaN (e.g. the lower bound of "<= 1e-4 g").

A test point may carry its own residual acceleration and duration; :func:`point_conditions` uses
those first and falls back on the platform figures.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import NamedTuple, Sequence

import numpy as np

from lowgmap.physics.case import STANDARD_GRAVITY
from lowgmap.physics.chart.summary import bond_number
from lowgmap.physics.validate import non_negative, positive

__all__ = [
    "Platform", "PLATFORMS", "platform_names", "get_platform", "find_platform", "platform_table",
    "Conditions", "point_conditions", "points_conditions", "platform_bond_numbers",
    "CapillaryTimes", "capillary_times", "bond_number", "SOURCE_FROM_MEMORY",
]

#: Source text of the built-in figures (entered without a document in hand).
SOURCE_FROM_MEMORY = "typical figures, from memory"

_G0 = STANDARD_GRAVITY
_NAN = math.nan


@dataclass(frozen=True)
class Platform:
    """One kind of low-gravity platform (typical figures, SI units).

    Parameters
    ----------
    name : str                  class of facility, e.g. ``"short drop tower"``
    aliases : tuple of str      other accepted spellings (matched ignoring case, spaces and punctuation)
    duration_s : float          low-g time of one experiment used by default [s]
    duration_max_s : float      longest low-g time stated [s] (``inf``: continuous)
    g_low : float               lower end of the residual acceleration [m/s^2] (NaN: not stated)
    g_high : float              upper end of the residual acceleration [m/s^2]
    g_typical : float           residual acceleration used by default [m/s^2] (= ``g_high``)
    source : str                where the figures come from
    note : str                  caveats
    """

    name: str
    aliases: tuple[str, ...]
    duration_s: float
    duration_max_s: float
    g_low: float
    g_high: float
    g_typical: float
    source: str = SOURCE_FROM_MEMORY
    note: str = ""

    def __post_init__(self):
        positive(f"{self.name}: duration_s", self.duration_s, "s")
        if not self.duration_max_s >= self.duration_s:
            raise ValueError(f"{self.name}: duration_max_s must be >= duration_s, got {self.duration_max_s!r}")
        positive(f"{self.name}: g_high", self.g_high, "m/s^2")
        if not math.isnan(self.g_low) and not 0 <= self.g_low <= self.g_high:
            raise ValueError(f"{self.name}: g_low must be within [0, g_high], got {self.g_low!r}")
        if not (math.isnan(self.g_low) or self.g_low <= self.g_typical) or self.g_typical > self.g_high:
            raise ValueError(f"{self.name}: g_typical must be within [g_low, g_high], got {self.g_typical!r}")

    @property
    def g_typical_over_g0(self) -> float:
        """Default residual acceleration as a multiple of g0."""
        return self.g_typical / _G0


def _p(name, aliases, duration, duration_max, g_low_g0, g_high_g0, note=""):
    return Platform(name=name, aliases=tuple(aliases), duration_s=float(duration),
                    duration_max_s=float(duration_max), g_low=g_low_g0 * _G0, g_high=g_high_g0 * _G0,
                    g_typical=g_high_g0 * _G0, note=note)


#: Built-in platforms, by class of facility (typical figures, from memory).
PLATFORMS: dict[str, Platform] = {p.name: p for p in (
    _p("short drop tower", ("short drop tower, ~2 s", "short drop", "2 s drop tower", "2 s drop"),
       2.0, 2.5, 1e-4, 1e-3, "free fall of about 2 s (2 to 2.5 s)"),
    _p("drop tube", ("drop tube, ~5 s", "evacuated drop tube", "long drop tower", "5 s drop"),
       4.5, 5.5, 1e-7, 1e-5, "free fall of about 5 s (4.5 to 5.5 s) in an evacuated tube or tower"),
    _p("launched drop", ("launched drop, ~9 s", "catapult", "catapult launch", "9 s drop"),
       9.0, 10.0, 1e-7, 1e-5,
       "capsule launched upward from the bottom of a drop tube, rises and falls: about 9 to 10 s"),
    _p("parabolic flight", ("parabolic", "parabolic aircraft", "reduced-gravity aircraft", "aircraft"),
       22.0, 22.0, 1e-3, 1e-2,
       "up to ~22 s per parabola (often less), with ~1.8 g phases before and after; "
       "give low_g_duration per point where known"),
    _p("sounding rocket", ("rocket", "suborbital rocket"), 180.0, 780.0, _NAN, 1e-4,
       "3 to 13 min depending on the vehicle; only an upper bound on the acceleration is given"),
    _p("orbital station", ("orbit", "orbital", "on orbit", "space station", "orbital laboratory"),
       30 * 86400.0, math.inf, 1e-6, 1e-6,
       "continuous for months (30 days is used as a lower bound); ~1e-6 g is the quasi-steady level, "
       "vibration (g-jitter) is higher"),
    Platform(name="ground test", aliases=("ground", "1 g", "laboratory", "ground loop"),
             duration_s=30 * 86400.0, duration_max_s=math.inf, g_low=9.780, g_high=9.832, g_typical=_G0,
             source="standard gravity g0 = 9.80665 m/s^2 (CGPM 1901, exact by definition); local gravity 9.780 "
                    "(equator) to 9.832 m/s^2 (poles), from memory",
             note="a ground test at 1 g: continuous (30 days is used as a lower bound); the residual acceleration "
                  "used is g0, give the local value per point where known; its points belong on the chart of "
                  "their own gravity level (a case with an orientation), not on a low-gravity chart"),
)}


def _key(name: str) -> str:
    return re.sub(r"[^a-z0-9.]", "", str(name).lower())


_LOOKUP: dict[str, str] = {}
for _pl in PLATFORMS.values():
    for _n in (_pl.name, *_pl.aliases):
        if _key(_n) in _LOOKUP:  # pragma: no cover - guards the table above
            raise RuntimeError(f"platform alias {_n!r} is ambiguous")
        _LOOKUP[_key(_n)] = _pl.name


def platform_names() -> list[str]:
    """Names of the built-in platforms, in table order."""
    return list(PLATFORMS)


def find_platform(name) -> Platform | None:
    """The platform called ``name`` (name or alias, ignoring case, spaces and punctuation), or None.

    >>> find_platform("Short Drop-Tower, ~2 s").name
    'short drop tower'
    >>> find_platform("balloon") is None
    True
    """
    if isinstance(name, Platform):
        return name
    if not isinstance(name, str):
        return None
    found = _LOOKUP.get(_key(name))
    return PLATFORMS[found] if found else None


def get_platform(name) -> Platform:
    """The platform called ``name``; raise :class:`ValueError` listing the known names otherwise.

    >>> get_platform("parabolic").duration_s
    22.0
    """
    pl = find_platform(name)
    if pl is None:
        raise ValueError(f"platform {name!r} is not known; known platforms: {', '.join(PLATFORMS)} "
                         "(or give the residual acceleration and low-g duration per point)")
    return pl


def platform_table() -> list[dict]:
    """The table as plain rows (for display): figures in g0 and seconds."""
    rows = []
    for p in PLATFORMS.values():
        rows.append({"name": p.name, "aliases": ", ".join(p.aliases), "duration_s": p.duration_s,
                     "duration_max_s": p.duration_max_s, "g_low_g0": p.g_low / _G0, "g_high_g0": p.g_high / _G0,
                     "g_typical_g0": p.g_typical / _G0, "source": p.source, "note": p.note})
    return rows


class Conditions(NamedTuple):
    """Residual acceleration [m/s^2] and low-g duration [s] used for a test point."""

    g: float
    duration: float


def _absent(x) -> bool:
    return x is None or (isinstance(x, float) and math.isnan(x))


def point_conditions(platform=None, g=None, duration=None) -> Conditions:
    """Residual acceleration and low-g duration of one test point: its own values first, then the platform's.

    Parameters
    ----------
    platform : str, Platform or None   platform name or alias (see :data:`PLATFORMS`)
    g : float or None                  the point's residual acceleration [m/s^2]; None/NaN: use the platform's
    duration : float or None           the point's low-g duration [s]; None/NaN: use the platform's

    Returns
    -------
    Conditions   ``(g [m/s^2], duration [s])``

    Raises
    ------
    ValueError   unknown platform name, or a value that is missing with no platform to fall back on

    Examples
    --------
    >>> point_conditions("short drop tower")
    Conditions(g=0.00980665, duration=2.0)
    >>> point_conditions("short drop tower", g=1e-4 * 9.80665).g
    0.000980665
    """
    pl = None if platform is None or platform == "" else get_platform(platform)
    if _absent(g):
        if pl is None:
            raise ValueError("residual acceleration g is not given and there is no platform to take it from")
        g_used = pl.g_typical
    else:
        g_used = non_negative("g", g, "m/s^2")
    if _absent(duration):
        if pl is None:
            raise ValueError("low-g duration is not given and there is no platform to take it from")
        d_used = pl.duration_s
    else:
        d_used = positive("duration", duration, "s")
    return Conditions(g_used, d_used)


def points_conditions(platforms: Sequence, g=None, duration=None) -> tuple[np.ndarray, np.ndarray]:
    """Vectorised :func:`point_conditions` for many points (e.g. a test-point table).

    Parameters
    ----------
    platforms : sequence of str or None   platform of each point (unknown or empty names allowed)
    g : array or None                     each point's residual acceleration [m/s^2] (NaN: absent)
    duration : array or None              each point's low-g duration [s] (NaN: absent)

    Returns
    -------
    (g, duration) : two float arrays   NaN where the point gives no value and its platform is unknown
    or missing, and where a given value is negative (g) or not > 0 (duration).

    Examples
    --------
    >>> g, t = points_conditions(["parabolic flight", "balloon"], [float("nan"), 0.01], None)
    >>> g.round(7).tolist(), t.tolist()
    ([0.0980665, 0.01], [22.0, nan])
    """
    names = list(platforms)
    n = len(names)
    plat = {nm: find_platform(nm) for nm in set(x for x in names if isinstance(x, str))}
    g_pl = np.array([plat[x].g_typical if isinstance(x, str) and plat[x] else np.nan for x in names], float)
    d_pl = np.array([plat[x].duration_s if isinstance(x, str) and plat[x] else np.nan for x in names], float)
    g_in = np.full(n, np.nan) if g is None else np.broadcast_to(np.asarray(g, float), (n,))
    d_in = np.full(n, np.nan) if duration is None else np.broadcast_to(np.asarray(duration, float), (n,))
    with np.errstate(invalid="ignore"):
        g_bad = ~np.isnan(g_in) & ~(np.isfinite(g_in) & (g_in >= 0))
        d_bad = ~np.isnan(d_in) & ~(np.isfinite(d_in) & (d_in > 0))
    g_out = np.where(np.isnan(g_in), g_pl, g_in)
    d_out = np.where(np.isnan(d_in), d_pl, d_in)
    g_out[g_bad] = np.nan
    d_out[d_bad] = np.nan
    return g_out, d_out


def platform_bond_numbers(platform, delta_rho, length, sigma) -> tuple[float, float, float]:
    r"""Bond numbers at the platform's low, typical and high residual acceleration.

    .. math:: Bo = \frac{\Delta\rho\, g\, L^2}{\sigma}

    Parameters
    ----------
    platform : str or Platform
    delta_rho : float   density difference liquid - gas [kg/m^3]
    length : float      length scale [m]
    sigma : float       surface tension [N/m]

    Returns
    -------
    (Bo_low, Bo_typical, Bo_high)   NaN where the platform does not state the figure

    Examples
    --------
    >>> [round(b, 5) for b in platform_bond_numbers("short drop tower", 998.2, 0.01, 0.0728)]
    [0.00134, 0.01345, 0.01345]
    """
    pl = get_platform(platform)
    d = positive("delta_rho", delta_rho, "kg/m^3")
    L = positive("length", length, "m")
    s = positive("sigma", sigma, "N/m")
    return tuple(float(bond_number(d, g, L, s)) for g in (pl.g_low, pl.g_typical, pl.g_high))


class CapillaryTimes(NamedTuple):
    """Capillary time scales [s]."""

    inertial: float
    viscous: float


def capillary_times(rho, mu, sigma, L) -> CapillaryTimes:
    r"""Inertial-capillary and visco-capillary time scales of a liquid surface of size L.

    .. math:: t_{ic} = \sqrt{\frac{\rho L^3}{\sigma}}, \qquad t_{vc} = \frac{\mu L}{\sigma}

    Parameters
    ----------
    rho : float or array     liquid density [kg/m^3]
    mu : float or array      liquid dynamic viscosity [Pa s]
    sigma : float or array   surface tension [N/m]
    L : float or array       length scale (e.g. tube diameter) [m]

    Returns
    -------
    CapillaryTimes   ``(inertial [s], viscous [s])``

    Notes
    -----
    Order-of-magnitude times for a liquid interface to respond to a change of acceleration (e.g.
    the step into low gravity at the start of a drop): the inertial-capillary time governs when
    inertia resists (low Ohnesorge number Oh = t_vc / t_ic), the visco-capillary time when viscosity
    does. A test whose low-g time is only a few t_ic long may not have reached its low-gravity
    interface shape. Scalars are validated (ValueError naming the field); with array input an
    element that is not finite and > 0 gives NaN.

    References
    ----------
    No single source: the scales follow from dimensional analysis of the Navier-Stokes equations with
    a capillary boundary condition (common practice).

    Examples
    --------
    >>> t = capillary_times(998.2, 1.0e-3, 0.0728, 0.01)   # water, L = 1 cm
    >>> round(t.inertial, 4), round(t.viscous, 7)
    (0.1171, 0.0001374)
    """
    args = {"rho": (rho, "kg/m^3"), "mu": (mu, "Pa*s"), "sigma": (sigma, "N/m"), "L": (L, "m")}
    if all(np.ndim(v) == 0 for v, _ in args.values()):
        r, m, s, ln = (positive(k, v, u) for k, (v, u) in args.items())
        return CapillaryTimes(math.sqrt(r * ln ** 3 / s), m * ln / s)
    r, m, s, ln = np.broadcast_arrays(*(np.asarray(v, float) for v, _ in args.values()))
    with np.errstate(invalid="ignore", divide="ignore"):
        ok = np.isfinite(r) & np.isfinite(m) & np.isfinite(s) & np.isfinite(ln) & (r > 0) & (m > 0) & (s > 0) & (ln > 0)
        t_ic = np.where(ok, np.sqrt(np.abs(r * ln ** 3 / s)), np.nan)
        t_vc = np.where(ok, m * ln / s, np.nan)
    return CapillaryTimes(t_ic, t_vc)

