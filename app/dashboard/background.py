"""Work off the server's event loop: a shared pool of worker threads and per-session runners.

The dashboard server answers every browser session on one event loop. Anything that can take
longer than a blink (building a chart, the margins of a new point, reading an uploaded test-point
file, the robust point, a calibration) runs on a worker thread, and its result is handed back to
the session's document thread, where the widgets and bokeh models are changed.

A *runner* has one method, ``submit(work, done)``: it runs ``work()`` somewhere and later calls
``done(result, error)`` (``error`` is the exception ``work`` raised, or None) where the session's
state may be changed. Two runners:

* :class:`InlineRunner` runs the work at once in the calling thread (scripts, tests, a session
  built outside a server);
* :class:`DocumentRunner` runs it on the shared pool (:func:`worker_pool`) and calls ``done`` in
  a next-tick callback of the session's bokeh document (``Document.add_next_tick_callback``, the
  one document method bokeh allows from other threads; the callback runs with the document
  locked). After :meth:`DocumentRunner.close` (the session was destroyed) results are dropped and
  jobs still waiting for a thread are not run.

Two pools: the *worker* pool for what a person waits for (edits, previews, uploads) and a smaller
*background* pool for results shown when they are ready (the bands and the worst case, seconds each;
:meth:`DocumentRunner.submit_background`). A background job pauses while its session's slider is dragged
(:mod:`lowgmap.physics.pacing`): on its own pool a paused job never holds a thread that a preview needs,
however many sessions drag at once. The pools are the only module-level objects and hold no session
data: threads shared by all sessions, so a session that closes leaves nothing behind but idle threads.
"""
from __future__ import annotations

import logging
import threading
from concurrent.futures import ThreadPoolExecutor
from functools import partial

__all__ = ["WORKER_THREADS", "BACKGROUND_THREADS", "worker_pool", "background_pool", "InlineRunner",
           "DocumentRunner"]

#: Worker threads shared by all sessions (long jobs of one session never hold up the event loop;
#: with more sessions than threads, jobs wait their turn).
WORKER_THREADS = 4

#: Threads for background results (bands, worst case) shared by all sessions.
BACKGROUND_THREADS = 2

_POOLS: dict[str, ThreadPoolExecutor] = {}
_POOL_LOCK = threading.Lock()
_LOG = logging.getLogger("lowgmap.dashboard")


def _shared_pool(prefix: str, threads: int) -> ThreadPoolExecutor:
    with _POOL_LOCK:
        pool = _POOLS.get(prefix)
        if pool is None:
            pool = _POOLS[prefix] = ThreadPoolExecutor(max_workers=threads, thread_name_prefix=prefix)
        return pool


def worker_pool() -> ThreadPoolExecutor:
    """The shared pool of :data:`WORKER_THREADS` worker threads (created on first use)."""
    return _shared_pool("lowgmap-work", WORKER_THREADS)


def background_pool() -> ThreadPoolExecutor:
    """The shared pool of :data:`BACKGROUND_THREADS` threads for background results (created on first use)."""
    return _shared_pool("lowgmap-background", BACKGROUND_THREADS)


class InlineRunner:
    """Run each job at once in the calling thread, then call ``done`` (no server needed)."""

    closed = False
    concurrent = False      # jobs run in the caller's thread: they must never wait for it

    def submit(self, work, done) -> None:
        try:
            result, error = work(), None
        except Exception as exc:  # handed to ``done``, which reports it next to the field
            result, error = None, exc
        done(result, error)

    def close(self) -> None:
        self.closed = True


class DocumentRunner:
    """Run jobs on the worker pool and hand results back on the session document's thread.

    Parameters
    ----------
    doc : bokeh.document.Document   the session's document (``pn.state.curdoc`` in the app factory)
    """

    concurrent = True       # jobs run on other threads: a background job may wait for the session's thread

    def __init__(self, doc):
        self.doc = doc
        self.closed = False

    def submit(self, work, done) -> None:
        self._submit(worker_pool(), work, done)

    def submit_background(self, work, done) -> None:
        """As :meth:`submit`, on the background pool (a result shown when ready; it may pause, see module)."""
        self._submit(background_pool(), work, done)

    def _submit(self, pool, work, done) -> None:
        if self.closed:
            return
        future = pool.submit(self._run, work)
        future.add_done_callback(partial(self._hand_back, done))

    def _run(self, work):
        if self.closed:   # the session ended while the job waited for a thread: nothing to compute for it
            return None
        return work()

    def _hand_back(self, done, future) -> None:
        doc = self.doc
        if self.closed or doc is None:
            return
        error = future.exception()
        result = None if error is not None else future.result()
        try:
            doc.add_next_tick_callback(partial(self._call, done, result, error))
        except Exception:  # the session's document is gone: nobody to tell
            _LOG.debug("result dropped: the session closed", exc_info=True)

    def _call(self, done, result, error) -> None:
        if self.closed:
            return
        from panel.io.state import set_curdoc

        with set_curdoc(self.doc):
            done(result, error)

    def close(self) -> None:
        """Drop results still to come and the reference to the document (the session ended)."""
        self.closed = True
        self.doc = None
