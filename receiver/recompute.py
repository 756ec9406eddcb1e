"""Independent recompute of one robot's pose from its counts, and the disagreement.

Owns the per-robot pipeline: classify samples (counts.py), turn count changes
into body deltas (kinematics.py), integrate (integrate.py), convert the
robot's reported pose (conventions.py) and compare. One ``Tracker`` carries
state between pieces, so a whole recording fed at once and a live stream fed
sample by sample give the same poses. Pure: arrays in, arrays out.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from receiver.conventions import imu_heading_change, reported_to_rep103
from receiver.counts import ACCEPTED, ANCHORS, Kind, classify, count_change
from receiver.integrate import integrate, wrap_angle
from receiver.kinematics import Kinematics
from receiver.profile import Profile


@dataclass
class Columns:
    """One robot's samples in arrival order, as arrays (NaN where a field was absent)."""

    seq: np.ndarray  # (N,) int64
    t: np.ndarray  # (N,) float, robot clock, s
    ticks: np.ndarray  # (N, n_wheels) int64
    pose: np.ndarray  # (N, 3) float, robot's own conventions
    imu: np.ndarray  # (N,) float, robot's heading unit
    loop: np.ndarray  # (N,) float, s
    reset: np.ndarray  # (N,) bool
    rx: np.ndarray = field(default=None)  # (N,) float, receiver wall clock; NaN if unknown

    def __post_init__(self) -> None:
        if self.rx is None:
            self.rx = np.full(len(self.seq), np.nan)

    def __len__(self) -> int:
        return len(self.seq)

    def take(self, index: np.ndarray) -> Columns:
        return Columns(*(getattr(self, name)[index] for name in COLUMN_NAMES))


COLUMN_NAMES = ("seq", "t", "ticks", "pose", "imu", "loop", "reset", "rx")


def concat_columns(parts: list[Columns]) -> Columns:
    if len(parts) == 1:
        return parts[0]
    return Columns(*(np.concatenate([getattr(p, name) for p in parts]) for name in COLUMN_NAMES))


def columns_from_samples(samples: list, n_wheels: int) -> Columns:
    """Columns from decoded ``protocol.Sample`` objects of one robot."""
    nan = float("nan")
    n = len(samples)
    return Columns(
        seq=np.fromiter((s.seq for s in samples), dtype=np.int64, count=n),
        t=np.fromiter((s.t for s in samples), dtype=float, count=n),
        ticks=np.array([s.ticks for s in samples], dtype=np.int64).reshape(n, n_wheels),
        pose=np.array([s.pose if s.pose is not None else (nan, nan, nan) for s in samples], dtype=float).reshape(n, 3),
        imu=np.fromiter((nan if s.imu is None else s.imu for s in samples), dtype=float, count=n),
        loop=np.fromiter((nan if s.loop is None else s.loop for s in samples), dtype=float, count=n),
        reset=np.fromiter((s.reset for s in samples), dtype=bool, count=n),
        rx=np.fromiter((nan if s.rx is None else s.rx for s in samples), dtype=float, count=n),
    )


@dataclass
class Result:
    """The accepted samples of a piece, with both poses in REP 103.

    Headings are continuous (unwrapped) radians; position in the profile's
    distance unit. ``reported`` rows are NaN where the robot sent no pose.
    """

    seq: np.ndarray
    t: np.ndarray
    rx: np.ndarray
    kind: np.ndarray
    pose: np.ndarray
    reported: np.ndarray
    loop_s: np.ndarray
    dropped: dict[str, int]

    @property
    def position_error(self) -> np.ndarray:
        return np.hypot(self.pose[:, 0] - self.reported[:, 0], self.pose[:, 1] - self.reported[:, 1])

    @property
    def heading_error(self) -> np.ndarray:
        return wrap_angle(self.pose[:, 2] - self.reported[:, 2])


class Tracker:
    """Streaming recompute for one robot; feed it pieces of any size."""

    def __init__(self, profile: Profile, method: str = "arc") -> None:
        self.profile = profile
        self.method = method
        self.kinematics = Kinematics(profile)
        self.pose = np.zeros(3)
        self._last: tuple[int, float] | None = None
        self._last_ticks: np.ndarray | None = None
        self._last_imu = np.nan

    @property
    def started(self) -> bool:
        return self._last is not None

    def feed(self, cols: Columns) -> Result:
        kinds_all = classify(cols.seq, cols.t, cols.reset, self._last)
        accepted = np.isin(kinds_all, ACCEPTED)
        dropped = {
            "duplicate": int(np.count_nonzero(kinds_all == Kind.DUPLICATE)),
            "late": int(np.count_nonzero(kinds_all == Kind.LATE)),
        }
        c = cols.take(np.flatnonzero(accepted))
        kinds = kinds_all[accepted]
        n = len(c)
        if n == 0:
            return self._empty(dropped)
        is_anchor = np.isin(kinds, ANCHORS)

        prev_ticks = np.vstack([self._last_ticks if self._last_ticks is not None else c.ticks[:1], c.ticks[:-1]])
        dcounts = count_change(c.ticks, prev_ticks)
        dcounts[is_anchor] = 0
        dth_imu = None
        if self.profile.uses_imu:
            prev_imu = np.concatenate([[self._last_imu], c.imu[:-1]])
            dth_imu = imu_heading_change(c.imu, prev_imu, self.profile.reported)
        deltas = self.kinematics.body_delta(self.kinematics.travel(dcounts), dth_imu)
        deltas[is_anchor] = 0.0

        reported = reported_to_rep103(c.pose, self.profile.reported)
        anchors = np.where(is_anchor[:, None], reported, np.nan)
        anchors[(kinds == Kind.FIRST) & ~np.isfinite(reported).all(axis=1)] = 0.0
        poses = integrate(deltas, self.pose, self.method, anchors)

        prev_seq = np.concatenate([[self._last[0] if self._last else c.seq[0]], c.seq[:-1]])
        prev_t = np.concatenate([[self._last[1] if self._last else c.t[0]], c.t[:-1]])
        gap = (c.seq - prev_seq) % 2**32
        derived = np.where((kinds == Kind.STEP) & (gap > 0), (c.t - prev_t) / np.maximum(gap, 1), np.nan)
        loop_s = np.where(np.isfinite(c.loop), c.loop, derived)

        self.pose = poses[-1].copy()
        self._last = (int(c.seq[-1]), float(c.t[-1]))
        self._last_ticks = c.ticks[-1].copy()
        self._last_imu = float(c.imu[-1])
        return Result(c.seq, c.t, c.rx, kinds, poses, reported, loop_s, dropped)

    def _empty(self, dropped: dict[str, int]) -> Result:
        e = np.empty(0)
        return Result(e.astype(np.int64), e, e, e.astype(np.int8), np.empty((0, 3)), np.empty((0, 3)), e, dropped)

