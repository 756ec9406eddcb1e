"""The hub: every robot's session behind one ingest queue.

Owns the receiver-level rules the pure decoder cannot apply (the number of
counts each robot's profile expects, the robot limit and the freeing of idle
slots, the tallies of the transports' gates), handing accepted samples to
the recorder and to the sessions, and telling listeners. The transports
call ``ingest`` from their own threads; it only queues, and the queue is
bounded (``has_room``). ``process`` does the work in small batches. A
recorder that fails stops recording, never receiving. It never opens a
socket and never reads a clock: times are arguments.
"""

from __future__ import annotations

import logging
import math
import threading
from collections import Counter
from typing import Callable, Protocol, Sequence

import numpy as np

from receiver.formats.protocol import Failure, PoseMessage, Reason, Sample
from receiver.live.gate import DEFAULT_MAX_RATE, Gate, Network
from receiver.live.health import Health
from receiver.live.refusals import RefusalLog
from receiver.live.ring_buffer import SMALL_BLOCK_ROWS, Cut
from receiver.live.session import (
    DEFAULT_MAX_ROWS,
    DEFAULT_QUIET_AFTER_S,
    DEFAULT_WINDOW_S,
    LinkEvent,
    LinkState,
    LinkStats,
    RobotSnapshot,
    Session,
)
from receiver.odometry.robot import Profile

DEFAULT_MAX_ROBOTS = 64  # DESIGN.md, wire protocol: 64 robots at once by default
IDLE_SLOT_S = 10.0  # DESIGN.md: a robot without a profile that is quiet this long frees its slot
# Messages waiting between the transports and ``process``: beyond this a
# WebSocket connection stops being read and MQTT's own bounded queue fills,
# so a flood costs them, not the receiver's memory. Far more than any real
# robots send between two passes of the pump (at most a few hundred).
MAX_BACKLOG = 20_000
FLOOD_SHOWN_S = 5.0  # a robot over the rate cap is named on the page this long after its last refusal
MAX_RETIRED = 1024  # robots whose slot was freed, kept for the summary
# Rows the robots without a profile share (about 39 MB at 97 bytes a row,
# in blocks of SMALL_BLOCK_ROWS): one of them keeps 400 s at 1 kHz, and
# names invented under the rate cap cannot make the receiver hold more than
# this between them. Robots named in a profile are the user's own and keep
# DEFAULT_MAX_ROWS each.
UNPROFILED_ROWS = 400_000
log = logging.getLogger("podwatch.hub")


class Recorder(Protocol):
    """What the hub needs of a recording writer (formats.recording_writer.RecordingWriter)."""

    def write(
        self, samples: list[Sample], rx: float | None = None, raws: Sequence[bytes | None] | None = None
    ) -> None:
        """Buffer accepted samples (stamped with ``rx`` when given); ``raws`` are their bytes as received."""

    def flush(self, now: float | None = None) -> bool:
        """Push buffered lines on, at most once per flush interval of ``now``; True when it did."""

    def abandon(self) -> None:
        """Close the file without writing more, after ``write`` or ``flush`` raised an OSError."""


# Listener(accepted samples with their source, latest pose per updated robot)
Listener = Callable[[list[tuple[Sample, str]], dict[str, PoseMessage]], None]
# The same with each accepted sample's bytes as received (None where unknown), third.
RawsListener = Callable[[list[tuple[Sample, str]], dict[str, PoseMessage], list[bytes | None]], None]


class Hub:
    """Every robot's session, behind one ingest queue.

    ``ingest`` (any thread) only queues a datagram's decode result, so a
    receive loop spends microseconds on it; ``process`` (the pump thread, or
    the UDP loop right after it took a batch; a lock keeps them apart)
    applies the receiver-level rules, records, recomputes and tells
    listeners. Robots with a profile get a session up front, in WAITING.
    ``health`` is what the page and the summary show of the receiver itself.
    """

    def __init__(
        self,
        profiles: dict[str, Profile] | None = None,
        *,
        recorder: Recorder | None = None,
        max_robots: int = DEFAULT_MAX_ROBOTS,
        window_s: float = DEFAULT_WINDOW_S,
        max_rows: int = DEFAULT_MAX_ROWS,
        quiet_after_s: float = DEFAULT_QUIET_AFTER_S,
        method: str = "arc",
        max_rate: float = DEFAULT_MAX_RATE,
        allow: Sequence[Network] = (),
    ) -> None:
        self.profiles = dict(profiles or {})
        self.recorder = recorder
        self.health = Health()
        self.max_rate = max_rate
        self.allow = tuple(allow)
        self.max_robots = max_robots
        self.window_s = window_s
        self.max_rows = max_rows
        self.quiet_after_s = quiet_after_s
        self.method = method
        self.errors: Counter = Counter()  # every refused message, by reason
        self.last_error: str | None = None
        self.sessions: dict[str, Session] = {}
        self.retired: dict[str, LinkStats] = {}  # robots whose slot was freed, for the summary
        self.retired_dropped = 0  # robots past MAX_RETIRED, not listed
        self._listeners: list[tuple[Listener | RawsListener, bool]] = []
        self._pending: list[tuple[list[Sample], list[Failure], float, str, list[bytes] | None]] = []
        self._backlog = 0  # messages in _pending
        self._pending_lock = threading.Lock()
        self._state_lock = threading.RLock()
        self._has_pending = threading.Event()
        # No LIVE session's last_rx is older than this (any may be newer):
        # while now is within quiet_after_s of it, none can have gone quiet,
        # and ``process`` skips the walk over every session (7 us for 20).
        self._oldest_live_rx = math.inf
        self._gates: list[_GateTally] = []
        self._refusals = RefusalLog(log)
        self._next_slot_scan = -math.inf
        for name, profile in self.profiles.items():
            self.sessions[name] = self._new_session(name, profile)

    def _new_session(self, robot: str, profile: Profile | None) -> Session:
        return Session(robot, profile, self.window_s, self.max_rows, self.method)

    def add_listener(self, listener: Listener | RawsListener, with_raws: bool = False) -> None:
        """Called after each ``process`` that accepted samples; it must be quick.

        ``with_raws``: called with a third list, each accepted sample's bytes
        as received (None where it came without them), for a listener that
        passes messages on as they were sent (MQTT forwarding).
        """
        self._listeners.append((listener, with_raws))

    def ingest(
        self,
        samples: list[Sample],
        failures: list[Failure],
        rx: float,
        source: str,
        wake: bool = True,
        raws: list[bytes] | None = None,
    ) -> None:
        """Queue one datagram's (or frame's) decode result; safe from any thread.

        ``wake=False`` leaves the pump asleep: for a caller that runs
        ``process`` itself right after (the UDP receive loop). ``raws``, the
        bytes of each sample as received (``protocol.decode_keeping_raw``),
        are what the recorder writes; without them it encodes the samples.
        """
        assert raws is None or len(raws) == len(samples), "raws must pair up with samples"
        with self._pending_lock:
            self._pending.append((samples, failures, rx, source, raws))
            if wake:  # a caller that processes right after (UDP) adds at most a pass's worth
                self._backlog += len(samples) + len(failures)
        # Set only when clear (``process`` clears it under the same lock, after
        # taking the queue): Event.set is pure Python, as dear as a decode.
        if wake and not self._has_pending.is_set():
            self._has_pending.set()

    def has_room(self) -> bool:
        """False while MAX_BACKLOG messages wait for ``process``: a transport that can wait
        (a WebSocket connection, the MQTT link) waits before it ingests more."""
        return self._backlog < MAX_BACKLOG

    def new_gate(self) -> Gate:
        """A gate for one transport (its own thread), with this hub's rate cap and allowed
        networks; ``check`` counts and logs what it refused."""
        gate = Gate(self.max_rate, self.allow)
        self._gates.append(_GateTally(gate))
        return gate

    def wait(self, timeout: float) -> bool:
        """Block until something is queued (True) or the timeout passes (False)."""
        return self._has_pending.wait(timeout)

    def process(self, now: float) -> int:
        """Apply everything queued since the last call; returns samples accepted."""
        with self._pending_lock:
            batch, self._pending = self._pending, []
            self._backlog = 0
            if self._has_pending.is_set():  # Event.clear is pure Python; the UDP loop never sets it
                self._has_pending.clear()
        with self._state_lock:
            sessions = self.sessions
            accepted: list[tuple[Sample, str]] = []
            kept: list[Sample] = []  # the same samples, for the recorder
            kept_raws: list[bytes | None] = []  # and their bytes as received, where known
            groups: dict[str, list[Sample]] = {}
            for samples, failures, rx, source, raws in batch:
                for failure in failures:
                    self._refuse(failure)
                # An index into raws, not zip or enumerate: those cost 0.2 and
                # 0.3 us per datagram here, this 0.03.
                k = -1
                for sample in samples:
                    k += 1
                    robot = sample.robot
                    session = sessions.get(robot)
                    # a known robot with the right number of counts passes _admit unchanged
                    if (session is None or len(sample.ticks) != session.n_wheels) and not self._admit(sample, now):
                        continue
                    sample.rx = rx
                    group = groups.get(robot)
                    if group is None:
                        groups[robot] = [sample]
                    else:
                        group.append(sample)
                    accepted.append((sample, source))
                    kept.append(sample)
                    kept_raws.append(None if raws is None else raws[k])
            recorder = self.recorder
            if recorder is not None:
                try:
                    recorder.write(kept, raws=kept_raws)
                    recorder.flush(now)
                except OSError as exc:
                    self._stop_recording(recorder, exc)
            updates: dict[str, PoseMessage] = {}
            oldest_live_rx = self._oldest_live_rx
            for robot, group in groups.items():
                session = sessions[robot]
                update = session.feed_samples(group)
                if update is not None:
                    updates[robot] = update
                if session.stats.last_rx < oldest_live_rx:
                    oldest_live_rx = session.stats.last_rx
            self._oldest_live_rx = oldest_live_rx
            if not now - oldest_live_rx <= self.quiet_after_s:
                self.tick(now)
            if accepted:
                for listener, with_raws in self._listeners:
                    if with_raws:
                        listener(accepted, updates, kept_raws)
                    else:
                        listener(accepted, updates)
            return len(accepted)

    def _admit(self, sample: Sample, now: float) -> bool:
        """The receiver-level rules: robot limit (freeing idle slots) and ticks length."""
        robot = sample.robot
        session = self.sessions.get(robot)
        if session is None:
            if len(self.sessions) >= self.max_robots and not self._free_idle_slots(now):
                why = f"robot {robot!r} refused: already {self.max_robots} robots"
                self._refuse(Failure(Reason.TOO_MANY_ROBOTS, why))
                self._refusals.note(
                    Reason.TOO_MANY_ROBOTS, robot, 1, now,
                    f"{why} (a robot without a profile frees its slot after {IDLE_SLOT_S:g} s of silence)",
                )
                return False
            session = self.sessions[robot] = self._new_session(robot, None)
            self._share_rows()
            stats = self.retired.pop(robot, None)
            if stats is not None:  # back after its slot was freed: its counts go on
                session.stats = stats
        if session.n_wheels is None and sample.ticks:
            session.n_wheels = len(sample.ticks)
        if len(sample.ticks) != session.n_wheels:
            expected = "at least one" if session.n_wheels is None else str(session.n_wheels)
            detail = f"robot {sample.robot!r} sent {len(sample.ticks)} counts, expected {expected}"
            self._refuse(Failure(Reason.WRONG_TICKS_LENGTH, detail, sample.robot))
            return False
        return True

    def _free_idle_slots(self, now: float) -> bool:
        """Retire every robot without a profile quiet for IDLE_SLOT_S; True when one was.

        Looked for at most every 0.1 s of ``now``: a flood of new names
        would otherwise walk every session for each of its messages."""
        if now < self._next_slot_scan:
            return False
        self._next_slot_scan = now + 0.1
        idle = [
            name for name, session in self.sessions.items()
            if session.profile is None and now - session.stats.last_rx > IDLE_SLOT_S  # NaN: admitted in this batch
        ]
        for name in idle:
            self.retired[name] = self.sessions.pop(name).stats
            log.info("robot %r sent nothing for %g s: its slot is free", name, IDLE_SLOT_S)
        while len(self.retired) > MAX_RETIRED:
            del self.retired[next(iter(self.retired))]
            self.retired_dropped += 1
        if idle:
            self._share_rows()
        return bool(idle)

    def adopt_profile(self, profile: Profile) -> bool:
        """Recompute ``profile.name`` with ``profile`` from its next sample on, unless a profile
        was given for it here (a local one wins); True when it was adopted. The robot's link
        counts carry on; rows received before it, without a recompute, are let go."""
        robot = profile.name
        with self._state_lock:
            if robot in self.profiles:
                return False
            old = self.sessions.get(robot)
            if old is None and len(self.sessions) >= self.max_robots:
                return False
            self.profiles[robot] = profile
            session = self.sessions[robot] = self._new_session(robot, profile)
            if old is not None:
                session.stats = old.stats
                session.state = old.state
            self._share_rows()
            return True

    def _share_rows(self) -> None:
        """Give each robot without a profile its share of UNPROFILED_ROWS (a small block's
        worth at least, this hub's max_rows at most)."""
        unprofiled = [session for session in self.sessions.values() if session.profile is None]
        if unprofiled:
            each = min(self.max_rows, max(SMALL_BLOCK_ROWS, UNPROFILED_ROWS // len(unprofiled)))
            for session in unprofiled:
                session.ring.max_rows = each

    def _stop_recording(self, recorder: Recorder, exc: OSError) -> None:
        """A write or flush failed (disk full, device gone): stop recording, keep receiving."""
        reason = exc.strerror or str(exc)
        self.recorder = None
        recorder.abandon()
        self.health.stop_recording(reason)
        log.error("recording stopped: %s (%s); receiving goes on, what was written stays readable",
                  reason, getattr(recorder, "path", "the recording"))

    def _count_gate(self, tally: _GateTally, now: float) -> None:
        """Count and log what a transport's gate refused since the last look."""
        gate = tally.gate
        tally.seen = gate.refused
        over, tally.over = tally.over, dict(gate.over_cap)  # copies: the transport's thread goes on writing
        for robot, n in tally.over.items():
            n -= over.get(robot, 0)
            if n <= 0:
                continue
            robot = robot or "(no robot name)"
            self.errors[Reason.OVER_RATE_CAP] += n
            session = self.sessions.get(robot)
            if session is not None:
                session.stats.errors[Reason.OVER_RATE_CAP] += n
            why = f"robot {robot!r} is over the rate cap of {self.max_rate:g} messages/s: the rest are dropped"
            self._refusals.note(Reason.OVER_RATE_CAP, robot, n, now, why)
            self.last_error = f"{Reason.OVER_RATE_CAP}: {why}"
        refused, tally.refused = tally.refused, dict(gate.not_allowed)
        for host, n in tally.refused.items():
            n -= refused.get(host, 0)
            if n > 0:
                self.errors[Reason.SOURCE_NOT_ALLOWED] += n
                why = f"refused traffic from {host}: not in the allowed networks (--allow)"
                self._refusals.note(Reason.SOURCE_NOT_ALLOWED, host, n, now, why)
        self._show_refusals(now)

    def _show_refusals(self, now: float) -> None:
        flooding = self._refusals.recent(Reason.OVER_RATE_CAP, now, FLOOD_SHOWN_S)
        text = ", ".join(f"{name} ({n:,} dropped)" for name, n in sorted(flooding.items()))
        self.health.set_problem(
            Reason.OVER_RATE_CAP, f"over the rate cap of {self.max_rate:g} messages/s: {text}" if text else None
        )
        barred = self._refusals.recent(Reason.SOURCE_NOT_ALLOWED, now, math.inf)
        text = ", ".join(f"{host} ({n:,})" for host, n in sorted(barred.items()))
        self.health.set_note(Reason.SOURCE_NOT_ALLOWED, f"refused, not in --allow: {text}" if text else None)

    def check(self, now: float) -> None:
        """Once a second or so (the pump), and at the end: count what the gates refused
        (not in ``process``, which runs for every pass of the UDP loop), and stop naming a
        robot as over the rate cap FLOOD_SHOWN_S after its last refusal."""
        with self._state_lock:
            for tally in self._gates:
                if tally.gate.refused != tally.seen:
                    self._count_gate(tally, now)
            self._show_refusals(now)

    def _refuse(self, failure: Failure) -> None:
        self.errors[failure.reason] += 1
        self.last_error = str(failure)
        session = self.sessions.get(failure.robot) if failure.robot else None
        if session is not None:
            session.stats.errors[failure.reason] += 1

    def tick(self, now: float) -> None:
        """Move robots silent for longer than quiet_after_s to QUIET."""
        with self._state_lock:
            oldest_live_rx = math.inf
            for session in self.sessions.values():
                if session.state is LinkState.LIVE:
                    if now - session.stats.last_rx > self.quiet_after_s:
                        session.move(LinkEvent.SILENCE)
                    elif session.stats.last_rx < oldest_live_rx:
                        oldest_live_rx = session.stats.last_rx
            self._oldest_live_rx = oldest_live_rx

    def snapshot(self, now: float, loop_stats: bool = True) -> dict[str, RobotSnapshot]:
        """Every robot now. The lock is taken robot by robot, and only while
        the session is read, not while its rows are copied (see
        ``Session.snapshot``): the receive loop never waits for a snapshot."""
        with self._state_lock:
            sessions = list(self.sessions.values())
        return {session.robot: session.snapshot(now, self._state_lock, loop_stats) for session in sessions}

    def cut(self, robot: str, since_rx: float | None = None) -> Cut:
        """One robot's buffered rows (those whose rx is later than ``since_rx``, with it),
        uncopied: ``Cut.rows`` copies them, ``Cut.pieces`` reads them in place. KeyError
        for an unknown robot."""
        with self._state_lock:
            return self.sessions[robot].cut(since_rx)

    def history(self, robot: str, since_rx: float | None = None) -> dict[str, np.ndarray]:
        """Copies of one robot's buffered rows, oldest first (see ``_RING_FIELDS``);
        with ``since_rx`` only the rows whose rx is later than it. They are
        copied after the lock is released."""
        with self._state_lock:
            held = self.sessions[robot].cut(since_rx)
        return held.rows()


class _GateTally:
    """A transport's gate and what the hub has counted of it so far."""

    def __init__(self, gate: Gate) -> None:
        self.gate = gate
        self.seen = 0
        self.over: dict[str, int] = {}
        self.refused: dict[str, int] = {}


