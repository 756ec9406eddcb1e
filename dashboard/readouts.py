"""The numbers a person quotes off the page: disagreement and loop timing.

Owns their definitions, so that the page, the tests and a report agree:
current and worst disagreement in the window, its growth per metre travelled
and per turn since the last re-anchor, and loop-period statistics. Pure:
arrays in, numbers out; no clock, no Dash.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from receiver.odometry.counts import ANCHORS

# Below these, a growth rate is mostly noise and is not shown.
MIN_TRAVEL_M = 0.25
MIN_TURNS = 0.1
_ANCHOR_KINDS = np.array([int(k) for k in ANCHORS])


@dataclass(frozen=True)
class Disagreement:
    """Position in the profile's distance unit, heading in degrees; NaN when unknown.

    ``position_per_m``: change of the position error per metre the recompute
    travelled since the last re-anchor (unit per metre). ``heading_per_turn``:
    change of the heading error per full turn (360 degrees) of the recompute
    since then (degrees per turn); both use magnitudes of the change.
    """

    position_now: float
    position_worst: float
    heading_now_deg: float
    heading_worst_deg: float
    position_per_m: float
    heading_per_turn_deg: float
    travelled_m: float
    turns: float


def last_anchor(kind: np.ndarray) -> int:
    """Index of the last re-anchor (first sample, reset, restart) in ``kind``, or 0."""
    at = np.flatnonzero(np.isin(kind, _ANCHOR_KINDS))
    return int(at[-1]) if len(at) else 0


def disagreement(
    pose: np.ndarray,
    position_error: np.ndarray,
    heading_error: np.ndarray,
    kind: np.ndarray,
    metres_per_unit: float,
) -> Disagreement:
    """Numbers for rows in time order: pose (N, 3) REP 103 with continuous heading
    (rad), errors (N,) in unit and wrapped radians, kind (N,) counts.Kind."""
    nan = math.nan
    has = np.isfinite(position_error)
    if not has.any():
        return Disagreement(nan, nan, nan, nan, nan, nan, 0.0, 0.0)
    rows = np.flatnonzero(has)
    now = rows[-1]
    heading_deg = np.degrees(heading_error)
    start = max(last_anchor(kind), int(rows[0]))
    seg = slice(start, now + 1)
    step = np.diff(pose[seg], axis=0)
    travelled_m = float(np.nansum(np.hypot(step[:, 0], step[:, 1]))) * metres_per_unit
    turns = float(np.nansum(np.abs(step[:, 2]))) / (2.0 * math.pi)
    seg_pos = position_error[seg]
    seg_head = np.unwrap(heading_error[seg][np.isfinite(heading_error[seg])]) if turns >= MIN_TURNS else None
    per_m = abs(seg_pos[-1] - seg_pos[0]) / travelled_m if travelled_m >= MIN_TRAVEL_M else nan
    per_turn = abs(math.degrees(seg_head[-1] - seg_head[0])) / turns if seg_head is not None and len(seg_head) else nan
    return Disagreement(
        position_now=float(position_error[now]),
        position_worst=float(np.nanmax(position_error)),
        heading_now_deg=float(heading_deg[now]),
        heading_worst_deg=float(np.nanmax(np.abs(heading_deg))),
        position_per_m=float(per_m),
        heading_per_turn_deg=float(per_turn),
        travelled_m=travelled_m,
        turns=turns,
    )


@dataclass(frozen=True)
class LoopTiming:
    """Loop periods in seconds over the window; ``long`` counts loops over the threshold."""

    count: int
    mean_s: float
    p95_s: float
    max_s: float
    long: int

    @property
    def rate_hz(self) -> float:
        """Loops per second from the mean period; NaN when unknown."""
        return 1.0 / self.mean_s if self.mean_s > 0 else math.nan


def loop_timing(loop_s: np.ndarray, threshold_s: float) -> LoopTiming:
    """Statistics of the loop periods ``loop_s`` (s, NaN where unknown); ``long`` counts
    those over ``threshold_s``.
    """
    loop = loop_s[np.isfinite(loop_s)]
    if not len(loop):
        return LoopTiming(0, math.nan, math.nan, math.nan, 0)
    return LoopTiming(
        count=len(loop),
        mean_s=float(loop.mean()),
        p95_s=float(np.percentile(loop, 95)),
        max_s=float(loop.max()),
        long=int(np.count_nonzero(loop > threshold_s)),
    )


def quote(value: float, unit: str, digits: int = 2) -> str:
    """"3.21 in", or an em dash when the value is unknown."""
    return f"{value:.{digits}f} {unit}" if math.isfinite(value) else f"\u2014 {unit}"
