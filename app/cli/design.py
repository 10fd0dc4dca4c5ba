"""`lowgmap design`: inverse design, the inputs that maximise the worst-case margin of an envelope.

The GOAL file is read by :func:`lowgmap.app.files.studyfiles.read_goal` (its format is described
there); the search is :func:`lowgmap.physics.studies.design.optimize_design`. ``--plot`` draws the best
design's chart with the envelope (:func:`lowgmap.app.outputs.maps.design_chart_bytes`), written
atomically.
"""
from __future__ import annotations

import time
from pathlib import Path

from lowgmap.app import CAUTION
from lowgmap.app.cli.common import CliError, clean, emit, load_case_file
from lowgmap.app.cli.studies import Progress, format_value

__all__ = ["add_arguments", "run"]


def add_arguments(parser) -> None:
    parser.add_argument("goal", metavar="GOAL", help="goal file (.toml): envelope, regime, variables, constraints")
    parser.add_argument("--plot", metavar="FILE", help="the best design's chart with the envelope (.png, .svg, .pdf)")
    parser.add_argument("--quiet", action="store_true", help="no progress on stderr")


def run(args) -> int:
    from lowgmap.physics.studies.design import optimize_design

    from lowgmap.app.files.studyfiles import fluid_spec, read_goal

    doc = load_case_file(args.case)
    goal, info = read_goal(args.goal, doc)
    progress = None if args.quiet else Progress(f"design {Path(args.goal).name}")
    t0 = time.perf_counter()
    res = optimize_design(doc.case, goal, fluid_spec=fluid_spec(doc), seed=info["seed"], method=info["method"],
                          progress=progress)
    elapsed = time.perf_counter() - t0
    if args.plot:
        p = Path(args.plot)
        fmt = p.suffix.lstrip(".").lower()
        if fmt not in ("png", "svg", "pdf"):
            raise CliError(f"--plot must end in .png, .svg or .pdf, got {args.plot!r}")
        from lowgmap.app.files.atomic import write_atomic
        from lowgmap.app.outputs.maps import design_chart_bytes

        write_atomic(p, design_chart_bytes(doc, res, goal, fmt))
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
    if args.plot:
        lines.append(f"wrote {args.plot}")
    lines += ["", CAUTION]
    emit(args, clean(data), "\n".join(lines))
    return 0
