"""The live receiver: wires transports, the hub, its pump and the recording together.

Owns the lifetime of a ``serve`` run: bind every listener (and let the
caller bind the page), only then create the recording, start the workers
under a ``Supervisor``, print where they listen, pump the hub until Ctrl-C
or SIGTERM (or until a worker fails for good), then stop the listeners,
finish the recording and return one summary line per robot and one per
problem. It holds no protocol or pose logic of its own.
"""

from __future__ import annotations

import asyncio
import errno
import gc
import logging
import signal
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

from receiver.errors import UsageError
from receiver.formats.recording_writer import RecordingWriter, refuse_existing
from receiver.live.gate import DEFAULT_MAX_RATE, Network
from receiver.live.hub import Hub
from receiver.live.recording_file import create_recording, space_warning
from receiver.live.session import summary_line, summary_of_stats, unheard_profiles
from receiver.live.supervise import Supervisor, reason
from receiver.live.transports.mqtt import DEFAULT_PREFIX, MqttLink, samples_topic
from receiver.live.transports.udp import RECEIVE_BUFFER_BYTES, UdpReceiver
from receiver.live.transports.websocket import WebSocketReceiver
from receiver.odometry.robot import Profile

# How long the pump sleeps when nothing arrives; it also paces QUIET checks.
PUMP_IDLE_S = 0.1
CHECK_EVERY_S = 1.0  # the pump's slower checks: gates' tallies, kernel drops
DROPS_SHOWN_S = 5.0  # kernel drops stay on the status line this long after the last
log = logging.getLogger("podwatch")


class Pump:
    """A thread that runs ``hub.process`` whenever something was ingested, and ``checks``
    (each called with the time) every CHECK_EVERY_S; supervised as "pump"."""

    def __init__(
        self,
        hub: Hub,
        clock: Callable[[], float] = time.time,
        supervisor: Supervisor | None = None,
        checks: Sequence[Callable[[float], None]] = (),
    ) -> None:
        self.hub = hub
        self.clock = clock
        self.supervisor = supervisor or Supervisor(hub.health)
        self.checks = list(checks)
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, name="podwatch-pump", daemon=True)

    def start(self) -> None:
        """Start the pump thread; ``stop`` ends it."""
        self._thread.start()

    def _run(self) -> None:
        self.supervisor.run_thread("processing (pump)", self._loop, self._stop)

    def _loop(self) -> None:
        next_check = self.clock()
        while not self._stop.is_set():
            self.hub.wait(PUMP_IDLE_S)
            now = self.clock()
            self.hub.process(now)
            if now >= next_check:
                next_check = now + CHECK_EVERY_S
                for check in self.checks:
                    check(now)

    def stop(self) -> None:
        """Stop the thread, then process whatever is still queued."""
        self._stop.set()
        if self._thread.is_alive():
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


def cannot_listen(what: str, host: str, port: int, option: str, exc: OSError) -> UsageError:
    """A one-line UsageError for a listener that could not bind: the address, why and what to do."""
    where = f"cannot listen for {what} on {host}:{port}"
    if exc.errno == errno.EADDRINUSE:
        return UsageError(f"{where}: port {port} is in use (another podwatch running?): "
                          f"stop that program, or choose another port with {option} HOST:PORT")
    if exc.errno == errno.EACCES:
        return UsageError(f"{where}: permission denied (ports below 1024 need root): choose another port with {option}")
    if exc.errno == errno.EADDRNOTAVAIL:
        return UsageError(f"{where}: this computer has no such address: check {option}")
    return UsageError(f"{where}: {reason(exc)}")


@dataclass
class ServeConfig:
    """What ``serve`` runs: profiles by robot name; the UDP and WebSocket listeners as
    (host, port) and the MQTT broker as an mqtt:// URL (None: not used); forwarding,
    the topic prefix and the WebSocket token; the recording (``record``, a file that
    must not exist yet, or ``record_in``, a folder for a new default name; neither:
    no recording); the per-robot rate cap and the networks sources must be in.
    """

    profiles: dict[str, Profile] = field(default_factory=dict)
    udp: tuple[str, int] | None = None
    ws: tuple[str, int] | None = None
    mqtt: str | None = None
    forward: bool = False
    token: str | None = None
    record: Path | None = None
    prefix: str = DEFAULT_PREFIX
    record_in: Path | None = None
    max_rate: float = DEFAULT_MAX_RATE
    allow: tuple[Network, ...] = ()


class LiveReceiver:
    """Everything ``serve`` runs, inside one event loop: ``bind``, then ``begin`` (or
    ``start`` for both), then ``stop``. ``on_fatal`` is called (from any thread) when a
    worker failed for good."""

    def __init__(
        self, config: ServeConfig, say: Callable[[str], None] = print, on_fatal: Callable[[str], None] | None = None
    ) -> None:
        if config.forward and config.mqtt is None:
            raise UsageError("--forward needs --mqtt URL (the broker to forward to)")
        if config.token is not None and config.ws is None:
            raise UsageError("--token applies to the WebSocket listener; add --ws HOST:PORT")
        if not config.max_rate > 0:
            raise UsageError(f"--max-rate must be positive, got {config.max_rate:g}")
        if config.record is not None:
            refuse_existing(config.record)  # at once; creating it exclusively later closes the race
        self.config = config
        self.say = say
        self.hub = Hub(config.profiles, max_rate=config.max_rate, allow=config.allow)
        self.supervisor = Supervisor(self.hub.health, on_fatal)
        self.pump = Pump(self.hub, supervisor=self.supervisor, checks=[self.hub.check, self._check_links])
        self.recorder: RecordingWriter | None = None
        self.udp: UdpReceiver | None = None
        self.ws: WebSocketReceiver | None = None
        self.mqtt: MqttLink | None = None
        self._mqtt_task: asyncio.Task | None = None
        self._drops_seen = 0
        self._drops_at = -float("inf")

    async def start(self) -> None:
        """``bind``, then ``begin``; after a failure of ``begin`` everything is closed again."""
        await self.bind()
        try:
            await self.begin()
        except BaseException:
            await self.stop()
            raise

    async def bind(self) -> None:
        """Bind every listener, starting nothing; a port that cannot be bound is a one-line
        UsageError that names it, and leaves nothing open."""
        cfg = self.config
        try:
            if cfg.udp is not None:
                self.udp = UdpReceiver(self.hub, *cfg.udp, supervisor=self.supervisor)
        except OSError as exc:
            raise cannot_listen("udp", *cfg.udp, "--udp", exc) from exc
        try:
            if cfg.ws is not None:
                self.ws = WebSocketReceiver(self.hub, *cfg.ws, token=cfg.token, supervisor=self.supervisor)
                await self.ws.start()
        except OSError as exc:
            if self.udp is not None:
                self.udp.sock.close()
            raise cannot_listen("websocket", *cfg.ws, "--ws", exc) from exc

    async def begin(self) -> None:
        """Create the recording, start the workers and say where each listens. A recording
        that cannot be created is a RecordingError (call ``stop`` then)."""
        cfg = self.config
        if cfg.record is not None or cfg.record_in is not None:
            self.recorder = create_recording(cfg.profiles.values(), cfg.record, cfg.record_in)
            self.hub.recorder = self.recorder
            self.hub.health.recording_started(self.recorder.path)
        self.pump.start()
        if self.udp is not None:
            self.udp.start()
            host, port = self.udp.address
            self.say(f"listening: udp {host}:{port} ({self._buffer_text()})")
        if self.ws is not None:
            host, port = self.ws.address
            guarded = " (token required)" if cfg.token is not None else ""
            self.say(f"listening: websocket ws://{host}:{port}/{guarded}")
        if cfg.mqtt is not None:
            self.mqtt = MqttLink(self.hub, cfg.mqtt, cfg.prefix, forward=cfg.forward)
            self._mqtt_task = asyncio.create_task(self.supervisor.run_task("mqtt link", self.mqtt.run))
            what = " and forwarding udp/websocket samples" if cfg.forward else ""
            self.say(
                f"listening: mqtt://{self.mqtt.host}:{self.mqtt.port} topic {samples_topic(cfg.prefix, '+')}{what}"
            )
        if cfg.allow:
            self.say("accepting udp and websocket only from " + ", ".join(map(str, cfg.allow)))
        if self.recorder is not None:
            self.say(f"recording: {self.recorder.path}")
            folder = Path(self.recorder.path).parent
            warning = space_warning(folder, len(cfg.profiles), self.recorder.compress)
            if warning is not None:
                log.warning(warning)

    def _buffer_text(self) -> str:
        got = self.udp.receive_buffer
        text = f"receive buffer {got / 2**20:.1f} MiB"
        if got < RECEIVE_BUFFER_BYTES:
            text += f", asked for {RECEIVE_BUFFER_BYTES / 2**20:.0f}: the system's limit is net.core.rmem_max"
        return text

    def _check_links(self, now: float) -> None:
        """The pump's check of the UDP socket: what the kernel dropped, on the page."""
        if self.udp is None:
            return
        try:
            host, port = self.udp.address
        except OSError:
            return  # closed: the receiver is stopping
        drops = self.udp.kernel_drops()
        if drops is None:
            self.hub.health.set_note("udp", f"udp {host}:{port}: {self._buffer_text()}")
            return
        self.hub.health.set_note(
            "udp", f"udp {host}:{port}: {self._buffer_text()}; the kernel dropped {drops:,} datagrams"
        )
        if drops > self._drops_seen:
            if self._drops_seen == 0:
                log.warning("udp: the kernel is dropping datagrams (its buffer is full): the receiver is behind")
            self._drops_seen, self._drops_at = drops, now
        behind = now - self._drops_at <= DROPS_SHOWN_S
        self.hub.health.set_problem(
            "udp drops", f"the kernel is dropping udp datagrams ({drops:,} so far)" if behind else None
        )

    async def _close_listeners(self) -> None:
        if self.udp is not None:
            self.udp.stop()
        if self.ws is not None:
            await self.ws.stop()
        if self._mqtt_task is not None:
            self._mqtt_task.cancel()
            await asyncio.gather(self._mqtt_task, return_exceptions=True)

    async def stop(self) -> list[str]:
        """Stop listening, finish the recording; one summary line per robot and per problem."""
        if self.udp is not None and self.udp.sock.fileno() != -1:
            self._check_links(time.time())  # the kernel's last count of drops, while the socket is open
        await self._close_listeners()
        try:
            self.pump.stop()
        except Exception as exc:  # the last batch: its failure must not cost the summary
            self.supervisor.failed_once("processing (pump)", exc, " of the last messages")
        self.hub.check(time.time())  # the gates' last refusals
        if self.hub.recorder is not None:
            try:
                self.hub.recorder.close()
            except OSError as exc:
                self.hub.recorder.abandon()
                self.hub.health.stop_recording(reason(exc))
                log.error("recording stopped: %s (%s)", reason(exc), self.hub.recorder.path)
        return summary_lines(self.hub)


def summary_lines(hub: Hub) -> list[str]:
    """One line per robot (those whose slot was freed too), then one for refused messages
    by reason if any, then the receiver's own problems and notes: what ``serve`` and
    ``replay`` print at the end.
    """
    lines = []
    snapshots = hub.snapshot(time.time())
    unheard = unheard_profiles(snapshots)
    for robot, snap in snapshots.items():
        profile = hub.profiles.get(robot)
        lines.append(summary_line(snap, profile.distance_unit if profile else None, unheard))
    for robot, stats in hub.retired.items():
        lines.append(summary_of_stats(robot, stats))
    if hub.retired_dropped:
        lines.append(f"and {hub.retired_dropped} more robots whose slots were freed")
    if hub.errors:
        reasons = ", ".join(f"{reason} {n}" for reason, n in sorted(hub.errors.items()))
        lines.append(f"refused {sum(hub.errors.values())} messages: {reasons}")
    health = hub.health
    if health.recording_stopped is not None:
        lines.append(f"recording stopped: {health.recording_stopped}; {health.recording_path} keeps what was "
                     f"written before")
    lines.extend(problem for problem in health.problems() if not problem.startswith("recording stopped"))
    lines.extend(note for note in health.notes() if not note.startswith("recording to"))
    return lines


@dataclass
class Finished:
    """How a ``serve`` run ended: its summary lines, and the reason it had to stop (None: asked to)."""

    lines: list[str]
    failure: str | None = None


async def serve(
    config: ServeConfig,
    say: Callable[[str], None] = print,
    on_start: Callable[[LiveReceiver], None] | None = None,
    until: float | None = None,
) -> Finished:
    """Run until SIGINT or SIGTERM (or ``until`` seconds, or a worker that failed for good).

    ``on_start`` runs once every listener is bound and before the recording
    is created (the dashboard binds there): if it raises, nothing was recorded.
    """
    stop = asyncio.Event()
    loop = asyncio.get_running_loop()
    receiver = LiveReceiver(config, say, on_fatal=lambda _why: loop.call_soon_threadsafe(stop.set))
    for sig in (signal.SIGINT, signal.SIGTERM):
        loop.add_signal_handler(sig, stop.set)
    try:
        await receiver.bind()
        try:
            if on_start is not None:
                on_start(receiver)
            await receiver.begin()
        except BaseException:
            await receiver.stop()
            raise
        settle_heap()
        try:
            await asyncio.wait_for(stop.wait(), until)
        except asyncio.TimeoutError:
            pass
    finally:
        gc.unfreeze()
        for sig in (signal.SIGINT, signal.SIGTERM):
            loop.remove_signal_handler(sig)
    lines = await receiver.stop()
    return Finished(lines, receiver.supervisor.fatal)
