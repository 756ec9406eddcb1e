"""WebSocket ingest: each text (or binary) frame is one datagram's worth of JSON.

Owns the WebSocket server, its optional shared token and its limits,
nothing more: frame bytes go through the hub's gate (the per-robot rate
cap) and ``protocol.decode_keeping_raw`` into ``Hub.ingest``. It never
parses JSON itself. At the handshake a client from outside the allowed
networks is refused with HTTP 403, one without the token with 401, one past
MAX_CONNECTIONS with 503; a frame over 64 KiB closes that connection (close
code 1009, counted as too_large) and leaves every other connection running.
While the hub's queue is full a connection is not read: the sender feels
the back-pressure through TCP, and the receiver's memory stays bounded. A
handler that fails closes its connection (1011) and is logged; the server
goes on.
"""

from __future__ import annotations

import asyncio
import hmac
import time
from http import HTTPStatus
from urllib.parse import parse_qs, urlsplit

from websockets.asyncio.server import Server, ServerConnection, serve
from websockets.exceptions import ConnectionClosed
from websockets.frames import CloseCode
from websockets.http11 import Request, Response

from receiver.formats.protocol import MAX_MESSAGE_BYTES, Failure, Reason, decode_keeping_raw
from receiver.live.hub import Hub
from receiver.live.supervise import Supervisor

DEFAULT_WS_PORT = 47475  # our own choice, next to the UDP default
TOKEN_HEADER = "X-Podwatch-Token"
TOKEN_QUERY = "token"
SOURCE = "websocket"
# Each connection holds at most websockets' queue of 16 frames of 64 KiB:
# this many connections bound that memory (and are more than 64 robots need).
MAX_CONNECTIONS = 128
BACKPRESSURE_POLL_S = 0.005  # how often a connection held back looks for room in the hub's queue


def request_token(request: Request) -> str | None:
    """The token a client offered: ?token=... or the X-Podwatch-Token header."""
    offered = parse_qs(urlsplit(request.path).query).get(TOKEN_QUERY)
    if offered:
        return offered[0]
    return request.headers.get(TOKEN_HEADER)


class WebSocketReceiver:
    """Serves on (host, port); ``start``/``stop`` run inside the caller's event loop."""

    def __init__(
        self,
        hub: Hub,
        host: str,
        port: int = DEFAULT_WS_PORT,
        token: str | None = None,
        supervisor: Supervisor | None = None,
    ) -> None:
        self.hub = hub
        self.host = host
        self.port = port
        self.token = token
        self.gate = hub.new_gate()
        self.supervisor = supervisor or Supervisor(hub.health)
        self.refused = 0
        self.held_back = 0  # times a connection waited for room in the hub's queue
        self.connections = 0
        self._server: Server | None = None

    @property
    def address(self) -> tuple[str, int]:
        """The (host, port) the server listens on; only after ``start``."""
        assert self._server is not None
        return next(iter(self._server.sockets)).getsockname()[:2]

    async def start(self) -> None:
        """Start serving in the running event loop; with a token set, clients without it are refused."""
        self._server = await serve(
            self._handle,
            self.host,
            self.port,
            max_size=MAX_MESSAGE_BYTES,
            process_request=self._check_request,
        )

    async def stop(self) -> None:
        """Close the server and its connections, and wait until they are closed."""
        if self._server is not None:
            self._server.close()
            await self._server.wait_closed()

    def _check_request(self, connection: ServerConnection, request: Request) -> Response | None:
        host = connection.remote_address[0] if connection.remote_address else ""
        if not self.gate.source_allowed(host):
            return connection.respond(HTTPStatus.FORBIDDEN, "podwatch: this address is not allowed (--allow)\n")
        if self.connections >= MAX_CONNECTIONS:
            self.refused += 1
            return connection.respond(HTTPStatus.SERVICE_UNAVAILABLE, "podwatch: too many connections\n")
        if self.token is None:
            return None
        offered = request_token(request)
        # compare_digest: the time taken must not hint at how much of the token matched
        if offered is not None and hmac.compare_digest(offered.encode(), self.token.encode()):
            return None
        self.refused += 1
        why = "missing token" if offered is None else "wrong token"
        return connection.respond(HTTPStatus.UNAUTHORIZED, f"podwatch: {why}; send ?{TOKEN_QUERY}= or {TOKEN_HEADER}\n")

    async def _handle(self, connection: ServerConnection) -> None:
        self.connections += 1
        try:
            await self._receive(connection)
        except ConnectionClosed as closed:
            if closed.sent is not None and closed.sent.code == CloseCode.MESSAGE_TOO_BIG:
                failure = Failure(Reason.TOO_LARGE, f"frame over {MAX_MESSAGE_BYTES} bytes; connection closed")
                self.hub.ingest([], [failure], time.time(), SOURCE)
        except Exception as exc:  # the handler's top: log, close this connection, keep serving the others
            peer = " from %s:%s" % connection.remote_address[:2] if connection.remote_address else ""
            self.supervisor.failed_once("websocket connection", exc, peer)
            await connection.close(CloseCode.INTERNAL_ERROR, "podwatch could not process a frame")
        finally:
            self.connections -= 1

    async def _receive(self, connection: ServerConnection) -> None:
        ingest, take, has_room = self.hub.ingest, self.gate.take, self.hub.has_room
        while True:
            if not has_room():
                self.held_back += 1
                while not has_room():  # not reading: TCP's window closes on the sender
                    await asyncio.sleep(BACKPRESSURE_POLL_S)
            data = await connection.recv(decode=False)
            rx = time.time()
            decoded = take(data, rx, decode_keeping_raw)
            if decoded is None:
                continue  # its robot is over the rate cap: counted by the gate
            samples, failures, raws = decoded
            ingest(samples, failures, rx, SOURCE, raws=raws)
