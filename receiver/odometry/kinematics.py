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


def _inverse(gram: list[list[float]]) -> list[list[float]] | None:
    """Inverse of a 2x2 or 3x3 matrix by cofactors, in floats; None when it is (nearly) singular."""
    if len(gram) == 2:
        (a, b), (c, d) = gram
        det = a * d - b * c
        scale = max(abs(a * d), abs(b * c), 1e-300)
        return None if abs(det) <= _RANK_TOLERANCE**2 * scale else [[d / det, -b / det], [-c / det, a / det]]
    (a, b, c), (d, e, f), (g, h, i) = gram
    cof = [[e * i - f * h, c * h - b * i, b * f - c * e],
           [f * g - d * i, a * i - c * g, c * d - a * f],
           [d * h - e * g, b * g - a * h, a * e - b * d]]
    det = a * cof[0][0] + b * cof[1][0] + c * cof[2][0]
    scale = max(abs(a * cof[0][0]) + abs(b * cof[1][0]) + abs(c * cof[2][0]), 1e-300)
    if abs(det) <= _RANK_TOLERANCE**2 * scale:
        return None
    return [[x / det for x in row] for row in cof]


def solve_matrix(matrix: np.ndarray) -> np.ndarray:
    """The least-squares solve (pseudo-inverse, (k, n)) of an (n, k) wheel matrix, k = 2 or 3.

    Square: its inverse; taller: (A^T A)^-1 A^T. Both by cofactors in plain
    floats: LAPACK's SVD (np.linalg.pinv) wakes BLAS threads that then spin
    beside the caller, which a fit calling it per evaluation paid for on a
    busy machine. A (nearly) singular matrix falls back to pinv.
    """
    rows = np.asarray(matrix, dtype=float)
    n, k = rows.shape
    a = rows.tolist()
    if n == k:
        inverse = _inverse(a)
        return np.asarray(inverse) if inverse is not None else np.linalg.pinv(rows)
    gram = [[sum(r[i] * r[j] for r in a) for j in range(k)] for i in range(k)]
    inverse = _inverse(gram)
    if inverse is None:
        return np.linalg.pinv(rows)
    return np.asarray([[sum(inverse[i][m] * r[m] for m in range(k)) for r in a] for i in range(k)])


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
        # Least squares (exact for three wheels): the pseudo-inverse solves A d = s.
        self._solve = solve_matrix(self.matrix)
        # With the IMU giving dth: A[:, :2] [dx dy] = s - A[:, 2] dth.
        self._solve_xy = solve_matrix(self.matrix[:, :2])
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
