"""Refreshes of the page on a replayed fixture: whole redraws, then only new points."""

from __future__ import annotations

import json

import numpy as np
import pytest

from dashboard import view
from dashboard.downsample import pick_rows
from dashboard.settings import Settings, parse_length
from dashboard.sources import LiveSource, ReplaySource
from dashboard.status import status
from dashboard.tabs import TabView
from receiver.errors import UsageError
from receiver.formats.profile_toml import load_profile
from receiver.formats.protocol import decode
from receiver.formats.recording import read_recording
from receiver.live.hub import Hub
from receiver.live.session import LinkState, RobotSnapshot, unheard_profiles
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
    assert set(first.figures) == {"track", "poses", "errors", "loop", "signals"} and not first.extensions
    rows = replay.hub.history("practice-bot")
    shown_t = values(first.figures["errors"]["data"][0]["x"])
    np.testing.assert_allclose(shown_t, rows["rx"] - replay.origin, atol=5e-4)  # under budget: every row
    replay.seek(5.0)
    # A budget this large keeps every new row (the budget spreads over the window).
    big = Settings(points=60_000)
    second = view.refresh(station, big, "practice-bot", 60.0, first.cursor)
    assert not second.figures and set(second.extensions) == {"track"} and second.histogram is None
    new = replay.hub.history("practice-bot", since_rx=first.cursor["rx"][0])
    update, indices, keep = second.extensions["track"]
    np.testing.assert_allclose(update["x"][0], np.round(new["pose"][:, 0], 3))
    assert second.cursor["rx"] == [new["rx"][-1], *first.cursor["rx"][1:]]
    # The next append goes to the next group, with every row since the first refresh. The
    # fixture's robot sends no signals of its own: nothing to append to them.
    replay.seek(5.5)
    third = view.refresh(station, big, "practice-bot", 60.0, second.cursor)
    assert set(third.extensions) == {"errors"}
    new = replay.hub.history("practice-bot", since_rx=first.cursor["rx"][1])
    update, _, _ = third.extensions["errors"]
    np.testing.assert_allclose(update["x"][0], np.round(new["rx"] - replay.origin, 3))
    np.testing.assert_allclose(update["y"][0], np.round(new["position_error"], 3))
    replay.seek(5.7)
    fourth = view.refresh(station, big, "practice-bot", 60.0, third.cursor)
    assert set(fourth.extensions) == {"poses", "loop"} and fourth.histogram is not None
    new = replay.hub.history("practice-bot", since_rx=first.cursor["rx"][2])
    update, _, _ = fourth.extensions["poses"]
    np.testing.assert_allclose(update["y"][0], np.round(new["pose"][:, 0], 3))
    assert fourth.cursor["rx"] == [second.cursor["rx"][0], third.cursor["rx"][1], new["rx"][-1]]
    # The histogram is redrawn at most once a second: not 0.6 s later, again 1.2 s later.
    cursor = fourth.cursor
    for at in (5.9, 6.1, 6.3):
        replay.seek(at)
        later = view.refresh(station, big, "practice-bot", 60.0, cursor)
        cursor = later.cursor
    assert set(later.extensions) == {"poses", "loop"} and later.histogram is None
    for at in (6.5, 6.7, 6.9):
        replay.seek(at)
        later = view.refresh(station, big, "practice-bot", 60.0, cursor)
        cursor = later.cursor
    assert set(later.extensions) == {"poses", "loop"} and later.histogram is not None


def test_new_rows_are_thinned_to_the_density_of_the_window(replay):
    station = TabView(None, replay)
    replay.seek(1.0)
    first = view.refresh(station, Settings(points=600), "practice-bot", 60.0, None)
    replay.seek(4.0)  # about 300 new rows; 600 points per 60 s allow 10 a second
    second = view.refresh(station, Settings(points=600), "practice-bot", 60.0, first.cursor)  # the track's turn
    third = view.refresh(station, Settings(points=600), "practice-bot", 60.0, second.cursor)
    update, _, keep = third.extensions["errors"]
    assert 14 <= len(update["x"][0]) <= 32  # the lowest and highest of both errors in 14 bins
    assert keep == 600


def test_seeking_back_redraws_everything(replay):
    station = TabView(None, replay)
    replay.seek(6.0)
    first = view.refresh(station, Settings(), "practice-bot", 60.0, None)
    replay.seek(2.0)
    again = view.refresh(station, Settings(), "practice-bot", 60.0, first.cursor)
    assert set(again.figures) == {"track", "poses", "errors", "loop", "signals"}
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


def test_the_heading_disagreement_is_one_line_through_every_turn(replay):
    # The reversed encoder makes the recompute spin against the robot's own pose: the
    # heading error passes +-180 degrees many times in the fixture's 10 s.
    station = TabView(None, replay)
    replay.seek(10.0)
    errors = view.refresh(station, Settings(), "practice-bot", 60.0, None).figures["errors"]
    heading = values(errors["data"][1]["y"])
    assert not np.isnan(heading).any()
    assert np.abs(np.diff(heading)).max() < 180.0  # no jump from +180 to -180
    assert heading.max() - heading.min() > 4 * 360.0
    rows = replay.hub.history("practice-bot")
    assert len(heading) == len(rows["rx"])  # under the budget: every row
    unwrapped = np.degrees(np.unwrap(rows["heading_error"]))  # numpy's unwrap, from the first row as ours
    np.testing.assert_allclose(heading, np.round(unwrapped, 3), atol=1.5e-3)


def signal_message(seq: int, t: float, data: dict) -> bytes:
    return json.dumps({"v": 1, "robot": "practice-bot", "seq": seq, "t": t, "ticks": [0, 0, 0], "pose": [0, 0, 0],
                       "data": data}).encode()


def test_the_robots_own_signals_are_drawn_and_appended_by_name():
    profile = load_profile(FIXTURES / "practice-bot.toml")
    clock = FakeClock()
    hub = Hub({profile.name: profile})
    live = LiveSource(hub, clock)
    tab = TabView(live)

    def feed(seqs):
        for seq in seqs:
            data = {"arm.angle": 10.0 + seq, "intake_power": 0.5} if seq % 2 == 0 else {"arm.angle": 10.0 + seq}
            hub.ingest(*decode(signal_message(seq, 0.01 * seq, data)), 100.0 + 0.01 * seq, "test")
        hub.process(100.0 + 0.01 * seqs[-1])

    feed(range(50))
    clock.now = 100.5
    first = view.refresh(tab, Settings(), None, 60.0, None)
    figure = first.figures["signals"]
    assert first.signal_names == ["arm.angle", "intake_power"]
    assert [trace["name"] for trace in figure["data"]] == ["arm.angle", "intake_power"]
    assert figure["data"][0]["y"] == [10.0 + k for k in range(50)]
    np.testing.assert_allclose(figure["data"][0]["x"], [100.0 + 0.01 * k - live.origin for k in range(50)], atol=1e-3)
    assert figure["data"][1]["y"] == [0.5] * 25 and figure["layout"]["yaxis2"]["title"]["text"] == "intake_power"
    feed(range(50, 60))
    clock.now = 100.7
    cursor = first.cursor
    while True:  # the group that carries the signals; a budget that keeps every new value
        later = view.refresh(tab, Settings(points=60_000), "practice-bot", 60.0, cursor)
        cursor = later.cursor
        if "errors" in later.extensions:
            break
    update, indices, _ = later.extensions["signals"]
    assert indices == [0, 1] and update["y"][0] == [10.0 + k for k in range(50, 60)] and update["y"][1] == [0.5] * 5
    # Picked by a person: only that one, drawn whole at once.
    picked = view.refresh(tab, Settings(), "practice-bot", 60.0, cursor, signals=["intake_power", "gone"])
    assert [trace["name"] for trace in picked.figures["signals"]["data"]] == ["intake_power"]


def test_a_robot_without_a_profile_is_told_the_name_to_set():
    def snap(robot, has_profile, messages):
        return RobotSnapshot(
            robot=robot, state=LinkState.LIVE if messages else LinkState.WAITING, has_profile=has_profile,
            messages=messages, rate_hz=50.0, gaps=0, duplicates=0, late=0, restarts=0, resets=0, errors={},
            loop_mean_s=0.02, loop_p50_s=0.02, loop_p95_s=0.02, loop_max_s=0.02, jitter_s=0.0, pose=None,
            reported=None, position_error=float("nan"), heading_error=float("nan"), last_rx=1.0,
        )

    snapshots = {"practice-bot": snap("practice-bot", True, 0), "my-robot": snap("my-robot", False, 40)}
    line = status(snapshots["my-robot"], 2.0, "live", unheard=tuple(unheard_profiles(snapshots))).detail
    assert line.endswith(
        "; no profile for this robot (the profile given is named practice-bot; the messages come from my-robot: "
        'set name = "my-robot" in the profile, or send that name): not recomputed'
    )
    assert status(snapshots["my-robot"], 2.0, "live").detail.endswith("(give one with --profile): not recomputed")
