"""Plain-data summaries of a case, shared by the CLI, the dashboard and the reports."""
from __future__ import annotations

import math

from lowgmap.physics.case import Case
from lowgmap.physics.properties.groups import eotvos
from lowgmap.physics.properties.wetting import concus_finn_critical_contact_angle, concus_finn_wets

__all__ = ["bond_number", "section_report", "GRAVITY_NEGLIGIBLE_BOND"]

#: Bond (Eötvös) number below which gravity is neglected against surface tension
#: (Brauner 1990 uses Eo < 1 for that statement).
GRAVITY_NEGLIGIBLE_BOND = 1.0


#: Bond number = Eötvös number; one formula, kept in :mod:`lowgmap.physics.properties.groups`.
bond_number = eotvos


def section_report(case: Case) -> dict:
    """Geometry, Concus–Finn per corner and the Bond number at the case's residual acceleration."""
    sec = case.section
    theta = case.wetting.contact_angle
    corners = []
    for c in sec.corners:
        corners.append({
            "index": c.index,
            "half_angle_deg": math.degrees(c.half_angle),
            "wicks": bool(concus_finn_wets(c.half_angle, theta)),
            "critical_contact_angle_deg": math.degrees(concus_finn_critical_contact_angle(c.half_angle)),
        })
    f = case.fluid
    L = sec.length_scale
    bo = bond_number(f.rho_l - f.rho_g, case.g, L, f.sigma)
    if bo < GRAVITY_NEGLIGIBLE_BOND:
        verdict = (f"Bo = {bo:.3g} < {GRAVITY_NEGLIGIBLE_BOND:g}: surface tension dominates; gravity may be "
                   "neglected (Brauner 1990).")
    else:
        verdict = (f"Bo = {bo:.3g} >= {GRAVITY_NEGLIGIBLE_BOND:g}: gravity is NOT negligible at this residual "
                   "acceleration; low-gravity regime charts do not apply.")
    notes = []
    if sec.kind != "circle" and not sec.is_open:
        notes.append("Closed-duct models use the hydraulic diameter 4A/P for this non-circular section: "
                     "an approximation.")
    return {
        "section": sec.describe(),
        "contact_angle_deg": math.degrees(theta),
        "corners": corners,
        "gravity": {
            "g_m_s2": case.g, "g_over_g0": case.g_over_g0, "length_name": sec.length_scale_name,
            "length_m": L, "bond_number": bo, "gravity_negligible": bo < GRAVITY_NEGLIGIBLE_BOND,
            "verdict": verdict,
        },
        "notes": notes,
    }

