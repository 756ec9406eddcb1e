"""One redraw of the profile editor: the session recomputed with the edited profile, and its figures.

Owns the step between a session and the editor's figure builders: the
recompute with the edited profile and method (the loaded one's is given),
both runs' numbers (analysis/compare.py's row: final, worst, growth), the
rows to draw (downsample.py) and the unit the graphs use. The edited run is
drawn in the loaded profile's unit, so that an edit of ``distance_unit``
(the robot reports another unit) shows on one scale. Pure apart from the
recompute: no clock, no Dash, no I/O.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dashboard.block_summary import ANCHOR_KINDS, unwrap_heading_error
from dashboard.downsample import pick_rows
from dashboard.editor_figures import EditorPaths, editor_disagreement, editor_track
from dashboard.workbench_session import Session
from receiver.analysis.compare import RunRow, row_from_result
from receiver.odometry.recompute import Result, Tracker
from receiver.odometry.robot import METRES_PER_UNIT, Profile

DEFAULT_METHOD = "arc"


@dataclass(frozen=True)
class EditorDraw:
    """What one redraw sends: the two figures, each run's row (its own profile's unit), the unit
    the graphs use, the samples recomputed and whether the edited run is the loaded one."""

    track: dict
    disagreement: dict
    loaded: RunRow
    edited: RunRow
    unit: str
    samples: int
    unchanged: bool


def session_time(result: Result) -> np.ndarray:
    """Seconds since the session's first row: receiver time where every row has it, else the robot's clock."""
    clock = result.rx if len(result.rx) and np.isfinite(result.rx).all() else result.t
    return clock - clock[0] if len(clock) else clock


def edited_result(session: Session, loaded: Result, profile: Profile, method: str) -> Result:
    """The session recomputed with ``profile`` and ``method``; ``loaded`` itself when both are the loaded ones."""
    if profile == session.loaded and method == DEFAULT_METHOD:
        return loaded
    return Tracker(profile, method).feed(session.columns)


def draw_editor(
    session: Session, loaded: Result, profile: Profile, method: str, field_size_m: float, points: int
) -> EditorDraw:
    """Recompute ``session`` with ``profile`` and ``method`` and build the editor's figures, each path
    and curve of at most about ``points`` rows; ``loaded`` is the session's recompute with its
    loaded profile (``LoadedResults.of``)."""
    edited = edited_result(session, loaded, profile, method)
    unit = session.loaded.distance_unit
    scale = METRES_PER_UNIT[profile.distance_unit] / METRES_PER_UNIT[unit]  # edited lengths -> the graphs' unit
    t = session_time(loaded)
    # Both runs hold the same rows: which samples are accepted depends on seq, t and reset alone.
    assert len(edited.t) == len(loaded.t)
    loaded_error, edited_error = loaded.position_error, edited.position_error * scale
    # Unwrapped, as on the page's own disagreement graph: a steady growth per turn is a slope.
    anchor = np.isin(loaded.kind, ANCHOR_KINDS)
    loaded_heading, edited_heading = (np.degrees(unwrap_heading_error(r.heading_error, anchor, None)[0])
                                      for r in (loaded, edited))
    track_rows = pick_rows(t, [loaded.pose[:, 0], loaded.pose[:, 1], edited.pose[:, 0], edited.pose[:, 1],
                               edited.reported[:, 0], edited.reported[:, 1]], points)
    paths = EditorPaths(edited.reported[track_rows, :2] * scale, loaded.pose[track_rows, :2],
                        edited.pose[track_rows, :2] * scale)
    rows = pick_rows(t, [loaded_error, edited_error, loaded_heading, edited_heading], points)
    return EditorDraw(
        track=editor_track(paths, field_size_m / METRES_PER_UNIT[unit], unit),
        disagreement=editor_disagreement(t[rows], (loaded_error[rows], loaded_heading[rows]),
                                         (edited_error[rows], edited_heading[rows]), unit),
        loaded=row_from_result(loaded, session.loaded, session.robot),
        edited=row_from_result(edited, profile, session.robot),
        unit=unit,
        samples=len(t),
        unchanged=edited is loaded,
    )
