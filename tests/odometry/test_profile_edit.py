"""Typed profile edits: every key kind changes what it names and nothing else; bad values
and unobservable geometry are one ProfileError naming the key."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from receiver.errors import ProfileError
from receiver.odometry.columns import Columns
from receiver.odometry.profile_edit import (
    PROFILE_SETTINGS,
    WHEEL_SETTINGS,
    Edit,
    apply_edit,
    apply_edits,
    differing_values,
    edit_key,
    edits_between,
    in_unit,
    profile_values,
    show_value,
)
from receiver.odometry.recompute import Tracker
from receiver.odometry.robot import Profile, Wheel


@pytest.mark.parametrize(
    "edit, read",
    [
        (Edit("name", "other-bot"), lambda p: p.name),
        (Edit("imu.mode", "heading"), lambda p: p.imu_mode),
        (Edit("reported.heading_unit", "deg"), lambda p: p.reported.heading_unit),
        (Edit("reported.heading_positive", "cw"), lambda p: p.reported.heading_positive),
        (Edit("reported.y_axis", "right"), lambda p: p.reported.y_axis),
        (Edit("reported.heading_zero", "y"), lambda p: p.reported.heading_zero),
        (Edit("x", -4.1, 2), lambda p: p.wheels[2].x),
        (Edit("y", 6.55, 0), lambda p: p.wheels[0].y),
        (Edit("angle", 85.0, 2), lambda p: p.wheels[2].angle),
        (Edit("diameter", 1.89, 1), lambda p: p.wheels[1].diameter),
        (Edit("counts_per_rev", 2000.0, 1), lambda p: p.wheels[1].counts_per_rev),
        (Edit("gear_ratio", 2.0, 1), lambda p: p.wheels[1].gear_ratio),
        (Edit("reversed", True, 1), lambda p: p.wheels[1].reversed),
        (Edit("name", "rear", 2), lambda p: p.wheels[2].name),
    ],
    ids=lambda v: v.key + (f"[{v.wheel}]" if v.wheel is not None else "") if isinstance(v, Edit) else "",
)
def test_each_key_changes_its_value_and_nothing_else(practice_profile, edit, read):
    edited = apply_edits(practice_profile, [edit])
    assert read(edited) == edit.value
    changed = {k for k, v in profile_values(edited).items() if profile_values(practice_profile).get(k) != v}
    renamed = edit.key == "name" and edit.wheel is not None
    assert len(changed) == (7 if renamed else 1)  # a renamed wheel's seven keys change names


def test_every_setting_is_covered(practice_profile):
    # profile_values lists every key of the schema once, so a new field can't be left out.
    keys = set(profile_values(practice_profile))
    assert {k for k in PROFILE_SETTINGS} <= keys
    assert {f"wheel.back.{k}" for k in WHEEL_SETTINGS if k != "name"} <= keys


def test_an_int_is_a_number(practice_profile):
    assert apply_edits(practice_profile, [Edit("counts_per_rev", 2000, 0)]).wheels[0].counts_per_rev == 2000.0


@pytest.mark.parametrize(
    "edit, message",
    [
        (Edit("radius", 1.0, 0), r"^--set: wheel\.left\.radius: unknown key 'radius' of a wheel, expected one of name, x, y"),
        (Edit("x", 1.0, 5), r"^--set: wheel\.5\.x: no wheel 5: the profile has wheels 0-2$"),
        (Edit("colour", "red"), r"^--set: colour: unknown key, expected one of name, distance_unit"),
        (Edit("x", "far", 0), r"^--set: wheel\.left\.x: expected a number, got 'far'$"),
        (Edit("x", True, 0), r"^--set: wheel\.left\.x: expected a number, got True$"),
        (Edit("x", math.inf, 0), r"^--set: wheel\.left\.x: expected a finite number, got inf$"),
        (Edit("diameter", 0.0, 0), r"^--set: wheel\.left\.diameter: must be positive, got 0\.0$"),
        (Edit("gear_ratio", -1, 0), r"^--set: wheel\.left\.gear_ratio: must be positive, got -1\.0$"),
        (Edit("reversed", "yes", 0), r"^--set: wheel\.left\.reversed: expected true or false, got 'yes'$"),
        (Edit("reported.heading_unit", "grad"), r"^--set: reported\.heading_unit: unknown value 'grad', expected one of rad, deg$"),
        (Edit("distance_unit", "ft"), r"^--set: distance_unit: unknown value 'ft', expected one of in, mm, cm, m$"),
        (Edit("imu.mode", "fused"), r"^--set: imu\.mode: unknown value 'fused', expected one of off, heading$"),
        (Edit("name", "practice bot"), r"^--set: name: expected 1-32 characters of A-Z a-z 0-9 _ \. -, got 'practice bot'$"),
        (Edit("name", "right", 0), r"^--set: wheel\.left\.name: wheel names must be unique, and 'right' is taken$"),
        (Edit("name", " ", 0), r"^--set: wheel\.left\.name: a wheel's name must not be empty$"),
    ],
)
def test_bad_edits_are_one_line_naming_the_key(practice_profile, edit, message):
    with pytest.raises(ProfileError, match=message) as caught:
        apply_edits(practice_profile, [edit])
    assert "\n" not in str(caught.value)


def test_an_edit_that_leaves_the_geometry_unobservable_names_its_keys(practice_profile):
    # The back wheel turned to roll forward: three parallel wheels cannot see sideways motion.
    with pytest.raises(ProfileError, match=r"^--set: wheel\.back\.angle: this edit leaves wheels that cannot observe x, y"):
        apply_edits(practice_profile, [Edit("angle", 0.0, 2)])
    # Two edits, each harmless alone at another spot, together put both forward wheels on one line.
    with pytest.raises(ProfileError, match=r"^--set: wheel\.left\.y, wheel\.right\.y: this edit leaves"):
        apply_edits(practice_profile, [Edit("y", 0.0, 0), Edit("y", 0.0, 1)])
    # Only the final geometry counts: a layout passed through on the way is fine.
    assert apply_edits(practice_profile, [Edit("angle", 0.0, 2), Edit("angle", 90.0, 2)]) == practice_profile


def test_turning_the_imu_off_needs_three_wheels(practice_profile):
    two_wheels = replace(practice_profile, wheels=practice_profile.wheels[1:], imu_mode="heading")
    with pytest.raises(ProfileError, match=r"^--set: imu\.mode: without the IMU the pose needs at least 3 tracking wheels"):
        apply_edits(two_wheels, [Edit("imu.mode", "off")])


def test_a_wheel_edit_follows_its_rename(practice_profile):
    edits = [Edit("name", "rear", 2), Edit("x", -4.1, 2)]
    edited = apply_edits(practice_profile, edits)
    assert edited.wheels[2] == replace(practice_profile.wheels[2], name="rear", x=-4.1)
    assert edit_key(edits[1], edited) == "wheel.rear.x"


def test_a_unit_change_converts_every_length(practice_profile):
    # 1 in = 25.4 mm exactly (SI; the international inch of 1959).
    mm = apply_edits(practice_profile, [Edit("distance_unit", "mm")])
    assert mm.distance_unit == "mm"
    assert [w.y for w in mm.wheels] == [158.75, -158.75, 0.0]
    assert mm.wheels[0].x == 19.05  # rounded to 12 digits: not 19.049999999999997
    assert mm.wheels[2].diameter == pytest.approx(1.378 * 25.4, rel=1e-12)
    assert [w.counts_per_rev for w in mm.wheels] == [8192.0] * 3  # not a length
    assert in_unit(mm, "in") == practice_profile


def test_a_unit_change_keeps_the_robot_the_same(practice_profile):
    # The same counts give the same path, in the new unit: the robot did not shrink.
    rng = np.random.default_rng(3)
    n = 400
    ticks = np.cumsum(rng.integers(-40, 120, (n, 3)), axis=0)
    columns = Columns(
        seq=np.arange(n), t=np.arange(n) * 0.01, ticks=ticks, pose=np.full((n, 3), np.nan),
        imu=np.full(n, np.nan), loop=np.full(n, 0.01), reset=np.zeros(n, dtype=bool),
    )
    inches = Tracker(practice_profile).feed(columns).pose
    metres = Tracker(apply_edits(practice_profile, [Edit("distance_unit", "m")])).feed(columns).pose
    np.testing.assert_allclose(metres[:, :2], inches[:, :2] * 0.0254, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(metres[:, 2], inches[:, 2], rtol=1e-9, atol=1e-12)


def test_apply_edit_alone_leaves_the_geometry_to_the_caller(practice_profile):
    assert apply_edit(practice_profile, Edit("angle", 0.0, 2)).wheels[2].angle == 0.0


def test_differing_values_and_edits_between(practice_profile):
    other = apply_edits(practice_profile, [Edit("y", 6.45, 0), Edit("y", -6.45, 1), Edit("reported.y_axis", "right")])
    assert differing_values([practice_profile, other, practice_profile]) == {
        "reported.y_axis": ["left", "right", "left"],
        "wheel.left.y": [6.25, 6.45, 6.25],
        "wheel.right.y": [-6.25, -6.45, -6.25],
    }
    assert differing_values([practice_profile, practice_profile]) == {}
    renamed = apply_edits(practice_profile, [Edit("name", "rear", 2)])
    assert differing_values([practice_profile, renamed])["wheel.back.x"] == [-5.5, None]
    for after in (other, renamed, apply_edits(other, [Edit("distance_unit", "cm"), Edit("x", 3.0, 1)])):
        assert apply_edits(practice_profile, edits_between(practice_profile, after)) == after


def test_show_value_reads_back():
    assert [show_value(v) for v in (True, False, 8192.0, -6.45, 0.1 + 0.2, "deg")] == [
        "true", "false", "8192", "-6.45", "0.30000000000000004", "deg"
    ]


def test_two_wheel_imu_profile_edits():
    wheels = (Wheel("forward", 0.0, -1.0, 0.0, 2000, 1.89), Wheel("side", -3.0, 0.0, 90.0, 2000, 1.89))
    profile = Profile("imu-bot", "in", wheels, imu_mode="heading")
    assert apply_edits(profile, [Edit("x", -4.0, 1)]).wheels[1].x == -4.0
    with pytest.raises(ProfileError, match="cannot observe x and y"):
        apply_edits(profile, [Edit("angle", 0.0, 1)])


def test_the_robots_integration_can_be_declared_by_an_edit(practice_profile):
    # Absent from the profile (the checks find it from the reports), it becomes declared;
    # edits_between names it, and never an undeclaring edit, which `--set` cannot spell.
    assert practice_profile.reported.integration is None
    declared = apply_edits(practice_profile, [Edit("reported.integration", "euler")])
    assert declared.reported.integration == "euler"
    assert edits_between(practice_profile, declared) == [Edit("reported.integration", "euler")]
    assert edits_between(declared, practice_profile) == []
    with pytest.raises(ProfileError, match=r"reported\.integration: unknown value 'rk4', expected one of euler, midpoint, arc"):
        apply_edits(practice_profile, [Edit("reported.integration", "rk4")])
