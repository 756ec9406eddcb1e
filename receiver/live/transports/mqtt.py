"""MQTT link: ingest from <prefix>/+/samples and, optionally, forward to the broker.

Owns one broker connection (aiomqtt). Incoming payloads go through
``protocol.decode_keeping_raw`` into ``Hub.ingest``. With forwarding on,
every valid sample that reached the hub over UDP or WebSocket is republished
as received (a team's own fields included) in batches (JSON arrays of at
most 256 messages and 64 KiB, one per robot per interval) together with
each robot's latest recomputed pose on <prefix>/<robot>/pose. It never
re-forwards what came from MQTT, and subscribes with MQTT 5 "no local" so
its own publications never come back to it.
"""

from __future__ import annotations

import asyncio
import logging
import time
from collections import defaultdict
from urllib.parse import urlsplit

import aiomqtt
import msgspec
from paho.mqtt.subscribeoptions import SubscribeOptions

from receiver.formats.protocol import MAX_BATCH, MAX_MESSAGE_BYTES, MQTT_PREFIX, PoseMessage, Sample, decode_keeping_raw
from receiver.live.hub import Hub

DEFAULT_PREFIX = MQTT_PREFIX
DEFAULT_MQTT_PORT = 1883  # IANA port for MQTT
FORWARD_INTERVAL_S = 0.05
RECONNECT_DELAY_S = 1.0
SOURCE = "mqtt"
log = logging.getLogger("podwatch.mqtt")


def parse_mqtt_url(url: str) -> tuple[str, int]:
    """mqtt://HOST[:PORT] -> (host, port)."""
    parts = urlsplit(url if "://" in url else f"mqtt://{url}")
    if parts.scheme != "mqtt" or not parts.hostname:
        raise ValueError(f"expected mqtt://HOST[:PORT], got {url!r}")
    return parts.hostname, parts.port or DEFAULT_MQTT_PORT


def samples_topic(prefix: str, robot: str) -> str:
    """The topic a robot's samples arrive on: <prefix>/<robot>/samples (robot "+" for all)."""
    return f"{prefix}/{robot}/samples"


def pose_topic(prefix: str, robot: str) -> str:
    """The topic a robot's recomputed pose is forwarded on: <prefix>/<robot>/pose."""
    return f"{prefix}/{robot}/pose"


def batch_payloads(encoded: list[bytes]) -> list[bytes]:
    """Encoded messages -> JSON arrays within the wire limits (256 messages, 64 KiB)."""
    payloads, part, size = [], [], 2
    for item in encoded:
        if part and (len(part) == MAX_BATCH or size + len(item) + 1 > MAX_MESSAGE_BYTES):
            payloads.append(b"[" + b",".join(part) + b"]")
            part, size = [], 2
        part.append(item)
        size += len(item) + 1
    if part:
        payloads.append(b"[" + b",".join(part) + b"]")
    return payloads


class MqttLink:
    """Run with ``await link.run()``; cancel the task to stop."""

    def __init__(
        self,
        hub: Hub,
        url: str,
        prefix: str = DEFAULT_PREFIX,
        forward: bool = False,
        interval_s: float = FORWARD_INTERVAL_S,
    ) -> None:
        self.hub = hub
        self.host, self.port = parse_mqtt_url(url)
        self.prefix = prefix
        self.forward = forward
        self.interval_s = interval_s
        self.connected = asyncio.Event()
        self.forwarded = 0
        self._loop: asyncio.AbstractEventLoop | None = None
        self._samples: dict[str, list[bytes]] = defaultdict(list)
        self._poses: dict[str, PoseMessage] = {}
        self._encoder = msgspec.json.Encoder()
        if forward:
            hub.add_listener(self._on_processed, with_raws=True)

    def _on_processed(
        self, accepted: list[tuple[Sample, str]], updates: dict[str, PoseMessage], raws: list[bytes | None]
    ) -> None:
        """Hub listener (pump thread): hand the news to the event loop.

        A message goes on as the robot sent it, its team's own fields
        included, so that a receiver on the other side records what this
        one records; one without its bytes is encoded.
        """
        if self._loop is None:
            return
        encode = self._encoder.encode
        encoded = [
            (sample.robot, encode(sample) if raw is None else raw.strip())
            for (sample, source), raw in zip(accepted, raws)
            if source != SOURCE
        ]
        self._loop.call_soon_threadsafe(self._queue, encoded, updates)

    def _queue(self, encoded: list[tuple[str, bytes]], updates: dict[str, PoseMessage]) -> None:
        for robot, item in encoded:
            self._samples[robot].append(item)
        self._poses.update(updates)

    async def run(self) -> None:
        """Connect, subscribe and ingest (and forward) until cancelled; after a broker error
        it reconnects every RECONNECT_DELAY_S.
        """
        self._loop = asyncio.get_running_loop()
        while True:
            try:
                await self._session()
            except aiomqtt.MqttError as exc:
                self.connected.clear()
                log.warning("MQTT broker %s:%d: %s; retrying in %.0f s", self.host, self.port, exc, RECONNECT_DELAY_S)
                await asyncio.sleep(RECONNECT_DELAY_S)

    async def _session(self) -> None:
        async with aiomqtt.Client(self.host, self.port, protocol=aiomqtt.ProtocolVersion.V5) as client:
            await client.subscribe(samples_topic(self.prefix, "+"), options=SubscribeOptions(qos=0, noLocal=True))
            self.connected.set()
            log.info("MQTT: subscribed to %s on %s:%d", samples_topic(self.prefix, "+"), self.host, self.port)
            forwarding = asyncio.create_task(self._forward(client)) if self.forward else None
            try:
                await self._receive(client)
            finally:
                if forwarding is not None:
                    forwarding.cancel()
                    # Wait for it to end, so that no task is left pending when the loop stops.
                    await asyncio.gather(forwarding, return_exceptions=True)

    async def _receive(self, client: aiomqtt.Client) -> None:
        ingest = self.hub.ingest
        async for message in client.messages:
            rx = time.time()
            payload = message.payload
            if isinstance(payload, str):
                payload = payload.encode()
            elif not isinstance(payload, (bytes, bytearray)):
                payload = b""
            samples, failures, raws = decode_keeping_raw(bytes(payload))
            ingest(samples, failures, rx, SOURCE, raws=raws)

    async def _forward(self, client: aiomqtt.Client) -> None:
        while True:
            await asyncio.sleep(self.interval_s)
            samples, self._samples = self._samples, defaultdict(list)
            poses, self._poses = self._poses, {}
            for robot, encoded in samples.items():
                for payload in batch_payloads(encoded):
                    await client.publish(samples_topic(self.prefix, robot), payload)
                self.forwarded += len(encoded)
            for robot, update in poses.items():
                await client.publish(pose_topic(self.prefix, robot), self._encoder.encode(update))
