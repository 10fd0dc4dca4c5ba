"""A dashboard server for browser tests that must see inside the server (not a test module).

Run as ``python tests/browser/kitserver.py CASE --port N [--gate-port G] [--session-lifetime-ms T]``.
It serves the real dashboard (:func:`lowgmap.app.dashboard.serve`, host check and limits included)
and adds, for the tests only:

* ``GET /kit/status``: ``{"bokeh_sessions": n, "lowgmap_sessions": m, "documents": d,
  "blocks": b}``: the server's open sessions, the lowgmap session states and the bokeh documents
  still alive, and the Python heap blocks in use (``sys.getallocatedblocks``), after a garbage
  collection and ``malloc_trim`` (so freed memory is handed back to the system before the test
  reads VmRSS);
* with ``--gate-port``: a *gate* in front of the two jobs the tests need to catch in the middle,
  building a chart (``lowgmap.app.dashboard.state.build_chart``) and parsing an uploaded
  test-point file (``lowgmap.app.dashboard.uploads.parse_test_points``). When one of them runs on
  a worker thread, it connects to the test's socket on port G, sends its name and waits for one
  byte back before it goes on. The test thereby knows, without timing anything, that the job has
  started and is not finished, and decides when it may finish. Calls on the server's main thread
  (the first chart of a new session) pass straight through.
"""
from __future__ import annotations

import argparse
import ctypes
import gc
import socket
import sys
import threading
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _gated(fn, label: str, port: int):
    def wrapper(*args, **kwargs):
        if threading.current_thread() is not threading.main_thread():
            with socket.create_connection(("127.0.0.1", port), timeout=300) as s:
                s.sendall(label.encode("ascii") + b"\n")
                s.recv(1)  # the test releases the job
        return fn(*args, **kwargs)
    return wrapper


def main(argv=None) -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("case")
    ap.add_argument("--port", type=int, required=True)
    ap.add_argument("--gate-port", type=int)
    ap.add_argument("--session-lifetime-ms", type=int)
    args = ap.parse_args(argv)

    from tornado import web

    import lowgmap.app.dashboard as dashboard
    from lowgmap.app.dashboard import state, uploads

    if args.gate_port:
        state.build_chart = _gated(state.build_chart, "rebuild", args.gate_port)
        uploads.parse_test_points = _gated(uploads.parse_test_points, "points", args.gate_port)

    try:
        libc = ctypes.CDLL("libc.so.6")
    except OSError:
        libc = None

    from bokeh.document import Document

    class Status(web.RequestHandler):
        def get(self):
            gc.collect()
            if libc is not None:
                libc.malloc_trim(0)
            documents = sum(1 for o in gc.get_objects() if isinstance(o, Document))
            self.write({"bokeh_sessions": len(self.application.get_sessions("/")),
                        "lowgmap_sessions": state.live_sessions(), "documents": documents,
                        "blocks": sys.getallocatedblocks()})

    kwargs = {}
    if args.session_lifetime_ms:
        kwargs.update(unused_session_lifetime_milliseconds=args.session_lifetime_ms,
                      check_unused_sessions_milliseconds=max(100, args.session_lifetime_ms // 2))
    print(f"kit server on port {args.port}", flush=True)
    dashboard.serve(args.case, port=args.port, extra_patterns=[(r"/kit/status", Status)], **kwargs)
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT))
    sys.exit(main())
