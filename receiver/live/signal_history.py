"""The team's own signals (a message's "data") of each robot for the last few minutes.

Owns a bounded, time-windowed store of signal values by robot and name, kept
for the page: ``RawHistory.signals(robot, since_rx)`` hands one robot's
signals over a time window as arrays, name by name. One row per value
(rx, name, value), so a robot that sends a signal only now and then costs
only those rows. Not thread-safe on its own: RawHistory calls it under its
lock. Never reads a clock and never decodes.
"""

from __future__ import annotations

import numpy as np

from receiver.live.ring_buffer import Cut, PendingRows, RingBuffer

# Bounds against a robot that invents names or floods values: 32 signals a
# message at 200 messages a second for the raw window's 3 minutes is about
# 1.2 M rows (24 bytes each).
MAX_NAMES_PER_ROBOT = 256
DEFAULT_SIGNAL_MAX_ROWS = 1_200_000
_FLUSH_ROWS = 256

Signals = dict[str, tuple[np.ndarray, np.ndarray]]  # name -> (rx (N,) s, values (N,)), oldest first


class _RobotSignals:
    """One robot's signal rows, the names seen (index = the rows' name number)."""

    def __init__(self, window_s: float, max_rows: int) -> None:
        self.names: list[str] = []
        self.number: dict[str, int] = {}
        self.ring = RingBuffer({"rx": (float, None), "value": (float, None), "name": (np.int64, None)},
                               window_s=window_s, max_rows=max_rows)
        self.pending = PendingRows(self.ring, (("rx", None), ("value", None)), (("name", None),), _FLUSH_ROWS)


class SignalStore:
    """Per robot, the signal values of the last ``window_s`` seconds (by rx), at most ``max_rows``."""

    def __init__(self, window_s: float, max_rows: int = DEFAULT_SIGNAL_MAX_ROWS) -> None:
        self.window_s = window_s
        self.max_rows = max_rows
        self.names_refused = 0  # values of names past MAX_NAMES_PER_ROBOT, not kept
        self._robots: dict[str, _RobotSignals] = {}

    def add(self, robot: str, rx: float, data: dict[str, float]) -> None:
        """Keep one accepted sample's signals (validated names and finite values), received at ``rx``."""
        held = self._robots.get(robot)
        if held is None:
            held = self._robots[robot] = _RobotSignals(self.window_s, self.max_rows)
        pending, number = held.pending, held.number
        for name, value in data.items():
            k = number.get(name)
            if k is None:
                if len(held.names) >= MAX_NAMES_PER_ROBOT:
                    self.names_refused += 1
                    continue
                k = number[name] = len(held.names)
                held.names.append(name)
            pending.floats += (rx, value)
            pending.ints.append(k)
        if len(pending.ints) >= pending.limit:
            pending.flush()

    def cut(self, robot: str, since_rx: float | None = None) -> tuple[list[str], Cut] | None:
        """The robot's names and rows (received after ``since_rx``) to copy later; None if it sent none."""
        held = self._robots.get(robot)
        if held is None:
            return None
        held.pending.flush()
        return list(held.names), held.ring.cut(since_rx)


def by_name(names: list[str], cut: Cut) -> Signals:
    """Rows of a ``SignalStore.cut`` as (rx, values) per name, names in order of first appearance."""
    rows = cut.rows()
    number = rows["name"]
    out: Signals = {}
    for k in np.unique(number):  # a few names: one mask each
        mask = number == k
        out[names[k]] = (rows["rx"][mask], rows["value"][mask])
    return dict(sorted(out.items(), key=lambda item: names.index(item[0])))
