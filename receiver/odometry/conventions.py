"""The robot's own pose conventions <-> REP 103 (x forward, y left, CCW, radians).

Owns the conversion formulas of DESIGN.md (Conventions); pure numpy over
arrays shaped (..., 3). Distances keep the profile's unit: only axes and
heading change here.
"""

from __future__ import annotations

import math

import numpy as np

from receiver.odometry.robot import Reported


def _heading_terms(reported: Reported) -> tuple[float, float, float]:
    """(scale to radians, sign k, zero offset) for th = zero + k * h * scale."""
    scale = math.pi / 180.0 if reported.heading_unit == "deg" else 1.0
    k = 1.0 if reported.heading_positive == "ccw" else -1.0
    if reported.heading_zero == "x":
        zero = 0.0
    else:
        zero = math.pi / 2.0 if reported.y_axis == "left" else -math.pi / 2.0
    return scale, k, zero


def reported_to_rep103(pose: np.ndarray, reported: Reported) -> np.ndarray:
    """Robot-reported poses (..., 3) -> REP 103 poses (..., 3), heading in radians."""
    pose = np.asarray(pose, dtype=float)
    scale, k, zero = _heading_terms(reported)
    y_sign = 1.0 if reported.y_axis == "left" else -1.0
    return np.stack([pose[..., 0], y_sign * pose[..., 1], zero + k * scale * pose[..., 2]], axis=-1)


def rep103_to_reported(pose: np.ndarray, reported: Reported) -> np.ndarray:
    """The inverse: what a robot with these conventions would report."""
    pose = np.asarray(pose, dtype=float)
    scale, k, zero = _heading_terms(reported)
    y_sign = 1.0 if reported.y_axis == "left" else -1.0
    return np.stack([pose[..., 0], y_sign * pose[..., 1], (pose[..., 2] - zero) / (k * scale)], axis=-1)


def imu_heading_change(imu_now: np.ndarray, imu_before: np.ndarray, reported: Reported) -> np.ndarray:
    """Change in REP 103 heading between two IMU readings in the robot's heading unit.

    The difference is wrapped into (-pi, pi], since IMUs commonly wrap their
    reading at +-180 degrees.
    """
    scale, k, _ = _heading_terms(reported)
    change = k * scale * (np.asarray(imu_now, dtype=float) - np.asarray(imu_before, dtype=float))
    return np.mod(change + np.pi, 2.0 * np.pi) - np.pi


class OneSample:
    """``reported_to_rep103`` and ``imu_heading_change`` for one sample at a
    time, in plain floats, with the robot's terms worked out once: the live
    path, where numpy's cost per call would dwarf the arithmetic."""

    def __init__(self, reported: Reported) -> None:
        scale, k, self._zero = _heading_terms(reported)
        self._turn = k * scale  # the same product the array functions form first
        self._y_sign = 1.0 if reported.y_axis == "left" else -1.0

    def to_rep103(self, pose: tuple[float, float, float]) -> tuple[float, float, float]:
        """One reported pose (x, y, heading) -> REP 103, as ``reported_to_rep103``."""
        return pose[0], self._y_sign * pose[1], self._zero + self._turn * pose[2]

    def imu_heading_change(self, imu_now: float, imu_before: float) -> float:
        """REP 103 heading change, radians, between two IMU readings in the robot's unit,
        wrapped as ``imu_heading_change`` wraps it.
        """
        # Python's % on floats is numpy's mod: the result takes the divisor's sign.
        return (self._turn * (imu_now - imu_before) + math.pi) % (2.0 * math.pi) - math.pi
