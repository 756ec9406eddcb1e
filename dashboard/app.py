"""The app factory: ``create_app(station)`` builds a Dash app around one station.

Owns the Dash object's settings (assets folder, title). There is no app at
module level: every caller, test and command builds its own.
"""

from __future__ import annotations

from pathlib import Path

from dash import Dash

from dashboard import callbacks, diagnosis_panel, layout, recording_opener
from dashboard.settings import Settings
from dashboard.sources import Station

ASSETS = Path(__file__).resolve().parent / "assets"


def create_app(station: Station, settings: Settings = Settings()) -> Dash:
    """A new Dash app showing ``station``: the layout, the views' callbacks, the
    diagnosis panels and the recording opener. Serve its ``.server`` (``server.start_dashboard`` does).
    """
    app = Dash(
        __name__,
        title="podwatch",
        update_title=None,  # no "Updating..." flicker in the tab five times a second
        assets_folder=str(ASSETS),
        serve_locally=True,  # every script from this server: the page works with no internet
    )
    app.layout = layout.build(settings, replay_mode=station.replay is not None)
    callbacks.register(app, station, settings)
    diagnosis_panel.register(app, station, settings)
    recording_opener.register(app, station, settings)
    return app
