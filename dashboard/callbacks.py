"""The page's callbacks: read the inputs, ask the station, hand over what view.py built.

Owns the wiring between component ids and the station; each callback is a
few lines. Errors a user can cause (a bad recording path) become one line on
the page, never a traceback.
"""

from __future__ import annotations

import math

from dash import Dash, Input, Output, State, ctx, no_update

from dashboard import ids, layout, view
from dashboard.settings import Settings
from dashboard.sources import Station
from receiver.errors import PodwatchError

VIEWS = (("track", ids.TRACK), ("poses", ids.POSES), ("errors", ids.ERRORS), ("loop", ids.LOOP))
DISAGREEMENT_IDS = (ids.POSITION_NOW, ids.POSITION_WORST, ids.POSITION_GROWTH, ids.HEADING_NOW, ids.HEADING_WORST,
                    ids.HEADING_GROWTH)
LOOP_IDS = (ids.LOOP_RATE, ids.LOOP_MEAN, ids.LOOP_P95, ids.LOOP_MAX, ids.LOOP_LONG, ids.JITTER)


# A tick asks for an update only once the previous one has been answered, so
# that a slow browser or server never piles up requests (Dash drops the answer
# to a request that a newer one overtook, and the page would stand still).
# After STALL_TICKS unanswered ticks it asks again anyway.
STALL_TICKS = 25
GATE = f"""
function(n, cursor, request) {{
    if (!request || (cursor && cursor.tick === request.tick) || n - request.tick > {STALL_TICKS}) {{
        return {{tick: n || 0, at: Date.now()}};
    }}
    return window.dash_clientside.no_update;
}}
"""
# The views do not wait for the next tick once an update is answered: the
# answer moves the tick on at once (the gate then asks), though no sooner
# than MIN_GAP_MS after the previous request. A tick that came 0-200 ms
# after the answer cost the page a fifth of its refreshes when drawing took
# a little over one tick.
MIN_GAP_MS = 100
NEXT = f"""
function(cursor, request, n, paused) {{
    if (paused || !cursor || !request || cursor.tick !== request.tick) {{ return; }}
    const wait = Math.max(0, {MIN_GAP_MS} - (Date.now() - (request.at || 0)));
    setTimeout(() => window.dash_clientside.set_props("{ids.TICK}", {{n_intervals: n + 1}}), wait);
}}
"""
# The link table and the status line change with every message counted;
# redrawing them once a second is live enough and spares the page rebuilding
# a table of 20-60 components at every refresh.
SLOW_TEXTS_S = 1.0
# The replay bar asks for its position only while it is shown: no request per tick when live.
REPLAY_GATE = """
function(request, barClass) {
    return (barClass || "").includes("hidden") ? window.dash_clientside.no_update : request;
}
"""


def register(app: Dash, station: Station, settings: Settings) -> None:
    view_outputs = [Output(cid, prop) for _, cid in VIEWS for prop in ("figure", "extendData")]
    app.clientside_callback(
        GATE, Output(ids.REQUEST, "data"), Input(ids.TICK, "n_intervals"), State(ids.CURSOR, "data"),
        State(ids.REQUEST, "data"),
    )
    app.clientside_callback(
        NEXT, Input(ids.CURSOR, "data"), State(ids.REQUEST, "data"), State(ids.TICK, "n_intervals"),
        State(ids.TICK, "disabled"),
    )
    app.clientside_callback(
        REPLAY_GATE, Output(ids.REPLAY_REQUEST, "data"), Input(ids.REQUEST, "data"), State(ids.REPLAY_BAR, "className"),
    )

    @app.callback(
        *view_outputs,
        Output(ids.LOOP_HISTOGRAM, "figure"),
        *[Output(cid, "children") for cid in DISAGREEMENT_IDS + LOOP_IDS],
        Output(ids.LINK_TABLE, "children"),
        Output(ids.STATUS, "children"),
        Output(ids.CURSOR, "data"),
        Output(ids.ROBOT, "options"),
        Output(ids.ROBOT, "value"),
        Input(ids.REQUEST, "data"),
        Input(ids.ROBOT, "value"),
        Input(ids.WINDOW, "value"),
        State(ids.CURSOR, "data"),
        State(ids.ROBOT, "options"),
    )
    def update_views(request, robot, window_s, cursor, options):
        r = view.refresh(station, settings, robot, float(window_s), cursor)
        r.cursor["tick"] = (request or {}).get("tick")
        fresh = [{"label": name, "value": name} for name in r.robots]
        views = [v for name, _ in VIEWS for v in (r.figures.get(name, no_update), r.extensions.get(name, no_update))]
        snap = r.snapshots.get(robot)
        jitter_s = snap.jitter_s if snap is not None else float("nan")
        texts = layout.disagreement_values(r.disagreement, r.unit) + layout.loop_values(r.loop, jitter_s)
        r.cursor["texts"] = texts
        # Only the readouts that changed: each text sent costs the page a round of its bookkeeping.
        shown = (cursor or {}).get("texts") or [None] * len(texts)
        texts_out = [no_update if text == old else text for text, old in zip(texts, shown)]
        slow_at = (cursor or {}).get("slow_at", -math.inf)
        slow = bool(r.figures) or not 0.0 <= r.now - slow_at < SLOW_TEXTS_S
        r.cursor["slow_at"] = r.now if slow else slow_at
        table = layout.link_table(r.snapshots, r.now, robot, r.unattributed) if slow else no_update
        status = r.status if slow else no_update
        histogram = no_update if r.histogram is None else r.histogram
        robot_out = (no_update if fresh == options else fresh), (no_update if r.robot == robot else r.robot)
        return (*views, histogram, *texts_out, table, status, r.cursor, *robot_out)

    @app.callback(
        Output(ids.TICK, "disabled"),
        Output(ids.FOLLOW, "children"),
        Input(ids.FOLLOW, "n_clicks"),
    )
    def follow(clicks):
        paused = bool(clicks) and clicks % 2 == 1
        return paused, ("Follow" if paused else "Pause page")

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
    )
    def replay_controls(_play, _pause, speed, scrub, _tick):
        replay = station.replay
        if replay is None:
            return no_update, no_update, "", "replay-bar hidden", "button hidden"
        trigger = ctx.triggered_id
        if trigger == ids.PLAY:
            replay.play()
        elif trigger == ids.PAUSE:
            replay.pause()
        elif trigger == ids.SPEED and speed:
            replay.set_speed(float(speed))
        elif trigger == ids.SCRUB and scrub is not None:
            replay.seek(float(scrub))
        state = "playing" if replay.playing else "paused"
        text = f"{replay.position_s:.1f} s of {replay.duration_s:.1f} s, {state} at {replay.speed:g}\u00d7"
        back = "button" if station.live is not None else "button hidden"
        return round(replay.position_s, 1), round(replay.duration_s, 1), text, "replay-bar", back

    @app.callback(
        Output(ids.MESSAGE, "children"),
        Output(ids.REPLAY_BAR, "className", allow_duplicate=True),
        Input(ids.OPEN, "n_clicks"),
        Input(ids.BACK_TO_LIVE, "n_clicks"),
        State(ids.RECORDING_PATH, "value"),
        prevent_initial_call=True,
    )
    def open_recording(_open, _back, path):
        if ctx.triggered_id == ids.BACK_TO_LIVE:
            if station.show_live():
                return "showing the live receiver", "replay-bar hidden"
            return "no live receiver in this run", no_update
        if not path or not path.strip():
            return "type the path of a recording first", no_update
        try:
            return station.open(path.strip()), "replay-bar"
        except PodwatchError as exc:
            return f"cannot open: {exc}", no_update
        except OSError as exc:
            return f"cannot open {path.strip()}: {exc.strerror or exc}", no_update
