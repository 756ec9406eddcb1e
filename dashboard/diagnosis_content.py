"""What the Diagnosis and Guided check panels say, built from a result and nothing else.

Owns the HTML pieces of the two panels: the verdict, confidence, ranked
explanations and suggested profile change of a ``Diagnosis``; the three
steps of a ``GuidedResult`` with pass or fail each. The words themselves
come from receiver/check_words.py, shared with ``podwatch diagnose``.
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
    change_lines,
    clip_line,
    confidence_words,
    explanation_id,
    guided_outcome,
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


def diagnosis_view(d: Diagnosis, why: str) -> html.Div:
    """The panel's result: why it ran, the clip, verdict, confidence, explanations, suggested change, notes."""
    unit = d.profile.distance_unit
    rows = [
        html.Tr([
            html.Td(f"{k}"),
            html.Td([verdict(r.hypothesis, d.profile), html.Div(explanation_id(r), className="hypothesis-id")]),
            # The CLI's table formats (cli_diagnose.py).
            html.Td(f"{r.position_rms:.3f} {unit}"), html.Td(f"{math.degrees(r.heading_rms):.2f} deg"), html.Td(f"{r.score:.3f}"),
        ])
        for k, r in enumerate(d.ranking[:PAGE_HYPOTHESES], 1)
    ]
    table = html.Table(className="explanations", children=[
        html.Thead(html.Tr([html.Th(h) for h in ("#", "explanation (as a fault)", "position RMS", "heading RMS",
                                                 f"score ({unit})")])),
        html.Tbody(rows),
    ])
    return html.Div(className="diagnosis", children=[
        html.Div(f"{why} \u00b7 {clip_line(d)}", className="diagnosis-why"),
        html.Div(className="verdict", children=[html.Span("verdict: ", className="verdict-label"), d.verdict]),
        html.Div(className=_confidence_class(d.confidence), children=f"confidence: {confidence_words(d)}"),
        table,
        _changes(d.changes),
        *[html.Div(f"note: {n}", className="note") for n in d.notes],
    ])


def diagnosis_message(text: str) -> html.Div:
    """The panel's result when no diagnosis could run (no profile, too few samples, ...)."""
    return html.Div(text, className="diagnosis-message")


def _step_state(checks: list, big_enough: bool, finished: bool) -> bool | None:
    """pass (True), fail (False) or not decided yet (None: a move not found, or still too small)."""
    if not (big_enough or finished):
        return None
    return big_enough and not any(c.ok is False for c in checks)


def guided_view(g: GuidedResult | None, finished: bool, samples: int = 0) -> html.Div:
    """The three steps, each with its instruction, pass/fail and the checks behind it.

    While the check runs (``finished`` False) a move not found yet is
    waiting, and the first such step is marked as the one to do now; once
    finished, a missing move fails and the overall checks, the outcome and
    the suggested profile change follow.
    """
    checks = g.checks if g is not None else []
    moves = g.moves if g is not None else {}
    items, current = [], None
    for number, kind in enumerate(MOVES, 1):
        mine = [c for c in checks if c.step == kind or POSE_CHECK_STEP.get(c.subject) == kind]
        big_enough = any(c.subject == "move" and c.ok for c in mine)
        ok = _step_state(mine, big_enough, finished)
        is_current = ok is None and current is None
        current = kind if is_current else current
        mark = CHECK_MARK[ok] if ok is not None else ("now" if is_current else "wait")
        step = [html.Div([html.Span(mark, className=_MARK_CLASS[ok] if ok is not None else "mark wait"),
                          f" {number}. {STEP_TITLES[kind]}: {INSTRUCTIONS[kind]}"], className="step-title")]
        if kind in moves or finished:
            step.append(html.Ul([html.Li([html.Span(CHECK_MARK[c.ok], className=_MARK_CLASS[c.ok]), f" {c.subject}: {c.detail}"])
                                 for c in mine], className="step-checks"))
        items.append(html.Li(step, className="guided-step current" if is_current else "guided-step"))
    children = [html.Ol(items, className="guided-steps")]
    if g is None:
        children.append(html.Div(f"{samples} samples so far: start pushing", className="guided-outcome"))
    elif finished:
        overall = [c for c in checks if c.step == "overall" and c.subject not in POSE_CHECK_STEP]
        children += [
            html.Ul([html.Li([html.Span(CHECK_MARK[c.ok], className=_MARK_CLASS[c.ok]), f" {c.subject}: {c.detail}"])
                     for c in overall], className="guided-overall"),
            html.Div(f"result: {guided_outcome(g)}", className="guided-outcome"),
            _changes(profile_changes(g.profile, g.corrected)),
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
