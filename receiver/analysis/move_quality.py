"""Whether a move of the guided check was made as asked: a straight push, a turn in place.

Owns the refusal of a move that cannot be scored: a push that turned more
than a few degrees or drifted sideways by more than a fifth of its length,
or a turn whose centre was far from the robot's. Read from the wheels
without trusting their signs or their scales: a move is refused only when
no choice of signs and no scale error within the check's own tolerance
makes it a clean one. Pure numpy and scipy.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

from receiver.odometry.kinematics import Kinematics
from receiver.odometry.robot import Profile

# A push may turn this much (common practice: a hand push along a straight
# edge stays within a few degrees) and drift sideways by this share of its length.
MAX_PUSH_TURN_DEG = 5.0
MAX_PUSH_DRIFT_SHARE = 0.2
# A turn's centre may lie this far from the robot's centre, as a share of
# the wheels' distance from it: a turn about one wheel leaves that wheel still.
MAX_TURN_CENTRE_SHARE = 0.5
# Wheels across a push that rolled less than this share of it saw neither a
# turn nor a drift: the others' disagreement is then their scales, which the
# check's scale lines report, not a crooked push.
STILL_SHARE = 0.02
DO_AGAIN = {
    "forward": "push straight forward, without turning (along a straight edge)",
    "left": "push straight to the left, without turning (along a straight edge)",
    "turn": "turn it in place about its centre",
}


def _move_like(body: np.ndarray, kind: int, length: float) -> float:
    """How far a body displacement (3,) is from the asked move, relative to its size (0: clean)."""
    if kind == 2:
        return math.hypot(body[0], body[1]) / max(length * abs(body[2]), 1e-12)
    across = body[1 - kind]
    return math.hypot(across, length * body[2]) / max(abs(body[kind]), 1e-12)


def _signed_body(travel_size: np.ndarray, kin: Kinematics, kind: int, length: float) -> tuple[np.ndarray, np.ndarray]:
    """(signs (n,), body (3,)): the wheel signs that make the move most like the asked one."""
    solve = np.linalg.pinv(kin.matrix)
    best = None
    for signs in itertools.product((1.0, -1.0), repeat=len(travel_size)):
        signed = np.asarray(signs) * travel_size
        body = solve @ signed
        if body[kind] < 0:
            continue  # the mirror choice of signs gives the same move forwards
        badness = _move_like(body, kind, length) + np.linalg.norm(kin.matrix @ body - signed) / max(travel_size.max(), 1e-12)
        if best is None or badness < best[0]:
            best = (badness, np.asarray(signs), body)
    return best[1], best[2]


def _feasible(rows: np.ndarray, limits: np.ndarray, tolerance: float) -> bool:
    """True when some scales k within 1 +- tolerance satisfy rows @ k <= limits."""
    from scipy.optimize import linprog  # imported when first needed, as refine.py does

    n = rows.shape[1]
    result = linprog(np.zeros(n), A_ub=rows, b_ub=limits, bounds=[(1.0 - tolerance, 1.0 + tolerance)] * n, method="highs")
    return bool(result.status == 0)


def refusal(kind: str, travel: np.ndarray, profile: Profile, length: float, scale_tolerance: float) -> str | None:
    """Why a found move cannot be scored, with what to do; None when it was made as asked.

    ``travel`` (n,) is each wheel's travel during the move under the
    profile; ``kind`` is "forward", "left" or "turn"; ``length`` is the
    robot's characteristic length (the wheels' RMS distance from centre).
    """
    kin = Kinematics(profile)
    unit = profile.distance_unit
    j = ("forward", "left", "turn").index(kind)
    size = np.abs(travel)
    signs, body = _signed_body(size, kin, j, length)
    # body(k) = solve @ (signs * size * k): linear in the wheels' scale errors k.
    per_scale = np.linalg.pinv(kin.matrix) * (signs * size)
    if kind == "turn":
        turned = abs(body[2])
        limit = MAX_TURN_CENTRE_SHARE * length
        sense = math.copysign(1.0, body[2])
        # |translation x| and |y| <= limit * |turn|, for some scales within tolerance.
        rows = np.vstack([per_scale[0] - limit * sense * per_scale[2], -per_scale[0] - limit * sense * per_scale[2],
                          per_scale[1] - limit * sense * per_scale[2], -per_scale[1] - limit * sense * per_scale[2]])
        if _feasible(rows, np.zeros(4), scale_tolerance):
            return None
        centre = math.hypot(body[0], body[1]) / max(turned, 1e-12)
        return (
            f"it turned {math.degrees(turned):.0f} deg about a point {centre:.3g} {unit} from its centre "
            f"(more than {limit:.2g} {unit}): {DO_AGAIN[kind]}"
        )
    along, across, turn = per_scale[j], per_scale[1 - j], per_scale[2]
    max_turn = math.radians(MAX_PUSH_TURN_DEG)
    rows = np.vstack([turn, -turn, across - MAX_PUSH_DRIFT_SHARE * along, -across - MAX_PUSH_DRIFT_SHARE * along])
    if _feasible(rows, np.array([max_turn, max_turn, 0.0, 0.0]), scale_tolerance):
        return None
    pushed = abs(body[j])
    pattern = np.abs(kin.matrix[:, j])
    across = pattern < 0.1 * pattern.max()
    if across.any() and (size[across] <= STILL_SHARE * pushed).all():
        return None
    what = {"forward": "forward", "left": "to the left"}[kind]
    if abs(body[2]) > max_turn:
        return (
            f"it turned {math.degrees(abs(body[2])):.0f} deg while pushed {pushed:.3g} {unit} {what} "
            f"(more than {MAX_PUSH_TURN_DEG:g} deg, or the wheels' scales differ by more than "
            f"{100 * scale_tolerance:g} %): {DO_AGAIN[kind]}"
        )
    return (
        f"it drifted {abs(body[1 - j]):.3g} {unit} sideways while pushed {pushed:.3g} {unit} {what} "
        f"(more than a fifth of the push): {DO_AGAIN[kind]}"
    )
