"""Tests for receiver/analysis/move_quality.py: the guided check refuses moves it cannot score.

The moves are driven by the simulator (receiver/sim/simulate.py and
motion_paths.py), whose true motion is the reference; the practice robot's
geometry is REP 103's (x forward, y left): wheels 6.25 in either side, the
back wheel 5.5 in behind.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from receiver.analysis.guided_check import find_moves, guided_check
from receiver.analysis.move_quality import refusal
from receiver.analysis.sample_clip import clip_from_columns
from receiver.analysis.scoring import characteristic_length
from receiver.analysis.wording import guided_outcome
from receiver.formats.profile_toml import load_profile
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.faults import parse_faults, robot_code_profile
from receiver.odometry.kinematics import Kinematics
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES

PRACTICE = load_profile(FIXTURES / "practice-bot.toml")
LENGTH = characteristic_length(PRACTICE)
KIN = Kinematics(PRACTICE)


def _clip(path, seconds, faults=()):
    run = simulate(PRACTICE, path, 100.0, seconds, 4, parse_faults(["slip:0.02", *faults], PRACTICE))
    return clip_from_columns(columns_from_samples(run.samples, 3))


def _travel(dx: float, dy: float, turn: float, steps: int = 200) -> np.ndarray:
    """Total wheel travel (REP 103 body twist held constant, the wheel model of DESIGN.md)."""
    return KIN.wheel_travel(np.tile([dx / steps, dy / steps, turn / steps], (steps, 1))).sum(axis=0)


def test_a_curving_push_is_refused_and_blames_no_wheel() -> None:
    result = guided_check(_clip("guided-curving", 15.0), PRACTICE)
    forward = [c for c in result.checks if c.step == "forward"]
    assert [c.subject for c in forward] == ["move"] and forward[0].ok is False
    assert forward[0].detail.startswith("refused, not scored: it turned 30 deg while pushed 18 in forward")
    assert "push straight forward, without turning" in forward[0].detail
    assert result.refused == ["forward"] and result.flags == []
    assert guided_outcome(result) == "make again: the push forward (see why above)"
    assert result.corrected == PRACTICE


def test_a_long_curving_drive_is_not_taken_for_a_push() -> None:
    # Issue 12: 131 in of a figure eight was scored as the forward push and
    # the correct wheels blamed for their scale.
    result = guided_check(_clip("figure-eight", 6.0), PRACTICE)
    move = result.moves["forward"]
    assert move.refused is not None and "in forward" in move.refused
    assert result.flags == []


def test_sideways_drift_and_a_turn_about_a_wheel_are_refused() -> None:
    drift = refusal("forward", _travel(18.0, 6.0, 0.0), PRACTICE, LENGTH, 0.05)
    assert drift.startswith("it drifted 6 in sideways while pushed 18 in forward (more than a fifth")
    # Turned 120 degrees about the left wheel's contact point (0.75, 6.25):
    # the body's origin moves at -w x p = (6.25 w, 0.75 w).
    turn = math.radians(120.0)
    about_wheel = refusal("turn", _travel(6.25 * turn, 0.75 * turn, turn), PRACTICE, LENGTH, 0.05)
    assert about_wheel.startswith("it turned 120 deg about a point 6.29 in from its centre")
    assert about_wheel.endswith("turn it in place about its centre")


@pytest.mark.parametrize("move", [(18.0, 0.0, 0.0), (0.0, 18.0, 0.0), (0.0, 0.0, math.radians(120.0))])
def test_clean_moves_pass_whatever_the_signs_and_small_scale_errors(move) -> None:
    kind = ["forward", "left", "turn"][int(np.flatnonzero(move)[0])]
    travel = _travel(*move)
    for signs in ([1, 1, 1], [1, -1, 1], [-1, 1, -1]):
        for scale in ([1.0, 1.0, 1.0], [1.04, 0.97, 1.03]):
            assert refusal(kind, travel * signs * np.array(scale), PRACTICE, LENGTH, 0.05) is None
    # A few degrees of turning in a push is accepted (common practice for a hand push).
    if kind != "turn":
        small = (move[0], move[1], math.radians(3.0))
        assert refusal(kind, _travel(*small), PRACTICE, LENGTH, 0.05) is None


@pytest.mark.parametrize("fault", ["reversed:left", "reversed:back", "swapped:left,right", "offset-sign:back"])
def test_mistakes_in_the_profile_refuse_no_move(fault: str) -> None:
    declared = robot_code_profile(PRACTICE, parse_faults([fault], PRACTICE))
    moves, _ = find_moves(_clip("guided", 15.0), declared)
    assert {k: m.refused for k, m in moves.items()} == {"forward": None, "left": None, "turn": None}


def test_a_badly_wrong_diameter_is_scored_as_scale_not_refused() -> None:
    # The back wheel did not roll: the forward wheels' disagreement is their scale.
    w = PRACTICE.wheels
    declared = PRACTICE.with_wheels((replace(w[0], diameter=1.378 * 1.3), w[1], w[2]))
    result = guided_check(_clip("guided", 15.0), declared)
    assert result.refused == [] and "wheel left scale" in result.flags
