"""Diagnosis: which convention mistake turns the profile's recompute into the robot's own pose.

Owns the search over the hypotheses of mistakes.py on one robot's clip:
recompute the pose under every hypothesis at once, score each against the
reported pose, group hypotheses no clip could tell apart, rank, judge how
sure the ranking is, and hand the best one to refine.py for the continuous
constants. Pure numpy and scipy: no I/O, no clock, no state between calls.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from receiver.analysis.mistakes import Hypothesis, hypotheses, profile_changes, verdict
from receiver.analysis.refine import Fit, refine
from receiver.analysis.sample_clip import SampleClip, clip_from_columns, last_seconds
from receiver.odometry.columns import Columns
from receiver.odometry.conventions import imu_heading_change, rep103_to_reported, reported_to_rep103
from receiver.odometry.integrate import integrate, wrap_angle
from receiver.odometry.kinematics import Kinematics
from receiver.odometry.robot import Profile, inches

# The runner-up must leave at least this much more disagreement (RMS, inches)
# than the best before the clip is said to tell them apart: below it, a real
# robot's own rounding and integration differences could swap them.
MARGIN_FLOOR_IN = 0.5
# ...and at least this many times the best one's, for "high" confidence.
CONFIDENT_RATIO = 3.0
# A best explanation that still leaves this much (RMS, inches) after
# refinement explains the disagreement only in part.
POOR_FIT_IN = 1.0
# Hypotheses whose predicted reports differ by less than this (relative) on
# the random probe are the same explanation in different words.
_SAME_PREDICTION_RTOL = 1e-9
_PROBE_STEPS = 48
CONFIDENCE_LEVELS = ("high", "low", "not enough motion")


@dataclass(frozen=True)
class Ranked:
    """One explanation with its score; ``equivalent`` ones predict exactly the same reports."""

    hypothesis: Hypothesis
    equivalent: tuple[Hypothesis, ...]
    position_rms: float  # profile's distance unit
    heading_rms: float  # radians
    score: float  # hypot(position_rms, characteristic length * heading_rms), distance unit


@dataclass
class Diagnosis:
    """One robot's diagnosis: explanations ranked best first with scores, how sure the
    ranking is, the fitted constants, and the profile that agrees with the robot
    code (``corrected``). Distances in the profile's unit.
    """

    robot: str
    profile: Profile
    samples: int
    duration_s: float
    travel: float  # distance driven in the clip as the profile sees it, distance unit
    rotation_rad: float  # total turning, radians (unsigned)
    ranking: list[Ranked]
    margin: float  # second score minus first, distance unit
    confidence: str  # one of CONFIDENCE_LEVELS
    verdict: str
    fit: Fit
    corrected: Profile  # the profile that agrees with the robot code
    notes: list[str] = field(default_factory=list)

    @property
    def best(self) -> Ranked:
        """The leading explanation (``ranking[0]``)."""
        return self.ranking[0]

    @property
    def changes(self) -> list[str]:
        """The suggested profile change, as ``profile_changes`` lines from ``profile`` to ``corrected``."""
        return profile_changes(self.profile, self.corrected)

    def to_json(self, top: int = 5) -> dict:
        """The diagnosis for ``diagnose --json``: the first ``top`` explanations, numbers rounded,
        angles in degrees.
        """
        unit = self.profile.distance_unit
        return {
            "robot": self.robot,
            "samples": self.samples,
            "duration_s": round(self.duration_s, 6),
            "travel": round(self.travel, 6),
            "rotation_deg": round(float(np.degrees(self.rotation_rad)), 3),
            "distance_unit": unit,
            "verdict": self.verdict,
            "confidence": self.confidence,
            "margin": round(self.margin, 6),
            "hypotheses": [
                {
                    "id": r.hypothesis.id,
                    "words": verdict(r.hypothesis, self.profile),
                    "equivalent": [e.id for e in r.equivalent],
                    "position_rms": round(r.position_rms, 6),
                    "heading_rms_deg": round(float(np.degrees(r.heading_rms)), 6),
                    "score": round(r.score, 6),
                }
                for r in self.ranking[:top]
            ],
            "fitted": [v.to_json() for v in self.fit.values],
            "score_after_fit": round(self.fit.score_after, 6),
            "profile_changes": self.changes,
            "notes": self.notes,
        }


def characteristic_length(profile: Profile) -> float:
    """RMS distance of the wheels from the tracked point: turns heading error into a distance."""
    return float(np.sqrt(np.mean([w.x**2 + w.y**2 for w in profile.wheels])))


def _solve_stack(hyps: tuple[Hypothesis, ...], with_imu: bool) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None]:
    """Per hypothesis, the linear maps of Kinematics.body_delta: counts -> deltas.

    Returns W (H, n, 3) for the wheels alone and, with the IMU, W_imu
    (H, n, 3) and C (H, 3) for deltas = counts @ W_imu + dth_imu * C.
    body_delta is linear in its inputs, so feeding it unit counts reads the
    maps off without reaching into the solver.
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
    deltas: np.ndarray, reported: np.ndarray, anchor: np.ndarray, method: str
) -> np.ndarray:
    """(H, N, 3) poses: each hypothesis's deltas integrated from its own reading of the anchors.

    All hypotheses go through one ``integrate`` call, laid end to end: every
    clip starts with an anchor, so each one restarts from its own pose.
    """
    h, n, _ = deltas.shape
    deltas = np.where(anchor[None, :, None], 0.0, deltas)
    at = np.flatnonzero(anchor)
    anchor_at = (np.arange(h)[:, None] * n + at[None, :]).ravel()
    poses = integrate(deltas.reshape(h * n, 3), np.zeros(3), method, anchor_at, reported[:, at].reshape(-1, 3))
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


def diagnose_clip(clip: SampleClip, profile: Profile, robot: str | None = None, method: str = "arc") -> Diagnosis:
    """Rank every hypothesis on a clip with reported poses, refine the best, judge the margin."""
    hyps = hypotheses(profile)
    imu = clip.imu if profile.uses_imu else None
    deltas = body_deltas(clip.dcounts, imu, hyps)
    reported = reported_poses(clip.pose, hyps)
    poses = recompute_all(deltas, reported, clip.anchor, method)
    position, heading = disagreement(poses, reported)
    length = characteristic_length(profile)
    score = np.hypot(position, length * heading)

    groups = sorted(equivalence_classes(profile), key=lambda members: score[members[0]])
    ranking = [
        Ranked(hyps[m[0]], tuple(hyps[i] for i in m[1:]), float(position[m[0]]), float(heading[m[0]]), float(score[m[0]]))
        for m in groups
    ]
    best_index = groups[0][0]
    # The clip's motion as the profile sees it (hypothesis 0 is "no mistake").
    seen = np.where(clip.anchor[:, None], 0.0, deltas[0])
    fit = refine(clip, hyps[best_index], reported[best_index], method, length)

    inch = inches(profile.distance_unit)
    margin = ranking[1].score - ranking[0].score if len(ranking) > 1 else float("inf")
    notes = []
    if margin < MARGIN_FLOOR_IN * inch:
        confidence = "not enough motion"
        notes.append(
            "the clip cannot tell the best explanations apart: drive forward, sideways and turn "
            "(at least a quarter turn) within the clip"
        )
    elif ranking[1].score < CONFIDENT_RATIO * ranking[0].score:
        confidence = "low"
    else:
        confidence = "high"
    if fit.score_after > POOR_FIT_IN * inch:
        notes.append(
            f"even the best explanation leaves {fit.score_after:.3g} {profile.distance_unit} RMS: "
            "something outside the searched mistakes differs too"
        )
        if confidence == "high":
            confidence = "low"
    undecided = confidence == "not enough motion"
    if ranking[0].equivalent and not undecided:
        also = "; ".join(verdict(h, profile) for h in ranking[0].equivalent)
        notes.append(f"no clip can tell this from: {also}")
    faults = ranking[0].hypothesis.faults
    if (faults.reversed or faults.swapped or faults.offset_sign) and not undecided:
        notes.append(
            "the suggested profile follows the robot code; which of the two is physically right, "
            "the guided check tells (podwatch diagnose --guided)"
        )
    return Diagnosis(
        robot=robot or profile.name,
        profile=profile,
        samples=len(clip),
        duration_s=clip.duration_s,
        travel=float(np.hypot(seen[:, 0], seen[:, 1]).sum()),
        rotation_rad=float(np.abs(seen[:, 2]).sum()),
        ranking=ranking,
        margin=float(margin),
        confidence=confidence,
        verdict="not enough motion to tell" if undecided else verdict(ranking[0].hypothesis, profile),
        fit=fit,
        corrected=profile if undecided else fit.profile,
        notes=notes,
    )


def diagnose(cols: Columns, profile: Profile, robot: str | None = None, method: str = "arc") -> Diagnosis:
    """Diagnose one robot's received columns (they must carry the robot's own pose)."""
    return diagnose_clip(clip_from_columns(cols, need_pose=True), profile, robot, method)


def diagnose_recent(cols: Columns, profile: Profile, seconds: float = 10.0, robot: str | None = None) -> Diagnosis:
    """Diagnose the last ``seconds`` of a live session's columns (robot clock)."""
    return diagnose(last_seconds(cols, seconds), profile, robot)
