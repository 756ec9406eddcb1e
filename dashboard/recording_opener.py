"""The page's recording opener: the list of the recordings folder, Open, Back to live.

Owns the opener bar's components and callbacks and the one background read
behind Open: a recording is chosen from the folder's list (never typed as
a path), read by recordings_folder.read_from_folder in a worker thread, and
shown in the tab that asked for it (tabs.Station.open); one read at a time
for the whole server. The page's own threads never wait for a file: Open
answers "opening ..." at once and the bar's interval brings the result.
``bar`` goes into the page; ``register`` is called from ``create_app``.
"""

from __future__ import annotations

import os
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from dash import Dash, Input, Output, State, dcc, html, no_update

from dashboard import ids
from dashboard.pacing import triggered_ids
from dashboard.recordings_folder import UNREADABLE, Limits, list_recordings, read_from_folder, why_unreadable
from dashboard.settings import Settings
from dashboard.tabs import Station, remember
from receiver.errors import PodwatchError
from receiver.formats.recording import RecordingData
from receiver.odometry.robot import counts_per_message

CHOOSE = "choose a recording"
LIST_EVERY_MS = 1000  # how often the page looks for new recordings and for the end of an open


@dataclass(frozen=True)
class Outcome:
    """How the last open ended: its number (one per Open), the line for the page, and
    whether a replay was opened."""

    serial: int
    text: str
    opened: bool


# Outcomes kept for this many tabs at most (the newest); a tab forgotten sees no news.
KEPT_OUTCOMES = 64


class Opener:
    """Reads one recording at a time from the folder in a worker thread, then shows it in the asking tab."""

    def __init__(self, station: Station, folder: Path, limits: Limits = Limits(),
                 read: Callable[..., RecordingData] = read_from_folder) -> None:
        self.station = station
        self.folder = folder
        self.limits = limits
        self._read = read
        self._lock = threading.Lock()
        self._serial = 0
        self._busy: str | None = None  # the name being read
        self._outcomes: dict[str | None, Outcome] = {}  # by view id, newest last
        self._thread: threading.Thread | None = None

    def start(self, view_id: str | None, name: str) -> str:
        """Begin reading ``name`` for the tab ``view_id``; the line to show now ("opening ...", or why not)."""
        with self._lock:
            if self._busy is not None:
                return f"still opening {self._busy} ..."
            self._busy = name
            self._serial += 1
            serial = self._serial
        self._thread = threading.Thread(target=self._open, args=(view_id, name, serial), name="podwatch-open",
                                        daemon=True)
        self._thread.start()
        return f"opening {name} ..."

    def _open(self, view_id: str | None, name: str, serial: int) -> None:
        profiles = self.station.profiles
        try:
            data = self._read(self.folder, name, counts_per_message(profiles), self.limits)
            outcome = Outcome(serial, self.station.open(view_id, data), True)
        except UNREADABLE as exc:
            place = "" if isinstance(exc, PodwatchError) else f" {name}"  # our own errors name the file
            outcome = Outcome(serial, f"cannot open{place}: {why_unreadable(exc)}", False)
        with self._lock:
            remember(self._outcomes, view_id, outcome, KEPT_OUTCOMES)
            self._busy = None

    def outcome(self, view_id: str | None) -> Outcome | None:
        """How the tab's last open ended; None before its first has ended."""
        with self._lock:
            return self._outcomes.get(view_id)

    def join(self, timeout: float | None = None) -> None:
        """Wait for the open in progress, if any (for tests and shutdown)."""
        if self._thread is not None:
            self._thread.join(timeout)


def bar(settings: Settings) -> html.Div:
    """The opener bar: which folder is listed, its recordings, Open, Back to live and a message line."""
    return html.Div(
        className="open-bar",
        children=[
            # The folder as it was given (relative to where podwatch started), the whole path on hover.
            html.Span(f"Recordings in {settings.recordings}{os.sep}", id=ids.RECORDINGS_FOLDER,
                      title=str(settings.recordings.resolve()), className="folder-name"),
            dcc.Dropdown(id=ids.RECORDING_CHOICE, options=[], value=None, placeholder=CHOOSE,
                         className="recording-select"),
            html.Button("Open recording", id=ids.OPEN, n_clicks=0, className="button"),
            html.Button("Back to live", id=ids.BACK_TO_LIVE, n_clicks=0, className="button hidden"),
            html.Span(id=ids.MESSAGE, className="message-line"),
            dcc.Interval(id=ids.RECORDINGS_TICK, interval=LIST_EVERY_MS, n_intervals=0),
            dcc.Store(id=ids.OPEN_SHOWN, data=None),
        ],
    )


def register(app: Dash, station: Station, settings: Settings, limits: Limits = Limits()) -> Opener:
    """Wire the opener bar to ``station`` and the folder of ``settings``; returns the Opener."""
    opener = Opener(station, settings.recordings, limits)

    @app.callback(
        Output(ids.MESSAGE, "children"),
        Output(ids.REPLAY_BAR, "className", allow_duplicate=True),
        Output(ids.BACK_TO_LIVE, "className", allow_duplicate=True),
        Input(ids.OPEN, "n_clicks"),
        Input(ids.BACK_TO_LIVE, "n_clicks"),
        State(ids.RECORDING_CHOICE, "value"),
        State(ids.VIEW_ID, "data"),
        prevent_initial_call=True,
    )
    def open_or_go_live(_open, _back, name, view_id):
        # The last click counts when two were merged into one call.
        if triggered_ids()[-1:] == [ids.BACK_TO_LIVE]:
            if station.show_live(view_id):
                # The replay bar's callback, which shows this button, stops with the bar: hide it here.
                return "showing the live receiver", "replay-bar hidden", "button hidden"
            return "no live receiver in this run", no_update, no_update
        if not name:
            return "choose a recording from the list first", no_update, no_update
        return opener.start(view_id, name), no_update, no_update

    @app.callback(
        Output(ids.RECORDING_CHOICE, "options"),
        Output(ids.RECORDING_CHOICE, "placeholder"),
        Output(ids.MESSAGE, "children", allow_duplicate=True),
        Output(ids.REPLAY_BAR, "className", allow_duplicate=True),
        Output(ids.OPEN_SHOWN, "data"),
        Input(ids.RECORDINGS_TICK, "n_intervals"),
        State(ids.RECORDING_CHOICE, "options"),
        State(ids.RECORDING_CHOICE, "placeholder"),
        State(ids.OPEN_SHOWN, "data"),
        State(ids.VIEW_ID, "data"),
        prevent_initial_call="initial_duplicate",
    )
    def list_and_report(_tick, options, placeholder, shown, view_id):
        fresh = [{"label": e.label, "value": e.name} for e in list_recordings(settings.recordings)]
        outcome = opener.outcome(view_id)
        if shown is None:  # a page just loaded: only opens from now on are its news
            message, replay_bar, shown = no_update, no_update, outcome.serial if outcome else 0
        elif outcome is None or outcome.serial == shown:
            message, replay_bar, shown = no_update, no_update, no_update
        else:
            message, shown = outcome.text, outcome.serial
            replay_bar = "replay-bar" if outcome.opened else no_update
        hint = CHOOSE if fresh else f"no recordings in {settings.recordings} yet"
        return (no_update if fresh == options else fresh), (no_update if hint == placeholder else hint), message, \
            replay_bar, shown

    return opener
