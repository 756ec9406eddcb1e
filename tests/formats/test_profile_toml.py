"""Robot profile: loading, validation messages, writing, and the bundled examples."""

from __future__ import annotations

import math

import pytest

from receiver.errors import ProfileError
from receiver.formats.profile_toml import (
    dump_profile,
    load_profile,
    profile_from_table,
    profile_to_table,
    write_profile,
)
from tests.conftest import FIXTURES


def _table(**overrides):
    table = {
        "name": "bench-bot",
        "distance_unit": "in",
        "wheel": [
            {"name": "left", "x": 0.0, "y": 6.0, "angle": 0.0, "counts_per_rev": 8192, "diameter": 1.378},
            {"name": "right", "x": 0.0, "y": -6.0, "angle": 0.0, "counts_per_rev": 8192, "diameter": 1.378},
            {"name": "back", "x": -5.0, "y": 0.0, "angle": 90.0, "counts_per_rev": 8192, "diameter": 1.378},
        ],
    }
    table.update(overrides)
    return table


def test_examples_load_with_declared_conventions(practice_profile, metric_profile):
    assert practice_profile.distance_unit == "in"
    assert practice_profile.reported.heading_unit == "rad"
    assert [w.name for w in practice_profile.wheels] == ["left", "right", "back"]
    assert metric_profile.distance_unit == "mm"
    assert metric_profile.reported.heading_unit == "deg"
    assert metric_profile.reported.heading_positive == "cw"


def test_default_example_offsets_follow_rep103(practice_profile):
    # Common practice: with x forward and y left (REP 103), the right wheel's
    # lateral offset and the back wheel's forward offset are negative.
    wheels = {w.name: w for w in practice_profile.wheels}
    assert wheels["left"].y > 0
    assert wheels["right"].y < 0
    assert wheels["back"].x < 0
    assert wheels["back"].angle == 90.0


def test_defaults_apply_when_optional_keys_absent():
    profile = profile_from_table(_table())
    assert profile.reported.heading_unit == "rad"
    assert profile.reported.heading_positive == "ccw"
    assert profile.reported.y_axis == "left"
    assert profile.reported.heading_zero == "x"
    assert profile.imu_mode == "off"
    assert all(w.gear_ratio == 1.0 and not w.reversed for w in profile.wheels)


@pytest.mark.parametrize("unit", ["in", "mm", "cm", "m"])
@pytest.mark.parametrize("heading_unit", ["rad", "deg"])
@pytest.mark.parametrize("positive", ["ccw", "cw"])
@pytest.mark.parametrize("y_axis", ["left", "right"])
@pytest.mark.parametrize("zero", ["x", "y"])
def test_every_convention_option_round_trips(tmp_path, unit, heading_unit, positive, y_axis, zero):
    table = _table(
        distance_unit=unit,
        reported={"heading_unit": heading_unit, "heading_positive": positive, "y_axis": y_axis, "heading_zero": zero},
    )
    profile = profile_from_table(table)
    path = tmp_path / "p.toml"
    write_profile(profile, path)
    assert load_profile(path) == profile


@pytest.mark.parametrize(
    ("change", "key", "problem"),
    [
        ({"distance_unit": "ft"}, "distance_unit", "unknown value 'ft'"),
        ({"reported": {"heading_unit": "grad"}}, "reported.heading_unit", "unknown value 'grad'"),
        ({"reported": {"heading_positive": "left"}}, "reported.heading_positive", "unknown value"),
        ({"imu": {"mode": "fused"}}, "imu.mode", "unknown value 'fused'"),
        ({"name": "bad name!"}, "name", "expected 1-32 characters"),
        ({"wheel": []}, "wheel", "missing"),
        ({"colour": "red"}, "colour", "unknown key"),
    ],
)
def test_bad_values_name_the_file_key_and_problem(change, key, problem):
    with pytest.raises(ProfileError, match=rf"^robot\.toml: {key}: .*{problem}"):
        profile_from_table(_table(**change), "robot.toml")


@pytest.mark.parametrize(
    ("field", "value", "problem"),
    [
        ("diameter", 0.0, "must be positive"),
        ("diameter", -1.378, "must be positive"),
        ("counts_per_rev", 0, "must be positive"),
        ("gear_ratio", -2.0, "must be positive"),
        ("diameter", "big", "expected a number"),
        ("reversed", "yes", "expected bool"),
        ("diamter", 1.0, "unknown key"),
    ],
)
def test_bad_wheel_fields_are_refused(field, value, problem):
    table = _table()
    table["wheel"][1][field] = value
    with pytest.raises(ProfileError, match=rf"wheel\[1\]\.{field}: {problem}"):
        profile_from_table(table, "robot.toml")


def test_missing_wheel_key_is_named():
    table = _table()
    del table["wheel"][2]["angle"]
    with pytest.raises(ProfileError, match=r"robot\.toml: wheel\[2\]\.angle: missing"):
        profile_from_table(table, "robot.toml")


def test_parallel_wheels_cannot_observe_the_pose():
    table = _table()
    table["wheel"][2]["angle"] = 0.0  # all three roll forward: sideways motion is invisible
    with pytest.raises(ProfileError, match=r"wheel: this geometry cannot observe x, y and heading"):
        profile_from_table(table, "robot.toml")


def test_wheels_at_one_spot_cannot_observe_heading():
    table = _table()
    for wheel in table["wheel"]:
        wheel["x"], wheel["y"] = 0.0, 0.0
    with pytest.raises(ProfileError, match="cannot observe"):
        profile_from_table(table, "robot.toml")


def test_two_wheels_need_the_imu_for_heading():
    table = _table()
    del table["wheel"][1]
    with pytest.raises(ProfileError, match="need at least 3 tracking wheels"):
        profile_from_table(table, "robot.toml")
    table["imu"] = {"mode": "heading"}
    assert profile_from_table(table).uses_imu


def test_file_errors_are_one_line(tmp_path):
    with pytest.raises(ProfileError, match=r"nope\.toml: \(file\): no such file"):
        load_profile(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("name = \n")
    with pytest.raises(ProfileError, match=r"bad\.toml: \(file\): not valid TOML") as info:
        load_profile(bad)
    assert "\n" not in str(info.value)


def test_written_profile_is_toml_with_every_key(practice_profile):
    text = dump_profile(practice_profile)
    assert 'distance_unit = "in"' in text
    assert text.count("[[wheel]]") == 3
    assert profile_from_table(profile_to_table(practice_profile)) == practice_profile


def test_travel_per_count_sign_follows_reversed(metric_profile):
    wheels = {w.name: w for w in metric_profile.wheels}
    assert wheels["right"].reversed and wheels["right"].travel_per_count < 0
    assert math.isclose(abs(wheels["right"].travel_per_count), wheels["left"].travel_per_count)


def test_examples_are_bundled():
    assert (FIXTURES / "practice-bot.toml").exists()
    assert (FIXTURES / "practice-bot-metric.toml").exists()
