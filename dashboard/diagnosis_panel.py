"""The Diagnosis and Guided check panels: their components and their callbacks.

Owns running ``diagnose_recent`` on the selected robot's last seconds (on
the button, or when autodiagnose.py's watch asks) and ``guided_check`` on
the samples since Start, each in its own callbacks on its own interval, so
that the live views never wait for them. The samples come from the source's
RawHistory. ``cards`` goes into the page's grid; ``register`` is called
from ``create_app``.
"""

from __future__ import annotations

import importlib

from dash import Dash, Input, Output, State, ctx, dcc, html, no_update

from dashboard import ids
from dashboard.autodiagnose import REARM_SHARE, Thresholds, Watch, WatchState, level, step
from dashboard.diagnosis_content import diagnosis_message, diagnosis_view, guided_intro, guided_view
from dashboard.editor_state import profile_signature
from dashboard.pacing import ASK_WHEN_ANSWERED, triggered_ids
from dashboard.settings import Settings
from dashboard.tabs import Station, TabView
from receiver.analysis.diagnose import Diagnosis, diagnose_recent, equivalence_classes
from receiver.analysis.guided_check import guided_check
from receiver.analysis.sample_clip import clip_from_columns
from receiver.errors import PodwatchError
from receiver.formats.profile_toml import profile_to_table
from receiver.live.raw_history import DEFAULT_RAW_WINDOW_S
from receiver.live.session import unheard_profiles
from receiver.odometry.robot import missing_profile_hint

CLIP_CHOICES_S = (5, 10, 20, 30, 60)
TICK_MS = 500  # how often the watch looks at the disagreement, and a running guided check at the moves


def _limits_text(settings: Settings, share: float = 1.0) -> str:
    return f"{settings.diagnose_position_in * share:g} in or {settings.diagnose_heading_deg * share:g} deg"


def cards(settings: Settings) -> list[html.Section]:
    """The two panels, with the interval and stores their callbacks share."""
    choices = sorted({*CLIP_CHOICES_S, settings.diagnose_s})
    diagnosis = html.Section(className="card", children=[
        html.H2("Diagnosis"),
        html.Div(className="panel-controls", children=[
            dcc.Dropdown(id=ids.DIAGNOSE_SECONDS, options=[{"label": f"last {s:g} s", "value": s} for s in choices],
                         value=settings.diagnose_s, clearable=False, searchable=False, className="diagnose-seconds"),
            html.Button("Diagnose now", id=ids.DIAGNOSE_RUN, n_clicks=0, className="button"),
            html.Span(id=ids.DIAGNOSE_STATUS, className="panel-status"),
        ]),
        html.Div(id=ids.DIAGNOSE_RESULT, children=diagnosis_message(
            f"No diagnosis yet: it runs by itself when the disagreement passes {_limits_text(settings)}, "
            "or press Diagnose now.")),
        # Its click is the profile editor's (editor_panel.py): the suggested profile as edits.
        html.Button("Try this change in the profile editor", id=ids.DIAGNOSE_TRY, n_clicks=0, className="button hidden"),
        dcc.Store(id=ids.DIAGNOSE_SUGGESTION, data=None),
        dcc.Interval(id=ids.DIAGNOSE_TICK, interval=TICK_MS, n_intervals=0),
        dcc.Store(id=ids.DIAGNOSE_WATCH, data=None),
        dcc.Store(id=ids.DIAGNOSE_ASK, data=None),
        dcc.Store(id=ids.DIAGNOSE_ANSWER, data=None),
        dcc.Store(id=ids.DIAGNOSE_REQUEST, data=None),
    ])
    guided = html.Section(className="card", children=[
        html.H2("Guided check"),
        html.Div(className="panel-controls", children=[
            html.Button("Start guided check", id=ids.GUIDED_START, n_clicks=0, className="button"),
            html.Button("Finish", id=ids.GUIDED_FINISH, n_clicks=0, className="button", disabled=True),
            html.Span(f"within {DEFAULT_RAW_WINDOW_S / 60:g} min of Start", className="panel-status"),
        ]),
        html.Div(id=ids.GUIDED_STEPS, children=guided_intro()),
        dcc.Store(id=ids.GUIDED_RUN, data=None),
        # Ticks only while a check runs: after Finish no tick can overtake
        # (and so void) the request that draws the final result.
        dcc.Interval(id=ids.GUIDED_TICK, interval=TICK_MS, n_intervals=0, disabled=True),
        dcc.Store(id=ids.GUIDED_REQUEST, data=None),
        dcc.Store(id=ids.GUIDED_CURSOR, data=None),
    ])
    return [diagnosis, guided]


def run_diagnosis(
    shown: TabView, robot: str | None, seconds: float, how: str, reason: str = ""
) -> tuple[html.Div, str | None, dict | None]:
    """The panel's result for the robot's last ``seconds``, the confidence (None when none ran),
    and the suggested profile for the editor (None when it suggests no change).

    ``how`` and ``reason`` open the result, around the source's name: "ran by itself (live): ...".
    """
    if not robot:
        return diagnosis_message("No robot heard yet: nothing to diagnose."), None, None
    profile = shown.profile(robot)
    if profile is None:
        unheard = unheard_profiles(shown.source.hub.snapshot(shown.source.now(), loop_stats=False))
        hint = missing_profile_hint(robot or "", unheard)
        return diagnosis_message(f"{robot} has no profile ({hint}): nothing to diagnose."), None, None
    # Twice the clip by receive time, not the whole raw history (600 s of a 1 kHz robot is 54 MB):
    # diagnose_recent cuts the last seconds by the robot's clock.
    latest = shown.latest_rx(robot)
    cols = shown.columns(robot, since_rx=None if latest is None else latest - 2.0 * float(seconds) - 1.0)
    if cols is None or not len(cols):
        return diagnosis_message(f"No samples from {robot} yet."), None, None
    try:
        diagnosis = diagnose_recent(cols, profile, float(seconds), robot)
    except PodwatchError as exc:
        return diagnosis_message(f"Cannot diagnose: {exc}"), None, None
    why = f"{how} ({shown.label})" + (f": {reason}" if reason else "")
    return diagnosis_view(diagnosis, why), diagnosis.confidence, suggestion(diagnosis, robot)


def suggestion(diagnosis: Diagnosis, robot: str) -> dict | None:
    """The diagnosis's suggested profile for the editor's store: the robot, which profile it
    corrects (editor_state.profile_signature) and the corrected profile as a table."""
    if diagnosis.corrected == diagnosis.profile:
        return None
    return {"robot": robot, "loaded": profile_signature(diagnosis.profile),
            "corrected": profile_to_table(diagnosis.corrected)}


def guided_panel(shown: TabView, run: dict) -> html.Div:
    """The guided check's steps on the samples since Start."""
    if run["key"] != shown.key():
        return diagnosis_message("The page shows another source now: press Start guided check again.")
    robot = run["robot"]
    profile = shown.profile(robot)
    if profile is None:
        return diagnosis_message("The guided check needs a robot with a profile.")
    cols = shown.columns(robot, since_rx=run["since_rx"])
    try:
        result = guided_check(clip_from_columns(cols), profile, robot) if cols is not None else None
    except PodwatchError:
        result = None  # too few samples yet
    return guided_view(result, run["finished"], len(cols) if cols is not None else 0)


def _status(watch: Watch, settings: Settings) -> str:
    if watch.state is WatchState.ASKED:
        return "diagnosing..."
    if watch.state is WatchState.UNSURE:
        return "not enough motion yet: trying again as the robot moves"
    if watch.state is WatchState.DONE:
        return f"runs by itself again once the disagreement is back under {_limits_text(settings, REARM_SHARE)}"
    return f"watching: runs by itself past {_limits_text(settings)}"


def _watch(shown: TabView, settings: Settings, tick: int, robot: str | None, data: dict | None, answer: dict | None):
    """(watch, ask, status line) after one tick of the watch; watch and ask are None when they stay as they were."""
    # Before the page has chosen a robot (its first refresh), watch the first one heard.
    robot = robot or next(iter(shown.heard_robots()), None)
    profile = shown.profile(robot)
    if profile is None:
        return None, None, "" if robot is None else "no profile: nothing to watch"
    watch, key = Watch.from_store(data), shown.key()
    since = watch.rx if (watch.robot, watch.key) == (robot, key) else None
    try:
        rows = shown.history(robot, since_rx=since)
    except KeyError:  # the robot is not in this source (yet)
        return None, None, ""
    limits = Thresholds.of(settings.diagnose_position_in, settings.diagnose_heading_deg, profile.distance_unit)
    watch, ask = step(watch, robot, key, tick, level(rows, since, limits), answer)
    return watch.to_store(), ({"n": watch.asked, "robot": robot} if ask else None), _status(watch, settings)


def warm_up(station: Station) -> None:
    """Load now what the first diagnosis would otherwise load while the page waits for its verdict.

    scipy.optimize takes about a second to import (more on a busy laptop),
    and each profile's hypothesis classes a little. Done while the page is
    built, which a live receiver does before it freezes its start-up heap
    (live.settle_heap), so these long-lived objects join that heap.
    """
    importlib.import_module("scipy.optimize")  # what refine.py imports at its first fit

    for profile in station.all_profiles().values():
        equivalence_classes(profile)


def register(app: Dash, station: Station, settings: Settings) -> None:
    """Wire the Diagnosis and Guided check panels to ``station``, after loading what the
    first diagnosis needs (``warm_up``); call once, from ``create_app``.
    """
    warm_up(station)
    # Both ticking callbacks go through the views' gate (pacing.ASK_WHEN_ANSWERED): a
    # tick asks only once the previous answer is in, else on a busy machine
    # each answer would be voided by the next tick's request and never shown.
    for tick, cursor, request in ((ids.DIAGNOSE_TICK, ids.DIAGNOSE_WATCH, ids.DIAGNOSE_REQUEST),
                                  (ids.GUIDED_TICK, ids.GUIDED_CURSOR, ids.GUIDED_REQUEST)):
        app.clientside_callback(ASK_WHEN_ANSWERED, Output(request, "data"), Input(tick, "n_intervals"), State(cursor, "data"),
                                State(request, "data"))

    # The watch's store is also its gate's cursor (the tick it answers) and
    # remembers the status line, which is sent only when it changes: this
    # runs twice a second, and each output costs the page its bookkeeping.
    @app.callback(
        Output(ids.DIAGNOSE_WATCH, "data"),
        Output(ids.DIAGNOSE_ASK, "data"),
        Output(ids.DIAGNOSE_STATUS, "children"),
        Input(ids.DIAGNOSE_REQUEST, "data"),
        State(ids.ROBOT, "value"),
        State(ids.DIAGNOSE_WATCH, "data"),
        State(ids.DIAGNOSE_ANSWER, "data"),
        State(ids.VIEW_ID, "data"),
    )
    def watch_disagreement(request, robot, data, answer, view_id):
        tick = (request or {}).get("tick") or 0
        data = data or {}
        watch, ask, status = _watch(station.tab(view_id), settings, tick, robot, data.get("watch"), answer)
        store = {"watch": data.get("watch") if watch is None else watch, "tick": tick, "status": status}
        return store, (no_update if ask is None else ask), (no_update if status == data.get("status") else status)

    @app.callback(
        Output(ids.DIAGNOSE_RESULT, "children"),
        Output(ids.DIAGNOSE_ANSWER, "data"),
        Output(ids.DIAGNOSE_SUGGESTION, "data"),
        Output(ids.DIAGNOSE_TRY, "className"),
        Input(ids.DIAGNOSE_RUN, "n_clicks"),
        Input(ids.DIAGNOSE_ASK, "data"),
        State(ids.ROBOT, "value"),
        State(ids.DIAGNOSE_SECONDS, "value"),
        State(ids.VIEW_ID, "data"),
        prevent_initial_call=True,
    )
    def diagnose_now(_clicks, ask, robot, seconds, view_id):
        # A press merged with an ask into one call (pacing.triggered_ids) is the person's run.
        asked = ids.DIAGNOSE_RUN not in triggered_ids()
        if asked and not ask:
            # The page calls this as it starts, with no ask in it (none has been made):
            # nothing to run, and the panel keeps what it says.
            return no_update, no_update, no_update, no_update
        robot = ask["robot"] if asked else robot
        how, reason = ("ran by itself", f"the disagreement passed {_limits_text(settings)}") if asked else ("ran on request", "")
        result, confidence, suggested = run_diagnosis(station.tab(view_id), robot, seconds or settings.diagnose_s, how,
                                                      reason)
        # Whatever triggered it, this run answers the latest ask: it saw the newest samples.
        return (result, {"n": (ask or {}).get("n"), "confidence": confidence}, suggested,
                "button" if suggested else "button hidden")

    @app.callback(
        Output(ids.GUIDED_RUN, "data"),
        Output(ids.GUIDED_START, "disabled"),
        Output(ids.GUIDED_FINISH, "disabled"),
        Output(ids.GUIDED_TICK, "disabled"),
        Input(ids.GUIDED_START, "n_clicks"),
        Input(ids.GUIDED_FINISH, "n_clicks"),
        State(ids.ROBOT, "value"),
        State(ids.GUIDED_RUN, "data"),
        State(ids.VIEW_ID, "data"),
        prevent_initial_call=True,
    )
    def guided_buttons(_start, _finish, robot, run, view_id):
        if ctx.triggered_id == ids.GUIDED_START:
            shown = station.tab(view_id)
            since = shown.latest_rx(robot) if robot else None
            return {"robot": robot, "key": shown.key(), "since_rx": since, "finished": False}, True, False, False
        if not run:
            return no_update, False, True, True
        return {**run, "finished": True}, False, True, True

    @app.callback(
        Output(ids.GUIDED_STEPS, "children"),
        Output(ids.GUIDED_CURSOR, "data"),
        Input(ids.GUIDED_RUN, "data"),
        Input(ids.GUIDED_REQUEST, "data"),
        State(ids.VIEW_ID, "data"),
    )
    def guided_progress(run, request, view_id):
        return (guided_panel(station.tab(view_id), run) if run else no_update), {"tick": (request or {}).get("tick")}
