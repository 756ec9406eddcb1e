"""The "Compare runs" panel: several recordings of the same robot side by side on the page.

Owns the panel's components and callbacks and the background work behind
Compare: the recordings are chosen from the recordings folder's list (the
opener's, never a typed path), read one after the other by
recordings_folder.read_from_folder in a worker thread (the page's threads
never wait for a file; one comparison at a time for the whole server), and
each robot's run recomputed (compare_runs.py). The panel's interval brings
the progress and the result to the tab that asked. ``card`` goes into the
page's grid; ``register`` is called from ``create_app``.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from dash import Dash, Input, Output, State, dcc, html, no_update

from dashboard import ids
from dashboard.compare_runs import Run, compare_tables, curves_figure, runs_of
from dashboard.recordings_folder import UNREADABLE, Limits, read_from_folder, why_unreadable
from dashboard.settings import Settings
from dashboard.tabs import Station, remember
from receiver.odometry.robot import counts_per_message

POLL_MS = 1000  # how often a tab looks for its comparison's progress while one runs
MOST_RECORDINGS = 8  # one colour each (workbench_figures.RUN_COLOURS), and a bounded read
KEPT_RESULTS = 16  # results kept for this many tabs at most (the newest)
# The opener's list, copied into this panel's: no second look at the folder.
COPY_OPTIONS = "function(options) { return options || []; }"


@dataclass
class Comparison:
    """One tab's comparison: its number, a line on where it stands, and when done its runs and notes."""

    serial: int
    progress: str
    done: bool = False
    runs: list[Run] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


class Comparer:
    """Reads the chosen recordings in a worker thread, one comparison at a time, and keeps each tab's result."""

    def __init__(self, station: Station, folder: Path, points: int, limits: Limits = Limits(),
                 read: Callable[..., object] = read_from_folder) -> None:
        self.station, self.folder, self.points, self.limits = station, folder, points, limits
        self._read = read
        self._lock = threading.Lock()
        self._serial = 0
        self._busy = False
        self._results: dict[str | None, Comparison] = {}  # by view id, newest last
        self._thread: threading.Thread | None = None

    def start(self, view_id: str | None, names: list[str]) -> str:
        """Begin comparing ``names`` for the tab ``view_id``; the line to show now."""
        with self._lock:
            if self._busy:
                return "still comparing for a tab; try again in a moment"
            self._busy = True
            self._serial += 1
            comparison = Comparison(self._serial, f"reading 1 of {len(names)}: {names[0]} ...")
            remember(self._results, view_id, comparison, KEPT_RESULTS)
        self._thread = threading.Thread(target=self._compare, args=(comparison, names), name="podwatch-compare",
                                        daemon=True)
        self._thread.start()
        return comparison.progress

    def _compare(self, comparison: Comparison, names: list[str]) -> None:
        profiles = self.station.profiles
        lengths = counts_per_message(profiles)
        runs, notes = [], []
        for k, name in enumerate(names, 1):
            comparison.progress = f"reading {k} of {len(names)}: {name} ..."
            try:
                data = self._read(self.folder, name, lengths, self.limits)
                found, skipped = runs_of(data, profiles, self.points)
                runs += found
                notes += skipped + [f"{name}: {warning}" for warning in data.warnings]
            except UNREADABLE as exc:
                notes.append(f"{name}: left out: {why_unreadable(exc)}")
        with self._lock:
            comparison.runs, comparison.notes = runs, notes
            comparison.progress = f"compared {len(runs)} run{'' if len(runs) == 1 else 's'} of {len(names)} recording" \
                                  f"{'' if len(names) == 1 else 's'}"
            comparison.done = True
            self._busy = False

    def result(self, view_id: str | None) -> Comparison | None:
        """The tab's latest comparison (running or done); None before its first."""
        with self._lock:
            return self._results.get(view_id)

    def join(self, timeout: float | None = None) -> None:
        """Wait for the comparison in progress, if any (for tests and shutdown)."""
        if self._thread is not None:
            self._thread.join(timeout)


def card(graph: Callable[[str], html.Div]) -> html.Section:
    """The panel's card; ``graph`` makes a graph box in the page's look (layout.py)."""
    return html.Section(className="card wide", children=[
        html.H2("Compare runs"),
        html.Div(className="panel-controls", children=[
            dcc.Dropdown(id=ids.COMPARE_CHOICE, options=[], value=[], multi=True,
                         placeholder=f"choose up to {MOST_RECORDINGS} recordings of the same robot",
                         className="compare-select"),
            html.Button("Compare", id=ids.COMPARE_RUN, n_clicks=0, className="button"),
            html.Span(id=ids.COMPARE_STATUS, className="panel-status"),
        ]),
        html.Div(id=ids.COMPARE_TABLE),
        html.Div(graph(ids.COMPARE_CURVES), id=ids.COMPARE_GRAPHS, className="hidden"),  # shown with a result
        dcc.Interval(id=ids.COMPARE_TICK, interval=POLL_MS, n_intervals=0, disabled=True),
        dcc.Store(id=ids.COMPARE_SHOWN, data=None),
    ])


def register(app: Dash, station: Station, settings: Settings, limits: Limits = Limits()) -> Comparer:
    """Wire the panel to ``station`` and the folder of ``settings``; returns the Comparer."""
    comparer = Comparer(station, settings.recordings, settings.points, limits)
    app.clientside_callback(COPY_OPTIONS, Output(ids.COMPARE_CHOICE, "options"), Input(ids.RECORDING_CHOICE, "options"))

    @app.callback(
        Output(ids.COMPARE_STATUS, "children"),
        Output(ids.COMPARE_TICK, "disabled"),
        Input(ids.COMPARE_RUN, "n_clicks"),
        State(ids.COMPARE_CHOICE, "value"),
        State(ids.VIEW_ID, "data"),
        prevent_initial_call=True,
    )
    def compare(_clicks, names, view_id):
        names = list(dict.fromkeys(names or []))
        if not names:
            return "choose one or more recordings first", no_update
        if len(names) > MOST_RECORDINGS:
            return f"choose at most {MOST_RECORDINGS} recordings", no_update
        return comparer.start(view_id, names), False

    @app.callback(
        Output(ids.COMPARE_STATUS, "children", allow_duplicate=True),
        Output(ids.COMPARE_TABLE, "children"),
        Output(ids.COMPARE_CURVES, "figure"),
        Output(ids.COMPARE_TICK, "disabled", allow_duplicate=True),
        Output(ids.COMPARE_SHOWN, "data"),
        Output(ids.COMPARE_GRAPHS, "className"),
        Input(ids.COMPARE_TICK, "n_intervals"),
        State(ids.COMPARE_SHOWN, "data"),
        State(ids.VIEW_ID, "data"),
        prevent_initial_call=True,
    )
    def poll(_tick, shown, view_id):
        comparison = comparer.result(view_id)
        if comparison is None:
            return no_update, no_update, no_update, True, no_update, no_update
        if not comparison.done:
            return comparison.progress, no_update, no_update, False, no_update, no_update
        if comparison.serial == shown:
            return no_update, no_update, no_update, True, no_update, no_update
        return (comparison.progress, compare_tables(comparison.runs, comparison.notes),
                curves_figure(comparison.runs), True, comparison.serial, "" if comparison.runs else "hidden")

    return comparer
