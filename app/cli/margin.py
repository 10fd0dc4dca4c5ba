"""`lowgmap margin`, `lowgmap robust`, `lowgmap uncertainty`: margins of the operating point.

All numbers come from :mod:`lowgmap.physics.chart.margins` and :mod:`lowgmap.physics.studies.uncertainty` on the chart built by
:meth:`lowgmap.physics.chart.composition.Chart.build`, as in the dashboard and the exported reports.
"""
from __future__ import annotations

import sys

from lowgmap.app import CAUTION
from lowgmap.app.cli import CliError, _clean, _emit

__all__ = ["register", "format_factor", "margin_report", "cmd_margin", "cmd_robust", "cmd_uncertainty"]

_MINUS = "\u2212"


def format_factor(f: float | None) -> str:
    """A crossing factor as a percentage change and the raw factor: 1.8 -> '+80 % (1.8)'.

    >>> format_factor(1.8), format_factor(0.4), format_factor(None)
    ('+80 % (1.8)', '\u221260 % (0.4)', 'none')
    """
    if f is None:
        return "none"
    pct = 100.0 * (f - 1.0)
    text = f"{pct:+,.0f}" if abs(pct) >= 1000 else f"{pct:+.3g}"
    return f"{text.replace('-', _MINUS)} % ({f:.4g})"


def _pct(m: float) -> str:
    return f"{100.0 * m:.3g} %".replace("-", _MINUS)


def _flow(q: float, unit: str) -> str:
    from lowgmap.app.outputs.report import format_flow

    return format_flow(q, unit)


def _chart(doc):
    from lowgmap.physics.chart.composition import Chart

    return Chart.build(doc.case)


def _point(args, doc) -> tuple[float, float]:
    """Operating point from --ql/--qg (text with units), the case's point filling a missing one."""
    from lowgmap.app.files.units import UnitError, parse_flow

    op = doc.case.operating_point
    f = doc.case.fluid
    ql = op.ql if op is not None else None
    qg = op.qg if op is not None else None
    for opt, gas in (("ql", False), ("qg", True)):
        text = getattr(args, opt, None)
        if text is None:
            continue
        try:
            v = parse_flow(text, f"--{opt}", gas=gas, pressure=f.pressure, temperature=f.temperature)
        except UnitError as exc:
            raise CliError(str(exc)) from None
        if not v > 0:
            raise CliError(f"--{opt} must be a flow rate > 0, got {text!r}")
        if opt == "ql":
            ql = v
        else:
            qg = v
    if ql is None or qg is None:
        missing = " and ".join(o for o, v in (("--ql", ql), ("--qg", qg)) if v is None)
        raise CliError(f"the case has no operating point: give {missing} (a flow rate with units, e.g. '3 L/min')")
    return ql, qg


def _regime_arg(chart, text: str) -> str:
    names = list(chart.regime_names)
    if text in names:
        return text
    folded = [n for n in names if n.casefold() == text.strip().casefold()]
    if len(folded) == 1:
        return folded[0]
    known = "; ".join(f'"{n}"' for n in names) if names else "none (no boundary model applies to this case)"
    raise CliError(f"unknown regime {text!r}; regimes on this chart: {known}")


# ----------------------------------------------------------------------------------- margin
def margin_report(doc, chart, pm) -> dict:
    """JSON-ready margins of a point (the CLI's --json output)."""
    data = pm.to_dict()
    if not chart.regime_names:
        data["symmetric_margin"] = None
    st = doc.settings
    data["required_margin"] = st.required_margin
    data["meets_required_margin"] = (pm.symmetric_margin >= st.required_margin) if chart.regime_names else None
    data["regimes"] = list(chart.regime_names)
    data["warnings"] = list(chart.warnings)
    data["case"] = {"title": doc.case.title, "revision": doc.case.revision}
    data["caution"] = CAUTION
    return data


def _format_margin(doc, chart, pm) -> str:
    st = doc.settings
    lu, gu = st.liquid_flow_unit, st.gas_flow_unit
    lines = [f"Case: {doc.case.title} (revision {doc.case.revision})",
             f"Operating point: Q_L {_flow(pm.ql, lu)}, Q_G {_flow(pm.qg, gu)} "
             f"({pm.ql:.4g} m^3/s, {pm.qg:.4g} m^3/s)"]
    if not chart.regime_names:
        lines.append("Regime: none - no boundary model on this chart defines regimes.")
    else:
        lines.append(f"Regime: {pm.regime}")
        lim = pm.limiting
        if lim is None:
            lines.append(f"Symmetric margin: at least ±{_pct(pm.symmetric_margin)} (no boundary comes closer)")
        else:
            lines.append(f"Symmetric margin: ±{_pct(pm.symmetric_margin)}, limited by {lim.label}")
        verdict = "met" if pm.symmetric_margin >= st.required_margin else "NOT met"
        lines.append(f"Required margin ±{_pct(st.required_margin)}: {verdict}")
        words = {"ql_up": "Q_L up", "ql_down": "Q_L down", "qg_up": "Q_G up", "qg_down": "Q_G down"}
        for d, w in words.items():
            name = pm.limits[d]
            if name is None:
                lines.append(f"  {w:<9} no regime change inside the chart range")
            else:
                lines.append(f"  {w:<9} regime changes at {format_factor(pm.regime_factors[d])} "
                             f"({pm.boundary(name).label})")
    if pm.boundaries:
        lines.append("")
        head = (f"{'boundary':<46} {'role':<11} {'Q_L up':<19} {'Q_L down':<19} {'Q_G up':<19} "
                f"{'Q_G down':<19} {'log dist':>8}")
        lines.append(head)
        lines.append("-" * len(head))
        for b in pm.boundaries:
            label = b.label if len(b.label) <= 45 else b.label[:44] + "…"
            role = b.role + ("*" if b.limits_regime else "")
            dist = f"{b.log_distance:.3f}" if b.log_distance is not None else "none"
            lines.append(f"{label:<46} {role:<11} {format_factor(b.ql_factor_up):<19} "
                         f"{format_factor(b.ql_factor_down):<19} {format_factor(b.qg_factor_up):<19} "
                         f"{format_factor(b.qg_factor_down):<19} {dist:>8}")
        lines.append("* limits the present regime. Factors: crossing flow / present flow with the other flow "
                     "held, inside the chart range; log dist: shortest distance in decades of flow.")
    for w in chart.warnings:
        lines.append(f"Warning: {w}")
    lines.append(CAUTION)
    return "\n".join(lines)


def cmd_margin(args) -> int:
    from lowgmap.physics.chart.margins import point_margins

    from lowgmap.app.files.casefile import load_case

    doc = load_case(args.case)
    ql, qg = _point(args, doc)
    chart = _chart(doc)
    pm = point_margins(chart, ql, qg)
    _emit(args, _clean(margin_report(doc, chart, pm)), _format_margin(doc, chart, pm))
    return 0


# ----------------------------------------------------------------------------------- robust
def _range_arg(args, opt: str, gas: bool, doc):
    from lowgmap.app.files.units import UnitError, parse_flow

    pair = getattr(args, opt.replace("-", "_"), None)
    if pair is None:
        return None
    f = doc.case.fluid
    try:
        lo, hi = (parse_flow(t, f"--{opt}", gas=gas, pressure=f.pressure, temperature=f.temperature) for t in pair)
    except UnitError as exc:
        raise CliError(str(exc)) from None
    if not (lo > 0 and hi > lo):
        raise CliError(f"--{opt} must be LOW HIGH with 0 < LOW < HIGH, got {pair[0]!r} {pair[1]!r}")
    return lo, hi


def cmd_robust(args) -> int:
    from lowgmap.physics.chart.margins import robust_point

    from lowgmap.app.files.casefile import load_case

    doc = load_case(args.case)
    chart = _chart(doc)
    regime = _regime_arg(chart, args.regime)
    rp = robust_point(chart, regime, _range_arg(args, "ql-range", False, doc), _range_arg(args, "qg-range", True, doc))
    st = doc.settings
    data = rp.to_dict()
    data["case"] = {"title": doc.case.title, "revision": doc.case.revision}
    data["caution"] = CAUTION
    lims = {m.name: m.label for m, _ in chart.region_models}
    lines = [f"Case: {doc.case.title} (revision {doc.case.revision})",
             f"Most robust point in \"{regime}\" within Q_L {_flow(rp.ql_range[0], st.liquid_flow_unit)} to "
             f"{_flow(rp.ql_range[1], st.liquid_flow_unit)}, Q_G {_flow(rp.qg_range[0], st.gas_flow_unit)} to "
             f"{_flow(rp.qg_range[1], st.gas_flow_unit)}:",
             f"  Q_L {_flow(rp.ql, st.liquid_flow_unit)} ({rp.ql:.4g} m^3/s), "
             f"Q_G {_flow(rp.qg, st.gas_flow_unit)} ({rp.qg:.4g} m^3/s)"]
    if rp.limiting:
        lines.append(f"  symmetric margin ±{_pct(rp.margin)}, limited by: "
                     + "; ".join(lims.get(n, n) for n in rp.limiting))
    else:
        lines.append(f"  symmetric margin at least ±{_pct(rp.margin)} (no boundary comes closer)")
    lines.append(CAUTION)
    _emit(args, _clean(data), "\n".join(lines))
    return 0


# ------------------------------------------------------------------------------ uncertainty
def _describe(u) -> str:
    import math

    if u.relative:
        size = _pct(u.size)
    elif u.target in ("contact_angle", "half_angle"):
        size = f"{math.degrees(u.size):.4g} deg"
    else:
        size = f"{u.size:.4g} (SI units)"
    kind = "±" + size + " uniform" if u.distribution == "uniform" else size + " (1 s.d., normal)"
    return f"{u.target} {kind}"


def cmd_uncertainty(args) -> int:
    from lowgmap.physics.studies.uncertainty import monte_carlo

    from lowgmap.app.files.casefile import load_case

    doc = load_case(args.case)
    if args.samples < 2:
        raise CliError(f"--samples must be >= 2, got {args.samples}")
    ql, qg = _point(args, doc)
    chart = _chart(doc)
    if not chart.regime_names:
        raise CliError("no boundary model on this chart defines regimes: there is no regime to stay in")
    regime = args.regime or doc.settings.intended_regime
    regime = _regime_arg(chart, regime) if regime else None
    show = not args.json and sys.stderr.isatty()

    def progress(done, total):
        if show:
            print(f"\r  {done}/{total} samples", end="", file=sys.stderr, flush=True)

    if args.chart_draws is not None and args.chart_draws < 1:
        raise CliError(f"--chart-draws must be >= 1, got {args.chart_draws}")
    res = monte_carlo(doc.case, doc.uncertainties, n=args.samples, seed=args.seed, intended_regime=regime,
                      progress=progress, chart=chart, point=(ql, qg), chart_draws=args.chart_draws,
                      required_margin=doc.settings.required_margin)
    if show:
        print(file=sys.stderr)
    data = res.to_dict()
    data["operating_point"] = {"ql_m3_s": ql, "qg_m3_s": qg}
    data["inputs"] = [{"target": u.target, "distribution": u.distribution, "size": u.size, "relative": u.relative}
                      for u in doc.uncertainties]
    data["case"] = {"title": doc.case.title, "revision": doc.case.revision}
    data["caution"] = CAUTION
    lines = [f"Case: {doc.case.title} (revision {doc.case.revision})",
             f"Monte Carlo: {res.n} samples, seed {res.seed}"
             + (f", {res.chart_draws} property/geometry draws" if res.chart_draws > 1 else "")]
    if doc.uncertainties:
        lines.append("Inputs: " + "; ".join(_describe(u) for u in doc.uncertainties))
    else:
        lines.append("Inputs: the case lists no uncertainties (every sample is the nominal point)")
    lines.append(f"Intended regime: {res.intended_regime} (nominal margin ±{_pct(res.nominal_margin)})")
    lines.append(f"Probability of staying in it: {res.probability:.4f} ± {res.std_error:.4f} (standard error; "
                 f"95 % interval {res.ci95[0]:.4f} to {res.ci95[1]:.4f})")
    if res.probability_required is not None:
        lines.append(f"Probability of a margin >= required ±{_pct(res.required_margin)}: "
                     f"{res.probability_required:.4f}")
    lines.append("Symmetric margin (negative: outside the regime): "
                 + ", ".join(f"{100 * q:g} % quantile {_pct(v)}" for q, v in res.margin_quantiles))
    if res.sensitivity:
        lines.append("Sensitivity (change of the margin per standard uncertainty of the input):")
        for name, eff in res.sensitivity:
            lines.append(f"  {name:<22} {100 * eff:+.3g} points".replace("-", _MINUS))
    lines.append("Regimes of the samples: " + ", ".join(f"{k} {v}" for k, v in res.regime_counts.items()))
    if res.n_invalid:
        lines.append(f"Left out: {res.n_invalid} samples with a non-positive flow, property or size.")
    lines.append(CAUTION)
    _emit(args, _clean(data), "\n".join(lines))
    return 0


# ------------------------------------------------------------------------------ registration
def register(sub, add):
    sp = add("margin", cmd_margin, "margins of the operating point to every boundary: axis factors, log "
                                   "distance, symmetric ±m margin and the limiting boundary")
    sp.add_argument("--ql", metavar="VALUE", help="liquid flow rate with units (default: the case's operating point)")
    sp.add_argument("--qg", metavar="VALUE",
                    help="gas flow rate with units, sccm/slpm allowed (default: the case's operating point)")
    sp = add("robust", cmd_robust, "the point of a regime with the largest symmetric margin")
    sp.add_argument("--regime", required=True, metavar="NAME", help="regime name as shown on the chart")
    sp.add_argument("--ql-range", nargs=2, metavar=("LOW", "HIGH"), help="allowed liquid flow (default: chart range)")
    sp.add_argument("--qg-range", nargs=2, metavar=("LOW", "HIGH"), help="allowed gas flow (default: chart range)")
    sp = add("uncertainty", cmd_uncertainty, "Monte Carlo over the case's uncertainties: probability of staying "
                                             "in the intended regime, margin distribution, sensitivities")
    sp.add_argument("--samples", type=int, default=10_000, metavar="N", help="number of samples (default 10000)")
    sp.add_argument("--seed", type=int, default=0, metavar="S", help="random seed (default 0)")
    sp.add_argument("--regime", metavar="NAME", help="intended regime (default: [chart] intended_regime, else the "
                                                     "regime of the operating point)")
    sp.add_argument("--chart-draws", type=int, metavar="K",
                    help="distinct draws of the property/geometry inputs (default: samples/16); lower it for "
                         "models that rebuild tables for every case")
    sp.add_argument("--ql", metavar="VALUE", help="nominal liquid flow rate with units (default: the case's)")
    sp.add_argument("--qg", metavar="VALUE", help="nominal gas flow rate with units (default: the case's)")
