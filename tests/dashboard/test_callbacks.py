"""The page's callbacks called as the browser calls them, through Flask's test client.

A click that comes while a tick's call of the same callback still waits in
the page is merged into that call: the request then names the tick first
and the click after it (dash-renderer merges the waiting calls' changed
properties, oldest first). Every trigger must count. The views' update
sends every readout text for the page to paint (pacing.PAINT_AND_ASK_NEXT), and the
link table and status line once a second.
"""

from __future__ import annotations

import json
import re

import pytest

from dashboard import callbacks, ids, readout_texts
from dashboard.app import create_app
from dashboard.sources import LiveSource, ReplaySource
from dashboard.tabs import Station
from receiver.formats.recording import read_recording
from receiver.live.hub import Hub
from receiver.live.session import LinkState, RobotSnapshot
from tests.conftest import FIXTURES

REVERSED = FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz"
TAB = "test-tab"  # the view id every call below comes from, unless it says another


def replay_station(source: ReplaySource) -> Station:
    """A station without a live receiver whose tabs all show ``source`` (one tab in these tests)."""
    return Station(recording=read_recording(REVERSED), make_replay=lambda _: source)


def call(app, output: str, values: dict[str, object], changed: list[str]) -> dict:
    """Post the callback whose outputs include ``output`` (``"id.prop"``) with the
    inputs and states in ``values`` (``"id.prop"``: value, None when missing),
    as triggered by ``changed`` in that order; returns the response's outputs
    (none when every output is left as the page has it)."""
    key = next(k for k in app.callback_map if output in k)
    spec = app.callback_map[key]
    parts = [p for p in key.strip(".").split("...")] if key.startswith("..") else [key]

    values = {f"{ids.VIEW_ID}.data": TAB, **values}

    def item(i):
        name = f"{i['id']}.{i['property']}"
        return {"id": i["id"], "property": i["property"], "value": values.get(name)}

    body = {
        "output": key,
        "outputs": [{"id": p.split(".")[0], "property": p.split(".")[1].split("@")[0]} for p in parts],
        "inputs": [item(i) for i in spec["inputs"]],
        "state": [item(s) for s in spec["state"]],
        "changedPropIds": changed,
    }
    response = app.server.test_client().post("/_dash-update-component", json=body)
    if response.status_code == 204:  # Dash's answer when no output changes
        return {}
    assert response.status_code == 200, response.data[:300]
    return json.loads(response.data)["response"]


@pytest.fixture
def replay():
    """A replay whose clock stands still: it moves only when a control moves it."""
    source = ReplaySource(read_recording(REVERSED), clock=lambda: 0.0)
    return source, create_app(replay_station(source))


TICK = f"{ids.REPLAY_REQUEST}.data"
CONTROLS = {f"{ids.PLAY}.n_clicks": 1, f"{ids.PAUSE}.n_clicks": 0, f"{ids.SPEED}.value": 1.0,
            f"{ids.SCRUB}.value": 0.0, TICK: {"tick": 7}}


def test_play_merged_into_a_ticks_call_plays(replay):
    source, app = replay
    answer = call(app, f"{ids.REPLAY_POSITION}.children", CONTROLS, [TICK, f"{ids.PLAY}.n_clicks"])
    assert source.playing
    assert answer[ids.REPLAY_POSITION]["children"] == "0.0 s of 10.0 s, playing at 1\u00d7"


def test_a_scrub_merged_into_a_ticks_call_seeks(replay):
    source, app = replay
    values = {**CONTROLS, f"{ids.SCRUB}.value": 7.0}
    answer = call(app, f"{ids.REPLAY_POSITION}.children", values, [TICK, f"{ids.SCRUB}.value"])
    assert source.position_s == pytest.approx(7.0)
    assert answer[ids.REPLAY_POSITION]["children"].startswith("7.0 s of 10.0 s, paused")


def test_merged_controls_apply_in_the_order_they_came(replay):
    source, app = replay
    values = {**CONTROLS, f"{ids.PAUSE}.n_clicks": 1, f"{ids.SPEED}.value": 5.0}
    call(app, f"{ids.REPLAY_POSITION}.children", values, [f"{ids.PLAY}.n_clicks", f"{ids.SPEED}.value",
                                                          f"{ids.PAUSE}.n_clicks"])
    assert not source.playing and source.speed == 5.0
    call(app, f"{ids.REPLAY_POSITION}.children", values, [f"{ids.PAUSE}.n_clicks", TICK, f"{ids.PLAY}.n_clicks"])
    assert source.playing


def test_a_tick_alone_moves_nothing(replay):
    source, app = replay
    answer = call(app, f"{ids.REPLAY_POSITION}.children", {**CONTROLS, f"{ids.SCRUB}.value": 7.0}, [TICK])
    assert not source.playing and source.position_s == 0.0
    assert answer[ids.REPLAY_POSITION]["children"] == "0.0 s of 10.0 s, paused at 1\u00d7"


def test_an_answer_sends_only_what_changed(replay):
    # Above all not the slider's value: written back unchanged, it could land
    # between a release of the slider and the call for it, and undo the scrub.
    source, app = replay
    shown = {f"{ids.SCRUB}.max": 10.0, f"{ids.REPLAY_POSITION}.children": "0.0 s of 10.0 s, paused at 1\u00d7",
             f"{ids.REPLAY_BAR}.className": "replay-bar", f"{ids.BACK_TO_LIVE}.className": "button hidden"}
    assert call(app, f"{ids.REPLAY_POSITION}.children", {**CONTROLS, **shown}, [TICK]) == {}
    values = {**CONTROLS, **shown, f"{ids.SCRUB}.value": 7.0}
    answer = call(app, f"{ids.REPLAY_POSITION}.children", values, [TICK, f"{ids.SCRUB}.value"])
    assert answer == {ids.REPLAY_POSITION: {"children": "7.0 s of 10.0 s, paused at 1\u00d7"}}


def test_diagnose_now_merged_with_an_automatic_ask_says_it_ran_on_request(replay):
    source, app = replay
    source.seek(6.0)
    values = {f"{ids.DIAGNOSE_RUN}.n_clicks": 1, f"{ids.DIAGNOSE_ASK}.data": {"n": 4, "robot": "practice-bot"},
              f"{ids.ROBOT}.value": "practice-bot", f"{ids.DIAGNOSE_SECONDS}.value": 10}
    answer = call(app, f"{ids.DIAGNOSE_RESULT}.children", values,
                  [f"{ids.DIAGNOSE_ASK}.data", f"{ids.DIAGNOSE_RUN}.n_clicks"])
    assert answer[ids.DIAGNOSE_ANSWER]["data"] == {"n": 4, "confidence": "high"}  # it answers the ask too
    assert "ran on request" in json.dumps(answer[ids.DIAGNOSE_RESULT]["children"])
    answer = call(app, f"{ids.DIAGNOSE_RESULT}.children", values, [f"{ids.DIAGNOSE_ASK}.data"])
    assert "ran by itself" in json.dumps(answer[ids.DIAGNOSE_RESULT]["children"])


def snapshot(robot: str, state: LinkState, **changes) -> RobotSnapshot:
    fields = dict(robot=robot, state=state, has_profile=True, messages=120, rate_hz=99.6, gaps=2, duplicates=1, late=3,
                  restarts=0, resets=0, errors={}, loop_mean_s=0.01, loop_p50_s=0.01, loop_p95_s=0.01,
                  loop_max_s=0.01, jitter_s=0.0, pose=None, reported=None, position_error=0.0, heading_error=0.0,
                  last_rx=90.0)
    return RobotSnapshot(**{**fields, **changes})


def test_the_link_table_is_one_piece_of_html_with_every_text_escaped():
    table = readout_texts.link_table(
        {"bot-b": snapshot("bot-b", LinkState.QUIET, errors={"not_json": 4, "bad<type>": 1}),
         "bot-a": snapshot("bot-a", LinkState.LIVE)},
        now=96.4, selected="bot-b", unattributed={"too_large": 2},
    )
    assert table.startswith('<table class="link-table"><thead><tr><th>robot</th><th>link</th><th>messages</th>')
    rows = re.findall(r"<tr[^>]*>.*?</tr>", table.split("<tbody>")[1])
    assert rows == [
        '<tr><td>bot-a</td><td class="state live">live</td><td>120</td><td>100 msg/s</td><td>2</td><td>1</td>'
        "<td>3</td><td>none</td></tr>",
        '<tr class="selected"><td>bot-b</td><td class="state quiet">no data for 6 s</td><td>120</td>'
        "<td>100 msg/s</td><td>2</td><td>1</td><td>3</td><td>bad&lt;type&gt; 1, not_json 4</td></tr>",
    ]
    assert table.endswith("<caption>refused before a robot could be named: too_large 2</caption></table>")


class Clock:
    def __init__(self) -> None:
        self.now = 0.0

    def __call__(self) -> float:
        return self.now


def test_an_update_paints_every_readout_and_the_status_and_the_table_once_a_second(monkeypatch):
    clock, wall = Clock(), Clock()
    monkeypatch.setattr(callbacks, "wall_clock", wall)
    source = ReplaySource(read_recording(REVERSED), clock=clock)
    app = create_app(replay_station(source))
    source.seek(3.0)
    state = {f"{ids.REQUEST}.data": {"tick": 1}, f"{ids.ROBOT}.value": "practice-bot", f"{ids.WINDOW}.value": 60,
             f"{ids.ROBOT}.options": [{"label": "practice-bot", "value": "practice-bot"}]}
    first = call(app, f"{ids.CURSOR}.data", state, [f"{ids.REQUEST}.data"])[ids.CURSOR]["data"]
    paint = first["paint"]
    assert set(paint["text"]) == set(callbacks.READOUT_IDS) and set(paint["html"]) == {ids.LINK_TABLE, ids.STATUS}
    assert paint["text"][ids.POSITION_NOW].endswith(" in") and paint["text"][ids.LOOP_RATE].endswith(" Hz")
    assert "<td>practice-bot</td>" in paint["html"][ids.LINK_TABLE]
    assert paint["html"][ids.STATUS] == (f'<span class="badge replay-paused">replay paused</span><span '
                                         f'class="status-detail">{REVERSED}, at 3.0 s of 10.0 s \u00b7 practice-bot'
                                         '</span>')

    def next_answer(cursor: dict, tick: int) -> dict:
        state.update({f"{ids.REQUEST}.data": {"tick": tick}, f"{ids.CURSOR}.data": cursor})
        return call(app, f"{ids.CURSOR}.data", state, [f"{ids.REQUEST}.data"])[ids.CURSOR]["data"]

    # Half a second on: every readout and the status again (the page may have missed the last),
    # no table yet.
    source.seek(3.5)
    wall.now += 0.5
    second = next_answer(first, 2)
    assert set(second["paint"]["text"]) == set(callbacks.READOUT_IDS) and set(second["paint"]["html"]) == {ids.STATUS}
    assert second["paint"]["text"][ids.POSITION_NOW] != paint["text"][ids.POSITION_NOW]
    # The replay played to its end and stopped: its clock stands still, the page's does not.
    source.play()
    source.seek(source.duration_s)
    source.advance()
    wall.now += 1.1
    third = next_answer(second, 3)
    assert set(third["paint"]["html"]) == {ids.LINK_TABLE, ids.STATUS}
    assert third["paint"]["html"][ids.STATUS].startswith('<span class="badge replay-ended">replay ended</span>')
    wall.now += 1.1
    assert ids.LINK_TABLE in next_answer(third, 4)["paint"]["html"]


def test_back_to_live_hides_the_replay_bar_and_itself():
    # The replay bar's callback, which shows the button, stops asking once the
    # bar is hidden: the button stayed on the page, offering a way back to where
    # the page already was.
    station = Station(live=LiveSource(Hub({})))
    station.open(TAB, read_recording(REVERSED))
    app = create_app(station)
    values = {f"{ids.OPEN}.n_clicks": 0, f"{ids.BACK_TO_LIVE}.n_clicks": 1, f"{ids.RECORDING_CHOICE}.value": None}
    out = call(app, f"{ids.MESSAGE}.children", values, [f"{ids.BACK_TO_LIVE}.n_clicks"])
    assert out[ids.MESSAGE]["children"] == "showing the live receiver"
    assert out[ids.REPLAY_BAR]["className"] == "replay-bar hidden"
    assert out[ids.BACK_TO_LIVE]["className"] == "button hidden"
    assert station.tab(TAB).replay is None
