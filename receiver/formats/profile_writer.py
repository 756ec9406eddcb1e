"""Writing a robot profile back as the user wrote it, or a clean commented one.

Owns the writer side of the profile's TOML file: ``write_profile_preserving``
changes only the values that differ in a user's own file (with tomlkit, a
format-preserving TOML library), keeping comments, order, spacing and integer
types; ``profile_text`` writes a clean, commented file for a profile that has
no source file (one from a recording's header). Never validates: the loader
(profile_toml.py) is the boundary; this takes a valid ``Profile``.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import tomlkit
from tomlkit.container import Container
from tomlkit.items import AoT, Item, Table

from receiver.errors import ProfileError
from receiver.odometry.robot import Profile, Reported, Wheel

# Lengths and diameters from a fit are good to a few parts in a million:
# more digits would only show noise.
SIGNIFICANT_DIGITS = 6
_WHEEL_DEFAULTS = {"gear_ratio": 1.0, "reversed": False}
_REPORTED_DEFAULTS = {f: getattr(Reported(), f) for f in ("heading_unit", "heading_positive", "y_axis", "heading_zero")}
_WHEEL_KEYS = ("name", "x", "y", "angle", "counts_per_rev", "diameter", "gear_ratio", "reversed")


def _number(value: float, like: Any) -> int | float:
    """``value`` as the file wrote its old value: an integer stays one when the new value is whole."""
    if isinstance(like, int) and not isinstance(like, bool) and float(value).is_integer():
        return int(value)
    if float(value).is_integer() and abs(value) < 1e15:
        return float(value)
    return float(f"{value:.{SIGNIFICANT_DIGITS}g}")


def _same(old: Any, new: Any) -> bool:
    if isinstance(new, bool) or isinstance(old, bool) or isinstance(new, str):
        return old == new
    return math.isclose(float(old), float(new), rel_tol=1e-12, abs_tol=1e-12)


def _item(table: Table | Container, key: str) -> Item:
    """The item (with its comment and spacing) under ``key``."""
    return (table if isinstance(table, Container) else table.value).item(key)


def _set(table: Table | Container, key: str, value: Any) -> None:
    """Set ``key`` to ``value`` in place, keeping the old item's comment and its column."""
    if key not in table:
        table[key] = value
        return
    old = _item(table, key)
    old_text = old.as_string()
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        value = _number(value, old.unwrap())
    new: Item = tomlkit.item(value)
    new.trivia.indent = old.trivia.indent
    new.trivia.comment = old.trivia.comment
    new.trivia.trail = old.trivia.trail
    # Keep a trailing comment in its column where the new value leaves room.
    room = len(old.trivia.comment_ws) + len(old_text) - len(new.as_string())
    new.trivia.comment_ws = " " * max(room, 1) if old.trivia.comment else old.trivia.comment_ws
    table[key] = new


def _update(table: Table | Container, key: str, value: Any, default: Any) -> None:
    """Write ``value`` where it differs from what the file says (or its default when absent)."""
    current = _item(table, key).unwrap() if key in table else default
    if current is None or not _same(current, value):
        _set(table, key, value)


def _split_trailing(body: list) -> tuple[list, list]:
    """(content, trailing blank lines) of a table's body."""
    end = len(body)
    while end and body[end - 1][0] is None and type(body[end - 1][1]).__name__ == "Whitespace":
        end -= 1
    return body[:end], body[end:]


def _reorder(aot: AoT, order: list[int]) -> AoT:
    """The array of tables in a new order; each table keeps its comments, each slot its blank lines."""
    tables = list(aot.body)
    rebuilt = []
    for slot, source in enumerate(order):
        content, _ = _split_trailing(tables[source].value.body)
        _, trailing = _split_trailing(tables[slot].value.body)
        container = Container(True)
        for key, item in content + trailing:
            container.append(key, item)
        rebuilt.append(Table(container, tables[source].trivia, is_aot_element=True))
    return AoT(rebuilt, parsed=True)


def _wheel_values(wheel: Wheel) -> dict[str, Any]:
    return {key: getattr(wheel, key) for key in _WHEEL_KEYS}


def write_profile_preserving(source: str | Path, profile: Profile) -> str:
    """The profile's TOML text written into ``source`` (TOML text, or a Path to read), changing
    only the values that differ from it.

    Comments, key order, blank lines and integer types stay as the user wrote
    them; wheels are matched by name (a profile that reorders them moves their
    tables, comments included). Raises ProfileError when the source is not
    TOML or lacks a wheel the profile has.
    """
    where = str(source) if isinstance(source, Path) else "<profile>"
    text = source.read_text(encoding="utf-8") if isinstance(source, Path) else source
    try:
        doc = tomlkit.parse(text)
    except tomlkit.exceptions.ParseError as exc:
        raise ProfileError(where, "(file)", f"not valid TOML: {exc}") from exc
    _update(doc, "name", profile.name, None)
    _update(doc, "distance_unit", profile.distance_unit, "in")
    reported = profile.reported
    wanted = {**{k: getattr(reported, k) for k in _REPORTED_DEFAULTS}}
    if reported.integration is not None:
        wanted["integration"] = reported.integration
    if "reported" not in doc and any(v != _REPORTED_DEFAULTS.get(k) for k, v in wanted.items()):
        doc["reported"] = tomlkit.table()
    if "reported" in doc:
        for key, value in wanted.items():
            _update(doc["reported"], key, value, _REPORTED_DEFAULTS.get(key))
    wheels = doc.get("wheel")
    names = [table.get("name") for table in wheels] if isinstance(wheels, AoT) else []
    missing = [w.name for w in profile.wheels if w.name not in names]
    if missing or len(names) != len(profile.wheels):
        raise ProfileError(where, "wheel", f"the file's wheels {names} are not the profile's {[w.name for w in profile.wheels]}")
    order = [names.index(w.name) for w in profile.wheels]
    if order != list(range(len(order))):
        doc["wheel"] = wheels = _reorder(wheels, order)
    for table, wheel in zip(wheels, profile.wheels):
        for key, value in _wheel_values(wheel).items():
            _update(table, key, value, _WHEEL_DEFAULTS.get(key))
    if "imu" in doc or profile.imu_mode != "off":
        if "imu" not in doc:
            doc["imu"] = tomlkit.table()
        _update(doc["imu"], "mode", profile.imu_mode, "off")
    return tomlkit.dumps(doc)


_REPORTED_COMMENTS = {
    "heading_unit": "rad | deg",
    "heading_positive": "ccw | cw: heading grows turning counter-clockwise / clockwise, seen from above",
    "y_axis": "left | right: where +y points, seen from above with +x ahead",
    "heading_zero": "x | y: the axis the robot faces at heading 0",
    "integration": "euler | midpoint | arc: how the robot code integrates its pose",
}
_WHEEL_COMMENTS = {
    "name": "one [[wheel]] per encoder, in the order of the messages' ticks",
    "x": "forward offset of the contact point from the tracked centre",
    "y": "leftward offset (negative: right of centre)",
    "angle": "rolling direction, degrees counter-clockwise from forward (90: rolls sideways)",
    "counts_per_rev": "encoder counts per encoder turn",
    "diameter": "wheel diameter",
    "gear_ratio": "encoder turns per wheel turn",
    "reversed": "true: counts fall when the wheel rolls along its rolling direction",
}
COMMENT_COLUMN = 24  # where the comments after values start


def _commented(table: Any, key: str, value: Any, comment: str = "") -> None:
    """Add ``key = value`` to a table, with ``comment`` after it in COMMENT_COLUMN."""
    item = tomlkit.item(value)
    if comment:
        item.comment(comment)
        item.trivia.comment_ws = " " * max(COMMENT_COLUMN - len(f"{key} = {item.as_string()}"), 1)
    table.add(key, item)


def _plain(value: Any, key: str) -> Any:
    if isinstance(value, float):
        return _number(value, int(value) if key == "counts_per_rev" else value)
    return value


def profile_text(profile: Profile, header: str = "", wheel_notes: dict[str, str] | None = None) -> str:
    """A clean, commented TOML file for a profile with no source file (from a recording's header).

    ``header`` opens the file as comment lines (without "# "); ``wheel_notes``
    puts comment lines above a wheel's table, by wheel name. The first wheel
    says what each key means. Whole numbers of counts stay integers.
    """
    unit = profile.distance_unit
    doc = tomlkit.document()
    for line in (header or f"Robot profile of {profile.name}, written by podwatch.").splitlines():
        doc.add(tomlkit.comment(line))
    _commented(doc, "name", profile.name, 'the "robot" field of its messages')
    _commented(doc, "distance_unit", unit, "in | mm | cm | m: every length here and the robot's reported x, y")
    doc.add(tomlkit.nl())
    reported = tomlkit.table()
    reported.comment("how the robot expresses its own pose")
    for key, comment in _REPORTED_COMMENTS.items():
        value = getattr(profile.reported, key)
        if value is not None:
            _commented(reported, key, value, comment)
    doc.add("reported", reported)
    wheels = tomlkit.aot()
    for number, wheel in enumerate(profile.wheels):
        table = tomlkit.table()
        for line in (wheel_notes or {}).get(wheel.name, "").splitlines():
            table.add(tomlkit.comment(line))
        for key in _WHEEL_KEYS:
            comment = ""
            if number == 0:
                comment = _WHEEL_COMMENTS[key] + (f", {unit}" if key in ("x", "y", "diameter") else "")
            _commented(table, key, _plain(getattr(wheel, key), key), comment)
        wheels.append(table)
    doc.add("wheel", wheels)
    imu = tomlkit.table()
    _commented(imu, "mode", profile.imu_mode, "off | heading: the heading from the messages' imu value")
    doc.add("imu", imu)
    return tomlkit.dumps(doc)


def write_profile_file(path: str | Path, profile: Profile, source: str | Path | None = None) -> None:
    """Write ``profile`` to ``path``: into the user's ``source`` file's text when given, else clean."""
    text = write_profile_preserving(Path(source), profile) if source is not None else profile_text(profile)
    Path(path).write_text(text, encoding="utf-8")
