"""The convention mistakes a robot's code can make, as a model: faults in, the profile it effectively uses out.

Owns the fault names (the simulator's ``--fault`` syntax), their parsing and
what each does to the geometry (``robot_code_profile``): the simulator puts
mistakes into a robot with it, and diagnosis reads a disagreement back
through it, so both sides share one definition. Pure: profiles in, profiles out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Sequence

from receiver.errors import UsageError
from receiver.odometry.robot import (
    HEADING_POSITIVE,
    HEADING_UNITS,
    HEADING_ZEROS,
    Y_AXES,
    Profile,
    rolls_mostly_forward,
)

# The [reported] settings a robot code can use the other way from the
# profile: the fault's name, the setting, and the setting's values.
CONVENTION_FAULTS = {
    "heading-unit": "heading_unit",
    "heading-direction": "heading_positive",
    "y-axis": "y_axis",
    "heading-zero": "heading_zero",
}
REPORTED_CHOICES = {
    "heading_unit": HEADING_UNITS,
    "heading_positive": HEADING_POSITIVE,
    "y_axis": Y_AXES,
    "heading_zero": HEADING_ZEROS,
}
_WHEEL_FAULTS = ("reversed", "swapped", "offset-sign")
_RATE_LIMITS = {"slip": 0.5, "drop": 1.0, "reorder": 1.0, "duplicate": 1.0}  # values in [0, limit)
FAULT_SYNTAX = (
    "reversed:WHEEL[,WHEEL...], swapped:WHEEL,WHEEL, offset-sign:WHEEL[,WHEEL...], "
    "heading-unit, heading-direction, y-axis, heading-zero, slip:SD, drop:P, reorder:P, duplicate:P"
)


@dataclass(frozen=True)
class Faults:
    """Mistakes to simulate.

    In the robot code: ``reversed`` wheels have their count sign flipped,
    ``swapped`` pairs are read from each other's encoder, ``offset_sign``
    wheels have their lever-arm offset negated (y for a forward-rolling
    wheel, x for a sideways one), and ``conventions`` names the [reported]
    settings the robot code uses the other way from the profile. On the
    wheels: ``slip`` is the standard deviation of a random factor on each
    wheel's travel per loop. On the network: per-message probabilities.
    """

    reversed: tuple[str, ...] = ()
    swapped: tuple[tuple[str, str], ...] = ()
    offset_sign: tuple[str, ...] = ()
    conventions: tuple[str, ...] = ()
    slip: float = 0.0
    drop: float = 0.0
    reorder: float = 0.0
    duplicate: float = 0.0


def parse_faults(specs: Sequence[str], profile: Profile) -> Faults:
    """Faults from names such as "reversed:right", "heading-unit" or "drop:0.05" (see FAULT_SYNTAX)."""
    wheels = [w.name for w in profile.wheels]
    values: dict[str, object] = {}
    for spec in specs:
        name, has_value, value = spec.partition(":")
        if name in CONVENTION_FAULTS:
            key = CONVENTION_FAULTS[name]
            if has_value:
                raise UsageError(f"fault {spec!r}: {name} takes no value")
            if key in values.get("conventions", ()):
                raise UsageError(f"fault {name} is given twice")
            values["conventions"] = (*values.get("conventions", ()), key)
        elif name in _WHEEL_FAULTS:
            names = tuple(value.split(",")) if value else ()
            if not names or any(n not in wheels for n in names):
                raise UsageError(f"fault {spec!r}: expected {name}:WHEEL[,WHEEL...] with wheels of {', '.join(wheels)}")
            key = name.replace("-", "_")
            taken = values.get(key, ())
            if name == "swapped":
                if len(names) != 2 or names[0] == names[1]:
                    raise UsageError(f"fault {spec!r}: swapped takes two different wheels")
                names = (names,)
            elif len(set(taken + names)) < len(taken) + len(names):
                raise UsageError(f"fault {spec!r}: a wheel is named twice for {name}")
            values[key] = (*taken, *names)
        elif name in _RATE_LIMITS:
            limit = _RATE_LIMITS[name]
            try:
                rate = float(value)
            except ValueError:
                rate = math.nan
            if not 0.0 <= rate < limit:
                raise UsageError(f"fault {spec!r}: expected {name}:X with 0 <= X < {limit:g}")
            if name in values:
                raise UsageError(f"fault {name} is given twice")
            values[name] = rate
        else:
            raise UsageError(f"unknown fault {spec!r}, expected one of: {FAULT_SYNTAX}")
    return Faults(**values)


def robot_code_profile(profile: Profile, faults: Faults) -> Profile:
    """The profile the robot code effectively uses: the declared one with the mistakes in it.

    Wheel faults apply by wheel name in the order reversed, offset sign, swap.
    """
    index = {w.name: i for i, w in enumerate(profile.wheels)}
    wheels = list(profile.wheels)
    for name in faults.reversed:
        w = wheels[index[name]]
        wheels[index[name]] = replace(w, reversed=not w.reversed)
    for name in faults.offset_sign:
        w = wheels[index[name]]
        wheels[index[name]] = replace(w, y=-w.y) if rolls_mostly_forward(w) else replace(w, x=-w.x)
    for a, b in faults.swapped:
        wheels[index[a]], wheels[index[b]] = wheels[index[b]], wheels[index[a]]
    reported = profile.reported
    for key in faults.conventions:
        other = next(v for v in REPORTED_CHOICES[key] if v != getattr(reported, key))
        reported = replace(reported, **{key: other})
    return replace(profile, wheels=tuple(wheels), reported=reported)
