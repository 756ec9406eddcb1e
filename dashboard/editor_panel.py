"""The profile editor panel: try a profile change on the session on screen, and see it at once.

Owns the panel's components and callbacks: the form (editor_form.py), the
tab's edits kept in the page's own store (editor_state.py: the server never
holds them, so no other tab and nothing the receiver records sees them), the
redraw of the session recomputed with the edited profile beside the loaded
one (editor_draw.py), Undo, Reset, the integration method, "Download
profile", and the Diagnosis panel's suggested profile taken in one click.
A recording is recomputed whole on each edit; a live window on each edit and
every FOLLOW_MS while the editor is open. ``card`` goes into the page's
grid; ``register`` is called from ``create_app``.
"""

from __future__ import annotations

import math
import time
from pathlib import Path
from typing import Any, Callable

from dash import ALL, Dash, Input, Output, State, ctx, dcc, html, no_update

from dashboard import editor_form, ids
from dashboard.editor_draw import EditorDraw, draw_editor
from dashboard.editor_state import EditorState, field_text, field_values, profile_signature
from dashboard.settings import Settings
from dashboard.tabs import Station
from dashboard.workbench_session import LoadedResults, Session, session_of
from receiver.analysis.compare import RunRow
from receiver.errors import PodwatchError, ProfileError
from receiver.formats.profile_toml import profile_from_table
from receiver.formats.profile_writer import profile_text, write_profile_preserving
from receiver.odometry.integrate import METHODS
from receiver.odometry.robot import Profile

FOLLOW_MS = 2000  # a live session's edited recompute follows new samples this often while the editor is open
# ... but a follow that cost more skips ticks: at most this share of the server's time per
# tab (600 s of a 1 kHz robot take about 0.3 s a redraw; the receiver shares the process).
FOLLOW_SHARE = 0.1
FIELDS = {"type": ids.EDITOR_FIELD, "key": ALL}
OPEN, CLOSED = "editor-body", "editor-body hidden"


def card(settings: Settings, graph: Callable[[str], html.Div]) -> html.Section:
    """The editor's card, closed; ``graph`` makes a graph box in the page's look (layout.py)."""
    return html.Section(className="card wide editor", children=[
        html.H2("Profile editor"),
        html.Div(className="panel-controls", children=[
            html.Button("Open editor", id=ids.EDITOR_OPEN, n_clicks=0, className="button"),
            html.Span("try a profile change on the session on screen; the receiver and other tabs never see it",
                      className="panel-status"),
            html.Span(id=ids.EDITOR_MESSAGE, className="panel-status editor-message"),
        ]),
        html.Div(id=ids.EDITOR_BODY, className=CLOSED, children=[
            html.Div(className="panel-controls", children=[
                dcc.Dropdown(id=ids.EDITOR_METHOD, options=[{"label": f"podwatch integrates: {m}", "value": m} for m in METHODS],
                             value=METHODS[0], clearable=False, searchable=False, className="editor-method"),
                html.Button("Undo", id=ids.EDITOR_UNDO, n_clicks=0, className="button"),
                html.Button("Reset to loaded profile", id=ids.EDITOR_RESET, n_clicks=0, className="button"),
                html.Button("Download profile", id=ids.EDITOR_DOWNLOAD, n_clicks=0, className="button"),
                html.Span(id=ids.EDITOR_WHAT, className="panel-status"),
            ]),
            html.Div(className="editor-columns", children=[
                html.Div(id=ids.EDITOR_FORM, className="editor-form-box"),
                html.Div(className="editor-results", children=[
                    html.Div(id=ids.EDITOR_NUMBERS),
                    html.Pre(id=ids.EDITOR_OPTIONS, className="profile-change"),
                ]),
            ]),
            html.Div(className="pair editor-graphs", children=[graph(ids.EDITOR_TRACK), graph(ids.EDITOR_ERRORS)]),
        ]),
        dcc.Download(id=ids.EDITOR_FILE),
        dcc.Interval(id=ids.EDITOR_TICK, interval=FOLLOW_MS, n_intervals=0, disabled=True),
        dcc.Store(id=ids.EDITOR, data=None),
        dcc.Store(id=ids.EDITOR_CURSOR, data=None),
        dcc.Store(id=ids.EDITOR_FORM_FOR, data=None),
    ])


def take_triggers(
    state: EditorState, loaded: Profile, triggers: list[Any], values: dict[str, Any], method: str | None,
    suggestion: dict | None,
) -> tuple[EditorState, str, bool]:
    """The state after the triggers, in the order the page saw them; the message (a refused
    edit's reason, or ""); and whether every field must show the new values (False after
    a field's own edit: the person's text stays as typed)."""
    message, refresh = "", False
    for trigger in triggers:
        try:
            if trigger == ids.EDITOR_UNDO:
                state, refresh = state.undo(), True
            elif trigger == ids.EDITOR_RESET:
                state, refresh = state.reset(), True
            elif trigger == ids.EDITOR_METHOD and method in METHODS:
                state = state.with_method(method)
            elif trigger == ids.DIAGNOSE_TRY:
                state, message = _suggested(state, loaded, suggestion)
                refresh = True
            elif isinstance(trigger, dict) and trigger.get("type") == ids.EDITOR_FIELD:
                key = trigger["key"]
                before = field_values(state.profile(loaded))
                if key in before and field_text(values.get(key)) != field_text(before[key]):
                    state = state.with_field(loaded, key, field_text(values.get(key)))
        except ProfileError as exc:
            message = f"not changed: {exc.key}: {exc.problem}"
    return state, message, refresh


def field_updates(keys: list[str], shown: dict[str, Any], values: dict[str, Any], triggers: list[Any],
                  refresh: bool) -> list[Any]:
    """What to write into each field (``keys`` in the page's order, ``shown`` as it holds them):
    every new value after ``refresh``; else only fields that now differ (a unit change converts
    every length), and never the field being typed into, whose text stays as typed."""
    def update(key: str) -> Any:
        if key not in values:
            return no_update
        new = field_text(values[key])
        typed = {"type": ids.EDITOR_FIELD, "key": key} in triggers
        return new if refresh or (new != field_text(shown.get(key)) and not typed) else no_update
    return [update(key) for key in keys]


def _suggested(state: EditorState, loaded: Profile, suggestion: dict | None) -> tuple[EditorState, str]:
    if not suggestion or suggestion.get("robot") != state.robot:
        return state, "the diagnosis is of another robot: diagnose this one first"
    if suggestion.get("loaded") != profile_signature(loaded):
        return state, "the diagnosis was made with another profile: diagnose again"
    corrected = profile_from_table(suggestion["corrected"], "the diagnosis")
    return state.with_profile(loaded, corrected), "the diagnosis's suggested profile, as edits"


def numbers_table(draw: EditorDraw) -> html.Table:
    """The loaded and the edited run side by side: final, worst, growth (each with its unit)."""
    def cells(row: RunRow) -> list[html.Td]:
        unit, g = row.profile.distance_unit, row.growth
        return [html.Td(text) for text in (
            _quote(row.final_position, unit, 3), _quote(row.final_heading_deg, "deg", 2),
            _quote(row.worst_position, unit, 3), _quote(row.worst_heading_deg, "deg", 2),
            _quote(g.position_per_m, f"{unit}/m", 2), _quote(g.heading_per_turn_deg, "deg/turn", 2),
        )]
    head = ["", "final", "final heading", "worst", "worst heading", "growth", "heading growth"]
    return html.Table(className="editor-numbers", children=[
        html.Thead(html.Tr([html.Th(h) for h in head])),
        html.Tbody([
            html.Tr([html.Td("loaded profile", className="run-loaded"), *cells(draw.loaded)]),
            html.Tr([html.Td("edited profile", className="run-edited"), *cells(draw.edited)]),
        ]),
    ])


def _quote(value: float, unit: str, digits: int) -> str:
    return f"{value:.{digits}f} {unit}" if math.isfinite(value) else f"\u2014 {unit}"


def command_line(state: EditorState, session: Session, profile_file: Path | None) -> str:
    """The `podwatch recompute` line that gives the edited run (for a recording), or the options alone."""
    options = state.options()
    if not options:
        return "no changes: the loaded profile" + (f" from {profile_file}" if profile_file else "")
    given = f" --profile {profile_file}" if profile_file else ""
    if session.recording is not None:
        return f"podwatch recompute {Path(session.recording).name}{given} {options}"
    return f"as options of podwatch recompute, diagnose, calibrate or compare: {options}"


def profile_file_text(edited: Profile, source: Path | None, shown: str) -> tuple[str, str]:
    """The edited profile as the file to download, and a line for the page: written into the
    user's own ``source`` file, comments, order and integer types kept (as --write-profile
    does); a clean commented file for a profile from a recording (``shown``) or a file that
    cannot be read any more."""
    if source is not None:
        try:
            return write_profile_preserving(source, edited), ""
        except (PodwatchError, OSError, ValueError) as exc:
            note = f"{source} could not be read ({exc}): the download is a clean file"
    else:
        note = ""
    header = f"Robot profile of {edited.name}, edited on the podwatch page from {source or shown}."
    return profile_text(edited, header), note


def triggers_seen() -> list[Any]:
    """Every input that triggered the running callback, first seen first (as pacing.triggered_ids),
    a field by its pattern-matching id (a dict)."""
    seen: list[Any] = []
    for trigger in ctx.triggered_prop_ids.values():
        if trigger not in seen:
            seen.append(trigger)
    return seen


def register(app: Dash, station: Station, settings: Settings) -> None:
    """Wire the editor panel to ``station``; call once, from ``create_app``."""
    loaded_results = LoadedResults()

    @app.callback(
        Output(ids.EDITOR_BODY, "className"), Output(ids.EDITOR_OPEN, "children"), Output(ids.EDITOR_TICK, "disabled"),
        Input(ids.EDITOR_OPEN, "n_clicks"), State(ids.EDITOR_BODY, "className"), prevent_initial_call=True,
    )
    def open_or_close(_clicks, shown):
        opening = "hidden" in (shown or "")
        return (OPEN if opening else CLOSED), ("Close editor" if opening else "Open editor"), not opening

    @app.callback(
        Output(ids.EDITOR, "data"),
        Output(FIELDS, "value"),
        Output(ids.EDITOR_METHOD, "value"),
        Output(ids.EDITOR_MESSAGE, "children"),
        Output(ids.EDITOR_BODY, "className", allow_duplicate=True),
        Output(ids.EDITOR_OPEN, "children", allow_duplicate=True),
        Output(ids.EDITOR_TICK, "disabled", allow_duplicate=True),
        Input(FIELDS, "value"),
        Input(ids.EDITOR_UNDO, "n_clicks"),
        Input(ids.EDITOR_RESET, "n_clicks"),
        Input(ids.EDITOR_METHOD, "value"),
        Input(ids.DIAGNOSE_TRY, "n_clicks"),
        State(ids.EDITOR, "data"),
        State(ids.ROBOT, "value"),
        State(ids.VIEW_ID, "data"),
        State(ids.DIAGNOSE_SUGGESTION, "data"),
        prevent_initial_call=True,
    )
    def edit(values, _undo, _reset, method, _try, data, robot, view_id, suggestion):
        keys = [item["id"]["key"] for item in ctx.outputs_list[1]]
        shown = dict(zip(keys, values))
        fields = [no_update] * len(keys)
        loaded = station.tab(view_id).profile(robot)
        if loaded is None:
            return no_update, fields, no_update, "no profile for this robot: nothing to edit", *[no_update] * 3
        state = EditorState.from_store(data, robot)
        try:
            state.profile(loaded)
        except ProfileError:
            state = EditorState(robot)  # edits made for another profile of this robot
        triggers = triggers_seen()
        state, message, refresh = take_triggers(state, loaded, triggers, shown, method, suggestion)
        fields = field_updates(keys, shown, field_values(state.profile(loaded)), triggers, refresh)
        opened = (OPEN, "Close editor", False) if ids.DIAGNOSE_TRY in triggers else (no_update,) * 3
        return (state.to_store(), fields, state.now.method if state.now.method != method else no_update, message,
                *opened)

    @app.callback(
        Output(ids.EDITOR_TRACK, "figure"),
        Output(ids.EDITOR_ERRORS, "figure"),
        Output(ids.EDITOR_NUMBERS, "children"),
        Output(ids.EDITOR_OPTIONS, "children"),
        Output(ids.EDITOR_WHAT, "children"),
        Output(ids.EDITOR_CURSOR, "data"),
        Output(ids.EDITOR_FORM_FOR, "data"),
        Input(ids.EDITOR, "data"),
        Input(ids.EDITOR_TICK, "n_intervals"),
        Input(ids.EDITOR_BODY, "className"),
        Input(ids.ROBOT, "value"),
        Input(ids.WINDOW, "value"),
        State(ids.VIEW_ID, "data"),
        State(ids.EDITOR_CURSOR, "data"),
        State(ids.EDITOR_FORM_FOR, "data"),
    )
    def redraw(data, _tick, body, robot, window_s, view_id, cursor, form_for):
        nothing = (no_update,) * 7
        if "hidden" in (body or CLOSED):
            return nothing
        view = station.tab(view_id)
        session = session_of(view, robot, float(window_s or settings.window_s))
        if isinstance(session, str):
            return no_update, no_update, None, "", session, None, no_update
        state = EditorState.from_store(data, robot)
        note = ""
        try:
            profile = state.profile(session.loaded)
        except ProfileError as exc:
            state, profile, note = EditorState(robot), session.loaded, f" (the edits do not fit this profile: {exc})"
        signature = profile_signature(session.loaded)
        new_cursor = {"key": f"{view.key()}|{robot}|{signature}", "now": state.to_store()["now"]}
        same = bool(cursor) and all(cursor.get(k) == v for k, v in new_cursor.items())
        if same and session.whole:
            return nothing  # a recording, drawn already with these edits
        started = time.monotonic()
        if same and triggers_seen() == [ids.EDITOR_TICK] and started - cursor["at"] < cursor["cost"] / FOLLOW_SHARE:
            return nothing  # following live, but the last redraw was dear: this tick is skipped
        try:
            draw = draw_editor(session, loaded_results.of(session), profile, state.now.method, settings.field_size_m,
                               settings.points)
        except PodwatchError as exc:
            return no_update, no_update, None, "", f"cannot recompute: {exc}", None, no_update
        new_cursor.update(at=started, cost=time.monotonic() - started)
        form = {"robot": robot, "loaded": signature}
        what = f"{draw.samples} samples: {session.what}{note}"
        options = command_line(state, session, station.profile_file(session.loaded))
        return (draw.track, draw.disagreement, numbers_table(draw), options, what, new_cursor,
                no_update if form == form_for else form)

    @app.callback(
        Output(ids.EDITOR_FORM, "children"),
        Input(ids.EDITOR_FORM_FOR, "data"),
        State(ids.EDITOR, "data"),
        State(ids.VIEW_ID, "data"),
        prevent_initial_call=True,
    )
    def build_form(form_for, data, view_id):
        loaded = station.tab(view_id).profile(form_for["robot"]) if form_for else None
        if loaded is None:
            return None
        state = EditorState.from_store(data, form_for["robot"])
        try:
            shown = state.profile(loaded)
        except ProfileError:
            shown = loaded
        return editor_form.form(loaded, shown)

    @app.callback(
        Output(ids.EDITOR_FILE, "data"),
        Output(ids.EDITOR_MESSAGE, "children", allow_duplicate=True),
        Input(ids.EDITOR_DOWNLOAD, "n_clicks"),
        State(ids.EDITOR, "data"),
        State(ids.ROBOT, "value"),
        State(ids.VIEW_ID, "data"),
        prevent_initial_call=True,
    )
    def download(_clicks, data, robot, view_id):
        view = station.tab(view_id)
        loaded = view.profile(robot)
        if loaded is None:
            return no_update, "no profile for this robot: nothing to download"
        try:
            edited = EditorState.from_store(data, robot).profile(loaded)
        except ProfileError as exc:
            return no_update, f"cannot download: {exc}"
        text, note = profile_file_text(edited, station.profile_file(loaded), view.label)
        return {"content": text, "filename": f"{edited.name}.toml"}, note
