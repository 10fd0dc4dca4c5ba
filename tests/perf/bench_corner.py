"""Benchmark of the corner models (run on demand: ``python tests/perf/bench_corner.py``).

Prints median wall-clock times; asserts nothing. Not collected by pytest (tests/perf is excluded).
"""
import math
import os
import statistics
import sys
import time

import numpy as np

sys.path.insert(0, os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..")))

from lowgmap.physics.geometry.corner import flow_resistance, flow_resistance_direct, meniscus_area_factor  # noqa: E402
from lowgmap.physics.geometry.stokes import Domain, Line, solve_poisson  # noqa: E402
from lowgmap.physics.models.wicking import wicking_front  # noqa: E402


def median_time(fun, repeat, number=1):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(number):
            fun()
        times.append((time.perf_counter() - t0) / number)
    return statistics.median(times)


def main():
    a, t = math.radians(30.0), math.radians(10.0)
    flow_resistance(a, t)                      # load the table once
    solve_poisson(Domain([Line((0, 0), (1, 0)), Line((1, 0), (0, 1)), Line((0, 1), (0, 0))]))  # imports
    grid_a, grid_t = np.meshgrid(np.radians(np.linspace(5, 60, 100)), np.radians(np.linspace(0, 25, 100)))
    rows = [
        ("flow_resistance, scalar", median_time(lambda: flow_resistance(a, t), 7, 2000)),
        ("flow_resistance, 100x100 grid", median_time(lambda: flow_resistance(grid_a, grid_t), 7, 5)),
        ("meniscus_area_factor, scalar", median_time(lambda: meniscus_area_factor(a, t), 7, 2000)),
        ("wicking_front, scalar", median_time(lambda: wicking_front(1.0, a, t, 0.02, 1e-3, 1e-3), 7, 2000)),
        ("flow_resistance_direct, default mesh", median_time(lambda: flow_resistance_direct(a, t), 5)),
        ("flow_resistance_direct, mesh_size 0.03", median_time(
            lambda: flow_resistance_direct(a, t, mesh_size=0.03), 3)),
    ]
    for name, sec in rows:
        print(f"{name:42s} median {sec * 1e6:12.1f} us")


if __name__ == "__main__":
    main()
