"""The "What the loop rate costs" panel: Euler and midpoint against arc on the session's own counts.

Owns the panel's components and its one callback: on request, the session
on screen (workbench_session.py: a recording whole, or the live window) is
integrated three ways with the profile in the editor (the loaded one when
unedited), and the page shows how far Euler and midpoint drift from the arc
over time and per metre driven by loop period (analysis/loop_cost.py), so a
team sees what a slow loop costs a robot code that integrates simply.
``card`` goes into the page's grid; ``register`` is called from ``create_app``.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
from dash import Dash, Input, Output, State, html, no_update

from dashboard import ids
from dashboard.downsample import pick_rows
from dashboard.editor_draw import session_time
from dashboard.editor_state import EditorState
from dashboard.settings import Settings
from dashboard.tabs import Station
from dashboard.workbench_figures import loop_cost_by_period, loop_cost_over_time
from dashboard.workbench_session import Session, session_of
from receiver.analysis.loop_cost import LoopCost, loop_cost
from receiver.errors import PodwatchError, ProfileError
from receiver.odometry.recompute import Tracker
from receiver.odometry.robot import Profile


def card(graph: Callable[[str], html.Div]) -> html.Section:
    """The panel's card; ``graph`` makes a graph box in the page's look (layout.py)."""
    return html.Section(className="card wide", children=[
        html.H2("What the loop rate costs"),
        html.Div(className="panel-controls", children=[
            html.Button("Compare Euler, midpoint and arc", id=ids.LOOP_COST_RUN, n_clicks=0, className="button"),
            html.Span("the same counts integrated three ways: what a robot code that integrates simply loses "
                      "at its loop rate", id=ids.LOOP_COST_STATUS, className="panel-status"),
        ]),
        # Shown once there is something to show.
        html.Div(id=ids.LOOP_COST_GRAPHS, className="pair hidden",
                 children=[graph(ids.LOOP_COST_OVER_TIME), graph(ids.LOOP_COST_BY_PERIOD)]),
    ])


def summary(cost: LoopCost, what: str) -> str:
    """One line: the steps, the loop period, and each method's distance from the arc at the end
    and per metre over the whole session (units given)."""
    known = np.isfinite(cost.step_s)
    travel_m = float(cost.bins.travel_m.sum())
    unit = cost.unit
    parts = [f"{int(known.sum())} steps of {np.mean(cost.step_s[known]) * 1000:.1f} ms on average ({what})"
             if known.any() else f"no steps ({what})"]
    for name, gap, step in (("Euler", cost.euler_gap, cost.euler_step), ("midpoint", cost.midpoint_gap, cost.midpoint_step)):
        per_m = float(step[known].sum()) / travel_m if travel_m > 0 else float("nan")
        parts.append(f"{name} ends {gap[-1]:.3f} {unit} from arc ({per_m:.4f} {unit} per metre driven)")
    return "; ".join(parts)


def cost_of(session: Session, profile: Profile, points: int) -> tuple[dict, dict, str]:
    """(over time, by period, summary line) for ``session`` integrated with ``profile``."""
    arc = Tracker(profile).feed(session.columns)
    cost = loop_cost(session.columns, profile, arc=arc)
    t = session_time(arc)
    rows = pick_rows(t, [cost.euler_gap, cost.midpoint_gap], points)
    return (loop_cost_over_time(t[rows], cost.euler_gap[rows], cost.midpoint_gap[rows], cost.unit),
            loop_cost_by_period(cost.bins, cost.unit), summary(cost, session.what))


def register(app: Dash, station: Station, settings: Settings) -> None:
    """Wire the panel to ``station``; call once, from ``create_app``."""

    @app.callback(
        Output(ids.LOOP_COST_OVER_TIME, "figure"),
        Output(ids.LOOP_COST_BY_PERIOD, "figure"),
        Output(ids.LOOP_COST_STATUS, "children"),
        Output(ids.LOOP_COST_GRAPHS, "className"),
        Input(ids.LOOP_COST_RUN, "n_clicks"),
        State(ids.ROBOT, "value"),
        State(ids.WINDOW, "value"),
        State(ids.EDITOR, "data"),
        State(ids.VIEW_ID, "data"),
        prevent_initial_call=True,
    )
    def compute(_clicks, robot, window_s, editor, view_id):
        session = session_of(station.tab(view_id), robot, float(window_s or settings.window_s))
        if isinstance(session, str):
            return no_update, no_update, session, no_update
        try:
            profile = EditorState.from_store(editor, robot).profile(session.loaded)
            edited = " with the editor's profile" if profile != session.loaded else ""
        except ProfileError:
            profile, edited = session.loaded, ""
        try:
            over_time, by_period, line = cost_of(session, profile, settings.points)
        except PodwatchError as exc:
            return no_update, no_update, f"cannot integrate: {exc}", no_update
        return over_time, by_period, line + edited, "pair"
