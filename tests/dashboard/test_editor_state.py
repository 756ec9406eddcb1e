"""The profile editor's state (dashboard/editor_state.py): edits applied, compacted to the
`--set` options that repeat them, undone and reset, and kept in the page's store (the
download's text: tests/dashboard/test_editor_panel.py)."""

from __future__ import annotations

import pytest

from dashboard.editor_state import (
    UNDO_STEPS,
    EditorState,
    field_keys,
    field_text,
    field_values,
    profile_signature,
)
from receiver.cli.common import edit_profiles
from receiver.errors import ProfileError
from receiver.odometry.profile_edit import PROFILE_SETTINGS, WHEEL_SETTINGS


@pytest.fixture
def fresh():
    return EditorState("practice-bot")


def test_a_field_edit_is_the_set_option_that_repeats_it(fresh, practice_profile):
    state = fresh.with_field(practice_profile, "wheel.1.reversed", "true")
    assert state.now.edits == ("wheel.right.reversed=true",)
    assert state.options() == "--set wheel.right.reversed=true"
    assert state.profile(practice_profile).wheels[1].reversed
    # The command line reads the same options into the same profile.
    assert edit_profiles({"practice-bot": practice_profile}, list(state.now.edits))["practice-bot"] == \
        state.profile(practice_profile)


def test_edits_of_one_value_keep_only_the_last_and_a_value_put_back_is_no_edit(fresh, practice_profile):
    state = fresh.with_field(practice_profile, "wheel.0.y", "6.3").with_field(practice_profile, "wheel.0.y", "6.35")
    assert state.now.edits == ("wheel.left.y=6.35",)
    assert len(state.history) == 2
    back = state.with_field(practice_profile, "wheel.0.y", "6.25")
    assert back.now.edits == () and not back.edited
    # A value equal to the current one is not a step of its own.
    assert state.with_field(practice_profile, "wheel.0.y", "6.350") is state


def test_undo_steps_back_one_change_at_a_time_and_reset_is_undoable(fresh, practice_profile):
    one = fresh.with_field(practice_profile, "wheel.1.reversed", "true")
    two = one.with_field(practice_profile, "wheel.2.x", "-5.7").with_method("midpoint")
    assert two.options() == "--set wheel.right.reversed=true --set wheel.back.x=-5.7 --method midpoint"
    assert two.undo().now == one.with_field(practice_profile, "wheel.2.x", "-5.7").now
    assert two.undo().undo().now == one.now
    assert two.undo().undo().undo().now == fresh.now
    assert fresh.undo() == fresh  # nothing to undo
    reset = two.reset()
    assert reset.now.edits == () and reset.now.method == "arc" and reset.profile(practice_profile) == practice_profile
    assert reset.undo().now == two.now


def test_undo_history_is_bounded(fresh, practice_profile):
    state = fresh
    for k in range(UNDO_STEPS + 20):
        state = state.with_field(practice_profile, "wheel.0.y", f"{6.0 + k / 100:.2f}")
    assert len(state.history) == UNDO_STEPS


@pytest.mark.parametrize(
    "key, text, message",
    [
        ("wheel.2.diameter", "-1", r"wheel\.back\.diameter: must be positive, got -1\.0"),
        ("wheel.0.reversed", "yes", r"wheel\.left\.reversed: expected true or false, got 'yes'"),
        ("wheel.0.x", "", r"wheel\.left\.x: expected a number, got ''"),
        ("reported.heading_unit", "grad", r"unknown value 'grad', expected one of rad, deg"),
        # All three wheels would roll forward: the pose cannot be observed (the message of --set).
        ("wheel.2.angle", "0", r"wheel\.back\.angle: this edit leaves wheels that cannot observe x, y and heading"),
        ("wheel.1.name", "left", r"wheel names must be unique"),
    ],
)
def test_a_refused_edit_names_its_key_and_changes_nothing(fresh, practice_profile, key, text, message):
    with pytest.raises(ProfileError, match=message):
        fresh.with_field(practice_profile, key, text)


def test_a_renamed_wheel_keeps_its_fields_and_the_options_follow_the_new_name(fresh, practice_profile):
    state = fresh.with_field(practice_profile, "wheel.1.name", "starboard").with_field(practice_profile, "wheel.1.x", "0.5")
    assert state.options() == "--set wheel.right.name=starboard --set wheel.starboard.x=0.5"
    edited = state.profile(practice_profile)
    assert edited.wheels[1].name == "starboard" and edited.wheels[1].x == 0.5
    assert field_keys(edited) == field_keys(practice_profile)  # fields by index: the form stays


def test_a_unit_edit_converts_every_length_shown(fresh, practice_profile):
    state = fresh.with_field(practice_profile, "distance_unit", "mm")
    values = field_values(state.profile(practice_profile))
    assert values["wheel.0.y"] == pytest.approx(6.25 * 25.4)  # 1 in = 25.4 mm exactly (SI definition)
    assert values["wheel.2.diameter"] == pytest.approx(1.378 * 25.4)
    assert state.options() == "--set distance_unit=mm"


def test_a_suggested_profile_arrives_as_one_undoable_step(fresh, practice_profile):
    corrected = fresh.with_field(practice_profile, "wheel.1.reversed", "true").with_field(
        practice_profile, "wheel.0.y", "6.4").profile(practice_profile)
    state = fresh.with_field(practice_profile, "wheel.2.x", "-6").with_profile(practice_profile, corrected)
    assert state.profile(practice_profile) == corrected
    assert state.options() == "--set wheel.left.y=6.4 --set wheel.right.reversed=true"
    assert state.undo().options() == "--set wheel.back.x=-6"


def test_the_store_round_trips_and_a_strange_one_starts_afresh(fresh, practice_profile):
    state = fresh.with_field(practice_profile, "wheel.1.reversed", "true").with_method("euler")
    assert EditorState.from_store(state.to_store(), "practice-bot") == state
    assert EditorState.from_store(state.to_store(), "other-bot") == EditorState("other-bot")
    for strange in (None, [], {"robot": "practice-bot", "now": {"edits": "x", "method": 3}},
                    {"robot": "practice-bot", "now": {"edits": [], "method": "rk4"}}, {"robot": "practice-bot", "now": 5}):
        assert EditorState.from_store(strange, "practice-bot") == fresh
    with pytest.raises(ValueError):
        fresh.with_method("rk4")


def test_the_form_has_a_field_for_every_setting(practice_profile):
    keys = field_keys(practice_profile)
    assert keys[: len(PROFILE_SETTINGS)] == list(PROFILE_SETTINGS)
    assert len(keys) == len(PROFILE_SETTINGS) + 3 * len(WHEEL_SETTINGS)
    values = field_values(practice_profile)
    assert values["wheel.1.y"] == -6.25 and values["reported.y_axis"] == "left" and values["wheel.2.reversed"] is False
    assert [field_text(v) for v in (8192.0, 8192, 1.378, True, False, "deg", None)] == \
        ["8192", "8192", "1.378", "true", "false", "deg", ""]


def test_the_signature_follows_every_value(fresh, practice_profile):
    edited = fresh.with_field(practice_profile, "wheel.2.gear_ratio", "1.001").profile(practice_profile)
    assert profile_signature(edited) != profile_signature(practice_profile)
    assert profile_signature(practice_profile) == profile_signature(fresh.profile(practice_profile))
