"""Diagnosis: which convention mistake turns the profile's recompute into the robot's own pose.

Owns the search on one robot's clip: score every hypothesis of mistakes.py
at once (scoring.py), compare with the integration the robot code uses
(integration_check.py), refine the leaders' constants (refine.py), and judge
the ranking against the noise the clip shows (judgement.py), naming near
twins (twins.py). Pure numpy and scipy: no I/O, no clock, no state between calls.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import lru_cache

import numpy as np

from receiver.analysis.integration_check import DEFAULT_METHOD, IntegrationFinding, find_integration
from receiver.analysis.judgement import DECIDES, Judgement, Noise, judge, same_profile
from receiver.analysis.mistakes import hypotheses, profile_changes, verdict
from receiver.analysis.refine import Fit, refine
from receiver.analysis.sample_clip import SampleClip, clip_from_columns, last_seconds
from receiver.analysis.scoring import (
    Ranked,
    body_deltas,
    characteristic_length,
    disagreement,
    equivalence_classes,
    recompute_all,
    reported_poses,
)
from receiver.odometry.columns import Columns
from receiver.odometry.robot import Profile

__all__ = ["Diagnosis", "Ranked", "diagnose", "diagnose_clip", "diagnose_recent", "equivalence_classes"]

# The leaders whose constants are refined before the margin is judged: a
# runner-up may explain the reports as well once its constants are fitted.
REFINED_LEADERS = 3
# The runners-up's fits stop at this relative change: their scores are
# compared with the best one's, to a few digits.
RUNNER_UP_TOLERANCE = 1e-3
CONFIDENCE_LEVELS = ("high", "low", "near twins", "undecided", "not enough motion")
# The answers that name no explanation: the page asks again as the robot moves.
UNDECIDED = ("undecided", "not enough motion")


@dataclass
class Diagnosis:
    """One robot's diagnosis: explanations ranked best first with scores, how sure the
    ranking is and against what noise, the integration compared with, the fitted
    constants, and the profile that agrees with the robot code (``corrected``).
    Distances in the profile's unit.
    """

    robot: str
    profile: Profile
    samples: int
    duration_s: float
    travel: float  # distance driven in the clip as the profile sees it, distance unit
    rotation_rad: float  # total turning, radians (unsigned)
    ranking: list[Ranked]
    margin: float  # what the second leaves beyond the first, after refinement (judgement.beyond), distance unit
    confidence: str  # one of CONFIDENCE_LEVELS
    verdict: str
    fit: Fit
    corrected: Profile  # the profile that agrees with the robot code
    notes: list[str] = field(default_factory=list)
    noise: Noise | None = None
    integration: IntegrationFinding | None = None
    judgement: Judgement | None = None

    @property
    def best(self) -> Ranked:
        """The leading explanation (``ranking[0]``)."""
        return self.ranking[0]

    @property
    def changes(self) -> list[str]:
        """The suggested profile change, as ``profile_changes`` lines from ``profile`` to ``corrected``."""
        return profile_changes(self.profile, self.corrected)

    @property
    def margin_over_noise(self) -> float:
        """The margin in multiples of the clip's noise."""
        return self.margin / self.noise.level if self.noise is not None and self.noise.level > 0 else float("inf")

    def to_json(self, top: int = 5) -> dict:
        """The diagnosis for ``diagnose --json``: the first ``top`` explanations, numbers rounded,
        angles in degrees; what the margin was judged against, the integration and near twins.
        """
        unit = self.profile.distance_unit
        ratio = self.margin_over_noise
        return {
            "robot": self.robot,
            "samples": self.samples,
            "duration_s": round(self.duration_s, 6),
            "travel": round(self.travel, 6),
            "rotation_deg": round(float(np.degrees(self.rotation_rad)), 3),
            "distance_unit": unit,
            "verdict": self.verdict,
            "confidence": self.confidence,
            "margin": round(self.margin, 6) if np.isfinite(self.margin) else None,
            "noise": self.noise.to_json() if self.noise is not None else None,
            "margin_over_noise": float(f"{ratio:.4g}") if np.isfinite(ratio) else None,
            "integration": self.integration.to_json() if self.integration is not None else None,
            "near_twin": self.judgement.twin_json(self.profile) if self.judgement is not None else None,
            "hypotheses": [
                {
                    "id": r.hypothesis.id,
                    "words": verdict(r.hypothesis, self.profile),
                    "equivalent": [e.id for e in r.equivalent],
                    "position_rms": round(r.position_rms, 6),
                    "heading_rms_deg": round(float(np.degrees(r.heading_rms)), 6),
                    "score": round(r.score, 6),
                    "score_after_fit": round(r.score_after, 9) if r.fit is not None else None,
                }
                for r in self.ranking[:top]
            ],
            "fitted": [v.to_json() for v in self.fit.values],
            "score_after_fit": round(self.fit.score_after, 9),
            "profile_changes": self.changes,
            "notes": self.notes,
        }


def _ranking(
    clip: SampleClip, profile: Profile, deltas: np.ndarray, reported: np.ndarray, method: str
) -> list[Ranked]:
    """Every group of equivalent hypotheses, best plain score first, under one integration method."""
    hyps = hypotheses(profile)
    poses = recompute_all(deltas, reported, clip.anchor, method, clip.loops)
    position, heading = disagreement(poses, reported)
    score = np.hypot(position, characteristic_length(profile) * heading)
    groups = sorted(equivalence_classes(profile), key=lambda members: score[members[0]])
    return [
        Ranked(hyps[m[0]], tuple(hyps[i] for i in m[1:]), float(position[m[0]]), float(heading[m[0]]),
               float(score[m[0]]), m[0])
        for m in groups
    ]


def _refine_leaders(
    ranking: list[Ranked], clip: SampleClip, reported: np.ndarray, method: str, length: float, done: dict[int, Fit]
) -> list[Ranked]:
    """The ranking with the leaders refined and re-ordered by their score after the fit."""
    leaders = []
    for r in ranking[:REFINED_LEADERS]:
        fit = done.get(r.index) or refine(
            clip, r.hypothesis, reported[r.index], method, length, 1e-8 if r is ranking[0] else RUNNER_UP_TOLERANCE
        )
        leaders.append(replace(r, fit=fit))
    leaders.sort(key=lambda r: r.score_after)
    return leaders + ranking[REFINED_LEADERS:]


def _merge_same_answers(
    ranking: list[Ranked], clip: SampleClip, reported: np.ndarray, method: str, length: float
) -> list[Ranked]:
    """The leaders whose fits end in the leader's profile, folded into one answer.

    They are one answer in different words once the constants are fitted
    (a sideways wheel's small offset flipped and fitted back), so the margin
    is judged against the next different one; the simplest of them leads.
    """
    leaders = [r for r in ranking if r.fit is not None]
    same = [r for r in leaders if same_profile(r.fit.profile, leaders[0].fit.profile, length)]
    if len(same) == 1:
        return ranking
    lead = min(same, key=lambda r: (r.hypothesis.size, r.score_after))
    if lead is not leaders[0]:
        lead = replace(lead, fit=refine(clip, lead.hypothesis, reported[lead.index], method, length))
    merged = replace(lead, same_after_fit=tuple(r for r in same if r.index != lead.index))
    return [merged] + [r for r in ranking if r not in same]


@lru_cache(maxsize=1)
def _blas_threads():
    """The process's BLAS libraries (threadpoolctl), found once: numpy's and scipy.optimize's."""
    import scipy.optimize  # noqa: F401  (loads scipy's BLAS before the libraries are listed)
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


def diagnose_clip(
    clip: SampleClip, profile: Profile, robot: str | None = None, method: str | None = None
) -> Diagnosis:
    """Rank every hypothesis on a clip with reported poses, refine the leaders, judge the margin.

    ``method`` forces an integration method; by default it is the profile's
    ``[reported] integration``, or found from the clip when the profile does not say.
    BLAS runs on one thread meanwhile: the fits' small products gain nothing
    from more, and on a busy machine the extra threads cost 3-4 times the time.
    """
    with _blas_threads().limit(limits=1, user_api="blas"):
        return _diagnose_clip(clip, profile, robot, method)


def _diagnose_clip(clip: SampleClip, profile: Profile, robot: str | None, method: str | None) -> Diagnosis:
    hyps = hypotheses(profile)
    imu = clip.imu if profile.uses_imu else None
    deltas = body_deltas(clip.dcounts, imu, hyps)
    reported = reported_poses(clip.pose, hyps)
    length = characteristic_length(profile)
    resolution = float(np.abs([w.travel_per_count for w in profile.wheels]).max())

    declared = method or profile.reported.integration
    first = declared or DEFAULT_METHOD
    ranking = _ranking(clip, profile, deltas, reported, first)
    if declared is not None:
        integration = IntegrationFinding(declared, "given" if method else "profile")
        fits: dict[int, Fit] = {}
    else:
        lead = ranking[0]
        integration = find_integration(clip, lead.hypothesis, reported[lead.index], length, resolution, DECIDES)
        fits = {lead.index: integration.fits[integration.method]}
        if integration.method != first:
            ranking = _ranking(clip, profile, deltas, reported, integration.method)
            fits = {i: f for i, f in fits.items() if i == ranking[0].index}
    ranking = _refine_leaders(ranking, clip, reported, integration.method, length, fits)
    ranking = _merge_same_answers(ranking, clip, reported, integration.method, length)

    # The clip's motion as the profile sees it (hypothesis 0 is "no mistake").
    seen = np.where(clip.anchor[:, None], 0.0, deltas[0])
    amounts = {
        "forward": float(np.abs(seen[:, 0]).sum()),
        "left": float(np.abs(seen[:, 1]).sum()),
        "turn": float(np.abs(seen[:, 2]).sum()),
    }
    best = ranking[0]
    noise = Noise.of(best.fit, resolution, len(clip))
    judgement = judge(profile, ranking, noise, amounts)

    corrected = best.fit.profile if judgement.names_explanation else profile
    if integration.source == "clip" and profile.reported.integration is None:
        # Every contender was compared under the same method: the finding holds whichever is right.
        corrected = replace(corrected, reported=replace(corrected.reported, integration=integration.method))
    return Diagnosis(
        robot=robot or profile.name,
        profile=profile,
        samples=len(clip),
        duration_s=clip.duration_s,
        travel=float(np.hypot(seen[:, 0], seen[:, 1]).sum()),
        rotation_rad=amounts["turn"],
        ranking=ranking,
        margin=judgement.margin,
        confidence=judgement.confidence,
        verdict=judgement.verdict,
        fit=best.fit,
        corrected=corrected,
        notes=judgement.notes,
        noise=noise,
        integration=integration,
        judgement=judgement,
    )


def diagnose(cols: Columns, profile: Profile, robot: str | None = None, method: str | None = None) -> Diagnosis:
    """Diagnose one robot's received columns (they must carry the robot's own pose)."""
    return diagnose_clip(clip_from_columns(cols, need_pose=True), profile, robot, method)


def diagnose_recent(cols: Columns, profile: Profile, seconds: float = 10.0, robot: str | None = None) -> Diagnosis:
    """Diagnose the last ``seconds`` of a live session's columns (robot clock)."""
    return diagnose(last_seconds(cols, seconds), profile, robot)
