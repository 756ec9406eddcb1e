"""The page's callbacks: read the inputs, ask the station, hand over what view.py built.

Owns the wiring between component ids and the station; each callback is a
few lines. The recording opener's callbacks are in recording_opener.py.
"""

from __future__ import annotations

import math
import time

from dash import Dash, Input, Output, State, no_update

from dashboard import ids, readout_texts, view
from dashboard.pacing import PAINT_AND_ASK_NEXT, SHARE_TIME_AXIS, WATCHDOG, triggered_ids
from dashboard.settings import Settings
from dashboard.status import Badge
from dashboard.tabs import Station

VIEWS = (("track", ids.TRACK), ("poses", ids.POSES), ("errors", ids.ERRORS), ("loop", ids.LOOP),
         ("signals", ids.SIGNALS))
DISAGREEMENT_IDS = (ids.POSITION_NOW, ids.POSITION_WORST, ids.POSITION_GROWTH, ids.HEADING_NOW, ids.HEADING_WORST,
                    ids.HEADING_GROWTH, ids.GROWTH_STRETCH)
LOOP_IDS = (ids.LOOP_RATE, ids.LOOP_MEAN, ids.LOOP_P95, ids.LOOP_MAX, ids.LOOP_LONG, ids.JITTER)
READOUT_IDS = DISAGREEMENT_IDS + LOOP_IDS
# The link table changes with every message counted; painting it once a
# second is live enough (and heals a lost paint within a second).
SLOW_TEXTS_S = 1.0
wall_clock = time.monotonic  # what paces the link table (a test may replace it)


def register(app: Dash, station: Station, settings: Settings) -> None:
    """Wire ``app``'s views, readouts and replay bar to ``station``; call once, from ``create_app``.
    """
    view_outputs = [Output(cid, prop) for _, cid in VIEWS for prop in ("figure", "extendData")]
    app.clientside_callback(
        WATCHDOG, Output(ids.REQUEST, "data"), Output(ids.REPLAY_REQUEST, "data"), Input(ids.TICK, "n_intervals"),
        State(ids.CURSOR, "data"), State(ids.REQUEST, "data"), State(ids.REPLAY_BAR, "className"),
    )
    # Not outputs but set_props: Dash drops a callback that its own outputs
    # triggered again through a chain (PAINT_AND_ASK_NEXT -> request -> update -> cursor -> PAINT_AND_ASK_NEXT).
    app.clientside_callback(
        PAINT_AND_ASK_NEXT, Input(ids.CURSOR, "data"), State(ids.REQUEST, "data"), State(ids.TICK, "disabled"),
        State(ids.REPLAY_BAR, "className"),
    )

    app.clientside_callback(SHARE_TIME_AXIS, Input(ids.ERRORS, "relayoutData"), Input(ids.SIGNALS, "relayoutData"),
                            prevent_initial_call=True)

    @app.callback(
        *view_outputs,
        Output(ids.LOOP_HISTOGRAM, "figure"),
        Output(ids.CURSOR, "data"),
        Output(ids.ROBOT, "options"),
        Output(ids.ROBOT, "value"),
        Output(ids.SIGNAL_PICK, "options"),
        Output(ids.SIGNAL_PICK, "value"),
        Input(ids.REQUEST, "data"),
        Input(ids.ROBOT, "value"),
        Input(ids.WINDOW, "value"),
        Input(ids.SIGNAL_PICK, "value"),
        State(ids.CURSOR, "data"),
        State(ids.ROBOT, "options"),
        State(ids.SIGNAL_PICK, "options"),
        State(ids.VIEW_ID, "data"),
    )
    def update_views(request, robot, window_s, picked, cursor, options, signal_options, view_id):
        refreshed = view.refresh(station.tab(view_id), settings, robot, float(window_s), cursor, signals=picked)
        refreshed.cursor["tick"] = (request or {}).get("tick")
        fresh = [{"label": name, "value": name} for name in refreshed.robots]
        views = [
            v
            for name, _ in VIEWS
            for v in (refreshed.figures.get(name, no_update), refreshed.extensions.get(name, no_update))
        ]
        snap = refreshed.snapshots.get(robot)
        jitter_s = snap.jitter_s if snap is not None else float("nan")
        texts = readout_texts.disagreement_values(refreshed.disagreement, refreshed.unit)
        texts += readout_texts.loop_values(refreshed.loop, jitter_s)
        # The status line with every answer: a badge must change the moment its state does.
        paint = {"text": dict(zip(READOUT_IDS, texts)), "html": {ids.STATUS: refreshed.status.html()}}
        # Paced by the wall clock, not the source's: a replay's clock stands still when it ends.
        wall = wall_clock()
        slow_at = (cursor or {}).get("slow_at", -math.inf)
        if refreshed.figures or not 0.0 <= wall - slow_at < SLOW_TEXTS_S:
            refreshed.cursor["slow_at"] = wall
            paint["html"][ids.LINK_TABLE] = readout_texts.link_table(
                refreshed.snapshots, refreshed.now, robot, refreshed.unattributed, refreshed.problems + refreshed.notes
            )
        else:
            refreshed.cursor["slow_at"] = slow_at
        refreshed.cursor["paint"] = paint
        histogram = no_update if refreshed.histogram is None else refreshed.histogram
        robot_out = (
            no_update if fresh == options else fresh,
            no_update if refreshed.robot == robot else refreshed.robot,
        )
        names = refreshed.signal_names
        signal_out = [no_update, no_update]
        if names is not None and [o["value"] for o in signal_options or []] != names:
            signal_out[0] = [{"label": name, "value": name} for name in names]
        shown = refreshed.cursor.get("signals_shown")
        if refreshed.cursor.get("signals_picked") is None and shown and shown != picked:
            signal_out[1] = shown  # before a person picks, the picker shows what is drawn
        return (*views, histogram, refreshed.cursor, *robot_out, *signal_out)

    @app.callback(
        Output(ids.TICK, "disabled"),
        Output(ids.FOLLOW, "children"),
        Output(ids.PAGE_STATE, "className"),
        Output(ids.STATUS, "className"),
        Input(ids.FOLLOW, "n_clicks"),
    )
    def follow(clicks):
        # The badge is this callback's own: a paused page asks for no answer that could paint it.
        paused = bool(clicks) and clicks % 2 == 1
        if paused:
            return True, "Follow", f"badge {Badge.PAUSED.value}", "status-line held"
        return False, "Pause page", f"badge {Badge.PAUSED.value} hidden", "status-line"

    @app.callback(
        Output(ids.SCRUB, "value"),
        Output(ids.SCRUB, "max"),
        Output(ids.REPLAY_POSITION, "children"),
        Output(ids.REPLAY_BAR, "className"),
        Output(ids.BACK_TO_LIVE, "className"),
        Input(ids.PLAY, "n_clicks"),
        Input(ids.PAUSE, "n_clicks"),
        Input(ids.SPEED, "value"),
        Input(ids.SCRUB, "value"),
        Input(ids.REPLAY_REQUEST, "data"),
        State(ids.SCRUB, "max"),
        State(ids.REPLAY_POSITION, "children"),
        State(ids.REPLAY_BAR, "className"),
        State(ids.BACK_TO_LIVE, "className"),
        State(ids.VIEW_ID, "data"),
    )
    def replay_controls(_play, _pause, speed, scrub, _tick, *shown_and_view):
        *shown, view_id = shown_and_view
        replay = station.tab(view_id).replay
        if replay is None:
            new = (no_update, no_update, "", "replay-bar hidden", "button hidden")
        else:
            # Every control that triggered this call, in the order the page saw them:
            # the page merges a click into a tick's call still waiting, and
            # ctx.triggered_id would name only the first trigger.
            for control in triggered_ids():
                if control == ids.PLAY:
                    replay.play()
                elif control == ids.PAUSE:
                    replay.pause()
                elif control == ids.SPEED and speed:
                    replay.set_speed(float(speed))
                elif control == ids.SCRUB and scrub is not None:
                    replay.seek(float(scrub))
            state = "playing" if replay.playing else "paused"
            text = f"{replay.position_s:.1f} s of {replay.duration_s:.1f} s, {state} at {replay.speed:g}\u00d7"
            back = "button" if station.live is not None else "button hidden"
            new = (round(replay.position_s, 1), round(replay.duration_s, 1), text, "replay-bar", back)
        # Only what changed, the slider above all: rewriting the position it
        # already shows could land between a release of the slider and the
        # page's call for it, and undo the seek.
        return tuple(no_update if value == old else value for value, old in zip(new, (scrub, *shown)))
