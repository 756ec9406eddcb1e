"""The live receiver: wires transports, the hub, its pump and the recording together.

Owns the lifetime of a ``serve`` run: start the listeners, print where they
listen, pump the hub until Ctrl-C or SIGTERM, then stop the listeners, finish
the recording and return one summary line per robot. It holds no protocol or
pose logic of its own.
"""

from __future__ import annotations

import asyncio
import gc
import signal
import threading
import time
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Callable

from receiver.errors import UsageError
from receiver.formats.recording_writer import RecordingWriter
from receiver.live.hub import Hub
from receiver.live.session import summary_line, unheard_profiles
from receiver.live.transports.mqtt import DEFAULT_PREFIX, MqttLink, samples_topic
from receiver.live.transports.udp import UdpReceiver
from receiver.live.transports.websocket import WebSocketReceiver
from receiver.odometry.robot import Profile

# How long the pump sleeps when nothing arrives; it also paces QUIET checks.
PUMP_IDLE_S = 0.1


class Pump:
    """A thread that runs ``hub.process`` whenever something was ingested."""

    def __init__(self, hub: Hub, clock: Callable[[], float] = time.time) -> None:
        self.hub = hub
        self.clock = clock
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, name="podwatch-pump", daemon=True)

    def start(self) -> None:
        """Start the pump thread; ``stop`` ends it."""
        self._thread.start()

    def _run(self) -> None:
        while not self._stop.is_set():
            self.hub.wait(PUMP_IDLE_S)
            self.hub.process(self.clock())

    def stop(self) -> None:
        """Stop the thread, then process whatever is still queued."""
        self._stop.set()
        self._thread.join()
        self.hub.process(self.clock())


def settle_heap() -> None:
    """Keep everything alive now out of the garbage collector's later passes.

    For a receiver that has just started (imports, profiles, dashboard). A
    full collection walks every tracked object, and numpy, scipy and the
    dashboard leave tens of thousands that live as long as the process:
    walking them is a pause that every datagram arriving meanwhile waits
    through. The collect first frees start-up garbage instead of freezing it.
    """
    gc.collect()
    gc.freeze()


def parse_host_port(text: str, default_host: str) -> tuple[str, int]:
    """HOST:PORT, :PORT or PORT -> (host, port)."""
    host, sep, port = text.rpartition(":")
    if not sep:
        host, port = "", text
    if not port.isdigit() or not 0 <= int(port) <= 65535:
        raise UsageError(f"expected HOST:PORT, got {text!r}")
    return host or default_host, int(port)


def default_recording_path(directory: Path = Path("recordings"), now: datetime | None = None) -> Path:
    """recordings/podwatch-YYYYmmdd-HHMMSS.jsonl, with -2, -3... if taken."""
    stamp = (now or datetime.now()).strftime("%Y%m%d-%H%M%S")
    directory.mkdir(parents=True, exist_ok=True)
    path = directory / f"podwatch-{stamp}.jsonl"
    n = 2
    while path.exists():
        path = directory / f"podwatch-{stamp}-{n}.jsonl"
        n += 1
    return path


@dataclass
class ServeConfig:
    """What ``serve`` runs: profiles by robot name; the UDP and WebSocket listeners as
    (host, port) and the MQTT broker as an mqtt:// URL (None: not used); forwarding,
    the topic prefix, the WebSocket token and the recording path (None: no recording).
    """

    profiles: dict[str, Profile] = field(default_factory=dict)
    udp: tuple[str, int] | None = None
    ws: tuple[str, int] | None = None
    mqtt: str | None = None
    forward: bool = False
    token: str | None = None
    record: Path | None = None
    prefix: str = DEFAULT_PREFIX


class LiveReceiver:
    """Everything ``serve`` runs; ``start`` and ``stop`` inside one event loop."""

    def __init__(self, config: ServeConfig, say: Callable[[str], None] = print) -> None:
        if config.forward and config.mqtt is None:
            raise UsageError("--forward needs --mqtt URL (the broker to forward to)")
        if config.token is not None and config.ws is None:
            raise UsageError("--token applies to the WebSocket listener; add --ws HOST:PORT")
        self.config = config
        self.say = say
        self.recorder = RecordingWriter(config.record, config.profiles.values()) if config.record else None
        self.hub = Hub(config.profiles, recorder=self.recorder)
        self.pump = Pump(self.hub)
        self.udp: UdpReceiver | None = None
        self.ws: WebSocketReceiver | None = None
        self.mqtt: MqttLink | None = None
        self._mqtt_task: asyncio.Task | None = None

    async def start(self) -> None:
        """Open the listeners, start the pump and say where each listens; a port that cannot
        be bound is a UsageError. Call ``stop`` to end.
        """
        cfg = self.config
        try:
            if cfg.udp is not None:
                self.udp = UdpReceiver(self.hub, *cfg.udp)
            if cfg.ws is not None:
                self.ws = WebSocketReceiver(self.hub, *cfg.ws, token=cfg.token)
                await self.ws.start()
        except OSError as exc:
            if self.udp is not None:
                self.udp.sock.close()
            if self.recorder is not None:
                self.recorder.close()
            raise UsageError(f"cannot listen: {exc.strerror or exc}") from exc
        self.pump.start()
        if self.udp is not None:
            self.udp.start()
            host, port = self.udp.address
            self.say(f"listening: udp {host}:{port}")
        if self.ws is not None:
            host, port = self.ws.address
            guarded = " (token required)" if cfg.token is not None else ""
            self.say(f"listening: websocket ws://{host}:{port}/{guarded}")
        if cfg.mqtt is not None:
            self.mqtt = MqttLink(self.hub, cfg.mqtt, cfg.prefix, forward=cfg.forward)
            self._mqtt_task = asyncio.create_task(self.mqtt.run())
            what = " and forwarding udp/websocket samples" if cfg.forward else ""
            self.say(
                f"listening: mqtt://{self.mqtt.host}:{self.mqtt.port} topic {samples_topic(cfg.prefix, '+')}{what}"
            )
        if self.recorder is not None:
            self.say(f"recording: {self.recorder.path}")

    async def stop(self) -> list[str]:
        """Stop listening, finish the recording; one summary line per robot."""
        if self.udp is not None:
            self.udp.stop()
        if self.ws is not None:
            await self.ws.stop()
        if self._mqtt_task is not None:
            self._mqtt_task.cancel()
            await asyncio.gather(self._mqtt_task, return_exceptions=True)
        self.pump.stop()
        if self.recorder is not None:
            self.recorder.close()
        return summary_lines(self.hub)


def summary_lines(hub: Hub) -> list[str]:
    """One line per robot, then one for refused messages by reason if any: what ``serve``
    and ``replay`` print at the end.
    """
    lines = []
    snapshots = hub.snapshot(time.time())
    unheard = unheard_profiles(snapshots)
    for robot, snap in snapshots.items():
        profile = hub.profiles.get(robot)
        lines.append(summary_line(snap, profile.distance_unit if profile else None, unheard))
    if hub.errors:
        reasons = ", ".join(f"{reason} {n}" for reason, n in sorted(hub.errors.items()))
        lines.append(f"refused {sum(hub.errors.values())} messages: {reasons}")
    return lines


async def serve(
    config: ServeConfig,
    say: Callable[[str], None] = print,
    on_start: Callable[[LiveReceiver], None] | None = None,
    until: float | None = None,
) -> list[str]:
    """Run until SIGINT or SIGTERM (or ``until`` seconds); returns the summary lines.

    ``on_start`` runs once the receiver listens (the dashboard starts there).
    """
    receiver = LiveReceiver(config, say)
    stop = asyncio.Event()
    loop = asyncio.get_running_loop()
    for sig in (signal.SIGINT, signal.SIGTERM):
        loop.add_signal_handler(sig, stop.set)
    try:
        await receiver.start()
        if on_start is not None:
            on_start(receiver)
        settle_heap()
        try:
            await asyncio.wait_for(stop.wait(), until)
        except asyncio.TimeoutError:
            pass
    finally:
        gc.unfreeze()
        for sig in (signal.SIGINT, signal.SIGTERM):
            loop.remove_signal_handler(sig)
    return await receiver.stop()
