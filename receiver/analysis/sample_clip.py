"""One robot's samples prepared for the offline checks: count changes, anchors, poses.

Owns the step from received columns to what diagnosis, the guided check and
calibration all work on: accepted samples only (counts.py decides), the
count change since the previous kept sample, and where the robot re-anchored.
Pure numpy; never integrates a pose and never reads a file.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from receiver.errors import UsageError
from receiver.odometry.columns import Columns
from receiver.odometry.counts import ACCEPTED, ANCHORS, CLOCK_BACK_TOLERANCE_S, SEQ_MODULUS, classify, count_change

# Below this many samples no check can say anything (a tenth of a second at 100 Hz).
MIN_SAMPLES = 10


@dataclass(frozen=True)
class SampleClip:
    """Accepted samples of one robot, in order.

    ``dcounts[k]`` is the count change from sample k - 1 to k (zero where
    ``anchor[k]``: the first sample, a reset or a restart, whose jump is never
    motion). ``pose`` is the robot's reported pose in its own conventions,
    ``imu`` its IMU heading in its own unit (NaN where absent).
    """

    t: np.ndarray  # (N,) robot clock, s
    dcounts: np.ndarray  # (N, n_wheels) float
    anchor: np.ndarray  # (N,) bool
    pose: np.ndarray  # (N, 3)
    imu: np.ndarray  # (N,)
    loops: np.ndarray | None = None  # (N,) the robot's loops each step spans (1 unless samples were lost)

    def __len__(self) -> int:
        return len(self.t)

    @property
    def duration_s(self) -> float:
        """Robot-clock span from the first sample to the last, s (0 when empty)."""
        return float(self.t[-1] - self.t[0]) if len(self.t) else 0.0


def clip_from_columns(cols: Columns, need_pose: bool = False) -> SampleClip:
    """The accepted samples of ``cols``; with ``need_pose`` only those with a reported pose.

    Dropping a sample without a pose merges its count change into the next
    kept one (counts are cumulative), and a kept sample becomes an anchor when
    the robot re-anchored since the previous kept one.
    """
    kinds = classify(cols.seq, cols.t, cols.reset)
    accepted = np.isin(kinds, ACCEPTED)
    kept = cols.take(np.flatnonzero(accepted))
    anchor = np.isin(kinds[accepted], ANCHORS)
    if need_pose:
        segment = np.cumsum(anchor)
        keep = np.flatnonzero(np.isfinite(kept.pose).all(axis=1))
        if len(keep) < MIN_SAMPLES:
            raise UsageError(
                f"only {len(keep)} samples carry the robot's own pose; need at least {MIN_SAMPLES} to compare"
            )
        anchor = np.concatenate([[True], segment[keep][1:] != segment[keep][:-1]])
        kept = kept.take(keep)
    elif len(kept) < MIN_SAMPLES:
        raise UsageError(f"only {len(kept)} usable samples; need at least {MIN_SAMPLES}")
    dcounts = np.zeros(kept.ticks.shape)
    dcounts[1:] = count_change(kept.ticks[1:], kept.ticks[:-1])
    dcounts[anchor] = 0.0
    loops = np.ones(len(kept), dtype=np.int64)
    loops[1:] = np.maximum((kept.seq[1:] - kept.seq[:-1]) % SEQ_MODULUS, 1)
    loops[anchor] = 1
    return SampleClip(t=kept.t, dcounts=dcounts, anchor=anchor, pose=kept.pose, imu=kept.imu, loops=loops)


def last_seconds(cols: Columns, seconds: float) -> Columns:
    """The trailing ``seconds`` of a robot's columns, by its own clock.

    Only samples since the robot's clock last went back by more than a late
    packet could (a reboot) count, so that an old run with a later clock never
    slips into the window.
    """
    if seconds <= 0.0:
        raise UsageError(f"window {seconds!r} s: expected a positive number of seconds")
    n = len(cols)
    if n == 0:
        return cols
    back = np.flatnonzero(np.diff(cols.t) < -CLOCK_BACK_TOLERANCE_S)
    first = int(back[-1]) + 1 if len(back) else 0
    t = cols.t[first:]
    start = first + int(np.searchsorted(np.maximum.accumulate(t), t[-1] - seconds, side="left"))
    return cols.take(np.arange(start, n))
