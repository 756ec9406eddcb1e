"""Independent recompute of one robot's pose from its counts, and the disagreement.

Owns the per-robot pipeline: classify samples (counts.py), turn count changes
into body deltas (kinematics.py), integrate (integrate.py), convert the
robot's reported pose (conventions.py) and compare. One ``Tracker`` carries
state between pieces, so a whole recording fed at once and a live stream fed
sample by sample give the same poses. Pure: arrays in, arrays out.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from itertools import chain
from operator import attrgetter

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
    """Columns from decoded ``protocol.Sample`` objects of one robot.

    attrgetter with np.fromiter, and chain for the nested lists, keep this at
    about a tenth of the cost of np.array over lists of lists.
    """
    nan = float("nan")
    n = len(samples)

    def floats(name: str) -> np.ndarray:
        values = list(map(attrgetter(name), samples))
        absent = values.count(None)
        if absent == n:
            return np.full(n, nan)
        if absent:
            values = [nan if v is None else v for v in values]
        return np.fromiter(values, dtype=float, count=n)

    poses = list(map(attrgetter("pose"), samples))
    if None in poses:
        poses = [(nan, nan, nan) if p is None else p for p in poses]
    return Columns(
        seq=np.fromiter(map(attrgetter("seq"), samples), dtype=np.int64, count=n),
        t=np.fromiter(map(attrgetter("t"), samples), dtype=float, count=n),
        ticks=np.fromiter(chain.from_iterable(map(attrgetter("ticks"), samples)), dtype=np.int64, count=n * n_wheels).reshape(n, n_wheels),
        pose=np.fromiter(chain.from_iterable(poses), dtype=float, count=3 * n).reshape(n, 3),
        imu=floats("imu"),
        loop=floats("loop"),
        reset=np.fromiter(map(attrgetter("reset"), samples), dtype=bool, count=n),
        rx=floats("rx"),
    )


# Lookup tables indexed by Kind: np.isin costs tens of microseconds on the
# few-sample pieces a live receiver feeds, a table lookup about one.
_IS_ACCEPTED = np.zeros(len(Kind), dtype=bool)
_IS_ACCEPTED[list(ACCEPTED)] = True
_IS_ANCHOR = np.zeros(len(Kind), dtype=bool)
_IS_ANCHOR[list(ANCHORS)] = True


def loop_periods(
    kinds: np.ndarray, seq: np.ndarray, t: np.ndarray, loop: np.ndarray, last: tuple[int, float] | None
) -> np.ndarray:
    """Loop period (N,) of accepted samples, s: the robot's own ``loop`` where
    sent, else the clock step divided by the seq step (NaN at anchors).

    ``last`` is the (seq, t) of the accepted sample before these, if any.
    """
    prev_seq = np.concatenate([[last[0] if last else seq[0]], seq[:-1]])
    prev_t = np.concatenate([[last[1] if last else t[0]], t[:-1]])
    gap = (seq - prev_seq) % 2**32
    derived = np.where((kinds == Kind.STEP) & (gap > 0), (t - prev_t) / np.maximum(gap, 1), np.nan)
    return np.where(np.isfinite(loop), loop, derived)


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
        accepted = _IS_ACCEPTED[kinds_all]
        dropped = {
            "duplicate": int(np.count_nonzero(kinds_all == Kind.DUPLICATE)),
            "late": int(np.count_nonzero(kinds_all == Kind.LATE)),
        }
        c = cols if accepted.all() else cols.take(np.flatnonzero(accepted))
        kinds = kinds_all[accepted]
        n = len(c)
        if n == 0:
            return self._empty(dropped)
        is_anchor = _IS_ANCHOR[kinds]

        dcounts = np.empty_like(c.ticks)
        dcounts[1:] = count_change(c.ticks[1:], c.ticks[:-1])
        dcounts[0] = 0 if self._last_ticks is None else count_change(c.ticks[0], self._last_ticks)
        dcounts[is_anchor] = 0
        dth_imu = None
        if self.profile.uses_imu:
            prev_imu = np.concatenate([[self._last_imu], c.imu[:-1]])
            dth_imu = imu_heading_change(c.imu, prev_imu, self.profile.reported)
        deltas = self.kinematics.body_delta(self.kinematics.travel(dcounts), dth_imu)
        deltas[is_anchor] = 0.0

        reported = reported_to_rep103(c.pose, self.profile.reported)
        # Anchors re-set the pose to the reported one; a first sample without a
        # pose anchors at the origin, a reset or restart without one carries on.
        anchor_at = np.flatnonzero(is_anchor)
        anchor_pose = reported[anchor_at]
        has_pose = np.isfinite(anchor_pose).all(axis=1)
        first_without = (kinds[anchor_at] == Kind.FIRST) & ~has_pose
        anchor_pose[first_without] = 0.0
        keep = has_pose | first_without
        poses = integrate(deltas, self.pose, self.method, anchor_at[keep], anchor_pose[keep])

        loop_s = loop_periods(kinds, c.seq, c.t, c.loop, self._last)

        self.pose = poses[-1].copy()
        self._last = (int(c.seq[-1]), float(c.t[-1]))
        self._last_ticks = c.ticks[-1].copy()
        self._last_imu = float(c.imu[-1])
        return Result(c.seq, c.t, c.rx, kinds, poses, reported, loop_s, dropped)

    def _empty(self, dropped: dict[str, int]) -> Result:
        e = np.empty(0)
        return Result(e.astype(np.int64), e, e, e.astype(np.int8), np.empty((0, 3)), np.empty((0, 3)), e, dropped)

