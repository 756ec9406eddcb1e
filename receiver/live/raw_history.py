"""The raw samples of each robot for the last few minutes, as a hub listener.

Owns a bounded, time-windowed copy of what the robots sent (counts, own
pose, IMU, loop, reset, with the receiver's rx), so that the live checks
(diagnosis, the guided check) can run on the same ``Columns`` the offline
commands read from a recording. The hub's ring buffers keep only results.
Never reads a clock and never decodes: it is handed accepted samples.
"""

from __future__ import annotations

import math
import threading

import numpy as np

from receiver.formats.protocol import Sample
from receiver.live.ring_buffer import RingBuffer
from receiver.odometry.columns import Columns

# Long enough for a guided check done at a walking pace and for the longest
# diagnosis window the page offers; bounded so a 1 kHz robot costs at most
# about 15 MB (four wheels: 13 numbers a row).
DEFAULT_RAW_WINDOW_S = 180.0
DEFAULT_RAW_MAX_ROWS = 180_000
# Rows wait in flat lists of numbers and reach the ring in bulk (at this many,
# or when read): one numpy write per column costs more than a row of appends.
# Flat lists, not a tuple or a Sample per row, keep them out of the garbage
# collector's generations (the same reason as in session.py).
_FLUSH_ROWS = 256
_FLOATS = ("rx", "t", "pose", "imu", "loop")  # pose 3 wide
_FLOATS_PER_ROW = 7
_NAN3 = (math.nan, math.nan, math.nan)


class _RobotRaw:
    def __init__(self, n_wheels: int, window_s: float, max_rows: int) -> None:
        self.n_wheels = n_wheels
        self.ring = RingBuffer(
            {"rx": (float, None), "seq": (np.int64, None), "t": (float, None), "ticks": (np.int64, n_wheels),
             "pose": (float, 3), "imu": (float, None), "loop": (float, None), "reset": (bool, None)},
            window_s=window_s, max_rows=max_rows,
        )
        self.floats: list[float] = []  # pending rows, as _FLOATS
        self.ints: list[int] = []  # their seq, reset, then the counts

    def flush(self) -> None:
        if not self.floats:
            return
        f = np.array(self.floats, dtype=float).reshape(-1, _FLOATS_PER_ROW)
        i = np.array(self.ints, dtype=np.int64).reshape(-1, 2 + self.n_wheels)
        self.ring.append(rx=f[:, 0], t=f[:, 1], pose=f[:, 2:5], imu=f[:, 5], loop=f[:, 6],
                         seq=i[:, 0], reset=i[:, 1].astype(bool), ticks=i[:, 2:])
        self.floats.clear()
        self.ints.clear()


class RawHistory:
    """Per robot, the accepted samples of the last ``window_s`` seconds (by rx).

    Register with ``Hub.add_listener``: it is called with every accepted
    sample, already given its rx and checked for its number of counts. Safe
    to read from another thread than the one feeding it.
    """

    def __init__(self, window_s: float = DEFAULT_RAW_WINDOW_S, max_rows: int = DEFAULT_RAW_MAX_ROWS) -> None:
        self.window_s = window_s
        self.max_rows = max_rows
        self._robots: dict[str, _RobotRaw] = {}
        self._lock = threading.Lock()

    def __call__(self, accepted: list[tuple[Sample, str]], _updates: object = None) -> None:
        nan, robots = math.nan, self._robots
        with self._lock:
            for s, _source in accepted:
                raw = robots.get(s.robot)
                if raw is None or raw.n_wheels != len(s.ticks):
                    # A new robot, or one the hub now expects another number
                    # of counts from: its old rows cannot share columns.
                    raw = robots[s.robot] = _RobotRaw(len(s.ticks), self.window_s, self.max_rows)
                # the row, as _FLOATS and then seq, reset and the counts (inline: this runs per sample)
                pose = s.pose if s.pose is not None else _NAN3
                floats = raw.floats
                floats += (
                    nan if s.rx is None else s.rx, s.t, pose[0], pose[1], pose[2],
                    nan if s.imu is None else s.imu, nan if s.loop is None else s.loop,
                )
                raw.ints += (s.seq, s.reset, *s.ticks)
                if len(floats) >= _FLUSH_ROWS * _FLOATS_PER_ROW:
                    raw.flush()

    def robots(self) -> list[str]:
        with self._lock:
            return sorted(self._robots)

    def latest_rx(self, robot: str) -> float | None:
        """The rx of the robot's newest sample, or None before its first."""
        with self._lock:
            raw = self._robots.get(robot)
            if raw is None:
                return None
            raw.flush()
            newest = raw.ring.newest()
            return None if newest is None else float(newest["rx"])

    def columns(self, robot: str, since_rx: float | None = None) -> Columns | None:
        """Copies of the robot's samples in arrival order, with ``since_rx`` only
        those received after it; None for a robot never heard."""
        with self._lock:
            raw = self._robots.get(robot)
            if raw is None:
                return None
            raw.flush()
            held = raw.ring.cut(since_rx)
        c = held.rows()  # after the lock: the receive loop's listener call never waits for this copy
        return Columns(seq=c["seq"], t=c["t"], ticks=c["ticks"], pose=c["pose"], imu=c["imu"], loop=c["loop"],
                       reset=c["reset"], rx=c["rx"])
