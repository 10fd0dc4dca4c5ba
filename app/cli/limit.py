"""`lowgmap limit`: open-channel flow-rate limit (gas ingestion) versus length, and the surface shape.

The limit comes from :func:`lowgmap.physics.models.open_channel.critical_flow_rate` on the open-channel
model of the case's section (:func:`lowgmap.physics.models.corner.open_channel_of`).
"""
from __future__ import annotations

from lowgmap.app import CAUTION
from lowgmap.app.cli.common import clean, emit, load_case_file
from lowgmap.app.cli import common

__all__ = ["add_arguments", "run", "channel_for_case", "MAX_ENTRANCE_LOSS"]

#: Largest inlet loss coefficient accepted (a sharp-edged inlet has about 0.5; common practice, no source).
MAX_ENTRANCE_LOSS = 100.0


def add_arguments(parser) -> None:
    parser.add_argument("--entrance-loss", type=float, default=1.0, metavar="K_E",
                        help=f"inlet loss coefficient K_e, 0 to {MAX_ENTRANCE_LOSS:g} (default 1, the charts' "
                             "default: a thin re-entrant inlet, the safe side for the gas-ingestion limit)")


def run(args) -> int:
    import numpy as np

    from lowgmap.physics.models import open_channel as oc

    from lowgmap.app.files.units import convert

    K_e = args.entrance_loss
    if not 0 <= K_e <= MAX_ENTRANCE_LOSS:               # NaN fails too
        raise common.CliError(f"--entrance-loss must be within [0, {MAX_ENTRANCE_LOSS:g}], got {K_e!r}")
    doc = load_case_file(args.case)
    case = doc.case
    ch = channel_for_case(case)
    f = case.fluid
    unit = doc.settings.liquid_flow_unit
    with common.input_errors("limit"):
        crit = oc.critical_flow_rate(ch, case.length, f.rho_l, f.mu_l, f.sigma, K_e=K_e)
        lengths = case.length * np.logspace(-1, 1, 9)
        curve = oc.critical_flow_curve(ch, lengths, f.rho_l, f.mu_l, f.sigma, K_e=K_e)
    prof = crit.profile
    idx = np.linspace(0, len(prof.z) - 1, 11).astype(int) if prof is not None else []
    data = {
        "case": args.case, "section": case.section.kind, "length_m": case.length, "entrance_loss": K_e,
        "critical_flow_m3_s": crit.Q_crit, "limited_by": crit.limited_by,
        "choking_mechanism": crit.mechanism.description,
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
             f"  choking mechanism: {crit.mechanism.description}",
             "  above it the free surface collapses at the outlet and gas is ingested",
             "", f"  {'length [m]':>12}  {'critical flow [' + unit + ']':>22}  limited by"]
    for row in data["curve"]:
        lines.append(f"  {row['length_m']:12.4g}  {convert(row['critical_flow_m3_s'], 'flow', unit):22.4g}  "
                     f"{row['limited_by']}")
    if data["profile"]:
        lines += ["", "  surface at the critical flow:", f"  {'z [mm]':>10} {'R1 [mm]':>10} {'speed index':>12}"]
        for p in data["profile"]:
            lines.append(f"  {p['z_m'] * 1e3:10.4g} {p['meniscus_radius_m'] * 1e3:10.4g} {p['speed_index']:12.3f}")
    lines += ["", CAUTION]
    emit(args, clean(data), "\n".join(lines))
    return 0


def channel_for_case(case):
    """The open-channel model of the case's section (the mapping lives in lowgmap.physics.models.corner)."""
    from lowgmap.physics.models.corner import open_channel_of

    ch = open_channel_of(case.section, case.wetting.contact_angle)
    if ch is None:
        s = case.section
        raise common.CliError(f"the flow-rate limit applies to open channels (groove, wedge_channel, or a polygon with "
                       f"open edges forming a groove or plates); this case's section is a "
                       f"{'closed ' if not s.is_open else ''}{s.kind}")
    return ch
