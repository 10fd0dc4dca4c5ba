"""Speed and memory of reading test-point files (run on demand; prints medians, asserts nothing).

    python tests/perf/bench_testpoints.py [--runs N] [--sizes 10000,100000,1000000]

Two INVENTED file shapes are written to a temporary folder for each size:

- ``compact``: liquid flow, gas flow and observed regime, about 19 bytes a row, so a million rows stay
  within the default byte limit (20 MB);
- ``full``: all eight columns (test id, flows, regime, platform, residual acceleration, duration, notes
  with commas in quotes on every third row), one row in four on a facility that is not a built-in
  platform (a warning each), about 70 bytes a row; read with ``max_bytes`` raised to fit;
- ``bad``: every row wrong five ways (too few values, the same test id, a liquid flow that is not a
  number, a negative gas flow, no regime), about 18 bytes a row: the most problems a file within the
  default limits can hold.

For each file the median wall time of N reads (default 3) in this process gives rows per second. Then
each million-row file is read once more in a fresh interpreter, which reports its peak resident memory
(``VmHWM`` of /proc/self/status, else ``ru_maxrss``) before and after the read; the difference is what
the read itself needed at its peak, the total what a command-line run of that size needs. Wall and
processor times are both printed: on a busy machine the processor time is the steadier figure.
Not collected by pytest (tests/perf is excluded).
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]

_CHILD = """
import json, resource, sys, time

def peak_kb():
    # VmHWM: this process's own peak (ru_maxrss on Linux also carries the parent's peak across exec)
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss

from lowgmap.app.files.testpoints import read_test_points
before = peak_kb()
t0 = time.perf_counter()
tps = read_test_points(sys.argv[1], max_bytes=int(sys.argv[2]))
seconds = time.perf_counter() - t0
print(json.dumps({"rows": len(tps.points), "problems": len(tps.problems), "seconds": seconds,
                  "before_kb": before, "peak_kb": peak_kb()}))
"""


def write_file(path: Path, n: int, shape: str, seed: int = 1) -> int:
    """Write an invented test-point file of ``n`` data rows; return its size in bytes."""
    rng = np.random.default_rng(seed)
    ql = rng.uniform(0.1, 500.0, n)
    qg = rng.uniform(0.1, 500.0, n)
    regimes = np.array(["bubbly", "slug", "annular"])[rng.integers(0, 3, n)]
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        if shape == "compact":
            fh.write("liquid_flow [mL/min],gas_flow [mL/min],observed_regime\n")
            for a, b, r in zip(ql.tolist(), qg.tolist(), regimes.tolist()):
                fh.write(f"{a:.4g},{b:.4g},{r}\n")
        elif shape == "bad":
            fh.write("test_id,liquid_flow [mL/min],gas_flow [mL/min],observed_regime,platform\n")
            for i in range(n):
                fh.write(f"A,x{i},-{i}\n")
        else:
            platforms = np.array(["parabolic flight", "short drop tower", "sounding rocket", "rig 7"])
            plat = platforms[rng.integers(0, 4, n)].tolist()
            fh.write("test_id,liquid_flow [mL/min],gas_flow [mL/min],observed_regime,platform,"
                     "residual_acceleration [g0],low_g_duration [s],notes\n")
            for i, (a, b, r, p) in enumerate(zip(ql.tolist(), qg.tolist(), regimes.tolist(), plat)):
                note = f'"run {i}, camera B"' if i % 3 == 0 else f"run {i}"
                fh.write(f"T{i},{a:.6g},{b:.6g},{r},{p},1e-3,2.2,{note}\n")
    return path.stat().st_size


def median_seconds(path: Path, runs: int, max_bytes: int) -> tuple[float, float, int]:
    """Median wall and processor seconds of ``runs`` reads, and the rows read."""
    from lowgmap.app.files.testpoints import read_test_points

    wall, cpu, rows = [], [], 0
    for _ in range(runs):
        t0, c0 = time.perf_counter(), time.process_time()
        rows = len(read_test_points(path, max_bytes=max_bytes).points)
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return statistics.median(wall), statistics.median(cpu), rows


def child_memory(path: Path, max_bytes: int) -> dict:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    out = subprocess.run([sys.executable, "-c", _CHILD, str(path), str(max_bytes)], capture_output=True, text=True,
                         check=True, env=env, timeout=600)
    return json.loads(out.stdout)


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--runs", type=int, default=3, help="reads per file (median), default 3")
    ap.add_argument("--sizes", default="10000,100000,1000000", help="numbers of rows, comma-separated")
    args = ap.parse_args(argv)
    sizes = [int(s) for s in args.sizes.split(",")]
    with tempfile.TemporaryDirectory(prefix="lowgmap-bench-") as tmp:
        print(f"{'shape':8s} {'rows':>9s} {'MB':>7s} {'wall s':>8s} {'rows/s':>10s} {'cpu s':>8s} "
              f"{'rows/cpu s':>11s}   (medians of {args.runs})")
        biggest = {}
        for shape in ("compact", "full", "bad"):
            for n in sizes:
                path = Path(tmp) / f"{shape}_{n}.csv"
                size = write_file(path, n, shape)
                max_bytes = max(20_000_000, size + 1)
                wall, cpu, rows = median_seconds(path, args.runs, max_bytes)
                assert rows == (0 if shape == "bad" else n), (rows, n)
                print(f"{shape:8s} {n:9,d} {size / 1e6:7.1f} {wall:8.3f} {n / wall:10,.0f} {cpu:8.3f} "
                      f"{n / max(cpu, 1e-9):11,.0f}")
                biggest[shape] = (path, max_bytes, n)
        print("\npeak memory of one read of the largest files, each in a fresh interpreter (VmHWM):")
        for shape, (path, max_bytes, n) in biggest.items():
            m = child_memory(path, max_bytes)
            print(f"{shape:8s} {n:9,d} rows: {m['seconds']:.2f} s, {m['problems']:,} problem(s); peak "
                  f"{m['peak_kb'] / 1024:.0f} MB (after imports {m['before_kb'] / 1024:.0f} MB, so the read "
                  f"{(m['peak_kb'] - m['before_kb']) / 1024:.0f} MB)")


if __name__ == "__main__":
    main()
