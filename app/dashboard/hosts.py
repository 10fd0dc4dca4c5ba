"""Host check: the dashboard answers only to the host names and port it was started for.

A page of another web site can make a browser send requests to ``127.0.0.1:5006`` under its own
host name (DNS rebinding); the websocket of the app is already limited to known origins, and the
HTTP side is limited here: every request whose ``Host`` header is not one of
:func:`allowed_hosts` gets ``403`` and a one-line explanation instead of the app page.

Allowed: ``address:port`` as started; for a loopback address also ``localhost`` and ``127.0.0.1``
with that port; for an all-interfaces address (``0.0.0.0``, ``::``) the loopback
names, the machine's host name and its addresses; plus names given with ``--allow-host`` (e.g.
the name of a proxy in front of the dashboard). The same list is passed to the server as the
allowed websocket origins (:func:`websocket_origins`: without bracketed IPv6 entries, which the
server's origin list cannot hold).
"""
from __future__ import annotations

import ipaddress
import socket

from tornado import web
from tornado.routing import Matcher, Rule

__all__ = ["allowed_hosts", "websocket_origins", "install_host_check", "HostRefused"]

_LOOPBACK_NAMES = ("localhost", "127.0.0.1")


def _is_loopback(address: str) -> bool:
    if address == "localhost":
        return True
    try:
        return ipaddress.ip_address(address.strip("[]")).is_loopback
    except ValueError:
        return False


def _with_port(name: str, port: int) -> str:
    """``name`` as a Host header value with a port: 'lab-pc' -> 'lab-pc:5006', '::1' -> '[::1]:5006'."""
    name = name.strip().lower()
    if name.startswith("["):                 # [IPv6] or [IPv6]:port
        return name if "]:" in name else f"{name}:{port}"
    if name.count(":") == 1:                 # host:port given
        return name
    if ":" in name:                          # a bare IPv6 address
        return f"[{name}]:{port}"
    return f"{name}:{port}"


def allowed_hosts(address: str, port: int, extra=()) -> list[str]:
    """``host:port`` values the dashboard answers to when listening on ``address``:``port``.

    Examples
    --------
    >>> allowed_hosts("127.0.0.1", 5006)
    ['127.0.0.1:5006', 'localhost:5006']
    >>> allowed_hosts("192.168.1.20", 8000, extra=["lab-pc", "proxy.example:443"])
    ['192.168.1.20:8000', 'lab-pc:8000', 'proxy.example:443']
    """
    if address in ("0.0.0.0", "::", ""):
        names = list(_LOOPBACK_NAMES)
        try:
            hostname = socket.gethostname()
            names += [hostname, socket.getfqdn(), *socket.gethostbyname_ex(hostname)[2]]
        except OSError:  # no resolvable host name: loopback and the names given only
            pass
    else:
        names = [address] + (list(_LOOPBACK_NAMES) if _is_loopback(address) else [])
    out: list[str] = []
    for n in [*names, *extra]:
        hp = _with_port(str(n), port)
        if n and hp not in out:
            out.append(hp)
    return out


def websocket_origins(hosts: list[str]) -> list[str]:
    """The entries of ``hosts`` the server accepts as websocket origins (bracketed IPv6 left out)."""
    return [h for h in hosts if not h.startswith("[")]


class _ForeignHost(Matcher):
    """Matches a request whose Host header is not among the allowed ``host:port`` values."""

    def __init__(self, allowed: list[str], port: int):
        self.allowed = {a.lower() for a in allowed}
        # a browser leaves the port out of the Host header only for the scheme's default port
        if port == 80:
            self.allowed |= {a.rsplit(":", 1)[0] for a in allowed}

    def match(self, request):
        host = (request.headers.get("Host") or "").strip().lower()
        return None if host in self.allowed else {}


class HostRefused(web.RequestHandler):
    """403 for a request under a host name the dashboard was not started for."""

    def initialize(self, allowed):
        self.allowed = allowed

    def prepare(self):
        self.set_status(403)
        self.set_header("Content-Type", "text/plain; charset=utf-8")
        self.finish("This lowgmap dashboard answers only to " + ", ".join(f"http://{a}/" for a in self.allowed)
                    + ". Start it with --address or --allow-host for other names.\n")


def install_host_check(tornado_app, allowed: list[str], port: int) -> None:
    """Refuse (403) every request to ``tornado_app`` whose Host header is not in ``allowed``.

    The rule is put first in the application's router, before the app, static files and the
    websocket.
    """
    router = tornado_app.default_router
    router.add_rules([Rule(_ForeignHost(allowed, port), HostRefused, {"allowed": list(allowed)})])
    router.rules.insert(0, router.rules.pop())
