"""Which Host headers the page answers to, and the laptop's own network addresses.

Owns the defence against DNS rebinding: a web page elsewhere can make a
browser send requests to 127.0.0.1 under the page's own domain name, but
not with a Host header naming an address the page is served on. So every
request must name one: the loopback names and addresses, the address the
page was told to listen on, and, when it listens on every interface, the
laptop's own addresses. Everything else gets 400 and never reaches Dash.
Never sends anything on the network: the addresses are read from the
laptop's interfaces.
"""

from __future__ import annotations

import ipaddress
import logging
import threading
import time
from typing import Callable, Iterable

import psutil

log = logging.getLogger("podwatch.dashboard")

Address = ipaddress.IPv4Address | ipaddress.IPv6Address
LOOPBACK_NAMES = ("localhost",)
LOOPBACK_ADDRESSES = (ipaddress.ip_address("127.0.0.1"), ipaddress.ip_address("::1"))
WILDCARD_HOSTS = ("0.0.0.0", "", "::")
REREAD_S = 2.0  # an unknown Host re-reads the laptop's addresses at most this often (a network joined later)
LOGGED_MOST = 20  # refused Host headers named in the log, each once


def laptop_addresses() -> list[Address]:
    """Every address of the laptop's network interfaces that are up, loopback included."""
    up = {name for name, stats in psutil.net_if_stats().items() if stats.isup}
    found = []
    for name, addresses in psutil.net_if_addrs().items():
        if name not in up:
            continue
        for a in addresses:
            try:
                found.append(ipaddress.ip_address(a.address.split("%")[0]))  # an IPv6 zone is not in a Host header
            except ValueError:
                continue  # a hardware address
    return found


def network_urls(host: str, port: int, addresses: Callable[[], Iterable[Address]] = laptop_addresses) -> list[str]:
    """Where a tablet on the laptop's network can open the page: the chosen address, or
    every IPv4 address of the laptop when the page listens on all interfaces."""
    if host not in WILDCARD_HOSTS:
        return [f"http://{_bracketed(host)}:{port}/"]
    shown = sorted({a for a in addresses() if a.version == 4 and not a.is_loopback})
    return [f"http://{a}:{port}/" for a in shown]


def _bracketed(host: str) -> str:
    return f"[{host}]" if ":" in host else host


def _split_host(header: str) -> tuple[str, int | None] | None:
    """"name:port", "[v6]:port" or a bare name -> (name in lower case, port or None); None when malformed."""
    header = header.strip().lower()
    if header.startswith("["):
        name, sep, rest = header[1:].partition("]")
        if not sep or (rest and not rest.startswith(":")):
            return None
        port = rest[1:] if rest else None
    else:
        name, sep, port = header.rpartition(":")
        if not sep:
            name, port = header, None
    if port is not None and not (port.isdigit() and len(port) <= 5):
        return None
    return name, (int(port) if port is not None else None)


def _as_address(name: str) -> Address | None:
    try:
        return ipaddress.ip_address(name)
    except ValueError:
        return None


class HostGuard:
    """WSGI middleware: passes a request to ``app`` only when its Host header names an
    address the page is served on (``host``, and ``port`` once it is known)."""

    def __init__(self, app, host: str, port: int | None = None,
                 addresses: Callable[[], Iterable[Address]] = laptop_addresses) -> None:
        self.app = app
        self.port = port
        self.wildcard = host in WILDCARD_HOSTS
        self._addresses = addresses
        chosen = _as_address(host.strip("[]"))
        self.names = set(LOOPBACK_NAMES) | ({host.lower()} if chosen is None and not self.wildcard else set())
        self.fixed = set(LOOPBACK_ADDRESSES) | ({chosen} if chosen is not None else set())
        self._laptop: set[Address] = set()
        self._read_at = -float("inf")
        self._lock = threading.Lock()
        self._logged: set[str] = set()

    def allows(self, header: str | None) -> bool:
        """True when ``header`` (a Host header, None when missing) names this page."""
        if not header:
            return False
        split = _split_host(header)
        if split is None:
            return False
        name, port = split
        if port != self.port and not (port is None and self.port == 80):
            return False
        address = _as_address(name)
        if address is None:
            return name in self.names
        if address in self.fixed:
            return True
        return self.wildcard and self._is_laptop(address)

    def _is_laptop(self, address: Address) -> bool:
        with self._lock:
            if address not in self._laptop and time.monotonic() - self._read_at > REREAD_S:
                self._laptop = set(self._addresses())
                self._read_at = time.monotonic()
            return address in self._laptop

    def __call__(self, environ, start_response):
        header = environ.get("HTTP_HOST")
        if self.allows(header):
            return self.app(environ, start_response)
        shown = repr(header)[:80]
        if len(self._logged) < LOGGED_MOST and shown not in self._logged:
            self._logged.add(shown)
            log.warning("refused a request for Host %s: not an address this page is served on", shown)
        body = (b"podwatch: this page answers only to the address it printed at start "
                b"(the Host header names another)\n")
        start_response("400 Bad Request", [("Content-Type", "text/plain; charset=utf-8"),
                                           ("Content-Length", str(len(body)))])
        return [body]
