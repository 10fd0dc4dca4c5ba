"""`lowgmap serve`: start the browser dashboard."""
from __future__ import annotations

import socket

from lowgmap.app.cli.common import CliError

__all__ = ["add_arguments", "run"]


def add_arguments(parser) -> None:
    parser.add_argument("case", metavar="CASE", nargs="?", help="case file (.toml); default: bundled tube sample")
    parser.add_argument("--port", type=int, default=5006, help="port (0 = any free port; default 5006)")
    parser.add_argument("--address", default="127.0.0.1", help="address to listen on (default 127.0.0.1)")
    parser.add_argument("--show", action="store_true", help="open a browser window")


def run(args) -> int:
    from lowgmap.app.files.casefile import load_case, sample_case_path
    from lowgmap.app.dashboard import serve

    case = args.case or str(sample_case_path())
    load_case(case)  # every problem is printed (exit 2) before any server starts
    if args.port < 0 or args.port > 65535:
        raise CliError(f"--port must be within [0, 65535], got {args.port}")
    port = args.port or _free_port(args.address)
    host = "localhost" if args.address in ("127.0.0.1", "0.0.0.0", "::") else args.address
    print(f"lowgmap dashboard for {case}", flush=True)
    print(f"open http://{host}:{port}/ in a browser (Ctrl+C stops the server)", flush=True)
    serve(case, port=port, address=args.address, show=args.show)
    return 0


def _free_port(address: str) -> int:
    with socket.socket() as s:
        s.bind((address, 0))
        return s.getsockname()[1]
