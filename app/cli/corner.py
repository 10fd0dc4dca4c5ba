"""`lowgmap corner` (quick corner calculation) and `lowgmap limit` (open-channel flow-rate limit)."""
from __future__ import annotations

import math

import numpy as np

from lowgmap.app.cli import CliError, _clean, _emit
from lowgmap.app.files.units import convert, to_si

__all__ = ["register", "corner_summary", "channel_for_case"]


def corner_summary(half_angle: float, contact_angle: float, radius: float | None = None) -> dict:
    """Corner meniscus numbers for the CLI and the dashboard (SI in, plain numbers out)."""
    from lowgmap.physics.geometry import corner

    wicks = bool(corner.concus_finn_wets(half_angle, contact_angle))
    out = {"half_angle_deg": math.degrees(half_angle), "contact_angle_deg": math.degrees(contact_angle),
           "concus_finn_wets": wicks,
           "critical_contact_angle_deg": 90.0 - math.degrees(half_angle)}
    if not wicks:
        out["note"] = ("Concus–Finn condition fails (contact angle + half-angle >= 90 deg): the corner holds no "
                       "wicking meniscus.")
        return out
    F = corner.meniscus_area_factor(half_angle, contact_angle)
    out.update({
        "area_factor": F,
        "wetted_wall_length_per_radius": corner.wetted_wall_length(1.0, half_angle, contact_angle),
        "bisector_height_per_radius": corner.bisector_height(1.0, half_angle, contact_angle),
        "flow_resistance_free": corner.flow_resistance(half_angle, contact_angle, "free"),
        "flow_resistance_noslip": corner.flow_resistance(half_angle, contact_angle, "noslip"),
    })
    if radius is not None:
        out.update({"radius_m": radius, "area_m2": F * radius ** 2,
                    "wetted_wall_length_m": out["wetted_wall_length_per_radius"] * radius,
                    "bisector_height_m": out["bisector_height_per_radius"] * radius})
    return out


def cmd_corner(args) -> int:
    a = to_si(args.half_angle, "angle", "--half-angle")
    t = to_si(args.contact_angle, "angle", "--contact-angle")
    r = to_si(args.radius, "length", "--radius") if args.radius else None
    if r is not None and not r > 0:
        raise CliError(f"--radius must be > 0, got {args.radius!r}")
    rep = corner_summary(a, t, r)
    lines = [f"Corner half-angle {rep['half_angle_deg']:.4g} deg, contact angle {rep['contact_angle_deg']:.4g} deg",
             f"  Concus–Finn: {'wicks' if rep['concus_finn_wets'] else 'does NOT wick'} "
             f"(wicks for contact angles below {rep['critical_contact_angle_deg']:.4g} deg)"]
    if rep["concus_finn_wets"]:
        lines += [f"  area factor A/R^2              {rep['area_factor']:.6g}",
                  f"  wetted wall length / R         {rep['wetted_wall_length_per_radius']:.6g}",
                  f"  bisector height / R            {rep['bisector_height_per_radius']:.6g}",
                  f"  flow resistance beta, shear-free interface  {rep['flow_resistance_free']:.6g}",
                  f"  flow resistance beta, no-slip interface     {rep['flow_resistance_noslip']:.6g}",
                  "  (mean speed u = R^2 (-dp/dz) / (beta mu))"]
        if r is not None:
            lines.append(f"  at R = {r * 1e3:.4g} mm: area {rep['area_m2'] * 1e6:.4g} mm^2, wall length "
                         f"{rep['wetted_wall_length_m'] * 1e3:.4g} mm, height {rep['bisector_height_m'] * 1e3:.4g} mm")
    else:
        lines.append("  " + rep["note"])
    _emit(args, _clean(rep), "\n".join(lines))
    return 0


def channel_for_case(case):
    """The open-channel model of the case's section (the mapping lives in lowgmap.physics.models.corner)."""
    from lowgmap.physics.models.corner import open_channel_of

    ch = open_channel_of(case.section, case.wetting.contact_angle)
    if ch is None:
        s = case.section
        raise CliError(f"the flow-rate limit applies to open channels (groove, wedge_channel, or a polygon with "
                       f"open edges forming a groove or plates); this case's section is a "
                       f"{'closed ' if not s.is_open else ''}{s.kind}")
    return ch


def cmd_limit(args) -> int:
    from lowgmap.physics.models import open_channel as oc
    from lowgmap.app.files.casefile import load_case

    doc = load_case(args.case)
    case = doc.case
    ch = channel_for_case(case)
    f = case.fluid
    K_e = args.entrance_loss
    unit = doc.settings.liquid_flow_unit
    crit = oc.critical_flow_rate(ch, case.length, f.rho_l, f.mu_l, f.sigma, K_e=K_e)
    lengths = case.length * np.logspace(-1, 1, 9)
    curve = oc.critical_flow_curve(ch, lengths, f.rho_l, f.mu_l, f.sigma, K_e=K_e)
    prof = crit.profile
    idx = np.linspace(0, len(prof.z) - 1, 11).astype(int) if prof is not None else []
    data = {
        "case": args.case, "section": case.section.kind, "length_m": case.length, "entrance_loss": K_e,
        "critical_flow_m3_s": crit.Q_crit, "limited_by": crit.limited_by,
        "outlet_speed_index": crit.outlet_speed_index,
        "curve": [{"length_m": float(l), "critical_flow_m3_s": float(q), "limited_by": str(b)}
                  for l, q, b in zip(curve.lengths, curve.Q_crit, curve.limited_by)],
        "profile": [] if prof is None else [
            {"z_m": float(prof.z[i]), "meniscus_radius_m": float(prof.R1[i]), "area_m2": float(prof.area[i]),
             "speed_index": float(prof.speed_index[i])} for i in idx],
    }
    lines = [f"{case.title}: open-channel flow-rate limit ({case.section.kind}, length {case.length:.4g} m, "
             f"entrance loss K_e = {K_e:g})",
             f"  critical liquid flow rate: {convert(crit.Q_crit, 'flow', unit):.4g} {unit} "
             f"(limited by {crit.limited_by}; outlet speed index {crit.outlet_speed_index:.3f})",
             "  above it the free surface collapses at the outlet and gas is ingested",
             "", f"  {'length [m]':>12}  {'critical flow [' + unit + ']':>22}  limited by"]
    for row in data["curve"]:
        lines.append(f"  {row['length_m']:12.4g}  {convert(row['critical_flow_m3_s'], 'flow', unit):22.4g}  "
                     f"{row['limited_by']}")
    if data["profile"]:
        lines += ["", "  surface at the critical flow:", f"  {'z [mm]':>10} {'R1 [mm]':>10} {'speed index':>12}"]
        for p in data["profile"]:
            lines.append(f"  {p['z_m'] * 1e3:10.4g} {p['meniscus_radius_m'] * 1e3:10.4g} {p['speed_index']:12.3f}")
    from lowgmap.app import CAUTION

    lines += ["", CAUTION]
    _emit(args, _clean(data), "\n".join(lines))
    return 0


def register(sub, add):
    sp = add("corner", cmd_corner, "corner meniscus numbers: Concus–Finn, area factor, flow resistance", case=False)
    sp.add_argument("--half-angle", required=True, metavar="ANGLE", help='corner half-angle, e.g. "30 deg"')
    sp.add_argument("--contact-angle", required=True, metavar="ANGLE", help='contact angle, e.g. "10 deg"')
    sp.add_argument("--radius", metavar="LENGTH", help='meniscus radius for dimensional values, e.g. "1 mm"')
    sp = add("limit", cmd_limit, "open-channel flow-rate limit (gas ingestion) vs length, and surface shape")
    sp.add_argument("--entrance-loss", type=float, default=0.0, metavar="K_E",
                    help="inlet loss coefficient K_e (default 0)")
