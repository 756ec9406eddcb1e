"""KEY=VALUE text -> profile edits: the boundary of `--set` and of the page's profile editor.

Owns reading an edit written as text against a profile: the key ("name",
"reported.heading_unit", "imu.mode", "wheel.right.x" or "wheel.0.x"), the
wheel by name or index, and the value by the key's kind (a number, true or
false, one of the choices). Every mistake is one ProfileError naming the key
and what it may hold. What an edit does and its checks are
odometry/profile_edit.py; this module never changes a profile itself.
"""

from __future__ import annotations

import difflib
from typing import Sequence

from receiver.errors import ProfileError
from receiver.odometry.profile_edit import (
    PROFILE_SETTINGS,
    WHEEL_SETTINGS,
    Edit,
    Setting,
    Value,
    apply_edit,
    apply_edits,
    check_value,
    edit_key,
    show_value,
    wheel_key,
)
from receiver.odometry.robot import Profile

EXAMPLE = "wheel.right.reversed=true"


def _maybe(word: str, known: Sequence[str]) -> str:
    close = difflib.get_close_matches(word, known, n=1)
    return f" (did you mean {close[0]}?)" if close else ""


def parse_key(profile: Profile, key: str, source: str = "--set") -> tuple[Setting, str, int | None]:
    """(setting, its key within the profile or wheel, wheel index or None) for a key's
    text; a wheel by name first, then by index."""
    parts = key.strip().split(".")
    if parts[0] != "wheel":
        setting = PROFILE_SETTINGS.get(key.strip())
        if setting is None:
            known = [*PROFILE_SETTINGS, "wheel.<name or index>.<key>"]
            raise ProfileError(
                source, key, f"unknown key, expected one of {', '.join(known)}{_maybe(key, list(PROFILE_SETTINGS))}"
            )
        return setting, key.strip(), None
    if len(parts) < 3:
        raise ProfileError(source, key, "expected wheel.<name or index>.<key>, e.g. wheel.right.x or wheel.0.x")
    which, field = ".".join(parts[1:-1]), parts[-1]
    names = [w.name for w in profile.wheels]
    if which in names:
        index = names.index(which)
    elif which.isascii() and which.isdigit() and int(which) < len(names):
        index = int(which)
    else:
        raise ProfileError(
            source, key,
            f"unknown wheel {which!r}, expected one of {', '.join(names)} or an index 0-{len(names) - 1}"
            f"{_maybe(which, names)}",
        )
    setting = WHEEL_SETTINGS.get(field)
    if setting is None:
        raise ProfileError(
            source, key,
            f"unknown key {field!r} of a wheel, expected one of {', '.join(WHEEL_SETTINGS)}{_maybe(field, list(WHEEL_SETTINGS))}",
        )
    return setting, field, index


def parse_value(setting: Setting, key: str, text: str, source: str = "--set") -> Value:
    """The value of ``text`` for ``setting``: a number, true or false, or a string (checked
    against the choices); one ProfileError naming ``key`` otherwise."""
    text = text.strip()
    if setting.kind is float:
        try:
            value: object = float(text)
        except ValueError:
            raise ProfileError(source, key, f"expected a number, got {text!r}") from None
    elif setting.kind is bool:
        if text.lower() not in ("true", "false"):
            raise ProfileError(source, key, f"expected true or false, got {text!r}")
        value = text.lower() == "true"
    else:
        value = text
    return check_value(setting, key, value, source)


def parse_edit(profile: Profile, key: str, text: str, source: str = "--set") -> Edit:
    """One edit from a key and a value as text, read against ``profile`` (the page's
    editor calls this per field; `--set` through ``parse_setting``)."""
    setting, field, wheel = parse_key(profile, key, source)
    named = field if wheel is None else wheel_key(profile.wheels[wheel].name, field)
    return Edit(field, parse_value(setting, named, text, source), wheel)


def parse_setting(profile: Profile, setting: str, source: str = "--set") -> Edit:
    """One edit from "KEY=VALUE" text, read against ``profile``."""
    key, has_value, text = setting.partition("=")
    if not has_value or not key.strip():
        raise ProfileError(source, setting, f"expected KEY=VALUE, e.g. {EXAMPLE}")
    return parse_edit(profile, key, text, source)


def edited_profile(profile: Profile, settings: Sequence[str], source: str = "--set") -> Profile:
    """``profile`` with the "KEY=VALUE" settings made in order, each read against the profile
    as the ones before left it (a renamed wheel, a new unit); then the geometry checked."""
    edits = []
    current = profile
    for setting in settings:
        edit = parse_setting(current, setting, source)
        current = apply_edit(current, edit, source)
        edits.append(edit)
    return apply_edits(profile, edits, source)


def edits_as_text(profile: Profile, edits: Sequence[Edit]) -> list[str]:
    """The edits as "KEY=VALUE" settings that ``edited_profile(profile, ...)`` reads back
    (wheels by name as each edit finds them)."""
    texts = []
    for edit in edits:
        texts.append(f"{edit_key(edit, profile)}={show_value(edit.value)}")
        profile = apply_edit(profile, edit)
    return texts
