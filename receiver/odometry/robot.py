"""The robot's description: tracking wheels, reported-pose conventions, units.

Owns the value types every layer shares (``Wheel``, ``Reported``,
``Profile``) and the plain facts about wheels the checks ask ("does it roll
forward?", "are these two parallel?"). Values only: loading and validating
the TOML file is formats/profile_toml.py; nothing here reads a file.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Iterable

# Length of one unit in metres (SI definitions; 1 in = 25.4 mm exactly).
METRES_PER_UNIT = {"in": 0.0254, "mm": 0.001, "cm": 0.01, "m": 1.0}
HEADING_UNITS = ("rad", "deg")
HEADING_POSITIVE = ("ccw", "cw")
Y_AXES = ("left", "right")
HEADING_ZEROS = ("x", "y")
IMU_MODES = ("off", "heading")
# How a robot's code may integrate its own pose (odometry/integrate.py has all three).
INTEGRATIONS = ("euler", "midpoint", "arc")
# The [reported] settings that are conventions (each a choice of two); ``integration`` is not one.
CONVENTION_KEYS = ("heading_unit", "heading_positive", "y_axis", "heading_zero")
ROBOT_NAME_CHARS = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_.-")


@dataclass(frozen=True)
class Wheel:
    """One tracking wheel; lengths in the profile's distance unit."""

    name: str
    x: float
    y: float
    angle: float  # rolling direction, degrees counter-clockwise from forward
    counts_per_rev: float
    diameter: float
    gear_ratio: float = 1.0
    reversed: bool = False

    @property
    def travel_per_count(self) -> float:
        """Signed distance the contact point rolls per encoder count."""
        sign = -1.0 if self.reversed else 1.0
        return sign * math.pi * self.diameter / (self.counts_per_rev * self.gear_ratio)


@dataclass(frozen=True)
class Reported:
    """How the robot expresses its own pose (see DESIGN.md, Conventions).

    ``integration`` is how the robot code integrates its pose (one of
    INTEGRATIONS), or None when the profile does not say: the checks then
    find it out from the robot's reports.
    """

    heading_unit: str = "rad"
    heading_positive: str = "ccw"
    y_axis: str = "left"
    heading_zero: str = "x"
    integration: str | None = None


@dataclass(frozen=True)
class Profile:
    """A validated robot profile (formats/profile_toml.py builds one): wheels in ``ticks`` order.

    Lengths are in ``distance_unit``; ``imu_mode`` is "off" or "heading".
    """

    name: str
    distance_unit: str
    wheels: tuple[Wheel, ...]
    reported: Reported = field(default_factory=Reported)
    imu_mode: str = "off"

    @property
    def uses_imu(self) -> bool:
        """True when the IMU heading replaces the wheels' heading change."""
        return self.imu_mode == "heading"

    def with_wheels(self, wheels: tuple[Wheel, ...]) -> Profile:
        """The same profile with other wheels."""
        return replace(self, wheels=tuple(wheels))


# A wheel within this of an axis (or two wheels within this of each other,
# modulo a half turn) rolls along it: real layouts are square to the body.
AXIS_TOLERANCE_DEG = 1.0


def rolls_along(wheel: Wheel, axis_deg: float) -> bool:
    """True when the wheel rolls along the body axis at ``axis_deg`` (either way)."""
    return abs((wheel.angle - axis_deg + 90.0) % 180.0 - 90.0) < AXIS_TOLERANCE_DEG


def rolls_mostly_forward(wheel: Wheel) -> bool:
    """True when the wheel rolls closer to forward than to sideways: its lever arm is then its y offset."""
    phi = math.radians(wheel.angle)
    return abs(math.cos(phi)) >= abs(math.sin(phi))


def forward_pair(profile: Profile) -> tuple[int, int] | None:
    """Indices of the two forward-rolling wheels, when there are exactly two."""
    found = [i for i, w in enumerate(profile.wheels) if rolls_along(w, 0.0)]
    return (found[0], found[1]) if len(found) == 2 else None


def sideways_wheels(profile: Profile) -> list[int]:
    """Indices of the wheels that roll sideways."""
    return [i for i, w in enumerate(profile.wheels) if rolls_along(w, 90.0)]


def parallel(a: Wheel, b: Wheel) -> bool:
    """True when two wheels roll along the same line (either way)."""
    return rolls_along(a, b.angle)


def inches(unit: str) -> float:
    """One inch in ``unit`` (one of METRES_PER_UNIT)."""
    return METRES_PER_UNIT["in"] / METRES_PER_UNIT[unit]




def missing_profile_hint(robot: str, given: Iterable[str]) -> str:
    """What to do for a robot without a profile, naming the profiles given for no robot heard.

    ``given`` holds the names of the profiles given that no robot uses; with
    none, the hint is to give one with --profile.
    """
    names = sorted(set(given) - {robot})
    if not names:
        return "give one with --profile"
    if len(names) == 1:
        return (
            f"the profile given is named {names[0]}; the messages come from {robot}: "
            f'set name = "{robot}" in the profile, or send that name'
        )
    return (
        f"the profiles given are named {', '.join(names)}; the messages come from {robot}: "
        f'set name = "{robot}" in the right one, or send its name'
    )


def counts_per_message(profiles: dict[str, Profile]) -> dict[str, int]:
    """How many encoder counts each profiled robot's messages carry: what a reader checks them against."""
    return {name: len(profile.wheels) for name, profile in profiles.items()}
