"""Serve a dashboard with waitress (a production WSGI server) in a background thread.

Owns the listening socket of the page: loopback by default; any other
address is the caller's explicit choice and is logged as a warning, with
the laptop's addresses to open on a tablet, since the page has no login.
Only requests whose Host header names the page get through (host_guard.py),
and request bodies over 1 MiB are refused with 413 before they are read.
Never opens a browser.
"""

from __future__ import annotations

import ipaddress
import logging
import threading
from typing import Callable

from waitress import wasyncore
from waitress.server import create_server

from dashboard.app import create_app
from dashboard.host_guard import HostGuard, network_urls
from dashboard.settings import DEFAULT_HOST, DEFAULT_PORT, Settings
from dashboard.tabs import Station
from dashboard.window_rows import Warmer
from receiver.errors import UsageError
from receiver.live.serve import parse_host_port

log = logging.getLogger("podwatch.dashboard")
THREADS = 4  # a page polls with a few callbacks at once; more threads only add contention
STOP_S = 5.0  # at shutdown, at most this long for the requests being served (a diagnosis), then for the loop
# The page's own requests are a few kB (a callback's inputs); anything much
# larger is not from the page. waitress answers 413 to a body of this size or more.
MAX_BODY_BYTES = 1024 * 1024 + 1
# waitress warns "Task queue depth is N" whenever a request waits for a thread;
# a page's callbacks arriving together do that all the time, harmlessly.
logging.getLogger("waitress.queue").setLevel(logging.ERROR)


def is_loopback(host: str) -> bool:
    """True for "localhost" and for a loopback IP address; any other name counts as not loopback."""
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


class DashboardServer:
    """``start`` binds and serves in a daemon thread; ``url`` says where; ``stop`` ends it cleanly."""

    def __init__(self, wsgi_app, host: str = DEFAULT_HOST, port: int = DEFAULT_PORT, warmer: Warmer | None = None,
                 ) -> None:
        self.host = host
        self.warmer = warmer  # started and stopped with the server
        self.guard = HostGuard(wsgi_app, host)
        self._sockets: dict = {}  # waitress' socket map: the listening socket, the connections, its trigger
        self._server = create_server(self.guard, map=self._sockets, host=host, port=port, threads=THREADS,
                                     clear_untrusted_proxy_headers=True, max_request_body_size=MAX_BODY_BYTES)
        self.port = self.guard.port = int(self._server.effective_port)
        if not is_loopback(host):
            urls = " ".join(network_urls(host, self.port)) or "(no network address yet)"
            log.warning("dashboard listens on %s, not on loopback: anyone who can reach it sees the page (it has no "
                        "login); on a tablet on this network open %s", host, urls)
        self._closing = False
        self._closing_lock = threading.Lock()
        self._thread = threading.Thread(target=self._serve, name="podwatch-dashboard", daemon=True)

    @property
    def url(self) -> str:
        """The page's address; a wildcard host shows as 127.0.0.1."""
        host = "127.0.0.1" if self.host in ("0.0.0.0", "") else self.host
        return f"http://{host}:{self.port}/"

    def start(self) -> None:
        """Serve from the daemon thread; ``stop`` ends it."""
        self._thread.start()
        if self.warmer is not None:
            self.warmer.start()

    def _serve(self) -> None:
        # waitress' own run() loops until its socket map is empty; closing the
        # sockets from another thread, under its select(), killed it with
        # "Bad file descriptor". Here the serving thread closes them itself.
        adj = self._server.adj
        while True:
            wasyncore.loop(timeout=adj.asyncore_loop_timeout, use_poll=adj.asyncore_use_poll, map=self._sockets, count=1)
            with self._closing_lock:
                if self._closing:
                    wasyncore.close_all(self._sockets)
                    return

    def stop(self) -> None:
        """No new connections, the requests being served answered, then every socket closed."""
        if self.warmer is not None:
            self.warmer.stop()
        self._server.accepting = False
        self._server.task_dispatcher.shutdown(timeout=STOP_S)
        if not self._thread.is_alive():  # never started, or already stopped
            wasyncore.close_all(self._sockets)
            return
        # Under the lock, so that the trigger is pulled before the serving thread closes it.
        with self._closing_lock:
            self._closing = True
            self._server.pull_trigger()
        self._thread.join(timeout=STOP_S)


def start_dashboard(station: Station, settings: Settings, where: str | None, say: Callable[[str], None]) -> DashboardServer:
    """Build the app for ``station``, serve it on ``where`` (HOST:PORT, default
    127.0.0.1:47480) and tell ``say`` the URL; a port that cannot be bound is a
    one-line UsageError."""
    host, port = parse_host_port(where, DEFAULT_HOST) if where else (DEFAULT_HOST, DEFAULT_PORT)
    # A page opened late on a long session, or a robot picked later, draws from block summaries
    # kept since the receiver started.
    warmer = Warmer(station.live, settings.loop_threshold_s) if station.live is not None else None
    try:
        server = DashboardServer(create_app(station, settings).server, host, port, warmer)
    except OSError as exc:
        raise UsageError(f"cannot serve the dashboard on {host}:{port}: {exc.strerror or exc}") from exc
    server.start()
    say(f"dashboard: {server.url}")
    return server
