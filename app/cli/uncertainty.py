"""`lowgmap uncertainty`: Monte Carlo over the case's uncertainties.

The probability of staying in the intended regime, the margin distribution and the sensitivities
come from :func:`lowgmap.physics.studies.uncertainty.monte_carlo` on the chart of the case.
"""
from __future__ import annotations

import math
import sys

from lowgmap.app import CAUTION
from lowgmap.app.cli import operating
from lowgmap.app.cli.common import CliError, clean, emit, load_case_file
from lowgmap.app.outputs.formatting import format_percent, format_point_change

__all__ = ["add_arguments", "run", "describe_uncertainty"]


def add_arguments(parser) -> None:
    parser.add_argument("--samples", type=int, default=10_000, metavar="N", help="number of samples (default 10000)")
    parser.add_argument("--seed", type=int, default=0, metavar="S", help="random seed (default 0)")
    parser.add_argument("--regime", metavar="NAME", help="intended regime (default: [chart] intended_regime, else the "
                                                         "regime of the operating point)")
    parser.add_argument("--chart-draws", type=int, metavar="K",
                        help="distinct draws of the property/geometry inputs (default: samples/16); lower it for "
                             "models that rebuild tables for every case")
    parser.add_argument("--ql", metavar="VALUE", help="nominal liquid flow rate with units (default: the case's)")
    parser.add_argument("--qg", metavar="VALUE", help="nominal gas flow rate with units (default: the case's)")


def describe_uncertainty(u) -> str:
    """One uncertain input as text: 'contact_angle ±2 deg uniform', 'sigma 5 % (1 s.d., normal)'."""
    if u.relative:
        size = format_percent(u.size)
    elif u.target in ("contact_angle", "half_angle"):
        size = f"{math.degrees(u.size):.4g} deg"
    else:
        size = f"{u.size:.4g} (SI units)"
    kind = "±" + size + " uniform" if u.distribution == "uniform" else size + " (1 s.d., normal)"
    return f"{u.target} {kind}"


def run(args) -> int:
    from lowgmap.physics.studies.uncertainty import monte_carlo

    doc = load_case_file(args.case)
    if args.samples < 2:
        raise CliError(f"--samples must be >= 2, got {args.samples}")
    ql, qg = operating.operating_point(args, doc)
    chart = operating.case_chart(doc)
    if not chart.regime_names:
        raise CliError("no boundary model on this chart defines regimes: there is no regime to stay in")
    regime = args.regime or doc.settings.intended_regime
    regime = operating.regime_name(chart, regime) if regime else None
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
    pct = format_percent
    lines = [f"Case: {doc.case.title} (revision {doc.case.revision})",
             f"Monte Carlo: {res.n} samples, seed {res.seed}"
             + (f", {res.chart_draws} property/geometry draws" if res.chart_draws > 1 else "")]
    if doc.uncertainties:
        lines.append("Inputs: " + "; ".join(describe_uncertainty(u) for u in doc.uncertainties))
    else:
        lines.append("Inputs: the case lists no uncertainties (every sample is the nominal point)")
    lines.append(f"Intended regime: {res.intended_regime} (nominal margin ±{pct(res.nominal_margin)})")
    lines.append(f"Probability of staying in it: {res.probability:.4f} ± {res.std_error:.4f} (standard error; "
                 f"95 % interval {res.ci95[0]:.4f} to {res.ci95[1]:.4f})")
    if res.probability_required is not None:
        lines.append(f"Probability of a margin >= required ±{pct(res.required_margin)}: "
                     f"{res.probability_required:.4f}")
    lines.append("Symmetric margin (negative: outside the regime): "
                 + ", ".join(f"{100 * q:g} % quantile {pct(v)}" for q, v in res.margin_quantiles))
    if res.sensitivity:
        lines.append("Sensitivity (change of the margin per standard uncertainty of the input):")
        for name, eff in res.sensitivity:
            lines.append(f"  {name:<22} {format_point_change(eff)}")
    lines.append("Regimes of the samples: " + ", ".join(f"{k} {v}" for k, v in res.regime_counts.items()))
    if res.n_invalid:
        lines.append(f"Left out: {res.n_invalid} samples with a non-positive flow, property or size.")
    lines.append(CAUTION)
    emit(args, clean(data), "\n".join(lines))
    return 0
