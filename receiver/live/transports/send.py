"""Client-side senders: wire messages to a receiver over UDP, WebSocket or MQTT.

Owns the robot's end of each transport, for tests, the simulator and
``replay --to``. One interface for all three: ``async with open_sender(url)``
then ``await sender.send(payload, robot)``. It never decodes or checks
messages: it sends whatever bytes it is given.
"""

from __future__ import annotations

import socket
from contextlib import asynccontextmanager
from typing import AsyncIterator, Protocol
from urllib.parse import urlencode, urlsplit

import aiomqtt
from websockets.asyncio.client import ClientConnection, connect

from receiver.errors import UsageError
from receiver.live.transports.mqtt import DEFAULT_PREFIX, parse_mqtt_url, samples_topic
from receiver.live.transports.udp import DEFAULT_UDP_PORT
from receiver.live.transports.websocket import DEFAULT_WS_PORT, TOKEN_QUERY

SCHEMES = ("udp", "ws", "mqtt")


class Sender(Protocol):
    """What a sender of every transport offers: ``await send(payload, robot)``."""

    async def send(self, payload: bytes, robot: str) -> None:
        """Send ``payload`` (wire JSON) as one datagram, frame or publish; ``robot`` picks the MQTT topic."""


class UdpSender:
    """Datagrams to one address; ``broadcast=True`` allows a broadcast address."""

    def __init__(self, host: str, port: int = DEFAULT_UDP_PORT, broadcast: bool = False) -> None:
        self.address = (host, port)
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        if broadcast:
            self.sock.setsockopt(socket.SOL_SOCKET, socket.SO_BROADCAST, 1)

    def send_now(self, payload: bytes) -> None:
        """Blocking send, for loops that pace themselves without asyncio."""
        self.sock.sendto(payload, self.address)

    async def send(self, payload: bytes, robot: str) -> None:
        """One datagram to the address; ``robot`` is not used."""
        self.sock.sendto(payload, self.address)

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


def parse_target(url: str) -> tuple[str, str, int]:
    """udp://HOST:PORT | ws://HOST:PORT | mqtt://HOST:PORT -> (scheme, host, port)."""
    parts = urlsplit(url)
    if parts.scheme not in SCHEMES or not parts.hostname:
        raise UsageError(f"expected udp://HOST:PORT, ws://HOST:PORT or mqtt://HOST:PORT, got {url!r}")
    if parts.scheme == "mqtt":
        host, port = parse_mqtt_url(url)
        return "mqtt", host, port
    default = DEFAULT_UDP_PORT if parts.scheme == "udp" else DEFAULT_WS_PORT
    return parts.scheme, parts.hostname, parts.port or default


@asynccontextmanager
async def open_sender(
    url: str, token: str | None = None, prefix: str = DEFAULT_PREFIX, broadcast: bool = False
) -> AsyncIterator[Sender]:
    """A connected sender for a ``parse_target`` URL; closes it on exit."""
    scheme, host, port = parse_target(url)
    if scheme == "udp":
        sender = UdpSender(host, port, broadcast)
        try:
            yield sender
        finally:
            sender.close()
    elif scheme == "ws":
        query = f"?{urlencode({TOKEN_QUERY: token})}" if token is not None else ""
        # proxy=None: a robot talks to the laptop directly, never through a proxy from the environment
        async with connect(f"ws://{host}:{port}/{query}", proxy=None, compression=None) as connection:
            yield WebSocketSender(connection)
    else:
        async with aiomqtt.Client(host, port, protocol=aiomqtt.ProtocolVersion.V5) as client:
            yield MqttSender(client, prefix)
