"""One robot's live session: its streaming recompute, ring buffers, link statistics and state.

Owns what the hub (hub.py) keeps per robot: the tracker when the robot has
a profile, a time window of result rows, counts of gaps, duplicates, late
samples and restarts, and the link state. It never opens a socket and never
reads a clock: times are arguments.
"""

from __future__ import annotations

import math
from collections import Counter
from contextlib import AbstractContextManager, nullcontext
from dataclasses import dataclass, field, replace
from enum import Enum
from typing import Sequence

import numpy as np

from receiver.formats.protocol import PoseMessage, Reason, Sample
from receiver.live.ring_buffer import BLOCK_ROWS, SMALL_BLOCK_ROWS, Cut, PendingRows, RingBuffer
from receiver.odometry.columns import Columns, columns_from_samples
from receiver.odometry.counts import ACCEPTED, SEQ_MODULUS, SampleKind, classify
from receiver.odometry.recompute import Result, Tracker, loop_periods
from receiver.odometry.robot import Profile, missing_profile_hint

DEFAULT_WINDOW_S = 600.0
DEFAULT_QUIET_AFTER_S = 1.0
# Hard cap on one robot's buffered rows: 600 s at 1 kHz. With 13 float64
# columns that is about 60 MB for a robot that really streams at 1 kHz;
# slower robots only grow their buffer as far as the window needs.
DEFAULT_MAX_ROWS = 600_000
# RFC 3550 section 6.4.1 interarrival jitter: J += (|D| - J) / 16.
_JITTER_GAIN = 1.0 / 16.0
_NO_ROWS = np.empty(0)  # a snapshot without loop statistics
# Up to this many samples of one robot in one ``process`` go one by one
# through the tracker's plain-float path (about 10 us a sample); more go
# through numpy, whose fixed cost of about 0.5 ms a piece then pays off.
ONE_BY_ONE_UP_TO = 32


class LinkState(Enum):
    """A robot's link as the page shows it; it moves only through TRANSITIONS."""

    WAITING = "waiting"  # declared by a profile, nothing heard yet
    LIVE = "live"
    QUIET = "quiet"  # heard before, silent for longer than quiet_after_s


class LinkEvent(Enum):
    """What moves a LinkState: data arrived, or silence past ``quiet_after_s``."""

    DATA = "data"
    SILENCE = "silence"


# Every allowed move; a pair missing here leaves the state as it is.
TRANSITIONS: dict[tuple[LinkState, LinkEvent], LinkState] = {
    (LinkState.WAITING, LinkEvent.DATA): LinkState.LIVE,
    (LinkState.LIVE, LinkEvent.DATA): LinkState.LIVE,
    (LinkState.LIVE, LinkEvent.SILENCE): LinkState.QUIET,
    (LinkState.QUIET, LinkEvent.DATA): LinkState.LIVE,
}


@dataclass
class LinkStats:
    """Counts since the session started; see ``RobotSnapshot`` for meanings."""

    messages: int = 0
    gaps: int = 0
    duplicates: int = 0
    late: int = 0
    restarts: int = 0
    resets: int = 0
    errors: Counter = field(default_factory=Counter)
    jitter_s: float = float("nan")
    first_rx: float = float("nan")
    last_rx: float = float("nan")


@dataclass(frozen=True)
class RobotSnapshot:
    """One robot as the dashboard and the summary see it.

    ``gaps``: sequence numbers skipped when the next sample arrived (some
    may arrive later and count as ``late``). ``pose`` and ``reported`` are
    REP 103, the profile's distance unit and radians (``reported`` is in the
    robot's own conventions when it has no profile). Loop statistics are in
    seconds over the buffered window; ``jitter_s`` is the RFC 3550 smoothed
    interarrival jitter of the receiver's clock against the robot's.
    """

    robot: str
    state: LinkState
    has_profile: bool
    messages: int
    rate_hz: float
    gaps: int
    duplicates: int
    late: int
    restarts: int
    resets: int
    errors: dict[str, int]
    loop_mean_s: float
    loop_p50_s: float
    loop_p95_s: float
    loop_max_s: float
    jitter_s: float
    pose: tuple[float, float, float] | None
    reported: tuple[float, float, float] | None
    position_error: float
    heading_error: float
    last_rx: float = float("nan")  # receiver clock of the latest message, s


_RING_FIELDS = {
    "seq": (np.int64, None),
    "t": (float, None),
    "rx": (float, None),
    "pose": (float, 3),
    "reported": (float, 3),
    "position_error": (float, None),
    "heading_error": (float, None),
    "loop": (float, None),
    "kind": (np.int8, None),  # counts.SampleKind of each accepted row: the dashboard marks anchors
}
# Rows from the one-by-one path wait in a PendingRows and reach the ring in
# bulk. The floats of a row, in this order, then its seq and kind:
_FLOAT_COLUMNS = (("rx", None), ("t", None), ("pose", 3), ("reported", 3), ("position_error", None),
                  ("heading_error", None), ("loop", None))
_INT_COLUMNS = (("seq", None), ("kind", None))
_FLUSH_ROWS = 128
assert {name for name, _ in _FLOAT_COLUMNS + _INT_COLUMNS} == set(_RING_FIELDS)
_STEP, _RESET, _RESTART, _DUPLICATE = SampleKind.STEP, SampleKind.RESET, SampleKind.RESTART, SampleKind.DUPLICATE


class Session:
    """One robot: its tracker (when it has a profile), buffers and link state."""

    def __init__(self, robot: str, profile: Profile | None, window_s: float, max_rows: int, method: str) -> None:
        self.robot = robot
        self.profile = profile
        self.tracker = Tracker(profile, method) if profile is not None else None
        self.n_wheels: int | None = len(profile.wheels) if profile is not None else None
        self.state = LinkState.WAITING
        self.stats = LinkStats()
        # a robot without a profile shares its rows with others (Hub): small blocks
        block_rows = BLOCK_ROWS if profile is not None else SMALL_BLOCK_ROWS
        self.ring = RingBuffer(_RING_FIELDS, window_s=window_s, max_rows=max_rows, block_rows=block_rows)
        self._last: tuple[int, float] | None = None  # last accepted (seq, t)
        self._last_rx = np.nan
        self._jitter_s: float | None = None
        self._pending = PendingRows(self.ring, _FLOAT_COLUMNS, _INT_COLUMNS, _FLUSH_ROWS)  # one-by-one rows

    def move(self, event: LinkEvent) -> None:
        """Apply a link event through TRANSITIONS."""
        self.state = TRANSITIONS.get((self.state, event), self.state)

    def feed(self, cols: Columns) -> Result | None:
        """Take one batch in arrival order; returns the tracker's result, if any."""
        self._pending.flush()
        stats = self.stats
        stats.messages += len(cols)
        if np.isnan(stats.first_rx):
            stats.first_rx = float(cols.rx[0])
        stats.last_rx = float(cols.rx[-1])
        self.move(LinkEvent.DATA)
        if self.tracker is not None:
            result = self.tracker.feed(cols)
            kinds, seq, t, rx = result.kind, result.seq, result.t, result.rx
            pose, reported, loop = result.pose, result.reported, result.loop_s
            pos_err, head_err = result.position_error, result.heading_error
            stats.duplicates += result.dropped["duplicate"]
            stats.late += result.dropped["late"]
        else:
            result = None
            kinds_all = classify(cols.seq, cols.t, cols.reset, self._last)
            keep = np.isin(kinds_all, ACCEPTED)
            stats.duplicates += int(np.count_nonzero(kinds_all == SampleKind.DUPLICATE))
            stats.late += int(np.count_nonzero(kinds_all == SampleKind.LATE))
            kept = cols.take(np.flatnonzero(keep))
            kinds, seq, t, rx = kinds_all[keep], kept.seq, kept.t, kept.rx
            loop = loop_periods(kinds, seq, t, kept.loop, self._last) if len(kept) else np.empty(0)
            reported = kept.pose
            pose = np.full_like(reported, np.nan)
            pos_err = head_err = np.full(len(kept), np.nan)
        if len(seq) == 0:
            return result
        self._count_link(kinds, seq, t, rx)
        self.ring.append(
            rx=rx, seq=seq, t=t, pose=pose, reported=reported, position_error=pos_err, heading_error=head_err, loop=loop,
            kind=kinds,
        )
        return result

    def feed_samples(self, samples: list[Sample]) -> PoseMessage | None:
        """Take one batch of decoded samples in arrival order; returns the
        latest recomputed pose, if any. The same rows and statistics as
        ``feed``: a few samples go one by one through ``Tracker.feed_one``.
        """
        if self.tracker is None or len(samples) > ONE_BY_ONE_UP_TO:
            result = self.feed(columns_from_samples(samples, self.n_wheels))
            return pose_message(self.robot, result) if result is not None and len(result.seq) else None
        stats = self.stats
        stats.messages += len(samples)
        if math.isnan(stats.first_rx):
            stats.first_rx = _rx(samples[0])
        stats.last_rx = _rx(samples[-1])
        if self.state is not LinkState.LIVE:  # LIVE stays LIVE on data; the table lookup costs a microsecond
            self.move(LinkEvent.DATA)
        feed_one, floats, ints = self.tracker.feed_one, self._pending.floats, self._pending.ints
        latest = None
        # Local names, and the link statistics of a step inline (``_count_link``
        # for one sample): at 20,000 samples a second every attribute lookup
        # and call here shows in the receiver's CPU per datagram.
        for sample in samples:
            step = feed_one(sample)
            kind, pose, reported, loop_s, position_error, heading_error = step
            if pose is None:
                if kind is _DUPLICATE:
                    stats.duplicates += 1
                else:
                    stats.late += 1
                continue
            seq, t, rx = sample.seq, sample.t, sample.rx
            if rx is None:
                rx = math.nan
            if kind is _STEP:
                last_seq, last_t = self._last
                gap = (seq - last_seq) % SEQ_MODULUS - 1
                if gap:
                    stats.gaps += gap
                if math.isfinite(self._last_rx):
                    d = abs((rx - self._last_rx) - (t - last_t))
                    jitter = self._jitter_s
                    self._jitter_s = stats.jitter_s = d if jitter is None else jitter + _JITTER_GAIN * (d - jitter)
            else:
                self._count_anchor(kind)
            self._last = (seq, t)
            self._last_rx = rx
            floats += (
                rx, t, pose[0], pose[1], pose[2], reported[0], reported[1], reported[2],
                position_error, heading_error, loop_s,
            )
            ints += (seq, kind)
            latest = step  # seq, t and rx above stay those of the latest accepted sample too
        if len(ints) >= self._pending.limit:
            self._pending.flush()
        if latest is None:
            return None
        _, pose, reported, _, position_error, heading_error = latest
        reported = (
            reported
            if math.isfinite(reported[0]) and math.isfinite(reported[1]) and math.isfinite(reported[2])
            else None
        )
        if reported is None:
            return PoseMessage(robot=self.robot, seq=seq, t=t, rx=rx, pose=pose)
        return PoseMessage(robot=self.robot, seq=seq, t=t, rx=rx, pose=pose, reported=reported,
                           position_error=position_error, heading_error=heading_error)

    def _count_anchor(self, kind: SampleKind) -> None:
        """``_count_link`` for one accepted sample that is not a step."""
        if kind is _RESTART:
            self.stats.restarts += 1
        elif kind is _RESET:
            self.stats.resets += 1

    def _count_link(self, kinds: np.ndarray, seq: np.ndarray, t: np.ndarray, rx: np.ndarray) -> None:
        stats = self.stats
        prev_seq = np.concatenate([[self._last[0] if self._last else seq[0]], seq[:-1]])
        prev_t = np.concatenate([[self._last[1] if self._last else t[0]], t[:-1]])
        prev_rx = np.concatenate([[self._last_rx], rx[:-1]])
        step = kinds == SampleKind.STEP
        stats.gaps += int(np.sum(((seq - prev_seq) % 2**32 - 1)[step]))
        stats.restarts += int(np.count_nonzero(kinds == SampleKind.RESTART))
        stats.resets += int(np.count_nonzero(kinds == SampleKind.RESET))
        # Transit-time differences D (RFC 3550 6.4.1) over consecutive steps.
        d = np.abs((rx - prev_rx) - (t - prev_t))[step & np.isfinite(prev_rx)]
        if len(d):
            # J += (|D| - J) / 16, RFC 3550 6.4.1; a plain loop, as live pieces are short.
            values = d.tolist()
            jitter = values.pop(0) if self._jitter_s is None else self._jitter_s
            for value in values:
                jitter += _JITTER_GAIN * (value - jitter)
            self._jitter_s = stats.jitter_s = jitter
        self._last = (int(seq[-1]), float(t[-1]))
        self._last_rx = float(rx[-1])

    def cut(self, since_rx: float | None = None) -> Cut:
        """The buffered rows (with ``since_rx``, those whose rx is later than
        it), to copy with ``Cut.rows`` now or after releasing the hub's lock."""
        self._pending.flush()
        return self.ring.cut(since_rx)

    def snapshot(
        self, now: float, lock: AbstractContextManager = nullcontext(), loop_stats: bool = True
    ) -> RobotSnapshot:
        """The robot now. ``lock`` is held only while the session is read,
        for microseconds: the loop statistics copy and sort up to the whole
        window (tens of milliseconds at 600,000 rows) after it is released.
        Without ``loop_stats`` they are NaN and cost nothing: for a caller
        that asks several times a second and computes its own over the rows
        it shows (the page), since that CPU is taken from the receive loop."""
        with lock:
            held = self.cut()
            stats = replace(self.stats, errors=dict(self.stats.errors))
            state = self.state
            newest = self.ring.newest()
            rate = float(len(self.ring) - self.ring.first_after(now - 1.0))
        loop = held.rows(("loop",))["loop"] if loop_stats else _NO_ROWS
        loop = loop[np.isfinite(loop)]
        if len(loop):
            mean, p50, p95, top = float(loop.mean()), *map(float, np.percentile(loop, [50, 95])), float(loop.max())
        else:
            mean = p50 = p95 = top = float("nan")
        pose = reported = None
        pos_err = head_err = float("nan")
        if newest is not None:
            if self.tracker is not None:
                pose = tuple(map(float, newest["pose"]))
                pos_err = float(newest["position_error"])
                head_err = float(newest["heading_error"])
            last_reported = newest["reported"]
            reported = tuple(map(float, last_reported)) if np.isfinite(last_reported).all() else None
        return RobotSnapshot(
            robot=self.robot,
            state=state,
            has_profile=self.profile is not None,
            messages=stats.messages,
            rate_hz=rate,
            gaps=stats.gaps,
            duplicates=stats.duplicates,
            late=stats.late,
            restarts=stats.restarts,
            resets=stats.resets,
            errors={str(reason): n for reason, n in stats.errors.items()},
            loop_mean_s=mean,
            loop_p50_s=p50,
            loop_p95_s=p95,
            loop_max_s=top,
            jitter_s=stats.jitter_s,
            pose=pose,
            reported=reported,
            position_error=pos_err,
            heading_error=head_err,
            last_rx=stats.last_rx,
        )


def _rx(sample: Sample) -> float:
    return math.nan if sample.rx is None else sample.rx


def pose_message(robot: str, result: Result) -> PoseMessage:
    """The latest recompute of a result, as the pose topic carries it."""
    reported = result.reported[-1]
    common = dict(robot=robot, seq=int(result.seq[-1]), t=float(result.t[-1]), rx=float(result.rx[-1]),
                  pose=tuple(map(float, result.pose[-1])))
    if not np.isfinite(reported).all():
        return PoseMessage(**common)
    return PoseMessage(**common, reported=tuple(map(float, reported)),
                       position_error=float(result.position_error[-1]), heading_error=float(result.heading_error[-1]))


def unheard_profiles(snapshots: dict[str, RobotSnapshot]) -> list[str]:
    """The robots a profile was given for that have sent nothing: a robot without a profile
    may be one of them under another name."""
    return [name for name, snap in snapshots.items() if snap.has_profile and snap.messages == 0]


def summary_of_stats(robot: str, stats: LinkStats) -> str:
    """The summary line of a robot whose slot was freed: its link counts only."""
    capped = stats.errors.get(Reason.OVER_RATE_CAP, 0)
    errors = sum(stats.errors.values()) - capped
    return (
        f"{robot}: {stats.messages} messages, {stats.gaps} gaps, {stats.duplicates} duplicates, {stats.late} late, "
        f"{errors} decode errors{f', {capped} over the rate cap' if capped else ''}; no profile, slot freed after "
        "its silence"
    )


def summary_line(snap: RobotSnapshot, unit: str | None, unheard: Sequence[str] = ()) -> str:
    """One line per robot for the end of ``serve`` and ``replay``; ``unheard`` names the
    profiles given for robots that sent nothing (see ``unheard_profiles``)."""
    capped = snap.errors.get(Reason.OVER_RATE_CAP, 0)
    errors = sum(snap.errors.values()) - capped
    text = (
        f"{snap.robot}: {snap.messages} messages, {snap.gaps} gaps, {snap.duplicates} duplicates, "
        f"{snap.late} late, {errors} decode errors"
    )
    if capped:
        text += f", {capped} over the rate cap"
    if not snap.has_profile:
        if unheard:
            return text + f"; no profile, not recomputed: {missing_profile_hint(snap.robot, unheard)}"
        return text + "; no profile, not recomputed"
    if np.isfinite(snap.position_error):
        return text + (
            f"; final disagreement {snap.position_error:.3f} {unit}, {np.degrees(snap.heading_error):.2f} deg"
        )
    return text + "; no reported pose to compare"
