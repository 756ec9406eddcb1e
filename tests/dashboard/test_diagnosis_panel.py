"""The Diagnosis and Guided check panels: what they say for a given result, and the runs behind them."""

from __future__ import annotations

import numpy as np
import pytest

from dashboard import diagnosis_panel
from dashboard.app import create_app
from dashboard.diagnosis_content import diagnosis_view, guided_intro, guided_view
from dashboard.sources import ReplaySource
from dashboard.tabs import Station, TabView
from receiver.analysis.diagnose import diagnose, diagnose_recent
from receiver.analysis.guided_check import guided_check
from receiver.analysis.sample_clip import clip_from_columns
from receiver.formats.profile_toml import load_profile
from receiver.formats.recording import read_recording
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.faults import parse_faults, robot_code_profile
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES

PRACTICE = load_profile(FIXTURES / "practice-bot.toml")
REVERSED = FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz"
GUIDED = FIXTURES / "practice-bot-guided.jsonl.gz"
REVERSED_RIGHT = "the robot code treats the right wheel as reversed; the profile does not"


def text_of(component) -> str:
    """Every string in a component tree, one per line, in page order."""
    if component is None:
        return ""
    if isinstance(component, (str, int, float)):
        return str(component)
    if isinstance(component, (list, tuple)):
        return "\n".join(text_of(c) for c in component)
    return text_of(getattr(component, "children", None))


def lines_of(component) -> list[str]:
    return [line for line in text_of(component).splitlines() if line.strip()]


def step_titles(component) -> list[str]:
    """The title line of each guided step: its mark, number, name and instruction."""
    found = []

    def walk(c):
        if isinstance(c, (list, tuple)):
            for x in c:
                walk(x)
        elif getattr(c, "className", None) == "step-title":
            found.append(" ".join(text_of(c).split()))
        elif hasattr(c, "children"):
            walk(c.children)

    walk(component)
    return found


@pytest.fixture(scope="module")
def reversed_cols():
    return read_recording(REVERSED).robots["practice-bot"]


def test_diagnosis_names_the_mistake_the_confidence_and_the_profile_change(reversed_cols):
    d = diagnose(reversed_cols, PRACTICE)
    lines = lines_of(diagnosis_view(d, "ran on request"))
    assert lines[0].startswith("ran on request \u00b7 practice-bot: ")
    assert f"verdict: \n{REVERSED_RIGHT}" in text_of(diagnosis_view(d, "x"))
    assert any(line.startswith("confidence: high (margin ") for line in lines)
    # The suggested profile change is the CLI's, line for line.
    assert "suggested profile change:\n  wheel right: reversed false -> true" in text_of(diagnosis_view(d, "x"))
    # The top explanations, each in plain words with its fault id and score.
    first = lines.index("reversed:right")
    assert lines[first - 1] == REVERSED_RIGHT
    assert lines[first + 1:first + 4] == [f"{d.best.position_rms:.3f} in", f"{np.degrees(d.best.heading_rms):.2f} deg",
                                          f"{d.best.score:.3f}"]
    assert sum(line in {r.hypothesis.id for r in d.ranking[:4]} for line in lines) == 4


def test_the_panel_says_what_the_command_line_says(reversed_cols):
    # The same words as `podwatch diagnose` (receiver/analysis/wording.py): the
    # confidence with the noise it was judged against, the integration, the notes.
    from receiver.cli.check_commands import _diagnosis_text

    d = diagnose(reversed_cols, PRACTICE)
    page = lines_of(diagnosis_view(d, "x"))
    cli = _diagnosis_text(d)
    for prefix in ("confidence: ", "integration: ", "note: "):
        shown = [line for line in cli if line.startswith(prefix)]
        assert shown and all(line in page for line in shown)
    assert "times the clip's noise of 0.00053 in" in text_of(diagnosis_view(d, "x"))


def test_a_robot_without_a_profile_while_another_name_was_given(tmp_path):
    from dataclasses import replace

    from receiver.formats.protocol import encode

    mine = replace(PRACTICE, name="my-robot")
    bare = tmp_path / "bare.jsonl"
    bare.write_bytes(b"\n".join(encode(s) for s in simulate(mine, "spin", 50.0, 2.0, 1).stamp_rx(100.0)) + b"\n")
    replay = ReplaySource(read_recording(bare, {"practice-bot": 3}), {"practice-bot": PRACTICE}, clock=lambda: 0.0)
    station = TabView(None, replay)
    replay.seek(2.0)
    result, confidence, _ = diagnosis_panel.run_diagnosis(station, "my-robot", 10.0, "x")
    assert confidence is None
    assert text_of(result) == (
        "my-robot has no profile (the profile given is named practice-bot; the messages come from my-robot: "
        'set name = "my-robot" in the profile, or send that name): nothing to diagnose.'
    )


def test_a_clip_without_turning_says_not_enough_motion():
    run = simulate(PRACTICE, "push-forward", 100.0, 4.0, 3, parse_faults(["reversed:back"], PRACTICE))
    d = diagnose(columns_from_samples(run.samples, len(PRACTICE.wheels)), PRACTICE)
    text = text_of(diagnosis_view(d, "ran by itself"))
    assert d.confidence == "not enough motion"
    assert "verdict: \nnot enough motion to tell" in text
    assert "confidence: not enough motion (margin " in text
    assert "suggested profile change: none" in text


def test_guided_steps_pass_and_fail_per_step():
    cols = read_recording(GUIDED).robots["practice-bot"]
    clean = guided_view(guided_check(clip_from_columns(cols), PRACTICE), finished=True)
    assert step_titles(clean) == [
        "pass 1. Push forward: push it forward at least 12 in",
        "pass 2. Push left: push it left at least 12 in",
        "pass 3. Turn counter-clockwise: turn it counter-clockwise at least 90 degrees",
    ]
    assert "result: all checks pass" in lines_of(clean)
    assert "suggested profile change: none" in lines_of(clean)

    # A profile that wrongly declares the right encoder reversed: the right
    # wheel rolls in the forward push and the turn, not in the left push.
    declared = robot_code_profile(PRACTICE, parse_faults(["reversed:right"], PRACTICE))
    wrong = guided_view(guided_check(clip_from_columns(cols), declared), finished=True)
    assert [t.split()[0] for t in step_titles(wrong)] == ["FAIL", "pass", "FAIL"]
    lines = lines_of(wrong)
    assert "result: 1 problem(s): wheel right direction" in lines
    assert "suggested profile change:\n  wheel right: reversed true -> false" in text_of(wrong)
    assert any(line.startswith(" wheel right direction: right rolled -18 in, opposite") for line in lines)


def test_a_running_guided_check_waits_for_the_next_move():
    cols = read_recording(GUIDED).robots["practice-bot"]
    after_forward = guided_check(clip_from_columns(cols.take(np.arange(500))), PRACTICE)
    titles = step_titles(guided_view(after_forward, finished=False))
    assert [t.split()[0] for t in titles] == ["pass", "now", "wait"]
    assert "1 of 3 moves found; press Finish when done" in lines_of(guided_view(after_forward, finished=False))
    # Finished there, the missing moves fail.
    assert [t.split()[0] for t in step_titles(guided_view(after_forward, finished=True))] == ["pass", "FAIL", "FAIL"]
    assert [t.split()[0] for t in step_titles(guided_view(None, finished=False, samples=3))] == ["now", "wait", "wait"]
    assert [t.split()[0] for t in step_titles(guided_intro())] == ["1.", "2.", "3."]


def test_runs_on_a_replayed_source(reversed_cols):
    replay = ReplaySource(read_recording(REVERSED), clock=lambda: 0.0)
    station = TabView(None, replay)
    assert "No samples" in text_of(diagnosis_panel.run_diagnosis(station, "practice-bot", 10.0, "x")[0])
    replay.seek(6.0)
    result, confidence, _ = diagnosis_panel.run_diagnosis(station, "practice-bot", 10.0, "ran on request")
    assert confidence == "high" and REVERSED_RIGHT in text_of(result)
    assert text_of(result).startswith(f"ran on request ({REVERSED}) \u00b7 practice-bot: ")
    # The same as diagnosing the recording's first 6 s offline.
    upto = reversed_cols.take(np.flatnonzero(reversed_cols.rx <= replay.now()))
    assert f"{diagnose_recent(upto, PRACTICE, 10.0).ranking[1].score:.3f}" in text_of(result)
    result, confidence, _ = diagnosis_panel.run_diagnosis(station, "stranger", 10.0, "x")
    assert confidence is None and "no profile" in text_of(result)


def test_guided_panel_uses_the_samples_since_start():
    replay = ReplaySource(read_recording(GUIDED), clock=lambda: 0.0)
    station = TabView(None, replay)
    replay.seek(5.5)  # the forward push is done
    run = {"robot": "practice-bot", "key": station.key(), "since_rx": None, "finished": False}
    assert [t.split()[0] for t in step_titles(diagnosis_panel.guided_panel(station, run))] == ["pass", "now", "wait"]
    # Started after the forward push, it has to wait for one.
    late = {**run, "since_rx": replay.raw.latest_rx("practice-bot")}
    replay.seek(replay.duration_s)
    assert [t.split()[0] for t in step_titles(diagnosis_panel.guided_panel(station, late))][0] != "pass"
    done = diagnosis_panel.guided_panel(station, {**run, "finished": True})
    assert "result: all checks pass" in lines_of(done)
    replay.seek(0.0)  # rebuilds the hub: another source for a running check
    assert "another source" in text_of(diagnosis_panel.guided_panel(station, run))


def test_the_page_has_both_panels_and_their_callbacks():
    data = read_recording(REVERSED)
    station = Station(recording=data, make_replay=lambda recording: ReplaySource(recording, clock=lambda: 0.0))
    app = create_app(station)
    text = text_of(app.layout())
    assert "Diagnosis" in text and "Guided check" in text and "Start guided check" in text
    outputs = " ".join(app.callback_map)
    for component in ("diagnose-result", "diagnose-ask", "guided-steps", "guided-run"):
        assert component in outputs


def test_a_robot_without_a_profile_gets_a_message_never_a_500():
    # Through the real callback, as the page calls it: on Diagnose now, and as
    # the page starts (a call with no ask in it, which used to raise a TypeError: a 500).
    from dashboard import ids
    from tests.dashboard.test_callbacks import call

    data = read_recording(REVERSED)
    data.profiles = {}
    replay = ReplaySource(data, clock=lambda: 0.0)
    replay.seek(5.0)
    app = create_app(Station(recording=data, make_replay=lambda _: replay))
    values = {f"{ids.ROBOT}.value": "practice-bot", f"{ids.DIAGNOSE_SECONDS}.value": 10,
              f"{ids.DIAGNOSE_RUN}.n_clicks": 1, f"{ids.DIAGNOSE_ASK}.data": None}
    answer = call(app, f"{ids.DIAGNOSE_RESULT}.children", values, ["diagnose-run.n_clicks"])  # asserts a 200
    assert text_of_json(answer[ids.DIAGNOSE_RESULT]["children"]) == (
        "practice-bot has no profile (give one with --profile): nothing to diagnose.")
    for changed in (["diagnose-ask.data"], []):
        assert call(app, f"{ids.DIAGNOSE_RESULT}.children", {**values, f"{ids.ROBOT}.value": None},
                    changed) == {}  # 204: the panel keeps its text
    watch = call(app, f"{ids.DIAGNOSE_WATCH}.data", {f"{ids.DIAGNOSE_REQUEST}.data": {"tick": 1},
                                                     f"{ids.ROBOT}.value": "practice-bot"}, ["diagnose-request.data"])
    assert watch[ids.DIAGNOSE_STATUS]["children"] == "no profile: nothing to watch"


def test_no_robot_yet_and_a_robot_without_data_get_a_message():
    from dashboard.sources import LiveSource
    from receiver.live.hub import Hub

    station = TabView(LiveSource(Hub({"practice-bot": PRACTICE})))
    result, confidence, _ = diagnosis_panel.run_diagnosis(station, None, 10.0, "x")
    assert text_of(result) == "No robot heard yet: nothing to diagnose." and confidence is None
    result, confidence, _ = diagnosis_panel.run_diagnosis(station, "practice-bot", 10.0, "x")
    assert text_of(result) == "No samples from practice-bot yet." and confidence is None


def text_of_json(component: dict | str) -> str:
    """Every string in a component as Dash sends it (JSON), in page order."""
    if isinstance(component, str):
        return component
    children = component.get("props", {}).get("children")
    if isinstance(children, list):
        return "\n".join(text_of_json(c) for c in children)
    return text_of_json(children) if children is not None else ""
