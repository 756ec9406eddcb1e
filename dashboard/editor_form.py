"""The profile editor's form: one field per editable value, built from the profile's settings.

Owns which control each value gets (a text field for numbers and names, a
list for choices and true/false), its label, unit and hint, all taken from
odometry/profile_edit.py's settings, and how far one step of dragging a
number's label moves it (assets/editor_drag.js does the dragging). Fields
are named by their `--set` key with wheels by index ("wheel.0.x"), so a
renamed wheel keeps its fields. Pure: a profile in, components out.
"""

from __future__ import annotations

from dash import dcc, html

from dashboard import ids
from dashboard.editor_state import field_text, field_values
from receiver.odometry.profile_edit import PROFILE_SETTINGS, WHEEL_SETTINGS, Setting, Value
from receiver.odometry.robot import Profile

# A number field sends its text once typing has paused this long (s), so a
# value typed or dragged is recomputed once, not at every keystroke.
DEBOUNCE_S = 0.3
# One step of dragging a number's handle: about a quarter millimetre for
# offsets (finer than a tracking wheel's mounting holes, common practice),
# a tenth of that for diameters (0.1 % of a 35 mm wheel), half a degree for
# angles.
LENGTH_STEPS = {"in": 0.01, "mm": 0.25, "cm": 0.025, "m": 0.00025}
FINER = {"diameter": 0.1}
STEPS = {"angle": 0.5, "counts_per_rev": 1.0, "gear_ratio": 0.001}
BOOL_OPTIONS = [{"label": "true", "value": "true"}, {"label": "false", "value": "false"}]
_SHORT_LABELS = {
    "name": "robot name", "distance_unit": "distance unit", "reported.heading_unit": "reported heading unit",
    "reported.heading_positive": "reported heading grows", "reported.y_axis": "reported +y points",
    "reported.heading_zero": "reported heading 0 faces", "reported.integration": "robot code integrates",
    "imu.mode": "IMU",
}
# What an optional choice shows while the profile does not declare it.
UNDECLARED = {"reported.integration": "not declared"}  # the checks find it from the reports


def field_id(key: str) -> dict:
    """The pattern-matching id of the field for ``key``."""
    return {"type": ids.EDITOR_FIELD, "key": key}


def drag_step(setting: Setting, key: str, unit: str) -> float | None:
    """How much one step of dragging changes a number (None: not a number)."""
    if setting.kind is not float:
        return None
    if setting.unit == "length":
        return LENGTH_STEPS[unit] * FINER.get(key, 1.0)
    return STEPS.get(key, 0.01)


def unit_label(setting: Setting, unit: str) -> str:
    """The unit shown beside a value: the profile's distance unit for lengths, "deg" for angles."""
    return unit if setting.unit == "length" else setting.unit


def _control(key: str, setting: Setting, value: Value) -> dcc.Input | dcc.Dropdown:
    if setting.kind is bool:
        return dcc.Dropdown(id=field_id(key), options=BOOL_OPTIONS, value=field_text(value), clearable=False,
                            searchable=False, className="editor-choice")
    if setting.choices:
        return dcc.Dropdown(id=field_id(key), options=[{"label": c, "value": c} for c in setting.choices],
                            value=value, clearable=False, searchable=False, placeholder=UNDECLARED.get(key, ""),
                            className="editor-choice")
    # Text, not a number input: the page reads it as `--set` does, with its messages.
    return dcc.Input(id=field_id(key), type="text", inputMode="decimal" if setting.kind is float else "text",
                     value=field_text(value), debounce=DEBOUNCE_S, className="editor-text")


def _cell(key: str, setting: Setting, value: Value, unit: str) -> html.Div:
    """A field, and for a number a handle that a person drags sideways to move it by steps
    (the page's script, assets/editor_drag.js)."""
    step = drag_step(setting, key.rsplit(".", 1)[-1], unit)
    control = _control(key, setting, value)
    if step is None:
        return html.Div(control, className="editor-field")
    handle = html.Span("\u2194", className="editor-drag", title=f"drag sideways: {step:g} {unit_label(setting, unit)} a step",
                       **{"data-field": key, "data-step": f"{step:.6g}"})
    return html.Div([control, handle], className="editor-field")


def form(profile: Profile, shown: Profile) -> html.Div:
    """The form for ``profile``'s robot (its wheels and conventions), holding ``shown``'s values
    (the profile with the tab's edits made)."""
    values = field_values(shown)
    unit = shown.distance_unit
    general = [
        html.Div(className="editor-row", title=setting.about, children=[
            html.Label(_SHORT_LABELS.get(key, key), className="editor-label"), _cell(key, setting, values[key], unit),
            html.Span(unit_label(setting, unit), className="editor-unit"),
        ])
        for key, setting in PROFILE_SETTINGS.items()
    ]
    rows = [html.Tr([html.Th("wheel"), *(html.Th(f"{k}: {w.name}") for k, w in enumerate(profile.wheels)), html.Th("")])]
    for name, setting in WHEEL_SETTINGS.items():
        cells = [html.Td(name, className="editor-label", title=setting.about)]
        cells += [html.Td(_cell(f"wheel.{k}.{name}", setting, values[f"wheel.{k}.{name}"], unit), className="editor-cell")
                  for k in range(len(profile.wheels))]
        cells.append(html.Td(unit_label(setting, unit), className="editor-unit"))
        rows.append(html.Tr(cells))
    return html.Div(className="editor-form", children=[
        html.Div(general, className="editor-general"),
        html.Table(rows, className="editor-wheels"),
    ])
