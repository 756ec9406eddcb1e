"""The hub: every robot's session behind one ingest queue.

Owns the receiver-level rules the pure decoder cannot apply (the number of
counts each robot's profile expects, the robot limit), handing accepted
samples to the recorder and to the sessions, and telling listeners. The
transports call ``ingest`` from their own threads; it only queues.
``process`` does the work in small batches. It never opens a socket and
never reads a clock: times are arguments.
"""

from __future__ import annotations

import math
import threading
from collections import Counter
from typing import Callable, Protocol, Sequence

import numpy as np

from receiver.formats.protocol import Failure, PoseMessage, Reason, Sample
from receiver.live.ring_buffer import Cut
from receiver.live.session import (
    DEFAULT_MAX_ROWS,
    DEFAULT_QUIET_AFTER_S,
    DEFAULT_WINDOW_S,
    LinkEvent,
    LinkState,
    RobotSnapshot,
    Session,
)
from receiver.odometry.robot import Profile

DEFAULT_MAX_ROBOTS = 64  # DESIGN.md, wire protocol: 64 robots at once by default


class Recorder(Protocol):
    """What the hub needs of a recording writer (formats.recording_writer.RecordingWriter)."""

    def write(
        self, samples: list[Sample], rx: float | None = None, raws: Sequence[bytes | None] | None = None
    ) -> None:
        """Buffer accepted samples (stamped with ``rx`` when given); ``raws`` are their bytes as received."""

    def flush(self, now: float | None = None) -> bool:
        """Push buffered lines on, at most once per flush interval of ``now``; True when it did."""


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
    ) -> None:
        self.profiles = dict(profiles or {})
        self.recorder = recorder
        self.max_robots = max_robots
        self.window_s = window_s
        self.max_rows = max_rows
        self.quiet_after_s = quiet_after_s
        self.method = method
        self.errors: Counter = Counter()  # every refused message, by reason
        self.last_error: str | None = None
        self.sessions: dict[str, Session] = {}
        self._listeners: list[tuple[Listener | RawsListener, bool]] = []
        self._pending: list[tuple[list[Sample], list[Failure], float, str, list[bytes] | None]] = []
        self._pending_lock = threading.Lock()
        self._state_lock = threading.RLock()
        self._has_pending = threading.Event()
        # No LIVE session's last_rx is older than this (any may be newer):
        # while now is within quiet_after_s of it, none can have gone quiet,
        # and ``process`` skips the walk over every session (7 us for 20).
        self._oldest_live_rx = math.inf
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
        # Set only when clear (``process`` clears it under the same lock, after
        # taking the queue): Event.set is pure Python, as dear as a decode.
        if wake and not self._has_pending.is_set():
            self._has_pending.set()

    def wait(self, timeout: float) -> bool:
        """Block until something is queued (True) or the timeout passes (False)."""
        return self._has_pending.wait(timeout)

    def process(self, now: float) -> int:
        """Apply everything queued since the last call; returns samples accepted."""
        with self._pending_lock:
            batch, self._pending = self._pending, []
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
                    if (session is None or len(sample.ticks) != session.n_wheels) and not self._admit(sample):
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
            if self.recorder is not None:
                self.recorder.write(kept, raws=kept_raws)
                self.recorder.flush(now)
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

    def _admit(self, sample: Sample) -> bool:
        """The receiver-level rules: robot limit and ticks length."""
        session = self.sessions.get(sample.robot)
        if session is None:
            if len(self.sessions) >= self.max_robots:
                self._refuse(
                    Failure(Reason.TOO_MANY_ROBOTS, f"robot {sample.robot!r} refused: already {self.max_robots} robots")
                )
                return False
            session = self.sessions[sample.robot] = self._new_session(sample.robot, None)
        if session.n_wheels is None and sample.ticks:
            session.n_wheels = len(sample.ticks)
        if len(sample.ticks) != session.n_wheels:
            expected = "at least one" if session.n_wheels is None else str(session.n_wheels)
            detail = f"robot {sample.robot!r} sent {len(sample.ticks)} counts, expected {expected}"
            self._refuse(Failure(Reason.WRONG_TICKS_LENGTH, detail, sample.robot))
            return False
        return True

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


