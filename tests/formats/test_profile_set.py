"""`--set KEY=VALUE` text: every key kind, wheels by name or index, and one-line errors that
name the key and what it may hold."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from receiver.errors import ProfileError
from receiver.formats.profile_set import edited_profile, edits_as_text, parse_edit, parse_setting
from receiver.formats.profile_toml import load_profile
from receiver.odometry.profile_edit import Edit, apply_edits, edits_between, show_value
from tests.conftest import FIXTURES


@pytest.mark.parametrize(
    "setting, edit",
    [
        ("name=bench-bot", Edit("name", "bench-bot")),
        ("distance_unit=cm", Edit("distance_unit", "cm")),
        ("reported.heading_unit=deg", Edit("reported.heading_unit", "deg")),
        ("reported.heading_positive=cw", Edit("reported.heading_positive", "cw")),
        ("reported.y_axis=right", Edit("reported.y_axis", "right")),
        ("reported.heading_zero=y", Edit("reported.heading_zero", "y")),
        ("imu.mode=heading", Edit("imu.mode", "heading")),
        ("wheel.right.reversed=true", Edit("reversed", True, 1)),
        ("wheel.right.reversed=False", Edit("reversed", False, 1)),
        ("wheel.back.x=-4.1", Edit("x", -4.1, 2)),
        ("wheel.0.x=-4.1", Edit("x", -4.1, 0)),
        ("wheel.left.y=6.55", Edit("y", 6.55, 0)),
        ("wheel.2.angle=88.5", Edit("angle", 88.5, 2)),
        ("wheel.left.diameter=1.4", Edit("diameter", 1.4, 0)),
        ("wheel.left.counts_per_rev=2000", Edit("counts_per_rev", 2000.0, 0)),
        ("wheel.left.gear_ratio=0.5", Edit("gear_ratio", 0.5, 0)),
        ("wheel.back.name=rear", Edit("name", "rear", 2)),
        (" wheel.back.x = 1e-1 ", Edit("x", 0.1, 2)),
    ],
)
def test_each_key_kind_reads(practice_profile, setting, edit):
    assert parse_setting(practice_profile, setting) == edit


@pytest.mark.parametrize(
    "setting, message",
    [
        ("wheel.right.reversed", r"^--set: wheel\.right\.reversed: expected KEY=VALUE, e\.g\. wheel\.right\.reversed=true$"),
        ("=3", r"^--set: =3: expected KEY=VALUE"),
        ("wheel.rigth.x=1", r"^--set: wheel\.rigth\.x: unknown wheel 'rigth', expected one of left, right, back or an index 0-2 \(did you mean right\?\)$"),
        ("wheel.3.x=1", r"^--set: wheel\.3\.x: unknown wheel '3', expected one of left, right, back or an index 0-2$"),
        ("wheel.x=1", r"^--set: wheel\.x: expected wheel\.<name or index>\.<key>, e\.g\. wheel\.right\.x or wheel\.0\.x$"),
        ("wheel.left.radius=1", r"^--set: wheel\.left\.radius: unknown key 'radius' of a wheel, expected one of name, x, y, angle, diameter, counts_per_rev, gear_ratio, reversed$"),
        ("wheel.left.diamter=1", r"\(did you mean diameter\?\)$"),
        ("reported.heading_units=deg", r"^--set: reported\.heading_units: unknown key, expected one of name, distance_unit, .*imu\.mode, wheel\.<name or index>\.<key> \(did you mean reported\.heading_unit\?\)$"),
        ("speed=3", r"^--set: speed: unknown key, expected one of "),
        ("wheel.back.x=far", r"^--set: wheel\.back\.x: expected a number, got 'far'$"),
        ("wheel.back.x=", r"^--set: wheel\.back\.x: expected a number, got ''$"),
        ("wheel.back.x=nan", r"^--set: wheel\.back\.x: expected a finite number, got nan$"),
        ("wheel.back.diameter=-1.0", r"^--set: wheel\.back\.diameter: must be positive, got -1\.0$"),
        ("wheel.back.counts_per_rev=0", r"^--set: wheel\.back\.counts_per_rev: must be positive, got 0\.0$"),
        ("wheel.right.reversed=yes", r"^--set: wheel\.right\.reversed: expected true or false, got 'yes'$"),
        ("reported.heading_unit=degrees", r"^--set: reported\.heading_unit: unknown value 'degrees', expected one of rad, deg$"),
        ("distance_unit=ft", r"^--set: distance_unit: unknown value 'ft', expected one of in, mm, cm, m$"),
        ("imu.mode=on", r"^--set: imu\.mode: unknown value 'on', expected one of off, heading$"),
        ("wheel.back.angle=0", r"^--set: wheel\.back\.angle: this edit leaves wheels that cannot observe x, y and heading"),
    ],
)
def test_bad_settings_are_one_line_naming_the_key(practice_profile, setting, message):
    with pytest.raises(ProfileError, match=message) as caught:
        edited_profile(practice_profile, [setting])
    assert "\n" not in str(caught.value)


def test_settings_apply_in_order(practice_profile):
    # A later setting sees the wheel's new name and the new unit.
    edited = edited_profile(practice_profile, ["wheel.back.name=rear", "wheel.rear.x=-4.1", "distance_unit=mm", "wheel.0.y=160"])
    assert edited.wheels[2].name == "rear" and edited.wheels[2].x == pytest.approx(-4.1 * 25.4)
    assert edited.wheels[0].y == 160.0 and edited.distance_unit == "mm"
    with pytest.raises(ProfileError, match="unknown wheel 'back'"):
        edited_profile(practice_profile, ["wheel.back.name=rear", "wheel.back.x=-4.1"])


def test_a_wheel_called_like_an_index_is_found_by_name_first(practice_profile):
    renamed = edited_profile(practice_profile, ["wheel.back.name=0"])
    assert parse_setting(renamed, "wheel.0.x=1") == Edit("x", 1.0, 2)
    assert parse_setting(renamed, "wheel.1.x=1") == Edit("x", 1.0, 1)


def test_the_page_reads_one_field_at_a_time_with_another_source(practice_profile):
    assert parse_edit(practice_profile, "wheel.left.y", "6.5", source="editor") == Edit("y", 6.5, 0)
    with pytest.raises(ProfileError, match=r"^editor: wheel\.left\.y: expected a number, got 'six'$"):
        parse_edit(practice_profile, "wheel.left.y", "six", source="editor")


def test_edits_as_text_read_back(practice_profile):
    after = edited_profile(practice_profile, ["wheel.back.name=rear", "wheel.rear.x=-4.1", "reported.y_axis=right", "distance_unit=cm"])
    edits = edits_between(practice_profile, after)
    texts = edits_as_text(practice_profile, edits)
    assert texts[:2] == ["distance_unit=cm", "reported.y_axis=right"]
    assert "wheel.back.name=rear" in texts and "wheel.rear.x=-10.414" in texts
    assert edited_profile(practice_profile, texts) == after == apply_edits(practice_profile, edits)
    assert edited_profile(practice_profile, edits_as_text(practice_profile, edits_between(practice_profile, practice_profile))) == practice_profile


@settings(max_examples=200, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_any_number_shown_reads_back_exactly(value):
    # A number the page shows (or edits_as_text writes) is the number `--set` reads.
    profile = load_profile(FIXTURES / "practice-bot.toml")
    assert parse_setting(profile, f"wheel.left.x={show_value(value)}") == Edit("x", value, 0)
