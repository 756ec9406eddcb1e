"""Edits to a robot profile: which values can change, what each may hold, applying them.

Owns the editable keys of a profile in the one syntax `--set` and the page's
editor share ("name", "distance_unit", "imu.mode", "reported.heading_unit",
"wheel.right.x", ...), the typed ``Edit``, applying edits with their checks
(one ``ProfileError`` naming the key), and the keys in which profiles differ.
Pure: profiles in, profiles out; it never reads text or a file (KEY=VALUE
text is formats/profile_set.py, the TOML file formats/profile_toml.py).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Iterable, Sequence

from receiver.errors import ProfileError
from receiver.odometry.kinematics import observable
from receiver.odometry.robot import (
    HEADING_POSITIVE,
    HEADING_UNITS,
    HEADING_ZEROS,
    IMU_MODES,
    INTEGRATIONS,
    METRES_PER_UNIT,
    ROBOT_NAME_CHARS,
    Y_AXES,
    Profile,
)

Value = float | bool | str


@dataclass(frozen=True)
class Setting:
    """What one editable value may hold.

    ``kind`` is float, bool or str; ``choices`` limits a str; ``positive``
    a float; ``unit`` says how to label it: "length" (the profile's distance
    unit), "deg", or "" for none.
    """

    kind: type
    choices: tuple[str, ...] = ()
    positive: bool = False
    unit: str = ""
    about: str = ""


# Profile-level keys, in the order an editor shows them.
PROFILE_SETTINGS: dict[str, Setting] = {
    "name": Setting(str, about="the robot id its messages carry (1-32 of A-Z a-z 0-9 _ . -)"),
    "distance_unit": Setting(
        str, tuple(METRES_PER_UNIT), about="unit of every length and of the reported x, y (lengths are converted)"
    ),
    "reported.heading_unit": Setting(str, HEADING_UNITS, about="unit of the reported heading"),
    "reported.heading_positive": Setting(str, HEADING_POSITIVE, about="the turn that makes the reported heading grow"),
    "reported.y_axis": Setting(str, Y_AXES, about="where the reported +y points, seen from above"),
    "reported.heading_zero": Setting(str, HEADING_ZEROS, about="the axis the robot faces at reported heading 0"),
    # Optional in the file: absent, the checks find it from the robot's reports. An edit can
    # declare it; declaring it "not said" again is the file's to do.
    "reported.integration": Setting(str, INTEGRATIONS, about="how the robot code integrates its own pose"),
    "imu.mode": Setting(str, IMU_MODES, about="heading: the IMU's heading replaces the wheels' heading change"),
}
# Keys of each wheel: "wheel.<name or index>.<key>".
WHEEL_SETTINGS: dict[str, Setting] = {
    "name": Setting(str, about="the wheel's name, unique in the profile"),
    "x": Setting(float, unit="length", about="forward offset of the contact point"),
    "y": Setting(float, unit="length", about="leftward offset of the contact point (right side negative)"),
    "angle": Setting(float, unit="deg", about="rolling direction, degrees counter-clockwise from forward"),
    "diameter": Setting(float, positive=True, unit="length", about="wheel diameter"),
    "counts_per_rev": Setting(float, positive=True, about="encoder counts per encoder turn"),
    "gear_ratio": Setting(float, positive=True, about="encoder turns per wheel turn"),
    "reversed": Setting(bool, about="counts fall when the wheel rolls forward along its direction"),
}
_LENGTHS = tuple(key for key, setting in WHEEL_SETTINGS.items() if setting.unit == "length")
# A converted length keeps this many significant digits, so that 0.75 in reads
# 19.05 mm and not 19.049999999999997 mm.
_CONVERTED_DIGITS = 12
# Keys whose change can leave the wheels unable to observe the pose.
_GEOMETRY = ("x", "y", "angle")


@dataclass(frozen=True)
class Edit:
    """One change to a profile: a key of PROFILE_SETTINGS, or a key of WHEEL_SETTINGS
    with ``wheel`` the wheel's index in ``ticks`` order. ``value`` is already typed."""

    key: str
    value: Value
    wheel: int | None = None


def edit_key(edit: Edit, profile: Profile) -> str:
    """The edit's key as text against ``profile``, e.g. "wheel.right.x" or "imu.mode"."""
    if edit.wheel is None:
        return edit.key
    return wheel_key(profile.wheels[edit.wheel].name, edit.key)


def wheel_key(wheel_name: str, key: str) -> str:
    """"wheel.<wheel_name>.<key>"."""
    return f"wheel.{wheel_name}.{key}"


def show_value(value: Value) -> str:
    """A value as `--set` takes it back: true/false, a float's shortest text (8192, not
    8192.0), a string as is."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() and abs(value) < 1e15 else repr(value)
    return str(value)


def check_value(setting: Setting, key: str, value: object, source: str) -> Value:
    """``value`` when ``setting`` allows it (an int counts as a float), else one ProfileError naming ``key``."""
    if setting.kind is float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ProfileError(source, key, f"expected a number, got {value!r}")
        if not math.isfinite(value):
            raise ProfileError(source, key, f"expected a finite number, got {value!r}")
        if setting.positive and value <= 0:
            raise ProfileError(source, key, f"must be positive, got {float(value)!r}")
        return float(value)
    if setting.kind is bool:
        if not isinstance(value, bool):
            raise ProfileError(source, key, f"expected true or false, got {value!r}")
        return value
    if not isinstance(value, str):
        raise ProfileError(source, key, f"expected text, got {value!r}")
    if setting.choices and value not in setting.choices:
        raise ProfileError(source, key, f"unknown value {value!r}, expected one of {', '.join(setting.choices)}")
    return value


def apply_edit(profile: Profile, edit: Edit, source: str = "--set") -> Profile:
    """``profile`` with one edit made, its value checked; the geometry is checked by
    ``check_geometry`` (``apply_edits`` does both). Lengths are in the profile's
    unit at the time; a ``distance_unit`` edit converts every length to the new unit."""
    if edit.wheel is None:
        return _apply_profile_edit(profile, edit, source)
    if not 0 <= edit.wheel < len(profile.wheels):
        raise ProfileError(
            source, f"wheel.{edit.wheel}.{edit.key}", f"no wheel {edit.wheel}: the profile has wheels 0-{len(profile.wheels) - 1}"
        )
    key = edit_key(edit, profile)
    setting = WHEEL_SETTINGS.get(edit.key)
    if setting is None:
        raise ProfileError(source, key, f"unknown key {edit.key!r} of a wheel, expected one of {', '.join(WHEEL_SETTINGS)}")
    value = check_value(setting, key, edit.value, source)
    wheels = list(profile.wheels)
    if edit.key == "name":
        if not value.strip():
            raise ProfileError(source, key, "a wheel's name must not be empty")
        taken = [w.name for i, w in enumerate(wheels) if i != edit.wheel]
        if value in taken:
            raise ProfileError(source, key, f"wheel names must be unique, and {value!r} is taken")
    wheels[edit.wheel] = replace(wheels[edit.wheel], **{edit.key: value})
    return profile.with_wheels(tuple(wheels))


def _apply_profile_edit(profile: Profile, edit: Edit, source: str) -> Profile:
    setting = PROFILE_SETTINGS.get(edit.key)
    if setting is None:
        raise ProfileError(
            source, edit.key, f"unknown key, expected one of {', '.join(PROFILE_SETTINGS)} or wheel.<name or index>.<key>"
        )
    value = check_value(setting, edit.key, edit.value, source)
    if edit.key == "name":
        if not 1 <= len(value) <= 32 or not set(value) <= ROBOT_NAME_CHARS:
            raise ProfileError(source, "name", f"expected 1-32 characters of A-Z a-z 0-9 _ . -, got {value!r}")
        return replace(profile, name=value)
    if edit.key == "distance_unit":
        return in_unit(profile, value)
    if edit.key == "imu.mode":
        return replace(profile, imu_mode=value)
    field = edit.key.removeprefix("reported.")
    return replace(profile, reported=replace(profile.reported, **{field: value}))


def in_unit(profile: Profile, unit: str) -> Profile:
    """The same robot declared in ``unit``: every length converted (x, y, diameter; 12
    significant digits), and the robot's reported x, y read in ``unit`` from then on."""
    factor = METRES_PER_UNIT[profile.distance_unit] / METRES_PER_UNIT[unit]
    wheels = tuple(
        replace(w, **{key: float(f"{getattr(w, key) * factor:.{_CONVERTED_DIGITS}g}") for key in _LENGTHS})
        for w in profile.wheels
    )
    return replace(profile, distance_unit=unit, wheels=wheels)


def check_geometry(profile: Profile, keys: Sequence[str], source: str = "--set") -> None:
    """One ProfileError naming ``keys`` (the edits made) when the edited wheels cannot observe the pose."""
    named = ", ".join(keys) or "wheel"
    with_imu = profile.uses_imu
    needed = 2 if with_imu else 3
    if len(profile.wheels) < needed:
        raise ProfileError(
            source, named, f"{'with' if with_imu else 'without'} the IMU the pose needs at least {needed} "
            f"tracking wheels, and the profile has {len(profile.wheels)}",
        )
    if not observable(profile.wheels, with_imu=with_imu):
        what = "x and y" if with_imu else "x, y and heading"
        raise ProfileError(
            source, named, f"this edit leaves wheels that cannot observe {what} (are all wheels parallel, or at one spot?)"
        )


def apply_edits(profile: Profile, edits: Iterable[Edit], source: str = "--set") -> Profile:
    """``profile`` with the edits made in order, each checked, then the geometry checked.

    Wheels are by index, so an edit may follow one that renamed its wheel. The
    first bad edit raises one ProfileError naming its key; the geometry error
    names every key that could have caused it.
    """
    edited = profile
    touched: list[str] = []
    for edit in edits:
        edited = apply_edit(edited, edit, source)
        if (edit.wheel is None and edit.key == "imu.mode") or (edit.wheel is not None and edit.key in _GEOMETRY):
            touched.append(edit_key(edit, edited))
    if touched:
        check_geometry(edited, touched, source)
    return edited


def profile_values(profile: Profile) -> dict[str, Value]:
    """Every editable value by its key ("wheel.<name>.<key>" for wheels), in editor order."""
    values: dict[str, Value] = {
        "name": profile.name,
        "distance_unit": profile.distance_unit,
        **{f"reported.{key}": value for key, value in vars(profile.reported).items()},
        "imu.mode": profile.imu_mode,
    }
    for wheel in profile.wheels:
        values.update({wheel_key(wheel.name, key): getattr(wheel, key) for key in WHEEL_SETTINGS if key != "name"})
    return values


def differing_values(profiles: Sequence[Profile]) -> dict[str, list[Value | None]]:
    """The keys whose values are not the same in every profile, each with one value per
    profile (None where a profile has no such key: a wheel of another name)."""
    tables = [profile_values(p) for p in profiles]
    keys = list(dict.fromkeys(key for table in tables for key in table))
    found = {}
    for key in keys:
        column = [table.get(key) for table in tables]
        if any(value != column[0] for value in column[1:]):
            found[key] = column
    return found


def edits_between(before: Profile, after: Profile) -> list[Edit]:
    """Edits that turn ``before`` into ``after`` (the same number of wheels): what to show
    as `--set` options for a profile changed on the page."""
    if len(before.wheels) != len(after.wheels):
        raise ValueError("edits_between needs profiles with the same number of wheels")
    edits = []
    if after.distance_unit != before.distance_unit:
        edits.append(Edit("distance_unit", after.distance_unit))
        before = in_unit(before, after.distance_unit)
    for key in PROFILE_SETTINGS:
        if key == "distance_unit":
            continue
        old, new = _profile_value(before, key), _profile_value(after, key)
        if old != new and new is not None:  # an undeclared integration has no `--set` value
            edits.append(Edit(key, new))
    for index, (old_w, new_w) in enumerate(zip(before.wheels, after.wheels)):
        for key in WHEEL_SETTINGS:
            old, new = getattr(old_w, key), getattr(new_w, key)
            if old != new:
                edits.append(Edit(key, new, index))
    return edits


def _profile_value(profile: Profile, key: str) -> Value:
    if key == "imu.mode":
        return profile.imu_mode
    if key.startswith("reported."):
        return getattr(profile.reported, key.removeprefix("reported."))
    return getattr(profile, key)
