"""The raw samples of each robot for the last few minutes, as a hub listener.

Owns a bounded, time-windowed copy of what the robots sent (counts, own
pose, IMU, loop, reset, with the receiver's rx), so that the live checks
(diagnosis, the guided check) can run on the same ``Columns`` the offline
commands read from a recording, and the team's own signals ("data") for the
page (``signals``; stored by signal_history.py). The hub's ring buffers keep
only results. Never reads a clock and never decodes: it is handed accepted samples.
"""

from __future__ import annotations

import math
import threading

import numpy as np

from receiver.formats.protocol import Sample
from receiver.live.ring_buffer import SMALL_BLOCK_ROWS, Cut, PendingRows, RingBuffer
from receiver.live.signal_history import Signals, SignalStore, by_name
from receiver.odometry.columns import Columns

# As long as the page's longest window (dashboard/settings.py WINDOWS_S), so
# that the profile editor recomputes the whole window shown, and long enough
# for a guided check at a walking pace and the longest diagnosis window.
DEFAULT_RAW_WINDOW_S = 600.0
DEFAULT_RAW_MAX_ROWS = 600_000
# Robots kept: twice the hub's robot limit, since the hub frees the slots of
# silent robots without a profile and new names take them. Past it, a new
# robot takes the place of the one heard least recently, so names invented
# by a sender cannot grow this without bound (each robot costs a block at least).
DEFAULT_RAW_MAX_ROBOTS = 128
# Rows every robot shares (54 MB for three wheels, tests/bench/bench_workbench.py,
# in blocks of SMALL_BLOCK_ROWS): one robot at 1 kHz or four at 200 Hz keep
# the whole 600 s, two at 1 kHz five minutes each, and names invented under
# the rate cap cannot grow this past it.
DEFAULT_RAW_TOTAL_ROWS = 600_000
_FLUSH_ROWS = 256
_FLOAT_COLUMNS = (("rx", None), ("t", None), ("pose", 3), ("imu", None), ("loop", None))
_NAN3 = (math.nan, math.nan, math.nan)


class _RobotRaw:
    """One robot's ring of raw samples, and the rows waiting to reach it."""

    def __init__(self, n_wheels: int, window_s: float, max_rows: int) -> None:
        self.n_wheels = n_wheels
        self.last_rx: float | None = None  # the newest sample's rx, for choosing the robot to forget
        self.ring = RingBuffer(
            {"rx": (float, None), "seq": (np.int64, None), "t": (float, None), "ticks": (np.int64, n_wheels),
             "pose": (float, 3), "imu": (float, None), "loop": (float, None), "reset": (bool, None)},
            window_s=window_s, max_rows=max_rows, block_rows=SMALL_BLOCK_ROWS,
        )
        # Each row: its floats as _FLOAT_COLUMNS, then seq, reset and the counts as integers.
        self.pending = PendingRows(self.ring, _FLOAT_COLUMNS, (("seq", None), ("reset", None), ("ticks", n_wheels)),
                                   _FLUSH_ROWS)


class RawHistory:
    """Per robot, the accepted samples of the last ``window_s`` seconds (by rx).

    Register with ``Hub.add_listener``: it is called with every accepted
    sample, already given its rx and checked for its number of counts. Safe
    to read from another thread than the one feeding it.
    """

    def __init__(
        self, window_s: float = DEFAULT_RAW_WINDOW_S, max_rows: int = DEFAULT_RAW_MAX_ROWS,
        max_robots: int = DEFAULT_RAW_MAX_ROBOTS, total_rows: int = DEFAULT_RAW_TOTAL_ROWS,
    ) -> None:
        self.window_s = window_s
        self.max_rows = max_rows
        self.max_robots = max_robots
        self.total_rows = total_rows
        self._robots: dict[str, _RobotRaw] = {}
        self._signals = SignalStore(window_s)
        self._lock = threading.Lock()

    def __call__(self, accepted: list[tuple[Sample, str]], _updates: object = None) -> None:
        nan, robots = math.nan, self._robots
        with self._lock:
            for sample, _source in accepted:
                raw = robots.get(sample.robot)
                if raw is None or raw.n_wheels != len(sample.ticks):
                    # A new robot, or one the hub now expects another number
                    # of counts from: its old rows cannot share columns.
                    if raw is None and len(robots) >= self.max_robots:
                        del robots[min(robots, key=lambda name: robots[name].last_rx or -math.inf)]
                    raw = robots[sample.robot] = _RobotRaw(len(sample.ticks), self.window_s, self.max_rows)
                    each = min(self.max_rows, max(SMALL_BLOCK_ROWS, self.total_rows // len(robots)))
                    for other in robots.values():
                        other.ring.max_rows = each
                raw.last_rx = sample.rx
                # the row, as _FLOAT_COLUMNS and then seq, reset and the counts (inline: this runs per sample)
                pose = sample.pose if sample.pose is not None else _NAN3
                pending = raw.pending
                pending.floats += (
                    nan if sample.rx is None else sample.rx, sample.t, pose[0], pose[1], pose[2],
                    nan if sample.imu is None else sample.imu, nan if sample.loop is None else sample.loop,
                )
                ints = pending.ints
                ints += (sample.seq, sample.reset, *sample.ticks)
                if len(ints) >= pending.limit:
                    pending.flush()
                if sample.data:
                    self._signals.add(sample.robot, nan if sample.rx is None else sample.rx, sample.data)

    def robots(self) -> list[str]:
        """The names of the robots heard, sorted."""
        with self._lock:
            return sorted(self._robots)

    def latest_rx(self, robot: str) -> float | None:
        """The rx of the robot's newest sample, or None before its first."""
        with self._lock:
            raw = self._robots.get(robot)
            if raw is None:
                return None
            raw.pending.flush()
            newest = raw.ring.newest()
            return None if newest is None else float(newest["rx"])

    def signals(self, robot: str, since_rx: float | None = None) -> Signals:
        """The robot's own signals received after ``since_rx`` (all held, without it):
        name -> (rx, values) arrays, oldest first; empty for a robot that sent none."""
        with self._lock:
            held = self._signals.cut(robot, since_rx)
        return {} if held is None else by_name(*held)  # the copy after the lock, as in columns

    def signal_cut(self, robot: str, since_rx: float | None = None) -> tuple[list[str], Cut] | None:
        """The robot's signal names (in order of first appearance) and its signal rows received
        after ``since_rx``, uncopied: ``Cut.pieces`` reads them in place (rx, value and the
        name's number); None for a robot that sent none."""
        with self._lock:
            return self._signals.cut(robot, since_rx)

    def columns(self, robot: str, since_rx: float | None = None) -> Columns | None:
        """Copies of the robot's samples in arrival order, with ``since_rx`` only
        those received after it; None for a robot never heard."""
        with self._lock:
            raw = self._robots.get(robot)
            if raw is None:
                return None
            raw.pending.flush()
            held = raw.ring.cut(since_rx)
        rows = held.rows()  # after the lock: the receive loop's listener call never waits for this copy
        return Columns(seq=rows["seq"], t=rows["t"], ticks=rows["ticks"], pose=rows["pose"], imu=rows["imu"],
                       loop=rows["loop"], reset=rows["reset"], rx=rows["rx"])
