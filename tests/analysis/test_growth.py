"""Growth of the disagreement per metre and per turn: over the stretch since the last re-anchor,
only past the stated minimums; and the disagreement against distance driven."""

from __future__ import annotations

import math

import numpy as np
import pytest

from receiver.analysis.growth import (
    MIN_TRAVEL_M,
    MIN_TURNS,
    disagreement_by_distance,
    growth,
    stand_in,
    step_motion,
)
from receiver.odometry.counts import SampleKind
from receiver.odometry.integrate import wrap_angle

INCH_M = 0.0254  # SI: 1 in = 0.0254 m exactly


def _rows(n=401, step_in=0.5, turn_rad=0.02, error_per_in=0.01, heading_error_per_rad=-0.05):
    """Rows of a robot driving a steady arc: step_in and turn_rad per row; errors that grow in
    proportion to the distance driven and the angle turned."""
    k = np.arange(n)
    heading = k * turn_rad
    # Positions on a circle: each row moves one chord of it.
    radius = step_in / turn_rad
    pose = np.column_stack([radius * np.sin(heading), radius * (1 - np.cos(heading)), heading])
    chord = 2 * radius * math.sin(turn_rad / 2)
    position_error = error_per_in * chord * k
    heading_error = wrap_angle(heading_error_per_rad * heading)
    kind = np.full(n, SampleKind.STEP, dtype=np.int8)
    kind[0] = SampleKind.FIRST
    return pose, position_error, heading_error, kind, chord


def test_growth_of_a_steady_drift():
    pose, position_error, heading_error, kind, chord = _rows()
    g = growth(pose, position_error, heading_error, kind, INCH_M)
    assert (g.start, g.end, g.from_anchor) == (0, 400, True)
    assert g.distance_m == pytest.approx(400 * chord * INCH_M, rel=1e-12)
    assert g.turns == pytest.approx(400 * 0.02 / (2 * math.pi), rel=1e-12)
    # 0.01 in per inch driven is 0.01 / 0.0254 in per metre.
    assert g.position_per_m == pytest.approx(0.01 / INCH_M, rel=1e-9)
    # -0.05 rad of error per rad turned is -0.05 * 360 degrees per turn.
    assert g.heading_per_turn_deg == pytest.approx(-0.05 * 360, rel=1e-9)


def test_heading_growth_unwraps_the_error():
    pose, position_error, _, kind, _ = _rows(turn_rad=0.05)
    heading_error = wrap_angle(0.3 * pose[:, 2])  # 6 rad of error over 20 rad of turning
    assert np.abs(np.diff(heading_error)).max() > math.pi  # it does cross the wrap
    g = growth(pose, position_error, heading_error, kind, INCH_M)
    assert g.heading_per_turn_deg == pytest.approx(0.3 * 360, rel=1e-9)


def test_growth_starts_at_the_last_re_anchor():
    pose, position_error, heading_error, kind, chord = _rows()
    kind[250] = SampleKind.RESET
    position_error[:250] = 99.0  # before the re-anchor: not part of the stretch
    position_error[250:] = 0.01 * chord * np.arange(151)
    pose[250:, :2] += 1000.0  # the re-anchor's jump is not driving
    g = growth(pose, position_error, heading_error, kind, INCH_M)
    assert (g.start, g.end, g.from_anchor) == (250, 400, True)
    assert g.distance_m == pytest.approx(150 * chord * INCH_M, rel=1e-12)
    assert g.position_per_m == pytest.approx(0.01 / INCH_M, rel=1e-9)


def test_a_window_after_the_anchor_says_so_and_rows_without_a_pose_are_skipped():
    pose, position_error, heading_error, kind, chord = _rows()
    window = slice(100, None)
    position_error[100:120] = np.nan
    g = growth(pose[window], position_error[window], heading_error[window], kind[window], INCH_M)
    assert (g.start, g.end, g.from_anchor) == (20, 300, False)
    assert g.distance_m == pytest.approx(280 * chord * INCH_M, rel=1e-12)
    assert g.position_per_m == pytest.approx(0.01 / INCH_M, rel=1e-9)


def test_no_rate_under_the_minimums():
    # Just under and just over half a metre of driving (and a quarter turn of turning).
    rows_for = lambda metres: int(math.ceil(metres / (0.5 * INCH_M)))  # noqa: E731
    for n, expect_rate in ((rows_for(MIN_TRAVEL_M) - 1, False), (rows_for(MIN_TRAVEL_M) + 1, True)):
        pose, position_error, heading_error, kind, _ = _rows(n=n + 1, turn_rad=1e-9)
        g = growth(pose, position_error, heading_error, kind, INCH_M)
        assert math.isfinite(g.position_per_m) == expect_rate
        assert math.isnan(g.heading_per_turn_deg)  # hardly turned
    turn_rows = int(MIN_TURNS * 2 * math.pi / 0.02)
    for n, expect_rate in ((turn_rows - 1, False), (turn_rows + 1, True)):
        pose, position_error, heading_error, kind, _ = _rows(n=n + 1, step_in=1e-6)
        g = growth(pose, position_error, heading_error, kind, INCH_M)
        assert math.isfinite(g.heading_per_turn_deg) == expect_rate
        assert math.isnan(g.position_per_m)  # turned in place


def test_no_pose_no_growth():
    pose, position_error, heading_error, kind, _ = _rows()
    g = growth(pose, np.full(len(pose), np.nan), np.full(len(pose), np.nan), kind, INCH_M)
    assert math.isnan(g.position_per_m) and math.isnan(g.heading_per_turn_deg) and g.distance_m == 0.0


def test_disagreement_by_distance_leaves_out_jumps():
    pose, position_error, heading_error, kind, chord = _rows(n=11)
    kind[5] = SampleKind.RESTART
    pose[5:, :2] += 500.0
    curve = disagreement_by_distance(pose, position_error, heading_error, kind, INCH_M)
    expected = np.array([0, 1, 2, 3, 4, 4, 5, 6, 7, 8, 9]) * chord * INCH_M
    np.testing.assert_allclose(curve.distance_m, expected, rtol=1e-9, atol=1e-15)
    np.testing.assert_allclose(curve.heading_error_deg, np.degrees(heading_error))
    assert curve.position_error is position_error
    distance, turn = step_motion(pose, kind)
    assert distance[5] == 0.0 and turn[5] == 0.0


@pytest.mark.parametrize("gap", [None, slice(40, 90), slice(0, 130), slice(380, 401)])
def test_stand_in_rows_give_the_same_growth(gap):
    # A steady arc whose heading error passes the wrap many times, with a re-anchor at row
    # 250; runs of rows without one replaced by their stand-ins, wherever they sit.
    pose, position_error, _, kind, _ = _rows(turn_rad=0.05)
    heading_error = wrap_angle(0.6 * pose[:, 2])
    kind[250] = SampleKind.RESET
    if gap is not None:
        position_error[gap] = heading_error[gap] = np.nan
    distance, turn = step_motion(pose, kind)
    g = growth(pose, position_error, heading_error, kind, INCH_M)
    pieces = [slice(0, 33), slice(33, 120), slice(120, 250), slice(250, 251), slice(251, 320), slice(320, 401)]
    parts = []
    for piece in pieces:
        if piece.start in (0, 250):  # the re-anchors stay rows
            parts.append((position_error[piece], heading_error[piece], distance[piece], turn[piece], kind[piece]))
            continue
        s = stand_in(position_error[piece], heading_error[piece], distance[piece], turn[piece])
        assert len(s.row) < 12
        parts.append((s.position_error, s.heading_error, s.distance, s.turn, np.full(len(s.row), SampleKind.STEP)))
    pe, he, d, t, k = (np.concatenate(column) for column in zip(*parts))
    short = growth(np.empty((len(pe), 3)), pe, he, k, INCH_M, steps=(d, t))
    for name in ("position_per_m", "heading_per_turn_deg", "distance_m", "turns"):
        ours, theirs = getattr(short, name), getattr(g, name)
        assert (math.isnan(ours) and math.isnan(theirs)) or ours == pytest.approx(theirs, rel=1e-9), name
    assert short.from_anchor == g.from_anchor
