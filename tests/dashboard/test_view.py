"""Refreshes of the page on a replayed fixture: whole redraws, then only new points."""

from __future__ import annotations

import numpy as np
import pytest

from dashboard import view
from dashboard.downsample import pick_rows
from dashboard.settings import Settings, parse_length
from dashboard.sources import ReplaySource
from dashboard.tabs import TabView
from receiver.errors import UsageError
from receiver.formats.recording import read_recording
from receiver.live.session import LinkState, RobotSnapshot
from tests.conftest import FIXTURES
from tests.dashboard.test_figures import values

REVERSED = FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz"


class FakeClock:
    def __init__(self) -> None:
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


@pytest.fixture
def replay():
    return ReplaySource(read_recording(REVERSED), clock=FakeClock())


def test_first_refresh_draws_everything_then_only_new_rows_follow(replay):
    station = TabView(None, replay)
    replay.seek(4.0)
    first = view.refresh(station, Settings(), None, 60.0, None)
    assert first.robot == "practice-bot"
    assert set(first.figures) == {"track", "poses", "errors", "loop"} and not first.extensions
    rows = replay.hub.history("practice-bot")
    shown_t = values(first.figures["errors"]["data"][0]["x"])
    np.testing.assert_allclose(shown_t, rows["rx"] - replay.origin, atol=5e-4)  # under budget: every row
    replay.seek(5.0)
    # A budget this large keeps every new row (the budget spreads over the window).
    second = view.refresh(station, Settings(points=60_000), "practice-bot", 60.0, first.cursor)
    assert not second.figures and set(second.extensions) == {"track", "errors"} and second.histogram is None
    new = replay.hub.history("practice-bot", since_rx=first.cursor["rx"][0])
    update, indices, keep = second.extensions["errors"]
    np.testing.assert_allclose(update["x"][0], np.round(new["rx"] - replay.origin, 3))
    np.testing.assert_allclose(update["y"][0], np.round(new["position_error"], 3))
    assert second.cursor["rx"] == [new["rx"][-1], first.cursor["rx"][1]]
    # The next append goes to the other views, with every row since the first refresh.
    replay.seek(5.5)
    third = view.refresh(station, Settings(points=60_000), "practice-bot", 60.0, second.cursor)
    assert set(third.extensions) == {"poses", "loop"} and third.histogram is not None
    new = replay.hub.history("practice-bot", since_rx=first.cursor["rx"][1])
    update, _, _ = third.extensions["poses"]
    np.testing.assert_allclose(update["x"][0], np.round(new["rx"] - replay.origin, 3))
    np.testing.assert_allclose(update["y"][0], np.round(new["pose"][:, 0], 3))
    assert third.cursor["rx"] == [second.cursor["rx"][0], new["rx"][-1]]
    # The histogram is redrawn at most once a second (it was 1.5 s ago here), then not within the second.
    replay.seek(5.7)
    fourth = view.refresh(station, Settings(points=60_000), "practice-bot", 60.0, third.cursor)
    replay.seek(5.9)
    fifth = view.refresh(station, Settings(points=60_000), "practice-bot", 60.0, fourth.cursor)
    assert set(fifth.extensions) == {"poses", "loop"} and fifth.histogram is None
    replay.seek(6.6)
    seventh = view.refresh(station, Settings(points=60_000), "practice-bot", 60.0,
                           view.refresh(station, Settings(points=60_000), "practice-bot", 60.0, fifth.cursor).cursor)
    assert set(seventh.extensions) == {"poses", "loop"} and seventh.histogram is not None


def test_new_rows_are_thinned_to_the_density_of_the_window(replay):
    station = TabView(None, replay)
    replay.seek(1.0)
    first = view.refresh(station, Settings(points=600), "practice-bot", 60.0, None)
    replay.seek(4.0)  # about 300 new rows; 600 points per 60 s allow 10 a second
    second = view.refresh(station, Settings(points=600), "practice-bot", 60.0, first.cursor)
    update, _, keep = second.extensions["errors"]
    assert 20 <= len(update["x"][0]) <= 32
    assert keep == 600


def test_seeking_back_redraws_everything(replay):
    station = TabView(None, replay)
    replay.seek(6.0)
    first = view.refresh(station, Settings(), "practice-bot", 60.0, None)
    replay.seek(2.0)
    again = view.refresh(station, Settings(), "practice-bot", 60.0, first.cursor)
    assert set(again.figures) == {"track", "poses", "errors", "loop"}
    assert values(again.figures["errors"]["data"][0]["x"]).max() <= 2.0


def test_long_windows_are_downsampled_keeping_the_worst_point(replay):
    station = TabView(None, replay)
    replay.seek(10.0)
    out = view.refresh(station, Settings(points=200), "practice-bot", 60.0, None)
    errors = values(out.figures["errors"]["data"][0]["y"])
    rows = replay.hub.history("practice-bot")
    assert len(rows["rx"]) > 900 and len(errors) <= 200
    assert errors.max() == pytest.approx(np.nanmax(rows["position_error"]), abs=5e-4)
    assert out.disagreement.position_worst == pytest.approx(np.nanmax(rows["position_error"]))


def test_pick_rows_keeps_every_row_under_budget_and_the_extremes_over_it():
    t = np.arange(1000.0)
    y = np.sin(t / 50.0)
    y[321] = 7.0
    assert pick_rows(t, [y], 2000).tolist() == list(range(1000))
    picked = pick_rows(t, [y], 100)
    assert len(picked) <= 100 and 321 in picked and picked[0] == 0 and picked[-1] == 999


def test_a_quiet_robot_says_how_long_it_has_been_silent():
    snap = RobotSnapshot(
        robot="bot", state=LinkState.QUIET, has_profile=True, messages=5, rate_hz=0.0, gaps=0, duplicates=0, late=0,
        restarts=0, resets=0, errors={}, loop_mean_s=0.01, loop_p50_s=0.01, loop_p95_s=0.01, loop_max_s=0.01,
        jitter_s=0.0, pose=None, reported=None, position_error=0.0, heading_error=0.0, last_rx=90.0,
    )
    assert view.status_line(snap, 94.2, "live").endswith("bot: no data for 4 s")


def test_replay_controls_with_a_fake_clock(replay):
    clock = replay.clock
    replay.set_speed(2.0)
    replay.play()
    clock.now += 1.5
    replay.advance()
    assert replay.position_s == pytest.approx(3.0)
    replay.pause()
    clock.now += 5.0
    replay.advance()
    assert replay.position_s == pytest.approx(3.0)
    generation = replay.generation
    replay.seek(1.0)
    assert replay.position_s == pytest.approx(1.0) and replay.generation == generation + 1
    replay.seek(99.0)
    assert replay.position_s == pytest.approx(replay.duration_s)
    with pytest.raises(UsageError, match="replay speed must be positive"):
        replay.set_speed(0.0)


@pytest.mark.parametrize("text, metres", [("144in", 3.6576), ("3.6m", 3.6), ("450 mm", 0.45), ("18", 0.4572)])
def test_lengths_on_the_command_line(text, metres):
    assert parse_length(text) == pytest.approx(metres)


@pytest.mark.parametrize("text", ["12ft", "-3in", "0", "in"])
def test_bad_lengths_are_refused(text):
    with pytest.raises(UsageError, match="expected a positive length"):
        parse_length(text)


def test_a_robot_without_a_profile_is_told_the_name_to_set():
    def snap(robot, has_profile, messages):
        return RobotSnapshot(
            robot=robot, state=LinkState.LIVE if messages else LinkState.WAITING, has_profile=has_profile,
            messages=messages, rate_hz=50.0, gaps=0, duplicates=0, late=0, restarts=0, resets=0, errors={},
            loop_mean_s=0.02, loop_p50_s=0.02, loop_p95_s=0.02, loop_max_s=0.02, jitter_s=0.0, pose=None,
            reported=None, position_error=float("nan"), heading_error=float("nan"), last_rx=1.0,
        )

    snapshots = {"practice-bot": snap("practice-bot", True, 0), "my-robot": snap("my-robot", False, 40)}
    line = view.status_line(snapshots["my-robot"], 2.0, "live", unheard=view.unheard_profiles(snapshots))
    assert line.endswith(
        "; no profile for this robot (the profile given is named practice-bot; the messages come from my-robot: "
        'set name = "my-robot" in the profile, or send that name): not recomputed'
    )
    assert view.status_line(snapshots["my-robot"], 2.0, "live").endswith("(give one with --profile): not recomputed")
