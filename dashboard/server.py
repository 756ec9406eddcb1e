"""Serve a dashboard with waitress (a production WSGI server) in a background thread.

Owns the listening socket of the page: loopback by default; any other
address is the caller's explicit choice and is logged as a warning, since
the page has no login. Never opens a browser.
"""

from __future__ import annotations

import ipaddress
import logging
import threading

from typing import Callable

from waitress.server import create_server

from dashboard.app import create_app
from dashboard.settings import DEFAULT_HOST, DEFAULT_PORT, Settings
from dashboard.sources import Station
from receiver.errors import UsageError
from receiver.live import parse_host_port

log = logging.getLogger("podwatch.dashboard")
THREADS = 4  # a page polls with a few callbacks at once; more threads only add contention
# waitress warns "Task queue depth is N" whenever a request waits for a thread;
# a page's callbacks arriving together do that all the time, harmlessly.
logging.getLogger("waitress.queue").setLevel(logging.ERROR)


def is_loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


class DashboardServer:
    """``start`` binds and serves in a daemon thread; ``url`` says where."""

    def __init__(self, wsgi_app, host: str = DEFAULT_HOST, port: int = DEFAULT_PORT) -> None:
        self.host = host
        if not is_loopback(host):
            log.warning("dashboard listens on %s, not on loopback: anyone who can reach this address sees the page", host)
        self._server = create_server(wsgi_app, host=host, port=port, threads=THREADS, clear_untrusted_proxy_headers=True)
        self.port = self._server.effective_port
        self._thread = threading.Thread(target=self._server.run, name="podwatch-dashboard", daemon=True)

    @property
    def url(self) -> str:
        host = "127.0.0.1" if self.host in ("0.0.0.0", "") else self.host
        return f"http://{host}:{self.port}/"

    def start(self) -> None:
        self._thread.start()

    def stop(self) -> None:
        self._server.close()


def start_dashboard(station: Station, settings: Settings, where: str | None, say: Callable[[str], None]) -> DashboardServer:
    """Build the app for ``station``, serve it on ``where`` (HOST:PORT, default
    127.0.0.1:47480) and tell ``say`` the URL; a port that cannot be bound is a
    one-line UsageError."""
    host, port = parse_host_port(where, DEFAULT_HOST) if where else (DEFAULT_HOST, DEFAULT_PORT)
    try:
        server = DashboardServer(create_app(station, settings).server, host, port)
    except OSError as exc:
        raise UsageError(f"cannot serve the dashboard on {host}:{port}: {exc.strerror or exc}") from exc
    server.start()
    say(f"dashboard: {server.url}")
    return server
