"""Hostile profiles: each is one ProfileError line naming the file, the key and the bound."""

from __future__ import annotations

import json
import math

import pytest

from receiver.errors import ProfileError, RecordingError
from receiver.formats.profile_limits import LENGTH_LIMITS_M, MAX_PROFILE_BYTES, MAX_WHEELS, PLAIN_LIMITS
from receiver.formats.profile_toml import load_profile, profile_from_table
from receiver.formats.recording import read_recording
from receiver.odometry.robot import METRES_PER_UNIT, Wheel
from tests.conftest import FIXTURES

TEXT = (FIXTURES / "practice-bot.toml").read_text()


def _load(tmp_path, text: str | bytes):
    path = tmp_path / "robot.toml"
    path.write_bytes(text if isinstance(text, bytes) else text.encode())
    return load_profile(path)


def _changed(old: str, new: str, count: int = 1) -> str:
    assert old in TEXT
    return TEXT.replace(old, new, count)


@pytest.mark.parametrize(
    ("old", "new", "key", "problem"),
    [
        ("diameter = 1.378", "diameter = 1e308", r"wheel\[0\]\.diameter",
         r"must be between 0\.00393701 and 393\.701 in \(0\.0001 and 10 m\), got 1e\+308"),
        ("diameter = 1.378", "diameter = 1e-9", r"wheel\[0\]\.diameter", "must be between 0.00393701 and"),
        ("diameter = 1.378", "diameter = inf", r"wheel\[0\]\.diameter", "expected a finite number, got inf"),
        ("diameter = 1.378", "diameter = nan", r"wheel\[0\]\.diameter", "expected a finite number, got nan"),
        ("diameter = 1.378", "diameter = 1" + "0" * 400, r"wheel\[0\]\.diameter",
         "expected a finite number, got an integer of 401 digits"),
        ("x = 0.75", "x = -1e6", r"wheel\[0\]\.x", r"must be between -3937\.01 and 3937\.01 in \(-100 and 100 m\)"),
        ("y = 6.25", "y = 1e300", r"wheel\[0\]\.y", "must be between"),
        ("counts_per_rev = 8192", "counts_per_rev = 1e12", r"wheel\[0\]\.counts_per_rev",
         r"must be between 1 and 1e\+09, got 1e\+12"),
        ("counts_per_rev = 8192", "counts_per_rev = 0.5", r"wheel\[0\]\.counts_per_rev", "must be between 1 and"),
        ("counts_per_rev = 8192", "counts_per_rev = 0", r"wheel\[0\]\.counts_per_rev", "must be positive, got 0"),
        ("gear_ratio = 1.0", "gear_ratio = 1e-300", r"wheel\[0\]\.gear_ratio", r"must be between 0\.0001 and 10000"),
        ("angle = 0.0", "angle = 1e300", r"wheel\[0\]\.angle", "must be between -3600 and 3600 degrees, got 1e"),
        ("angle = 0.0", "angle = -3600.5", r"wheel\[0\]\.angle", "must be between -3600 and 3600 degrees"),
        ('name = "left"', 'name = ""', r"wheel\[0\]\.name", "expected 1-32 printable characters"),
        ('name = "left"', 'name = "le\\nft"', r"wheel\[0\]\.name", r"expected 1-32 printable characters, got 'le\\nft'"),
        ('name = "left"', 'name = "' + "w" * 33 + '"', r"wheel\[0\]\.name", "expected 1-32 printable characters, got 'www"),
        ('name = "left"', "name = [[[[1]]]]", r"wheel\[0\]\.name", "expected str, got an array of 1 items"),
        ("x = 0.75", "x = [1, 2]", r"wheel\[0\]\.x", "expected a number, got an array of 2 items"),
        ("x = 0.75", 'x = "' + "9" * 500 + '"', r"wheel\[0\]\.x", "expected a number, got '9999.*\\.\\.\\.$"),
    ],
)
def test_absurd_values_are_refused_with_the_bound(tmp_path, old, new, key, problem):
    with pytest.raises(ProfileError) as caught:
        _load(tmp_path, _changed(old, new))
    message = str(caught.value)
    assert "\n" not in message and len(message) < 200
    assert caught.match(rf"^{tmp_path / 'robot.toml'}: {key}: {problem}")


def test_lengths_are_bounded_in_the_profiles_own_unit():
    table = json.loads(json.dumps(_practice_table()))
    table["distance_unit"] = "mm"
    for wheel in table["wheel"]:
        wheel["x"], wheel["y"], wheel["diameter"] = wheel["x"] * 25.4, wheel["y"] * 25.4, 35.0
    profile_from_table(table)  # the same robot in mm is fine
    table["wheel"][0]["diameter"] = 20_000.0  # 20 m
    with pytest.raises(ProfileError, match=r"diameter: must be between 0\.1 and 10000 mm \(0\.0001 and 10 m\)"):
        profile_from_table(table, "robot.toml")


def test_at_every_bound_a_wheel_rolls_a_finite_non_zero_distance_per_count():
    # The bounds exist so that the pose engine's numbers stay finite: check the extremes.
    for unit, metres in METRES_PER_UNIT.items():
        low_d, high_d = (bound / metres for bound in LENGTH_LIMITS_M["diameter"])
        low_c, high_c = PLAIN_LIMITS["counts_per_rev"]
        low_g, high_g = PLAIN_LIMITS["gear_ratio"]
        for diameter, counts, gear in ((low_d, high_c, high_g), (high_d, low_c, low_g)):
            travel = Wheel("w", 0.0, 0.0, 0.0, counts, diameter, gear).travel_per_count
            assert math.isfinite(travel) and travel != 0.0, (unit, diameter, counts, gear)


@pytest.mark.parametrize(
    ("text", "problem"),
    [
        ("x = " + "[" * 5000 + "]" * 5000, r"\(file\): arrays or tables nested too deep to read"),
        ("x = " + "{a = " * 5000 + "1" + "}" * 5000, r"\(file\): arrays or tables nested too deep to read"),
        ("x = " + "9" * 5000, r"\(file\): not a usable TOML number: Exceeds the limit \(4300 digits\)"),
        ("name = \n", r"\(file\): not valid TOML: Invalid value \(at line 1, column 8\)$"),
    ],
)
def test_files_the_toml_parser_chokes_on_are_one_line(tmp_path, text, problem):
    with pytest.raises(ProfileError, match=rf"robot\.toml: {problem}"):
        _load(tmp_path, text)


def test_a_file_over_a_mebibyte_is_refused_unread(tmp_path):
    with pytest.raises(ProfileError, match=rf"\(file\): over {MAX_PROFILE_BYTES} bytes"):
        _load(tmp_path, TEXT + "#" * MAX_PROFILE_BYTES)


def test_more_wheels_than_a_robot_has_are_refused():
    table = _practice_table()
    table["wheel"] = table["wheel"] * 6
    with pytest.raises(ProfileError, match=rf"robot\.toml: wheel: at most {MAX_WHEELS} tracking wheels, got 18"):
        profile_from_table(table, "robot.toml")


def test_unknown_keys_that_would_break_the_line_are_shown_escaped():
    with pytest.raises(ProfileError) as caught:
        profile_from_table({**_practice_table(), "a\nb" * 30: 1}, "robot.toml")
    assert "\n" not in str(caught.value) and "unknown key" in str(caught.value)


def test_a_recording_header_with_an_absurd_profile_is_one_line(tmp_path):
    table = _practice_table()
    table["wheel"][0]["diameter"] = 10**400
    header = json.dumps({"recording": 1, "created": "x", "profiles": {"practice-bot": table}})
    message = json.dumps({"v": 1, "robot": "practice-bot", "seq": 0, "t": 0.0, "ticks": [0, 0, 0]})
    path = tmp_path / "rec.jsonl"
    path.write_text(header + "\n" + message + "\n")
    with pytest.raises(RecordingError, match=r"header profile 'practice-bot': wheel\[0\]\.diameter: expected a finite "
                                             r"number, got an integer of 401 digits$"):
        read_recording(path)
    path.write_text(json.dumps({"recording": 10**5000 // 10**4700, "profiles": {}}) + "\n" + message + "\n")
    with pytest.raises(RecordingError, match=r"recording format an integer of 301 digits is not supported"):
        read_recording(path)


def _practice_table() -> dict:
    from receiver.formats.profile_toml import profile_to_table

    return profile_to_table(load_profile(FIXTURES / "practice-bot.toml"))
