"""Review material: the title block of exported charts and the review report (HTML).

All numbers come from the same chart and margin objects the dashboard and the CLI use.
"""
from __future__ import annotations

import math

from lowgmap.app.files.units import convert

__all__ = ["case_rows", "format_flow"]


def format_flow(q_m3_s: float, unit: str) -> str:
    return f"{convert(q_m3_s, 'flow', unit):.4g} {unit}"


def _deg(x: float) -> str:
    return f"{math.degrees(x):.3g} deg"


def case_rows(doc, chart=None, margins=None) -> list[tuple[str, str]]:
    """Rows (field, value) describing the case for a title block or report table."""
    c = doc.case
    f = c.fluid
    s = c.section
    st = doc.settings
    params = {k: v for k, v in s.to_dict().items() if k != "kind"}
    dims = ", ".join(t for t in (_param_text(k, v) for k, v in params.items()) if t)
    rows = [
        ("title", c.title + (" [INVENTED demonstration case]" if doc.invented and "invented" not in c.title.lower()
                             else "")),
        ("revision", c.revision + (f", author {c.author}" if c.author else "")),
        ("fluid", f"{f.liquid} / {f.gas} at {f.temperature - 273.15:.4g} degC, {f.pressure / 1e3:.4g} kPa "
                  f"(sigma {f.sigma * 1e3:.4g} mN/m, rho_L {f.rho_l:.4g} kg/m^3, mu_L {f.mu_l * 1e3:.4g} mPa s)"),
        ("section", f"{s.kind}: {dims}; length {c.length:.4g} m"),
        ("wetting", f"contact angle {_deg(c.wetting.contact_angle)}"),
        ("residual acceleration", f"{c.g:.3g} m/s^2 ({c.g_over_g0:.3g} g0)"),
    ]
    if chart is not None:
        models = "; ".join(m.label for m, _ in list(chart.region_models) + list(chart.comparison_models))
        rows.append(("models", models or "none"))
    if c.operating_point is not None:
        op = c.operating_point
        rows.append(("operating point", f"Q_L {format_flow(op.ql, st.liquid_flow_unit)}, "
                                        f"Q_G {format_flow(op.qg, st.gas_flow_unit)}"
                     + (f" -> {chart.regime_at(op.ql, op.qg)}" if chart is not None else "")))
    if margins is not None:
        lim = next((b.label for b in margins.boundaries if b.name == margins.limiting_boundary),
                   margins.limiting_boundary or "no boundary in the chart range")
        rows.append(("symmetric margin", f"±{100 * margins.symmetric_margin:.1f} % (limited by {lim}); "
                                         f"required ±{100 * st.required_margin:.0f} %"))
    return rows


def _param_text(key: str, value) -> str:
    if "angle" in key and isinstance(value, float):
        return f"{key.replace('_', ' ')} {_deg(value)}"
    if isinstance(value, float):
        return f"{key.replace('_', ' ')} {value * 1e3:.4g} mm"
    if key == "open_edges":
        return f"open edges {list(value)}" if value else ""
    if key == "vertices":
        return "vertices [mm] " + " ".join(f"({x * 1e3:.3g}, {y * 1e3:.3g})" for x, y in value)
    return f"{key.replace('_', ' ')} {value}"
