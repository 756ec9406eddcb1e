"""How fast the disagreement grows, and the disagreement against distance driven.

Owns the one definition of growth that the command line and the page quote:
the change of the disagreement per metre driven and per turn turned, over a
stated stretch (from the last re-anchor to the last compared sample), only
once the robot has driven or turned enough for a rate to mean something.
``stand_in`` lets a caller that keeps summaries of rows that never change
(the page, over a ring buffer's full blocks) quote the same growth over a
long window from a few rows. Pure numpy over recompute rows; never
recomputes a pose and never reads a file.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from receiver.odometry.counts import ANCHORS

# The least driving and turning over which a rate is quoted. Over a shorter
# stretch the ratio says more about how the drive began (a push off the
# start line, the first loops' rounding) than about a rate that carries on:
# half a metre is most of a 24 in field tile (common practice), a quarter
# turn the smallest turn of a typical routine. Our choice, not a standard.
MIN_TRAVEL_M = 0.5
MIN_TURNS = 0.25
_ANCHOR_KINDS = np.array([int(k) for k in ANCHORS])


def step_motion(pose: np.ndarray, kind: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(distance (N,), |turn| (N,)) the recompute moved from the row before to each row:
    profile unit and radians; 0 at the first row and at re-anchors (a jump, not motion)."""
    n = len(pose)
    distance = np.zeros(n)
    turn = np.zeros(n)
    if n > 1:
        # Column by column, and a square root rather than np.hypot: a third of the time.
        dx = pose[1:, 0] - pose[:-1, 0]
        dy = pose[1:, 1] - pose[:-1, 1]
        np.sqrt(dx * dx + dy * dy, out=distance[1:])
        np.abs(pose[1:, 2] - pose[:-1, 2], out=turn[1:])
        jump = np.isin(kind, _ANCHOR_KINDS)
        distance[jump] = 0.0
        turn[jump] = 0.0
    return distance, turn


def _turned(angle: np.ndarray) -> float:
    """The change of a wrapped angle from its first to its last value, following it through
    the wraps (each step taken the short way, as np.unwrap does)."""
    step = np.diff(angle)
    step += math.pi
    np.mod(step, 2.0 * math.pi, out=step)
    step -= math.pi
    return float(step.sum())


@dataclass(frozen=True)
class Growth:
    """The disagreement's growth over rows ``start`` to ``end`` (inclusive).

    ``position_per_m``: change of the position error per metre the recompute
    drove (profile unit per metre); NaN under MIN_TRAVEL_M. ``heading_per_turn_deg``:
    change of the heading error (recomputed minus reported, unwrapped, signed:
    positive when the recompute turned further counter-clockwise) per turn of
    the recompute (degrees per turn); NaN under MIN_TURNS. ``from_anchor`` is
    False when the rows given begin after the last re-anchor (a page's window):
    the stretch then begins at the first row given.
    """

    position_per_m: float
    heading_per_turn_deg: float
    distance_m: float
    turns: float
    start: int
    end: int
    from_anchor: bool


def growth(
    pose: np.ndarray,
    position_error: np.ndarray,
    heading_error: np.ndarray,
    kind: np.ndarray,
    metres_per_unit: float,
    steps: tuple[np.ndarray, np.ndarray] | None = None,
) -> Growth:
    """Growth of the disagreement since the last re-anchor, for rows in time order.

    ``pose`` (N, 3): recomputed REP 103 poses, continuous heading (rad);
    ``position_error`` (N,) profile unit and ``heading_error`` (N,) wrapped
    radians, NaN where the robot sent no pose; ``kind`` (N,) counts.SampleKind;
    ``metres_per_unit``: robot.METRES_PER_UNIT of the profile's unit;
    ``steps``: ``step_motion(pose, kind)`` when the caller has it already.
    """
    nan = math.nan
    compared = np.flatnonzero(np.isfinite(position_error))
    if not len(compared):
        return Growth(nan, nan, 0.0, 0.0, 0, 0, False)
    end = int(compared[-1])
    anchors = np.flatnonzero(np.isin(kind[: end + 1], _ANCHOR_KINDS))
    from_anchor = bool(len(anchors))
    begin = int(anchors[-1]) if from_anchor else 0
    start = int(compared[np.searchsorted(compared, begin)])
    distance, turn = steps if steps is not None else step_motion(pose, kind)
    # The rows after the stretch's first: no re-anchor among them, by the choice of start.
    distance_m = float(distance[start + 1 : end + 1].sum()) * metres_per_unit
    turns = float(turn[start + 1 : end + 1].sum()) / (2.0 * math.pi)
    per_m = nan
    if distance_m >= MIN_TRAVEL_M:
        per_m = float(position_error[end] - position_error[start]) / distance_m
    per_turn = nan
    if turns >= MIN_TURNS:
        heading = heading_error[start : end + 1]
        per_turn = math.degrees(_turned(heading[np.isfinite(heading)])) / turns
    return Growth(per_m, per_turn, distance_m, turns, start, end, from_anchor)


class StandIn(NamedTuple):
    """Rows standing in for a longer run of rows in ``growth``'s arguments (``stand_in``),
    each (M,): the two errors, the steps into each row, and ``row``, the index of the
    given row each stands for (to look up its time)."""

    position_error: np.ndarray
    heading_error: np.ndarray
    distance: np.ndarray
    turn: np.ndarray
    row: np.ndarray


def stand_in(position_error: np.ndarray, heading_error: np.ndarray, distance: np.ndarray, turn: np.ndarray) -> StandIn:
    """At most a few rows that ``growth`` reads exactly as it reads the rows given, wherever
    they sit in its arguments: for rows without a re-anchor, each with both errors or neither
    (as recompute rows are). ``distance`` and ``turn`` are ``step_motion``'s, the first
    being the step into the first row. A caller that keeps these for rows that never change
    (a full block of a ring buffer) computes growth over a long window from a few rows.

    What growth reads of the rows between its first and last compared row: the sums of
    the steps, the errors at those two rows and the heading error's turning through its
    wraps. So the first and last compared rows stay, their steps summed; the turning
    between them is carried by rows of heading error alone (no position error, so never
    the first or last compared row), each stepping less than half a turn.
    """
    compared = np.flatnonzero(np.isfinite(position_error))
    n = len(position_error)
    nan = math.nan
    if not len(compared):
        return StandIn(np.array([nan]), np.array([nan]), np.array([distance.sum()]), np.array([turn.sum()]),
                       np.array([n - 1]))
    first, last = int(compared[0]), int(compared[-1])
    pe, he, d, t, row = [position_error[first]], [heading_error[first]], [distance[: first + 1].sum()], \
        [turn[: first + 1].sum()], [first]
    if last > first:
        heading = heading_error[first : last + 1]
        turned = _turned(heading[np.isfinite(heading)])
        steps = max(1, math.ceil(abs(turned) / 3.0))  # 3 rad: under half a turn, as _turned needs
        he += (heading_error[first] + turned * np.arange(1, steps) / steps).tolist()
        pe += [nan] * (steps - 1)
        d += [0.0] * (steps - 1)
        t += [0.0] * (steps - 1)
        row += [first] * (steps - 1)
        pe.append(position_error[last])
        he.append(heading_error[last])
        d.append(distance[first + 1 : last + 1].sum())
        t.append(turn[first + 1 : last + 1].sum())
        row.append(last)
    if last < n - 1:
        pe.append(nan)
        he.append(nan)
        d.append(distance[last + 1 :].sum())
        t.append(turn[last + 1 :].sum())
        row.append(n - 1)
    return StandIn(np.array(pe, dtype=float), np.array(he, dtype=float), np.array(d, dtype=float),
                   np.array(t, dtype=float), np.array(row))


@dataclass(frozen=True)
class DistanceCurve:
    """The disagreement against distance driven, for overlaying runs: each (N,).

    ``distance_m`` is the recompute's path length since the first row, metres
    (re-anchor jumps add nothing); ``position_error`` in the profile's unit,
    ``heading_error_deg`` in degrees; NaN where the robot sent no pose.
    """

    distance_m: np.ndarray
    position_error: np.ndarray
    heading_error_deg: np.ndarray


def disagreement_by_distance(
    pose: np.ndarray,
    position_error: np.ndarray,
    heading_error: np.ndarray,
    kind: np.ndarray,
    metres_per_unit: float,
    steps: tuple[np.ndarray, np.ndarray] | None = None,
) -> DistanceCurve:
    """The disagreement against distance driven; arguments as for ``growth``."""
    distance, _ = steps if steps is not None else step_motion(pose, kind)
    return DistanceCurve(np.cumsum(distance) * metres_per_unit, position_error, np.degrees(heading_error))
