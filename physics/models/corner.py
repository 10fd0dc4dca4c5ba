r"""Bubble transport in interior-corner and open-channel conduits: boundary models and regime scheme.

A passive phase separator in low gravity: bubbly liquid flows along a conduit whose section tapers
toward an open side (V-groove, open wedge channel, polygon with an open slot). A bubble larger than
the local gap is squeezed by the walls; the difference in capillary pressure between its narrow and
wide ends pushes it toward the wide side, where it meets the free surface and leaves the liquid.
Whether it gets there before the stream carries it out of the conduit, whether bubbles merge on the
way, whether the gas becomes continuous, and whether the channel can carry the liquid at all, are
the five boundaries of this family. Each is a :class:`~lowgmap.physics.models.boundary.BoundaryModel` in the
registry, composed of the sub-models of :mod:`lowgmap.physics.models.bubbles` and :mod:`lowgmap.physics.models.open_channel`:

=============================  ==============================================================
``corner_confinement``         the bubble (merged when bubbles merge) is large enough to be
                               pushed all the way to the open side: d = d_reach
``corner_separation``          migration time to the open side x safety factor = residence time
``corner_merging``             bubble spacing = k_m x bubble diameter
``corner_blow_through``        no-slip void fraction = alpha_c (gas continuous to the outlet)
``open_channel_ingestion``     liquid (or bubbly mixture) flow = critical flow rate of the open
                               channel (free surface collapses, gas drawn into the outlet)
=============================  ==============================================================

Together they form a :class:`~lowgmap.physics.models.regimes.PartitionScheme` (:data:`SCHEME`) with six regimes:

* gas ingestion above the critical flow (first), else gas blow-through above alpha_c, else
* bubbles isolated or merging (merging line) x separated (confined enough *and* migration faster
  than the stream) or carried through.

The regimes that separate all the gas carry ``separates_gas=True`` (:attr:`Chart.separates_gas`).

Every line depends on the flows only through r = Q_G/Q_L and the residence time, so each is either a
line of constant ratio (confinement, merging, blow-through) or a curve Q_L = F(r) (separation,
ingestion); the models draw themselves as such (``line_pieces``).

Meniscus logic (:func:`meniscus_state`), applied to every corner and open-side edge of the section:
a wall corner holds liquid below the gas pressure only when the Concus–Finn condition
theta + alpha < 90 deg holds, and a free surface pinned where a wall meets the open side only when
the angle between them exceeds theta. When an open-side edge fails (for a V-groove or wedge channel:
the Concus–Finn condition of the apex) the open channel cannot hold liquid below the gas pressure, so
gas is drawn in at any flow: the ingestion model then covers the whole chart (its critical flow is 0)
with a plain warning, and the bubble models are left out (no capillary push). When only the corners
fail, the bubble path starts from a corner that holds liquid, or the bubble models are left out.

Near the confinement line the capillary push fades: only the part of the bubble pressed flat between
the walls is pushed (:func:`lowgmap.physics.models.bubbles.squeezed_fraction`), so the migration time
diverges (logarithmically) as the bubble size falls to the reach diameter.

Buoyancy (a case that states its orientation, :class:`lowgmap.physics.case.Orientation`): the share of the
residual acceleration along the migration path (:func:`migration_buoyancy`; the path runs across the conduit
axis, from the apex toward the open side, and ``open_side_roll`` says how the section is turned about the
axis) adds (rho_L - rho_G) a_m V to the force balance, helping or opposing the capillary push; an opposing
one stalls bubbles below :func:`arrival_diameter` (migration time infinite: carried through). The share
along the axis makes the bubbles drift with or against the stream while they migrate, which the separation
line counts. The lines using the bubble size are flagged where its Bond number exceeds
:data:`BUBBLE_BOND_LIMIT` (:func:`bubble_bond_number`, Brauner 1990). The share along the axis also enters
the open channel's critical flow (hydrostatic term of the one-dimensional model), and the gas-ingestion line
is flagged where the transverse Bond number of the channel exceeds 0.1 (:func:`transverse_bond`). With the
orientation unspecified the chart is exactly the low-gravity chart (buoyancy ignored, a warning when it is not
negligible).

Uncertainty bands: every closure constant carries its own band with its reason (``Constant.band``); the
design inputs, the safety factor and the geometric confinement ratio are drawn sharp.

All constants are exposed (:class:`~lowgmap.physics.models.boundary.Constant`); the defaults are order-of-magnitude
values or design inputs, meant to be calibrated against test points. Where a default is a choice it
sits on the safe side for the separating regimes (entrance loss 1, gas share 1, safety factor 2,
merging only on contact, alpha_c 0.45); each choice and its safe direction is in the theory manual,
physics/manual/bubbles.md.
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import CubicSpline, PchipInterpolator

from lowgmap.physics import cache, surrogates
from lowgmap.physics.models import bubbles as bb
from lowgmap.physics.models.boundary import BoundaryModel, Constant, register
from lowgmap.physics.models.regimes import LinePiece, PartitionScheme, RegimeInfo
from lowgmap.physics.properties.groups import positive_flows
from lowgmap.physics.roots import brentq_known

__all__ = [
    "ISOLATED_CARRIED", "ISOLATED_SEPARATED", "MERGING_SEPARATED", "MERGING_CARRIED", "BLOW_THROUGH",
    "INGESTION", "REGIMES", "SCHEME", "CORNER_MODEL_NAMES",
    "CornerGeometry", "corner_geometry", "open_channel_of", "bubble_state", "separation_liquid_flow",
    "ingestion_liquid_flow", "transverse_bond", "migration_buoyancy", "arrival_diameter", "bubble_bond_number",
    "BUBBLE_BOND_LIMIT",
    "CornerConfinement", "CornerSeparation", "CornerMerging", "CornerBlowThrough", "OpenChannelIngestion",
    "CORNER_CONFINEMENT", "CORNER_SEPARATION", "CORNER_MERGING", "CORNER_BLOW_THROUGH", "OPEN_CHANNEL_INGESTION",
]

# Regime names (plain descriptive words of our own) ---------------------------------------------
ISOLATED_CARRIED = "isolated bubbles carried through"
ISOLATED_SEPARATED = "isolated bubbles separated"
MERGING_SEPARATED = "merging bubbles separated"
MERGING_CARRIED = "merging bubbles carried through"
BLOW_THROUGH = "gas blow-through"
INGESTION = "free-surface collapse / gas ingestion"

#: Regimes of the scheme, in display order, with their flags.
REGIMES = (
    RegimeInfo(ISOLATED_CARRIED, False, "bubbles stay apart and leave with the liquid (too small to be pushed "
               "to the open side, too slow for the conduit length, or held back by buoyancy that opposes the "
               "push: then they never arrive)"),
    RegimeInfo(ISOLATED_SEPARATED, True, "bubbles stay apart and reach the open side within the conduit length"),
    RegimeInfo(MERGING_SEPARATED, True, "bubbles merge; the merged bubbles reach the open side within the "
               "conduit length"),
    RegimeInfo(MERGING_CARRIED, False, "bubbles merge but leave with the liquid (too slow, or held back by "
               "buoyancy that opposes the push)"),
    RegimeInfo(BLOW_THROUGH, False, "the gas is a continuous phase and reaches the liquid outlet"),
    RegimeInfo(INGESTION, False, "the channel cannot carry this flow: the free surface collapses at the outlet "
               "and gas is drawn in (at any flow when the open channel cannot hold liquid below the gas "
               "pressure)"),
)

# Sources ---------------------------------------------------------------------------------------
_COMPOSITION = "lowgmap composition (theory manual physics/manual/bubbles.md) of: "
ROSENDAHL_2004 = ("U. Rosendahl, A. Ohlhoff and M. E. Dreyer, \"Choked flows in open capillary channels: theory, "
                  "experiment and computations\", J. Fluid Mech. 518:187-214, 2004")
KLATTE_2008 = ("J. Klatte et al., \"A fast numerical procedure for steady capillary flow in open channels\", "
               "Acta Mech. 201:269-276, 2008. doi:10.1007/s00707-008-0063-1")
CONCUS_FINN_1969 = ("P. Concus and R. Finn, \"On the behavior of a capillary surface in a wedge\", PNAS "
                    "63(2):292-299, 1969. doi:10.1073/pnas.63.2.292")
DUKLER_1988 = ("A. E. Dukler, J. A. Fabre, J. B. McQuillen and R. Vernon, Int. J. Multiphase Flow "
               "14(4):389-400, 1988 (drift-flux void fraction)")

# Constants -------------------------------------------------------------------------------------
_C_BUBBLE = Constant(
    "bubble_diameter_ratio", 0.0, "-", "design input (0 selects the squeezing law of the injector)", 0.0, 20.0,
    "injected bubble diameter over the path depth S (apex to open side); 0: from the squeezing law")
_C_INJ_W = Constant(
    "injector_width_ratio", 0.2, "-", "design input; the default is a placeholder of ours, no source",
    1e-3, 10.0, "injector channel width w over S (square injector channel), for the squeezing law")
_C_SQ_A = Constant(
    "squeeze_a", 1.0, "-", "Garstecki et al. (2006): a of order 1, set by the junction geometry (from memory)",
    0.0, 20.0, "a in the squeezing law L/w = 1 + a Q_G/Q_L", band=(0.5, 2.0),
    band_reason="order of magnitude, from memory: Garstecki et al. (2006) report a of order 1, set by the "
                "junction geometry; x/÷ 2 about 1")
_C_INJ = Constant(
    "injection_position", 0.5, "-", "design input; default mid-depth, no source", 0.0, 0.99,
    "injection point on the apex bisector, as a fraction of S from the apex")
_C_CONF = Constant(
    "confinement_ratio", 1.0, "-", "geometric: a bubble is squeezed while larger than the local gap", 0.2, 5.0,
    "k_c: a bubble of diameter d is pushed while d > k_c h (h local gap)")
_C_MERGE = Constant(
    "merge_length_ratio", 1.0, "-", "a choice, no source: bubbles merge when they touch (spacing = bubble "
    "length), the least merging the geometry allows; merged bubbles are larger and separate more easily, so "
    "the smaller value is the safe one; calibrate", 1.0, 50.0,
    "k_m: bubbles merge when their spacing is below k_m bubble lengths", band=(1.0, 3.0),
    band_reason="order of magnitude, from memory, no source: from touching bubbles (1, the least merging the "
                "geometry allows) to bubbles drawn together over a few lengths by deformation and wakes (3)")
_C_CAP = Constant(
    "capillary_coefficient", 2.0, "-", "our derivation (theory manual): the normal force of the walls on the "
    "flattened faces, 2 sigma cos(theta)/h over the faces, times the taper gives 2; the same order as the "
    "estimate after Reyssat 2014; uncertain, calibrate", 0.1, 20.0,
    "c_cap in the capillary push c_cap sigma cos(theta) phi V h'/h^2", band=(1.0, 4.0),
    band_reason="order of magnitude, from memory: our derivation gives 2, a finite-length cap estimate for a "
                "circular footprint 8/pi = 2.5 (theory manual); x/÷ 2 about 2")
_C_HS = Constant(
    "hele_shaw_drag", 12.0, "-", "our derivation: Darcy flow of the liquid round a circular flattened bubble "
    "(theory manual); > 0: a bubble moving in the gap always drives liquid round it", 1.0, 200.0,
    "c_HS in the Hele-Shaw drag c_HS mu U V/h^2", band=(6.0, 24.0),
    band_reason="order of magnitude, from memory: 12 from Darcy flow round a circular disc (our derivation), 6 "
                "in the rough upper-bound estimate U ~ sigma h' cos(theta)/(3 mu); a non-circular or partly "
                "flattened footprint may double it")
_C_FILM = Constant(
    "film_drag", 1.0, "-", "1 = wetting films sheared over both faces (rigid interface, slowest); 0 = clean "
    "interface; film thickness after Aussillous & Quere (2000)", 0.0, 1.0,
    "c_f in the film drag c_f 4 mu U phi V/(h^2 f(Ca)) on the flattened faces", band=(0.0, 1.0),
    band_reason="the whole physical range: from a clean interface (0, films not sheared) to a rigid one (1, "
                "films sheared over both faces); which applies depends on surfactants, not known a priori")
_C_FORM = Constant(
    "form_drag", 1.0, "-", "common practice, no source: a drag coefficient of order 1", 0.0, 20.0,
    "C_D in the inertial drag C_D rho U^2 a h", band=(0.5, 2.0),
    band_reason="order of magnitude, from memory: drag coefficients of bluff bodies at moderate Reynolds "
                "numbers are of order 1; x/÷ 2 about 1")
_C_SF = Constant(
    "safety_factor", 2.0, "-", "a choice, no source: 2 leaves room for the order-of-magnitude migration "
    "constants; larger is safe (1: migration and residence times equal on the line, no margin)",
    1.0, 100.0, "separation requires residence time >= safety_factor x migration time")
_C_ALPHA = Constant(
    "alpha_c", 0.45, "-", "a choice on the safe side: the bubble-slug void fraction of low-gravity tube flow "
    "(Dukler et al. 1988, from memory), where bubbles crowd into plugs; continuous gas needs at least that "
    "much gas, and a lower value is safe; no corner data, calibrate", 0.05, 0.99,
    "void fraction at which the gas becomes continuous", band=(0.30, 0.60),
    band_reason="order of magnitude, from memory, deliberately wide: no corner data; the tube bubble-slug "
                "value 0.45 (Dukler et al. 1988) varies by about ±0.05 between tube data sets as recalled, and "
                "a corner's crowding differs from a tube's; ±0.15 about 0.45")
_C_C0 = Constant(
    "c0", 1.0, "-", "1 = no slip between bubbles and liquid (low gravity, no buoyant drift); not a bound: "
    "C0 < 1 (gas in the slower liquid near the walls) moves the blow-through line to less gas", 0.8, 2.0,
    "drift-flux distribution parameter", band=(1.0, 1.35),
    band_reason="published scatter of tube data, used by analogy: 1.0 is no slip, 1.2 is used by most "
                "low-gravity studies and a pooled fit of low-gravity slug-flow data gives 1.336 (Larsen, "
                "Kurwitz & Best, NETS 2009, abstract, as quoted for the tube family); no corner data")
_C_KE = Constant(
    "entrance_loss", 1.0, "-", "a choice on the safe side: the loss of a thin re-entrant entrance, zeta = 1.0 "
    "(Idelchik, Handbook of Hydraulic Resistance, 3rd ed. 1994, Diagram 3-1; a flush sharp entrance has 0.5); "
    "a larger loss lowers the critical flow, 0 makes the ingestion line an upper bound", 0.0, 10.0,
    "entrance loss coefficient K_e of the open channel", band=(0.5, 1.0),
    band_reason="published range of plain entrances (Idelchik, Handbook of Hydraulic Resistance, 3rd ed. "
                "1994, Diagram 3-1): 0.5 flush sharp-edged to 1.0 thin re-entrant; a rounded entrance (0.04) "
                "would lie below the band")
_C_GAS = Constant(
    "gas_effect", 1.0, "-", "1 = all the gas carried as a no-slip mixture through the channel: the safe end "
    "(the line falls as the share grows, theory manual); 0 = liquid only", 0.0, 1.0,
    "share of the gas flow that loads the channel (mixture volume flow and density)", band=(0.0, 1.0),
    band_reason="the whole physical range: from liquid only (the gas leaves before the outlet) to all the gas "
                "as a no-slip mixture; no data on the share")

_C_ROLL = Constant(
    "open_side_roll", 0.0, "rad", "design input: how the conduit is mounted about its axis; the default 0 "
    "(open side facing up, as an open channel is mounted for a ground test) lets buoyancy help the push; pi "
    "(open side facing down) makes it oppose, the unsafe end for the separating regimes", 0.0, math.pi,
    "angle, in the cross-section, between the path from the apex to the open side and the upward direction "
    "(against the acceleration); used only when the case states an orientation")

_SIZE = (_C_BUBBLE, _C_INJ_W, _C_SQ_A)

#: Largest Bond (Eötvös) number of the bubble, (rho_L - rho_G) g d_eff^2 / sigma, for which its shape and the
#: capillary push are those of the low-gravity models: the criterion Eo < 1 of Brauner (1990), the same
#: limit as the tube family's hand-over (lowgmap.physics.models.tube_gravity.EO_HANDOVER).
BUBBLE_BOND_LIMIT = 1.0
BRAUNER_1990 = ("N. Brauner, \"On the relations between two-phase flows under reduced gravity and earth "
                "experiment\", Int. Commun. Heat Mass Transf. 17(3):271-281, 1990")

#: Squeezing regime of the injector: liquid capillary number in the injector channel below this
#: (from memory: Garstecki et al. 2006 worked at Ca below about 1e-2).
SQUEEZING_CA_MAX = 1e-2


# =============================================================================================
# geometry
# =============================================================================================
@dataclass(frozen=True)
class MeniscusState:
    """Where the liquid of an open section can stand below the gas pressure, at one contact angle.

    corners : tuple of (vertex index, half-angle alpha [rad], holds)   each wall corner of the section:
        it holds a liquid filament below the gas pressure iff theta + alpha < 90 deg (Concus & Finn 1969)
    edges : tuple of (vertex index, angle phi [rad], holds)   each end of each open edge where a wall meets
        the open side (:func:`lowgmap.physics.geometry.sections.pinning_edges`): a free surface pinned
        there can curve into the liquid iff phi > theta
    holds_liquid : bool   every pinning edge holds: the open channel can carry liquid below the gas
        pressure (False: gas is drawn in at any flow)
    """

    corners: tuple
    edges: tuple
    holds_liquid: bool

    def describe(self) -> str:
        """The failing corners and edges in words (empty when everything holds)."""
        parts = [f"corner at vertex {i} (half-angle {math.degrees(a):.4g} deg)" for i, a, ok in self.corners if not ok]
        parts += [f"open-side edge at vertex {i} (wall meets the open side at {math.degrees(a):.4g} deg)"
                  for i, a, ok in self.edges if not ok]
        return ", ".join(parts)


def meniscus_state(section, contact_angle) -> MeniscusState:
    r"""Which corners and open-side edges of a section hold liquid below the gas pressure.

    .. math:: \theta + \alpha_i < 90° \ \text{(wall corner } i\text{)}, \qquad
              \theta < \varphi_j \ \text{(edge } j \text{ where a wall meets the open side)}

    Parameters
    ----------
    section : Section        an open or closed section
    contact_angle : float    theta [rad]

    Returns
    -------
    MeniscusState

    Notes
    -----
    The same meniscus logic at every vertex that can hold liquid: at a wall corner of half-angle
    alpha, a liquid filament with its pressure below the gas pressure exists only for
    theta + alpha < 90 deg (Concus & Finn 1969); at a sharp edge where a wall meets the open side at
    the angle phi (inside the section) a flat free surface meets the wall at phi, and curving into the
    liquid (liquid below the gas pressure) lowers that angle, so the surface stays pinned only while
    theta < phi (Gibbs' condition at an edge). For a V-groove or wedge channel phi = 90 deg - alpha and
    both conditions are the Concus–Finn condition of the apex. When an edge fails, the open channel
    cannot hold liquid below the gas pressure: any flow lowers the liquid pressure (entrance and
    viscous losses), the surface leaves the edge and gas is drawn in at any flow.

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.geometry.sections import Groove
    >>> meniscus_state(Groove(math.radians(15.0), 0.004), math.radians(80.0)).holds_liquid
    False
    >>> meniscus_state(Groove(math.radians(15.0), 0.004), math.radians(70.0)).holds_liquid
    True
    """
    from lowgmap.physics.geometry.sections import pinning_edges

    theta = float(contact_angle)
    tol = 1e-12
    corners = tuple((c.index, c.half_angle, bool(theta + c.half_angle < 0.5 * math.pi - tol))
                    for c in getattr(section, "corners", ()))
    edges = tuple((e.vertex, e.angle, bool(theta < e.angle - tol)) for e in pinning_edges(section))
    return MeniscusState(corners, edges, all(ok for *_, ok in edges))


@dataclass(frozen=True, eq=False)
class CornerGeometry:
    """What the corner models need from a case's section and wetting.

    path : TaperPath or None   gap along the apex bisector (:func:`lowgmap.physics.models.bubbles.taper_path`)
    depth : float              path length S from apex to open side [m] (nan without a path)
    area : float               section flow area A [m^2]
    half_angle, contact_angle : float   apex half-angle alpha and contact angle theta [rad]
    reason : str or None       why the bubble models do not apply (None: they do)
    holds_liquid : bool        the open channel holds liquid below the gas pressure (False: gas is drawn
                               in at any flow, see :func:`meniscus_state`)
    mechanism_absent : bool    the reason is physical (no liquid-holding meniscus), not a misuse
    """

    path: object
    depth: float
    area: float
    half_angle: float
    contact_angle: float
    reason: str | None
    holds_liquid: bool = True
    mechanism_absent: bool = False


def corner_geometry(case) -> CornerGeometry:
    """The :class:`CornerGeometry` of a case (cached by section and contact angle)."""
    return _geometry(case.section, float(case.wetting.contact_angle))


def _no_hold_reason(theta, ms):
    angles = sorted({round(math.degrees(a), 4) for _, a, ok in ms.edges if not ok})
    return (f"gas is drawn in at any flow: at contact angle {math.degrees(theta):.4g} deg the free surface cannot "
            f"curve into the liquid where the walls meet the open side (angle {', '.join(f'{a:.4g}' for a in angles)} "
            f"deg; pinning needs a contact angle below it, which for a V-groove or wedge channel is the Concus–Finn "
            f"condition contact angle + half-angle < 90 deg at the apex), so the open channel cannot hold liquid "
            f"below the gas pressure, and any flow lowers the liquid pressure below it; bubbles are not pushed "
            f"toward the open side and there is no capillary separation")


@functools.lru_cache(maxsize=128)
def _geometry(section, theta):
    area = float(section.area)
    if not getattr(section, "is_open", False):
        return CornerGeometry(None, math.nan, area, math.nan, theta,
                              f"closed section ({getattr(section, 'kind', 'closed')}): the corner separation "
                              f"models need an open side (free surface or plenum) where the gas leaves")
    ms = meniscus_state(section, theta)
    if not ms.holds_liquid:
        return CornerGeometry(None, math.nan, area, math.nan, theta, _no_hold_reason(theta, ms), False, True)
    path = bb.taper_path(section, contact_angle=theta)
    if path is None:
        if bb.taper_path(section) is None:
            return CornerGeometry(None, math.nan, area, math.nan, theta,
                                  "no wall corner of this section has its bisector pointing at the open side (no "
                                  "taper toward the free surface)")
        dry = ", ".join(f"{math.degrees(a):.4g} deg" for _, a, ok in ms.corners if not ok)
        return CornerGeometry(None, math.nan, area, math.nan, theta,
                              f"the Concus–Finn condition fails at every corner that faces the open side (contact "
                              f"angle {math.degrees(theta):.4g} deg + half-angle >= 90 deg; half-angles {dry}): gas, "
                              f"not liquid, fills those corners, so bubbles are not squeezed toward the open side "
                              f"and there is no capillary separation", True, True)
    return CornerGeometry(path, path.length, area, path.half_angle, theta, None)


def open_channel_of(section, contact_angle):
    """The :mod:`lowgmap.physics.models.open_channel` model of an open section, or None if there is none.

    V-groove and wedge channel -> :class:`~lowgmap.physics.models.open_channel.WedgeChannel`; a polygon that is an
    isosceles triangle open opposite its apex -> WedgeChannel; a rectangle open on one side ->
    :class:`~lowgmap.physics.models.open_channel.RectangularGroove`; a rectangle open on two opposite sides ->
    :class:`~lowgmap.physics.models.open_channel.ParallelPlates`.
    """
    try:
        return _open_channel_of(section, float(contact_angle))
    except ValueError:
        return None


@functools.lru_cache(maxsize=64)
def _open_channel_of(section, theta):
    from lowgmap.physics.models import open_channel as oc

    kind = getattr(section, "kind", "")
    if kind == "groove":
        return oc.WedgeChannel(section.half_angle, section.depth / math.cos(section.half_angle), theta)
    if kind == "wedge_channel":
        return oc.WedgeChannel(section.half_angle, section.wall_length, theta)
    if kind != "polygon" or not section.is_open:
        return None
    v = np.asarray(section.outline(), dtype=float)
    n = len(v)
    opened = list(section.open_edges())
    L = np.linalg.norm(np.roll(v, -1, axis=0) - v, axis=1)
    tol = 1e-9 * float(L.max())
    if n == 3 and len(opened) == 1:
        k = opened[0]
        apex = (k + 2) % 3
        a, b = v[k], v[(k + 1) % 3]
        la, lb = np.linalg.norm(a - v[apex]), np.linalg.norm(b - v[apex])
        if abs(la - lb) <= tol:
            half = 0.5 * float(section.interior_angles[apex])
            return oc.WedgeChannel(half, float(la), theta)
        return None
    if n == 4 and np.allclose(section.interior_angles, 0.5 * math.pi, atol=1e-9):
        if len(opened) == 1:
            k = opened[0]
            return oc.RectangularGroove(float(L[k]), float(L[(k + 1) % 4]), theta)
        if len(opened) == 2 and (opened[1] - opened[0]) == 2:
            k = opened[0]
            return oc.ParallelPlates(float(L[k]), float(L[(k + 1) % 4]), theta)
    return None


# =============================================================================================
# bubble state as a function of the flow ratio
# =============================================================================================
def _ratio(ql, qg):
    ql, qg = positive_flows(ql, qg)
    return ql, qg, qg / ql


def _sizes(geom, r, c):
    """(V_b, d_b, N, V_eff, d_eff) at flow ratios r for constants c (N = k_m l_b / lambda)."""
    S, A = geom.depth, geom.area
    r = np.asarray(r, dtype=float)
    if r.size == 1 and 0.0 < float(r.flat[0]) < math.inf:
        # one finite ratio (a root search polishing a line): the same formulas with the math module, tens of
        # times cheaper than numpy calls on one value
        try:
            return tuple(np.full(r.shape, v) for v in _sizes_one(S, A, float(r.flat[0]), c))
        except (ZeroDivisionError, OverflowError, ValueError):
            pass                # an underflow or overflow: the array path gives its inf or NaN
    with np.errstate(divide="ignore", invalid="ignore"):
        if c["bubble_diameter_ratio"] > 0:
            d_b = np.full(r.shape, c["bubble_diameter_ratio"] * S)
            V_b = math.pi * d_b ** 3 / 6.0
        else:
            w, a = _injector(c, S)
            V_b = bb.squeezing_volume_at_ratio(r, w, a)     # w^3 (1 + a r)
            d_b = np.cbrt(6.0 * V_b / math.pi)
        ell = np.maximum(d_b, V_b / A)                    # streamwise bubble length: a sphere, or a plug
        N = c["merge_length_ratio"] * ell * A * r / (V_b * (1.0 + r))        # k_m l_b / lambda
    # max(1, N) with N = NaN counted as 1 and +inf as the largest float (as numpy's nan_to_num does)
    V_eff = V_b * np.minimum(np.fmax(1.0, N), _FLOAT_MAX)
    return V_b, d_b, N, V_eff, np.cbrt(6.0 * V_eff / math.pi)


_FLOAT_MAX = float(np.finfo(float).max)


def _injector(c, S):
    """(injector width w [m], squeezing coefficient a) of the squeezing law for constants c and depth S; constants
    out of range raise the squeezing law's own message naming them."""
    w = c["injector_width_ratio"] * S
    a = c["squeeze_a"]
    if not (0.0 < w < math.inf and 0.0 <= a < math.inf):   # checked constants; else say which
        bb.squeezing_volume(1.0, 1.0, w, a=a)
    return w, a


def _sizes_one(S, A, r, c):
    """:func:`_sizes` for one ratio 0 < r < inf, as floats (tests/test_corner_models.py checks the two agree)."""
    if c["bubble_diameter_ratio"] > 0:
        d_b = c["bubble_diameter_ratio"] * S
        V_b = math.pi * d_b ** 3 / 6.0
    else:
        w, a = _injector(c, S)
        V_b = w * w * w * (1.0 + a * r)
        d_b = math.cbrt(6.0 * V_b / math.pi)
    ell = max(d_b, V_b / A)
    N = c["merge_length_ratio"] * ell * A * r / (V_b * (1.0 + r))
    V_eff = V_b * min(N if N > 1.0 else 1.0, _FLOAT_MAX)       # max(1, N), NaN counted as 1, as the array path
    return V_b, d_b, N, V_eff, math.cbrt(6.0 * V_eff / math.pi)


def bubble_state(case, ql, qg, **consts):
    r"""Bubble sizes, spacing and merging at flow rates (Q_L, Q_G), as the corner models use them.

    .. math::

        V_b = w^3 (1 + a r) \ \text{(squeezing law, } w = \text{injector width)}
        \ \text{or}\ \pi d_b^3/6 \ \text{(user value)}, \qquad
        \lambda = \frac{V_b}{A}\Big(1 + \frac1r\Big), \qquad
        N = \frac{k_m \ell_b}{\lambda}, \quad \ell_b = \max(d_b, V_b/A), \qquad
        V_\mathrm{eff} = V_b \max(1, N)

    Parameters
    ----------
    case : Case
    ql, qg : float or array   flow rates [m^3/s]
    **consts : constants of :data:`CORNER_SEPARATION` (defaults where omitted)

    Returns
    -------
    dict of arrays: ``volume`` V_b [m^3], ``diameter`` d_b [m], ``frequency`` f [1/s], ``spacing``
    lambda [m], ``merging_ratio`` N [-], ``effective_volume`` V_eff [m^3], ``effective_diameter``
    d_eff [m], ``reach_diameter`` d_reach [m] (smallest bubble pushed to the open side)
    """
    c = CORNER_SEPARATION.resolve_constants(consts)
    geom = _usable_geometry(case)
    ql, qg, r = _ratio(ql, qg)
    V_b, d_b, N, V_eff, d_eff = _sizes(geom, r, c)
    out = {"volume": V_b, "diameter": d_b, "frequency": bb.bubble_frequency(qg, V_b),
           "spacing": bb.bubble_spacing(ql, qg, V_b, geom.area), "merging_ratio": N,
           "effective_volume": V_eff, "effective_diameter": d_eff,
           "reach_diameter": geom.path.reach_diameter(c["injection_position"], c["confinement_ratio"])}
    return {k: (float(v) if np.ndim(v) == 0 else np.asarray(v, dtype=float)) for k, v in out.items()}


def _usable_geometry(case):
    geom = corner_geometry(case)
    if geom.reason is not None:
        raise ValueError(f"the corner models do not apply to this case: {geom.reason}")
    return geom


# migration-time table ----------------------------------------------------------------------
_MIG_KEYS = ("injection_position", "confinement_ratio", "capillary_coefficient", "hele_shaw_drag", "film_drag",
             "form_drag")
_N_TABLE = 241
#: The table's abscissa z = ln(w / (W - w)), w = d - d_reach, W = d_touch - d_reach, spans |z| <= _Z_END:
#: geometric grading toward both ends (the time diverges at d_reach and falls to 0 at d_touch).
_Z_END = 30.0


@functools.lru_cache(maxsize=256)
def _mig_table(path, rho, mu, sigma, theta, injection, k_c, c_cap, c_hs, c_f, c_d, rho_g=0.0, a_m=0.0, a_z=0.0):
    """(z grid, ln t grid, d_low, d_touch, interpolator, drift interpolator): migration time against bubble
    diameter; the drift interpolator (mean axial drift speed q [m/s] against z, flat beyond the grid) is None
    without an axial acceleration a_z.

    d_low is the smallest bubble that arrives: the reach diameter, or with buoyancy that opposes the push
    (a_m < 0) the larger stall diameter (:func:`lowgmap.physics.models.bubbles.stall_diameter`).
    z = ln(w/(W - w)) with w = d - d_low and W = d_touch - d_low; ln t is smooth in z and close to
    linear at both ends (t ~ ln(1/w) near the confinement line or the stall diameter, t ~ W - w near the
    touching size), so it is interpolated by a cubic spline in z (measured error below 1e-5 against
    direct quadrature) and extrapolated linearly.
    """
    buoy = {}
    if a_m != 0.0 or a_z != 0.0:
        buoy["rho_gas"] = rho_g
    if a_m == 0.0:
        d_low = path.reach_diameter(injection, k_c)
    else:
        buoy["buoyancy_acceleration"] = a_m
        d_low = bb.stall_diameter(path, injection=injection, confinement_ratio=k_c, rho=rho, sigma=sigma,
                                  contact_angle=theta, capillary_coefficient=c_cap, **buoy)
    if a_z != 0.0:
        buoy.update(axial_acceleration=a_z, with_drift=True)
    d_touch = 2.0 * float(np.interp(injection * path.length, path.s, path.open_distance))
    W = d_touch - d_low
    if not W > 1e-12 * max(d_touch, 1e-300):
        return np.zeros(0), np.zeros(0), d_low, d_touch, None, None
    z = np.linspace(-_Z_END, _Z_END, _N_TABLE)
    w = W * 0.5 * (1.0 + np.tanh(0.5 * z))                # = W / (1 + exp(-z)), without overflow
    t = bb.migration_time(path, d_low + w, injection=injection, confinement_ratio=k_c, rho=rho, mu=mu,
                          sigma=sigma, contact_angle=theta, capillary_coefficient=c_cap, hele_shaw_drag=c_hs,
                          film_drag=c_f, form_drag=c_d, **buoy)
    q = None
    if a_z != 0.0:
        t, q = t
    with np.errstate(divide="ignore"):
        lt = np.log(np.asarray(t, dtype=float))
    good = np.isfinite(lt)
    z, lt = z[good], lt[good]
    for a in (z, lt):
        a.flags.writeable = False
    drift = None
    if q is not None and z.size >= 4:
        drift = CubicSpline(z, np.asarray(q, dtype=float)[good], extrapolate=False)
    return z, lt, d_low, d_touch, (CubicSpline(z, lt, extrapolate=False) if z.size >= 4 else None), drift


def migration_buoyancy(case, **consts) -> float:
    r"""Component along the migration path of the acceleration buoyancy gives a bubble [m/s^2].

    .. math:: a_m = g\, \cos\beta\, \cos\psi

    The migration path runs in the cross-section, along the bisector of the apex corner from the apex
    toward the open side; it is perpendicular to the conduit axis. Buoyancy pushes a bubble against the
    residual acceleration g. With the axis inclined at beta above the horizontal
    (``case.orientation``, :class:`lowgmap.physics.case.Orientation`), the share of g across the axis is
    cos(beta) (``Orientation.transverse_fraction``: 1 horizontal, 0 vertical upward or downward flow),
    and psi (``open_side_roll``) is the angle in the cross-section between the path and the upward
    direction: psi = 0 (open side facing up) gives a_m = g cos(beta) > 0, buoyancy helps the capillary
    push; psi = pi (open side facing down) gives a_m < 0, buoyancy opposes it. The share of g along the
    axis, a_z = g sin(beta) (``Orientation.axial_fraction``), acts along the stream, not along the path: it
    makes the bubble drift along the conduit relative to the liquid while it migrates (faster than the
    liquid in upward flow, slower in downward flow), which the separation line counts
    (:func:`separation_liquid_flow`).

    Parameters
    ----------
    case : Case
    **consts : constants of :data:`CORNER_SEPARATION` (``open_side_roll``; defaults where omitted)

    Returns
    -------
    float   a_m [m/s^2]; exactly 0 when the orientation is unspecified (the low-gravity chart) or g = 0

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.examples import example_case
    >>> case = example_case(g=1.62, orientation=Orientation.horizontal())
    >>> migration_buoyancy(case), migration_buoyancy(case, open_side_roll=math.pi)
    (1.62, -1.62)
    >>> migration_buoyancy(case.with_(orientation=Orientation.vertical_up()))
    0.0
    """
    c = CORNER_SEPARATION.resolve_constants(consts) if consts else CORNER_SEPARATION.defaults
    return _a_m(case, c)


def _a_z(case) -> float:
    """Axial component, along the flow, of the acceleration buoyancy gives a bubble [m/s^2] (0: unspecified)."""
    o = getattr(case, "orientation", None)
    if o is None or not o.is_known or case.g == 0.0:
        return 0.0
    ax = o.axial_fraction
    return 0.0 if ax == 0.0 else float(case.g) * ax


def _a_m(case, c) -> float:
    o = getattr(case, "orientation", None)
    if o is None or not o.is_known or case.g == 0.0:
        return 0.0
    tr = o.transverse_fraction
    roll = float(c.get("open_side_roll", 0.0))
    if tr == 0.0 or roll == 0.5 * math.pi:
        return 0.0
    cos_roll = {0.0: 1.0, 0.5 * math.pi: 0.0, math.pi: -1.0}.get(roll, math.cos(roll))
    return float(case.g) * tr * cos_roll


def _table_for(case, geom, c):
    f = case.fluid
    a_m = _a_m(case, c)
    a_z = _a_z(case)
    extra = (f.rho_g, a_m, a_z) if a_z != 0.0 else (f.rho_g, a_m) if a_m != 0.0 else ()
    return _mig_table(geom.path, f.rho_l, f.mu_l, f.sigma, geom.contact_angle,
                      *(float(c[k]) for k in _MIG_KEYS), *extra)


def arrival_diameter(case, **consts) -> float:
    r"""Smallest bubble diameter that arrives at the open side [m]: the reach diameter, or with buoyancy
    that opposes the push the larger stall diameter (:func:`lowgmap.physics.models.bubbles.stall_diameter`).

    Bubbles between the two are confined (above the confinement line) but never arrive: their migration
    time is infinite and the chart counts them as carried through.

    Parameters
    ----------
    case : Case   an open section the corner models apply to
    **consts : constants of :data:`CORNER_SEPARATION`

    Returns
    -------
    float   d_arr [m]

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Groove
    >>> case = example_case(Groove(math.radians(10.0), 0.004), g=9.80665, orientation=Orientation.horizontal())
    >>> up = arrival_diameter(case)
    >>> down = arrival_diameter(case, open_side_roll=math.pi)
    >>> up == bubble_state(case, 1e-6, 1e-7)["reach_diameter"], down > up
    (True, True)
    """
    c = CORNER_SEPARATION.resolve_constants(consts)
    geom = _usable_geometry(case)
    return float(_table_for(case, geom, c)[2])


def bubble_bond_number(case, ql, qg, **consts):
    r"""Bond (Eötvös) number of the (merged) bubbles at flow rates (Q_L, Q_G) [-].

    .. math:: Eo_b = \frac{(\rho_L - \rho_G)\, g\, d_\mathrm{eff}^2}{\sigma}

    Where it exceeds :data:`BUBBLE_BOND_LIMIT` (1, Brauner 1990) the bubble's shape is no longer set by
    capillarity alone and the capillary models of this family (push, drags, confinement) stop applying;
    with the case's orientation given, the lines that use the bubble size are flagged there
    (drawn as outside validity).

    Parameters
    ----------
    case : Case
    ql, qg : float or array   flow rates [m^3/s]
    **consts : constants of :data:`CORNER_SEPARATION`

    Returns
    -------
    float or array   Eo_b [-] (NaN where the flow rates are not > 0)

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Groove
    >>> case = example_case(Groove(math.radians(10.0), 0.004), g=9.80665)
    >>> round(bubble_bond_number(case, 1e-6, 1e-7, bubble_diameter_ratio=0.75), 4)     # 3 mm air bubble in water
    1.2104
    """
    c = CORNER_SEPARATION.resolve_constants(consts)
    geom = _usable_geometry(case)
    _, _, r = _ratio(ql, qg)
    out = _bubble_bond(case, geom, r, c)
    return float(out) if np.ndim(out) == 0 else out


def _bubble_bond(case, geom, r, c):
    f = case.fluid
    *_, d_eff = _sizes(geom, r, c)
    return (f.rho_l - f.rho_g) * case.g * d_eff ** 2 / f.sigma


def transverse_bond(case) -> float:
    r"""Bond number of the residual acceleration across the open channel of a case [-].

    .. math:: Bo_\perp = \frac{(\rho_L - \rho_G)\, g \cos\beta\, L^2}{\sigma}

    with L the length scale of the section's open-channel model (:func:`open_channel_of`: wall length of a
    V-groove or wedge channel, width of a rectangular groove, gap of plates) and cos(beta) the share of g
    across the axis (``Orientation.transverse_fraction``), from
    :func:`lowgmap.physics.models.open_channel.transverse_bond_number`. Above
    :data:`~lowgmap.physics.models.open_channel.TRANSVERSE_BOND_LIMIT` (0.1, common practice, no source) the
    free surface is no longer a circular arc in the section and the gas-ingestion line is flagged.

    Parameters
    ----------
    case : Case

    Returns
    -------
    float   Bo_perp [-]; 0 when the orientation is unspecified (the low-gravity chart: no buoyancy on it), NaN
    without an open-channel model or when the liquid is not denser than the gas

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Groove
    >>> case = example_case(Groove(math.radians(10.0), 0.004), g=9.80665, orientation=Orientation.horizontal())
    >>> transverse_bond(case) > 1.0, transverse_bond(case.with_(g=9.80665e-6)) < 1e-4
    (True, True)
    """
    o = getattr(case, "orientation", None)
    if o is None or not o.is_known:
        return 0.0
    ch = open_channel_of(case.section, case.wetting.contact_angle)
    f = case.fluid
    drho = f.rho_l - f.rho_g
    if ch is None or not drho > 0:
        return math.nan
    from lowgmap.physics.models.open_channel import transverse_bond_number

    return float(transverse_bond_number(ch, drho, f.sigma, float(case.g) * o.transverse_fraction))


#: Relative margin (d - d_reach)/d_reach below which the charts take the migration time at this margin.
#: The time diverges only logarithmically at the confinement line (theory manual), and a flow ratio
#: Q_G/Q_L known to rounding resolves the margin no finer than about 1e-15/1e-9 = 1e-6 of itself here:
#: so the lines, the regions and the classification use one finite, resolvable value on the line.
_REACH_RESOLUTION = 1e-9


def _t_mig(case, geom, d, c, tab=None):
    """Migration time [s] of bubbles of diameter d (``tab``: the case's migration table, if the caller has it): NaN if they do not reach, 0 if they touch at once, inf if
    buoyancy stalls them; for d within _REACH_RESOLUTION of the smallest arriving size (the reach or the stall
    diameter), the time at that margin (the exact time diverges there)."""
    z, lt, d_low, d_touch, interp, _ = _table_for(case, geom, c) if tab is None else tab
    d_reach = geom.path.reach_diameter(float(c["injection_position"]), float(c["confinement_ratio"]))
    d0 = np.asarray(d, dtype=float)
    d = np.where(d0 >= d_low * (1.0 - 1e-12), np.maximum(d0, d_low * (1.0 + _REACH_RESOLUTION)), d0)
    out = np.full(d.shape, np.nan)
    if interp is not None:
        W = d_touch - d_low
        w = d - d_low
        with np.errstate(all="ignore"):
            zz = np.log(w) - np.log(W - w)
            inside = np.isfinite(zz)
            below, above = zz < z[0], zz > z[-1]
        zc = np.clip(np.where(inside, zz, 0.0), z[0], z[-1])
        val = interp(zc)
        if below.any():
            lo_slope = (lt[1] - lt[0]) / (z[1] - z[0])
            val = np.where(below, lt[0] + lo_slope * (zz - z[0]), val)
        if above.any():
            hi_slope = (lt[-1] - lt[-2]) / (z[-1] - z[-2])
            val = np.where(above, lt[-1] + hi_slope * (zz - z[-1]), val)
        with np.errstate(over="ignore"):
            out = np.where(inside, np.exp(val), out)
        out = np.where(w <= 0, np.inf, out)
    out = np.where(d >= d_touch, 0.0, out)
    return np.where(d0 >= d_reach * (1.0 - 1e-12), out, np.nan)


def _drift(case, geom, d, c, tab=None):
    """Mean axial drift speed of bubbles of diameter d during their migration [m/s]; None without axial buoyancy."""
    z, lt, d_low, d_touch, interp, drift = _table_for(case, geom, c) if tab is None else tab
    if drift is None:
        return None
    d = np.asarray(d, dtype=float)
    d = np.maximum(d, d_low * (1.0 + _REACH_RESOLUTION))
    with np.errstate(all="ignore"):
        zz = np.log(d - d_low) - np.log(d_touch - d)
    zc = np.clip(np.where(np.isfinite(zz), zz, z[0]), z[0], z[-1])
    zc = np.where(d >= d_touch, z[-1], zc)
    return np.where(d >= d_touch, 0.0, drift(zc))


def separation_liquid_flow(case, ratio, **consts):
    r"""Liquid flow rate on the separation line at flow ratios r = Q_G/Q_L [m^3/s].

    .. math:: Q_L = \frac{l A}{s_f\, t_\mathrm{mig}(d_\mathrm{eff}(r))\,(1 + r)}

    With buoyancy along the conduit axis (a case with an inclined or vertical orientation) the bubble also
    drifts along the stream at the mean speed q during its migration
    (:func:`lowgmap.physics.models.bubbles.migration_time` with ``with_drift``), and it must reach the open
    side within the conduit length: :math:`s_f (\bar u + q)\, t_\mathrm{mig} \le l`, so

    .. math:: Q_L = \frac{A}{1 + r}\left(\frac{l}{s_f\, t_\mathrm{mig}} - q\right)

    (0 where the drift alone carries the bubble out: q >= l/(s_f t_mig)).

    Parameters
    ----------
    case : Case
    ratio : float or array   r = Q_G/Q_L [-], > 0
    **consts : constants of :data:`CORNER_SEPARATION`

    Returns
    -------
    float or array   Q_L [m^3/s]: NaN where the bubbles do not reach the open side, inf where
    they touch it at injection (they separate at any flow)
    """
    c = CORNER_SEPARATION.resolve_constants(consts)
    geom = _usable_geometry(case)
    r = np.asarray(ratio, dtype=float)
    out = _sep_ql(case, geom, r, c)
    return float(out) if out.ndim == 0 else out


def _sep_ql(case, geom, r, c):
    *_, d_eff = _sizes(geom, r, c)
    tab = _table_for(case, geom, c)
    t = _t_mig(case, geom, d_eff, c, tab)
    q = _drift(case, geom, d_eff, c, tab)
    with np.errstate(divide="ignore", invalid="ignore"):
        if q is None:
            return case.length * geom.area / (c["safety_factor"] * t * (1.0 + r))
        # the bubble travels (mean liquid speed + drift) x t_mig along the conduit while it migrates
        u = case.length / (c["safety_factor"] * t) - q
        out = geom.area * np.maximum(u, 0.0) / (1.0 + r)
        return np.where(np.isinf(t), 0.0, np.where(np.isnan(u), np.nan, out))


# critical flow rate ------------------------------------------------------------------------
_N_RHO = 11
#: Entries of the in-memory cache of critical-flow tables: a slider or a band search that revisits many
#: values (lengths, constants) must not rebuild them.
_QCRIT_CACHE_SIZE = 1024


def _axial_gravity(case) -> float:
    """Residual acceleration along the conduit axis, against the flow [m/s^2]: ``g * orientation.axial_fraction``
    (> 0 upward flow, < 0 downward flow); 0 when the orientation is unspecified (the low-gravity chart)."""
    return _a_z(case)


def _uses_similarity(channel) -> bool:
    """Whether the critical flow without axial gravity comes from the similarity curve (the surrogate: one
    interpolation per density) rather than from the root search tabulated over the density (:func:`_qcrit_table`)."""
    if surrogates.exact_requested():
        return False
    from lowgmap.physics.models.open_channel.surrogate import similarity_applies

    return similarity_applies(channel)


@functools.lru_cache(maxsize=_QCRIT_CACHE_SIZE)
def _qcrit_table(channel, length, rho_l, rho_g, mu, sigma, K_e, full, g_ax=0.0, exact=False):
    """Critical flow against the mixture density by the root search at _N_RHO densities (at rho_L alone when
    ``full`` is False): (ln rho grid, Q_crit grid [m^3/s], function ln rho -> Q_crit or None, limits).

    Used under the exact switch and with axial gravity, where the similarity curve does not apply. ``g_ax``
    [m/s^2] and ``exact`` (:func:`lowgmap.physics.surrogates.exact_requested`: the Stokes tables are then solved,
    not interpolated) are part of the key of both caches. The function is a PCHIP of ln Q_crit against ln rho,
    or of Q_crit itself when some are 0 (upward flow whose hydrostatic rise exceeds what the surface holds).
    """
    def build():
        from lowgmap.physics.models.open_channel import critical_flow_rate

        rhos = np.geomspace(max(rho_g, 1e-6 * rho_l), rho_l, _N_RHO) if full else np.array([rho_l])
        q, lim = [], []
        for rho in rhos:
            res = critical_flow_rate(channel, length, rho=float(rho), mu=mu, sigma=sigma, K_e=K_e, g_axial=g_ax)
            q.append(res.Q_crit)
            lim.append(res.limited_by)
        return {"log_rho": np.log(rhos), "q": np.array(q, dtype=float), "limited_by": np.array(lim, dtype=str)}

    # kept on disk too (lowgmap.physics.cache): one table costs up to 11 critical-flow solves
    arrays = cache.cached_arrays("corner.critical_flow_table.v3",
                                 (channel, length, rho_l, rho_g, mu, sigma, K_e, bool(full), _N_RHO, float(g_ax),
                                  bool(exact)), build)
    lr, q = arrays["log_rho"], arrays["q"]
    for a in (lr, q):
        a.flags.writeable = False
    fn = None
    if full:
        positive = bool(np.all(q > 0))
        # monotone cubic: in log-log, or on Q itself (stays >= 0 between the nodes) when some Q_crit are 0
        interp = PchipInterpolator(lr, np.log(q) if positive else q, extrapolate=True)
        fn = functools.partial(_from_table, interp, positive)
    return lr, q, fn, tuple(str(x) for x in arrays["limited_by"])


def _from_table(interp, logarithmic, log_rho):
    out = interp(log_rho)
    return np.exp(out) if logarithmic else np.maximum(out, 0.0)


def _case_table(case, channel, c, g_ax):
    f = case.fluid
    return _qcrit_table(channel, float(case.length), f.rho_l, f.rho_g, f.mu_l, f.sigma, float(c["entrance_loss"]),
                        c["gas_effect"] > 0, float(g_ax), surrogates.exact_requested())


def _q_crit(case, rho_m, c):
    """Critical flow rate [m^3/s] of the case's open channel at the mixture densities rho_m [kg/m^3], clipped to
    [max(rho_G, 1e-6 rho_L), rho_L].

    Without axial gravity: the similarity curve
    (:func:`~lowgmap.physics.models.open_channel.surrogate.critical_flow_rates`), or under the exact switch the
    root search tabulated over the density. With axial gravity g_a (the similarity does not hold: gravity adds a
    group) the similarity value times the ratio Q_crit(g_a)/Q_crit(0) of two root searches tabulated at the same
    densities: the ratio is smooth in the density and tends to 1 as g_a -> 0, so the line leaves the low-gravity
    line continuously, and the interpolation error of the tables cancels in it.
    """
    f = case.fluid
    ch = open_channel_of(case.section, case.wetting.contact_angle)
    g_ax = _axial_gravity(case)
    rho_m = np.asarray(rho_m, dtype=float)
    if not _uses_similarity(ch):
        return _tabulated(_case_table(case, ch, c, g_ax), rho_m)
    from lowgmap.physics.models.open_channel.surrogate import critical_flow_rates

    out = np.full(rho_m.shape, np.nan)
    ok = np.isfinite(rho_m)
    if ok.any():
        rho = np.clip(rho_m[ok], max(f.rho_g, 1e-6 * f.rho_l), f.rho_l)
        K_e = float(c["entrance_loss"])
        cur = _similarity_of(ch, K_e)
        if cur is None:
            out[ok], _ = critical_flow_rates(ch, float(case.length), rho, f.mu_l, f.sigma, K_e=K_e)
        else:
            out[ok] = cur.q_crit(ch.length_scale, float(case.length), rho, float(f.mu_l), float(f.sigma))
    if g_ax == 0.0:
        return out
    return out * _gravity_ratio(_case_table(case, ch, c, g_ax), _case_table(case, ch, c, 0.0), rho_m)


@functools.lru_cache(maxsize=256)
def _similarity_of(channel, K_e):
    """The similarity curve of the channel's shape and entrance loss (cached per channel: a line is evaluated
    many times per chart), or None where it does not apply (not monotone in the length: the root search of
    :func:`~lowgmap.physics.models.open_channel.surrogate.critical_flow_rates` then)."""
    from lowgmap.physics.models.open_channel.surrogate import similarity_curve

    try:
        return similarity_curve(channel, K_e)
    except RuntimeError:
        return None


def _tabulated(table, rho_m):
    lr, q, fn, _ = table
    if fn is None:
        return np.full(rho_m.shape, q[0])
    with np.errstate(invalid="ignore", divide="ignore"):
        return fn(np.clip(np.log(rho_m), lr[0], lr[-1]))


def _gravity_ratio(with_g, without_g, rho_m):
    """Q_crit(g_a)/Q_crit(0) at the densities rho_m from two root-search tables on the same density nodes."""
    lr, q_g, _, _ = with_g
    q_0 = without_g[1]
    ratio = q_g / q_0
    if ratio.size == 1:
        return np.full(rho_m.shape, ratio[0])
    interp = _ratio_interpolator(lr.tobytes(), ratio.tobytes())
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.maximum(interp(np.clip(np.log(rho_m), lr[0], lr[-1])), 0.0)


@functools.lru_cache(maxsize=_QCRIT_CACHE_SIZE)
def _ratio_interpolator(lr_bytes, ratio_bytes):
    return PchipInterpolator(np.frombuffer(lr_bytes), np.frombuffer(ratio_bytes), extrapolate=True)


def ingestion_liquid_flow(case, ratio, **consts):
    r"""Liquid flow rate on the gas-ingestion line at flow ratios r = Q_G/Q_L [m^3/s].

    .. math:: Q_L = \frac{Q_\mathrm{crit}(\rho_m)}{1 + \phi r}, \qquad
              \rho_m = \frac{\rho_L + \phi r \rho_G}{1 + \phi r}

    with :math:`Q_\mathrm{crit}` the critical flow rate of the open channel (conduit length, liquid viscosity,
    rho_m clipped to [max(rho_G, 1e-6 rho_L), rho_L]) and :math:`\phi` = ``gas_effect``.

    Parameters
    ----------
    case : Case
    ratio : float or array   r [-]
    **consts : constants of :data:`OPEN_CHANNEL_INGESTION`

    Returns
    -------
    float or array   Q_L [m^3/s]; 0 when the open channel cannot hold liquid below the gas pressure
    (:func:`meniscus_state`): gas is then drawn in at any flow

    Notes
    -----
    Without axial gravity :math:`Q_\mathrm{crit}` comes from the similarity curve of the channel's shape
    (:func:`lowgmap.physics.models.open_channel.surrogate.critical_flow_rates`; measured error against the
    root search below 1.3e-4, :data:`lowgmap.physics.surrogates.SURROGATE_ERRORS`); under the exact switch
    (:func:`lowgmap.physics.surrogates.exact`) from the root search of
    :func:`lowgmap.physics.models.open_channel.critical_flow_rate` at 11 densities between max(rho_G,
    1e-6 rho_L) and rho_L, interpolated (PCHIP) in ln rho. With the case's orientation given, the share of g
    along the axis, :math:`g_a = g \sin\beta` (against the flow), enters the one-dimensional model; the
    similarity then does not hold, and :math:`Q_\mathrm{crit}(\rho_m) = Q_\mathrm{sim}(\rho_m)\,
    [Q(g_a)/Q(0)](\rho_m)`, the ratio of two root searches tabulated at the same 11 densities: it is smooth in
    the density and tends to 1 as g_a -> 0, so the line leaves the low-gravity line continuously.

    Examples
    --------
    >>> import math
    >>> from lowgmap.physics.case import Orientation
    >>> from lowgmap.physics.examples import example_case
    >>> from lowgmap.physics.geometry.sections import Groove
    >>> case = example_case(Groove(math.radians(10.0), 0.004), g=0.01)
    >>> up, down = (ingestion_liquid_flow(case.with_(orientation=o), 0.1)
    ...             for o in (Orientation.vertical_up(), Orientation.vertical_down()))
    >>> bool(up < ingestion_liquid_flow(case, 0.1) < down)
    True
    """
    c = OPEN_CHANNEL_INGESTION.resolve_constants(consts)
    r = np.asarray(ratio, dtype=float)
    out = _ing_ql(case, r, c)
    return float(out) if out.ndim == 0 else out


def _ing_ql(case, r, c):
    if not corner_geometry(case).holds_liquid:
        return np.zeros(np.shape(r))            # gas drawn in at any flow
    phi = c["gas_effect"]
    f = case.fluid
    load = 1.0 + phi * r
    rho_m = (f.rho_l + phi * r * f.rho_g) / load
    return _q_crit(case, rho_m, c) / load


# =============================================================================================
# models
# =============================================================================================
def _rule(values):
    """Regime from the values of the members' implicit functions (see the module notes)."""
    shape = np.broadcast_shapes(*(np.shape(v) for v in values.values())) if values else ()

    def above(name, default):
        v = values.get(name)
        if v is None:
            return np.full(shape, default)
        with np.errstate(invalid="ignore"):
            return np.broadcast_to(np.asarray(v) >= 0, shape)

    ingest = above("open_channel_ingestion", False)
    blow = above("corner_blow_through", False)
    merge = above("corner_merging", False)
    conf = above("corner_confinement", True)
    if "corner_separation" in values:
        with np.errstate(invalid="ignore"):
            fast = np.broadcast_to(np.asarray(values["corner_separation"]) < 0, shape)
    else:
        fast = np.full(shape, False)
    sep = conf & fast
    # codes into _RULE_NAMES (integer choices, then one look-up: cheaper than choosing among strings)
    code = np.where(merge, np.where(sep, 2, 3), np.where(sep, 1, 0))
    code = np.where(ingest, 5, np.where(blow, 4, code))
    return _RULE_NAMES[np.atleast_1d(code)].reshape(code.shape)


_RULE_NAMES = np.array([ISOLATED_CARRIED, ISOLATED_SEPARATED, MERGING_SEPARATED, MERGING_CARRIED, BLOW_THROUGH,
                        INGESTION])


def _notes(case, region_models):
    out = []
    geom = corner_geometry(case)
    names = {m.name for m, _ in region_models}
    f = case.fluid
    if not geom.holds_liquid and "open_channel_ingestion" in names:
        out.append(f"GAS DRAWN IN AT ANY FLOW: {geom.reason[len('gas is drawn in at any flow: '):]}. Every flow rate "
                   f"on this chart lies in the regime '{INGESTION}'. The open channel holds liquid only with a lower "
                   f"contact angle or walls that meet the open side more steeply (for a V-groove or wedge channel: a "
                   f"smaller half-angle).")
    if geom.path is not None:
        S = geom.depth
        bo = (f.rho_l - f.rho_g) * case.g * S ** 2 / f.sigma
        consts = dict(next((c for m, c in region_models if m.name == "corner_separation"),
                           tuple(CORNER_SEPARATION.defaults.items())))
        h_max = float(np.max(geom.path.gap))
        push = consts.get("capillary_coefficient", 2.0) * math.cos(geom.contact_angle) * \
            float(np.median(geom.path.taper))
        ratio = (f.rho_l - f.rho_g) * case.g * h_max ** 2 / (f.sigma * push) if push > 0 else math.inf
        o = getattr(case, "orientation", None)
        if o is None or not o.is_known:
            if bo >= 1.0 or ratio >= 0.1:
                out.append(f"Gravity NOT negligible: Bond number (rho_L - rho_G) g S^2 / sigma = {bo:.3g} on the "
                           f"depth S = {S * 1e3:.4g} mm, buoyancy/capillary push on a bubble = {ratio:.2g} at "
                           f"g = {case.g:.3g} m/s^2. The corner lines ignore buoyancy (no orientation given); use "
                           f"them as indications only.")
        elif "corner_separation" in names:
            out.extend(_buoyancy_notes(case, geom, consts, bo, ratio))
    if "open_channel_ingestion" in names and geom.holds_liquid:
        out.extend(_ingestion_gravity_notes(case, dict(next(c for m, c in region_models
                                                            if m.name == "open_channel_ingestion"))))
    present = set(SCHEME.regime_names(region_models))
    sep = [r.name for r in REGIMES if r.separates_gas and r.name in present]
    if not geom.holds_liquid:
        pass
    elif sep:
        out.append(f"Regimes that separate all the gas within the conduit: {', '.join(sep)}; in the others gas "
                   f"reaches the liquid outlet.")
    else:
        out.append("No regime on this chart separates the gas: without the separation line the gas always "
                   "reaches the liquid outlet.")
    return out


def _ingestion_gravity_notes(case, consts):
    """Chart notes on gravity in the open channel's critical flow when the case states an orientation."""
    from lowgmap.physics.models.open_channel import TRANSVERSE_BOND_LIMIT

    o = getattr(case, "orientation", None)
    if o is None or not o.is_known:
        return []
    out = []
    g_ax = _axial_gravity(case)
    if g_ax != 0.0:
        out.append(f"Gravity along the open channel ({o.describe()}, {abs(g_ax):.3g} m/s^2 "
                   f"{'against' if g_ax > 0 else 'with'} the flow): the hydrostatic term of the one-dimensional "
                   f"model {'lowers' if g_ax > 0 else 'raises'} the critical flow, which the gas-ingestion line "
                   f"counts.")
        if g_ax > 0 and OPEN_CHANNEL_INGESTION.critical_flow(case, **consts)[0] == 0.0:
            out.append(f"LIQUID NOT HELD: the hydrostatic rise over the conduit length ({case.length * 1e3:.4g} mm "
                       f"at {g_ax:.3g} m/s^2) exceeds what the free surface holds at its smallest radius, so even a "
                       f"vanishing liquid flow draws gas in: the gas-ingestion regime covers at least the liquid-only "
                       f"edge of the chart.")
    bo = transverse_bond(case)
    if bo > TRANSVERSE_BOND_LIMIT:
        out.append(f"Transverse Bond number of the open channel (rho_L - rho_G) g_perp L^2 / sigma = {bo:.3g} > "
                   f"{TRANSVERSE_BOND_LIMIT:g}: gravity across the channel bends the free surface, which the "
                   f"open-channel model takes as circular arcs; the gas-ingestion line is flagged.")
    return out


def _buoyancy_notes(case, geom, consts, bo, ratio):
    """Chart notes on buoyancy in the migration when the case states an orientation."""
    c = {**CORNER_SEPARATION.defaults, **dict(consts)}
    a_m = _a_m(case, c)
    g = case.g
    o = case.orientation
    a_z = _a_z(case)
    if a_m > 0:
        way = "helps the capillary push"
    elif a_m < 0:
        way = "OPPOSES the capillary push"
    else:
        way = "has no component along the migration path"
    along = ("" if a_z == 0 else
             f" Along the conduit {a_z:.3g} m/s^2: the bubbles drift "
             f"{'with the flow (they leave sooner)' if a_z > 0 else 'against the flow (they stay longer)'} while "
             f"they migrate, which the separation line counts.")
    out = [f"Buoyancy in the corner migration ({o.describe()}, g = {g:.3g} m/s^2, open side at "
           f"{math.degrees(float(c.get('open_side_roll', 0.0))):.4g} deg from upward): component along the path "
           f"from the apex to the open side {a_m:.3g} m/s^2, buoyancy {way}; buoyancy/capillary push on a bubble "
           f"at the open side = {ratio:.2g}.{along}"]
    if a_m < 0:
        d_reach = geom.path.reach_diameter(float(c["injection_position"]), float(c["confinement_ratio"]))
        d_arr = float(_table_for(case, geom, c)[2])
        if d_arr > d_reach * (1.0 + 1e-6):
            out.append(f"Bubbles that stall: confined bubbles smaller than {d_arr * 1e3:.4g} mm (reach diameter "
                       f"{d_reach * 1e3:.4g} mm) are held back by buoyancy before the open side and never arrive "
                       f"(migration time infinite); they count as carried through.")
    if bo >= 1.0:
        out.append(f"Bond number (rho_L - rho_G) g S^2 / sigma = {bo:.3g} >= 1 on the depth S = "
                   f"{geom.depth * 1e3:.4g} mm: the liquid's own free surface is shaped by gravity (Brauner 1990); "
                   f"the capillary models are outside their range, and the lines using the bubble size are "
                   f"flagged where the bubble Bond number exceeds {BUBBLE_BOND_LIMIT:g}.")
    return out


#: The regime scheme of the corner family.
SCHEME = PartitionScheme(
    "corner capillary separation",
    ("corner_confinement", "corner_separation", "corner_merging", "corner_blow_through", "open_channel_ingestion"),
    REGIMES, _rule, _notes,
    "bubbles isolated or merging x separated or carried through, plus gas blow-through and gas ingestion")


def _roots(fun, lo, hi, n=241):
    """All sign changes of fun on [lo, hi] (log10 r), located by brentq; (root, rising) pairs."""
    x = np.linspace(lo, hi, n)
    y = np.asarray(fun(x), dtype=float)
    a, b = y[:-1], y[1:]
    with np.errstate(invalid="ignore", over="ignore"):
        hit = np.isfinite(a) & np.isfinite(b) & ((a == 0.0) | (a * b < 0))     # the intervals worth a look
    out = []
    for i in np.flatnonzero(hit).tolist():
        a, b = y[i], y[i + 1]
        if a == 0.0:
            out.append((float(x[i]), b > 0))
        else:
            xr = brentq_known(lambda t: float(fun(np.array([t]))[0]), x[i], x[i + 1], a, b, xtol=1e-14, rtol=1e-13)
            out.append((xr, b > a))
    return out


class _ShapeOf:
    """A case standing for what the ratio lines and the separation line's ends depend on: the migration path
    (the section and its apex corner; the bubble sizes, the reach diameter and the touching size follow from it
    and the constants). Equal and hashed by that path alone, so that designs differing only in the conduit
    length, the gravity level, the fluid, or a contact angle that leaves the same apex corners (a Monte Carlo
    draw, a slider) share them. A case without a path is keyed by its section and contact angle."""

    __slots__ = ("key", "case")

    def __init__(self, case):
        path = corner_geometry(case).path
        # TaperPath compares by identity: one object per section and set of apex corners (bubbles.taper_path)
        self.key = (path,) if path is not None else (case.section, float(case.wetting.contact_angle))
        self.case = case

    def __eq__(self, other):
        return isinstance(other, _ShapeOf) and self.key == other.key

    def __hash__(self):
        return hash(self.key)


#: Range of log10 r scanned once per shape for the roots of the ratio lines and the ends of the separation line,
#: and its scan points (0.02 decade apart). A range asked for (the chart's, or a margin window's) is cut out of
#: it when its own scan of 241 points would be no finer (a range of 4.8 decades or more); a narrower range, or
#: one beyond it, is scanned directly, so no pair of close roots that its own scan resolves is lost.
_ALL_RATIOS = (-14.0, 14.0)
_ALL_RATIOS_N = 1401


def _within_all(lo, hi) -> bool:
    step = (_ALL_RATIOS[1] - _ALL_RATIOS[0]) / (_ALL_RATIOS_N - 1)
    return _ALL_RATIOS[0] <= lo and hi <= _ALL_RATIOS[1] and (hi - lo) / 240.0 >= step


@functools.lru_cache(maxsize=512)
def _cached_roots(model, shape, items):
    """log10 r of every root of the ratio line over :data:`_ALL_RATIOS`, kept per shape and constants."""
    return tuple(x for x, _ in _roots(model._phi(shape.case, dict(items)), *_ALL_RATIOS, _ALL_RATIOS_N))


class _CornerModel(BoundaryModel):
    """Shared behaviour: applicability (open tapering section, Concus–Finn), scheme, line drawing."""

    scheme = SCHEME
    low_gravity = False
    validity_uses_constants = True
    validity_note = ""
    #: "ratio": the line is Q_G/Q_L = const (one or more); "graph": Q_L = F(Q_G/Q_L)
    shape = "ratio"

    def __init__(self, name, label, citation, regime_below, regime_above, constants, notes):
        self.name = name
        self.label = label
        self.citation = citation
        self.regime_below = regime_below
        self.regime_above = regime_above
        self.constants = tuple(constants)
        self.notes = notes

    def applies_to(self, case):
        return corner_geometry(case).reason

    def inactive_reason(self, case):
        """Why the mechanism is physically absent, if it is (no liquid-holding meniscus; not a misuse)."""
        geom = corner_geometry(case)
        return geom.reason if geom.mechanism_absent else None

    def _c(self, consts):
        return self.resolve_constants(consts) if set(consts) != set(self.defaults) else \
            {k: float(v) for k, v in consts.items()}

    # -- ratio lines: phi(log10 r) --------------------------------------------------------
    def _phi(self, case, c):
        raise NotImplementedError

    def _r_range(self, case):
        fr = case.flow_range
        return math.log10(fr.qg_min / fr.ql_max) - 1.0, math.log10(fr.qg_max / fr.ql_min) + 1.0

    def ratio_roots(self, case, **consts):
        """Flow ratios r = Q_G/Q_L [-] where this line lies (ratio lines), over the chart's range."""
        c = self._c(consts)
        lo, hi = self._r_range(case)
        if _within_all(lo, hi):
            try:
                return [10.0 ** x for x in _cached_roots(self, _ShapeOf(case), tuple(sorted(c.items())))
                        if lo <= x <= hi]
            except (TypeError, AttributeError):     # unhashable section, or a stand-in object without one
                pass
        return [10.0 ** x for x, _ in _roots(self._phi(case, c), lo, hi)]

    def qg_of_ql(self, case, ql, **consts):
        """Gas flow on the line [m^3/s]: the lowest crossing from below to above at each Q_L (NaN if none)."""
        c = self._c(consts)
        ql = np.asarray(ql, dtype=float)
        if self.shape == "ratio":
            lo, hi = self._r_range(case)
            lo, hi = lo - 6.0, hi + 6.0
            up = [x for x, rising in _roots(self._phi(case, c), lo, hi, n=481) if rising]
            r = 10.0 ** up[0] if up else math.nan
            with np.errstate(invalid="ignore"):
                out = np.where(np.isfinite(ql) & (ql > 0), ql * r, np.nan)
            return float(out) if out.ndim == 0 else out
        return self._scan_qg(case, ql, c)

    def _ln_f(self, case, c, r):
        """ln Q_L on the line at flow ratios r (graph lines: g = ln Q_L - ln F(r))."""
        raise NotImplementedError

    def _scan_qg(self, case, ql, c):
        """Graph lines: at each Q_L the first ratio where F(r) falls through Q_L (g from < 0 to >= 0)."""
        shp = ql.shape
        q = np.atleast_1d(ql).ravel()
        lo_r, hi_r = self._r_range(case)
        grid = np.linspace(lo_r - 6.0, hi_r + 6.0, 481)
        with np.errstate(all="ignore"):
            lf = np.asarray(self._ln_f(case, c, 10.0 ** grid), dtype=float)
            lq = np.log(np.where(np.isfinite(q) & (q > 0), q, np.nan))
        a, b = lf[None, :-1], lf[None, 1:]
        with np.errstate(invalid="ignore"):
            ok = np.isfinite(a) & np.isfinite(b) & (a > lq[:, None]) & (b <= lq[:, None])
        has = ok.any(axis=1)
        k = np.argmax(ok, axis=1)
        lo, hi = grid[k], grid[np.minimum(k + 1, len(grid) - 1)]
        flo, fhi = lf[k] - lq, lf[np.minimum(k + 1, len(grid) - 1)] - lq      # > 0 and <= 0
        side = np.zeros(len(q))
        x = lo
        for _ in range(60):                        # Illinois regula falsi on ln F(r) - ln Q_L
            with np.errstate(all="ignore"):
                x = (lo * fhi - hi * flo) / (fhi - flo)
                x = np.where(np.isfinite(x) & (x > lo) & (x < hi), x, 0.5 * (lo + hi))
                fx = np.asarray(self._ln_f(case, c, 10.0 ** x), dtype=float) - lq
            fx = np.where(np.isfinite(fx), fx, 1e-300)
            pos = fx > 0
            lo, flo, hi, fhi = (np.where(pos, x, lo), np.where(pos, fx, flo),
                                np.where(pos, hi, x), np.where(pos, fhi, fx))
            flo = np.where(~pos & (side == -1), 0.5 * flo, flo)
            fhi = np.where(pos & (side == 1), 0.5 * fhi, fhi)
            side = np.where(pos, 1, -1)
            if np.all(~has | (hi - lo <= 1e-14 * np.maximum(1.0, np.abs(x))) | (np.abs(fx) < 1e-14)):
                break
        out = np.where(has, q * 10.0 ** x, np.nan).reshape(shp)
        return float(out) if out.ndim == 0 else out

    def line_pieces(self, case, **consts):
        """The line as :class:`~lowgmap.physics.models.regimes.LinePiece` objects (one per constant ratio, t = log10 Q_L)."""
        c = self._c(consts)
        fr = case.flow_range
        x0, x1 = math.log10(fr.ql_min), math.log10(fr.ql_max)
        out = []
        for r in self.ratio_roots(case, **c):
            out.append(LinePiece(x0, x1, lambda t, r=r: (10.0 ** t, r * 10.0 ** t), straight=True))
        return out

    # -- validity: squeezing law at the injector; bubble Bond number with buoyancy -------------
    def validity_mask(self, case, ql, qg, **consts):
        """True where the sub-models hold: the squeezing law at the injector (liquid capillary number <=
        :data:`SQUEEZING_CA_MAX`) and, when the case states an orientation (buoyancy on the chart), the bubble
        Bond number (:func:`bubble_bond_number`) <= :data:`BUBBLE_BOND_LIMIT`."""
        ql, qg = positive_flows(ql, qg)
        mask = np.isfinite(ql) & np.isfinite(qg)
        if _C_BUBBLE.name not in {k.name for k in self.constants}:
            return mask
        c = self._c(consts) if consts else self.defaults
        geom = corner_geometry(case)
        if geom.reason is not None:
            return mask
        o = getattr(case, "orientation", None)
        if o is not None and o.is_known:
            with np.errstate(all="ignore"):
                mask = mask & (_bubble_bond(case, geom, qg / ql, c) <= BUBBLE_BOND_LIMIT)
        if c["bubble_diameter_ratio"] > 0:
            return mask
        w = c["injector_width_ratio"] * geom.depth
        f = case.fluid
        with np.errstate(invalid="ignore"):
            return mask & (f.mu_l * (ql / w ** 2) / f.sigma <= SQUEEZING_CA_MAX)


_SQUEEZE_NOTE = (f"squeezing law: liquid capillary number in the injector channel <= {SQUEEZING_CA_MAX:g}, from "
                 f"memory; with an orientation given, bubble Bond number (rho_L - rho_G) g d^2/sigma <= "
                 f"{BUBBLE_BOND_LIMIT:g} (Brauner 1990)")


class CornerConfinement(_CornerModel):
    r"""Confinement: the (merged) bubble is large enough to be pushed all the way to the open side.

    .. math:: g = \ln\frac{d_\mathrm{eff}(r)}{d_\mathrm{reach}}, \qquad
              d_\mathrm{reach} = \min\Big(\frac{2 k_c S \sin\alpha}{1 + k_c\sin\alpha},\
              2 (S - s_\mathrm{inj})\Big)\ \text{(V-groove, wedge)}

    Below the line (g < 0) the bubbles are too small: unconfined at injection, or stopped where the
    gap has grown to their size; they feel no further push and are carried. d_eff is the injected
    diameter, or the merged diameter where bubbles merge (:func:`bubble_state`).

    Examples
    --------
    >>> CORNER_CONFINEMENT.regime_above
    'bubbles pushed to the open side'
    """

    def _phi(self, case, c):
        geom = corner_geometry(case)
        d_reach = geom.path.reach_diameter(c["injection_position"], c["confinement_ratio"])

        def phi(x):
            *_, d_eff = _sizes(geom, 10.0 ** np.asarray(x, dtype=float), c)
            with np.errstate(divide="ignore"):
                return np.log(d_eff) - math.log(max(d_reach, 1e-300))
        return phi

    def implicit(self, case, ql, qg, **consts):
        c = self._c(consts)
        _, _, r = _ratio(ql, qg)
        out = self._phi(case, c)(np.log10(r))
        return float(out) if np.ndim(out) == 0 else out


class CornerMerging(_CornerModel):
    r"""Merging onset: the bubble spacing along the stream falls to k_m bubble diameters.

    .. math:: g = \ln N = \ln\frac{k_m d_b}{\lambda}, \qquad
              \lambda = \frac{V_b}{A}\left(1 + \frac{1}{r}\right)

    Above the line (g >= 0) bubbles merge; the merged volume :math:`V_b N` feeds the confinement
    and separation lines.

    Examples
    --------
    >>> CORNER_MERGING.regime_below, CORNER_MERGING.regime_above
    ('isolated bubbles', 'merging bubbles')
    """

    def _phi(self, case, c):
        geom = corner_geometry(case)

        def phi(x):
            _, _, N, _, _ = _sizes(geom, 10.0 ** np.asarray(x, dtype=float), c)
            with np.errstate(divide="ignore"):
                return np.log(N)
        return phi

    def implicit(self, case, ql, qg, **consts):
        c = self._c(consts)
        _, _, r = _ratio(ql, qg)
        out = self._phi(case, c)(np.log10(r))
        return float(out) if np.ndim(out) == 0 else out


class CornerBlowThrough(_CornerModel):
    r"""Gas blow-through: the no-slip void fraction reaches alpha_c and the gas is continuous.

    .. math:: g = \ln\frac{r}{r_c}, \qquad r_c = \frac{C_0 \alpha_c}{1 - C_0 \alpha_c}

    (the void fraction :math:`\alpha = r/(C_0 (1 + r))` equals :math:`\alpha_c` on the line).

    Examples
    --------
    >>> from types import SimpleNamespace as NS
    >>> round(CORNER_BLOW_THROUGH.ratio_roots(NS(flow_range=NS(ql_min=1e-8, ql_max=1e-5, qg_min=1e-8,
    ...       qg_max=1e-5)), alpha_c=0.8, c0=1.0)[0], 9)
    4.0
    """

    def check_constants(self, values):
        p = values["alpha_c"] * values["c0"]
        if not p < 1.0:
            raise ValueError(f"{self.name}: constants c0 * alpha_c must be < 1, got {p:.4g}")

    def applies_to(self, case):
        return corner_geometry(case).reason

    def _phi(self, case, c):
        p = c["alpha_c"] * c["c0"]
        rc = p / (1.0 - p)
        return lambda x: np.asarray(x, dtype=float) - math.log10(rc)

    def implicit(self, case, ql, qg, **consts):
        c = self._c(consts)
        _, _, r = _ratio(ql, qg)
        p = c["alpha_c"] * c["c0"]
        out = np.log(r / (p / (1.0 - p)))
        return float(out) if np.ndim(out) == 0 else out


class CornerSeparation(_CornerModel):
    r"""Separation within the conduit: migration time to the open side equals the residence time.

    .. math:: g = \ln\frac{s_f\, t_\mathrm{mig}(d_\mathrm{eff})}{t_\mathrm{res}}, \qquad
              t_\mathrm{res} = \frac{l A}{Q_L + Q_G}, \qquad
              t_\mathrm{mig} = \int_{s_\mathrm{inj}}^{s_\mathrm{touch}} \frac{\mathrm{d}s}{U}

    Below the line (g < 0, smaller flows) the bubbles reach the open side before the stream carries
    them out. g is NaN where the bubble does not reach the open side (see
    :class:`CornerConfinement`). The line is :math:`Q_L = l A/(s_f t_\mathrm{mig}(1 + r))`
    (:func:`separation_liquid_flow`). As d_eff falls to the reach diameter the push fades and
    t_mig grows like ln(1/(d_eff - d_reach)), so the line bends down toward the confinement line;
    the charts take t_mig at the resolvable margin (d_eff/d_reach - 1 = 1e-9) on the line itself,
    where the separation line ends on the confinement line.

    Examples
    --------
    >>> CORNER_SEPARATION.regime_below
    'separated within the conduit'
    """

    shape = "graph"

    def _ln_f(self, case, c, r):
        with np.errstate(all="ignore"):
            return np.log(_sep_ql(case, corner_geometry(case), np.asarray(r, dtype=float), c))

    def implicit(self, case, ql, qg, **consts):
        c = self._c(consts)
        geom = corner_geometry(case)
        ql, qg, r = _ratio(ql, qg)
        *_, d_eff = _sizes(geom, r, c)
        tab = _table_for(case, geom, c)
        t = _t_mig(case, geom, d_eff, c, tab)
        q = _drift(case, geom, d_eff, c, tab)
        with np.errstate(divide="ignore", invalid="ignore"):
            if q is None:
                out = np.log(np.maximum(c["safety_factor"] * t, 1e-300) * (ql + qg) / (case.length * geom.area))
            else:
                travel = np.maximum(c["safety_factor"] * t * ((ql + qg) / geom.area + q), 1e-300)
                out = np.where(np.isinf(t), np.inf, np.log(travel / case.length))
        out = np.where(np.isnan(t), np.nan, out)
        return float(out) if np.ndim(out) == 0 else out

    def line_pieces(self, case, **consts):
        c = self._c(consts)
        geom = corner_geometry(case)
        lo, hi = self._r_range(case)
        logd_reach = math.log(max(_table_for(case, geom, c)[2], 1e-300))       # reach or stall diameter
        spans = None
        # without a drift along the axis the ends depend on the shape alone; with it also on the length and g
        if _a_z(case) == 0.0 and _within_all(lo, hi):
            try:
                every, kinks = _cached_separation_spans(_ShapeOf(case), tuple(sorted(c.items())), logd_reach)
            except (TypeError, AttributeError):     # unhashable section, or a stand-in object without one
                pass
            else:                                   # the part within the range asked for
                spans = tuple((max(a, lo), min(b, hi)) for a, b in every if min(b, hi) > max(a, lo))
                kinks = tuple(x for x in kinks if lo <= x <= hi)
        if spans is None:
            spans, kinks = _separation_spans(case, c, lo, hi, logd_reach)
        out = []
        for a, b in spans:
            def func(t):
                r = 10.0 ** np.asarray(t, dtype=float)
                q = _sep_ql(case, geom, r, c)
                return q, r * q
            out.append(LinePiece(a, b, func, kinks))
        return out


def _separation_spans(case, c, lo, hi, logd_reach, n=241):
    """Ranges (a, b) of log10 r over which the separation line exists (the bubble reaches the open side without
    touching it at injection, and, with an axial drift, migrates faster than the drift carries it along), and
    the line's kinks (where the merging line meets it: log10 r)."""
    geom = corner_geometry(case)
    d_touch = 2.0 * float(np.interp(c["injection_position"] * geom.depth, geom.path.s, geom.path.open_distance))
    drifts = _a_z(case) != 0.0

    def reach(x):
        *_, d_eff = _sizes(geom, 10.0 ** np.asarray(x, dtype=float), c)
        out = np.minimum(np.log(d_eff) - logd_reach, math.log(d_touch) - np.log(d_eff))
        if drifts:               # the line exists while the migration outruns the drift: l/(s_f t) > q
            with np.errstate(all="ignore"):
                t = _t_mig(case, geom, d_eff, c)
                u = case.length / (c["safety_factor"] * t)
                q = _drift(case, geom, d_eff, c)
                cond = np.where(q > 0, np.log(u / np.where(q > 0, q, 1.0)), np.inf)
                out = np.where(np.isnan(cond), out, np.minimum(out, cond))
        return out
    ends = [lo] + [x for x, _ in _roots(reach, lo, hi, n)] + [hi]
    kinks = tuple(x for x, _ in _roots(CORNER_MERGING._phi(case, c), lo, hi, n))
    spans = tuple((a, b) for a, b in zip(ends[:-1], ends[1:])
                  if b > a and float(reach(np.array([0.5 * (a + b)]))[0]) > 0)
    return spans, kinks


@functools.lru_cache(maxsize=512)
def _cached_separation_spans(shape, items, logd_reach):
    """:func:`_separation_spans` over :data:`_ALL_RATIOS` without an axial drift: it depends only on the migration
    path, the constants and the smallest arriving size, so designs differing in the length, g, the fluid or a
    contact angle that keeps the apex corner (with the same smallest arriving size) share it."""
    return _separation_spans(shape.case, dict(items), *_ALL_RATIOS, logd_reach, n=_ALL_RATIOS_N)


class OpenChannelIngestion(_CornerModel):
    r"""Gas ingestion: the liquid (or bubbly mixture) flow exceeds the critical flow rate of the open channel.

    .. math:: g = \ln\frac{(1 + \phi r)\, Q_L}{Q_\mathrm{crit}(\rho_m)}, \qquad
              \rho_m = \frac{\rho_L + \phi r \rho_G}{1 + \phi r}

    :math:`Q_\mathrm{crit}` is the critical flow rate of the section's open-channel model
    (:func:`open_channel_of`) for the conduit length and the liquid viscosity, from its similarity curve
    (:func:`lowgmap.physics.models.open_channel.surrogate.critical_flow_rates`, one interpolation per mixture
    density; under the exact switch the root search of
    :func:`lowgmap.physics.models.open_channel.critical_flow_rate` tabulated once per case over the mixture
    density). :math:`\phi` (``gas_effect``) = 1 loads the channel with the no-slip mixture (volume flow
    Q_L + Q_G, density rho_m); 0 with the liquid alone.

    With the case's orientation given, the share of g along the axis, g_a = g sin(beta) (against the flow:
    > 0 in upward flow), adds the hydrostatic term of the one-dimensional model: the line falls in upward
    flow and rises in downward flow (:func:`ingestion_liquid_flow`). The share across the axis bends the free
    surface; where its Bond number (:func:`transverse_bond`) exceeds 0.1 the line is flagged.

    When the open channel cannot hold liquid below the gas pressure (:func:`meniscus_state`; for a
    V-groove or wedge the Concus–Finn condition of the apex fails) the critical flow is 0: every flow
    lies above the line (g = +inf), the whole chart is the gas-ingestion regime and no line is drawn.

    Examples
    --------
    >>> OPEN_CHANNEL_INGESTION.regime_above
    'free-surface collapse, gas drawn into the outlet'
    """

    shape = "graph"

    def applies_to(self, case):
        geom = corner_geometry(case)
        if not getattr(case.section, "is_open", False):
            return geom.reason                  # closed section
        if not geom.holds_liquid:
            return None                         # gas drawn in at any flow: the whole chart
        if open_channel_of(case.section, case.wetting.contact_angle) is None:
            return ("no open-channel flow-rate model for this section (V-groove, wedge channel, rectangle open on "
                    "one side or on two opposite sides)")
        return None

    def inactive_reason(self, case):
        return None

    def validity_mask(self, case, ql, qg, **consts):
        """True where the open-channel model holds: with the case's orientation given, the whole line is flagged
        when the transverse Bond number of the channel (:func:`transverse_bond`) exceeds
        :data:`~lowgmap.physics.models.open_channel.TRANSVERSE_BOND_LIMIT` (gravity across the channel bends the
        free surface, which the model takes as circular arcs)."""
        from lowgmap.physics.models.open_channel import TRANSVERSE_BOND_LIMIT

        ql, qg = positive_flows(ql, qg)
        mask = np.isfinite(ql) & np.isfinite(qg)
        if transverse_bond(case) > TRANSVERSE_BOND_LIMIT:
            mask = np.zeros_like(mask)
        return mask

    def _ln_f(self, case, c, r):
        with np.errstate(all="ignore"):
            return np.log(_ing_ql(case, np.asarray(r, dtype=float), c))

    def implicit(self, case, ql, qg, **consts):
        c = self._c(consts)
        ql, qg, r = _ratio(ql, qg)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = np.log(ql / _ing_ql(case, r, c))
        return float(out) if np.ndim(out) == 0 else out

    def critical_flow(self, case, **consts):
        """Critical liquid flow rate without gas [m^3/s] and what limits it (a key of open_channel.LIMITS).

        (0.0, "no_hold") when the open channel cannot hold liquid below the gas pressure.
        """
        c = self._c(consts)
        if not corner_geometry(case).holds_liquid:
            return 0.0, "no_hold"
        f = case.fluid
        ch = open_channel_of(case.section, case.wetting.contact_angle)
        g_ax = _axial_gravity(case)
        q = float(_q_crit(case, f.rho_l, c))
        if g_ax != 0.0 or not _uses_similarity(ch):
            return q, _case_table(case, ch, c, g_ax)[3][-1]
        from lowgmap.physics.models.open_channel.surrogate import critical_flow_rates

        return q, str(critical_flow_rates(ch, float(case.length), f.rho_l, f.mu_l, f.sigma,
                                          K_e=float(c["entrance_loss"]))[1])

    def line_pieces(self, case, **consts):
        c = self._c(consts)
        if not corner_geometry(case).holds_liquid:
            return []                           # the line lies at zero flow: nothing to draw
        lo, hi = self._r_range(case)

        def func(t):
            r = 10.0 ** np.asarray(t, dtype=float)
            q = _ing_ql(case, r, c)
            return q, r * q
        return [LinePiece(lo, hi, func)]


# =============================================================================================
# registry
# =============================================================================================
_SIZE_CITE = ("bubble size: squeezing law of " + bb.GARSTECKI_2006 + "; ")
_MIG_CITE = ("capillary push in a tapering gap: " + bb.REYSSAT_2014 + "; wetting films: " + bb.AUSSILLOUS_QUERE_2000
             + " and " + bb.BRETHERTON_1961 + "; ")

#: Confinement line.
CORNER_CONFINEMENT = register(CornerConfinement(
    "corner_confinement", "confinement (bubble reaches the open side)",
    _COMPOSITION + _SIZE_CITE + "corner wetting: " + CONCUS_FINN_1969,
    "bubbles too small to reach the open side", "bubbles pushed to the open side",
    (*_SIZE, _C_INJ, _C_CONF, _C_MERGE),
    "A bubble is pushed toward the wide side while it is larger than the local gap (k_c h); it reaches the "
    "open side if it touches the free surface before the gap has grown to its size. Merged bubbles count "
    "with their merged size."))
CORNER_CONFINEMENT.validity_note = _SQUEEZE_NOTE

#: Separation line.
CORNER_SEPARATION = register(CornerSeparation(
    "corner_separation", "separation (migration time = residence time)",
    _COMPOSITION + _SIZE_CITE + _MIG_CITE + "corner wetting: " + CONCUS_FINN_1969,
    "separated within the conduit", "carried out of the conduit",
    (*_SIZE, _C_INJ, _C_CONF, _C_MERGE, _C_CAP, _C_HS, _C_FILM, _C_FORM, _C_SF, _C_ROLL),
    "Quasi-steady force balance on a squeezed bubble: capillary push against Hele-Shaw, wetting-film and form "
    "drag; the bubble moves with the mean liquid speed along the conduit. Uncertain constants: c_cap, "
    "c_HS, c_f, C_D."))
CORNER_SEPARATION.validity_note = _SQUEEZE_NOTE

#: Merging line.
CORNER_MERGING = register(CornerMerging(
    "corner_merging", "merging (spacing = k_m x bubble size)",
    _COMPOSITION + _SIZE_CITE + "spacing from the formation frequency and the mixture speed (no slip)",
    "isolated bubbles", "merging bubbles",
    (*_SIZE, _C_MERGE),
    "Bubbles formed at f = Q_G/V travel with the mixture; they merge when closer than k_m diameters. The "
    "merging length ratio is a closure of ours, to be calibrated."))
CORNER_MERGING.validity_note = _SQUEEZE_NOTE

#: Blow-through line.
CORNER_BLOW_THROUGH = register(CornerBlowThrough(
    "corner_blow_through", "blow-through (void fraction = alpha_c)",
    _COMPOSITION + "drift-flux void fraction without drift velocity: " + DUKLER_1988,
    "gas in bubbles", "continuous gas to the outlet",
    (_C_ALPHA, _C_C0),
    "The gas becomes continuous once the void fraction reaches alpha_c; the threshold for corners is not "
    "known (default by analogy with tubes)."))

#: Gas-ingestion line.
OPEN_CHANNEL_INGESTION = register(OpenChannelIngestion(
    "open_channel_ingestion", "ingestion (critical flow rate of the open channel)",
    _COMPOSITION + "open-channel flow-rate limit: " + ROSENDAHL_2004 + "; " + KLATTE_2008,
    "free surface held", "free-surface collapse, gas drawn into the outlet",
    (_C_KE, _C_GAS),
    "Steady one-dimensional open-channel model (lowgmap.physics.models.open_channel) for the conduit length, loaded with the "
    "liquid or the no-slip bubbly mixture; with the orientation given, the share of g along the axis enters its "
    "momentum balance (hydrostatic term)."))
OPEN_CHANNEL_INGESTION.validity_note = ("with an orientation given, transverse Bond number (rho_L - rho_G) g_perp L^2/"
                                        "sigma <= 0.1 (circular-arc free surface; common practice, no source)")

#: Registry names of the family, in the scheme's order.
CORNER_MODEL_NAMES = SCHEME.members
