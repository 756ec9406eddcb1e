"""The page's structure: controls, the readouts, the views and the panels.

Owns the component tree and what the callbacks fill in: the readout texts
and the link-health table as one piece of HTML. Those are painted into
their elements by the page's own script (pacing.PAINT_AND_ASK_NEXT), not by Dash: a
text or a table sent as a component's children cost the page a round of
Dash's bookkeeping per readout, and one per table cell, at every refresh.
Static: it reads no data.
"""

from __future__ import annotations

from dash import dcc, html

from dashboard import (
    compare_panel,
    diagnosis_panel,
    editor_panel,
    figures,
    ids,
    loop_cost_panel,
    recording_opener,
    status,
)
from dashboard.block_summary import LOOP_BIN_MS
from dashboard.settings import WINDOWS_S, Settings
from dashboard.sources import REPLAY_SPEEDS
from receiver.live.raw_history import DEFAULT_RAW_WINDOW_S

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


def _value(component_id: str) -> html.Span:
    # No children for React to own: the page paints its text (a dash until the first
    # refresh, from the stylesheet).
    return html.Span(id=component_id, className="readout-value")


def _readout(label: str, component_id: str, hint: str = "") -> html.Div:
    return html.Div(className="readout", title=hint,
                    children=[html.Span(label, className="readout-label"), _value(component_id)])


def _disagreement_numbers() -> html.Div:
    """Position and heading in rows of their own, under one head per column."""
    growth_hint = ("change of the disagreement per metre driven (position) and per turn (heading) over the stretch "
                   "named below; shown once it holds 0.5 m of driving or a quarter turn")
    head = [html.Span(""), html.Span("now", className="readout-label"),
            html.Span("worst in window", className="readout-label"),
            html.Span("growth", className="readout-label", title=growth_hint)]
    rows = []
    for name, ids_ in (("position", (ids.POSITION_NOW, ids.POSITION_WORST, ids.POSITION_GROWTH)),
                       ("heading", (ids.HEADING_NOW, ids.HEADING_WORST, ids.HEADING_GROWTH))):
        rows += [html.Span(name, className="row-label"), *(_value(cid) for cid in ids_)]
    return html.Div(className="numbers-group", children=[
        html.H2("Disagreement"),
        html.Div(className="number-rows", children=[*head, *rows]),
        html.P(id=ids.GROWTH_STRETCH, className="note growth-stretch"),
    ])


def _loop_numbers(settings: Settings) -> html.Div:
    return html.Div(className="numbers-group", children=[
        html.H2("Loop timing"),
        html.Div(className="readouts", children=[
            _readout("loop rate", ids.LOOP_RATE),
            _readout("mean", ids.LOOP_MEAN),
            _readout("p95 ≈", ids.LOOP_P95, f"from counts in {LOOP_BIN_MS:g} ms bins: within a bin of the exact "
                                                 "95th percentile"),
            _readout("max", ids.LOOP_MAX),
            _readout(f"over {settings.loop_threshold_s * 1000:g} ms", ids.LOOP_LONG),
            _readout("arrival jitter", ids.JITTER, "RFC 3550 interarrival jitter at the laptop"),
        ]),
    ])


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


def _pickers(settings: Settings) -> list:
    """The robot and window pickers: a few choices each, so no search box."""
    window_options = [{"label": f"last {w} s" if w < 120 else f"last {w // 60} min", "value": w} for w in WINDOWS_S]
    return [
        dcc.Dropdown(id=ids.ROBOT, options=[], value=None, placeholder="robot", clearable=False, searchable=False,
                     className="robot-select"),
        dcc.Dropdown(id=ids.WINDOW, options=window_options, value=settings.window_s, clearable=False,
                     searchable=False, className="window-select"),
    ]


def _signals_card() -> html.Section:
    return _card(
        "Robot signals",
        html.Div(className="panel-controls", children=[
            # Searchable: a robot may send up to 32 names a message.
            dcc.Dropdown(id=ids.SIGNAL_PICK, options=[], value=None, multi=True, placeholder="pick signals",
                         className="signal-pick"),
            html.Span(f"the robot's own values (put in the sender), on the disagreement's time line; kept for the "
                      f"last {DEFAULT_RAW_WINDOW_S / 60:g} min", className="note"),
        ]),
        html.Div(className="graph-box box-robot-signals",
                 children=dcc.Graph(id=ids.SIGNALS, config=GRAPH_CONFIG, figure={"data": [], "layout": {}})),
    )


def build(settings: Settings, replay_mode: bool, view_id: str = "") -> html.Div:
    """The page's component tree for the tab ``view_id``; ``replay_mode`` shows the replay bar from the start.

    The grid's cards stack in this order below about 1000 px (a tablet): the
    numbers first, then the graphs. Add a card by adding it to ``cards``."""
    controls = html.Header(
        className="topbar",
        children=[
            html.Div(className="brand", children=[html.Span("podwatch", className="brand-name"),
                                                  html.Span("odometry check", className="brand-sub")]),
            *_pickers(settings),
            html.Button("Pause page", id=ids.FOLLOW, n_clicks=0, className="button"),
            html.Div(className="status", children=[
                html.Span(status.PAUSED_WORDS, id=ids.PAGE_STATE, className="badge paused hidden"),
                html.Div(id=ids.STATUS, className="status-line"),
            ]),
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
                         value=1.0, clearable=False, searchable=False, className="speed-select"),
            html.Div(className="scrub", children=dcc.Slider(id=ids.SCRUB, min=0, max=1, step=0.1, value=0,
                                                            marks=None, updatemode="mouseup")),
            html.Span("0.0 s of 0.0 s", id=ids.REPLAY_POSITION, className="replay-position"),
        ],
    )
    numbers = html.Section(className="card wide numbers",
                           children=[_disagreement_numbers(), _loop_numbers(settings)])
    # The disagreement and the robot's signals in one column: same width, so their time axes line up.
    disagreement = html.Div(className="stack", children=[
        _card("Disagreement over time", _graph(ids.ERRORS)),
        _signals_card(),
    ])
    loop = _card(
        "Loop timing",
        html.Div(className="pair", children=[_graph(ids.LOOP), _graph(ids.LOOP_HISTOGRAM)]),
        extra_class="wide",
    )
    cards = [
        numbers,
        _card("Track map", _legend_key(), _graph(ids.TRACK), extra_class="track"),
        disagreement,
        *diagnosis_panel.cards(settings),
        editor_panel.card(settings, _graph),
        _card("Pose traces", _graph(ids.POSES), extra_class="wide"),
        loop,
        loop_cost_panel.card(_graph),
        _card("Link health", html.Div(id=ids.LINK_TABLE), extra_class="wide"),
        compare_panel.card(_graph),
    ]
    return html.Div(
        className="page",
        children=[
            controls,
            replay,
            recording_opener.bar(settings),
            html.Main(className="grid", children=cards),
            dcc.Interval(id=ids.TICK, interval=settings.tick_ms, n_intervals=0),
            dcc.Store(id=ids.VIEW_ID, data=view_id),
            dcc.Store(id=ids.CURSOR, data=None),
            dcc.Store(id=ids.REQUEST, data=None),
            dcc.Store(id=ids.REPLAY_REQUEST, data=None),
        ],
    )
