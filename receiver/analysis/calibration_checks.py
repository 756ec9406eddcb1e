"""What a calibration cannot see for itself: the user's count of turns and measured push, checked.

Owns the cross-checks of a spin or push test against what the robot itself
reported (its own heading and position, its IMU), the warnings for a change
too large to be a small correction, and the notes on what the bound does not
cover (how well the robot was lined up, how well the push was measured).
Pure numpy: a clip and numbers in, sentences out.
"""

from __future__ import annotations

import math

import numpy as np

from receiver.analysis.sample_clip import SampleClip
from receiver.odometry.conventions import imu_heading_change, reported_to_rep103
from receiver.odometry.robot import Profile, inches

# Common practice, no source: a robot lined up by eye against a tile seam
# ends within about 2 degrees of where it started.
ALIGN_DEG = 2.0
# Common practice, no source: a tape measure is read to about 1/8 in at each end.
MEASURE_END_IN = 0.125
# The robot's own account may differ from the stated amount by this share
# (and, for turns, by three alignments) before the mismatch is said.
MISMATCH_SHARE = 0.02
# A measured value more than this share from the profile's is no small correction.
LARGE_CHANGE = 0.10
# Fewer whole turns than this lose precision to the alignment at the end.
ENOUGH_TURNS = 5


def reported_turns(clip: SampleClip, profile: Profile) -> float | None:
    """Turns the robot's own reported heading made over the clip (signed, REP 103 sense);
    None when some sample lacks a pose."""
    if len(clip) < 2 or not np.isfinite(clip.pose).all():
        return None
    heading = reported_to_rep103(clip.pose, profile.reported)[:, 2]
    return float(np.unwrap(heading)[-1] - heading[0]) / (2.0 * math.pi)


def imu_turns(clip: SampleClip, profile: Profile) -> float | None:
    """Turns the IMU heading made over the clip (signed, REP 103 sense); None without IMU values."""
    if len(clip) < 2 or not np.isfinite(clip.imu).all():
        return None
    return float(imu_heading_change(clip.imu[1:], clip.imu[:-1], profile.reported).sum()) / (2.0 * math.pi)


def reported_shift(clip: SampleClip) -> float | None:
    """How far the robot's own reported position moved from the first sample to the last; None without poses."""
    ends = clip.pose[[0, -1], :2] if len(clip) else np.empty((0, 2))
    if len(ends) < 2 or not np.isfinite(ends).all():
        return None
    return float(np.hypot(*(ends[1] - ends[0])))


def turn_count_notes(clip: SampleClip, profile: Profile, stated: float, wheels: float) -> list[str]:
    """Warnings when the robot's own heading or IMU disagree with the stated whole turns.

    ``wheels`` is the turns the wheels measured under the profile (unsigned).
    """
    accounts = []
    own = reported_turns(clip, profile)
    imu = imu_turns(clip, profile)
    if own is not None:
        accounts.append(("the robot's own heading", abs(own)))
    if imu is not None:
        accounts.append(("its IMU", abs(imu)))
    slack = max(MISMATCH_SHARE * stated, 3.0 * ALIGN_DEG / 360.0)
    off = [(who, turns) for who, turns in accounts if abs(turns - stated) > slack]
    if not off:
        return []
    said = " and ".join(f"{who} says {turns:.2f} turns" for who, turns in accounts)
    if imu is not None and abs(abs(imu) - stated) <= slack:
        return [
            f"{said}; you said {stated:g}: the IMU agrees with you, so the robot code's geometry is off "
            f"(its heading turned {abs(own) / stated:.3f} x); the calibration is right to correct it"
        ]
    if imu is not None:
        return [
            f"{said}; you said {stated:g}: the IMU does not depend on the wheels, so count again, "
            "or take the turn from the IMU (--spin-imu)"
        ]
    return [
        f"{said}; you said {stated:g} (the wheels under the profile: {wheels:.2f}): if the robot did not end "
        "facing the way it started, count again (--spin-turns takes the turns it made, whole or not); if it did, "
        "the robot code's track width is off as much as this calibration says"
    ]


def push_distance_notes(clip: SampleClip, profile: Profile, stated: float, wheels: float) -> list[str]:
    """A warning when the robot's own pose moved another distance than the stated push."""
    moved = reported_shift(clip)
    if moved is None or abs(moved - stated) <= MISMATCH_SHARE * stated:
        return []
    unit = profile.distance_unit
    return [
        f"the robot's own pose says it moved {moved:.3g} {unit} (the wheels under the profile: {wheels:.3g} "
        f"{unit}); you said {stated:g} {unit}: check the measured distance and its unit"
    ]


def large_change_note(values: list[tuple[str, float, float]], causes: str) -> list[str]:
    """One warning for the measured values (name, profile's, measured) more than LARGE_CHANGE
    from the profile's, naming likely causes; none when every change is small."""
    large = [
        f"the {name} by {100.0 * (after / before - 1.0):+.1f} %"
        for name, before, after in values
        if before != 0 and abs(after / before - 1.0) > LARGE_CHANGE
    ]
    if not large:
        return []
    return [f"{', '.join(large)} from the profile's is no small correction: {causes}"]


def spin_setup_notes(turns: float, width: float, unit: str) -> list[str]:
    """What the spin test's bound leaves out (lining up at the end) and, under ENOUGH_TURNS, the precision lost."""
    share = ALIGN_DEG / (360.0 * turns)
    notes = [
        f"the bound covers encoder resolution and the wheel slip this run shows, not how well the robot was "
        f"lined up at the end: {ALIGN_DEG:g} deg off over {turns:g} turns moves the track width by "
        f"{100 * share:.2g} % ({share * width:.2g} {unit})"
    ]
    if turns < ENOUGH_TURNS:
        notes.append(
            f"{turns:g} turns: {ENOUGH_TURNS} or more keep that under {100 * ALIGN_DEG / (360.0 * ENOUGH_TURNS):.2g} %"
        )
    return notes


def push_setup_note(distance: float, unit: str) -> str:
    """What the push test's bound leaves out: how well the push distance was measured."""
    measured = math.sqrt(2.0) * MEASURE_END_IN * inches(unit)
    return (
        f"the bound covers encoder resolution and the wheel slip this run shows, not how well the push was "
        f"measured: {MEASURE_END_IN:g} in at each end moves each diameter by {100 * measured / distance:.2g} %"
    )
