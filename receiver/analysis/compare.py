"""One row per recorded run, for comparing runs of the same robot (`podwatch compare`, the page).

Owns what a run's row holds: how long and how far it drove, how much it
turned, the final and worst disagreement, its growth (growth.py's one
definition), the loop period's mean and 95th percentile, and the profile
values that differ between the runs. Pure: columns and profiles in, rows out;
never reads a file or prints.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from receiver.analysis.growth import MIN_TRAVEL_M, MIN_TURNS, Growth, growth, step_motion
from receiver.odometry.columns import Columns
from receiver.odometry.counts import SampleKind
from receiver.odometry.profile_edit import Value, differing_values
from receiver.odometry.recompute import Result, Tracker
from receiver.odometry.robot import METRES_PER_UNIT, Profile


@dataclass(frozen=True)
class RunRow:
    """One run of one robot. Lengths in ``profile.distance_unit``, headings in degrees,
    times in seconds; NaN where unknown (the robot sent no pose, no loop period)."""

    robot: str
    profile: Profile
    samples: int
    duration_s: float  # robot-clock time covered, the clock's jumps at restarts left out
    distance: float  # the recompute's path length over the whole run
    turns: float  # the recompute's turning over the whole run, |turn| summed, in full turns
    final_position: float
    final_heading_deg: float
    worst_position: float
    worst_heading_deg: float  # largest |heading error|
    growth: Growth
    loop_mean_s: float
    loop_p95_s: float

    @property
    def distance_m(self) -> float:
        """``distance`` in metres."""
        return self.distance * METRES_PER_UNIT[self.profile.distance_unit]

    def to_json(self) -> dict[str, Any]:
        """The row as JSON-ready values (NaN as None)."""
        g = self.growth
        return _no_nan({
            "robot": self.robot,
            "distance_unit": self.profile.distance_unit,
            "samples": self.samples,
            "duration_s": self.duration_s,
            "distance": self.distance,
            "distance_m": self.distance_m,
            "turns": self.turns,
            "final_position_error": self.final_position,
            "final_heading_error_deg": self.final_heading_deg,
            "worst_position_error": self.worst_position,
            "worst_heading_error_deg": self.worst_heading_deg,
            "growth": {
                "position_per_m": g.position_per_m,
                "heading_deg_per_turn": g.heading_per_turn_deg,
                "over_distance_m": g.distance_m,
                "over_turns": g.turns,
                "from_anchor": g.from_anchor,
            },
            "loop_mean_s": self.loop_mean_s,
            "loop_p95_s": self.loop_p95_s,
        })


def _no_nan(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _no_nan(v) for k, v in value.items()}
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def row_from_result(result: Result, profile: Profile, robot: str | None = None) -> RunRow:
    """The row of a run already recomputed (``Tracker(profile).feed(columns)``)."""
    nan = math.nan
    kind = result.kind
    steps = distance, turn = step_motion(result.pose, kind)
    dt = np.diff(result.t)
    duration_s = float(dt[kind[1:] != SampleKind.RESTART].sum()) if len(dt) else 0.0
    position, heading = result.position_error, result.heading_error
    compared = np.flatnonzero(np.isfinite(position))
    last = int(compared[-1]) if len(compared) else None
    loop = result.loop_s[np.isfinite(result.loop_s)]
    return RunRow(
        robot=robot or profile.name,
        profile=profile,
        samples=len(result.seq),
        duration_s=duration_s,
        distance=float(distance.sum()),
        turns=float(turn.sum()) / (2.0 * math.pi),
        final_position=nan if last is None else float(position[last]),
        final_heading_deg=nan if last is None else math.degrees(float(heading[last])),
        worst_position=nan if last is None else float(np.nanmax(position)),
        worst_heading_deg=nan if last is None else math.degrees(float(np.nanmax(np.abs(heading)))),
        growth=growth(result.pose, position, heading, kind, METRES_PER_UNIT[profile.distance_unit], steps),
        loop_mean_s=float(loop.mean()) if len(loop) else nan,
        loop_p95_s=float(np.percentile(loop, 95)) if len(loop) else nan,
    )


def run_row(columns: Columns, profile: Profile, robot: str | None = None, method: str = "arc") -> RunRow:
    """Recompute one robot's columns (a whole run, arrival order) with ``profile`` and give its row."""
    return row_from_result(Tracker(profile, method).feed(columns), profile, robot)


def profile_differences(rows: Sequence[RunRow]) -> dict[str, list[Value | None]]:
    """The profile values that differ between the rows' profiles, by `--set` key, one value
    per row (None where a row's profile has no such key)."""
    return differing_values([row.profile for row in rows])


GROWTH_MINIMUMS = {"min_travel_m": MIN_TRAVEL_M, "min_turns": MIN_TURNS}
