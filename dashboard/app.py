"""The app factory: ``create_app(station)`` builds a Dash app around one station.

Owns the Dash object's settings (assets folder, title) and how a request
that fails is answered: one line to the client and one to the log, never a
traceback on the terminal. There is no app at module level: every caller,
test and command builds its own.
"""

from __future__ import annotations

import logging
import uuid
from pathlib import Path

from dash import Dash
from dash.exceptions import DependencyException
from flask import request
from werkzeug.exceptions import HTTPException

from dashboard import (
    callbacks,
    compare_panel,
    diagnosis_panel,
    editor_panel,
    layout,
    loop_cost_panel,
    recording_opener,
)
from dashboard.settings import Settings
from dashboard.tabs import Station

ASSETS = Path(__file__).resolve().parent / "assets"
log = logging.getLogger("podwatch.dashboard")
LOGGED_MOST = 20  # distinct failures logged, each once: a client that repeats one cannot flood the terminal


def create_app(station: Station, settings: Settings = Settings()) -> Dash:
    """A new Dash app showing ``station``: the layout, the views' callbacks, the
    diagnosis panels, the recording opener and the workbench (editor, loop cost, compare).
    Serve its ``.server`` (``server.start_dashboard`` does).
    """
    app = Dash(
        __name__,
        title="podwatch",
        update_title=None,  # no "Updating..." flicker in the tab five times a second
        assets_folder=str(ASSETS),
        serve_locally=True,  # every script from this server: the page works with no internet
    )
    # A function: every page load (a new tab, or a reload) builds its own view id.
    app.layout = lambda: layout.build(settings, replay_mode=station.live is None, view_id=uuid.uuid4().hex)
    callbacks.register(app, station, settings)
    diagnosis_panel.register(app, station, settings)
    recording_opener.register(app, station, settings)
    editor_panel.register(app, station, settings)
    loop_cost_panel.register(app, station, settings)
    compare_panel.register(app, station, settings)
    app.server.register_error_handler(Exception, _answer_in_one_line(set()))
    return app


def _answer_in_one_line(logged: set[str]):
    """A Flask error handler: HTTP errors as Flask answers them, anything else one line.

    A request the page never sends (a callback body of the wrong shape, a
    path outside the page's scripts) made Dash raise, and the terminal
    showed a traceback for each. The traceback stays available at DEBUG.
    """
    def answer(error: Exception):
        if isinstance(error, HTTPException):
            return error
        status = 404 if isinstance(error, DependencyException) else 500
        line = f"{type(error).__name__}: {str(error).splitlines()[0][:200] if str(error) else ''}"
        if len(logged) < LOGGED_MOST and line not in logged:
            logged.add(line)
            log.warning("could not answer %s %s (%s)", request.method, request.path[:200], line)
        log.debug("the request's error", exc_info=error)
        return f"podwatch: could not answer this request ({type(error).__name__})\n", status, {"Content-Type": "text/plain"}

    return answer
