"""`lowgmap design`: inverse design, the inputs that maximise the worst-case margin of an envelope.

The GOAL file is read by :func:`lowgmap.app.files.studyfiles.read_goal` (its format is described
there); the search is :func:`lowgmap.physics.studies.design.optimize_design`. ``--plot`` draws the best
design's chart with the envelope (:func:`lowgmap.app.outputs.maps.design_chart_bytes`), written
atomically; its path is checked before the search runs and an existing file is replaced only with
``--force``. Before the search, one evaluation of the base design is timed and an estimate of the
whole search printed on stderr (``--quiet`` leaves it out).
"""
from __future__ import annotations

import time
from pathlib import Path

from lowgmap.app import CAUTION
from lowgmap.app.cli.common import clean, emit, load_case_file
from lowgmap.app.cli.studies import Progress, format_value, pilot_seconds, print_estimate
from lowgmap.app.cli import common

__all__ = ["add_arguments", "run"]


def add_arguments(parser) -> None:
    parser.add_argument("goal", metavar="GOAL", help="goal file (.toml): envelope, regime, variables, constraints")
    parser.add_argument("--plot", metavar="FILE", help="the best design's chart with the envelope (.png, .svg, .pdf)")
    parser.add_argument("--force", action="store_true", help="replace the --plot file if it exists")
    parser.add_argument("--quiet", action="store_true", help="no progress and no run-time estimate on stderr")


def run(args) -> int:
    from lowgmap.physics.studies.design import optimize_design

    from lowgmap.app.files.studyfiles import fluid_spec, read_goal

    if args.plot is not None:
        common.check_output(args.plot, option="--plot", formats=(".png", ".svg", ".pdf"), force=args.force,
                            inputs=(args.case, args.goal))
    doc = load_case_file(args.case)
    goal, info = read_goal(args.goal, doc)
    progress = None if args.quiet else Progress(f"design {Path(args.goal).name}")
    if not args.quiet:
        _estimate(doc, goal)
    t0 = time.perf_counter()
    with common.input_errors("design"):
        res = optimize_design(doc.case, goal, fluid_spec=fluid_spec(doc), seed=info["seed"], method=info["method"],
                              progress=progress)
    elapsed = time.perf_counter() - t0
    if args.plot is not None:
        from lowgmap.app.outputs.maps import design_chart_bytes

        p = Path(args.plot)
        common.write_output(p, design_chart_bytes(doc, res, goal, p.suffix.lstrip(".").lower()), force=args.force,
                            option="--plot")
    units, kinds = info["units"], info["kinds"]
    data = res.to_dict()
    data.update({"case": args.case, "goal": args.goal, "seconds": elapsed, "units": units,
                 "envelope_m3_s": {"ql": list(goal.ql_range), "qg": list(goal.qg_range)},
                 "constraints": [c.describe() for c in goal.constraints], "plot": args.plot, "caution": CAUTION})
    lu, gu = info["envelope_units"]
    (a, b), (c, d) = goal.ql_range, goal.qg_range
    lines = [f"{doc.case.title}: inverse design ({res.evaluations} evaluations, {elapsed:.1f} s)",
             f"  envelope: Q_L {format_value(a, 'flow', lu)} to {format_value(b, 'flow', lu)}, "
             f"Q_G {format_value(c, 'flow', gu)} to {format_value(d, 'flow', gu)}; wanted regime: {res.regime}",
             "  best design:"]
    for name, v in res.values.items():
        lines.append(f"    {name:<34} {format_value(v, kinds[name], units[name])}")
    if res.fluid:
        lines.append(f"    fluid: {', '.join(f'{k} {v}' for k, v in res.fluid.items())}")
    verdict = "met" if res.meets_required else "NOT met"
    state = "inside the wanted regime" if res.inside else "CROSSED by a boundary"
    lines.append(f"  worst-case margin over the envelope: ±{100 * res.margin:.2f} % (envelope {state}); "
                 f"required ±{100 * res.required_margin:.0f} %: {verdict}")
    lines.append(f"  limited by: {', '.join(res.limiting) if res.limiting else 'no boundary'}")
    lines.append(f"  active constraints: {'; '.join(res.active) if res.active else 'none (interior optimum)'}")
    lines.append("  sensitivity (margin change for +1 % / -1 % of each variable):")
    for s in res.sensitivity:
        lines.append(f"    {s.variable:<34} {100 * s.change_up:+.3f} % / {100 * s.change_down:+.3f} %"
                     + (f"  (at its {s.at_bound} bound)" if s.at_bound else ""))
    if args.plot is not None:
        lines.append(f"wrote {args.plot}")
    lines += ["", CAUTION]
    emit(args, clean(data), "\n".join(lines))
    return 0


def _estimate(doc, goal) -> None:
    """Time the designs at the low and at the high end of every variable over the envelope; print the
    estimate of the search."""
    from lowgmap.app.files.studyfiles import fluid_spec

    d = len(goal.variables)
    planned = max(1, len(goal.fluids)) * ((goal.screen or max(16, 16 * d)) + goal.starts * goal.max_evaluations)
    spec = dict(envelope=(goal.ql_range, goal.qg_range), regime=goal.regime, fluid_spec=fluid_spec(doc))
    corners = [{v.name: v.low for v in goal.variables}, {v.name: v.high for v in goal.variables}]
    with common.input_errors("design"):                  # two different designs, as every step of the search
        first, each = pilot_seconds(doc.case, corners, spec)
    print_estimate(planned, "model evaluations (at most)", first, each)
