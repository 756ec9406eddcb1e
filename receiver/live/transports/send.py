"""Client-side senders: wire messages to a receiver over UDP, WebSocket or MQTT.

Owns the robot's end of each transport, for tests, the simulator and
``replay --to``. One interface for all three: ``async with open_sender(url)``
then ``await sender.send(payload, robot)``. A peer that cannot be reached at
the start, or refuses us (a wrong token), is a one-line LinkError; a
WebSocket or MQTT connection lost on the way is reconnected, with a pause
that doubles, for up to RECONNECT_FOR_S (logged when lost and when back),
then a LinkError. It never decodes or checks messages: it sends whatever
bytes it is given.
"""

from __future__ import annotations

import asyncio
import errno
import logging
import socket
import time
from contextlib import asynccontextmanager
from typing import AsyncIterator, Awaitable, Callable, Protocol
from urllib.parse import urlencode, urlsplit

import aiomqtt
from websockets.asyncio.client import ClientConnection, connect
from websockets.exceptions import ConnectionClosed, InvalidStatus, WebSocketException

from receiver.errors import LinkError, UsageError
from receiver.live.supervise import reason
from receiver.live.transports.mqtt import DEFAULT_PREFIX, parse_mqtt_url, samples_topic
from receiver.live.transports.udp import DEFAULT_UDP_PORT
from receiver.live.transports.websocket import DEFAULT_WS_PORT, TOKEN_QUERY

SCHEMES = ("udp", "ws", "mqtt")
RECONNECT_FOR_S = 10.0  # a lost connection is tried again this long before the sender gives up
RECONNECT_DELAY_S = 0.25  # the first pause; it doubles up to the next
MAX_RECONNECT_DELAY_S = 2.0
OPEN_TIMEOUT_S = 5.0
MAX_TRIES_PER_MESSAGE = 3
# What a lost or unreachable peer raises; anything else is a bug and goes up as it is.
_LOST = (OSError, asyncio.TimeoutError, aiomqtt.MqttError, WebSocketException)
# A datagram the kernel had no room for: dropped, as a robot's would be.
_NO_ROOM = {errno.EAGAIN, errno.ENOBUFS}
log = logging.getLogger("podwatch.send")


class Sender(Protocol):
    """What a sender of every transport offers: ``await send(payload, robot)``."""

    async def send(self, payload: bytes, robot: str) -> None:
        """Send ``payload`` (wire JSON) as one datagram, frame or publish; ``robot`` picks the MQTT topic."""


class UdpSender:
    """Datagrams to one address; ``broadcast=True`` allows a broadcast address."""

    def __init__(self, host: str, port: int = DEFAULT_UDP_PORT, broadcast: bool = False) -> None:
        self.address = (host, port)
        self.dropped = 0  # datagrams the kernel had no room for
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        if broadcast:
            self.sock.setsockopt(socket.SOL_SOCKET, socket.SO_BROADCAST, 1)

    def send_now(self, payload: bytes) -> None:
        """Blocking send, for loops that pace themselves without asyncio; a LinkError when
        the address cannot be reached at all."""
        try:
            self.sock.sendto(payload, self.address)
        except OSError as exc:
            if exc.errno in _NO_ROOM:
                self.dropped += 1
                return
            raise LinkError(f"cannot send to udp://{self.address[0]}:{self.address[1]}: {reason(exc)}") from None

    async def send(self, payload: bytes, robot: str) -> None:
        """One datagram to the address; ``robot`` is not used."""
        self.send_now(payload)

    def close(self) -> None:
        """Close the socket."""
        self.sock.close()


class WebSocketSender:
    """Text frames over one connection."""

    def __init__(self, connection: ClientConnection) -> None:
        self.connection = connection

    async def send(self, payload: bytes, robot: str) -> None:
        """One text frame; ``robot`` is not used."""
        await self.connection.send(payload, text=True)

    async def close(self) -> None:
        """Close the connection."""
        await self.connection.close()


class MqttSender:
    """Publishes each payload to <prefix>/<robot>/samples.

    QoS 1 by default: the publish returns once the broker has the message,
    so closing the sender right after the last one loses nothing.
    """

    def __init__(self, client: aiomqtt.Client, prefix: str, qos: int = 1) -> None:
        self.client = client
        self.prefix = prefix
        self.qos = qos

    async def send(self, payload: bytes, robot: str) -> None:
        """Publish to the robot's samples topic; at QoS 1 it returns once the broker has it."""
        await self.client.publish(samples_topic(self.prefix, robot), payload, qos=self.qos)

    async def close(self) -> None:
        """Disconnect from the broker (quietly, if it is gone already)."""
        try:
            await self.client.__aexit__(None, None, None)
        except aiomqtt.MqttError:
            pass


class Reconnecting:
    """A WebSocket or MQTT sender that reconnects when its connection is lost.

    ``open`` makes a connected sender; a LinkError from it (a refusal) ends
    the retries at once. ``reconnects`` counts the connections made again.
    """

    def __init__(self, where: str, open: Callable[[], Awaitable[WebSocketSender | MqttSender]]) -> None:
        self.where = where
        self._open = open
        self._link: WebSocketSender | MqttSender | None = None
        self.reconnects = 0

    async def connect(self) -> None:
        """The first connection: a LinkError that says why when there is none."""
        try:
            self._link = await self._open()
        except _LOST as exc:
            raise LinkError(unreachable(self.where, exc)) from None

    async def send(self, payload: bytes, robot: str) -> None:
        """Send, reconnecting (and sending again) while the connection is lost; a peer
        that drops the connection on this very message (too large, say) is a LinkError."""
        for _ in range(MAX_TRIES_PER_MESSAGE):
            try:
                await self._link.send(payload, robot)
                return
            except (ConnectionClosed, *_LOST) as exc:
                lost = exc
                await self._reconnect(exc)
        raise LinkError(f"{self.where} closes the connection on a message of {len(payload)} bytes: {reason(lost)}")

    async def _reconnect(self, lost: BaseException) -> None:
        log.warning("lost the connection to %s: %s; reconnecting", self.where, reason(lost))
        await self.close()
        started = time.monotonic()
        pause = RECONNECT_DELAY_S
        while True:
            await asyncio.sleep(pause)
            try:
                self._link = await self._open()
            except _LOST as exc:
                waited = time.monotonic() - started
                if waited >= RECONNECT_FOR_S:
                    raise LinkError(f"lost the connection to {self.where} and could not reconnect in "
                                    f"{waited:.0f} s: {reason(exc)}") from None
                pause = min(pause * 2, MAX_RECONNECT_DELAY_S)
                continue
            self.reconnects += 1
            log.warning("reconnected to %s after %.1f s", self.where, time.monotonic() - started)
            return

    async def close(self) -> None:
        """Close the connection, if there is one."""
        link, self._link = self._link, None
        if link is not None:
            try:
                await link.close()
            except _LOST:
                pass


def unreachable(where: str, exc: BaseException) -> str:
    """The line for a receiver or broker that did not answer at all."""
    if where.startswith("mqtt://"):
        return f"no MQTT broker answers at {where} ({reason(exc)}): start one there, or check the address"
    return f"nothing is listening at {where} ({reason(exc)}): is podwatch serve --ws running there?"


def parse_target(url: str) -> tuple[str, str, int]:
    """udp://HOST:PORT | ws://HOST:PORT | mqtt://HOST:PORT -> (scheme, host, port)."""
    parts = urlsplit(url)
    try:
        valid = parts.scheme in SCHEMES and bool(parts.hostname)
        parts.port  # noqa: B018 (a port that is not a number raises here)
    except ValueError:
        valid = False
    if not valid:
        raise UsageError(f"expected udp://HOST:PORT, ws://HOST:PORT or mqtt://HOST:PORT, got {url!r}")
    if parts.scheme == "mqtt":
        host, port = parse_mqtt_url(url)
        return "mqtt", host, port
    default = DEFAULT_UDP_PORT if parts.scheme == "udp" else DEFAULT_WS_PORT
    return parts.scheme, parts.hostname, parts.port or default


async def _open_websocket(address: str, where: str, token: str | None) -> WebSocketSender:
    try:
        # proxy=None: a robot talks to the laptop directly, never through a proxy from the environment
        connection = await connect(address, proxy=None, compression=None, open_timeout=OPEN_TIMEOUT_S)
    except InvalidStatus as exc:
        status = exc.response.status_code
        if status == 401:
            which = "pass --token" if token is None else "pass the receiver's own --token"
            raise LinkError(f"the receiver at {where} refused the token: {which}") from None
        if status == 403:
            raise LinkError(f"the receiver at {where} does not take traffic from this computer (its --allow)") from None
        raise LinkError(f"the receiver at {where} refused the connection: HTTP {status}") from None
    return WebSocketSender(connection)


async def _open_mqtt(host: str, port: int, prefix: str) -> MqttSender:
    client = aiomqtt.Client(host, port, protocol=aiomqtt.ProtocolVersion.V5, timeout=OPEN_TIMEOUT_S)
    await client.__aenter__()
    return MqttSender(client, prefix)


@asynccontextmanager
async def open_sender(
    url: str, token: str | None = None, prefix: str = DEFAULT_PREFIX, broadcast: bool = False
) -> AsyncIterator[Sender]:
    """A connected sender for a ``parse_target`` URL; closes it on exit. A LinkError when
    the peer cannot be reached or refuses us, or a lost connection does not come back."""
    scheme, host, port = parse_target(url)
    if scheme == "udp":
        sender = UdpSender(host, port, broadcast)
        try:
            yield sender
        finally:
            sender.close()
        return
    where = f"{scheme}://{host}:{port}"
    if scheme == "ws":
        query = f"?{urlencode({TOKEN_QUERY: token})}" if token is not None else ""
        link = Reconnecting(where, lambda: _open_websocket(f"ws://{host}:{port}/{query}", where, token))
    else:
        link = Reconnecting(where, lambda: _open_mqtt(host, port, prefix))
    await link.connect()
    try:
        yield link
    finally:
        await link.close()
