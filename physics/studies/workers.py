"""Worker processes shared by the studies: margin maps (:func:`lowgmap.physics.studies.sweep.sweep_map`) and Monte Carlo
draws (:func:`lowgmap.physics.studies.uncertainty.monte_carlo` with ``workers``).

Each worker is its own single-process executor, started on first use and kept for the life of this process, so a
study can send related work (the designs of one corner shape, a block of draws) to the process that already holds
the tables it needs. Workers are started with "spawn" (the dashboard's server runs threads: a forked child would
inherit their locks) and end as soon as the process that started them ends, even when it is killed.
"""
from __future__ import annotations

import threading

__all__ = ["pools", "warm"]

_POOLS: list = []
_POOLS_LOCK = threading.Lock()


def pools(workers: int) -> list:
    """``workers`` worker processes, each a single-process :class:`concurrent.futures.ProcessPoolExecutor`, started on
    first use and kept (shared by every study of this process).

    Parameters
    ----------
    workers : int   number of processes (>= 1)

    Returns
    -------
    list of ProcessPoolExecutor
    """
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    workers = int(workers)
    if workers < 1:
        raise ValueError(f"workers must be >= 1, got {workers}")
    with _POOLS_LOCK:
        while len(_POOLS) < workers:
            _POOLS.append(ProcessPoolExecutor(max_workers=1, mp_context=multiprocessing.get_context("spawn"),
                                              initializer=_exit_with_parent))
        return _POOLS[:workers]


def _exit_with_parent() -> None:
    """In a worker: end this process as soon as the process that started it has ended (a server stopped by a
    signal runs no exit handlers, and its idle workers would otherwise live on)."""
    import multiprocessing
    import multiprocessing.connection
    import os

    parent = multiprocessing.parent_process()
    if parent is None:
        return

    def watch():
        multiprocessing.connection.wait([parent.sentinel])
        os._exit(0)
    threading.Thread(target=watch, name="lowgmap-parent-watch", daemon=True).start()


def _ready(case=None) -> bool:
    """Run in a worker to start it (imports) before its first study; with a case, also build its chart and the
    operating point's margins once (the surrogate tables and the code a study runs are then loaded)."""
    if case is not None:
        from lowgmap.physics.chart.composition import Chart
        from lowgmap.physics.chart.margins import point_margins

        chart = Chart.build(case)
        op = getattr(case, "operating_point", None)
        if op is not None and chart.regime_names:
            point_margins(chart, op.ql, op.qg)
    return True


def warm(workers: int, case=None) -> None:
    """Start ``workers`` worker processes and load the engine in them (a first study then pays no start-up);
    with ``case`` (a :class:`~lowgmap.physics.case.Case`), each worker also builds its chart once: the first
    design map of that case then took 1.5-1.9 s instead of 2.3-2.7 s (400 wedge designs, 2 workers)."""
    for f in [pool.submit(_ready, case) for pool in pools(workers)]:
        f.result()
