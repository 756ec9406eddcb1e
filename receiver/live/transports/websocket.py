"""WebSocket ingest: each text (or binary) frame is one datagram's worth of JSON.

Owns the WebSocket server and its optional shared token, nothing more:
frame bytes go through ``protocol.decode_keeping_raw`` into ``Hub.ingest``.
It never parses JSON itself. A client without the token is refused at the
handshake with HTTP 401; a frame over 64 KiB closes that connection (close
code 1009, counted as too_large) and leaves every other connection running.
"""

from __future__ import annotations

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

DEFAULT_WS_PORT = 47475  # our own choice, next to the UDP default
TOKEN_HEADER = "X-Podwatch-Token"
TOKEN_QUERY = "token"
SOURCE = "websocket"


def request_token(request: Request) -> str | None:
    """The token a client offered: ?token=... or the X-Podwatch-Token header."""
    offered = parse_qs(urlsplit(request.path).query).get(TOKEN_QUERY)
    if offered:
        return offered[0]
    return request.headers.get(TOKEN_HEADER)


class WebSocketReceiver:
    """Serves on (host, port); ``start``/``stop`` run inside the caller's event loop."""

    def __init__(self, hub: Hub, host: str, port: int = DEFAULT_WS_PORT, token: str | None = None) -> None:
        self.hub = hub
        self.host = host
        self.port = port
        self.token = token
        self.refused = 0
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
            process_request=self._check_token if self.token is not None else None,
        )

    async def stop(self) -> None:
        """Close the server and its connections, and wait until they are closed."""
        if self._server is not None:
            self._server.close()
            await self._server.wait_closed()

    def _check_token(self, connection: ServerConnection, request: Request) -> Response | None:
        offered = request_token(request)
        # compare_digest: the time taken must not hint at how much of the token matched
        if offered is not None and hmac.compare_digest(offered.encode(), self.token.encode()):
            return None
        self.refused += 1
        why = "missing token" if offered is None else "wrong token"
        return connection.respond(HTTPStatus.UNAUTHORIZED, f"podwatch: {why}; send ?{TOKEN_QUERY}= or {TOKEN_HEADER}\n")

    async def _handle(self, connection: ServerConnection) -> None:
        ingest = self.hub.ingest
        try:
            while True:
                data = await connection.recv(decode=False)
                rx = time.time()
                samples, failures, raws = decode_keeping_raw(data)
                ingest(samples, failures, rx, SOURCE, raws=raws)
        except ConnectionClosed as closed:
            if closed.sent is not None and closed.sent.code == CloseCode.MESSAGE_TOO_BIG:
                failure = Failure(Reason.TOO_LARGE, f"frame over {MAX_MESSAGE_BYTES} bytes; connection closed")
                ingest([], [failure], time.time(), SOURCE)
