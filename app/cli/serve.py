"""`lowgmap serve`: start the browser dashboard.

Before the server starts, the case is loaded (every problem printed, exit 2), the port is checked
(0 to 65535) and the address is tried: an address that is not one of this machine's (or a host name
that does not resolve, or a port already in use) ends the command with a message instead of a
traceback from the server.
"""
from __future__ import annotations

import errno
import socket

from lowgmap.app.cli import common

__all__ = ["add_arguments", "run", "check_address"]


def add_arguments(parser) -> None:
    parser.add_argument("case", metavar="CASE", nargs="?", help="case file (.toml); default: bundled tube sample")
    parser.add_argument("--port", type=int, default=5006, help="port (0 = any free port; default 5006)")
    parser.add_argument("--address", default="127.0.0.1",
                        help="address of this machine to listen on (default 127.0.0.1: this machine only)")
    parser.add_argument("--allow-host", action="append", metavar="NAME[:PORT]", default=[],
                        help="a further host name the dashboard answers to, e.g. behind a proxy (repeatable)")
    parser.add_argument("--show", action="store_true", help="open a browser window")


def run(args) -> int:
    from lowgmap.app.files.casefile import load_case, sample_case_path

    case = args.case or str(sample_case_path())
    load_case(case)  # every problem is printed (exit 2) before any server starts
    if args.port < 0 or args.port > 65535:
        raise common.CliError(f"--port must be within [0, 65535], got {args.port}")
    port = check_address(args.address, args.port)
    from lowgmap.app.dashboard import serve

    host = "localhost" if args.address in ("127.0.0.1", "0.0.0.0", "::") else args.address
    print(f"lowgmap dashboard for {case}", flush=True)
    print(f"open http://{host}:{port}/ in a browser (Ctrl+C stops the server)", flush=True)
    kwargs = {"allow_hosts": tuple(args.allow_host)} if args.allow_host else {}
    serve(case, port=port, address=args.address, show=args.show, **kwargs)
    return 0


def check_address(address: str, port: int) -> int:
    """The port to serve on (a free one for port 0), after a trial bind of ``address``:``port``.

    Raises :class:`lowgmap.app.cli.common.CliError` for an address that is not this machine's, a
    host name that does not resolve, a port in use or one that needs other rights.
    """
    try:
        infos = socket.getaddrinfo(address, port, type=socket.SOCK_STREAM, flags=socket.AI_PASSIVE)
    except (OSError, UnicodeError) as exc:
        raise common.CliError(f"--address {address!r} is not an address or host name that resolves "
                              f"({getattr(exc, 'strerror', None) or exc})") from None
    family, _, _, _, sockaddr = infos[0]
    try:
        with socket.socket(family, socket.SOCK_STREAM) as s:
            s.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
            s.bind(sockaddr)
            return s.getsockname()[1]
    except OSError as exc:
        if exc.errno == errno.EADDRNOTAVAIL:
            raise common.CliError(f"--address {address} is not an address of this machine; give one of its own "
                                  f"(127.0.0.1 for this machine only, 0.0.0.0 for every network)") from None
        if exc.errno == errno.EADDRINUSE:
            raise common.CliError(f"--port {port} is already in use on {address}; give another --port "
                                  f"(0 = any free port)") from None
        if exc.errno in (errno.EACCES, errno.EPERM):
            raise common.CliError(f"--port {port} on {address} needs other rights (ports below 1024 usually "
                                  f"do); give a port from 1024 up") from None
        raise common.CliError(f"cannot listen on {address}:{port}: {exc.strerror or exc}") from None
