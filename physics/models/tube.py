"""Flow-regime transitions for gas–liquid flow in closed tubes and ducts in low gravity.

Three families of published criteria, each registered as boundary models
(:mod:`lowgmap.physics.models.boundary`), plus the check that gravity can be neglected:

- void fraction with drift flux (Dukler et al. 1988; constants measured by Colin et al. 1991 and
  Bousman et al. 1996): bubble–slug and slug–annular lines at a critical void fraction;
- superficial gas Weber number zones (Zhao & Rezkallah 1993);
- Suratman-number bubble–slug line (Jayawardena, Balakotaiah & Witte 1997);
- Eötvös number Eo = (rho_L - rho_G) g D^2 / sigma < 1 for "microgravity" behaviour (Brauner 1990).

Non-circular ducts use the hydraulic diameter D_h = 4A/P in place of the tube diameter; that is an
approximation of ours, not part of the sources, and the chart says so.

Constants whose published values were not in hand are parameters with defaults marked
"from memory" in their ``source``; calibrate them against test points before relying on a line.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lowgmap.physics.models.boundary import Constant, ExplicitBoundary, Validity, register
from lowgmap.physics.case import STANDARD_GRAVITY
from lowgmap.physics.properties.groups import conduit_diameter, eotvos
from lowgmap.physics.validate import positive

__all__ = [
    "BUBBLES", "SLUGS", "ANNULAR", "CAPILLARY_ZONE", "TRANSITIONAL_ZONE", "INERTIA_ZONE",
    "EOTVOS_LIMIT", "drift_flux_flow_ratio", "drift_flux_void_fraction", "weber_gas_velocity",
    "suratman_reynolds_ratio", "GravityCheck", "gravity_check", "is_circular", "duct_note",
    "DriftFluxTransition", "WeberZoneBoundary", "SuratmanBubbleSlug",
    "BUBBLE_SLUG_DUKLER_1988", "SLUG_ANNULAR_DUKLER_1988", "SLUG_TRANSITIONAL_ZHAO_REZKALLAH_1993",
    "TRANSITIONAL_ANNULAR_ZHAO_REZKALLAH_1993", "BUBBLE_SLUG_JAYAWARDENA_1997", "TUBE_MODEL_NAMES",
]

# Regime names (descriptive phrases of our own) -----------------------------------------------
#: Small bubbles carried by the liquid, smaller than the tube.
BUBBLES = "dispersed bubbles"
#: Long bubbles filling the bore, separated by liquid slugs.
SLUGS = "elongated bubbles / slugs"
#: Liquid film on the wall around a continuous gas core.
ANNULAR = "annular (gas core)"
#: Zones of the Weber-number criterion.
CAPILLARY_ZONE = "bubbles and slugs (surface tension dominated)"
TRANSITIONAL_ZONE = "transitional slug–annular"
INERTIA_ZONE = "annular (inertia dominated)"

# Sources ------------------------------------------------------------------------------------
DUKLER_1988 = ("A. E. Dukler, J. A. Fabre, J. B. McQuillen and R. Vernon, \"Gas-liquid flow at microgravity "
               "conditions: flow patterns and their transitions\", Int. J. Multiphase Flow 14(4):389-400, 1988. "
               "doi:10.1016/0301-9322(88)90018-6 (DOI from memory)")
COLIN_1991 = ("C. Colin, J. A. Fabre and A. E. Dukler, \"Gas-liquid flow at microgravity conditions - I. "
              "Dispersed bubble and slug flow\", Int. J. Multiphase Flow 17(4):533-544, 1991")
BOUSMAN_1996 = ("W. S. Bousman, J. B. McQuillen and L. C. Witte, \"Gas-liquid flow patterns in microgravity: "
                "effects of tube diameter, liquid viscosity and surface tension\", Int. J. Multiphase Flow "
                "22(6):1035-1053, 1996")
ZHAO_REZKALLAH_1993 = ("L. Zhao and K. S. Rezkallah, \"Gas-liquid flow patterns at microgravity conditions\", "
                       "Int. J. Multiphase Flow 19(5):751-763, 1993")
JAYAWARDENA_1997 = ("S. S. Jayawardena, V. Balakotaiah and L. C. Witte, \"Flow pattern transition maps for "
                    "microgravity two-phase flows\", AIChE J. 43(6):1637-1640, 1997. "
                    "doi:10.1002/aic.690430632 (DOI from memory)")
BRAUNER_1990 = ("N. Brauner, \"On the relations between two-phase flows under reduced gravity and earth "
                "experiment\", Int. Commun. Heat Mass Transf. 17(3):271-281, 1990")

#: Eötvös number below which gravity is negligible in a tube ("microgravity" systems without
#: stratification, Brauner 1990).
EOTVOS_LIMIT = 1.0

_EO_VALID = Validity("eotvos", 0.0, EOTVOS_LIMIT,
                     "Brauner (1990): stratification is absent for Eo < 1; the sources are low-gravity data")
_SU_VALID = Validity("suratman", 1e4, 1e7,
                     "from memory: approximate span of the low-gravity tube data behind these criteria "
                     "(air with water, water-glycerol and water-surfactant solutions, D about 10-40 mm)")


# Formulas -----------------------------------------------------------------------------------

def drift_flux_flow_ratio(alpha_c, c0):
    r"""Gas-to-liquid flow ratio on a critical-void-fraction line with zero drift velocity.

    With the drift-flux relation :math:`U_{SG}/\alpha = C_0 (U_{SL} + U_{SG})` (no buoyant drift in
    low gravity), the void fraction equals :math:`\alpha_c` on the line

    .. math:: \frac{U_{SG}}{U_{SL}} = \frac{Q_G}{Q_L} = \frac{C_0 \alpha_c}{1 - C_0 \alpha_c}

    Parameters
    ----------
    alpha_c : float or array   critical void fraction [-], in (0, 1)
    c0 : float or array        distribution parameter [-], > 0

    Returns
    -------
    float or array   Q_G/Q_L on the line [-]; NaN where C0 alpha_c >= 1 (no such line: the void
    fraction cannot reach alpha_c)

    Notes
    -----
    A straight line of slope 1 in log-log axes, the same in flow-rate and superficial-velocity
    axes whatever the tube area.

    References
    ----------
    Dukler et al. (1988), Int. J. Multiphase Flow 14(4):389-400.

    Examples
    --------
    Check values [calc] from the drift-flux line of Dukler et al. (1988), U_SL/U_SG = 1/(C0 alpha_c) - 1:

    >>> round(1 / drift_flux_flow_ratio(0.45, 1.0), 4)
    1.2222
    >>> round(1 / drift_flux_flow_ratio(0.45, 1.2), 4)
    0.8519
    """
    p = np.asarray(alpha_c, dtype=float) * np.asarray(c0, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where((p > 0) & (p < 1), p / (1.0 - p), np.nan)
    return float(out) if out.ndim == 0 else out


def drift_flux_void_fraction(ql, qg, c0):
    r"""Void fraction from the drift-flux relation with zero drift velocity.

    .. math:: \alpha = \frac{Q_G}{C_0 (Q_L + Q_G)}

    Parameters
    ----------
    ql, qg : float or array   liquid and gas volumetric flow rates [m^3/s] (or superficial velocities)
    c0 : float                distribution parameter [-]

    Returns
    -------
    float or array   alpha [-]

    Examples
    --------
    >>> round(drift_flux_void_fraction(1.0, 1.0, 1.2), 4)
    0.4167
    """
    ql = np.asarray(ql, dtype=float)
    qg = np.asarray(qg, dtype=float)
    out = qg / (np.asarray(c0, dtype=float) * (ql + qg))
    return float(out) if out.ndim == 0 else out


def weber_gas_velocity(we_sg, rho_g, sigma, diameter):
    r"""Superficial gas velocity at a given superficial gas Weber number.

    .. math:: U_{SG} = \sqrt{We_{SG}\, \sigma / (\rho_G D)}

    Parameters
    ----------
    we_sg : float or array   superficial gas Weber number [-]
    rho_g : float   gas density [kg/m^3]
    sigma : float   surface tension [N/m]
    diameter : float   tube (hydraulic) diameter [m]

    Returns
    -------
    float or array   U_SG [m/s]

    References
    ----------
    Zhao & Rezkallah (1993), Int. J. Multiphase Flow 19(5):751-763.

    Examples
    --------
    Check values [calc] from We_SG = rho_G U_SG^2 D / sigma (air 1.205 kg/m^3, sigma 0.072736 N/m, D 12.7 mm):

    >>> round(weber_gas_velocity(1.0, 1.205, 0.072736, 0.0127), 2)
    2.18
    >>> round(weber_gas_velocity(20.0, 1.205, 0.072736, 0.0127), 2)
    9.75
    """
    out = np.sqrt(np.asarray(we_sg, dtype=float) * sigma / (rho_g * diameter))
    return float(out) if out.ndim == 0 else out


def suratman_reynolds_ratio(su, coefficient=464.16, exponent=-2.0 / 3.0):
    r"""Ratio of superficial Reynolds numbers on the Suratman-number bubble–slug line.

    .. math:: \frac{Re_{SG}}{Re_{SL}} = K\, Su^{\,n}, \qquad K = 464.16,\ n = -2/3

    Parameters
    ----------
    su : float or array   Suratman number rho_L sigma D / mu_L^2 [-]
    coefficient : float   K [-] (default from memory, medium confidence)
    exponent : float      n [-] (default from memory)

    Returns
    -------
    float or array   Re_SG / Re_SL on the line [-]

    Notes
    -----
    The default K equals 10^(8/3) to five figures, i.e. Re_SG/Re_SL = (Su/10^4)^(-2/3).

    References
    ----------
    Jayawardena, Balakotaiah & Witte (1997), AIChE J. 43(6):1637-1640.

    Examples
    --------
    Air/water at 20 degC in a 12.7 mm tube, Su = 9.19e5, gives 0.0491 (check value [calc]):

    >>> round(suratman_reynolds_ratio(9.19e5), 4)
    0.0491
    """
    out = coefficient * np.asarray(su, dtype=float) ** exponent
    return float(out) if out.ndim == 0 else out


# Gravity check and duct note ----------------------------------------------------------------

@dataclass(frozen=True)
class GravityCheck:
    """Result of :func:`gravity_check`: Eötvös number, the limit used, verdict and a sentence."""

    eotvos: float
    limit: float
    negligible: bool
    message: str


def gravity_check(case, limit: float = EOTVOS_LIMIT) -> GravityCheck:
    r"""Whether gravity can be neglected in the tube at the case's residual acceleration.

    .. math:: Eo = (\rho_L - \rho_G)\, g\, D^2 / \sigma < Eo_{lim}

    Parameters
    ----------
    case : Case     uses fluid (rho_l, rho_g, sigma), section (hydraulic diameter) and g [m/s^2]
    limit : float   Eo_lim [-], default 1 (Brauner 1990)

    Returns
    -------
    GravityCheck

    Notes
    -----
    Brauner (1990) calls "microgravity" systems those with Eo < 1: no stratification, and the
    flow patterns are those of the low-gravity experiments. Above it, buoyancy can stratify the
    flow or make bubbles slip, which none of the low-gravity lines describes. Other authors use
    other thresholds for "small" tubes; the limit is therefore a parameter.

    References
    ----------
    N. Brauner, Int. Commun. Heat Mass Transf. 17(3):271-281, 1990.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> case = example_case(Circle(0.0127), g=9.80665e-2)        # water/air, 12.7 mm tube, 1e-2 g0
    >>> chk = gravity_check(case)
    >>> round(chk.eotvos, 3), chk.negligible
    (0.217, True)
    """
    limit = positive("eotvos_limit", limit)
    f = case.fluid
    d = conduit_diameter(case)
    eo = float(eotvos(f.rho_l - f.rho_g, case.g, d, f.sigma))
    g0 = case.g / STANDARD_GRAVITY
    if eo < limit:
        msg = (f"Gravity negligible: Eötvös number (rho_L - rho_G) g D^2 / sigma = {eo:.3g} < {limit:g} "
               f"at g = {case.g:.3g} m/s^2 ({g0:.3g} g0), D = {d * 1e3:.4g} mm (Brauner 1990).")
    else:
        msg = (f"Gravity NOT negligible: Eötvös number (rho_L - rho_G) g D^2 / sigma = {eo:.3g} >= {limit:g} "
               f"at g = {case.g:.3g} m/s^2 ({g0:.3g} g0), D = {d * 1e3:.4g} mm. The low-gravity regime "
               f"lines ignore buoyancy and stratification; use them as indications only (Brauner 1990).")
    return GravityCheck(eo, limit, eo < limit, msg)


def is_circular(section) -> bool:
    """True for a circular tube (its ``kind`` is "circle")."""
    return getattr(section, "kind", "") == "circle"


def duct_note(section) -> str | None:
    """Sentence stating the hydraulic-diameter approximation for a non-circular duct; None for a tube."""
    if is_circular(section):
        return None
    dh = float(section.hydraulic_diameter)
    kind = getattr(section, "kind", "non-circular")
    return (f"Non-circular duct ({kind}): the closed-tube criteria use the hydraulic diameter "
            f"D_h = 4A/P = {dh * 1e3:.4g} mm in place of the tube diameter. This is an approximation "
            f"(liquid gathers in corners); the sources tested circular tubes only.")


# Models -------------------------------------------------------------------------------------

class _ClosedConduitModel(ExplicitBoundary):
    """Shared behaviour of the closed-tube criteria."""

    low_gravity = True

    def applies_to(self, case):
        s = case.section
        if getattr(s, "is_open", False):
            return (f"{self.name}: open section ({getattr(s, 'kind', 'open')}); this criterion is for "
                    f"closed tubes and ducts")
        return None

    @staticmethod
    def _ql(ql):
        ql = np.asarray(ql, dtype=float)
        return np.where(np.isfinite(ql) & (ql > 0), ql, np.nan)


class DriftFluxTransition(_ClosedConduitModel):
    r"""Transition at a critical void fraction, drift-flux relation without drift velocity.

    .. math:: Q_G = Q_L \frac{C_0 \alpha_c}{1 - C_0 \alpha_c}

    The line is the locus where :math:`\alpha = Q_G / (C_0 (Q_L + Q_G)) = \alpha_c`; the void
    fraction grows with gas flow, so the regime of larger void fraction lies above.

    Constants: ``alpha_c`` (critical void fraction) and ``c0`` (distribution parameter); their
    product must stay below 1 for the line to exist.

    Notes
    -----
    Valid for low gravity (Eo < 1) and, from memory, Su between about 1e4 and 1e7.

    References
    ----------
    Dukler et al. (1988), Int. J. Multiphase Flow 14(4):389-400; Colin et al. (1991), Int. J.
    Multiphase Flow 17(4):533-544; Bousman et al. (1996), Int. J. Multiphase Flow 22(6):1035-1053.

    Examples
    --------
    >>> from types import SimpleNamespace as NS
    >>> m = BUBBLE_SLUG_DUKLER_1988
    >>> round(float(m.qg_of_ql(NS(), 1e-5, alpha_c=0.45, c0=1.0)) / 1e-5, 4)
    0.8182
    """

    def __init__(self, name, label, regime_below, regime_above, alpha_c: Constant, c0: Constant,
                 citation: str, notes: str = ""):
        self.name = name
        self.label = label
        self.regime_below = regime_below
        self.regime_above = regime_above
        self.constants = (alpha_c, c0)
        self.citation = citation
        self.validity = (_EO_VALID, _SU_VALID)
        self.notes = notes
        self.check_constants(self.defaults)

    def check_constants(self, values):
        p = values["alpha_c"] * values["c0"]
        if not p < 1.0:
            raise ValueError(f"{self.name}: constants c0 * alpha_c must be < 1 for the void fraction to reach "
                             f"alpha_c, got {values['c0']:g} * {values['alpha_c']:g} = {p:.4g}")

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        out = self._ql(ql) * drift_flux_flow_ratio(c["alpha_c"], c["c0"])
        return float(out) if out.ndim == 0 else out


class WeberZoneBoundary(_ClosedConduitModel):
    r"""Zone boundary at a fixed superficial gas Weber number.

    .. math:: Q_G = A \sqrt{We_{SG}\, \sigma / (\rho_G D)}

    independent of the liquid flow (a horizontal line in the flow plane). Constant: ``we_sg``.

    References
    ----------
    Zhao & Rezkallah (1993), Int. J. Multiphase Flow 19(5):751-763.

    Examples
    --------
    >>> from types import SimpleNamespace as NS
    >>> case = NS(fluid=NS(rho_g=1.205, sigma=0.072736), section=NS(area=1.0, hydraulic_diameter=0.0127))
    >>> round(SLUG_TRANSITIONAL_ZHAO_REZKALLAH_1993.qg_of_ql(case, 1e-5), 2)   # U_SG [m/s] with A = 1
    2.18
    """

    def __init__(self, name, label, regime_below, regime_above, we_sg: Constant, citation: str,
                 notes: str = ""):
        self.name = name
        self.label = label
        self.regime_below = regime_below
        self.regime_above = regime_above
        self.constants = (we_sg,)
        self.citation = citation
        self.validity = (_EO_VALID, _SU_VALID)
        self.notes = notes

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        f = case.fluid
        u = weber_gas_velocity(c["we_sg"], f.rho_g, f.sigma, conduit_diameter(case))
        out = 0.0 * self._ql(ql) + u * case.section.area
        return float(out) if out.ndim == 0 else out


class SuratmanBubbleSlug(_ClosedConduitModel):
    r"""Bubble–slug line in Suratman-number form.

    .. math:: \frac{Re_{SG}}{Re_{SL}} = K\, Su^{\,n}
              \;\Rightarrow\; Q_G = Q_L\, K\, Su^{\,n}\, \frac{\rho_L \mu_G}{\rho_G \mu_L}

    Constants: ``coefficient`` (K) and ``exponent`` (n).

    References
    ----------
    Jayawardena, Balakotaiah & Witte (1997), AIChE J. 43(6):1637-1640. doi:10.1002/aic.690430632
    (DOI from memory)
    """

    def __init__(self, name, label, regime_below, regime_above, coefficient: Constant, exponent: Constant,
                 citation: str, notes: str = ""):
        self.name = name
        self.label = label
        self.regime_below = regime_below
        self.regime_above = regime_above
        self.constants = (coefficient, exponent)
        self.citation = citation
        self.validity = (_EO_VALID, _SU_VALID)
        self.notes = notes

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        f = case.fluid
        su = f.rho_l * f.sigma * conduit_diameter(case) / f.mu_l ** 2
        ratio = suratman_reynolds_ratio(su, c["coefficient"], c["exponent"])
        out = self._ql(ql) * ratio * (f.rho_l * f.mu_g) / (f.rho_g * f.mu_l)
        return float(out) if out.ndim == 0 else out


_C0_SOURCE = ("from memory: of order 1.2 in low-gravity bubbly and slug flow (Colin et al. 1991; "
              "Bousman et al. 1996 report values varying with tube and liquid); C0 = 1 is the no-slip line")

#: Bubble–slug transition at a critical void fraction (Dukler et al. 1988).
BUBBLE_SLUG_DUKLER_1988 = register(DriftFluxTransition(
    "bubble_slug_dukler_1988", "bubble–slug, void fraction (Dukler et al. 1988)", BUBBLES, SLUGS,
    Constant("alpha_c", 0.45, "-",
             "from memory: Dukler et al. (1988) place bubble coalescence into slugs near alpha = 0.45",
             0.05, 0.95, "critical void fraction at which bubbles coalesce into slugs",
             band=(0.35, 0.55),
             band_reason="order of magnitude, from memory, deliberately wide: the transition void fraction "
                         "varies with tube diameter and liquid in the data of Colin et al. (1991) and Bousman "
                         "et al. (1996), by about ±0.05 as recalled; the band doubles that"),
    Constant("c0", 1.2, "-", _C0_SOURCE, 0.8, 2.0, "drift-flux distribution parameter",
             band=(1.0, 1.35),
             band_reason="published scatter: most low-gravity studies use C0 = 1.2; a pooled fit of 221 "
                         "low-gravity slug-flow points from 8 authors gives C0 = 1.336 ± 0.013 with a drift "
                         "velocity of -0.126 m/s (Larsen, Kurwitz & Best, NETS 2009, abstract); 1.0 is no slip, "
                         "approached by small bubbles (from memory)"),
    DUKLER_1988 + "; constants: " + COLIN_1991 + "; " + BOUSMAN_1996,
    "Bubbles coalesce into slugs once the void fraction reaches alpha_c; gas moves at C0 times the "
    "mixture velocity (no buoyant drift). Fully developed flow assumed; coalescence also depends on "
    "tube length and inlet, which the line ignores."))

#: Slug–annular transition at a higher critical void fraction (Dukler et al. 1988).
SLUG_ANNULAR_DUKLER_1988 = register(DriftFluxTransition(
    "slug_annular_dukler_1988", "slug–annular, void fraction (Dukler et al. 1988)", SLUGS, ANNULAR,
    Constant("alpha_c", 0.8, "-",
             "from memory, uncertain: a void fraction near 0.8 for the change to annular flow; "
             "calibrate against test points", 0.05, 0.95,
             "critical void fraction at which slugs give way to a continuous gas core",
             band=(0.7, 0.85),
             band_reason="order of magnitude, from memory, deliberately wide: no published spread in hand; "
                         "with C0 in its band, C0 alpha_c can reach 1, where the line leaves the chart (the "
                         "void fraction never reaches alpha_c)"),
    Constant("c0", 1.2, "-", _C0_SOURCE, 0.8, 2.0, "drift-flux distribution parameter",
             band=(1.1, 1.35),
             band_reason="published scatter of slug-flow data: 1.2 used by most low-gravity studies, 1.336 "
                         "± 0.013 from a pooled fit of 221 points from 8 authors (Larsen, Kurwitz & Best, "
                         "NETS 2009, abstract); lower end 1.1 from memory"),
    DUKLER_1988 + "; constants: " + COLIN_1991 + "; " + BOUSMAN_1996,
    "Liquid slugs can no longer bridge the tube once the void fraction reaches alpha_c. Because "
    "C0 * alpha_c is close to 1, small changes of either constant move the line a lot."))

#: We_SG = 1: end of the surface-tension dominated zone (Zhao & Rezkallah 1993).
SLUG_TRANSITIONAL_ZHAO_REZKALLAH_1993 = register(WeberZoneBoundary(
    "slug_transitional_zhao_rezkallah_1993", "We_SG = 1 (Zhao & Rezkallah 1993)",
    CAPILLARY_ZONE, TRANSITIONAL_ZONE,
    Constant("we_sg", 1.0, "-", "from memory: We_SG of about 1 (Zhao & Rezkallah 1993)", 0.01, 1000.0,
             "superficial gas Weber number at the end of the surface-tension dominated zone",
             band=(0.5, 2.0),
             band_reason="order of magnitude, from memory: the zone limit is 'about 1' in Zhao & Rezkallah "
                         "(1993), observed over a spread of flows; deliberately wide, ×/÷ 2"),
    ZHAO_REZKALLAH_1993,
    "Zones by the ratio of gas inertia to surface tension only; the liquid flow does not enter."))

#: We_SG = 20: start of the inertia dominated (annular) zone (Zhao & Rezkallah 1993).
TRANSITIONAL_ANNULAR_ZHAO_REZKALLAH_1993 = register(WeberZoneBoundary(
    "transitional_annular_zhao_rezkallah_1993", "We_SG = 20 (Zhao & Rezkallah 1993)",
    TRANSITIONAL_ZONE, INERTIA_ZONE,
    Constant("we_sg", 20.0, "-", "from memory: We_SG of about 20 (Zhao & Rezkallah 1993)", 0.01, 1000.0,
             "superficial gas Weber number at the start of the inertia dominated zone",
             band=(10.0, 40.0),
             band_reason="order of magnitude, from memory: the zone limit is 'about 20' in Zhao & Rezkallah "
                         "(1993), observed over a spread of flows; deliberately wide, ×/÷ 2"),
    ZHAO_REZKALLAH_1993,
    "Zones by the ratio of gas inertia to surface tension only; the liquid flow does not enter."))

#: Bubble–slug line in Suratman form (Jayawardena, Balakotaiah & Witte 1997).
BUBBLE_SLUG_JAYAWARDENA_1997 = register(SuratmanBubbleSlug(
    "bubble_slug_jayawardena_1997", "bubble–slug, Suratman (Jayawardena et al. 1997)", BUBBLES, SLUGS,
    Constant("coefficient", 464.16, "-", "from memory, medium confidence (equals 10^(8/3) to 5 figures)",
             1.0, 1e5, "K in Re_SG/Re_SL = K Su^n",
             band=(232.08, 928.32),
             band_reason="order of magnitude, from memory: no spread of the fitted data in hand; "
                         "deliberately wide, ×/÷ 2"),
    Constant("exponent", -2.0 / 3.0, "-", "from memory, medium confidence", -2.0, 0.0,
             "n in Re_SG/Re_SL = K Su^n",
             band=(-0.7, -0.6333333333333333),
             band_reason="from memory, medium confidence: ±5 % on the fitted exponent, a choice (no spread "
                         "in hand); over Su = 1e4 to 1e7 it moves the line by up to ×/÷ 1.7 besides K"),
    JAYAWARDENA_1997,
    "Empirical fit of low-gravity tube data; the slug–annular branches of the same map are not "
    "included (constants not in hand)."))

#: Names of the closed-tube models, in the order the default chart uses them.
TUBE_MODEL_NAMES = (
    BUBBLE_SLUG_DUKLER_1988.name, SLUG_ANNULAR_DUKLER_1988.name, BUBBLE_SLUG_JAYAWARDENA_1997.name,
    SLUG_TRANSITIONAL_ZHAO_REZKALLAH_1993.name, TRANSITIONAL_ANNULAR_ZHAO_REZKALLAH_1993.name,
)
