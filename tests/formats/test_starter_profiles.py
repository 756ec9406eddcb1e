"""Tests for receiver/formats/starter_profiles.py: each starter layout against its textbook kinematics.

References: Lynch and Park, Modern Robotics, 2017, section 13.2: the wheel
speeds of an omniwheel or mecanum wheel, u_i = h_i(0) V_b (eq. 13.8,
V_b = (w, vx, vy)), and the explicit H(0) of a four-mecanum-wheel robot
(eq. 13.10); DESIGN.md's three-wheel formulas (common practice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from receiver.analysis.diagnose import diagnose
from receiver.formats.profile_toml import load_profile
from receiver.formats.starter_profiles import LAYOUTS, ROLLER_DEG, starter_profile, starter_text
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.kinematics import Kinematics, observable
from receiver.odometry.recompute import Tracker
from receiver.odometry.robot import inches
from receiver.sim.simulate import simulate

MM = 25.4


def _h(x: float, y: float, beta: float, gamma: float, r: float) -> np.ndarray:
    """Modern Robotics eq. 13.8 at phi = 0: h_i(0) = (1 / r) [1, tan g] R(-b) [[-y, 1, 0], [x, 0, 1]]."""
    lead = np.array([1.0, math.tan(gamma)]) / r
    turn = np.array([[math.cos(beta), math.sin(beta)], [-math.sin(beta), math.cos(beta)]])
    return lead @ turn @ np.array([[-y, 1.0, 0.0], [x, 0.0, 1.0]])


@pytest.mark.parametrize("unit", ["in", "mm"])
@pytest.mark.parametrize("layout", LAYOUTS)
def test_each_starter_loads_back_and_observes_the_pose(tmp_path, layout: str, unit: str) -> None:
    path = tmp_path / f"{layout}.toml"
    path.write_text(starter_text(layout, unit))
    profile = load_profile(path)
    assert profile == starter_profile(layout, unit)
    assert profile.distance_unit == unit and profile.name == "my-robot"
    assert observable(profile.wheels, with_imu=profile.uses_imu)
    text = path.read_text()
    assert "How to measure" in text and "counts_per_rev = " in text and ".0   " not in text.split("counts_per_rev = ")[1][:8]


def test_mecanum_drive_encoders_match_the_four_mecanum_wheel_matrix() -> None:
    # Modern Robotics eq. 13.10, wheels 1-4 front left, front right, rear
    # right, rear left; l and w the half length and half width; r the radius.
    profile = starter_profile("mecanum", "mm")
    real_diameter = 96.0  # the starter's wheel, written as 96 * cos(45 deg) rounded to 0.01 mm
    r = profile.wheels[0].diameter / math.cos(math.radians(ROLLER_DEG)) / 2.0
    l, w = abs(profile.wheels[0].x), abs(profile.wheels[0].y)
    H0 = np.array([[-l - w, 1, -1], [l + w, 1, 1], [l + w, 1, -1], [-l - w, 1, 1]]) / r
    # The encoder of wheel i measures its turning u_i: counts = u_i / (2 pi) * counts per wheel turn.
    twist = np.array([0.3, 120.0, -45.0])  # (w rad/s, vx, vy mm/s) for one second
    u = H0 @ twist
    kin = Kinematics(profile)
    counts = u / (2.0 * math.pi) * np.array([wh.counts_per_rev * wh.gear_ratio for wh in profile.wheels])
    body = kin.body_delta(kin.travel(counts))
    np.testing.assert_allclose(body, [twist[1], twist[2], twist[0]], rtol=1e-9)
    # Row by row: our wheel model with angle = roller angle and diameter x cos(45 deg) is eq. 13.8's h_i.
    gammas = [math.radians(wh.angle) for wh in profile.wheels]
    assert [abs(wh.angle) for wh in profile.wheels] == [ROLLER_DEG] * 4
    for wheel, gamma, row in zip(profile.wheels, gammas, H0):
        np.testing.assert_allclose(_h(wheel.x, wheel.y, 0.0, gamma, r), row, rtol=1e-12)
        assert wheel.diameter == pytest.approx(real_diameter * math.cos(gamma), abs=0.005)


@pytest.mark.parametrize("layout", ["three-wheel", "two-wheel-imu", "x-drive"])
def test_wheel_rows_are_the_textbooks_omniwheel_rows(layout: str) -> None:
    # Tracking wheels and omni wheels free-roll sideways: eq. 13.8 with gamma = 0
    # and beta = the wheel's rolling angle; our rows act on (dx, dy, dth).
    profile = starter_profile(layout)
    kin = Kinematics(profile)
    for wheel, row in zip(profile.wheels, kin.matrix):
        h = _h(wheel.x, wheel.y, math.radians(wheel.angle), 0.0, 1.0)
        np.testing.assert_allclose(row, [h[1], h[2], h[0]], atol=1e-12)


def test_three_wheel_and_two_wheel_imu_follow_the_common_formulas() -> None:
    # DESIGN.md: dth = (s_R - s_L) / (y_L - y_R), dx = s_L + y_L dth, dy = s_S - x_S dth.
    three = starter_profile("three-wheel")
    left, right, back = three.wheels
    s = np.array([2.0, 1.2, 0.4])
    dth = (s[1] - s[0]) / (left.y - right.y)
    expected = [s[0] + left.y * dth, s[2] - back.x * dth, dth]
    np.testing.assert_allclose(Kinematics(three).body_delta(s), expected, atol=1e-12)
    # With the IMU's heading change: dx = s_F + y_F dth, dy = s_S - x_S dth.
    two = starter_profile("two-wheel-imu")
    forward, sideways = two.wheels
    got = Kinematics(two).body_delta(np.array([2.0, 0.4]), np.array(0.05))
    np.testing.assert_allclose(got, [2.0 + forward.y * 0.05, 0.4 - sideways.x * 0.05, 0.05], atol=1e-12)


@pytest.mark.parametrize("unit", ["in", "mm"])
@pytest.mark.parametrize("layout", LAYOUTS)
def test_each_starter_round_trips_a_simulated_drive(layout: str, unit: str) -> None:
    profile = starter_profile(layout, unit)
    run = simulate(profile, "wander", 50.0, 8.0, 2)
    cols = columns_from_samples(run.samples, len(profile.wheels))
    result = Tracker(profile).feed(cols)
    # The recompute from the counts follows the true path to the encoders'
    # and the IMU's resolution (drive encoders: about 0.4 mm a count).
    error = np.hypot(*(result.pose[:, :2] - run.truth[:, :2]).T).max()
    assert error <= 0.05 * inches(unit)
    assert np.abs(result.pose[:, 2] - run.truth[:, 2]).max() <= math.radians(0.5)
    d = diagnose(cols, profile)
    assert d.best.hypothesis.id == "none" and d.confidence == "high"
