"""What the page's compare view shows for a few recordings: one row per run, and its curve.

Owns turning recordings already read into runs (every robot with a profile,
each recomputed once: its row from analysis/compare.py, the same numbers as
`podwatch compare`, and its disagreement against distance driven, thinned
for drawing), and the view's table and its "profile values that differ"
table, numbers with their units. Pure apart from the recompute: recordings
in, components and arrays out; never reads a file.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np
from dash import html

from dashboard.block_summary import ANCHOR_KINDS, unwrap_heading_error
from dashboard.downsample import pick_rows
from dashboard.workbench_figures import RunCurve, compare_curves, run_colour
from receiver.analysis.compare import RunRow, profile_differences, row_from_result
from receiver.analysis.growth import MIN_TRAVEL_M, MIN_TURNS, disagreement_by_distance, step_motion
from receiver.formats.recording import RecordingData
from receiver.odometry.profile_edit import show_value
from receiver.odometry.recompute import Tracker
from receiver.odometry.robot import METRES_PER_UNIT, Profile


@dataclass(frozen=True)
class Run:
    """One robot of one recording: its label, the recording's path, its row and its curve
    (thinned to a few thousand points; position in the row's profile unit)."""

    label: str
    recording: str
    row: RunRow
    curve: RunCurve


def runs_of(data: RecordingData, given: dict[str, Profile], points: int) -> tuple[list[Run], list[str]]:
    """A run per robot of ``data`` with a profile (``given`` ones replace the recording's, as
    `compare --profile` does), and a line per robot left out."""
    profiles = {**data.profiles, **given}
    name = Path(data.path).name
    runs, skipped = [], []
    for robot, columns in data.robots.items():
        profile = profiles.get(robot)
        if profile is None:
            skipped.append(f"{name}: robot {robot!r} has no profile (give one with --profile); left out")
            continue
        result = Tracker(profile).feed(columns)
        label = name + (f" ({robot})" if len(data.robots) > 1 else "")
        metres = METRES_PER_UNIT[profile.distance_unit]
        steps = step_motion(result.pose, result.kind)
        curve = disagreement_by_distance(result.pose, result.position_error, result.heading_error, result.kind,
                                         metres, steps)
        # Unwrapped, as on the page's own disagreement graph: a steady growth is a slope.
        heading = np.degrees(unwrap_heading_error(result.heading_error, np.isin(result.kind, ANCHOR_KINDS), None)[0])
        rows = pick_rows(curve.distance_m, [curve.position_error, heading], points)
        runs.append(Run(label, str(data.path), row_from_result(result, profile, robot),
                        RunCurve(label, curve.distance_m[rows], curve.position_error[rows], heading[rows])))
    return runs, skipped


def curves_figure(runs: Sequence[Run]) -> dict:
    """The runs' curves overlaid, positions in the first run's unit."""
    unit = runs[0].row.profile.distance_unit if runs else "in"
    curves = [
        run.curve._replace(position_error=run.curve.position_error
                           * METRES_PER_UNIT[run.row.profile.distance_unit] / METRES_PER_UNIT[unit])
        for run in runs
    ]
    return compare_curves(curves, unit)


def _figure(value: float, unit: str, digits: int = 3, signed: bool = False) -> str:
    if not math.isfinite(value):
        return f"\u2014 {unit}"
    return f"{value:+.{digits}f} {unit}" if signed else f"{value:.{digits}f} {unit}"


HEAD = ("#", "recording", "time", "driven", "turns", "final", "final heading", "worst", "worst heading", "growth",
        "heading growth", "loop mean", "loop p95")


def row_cells(row: RunRow) -> list[str]:
    """A row's numbers as the table shows them, each with its unit (after # and recording)."""
    unit, g = row.profile.distance_unit, row.growth
    return [
        f"{row.duration_s:.1f} s", f"{row.distance:.1f} {unit}", f"{row.turns:.2f}",
        _figure(row.final_position, unit), _figure(row.final_heading_deg, "deg", 2, signed=True),
        _figure(row.worst_position, unit), _figure(row.worst_heading_deg, "deg", 2),
        _figure(g.position_per_m, f"{unit}/m", 2), _figure(g.heading_per_turn_deg, "deg/turn", 2, signed=True),
        _figure(row.loop_mean_s * 1000.0, "ms", 1), _figure(row.loop_p95_s * 1000.0, "ms", 1),
    ]


def compare_tables(runs: Sequence[Run], notes: Sequence[str] = ()) -> html.Div:
    """The runs' table (one row each, with its curve's colour), the profile values that differ
    between them, and any notes (a recording left out)."""
    body = [
        html.Tr([html.Td([html.I(className="swatch", style={"background": run_colour(k)}), f"#{k + 1}"]),
                 html.Td(run.label, className="run-label"), *(html.Td(text) for text in row_cells(run.row))])
        for k, run in enumerate(runs)
    ]
    children = [html.Table(className="compare-table", children=[
        html.Thead(html.Tr([html.Th(h) for h in HEAD])), html.Tbody(body)])]
    differences = profile_differences([run.row for run in runs])
    if len(runs) > 1 and not differences:
        children.append(html.Div("profile values that differ: none", className="panel-status"))
    elif differences:
        children.append(html.Table(className="compare-table differences", children=[
            html.Thead(html.Tr([html.Th("profile values that differ"), *(html.Th(f"#{k + 1}") for k in range(len(runs)))])),
            html.Tbody([html.Tr([html.Td(key), *(html.Td("\u2014" if v is None else show_value(v)) for v in values)])
                        for key, values in differences.items()]),
        ]))
    children += [html.Div(note, className="note") for note in notes]
    children.append(html.Div("growth: change of the disagreement per metre driven and per turn since the last "
                             f"re-anchor (\u2014 under {MIN_TRAVEL_M:g} m or {MIN_TURNS:g} turn)", className="note"))
    return html.Div(children)
