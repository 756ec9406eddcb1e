"""Tests for receiver/sim/simulate.py and receiver/sim/motion_paths.py: the simulated robot."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from receiver.errors import UsageError
from receiver.formats.profile_toml import load_profile
from receiver.formats.recording import read_recording
from receiver.formats.recording_writer import RecordingWriter
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.counts import count_change
from receiver.odometry.faults import Faults, parse_faults, robot_code_profile
from receiver.odometry.integrate import wrap_angle
from receiver.odometry.recompute import Result, Tracker
from receiver.sim.motion_paths import FIELD_SIZE_IN, PATHS
from receiver.sim.simulate import Run, simulate
from tests.conftest import FIXTURES

PRACTICE = load_profile(FIXTURES / "practice-bot.toml")  # inches, radians, counter-clockwise
METRIC = load_profile(FIXTURES / "practice-bot-metric.toml")  # mm, clockwise degrees, right encoder reversed
MM_PER_IN = 25.4  # exact by definition


def recompute(run: Run, profile=None) -> Result:
    profile = profile or run.profile
    return Tracker(profile).feed(columns_from_samples(run.samples, len(profile.wheels)))


def inches(profile) -> float:
    return MM_PER_IN if profile.distance_unit == "mm" else 1.0


def truth_error(result: Result, run: Run) -> tuple[float, float]:
    """Worst (position, heading) error against the truth, for a run where every loop arrived in order."""
    assert len(result.seq) == len(run.t)
    position = np.hypot(*(result.pose[:, :2] - run.truth[:, :2]).T).max()
    return float(position), float(np.abs(wrap_angle(result.pose[:, 2] - run.truth[:, 2])).max())


@pytest.mark.parametrize("profile", [PRACTICE, METRIC], ids=lambda p: p.name)
@pytest.mark.parametrize("path", ["square", "figure-eight", "wander"])
def test_clean_run_recomputed_from_a_recording_agrees(tmp_path: Path, profile, path: str) -> None:
    run = simulate(profile, path, rate_hz=100.0, duration_s=10.0, seed=2)
    recording = tmp_path / "run.jsonl"
    with RecordingWriter(recording, [profile]) as writer:
        writer.write(run.stamp_rx(1735732800.0))
    data = read_recording(recording)
    result = Tracker(data.profiles[profile.name]).feed(data.robots[profile.name])

    # Robot and podwatch integrate the same counts with the same geometry: they
    # agree far below one count of travel (1/8192 of a 35 mm wheel's turn).
    assert len(result.seq) == len(run.t)
    assert result.position_error.max() < 1e-6 * inches(profile)
    assert np.abs(result.heading_error).max() < 1e-9
    # Against the true motion, only counting error remains. Bound (from memory,
    # not a reference): half a count per wheel gives a heading error of about
    # one count's travel over the track width, ~1e-4 rad; positions drift with it.
    position, heading = truth_error(result, run)
    assert position < 0.01 * inches(profile)
    assert heading < 5e-4


def test_wander_ground_truth_matches_solve_ivp() -> None:
    run = simulate(PRACTICE, "wander", rate_hz=50.0, duration_s=10.0, seed=3)
    tau = run.t - run.t[0]

    def field_velocity(_t: float, pose: np.ndarray) -> list[float]:
        vx, vy, w = run.motion.twist(np.array(_t))
        c, s = np.cos(pose[2]), np.sin(pose[2])
        return [vx * c - vy * s, vx * s + vy * c, w]

    # Reference: scipy.integrate.solve_ivp on the continuous kinematics
    # x' = vx cos th - vy sin th, y' = vx sin th + vy cos th, th' = w.
    ref = solve_ivp(field_velocity, (0.0, tau[-1]), list(run.motion.start), method="DOP853",
                    t_eval=tau, rtol=1e-11, atol=1e-11).y.T
    assert np.abs(run.truth[:, :2] - ref[:, :2]).max() < 2e-4  # inches
    assert np.abs(run.truth[:, 2] - ref[:, 2]).max() < 2e-6  # radians
    # The wander is defined by its field pose in closed form: a second reference.
    np.testing.assert_allclose(run.truth, run.motion.field_pose(tau), atol=2e-4)


@pytest.mark.parametrize("path", PATHS)
def test_paths_stay_on_the_field(path: str) -> None:
    for seed in (1, 2, 3):
        run = simulate(PRACTICE, path, rate_hz=20.0, duration_s=60.0, seed=seed)
        # Common practice: a competition field is 144 in square; our origin is its centre.
        assert np.abs(run.truth[:, :2]).max() <= FIELD_SIZE_IN / 2


def test_guided_path_is_the_hand_push_check() -> None:
    run = simulate(PRACTICE, "guided", duration_s=16.0)
    start = np.asarray(run.motion.start)
    # The hand-push check: 18 in forward, 18 in left, then 120 degrees counter-clockwise.
    np.testing.assert_allclose(run.truth[-1] - start, [18.0, 18.0, np.radians(120.0)], atol=1e-3)
    tau = run.t - run.t[0]
    rests = np.linalg.norm(run.motion.twist(tau), axis=1) == 0.0
    assert rests[tau < 1.0].all()  # ~1 s pause first


def test_counts_are_quantised_travel_and_reversed_wheels_count_down() -> None:
    run = simulate(METRIC, "square", duration_s=4.0)
    tau = run.t - run.t[0]
    rest = np.flatnonzero((tau > 3.25) & (tau < 3.45))[0]  # resting after the first 48 in leg
    change = count_change(run.ticks[rest], run.ticks[0])
    # DESIGN.md travel formula: one count is pi * diameter / counts_per_rev of travel.
    expected = 48.0 * MM_PER_IN / (np.pi * 48.0 / 2000.0)
    assert abs(change[0] - expected) <= 1.0  # left
    assert abs(change[1] + expected) <= 1.0  # right: mounted reversed, counts fall going forward
    assert change[2] == 0  # back wheel rolls sideways


def test_loop_period_and_clock() -> None:
    run = simulate(PRACTICE, "square", rate_hz=200.0, duration_s=5.0, seed=4)
    np.testing.assert_allclose(np.diff(run.t), run.loop_s[1:], rtol=0, atol=1e-9)
    assert 0.004 < np.median(run.loop_s) < 0.006
    assert run.loop_s.max() > 0.01  # a stall or two (about 1 % of loops)
    assert [s.loop for s in run.samples] == run.loop_s.tolist()


def test_near_wrap_crosses_the_32_bit_counter_and_seq_wraps() -> None:
    run = simulate(PRACTICE, "wander", duration_s=10.0, near_wrap=True)
    for wheel in range(3):
        ticks = run.ticks[:, wheel]
        assert ticks.max() > 2**31 - 20_000 and ticks.min() < -(2**31) + 20_000
    seq = np.array([s.seq for s in run.samples])
    assert seq.max() == 2**32 - 1 and seq.min() == 0
    result = recompute(run)
    assert len(result.seq) == len(run.t)
    assert result.position_error.max() < 1e-6
    assert truth_error(result, run)[0] < 0.01


def test_same_seed_same_run_whatever_the_faults() -> None:
    clean = simulate(PRACTICE, "wander", duration_s=3.0, seed=7)
    again = simulate(PRACTICE, "wander", duration_s=3.0, seed=7)
    faulty = simulate(PRACTICE, "wander", duration_s=3.0, seed=7, faults=parse_faults(["drop:0.3"], PRACTICE))
    other = simulate(PRACTICE, "wander", duration_s=3.0, seed=8)
    assert clean.samples == again.samples
    np.testing.assert_array_equal(clean.ticks, faulty.ticks)
    np.testing.assert_array_equal(clean.t, faulty.t)
    assert not np.array_equal(clean.truth, other.truth)


def test_imu_reports_true_heading_in_the_robots_unit() -> None:
    run = simulate(METRIC, "spin", duration_s=3.0, imu=True)
    imu = np.array([s.imu for s in run.samples])
    # DESIGN.md conventions: clockwise degrees report -degrees(th); IMUs wrap at +-180.
    diff = np.mod(imu + np.degrees(run.truth[:, 2]) + 180.0, 360.0) - 180.0
    assert np.abs(diff).max() < 0.5
    assert np.abs(imu).max() <= 180.0


def test_imu_profile_clean_run_agrees() -> None:
    profile = replace(PRACTICE, imu_mode="heading")
    run = simulate(profile, "figure-eight", duration_s=10.0)
    result = recompute(run)
    assert result.position_error.max() < 1e-6
    assert truth_error(result, run)[1] < 0.01  # IMU noise 0.1 degree


WHEEL_FAULTS = ["reversed:right", "reversed:back", "swapped:left,right", "offset-sign:back", "offset-sign:left"]
CONVENTION_FAULTS = ["heading-unit", "heading-direction", "y-axis", "heading-zero"]


@pytest.mark.parametrize(
    "profile, spec",
    [(PRACTICE, f) for f in WHEEL_FAULTS + CONVENTION_FAULTS] + [(METRIC, f) for f in CONVENTION_FAULTS],
    ids=lambda v: getattr(v, "name", v),
)
def test_each_robot_fault_makes_a_disagreement(profile, spec: str) -> None:
    clean = recompute(simulate(profile, "wander", rate_hz=50.0, duration_s=10.0, seed=2))
    faulty = recompute(simulate(profile, "wander", rate_hz=50.0, duration_s=10.0, seed=2,
                                faults=parse_faults([spec], profile)))
    assert clean.position_error.max() < 1e-6 * inches(profile)
    assert faulty.position_error.max() > 1.0 * inches(profile) or np.abs(faulty.heading_error).max() > 0.05


def test_slip_moves_both_estimates_away_from_the_truth_together() -> None:
    clean = simulate(PRACTICE, "wander", duration_s=10.0, seed=2)
    slip = simulate(PRACTICE, "wander", duration_s=10.0, seed=2, faults=parse_faults(["slip:0.02"], PRACTICE))
    result = recompute(slip)
    assert result.position_error.max() < 1e-6  # the robot sees the same slipped counts
    assert truth_error(result, slip)[0] > 10 * truth_error(recompute(clean), clean)[0]


def test_packet_faults_show_as_ignored_and_leave_the_pose_intact() -> None:
    spec = ["drop:0.05", "reorder:0.02", "duplicate:0.01"]
    clean = recompute(simulate(PRACTICE, "wander", duration_s=20.0, seed=5))
    run = simulate(PRACTICE, "wander", duration_s=20.0, seed=5, faults=parse_faults(spec, PRACTICE))
    result = recompute(run)

    assert result.dropped["duplicate"] > 0 and result.dropped["late"] > 0
    assert len(result.seq) + sum(result.dropped.values()) == len(run.samples)
    assert 0.02 < 1.0 - len(np.unique(run.delivered)) / len(run.t) < 0.09  # about 5 % dropped
    arrival = run.arrival_s
    assert (np.diff(arrival) >= 0).all()
    # Counts are absolute, so a missed or late message only merges two loops into one step.
    same = clean.pose[result.seq]
    assert np.abs(result.pose[:, :2] - same[:, :2]).max() < 1e-3
    assert np.abs(result.pose[:, 2] - same[:, 2]).max() < 1e-6
    assert result.position_error.max() < 1e-3


def test_parse_faults_syntax() -> None:
    faults = parse_faults(
        ["reversed:right,back", "swapped:left,right", "offset-sign:back", "heading-unit", "y-axis",
         "slip:0.02", "drop:0.05", "reorder:0.02", "duplicate:0.01"],
        PRACTICE,
    )
    assert faults == Faults(
        reversed=("right", "back"),
        swapped=(("left", "right"),),
        offset_sign=("back",),
        conventions=("heading_unit", "y_axis"),
        slip=0.02,
        drop=0.05,
        reorder=0.02,
        duplicate=0.01,
    )
    assert parse_faults([], PRACTICE) == Faults()


@pytest.mark.parametrize(
    "specs, match",
    [
        (["bogus"], r"unknown fault 'bogus', expected one of: reversed:WHEEL"),
        (["reversed"], r"expected reversed:WHEEL\[,WHEEL\.\.\.\] with wheels of left, right, back"),
        (["reversed:middle"], r"with wheels of left, right, back"),
        (["swapped:left"], r"swapped takes two different wheels"),
        (["reversed:right", "reversed:left,right"], r"a wheel is named twice for reversed"),
        (["swapped:left,left"], r"swapped takes two different wheels"),
        (["heading-unit:deg"], r"heading-unit takes no value"),
        (["heading-unit", "heading-unit"], r"fault heading-unit is given twice"),
        (["drop:1.5"], r"expected drop:X with 0 <= X < 1"),
        (["drop:nan"], r"expected drop:X"),
        (["slip:lots"], r"expected slip:X with 0 <= X < 0.5"),
        (["drop:0.1", "drop:0.2"], r"fault drop is given twice"),
    ],
)
def test_parse_faults_refuses_bad_names(specs: list[str], match: str) -> None:
    with pytest.raises(UsageError, match=match):
        parse_faults(specs, PRACTICE)


def test_robot_code_profile_applies_the_mistakes() -> None:
    faults = parse_faults(["reversed:right", "offset-sign:left", "offset-sign:back", "swapped:left,back",
                           "heading-unit", "heading-direction", "y-axis", "heading-zero"], METRIC)
    robot = robot_code_profile(METRIC, faults)
    left, right, back = METRIC.wheels
    assert robot.wheels[1] == replace(right, reversed=False)  # declared reversed; the code flips it back
    assert robot.wheels[0] == replace(back, x=-back.x)  # sideways wheel: forward offset negated, then swapped
    assert robot.wheels[2] == replace(left, y=-left.y)  # forward-rolling wheel: leftward offset negated
    assert (robot.reported.heading_unit, robot.reported.heading_positive) == ("rad", "ccw")
    assert (robot.reported.y_axis, robot.reported.heading_zero) == ("right", "y")
    assert METRIC.wheels == (left, right, back)  # the declared profile is left alone


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"path": "zigzag"}, r"unknown path 'zigzag', expected one of square, figure-eight"),
        ({"rate_hz": 0.0}, r"rate 0.0 Hz: expected more than 0"),
        ({"duration_s": -1.0}, r"duration -1.0 s: expected more than 0"),
        ({"seed": -3}, r"seed -3: expected a non-negative integer"),
    ],
)
def test_simulate_refuses_bad_settings(kwargs: dict, match: str) -> None:
    with pytest.raises(UsageError, match=match):
        simulate(PRACTICE, **kwargs)
