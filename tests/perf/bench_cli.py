"""Start-up time of the command line (run on demand; prints medians).

    python tests/perf/bench_cli.py [--runs N] [--imports]

Each command runs N times (default 5) in a fresh interpreter, as a person typing it would start it,
on the bundled sample case ``condensate_line.toml``:

- ``lowgmap --version``                  (loads no numerical library)
- ``lowgmap check CASE``                 (units, fluid properties)
- ``lowgmap margin CASE``                (plus the chart and its margins)
- ``lowgmap chart CASE -o TEMP.png``     (plus matplotlib)
- ``lowgmap chart CORNER -o TEMP.png``   the wedge-separator corner sample: with the cache on, its Stokes and
                                         critical-flow tables come from the cache after the first run

The median, fastest and slowest wall time of the N runs are printed, twice: with lowgmap's table
cache as it is (after the first run it holds the fluid properties, so CoolProp is not imported) and
with the cache switched off (``LOWGMAP_CACHE=off``: every run resolves the properties with CoolProp).
The first run may include reading the libraries from disk; the median is the number to compare.
``--imports`` also runs each command once under ``python -X importtime`` and prints the slowest
library imports made by lowgmap's modules.
"""
from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
CASE = ROOT / "sample_cases" / "condensate_line.toml"
CORNER = ROOT / "sample_cases" / "wedge_separator.toml"


def command_line() -> list[str]:
    """The installed console script next to this interpreter, else ``python -m lowgmap``."""
    script = Path(sys.executable).with_name("lowgmap")
    return [str(script)] if script.exists() else [sys.executable, "-m", "lowgmap"]


def wall_times(argv: list[str], runs: int, env=None) -> list[float]:
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        proc = subprocess.run(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, env=env)
        times.append(time.perf_counter() - t0)
        if proc.returncode != 0:
            raise SystemExit(f"{' '.join(argv)} failed ({proc.returncode}):\n{proc.stderr}")
    return times


def slowest_imports(args: list[str], n: int = 8) -> list[tuple[float, str]]:
    """(cumulative seconds, module) of the ``n`` slowest libraries imported by the top or by a lowgmap module."""
    proc = subprocess.run([sys.executable, "-X", "importtime", "-m", "lowgmap", *args], stdout=subprocess.DEVNULL,
                          stderr=subprocess.PIPE, text=True)
    entries = []                                    # (depth, seconds, module), children before parents
    for line in proc.stderr.splitlines():
        if not line.startswith("import time:") or "cumulative" in line:
            continue
        _, cum, raw = line[len("import time:"):].split("|")
        depth = (len(raw) - len(raw.lstrip(" ")) - 1) // 2
        entries.append((depth, int(cum) / 1e6, raw.strip()))
    rows = []
    for i, (depth, sec, name) in enumerate(entries):
        if name.startswith("lowgmap"):
            continue
        parent = next((e[2] for e in entries[i + 1:] if e[0] == depth - 1), None) if depth else None
        if parent is None or parent.startswith("lowgmap"):
            rows.append((sec, name))
    return sorted(rows, reverse=True)[:n]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5, help="runs per command (default 5)")
    ap.add_argument("--imports", action="store_true", help="also list the slowest library imports per command")
    opts = ap.parse_args()
    base = command_line()
    tmp = Path(tempfile.mkdtemp(prefix="lowgmap-bench-"))
    try:
        commands = {
            "--version": ["--version"],
            "check": ["check", str(CASE)],
            "margin": ["margin", str(CASE)],
            "chart": ["chart", str(CASE), "-o", str(tmp / "chart.png"), "--force"],
            "chart corner": ["chart", str(CORNER), "-o", str(tmp / "corner.png"), "--force"],
        }
        print(f"lowgmap cold start, {opts.runs} runs each ({' '.join(Path(b).name for b in base)}; "
              f"case {CASE.name}; {os.cpu_count()} cores)")
        for title, env in (("table cache on", None), ("table cache off", {**os.environ, "LOWGMAP_CACHE": "off"})):
            print(f"\n{title}\n{'command':<12} {'median [s]':>11} {'fastest [s]':>12} {'slowest [s]':>12}")
            for name, args in commands.items():
                t = wall_times(base + args, opts.runs, env)
                print(f"{name:<12} {statistics.median(t):11.3f} {min(t):12.3f} {max(t):12.3f}", flush=True)
        if opts.imports:
            for name, args in commands.items():
                rows = slowest_imports(args)
                print(f"\nslowest imports of `lowgmap {name}` (cumulative, once, -X importtime):")
                for sec, mod in rows:
                    print(f"  {mod:<40} {sec:7.3f} s")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
