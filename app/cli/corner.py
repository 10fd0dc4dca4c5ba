"""`lowgmap corner`: quick corner-meniscus numbers (Concus–Finn, area factor, flow resistance).

The numbers come from :mod:`lowgmap.physics.geometry.corner`; no case file is needed.
"""
from __future__ import annotations

import math

from lowgmap.app.cli.common import clean, emit
from lowgmap.app.cli import common

__all__ = ["add_arguments", "run", "corner_summary"]


def add_arguments(parser) -> None:
    parser.add_argument("--half-angle", required=True, metavar="ANGLE", help='corner half-angle, e.g. "30 deg"')
    parser.add_argument("--contact-angle", required=True, metavar="ANGLE", help='contact angle, e.g. "10 deg"')
    parser.add_argument("--radius", metavar="LENGTH", help='meniscus radius for dimensional values, e.g. "1 mm"')


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


def run(args) -> int:
    from lowgmap.app.files.units import to_si

    a = to_si(args.half_angle, "angle", "--half-angle")
    t = to_si(args.contact_angle, "angle", "--contact-angle")
    r = to_si(args.radius, "length", "--radius") if args.radius else None
    if r is not None and not r > 0:
        raise common.CliError(f"--radius must be > 0, got {args.radius!r}")
    if r is not None:
        from lowgmap.app.files.casefile import check_bounds

        check_bounds("length", r, "--radius")
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
    emit(args, clean(rep), "\n".join(lines))
    return 0
