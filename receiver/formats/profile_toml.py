"""The robot profile's TOML file: load and validate it, write it back.

This is the boundary for geometry and conventions (DESIGN.md, robot
profile): everything behind it assumes a valid ``Profile``. A bad file is
one ``ProfileError`` naming the file, the key and the problem, whatever the
file holds (bounds in profile_limits.py). It never guesses a value the file
did not give, except the documented defaults.
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path
from typing import Any

import msgspec
import tomli_w

from receiver.errors import ProfileError, describe
from receiver.formats.profile_limits import MAX_PROFILE_BYTES, MAX_WHEEL_NAME, MAX_WHEELS, out_of_limits
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
    Reported,
    Wheel,
)

_WHEEL_KEYS = {
    "name": str,
    "x": float,
    "y": float,
    "angle": float,
    "counts_per_rev": float,
    "diameter": float,
    "gear_ratio": float,
    "reversed": bool,
}
_WHEEL_REQUIRED = ("name", "x", "y", "angle", "counts_per_rev", "diameter")


def _take(table: dict[str, Any], key: str, kind: type, source: str, where: str, default: Any = None) -> Any:
    if key not in table:
        if default is None:
            raise ProfileError(source, where + key, "missing")
        return default
    value = table[key]
    if kind is float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ProfileError(source, where + key, f"expected a number, got {describe(value)}")
        try:
            number = float(value)
        except OverflowError:  # an integer past a double's range
            number = math.inf
        if not math.isfinite(number):
            raise ProfileError(source, where + key, f"expected a finite number, got {describe(value)}")
        return number
    if not isinstance(value, kind):
        raise ProfileError(source, where + key, f"expected {kind.__name__}, got {describe(value)}")
    return value


def _choice(table: dict[str, Any], key: str, allowed: tuple[str, ...], source: str, where: str, default: str) -> str:
    value = _take(table, key, str, source, where, default)
    if value not in allowed:
        raise ProfileError(source, where + key, f"unknown value {describe(value)}, expected one of {', '.join(allowed)}")
    return value


def _no_unknown(table: dict[str, Any], known: set[str], source: str, where: str) -> None:
    for key in table:
        if key not in known:
            shown = key if key.isprintable() and len(key) <= 40 else describe(key, 40)
            raise ProfileError(source, where + shown, "unknown key (misspelt?)")


def _wheel(table: Any, index: int, source: str, unit: str) -> Wheel:
    where = f"wheel[{index}]."
    if not isinstance(table, dict):
        raise ProfileError(source, f"wheel[{index}]", "expected a table")
    _no_unknown(table, set(_WHEEL_KEYS), source, where)
    values = {}
    for key, kind in _WHEEL_KEYS.items():
        default = None if key in _WHEEL_REQUIRED else {"gear_ratio": 1.0, "reversed": False}[key]
        values[key] = _take(table, key, kind, source, where, default)
    name = values["name"]
    if not 1 <= len(name) <= MAX_WHEEL_NAME or not name.isprintable():
        raise ProfileError(source, where + "name", f"expected 1-{MAX_WHEEL_NAME} printable characters, got {describe(name)}")
    for key in ("counts_per_rev", "diameter", "gear_ratio"):
        if values[key] <= 0:
            raise ProfileError(source, where + key, f"must be positive, got {values[key]!r}")
    for key, value in values.items():
        problem = out_of_limits(key, value, unit)
        if problem:
            raise ProfileError(source, where + key, problem)
    return Wheel(**values)


def profile_from_table(table: dict[str, Any], source: str = "<profile>") -> Profile:
    """Validate a parsed profile table; raise ProfileError naming the key."""
    _no_unknown(table, {"name", "distance_unit", "reported", "wheel", "imu"}, source, "")
    name = _take(table, "name", str, source, "")
    if not 1 <= len(name) <= 32 or not set(name) <= ROBOT_NAME_CHARS:
        raise ProfileError(source, "name", f"expected 1-32 characters of A-Z a-z 0-9 _ . -, got {describe(name)}")
    unit = _choice(table, "distance_unit", tuple(METRES_PER_UNIT), source, "", "in")
    rep = table.get("reported", {})
    if not isinstance(rep, dict):
        raise ProfileError(source, "reported", "expected a table")
    _no_unknown(rep, {"heading_unit", "heading_positive", "y_axis", "heading_zero", "integration"}, source, "reported.")
    reported = Reported(
        heading_unit=_choice(rep, "heading_unit", HEADING_UNITS, source, "reported.", "rad"),
        heading_positive=_choice(rep, "heading_positive", HEADING_POSITIVE, source, "reported.", "ccw"),
        y_axis=_choice(rep, "y_axis", Y_AXES, source, "reported.", "left"),
        heading_zero=_choice(rep, "heading_zero", HEADING_ZEROS, source, "reported.", "x"),
        # Optional without a default value: absent means "find it out" (the checks do).
        integration=_choice(rep, "integration", INTEGRATIONS, source, "reported.", "arc") if "integration" in rep else None,
    )
    imu = table.get("imu", {})
    if not isinstance(imu, dict):
        raise ProfileError(source, "imu", "expected a table")
    _no_unknown(imu, {"mode"}, source, "imu.")
    imu_mode = _choice(imu, "mode", IMU_MODES, source, "imu.", "off")
    raw_wheels = table.get("wheel")
    if not isinstance(raw_wheels, list) or not raw_wheels:
        raise ProfileError(source, "wheel", "missing: declare one [[wheel]] table per tracking wheel")
    if len(raw_wheels) > MAX_WHEELS:
        raise ProfileError(source, "wheel", f"at most {MAX_WHEELS} tracking wheels, got {len(raw_wheels)}")
    wheels = tuple(_wheel(w, i, source, unit) for i, w in enumerate(raw_wheels))
    names = [w.name for w in wheels]
    if len(set(names)) != len(names):
        raise ProfileError(source, "wheel.name", f"wheel names must be unique, got {names}")
    needed = 2 if imu_mode == "heading" else 3
    if len(wheels) < needed:
        raise ProfileError(source, "wheel", f"need at least {needed} tracking wheels to observe the pose, got {len(wheels)}")
    if not observable(wheels, with_imu=imu_mode == "heading"):
        what = "x and y" if imu_mode == "heading" else "x, y and heading"
        raise ProfileError(
            source, "wheel", f"this geometry cannot observe {what} (are all wheels parallel, or at one spot?)"
        )
    return Profile(name=name, distance_unit=unit, wheels=wheels, reported=reported, imu_mode=imu_mode)


def load_profile(path: str | Path) -> Profile:
    """Read and validate a TOML profile file."""
    source = str(path)
    try:
        with open(path, "rb") as fh:
            text = fh.read(MAX_PROFILE_BYTES + 1)
    except FileNotFoundError:
        raise ProfileError(source, "(file)", "no such file") from None
    except OSError as exc:
        raise ProfileError(source, "(file)", f"cannot read: {exc.strerror}") from exc
    if len(text) > MAX_PROFILE_BYTES:
        raise ProfileError(source, "(file)", f"over {MAX_PROFILE_BYTES} bytes: a profile is a few hundred")
    try:
        table = tomllib.loads(text.decode("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ProfileError(source, "(file)", f"not valid TOML: {str(exc).splitlines()[0]}") from exc
    except RecursionError:
        raise ProfileError(source, "(file)", "arrays or tables nested too deep to read") from None
    except ValueError as exc:  # an integer of more digits than Python converts (4300 by default)
        raise ProfileError(source, "(file)", f"not a usable TOML number: {str(exc).split(':')[0]}") from exc
    return profile_from_table(table, source)


def profile_to_table(profile: Profile) -> dict[str, Any]:
    """The profile as a plain table, the shape the TOML file and recordings use.

    ``reported.integration`` appears only when the profile declares it, so a
    profile without it reads as before everywhere.
    """
    table = {
        "name": profile.name,
        "distance_unit": profile.distance_unit,
        "reported": {
            "heading_unit": profile.reported.heading_unit,
            "heading_positive": profile.reported.heading_positive,
            "y_axis": profile.reported.y_axis,
            "heading_zero": profile.reported.heading_zero,
        },
        "wheel": [
            {
                "name": w.name,
                "x": w.x,
                "y": w.y,
                "angle": w.angle,
                "counts_per_rev": w.counts_per_rev,
                "diameter": w.diameter,
                "gear_ratio": w.gear_ratio,
                "reversed": w.reversed,
            }
            for w in profile.wheels
        ],
        "imu": {"mode": profile.imu_mode},
    }
    if profile.reported.integration is not None:
        table["reported"]["integration"] = profile.reported.integration
    return table


def dump_profile(profile: Profile) -> str:
    """The profile as TOML text."""
    return tomli_w.dumps(profile_to_table(profile))


def write_profile(profile: Profile, path: str | Path) -> None:
    """Write the profile as a TOML file."""
    Path(path).write_text(dump_profile(profile), encoding="utf-8")


def profile_json(profile: Profile) -> bytes:
    """The profile as one JSON object (``profile_to_table``): what <prefix>/<robot>/profile carries."""
    return msgspec.json.encode(profile_to_table(profile))


def profile_from_json(data: bytes, source: str) -> Profile:
    """A profile from ``profile_json``'s bytes, validated as a file is; one ProfileError otherwise."""
    if len(data) > MAX_PROFILE_BYTES:
        raise ProfileError(source, "(message)", f"over {MAX_PROFILE_BYTES} bytes: a profile is a few hundred")
    try:
        table = msgspec.json.decode(data)
    except (msgspec.MsgspecError, RecursionError) as exc:
        raise ProfileError(source, "(message)", f"not a JSON profile: {str(exc).splitlines()[0] if str(exc) else exc}") from None
    if not isinstance(table, dict):
        raise ProfileError(source, "(message)", f"expected a JSON object, got {describe(table)}")
    return profile_from_table(table, source)
