"""A run's row for `compare`, on the figure-eight fixtures, checked against what the simulator
knows independently of the recompute: the true path, the robot code's own pose, its loop periods."""

from __future__ import annotations

import math

import numpy as np
import pytest

from receiver.analysis.compare import profile_differences, row_from_result, run_row
from receiver.formats.profile_toml import load_profile
from receiver.formats.recording import read_recording
from receiver.odometry.columns import Columns, concat_columns
from receiver.odometry.faults import parse_faults
from receiver.odometry.integrate import wrap_angle
from receiver.odometry.recompute import Tracker
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES

# The three recordings of one figure-eight (replay_fixtures/regenerate.py): the robot code
# with its right encoder reversed, the fixed robot code, and the fixed robot code with a
# profile that puts the forward wheels 12.9 in apart instead of 12.5.
REVERSED = "practice-bot-figure-eight-reversed-right.jsonl.gz"
FIXED = "practice-bot-figure-eight.jsonl.gz"
WIDE = "practice-bot-figure-eight-wide-track.jsonl.gz"


def _row(name):
    data = read_recording(FIXTURES / name)
    [(robot, columns)] = data.robots.items()
    return run_row(columns, data.profiles[robot], robot)


@pytest.fixture(scope="module")
def truth():
    profile = load_profile(FIXTURES / "practice-bot.toml")
    return {
        faults: simulate(profile, "figure-eight", 100.0, 10.0, 1, parse_faults(faults, profile))
        for faults in ((), ("reversed:right",))
    }


def test_time_distance_turns_and_loop_match_the_simulated_drive(truth):
    run = truth[()]
    row = _row(FIXED)
    # The true path, sampled at each loop: its length and its turning either way.
    true_distance = np.hypot(*np.diff(run.truth[:, :2], axis=0).T).sum()
    true_turns = np.abs(np.diff(run.truth[:, 2])).sum() / (2 * math.pi)
    assert row.distance == pytest.approx(true_distance, rel=1e-4)
    assert row.distance_m == pytest.approx(true_distance * 0.0254, rel=1e-4)
    assert row.turns == pytest.approx(true_turns, rel=1e-4)
    assert row.samples == len(run.t)
    assert row.duration_s == pytest.approx(run.t[-1] - run.t[0], abs=1e-9)
    assert row.loop_mean_s == pytest.approx(run.loop_s.mean(), rel=1e-9)
    assert row.loop_p95_s == pytest.approx(np.percentile(run.loop_s, 95), rel=1e-9)
    assert row.final_position < 1e-9 and row.worst_position < 1e-9
    assert row.growth.position_per_m == pytest.approx(0.0, abs=1e-9)


def test_a_reversed_wheel_ends_where_the_simulated_robot_code_ended(truth):
    run = truth[("reversed:right",)]
    row = _row(REVERSED)
    # With the right profile the recompute follows the true path, so the disagreement is
    # the distance from the true pose to the robot code's own estimate.
    assert row.final_position == pytest.approx(np.hypot(*(run.truth[-1, :2] - run.robot_pose[-1, :2])), abs=0.01)
    assert row.final_heading_deg == pytest.approx(math.degrees(wrap_angle(run.truth[-1, 2] - run.robot_pose[-1, 2])), abs=0.01)
    assert row.worst_position >= row.final_position
    g = row.growth
    assert (g.start, g.from_anchor) == (0, True) and g.distance_m == pytest.approx(row.distance_m)
    assert g.position_per_m == pytest.approx(row.final_position / row.distance_m, rel=1e-9)


def test_a_wide_track_profile_turns_less_by_the_ratio_of_track_widths(truth):
    run = truth[()]
    row = _row(WIDE)
    # Two forward wheels y_L - y_R apart measure dth = (s_R - s_L) / (y_L - y_R) (the common
    # layout; Lynch and Park, Modern Robotics, ch. 13): declaring 12.9 in for 12.5 in turns
    # the recompute by 12.5 / 12.9 of the true turn, and the robot code (right) by all of it.
    ratio = 12.5 / 12.9
    true_turn = run.truth[-1, 2] - run.truth[0, 2]
    assert row.final_heading_deg == pytest.approx(math.degrees((ratio - 1) * true_turn), abs=0.01)
    true_turns = np.abs(np.diff(run.truth[:, 2])).sum() / (2 * math.pi)
    assert row.turns == pytest.approx(ratio * true_turns, rel=1e-4)
    assert row.final_position > 5.0


def test_the_profile_values_that_differ():
    rows = [_row(name) for name in (REVERSED, WIDE, FIXED)]
    assert profile_differences(rows) == {"wheel.left.y": [6.25, 6.45, 6.25], "wheel.right.y": [-6.25, -6.45, -6.25]}
    assert profile_differences(rows[::2]) == {}


def test_a_restart_is_left_out_of_time_and_begins_the_growth_stretch(practice_profile):
    data = read_recording(FIXTURES / FIXED)
    columns = data.robots["practice-bot"]
    half = len(columns) // 2
    first, second = columns.take(np.arange(half)), columns.take(np.arange(half, len(columns)))
    # The robot rebooted between the halves: its clock and seq start again from zero.
    rebooted = Columns(second.seq - second.seq[0], second.t - second.t[0], second.ticks, second.pose,
                       second.imu, second.loop, second.reset, second.rx)
    joined = concat_columns([first, rebooted])
    result = Tracker(practice_profile).feed(joined)
    row = row_from_result(result, practice_profile)
    assert row.duration_s == pytest.approx((first.t[-1] - first.t[0]) + (second.t[-1] - second.t[0]), abs=1e-9)
    assert row.growth.start == half and row.growth.from_anchor
    # The one step across the reboot counts as no driving; every other step as before.
    whole = Tracker(practice_profile).feed(columns).pose
    skipped = np.hypot(*(whole[half, :2] - whole[half - 1, :2]))
    assert skipped > 0.01
    assert row.distance == pytest.approx(_row(FIXED).distance - skipped, abs=1e-6)


def test_json_has_no_nan(practice_profile):
    n = 20
    columns = Columns(np.arange(n), np.arange(n) * 0.01, np.zeros((n, 3), dtype=np.int64), np.full((n, 3), np.nan),
                      np.full(n, np.nan), np.full(n, np.nan), np.zeros(n, dtype=bool))
    row = run_row(columns, practice_profile)
    as_json = row.to_json()
    assert as_json["final_position_error"] is None and as_json["growth"]["position_per_m"] is None
    assert as_json["loop_mean_s"] == pytest.approx(0.01)
