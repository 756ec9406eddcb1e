"""What the Diagnosis and Guided check panels say, built from a result and nothing else.

Owns the HTML pieces of the two panels: the verdict, confidence, ranked
explanations and suggested profile change of a ``Diagnosis``; the three
steps of a ``GuidedResult`` with pass or fail each. The words themselves
come from receiver/analysis/wording.py, shared with ``podwatch diagnose``.
No clock, no I/O, no Dash callbacks.
"""

from __future__ import annotations

import math

from dash import html

from receiver.analysis.diagnose import Diagnosis
from receiver.analysis.guided_check import INSTRUCTIONS, MOVES, GuidedResult
from receiver.analysis.mistakes import profile_changes, verdict
from receiver.analysis.wording import (
    CHECK_MARK,
    after_fit,
    change_lines,
    clip_line,
    confidence_words,
    explanation_id,
    guided_outcome,
    integration_words,
)

PAGE_HYPOTHESES = 4  # the panel's table: the leader and the few it was measured against
STEP_TITLES = {"forward": "Push forward", "left": "Push left", "turn": "Turn counter-clockwise"}
# The robot's own pose is judged on the move that shows each axis.
POSE_CHECK_STEP = {"reported x": "forward", "reported y": "left", "reported heading": "turn"}
_MARK_CLASS = {True: "mark pass", False: "mark fail", None: "mark none"}


def _confidence_class(confidence: str) -> str:
    return "confidence " + confidence.replace(" ", "-")


def _changes(changes: list[str]) -> html.Pre:
    return html.Pre("\n".join(change_lines(changes)), className="profile-change")


def diagnosis_view(diagnosis: Diagnosis, why: str) -> html.Div:
    """The panel's result: why it ran, the clip, verdict, confidence, explanations, suggested change, notes."""
    unit = diagnosis.profile.distance_unit
    rows = [
        html.Tr([
            html.Td(f"{k}"),
            html.Td([verdict(ranked.hypothesis, diagnosis.profile),
                     html.Div(explanation_id(ranked), className="hypothesis-id")]),
            # The CLI's table formats (cli/check_commands.py).
            html.Td(f"{ranked.position_rms:.3f} {unit}"), html.Td(f"{math.degrees(ranked.heading_rms):.2f} deg"),
            html.Td(f"{ranked.score:.3f}"), html.Td(after_fit(ranked)),
        ])
        for k, ranked in enumerate(diagnosis.ranking[:PAGE_HYPOTHESES], 1)
    ]
    table = html.Table(className="explanations", children=[
        html.Thead(html.Tr([html.Th(h) for h in ("#", "explanation (as a fault)", "position RMS", "heading RMS",
                                                 f"score ({unit})", f"after fit ({unit})")])),
        html.Tbody(rows),
    ])
    return html.Div(className="diagnosis", children=[
        html.Div(f"{why} \u00b7 {clip_line(diagnosis)}", className="diagnosis-why"),
        html.Div(className="verdict", children=[html.Span("verdict: ", className="verdict-label"), diagnosis.verdict]),
        html.Div(className=_confidence_class(diagnosis.confidence),
                 children=f"confidence: {confidence_words(diagnosis)}"),
        html.Div(f"integration: {integration_words(diagnosis)}", className="integration"),
        table,
        _changes(diagnosis.changes),
        *[html.Div(f"note: {note}", className="note") for note in diagnosis.notes],
    ])


def diagnosis_message(text: str) -> html.Div:
    """The panel's result when no diagnosis could run (no profile, too few samples, ...)."""
    return html.Div(text, className="diagnosis-message")


def _step_state(checks: list, big_enough: bool, finished: bool) -> bool | None:
    """pass (True), fail (False) or not decided yet (None: a move not found, or still too small)."""
    if not (big_enough or finished):
        return None
    return big_enough and not any(check.ok is False for check in checks)


def guided_view(guided: GuidedResult | None, finished: bool, samples: int = 0) -> html.Div:
    """The three steps, each with its instruction, pass/fail and the checks behind it.

    While the check runs (``finished`` False) a move not found yet is
    waiting, and the first such step is marked as the one to do now; once
    finished, a missing move fails and the overall checks, the outcome and
    the suggested profile change follow.
    """
    checks = guided.checks if guided is not None else []
    moves = guided.moves if guided is not None else {}
    items, current = [], None
    for number, kind in enumerate(MOVES, 1):
        mine = [check for check in checks if check.step == kind or POSE_CHECK_STEP.get(check.subject) == kind]
        big_enough = any(check.subject == "move" and check.ok for check in mine)
        ok = _step_state(mine, big_enough, finished)
        is_current = ok is None and current is None
        current = kind if is_current else current
        mark = CHECK_MARK[ok] if ok is not None else ("now" if is_current else "wait")
        step = [html.Div([html.Span(mark, className=_MARK_CLASS[ok] if ok is not None else "mark wait"),
                          f" {number}. {STEP_TITLES[kind]}: {INSTRUCTIONS[kind]}"], className="step-title")]
        if kind in moves or finished:
            step.append(html.Ul([html.Li([html.Span(CHECK_MARK[check.ok], className=_MARK_CLASS[check.ok]),
                                          f" {check.subject}: {check.detail}"])
                                 for check in mine], className="step-checks"))
        items.append(html.Li(step, className="guided-step current" if is_current else "guided-step"))
    children = [html.Ol(items, className="guided-steps")]
    if guided is None:
        children.append(html.Div(f"{samples} samples so far: start pushing", className="guided-outcome"))
    elif finished:
        overall = [check for check in checks if check.step == "overall" and check.subject not in POSE_CHECK_STEP]
        children += [
            html.Ul([html.Li([html.Span(CHECK_MARK[check.ok], className=_MARK_CLASS[check.ok]),
                              f" {check.subject}: {check.detail}"])
                     for check in overall], className="guided-overall"),
            html.Div(f"result: {guided_outcome(guided)}", className="guided-outcome"),
            _changes(profile_changes(guided.profile, guided.corrected)),
        ]
    else:
        done = sum(1 for kind in MOVES if kind in moves)
        children.append(html.Div(f"{done} of 3 moves found; press Finish when done", className="guided-outcome"))
    return html.Div(className="guided", children=children)


def guided_intro() -> html.Div:
    """The three moves before a check has started."""
    return html.Div(className="guided", children=[
        html.Ol([html.Li(html.Div(f"{number}. {STEP_TITLES[kind]}: {INSTRUCTIONS[kind]}", className="step-title"),
                         className="guided-step") for number, kind in enumerate(MOVES, 1)], className="guided-steps"),
        html.Div("press Start, then push the robot by hand with its code running, one move after the other",
                 className="guided-outcome"),
    ])
