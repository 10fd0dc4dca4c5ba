"""Benchmark of chart rebuilds after one geometry input changes (run on demand: ``python tests/perf/bench_geometry.py``).

Prints, for every sample case and every geometry input it has (half-angle, wall length, depth, diameter,
size, conduit length, contact angle), the median time of one frame: the chart rebuilt for a new value
(:func:`lowgmap.physics.chart.composition.build_chart`), the operating point's margins
(:func:`lowgmap.physics.chart.margins.point_margins`) and the display data
(:func:`lowgmap.app.outputs.chartview.chart_view`). Each frame uses a value not seen before (a slider
moving in small steps; wall-clock and CPU-time medians of this process, the latter less disturbed by other
load on a shared machine), then ``revisit`` frames go back over values seen more than 64 frames earlier
(the old in-memory caches held 64 entries). Target: median <= 50 ms per frame. Asserts nothing.

Two kinds of frame are measured for each input: the *preview* frame the dashboard computes while a slider is
dragged (``build_chart(..., preview=True)``, the operating point's regime and symmetric margin at preview
resolution (:func:`lowgmap.physics.chart.margins.preview_margin`), the display data) and the *released*
frame computed for the value released (full resolution), which is the one every view reads afterwards.

Options:
  --exact            full solves (``build_chart(..., exact=True)``): the path before the surrogates
  --released-only    only the released frames
  --steps N          new values per input (default 12)
  --case NAME        only this sample case

The persistent cache is pointed at a fresh temporary folder so that earlier runs do not hide costs.
The machine's cores may be shared: read medians, not single runs.
"""
from __future__ import annotations

import os
import tempfile

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")
os.environ["LOWGMAP_CACHE_DIR"] = tempfile.mkdtemp(prefix="lowgmap-bench-geometry-")

import argparse  # noqa: E402
import dataclasses  # noqa: E402
import math  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))


from lowgmap.app.files.casefile import load_case, sample_case_path  # noqa: E402
from lowgmap.app.outputs.chartview import chart_view  # noqa: E402
from lowgmap.physics.chart.composition import build_chart  # noqa: E402
from lowgmap.physics.chart.margins import point_margins, preview_margin  # noqa: E402
from lowgmap.physics.studies.design_space import apply_changes  # noqa: E402

CASES = ("wedge_separator", "cryogenic_groove", "condensate_line", "drop_tower_silicone", "ground_test_loop",
         "lunar_separator")


def inputs_of(case) -> dict[str, float]:
    """Geometry inputs of a case and their base values (SI): keys of design_space.apply_changes."""
    sec = case.section
    names = {f.name for f in dataclasses.fields(sec)}
    out = {}
    if "half_angle" in names:
        out["half_angle"] = sec.half_angle
    for name in ("wall_length", "depth", "width", "diameter"):
        if name in names:
            out[f"section.{name}"] = getattr(sec, name)
    if not out or set(out) == {"half_angle"}:
        out["size"] = sec.hydraulic_diameter
    out["length"] = case.length
    out["contact_angle"] = case.wetting.contact_angle
    return {k: v for k, v in out.items() if v is not None}


def values(key: str, base: float, n: int) -> list[float]:
    """n slider values around base, none equal to base (small steps, as a slider moves)."""
    if key == "contact_angle":
        return [base + math.radians(0.25) * (i + 1) for i in range(n)]
    if key == "half_angle":
        return [base * (1.0 + 0.004 * (i + 1)) for i in range(n)]
    return [base * (1.0 + 0.01 * (i + 1)) for i in range(n)]


def frame(case, exact: bool, preview: bool = False):
    ch = build_chart(case, exact=exact, preview=preview)
    op = case.operating_point
    if op is not None:
        if preview:                     # what the dashboard's preview job computes: regime and margin only
            preview_margin(ch, op.ql, op.qg)
        else:
            point_margins(ch, op.ql, op.qg)
    chart_view(ch)
    return ch


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--exact", action="store_true")
    p.add_argument("--released-only", action="store_true")
    p.add_argument("--steps", type=int, default=12)
    p.add_argument("--revisit", type=int, default=0, help="values to visit before revisiting (e.g. 80)")
    p.add_argument("--case", default=None)
    a = p.parse_args(argv)
    mode = "exact (full solves)" if a.exact else "surrogates"
    print(f"chart rebuild + margins + display data per new geometry value, {mode}; target <= 50 ms median")
    for name in (a.case,) if a.case else CASES:
        case = load_case(sample_case_path(name)).case
        frame(case, a.exact)                                  # first chart: imports, fluid, shape tables
        for key, base in inputs_of(case).items():
            vals = values(key, base, a.steps)
            times, cpu, prev_t, prev_cpu = [], [], [], []
            for v in vals:
                c = apply_changes(case, {key: v})
                if not a.released_only:               # as dragged: the preview of a new value comes first
                    t0, c0 = time.perf_counter(), time.process_time()
                    frame(c, a.exact, preview=True)
                    prev_t.append(time.perf_counter() - t0)
                    prev_cpu.append(time.process_time() - c0)
                    c = apply_changes(case, {key: v * (1.0 + 1e-9)})   # released: a value not seen before
                t0, c0 = time.perf_counter(), time.process_time()
                frame(c, a.exact)
                times.append(time.perf_counter() - t0)
                cpu.append(time.process_time() - c0)
            line = f"  {name:22s} {key:22s}"
            if prev_t:
                line += (f" preview median {1e3 * statistics.median(prev_t):6.1f} ms (CPU "
                         f"{1e3 * statistics.median(prev_cpu):5.1f}),")
            line += (f" released median {1e3 * statistics.median(times):6.1f} ms "
                     f"[{1e3 * min(times):.1f} .. {1e3 * max(times):.1f}], CPU {1e3 * statistics.median(cpu):6.1f} ms"
                     f" over {len(times)} new values")
            if a.revisit:
                more = values(key, base, a.revisit)
                for v in more:
                    frame(apply_changes(case, {key: v}), a.exact)
                rt = []
                for v in more[:10]:
                    c = apply_changes(case, {key: v})
                    t0 = time.perf_counter()
                    frame(c, a.exact)
                    rt.append(time.perf_counter() - t0)
                line += f"; revisit after {a.revisit}: median {1e3 * statistics.median(rt):.1f} ms"
            print(line, flush=True)


if __name__ == "__main__":
    main()
