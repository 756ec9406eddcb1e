"""Calibration from two simple tests: whole turns in place, and a straight push of known length.

Owns what each test measures (the spin: track width of the two forward
wheels and the sideways wheel's forward offset; the push: distance per count
of each wheel rolling along it), how well (encoder resolution, plus wheel
slip estimated from the run itself) and the corrected profile. It trusts the
profile's wheel directions: the guided check is for those. Pure numpy.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from receiver.analysis.calibration_checks import (
    large_change_note,
    push_distance_notes,
    push_setup_note,
    spin_setup_notes,
    turn_count_notes,
)
from receiver.analysis.sample_clip import SampleClip
from receiver.errors import UsageError
from receiver.odometry.conventions import imu_heading_change
from receiver.odometry.kinematics import Kinematics
from receiver.odometry.robot import Profile, forward_pair, rolls_along, sideways_wheels

# A wheel's total is good to one count: half a count of rounding at each end.
RESOLUTION_COUNTS = 1.0
# The reported bound: resolution plus this many standard deviations of slip.
BOUND_SIGMAS = 3.0
# The wheels' own count of turns (under the profile) may differ from the
# entered one by this much before the user is asked to check the count.
TURNS_TOLERANCE = 0.1
# Below this share of the entered turns the wheels saw no spin at all.
NO_SPIN_SHARE = 0.25
# Off by more than this many turns and more than this share, the count is wrong, not the geometry.
MISCOUNT_TURNS = 0.5
MISCOUNT_SHARE = 0.15
# A wheel across the push that rolled more than this share of it means the push was not straight.
ACROSS_SHARE = 0.02
# Moving steps a wheel needs before its slip can be estimated.
MIN_SLIP_STEPS = 20
# Likely causes of a change too large to be a small correction, in the warning.
SPIN_CAUSES = (
    "likely a wrong count of turns, wheels slipping on the floor, or lengths in the profile in another unit; "
    "check before writing it"
)
PUSH_CAUSES = (
    "likely a push distance not in {unit} (the profile's unit), a wrong counts_per_rev or gear_ratio, or a "
    "wheel slipping or lifting off the floor; check before writing it"
)


@dataclass(frozen=True)
class Measured:
    """One constant a test measured, in ``unit``: the profile's value (``before``), the
    measured one (``after``) and its ``bound`` (resolution plus slip).
    """

    name: str
    before: float
    after: float
    bound: float  # the value is after +- bound
    resolution: float  # the part of the bound from encoder resolution
    slip_std: float  # one standard deviation from wheel slip; NaN when the run cannot tell
    unit: str

    def to_json(self) -> dict:
        """The constant as JSON: ``before`` as "profile", ``after`` as "measured", bounds to
        three significant digits, an unknown slip as null.
        """
        return {
            "name": self.name,
            "profile": round(self.before, 9),
            "measured": round(self.after, 9),
            "bound": float(f"{self.bound:.3g}"),
            "resolution": float(f"{self.resolution:.3g}"),
            "slip_std": None if math.isnan(self.slip_std) else float(f"{self.slip_std:.3g}"),
            "unit": self.unit,
        }


@dataclass
class Calibration:
    """A spin or push test's result for one robot: the measured constants, and the
    profile with them put in (``corrected``, ready for formats.profile_writer).
    """

    robot: str
    profile: Profile
    test: str  # "spin" or "push"
    values: list[Measured]
    corrected: Profile
    notes: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)  # what may make the result wrong: read before writing it

    def table(self) -> list[str]:
        """A short before/after table, one line per measured constant."""
        rows = [f"{'':28s} {'profile':>11s} {'measured':>11s} {'+-bound':>9s} {'change':>8s}"]
        for v in self.values:
            change = 100.0 * (v.after - v.before) / abs(v.before) if v.before else float("nan")
            rows.append(f"{v.name:28s} {v.before:11.4f} {v.after:11.4f} {v.bound:9.2g} {change:+7.2f}%  {v.unit}")
        return rows

    def to_json(self) -> dict:
        """The result for ``calibrate --json`` (robot, test, values, notes); the caller adds
        the profile changes.
        """
        return {
            "robot": self.robot,
            "test": self.test,
            "values": [v.to_json() for v in self.values],
            "warnings": self.warnings,
            "notes": self.notes,
        }


def slip_sigmas(clip: SampleClip, step_travel: np.ndarray, per_count: np.ndarray) -> np.ndarray:
    """Relative slip per step (standard deviation) of each wheel (n,), NaN where the run cannot tell.

    Slip scatters each step's travel by sigma times its size, white from step
    to step, while a push or a spin by hand changes speed smoothly: the second
    difference of each wheel's rate, r_k = u_k - (u_(k-1) + u_(k+1)) / 2, is
    that scatter (variance about 1.5 sigma^2 u^2) plus quantisation (5/12
    per_count^2 / dt^2 for independent rounding at each sample). Rates, not
    travel, so that loop-period jitter is not read as slip.
    """
    dt = np.diff(clip.t)
    usable = (dt > 0) & ~clip.anchor[1:]
    rate = np.where(usable[:, None], step_travel[1:] / np.where(usable, dt, 1.0)[:, None], np.nan)
    before, now, after = rate[:-2], rate[1:-1], rate[2:]
    moving = np.isfinite(before + now + after) & (before != 0) & (now != 0) & (after != 0)
    rough = np.where(moving, now - 0.5 * (before + after), 0.0)
    size = np.where(moving, 1.5 * now**2, 0.0)
    quantisation = np.where(moving, 5.0 / 12.0 * per_count**2 / np.where(usable, dt, 1.0)[1:-1, None] ** 2, 0.0)
    enough = moving.sum(axis=0) >= MIN_SLIP_STEPS
    variance = (np.sum(rough**2, axis=0) - quantisation.sum(axis=0)) / np.maximum(size.sum(axis=0), 1e-300)
    return np.where(enough, np.sqrt(np.maximum(variance, 0.0)), np.nan)


def _bound(resolution: float, std: float) -> float:
    """Resolution plus BOUND_SIGMAS standard deviations; resolution alone when the std is unknown (NaN)."""
    return resolution + (0.0 if math.isnan(std) else BOUND_SIGMAS * std)


def _slip_note(profile: Profile, slip_travel: np.ndarray, used: list[int]) -> list[str]:
    unknown = [profile.wheels[i].name for i in used if math.isnan(slip_travel[i])]
    if not unknown:
        return []
    return [f"too few moving samples to estimate slip on {', '.join(unknown)}: those bounds hold resolution only"]


def _imu_turn(clip: SampleClip, profile: Profile) -> tuple[float, float]:
    """(heading change, its standard deviation) from the IMU, radians, REP 103 sense.

    The IMU is read in the profile's heading unit and sense, whether or not
    the profile's [imu] mode uses it for the pose.
    """
    if not np.isfinite(clip.imu).all():
        raise UsageError(
            'the turn from the IMU needs an "imu" value in every message (README: The wire protocol); '
            "without one, give the number of whole turns (--spin-turns N)"
        )
    steps = imu_heading_change(clip.imu[1:], clip.imu[:-1], profile.reported)
    resting = (clip.dcounts[1:] == 0).all(axis=1)
    # Reading noise from the resting steps: a step difference holds two readings' noise.
    noise = float(np.std(steps[resting]) / math.sqrt(2.0)) if resting.sum() >= 5 else 0.0
    return float(steps.sum()), math.sqrt(2.0) * noise


def spin_calibration(clip: SampleClip, profile: Profile, turns: float | None, robot: str | None = None) -> Calibration:
    """Track width and sideways-wheel offset from whole turns in place.

    ``turns`` is the number of turns the user made (either way); None takes
    the turn from the IMU heading, which every sample must carry. The
    stated turns are checked against the robot's own heading and IMU.
    """
    pair = forward_pair(profile)
    if pair is None:
        raise UsageError("the spin test needs exactly two forward-rolling wheels in the profile")
    kin = Kinematics(profile)
    per_count = np.abs(kin.travel_per_count)
    step = clip.dcounts * kin.travel_per_count
    total = step.sum(axis=0)
    wheels_turn = float(kin.body_delta(total)[2])
    notes = []
    if turns is None:
        turn, turn_std = _imu_turn(clip, profile)
        notes.append(f"turn from the IMU: {math.degrees(turn):.1f} deg")
    else:
        if not turns > 0:
            raise UsageError(f"spin turns {turns!r}: expected a positive number of whole turns")
        if abs(wheels_turn) < NO_SPIN_SHARE * 2.0 * math.pi * turns:
            raise UsageError(
                f"the wheels measured only {abs(wheels_turn) / (2 * math.pi):.2f} turns under the profile, not {turns:g}: "
                "is a forward wheel's direction wrong in the profile? (podwatch diagnose --guided)"
            )
        turn, turn_std = math.copysign(2.0 * math.pi * turns, wheels_turn), 0.0
        measured = abs(wheels_turn) / (2.0 * math.pi)
        if abs(measured - turns) > max(MISCOUNT_TURNS, MISCOUNT_SHARE * turns):
            raise UsageError(
                f"the wheels measured {measured:.2f} turns under the profile, not {turns:g}: "
                "count the turns again (--spin-turns), or the profile's geometry is far off"
            )
    if abs(wheels_turn / turn - 1.0) > TURNS_TOLERANCE:
        notes.append(
            f"the profile's geometry measured {wheels_turn / (2 * math.pi):+.2f} turns, against {turn / (2 * math.pi):+.2f}: "
            "check the count of turns"
        )
    # Per wheel: the standard deviation of its total travel from slip.
    slip_travel = slip_sigmas(clip, step, per_count) * np.sqrt((step**2).sum(axis=0))
    unit = profile.distance_unit
    wheels = list(profile.wheels)
    values = []

    def bound(resolution: float, slip: float, value: float) -> float:
        from_turn = abs(value) * turn_std / abs(turn)
        return _bound(resolution, math.hypot(slip, from_turn))

    # A forward wheel at lateral offset y (rolling at phi = 0 or 180 degrees)
    # measures cos(phi) (X - y * turn) in total: X, the body-frame drift of a
    # spin about a point off the origin, cancels in the difference of two.
    a, b = pair
    lateral = [-total[i] / (math.cos(math.radians(wheels[i].angle)) * turn) for i in pair]
    width = abs(lateral[0] - lateral[1])
    centre = 0.5 * (wheels[a].y + wheels[b].y)
    resolution = RESOLUTION_COUNTS * (per_count[a] + per_count[b]) / abs(turn)
    slip = math.hypot(slip_travel[a], slip_travel[b]) / abs(turn)
    before = abs(wheels[a].y - wheels[b].y)
    values.append(Measured("track width", before, width, bound(resolution, slip, width), resolution, slip, unit))
    half = 0.5 * (lateral[0] - lateral[1])
    wheels[a] = replace(wheels[a], y=centre + half)
    wheels[b] = replace(wheels[b], y=centre - half)
    if (lateral[0] - lateral[1]) * (profile.wheels[a].y - profile.wheels[b].y) < 0:
        notes.append(f"the {wheels[a].name} and {wheels[b].name} wheels measured each other's side: check the guided test")
    for i in sideways_wheels(profile):
        # A sideways wheel (phi = +-90 degrees) measures sin(phi) (Y + x * turn).
        w = wheels[i]
        x = total[i] / (math.sin(math.radians(w.angle)) * turn)
        resolution = RESOLUTION_COUNTS * per_count[i] / abs(turn)
        slip = slip_travel[i] / abs(turn)
        values.append(Measured(f"{w.name} wheel forward offset", w.x, x, bound(resolution, slip, x), resolution, slip, unit))
        if x * w.x < 0:
            notes.append(f"the {w.name} wheel's offset came out with the other sign: its direction or offset sign is wrong in the profile")
        wheels[i] = replace(w, x=x)
    notes += _slip_note(profile, slip_travel, [a, b, *sideways_wheels(profile)])
    notes.append("offsets are measured from the point the robot spun about")
    warnings = []
    if turns is not None:
        notes += spin_setup_notes(turns, width, unit)
        warnings += turn_count_notes(clip, profile, turns, abs(wheels_turn) / (2.0 * math.pi))
    else:
        notes.append("the bound covers the IMU's reading noise at rest, not an error in its own scale")
    warnings += large_change_note([(v.name, v.before, v.after) for v in values], SPIN_CAUSES)
    return Calibration(robot or profile.name, profile, "spin", values, profile.with_wheels(tuple(wheels)), notes, warnings)


def push_calibration(clip: SampleClip, profile: Profile, distance: float, axis: str, robot: str | None = None) -> Calibration:
    """Effective diameter of each wheel rolling along a straight push of ``distance`` along +x or +y."""
    if axis not in ("x", "y"):
        raise UsageError(f"push axis {axis!r}: expected x (forward) or y (left)")
    if not distance > 0:
        raise UsageError(f"push distance {distance!r}: expected a positive length in {profile.distance_unit}")
    heading = 0.0 if axis == "x" else 90.0
    along = [i for i, w in enumerate(profile.wheels) if rolls_along(w, heading)]
    if not along:
        raise UsageError(f"no wheel in the profile rolls along {axis}: push along the other axis")
    kin = Kinematics(profile)
    per_count = np.abs(kin.travel_per_count)
    counts = clip.dcounts.sum(axis=0)
    step = clip.dcounts * kin.travel_per_count
    slip_travel = slip_sigmas(clip, step, per_count) * np.sqrt((step**2).sum(axis=0))
    unit = profile.distance_unit
    wheels = list(profile.wheels)
    values, notes = [], []
    for i in along:
        w = wheels[i]
        if counts[i] == 0:
            raise UsageError(f"the {w.name} wheel counted nothing during the push: is its encoder connected?")
        expected = math.cos(math.radians(w.angle - heading)) * distance  # travel along its rolling line
        if (counts[i] * kin.travel_per_count[i]) * expected < 0:
            notes.append(f"the {w.name} wheel counted backwards for this push: its reversed flag is wrong (or the push went the other way)")
        diameter = abs(expected) / abs(counts[i]) * w.counts_per_rev * w.gear_ratio / math.pi
        resolution = diameter * RESOLUTION_COUNTS / abs(counts[i])
        slip = diameter * slip_travel[i] / abs(expected)
        values.append(Measured(f"{w.name} wheel diameter", w.diameter, diameter, _bound(resolution, slip), resolution, slip, unit))
        wheels[i] = replace(w, diameter=diameter)
    notes += _slip_note(profile, slip_travel, along)
    for i, w in enumerate(profile.wheels):
        rolled = abs(counts[i] * kin.travel_per_count[i])
        if i not in along and rolled > ACROSS_SHARE * distance:
            notes.append(f"the {w.name} wheel rolled {rolled:.3g} {unit} across the push: push along a straight edge")
    notes.append(push_setup_note(distance, unit))
    wheels_moved = abs(float(kin.body_delta(counts * kin.travel_per_count)[0 if axis == "x" else 1]))
    warnings = push_distance_notes(clip, profile, distance, wheels_moved)
    warnings += large_change_note([(v.name, v.before, v.after) for v in values], PUSH_CAUSES.format(unit=unit))
    return Calibration(robot or profile.name, profile, "push", values, profile.with_wheels(tuple(wheels)), notes, warnings)
