"""The recording opener: a read in its own thread, and its callbacks called as the browser calls them."""

from __future__ import annotations

import shutil
import threading

import pytest

from dashboard import ids
from dashboard.app import create_app
from dashboard.recording_opener import Opener
from dashboard.recordings_folder import read_from_folder
from dashboard.settings import Settings
from dashboard.sources import LiveSource
from dashboard.tabs import Station
from receiver.live.hub import Hub
from tests.conftest import FIXTURES
from tests.dashboard.test_callbacks import TAB, call

REVERSED = FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz"
WAIT_S = 30.0  # for the worker thread on a loaded machine; not a speed check

OPEN = f"{ids.OPEN}.n_clicks"
CHOICE = f"{ids.RECORDING_CHOICE}.value"
TICK = f"{ids.RECORDINGS_TICK}.n_intervals"


@pytest.fixture
def folder(tmp_path):
    inside = tmp_path / "recordings"
    inside.mkdir()
    shutil.copy(REVERSED, inside / REVERSED.name)
    return inside


def live_station() -> Station:
    return Station(live=LiveSource(Hub({})))


def test_open_answers_at_once_while_the_read_goes_on_in_its_own_thread(folder):
    release = threading.Event()
    reading = threading.Event()

    def slow_read(*args):
        reading.set()
        assert release.wait(WAIT_S)
        return read_from_folder(*args)

    station = live_station()
    opener = Opener(station, folder, read=slow_read)
    assert opener.start(TAB, REVERSED.name) == f"opening {REVERSED.name} ..."
    assert reading.wait(WAIT_S)
    assert threading.current_thread() is threading.main_thread()  # the caller is back while the read waits
    assert opener.outcome(TAB) is None and station.tab(TAB).replay is None
    assert opener.start(TAB, "other.jsonl") == f"still opening {REVERSED.name} ..."
    release.set()
    opener.join(WAIT_S)
    outcome = opener.outcome(TAB)
    assert outcome.serial == 1 and outcome.opened
    assert outcome.text == f"opened {folder / REVERSED.name}: 977 messages, 10.0 s"
    assert station.tab(TAB).replay is not None and station.tab(TAB).replay.label == str(folder / REVERSED.name)
    station.close()


def test_a_refused_open_leaves_the_shown_source_alone(folder):
    station = live_station()
    opener = Opener(station, folder)
    opener.start(TAB, "../etc/passwd")
    opener.join(WAIT_S)
    assert opener.outcome(TAB).text == "cannot open: '../etc/passwd' is not the name of a file in the recordings folder"
    assert not opener.outcome(TAB).opened and station.tab(TAB).replay is None


def test_the_page_lists_the_folder_opens_from_it_and_reports_when_done(folder):
    station = live_station()
    app = create_app(station, Settings(recordings=folder))
    listed = call(app, f"{ids.RECORDING_CHOICE}.options", {TICK: 0}, [TICK])
    assert listed[ids.RECORDING_CHOICE]["options"][0]["value"] == REVERSED.name
    first_shown = listed[ids.OPEN_SHOWN]["data"]
    assert first_shown == 0 and ids.MESSAGE not in listed  # a page just loaded has no news

    # A name from the page that is not in the list is refused like any other.
    answer = call(app, f"{ids.MESSAGE}.children", {OPEN: 1, CHOICE: "/etc/shadow"}, [OPEN])
    assert answer[ids.MESSAGE]["children"] == "opening /etc/shadow ..."
    app_opener_join(station)
    state = {TICK: 1, f"{ids.OPEN_SHOWN}.data": first_shown,
             f"{ids.RECORDING_CHOICE}.options": listed[ids.RECORDING_CHOICE]["options"],
             f"{ids.RECORDING_CHOICE}.placeholder": listed[ids.RECORDING_CHOICE]["placeholder"]}
    report = call(app, f"{ids.RECORDING_CHOICE}.options", state, [TICK])
    assert report[ids.MESSAGE]["children"] == ("cannot open: '/etc/shadow' is not the name of a file in the "
                                               "recordings folder")
    assert ids.RECORDING_CHOICE not in report  # neither the list nor its hint changed: not sent again
    assert ids.REPLAY_BAR not in report

    answer = call(app, f"{ids.MESSAGE}.children", {OPEN: 2, CHOICE: REVERSED.name}, [OPEN])
    assert answer[ids.MESSAGE]["children"] == f"opening {REVERSED.name} ..."
    app_opener_join(station)
    report = call(app, f"{ids.RECORDING_CHOICE}.options", {**state, f"{ids.OPEN_SHOWN}.data": 1}, [TICK])
    assert report[ids.MESSAGE]["children"].startswith(f"opened {folder / REVERSED.name}: 977 messages")
    assert report[ids.REPLAY_BAR]["className"] == "replay-bar"
    assert report[ids.OPEN_SHOWN]["data"] == 2
    station.close()


def app_opener_join(station: Station) -> None:
    """Wait for the opener's worker thread (it is named podwatch-open)."""
    for thread in threading.enumerate():
        if thread.name == "podwatch-open":
            thread.join(WAIT_S)


def test_open_without_a_choice_and_an_empty_folder_say_so(tmp_path):
    app = create_app(live_station(), Settings(recordings=tmp_path / "none-yet"))
    answer = call(app, f"{ids.MESSAGE}.children", {OPEN: 1, CHOICE: None}, [OPEN])
    assert answer[ids.MESSAGE]["children"] == "choose a recording from the list first"
    listed = call(app, f"{ids.RECORDING_CHOICE}.options", {TICK: 0}, [TICK])
    assert listed[ids.RECORDING_CHOICE]["placeholder"] == f"no recordings in {tmp_path / 'none-yet'} yet"
