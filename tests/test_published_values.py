"""Published values lowgmap can be checked against, each with the place it was read.

Searched for and found (quoted below with where they were read):
* entrance loss coefficients of plain entrances (the default K_e of the open-channel limit);
* the Concus–Finn condition (a theorem, with its textbook check) and Brauner's Eo < 1.

Searched for and NOT found in the stored papers and documentation available to us (so no value of theirs
is used; the theory manual says so): the tabulated corner flow resistances of Ransohoff & Radke (1988),
measured or computed critical flow rates of open capillary channels (Rosendahl et al. 2004, Haake et al.
2010, Klatte et al. 2008, Canfield et al. 2013), and low-gravity flow-pattern transition points in tubes
(Dukler et al. 1988, Colin et al. 1991/1996). The last test checks that the manual states it.
"""
from __future__ import annotations

import math
from pathlib import Path

import pytest

from lowgmap.physics.geometry.sections import Groove, WedgeChannel
from lowgmap.physics.models import corner as cm
from lowgmap.physics.models.open_channel import ParallelPlates, critical_flow_rate
from lowgmap.physics.models.tube import EOTVOS_LIMIT
from lowgmap.physics.studies.agreement import ValidityCriteria

MANUAL = Path(__file__).resolve().parents[1] / "physics" / "manual"

# Loss coefficients of plain pipe entrances, zeta = loss / (rho v^2 / 2), high Reynolds number:
# - Idelchik, Handbook of Hydraulic Resistance, 3rd ed., Begell House 1994, Diagram 3-1 (p. 160), as quoted
#   in the Modelica Standard Library documentation of Modelica.Fluid.Vessels.BaseClasses.VesselPortsData:
#   pipe mounted flush with the wall 0.5; thin-walled pipe reaching b >= 0.5 D into the vessel 1.00;
# - Hydraulic Institute Data Tool, as quoted by Pumps & Systems ("How do I calculate head loss of fluid
#   exiting a tank?"): bell-mouth 0.05, square-edged 0.5, inward-projecting 1.0;
# - worked example 10.29 of an applied fluid mechanics course page (kdusling.github.io, Applied-Fluids):
#   inward-projecting 0.78, square-edged 0.5, chamfered 0.25, well-rounded 0.04.
PLAIN_ENTRANCES = {"flush, sharp (Idelchik)": 0.5, "re-entrant, thin wall (Idelchik)": 1.0,
                   "bell-mouth (HI)": 0.05, "square-edged (HI)": 0.5, "inward-projecting (HI)": 1.0,
                   "inward-projecting (course page)": 0.78, "chamfered (course page)": 0.25,
                   "well-rounded (course page)": 0.04}


def test_default_entrance_loss_is_the_largest_published_plain_entrance_value():
    # the safe direction is a larger loss (lower critical flow): the default is the re-entrant value of
    # Idelchik (1994), not below any published plain-entrance value found
    k = cm.OPEN_CHANNEL_INGESTION.defaults["entrance_loss"]
    assert k == PLAIN_ENTRANCES["re-entrant, thin wall (Idelchik)"] == 1.0
    assert k >= max(PLAIN_ENTRANCES.values())
    c = next(c for c in cm.OPEN_CHANNEL_INGESTION.constants if c.name == "entrance_loss")
    assert "Idelchik" in c.source and c.low <= min(PLAIN_ENTRANCES.values()) and c.high >= k


@pytest.mark.parametrize("zeta", sorted(set(PLAIN_ENTRANCES.values())))
def test_inviscid_critical_flow_at_the_published_entrance_losses(zeta):
    # inviscid limit (closed form, theory manual): the entrance loss divides Bernoulli's flow by sqrt(1 + K_e)
    pp = ParallelPlates(1.0, 1.0)
    q0 = critical_flow_rate(pp, 10.0, rho=1.0, mu=0.0, sigma=1.0).Q_crit
    q = critical_flow_rate(pp, 10.0, rho=1.0, mu=0.0, sigma=1.0, K_e=zeta).Q_crit
    assert q == pytest.approx(q0 / math.sqrt(1.0 + zeta), rel=1e-9)


def test_concus_finn_check_value_for_every_corner_and_edge():
    # Concus & Finn, PNAS 63(2):292-299, 1969: a corner of half-angle 7.9 deg holds liquid below the gas
    # pressure for theta < 82.1 deg; for a V-groove the open-side edges give the same limit
    sec = Groove(math.radians(7.9), 0.004)
    assert cm.meniscus_state(sec, math.radians(82.0)).holds_liquid
    ms = cm.meniscus_state(sec, math.radians(82.2))
    assert not ms.holds_liquid and not ms.corners[0][2]
    w = WedgeChannel(math.radians(7.9), 0.004)
    assert cm.meniscus_state(w, math.radians(82.0)).holds_liquid and not cm.meniscus_state(w, math.radians(82.2)).holds_liquid


def test_brauner_gravity_limit():
    # Brauner, Int. Commun. Heat Mass Transf. 17(3):271-281, 1990: reduced-gravity behaviour for Eo < 1
    assert EOTVOS_LIMIT == 1.0 and ValidityCriteria().bond_max == 1.0


def test_the_manual_says_which_published_values_were_not_found():
    text = " ".join((MANUAL / name).read_text(encoding="utf-8") for name in ("corner.md", "open_channel.md",
                                                                             "bubbles.md"))
    flat = " ".join(text.split()).lower()
    assert "ransohoff & radke (1988) were not available" in flat
    assert "no published critical flow rate was found" in flat
    assert "no published low-gravity flow-pattern transition point" in flat
