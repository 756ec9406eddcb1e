"""Wheel geometry -> body displacement, against textbook formulas and trade numbers."""

from __future__ import annotations

import math

import numpy as np
import pytest

from receiver.formats.profile_toml import profile_from_table, profile_to_table
from receiver.odometry.kinematics import Kinematics, observable
from receiver.odometry.robot import Wheel


def test_common_layout_matches_the_closed_form(practice_profile):
    # The common three-wheel layout reduces to dth = (sR - sL) / (yL - yR),
    # dx = sL + yL dth, dy = sS - xS dth (rigid-body kinematics, Lynch and
    # Park, Modern Robotics, 2017, ch. 13; the same equations as DESIGN.md).
    kin = Kinematics(practice_profile)
    w = {wh.name: wh for wh in practice_profile.wheels}
    rng = np.random.default_rng(3)
    travel = rng.normal(0.0, 2.0, size=(50, 3))
    s_l, s_r, s_s = travel.T
    dth = (s_r - s_l) / (w["left"].y - w["right"].y)
    dx = s_l + w["left"].y * dth
    dy = s_s - w["back"].x * dth
    np.testing.assert_allclose(kin.body_delta(travel), np.column_stack([dx, dy, dth]), atol=1e-12)


def test_forward_model_inverts_the_solve(practice_profile):
    kin = Kinematics(practice_profile)
    rng = np.random.default_rng(4)
    delta = rng.normal(size=(100, 3))
    np.testing.assert_allclose(kin.body_delta(kin.wheel_travel(delta)), delta, atol=1e-12)


def test_rep103_signs_of_pushes(practice_profile):
    # REP 103: pushing forward raises x, pushing left raises y, turning
    # counter-clockwise raises heading. Wheel travel for each push, by hand:
    kin = Kinematics(practice_profile)
    forward = kin.body_delta(np.array([1.0, 1.0, 0.0]))
    left = kin.body_delta(np.array([0.0, 0.0, 1.0]))
    # CCW turn: the left wheel rolls backward, the right forward, and the back
    # wheel (behind centre) is swung to the right, i.e. rolls negative.
    ccw = kin.body_delta(np.array([-1.0, 1.0, -0.88]))
    assert forward[0] > 0 and abs(forward[1]) < 1e-12 and abs(forward[2]) < 1e-12
    assert left[1] > 0 and abs(left[0]) < 1e-12 and abs(left[2]) < 1e-12
    assert ccw[2] > 0 and abs(ccw[0]) < 1e-12 and abs(ccw[1]) < 1e-2


@pytest.mark.parametrize(
    ("counts_per_rev", "diameter_mm", "expected_mm"),
    [
        # Common practice: 8192- and 2000-count encoders on 35 mm and 48 mm
        # wheels. One count is pi * D / CPR of travel.
        (8192, 35.0, 0.013422),  # pi * 35 / 8192 = 0.0134224 mm
        (2000, 48.0, 0.075398),  # pi * 48 / 2000 = 0.0753982 mm
        (8192, 48.0, 0.018408),
        (2000, 35.0, 0.054978),
    ],
)
def test_one_count_of_travel(counts_per_rev, diameter_mm, expected_mm):
    wheel = Wheel("w", 0.0, 0.0, 0.0, counts_per_rev, diameter_mm)
    assert wheel.travel_per_count == pytest.approx(expected_mm, abs=1e-6)
    geared = Wheel("w", 0.0, 0.0, 0.0, counts_per_rev, diameter_mm, gear_ratio=2.0, reversed=True)
    assert geared.travel_per_count == pytest.approx(-expected_mm / 2.0, abs=1e-6)


def test_four_wheels_use_least_squares(practice_profile):
    table = profile_to_table(practice_profile)
    table["wheel"].append(
        {"name": "front", "x": 5.5, "y": 0.0, "angle": 90.0, "counts_per_rev": 8192, "diameter": 1.378}
    )
    kin = Kinematics(profile_from_table(table))
    delta = np.array([0.7, -0.3, 0.05])
    travel = kin.wheel_travel(delta)
    np.testing.assert_allclose(kin.body_delta(travel), delta, atol=1e-12)
    # Noise on the travels: the solve equals numpy's least-squares answer.
    noisy = travel + np.array([0.01, -0.02, 0.015, 0.005])
    expected = np.linalg.lstsq(kin.matrix, noisy, rcond=None)[0]
    np.testing.assert_allclose(kin.body_delta(noisy), expected, atol=1e-12)


def test_angled_wheels_observe_everything():
    # Three wheels at 120 degrees around centre (a layout some teams use).
    wheels = [
        Wheel(str(i), 4 * math.cos(a), 4 * math.sin(a), math.degrees(a) + 90, 8192, 1.378)
        for i, a in enumerate(np.radians([90, 210, 330]))
    ]
    assert observable(wheels)
    table = {"name": "tri", "distance_unit": "in", "wheel": [w.__dict__ for w in wheels]}
    kin = Kinematics(profile_from_table(table))
    delta = np.array([0.2, 0.4, -0.1])
    np.testing.assert_allclose(kin.body_delta(kin.wheel_travel(delta)), delta, atol=1e-12)


def test_imu_heading_replaces_the_wheel_heading(practice_profile):
    kin = Kinematics(practice_profile)
    delta = np.array([1.0, 0.5, 0.1])
    travel = kin.wheel_travel(delta)
    with_imu = kin.body_delta(travel, dth_imu=np.array(0.1))
    np.testing.assert_allclose(with_imu, delta, atol=1e-12)
    # A different IMU heading change wins over the wheels', and a missing
    # reading (NaN) falls back to the wheels.
    assert kin.body_delta(travel, dth_imu=np.array(0.2))[2] == pytest.approx(0.2)
    np.testing.assert_allclose(kin.body_delta(travel, dth_imu=np.array(np.nan)), delta, atol=1e-12)


@pytest.mark.parametrize("shape", [(3, 3), (4, 3), (6, 3), (2, 2), (3, 2), (4, 2)])
def test_the_solve_is_the_pseudo_inverse(shape):
    # Reference: numpy.linalg.pinv (SVD-based Moore-Penrose pseudo-inverse).
    from receiver.odometry.kinematics import solve_matrix

    rng = np.random.default_rng(sum(shape))
    for _ in range(100):
        matrix = rng.normal(size=shape)
        np.testing.assert_allclose(solve_matrix(matrix), np.linalg.pinv(matrix), rtol=1e-8, atol=1e-10)
    # Two wheels at one spot (a sign hypothesis can put them there): singular, pinv's answer.
    singular = np.array([[1.0, 0.0, 6.25], [1.0, 0.0, 6.25], [0.0, 1.0, -5.5]])
    np.testing.assert_allclose(solve_matrix(singular), np.linalg.pinv(singular), atol=1e-12)
