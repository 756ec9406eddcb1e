"""The convention mistakes diagnosis searches, each read as "the robot code does X, the profile does not".

Owns the hypothesis set (no mistake, each single mistake, every pair), their
ids in the simulator's fault syntax (so a verdict can be replayed as a fault)
and their plain words. What a mistake does to the geometry is defined once,
by ``simulate.robot_code_profile``: the simulator and the diagnosis share it.
Pure: profiles in, hypotheses out.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from functools import lru_cache
from itertools import combinations

from receiver.odometry.faults import Faults, robot_code_profile
from receiver.odometry.robot import Profile, Reported, Wheel, parallel, rolls_mostly_forward

_CONVENTION_FAULTS = {
    "heading_unit": "heading-unit",
    "heading_positive": "heading-direction",
    "y_axis": "y-axis",
    "heading_zero": "heading-zero",
}
# (how the robot code reports, the profile's value) in words, by setting and value.
_CONVENTION_WORDS = {
    "heading_unit": {"rad": ("heading in radians", "radians"), "deg": ("heading in degrees", "degrees")},
    "heading_positive": {
        "ccw": ("heading growing counter-clockwise", "counter-clockwise"),
        "cw": ("heading growing clockwise", "clockwise"),
    },
    "y_axis": {"left": ("+y to the left", "left"), "right": ("+y to the right", "right")},
    "heading_zero": {"x": ("heading 0 when facing +x", "+x"), "y": ("heading 0 when facing +y", "+y")},
}


@dataclass(frozen=True)
class Hypothesis:
    """One explanation: the robot code makes ``faults`` and otherwise follows the profile."""

    specs: tuple[str, ...]  # simulator fault specs, e.g. ("reversed:right",); () for none
    faults: Faults
    robot_profile: Profile  # the profile the robot code effectively uses

    @property
    def id(self) -> str:
        """The mistakes as fault specs joined by "+" (e.g. "reversed:right+y-axis"), or "none";
        each part is a ``simulate --fault`` value.
        """
        return "+".join(self.specs) or "none"

    @property
    def size(self) -> int:
        """How many mistakes it combines: 0, 1 or 2."""
        return len(self.specs)


def single_mistakes(profile: Profile) -> list[tuple[str, Faults]]:
    """Every single mistake that changes what the robot code computes, as (spec, faults)."""
    wheels = profile.wheels
    singles = [(f"reversed:{w.name}", Faults(reversed=(w.name,))) for w in wheels]
    for a, b in combinations(wheels, 2):
        if parallel(a, b):  # a swap of two wheels rolling the same way is a plausible wiring mistake
            singles.append((f"swapped:{a.name},{b.name}", Faults(swapped=((a.name, b.name),))))
    for w in wheels:
        if (w.y if rolls_mostly_forward(w) else w.x) != 0.0:  # flipping a zero offset changes nothing
            singles.append((f"offset-sign:{w.name}", Faults(offset_sign=(w.name,))))
    singles += [(spec, Faults(conventions=(key,))) for key, spec in _CONVENTION_FAULTS.items()]
    return singles


def _merge(a: Faults, b: Faults) -> Faults | None:
    """Both mistakes at once, or None where they cannot both be made (two swaps sharing a wheel)."""
    if a.swapped and b.swapped and set(a.swapped[0]) & set(b.swapped[0]):
        return None
    return Faults(**{f.name: getattr(a, f.name) + getattr(b, f.name) for f in fields(Faults) if isinstance(getattr(a, f.name), tuple)})


@lru_cache(maxsize=16)
def hypotheses(profile: Profile) -> tuple[Hypothesis, ...]:
    """No mistake, then every single mistake, then every pair: simplest first."""
    singles = single_mistakes(profile)
    found = [Hypothesis((), Faults(), profile)]
    for spec, faults in singles:
        found.append(Hypothesis((spec,), faults, robot_code_profile(profile, faults)))
    for (spec_a, a), (spec_b, b) in combinations(singles, 2):
        merged = _merge(a, b)
        if merged is not None:
            found.append(Hypothesis((spec_a, spec_b), merged, robot_code_profile(profile, merged)))
    return tuple(found)


def _length(value: float, profile: Profile) -> str:
    return f"{value:+g} {profile.distance_unit}"


def _wheel_words(spec: str, profile: Profile, robot: Profile) -> tuple[str, str]:
    kind, _, names = spec.partition(":")
    index = {w.name: i for i, w in enumerate(profile.wheels)}
    if kind == "reversed":
        declared = profile.wheels[index[names]]
        if declared.reversed:
            return f"treats the {names} wheel as not reversed", "treats it as reversed"
        return f"treats the {names} wheel as reversed", "does not"
    if kind == "swapped":
        a, b = names.split(",")
        return f"reads the {a} and {b} encoders the other way round (swapped)", "does not"
    declared = profile.wheels[index[names]]
    used = robot.wheels[index[names]]
    key, offset = ("y", "lateral") if rolls_mostly_forward(declared) else ("x", "forward")
    return (
        f"uses {key} = {_length(getattr(used, key), profile)} for the {names} wheel's {offset} offset",
        f"says {_length(getattr(declared, key), profile)}",
    )


def words(hypothesis: Hypothesis, profile: Profile) -> list[tuple[str, str]]:
    """(what the robot code does, what the profile says) for each mistake of a hypothesis."""
    out = []
    for spec in hypothesis.specs:
        key = next((k for k, name in _CONVENTION_FAULTS.items() if name == spec), None)
        if key is None:
            out.append(_wheel_words(spec, profile, hypothesis.robot_profile))
        else:
            table = _CONVENTION_WORDS[key]
            used = getattr(hypothesis.robot_profile.reported, key)
            declared = getattr(profile.reported, key)
            out.append((f"reports {table[used][0]}", f"says {table[declared][1]}"))
    return out


def verdict(hypothesis: Hypothesis, profile: Profile) -> str:
    """The plain-words verdict, e.g. "the robot code treats the right wheel as reversed; the profile does not"."""
    parts = words(hypothesis, profile)
    if not parts:
        return "no convention mistake: the robot code and the profile agree"
    if len(parts) == 1:
        robot, declared = parts[0]
        return f"the robot code {robot}; the profile {declared}"
    said = " and ".join(f"{robot} (the profile {declared})" for robot, declared in parts)
    return f"{len(parts)} mistakes: the robot code {said}"


def profile_changes(before: Profile, after: Profile) -> list[str]:
    """The keys that differ between two profiles, as "wheel right: reversed false -> true" lines."""
    changes = []
    for f in fields(Reported):
        old, new = getattr(before.reported, f.name), getattr(after.reported, f.name)
        if old != new:
            changes.append(f"reported.{f.name}: {_show(old)} -> {_show(new)}")
    declared = {w.name: w for w in before.wheels}
    for slot, (old_w, new_w) in enumerate(zip(before.wheels, after.wheels)):
        if old_w.name != new_w.name:
            changes.append(f"ticks[{slot}]: the {old_w.name} wheel -> the {new_w.name} wheel")
        old_w = declared[new_w.name]
        for f in fields(Wheel):
            old, new = getattr(old_w, f.name), getattr(new_w, f.name)
            if old != new:
                changes.append(f"wheel {new_w.name}: {f.name} {_show(old)} -> {_show(new)}")
    return changes


def _show(value: object) -> str:
    if value is None:
        return "(not set)"
    if isinstance(value, bool):
        return str(value).lower()
    return f"{value:.6g}" if isinstance(value, float) else str(value)
