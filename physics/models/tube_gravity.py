r"""Gas–liquid regime transitions in tubes with buoyancy: from the 1-g ground test to orbit.

The low-gravity criteria of :mod:`lowgmap.physics.models.tube` neglect buoyancy. This module adds the
published criteria that keep it, for the two orientations that have them, as boundary models
(:mod:`lowgmap.physics.models.boundary`) that take the residual acceleration ``case.g`` and the
orientation ``case.orientation`` (:class:`lowgmap.physics.case.Orientation`):

- **drift flux with a buoyant drift velocity** (Zuber & Findlay 1965), U_G = C0 j + U_gj, with the
  rise velocity of distorted bubbles (Harmathy 1960) or of Taylor bubbles (Dumitrescu 1943;
  Nicklin, Wilkes & Davidson 1962, with the surface-tension and viscosity factor of Wallis 1969):
  the void-fraction lines of Dukler et al. (1988) with the drift added, and the bubbly–slug line of
  Mishima & Ishii (1984); vertical upward flow;
- **vertical upward flow, Taitel, Bornea & Dukler (1980)**: bubble–slug (void fraction 0.25 with
  bubble slip, the dispersed-bubble line and the 0.52 packing limit, bubbly flow only in tubes wide
  enough), slug–churn (entrance length) and churn–annular (drops lifted by the gas);
- **horizontal and near-horizontal flow, Taitel & Dukler (1976)**: the equilibrium stratified level
  solved from the momentum balance in the Lockhart–Martinelli parameter X and the inclination
  parameter Y, the stratified boundary by the Kelvin–Helmholtz (F) criterion, and the
  intermittent–annular boundary at the level h/D = 0.5.

Hand-over rule (validity-based choice)
--------------------------------------
Buoyancy-inclusive ("1-g") and low-gravity criteria are two families with different data behind
them. The chart lets the **Eötvös number** Eo = (rho_L - rho_G) g D^2 / sigma choose:

- Eo < 1 (Brauner 1990: no stratification, flow patterns as in microgravity): the low-gravity lines
  define the regions, exactly as for a case without orientation; the 1-g lines of the orientation
  are drawn as comparison lines, flagged (outside validity);
- Eo >= 1: the 1-g lines of the orientation define the regions; the low-gravity lines are drawn as
  comparison lines, flagged (each already carries the validity Eo <= 1).

Every 1-g model carries the validity range Eo >= 1 (:data:`EO_HANDOVER_VALIDITY`), the complement
of the low-gravity one, so at every gravity level exactly one family is drawn solid and the other
dashed: moving g across the hand-over swaps the roles of two sets of lines that were both on the
chart, never a silent jump. :func:`handover` states the verdict in a sentence for the chart.
Orientations without a 1-g family here (vertical downward flow, inclinations beyond 10 deg from the
horizontal other than vertical upward) keep the low-gravity chart and its Eötvös warning.

How each 1-g line behaves as g -> 0 (tested in ``tests/test_tube_gravity.py``):

- drift-flux lines: U_gj -> 0, so each tends to the zero-drift void-fraction line with the same
  alpha_c and C0 (Dukler et al. 1988); the Taylor-bubble drift is exactly zero below Eo = 3.37;
- Taitel et al. (1980) bubble–slug: the bubble slip vanishes, bubbly flow needs ever wider tubes
  and turbulence disperses bubbles at any flow, so the line tends to the no-slip packing line
  alpha = 0.52 (Q_G/Q_L = 1.083), 8 % below the Dukler et al. (1988) line with its defaults;
- Taitel et al. (1980) churn–annular: U_SG ∝ g^{1/4} -> 0 (no counterpart: below Eo = 4.33 it lies
  below the We_SG = 20 line of Zhao & Rezkallah 1993, which then bounds annular flow instead);
- Taitel et al. (1980) slug–churn: the mixture velocity ∝ g^{1/2} -> 0 (no counterpart);
- Taitel & Dukler (1976) stratified boundary: Q_G ∝ g^{1/2} -> 0, the stratified region vanishes
  (no counterpart: nothing stratifies in low gravity); the intermittent–annular line of a
  horizontal tube does not depend on g.

Regime names are those of :mod:`lowgmap.physics.models.tube` plus "churn (oscillating froth)" and
"stratified (liquid along the bottom)". All flows are volumetric flow rates at local conditions
[m^3/s]; superficial velocities U_S = Q/A use the section's flow area and D its hydraulic diameter.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lowgmap.physics.case import STANDARD_GRAVITY, Orientation
from lowgmap.physics.models.boundary import Constant, ExplicitBoundary, Validity, register
from lowgmap.physics.models.tube import (ANNULAR, BUBBLE_SLUG_DUKLER_1988, BUBBLES, DUKLER_1988, EOTVOS_LIMIT,
                                         SLUGS, TUBE_MODEL_NAMES, is_circular)
from lowgmap.physics.properties.groups import conduit_diameter, positive_flows
from lowgmap.physics.roots import illinois as _illinois
from lowgmap.physics.validate import positive

__all__ = [
    "CHURN", "STRATIFIED", "EO_HANDOVER", "EO_HANDOVER_VALIDITY", "TAYLOR_BUBBLE_EO_STOP",
    "harmathy_rise_velocity", "taylor_bubble_rise_velocity", "taylor_bubble_rise_factor",
    "zuber_findlay_void_fraction", "drift_flux_gas_velocity", "kutateladze_gas_velocity",
    "bubbly_flow_min_diameter", "churn_mixture_velocity", "dispersed_bubble_curve",
    "stratified_geometry", "stratified_balance_terms", "stratified_level", "kelvin_helmholtz_froude",
    "ZuberFindlayTransition", "TaitelBubbleSlug", "TaitelSlugChurn", "TaitelChurnAnnular",
    "TaitelDuklerStratified", "TaitelDuklerIntermittentAnnular",
    "BUBBLE_SLUG_ZUBER_FINDLAY_1965", "SLUG_ANNULAR_ZUBER_FINDLAY_1965", "BUBBLE_SLUG_MISHIMA_ISHII_1984",
    "BUBBLE_SLUG_TAITEL_1980", "SLUG_CHURN_TAITEL_1980", "CHURN_ANNULAR_TAITEL_1980",
    "STRATIFIED_TAITEL_DUKLER_1976", "INTERMITTENT_ANNULAR_TAITEL_DUKLER_1976",
    "VERTICAL_UPWARD_MODEL_NAMES", "HORIZONTAL_MODEL_NAMES", "HORIZONTAL_MAX_INCLINATION",
    "gravity_family", "Handover", "handover",
]

# Regime names (descriptive phrases of our own) -------------------------------------------------
#: Large, unstable bubbles and falling liquid between slugs and annular flow (vertical flow).
CHURN = "churn (oscillating froth)"
#: Liquid running along the bottom of a horizontal tube under the gas.
STRATIFIED = "stratified (liquid along the bottom)"

# Sources ---------------------------------------------------------------------------------------
HARMATHY_1960 = ("T. Z. Harmathy, \"Velocity of large drops and bubbles in media of infinite or restricted "
                 "extent\", AIChE J. 6(2):281-288, 1960. doi:10.1002/aic.690060222 (DOI from memory)")
DUMITRESCU_1943 = ("D. T. Dumitrescu, \"Strömung an einer Luftblase im senkrechten Rohr\", Z. angew. Math. Mech. "
                   "23(3):139-149, 1943")
NICKLIN_1962 = ("D. J. Nicklin, J. O. Wilkes and J. F. Davidson, \"Two-phase flow in vertical tubes\", Trans. "
                "Inst. Chem. Eng. 40:61-68, 1962")
WALLIS_1969 = "G. B. Wallis, One-dimensional Two-phase Flow, McGraw-Hill, New York, 1969 (chapter on bubbles in tubes)"
BRETHERTON_1961 = ("F. P. Bretherton, \"The motion of long bubbles in tubes\", J. Fluid Mech. 10(2):166-188, 1961. "
                   "doi:10.1017/S0022112061000160 (DOI from memory)")
ZUBER_FINDLAY_1965 = ("N. Zuber and J. A. Findlay, \"Average volumetric concentration in two-phase flow systems\", "
                      "J. Heat Transfer 87(4):453-468, 1965. doi:10.1115/1.3689137 (DOI from memory)")
TAITEL_1980 = ("Y. Taitel, D. Bornea and A. E. Dukler, \"Modelling flow pattern transitions for steady upward "
               "gas-liquid flow in vertical tubes\", AIChE J. 26(3):345-354, 1980. doi:10.1002/aic.690260304 "
               "(issue and DOI from memory)")
MISHIMA_ISHII_1984 = ("K. Mishima and M. Ishii, \"Flow regime transition criteria for upward two-phase flow in "
                      "vertical tubes\", Int. J. Heat Mass Transfer 27(5):723-737, 1984. "
                      "doi:10.1016/0017-9310(84)90142-X (DOI from memory)")
TAITEL_DUKLER_1976 = ("Y. Taitel and A. E. Dukler, \"A model for predicting flow regime transitions in horizontal "
                      "and near horizontal gas-liquid flow\", AIChE J. 22(1):47-55, 1976. doi:10.1002/aic.690220105 "
                      "(DOI from memory)")
BARNEA_1980 = ("D. Barnea, O. Shoham, Y. Taitel and A. E. Dukler, \"Flow pattern transition for gas-liquid flow "
               "in horizontal and inclined pipes. Comparison of experimental data with theory\", Int. J. "
               "Multiphase Flow 6:217-225, 1980")

#: Suratman-number range of the low-gravity tube data (the range the low-gravity lines carry).
_SU_RANGE = tuple(v for v in BUBBLE_SLUG_DUKLER_1988.validity if v.group == "suratman")

# Hand-over ---------------------------------------------------------------------------------------
#: Eötvös number at which the 1-g family takes over from the low-gravity family (the low-gravity
#: criterion Eo < 1 of Brauner 1990, :data:`lowgmap.physics.models.tube.EOTVOS_LIMIT`).
EO_HANDOVER = EOTVOS_LIMIT

#: Validity of every 1-g line: Eo >= 1, the complement of the low-gravity lines' range.
EO_HANDOVER_VALIDITY = Validity(
    "eotvos", EO_HANDOVER, math.inf,
    "hand-over rule: buoyancy-inclusive criteria define the regions for Eo >= 1, the low-gravity ones "
    "below (Brauner 1990); their sources' data are 1-g tubes of 25-51 mm, Eo about 85-350 (from memory)")

#: Eötvös number below which a long bubble does not rise in a vertical tube closed at the top
#: (Bretherton 1961: rho g R^2 / sigma < 0.842, i.e. Eo_D < 3.37; White & Beardmore 1962).
TAYLOR_BUBBLE_EO_STOP = 3.37

#: Largest inclination from the horizontal [rad] for the horizontal family (Taitel & Dukler 1976 is
#: for "near horizontal" flow; Barnea et al. 1980 compared it with data up to 10 deg, from memory).
HORIZONTAL_MAX_INCLINATION = math.radians(10.0)


# Formulas ----------------------------------------------------------------------------------------

def _out(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def harmathy_rise_velocity(g, sigma, rho_l, rho_g, coefficient=1.53):
    r"""Terminal rise velocity of a distorted bubble in a still liquid (Harmathy 1960).

    .. math:: U_\infty = k \left(\frac{g\, \sigma\, (\rho_L - \rho_G)}{\rho_L^2}\right)^{1/4}, \qquad k = 1.53

    Parameters
    ----------
    g : float or array   acceleration along the rise direction [m/s^2], >= 0
    sigma : float        surface tension [N/m]
    rho_l, rho_g : float liquid and gas densities [kg/m^3]
    coefficient : float  k [-] (1.53, Harmathy 1960)

    Returns
    -------
    float or array   U_inf [m/s]; 0 at g = 0

    Notes
    -----
    For bubbles in the distorted (ellipsoidal, wobbling) range, whose velocity hardly depends on
    size: millimetre to centimetre air bubbles in water at 1 g. It does not describe small
    spherical bubbles rising in Stokes flow, which is what bubbles become at very low g: there it
    overestimates the rise velocity. U_inf ∝ g^{1/4}.

    References
    ----------
    Harmathy (1960), AIChE J. 6(2):281-288.

    Examples
    --------
    Air-water near 20 degC at standard gravity ([calc] from the formula):

    >>> round(harmathy_rise_velocity(9.80665, 0.07274, 998.21, 1.2041), 4)
    0.2501
    """
    g = np.asarray(g, dtype=float)
    return _out(coefficient * np.power(g * sigma * (rho_l - rho_g) / rho_l ** 2, 0.25))


def taylor_bubble_rise_velocity(g, diameter, rho_l, rho_g, coefficient=0.35):
    r"""Rise velocity of a long (Taylor) bubble in a vertical tube of still liquid, inertia dominated.

    .. math:: U_{TB} = k \sqrt{g\, D\, (\rho_L - \rho_G)/\rho_L}, \qquad k = 0.35

    Parameters
    ----------
    g : float or array   acceleration along the tube [m/s^2], >= 0
    diameter : float     tube diameter D [m]
    rho_l, rho_g : float liquid and gas densities [kg/m^3]
    coefficient : float  k [-] (0.35: Dumitrescu 1943 found 0.351 by potential flow, Nicklin et al.
                         1962 use 0.35)

    Returns
    -------
    float or array   U_TB [m/s]

    Notes
    -----
    Valid when neither surface tension nor viscosity matters (Eo = Δρ g D²/σ above about 40 and
    a large inverse viscosity number); multiply by :func:`taylor_bubble_rise_factor` otherwise.

    References
    ----------
    Dumitrescu (1943), Z. angew. Math. Mech. 23:139-149; Nicklin, Wilkes & Davidson (1962), Trans.
    Inst. Chem. Eng. 40:61-68.

    Examples
    --------
    Air-water at standard gravity in 25.4 mm and 50.8 mm tubes ([calc] from the formula):

    >>> round(taylor_bubble_rise_velocity(9.80665, 0.0254, 998.21, 1.2041), 4)
    0.1746
    >>> round(taylor_bubble_rise_velocity(9.80665, 0.0508, 998.21, 1.2041), 4)
    0.2469
    """
    g = np.asarray(g, dtype=float)
    return _out(coefficient * np.sqrt(g * diameter * (rho_l - rho_g) / rho_l))


def taylor_bubble_rise_factor(eotvos, viscosity_number):
    r"""Reduction of the Taylor-bubble rise velocity by surface tension and viscosity (Wallis 1969).

    .. math::
        \phi = \left[1 - e^{-0.01 N_f / 0.345}\right] \left[1 - e^{(3.37 - Eo)/m}\right], \qquad
        m = \begin{cases} 10 & N_f > 250 \\ 69 N_f^{-0.35} & 18 \le N_f \le 250 \\ 25 & N_f < 18 \end{cases}

    with :math:`Eo = \Delta\rho g D^2/\sigma` and :math:`N_f = \sqrt{D^3 g \Delta\rho\, \rho_L}/\mu_L`;
    clipped at 0 (no rise for Eo <= 3.37).

    Parameters
    ----------
    eotvos : float or array           Eo [-]
    viscosity_number : float or array N_f [-]

    Returns
    -------
    float or array   phi in [0, 1) [-]; U_TB = 0.35 sqrt(g D Δρ/ρ_L) phi

    Notes
    -----
    Wallis (1969) correlated the data with the prefactor 0.345; here the factor multiplies
    :func:`taylor_bubble_rise_velocity` (0.35), a 1.4 % difference in the inertial limit. The zero
    at Eo = 3.37 is the result of Bretherton (1961) (rho g R^2/sigma = 0.842) and White & Beardmore
    (1962): a long bubble does not rise in a narrower tube. The form and constants are from memory.

    References
    ----------
    Wallis (1969), One-dimensional Two-phase Flow; Bretherton (1961), J. Fluid Mech. 10:166-188.

    Examples
    --------
    >>> round(taylor_bubble_rise_factor(87.0, 1.3e4), 4)      # air-water, 25.4 mm, 1 g: hardly any correction
    0.9998
    >>> taylor_bubble_rise_factor(3.0, 1.3e4)                  # below Eo = 3.37 the bubble stays put
    0.0
    """
    eo = np.asarray(eotvos, dtype=float)
    nf = np.asarray(viscosity_number, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        m = np.where(nf > 250.0, 10.0, np.where(nf < 18.0, 25.0, 69.0 * np.power(np.maximum(nf, 1e-300), -0.35)))
        visc = 1.0 - np.exp(-0.01 * nf / 0.345)
        surf = 1.0 - np.exp((TAYLOR_BUBBLE_EO_STOP - eo) / m)
    return _out(np.clip(visc * surf, 0.0, 1.0))


def zuber_findlay_void_fraction(u_sl, u_sg, c0, u_gj):
    r"""Void fraction from the drift-flux relation (Zuber & Findlay 1965).

    .. math:: \alpha = \frac{U_{SG}}{C_0 (U_{SL} + U_{SG}) + U_{gj}}

    Parameters
    ----------
    u_sl, u_sg : float or array   superficial liquid and gas velocities [m/s]
    c0 : float                    distribution parameter [-]
    u_gj : float or array         drift velocity [m/s] (0 in low gravity)

    Returns
    -------
    float or array   alpha [-]

    Examples
    --------
    >>> round(zuber_findlay_void_fraction(1.0, 1.0, 1.2, 0.0), 4)     # no drift: the low-g value
    0.4167
    >>> round(zuber_findlay_void_fraction(1.0, 1.0, 1.2, 0.25), 4)
    0.3774
    """
    return _out(np.asarray(u_sg, dtype=float) /
                (c0 * (np.asarray(u_sl, dtype=float) + np.asarray(u_sg, dtype=float)) + np.asarray(u_gj, dtype=float)))


def drift_flux_gas_velocity(u_sl, alpha, c0, u_gj):
    r"""Superficial gas velocity at which the drift-flux void fraction equals ``alpha``.

    .. math:: U_{SG} = \frac{\alpha\,(C_0 U_{SL} + U_{gj})}{1 - C_0 \alpha}

    Parameters
    ----------
    u_sl : float or array   superficial liquid velocity [m/s]
    alpha : float           void fraction on the line [-]
    c0 : float              distribution parameter [-], with C0 alpha < 1
    u_gj : float or array   drift velocity [m/s]

    Returns
    -------
    float or array   U_SG [m/s]; NaN where it is not > 0 (no co-current line)

    Notes
    -----
    With U_gj = 0 this is the low-gravity line of Dukler et al. (1988). Taitel et al. (1980) write
    the bubble–slug line as U_SL = 3.0 U_SG - 1.15 (g σ Δρ/ρ_L²)^{1/4}: the case alpha = 0.25,
    C0 = 1, U_gj = (1 - alpha) 1.53 (g σ Δρ/ρ_L²)^{1/4}.

    Examples
    --------
    >>> round(drift_flux_gas_velocity(0.3, 0.25, 1.0, 0.0), 6)        # U_SL = 3 U_SG
    0.1
    """
    u = alpha * (c0 * np.asarray(u_sl, dtype=float) + np.asarray(u_gj, dtype=float)) / (1.0 - c0 * alpha)
    with np.errstate(invalid="ignore"):
        return _out(np.where(u > 0, u, np.nan))


def kutateladze_gas_velocity(g, sigma, rho_l, rho_g, kutateladze=3.1):
    r"""Smallest superficial gas velocity that lifts the largest drops: annular flow (Taitel et al. 1980).

    .. math:: U_{SG} = Ku\, \frac{(\sigma\, g\, (\rho_L - \rho_G))^{1/4}}{\rho_G^{1/2}}, \qquad Ku = 3.1

    Parameters
    ----------
    g : float or array   acceleration along the tube [m/s^2]
    sigma : float        surface tension [N/m]
    rho_l, rho_g : float densities [kg/m^3]
    kutateladze : float  Ku [-] (3.1, Taitel et al. 1980)

    Returns
    -------
    float or array   U_SG [m/s]

    Notes
    -----
    In terms of the gas Weber number, Ku = 3.1 is We_SG = Ku² Eo^{1/2} = 9.61 Eo^{1/2}: the line
    meets the low-gravity line We_SG = 20 (Zhao & Rezkallah 1993) at Eo = (20/9.61)² = 4.33.

    Examples
    --------
    Air-water at standard gravity ([calc] from the formula):

    >>> round(kutateladze_gas_velocity(9.80665, 0.07274, 998.21, 1.2041), 2)
    14.59
    """
    g = np.asarray(g, dtype=float)
    return _out(kutateladze * np.power(sigma * g * (rho_l - rho_g), 0.25) / math.sqrt(rho_g))


def bubbly_flow_min_diameter(g, sigma, rho_l, rho_g, coefficient=19.01):
    r"""Smallest tube diameter in which bubbly flow exists at low liquid flow (Taitel et al. 1980).

    .. math:: D_{min} = 19.01 \sqrt{\frac{(\rho_L - \rho_G)\,\sigma}{\rho_L^2\, g}}

    In narrower tubes the Taylor bubbles rise slower than the small bubbles, which catch up with them
    and coalesce: there is no bubbly flow below the dispersed-bubble line. The coefficient is
    (1.53/0.35)² = 19.1 from the two rise velocities; the paper gives 19.01 (from memory).

    Parameters
    ----------
    g : float or array   acceleration along the tube [m/s^2]; 0 gives an infinite diameter
    sigma, rho_l, rho_g : float   fluid properties (SI)
    coefficient : float  [-]

    Returns
    -------
    float or array   D_min [m]

    Examples
    --------
    Air-water at standard gravity: about 5 cm ([calc] from the formula):

    >>> round(bubbly_flow_min_diameter(9.80665, 0.07274, 998.21, 1.2041) * 1e3, 1)
    51.8
    """
    g = np.asarray(g, dtype=float)
    with np.errstate(divide="ignore"):
        return _out(coefficient * np.sqrt((rho_l - rho_g) * sigma / (rho_l ** 2 * g)))


def churn_mixture_velocity(g, diameter, length, coefficient=40.6, offset=0.22):
    r"""Mixture velocity above which the flow is churn at a distance ``length`` from the inlet (Taitel et al. 1980).

    Churn flow is the entrance region of slug flow, of length
    :math:`\ell_E / D = 40.6\,(j/\sqrt{gD} + 0.22)`; at the distance L the flow is churn when
    :math:`\ell_E > L`:

    .. math:: j_c = \sqrt{g D}\left(\frac{L}{40.6\, D} - 0.22\right)

    Parameters
    ----------
    g : float or array   acceleration along the tube [m/s^2]
    diameter : float     D [m]
    length : float       distance from the inlet L [m] (the conduit length)
    coefficient, offset : float   40.6 and 0.22 [-] (Taitel et al. 1980, from memory)

    Returns
    -------
    float or array   j_c [m/s]; <= 0 means churn at any flow (tube shorter than 8.9 D)

    Examples
    --------
    >>> round(churn_mixture_velocity(9.80665, 0.0127, 1.5), 3)        # [calc]
    0.949
    """
    g = np.asarray(g, dtype=float)
    return _out(np.sqrt(g * diameter) * (length / (coefficient * diameter) - offset))


def dispersed_bubble_curve(gas_fraction, g, sigma, rho_l, rho_g, mu_l, diameter):
    r"""The dispersed-bubble line of Taitel et al. (1980), parametrised by the no-slip gas fraction.

    Turbulence breaks the bubbles below the size that deforms and coalesces when

    .. math::
        2\left[\frac{0.4\,\sigma}{(\rho_L - \rho_G)\, g}\right]^{1/2}
        \left(\frac{\rho_L}{\sigma}\right)^{3/5} \left(\frac{2 f}{D}\right)^{2/5} j^{6/5}
        = 0.725 + 4.15\, \lambda^{1/2},
        \qquad f = 0.046\,(j D \rho_L/\mu_L)^{-0.2}

    (Hinze's largest stable drop with a void-fraction correction, the dissipation per unit mass
    2 f j^3/D with the Fanning factor f, and λ = U_SG/j). For a given λ the left side is a power of
    j alone, so j, U_SL = (1 - λ) j and U_SG = λ j follow in closed form.

    Parameters
    ----------
    gas_fraction : float or array   λ = U_SG/(U_SL + U_SG) [-], in [0, 1)
    g, sigma, rho_l, rho_g, mu_l, diameter : float   SI

    Returns
    -------
    (u_sl, u_sg) : arrays [m/s]; the flow is dispersed bubbles at larger mixture velocity

    Notes
    -----
    The mixture is taken turbulent (Blasius factor) as in the source; the line is used only below
    the packing limit λ = 0.52.

    References
    ----------
    Taitel, Bornea & Dukler (1980), AIChE J. 26(3):345-354 (equation as recalled, from memory).

    Examples
    --------
    >>> u_sl, u_sg = dispersed_bubble_curve(0.0, 9.80665, 0.07274, 998.21, 1.2041, 1.0016e-3, 0.0508)
    >>> round(float(u_sl), 2)                                  # [calc]
    1.26
    """
    lam = np.asarray(gas_fraction, dtype=float)
    g = np.asarray(g, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = (2.0 * np.sqrt(0.4 * sigma / ((rho_l - rho_g) * g)) * (rho_l / sigma) ** 0.6
             * (2.0 * 0.046 / diameter) ** 0.4 * (diameter * rho_l / mu_l) ** -0.08)
        j = np.power((0.725 + 4.15 * np.sqrt(lam)) / k, 1.0 / 1.12)
    return _out((1.0 - lam) * j), _out(lam * j)


# Stratified flow in a circular tube (Taitel & Dukler 1976) ------------------------------------

def stratified_geometry(h):
    r"""Dimensionless geometry of stratified flow in a circular tube at liquid level h = h_L/D.

    .. math::
        \tilde A_L = \tfrac14\left[\pi - \cos^{-1}(2h-1) + (2h-1)\sqrt{1-(2h-1)^2}\right], \quad
        \tilde A_G = \tfrac{\pi}{4} - \tilde A_L, \\
        \tilde S_L = \pi - \cos^{-1}(2h-1), \quad \tilde S_G = \cos^{-1}(2h-1), \quad
        \tilde S_i = \sqrt{1-(2h-1)^2}

    (areas over D², perimeters over D).

    Parameters
    ----------
    h : float or array   h_L/D in (0, 1)

    Returns
    -------
    tuple of arrays   (A_L, A_G, S_L, S_G, S_i) [-]

    Examples
    --------
    >>> [round(float(v), 6) for v in stratified_geometry(0.5)]
    [0.392699, 0.392699, 1.570796, 1.570796, 1.0]
    """
    c = 2.0 * np.asarray(h, dtype=float) - 1.0
    s = np.sqrt(np.clip(1.0 - c * c, 0.0, None))
    ac = np.arccos(np.clip(c, -1.0, 1.0))
    a_l = 0.25 * (np.pi - ac + c * s)
    a_g = 0.25 * (ac - c * s)
    return a_l, a_g, np.pi - ac, ac, s


def stratified_balance_terms(h, n=0.2, m=0.2):
    r"""Liquid and gas terms of the dimensionless momentum balance of stratified flow (Taitel & Dukler 1976).

    The level h = h_L/D satisfies :math:`X^2 \mathcal{L}(h) - \mathcal{G}(h) - 4Y = 0` with

    .. math::
        \mathcal{L} = (\tilde u_L \tilde D_L)^{-n}\, \tilde u_L^2\, \frac{\tilde S_L}{\tilde A_L}, \qquad
        \mathcal{G} = (\tilde u_G \tilde D_G)^{-m}\, \tilde u_G^2
        \left(\frac{\tilde S_G}{\tilde A_G} + \frac{\tilde S_i}{\tilde A_L} + \frac{\tilde S_i}{\tilde A_G}\right)

    :math:`\tilde u_L = \tilde A/\tilde A_L`, :math:`\tilde u_G = \tilde A/\tilde A_G`,
    :math:`\tilde D_L = 4\tilde A_L/\tilde S_L`, :math:`\tilde D_G = 4\tilde A_G/(\tilde S_G + \tilde S_i)`,
    :math:`\tilde A = \pi/4`; n, m are the exponents of the liquid and gas friction factors
    f = C Re^{-n} (0.2 turbulent, 1 laminar); the interfacial friction equals the gas wall friction.

    Parameters
    ----------
    h : float or array   h_L/D in (0, 1)
    n, m : float or array   friction exponents of liquid and gas [-]

    Returns
    -------
    (L, G) : arrays [-]

    Examples
    --------
    Turbulent liquid and gas, h/D = 0.5: X = sqrt(G/L) = 1.58 ([calc]; Taitel & Dukler 1976 quote
    X = 1.6 for this level, from memory):

    >>> L, G = stratified_balance_terms(0.5)
    >>> round(float(np.sqrt(G / L)), 3)
    1.584
    """
    geom = stratified_geometry(h)
    return _liquid_term(geom, n), _gas_term(geom, m)


def _liquid_term(geom, n):
    """The liquid term L of :func:`stratified_balance_terms` from the geometry of :func:`stratified_geometry`."""
    a_l, _, s_l, _, _ = geom
    u_l = (math.pi / 4.0) / a_l
    return (u_l * (4.0 * a_l / s_l)) ** (-np.asarray(n, dtype=float)) * u_l ** 2 * s_l / a_l


def _gas_term(geom, m):
    """The gas term G of :func:`stratified_balance_terms` from the geometry of :func:`stratified_geometry`."""
    a_l, a_g, _, s_g, s_i = geom
    u_g = (math.pi / 4.0) / a_g
    return (u_g * (4.0 * a_g / (s_g + s_i))) ** (-np.asarray(m, dtype=float)) * u_g ** 2 * (s_g / a_g + s_i / a_l
                                                                                          + s_i / a_g)


_H_MIN, _H_MAX = 1e-4, 1.0 - 1e-4


def _h_grid(n):
    t = (np.arange(n) + 0.5) / n
    return _H_MIN + (_H_MAX - _H_MIN) * 0.5 * (1.0 - np.cos(np.pi * t))


def stratified_level(x, y=0.0, n=0.2, m=0.2):
    r"""Equilibrium liquid level h_L/D of stratified flow (Taitel & Dukler 1976).

    Solves :math:`X^2 \mathcal{L}(h) - \mathcal{G}(h) - 4Y = 0` (:func:`stratified_balance_terms`) for h,
    with :math:`X^2 = |dP/dx|_{SL}/|dP/dx|_{SG}` (Lockhart–Martinelli) and
    :math:`Y = (\rho_L - \rho_G) g \sin\alpha / |dP/dx|_{SG}` (alpha the inclination, positive for
    downward flow as in the source).

    Parameters
    ----------
    x : float or array   Lockhart–Martinelli parameter X [-], > 0
    y : float or array   inclination parameter Y [-] (0 horizontal; < 0 upward flow)
    n, m : float         friction exponents of liquid and gas [-]

    Returns
    -------
    float or array   h_L/D in (0, 1); NaN where the balance has no root. Where it has several
    (upward inclination), the lowest level is returned.

    Notes
    -----
    Roots are bracketed on a grid of 400 levels clustered at both walls and refined by bisection to
    1e-12.

    Examples
    --------
    >>> round(stratified_level(1.5838621502), 6)       # inverse of the doctest of stratified_balance_terms
    0.5
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    x, y = np.broadcast_arrays(x, y)
    shape = x.shape
    xf, yf = x.ravel(), y.ravel()
    hg = _h_grid(400)

    def phi(h, xx, yy):
        big_l, big_g = stratified_balance_terms(h, n, m)
        return xx * xx * big_l - big_g - 4.0 * yy

    vals = phi(hg[None, :], xf[:, None], yf[:, None])
    with np.errstate(invalid="ignore"):
        change = (vals[:, :-1] > 0) & (vals[:, 1:] <= 0)
    has = change.any(axis=1) & np.isfinite(xf) & (xf > 0)
    k = np.argmax(change, axis=1)
    lo, hi = hg[k], hg[np.minimum(k + 1, hg.size - 1)]
    for _ in range(45):
        mid = 0.5 * (lo + hi)
        pos = phi(mid, xf, yf) > 0
        lo = np.where(pos, mid, lo)
        hi = np.where(pos, hi, mid)
    out = np.where(has, 0.5 * (lo + hi), np.nan).reshape(shape)
    return _out(out)


def kelvin_helmholtz_froude(h):
    r"""Froude number on the stratified boundary at level h (Taitel & Dukler 1976, criterion F).

    Finite waves grow (the stratified flow ends) when

    .. math:: F^2 \left[\frac{1}{(1-h)^2}\, \frac{\tilde u_G^2\, d\tilde A_L/dh}{\tilde A_G}\right] \ge 1,
              \qquad F = \sqrt{\frac{\rho_G}{\rho_L - \rho_G}}\, \frac{U_{SG}}{\sqrt{D g \cos\beta}}

    so on the boundary :math:`F = (1-h)\, \tilde A_G^{3/2} / (\tilde A \sqrt{\tilde S_i})` (since
    :math:`d\tilde A_L/dh = \tilde S_i`).

    Parameters
    ----------
    h : float or array   h_L/D in (0, 1)

    Returns
    -------
    float or array   F on the boundary [-]

    Examples
    --------
    >>> round(kelvin_helmholtz_froude(0.5), 4)           # [calc]: 0.5 (pi/8)^1.5 / (pi/4)
    0.1567
    """
    return _out(_froude(np.asarray(h, dtype=float), stratified_geometry(h)))


def _froude(h, geom):
    """:func:`kelvin_helmholtz_froude` at levels h (array) from their geometry (:func:`stratified_geometry`)."""
    _, a_g, _, _, s_i = geom
    with np.errstate(divide="ignore"):
        return (1.0 - h) * a_g ** 1.5 / ((math.pi / 4.0) * np.sqrt(s_i))


def _friction(re, re_laminar):
    """Fanning friction law C Re^-n: laminar (16, 1) below ``re_laminar``, Blasius (0.046, 0.2) above."""
    lam = re < re_laminar
    return np.where(lam, 16.0, 0.046), np.where(lam, 1.0, 0.2)


def _superficial_gradient(rho, mu, u, d, re_laminar):
    """|dP/dx| of one phase flowing alone [Pa/m], and its friction exponent."""
    re = rho * u * d / mu
    c, n = _friction(re, re_laminar)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return 2.0 * c * rho * u * u * np.power(re, -n) / d, n


# Orientation and hand-over ----------------------------------------------------------------------

def _orientation(case) -> Orientation:
    o = getattr(case, "orientation", None)
    return o if isinstance(o, Orientation) else Orientation.unspecified()


def _is_vertical_up(case) -> bool:
    return _orientation(case).kind == Orientation.VERTICAL_UP


def _is_near_horizontal(case) -> bool:
    o = _orientation(case)
    return o.is_known and abs(float(o.angle_rad)) <= HORIZONTAL_MAX_INCLINATION + 1e-12


def _eotvos(case) -> float:
    f = case.fluid
    return (f.rho_l - f.rho_g) * case.g * conduit_diameter(case) ** 2 / f.sigma


# Models -----------------------------------------------------------------------------------------

class _GravityTube(ExplicitBoundary):
    """Shared behaviour: closed sections only, a required orientation, the hand-over validity."""

    low_gravity = False
    needs = "vertical upward"     # or "near horizontal"
    circular_only = False

    def applies_to(self, case):
        s = case.section
        if getattr(s, "is_open", False):
            return (f"{self.name}: open section ({getattr(s, 'kind', 'open')}); this criterion is for closed "
                    f"tubes and ducts")
        if self.circular_only and not is_circular(s):
            return f"{self.name}: the stratified-flow geometry is that of a circular tube; the section is {s.kind}"
        o = _orientation(case)
        if self.needs == "vertical upward" and o.kind != Orientation.VERTICAL_UP:
            return f"{self.name}: needs vertical upward flow; the case has {o.describe()}"
        if self.needs == "near horizontal" and not _is_near_horizontal(case):
            return (f"{self.name}: needs horizontal flow or an inclination within "
                    f"{math.degrees(HORIZONTAL_MAX_INCLINATION):g} deg of it; the case has {o.describe()}")
        return None

    @staticmethod
    def _ql(ql):
        ql = np.asarray(ql, dtype=float)
        return np.where(np.isfinite(ql) & (ql > 0), ql, np.nan)

    @staticmethod
    def _axial_g(case) -> float:
        o = _orientation(case)
        return case.g * (o.axial_fraction if o.is_known else 1.0)


class ZuberFindlayTransition(_GravityTube):
    r"""Transition at a critical void fraction, drift-flux relation with a buoyant drift velocity.

    .. math::
        U_G = \frac{U_{SG}}{\alpha} = C_0 (U_{SL} + U_{SG}) + U_{gj}
        \;\Rightarrow\; U_{SG} = \frac{\alpha_c\,(C_0 U_{SL} + U_{gj})}{1 - C_0 \alpha_c}

    with :math:`C_0 = c_0 - c_\rho \sqrt{\rho_G/\rho_L}` and, for ``drift="bubble"``,
    :math:`U_{gj} = k\,(g\sigma\Delta\rho/\rho_L^2)^{1/4} (1-\alpha_c)^{n}` (Harmathy 1960), for
    ``drift="taylor"``, :math:`U_{gj} = k\sqrt{g D \Delta\rho/\rho_L}\,\phi(Eo, N_f)` (Dumitrescu 1943,
    Nicklin et al. 1962, factor of Wallis 1969). g is the component along the flow (vertical
    upward flow). With g = 0 the line is the zero-drift line of Dukler et al. (1988) with the same
    alpha_c and C0.

    Constants: ``alpha_c``, ``c0``, ``c0_density`` (c_rho), ``rise_coefficient`` (k) and, for bubbles,
    ``drift_exponent`` (n).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.case import Orientation
    >>> case = example_case(g=0.0, orientation=Orientation.vertical_up())
    >>> round(float(BUBBLE_SLUG_ZUBER_FINDLAY_1965.qg_of_ql(case, 1e-5)) / 1e-5, 4)   # = Dukler line at g = 0
    1.1739
    """

    def __init__(self, name, label, regime_below, regime_above, drift: str, constants, citation, validity,
                 notes=""):
        if drift not in ("bubble", "taylor"):
            raise ValueError(f"drift must be 'bubble' or 'taylor', got {drift!r}")
        self.name = name
        self.label = label
        self.regime_below = regime_below
        self.regime_above = regime_above
        self.drift = drift
        self.constants = tuple(constants)
        self.citation = citation
        self.validity = tuple(validity)
        self.notes = notes
        self.check_constants(self.defaults)

    def check_constants(self, values):
        p = values["alpha_c"] * values["c0"]
        if not p < 1.0:
            raise ValueError(f"{self.name}: constants c0 * alpha_c must be < 1 for the void fraction to reach "
                             f"alpha_c, got {values['c0']:g} * {values['alpha_c']:g} = {p:.4g}")

    def drift_velocity(self, case, **consts) -> float:
        """Drift velocity U_gj at the case's gravity and orientation [m/s] (0 at g = 0)."""
        c = self.resolve_constants(consts)
        f = case.fluid
        g = max(self._axial_g(case), 0.0)
        if self.drift == "bubble":
            u = harmathy_rise_velocity(g, f.sigma, f.rho_l, f.rho_g, c["rise_coefficient"])
            return float(u * (1.0 - c["alpha_c"]) ** c["drift_exponent"])
        d = conduit_diameter(case)
        drho = f.rho_l - f.rho_g
        eo = drho * g * d * d / f.sigma
        nf = math.sqrt(d ** 3 * g * drho * f.rho_l) / f.mu_l
        return float(taylor_bubble_rise_velocity(g, d, f.rho_l, f.rho_g, c["rise_coefficient"])
                     * taylor_bubble_rise_factor(eo, nf))

    def distribution_parameter(self, case, **consts) -> float:
        """C0 = c0 - c0_density sqrt(rho_G/rho_L) [-]."""
        c = self.resolve_constants(consts)
        return c["c0"] - c.get("c0_density", 0.0) * math.sqrt(case.fluid.rho_g / case.fluid.rho_l)

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        area = float(case.section.area)
        u = drift_flux_gas_velocity(self._ql(ql) / area, c["alpha_c"], self.distribution_parameter(case, **c),
                                    self.drift_velocity(case, **c))
        return _out(np.asarray(u) * area)


class TaitelBubbleSlug(_GravityTube):
    r"""Bubble–slug boundary of vertical upward flow (Taitel, Bornea & Dukler 1980).

    The upper edge of the bubble region (bubbly and dispersed-bubble flow) at a given liquid flow:

    .. math::
        U_{SG} = \max\Big(U_{SG}^{(0.25)},\; \min\big(U_{SG}^{DB},\, U_{SG}^{(0.52)}\big)\Big)

    - bubbly flow, only in tubes with D > D_min (:func:`bubbly_flow_min_diameter`): void fraction
      alpha_c = 0.25 with bubbles slipping at U_0 = 1.53 (gσΔρ/ρ_L²)^{1/4},
      :math:`U_{SL} = U_{SG}(1-\alpha_c)/\alpha_c - (1-\alpha_c) U_0`, i.e.
      U_SL = 3.0 U_SG - 1.15 (gσΔρ/ρ_L²)^{1/4};
    - dispersed bubbles where turbulence breaks them (:func:`dispersed_bubble_curve`): the first
      gas fraction, from zero up, at which the breakage condition fails;
    - never above the packing limit alpha = 0.52 without slip, U_SG = 0.52/0.48 U_SL.

    Where neither applies (narrow tube, mixture too slow to disperse the bubbles) the line has no
    point: the flow is slug flow from the smallest gas flow.

    Constants: ``alpha_c`` (0.25), ``rise_coefficient`` (1.53), ``packing`` (0.52),
    ``bubbly_diameter_coefficient`` (19.01).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> import math
    >>> case = example_case(Circle(0.0635), g=9.80665, orientation=Orientation.vertical_up())   # 2.5 in
    >>> area = math.pi * 0.0635 ** 2 / 4
    >>> round(float(BUBBLE_SLUG_TAITEL_1980.qg_of_ql(case, 0.3 * area)) / area, 4)   # 0.3/3 + U_0/4 [m/s]
    0.1625
    """

    def __init__(self):
        self.name = "bubble_slug_taitel_1980"
        self.label = "bubble–slug, vertical upflow (Taitel et al. 1980)"
        self.regime_below = BUBBLES
        self.regime_above = SLUGS
        self.citation = TAITEL_1980 + "; rise velocity: " + HARMATHY_1960
        self.constants = (
            Constant("alpha_c", 0.25, "-", "Taitel et al. (1980): bubbles coalesce into slugs at a void fraction "
                     "of 0.25 (from memory)", 0.05, 0.5, "critical void fraction of bubbly flow"),
            Constant("rise_coefficient", 1.53, "-", "Harmathy (1960)", 0.5, 3.0,
                     "k in the bubble rise velocity U_0 = k (g sigma drho / rho_L^2)^(1/4)"),
            Constant("packing", 0.52, "-", "Taitel et al. (1980): densest packing of dispersed bubbles "
                     "(from memory)", 0.3, 0.74, "void fraction above which bubbles cannot stay dispersed"),
            Constant("bubbly_diameter_coefficient", 19.01, "-", "Taitel et al. (1980), from memory "
                     "((1.53/0.35)^2 = 19.1 from the rise velocities)", 1.0, 100.0,
                     "D_min = coefficient sqrt(drho sigma / (rho_L^2 g)) for bubbly flow"),
        )
        self.validity = (EO_HANDOVER_VALIDITY,)
        self.notes = ("Bubbles slip upward; in tubes narrower than D_min (about 5 cm for air-water at 1 g) "
                      "there is no bubbly flow, only dispersed bubbles at high liquid flow. Fully developed "
                      "flow in a vertical tube.")

    def _pieces(self, case, u_sl, c):
        f = case.fluid
        d = conduit_diameter(case)
        g = max(self._axial_g(case), 0.0)
        a = c["alpha_c"]
        u0 = harmathy_rise_velocity(g, f.sigma, f.rho_l, f.rho_g, c["rise_coefficient"])
        bubbly = d > bubbly_flow_min_diameter(g, f.sigma, f.rho_l, f.rho_g, c["bubbly_diameter_coefficient"])
        u_025 = np.full(u_sl.shape, np.nan) if not bubbly else a * (u_sl / (1.0 - a) + u0)
        pk = c["packing"]
        u_052 = pk / (1.0 - pk) * u_sl
        u_db = self._dispersed_gas_velocity(case, u_sl, pk)
        return u_025, u_db, u_052

    def _dispersed_gas_velocity(self, case, u_sl, packing):
        """U_SG where the dispersed-bubble condition first fails at U_SL, for gas fractions up to the packing
        limit: +inf where it holds up to the limit, NaN where it fails already at zero gas."""
        f = case.fluid
        d = conduit_diameter(case)
        g = max(self._axial_g(case), 0.0)
        u_sl = np.asarray(u_sl, dtype=float)
        ok = np.isfinite(u_sl) & (u_sl > 0)
        if g <= 0:                         # no buoyancy: bubbles stay dispersed up to the packing limit
            return np.where(ok, np.inf, np.nan)
        out = np.full(u_sl.shape, np.nan)
        if not ok.any():
            return out

        def excess(lmb, usl):
            # > 0 where turbulence keeps the bubbles dispersed at gas fraction lmb (above the line's U_SL)
            us, _ = dispersed_bubble_curve(lmb, g, f.sigma, f.rho_l, f.rho_g, f.mu_l, d)
            return np.log(usl) - np.log(us)

        us = u_sl[ok]
        lam = np.linspace(0.0, packing, 65)
        vals = excess(lam[None, :], us[:, None])
        fails = vals <= 0
        any_fail = fails.any(axis=1)
        k = np.argmax(fails, axis=1)
        rows = np.arange(k.size)
        km = np.maximum(k - 1, 0)
        lo, hi = lam[km], lam[k]
        # the first crossing, from the grid bracket: -excess goes from < 0 (dispersed) to >= 0 (fails); Illinois
        # false position converges in a few steps where bisection took 50 (this line is sampled thousands of
        # times per chart)
        with np.errstate(invalid="ignore", divide="ignore"):
            lam1 = _illinois(lambda x, idx: -excess(x, us[idx]), lo, hi, -vals[rows, km], -vals[rows, k],
                             iterations=60, xtol=0.0, rtol=1e-15)
        u_sg = np.where(any_fail, lam1 / (1.0 - lam1) * us, np.inf)
        out[ok] = np.where(vals[:, 0] > 0, u_sg, np.nan)
        return out

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        area = float(case.section.area)
        u_sl = self._ql(ql) / area
        u_025, u_db, u_052 = self._pieces(case, u_sl, c)
        with np.errstate(invalid="ignore"):
            disp = np.where(np.isnan(u_db), np.nan, np.minimum(u_db, u_052))   # capped by the packing limit
        out = np.fmax(u_025, disp)           # NaN only where neither branch exists
        return _out(out * area)

    def breakpoints(self, case, **consts):
        """Liquid flows where the dispersed-bubble branch starts and where it meets the packing limit [m^3/s]."""
        c = self.resolve_constants(consts)
        f = case.fluid
        g = max(self._axial_g(case), 0.0)
        if g <= 0:
            return np.empty(0)
        area = float(case.section.area)
        pk = c["packing"]
        u0, _ = dispersed_bubble_curve(0.0, g, f.sigma, f.rho_l, f.rho_g, f.mu_l, conduit_diameter(case))
        up, _ = dispersed_bubble_curve(pk, g, f.sigma, f.rho_l, f.rho_g, f.mu_l, conduit_diameter(case))
        return np.array([float(u0), float(up)]) * area


class TaitelSlugChurn(_GravityTube):
    r"""Slug–churn boundary of vertical upward flow: the entrance length of slug flow (Taitel et al. 1980).

    .. math:: Q_L + Q_G = A\, j_c, \qquad j_c = \sqrt{gD}\left(\frac{L}{40.6\,D} - 0.22\right)

    (:func:`churn_mixture_velocity`, L the conduit length): churn above, slugs below. When
    j_c <= 0 (a tube shorter than 8.9 D) the flow is churn wherever it is not bubbly.

    Constants: ``entrance_coefficient`` (40.6), ``entrance_offset`` (0.22).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> case = example_case(Circle(0.0127), g=9.80665, length=1.5, orientation=Orientation.vertical_up())
    >>> round(SLUG_CHURN_TAITEL_1980.critical_mixture_velocity(case), 3)      # j_c [m/s]
    0.949
    >>> qg = SLUG_CHURN_TAITEL_1980.qg_of_ql(case, 1e-5)
    >>> abs(float(SLUG_CHURN_TAITEL_1980.implicit(case, 1e-5, qg))) < 1e-12
    True
    """

    def __init__(self):
        self.name = "slug_churn_taitel_1980"
        self.label = "slug–churn, entrance length (Taitel et al. 1980)"
        self.regime_below = SLUGS
        self.regime_above = CHURN
        self.citation = TAITEL_1980
        self.constants = (
            Constant("entrance_coefficient", 40.6, "-", "Taitel et al. (1980), from memory", 1.0, 500.0,
                     "c1 in the entrance length l_E/D = c1 (j/sqrt(gD) + c2)"),
            Constant("entrance_offset", 0.22, "-", "Taitel et al. (1980), from memory", 0.0, 5.0,
                     "c2 in the entrance length l_E/D = c1 (j/sqrt(gD) + c2)"),
        )
        self.validity = (EO_HANDOVER_VALIDITY,)
        self.notes = ("Churn flow is taken as the developing part of slug flow near the inlet: at the tube's "
                      "length L the flow is churn if the entrance length exceeds L.")

    def critical_mixture_velocity(self, case, **consts) -> float:
        """j_c [m/s] for the case (its length and gravity)."""
        c = self.resolve_constants(consts)
        g = max(self._axial_g(case), 0.0)
        return float(churn_mixture_velocity(g, conduit_diameter(case), case.length, c["entrance_coefficient"],
                                            c["entrance_offset"]))

    def qg_of_ql(self, case, ql, **consts):
        jc = self.critical_mixture_velocity(case, **consts)
        out = case.section.area * jc - self._ql(ql)
        with np.errstate(invalid="ignore"):
            return _out(np.where(out > 0, out, np.nan))

    def implicit(self, case, ql, qg, **consts):
        ql, qg = positive_flows(ql, qg)
        jc = self.critical_mixture_velocity(case, **consts)
        if jc <= 0:
            return _out(np.where(np.isfinite(ql), 1.0, np.nan))
        return _out(np.log((ql + qg) / (case.section.area * jc)))


class TaitelChurnAnnular(_GravityTube):
    r"""Churn–annular boundary of vertical upward flow: gas fast enough to lift the drops (Taitel et al. 1980).

    .. math:: Q_G = A\, Ku\, \frac{(\sigma g \Delta\rho)^{1/4}}{\rho_G^{1/2}}, \qquad Ku = 3.1

    (:func:`kutateladze_gas_velocity`), independent of the liquid flow. Constant: ``kutateladze``.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.case import Orientation
    >>> case = example_case(g=9.80665, orientation=Orientation.vertical_up())
    >>> round(float(CHURN_ANNULAR_TAITEL_1980.qg_of_ql(case, 1e-5)) / case.section.area, 2)
    14.61
    """

    def __init__(self):
        self.name = "churn_annular_taitel_1980"
        self.label = "churn–annular, drops lifted (Taitel et al. 1980)"
        self.regime_below = CHURN
        self.regime_above = ANNULAR
        self.citation = TAITEL_1980
        self.constants = (
            Constant("kutateladze", 3.1, "-", "Taitel et al. (1980): U_SG rho_G^(1/2) / (sigma g drho)^(1/4) = 3.1 "
                     "(from memory)", 0.5, 10.0, "Kutateladze number of the gas at the onset of annular flow"),
        )
        self.validity = (EO_HANDOVER_VALIDITY,)
        self.notes = ("The gas must carry the largest stable drop against gravity; a liquid film alone on the "
                      "wall is then the annular regime.")

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        f = case.fluid
        g = max(self._axial_g(case), 0.0)
        u = kutateladze_gas_velocity(g, f.sigma, f.rho_l, f.rho_g, c["kutateladze"])
        with np.errstate(invalid="ignore"):
            out = 0.0 * self._ql(ql) + u * case.section.area
            return _out(np.where(out > 0, out, np.nan))


class _TaitelDuklerLine(_GravityTube):
    """Shared parts of the two Taitel & Dukler (1976) lines."""

    needs = "near horizontal"
    circular_only = True

    def _state(self, case):
        f = case.fluid
        o = _orientation(case)
        beta = float(o.angle_rad) if o.is_known else 0.0
        return f, conduit_diameter(case), float(case.section.area), beta

    def _liquid_gradient(self, case, u_sl, re_laminar):
        f, d, _, _ = self._state(case)
        return _superficial_gradient(f.rho_l, f.mu_l, u_sl, d, re_laminar)

    def breakpoints(self, case, **consts):
        """Both sides of each jump of the line [m^3/s]: the liquid friction-law switch (superficial Reynolds
        number ``re_laminar``) and the jumps of :meth:`_jumps`, each as two flows a relative
        :data:`_JUMP_SIDE` below and above it, so that the samplers put a sample on each side instead of
        halving toward the jump (about 30 evaluations of the line each)."""
        c = self.resolve_constants(consts)
        f, d, area, _ = self._state(case)
        q = np.array([c["re_laminar"] * f.mu_l / (f.rho_l * d) * area] + list(self._jumps(case, c)), dtype=float)
        q = q[np.isfinite(q) & (q > 0)]
        return np.sort(np.concatenate([q * (1.0 - _JUMP_SIDE), q * (1.0 + _JUMP_SIDE)]))

    def _jumps(self, case, c):
        """Liquid flows [m^3/s] where the line jumps, other than the liquid friction-law switch."""
        return ()


class TaitelDuklerStratified(_TaitelDuklerLine):
    r"""Stratified boundary of horizontal and near-horizontal flow (Taitel & Dukler 1976, criterion F).

    On the boundary the equilibrium level h = h_L/D (:func:`stratified_level`) and the gas flow satisfy

    .. math::
        U_{SG} = F(h) \sqrt{\frac{(\rho_L - \rho_G)\, D\, g \cos\beta}{\rho_G}}, \qquad
        |dP/dx|_{SL}\, \mathcal{L}(h) = |dP/dx|_{SG}\, \mathcal{G}(h) - 4 (\rho_L - \rho_G)\, g \sin\beta

    (:func:`kelvin_helmholtz_froude`, :func:`stratified_balance_terms`; β the inclination above the
    horizontal, positive for upward flow, i.e. the source's alpha = -β). Both are explicit in h, so
    the line is found by solving the second for the h that gives the liquid flow: below it
    (less gas) the flow is stratified, above it intermittent (h > 0.5) or annular (h < 0.5). Each
    phase's friction factor is laminar (16/Re) below the superficial Reynolds number ``re_laminar``
    and Blasius (0.046 Re^-0.2) above.

    Where several levels give the same liquid flow, the lowest level (largest gas flow) is taken;
    the branch near a full tube at very small gas flow, where some friction-law combinations turn
    the line back, is not drawn. Constant: ``re_laminar``.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> case = example_case(Circle(0.0254), g=9.80665, orientation=Orientation.horizontal())
    >>> a = case.section.area
    >>> round(float(STRATIFIED_TAITEL_DUKLER_1976.qg_of_ql(case, 0.01 * a)) / a, 2)   # U_SG [m/s] at U_SL 0.01
    17.78
    """

    def __init__(self):
        self.name = "stratified_taitel_dukler_1976"
        self.label = "stratified boundary, criterion F (Taitel & Dukler 1976)"
        self.regime_below = STRATIFIED
        self.regime_above = SLUGS
        self.citation = TAITEL_DUKLER_1976 + "; inclined pipes: " + BARNEA_1980
        self.constants = (
            Constant("re_laminar", 2000.0, "-", "common practice, no source: laminar friction below a superficial "
                     "Reynolds number of 2000", 0.0, 1e6, "superficial Reynolds number of the friction-law switch"),
        )
        self.validity = (EO_HANDOVER_VALIDITY,)
        self.notes = ("Fully developed stratified flow with a flat interface; interfacial friction equal to the gas "
                      "wall friction; finite-amplitude Kelvin-Helmholtz waves end it. Stratified flow vanishes as "
                      "g -> 0 (the line moves as g^(1/2)).")

    def curve(self, case, h, re_laminar=2000.0, liquid_law=None):
        """Points of the line at levels ``h``: (u_sl, u_sg) [m/s], NaN where the balance has no solution.

        ``liquid_law`` fixes the liquid friction law ("laminar" or "turbulent"); by default each point's own
        superficial Reynolds number decides.
        """
        u_lam, u_turb, u_sg = self._curve_both(case, h, re_laminar)
        f, d, _, _ = self._state(case)
        if liquid_law == "laminar":
            u_sl = u_lam
        elif liquid_law == "turbulent":
            u_sl = u_turb
        else:
            u_sl = np.where(f.rho_l * u_lam * d / f.mu_l < re_laminar, u_lam, u_turb)
        return _out(u_sl), _out(u_sg)

    def _curve_both(self, case, h, re_laminar):
        """U_SL on the line at levels h with the laminar and with the turbulent liquid law, and U_SG [m/s]."""
        f, d, _, beta = self._state(case)
        g = case.g
        drho = f.rho_l - f.rho_g
        h = np.asarray(h, dtype=float)
        # the geometry once for its three uses (this runs inside root searches, dozens of times a line)
        geom = stratified_geometry(h)
        u_sg = _froude(h, geom) * np.sqrt(drho * d * g * math.cos(beta) / f.rho_g)
        p_g, m = _superficial_gradient(f.rho_g, f.mu_g, u_sg, d, re_laminar)
        big_g = _gas_term(geom, m)
        outs = []
        for n, c in ((1.0, 16.0), (0.2, 0.046)):
            big_l = _liquid_term(geom, n)
            with np.errstate(invalid="ignore", divide="ignore"):
                p_l = (p_g * big_g - 4.0 * drho * g * math.sin(beta)) / big_l
                u = np.power(np.where(p_l > 0, p_l, np.nan) * d * (d * f.rho_l / f.mu_l) ** n / (2.0 * c * f.rho_l),
                             1.0 / (2.0 - n))
            outs.append(u)
        return outs[0], outs[1], u_sg

    def _table(self, case, re_laminar):
        """The line at the grid levels (cached per fluid, size, gravity and inclination)."""
        f, d, _, beta = self._state(case)
        return _stratified_table(self, float(f.rho_l), float(f.mu_l), float(f.rho_g), float(f.mu_g), float(d),
                                 float(case.g), float(beta), float(re_laminar), case)

    def _jumps(self, case, c):
        """Where the gas friction law switches, the liquid flow on the line drops as the level rises (the
        table of the line at its grid levels has both sides of the switch as adjacent levels); the line,
        which takes the lowest level that gives the liquid flow, jumps at the flow just before the drop,
        on the branch of the liquid friction law that applies there."""
        if case.g <= 0:
            return ()
        f, d, area, _ = self._state(case)
        _, tab_lam, tab_turb = self._table(case, c["re_laminar"])
        out = []
        for tab, laminar in ((tab_lam, True), (tab_turb, False)):
            with np.errstate(invalid="ignore"):
                k = np.flatnonzero(np.isfinite(tab[:-1]) & np.isfinite(tab[1:]) & (tab[1:] < tab[:-1]))
            u = np.exp(tab[k])
            out += [float(v) * area for v in u if (f.rho_l * v * d / f.mu_l < c["re_laminar"]) == laminar]
        return out

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        f, d, area, _ = self._state(case)
        ql = self._ql(ql)
        shape = ql.shape
        u_t = np.ravel(ql) / area
        if case.g <= 0:
            return _out(np.full(shape, np.nan))
        laminar = f.rho_l * u_t * d / f.mu_l < c["re_laminar"]
        hg, tab_lam, tab_turb = self._table(case, c["re_laminar"])

        def resid(h, idx):
            u_lam, u_turb, _ = self._curve_both(case, h, c["re_laminar"])
            with np.errstate(invalid="ignore", divide="ignore"):
                return np.log(np.where(laminar[idx], u_lam, u_turb)) - np.log(u_t[idx])

        with np.errstate(invalid="ignore", divide="ignore"):
            r = np.where(laminar[:, None], tab_lam[None, :], tab_turb[None, :]) - np.log(u_t)[:, None]
            change = (r[:, :-1] < 0) & (r[:, 1:] >= 0)
        has = change.any(axis=1) & np.isfinite(u_t)
        k = np.argmax(change, axis=1)
        k1 = np.minimum(k + 1, hg.size - 1)
        rows = np.flatnonzero(has)              # only the levels with a crossing are searched
        out = np.full(k.size, np.nan)
        if rows.size:
            h = _illinois(lambda x, idx: resid(x, rows[idx]), hg[k[rows]], hg[k1[rows]], r[rows, k[rows]],
                          r[rows, k1[rows]])
            _, _, u_sg = self._curve_both(case, h, c["re_laminar"])
            out[rows] = np.asarray(u_sg) * area
        return _out(out.reshape(shape))


_TABLES: dict = {}
#: Relative distance of the two samples put on either side of a jump of a Taitel & Dukler line (breakpoints).
_JUMP_SIDE = 1e-11


def _stratified_table(model, rho_l, mu_l, rho_g, mu_g, d, g, beta, re_laminar, case):
    """ln U_SL (laminar and turbulent liquid law) on the stratified line at 240 grid levels; a small cache."""
    key = (rho_l, mu_l, rho_g, mu_g, d, g, beta, re_laminar)
    hit = _TABLES.get(key)
    if hit is None:
        hg = _h_grid(240)
        # the gas friction law switches (a jump of the line in h) between two adjacent levels: both are grid
        # levels, so a root search bracketing the jump starts (and ends) on it instead of halving toward it
        ends = _gas_switch_levels(rho_g, mu_g, rho_l - rho_g, d, g, beta, re_laminar)
        if ends is not None:
            hg = np.unique(np.concatenate([hg, ends]))
        u_lam, u_turb, _ = model._curve_both(case, hg, re_laminar)
        with np.errstate(divide="ignore", invalid="ignore"):
            hit = (hg, np.log(u_lam), np.log(u_turb))
        if len(_TABLES) > 64:
            _TABLES.clear()
        _TABLES[key] = hit
    return hit


def _gas_switch_levels(rho_g, mu_g, drho, d, g, beta, re_laminar):
    """The two adjacent levels (floats) between which the gas Reynolds number on the stratified line falls below
    ``re_laminar`` (turbulent at the first, laminar at the second), or None when it does not in (_H_MIN, _H_MAX).

    On the line U_SG = F(h) sqrt(drho D g cos(beta)/rho_G) with F (:func:`kelvin_helmholtz_froude`) falling as h
    grows, so Re_G falls with h; bisection on the floats to adjacent values.
    """
    scale = rho_g * d / mu_g * math.sqrt(max(drho * d * g * math.cos(beta), 0.0) / rho_g)

    def turbulent(h):
        c = 2.0 * h - 1.0
        sq = math.sqrt(max(1.0 - c * c, 0.0))
        a_g = 0.25 * (math.acos(min(max(c, -1.0), 1.0)) - c * sq)
        return sq > 0 and scale * (1.0 - h) * a_g ** 1.5 / ((math.pi / 4.0) * math.sqrt(sq)) >= re_laminar

    lo, hi = _H_MIN, _H_MAX
    if not (scale > 0 and turbulent(lo) and not turbulent(hi)):
        return None
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if mid <= lo or mid >= hi:
            break
        if turbulent(mid):
            lo = mid
        else:
            hi = mid
    return np.array([lo, hi])


class TaitelDuklerIntermittentAnnular(_TaitelDuklerLine):
    r"""Intermittent–annular boundary of horizontal and near-horizontal flow (Taitel & Dukler 1976).

    Once unstable, a stratified layer with h_L/D above ``level`` (0.5) has enough liquid to bridge
    the tube (intermittent: plugs, slugs, elongated bubbles); below it the waves are swept around
    the wall (annular). The line is the locus of equilibrium level h = ``level``:

    .. math::
        |dP/dx|_{SG} = \frac{|dP/dx|_{SL}\, \mathcal{L}(h) + 4 (\rho_L - \rho_G)\, g \sin\beta}{\mathcal{G}(h)}

    explicit in the gas flow (β positive for upward flow). In a horizontal tube it does not depend
    on g: with turbulent phases it is X = 1.58 (the source quotes X = 1.6). Constants: ``level``,
    ``re_laminar``.

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> case = example_case(Circle(0.0254), g=9.80665, orientation=Orientation.horizontal())
    >>> a = case.section.area
    >>> round(float(INTERMITTENT_ANNULAR_TAITEL_DUKLER_1976.qg_of_ql(case, 0.1 * a)) / a, 3)   # U_SG at U_SL 0.1
    1.861
    """

    def __init__(self):
        self.name = "intermittent_annular_taitel_dukler_1976"
        self.label = "intermittent–annular, h/D = 0.5 (Taitel & Dukler 1976)"
        self.regime_below = SLUGS
        self.regime_above = ANNULAR
        self.citation = TAITEL_DUKLER_1976
        self.constants = (
            Constant("level", 0.5, "-", "Taitel & Dukler (1976): h_L/D = 0.5 (from memory)", 0.2, 0.8,
                     "equilibrium level h_L/D separating intermittent from annular flow"),
            Constant("re_laminar", 2000.0, "-", "common practice, no source: laminar friction below a superficial "
                     "Reynolds number of 2000", 0.0, 1e6, "superficial Reynolds number of the friction-law switch"),
        )
        self.validity = (EO_HANDOVER_VALIDITY,)
        self.notes = ("Meaningful only above the stratified boundary (the chart's sequence rule keeps the stratified "
                      "regime below it).")

    def qg_of_ql(self, case, ql, **consts):
        c = self.resolve_constants(consts)
        f, d, area, beta = self._state(case)
        u_sl = self._ql(ql) / area
        p_l, n = self._liquid_gradient(case, u_sl, c["re_laminar"])
        drho = f.rho_l - f.rho_g
        found = []
        for m in (1.0, 0.2):                      # gas friction law: laminar only where it is the consistent one
            big_l, big_g = stratified_balance_terms(c["level"], n, m)
            cc = 16.0 if m == 1.0 else 0.046
            with np.errstate(invalid="ignore", divide="ignore"):
                p_g = (p_l * big_l + 4.0 * drho * case.g * math.sin(beta)) / big_g
                u = np.power(np.where(p_g > 0, p_g, np.nan) * d * (d * f.rho_g / f.mu_g) ** m / (2.0 * cc * f.rho_g),
                             1.0 / (2.0 - m))
            found.append(u)
        u_lam, u_turb = found
        with np.errstate(invalid="ignore"):
            lam_ok = f.rho_g * u_lam * d / f.mu_g < c["re_laminar"]
            turb_ok = f.rho_g * u_turb * d / f.mu_g >= c["re_laminar"]
        best = np.where(lam_ok & ~turb_ok, u_lam, u_turb)
        return _out(best * area)


# Registered models ---------------------------------------------------------------------------------

_HANDOVER_NOTE = ("Drawn flagged where Eo < 1, where the low-gravity lines define the regions (hand-over rule).")

#: Dukler et al. (1988) bubble–slug void fraction with the Harmathy drift added (vertical upflow).
BUBBLE_SLUG_ZUBER_FINDLAY_1965 = register(ZuberFindlayTransition(
    "bubble_slug_zuber_findlay_1965", "bubble–slug, void fraction + bubble drift (Zuber & Findlay 1965)",
    BUBBLES, SLUGS, "bubble",
    (Constant("alpha_c", 0.45, "-", "from memory: the low-gravity value of Dukler et al. (1988)", 0.05, 0.95,
              "critical void fraction at which bubbles coalesce into slugs"),
     Constant("c0", 1.2, "-", "from memory: of order 1.2 (Zuber & Findlay 1965; Colin et al. 1991)", 0.8, 2.0,
              "drift-flux distribution parameter"),
     Constant("c0_density", 0.0, "-", "none by default", 0.0, 1.0, "c_rho in C0 = c0 - c_rho sqrt(rho_G/rho_L)"),
     Constant("rise_coefficient", 1.53, "-", "Harmathy (1960)", 0.0, 3.0,
              "k in U_gj = k (g sigma drho / rho_L^2)^(1/4) (1 - alpha_c)^n"),
     Constant("drift_exponent", 0.0, "-", "none by default (single bubble)", 0.0, 3.0,
              "n in U_gj = k (g sigma drho / rho_L^2)^(1/4) (1 - alpha_c)^n")),
    ZUBER_FINDLAY_1965 + "; " + HARMATHY_1960 + "; line and alpha_c: " + DUKLER_1988,
    _SU_RANGE,
    "The low-gravity void-fraction line with the buoyant drift of distorted bubbles added: identical to it at "
    "g = 0 and continuous in g. alpha_c and C0 come from low-gravity data; the Harmathy velocity overestimates "
    "the slip of small spherical bubbles at very low g. Vertical upward flow."))

#: Dukler et al. (1988) slug–annular void fraction with the Taylor-bubble drift added (vertical upflow).
SLUG_ANNULAR_ZUBER_FINDLAY_1965 = register(ZuberFindlayTransition(
    "slug_annular_zuber_findlay_1965", "slug–annular, void fraction + Taylor-bubble drift (Zuber & Findlay 1965)",
    SLUGS, ANNULAR, "taylor",
    (Constant("alpha_c", 0.8, "-", "from memory, uncertain: the low-gravity value used for Dukler et al. (1988)",
              0.05, 0.95, "critical void fraction at which slugs give way to a gas core"),
     Constant("c0", 1.2, "-", "from memory: of order 1.2 in slug flow (Nicklin et al. 1962)", 0.8, 2.0,
              "drift-flux distribution parameter"),
     Constant("rise_coefficient", 0.35, "-", "Nicklin et al. (1962); Dumitrescu (1943): 0.351", 0.0, 1.0,
              "k in U_gj = k sqrt(g D drho/rho_L) phi(Eo, N_f)")),
    ZUBER_FINDLAY_1965 + "; " + DUMITRESCU_1943 + "; " + NICKLIN_1962 + "; factor: " + WALLIS_1969 + "; "
    + BRETHERTON_1961 + "; line and alpha_c: " + DUKLER_1988,
    _SU_RANGE,
    "The low-gravity slug–annular line with the Taylor-bubble drift added; the drift is exactly zero below "
    "Eo = 3.37 (long bubbles do not rise), so the line equals the low-gravity one there. Vertical upward flow."))

#: Mishima & Ishii (1984) bubbly–slug line (vertical upflow).
BUBBLE_SLUG_MISHIMA_ISHII_1984 = register(ZuberFindlayTransition(
    "bubble_slug_mishima_ishii_1984", "bubbly–slug, void fraction 0.3 (Mishima & Ishii 1984)", BUBBLES, SLUGS,
    "bubble",
    (Constant("alpha_c", 0.3, "-", "Mishima & Ishii (1984), from memory", 0.05, 0.95,
              "critical void fraction of bubbly flow"),
     Constant("c0", 1.2, "-", "Ishii's round-tube value C0 = 1.2 - 0.2 sqrt(rho_G/rho_L), from memory", 0.8, 2.0,
              "c0 in C0 = c0 - c_rho sqrt(rho_G/rho_L)"),
     Constant("c0_density", 0.2, "-", "as c0", 0.0, 1.0, "c_rho in C0 = c0 - c_rho sqrt(rho_G/rho_L)"),
     Constant("rise_coefficient", math.sqrt(2.0), "-", "Mishima & Ishii (1984): sqrt(2), from memory", 0.0, 3.0,
              "k in U_gj = k (g sigma drho / rho_L^2)^(1/4) (1 - alpha_c)^n"),
     Constant("drift_exponent", 1.75, "-", "Mishima & Ishii (1984), from memory", 0.0, 3.0,
              "n in U_gj = k (g sigma drho / rho_L^2)^(1/4) (1 - alpha_c)^n")),
    MISHIMA_ISHII_1984 + "; " + ZUBER_FINDLAY_1965,
    (EO_HANDOVER_VALIDITY,),
    "j_L = (3.33/C0 - 1) j_G - 0.76/C0 (g sigma drho/rho_L^2)^(1/4): drift flux at alpha = 0.3. " + _HANDOVER_NOTE))

#: Taitel, Bornea & Dukler (1980): bubble–slug boundary of vertical upflow.
BUBBLE_SLUG_TAITEL_1980 = register(TaitelBubbleSlug())
#: Taitel, Bornea & Dukler (1980): slug–churn boundary (entrance length).
SLUG_CHURN_TAITEL_1980 = register(TaitelSlugChurn())
#: Taitel, Bornea & Dukler (1980): churn–annular boundary.
CHURN_ANNULAR_TAITEL_1980 = register(TaitelChurnAnnular())
#: Taitel & Dukler (1976): stratified boundary (criterion F).
STRATIFIED_TAITEL_DUKLER_1976 = register(TaitelDuklerStratified())
#: Taitel & Dukler (1976): intermittent–annular boundary (h/D = 0.5).
INTERMITTENT_ANNULAR_TAITEL_DUKLER_1976 = register(TaitelDuklerIntermittentAnnular())

#: The 1-g family of vertical upward flow, in sequence order.
VERTICAL_UPWARD_MODEL_NAMES = (BUBBLE_SLUG_TAITEL_1980.name, SLUG_CHURN_TAITEL_1980.name,
                               CHURN_ANNULAR_TAITEL_1980.name)
#: The 1-g family of horizontal and near-horizontal flow, in sequence order.
HORIZONTAL_MODEL_NAMES = (STRATIFIED_TAITEL_DUKLER_1976.name, INTERMITTENT_ANNULAR_TAITEL_DUKLER_1976.name)


# Hand-over ------------------------------------------------------------------------------------------

def gravity_family(case) -> tuple[str, ...]:
    """Names of the 1-g models for the case's orientation; empty when there is none (unspecified orientation,
    open section, vertical downward flow, an inclination the sources do not cover, or a non-circular duct
    in horizontal flow, whose stratified geometry is not that of the source).

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.case import Orientation
    >>> gravity_family(example_case(orientation=Orientation.horizontal()))
    ('stratified_taitel_dukler_1976', 'intermittent_annular_taitel_dukler_1976')
    >>> gravity_family(example_case())
    ()
    """
    if getattr(case.section, "is_open", False):
        return ()
    o = _orientation(case)
    if o.kind == Orientation.VERTICAL_UP:
        return VERTICAL_UPWARD_MODEL_NAMES
    if o.is_known and _is_near_horizontal(case) and is_circular(case.section):
        return HORIZONTAL_MODEL_NAMES
    return ()


@dataclass(frozen=True)
class Handover:
    """Result of :func:`handover`: which family defines the regions, and why.

    ``family`` is "low gravity" or "buoyancy"; ``region_models`` and ``comparison_models`` are the default
    model names in chart order; ``message`` is a sentence for the chart's notes.
    """

    eotvos: float
    limit: float
    family: str
    region_models: tuple[str, ...]
    comparison_models: tuple[str, ...]
    message: str


def handover(case, limit: float = EO_HANDOVER) -> Handover:
    r"""Apply the hand-over rule to a closed-conduit case: which family of lines defines the regions.

    .. math:: Eo = (\rho_L - \rho_G)\, g\, D^2/\sigma \;\ge\; Eo_h = 1 \;\Rightarrow\; \text{buoyancy family}

    Parameters
    ----------
    case : Case
    limit : float   Eo_h [-] (default 1, Brauner 1990)

    Returns
    -------
    Handover   with the default model names: the region-defining family first, the other family after
    it (comparison lines)

    Examples
    --------
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.geometry.sections import Circle
    >>> ground = example_case(Circle(0.0127), g=9.80665, orientation=Orientation.vertical_up())
    >>> h = handover(ground)
    >>> h.family, h.region_models[0]
    ('buoyancy', 'bubble_slug_taitel_1980')
    >>> handover(ground.with_(g=9.80665e-6)).family
    'low gravity'
    """
    limit = positive("eotvos_limit", limit)
    low = TUBE_MODEL_NAMES
    high = gravity_family(case)
    eo = float(_eotvos(case))
    o = _orientation(case)
    g0 = case.g / STANDARD_GRAVITY
    if not high:
        why = ("no orientation given" if not o.is_known else
               f"no buoyancy-inclusive criteria here for {o.describe()}")
        msg = (f"Low-gravity lines only ({why}); Eötvös number {eo:.3g} at {g0:.3g} g0"
               + ("." if eo < limit else f" >= {limit:g}: buoyancy is NOT negligible and is not modelled."))
        return Handover(eo, limit, "low gravity", low, (), msg)
    if eo >= limit:
        msg = (f"Hand-over: Eötvös number {eo:.3g} >= {limit:g} at {g0:.3g} g0 ({o.describe()}): the buoyancy-"
               f"inclusive lines define the regions; the low-gravity lines are shown for comparison (flagged). "
               f"The buoyancy-inclusive sources used 1-g tubes of Eo about 85-350; between Eo {limit:g} and that "
               f"range both families are extrapolated.")
        return Handover(eo, limit, "buoyancy", high, low, msg)
    msg = (f"Hand-over: Eötvös number {eo:.3g} < {limit:g} at {g0:.3g} g0 ({o.describe()}): the low-gravity lines "
           f"define the regions; the buoyancy-inclusive lines are shown for comparison (flagged) and take over "
           f"at Eo = {limit:g}.")
    return Handover(eo, limit, "low gravity", low, high, msg)
