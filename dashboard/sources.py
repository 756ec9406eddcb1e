"""Where the page's data comes from: a live hub, or a recording replayed into one.

Owns the replay's controls (play, pause, speed, seek). Which source a tab
shows is tabs.py. A replay feeds the same ``Hub.ingest``/``process`` calls the
transports cause; seeking back rebuilds the hub and feeds it up to the new
position as fast as it can. Never draws anything and never serves HTTP.
"""

from __future__ import annotations

import logging
import threading
import time
from typing import Callable

import numpy as np

from receiver.errors import UsageError
from receiver.formats.recording import RecordingData
from receiver.live.hub import Hub
from receiver.live.raw_history import RawHistory
from receiver.live.replay import feed_hub, recorded_samples
from receiver.live.supervise import reason
from receiver.odometry.robot import Profile

REPLAY_STEP_S = 0.02  # how often a playing replay feeds the hub (wall clock)
REPLAY_SPEEDS = (0.25, 0.5, 1.0, 2.0, 5.0, 10.0)
log = logging.getLogger("podwatch.replay")


class LiveSource:
    """A running receiver's hub; the time line is the receiver's wall clock."""

    kind = "live"

    def __init__(self, hub: Hub, clock: Callable[[], float] = time.time) -> None:
        self.hub = hub
        self.raw = RawHistory()  # the robots' own samples, for the live checks
        hub.add_listener(self.raw)
        self.clock = clock
        self.origin = clock()
        self.generation = 0
        self.label = "live"

    def now(self) -> float:
        """The receiver's wall clock, s since the epoch: the time line of the hub's rx."""
        return self.clock()


class ReplaySource:
    """A recording fed into its own hub at a chosen speed; starts paused at the beginning.

    The time line is the recording's: its rx stamps (or robot clock when a
    file of bare messages has none). ``generation`` changes whenever the hub
    is rebuilt, so that a page knows to redraw everything.
    """

    kind = "replay"

    def __init__(
        self,
        data: RecordingData,
        profiles: dict[str, Profile] | None = None,
        clock: Callable[[], float] = time.monotonic,
    ) -> None:
        self.samples, self.stamps = recorded_samples(data)
        if not self.samples:
            raise UsageError(f"{data.path}: the recording holds no messages")
        self.recording = data  # the whole recording's columns, for the page's workbench
        self.profiles = {**data.profiles, **(profiles or {})}
        self.label = str(data.path)
        self.clock = clock
        self.origin = float(self.stamps[0])
        self.duration_s = float(self.stamps[-1] - self.stamps[0])
        self.speed = 1.0
        self.playing = False
        self.generation = 0
        self._lock = threading.RLock()
        self._rebuild()
        self._wall = clock()
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None

    def _rebuild(self) -> None:
        self.hub = Hub(self.profiles)
        self.raw = RawHistory()
        self.hub.add_listener(self.raw)
        self._next = 0  # index of the next sample to feed
        self._position = self.origin
        self.generation += 1

    def now(self) -> float:
        """Where the replay is on the recording's time line (its rx stamps), s."""
        return self._position

    @property
    def position_s(self) -> float:
        """Seconds since the start of the recording."""
        return self._position - self.origin

    def play(self) -> None:
        """Play on from the current position (from the start when at the end)."""
        self.hub.health.set_problem("replay", None)
        with self._lock:
            if self._next >= len(self.samples):
                self.seek(0.0)
            self._wall = self.clock()
            self.playing = True

    def pause(self) -> None:
        """Feed what is due, then hold the position."""
        with self._lock:
            self.advance()
            self.playing = False

    def set_speed(self, speed: float) -> None:
        """Play at ``speed`` times real time from now on; UsageError unless positive."""
        if not speed > 0:
            raise UsageError(f"replay speed must be positive, got {speed!r}")
        with self._lock:
            self.advance()
            self.speed = float(speed)

    def seek(self, position_s: float) -> None:
        """Jump to ``position_s`` seconds after the start (clamped to the recording)."""
        with self._lock:
            target = self.origin + min(max(float(position_s), 0.0), self.duration_s)
            if target < self._position:
                self._rebuild()
            self._feed_until(target)
            self._wall = self.clock()

    def advance(self) -> None:
        """Feed what is due since the last call while playing; stop at the end."""
        with self._lock:
            wall = self.clock()
            if self.playing:
                self._feed_until(min(self._position + (wall - self._wall) * self.speed, float(self.stamps[-1])))
                if self._next >= len(self.samples):
                    self.playing = False
            self._wall = wall

    def _feed_until(self, target: float) -> None:
        end = int(np.searchsorted(self.stamps, target, side="right"))
        feed_hub(self.hub, self.samples, self.stamps, self._next, end)
        self._next = max(self._next, end)
        self._position = target

    def start(self) -> None:
        """Run the replay clock in a thread (a playing replay moves on its own)."""
        self._thread = threading.Thread(target=self._run, name="podwatch-replay", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        while not self._stop.wait(REPLAY_STEP_S):
            try:
                self.advance()
            except Exception as exc:  # the thread's top: say so on the page and pause, never die quietly
                why = f"replay paused at {self.position_s:.1f} s: {reason(exc)}"
                log.error(why)
                with self._lock:
                    self.playing = False
                self.hub.health.set_problem("replay", why)

    def stop(self) -> None:
        """End the replay clock's thread (``start``); the position stays where it is."""
        self._stop.set()
        if self._thread is not None:
            self._thread.join()
