"""What the loop period costs: the same counts integrated with Euler, midpoint and arc.

Owns the comparison of integration methods on one session: each method's
recompute from the same counts, their distance from the arc (exact for a
constant twist over a step) over time, and the per-step difference summed
per metre of travel in bins of the step's period, so that a team sees what a
slow loop costs a robot code that integrates with Euler or midpoint. Pure:
columns and a profile in, arrays out; never reads a file or a clock.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from receiver.analysis.growth import step_motion
from receiver.odometry.columns import Columns
from receiver.odometry.counts import SampleKind
from receiver.odometry.recompute import Result, Tracker
from receiver.odometry.robot import METRES_PER_UNIT, Profile

# Bin edges of the step period, s: fine where control loops usually run
# (5-30 ms, common practice), coarse for the slow and stalled ones.
DEFAULT_BIN_EDGES_S = (0.0, 0.005, 0.010, 0.015, 0.020, 0.025, 0.030, 0.040, 0.050, 0.075, 0.100, math.inf)


@dataclass(frozen=True)
class LoopCostBins:
    """The integration methods' difference by step period: B bins of ``edges_s`` (B + 1,), s.

    ``steps`` and ``travel_m`` (metres the arc recompute moved) are per bin;
    ``euler_per_m`` and ``midpoint_per_m`` are each method's per-step
    distance from the arc, summed over the bin's steps and divided by its
    travel: profile unit per metre (NaN where the bin has no travel). The
    sum is what the difference grows by when the steps' errors line up;
    on a path that keeps turning one way they partly cancel (see
    ``LoopCost.euler_gap``).
    """

    edges_s: np.ndarray
    steps: np.ndarray
    travel_m: np.ndarray
    euler_per_m: np.ndarray
    midpoint_per_m: np.ndarray


@dataclass(frozen=True)
class LoopCost:
    """Per accepted sample (N,): ``t`` robot clock (s); ``step_s`` the clock time the
    step from the sample before spans (NaN at re-anchors), which is the loop period
    unless messages were lost; ``travel`` the arc recompute's distance moved in the
    step; ``euler_step`` and ``midpoint_step`` each method's distance from the arc
    in that step alone; ``euler_gap`` and ``midpoint_gap`` the distance between
    each method's pose and the arc's since the last re-anchor. Lengths in ``unit``.
    """

    unit: str
    t: np.ndarray
    step_s: np.ndarray
    travel: np.ndarray
    euler_step: np.ndarray
    midpoint_step: np.ndarray
    euler_gap: np.ndarray
    midpoint_gap: np.ndarray
    bins: LoopCostBins


def _per_step(method_pose: np.ndarray, arc_pose: np.ndarray, anchor: np.ndarray) -> np.ndarray:
    """Distance between two methods' moves in each step. The heading before a step is
    the same for every method, so this is the difference of their local moves."""
    gap = np.zeros(len(arc_pose))
    if len(arc_pose) > 1:
        moved = np.diff(method_pose[:, :2], axis=0) - np.diff(arc_pose[:, :2], axis=0)
        gap[1:] = np.hypot(moved[:, 0], moved[:, 1])
        gap[anchor] = 0.0
    return gap


def loop_cost_bins(
    step_s: np.ndarray,
    travel_m: np.ndarray,
    euler_step: np.ndarray,
    midpoint_step: np.ndarray,
    edges_s: Sequence[float] = DEFAULT_BIN_EDGES_S,
) -> LoopCostBins:
    """Bin per-step travel (m) and methods' differences (profile unit) by step period (s,
    NaN ones left out); ``edges_s`` increasing, the last may be infinite."""
    edges = np.asarray(edges_s, dtype=float)
    known = np.isfinite(step_s)
    which = np.searchsorted(edges, step_s[known], side="right") - 1
    inside = (which >= 0) & (which < len(edges) - 1)
    which = which[inside]
    count = len(edges) - 1

    def total(values: np.ndarray) -> np.ndarray:
        return np.bincount(which, weights=values[known][inside], minlength=count)

    steps = np.bincount(which, minlength=count)
    travel = total(travel_m)
    with np.errstate(invalid="ignore", divide="ignore"):
        euler = np.where(travel > 0, total(euler_step) / travel, np.nan)
        midpoint = np.where(travel > 0, total(midpoint_step) / travel, np.nan)
    return LoopCostBins(edges, steps, travel, euler, midpoint)


def loop_cost(
    columns: Columns, profile: Profile, edges_s: Sequence[float] = DEFAULT_BIN_EDGES_S, arc: Result | None = None
) -> LoopCost:
    """Recompute one robot's columns (a whole run) with euler, midpoint and arc and compare
    them to the arc; ``arc``: ``Tracker(profile).feed(columns)`` when the caller has it already."""
    if arc is None:
        arc = Tracker(profile, "arc").feed(columns)
    poses = {method: Tracker(profile, method).feed(columns) for method in ("euler", "midpoint")}
    anchor = arc.kind != SampleKind.STEP
    step_s = np.full(len(arc.t), np.nan)
    step_s[1:] = np.diff(arc.t)
    step_s[anchor] = np.nan
    travel, _ = step_motion(arc.pose, arc.kind)
    euler_step = _per_step(poses["euler"].pose, arc.pose, anchor)
    midpoint_step = _per_step(poses["midpoint"].pose, arc.pose, anchor)
    metres = METRES_PER_UNIT[profile.distance_unit]
    return LoopCost(
        unit=profile.distance_unit,
        t=arc.t,
        step_s=step_s,
        travel=travel,
        euler_step=euler_step,
        midpoint_step=midpoint_step,
        euler_gap=np.hypot(*(poses["euler"].pose[:, :2] - arc.pose[:, :2]).T),
        midpoint_gap=np.hypot(*(poses["midpoint"].pose[:, :2] - arc.pose[:, :2]).T),
        bins=loop_cost_bins(step_s, travel * metres, euler_step, midpoint_step, edges_s),
    )
