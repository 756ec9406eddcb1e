"""The page's structure: controls, the five views and their readouts.

Owns the component tree and what the callbacks fill in: the readout texts
and the link-health table as one piece of HTML. Those are painted into
their elements by the page's own script (pacing.PAINT_AND_ASK_NEXT), not by Dash: a
text or a table sent as a component's children cost the page a round of
Dash's bookkeeping per readout, and one per table cell, at every refresh.
Static: it reads no data.
"""

from __future__ import annotations

from dash import dcc, html

from dashboard import compare_panel, diagnosis_panel, editor_panel, figures, ids, loop_cost_panel, recording_opener
from dashboard.settings import WINDOWS_S, Settings
from dashboard.sources import REPLAY_SPEEDS

# Every graph's toolbar, spelled out: zoom, pan, reset axes and download
# image, nothing else. Left to its defaults it offers to share the chart
# through an online service; a team's data never leaves the laptop by a click.
MODEBAR_BUTTONS = ("zoom2d", "pan2d", "resetScale2d", "toImage")
GRAPH_CONFIG = {
    "displaylogo": False,
    "responsive": True,
    "modeBarButtons": [list(MODEBAR_BUTTONS)],
    "showSendToCloud": False,
    "showEditInChartStudio": False,
    "showLink": False,
    "sendData": False,
    "plotlyServerURL": "",
    "toImageButtonOptions": {"format": "png", "filename": "podwatch"},
}


def _readout(label: str, component_id: str, hint: str = "") -> html.Div:
    # The value's element has no children for React to own: the page paints its
    # text (a dash until the first refresh, from the stylesheet).
    return html.Div(
        className="readout",
        title=hint,
        children=[html.Span(label, className="readout-label"), html.Span(id=component_id, className="readout-value")],
    )


def _card(title: str, *children, extra_class: str = "") -> html.Section:
    return html.Section(className=f"card {extra_class}".strip(), children=[html.H2(title), *children])


def _graph(component_id: str) -> html.Div:
    """A graph filling a box whose height the stylesheet sets (class ``box-<id>``)."""
    graph = dcc.Graph(id=component_id, config=GRAPH_CONFIG, figure={"data": [], "layout": {}})
    return html.Div(className=f"graph-box box-{component_id}", children=graph)


def _legend_key() -> html.Div:
    return html.Div(
        className="legend-key",
        children=[
            html.Span([html.I(className="swatch recompute"), figures.RECOMPUTE_NAME]),
            html.Span([html.I(className="swatch reported"), figures.REPORTED_NAME]),
        ],
    )


def build(settings: Settings, replay_mode: bool, view_id: str = "") -> html.Div:
    """The page's component tree for the tab ``view_id``; ``replay_mode`` shows the replay bar from the start."""
    window_options = [{"label": f"last {w} s" if w < 120 else f"last {w // 60} min", "value": w} for w in WINDOWS_S]
    controls = html.Header(
        className="topbar",
        children=[
            html.Div(className="brand", children=[html.Span("podwatch", className="brand-name"),
                                                  html.Span("odometry check", className="brand-sub")]),
            dcc.Dropdown(id=ids.ROBOT, options=[], value=None, placeholder="robot", clearable=False, className="robot-select"),
            dcc.Dropdown(id=ids.WINDOW, options=window_options, value=settings.window_s, clearable=False,
                         className="window-select"),
            html.Button("Pause page", id=ids.FOLLOW, n_clicks=0, className="button"),
            html.Div(id=ids.STATUS, className="status-line"),
        ],
    )
    replay = html.Div(
        id=ids.REPLAY_BAR,
        className="replay-bar" if replay_mode else "replay-bar hidden",
        children=[
            html.Span("Replay", className="bar-title"),
            html.Button("Play", id=ids.PLAY, n_clicks=0, className="button"),
            html.Button("Pause", id=ids.PAUSE, n_clicks=0, className="button"),
            dcc.Dropdown(id=ids.SPEED, options=[{"label": f"{s:g}\u00d7", "value": s} for s in REPLAY_SPEEDS],
                         value=1.0, clearable=False, className="speed-select"),
            html.Div(className="scrub", children=dcc.Slider(id=ids.SCRUB, min=0, max=1, step=0.1, value=0,
                                                            marks=None, updatemode="mouseup")),
            html.Span("0.0 s of 0.0 s", id=ids.REPLAY_POSITION, className="replay-position"),
        ],
    )
    disagreement = _card(
        "Disagreement",
        html.Div(className="readouts", children=[
            _readout("position now", ids.POSITION_NOW),
            _readout("worst in window", ids.POSITION_WORST),
            _readout("growth per metre travelled", ids.POSITION_GROWTH,
                     "change of the position error per metre driven since the last re-anchor"),
            _readout("heading now", ids.HEADING_NOW),
            _readout("worst in window", ids.HEADING_WORST),
            _readout("growth per turn", ids.HEADING_GROWTH,
                     "change of the heading error per full turn since the last re-anchor"),
        ]),
        _graph(ids.ERRORS),
    )
    loop = _card(
        "Loop timing",
        html.Div(className="readouts", children=[
            _readout("loop rate", ids.LOOP_RATE),
            _readout("mean", ids.LOOP_MEAN),
            _readout("p95", ids.LOOP_P95),
            _readout("max", ids.LOOP_MAX),
            _readout(f"over {settings.loop_threshold_s * 1000:g} ms", ids.LOOP_LONG),
            _readout("arrival jitter", ids.JITTER, "RFC 3550 interarrival jitter at the laptop"),
        ]),
        html.Div(className="pair", children=[_graph(ids.LOOP), _graph(ids.LOOP_HISTOGRAM)]),
        extra_class="wide",
    )
    return html.Div(
        className="page",
        children=[
            controls,
            replay,
            recording_opener.bar(settings),
            html.Main(
                className="grid",
                children=[
                    _card("Track map", _legend_key(), _graph(ids.TRACK), extra_class="track"),
                    disagreement,
                    *diagnosis_panel.cards(settings),
                    editor_panel.card(settings, _graph),
                    _card("Pose traces", _graph(ids.POSES), extra_class="wide"),
                    loop,
                    loop_cost_panel.card(_graph),
                    _card("Link health", html.Div(id=ids.LINK_TABLE), extra_class="wide"),
                    compare_panel.card(_graph),
                ],
            ),
            dcc.Interval(id=ids.TICK, interval=settings.tick_ms, n_intervals=0),
            dcc.Store(id=ids.VIEW_ID, data=view_id),
            dcc.Store(id=ids.CURSOR, data=None),
            dcc.Store(id=ids.REQUEST, data=None),
            dcc.Store(id=ids.REPLAY_REQUEST, data=None),
        ],
    )
