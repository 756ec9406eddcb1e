"""Tests for receiver/analysis/integration_check.py: diagnosis compares like with like.

The simulated robot code (receiver/sim/simulate.py) integrates its own pose
with odometry/recompute.Tracker by the method its profile declares: Euler,
midpoint or arc, at slow loops (20-30 ms, common practice). The truth is
that robot code's own geometry, the practice robot's (track width 12.5 in,
back wheel 5.5 in behind); one encoder count is pi * 1.378 / 8192 = 0.00053 in.
"""

from __future__ import annotations

import math
from dataclasses import replace

import pytest

from receiver.analysis.diagnose import diagnose
from receiver.analysis.wording import integration_words
from receiver.formats.profile_toml import load_profile
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.faults import parse_faults
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES

PRACTICE = load_profile(FIXTURES / "practice-bot.toml")
W = PRACTICE.wheels
COUNT_IN = math.pi * 1.378 / 8192
# The profile handed to diagnosis has its constants off: the fit must find the robot code's.
OFF = PRACTICE.with_wheels((replace(W[0], y=6.0), replace(W[1], y=-6.0), replace(W[2], x=-5.2)))


def _robot(method: str):
    return replace(PRACTICE, reported=replace(PRACTICE.reported, integration=method))


def _columns(robot, faults=(), rate=33.0, path="wander", seconds=10.0):
    run = simulate(robot, path, rate, seconds, 3, parse_faults(list(faults), robot))
    return columns_from_samples(run.samples, len(robot.wheels))


@pytest.mark.parametrize("rate", [33.0, 50.0])
@pytest.mark.parametrize("method", ["euler", "midpoint", "arc"])
def test_fitted_constants_stay_within_resolution_whatever_the_robot_integrates(method: str, rate: float) -> None:
    d = diagnose(_columns(_robot(method), rate=rate), OFF)
    assert d.best.hypothesis.id == "none"
    wheels = d.corrected.wheels
    assert abs((wheels[0].y - wheels[1].y) - 12.5) <= COUNT_IN
    assert abs(wheels[2].x + 5.5) <= COUNT_IN
    # Compared like with like, the fit leaves nothing (a Euler difference
    # fitted into the constants would leave tenths of an inch).
    assert d.fit.score_after < COUNT_IN
    assert d.integration.method == method or method in d.integration.tied


def test_euler_at_a_slow_loop_is_found_and_written_into_the_profile() -> None:
    d = diagnose(_columns(_robot("euler"), ["reversed:right"]), PRACTICE)
    assert d.best.hypothesis.id == "reversed:right" and d.confidence == "high"
    assert d.integration.method == "euler" and d.integration.source == "clip"
    assert set(d.integration.ruled_out) == {"midpoint", "arc"}
    assert "reported.integration: (not set) -> euler" in d.changes
    assert integration_words(d).startswith("euler, found from the clip (RMS after the fit: euler ")


def test_the_profiles_integration_is_taken_as_declared() -> None:
    d = diagnose(_columns(_robot("euler"), ["heading-unit"]), _robot("euler"))
    assert d.integration.source == "profile" and d.integration.method == "euler"
    assert integration_words(d) == "euler, as the profile says ([reported] integration)"
    assert d.best.hypothesis.id == "heading-unit" and d.fit.score_after < COUNT_IN
    assert not any(c.startswith("reported.integration") for c in d.changes)


def test_lost_packets_are_integrated_as_the_robot_did() -> None:
    # A sample after lost ones spans several Euler loops of the robot code;
    # integrated as one step it would leave about 0.1 in here.
    d = diagnose(_columns(_robot("euler"), ["drop:0.05"]), PRACTICE)
    assert d.integration.method == "euler"
    assert d.fit.score_after < 5 * COUNT_IN
    assert d.changes == ["reported.integration: (not set) -> euler"]


def test_midpoint_and_arc_at_a_fast_loop_are_said_to_be_indistinguishable() -> None:
    d = diagnose(_columns(_robot("midpoint"), rate=100.0, path="figure-eight"), PRACTICE)
    assert d.integration.source == "assumed" and set(d.integration.tied) == {"midpoint", "arc"}
    assert d.integration.ruled_out == ["euler"]
    assert "the clip cannot tell these apart" in integration_words(d)
