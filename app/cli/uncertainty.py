"""`lowgmap uncertainty`: Monte Carlo over the case's uncertainties.

The probability of staying in the intended regime, the margin distribution and the sensitivities
come from :func:`lowgmap.physics.studies.uncertainty.monte_carlo` on the chart of the case. The
number of samples is at most :data:`lowgmap.app.cli.common.MAX_SAMPLES` and of property/geometry draws
at most :data:`lowgmap.app.cli.common.MAX_CHART_DRAWS`; before the run, one draw is timed and an
estimate printed on stderr (``--quiet`` leaves it out).

``--model-constants`` adds model uncertainty: the constants of the region lines (all of them, or the
``model.constant`` keys listed) are drawn uniformly over their uncertainty bands, and the result is
reported beside the input-only result, separately (constants alone, and inputs and constants together),
as :attr:`lowgmap.physics.studies.uncertainty.MonteCarloResult.model` gives it.
"""
from __future__ import annotations

import math
import sys
import time

from lowgmap.app import CAUTION
from lowgmap.app.cli import operating
from lowgmap.app.cli.common import clean, emit, estimate_text, load_case_file
from lowgmap.app.formatting import format_percent, format_point_change
from lowgmap.app.cli import common

__all__ = ["add_arguments", "run", "describe_uncertainty"]


def add_arguments(parser) -> None:
    parser.add_argument("--samples", type=int, default=10_000, metavar="N",
                        help=f"number of samples, 2 to {common.MAX_SAMPLES:,} (default 10000)")
    parser.add_argument("--seed", type=int, default=0, metavar="S", help="random seed, >= 0 (default 0)")
    parser.add_argument("--regime", metavar="NAME", help="intended regime (default: [chart] intended_regime, else the "
                                                         "regime of the operating point)")
    parser.add_argument("--chart-draws", type=int, metavar="K",
                        help=f"distinct draws of the property/geometry inputs, 1 to {common.MAX_CHART_DRAWS:,} "
                             "(default: samples/16); lower it for models that rebuild tables for every case")
    parser.add_argument("--ql", metavar="VALUE", help="nominal liquid flow rate with units (default: the case's)")
    parser.add_argument("--qg", metavar="VALUE", help="nominal gas flow rate with units (default: the case's)")
    parser.add_argument("--model-constants", metavar="all|MODEL.CONSTANT,...",
                        help="also draw the constants of the region lines over their uncertainty bands: 'all', or "
                             "a comma-separated list such as bubble_slug_dukler_1988.c0 (a bare constant name "
                             "takes it in every region line); reported separately from the input uncertainty")
    parser.add_argument("--model-draws", type=int, metavar="K",
                        help="constant draws of the constants-only study, 1 to "
                             f"{common.MAX_CHART_DRAWS:,} (default: as many as the property/geometry draws, "
                             "else samples/16)")
    parser.add_argument("--workers", type=int, default=1, metavar="W",
                        help=f"processes that compute the property/geometry draws, 1 to {common.MAX_WORKERS} "
                             "(default 1); the same numbers with any W, sooner on a machine with the cores")
    parser.add_argument("--quiet", action="store_true", help="no progress and no run-time estimate on stderr")


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


def model_constants(text):
    """``--model-constants`` as ``monte_carlo(model_uncertainty=...)`` takes it: False, True or a list of keys.

    >>> model_constants(None), model_constants("all"), model_constants(" a.c0, alpha_c ")
    (False, True, ['a.c0', 'alpha_c'])
    """
    if text is None:
        return False
    keys = [k.strip() for k in str(text).split(",") if k.strip()]
    if not keys:
        raise common.CliError("--model-constants needs 'all' or a comma-separated list of MODEL.CONSTANT keys, "
                              f"got {text!r}")
    if [k.casefold() for k in keys] == ["all"]:
        return True
    return keys


def model_lines(res, pct=format_percent) -> list[str]:
    """The model-uncertainty part of the text output (empty without it)."""
    m = res.model
    if m is None:
        return []
    lines = ["", "Model uncertainty (constants drawn uniformly over their bands; reported apart from the inputs):",
             "  Constants: " + "; ".join(f"{v.key} [{v.low:.4g}, {v.high:.4g}]" + (f" {v.unit}" if v.unit not in
                                                                                   ("", "-") else "")
                                         for v in m.variables)]
    lines.append(f"  Constants alone ({m.draws} draws, inputs nominal): probability of staying in it "
                 f"{m.probability_model:.4f} ± {m.std_error_model:.4f} (95 % interval {m.ci95_model[0]:.4f} to "
                 f"{m.ci95_model[1]:.4f})")
    lines.append("    margin " + ", ".join(f"{100 * q:g} % quantile {pct(v)}" for q, v in m.margin_quantiles_model))
    if m.n_rejected_model:
        lines.append(f"    left out: {m.n_rejected_model} constant draws the models reject")
    lines.append(f"  Inputs and constants together ({m.groups_both} constant draws): probability "
                 f"{m.probability_both:.4f} ± {m.std_error_both:.4f} (95 % interval {m.ci95_both[0]:.4f} to "
                 f"{m.ci95_both[1]:.4f})")
    lines.append("    margin " + ", ".join(f"{100 * q:g} % quantile {pct(v)}" for q, v in m.margin_quantiles_both))
    if m.probability_required_model is not None:
        lines.append(f"  Probability of a margin >= required ±{pct(res.required_margin)}: constants alone "
                     f"{m.probability_required_model:.4f}, inputs and constants "
                     f"{m.probability_required_both:.4f}")
    if m.n_invalid_both:
        lines.append(f"    left out: {m.n_invalid_both} joint samples (invalid inputs or rejected constants)")
    if m.sensitivity:
        lines.append("  Sensitivity to the constants (change of the margin per standard uncertainty):")
        for name, eff in m.sensitivity:
            lines.append(f"    {name:<40} {format_point_change(eff)}")
    return lines


def run(args) -> int:
    from lowgmap.physics.studies.uncertainty import monte_carlo

    from lowgmap.physics.studies.uncertainty import DRAWS_PER_BLOCK, FLOWS_PER_CHART_DRAW, POINT_TARGETS

    if args.samples < 2:
        raise common.CliError(f"--samples must be >= 2, got {args.samples}")
    common.check_count("--samples", args.samples, 2, common.MAX_SAMPLES)
    common.check_count("--seed", args.seed, 0, 2 ** 63 - 1)
    if args.chart_draws is not None and args.chart_draws < 1:
        raise common.CliError(f"--chart-draws must be >= 1, got {args.chart_draws}")
    draws = args.chart_draws if args.chart_draws is not None else math.ceil(args.samples / FLOWS_PER_CHART_DRAW)
    common.check_count("--chart-draws", draws, 1, common.MAX_CHART_DRAWS,
                       hint="" if args.chart_draws is not None else
                       f"the default is --samples / {FLOWS_PER_CHART_DRAW}: give fewer --samples or a --chart-draws")
    doc = load_case_file(args.case)
    ql, qg = operating.operating_point(args, doc)
    chart = operating.case_chart(doc)
    if not chart.regime_names:
        raise common.CliError("no boundary model on this chart defines regimes: there is no regime to stay in")
    regime = args.regime or doc.settings.intended_regime
    regime = operating.regime_name(chart, regime) if regime else None
    show = not args.json and not args.quiet and sys.stderr.isatty()

    def progress(done, total):
        if show:
            print(f"\r  {done}/{total} samples", end="", file=sys.stderr, flush=True)

    which = model_constants(getattr(args, "model_constants", None))
    model_draws = getattr(args, "model_draws", None)
    if model_draws is not None:
        if which is False:
            raise common.CliError("--model-draws applies to model uncertainty: add --model-constants")
        common.check_count("--model-draws", model_draws, 1, common.MAX_CHART_DRAWS)
    workers = getattr(args, "workers", 1)
    common.check_count("--workers", workers, 1, common.MAX_WORKERS)
    kw = dict(seed=args.seed, intended_regime=regime, chart=chart, point=(ql, qg),
              required_margin=doc.settings.required_margin)
    if not args.quiet:
        per_draw = any(u.target not in POINT_TARGETS for u in doc.uncertainties)
        blocks = min(draws, args.samples) if per_draw else math.ceil(args.samples / 2500)
        t0 = time.perf_counter()
        with common.input_errors("uncertainty"):
            monte_carlo(doc.case, doc.uncertainties, n=2, chart_draws=1, **kw)
        share = min(workers, -(-blocks // DRAWS_PER_BLOCK)) if per_draw else 1     # blocks of draws shared out
        print(estimate_text(args.samples, "samples" + (f" ({blocks:,} property/geometry draws)" if per_draw else "")
                            + (f" in {share} processes" if share > 1 else ""),
                            (time.perf_counter() - t0) * blocks / share), file=sys.stderr, flush=True)
    with common.input_errors("uncertainty"):
        res = monte_carlo(doc.case, doc.uncertainties, n=args.samples, progress=progress,
                          chart_draws=args.chart_draws, model_uncertainty=which, model_draws=model_draws,
                          workers=workers, **kw)
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
             + (f", {res.chart_draws} property/geometry draws" if res.chart_draws > 1 else "")
             + (f" (computed in {res.processes} worker processes)" if res.processes > 1 else "")]
    if doc.uncertainties:
        lines.append("Inputs: " + "; ".join(describe_uncertainty(u) for u in doc.uncertainties))
    else:
        lines.append("Inputs: the case lists no uncertainties (every sample is the nominal point)")
    lines.append(f"Intended regime: {res.intended_regime} (nominal margin ±{pct(res.nominal_margin)})")
    if res.model is not None:
        lines.append("Input uncertainty (the case's inputs drawn, the line constants at their chart values):")
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
    lines += model_lines(res, pct)
    lines.append(CAUTION)
    emit(args, clean(data), "\n".join(lines))
    return 0
