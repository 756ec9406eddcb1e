"""The page answers only to its own addresses, and refuses large bodies with 413.

The rules are checked on the guard alone; then a real waitress server on a
free loopback port gets raw HTTP requests (http.client and plain sockets),
as a browser tricked by DNS rebinding or a misbehaving client would send them.
"""

from __future__ import annotations

import http.client
import ipaddress
import logging
import socket

import pytest

from dashboard import server as server_module
from dashboard.app import create_app
from dashboard.host_guard import HostGuard, laptop_addresses, network_urls
from dashboard.server import MAX_BODY_BYTES, DashboardServer
from dashboard.sources import LiveSource
from dashboard.tabs import Station
from receiver.live.hub import Hub

PORT = 47480
LAN = ipaddress.ip_address("192.168.7.20")  # an invented laptop address on a robot's network


def laptop() -> list:
    return [ipaddress.ip_address("127.0.0.1"), LAN, ipaddress.ip_address("fe80::1")]


@pytest.mark.parametrize("header, allowed", [
    ("127.0.0.1:47480", True), ("localhost:47480", True), ("LOCALHOST:47480", True), ("[::1]:47480", True),
    ("[0:0::1]:47480", True),
    ("127.0.0.1:47481", False), ("127.0.0.1", False), ("localhost", False),
    ("evil.example:47480", False), ("evil.example", False), ("localhost.:47480", False),
    ("127.0.0.2:47480", False), ("192.168.7.20:47480", False),  # not what it listens on
    ("127.0.0.1:47480:1", False), ("[::1:47480", False), ("127.0.0.1:port", False), ("", False), (None, False),
])
def test_on_loopback_only_the_loopback_names_with_the_port(header, allowed):
    assert HostGuard(None, "127.0.0.1", PORT, addresses=laptop).allows(header) is allowed


@pytest.mark.parametrize("host, header, allowed", [
    ("192.168.7.20", "192.168.7.20:47480", True),  # the chosen address
    ("192.168.7.20", "localhost:47480", True),
    ("192.168.7.20", "10.0.0.9:47480", False),
    ("tuning-laptop.local", "Tuning-Laptop.local:47480", True),  # a chosen name
    ("tuning-laptop.local", "evil.example:47480", False),
    ("0.0.0.0", "192.168.7.20:47480", True),  # every interface: the laptop's own addresses
    ("0.0.0.0", "[fe80::1]:47480", True),
    ("0.0.0.0", "127.0.0.1:47480", True),
    ("0.0.0.0", "192.168.7.21:47480", False),
    ("0.0.0.0", "rebind.evil.example:47480", False),
])
def test_elsewhere_the_chosen_address_and_on_every_interface_the_laptops_own(host, header, allowed):
    assert HostGuard(None, host, PORT, addresses=laptop).allows(header) is allowed


def test_an_address_the_laptop_gets_later_is_answered():
    found = [ipaddress.ip_address("127.0.0.1")]
    guard = HostGuard(None, "0.0.0.0", PORT, addresses=lambda: list(found))
    guard._read_at = -1e9
    assert not guard.allows("192.168.7.20:47480")
    found.append(LAN)  # the laptop joins the robot's network
    guard._read_at = -1e9  # as after REREAD_S
    assert guard.allows("192.168.7.20:47480")


def test_the_addresses_to_type_on_a_tablet():
    assert network_urls("0.0.0.0", PORT, laptop) == ["http://192.168.7.20:47480/"]
    assert network_urls("192.168.7.20", PORT, laptop) == ["http://192.168.7.20:47480/"]
    assert any(a.is_loopback for a in laptop_addresses())  # read from this machine's interfaces


def test_the_start_up_warning_names_the_addresses_to_type(monkeypatch, caplog):
    # Served elsewhere than loopback (here pretended: tests listen on 127.0.0.1 only).
    monkeypatch.setattr(server_module, "is_loopback", lambda host: False)
    monkeypatch.setattr(server_module, "network_urls", lambda host, port: [f"http://192.168.7.20:{port}/"])
    with caplog.at_level(logging.WARNING, logger="podwatch.dashboard"):
        server = DashboardServer(_hello, "127.0.0.1", 0)
    server.stop()
    (line,) = [r.getMessage() for r in caplog.records]
    assert line == (f"dashboard listens on 127.0.0.1, not on loopback: anyone who can reach it sees the page (it has "
                    f"no login); on a tablet on this network open http://192.168.7.20:{server.port}/")


def _hello(environ, start_response):
    body = environ["wsgi.input"].read()
    start_response("200 OK", [("Content-Type", "text/plain")])
    return [b"hello %d" % len(body)]


@pytest.fixture
def served():
    """A real waitress server on a free loopback port, serving ``_hello`` behind the guard."""
    server = DashboardServer(_hello, "127.0.0.1", 0)
    server.start()
    yield server
    server.stop()


def request(server, host: str | None, body: bytes = b"", method: str = "POST") -> tuple[int, bytes]:
    """One raw request with the given Host header (None: no Host header at all)."""
    conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=30)
    try:
        conn.putrequest(method, "/_dash-update-component", skip_host=True, skip_accept_encoding=True)
        if host is not None:
            conn.putheader("Host", host)
        conn.putheader("Content-Length", str(len(body)))
        conn.endheaders(body)
        answer = conn.getresponse()
        return answer.status, answer.read()
    finally:
        conn.close()


def test_a_real_server_answers_its_own_address_and_refuses_any_other_host(served):
    assert request(served, f"127.0.0.1:{served.port}") == (200, b"hello 0")
    assert request(served, f"localhost:{served.port}")[0] == 200
    for host in (f"rebind.evil.example:{served.port}", "127.0.0.1", f"127.0.0.1:{served.port + 1}", None):
        status, body = request(served, host)
        assert status == 400, host
        assert body.startswith(b"podwatch: this page answers only to the address it printed")


def test_the_real_page_behind_the_guard_gives_nothing_to_another_host():
    station = Station(live=LiveSource(Hub({})))
    server = DashboardServer(create_app(station).server, "127.0.0.1", 0)
    server.start()
    try:
        for path in ("/", "/_dash-layout", "/_dash-dependencies"):
            conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=30)
            conn.request("GET", path, headers={"Host": f"rebind.evil.example:{server.port}"})
            answer = conn.getresponse()
            body = answer.read()
            assert answer.status == 400 and body.startswith(b"podwatch: ") and b"_dash" not in body
            conn.close()
            conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=30)
            conn.request("GET", path)
            assert conn.getresponse().status == 200
            conn.close()
    finally:
        server.stop()


def announce(server, length: int) -> bytes:
    """The answer to a request that announces a body of ``length`` bytes and sends none of it yet.

    waitress answers a body too large from the headers alone; a client that
    sent the body anyway could find the connection reset under it.
    """
    with socket.create_connection(("127.0.0.1", server.port), timeout=30) as s:
        s.sendall(f"POST /_dash-update-component HTTP/1.1\r\nHost: 127.0.0.1:{server.port}\r\n"
                  f"Content-Type: application/json\r\nContent-Length: {length}\r\n\r\n".encode())
        return _read_all(s)


def test_a_body_over_one_mebibyte_gets_413_and_one_of_a_mebibyte_gets_through(served):
    assert MAX_BODY_BYTES == 1024 * 1024 + 1  # waitress refuses a body of this size or more
    assert request(served, f"127.0.0.1:{served.port}", b"x" * (1024 * 1024)) == (200, b"hello 1048576")
    assert announce(served, 1024 * 1024 + 1).startswith(b"HTTP/1.1 413 Request Entity Too Large\r\n")
    # 50 MB, the size that used to get a 500 once it had all been read.
    assert announce(served, 50 * 1024 * 1024).startswith(b"HTTP/1.1 413 Request Entity Too Large\r\n")


def test_a_chunked_body_is_refused_once_it_passes_one_mebibyte(served):
    # waitress counts a chunked body's bytes with their framing. These chunks
    # come to the limit exactly, so the limit is passed at the last byte sent:
    # nothing is left unread for the server's close to reset the connection with.
    chunks = [b"y" * 65536] * 15 + [b"z" * 65394]
    framed = b"".join(b"%x\r\n%s\r\n" % (len(c), c) for c in chunks)
    assert len(framed) == MAX_BODY_BYTES
    with socket.create_connection(("127.0.0.1", served.port), timeout=30) as s:
        s.sendall(f"POST / HTTP/1.1\r\nHost: 127.0.0.1:{served.port}\r\nTransfer-Encoding: chunked\r\n\r\n".encode()
                  + framed)
        answer = _read_all(s)
    assert answer.startswith(b"HTTP/1.1 413 Request Entity Too Large\r\n")


def _read_all(s: socket.socket) -> bytes:
    data = b""
    while piece := s.recv(65536):
        data += piece
    return data


def test_a_request_the_page_never_sends_is_one_line_to_the_client_and_to_the_log(caplog):
    station = Station(live=LiveSource(Hub({})))
    server = DashboardServer(create_app(station).server, "127.0.0.1", 0)
    server.start()
    answers = []
    try:
        with caplog.at_level(logging.WARNING):
            for method, path, body in (("POST", "/_dash-update-component", b"{}"),
                                       ("POST", "/_dash-update-component", b"[1, 2]"),
                                       ("POST", "/_dash-update-component", b"{}"),  # the same again: logged once
                                       ("GET", "/_dash-component-suites/../../etc/passwd", b"")):
                conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=30)
                conn.request(method, path, body or None, {"Content-Type": "application/json"})
                answer = conn.getresponse()
                answers.append((answer.status, answer.read()))
                conn.close()
    finally:
        server.stop()
    assert answers == [(500, b"podwatch: could not answer this request (KeyError)\n"),
                       (500, b"podwatch: could not answer this request (AttributeError)\n"),
                       (500, b"podwatch: could not answer this request (KeyError)\n"),
                       (404, b"podwatch: could not answer this request (DependencyException)\n")]
    logged = [r.getMessage() for r in caplog.records if r.name == "podwatch.dashboard"]
    assert [line.split(" (")[0] for line in logged] == [
        "could not answer POST /_dash-update-component", "could not answer POST /_dash-update-component",
        "could not answer GET /_dash-component-suites/../../etc/passwd"]
    assert all("\n" not in line and "Traceback" not in line for line in logged)
    assert not any(r.exc_info for r in caplog.records if r.levelno >= logging.WARNING)
