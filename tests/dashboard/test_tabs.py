"""Which source each tab shows (dashboard/tabs.py): views that belong to their tab,
and tabs that are forgotten, their replays stopped, once their page is gone."""

from __future__ import annotations

from dashboard.sources import LiveSource, ReplaySource
from dashboard.tabs import IDLE_S, MAX_TABS, Station
from receiver.formats.recording import read_recording
from receiver.live.hub import Hub
from tests.conftest import FIXTURES

REVERSED = FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz"


class Clock:
    def __init__(self) -> None:
        self.now = 0.0

    def __call__(self) -> float:
        return self.now


class Replays:
    """A replay factory that remembers what it made (paused, no thread: nothing to stop)."""

    def __init__(self) -> None:
        self.made: list[ReplaySource] = []

    def __call__(self, data) -> ReplaySource:
        self.made.append(ReplaySource(data, clock=lambda: 0.0))
        return self.made[-1]


def test_opening_in_one_tab_leaves_the_others_live():
    live = LiveSource(Hub({}))
    station = Station(live=live)
    assert station.tab("a").source is live and station.tab("b").source is live
    text = station.open("a", read_recording(REVERSED))
    assert text.startswith("opened ") and text.endswith("977 messages, 10.0 s")
    assert station.tab("a").source is not live and station.tab("a").source.kind == "replay"
    assert station.tab("b").source is live
    assert station.tab("c").source is live  # a tab opened later starts live
    assert station.tab("a").key() != station.tab("b").key()
    assert station.show_live("a") and station.tab("a").source is live
    station.close()


def test_without_a_live_receiver_each_tab_replays_on_its_own():
    replays = Replays()
    station = Station(recording=read_recording(REVERSED), make_replay=replays)
    first, second = station.tab("a"), station.tab("b")
    assert len(replays.made) == 2 and first.replay is not second.replay
    first.replay.seek(6.0)
    assert second.replay.position_s == 0.0  # the other tab's position is its own
    assert station.tab("a") is first and len(replays.made) == 2  # the same tab keeps its replay
    assert not station.show_live("a")  # there is no live receiver to go back to


def test_idle_tabs_are_forgotten_and_their_replays_stopped():
    clock = Clock()
    stopped: list[ReplaySource] = []
    replays = Replays()

    def tracked(data):
        source = replays(data)
        source.stop = lambda: stopped.append(source)
        return source

    station = Station(recording=read_recording(REVERSED), make_replay=tracked, clock=clock)
    old = station.tab("old").replay
    clock.now = IDLE_S / 2
    station.tab("recent")
    clock.now = IDLE_S + 1.0
    station.tab("recent")  # asking for any tab prunes the idle ones
    assert stopped == [old]
    assert station.tab("old").replay is not old  # back after its page was gone: a fresh view


def test_no_more_than_max_tabs_are_remembered():
    stopped = []
    replays = Replays()

    def tracked(data):
        source = replays(data)
        source.stop = lambda: stopped.append(source)
        return source

    clock = Clock()
    station = Station(recording=read_recording(REVERSED), make_replay=tracked, clock=clock)
    for n in range(MAX_TABS + 3):
        clock.now = float(n)
        station.tab(f"tab-{n}")
    assert stopped == replays.made[:3]  # the three idlest went first
    station.close()
    assert len(stopped) == MAX_TABS + 3


def test_a_request_without_a_view_id_gets_a_view_that_is_not_remembered():
    live = LiveSource(Hub({}))
    station = Station(live=live)
    assert station.tab(None).source is live
    assert station.tab(None) is not station.tab(None)


def test_remember_keeps_each_tabs_newest_and_forgets_the_oldest_tabs():
    from dashboard.tabs import remember

    by_tab: dict = {}
    for view_id, value in [("a", 1), ("b", 2), ("a", 3), ("c", 4)]:
        remember(by_tab, view_id, value, most=2)
    assert by_tab == {"a": 3, "c": 4}  # "b" was the oldest once "a" came again
