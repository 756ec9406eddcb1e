"""How sure a diagnosis is: the margin between explanations judged against the clip's own noise.

Owns the confidence levels and what decides them: the margin between the
best and the next explanation after refinement, against the noise the clip
shows (the best explanation's residual, the encoder resolution, the number
of samples); near twins named with the reason in the robot's own numbers;
"not enough motion" kept for clips that lack the motion that would decide.
Pure: a ranking in, words and a level out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from receiver.analysis.mistakes import profile_changes, verdict
from receiver.analysis.refine import Fit
from receiver.analysis.scoring import Ranked
from receiver.analysis.twins import MOVE_WORDS, MoveSeparation, clip_lacks, how_they_differ, separation
from receiver.odometry.robot import Profile, inches

# A margin of this many times the clip's noise decides ("high")...
DECIDES = 10.0
# ...of this many, suggests ("low"); below it, the clip does not decide.
SUGGESTS = 3.0
# A best explanation that still leaves this much (RMS, inches) after
# refinement explains the disagreement only in part.
POOR_FIT_IN = 1.0
# How far down the ranking near twins of the best are looked for.
TWIN_CANDIDATES = 6
# What each standard move is for the robot in a clip, and what to do for it.
_MOTION = {"forward": "drives forward", "left": "drives sideways", "turn": "turns", "arc": "drives forward while turning"}
_INSTRUCTIONS = {
    "forward": "drive forward at least 12 in",
    "left": "drive sideways at least 12 in",
    "turn": "turn at least a quarter turn",
    "arc": "drive forward while turning",
}


@dataclass(frozen=True)
class Noise:
    """The noise a clip shows, distance unit: the best explanation's RMS residual after
    its fit, one encoder count's travel, and the samples (with the fitted constants) behind them.

    ``independent`` is about how many of the samples are independent
    (refine.lag_one_correlation): a margin over many independent samples is
    surer than the same margin over a slow drift.
    """

    residual: float
    resolution: float
    samples: int
    parameters: int = 0
    independent: float = 1.0

    @classmethod
    def of(cls, fit: Fit, resolution: float, samples: int) -> Noise:
        """The noise a fit leaves on a clip of ``samples``."""
        return cls(fit.score_fitted, resolution, samples, fit.free_parameters, fit.independent_samples)

    @property
    def level(self) -> float:
        """What a margin is judged against: the residual (corrected for the constants fitted to
        it) over the root of the independent samples, and the resolution, in quadrature."""
        m = 3 * self.samples
        unbiased = self.residual * math.sqrt(m / max(m - self.parameters, 1))
        return math.hypot(unbiased / math.sqrt(max(self.independent, 1.0)), self.resolution)

    def to_json(self) -> dict:
        """The noise and what it is made of, as JSON."""
        return {
            "level": float(f"{self.level:.4g}"),
            "residual": float(f"{self.residual:.4g}"),
            "resolution": float(f"{self.resolution:.4g}"),
            "samples": self.samples,
            "independent_samples": round(self.independent, 1),
        }


def beyond(score: float, best: float) -> float:
    """How much more an explanation leaves than the best, beyond what both leave:
    sqrt(score^2 - best^2) (0 when it leaves no more)."""
    return math.sqrt(max(score * score - best * best, 0.0))


@dataclass
class Judgement:
    """The confidence, verdict and notes of a ranking, and the best explanation's near twin if any."""

    confidence: str
    verdict: str
    margin: float
    names_explanation: bool  # the corrected profile follows the best explanation
    notes: list[str] = field(default_factory=list)
    twin: Ranked | None = None
    twin_reason: str = ""
    twin_moves: MoveSeparation | None = None
    twin_changes: list[str] = field(default_factory=list)
    shared_change: bool = False

    def twin_json(self, profile: Profile) -> dict | None:
        """The near twin as JSON (None without one): id, words, reason, shared change, best move."""
        if self.twin is None or self.twin_moves is None:
            return None
        move = self.twin_moves.best_move
        return {
            "id": self.twin.hypothesis.id,
            "words": verdict(self.twin.hypothesis, profile),
            "reason": self.twin_reason,
            "shared_change": self.shared_change,
            "profile_changes": self.twin_changes,
            "separating_move": move,
            "separation": float(f"{self.twin_moves.distance[move]:.4g}"),
        }


# Two fitted profiles are the same answer when their settings agree and
# their lengths differ by less than this share of the robot's size (the
# fit's own "determined" threshold, refine.DETERMINED_REL).
SAME_PROFILE_REL = 0.01


def same_profile(a: Profile, b: Profile, length: float) -> bool:
    """True when two profiles say the same: equal settings, lengths within SAME_PROFILE_REL."""
    if a.reported != b.reported or a.imu_mode != b.imu_mode or len(a.wheels) != len(b.wheels):
        return False
    for wa, wb in zip(a.wheels, b.wheels):
        if (wa.name, wa.reversed, wa.angle, wa.counts_per_rev, wa.gear_ratio) != (
            wb.name, wb.reversed, wb.angle, wb.counts_per_rev, wb.gear_ratio
        ):
            return False
        if max(abs(wa.x - wb.x), abs(wa.y - wb.y)) > SAME_PROFILE_REL * length:
            return False
        if abs(wa.diameter - wb.diameter) > SAME_PROFILE_REL * wa.diameter:
            return False
    return True


def _changes(profile: Profile, ranked: Ranked) -> list[str]:
    after = ranked.fit.profile if ranked.fit is not None else ranked.hypothesis.robot_profile
    return profile_changes(profile, after)


def _twins(profile: Profile, a: Ranked, b: Ranked) -> tuple[bool, MoveSeparation]:
    """(near twins, how far apart on each move): near on every standard move."""
    moves = separation(profile, a.index, b.index)
    return moves.near, moves


def _twin_note(judgement: Judgement, profile: Profile, best: Ranked, decided: bool, noise_level: float) -> str:
    twin, moves = judgement.twin, judgement.twin_moves
    unit = profile.distance_unit
    if decided:
        gap = beyond(twin.score_after, best.score_after)
        return (
            f"near twin: {twin.hypothesis.id} predicts almost the same motion on this robot "
            f"({judgement.twin_reason}); this clip tells them apart: it leaves {gap:.3g} {unit} more after the fit, "
            f"{gap / noise_level:.3g} times the clip's noise"
        )
    if judgement.shared_change:
        change = "both call for the same profile change"
    else:
        change = "the suggested profile change follows the first; for the second it would be: " + (
            "; ".join(judgement.twin_changes) or "none"
        )
    move = moves.best_move
    return (
        f"near twins: {judgement.twin_reason}; {change}. {MOVE_WORDS[move].capitalize()} separates them best "
        f"(their reports part by up to {moves.distance[move]:.3g} {unit} on one): diagnose a clip with a few of those"
    )


def _motion_note(missing: list[str], amounts: dict[str, float], unit: str) -> str:
    if "arc" in missing and ("forward" in missing or "turn" in missing):
        missing = [m for m in missing if m != "arc"]  # forward and turning make the arc
    return (
        f"the clip cannot tell the leading explanations apart: they differ only when the robot "
        f"{' or '.join(_MOTION[m] for m in missing)}, and in this clip it drove {amounts['forward']:.1f} {unit} "
        f"forward, {amounts['left']:.1f} {unit} sideways and turned {math.degrees(amounts['turn']):.0f} deg: "
        f"{' and '.join(_INSTRUCTIONS[m] for m in missing)} within the clip"
    )


def judge(profile: Profile, ranking: list[Ranked], noise: Noise, amounts: dict[str, float]) -> Judgement:
    """Judge a refined ranking: the confidence level, verdict and notes.

    ``amounts`` is the clip's forward and leftward travel (distance unit) and
    turning (radians), as the profile sees them.
    """
    unit = profile.distance_unit
    best = ranking[0]
    level = noise.level
    margin = beyond(ranking[1].score_after, best.score_after) if len(ranking) > 1 else math.inf
    ratio = margin / level if level > 0 else math.inf
    twin, moves = None, None
    for r in ranking[1 : 1 + TWIN_CANDIDATES]:
        near, how = _twins(profile, best, r)
        if near:
            twin, moves = r, how
            break
    notes = []
    if ratio >= SUGGESTS:
        confidence = "high" if ratio >= DECIDES else "low"
    else:
        contenders = [r for r in ranking[1:] if beyond(r.score_after, best.score_after) < SUGGESTS * level]
        others = [(r, how) for r, (near, how) in ((r, _twins(profile, best, r)) for r in contenders) if not near]
        if not others:
            confidence = "near twins"
            twin, moves = contenders[0], separation(profile, best.index, contenders[0].index)
        else:
            lacking = [clip_lacks(how, amounts, unit) for _, how in others]
            if all(lacking):
                confidence = "not enough motion"
                missing = sorted({m for moves_missing in lacking for m in moves_missing}, key=list(MOVE_WORDS).index)
                notes.append(_motion_note(missing, amounts, unit))
            else:
                confidence = "undecided"
                notes.append(
                    f"the first two explanations differ by {margin:.3g} {unit} after the fit, under {SUGGESTS:g} "
                    f"times the clip's noise ({level:.3g} {unit}): a longer or steadier clip would tell"
                )
            twin = None
    names = confidence in ("high", "low", "near twins")
    judgement = Judgement(confidence, "", margin, names, notes, twin)
    if twin is not None:
        judgement.twin_moves = moves
        judgement.twin_reason = how_they_differ(profile, best.hypothesis, twin.hypothesis)
        judgement.twin_changes = _changes(profile, twin)
        judgement.shared_change = best.fit is not None and judgement.twin_changes == _changes(profile, best)
        notes.append(_twin_note(judgement, profile, best, confidence != "near twins", level))
    if best.score_after > POOR_FIT_IN * inches(unit):
        notes.append(
            f"even the best explanation leaves {best.score_after:.3g} {unit} RMS: "
            "something outside the searched mistakes differs too"
        )
        if confidence == "high":
            judgement.confidence = confidence = "low"
    if names and best.equivalent:
        also = "; ".join(verdict(h, profile) for h in best.equivalent)
        notes.append(f"no clip can tell this from: {also}")
    if names and best.same_after_fit:
        also = "; ".join(verdict(r.hypothesis, profile) for r in best.same_after_fit)
        notes.append(f"once their constants are fitted, these end in the same profile: {also}")
    faults = best.hypothesis.faults
    if names and (faults.reversed or faults.swapped or faults.offset_sign):
        notes.append(
            "the suggested profile follows the robot code; which of the two is physically right, "
            "the guided check tells (podwatch diagnose --guided)"
        )
    if confidence == "near twins":
        judgement.verdict = f"either {verdict(best.hypothesis, profile)}, or its near twin: {verdict(twin.hypothesis, profile)}"
    elif confidence == "not enough motion":
        judgement.verdict = "not enough motion to tell"
    elif confidence == "undecided":
        judgement.verdict = "undecided: the leading explanations differ by less than this clip's noise"
    else:
        judgement.verdict = verdict(best.hypothesis, profile)
    return judgement
