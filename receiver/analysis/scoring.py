"""Scoring hypotheses on counts: every hypothesis's recompute at once, and their disagreement.

Owns the batched recompute behind diagnosis (one matrix product for the body
displacements of all hypotheses, one ``integrate`` call for all their poses),
the RMS disagreement with the reported pose, the groups of hypotheses that
no clip can tell apart, and ``Ranked``, one explanation with its scores.
Pure numpy: no I/O, no state between calls.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from receiver.analysis.mistakes import Hypothesis, hypotheses
from receiver.analysis.refine import Fit
from receiver.odometry.conventions import imu_heading_change, rep103_to_reported, reported_to_rep103
from receiver.odometry.integrate import integrate, wrap_angle
from receiver.odometry.kinematics import Kinematics
from receiver.odometry.robot import Profile

# Hypotheses whose predicted reports differ by less than this (relative) on
# the random probe are the same explanation in different words.
_SAME_PREDICTION_RTOL = 1e-9
_PROBE_STEPS = 48


@dataclass(frozen=True)
class Ranked:
    """One explanation with its score; ``equivalent`` ones predict exactly the same reports.

    ``fit`` is its refinement, for the leaders only (None for the rest).
    """

    hypothesis: Hypothesis
    equivalent: tuple[Hypothesis, ...]
    position_rms: float  # profile's distance unit
    heading_rms: float  # radians
    score: float  # hypot(position_rms, characteristic length * heading_rms), distance unit
    index: int = 0  # the hypothesis's index in hypotheses(profile)
    fit: Fit | None = None
    same_after_fit: tuple[Ranked, ...] = ()  # leaders whose fit ends in the same profile

    @property
    def score_after(self) -> float:
        """The least a leader leaves with every constant fitted; the plain score for the rest."""
        return self.fit.score_fitted if self.fit is not None else self.score


def characteristic_length(profile: Profile) -> float:
    """RMS distance of the wheels from the tracked point: turns heading error into a distance."""
    return float(np.sqrt(np.mean([w.x**2 + w.y**2 for w in profile.wheels])))


@lru_cache(maxsize=64)
def _solve_stack(hyps: tuple[Hypothesis, ...], with_imu: bool) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None]:
    """Per hypothesis, the linear maps of Kinematics.body_delta: counts -> deltas.

    Returns W (H, n, 3) for the wheels alone and, with the IMU, W_imu
    (H, n, 3) and C (H, 3) for deltas = counts @ W_imu + dth_imu * C.
    body_delta is linear in its inputs, so feeding it unit counts reads the
    maps off without reaching into the solver. Cached: a live page asks for
    the same profile's maps at every run.
    """
    n = len(hyps[0].robot_profile.wheels)
    w, w_imu, c = [], [], []
    for h in hyps:
        kin = Kinematics(h.robot_profile)
        unit_travel = kin.travel(np.eye(n))
        w.append(kin.body_delta(unit_travel))
        if with_imu:
            w_imu.append(kin.body_delta(unit_travel, np.zeros(n)))
            c.append(kin.body_delta(np.zeros(n), np.ones(())))
    if not with_imu:
        return np.asarray(w), None, None
    return np.asarray(w), np.asarray(w_imu), np.asarray(c)


def _imu_dth(imu: np.ndarray, hyps: tuple[Hypothesis, ...]) -> np.ndarray:
    """(H, N) heading change from the IMU as each hypothesis reads the robot's unit and sense."""
    prev = np.concatenate([imu[:1], imu[:-1]])
    cache: dict[tuple[str, str], np.ndarray] = {}
    rows = []
    for h in hyps:
        rep = h.robot_profile.reported
        key = (rep.heading_unit, rep.heading_positive)
        if key not in cache:
            cache[key] = imu_heading_change(imu, prev, rep)
        rows.append(cache[key])
    return np.asarray(rows)


def body_deltas(dcounts: np.ndarray, imu: np.ndarray | None, hyps: tuple[Hypothesis, ...]) -> np.ndarray:
    """(H, N, 3) body displacements under every hypothesis: one batched product, shared counts."""
    w, w_imu, c = _solve_stack(hyps, imu is not None)
    deltas = np.matmul(dcounts[None], w)
    if imu is not None:
        dth = _imu_dth(imu, hyps)
        use = np.isfinite(dth)
        from_imu = np.matmul(dcounts[None], w_imu) + np.where(use, dth, 0.0)[..., None] * c[:, None, :]
        deltas = np.where(use[..., None], from_imu, deltas)
    return deltas


def reported_poses(pose: np.ndarray, hyps: tuple[Hypothesis, ...]) -> np.ndarray:
    """(H, N, 3) the reported poses in REP 103, as each hypothesis's conventions read them."""
    cache: dict = {}
    rows = []
    for h in hyps:
        rep = h.robot_profile.reported
        if rep not in cache:
            cache[rep] = reported_to_rep103(pose, rep)
        rows.append(cache[rep])
    return np.asarray(rows)


def recompute_all(
    deltas: np.ndarray, reported: np.ndarray, anchor: np.ndarray, method: str, loops: np.ndarray | None = None
) -> np.ndarray:
    """(H, N, 3) poses: each hypothesis's deltas integrated from its own reading of the anchors.

    All hypotheses go through one ``integrate`` call, laid end to end: every
    clip starts with an anchor, so each one restarts from its own pose.
    """
    h, n, _ = deltas.shape
    deltas = np.where(anchor[None, :, None], 0.0, deltas)
    at = np.flatnonzero(anchor)
    anchor_at = (np.arange(h)[:, None] * n + at[None, :]).ravel()
    all_loops = None if loops is None else np.tile(loops, h)
    poses = integrate(deltas.reshape(h * n, 3), np.zeros(3), method, anchor_at, reported[:, at].reshape(-1, 3), all_loops)
    return poses.reshape(h, n, 3)


def disagreement(poses: np.ndarray, reported: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(position RMS, heading RMS) over the last axis but one: shapes (..., N, 3) -> (...)."""
    d = poses - reported
    position = np.sqrt(np.mean(d[..., 0] ** 2 + d[..., 1] ** 2, axis=-1))
    heading = np.sqrt(np.mean(wrap_angle(d[..., 2]) ** 2, axis=-1))
    return position, heading


@lru_cache(maxsize=16)
def equivalence_classes(profile: Profile) -> tuple[tuple[int, ...], ...]:
    """Groups of hypothesis indices that predict the very same reports from any counts and start.

    Found on a random probe (fixed seed) with rotation and motion on every
    axis: such hypotheses are one explanation in different words (a swap of
    mirror-image wheels is the same as flipping both their offset signs), so
    no clip can rank them. The simplest of each group comes first.
    """
    hyps = hypotheses(profile)
    rng = np.random.default_rng(20240607)
    scale = characteristic_length(profile)
    kin = Kinematics(profile)
    twist = rng.normal(0.0, 1.0, (_PROBE_STEPS, 3)) * np.array([scale, scale, 0.5])
    dcounts = kin.wheel_travel(twist) / kin.travel_per_count
    start = rep103_to_reported(np.array([rng.normal(0.0, 3 * scale), rng.normal(0.0, 3 * scale), rng.uniform(-3, 3)]), profile.reported)
    imu = rng.normal(0.0, 1.0, _PROBE_STEPS) if profile.uses_imu else None
    deltas = body_deltas(dcounts, imu, hyps)
    anchor = np.zeros(_PROBE_STEPS, dtype=bool)
    anchor[0] = True
    reported = reported_poses(np.tile(start, (_PROBE_STEPS, 1)), hyps)
    poses = recompute_all(deltas, reported, anchor, "arc")
    predicted = np.asarray([rep103_to_reported(p, h.robot_profile.reported) for p, h in zip(poses, hyps)])
    gap = np.abs(predicted[:, None] - predicted[None, :])
    same = (gap <= _SAME_PREDICTION_RTOL * (scale + np.abs(predicted[None, :]))).all(axis=(2, 3))
    classes: list[tuple[int, ...]] = []
    placed = np.zeros(len(hyps), dtype=bool)
    for i in range(len(hyps)):
        if not placed[i]:
            members = np.flatnonzero(same[i] & ~placed)
            placed[members] = True
            classes.append(tuple(int(m) for m in members))
    return tuple(classes)
