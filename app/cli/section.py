"""`lowgmap section`: geometry of the case's cross-section, Concus–Finn per corner, Bond number."""
from __future__ import annotations

from lowgmap.app.cli.common import EXIT_OK, clean, emit, load_case_file

__all__ = ["add_arguments", "run", "format_section"]


def add_arguments(parser) -> None:
    """``section`` takes only the case file and ``--json``."""


def run(args) -> int:
    from lowgmap.physics.chart.summary import section_report

    doc = load_case_file(args.case)
    rep = section_report(doc.case)
    emit(args, clean(rep), format_section(rep))
    return EXIT_OK


def format_section(rep: dict) -> str:
    """The text of :func:`lowgmap.physics.chart.summary.section_report` for a person."""
    s = rep["section"]
    lines = [f"Section: {s['kind']}"]
    for key, value in s.items():
        if key in ("kind", "corners") or isinstance(value, (list, dict)):
            continue
        lines.append(f"  {key:<28} {value:.6g}" if isinstance(value, float) else f"  {key:<28} {value}")
    lines.append(f"Corners (Concus–Finn at contact angle {rep['contact_angle_deg']:.3g} deg):")
    if not rep["corners"]:
        lines.append("  none")
    for c in rep["corners"]:
        lines.append(f"  corner {c['index']}: half-angle {c['half_angle_deg']:.4g} deg -> "
                     f"{'wicks' if c['wicks'] else 'does not wick'} (critical contact angle "
                     f"{c['critical_contact_angle_deg']:.4g} deg)")
    b = rep["gravity"]
    lines.append(f"Residual acceleration {b['g_m_s2']:.4g} m/s^2 ({b['g_over_g0']:.3g} g0); "
                 f"Bond number on {b['length_name']} {b['length_m'] * 1e3:.4g} mm: {b['bond_number']:.4g}")
    lines.append(f"  {b['verdict']}")
    for n in rep.get("notes", []):
        lines.append(f"Note: {n}")
    return "\n".join(lines)
