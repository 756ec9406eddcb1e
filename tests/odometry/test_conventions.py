"""Reported-pose conventions -> REP 103 (x forward, y left, CCW, radians)."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from receiver.odometry.conventions import imu_heading_change, rep103_to_reported, reported_to_rep103
from receiver.odometry.robot import Reported

ALL = [
    Reported(*combo)
    for combo in itertools.product(("rad", "deg"), ("ccw", "cw"), ("left", "right"), ("x", "y"))
]


@pytest.mark.parametrize("reported", ALL, ids=lambda r: "-".join(str(v) for v in r.__dict__.values() if v is not None))
def test_round_trip(reported):
    rng = np.random.default_rng(5)
    poses = rng.normal(size=(20, 3)) * [40, 40, 2]
    np.testing.assert_allclose(reported_to_rep103(rep103_to_reported(poses, reported), reported), poses, atol=1e-12)


# Hand-worked cases. REP 103: a robot at (10, 5) facing field +y (turned 90
# degrees counter-clockwise from +x) has heading +pi/2.
REP_POSE = np.array([10.0, 5.0, math.pi / 2])


@pytest.mark.parametrize(
    ("reported", "expected"),
    [
        (Reported("rad", "ccw", "left", "x"), (10.0, 5.0, math.pi / 2)),
        (Reported("deg", "ccw", "left", "x"), (10.0, 5.0, 90.0)),
        (Reported("deg", "cw", "left", "x"), (10.0, 5.0, -90.0)),  # clockwise-positive sees a left turn as negative
        (Reported("rad", "ccw", "right", "x"), (10.0, -5.0, math.pi / 2)),  # +y to the right: the point is at -5
        (Reported("rad", "ccw", "left", "y"), (10.0, 5.0, 0.0)),  # heading 0 when facing +y
        (Reported("deg", "cw", "right", "y"), (10.0, -5.0, -180.0)),  # facing +y(left) = 180 deg from +y(right)
    ],
)
def test_hand_worked_conversions(reported, expected):
    got = rep103_to_reported(REP_POSE, reported)
    assert got[:2] == pytest.approx(expected[:2])
    # Headings are equal modulo a full turn.
    full_turn = 360.0 if reported.heading_unit == "deg" else 2 * math.pi
    assert math.remainder(got[2] - expected[2], full_turn) == pytest.approx(0.0, abs=1e-9)
    back = reported_to_rep103(np.array(expected), reported)
    assert back[:2] == pytest.approx(REP_POSE[:2])
    assert math.remainder(back[2] - REP_POSE[2], 2 * math.pi) == pytest.approx(0.0, abs=1e-9)


def test_imu_change_wraps_across_180_degrees():
    reported = Reported("deg", "ccw", "left", "x")
    # From 179 deg to -179 deg is a 2 degree CCW turn, not -358.
    assert imu_heading_change(np.array(-179.0), np.array(179.0), reported) == pytest.approx(math.radians(2.0))
    cw = Reported("deg", "cw", "left", "x")
    assert imu_heading_change(np.array(10.0), np.array(0.0), cw) == pytest.approx(math.radians(-10.0))
