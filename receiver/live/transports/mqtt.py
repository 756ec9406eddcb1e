"""MQTT link: ingest from <prefix>/+/samples and, optionally, forward to the broker.

Owns one broker connection (aiomqtt). Incoming payloads go through the
hub's gate (the per-robot rate cap) and ``protocol.decode_keeping_raw`` into
``Hub.ingest``; while the hub's queue is full the link waits, and aiomqtt's
own queue of MQTT_QUEUE messages fills instead: past it messages are dropped
and counted, so a flood through the broker cannot grow the receiver's
memory. A lost broker is reconnected with a doubling pause (up to
MAX_RECONNECT_DELAY_S); the outage and the reconnect, with its length, are
logged and shown in the link health. With forwarding on,
every valid sample that reached the hub over UDP or WebSocket is republished
as received (a team's own fields included) in batches (JSON arrays of at
most 256 messages and 64 KiB, one per robot per interval) together with
each robot's latest recomputed pose on <prefix>/<robot>/pose, and each
robot's profile given with --profile, retained, on <prefix>/<robot>/profile
(published on every connect). Every link takes the profiles retained there
for robots it has no profile of, so a second laptop watching through the
broker recomputes too; a local --profile wins, and a different one on the
broker is logged once. It never re-forwards what came from MQTT, and
subscribes with MQTT 5 "no local" so its own publications never come back
to it.
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

from receiver.errors import ProfileError
from receiver.formats.profile_toml import profile_from_json, profile_json
from receiver.formats.protocol import MAX_BATCH, MAX_MESSAGE_BYTES, MQTT_PREFIX, PoseMessage, Sample, decode_keeping_raw
from receiver.live.hub import Hub
from receiver.live.supervise import reason

DEFAULT_PREFIX = MQTT_PREFIX
DEFAULT_MQTT_PORT = 1883  # IANA port for MQTT
FORWARD_INTERVAL_S = 0.05
RECONNECT_DELAY_S = 0.25  # the first pause after the broker is lost; it doubles up to the next
MAX_RECONNECT_DELAY_S = 1.0  # a broker on the team laptop is back within a second; retries are cheap
# Incoming messages aiomqtt holds for us: a few seconds of a busy robot, at
# most 64 MB even if every one were of the largest size.
MQTT_QUEUE = 1000
BACKPRESSURE_POLL_S = 0.005
FORWARD_BACKLOG = 20_000  # messages per robot waiting to be forwarded; past it (a slow broker) they are not
SOURCE = "mqtt"
log = logging.getLogger("podwatch.mqtt")


class _CountingQueue(asyncio.Queue):
    """aiomqtt's incoming queue: when full, a message is dropped and counted here
    (aiomqtt would log a line for each)."""

    dropped = 0

    def put_nowait(self, item) -> None:
        """Queue ``item``, or count it as dropped when the queue is full."""
        if self.full():
            self.dropped += 1
            return
        super().put_nowait(item)


def parse_mqtt_url(url: str) -> tuple[str, int]:
    """mqtt://HOST[:PORT] -> (host, port)."""
    parts = urlsplit(url if "://" in url else f"mqtt://{url}")
    if parts.scheme != "mqtt" or not parts.hostname:
        raise ValueError(f"expected mqtt://HOST[:PORT], got {url!r}")
    return parts.hostname, parts.port or DEFAULT_MQTT_PORT


def samples_topic(prefix: str, robot: str) -> str:
    """The topic a robot's samples arrive on: <prefix>/<robot>/samples (robot "+" for all)."""
    return f"{prefix}/{robot}/samples"


def profile_topic(prefix: str, robot: str) -> str:
    """The topic a robot's profile is kept on, retained: <prefix>/<robot>/profile (robot "+" for all)."""
    return f"{prefix}/{robot}/profile"


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
        self.gate = hub.new_gate()
        self.outages = 0
        self.down_s = 0.0  # time without the broker, over every outage that ended
        self.dropped = 0  # messages dropped because the receiver was behind (MQTT_QUEUE full)
        self.unforwarded = 0  # messages not forwarded: no broker, or it was too slow
        self._down_since: float | None = None
        self._incoming: _CountingQueue | None = None
        self._loop: asyncio.AbstractEventLoop | None = None
        self._samples: dict[str, list[bytes]] = defaultdict(list)
        self._poses: dict[str, PoseMessage] = {}
        self._encoder = msgspec.json.Encoder()
        self._own_profiles = dict(hub.profiles)  # given here with --profile: what a forwarder publishes
        self._profile_said: set[tuple[str, bytes]] = set()  # (robot, payload) already logged
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
        if not self.connected.is_set():  # no broker to forward to: not kept, so it cannot pile up
            self.unforwarded += len(encoded)
            return
        for robot, item in encoded:
            waiting = self._samples[robot]
            if len(waiting) < FORWARD_BACKLOG:
                waiting.append(item)
            else:
                self.unforwarded += 1
        self._poses.update(updates)

    @property
    def where(self) -> str:
        """The broker as mqtt://HOST:PORT."""
        return f"mqtt://{self.host}:{self.port}"

    async def run(self) -> None:
        """Connect, subscribe and ingest (and forward) until cancelled; after a broker error
        it reconnects, pausing RECONNECT_DELAY_S and doubling up to MAX_RECONNECT_DELAY_S.
        """
        self._loop = asyncio.get_running_loop()
        pause = RECONNECT_DELAY_S
        while True:
            try:
                await self._session()
                lost: Exception = aiomqtt.MqttError("the broker ended the subscription")
            except aiomqtt.MqttError as exc:
                lost = exc
            if self.connected.is_set():  # lost a broker it had: the pauses start afresh
                pause = RECONNECT_DELAY_S
            self._lost(lost)
            self.connected.clear()
            await asyncio.sleep(pause)
            pause = min(pause * 2, MAX_RECONNECT_DELAY_S)

    def _lost(self, exc: Exception) -> None:
        """Log and show an outage once, at its start."""
        if self._down_since is not None:
            return
        self._down_since = time.monotonic()
        if self.connected.is_set():
            self.outages += 1
            log.warning("MQTT broker %s lost: %s; reconnecting", self.where, reason(exc))
            what = "lost"
        else:
            log.warning("MQTT broker %s unreachable: %s; retrying until it answers", self.where, reason(exc))
            what = "unreachable"
        self.hub.health.set_problem("mqtt", f"MQTT broker {self.where} {what} ({reason(exc)}): retrying")

    def _back(self) -> None:
        """The broker answers again: log the outage's length, keep it in the link notes (with
        what was not forwarded meanwhile)."""
        if self._down_since is None:
            return
        length = time.monotonic() - self._down_since
        self._down_since = None
        self.hub.health.set_problem("mqtt", None)
        if self.outages:
            self.down_s += length
            log.warning("MQTT broker %s back after %.1f s without it; subscribed again", self.where, length)
        else:
            log.warning("MQTT broker %s answers after %.1f s; subscribed", self.where, length)
        self._note()

    def _note(self) -> None:
        parts = []
        if self.outages:
            parts.append(f"{self.outages} outage{'s' if self.outages > 1 else ''}, {self.down_s:.1f} s without "
                         "the broker (messages sent meanwhile were lost)")
        if self.dropped:
            parts.append(f"{self.dropped:,} messages dropped while the receiver was behind")
        if self.unforwarded:
            parts.append(f"{self.unforwarded:,} messages not forwarded")
        self.hub.health.set_note("mqtt", f"mqtt {self.where}: " + "; ".join(parts) if parts else None)

    async def _session(self) -> None:
        async with aiomqtt.Client(
            self.host, self.port, protocol=aiomqtt.ProtocolVersion.V5,
            queue_type=self._new_queue, max_queued_incoming_messages=MQTT_QUEUE,
        ) as client:
            await client.subscribe(samples_topic(self.prefix, "+"), options=SubscribeOptions(qos=0, noLocal=True))
            await client.subscribe(profile_topic(self.prefix, "+"), options=SubscribeOptions(qos=1, noLocal=True))
            if self.forward:
                for robot, profile in self._own_profiles.items():
                    await client.publish(profile_topic(self.prefix, robot), profile_json(profile), qos=1, retain=True)
            self.connected.set()
            self._back()
            log.info("MQTT: subscribed to %s on %s:%d", samples_topic(self.prefix, "+"), self.host, self.port)
            tasks = [asyncio.create_task(self._receive(client))]
            if self.forward:
                tasks.append(asyncio.create_task(self._forward(client)))
            try:
                # The first of them to fail ends the session, with its error: forwarding
                # must not stop quietly while receiving goes on.
                done, _ = await asyncio.wait(tasks, return_when=asyncio.FIRST_EXCEPTION)
                for task in done:
                    task.result()
            finally:
                self._count_dropped()
                for task in tasks:
                    task.cancel()
                # Wait for them to end, so that no task is left pending when the loop stops.
                await asyncio.gather(*tasks, return_exceptions=True)

    def _new_queue(self, maxsize: int) -> _CountingQueue:
        """aiomqtt's incoming queue for one connection, kept to read its count of drops."""
        self._count_dropped()
        self._incoming = _CountingQueue(maxsize=maxsize)
        return self._incoming

    def _count_dropped(self) -> None:
        queue = self._incoming
        if queue is not None and queue.dropped:
            self.dropped += queue.dropped
            queue.dropped = 0
            self._note()

    async def _receive(self, client: aiomqtt.Client) -> None:
        ingest, take, has_room = self.hub.ingest, self.gate.take, self.hub.has_room
        async for message in client.messages:
            if not has_room():
                self._count_dropped()
                while not has_room():  # aiomqtt's bounded queue takes the wait
                    await asyncio.sleep(BACKPRESSURE_POLL_S)
            rx = time.time()
            payload = message.payload
            if isinstance(payload, str):
                payload = payload.encode()
            elif not isinstance(payload, (bytes, bytearray)):
                payload = b""
            if str(message.topic).endswith("/profile"):
                self._take_profile(str(message.topic), bytes(payload))
                continue
            decoded = take(bytes(payload), rx, decode_keeping_raw)
            if decoded is None:
                continue  # its robot is over the rate cap: counted by the gate
            samples, failures, raws = decoded
            ingest(samples, failures, rx, SOURCE, raws=raws)

    def _take_profile(self, topic: str, payload: bytes) -> None:
        """A profile retained on the broker: adopted for a robot without one here, else compared
        with the local one; anything wrong with it is logged once, never raised."""
        robot = topic[len(self.prefix) + 1 : -len("/profile")]
        if not payload or (robot, payload) in self._profile_said:
            return  # an empty retained message clears the topic; a repeat was said already
        self._profile_said.add((robot, payload))
        try:
            profile = profile_from_json(payload, f"mqtt {topic}")
        except ProfileError as exc:
            log.warning("MQTT: ignored the profile on %s: %s", topic, exc)
            return
        if profile.name != robot:
            log.warning("MQTT: ignored the profile on %s: it is named %r", topic, profile.name)
            return
        local = self.hub.profiles.get(robot)
        if local is None:
            if self.hub.adopt_profile(profile):
                log.warning("MQTT: recomputing %s with the profile from %s", robot, topic)
        elif local != profile:
            log.warning("MQTT: the profile on %s differs from the one given here for %s; using the local one",
                        topic, robot)

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
