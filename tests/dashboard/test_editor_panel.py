"""The profile editor panel (dashboard/editor_panel.py, editor_draw.py, editor_figures.py):
the edited recompute drawn beside the loaded one, the figures' content, the triggers of
one call in order, and edits that stay in the tab that made them."""

from __future__ import annotations

import numpy as np
import pytest
from dash import no_update

from dashboard import ids
from dashboard.app import create_app
from dashboard.editor_draw import draw_editor, session_time
from dashboard.editor_figures import (
    EDITED_NAME,
    HEADING_EDITED,
    HEADING_LOADED,
    LOADED_NAME,
    POSITION_EDITED,
    POSITION_LOADED,
    TRACK_EDITED,
    TRACK_LOADED,
    TRACK_REPORTED,
)
from dashboard.editor_panel import command_line, field_updates, take_triggers
from dashboard.editor_state import EditorState, field_values, profile_signature
from dashboard.settings import Settings
from dashboard.sources import LiveSource, ReplaySource
from dashboard.tabs import Station
from dashboard.workbench_session import LoadedResults, session_of
from receiver.formats.profile_toml import profile_to_table
from receiver.formats.recording import read_recording
from receiver.live.hub import Hub
from receiver.odometry.recompute import Tracker
from tests.conftest import FIXTURES
from tests.dashboard.test_callbacks import call

REVERSED = FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz"
SETTINGS = Settings()


@pytest.fixture
def replay_tab():
    """A station without a live receiver whose tabs each replay the reversed-encoder recording."""
    station = Station(recording=read_recording(REVERSED), make_replay=lambda data: ReplaySource(data, clock=lambda: 0.0))
    return station, station.tab("tab-a")


def edited(state: EditorState, key: str, text: str, profile) -> EditorState:
    return state.with_field(profile, key, text)


def test_flipping_the_wheel_the_robot_code_reverses_brings_the_disagreement_to_zero(replay_tab):
    _, view = replay_tab
    session = session_of(view, "practice-bot", 60.0)
    assert session.recording is not None and len(session.columns) == 977  # the whole recording, whatever the position
    loaded = LoadedResults().of(session)
    state = edited(EditorState("practice-bot"), "wheel.1.reversed", "true", session.loaded)
    draw = draw_editor(session, loaded, state.profile(session.loaded), "arc", SETTINGS.field_size_m, SETTINGS.points)
    # `podwatch recompute` of this recording: worst 61.239 in; with the wheel flipped the two agree.
    assert draw.loaded.worst_position == pytest.approx(61.239, abs=1e-3)
    assert draw.edited.worst_position < 1e-3 and abs(draw.edited.final_heading_deg) < 1e-3
    names = [trace["name"] for trace in draw.track["data"]]
    assert names[TRACK_LOADED] == LOADED_NAME and names[TRACK_EDITED] == EDITED_NAME
    # Every row drawn (under the point budget): the edited path is the edited recompute, rounded to 0.001.
    expected = Tracker(state.profile(session.loaded)).feed(session.columns)
    track = draw.track["data"]
    assert np.allclose(track[TRACK_EDITED]["x"], expected.pose[:, 0], atol=5e-4)
    assert np.allclose(track[TRACK_EDITED]["y"], expected.pose[:, 1], atol=5e-4)
    assert np.allclose(track[TRACK_LOADED]["x"], loaded.pose[:, 0], atol=5e-4)
    reported = np.array(track[TRACK_REPORTED]["x"], dtype=float)
    assert np.allclose(reported, expected.reported[:, 0], atol=5e-4, equal_nan=True)
    errors = draw.disagreement["data"]
    assert np.allclose(errors[POSITION_LOADED]["y"], loaded.position_error, atol=5e-4)
    assert max(errors[POSITION_EDITED]["y"]) < 1e-3
    assert errors[HEADING_EDITED]["yaxis"] == "y2"
    # The loaded profile's heading error passes +-180 degrees again and again: one line, as numpy
    # unwraps it (no re-anchor in this recording but its first sample).
    heading = np.array(errors[HEADING_LOADED]["y"], dtype=float)
    assert np.abs(np.diff(heading)).max() < 180.0 and heading.max() - heading.min() > 4 * 360.0
    assert np.allclose(heading, np.degrees(np.unwrap(loaded.heading_error)), atol=5e-4)
    assert errors[POSITION_LOADED]["x"][-1] == pytest.approx(float(session_time(loaded)[-1]), abs=1e-3)
    assert draw.disagreement["layout"]["yaxis"]["title"]["text"] == "position (in)"


def test_unedited_the_edited_run_is_the_loaded_one_and_a_method_is_an_edit(replay_tab):
    _, view = replay_tab
    session = session_of(view, "practice-bot", 60.0)
    loaded = LoadedResults().of(session)
    same = draw_editor(session, loaded, session.loaded, "arc", SETTINGS.field_size_m, 1000)
    assert same.unchanged and same.edited == same.loaded
    euler = draw_editor(session, loaded, session.loaded, "euler", SETTINGS.field_size_m, 1000)
    assert not euler.unchanged
    assert euler.edited.final_position != pytest.approx(euler.loaded.final_position, abs=1e-6)


def test_a_unit_edit_is_drawn_on_the_loaded_units_scale(replay_tab):
    _, view = replay_tab
    session = session_of(view, "practice-bot", 60.0)
    loaded = LoadedResults().of(session)
    # "The robot reports millimetres": the edited recompute is the same robot, its lengths converted.
    state = edited(EditorState("practice-bot"), "distance_unit", "mm", session.loaded)
    draw = draw_editor(session, loaded, state.profile(session.loaded), "arc", SETTINGS.field_size_m, 1000)
    assert draw.unit == "in" and draw.edited.profile.distance_unit == "mm"
    track = draw.track["data"]
    # The same counts move the robot alike, whichever unit the profile is declared in (to rounding);
    # the start differs, since the first sample anchors at the reported pose, now read in millimetres.
    moved = [np.array(track[k]["x"]) - track[k]["x"][0] for k in (TRACK_EDITED, TRACK_LOADED)]
    assert np.allclose(*moved, atol=2e-3)
    assert track[TRACK_EDITED]["x"][0] == pytest.approx(track[TRACK_LOADED]["x"][0] / 25.4, abs=1e-3)


def test_triggers_apply_in_the_order_the_page_saw_them(practice_profile):
    state = EditorState("practice-bot")
    field = {"type": ids.EDITOR_FIELD, "key": "wheel.1.reversed"}
    values = {"wheel.1.reversed": "true", "wheel.2.diameter": "1.378"}
    after, message, refresh = take_triggers(state, practice_profile, [field], values, "arc", None)
    assert after.options() == "--set wheel.right.reversed=true" and message == "" and not refresh
    undone, _, refresh = take_triggers(after, practice_profile, [ids.EDITOR_UNDO], values, "arc", None)
    assert undone.now.edits == () and refresh
    # A refused value leaves the state and says why, naming the key.
    bad, message, _ = take_triggers(after, practice_profile, [{"type": ids.EDITOR_FIELD, "key": "wheel.2.diameter"}],
                                    {"wheel.2.diameter": "-2"}, "arc", None)
    assert bad == after and message == "not changed: wheel.back.diameter: must be positive, got -2.0"
    # The diagnosis's suggestion for this profile, then a reset, in one call.
    corrected = after.profile(practice_profile)
    suggestion = {"robot": "practice-bot", "loaded": profile_signature(practice_profile),
                  "corrected": profile_to_table(corrected)}
    tried, message, refresh = take_triggers(state, practice_profile, [ids.DIAGNOSE_TRY], {}, "arc", suggestion)
    assert tried.profile(practice_profile) == corrected and refresh
    reset, _, _ = take_triggers(state, practice_profile, [ids.DIAGNOSE_TRY, ids.EDITOR_RESET], {}, "arc", suggestion)
    assert reset.now.edits == () and reset.undo().profile(practice_profile) == corrected
    stale = {**suggestion, "loaded": "another"}
    kept, message, _ = take_triggers(state, practice_profile, [ids.DIAGNOSE_TRY], {}, "arc", stale)
    assert kept == state and "another profile" in message


def test_fields_are_written_back_except_the_one_being_typed_into(practice_profile):
    keys = ["distance_unit", "wheel.0.y", "wheel.1.y"]
    state = EditorState("practice-bot").with_field(practice_profile, "distance_unit", "mm")
    values = {k: v for k, v in field_values(state.profile(practice_profile)).items() if k in keys}
    shown = {"distance_unit": "mm", "wheel.0.y": "6.25", "wheel.1.y": "-6.25"}
    unit_field = {"type": ids.EDITOR_FIELD, "key": "distance_unit"}
    # The unit's own field keeps its text; the lengths it converted are written.
    assert field_updates(keys, shown, values, [unit_field], False) == [no_update, "158.75", "-158.75"]
    typed = {"type": ids.EDITOR_FIELD, "key": "wheel.0.y"}
    assert field_updates(keys, {**shown, "wheel.0.y": "158.750"}, values, [typed], False)[1] is no_update
    assert field_updates(keys, shown, values, [ids.EDITOR_UNDO], True) == ["mm", "158.75", "-158.75"]


def test_the_command_line_repeats_the_edit(replay_tab, practice_profile):
    _, view = replay_tab
    session = session_of(view, "practice-bot", 60.0)
    state = edited(EditorState("practice-bot"), "wheel.1.reversed", "true", session.loaded).with_method("midpoint")
    assert command_line(state, session, None) == (
        "podwatch recompute practice-bot-figure-eight-reversed-right.jsonl.gz --set wheel.right.reversed=true "
        "--method midpoint")
    assert command_line(EditorState("practice-bot"), session, None) == "no changes: the loaded profile"


def redraw_values(tab: str, store) -> dict:
    return {f"{ids.VIEW_ID}.data": tab, f"{ids.EDITOR}.data": store, f"{ids.EDITOR_BODY}.className": "editor-body",
            f"{ids.ROBOT}.value": "practice-bot", f"{ids.WINDOW}.value": 60, f"{ids.EDITOR_TICK}.n_intervals": 0}


def test_edits_belong_to_the_tab_that_made_them(practice_profile):
    """The server keeps no edit: a tab's redraw comes from the store its page sends, and
    the shared live receiver's profile never changes."""
    hub = Hub({"practice-bot": practice_profile})
    live = LiveSource(hub)
    data = read_recording(REVERSED)
    live.raw([(sample, "udp") for sample in _samples(data)])
    app = create_app(Station(live=live))
    store = edited(EditorState("practice-bot"), "wheel.1.reversed", "true", practice_profile).to_store()
    mine = call(app, f"{ids.EDITOR_TRACK}.figure", redraw_values("tab-a", store), [f"{ids.EDITOR}.data"])
    other = call(app, f"{ids.EDITOR_TRACK}.figure", redraw_values("tab-b", None), [f"{ids.EDITOR}.data"])
    assert "--set wheel.right.reversed=true" in mine[ids.EDITOR_OPTIONS]["children"]
    assert other[ids.EDITOR_OPTIONS]["children"].startswith("no changes")
    assert "live robot's last 10 s" in other[ids.EDITOR_WHAT]["children"]
    assert hub.profiles["practice-bot"] == practice_profile
    # Following live, a tick comes back to a redraw as dear as a tenth of the time since the last: skipped.
    cursor = mine[ids.EDITOR_CURSOR]["data"]
    tick = {**redraw_values("tab-a", store), f"{ids.EDITOR_CURSOR}.data": cursor}
    assert call(app, f"{ids.EDITOR_TRACK}.figure", {**tick, f"{ids.EDITOR_CURSOR}.data": {**cursor, "cost": 60.0}},
                [f"{ids.EDITOR_TICK}.n_intervals"]) == {}
    assert ids.EDITOR_TRACK in call(app, f"{ids.EDITOR_TRACK}.figure", {**tick, f"{ids.EDITOR_CURSOR}.data": {
        **cursor, "at": cursor["at"] - 60.0}}, [f"{ids.EDITOR_TICK}.n_intervals"])
    # A closed editor costs nothing: no recompute, nothing sent.
    closed = {**redraw_values("tab-a", store), f"{ids.EDITOR_BODY}.className": "editor-body hidden"}
    assert call(app, f"{ids.EDITOR_TRACK}.figure", closed, [f"{ids.EDITOR_TICK}.n_intervals"]) == {}


def _samples(data):
    """The recording's samples with their receive times moved to now, so that the live window holds them."""
    import time

    from receiver.live.replay import recorded_samples

    samples, stamps = recorded_samples(data)
    shift = time.time() - float(stamps[-1])
    for sample in samples:
        sample.rx = sample.rx + shift
    return samples


def test_download_writes_into_the_users_own_file_or_a_clean_one(practice_profile, tmp_path):
    """A profile loaded from a file comes back as that file with only the edited values changed
    (the writer of --write-profile); one from a recording's header as a clean commented file."""
    import tomllib

    from receiver.formats.profile_toml import profile_from_table

    source = FIXTURES / "practice-bot.toml"
    station = Station(recording=read_recording(REVERSED), profiles={"practice-bot": practice_profile},
                      make_replay=lambda data: ReplaySource(data, {"practice-bot": practice_profile}, clock=lambda: 0.0),
                      profile_files={"practice-bot": source})
    assert station.profile_file(practice_profile) == source
    app = create_app(station)
    store = edited(EditorState("practice-bot"), "wheel.1.reversed", "true", practice_profile).to_store()
    values = {f"{ids.EDITOR_DOWNLOAD}.n_clicks": 1, f"{ids.EDITOR}.data": store, f"{ids.ROBOT}.value": "practice-bot"}
    answer = call(app, f"{ids.EDITOR_FILE}.data", values, [f"{ids.EDITOR_DOWNLOAD}.n_clicks"])[ids.EDITOR_FILE]["data"]
    assert answer["filename"] == "practice-bot.toml"
    text = answer["content"]
    assert profile_from_table(tomllib.loads(text)) == edited(EditorState("practice-bot"), "wheel.1.reversed", "true",
                                                              practice_profile).profile(practice_profile)
    # The user's file, comments and integers kept: only the right wheel's reversed line differs.
    changed = [(a, b) for a, b in zip(source.read_text().splitlines(), text.splitlines()) if a != b]
    assert len(text.splitlines()) == len(source.read_text().splitlines())
    assert [b.strip() for _, b in changed] == ["reversed = true"]
    assert text.startswith("# Our invented practice robot") and "counts_per_rev = 8192\n" in text

    # The recording's own profile (no file given): a clean file saying where it came from.
    header_only = create_app(Station(recording=read_recording(REVERSED),
                                     make_replay=lambda data: ReplaySource(data, clock=lambda: 0.0)))
    clean = call(header_only, f"{ids.EDITOR_FILE}.data", values, [f"{ids.EDITOR_DOWNLOAD}.n_clicks"])
    content = clean[ids.EDITOR_FILE]["data"]["content"]
    assert content.startswith("# Robot profile of practice-bot, edited on the podwatch page from ")
    assert "practice-bot-figure-eight-reversed-right.jsonl.gz" in content.splitlines()[0]
    assert profile_from_table(tomllib.loads(content)).wheels[1].reversed


def test_a_profile_file_gone_since_start_gives_a_clean_file_and_says_so(practice_profile, tmp_path):
    from dashboard.editor_panel import profile_file_text

    text, note = profile_file_text(practice_profile, tmp_path / "gone.toml", "live")
    assert note.startswith(f"{tmp_path / 'gone.toml'} could not be read") and "clean file" in note
    assert text.startswith("# Robot profile of practice-bot, edited on the podwatch page from ")


def test_kept_recomputes_are_bounded_and_reused(replay_tab):
    _, view = replay_tab
    session = session_of(view, "practice-bot", 60.0)

    def other(name: str):
        station = Station(recording=read_recording(FIXTURES / name), make_replay=lambda d: ReplaySource(d, clock=lambda: 0.0))
        return session_of(station.tab("t"), "practice-bot", 60.0)

    by_count = LoadedResults(most=2)
    first = by_count.of(session)
    assert by_count.of(session) is first  # a recording's samples never change: recomputed once
    fixed = other("practice-bot-figure-eight.jsonl.gz")
    fixed_result = by_count.of(fixed)
    assert by_count.of(session) is first
    by_count.of(other("practice-bot-figure-eight-wide-track.jsonl.gz"))
    # Three recordings, two kept: the one used longest ago went.
    assert by_count.of(session) is first and by_count.of(fixed) is not fixed_result
    by_samples = LoadedResults(samples=1500)  # 977 samples each: room for one
    first = by_samples.of(session)
    by_samples.of(other("practice-bot-figure-eight.jsonl.gz"))
    assert len(by_samples._kept) == 1 and by_samples.of(session) is not first
