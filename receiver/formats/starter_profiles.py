"""Starter profiles for the common drives, written as commented TOML to measure and fill in.

Owns the four layouts of ``podwatch profile new``: three tracking wheels,
two tracking wheels with an IMU heading, and the drive encoders of a
mecanum or an X-drive base, each expressed in the general wheel model of
DESIGN.md (a contact point at (x, y) that measures travel along an angle).
The values are placeholders of a common size, in inches or millimetres;
the comments say how to measure each. Values and text only: no file I/O.
"""

from __future__ import annotations

import math

from receiver.errors import UsageError
from receiver.formats.profile_writer import profile_text
from receiver.odometry.robot import Profile, Reported, Wheel

LAYOUTS = ("three-wheel", "two-wheel-imu", "mecanum", "x-drive")
UNITS = ("in", "mm")
MM_PER_IN = 25.4
# A mecanum wheel's rollers sit at 45 degrees to its rolling direction
# (common practice, no source); the roller angle of each corner follows
# Lynch and Park, Modern Robotics, 2017, section 13.2, figure 13.5.
ROLLER_DEG = 45.0

_MEASURE = """How to measure (REP 103: x forward, y to the left, seen from above):
- x, y: from the point you want tracked (usually the centre of the drive base) to where
  the wheel touches the floor; a ruler and a square along the frame do it.
- angle: the direction the wheel rolls in, counter-clockwise from forward.
- counts_per_rev and gear_ratio: counts per encoder turn, and encoder turns per wheel turn;
  check them by rolling the wheel 10 turns by hand and reading the counts.
- reversed: push the robot forward (or left, for a sideways wheel): counts that fall mean true.
Then check it with podwatch: diagnose --guided, and calibrate --spin-turns N (5 or more turns)."""

_NOTES = {
    "three-wheel": """Three unpowered tracking wheels: two rolling forward either side of centre,
one rolling sideways behind it.
""",
    "two-wheel-imu": """Two unpowered tracking wheels, one rolling forward and one sideways, with the
heading from the IMU (send it as "imu" in each message, in the heading unit below).
""",
    "mecanum": """The four drive wheels' own encoders of a mecanum base. Common on newer teams, and
slip-prone: driven wheels slip when the robot accelerates, brakes or pushes, and the
rollers slip sideways; expect a larger disagreement than with tracking wheels, and
calibrate with slow, gentle moves.
How a mecanum wheel maps onto this profile: its encoder measures the wheel's turning,
r * u = (velocity of the contact point along the roller axis) / cos(roller angle)
(Lynch and Park, Modern Robotics, section 13.2). So each wheel below rolls along its
roller axis (angle = the roller angle, +-45 degrees) and its diameter is the wheel's
diameter times cos(45 deg) = 0.7071: for a 96 mm (3.780 in) wheel, 67.88 mm (2.672 in).
On most bases one side's motors are mounted mirrored: their encoders count down when
the robot drives forward (reversed = true); push it forward by hand to see.
""",
    "x-drive": """The four drive wheels' own encoders of an X-drive: omni wheels at the corners, each
mounted at 45 degrees, rolling at right angles to the line to the centre. Omni wheels
measure their rolling direction exactly (the free rollers take the rest); driven wheels
still slip when the robot accelerates or pushes. Mirrored motors count down: reversed = true.
""",
}


def _length(inches: float, unit: str) -> float:
    return round(inches * MM_PER_IN, 1) if unit == "mm" else inches


def _wheels(layout: str, unit: str) -> tuple[Wheel, ...]:
    """Placeholder wheels of a common size for ``layout`` in ``unit``."""
    if layout == "three-wheel":
        # Common practice: 35 mm tracking wheels on 8192-count encoders.
        d = 35.0 if unit == "mm" else round(35.0 / MM_PER_IN, 4)
        return (
            Wheel("left", _length(0.0, unit), _length(6.5, unit), 0.0, 8192, d),
            Wheel("right", _length(0.0, unit), _length(-6.5, unit), 0.0, 8192, d),
            Wheel("back", _length(-5.0, unit), _length(0.0, unit), 90.0, 8192, d),
        )
    if layout == "two-wheel-imu":
        d = 35.0 if unit == "mm" else round(35.0 / MM_PER_IN, 4)
        return (
            Wheel("forward", _length(0.0, unit), _length(3.0, unit), 0.0, 8192, d),
            Wheel("sideways", _length(-5.0, unit), _length(0.0, unit), 90.0, 8192, d),
        )
    # Drive wheels: from memory, a 28-count motor encoder behind a 19.2:1 gearbox is common.
    half_length, half_width = _length(6.0, unit), _length(7.0, unit)
    if layout == "mecanum":
        wheel_mm = 96.0
        effective = wheel_mm * math.cos(math.radians(ROLLER_DEG))
        d = round(effective, 2) if unit == "mm" else round(effective / MM_PER_IN, 4)
        # Lynch and Park's numbering and roller angles: front left -45, front right +45,
        # rear right -45, rear left +45 degrees.
        corners = (("front_left", 1, 1, -ROLLER_DEG), ("front_right", 1, -1, ROLLER_DEG),
                   ("rear_right", -1, -1, -ROLLER_DEG), ("rear_left", -1, 1, ROLLER_DEG))
        return tuple(Wheel(name, sx * half_length, sy * half_width, angle, 28, d, 19.2) for name, sx, sy, angle in corners)
    if layout == "x-drive":
        corner = _length(7.0, unit)
        d = 75.0 if unit == "mm" else round(75.0 / MM_PER_IN, 4)
        # Each wheel rolls at right angles to the line to the centre, with a forward part.
        corners = (("front_left", 1, 1, -45.0), ("front_right", 1, -1, 45.0),
                   ("rear_right", -1, -1, -45.0), ("rear_left", -1, 1, 45.0))
        return tuple(Wheel(name, sx * corner, sy * corner, angle, 28, d, 19.2) for name, sx, sy, angle in corners)
    raise UsageError(f"unknown layout {layout!r}, expected one of {', '.join(LAYOUTS)}")


def starter_profile(layout: str, unit: str = "in", name: str = "my-robot") -> Profile:
    """The starter profile of ``layout`` (one of LAYOUTS) in ``unit`` ("in" or "mm")."""
    if unit not in UNITS:
        raise UsageError(f"unknown unit {unit!r}, expected one of {', '.join(UNITS)}")
    return Profile(
        name=name,
        distance_unit=unit,
        wheels=_wheels(layout, unit),
        reported=Reported(),
        imu_mode="heading" if layout == "two-wheel-imu" else "off",
    )


def starter_text(layout: str, unit: str = "in", name: str = "my-robot") -> str:
    """The commented TOML of a starter profile: what the layout is, how to measure each value."""
    profile = starter_profile(layout, unit, name)
    header = (
        f"Starter profile ({layout}) written by podwatch profile new: every number is a placeholder\n"
        f"of a common size, in {'inches' if unit == 'in' else 'millimetres'}; measure your robot and replace them.\n"
        f"{_NOTES[layout]}{_MEASURE}"
    )
    return profile_text(profile, header)
