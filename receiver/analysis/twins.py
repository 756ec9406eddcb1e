"""Near twins: explanations that predict almost the same reports on this robot's geometry.

Owns a few standard moves (a push forward, a push left, a turn in place, a
drive along a quarter circle) played once per profile through every
hypothesis, how far apart two hypotheses' predicted reports come on each
move, which move separates two explanations best, and how two explanations
differ in the robot's own numbers. Pure numpy; results cached per profile.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from itertools import product

import numpy as np

from receiver.analysis.mistakes import Hypothesis, hypotheses
from receiver.analysis.scoring import body_deltas, characteristic_length, recompute_all, reported_poses
from receiver.odometry.conventions import rep103_to_reported, reported_to_rep103
from receiver.odometry.integrate import wrap_angle
from receiver.odometry.kinematics import Kinematics
from receiver.odometry.robot import CONVENTION_KEYS, Profile, Wheel, inches, rolls_mostly_forward

# The standard moves: (name, words, total body twist in inches and radians).
# A push of 24 in and a whole turn are what a team does by hand in seconds.
PUSH_IN = 24.0
MOVES = (
    ("forward", "a straight push forward", (PUSH_IN, 0.0, 0.0)),
    ("left", "a straight push to the left", (0.0, PUSH_IN, 0.0)),
    ("turn", "a turn in place", (0.0, 0.0, 2.0 * math.pi)),
    ("arc", "a drive along a quarter circle", (PUSH_IN, 0.0, 0.5 * math.pi)),
)
_MOVE_STEPS = 64
# Where the standard moves start (REP 103, inches and radians). Which move
# separates two explanations is judged from the origin, facing +x, as a
# clip starts; near twins must also stay near from a start off the origin
# and turned, where every reported convention shows.
_STARTS = ((0.0, 0.0, 0.0), (20.0, -10.0, 0.7))
# Two explanations whose predicted reports stay within this share of the
# move's size on every standard move are near twins: only a precise clip
# tells them apart.
NEAR_TWIN_REL = 0.05
# What a clip must hold of each move before it can show the difference the
# move shows: forward or leftward travel (inches), turning (radians).
NEEDED = {"forward": 12.0, "left": 12.0, "turn": 0.5 * math.pi}
MOVE_WORDS = {name: words for name, words, _ in MOVES}


@dataclass(frozen=True)
class MoveSeparation:
    """How far two explanations' reports part on each standard move, distance unit (largest
    over the move), and relative to the move's size."""

    distance: dict[str, float]
    relative: dict[str, float]
    relative_turned: dict[str, float]  # the same from the start off the origin and turned

    @property
    def best_move(self) -> str:
        """The standard move on which the two part furthest (each is a few seconds by hand)."""
        return max(self.distance, key=self.distance.get)

    @property
    def near(self) -> bool:
        """True when no standard move separates them by NEAR_TWIN_REL of its size."""
        return max(*self.relative.values(), *self.relative_turned.values()) < NEAR_TWIN_REL


def _move_twists(profile: Profile) -> list[np.ndarray]:
    """Per standard move, the constant body twist of each of its steps, profile's unit."""
    scale = inches(profile.distance_unit)
    return [np.tile(np.array(total) * [scale, scale, 1.0] / _MOVE_STEPS, (_MOVE_STEPS, 1)) for _, _, total in MOVES]


@lru_cache(maxsize=16)
def move_predictions(profile: Profile) -> tuple[np.ndarray, np.ndarray]:
    """(predicted reports (2 starts, M moves, H hypotheses, S + 1 samples, 3), move sizes (M,)).

    Each move starts from the same reported pose; the counts are the ones
    the profile's geometry gives for the move. Every hypothesis recomputes
    them, and its prediction of what the robot would report is read back in
    the profile's own conventions (REP 103, heading in radians), so that two
    hypotheses that predict the same numbers get the same rows.
    """
    hyps = hypotheses(profile)
    kin = Kinematics(profile)
    length = characteristic_length(profile)
    scale = inches(profile.distance_unit)
    out, sizes = [], []
    for (start_x, start_y, start_heading), (twist, (_, _, total)) in product(_STARTS, zip(_move_twists(profile), MOVES)):
        start = np.array([start_x * scale, start_y * scale, start_heading])
        steps = len(twist)
        dcounts = np.vstack([np.zeros(kin.n_wheels), kin.wheel_travel(twist) / kin.travel_per_count])
        heading = start[2] + np.concatenate([[0.0], np.cumsum(twist[:, 2])])
        truth = np.column_stack([np.zeros((steps + 1, 2)), heading])
        imu = rep103_to_reported(truth, profile.reported)[:, 2] if profile.uses_imu else None
        anchor = np.zeros(steps + 1, dtype=bool)
        anchor[0] = True
        first = rep103_to_reported(start, profile.reported)
        reported = reported_poses(np.tile(first, (steps + 1, 1)), hyps)
        poses = recompute_all(body_deltas(dcounts, imu, hyps), reported, anchor, "arc")
        said = np.asarray([rep103_to_reported(p, h.robot_profile.reported) for p, h in zip(poses, hyps)])
        out.append(reported_to_rep103(said, profile.reported))
        sizes.append(math.hypot(math.hypot(total[0], total[1]) * scale, length * total[2]))
    return np.asarray(out).reshape(len(_STARTS), len(MOVES), *out[0].shape), np.asarray(sizes[: len(MOVES)])


def separation(profile: Profile, i: int, j: int) -> MoveSeparation:
    """How far hypotheses ``i`` and ``j`` (indices into ``hypotheses(profile)``) part on each move."""
    predicted, sizes = move_predictions(profile)
    length = characteristic_length(profile)
    d = predicted[:, :, i] - predicted[:, :, j]
    gap = np.hypot(np.hypot(d[..., 0], d[..., 1]), length * wrap_angle(d[..., 2])).max(axis=-1)
    names = [name for name, _, _ in MOVES]
    return MoveSeparation(
        {n: float(g) for n, g in zip(names, gap[0])},
        {n: float(g / s) for n, g, s in zip(names, gap[0], sizes)},
        {n: float(g / s) for n, g, s in zip(names, gap[1], sizes)},
    )


def clip_lacks(separating: MoveSeparation, amounts: dict[str, float], unit: str) -> list[str]:
    """The moves that would separate two explanations and that the clip holds too little of.

    ``amounts`` is the clip's forward and leftward travel (distance unit) and
    turning (radians). Empty when the clip holds at least one such move.
    """
    inch = inches(unit)
    needs = {
        "forward": amounts["forward"] >= NEEDED["forward"] * inch,
        "left": amounts["left"] >= NEEDED["left"] * inch,
        "turn": amounts["turn"] >= NEEDED["turn"],
    }
    needs["arc"] = needs["forward"] and needs["turn"]
    separating_moves = [m for m, rel in separating.relative.items() if rel >= NEAR_TWIN_REL]
    if any(needs[m] for m in separating_moves):
        return []
    return separating_moves


def _lever(wheel: Wheel) -> tuple[str, float]:
    """The offset that is a wheel's lever arm: y for a forward-rolling wheel, x for a sideways one."""
    return ("y", wheel.y) if rolls_mostly_forward(wheel) else ("x", wheel.x)


def _length(value: float) -> str:
    return f"{value:.3g}"


def _offset_sentence(profile: Profile, offsets: list[tuple[float, float]]) -> str:
    """How far apart two explanations' wheel offsets are, in the profile's own numbers."""
    unit = profile.distance_unit
    gap = max(abs(va - vb) for va, vb in offsets)
    magnitudes = sorted({round(abs(v), 9) for pair in offsets for v in pair}, reverse=True)
    owners = [next((w.name for w in profile.wheels if round(abs(_lever(w)[1]), 9) == m), None) for m in magnitudes]
    if len(magnitudes) == 2 and None not in owners and owners[0] != owners[1]:
        return (
            f"the {owners[0]} and {owners[1]} wheels sit {_length(magnitudes[0])} and {_length(magnitudes[1])} "
            f"{unit} from centre: these two differ only by that {_length(magnitudes[0] - magnitudes[1])} {unit}"
        )
    if len(magnitudes) == 1 and owners[0] is not None:
        return (
            f"the {owners[0]} wheel sits {_length(magnitudes[0])} {unit} from centre: "
            f"these two differ only by its sign, {_length(gap)} {unit}"
        )
    return f"their wheel offsets differ by at most {_length(gap)} {unit}"


def how_they_differ(profile: Profile, a: Hypothesis, b: Hypothesis) -> str:
    """Why two explanations predict almost the same motion, in the robot's own numbers.

    When they differ only in wheel offsets, e.g. "the left and right wheels
    sit 6.6 and 6.4 in from centre: these two differ only by that 0.2 in".
    """
    ra, rb = a.robot_profile, b.robot_profile
    conventions = [k for k in CONVENTION_KEYS if getattr(ra.reported, k) != getattr(rb.reported, k)]
    offsets, others = [], []
    for slot, (wa, wb) in enumerate(zip(ra.wheels, rb.wheels)):
        for key in ("x", "y"):
            if getattr(wa, key) != getattr(wb, key):
                offsets.append((getattr(wa, key), getattr(wb, key)))
        if wa.angle != wb.angle or wa.travel_per_count != wb.travel_per_count:
            others.append(f"the direction of ticks[{slot}]")
    sentence = _offset_sentence(profile, offsets) if offsets else ""
    if sentence and not conventions and not others:
        return sentence
    if set(conventions) == {"y_axis", "heading_positive"}:
        # REP 103 reflected: +y and the sense of turning both reversed.
        mirror = "one is the mirror image of the other (+y and the turning sense reversed)"
        return f"{mirror}, and {sentence}" if sentence else mirror
    what = [f"reported.{k}" for k in conventions] + sorted(set(others))
    if offsets:
        what.append("wheel offsets")
    return f"these two differ in {', '.join(what)}, which this robot's geometry hardly shows"
