"""The guided check: push the robot forward, then left, then turn it counter-clockwise.

Owns finding those three moves in the raw counts without trusting any sign
(which wheels moved, and by how much, says which move it was), then judging
under the profile each wheel's direction and scale against the physical move
and, for the robot's reported pose, whether x, y and heading moved the
REP 103 way. Absolute where diagnosis is relative. Pure numpy.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, replace

import numpy as np

from receiver.analysis.move_quality import refusal
from receiver.analysis.sample_clip import SampleClip
from receiver.analysis.scoring import characteristic_length
from receiver.odometry.conventions import reported_to_rep103
from receiver.odometry.integrate import wrap_angle
from receiver.odometry.kinematics import Kinematics
from receiver.odometry.robot import (
    CONVENTION_KEYS,
    HEADING_POSITIVE,
    HEADING_UNITS,
    HEADING_ZEROS,
    Y_AXES,
    Profile,
    Reported,
    inches,
)

MOVES = ("forward", "left", "turn")
# The instructions: at least this far forward and left (inches), and this far round (degrees).
MIN_PUSH_IN = 12.0
MIN_TURN_DEG = 90.0
INSTRUCTIONS = {"forward": "push it forward at least 12 in", "left": "push it left at least 12 in", "turn": "turn it counter-clockwise at least 90 degrees"}
# A hand push runs at several in/s; below this (smoothed) the robot is at rest.
MOVING_SPEED_IN_S = 0.5
SMOOTH_S = 0.1
MERGE_GAP_S = 0.3  # a pause shorter than this splits no move
MIN_MOVE_IN = 1.0  # a run whose most-moved wheel rolled less than this is a nudge, not a move
SHORT_SLACK = 0.9  # a move within 10 % of the instructed amount still counts
# A wheel takes part in a move when the profile has it roll at least this
# share of the most-rolling wheel's travel.
TAKES_PART = 0.25
SCALE_TOLERANCE = 0.05  # wheel travel against the other wheels' account of the same move
POSE_TOLERANCE = 0.10  # reported amounts against the wheels'
ANGLE_TOLERANCE = math.radians(30.0)
DEGREES_PER_RADIAN = 180.0 / math.pi


@dataclass(frozen=True)
class Check:
    """One pass/fail line: ``ok`` is None when the clip could not check it."""

    step: str  # "forward", "left", "turn" or "overall"
    subject: str  # "move", "wheel left direction", "reported y", ...
    ok: bool | None
    detail: str

    def to_json(self) -> dict:
        """The line as JSON: step, subject, ok (null when unchecked) and detail."""
        return {"step": self.step, "subject": self.subject, "ok": self.ok, "detail": self.detail}


@dataclass(frozen=True)
class Move:
    """One move found in the clip: its ``kind`` (one of MOVES), the samples it spans and the
    wheel travel it caused.
    """

    kind: str
    first: int  # index of the rest sample before the move
    last: int  # index of the sample where it ended
    travel: np.ndarray  # (n,) signed wheel travel under the profile
    amount: float  # distance unit, or radians for the turn, from the wheels' magnitudes
    refused: str | None = None  # why it cannot be scored (not made as asked), with what to do


@dataclass
class GuidedResult:
    """The guided check of one robot: the moves found, every pass/fail line (``checks``)
    and the profile with what the check could pin down put right (``corrected``).
    """

    robot: str
    profile: Profile
    moves: dict[str, Move]
    checks: list[Check]
    corrected: Profile  # the profile with what the check could pin down put right

    @property
    def flags(self) -> list[str]:
        """Subjects of the overall checks that failed, e.g. ["wheel right direction"]."""
        return [check.subject for check in self.checks if check.step == "overall" and check.ok is False]

    @property
    def refused(self) -> list[str]:
        """The moves found but refused (turned or drifted too much to score)."""
        return [kind for kind in MOVES if kind in self.moves and self.moves[kind].refused is not None]

    @property
    def passed(self) -> bool:
        """True when no check failed (a line the clip could not check does not count against it)."""
        return all(check.ok is not False for check in self.checks)

    def to_json(self) -> dict:
        """The result for ``diagnose --guided --json``: flags, each move's amount (the turn in
        degrees) and sample span, and every check.
        """
        return {
            "robot": self.robot,
            "passed": self.passed,
            "flags": self.flags,
            "moves": {
                k: {"amount": round(m.amount * (DEGREES_PER_RADIAN if k == "turn" else 1.0), 6), "t_index": [m.first, m.last]}
                for k, m in self.moves.items()
            },
            "checks": [check.to_json() for check in self.checks],
        }


def _runs(moving: np.ndarray, t: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) index of each run of moving samples, pauses under MERGE_GAP_S bridged."""
    edges = np.diff(np.concatenate([[0], moving.astype(np.int8), [0]]))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1
    runs: list[tuple[int, int]] = []
    for a, b in zip(starts.tolist(), ends.tolist()):
        if runs and t[a] - t[runs[-1][1]] < MERGE_GAP_S:
            runs[-1] = (runs[-1][0], b)
        else:
            runs.append((a, b))
    return runs


def find_moves(clip: SampleClip, profile: Profile) -> tuple[dict[str, Move], int]:
    """The largest move of each kind made as asked (else the largest refused one), and how
    many other moves there were.

    Sign-independent: a run of motion is classed by how closely the
    magnitudes of its wheel travel match each move's pattern under the
    profile (|A e_x|, |A e_y|, |A e_theta|); move_quality.py refuses one
    that turned or drifted too much.
    """
    length = characteristic_length(profile)
    kin = Kinematics(profile)
    travel = clip.dcounts * kin.travel_per_count
    dt = float(np.median(np.diff(clip.t))) if len(clip) > 1 else 1.0
    window = max(1, int(round(SMOOTH_S / dt)))
    activity = np.convolve(np.abs(travel).max(axis=1), np.ones(window) / window, mode="same") / dt
    runs = _runs(activity > MOVING_SPEED_IN_S * inches(profile.distance_unit), clip.t)
    patterns = np.abs(kin.matrix.T)  # (3 moves, n wheels), per unit move
    found: dict[str, Move] = {}
    count = 0
    # Each move spans from the middle of the rest before it to the middle of
    # the rest after, so the slow ends under the threshold still count.
    bounds = [0] + [(b + a) // 2 for (_, b), (a, _) in zip(runs[:-1], runs[1:])] + [len(clip) - 1]
    for k in range(len(runs)):
        a, b = bounds[k] + (k > 0), bounds[k + 1]
        net = travel[a : b + 1].sum(axis=0)
        size = np.abs(net)
        if size.max() < MIN_MOVE_IN * inches(profile.distance_unit):
            continue
        count += 1
        likeness = patterns @ size / (np.linalg.norm(patterns, axis=1) * np.linalg.norm(size))
        j = int(np.argmax(likeness))
        amount = float(patterns[j] @ size / (patterns[j] @ patterns[j]))
        kind = MOVES[j]
        move = Move(kind, max(a - 1, 0), b, net, amount, refusal(kind, net, profile, length, SCALE_TOLERANCE))
        held = found.get(kind)
        if held is None or (held.refused is not None, -held.amount) > (move.refused is not None, -move.amount):
            found[kind] = move
    return found, count - len(found)


def _wheel_checks(move: Move, profile: Profile, kin: Kinematics) -> list[tuple[int, Check, Check]]:
    """(wheel index, direction check, scale check) for each wheel taking part in the move."""
    j = MOVES.index(move.kind)
    per_unit = kin.matrix[:, j]
    size = np.abs(move.travel)
    pattern = np.abs(per_unit)
    part = pattern >= TAKES_PART * pattern.max()
    out = []
    for i in np.flatnonzero(part):
        w = profile.wheels[i]
        expected = per_unit[i] * move.amount
        measured = float(move.travel[i])
        moved = abs(measured) >= TAKES_PART * abs(expected)
        same_way = moved and math.copysign(1.0, measured) == math.copysign(1.0, expected)
        how = "the same way as" if same_way else ("opposite to" if moved else "far less than")
        direction = Check(
            move.kind, f"wheel {w.name} direction", same_way,
            f"{w.name} rolled {measured:+.3g} {profile.distance_unit}, {how} the profile's {expected:+.3g}",
        )
        others = part.copy()
        others[i] = False
        if others.any():
            amount = pattern[others] @ size[others] / (pattern[others] @ pattern[others])
            ratio = size[i] / (pattern[i] * amount)
            scale = Check(
                move.kind, f"wheel {w.name} scale", bool(abs(ratio - 1.0) <= SCALE_TOLERANCE),
                f"{w.name} travel is {ratio:.3f} x what the other wheels say for this move",
            )
        else:
            scale = Check(move.kind, f"wheel {w.name} scale", None, "no other wheel measures this move")
        out.append((int(i), direction, scale))
    return out


@dataclass(frozen=True)
class _Reading:
    """The reported pose's account of the three moves, under one set of conventions."""

    x_ok: bool
    y_ok: bool
    heading_ok: bool
    zero_ok: bool
    details: dict[str, str]


def _read_pose(moves: dict[str, Move], pose: np.ndarray, reported: Reported, unit: str) -> _Reading | None:
    need = [moves[k] for k in MOVES]
    if not all(np.isfinite(pose[[m.first, m.last]]).all() for m in need):
        return None
    fwd, left, turn = need
    p = reported_to_rep103(pose, reported)

    def shift(move: Move) -> np.ndarray:
        return p[move.last, :2] - p[move.first, :2]

    d_fwd, d_left = shift(fwd), shift(left)
    a_fwd, a_left = math.atan2(d_fwd[1], d_fwd[0]), math.atan2(d_left[1], d_left[0])
    off_heading = float(wrap_angle(a_fwd - p[fwd.first, 2]))
    handed = float(wrap_angle(a_left - a_fwd))
    ratio_fwd = float(np.hypot(*d_fwd)) / fwd.amount
    ratio_left = float(np.hypot(*d_left)) / left.amount
    headings = p[turn.first : turn.last + 1, 2]
    turned = float(np.unwrap(headings)[-1] - headings[0]) if np.isfinite(headings).all() else float("nan")
    ratio_turn = turned / turn.amount
    x_ok = abs(ratio_fwd - 1.0) <= POSE_TOLERANCE and abs(off_heading) <= math.pi - ANGLE_TOLERANCE
    y_ok = abs(ratio_left - 1.0) <= POSE_TOLERANCE and abs(handed - math.pi / 2) <= ANGLE_TOLERANCE
    zero_ok = not ANGLE_TOLERANCE < abs(off_heading) < math.pi - ANGLE_TOLERANCE
    heading_ok = bool(abs(ratio_turn - 1.0) <= POSE_TOLERANCE)
    details = {
        "reported x": f"moved {ratio_fwd * fwd.amount:.3g} {unit} for a {fwd.amount:.3g} {unit} forward push"
        + ("" if abs(off_heading) <= math.pi - ANGLE_TOLERANCE else ", backwards"),
        "reported y": f"moved {ratio_left * left.amount:.3g} {unit} at {math.degrees(handed):+.0f} deg from forward "
        f"(REP 103: +90, to the left) for a {left.amount:.3g} {unit} left push",
        "reported heading": f"changed by {ratio_turn:+.3g} x the wheels' {math.degrees(turn.amount):.0f} deg counter-clockwise turn",
        "reported heading zero": f"the forward push moved {math.degrees(off_heading):+.0f} deg away from the reported heading",
    }
    return _Reading(x_ok, y_ok, heading_ok, zero_ok, details)


def _conventions_that_fit(moves: dict[str, Move], pose: np.ndarray, profile: Profile) -> Reported | None:
    """The [reported] settings closest to the profile's under which every pose check passes."""
    current = profile.reported
    choices = [HEADING_UNITS, HEADING_POSITIVE, Y_AXES, HEADING_ZEROS]
    names = CONVENTION_KEYS
    fitting = []
    for values in itertools.product(*choices):
        candidate = replace(current, **dict(zip(names, values)))
        reading = _read_pose(moves, pose, candidate, profile.distance_unit)
        if reading and reading.x_ok and reading.y_ok and reading.heading_ok and reading.zero_ok:
            fitting.append((sum(getattr(candidate, n) != getattr(current, n) for n in names), values, candidate))
    return min(fitting)[2] if fitting else None


def guided_check(clip: SampleClip, profile: Profile, robot: str | None = None) -> GuidedResult:
    """Find the three moves and check each wheel and the reported pose against them."""
    kin = Kinematics(profile)
    moves, extra = find_moves(clip, profile)
    unit = profile.distance_unit
    checks: list[Check] = []
    minimum = {"forward": MIN_PUSH_IN * inches(profile.distance_unit), "left": MIN_PUSH_IN * inches(profile.distance_unit), "turn": math.radians(MIN_TURN_DEG)}
    for kind in MOVES:
        if kind not in moves:
            checks.append(Check(kind, "move", False, f"not found: {INSTRUCTIONS[kind]}"))
            continue
        if moves[kind].refused is not None:
            checks.append(Check(kind, "move", False, f"refused, not scored: {moves[kind].refused}"))
            continue
        amount = moves[kind].amount
        shown = f"{math.degrees(amount):.0f} deg" if kind == "turn" else f"{amount:.3g} {unit}"
        big_enough = amount >= SHORT_SLACK * minimum[kind]
        checks.append(Check(kind, "move", big_enough, f"found, {shown}" + ("" if big_enough else f": too small, {INSTRUCTIONS[kind]}")))
    if extra:
        checks.append(Check("overall", "extra moves", None, f"{extra} other moves ignored (the largest of each kind counts)"))

    per_wheel: dict[int, list[Check]] = {}
    for kind in MOVES:
        if kind in moves and moves[kind].refused is None:
            for i, direction, scale in _wheel_checks(moves[kind], profile, kin):
                checks += [direction, scale]
                per_wheel.setdefault(i, []).extend([direction, scale])
    wheels = list(profile.wheels)
    for i, w in enumerate(profile.wheels):
        mine = per_wheel.get(i, [])
        dirs = [check.ok for check in mine if check.subject.endswith("direction")]
        scales = [check.ok for check in mine if check.subject.endswith("scale") and check.ok is not None]
        if not dirs:
            checks.append(Check("overall", f"wheel {w.name} direction", None, "no move turned this wheel"))
        elif all(dirs):
            checks.append(Check("overall", f"wheel {w.name} direction", True, "agrees with the profile"))
        else:
            wrong = [check.step for check in mine if check.subject.endswith("direction") and not check.ok]
            if not any(dirs):
                detail = f"counts the other way from the profile on {', '.join(wrong)}: flip its reversed"
                wheels[i] = replace(w, reversed=not w.reversed)
            else:
                detail = f"wrong way on {', '.join(wrong)} only: swapped wheels or a wrong offset sign in the profile"
            checks.append(Check("overall", f"wheel {w.name} direction", False, detail))
        if scales:
            checks.append(Check("overall", f"wheel {w.name} scale", all(scales),
                                "agrees with the other wheels" if all(scales) else "disagrees with the other wheels: calibrate with a push test"))

    corrected = profile.with_wheels(tuple(wheels))
    found_all = all(k in moves and moves[k].refused is None for k in MOVES)
    reading = _read_pose(moves, clip.pose, profile.reported, unit) if found_all else None
    subjects = ("reported x", "reported y", "reported heading", "reported heading zero")
    if reading is None:
        for s in subjects:
            checks.append(Check("overall", s, None, "needs all three moves, made as asked, and the robot's reported pose"))
    else:
        oks = (reading.x_ok, reading.y_ok, reading.heading_ok, reading.zero_ok)
        for s, ok in zip(subjects, oks):
            checks.append(Check("overall", s, bool(ok), reading.details[s]))
        if not all(oks):
            fits = _conventions_that_fit(moves, clip.pose, profile)
            if fits is not None:
                corrected = replace(corrected, reported=fits)
    return GuidedResult(robot or profile.name, profile, moves, checks, corrected)
