"""Benchmarks of the chart, the margins and the Monte Carlo (run on demand; prints medians).

    python tests/perf/bench_margins.py [CASE_NAME ...]     (default: every sample case)

Measures, on one core:
- full chart computation (Chart.build) for each sample case, after the case (fluid properties,
  cached tables) is loaded; target <= 50 ms;
- margins of one point (point_margins) on a built chart, warm (line samples cached) and cold (first
  point on a fresh chart); target <= 2 ms;
- vectorised symmetric margins of 10 000 points;
- Monte Carlo of 10 000 samples with the case's own uncertainties; target <= 1 s; where the case's draws
  move the lines, also with the draws shared out to 2 worker processes (``monte_carlo(workers=2)``, the
  workers started before timing);
- the robust point and an envelope check;
- a brute-force reference: the symmetric margin found by classifying a dense grid of the ±m box
  (bisection on m, 101 x 101 points per box), to show the speed ratio and the agreement.
"""
from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import statistics  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

from lowgmap.app.files.casefile import SAMPLE_DIR, load_case  # noqa: E402
from lowgmap.physics.chart.composition import Chart  # noqa: E402
from lowgmap.physics.chart.margins import envelope_check, point_margins, robust_point, symmetric_margins  # noqa: E402
from lowgmap.physics.studies.uncertainty import monte_carlo  # noqa: E402


def median_time(fn, repeat: int, number: int = 1) -> float:
    """Median over ``repeat`` runs of the time per call [s] (each run makes ``number`` calls)."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(number):
            fn()
        times.append((time.perf_counter() - t0) / number)
    return statistics.median(times)


def brute_margin(chart, ql, qg, n=101, iters=30):
    """Symmetric margin by classifying a dense grid of the box (bisection on m)."""
    regime = chart.regime_at(ql, qg)
    u = np.linspace(-1.0, 1.0, n)

    def same(m):
        gx, gy = np.meshgrid(ql * (1 + m * u), qg * (1 + m * u))
        return bool(np.all(chart.classify(gx, gy) == regime))

    lo, hi = 0.0, 0.999
    if same(hi):
        return hi
    for _ in range(iters):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if same(mid) else (lo, mid)
    return 0.5 * (lo + hi)


def ms(t: float) -> str:
    return f"{t * 1e3:8.3f} ms"


def main(names=()) -> None:
    print(f"lowgmap margin benchmarks (median times, one core), numpy {np.__version__}")
    docs = {}
    print("\nChart.build per sample case (case already loaded; target <= 50 ms)")
    for path in sorted(SAMPLE_DIR.glob("*.toml")):
        if names and path.stem not in names:
            continue
        try:
            doc = load_case(path)
            Chart.build(doc.case)
        except Exception as exc:  # a file that is not a case, or does not build today: reported, not fatal
            print(f"  {path.stem:<24} not measured: {str(exc).splitlines()[0]}")
            continue
        docs[path.stem] = doc
        t = median_time(lambda: Chart.build(doc.case), repeat=30)
        print(f"  {path.stem:<24} {ms(t)}")

    print("\nMargins of one point (target <= 2 ms)")
    rng = np.random.default_rng(0)
    for name, doc in docs.items():
        chart = Chart.build(doc.case)
        if not chart.regime_names or doc.case.operating_point is None:
            print(f"  {name:<24} no regimes: skipped")
            continue
        op = doc.case.operating_point
        cold = median_time(lambda: point_margins(Chart.build(doc.case), op.ql, op.qg), repeat=15) - \
            median_time(lambda: Chart.build(doc.case), repeat=15)
        point_margins(chart, op.ql, op.qg)
        fr = doc.case.flow_range
        pts = list(zip(10 ** rng.uniform(np.log10(fr.ql_min), np.log10(fr.ql_max), 200),
                       10 ** rng.uniform(np.log10(fr.qg_min), np.log10(fr.qg_max), 200)))
        it = iter(pts * 10)
        warm = median_time(lambda: point_margins(chart, *next(it)), repeat=9, number=200)
        print(f"  {name:<24} warm {ms(warm)}   first point on a fresh chart {ms(cold)}")

        ql = 10 ** rng.uniform(np.log10(fr.ql_min), np.log10(fr.ql_max), 10_000)
        qg = 10 ** rng.uniform(np.log10(fr.qg_min), np.log10(fr.qg_max), 10_000)
        t = median_time(lambda: symmetric_margins(chart, ql, qg), repeat=5)
        print(f"  {name:<24} symmetric margins of 10 000 points (vectorised) {ms(t)}")

        sub = pts[:20]
        t_brute = median_time(lambda: [brute_margin(chart, a, b) for a, b in sub], repeat=3) / len(sub)
        t_ours = median_time(lambda: [point_margins(chart, a, b) for a, b in sub], repeat=9) / len(sub)
        diff = max(abs(brute_margin(chart, a, b) - point_margins(chart, a, b).symmetric_margin) for a, b in sub)
        print(f"  {name:<24} brute force (dense-grid classification) {ms(t_brute)} per point, "
              f"{t_brute / t_ours:6.0f} x slower; largest difference in m {diff:.1e} (grid resolution)")

    print("\nMonte Carlo, 10 000 samples with the case's uncertainties (target <= 1 s)")
    for name, doc in docs.items():
        chart = Chart.build(doc.case)
        if not chart.regime_names or doc.case.operating_point is None:
            continue
        inputs = ", ".join(u.target for u in doc.uncertainties)
        shared = [u for u in doc.uncertainties if u.target not in ("liquid_flow", "gas_flow")]
        draws = None
        if shared:       # pilot: cost of one property/geometry draw (some models rebuild tables per case)
            t0 = time.perf_counter()
            monte_carlo(doc.case, doc.uncertainties, n=64, seed=1, chart=chart, chart_draws=4)
            per_draw = (time.perf_counter() - t0) / 4
            default_draws = -(-10_000 // 16)
            if per_draw * default_draws > 60.0:
                draws = 16
                print(f"  {name:<24} one property/geometry draw costs {per_draw:.2f} s, so the default "
                      f"{default_draws} draws would take about {per_draw * default_draws:.0f} s; measured with "
                      f"--chart-draws {draws}:")
        repeat = 5 if draws is None else 1
        t = median_time(lambda: monte_carlo(doc.case, doc.uncertainties, n=10_000, seed=0, chart=chart,
                                            chart_draws=draws), repeat=repeat)
        res = monte_carlo(doc.case, doc.uncertainties, n=10_000, seed=0, chart=chart, chart_draws=draws) \
            if draws is None else None
        k = res.chart_draws if res is not None else draws
        print(f"  {name:<24} {ms(t)}  ({k} property/geometry draws; inputs: {inputs})")
        if shared and draws is None:          # the draws shared out to two worker processes (started before timing)
            from lowgmap.physics.studies import workers
            workers.warm(2)
            t2 = median_time(lambda: monte_carlo(doc.case, doc.uncertainties, n=10_000, seed=0, chart=chart,
                                                 workers=2), repeat=3)
            print(f"  {name:<24} {ms(t2)}  (the same draws in 2 worker processes)")

    print("\nRobust point and envelope")
    for name, doc in docs.items():
        chart = Chart.build(doc.case)
        if len(chart.regime_names) < 2:
            continue
        op = doc.case.operating_point
        regime = chart.regime_at(op.ql, op.qg)          # the regime the case is designed for
        point_margins(chart, op.ql, op.qg)
        t = median_time(lambda: robust_point(chart, regime), repeat=3)
        te = median_time(lambda: envelope_check(chart, (op.ql * 0.8, op.ql * 1.25), (op.qg * 0.8, op.qg * 1.25)),
                         repeat=20)
        print(f"  {name:<24} robust point in {regime!r} {ms(t)}; envelope check {ms(te)}")


if __name__ == "__main__":
    main(tuple(sys.argv[1:]))
