"""Pure figure builders of the profile editor: the loaded and the edited recompute side by side.

Owns how the editor's two graphs look: the track seen from above with the
robot's own path, the recompute with the loaded profile and the recompute
with the edited one; and the disagreement of each recompute with the robot
over time. Arrays in (already downsampled, display units), plain-dict
figures out, in the look of figures.py; no clock, no session, no I/O.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from dashboard.figures import (
    RECOMPUTE_COLOUR,
    REPORTED_COLOUR,
    REPORTED_NAME,
    _layout,
    _line,
    _stacked_axes,
    as_list,
    field_shapes,
)

# Okabe-Ito bluish green: apart from the loaded recompute's blue and the
# robot's vermillion for the common forms of colour blindness (figures.py).
EDITED_COLOUR = "#009E73"
LOADED_NAME = "recompute, loaded profile"
EDITED_NAME = "recompute, edited profile"
# Trace order of the editor's track: the robot's, the loaded recompute's, the edited recompute's path.
TRACK_REPORTED, TRACK_LOADED, TRACK_EDITED = range(3)
# Trace order of the editor's disagreement: position (loaded, edited), then heading (loaded, edited).
POSITION_LOADED, POSITION_EDITED, HEADING_LOADED, HEADING_EDITED = range(4)


class EditorPaths(NamedTuple):
    """The three paths of the editor's track, each (N, 2) x, y in one length unit, REP 103,
    on the same N rows (NaN where the robot sent no pose)."""

    reported_xy: np.ndarray
    loaded_xy: np.ndarray
    edited_xy: np.ndarray


def editor_track(paths: EditorPaths, field_size: float, unit: str) -> dict:
    """The field from above with the robot's own path (dotted), the loaded recompute and the
    edited recompute; axes in ``unit`` at one scale, fitted to the field and the paths."""
    data = [
        _line(as_list(paths.reported_xy[:, 0]), as_list(paths.reported_xy[:, 1]), REPORTED_NAME, REPORTED_COLOUR,
              dash="dot"),
        _line(as_list(paths.loaded_xy[:, 0]), as_list(paths.loaded_xy[:, 1]), LOADED_NAME, RECOMPUTE_COLOUR,
              width=1.6),
        _line(as_list(paths.edited_xy[:, 0]), as_list(paths.edited_xy[:, 1]), EDITED_NAME, EDITED_COLOUR, width=2.4),
    ]
    layout = _layout(
        shapes=field_shapes(field_size),
        xaxis={"title": {"text": f"x ({unit}), forward, REP 103"}, "zeroline": False, "constrain": "domain"},
        yaxis={"title": {"text": f"y ({unit}), left"}, "zeroline": False, "scaleanchor": "x", "scaleratio": 1},
    )
    return {"data": data, "layout": layout}


def editor_disagreement(
    t: np.ndarray, loaded: tuple[np.ndarray, np.ndarray], edited: tuple[np.ndarray, np.ndarray], unit: str
) -> dict:
    """Position error (``unit``) and heading error (degrees, unwrapped: one line through +-180)
    of the loaded and the edited recompute against time t (s); ``loaded`` and ``edited`` are
    (position, heading deg)."""
    tt = as_list(t)
    data = []
    for (position, _), name, colour in ((loaded, LOADED_NAME, RECOMPUTE_COLOUR), (edited, EDITED_NAME, EDITED_COLOUR)):
        data.append(_line(tt, as_list(position), name, colour, width=1.8))
    for (_, heading), name, colour in ((loaded, LOADED_NAME, RECOMPUTE_COLOUR), (edited, EDITED_NAME, EDITED_COLOUR)):
        data.append(_line(tt, as_list(heading), name, colour, width=1.8, yaxis="y2", legend=False))
    axes = _stacked_axes([f"position ({unit})", "heading, unwrapped (deg)"], "time (s)", gap=0.08)
    axes["yaxis"]["rangemode"] = "tozero"
    return {"data": data, "layout": _layout(**axes)}
