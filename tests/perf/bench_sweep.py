"""Benchmark of design sweeps (run on demand: ``python tests/perf/bench_sweep.py [--quick]``).

Prints median designs per second; asserts nothing. Not collected by pytest (tests/perf is excluded).

Measured:
- tube case (sample_cases/condensate_line.toml), a size x length grid, in-process: operating-point
  margins, envelope margins, and the reference path (``method="full"``: Chart.build per design);
  target >= 1,000 designs/s;
- corner case (sample_cases/wedge_separator.toml), in-process, after its tables are cached: a grid
  over residual acceleration and the injector width (inputs that leave the corner shape and the
  conduit length alone); target >= 100 designs/s. The first chart of a corner shape takes its
  open-channel tables from the shipped surrogates (about 0.1 s; 1.5 s with mesh solves) and each new
  conduit length builds the corner family's critical-flow table (about 0.3-0.5 s while it runs 11 root
  searches; one similarity-curve look-up once physics/models/corner.py uses
  lowgmap.physics.models.open_channel.surrogate.critical_flow_rates); those one-off costs are measured separately;
- the same sweeps on a local dask cluster of 2 worker processes (started before timing, warmed by
  one run so that every worker has its tables), to show the gain from workers.

The machine's cores may be shared: run it on a quiet machine and read medians, not single runs.
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

from lowgmap.app.files.casefile import load_case, sample_case_path  # noqa: E402
from lowgmap.physics.studies.sweep import grid, sweep  # noqa: E402


def rate(fn, n_designs: int, repeat: int) -> tuple[float, list[float], float]:
    """Median designs per second over ``repeat`` runs of ``fn`` (each evaluates n_designs).

    Returns (median per wall-clock second, all rates, median per CPU second of this process).
    """
    rates, cpu = [], []
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        rates.append(n_designs / (time.perf_counter() - t0))
        cpu.append(n_designs / max(time.process_time() - c0, 1e-9))
    return statistics.median(rates), rates, statistics.median(cpu)


def show(name: str, med: float, rates: list[float], cpu: float | None = None, target: str = "") -> None:
    spread = f"[{min(rates):.0f} .. {max(rates):.0f}]"
    per_cpu = f"{cpu:8.0f} /CPU-s" if cpu is not None else " " * 14
    print(f"  {name:56s} {med:8.0f} designs/s {spread:>16s} {per_cpu}  {target}")


def cluster_rate(client, fn, n_designs: int, repeat: int):
    """Like :func:`rate` on a dask cluster, with the workers' busy time / wall time (parallelism)."""
    from distributed import get_task_stream

    rates, par = [], []
    for _ in range(repeat):
        with get_task_stream(client=client) as ts:
            t0 = time.perf_counter()
            fn()
            wall = time.perf_counter() - t0
        busy = sum(sum(s["stop"] - s["start"] for s in t.get("startstops", ()) if s.get("action") == "compute")
                   for t in ts.data)
        rates.append(n_designs / wall)
        par.append(busy / wall)
    return statistics.median(rates), rates, statistics.median(par)


def show_cluster(name: str, med: float, rates: list[float], par: float) -> None:
    spread = f"[{min(rates):.0f} .. {max(rates):.0f}]"
    print(f"  {name:56s} {med:8.0f} designs/s {spread:>16s}   workers busy {par:4.2f} x wall time")


def main(quick: bool = False) -> None:
    rep = 3 if quick else 5
    print(f"lowgmap design-sweep benchmark (median designs/s over {rep} runs), numpy {np.__version__}, "
          f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}")
    tube = load_case(sample_case_path("condensate_line"))
    wedge = load_case(sample_case_path("wedge_separator"))
    tube_designs = grid({"size": np.geomspace(0.005, 0.03, 20).tolist(),
                         "length": np.linspace(0.5, 3.0, 50 if not quick else 25).tolist()})
    env = ((2e-5, 8e-5), (2e-6, 1e-5))
    corner_designs = grid({"residual_acceleration": np.geomspace(1e-6, 1e-4, 20).tolist(),
                           "constant.injector_width_ratio": [0.12, 0.15, 0.2, 0.25, 0.3, 0.35]})
    regime = wedge.settings.intended_regime

    sweep(tube.case, tube_designs[:20])                        # imports, first chart
    print(f"\nTube case, {len(tube_designs)} designs (size x length), in-process")
    show("operating-point margins (auto: exact straight lines)",
         *rate(lambda: sweep(tube.case, tube_designs), len(tube_designs), rep), target="target >= 1000")
    show("operating point + envelope margins",
         *rate(lambda: sweep(tube.case, tube_designs, envelope=env), len(tube_designs), rep),
         target="target >= 1000")
    few = tube_designs[:100]
    show("reference path, Chart.build per design (method='full')",
         *rate(lambda: sweep(tube.case, few, method="full"), len(few), rep))

    print(f"\nCorner case, {len(corner_designs)} designs (g x injector width), in-process")
    t0 = time.perf_counter()
    sweep(wedge.case, corner_designs[:1], regime=regime)
    print(f"  first design (open-channel tables of the shape built): {time.perf_counter() - t0:8.2f} s")
    t0 = time.perf_counter()
    sweep(wedge.case, [{"length": 0.0523}], regime=regime)
    print(f"  first design at a new conduit length (critical-flow table): {time.perf_counter() - t0:6.2f} s")
    show("operating-point margins, tables cached (auto: lines sampled)",
         *rate(lambda: sweep(wedge.case, corner_designs, regime=regime), len(corner_designs), rep),
         target="target >= 100")
    show("operating point + envelope margins, tables cached",
         *rate(lambda: sweep(wedge.case, corner_designs, regime=regime,
                             envelope=((0.2e-6, 1.0e-6), (0.01e-6, 0.03e-6))), len(corner_designs), rep))
    few = corner_designs[:24]
    show("reference path, Chart.build per design (method='full')",
         *rate(lambda: sweep(wedge.case, few, regime=regime, method="full"), len(few), rep))

    # geometry: every design a new corner shape or length (its tables and quadratures computed afresh)
    geo = grid({"half_angle": np.radians(np.linspace(4.0, 8.0, 10)).tolist(),
                "length": np.linspace(0.03, 0.06, 10).tolist()})
    t0, c0 = time.perf_counter(), time.process_time()
    sweep(wedge.case, geo, regime=regime)
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    print(f"  {'geometry grid (half-angle x length), first pass (nothing cached)':56s} "
          f"{len(geo) / wall:8.0f} designs/s {'':>16s} {len(geo) / cpu:8.0f} /CPU-s  target >= 1000")
    show("geometry grid again (tables cached)",
         *rate(lambda: sweep(wedge.case, geo, regime=regime), len(geo), rep), target="target >= 1000")

    print("\nDashboard design map (sweep_map: refined near the zero and required-margin contours, 400 designs),"
          " corner case, half-angle x conduit length")
    from lowgmap.physics.studies.sweep import sweep_map, warm_map_pools

    op = wedge.case.operating_point
    warm_map_pools(2)                                  # worker processes started before timing (as the dashboard)
    for workers in (1, 2):
        times, cpus, used = [], [], 0
        for k in range(2 if quick else 4):
            t0, c0 = time.perf_counter(), time.process_time()
            _, df = sweep_map(wedge.case, "half_angle", (np.radians(3.0 + 0.01 * k), np.radians(10.0)), "length",
                              (0.02, 0.08), n_max=400, regime=regime, point=(op.ql, op.qg), required_margin=0.25,
                              workers=workers)
            times.append(time.perf_counter() - t0)
            cpus.append(time.process_time() - c0)
            used = len(df)
        where = "in this process" if workers == 1 else f"{workers} worker processes"
        print(f"  {used} designs, {where}: median {statistics.median(times):.2f} s wall "
              f"({' '.join(f'{t:.2f}' for t in times)}), this process {statistics.median(cpus):.2f} s CPU "
              f"(target <= 2 s)")

    try:
        from distributed import Client, LocalCluster
    except ImportError:
        print("\n(dask.distributed not installed: cluster runs skipped)")
        return
    print("\nLocal dask cluster, 2 worker processes, 1 thread each (started and warmed before timing)")
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0") as lc, \
            Client(lc) as client:
        big = tube_designs * 4
        ref = sweep(tube.case, big[:2000])
        got = sweep(tube.case, big[:2000], client=client)           # warm: imports and first charts
        assert got.equals(ref)
        sweep(wedge.case, corner_designs, regime=regime, client=client, chunk_size=10)
        show_cluster(f"tube, {len(big)} designs, operating-point margins",
                     *cluster_rate(client, lambda: sweep(tube.case, big, client=client), len(big), rep))
        show(f"tube, {len(big)} designs, in-process for comparison",
             *rate(lambda: sweep(tube.case, big), len(big), rep))
        show_cluster(f"corner, {len(corner_designs)} designs, tables cached on the workers",
                     *cluster_rate(client, lambda: sweep(wedge.case, corner_designs, regime=regime, client=client),
                                   len(corner_designs), rep))
        show(f"corner, {len(corner_designs)} designs, in-process for comparison",
             *rate(lambda: sweep(wedge.case, corner_designs, regime=regime), len(corner_designs), rep))
        chunk_overhead(client, tube.case, big[:2000], rep)
    print(f"\nload average at the end: {os.getloadavg()[0]:.2f}")


def chunk_overhead(client, case, designs, rep: int) -> None:
    """Per-chunk cost of the cluster: wall time of one sweep at several chunk sizes, fitted as
    t = t_designs + n_chunks * t_chunk (least squares over the medians)."""
    sizes = (1000, 250, 64, 16)
    rows = []
    for size in sizes:
        times = []
        for _ in range(rep):
            t0 = time.perf_counter()
            sweep(case, designs, client=client, chunk_size=size)
            times.append(time.perf_counter() - t0)
        n_chunks = -(-len(designs) // size)
        rows.append((n_chunks, statistics.median(times)))
        print(f"  tube, {len(designs)} designs in chunks of {size:5d} ({n_chunks:4d} chunks)   "
              f"median {1e3 * rows[-1][1]:8.1f} ms")
    n = np.array([r[0] for r in rows], dtype=float)
    t = np.array([r[1] for r in rows])
    slope, icpt = np.polyfit(n, t, 1)
    print(f"  fitted per-chunk overhead {1e3 * slope:.2f} ms (2 workers in parallel: about twice that per "
          f"worker), design work {1e3 * icpt:.0f} ms")


if __name__ == "__main__":
    main(quick="--quick" in sys.argv[1:])
