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
READOUT_IDS = DISAGREEMENT_IDS + LOOP_IDS


# A tick asks for an update only once the previous one has been answered, so
# that a slow browser or server never piles up requests (Dash drops the answer
# to a request that a newer one overtook, and the page would stand still).
# After STALL_TICKS unanswered ticks it asks again anyway. The diagnosis and
# guided-check panels tick through this gate.
STALL_TICKS = 25
GATE = f"""
function(n, cursor, request) {{
    if (!request || (cursor && cursor.tick === request.tick) || n - request.tick > {STALL_TICKS}) {{
        return {{tick: n || 0, at: Date.now()}};
    }}
    return window.dash_clientside.no_update;
}}
"""
# The views are paced by their answers instead (NEXT): each answer asks for
# the next update at once, though no sooner than MIN_GAP_MS after the
# previous request, without a tick in between (a tick and its gate cost the
# page a callback run's bookkeeping per update). Their interval is a
# watchdog: it asks when nothing is on its way, on the page's start, on
# Follow after Pause page, and STALL_MS after a request whose answer never
# came. The replay bar asks for its position with every request, while the
# bar is shown (no request per tick when live).
MIN_GAP_MS = 100
RESUME_MS = 1000  # more than MIN_GAP_MS: an answered request this old has no next one coming
STALL_MS = 10_000
_ASK = """
    const ask = {tick: (request ? request.tick : 0) + 1, at: Date.now()};
    const replaying = !(barClass || "").includes("hidden");
"""
WATCHDOG = f"""
function(n, cursor, request, barClass) {{
    const age = request ? Date.now() - (request.at || 0) : Infinity;
    const answered = !request || (cursor && cursor.tick === request.tick);
    if (!(answered ? age > {RESUME_MS} : age > {STALL_MS})) {{
        return [window.dash_clientside.no_update, window.dash_clientside.no_update];
    }}
    {_ASK.strip()}
    return [ask, replaying ? ask : window.dash_clientside.no_update];
}}
"""
# Each answer also paints texts (cursor["paint"]: readouts, status line, link
# table) straight into their elements, which hold no children for React: sent
# as components' children, every text cost the page a round of Dash's
# bookkeeping (which runs over every component on the page), and every cell of
# a rebuilt link table one more. Every answer carries every readout (a few
# hundred bytes), not only those that changed: Dash may run this function once
# for two answers that came close together, and the first one's texts would
# be lost for as long as they did not change. The page skips unchanged texts.
NEXT = f"""
function(cursor, request, paused, barClass) {{
    const paint = (cursor && cursor.paint) || {{}};
    for (const [id, text] of Object.entries(paint.text || {{}})) {{
        const element = document.getElementById(id);
        if (element && element.textContent !== text) {{ element.textContent = text; }}
    }}
    for (const [id, markup] of Object.entries(paint.html || {{}})) {{
        const element = document.getElementById(id);
        if (element) {{ element.innerHTML = markup; }}
    }}
    if (paused || !cursor || !request || cursor.tick !== request.tick) {{ return; }}
    const next = () => {{
        {_ASK.strip()}
        window.dash_clientside.set_props("{ids.REQUEST}", {{data: ask}});
        if (replaying) {{ window.dash_clientside.set_props("{ids.REPLAY_REQUEST}", {{data: ask}}); }}
    }};
    const wait = {MIN_GAP_MS} - (Date.now() - (request.at || 0));
    if (wait > 0) {{ setTimeout(next, wait); }} else {{ next(); }}
}}
"""
# The link table and the status line change with every message counted;
# painting them once a second is live enough (and heals a lost paint within
# a second).
SLOW_TEXTS_S = 1.0


def triggered_ids() -> list[str]:
    """The ids of every input that triggered the running callback, first seen first.

    Dash merges the triggers of calls of one callback that wait in the page
    at once into one call; each of them must count.
    """
    return list(dict.fromkeys(ctx.triggered_prop_ids.values()))


def register(app: Dash, station: Station, settings: Settings) -> None:
    view_outputs = [Output(cid, prop) for _, cid in VIEWS for prop in ("figure", "extendData")]
    app.clientside_callback(
        WATCHDOG, Output(ids.REQUEST, "data"), Output(ids.REPLAY_REQUEST, "data"), Input(ids.TICK, "n_intervals"),
        State(ids.CURSOR, "data"), State(ids.REQUEST, "data"), State(ids.REPLAY_BAR, "className"),
    )
    # Not outputs but set_props: Dash drops a callback that its own outputs
    # triggered again through a chain (NEXT -> request -> update -> cursor -> NEXT).
    app.clientside_callback(
        NEXT, Input(ids.CURSOR, "data"), State(ids.REQUEST, "data"), State(ids.TICK, "disabled"),
        State(ids.REPLAY_BAR, "className"),
    )

    @app.callback(
        *view_outputs,
        Output(ids.LOOP_HISTOGRAM, "figure"),
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
        paint = {"text": dict(zip(READOUT_IDS, texts)), "html": {}}
        slow_at = (cursor or {}).get("slow_at", -math.inf)
        if r.figures or not 0.0 <= r.now - slow_at < SLOW_TEXTS_S:
            r.cursor["slow_at"] = r.now
            paint["text"][ids.STATUS] = r.status
            paint["html"][ids.LINK_TABLE] = layout.link_table(r.snapshots, r.now, robot, r.unattributed)
        else:
            r.cursor["slow_at"] = slow_at
        r.cursor["paint"] = paint
        histogram = no_update if r.histogram is None else r.histogram
        robot_out = (no_update if fresh == options else fresh), (no_update if r.robot == robot else r.robot)
        return (*views, histogram, r.cursor, *robot_out)

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
        State(ids.SCRUB, "max"),
        State(ids.REPLAY_POSITION, "children"),
        State(ids.REPLAY_BAR, "className"),
        State(ids.BACK_TO_LIVE, "className"),
    )
    def replay_controls(_play, _pause, speed, scrub, _tick, *shown):
        replay = station.replay
        if replay is None:
            new = (no_update, no_update, "", "replay-bar hidden", "button hidden")
        else:
            # Every control that triggered this call, in the order the page saw
            # them: a click that comes while a tick's call of this callback still
            # waits in the page is merged into that call, and ctx.triggered_id
            # names only the first trigger (the tick), so the click was lost.
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
        # Only what changed. The slider above all: an answer that wrote the
        # position it already showed could land between the person's release
        # of the slider and the page's call for it, put the old value back
        # and the seek went to where the replay already was. (While playing
        # the slider moves with every answer, and that window stays open.)
        return tuple(no_update if value == old else value for value, old in zip(new, (scrub, *shown)))

    @app.callback(
        Output(ids.MESSAGE, "children"),
        Output(ids.REPLAY_BAR, "className", allow_duplicate=True),
        Output(ids.BACK_TO_LIVE, "className", allow_duplicate=True),
        Input(ids.OPEN, "n_clicks"),
        Input(ids.BACK_TO_LIVE, "n_clicks"),
        State(ids.RECORDING_PATH, "value"),
        prevent_initial_call=True,
    )
    def open_recording(_open, _back, path):
        # The last click counts when two were merged into one call.
        if triggered_ids()[-1:] == [ids.BACK_TO_LIVE]:
            if station.show_live():
                # The replay bar's callback, which shows this button, stops with the bar: hide it here.
                return "showing the live receiver", "replay-bar hidden", "button hidden"
            return "no live receiver in this run", no_update, no_update
        if not path or not path.strip():
            return "type the path of a recording first", no_update, no_update
        try:
            return station.open(path.strip()), "replay-bar", no_update
        except PodwatchError as exc:
            return f"cannot open: {exc}", no_update, no_update
        except OSError as exc:
            return f"cannot open {path.strip()}: {exc.strerror or exc}", no_update, no_update
