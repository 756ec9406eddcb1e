"""Wheel geometry -> body displacement, in the REP 103 body frame.

Owns the observation model of tracking wheels: a wheel at (x_i, y_i) rolling
along angle phi_i measures s_i = cos(phi) (dx - y dth) + sin(phi) (dy + x dth)
(rigid-body velocity of the contact point, Lynch and Park, Modern Robotics,
2017, ch. 13). Pure numpy: no I/O, no clocks, no state between calls.
"""

from __future__ import annotations

import math
from operator import mul
from typing import TYPE_CHECKING, Sequence

import numpy as np

if TYPE_CHECKING:
    from receiver.odometry.robot import Profile, Wheel

# Singular values below this (relative to the largest) mean the geometry
# cannot tell the motions apart; real layouts sit far above it.
_RANK_TOLERANCE = 1e-6


def observation_matrix(wheels: Sequence[Wheel]) -> np.ndarray:
    """Rows [cos phi, sin phi, x sin phi - y cos phi] mapping (dx, dy, dth) to travel."""
    rows = []
    for w in wheels:
        phi = math.radians(w.angle)
        c, s = math.cos(phi), math.sin(phi)
        rows.append([c, s, w.x * s - w.y * c])
    return np.asarray(rows, dtype=float)


def _full_rank(matrix: np.ndarray) -> bool:
    sv = np.linalg.svd(matrix, compute_uv=False)
    return bool(sv.size == matrix.shape[1] and sv[-1] > _RANK_TOLERANCE * max(sv[0], 1e-12))


def observable(wheels: Sequence[Wheel], with_imu: bool = False) -> bool:
    """True when the wheels (and the IMU, when used) determine dx, dy and dth."""
    a = observation_matrix(wheels)
    return _full_rank(a[:, :2] if with_imu else a)


def times_transpose(rows: np.ndarray, matrix: np.ndarray) -> np.ndarray:
    """``rows @ matrix.T`` for a small matrix, as one scaled add per column of it.

    With an inner size of 3 or 4 these adds are several times faster than BLAS,
    which may start threads for it.
    """
    out = rows[..., :1] * matrix[:, 0]
    for k in range(1, matrix.shape[1]):
        out += rows[..., k : k + 1] * matrix[:, k]
    return out


class Kinematics:
    """Precomputed solve for one profile.

    Arrays are shaped (..., n_wheels) for counts and travel and (..., 3) for
    body displacements (dx, dy, dth): distance unit of the profile, radians,
    REP 103 body frame (x forward, y left, counter-clockwise positive).
    """

    def __init__(self, profile: Profile) -> None:
        self.profile = profile
        self.n_wheels = len(profile.wheels)
        self.matrix = observation_matrix(profile.wheels)
        self.travel_per_count = np.array([w.travel_per_count for w in profile.wheels])
        # Least squares (exact for three wheels): pinv solves A d = s.
        self._solve = np.linalg.pinv(self.matrix)
        # With the IMU giving dth: A[:, :2] [dx dy] = s - A[:, 2] dth.
        self._solve_xy = np.linalg.pinv(self.matrix[:, :2])
        # Plain-float rows for body_delta_one, whose samples come one at a
        # time: numpy's cost per call (microseconds) would dwarf the sums.
        # Body delta per count of each wheel: the solve with travel folded in.
        self._per_count = (self._solve * self.travel_per_count).tolist()
        # With the IMU: (dx, dy) per count, and per radian of IMU heading change.
        self._xy_per_count = (self._solve_xy * self.travel_per_count).tolist()
        self._xy_per_turn = (self._solve_xy @ self.matrix[:, 2]).tolist()

    def travel(self, dcounts: np.ndarray) -> np.ndarray:
        """Encoder count changes (..., n) -> signed wheel travel (..., n)."""
        return np.asarray(dcounts, dtype=float) * self.travel_per_count

    def body_delta(self, travel: np.ndarray, dth_imu: np.ndarray | None = None) -> np.ndarray:
        """Wheel travel (..., n) -> body displacement (..., 3).

        Where dth_imu (shape (...)) is given and finite, heading change comes
        from the IMU and the wheels give dx, dy; elsewhere the wheels give all.
        """
        travel = np.asarray(travel, dtype=float)
        delta = times_transpose(travel, self._solve)
        if dth_imu is not None:
            dth = np.asarray(dth_imu, dtype=float)
            use = np.isfinite(dth)
            dth_safe = np.where(use, dth, 0.0)
            xy = times_transpose(travel - dth_safe[..., None] * self.matrix[:, 2], self._solve_xy)
            delta = np.where(use[..., None], np.concatenate([xy, dth_safe[..., None]], axis=-1), delta)
        return delta

    def body_delta_one(self, dcounts: Sequence[int], dth_imu: float | None = None) -> tuple[float, float, float]:
        """``body_delta(travel(dcounts), dth_imu)`` for one sample, in plain
        floats (equal to rounding: the travel per count is folded in first)."""
        if dth_imu is not None and math.isfinite(dth_imu):
            x_row, y_row = self._xy_per_count
            x_turn, y_turn = self._xy_per_turn
            return (
                sum(map(mul, x_row, dcounts)) - dth_imu * x_turn,
                sum(map(mul, y_row, dcounts)) - dth_imu * y_turn,
                dth_imu,
            )
        x_row, y_row, turn_row = self._per_count
        return sum(map(mul, x_row, dcounts)), sum(map(mul, y_row, dcounts)), sum(map(mul, turn_row, dcounts))

    def wheel_travel(self, body_delta: np.ndarray) -> np.ndarray:
        """The forward model: body displacement (..., 3) -> wheel travel (..., n)."""
        return times_transpose(np.asarray(body_delta, dtype=float), self.matrix)
