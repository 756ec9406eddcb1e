"""Tests for receiver/analysis/guided_check.py: the hand-push check (forward, left, counter-clockwise turn).

Directions are REP 103's: +x forward, +y left, heading counter-clockwise
positive. A wheel's expected direction comes from the simulator's true
geometry; the mistakes are put into the profile (for wheels) or into the
simulated robot code (for the reported pose).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from receiver.analysis.guided_check import guided_check
from receiver.analysis.sample_clip import clip_from_columns
from receiver.formats.profile_toml import load_profile
from receiver.formats.recording import read_recording
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.faults import parse_faults, robot_code_profile
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES

PRACTICE = load_profile(FIXTURES / "practice-bot.toml")
METRIC = load_profile(FIXTURES / "practice-bot-metric.toml")


def _clip(profile, faults=(), seed=4, path="guided", seconds=15.0):
    run = simulate(profile, path, 100.0, seconds, seed, parse_faults(list(faults) + ["slip:0.02", "drop:0.02"], profile))
    return clip_from_columns(columns_from_samples(run.samples, len(profile.wheels)))


def test_clean_fixture_passes_every_step() -> None:
    data = read_recording(FIXTURES / "practice-bot-guided.jsonl.gz")
    result = guided_check(clip_from_columns(data.robots["practice-bot"]), PRACTICE)
    assert result.passed and result.flags == []
    # The fixture's path: 18 in forward, 18 in left, 120 degrees counter-clockwise (receiver/sim/motion_paths.py).
    assert result.moves["forward"].amount == pytest.approx(18.0, rel=0.01)
    assert result.moves["left"].amount == pytest.approx(18.0, rel=0.01)
    assert np.degrees(result.moves["turn"].amount) == pytest.approx(120.0, rel=0.01)
    assert result.corrected == PRACTICE


@pytest.mark.parametrize("wheel", ["left", "right", "back"])
def test_a_wrongly_reversed_wheel_in_the_profile_is_the_only_flag(wheel: str) -> None:
    declared = robot_code_profile(PRACTICE, parse_faults([f"reversed:{wheel}"], PRACTICE))
    result = guided_check(_clip(PRACTICE), declared)
    assert result.flags == [f"wheel {wheel} direction"]
    assert result.corrected == PRACTICE  # flipping it back is the fix


def test_metric_profile_with_its_mirrored_right_encoder() -> None:
    # The metric profile declares the right encoder reversed; the simulated
    # robot is built to it, so a profile without the flag is the wrong one.
    assert guided_check(_clip(METRIC), METRIC).flags == []
    declared = robot_code_profile(METRIC, parse_faults(["reversed:right"], METRIC))
    assert guided_check(_clip(METRIC), declared).flags == ["wheel right direction"]


@pytest.mark.parametrize(
    "fault, flag, setting",
    [
        ("heading-unit", "reported heading", ("heading_unit", "deg")),
        ("heading-direction", "reported heading", ("heading_positive", "cw")),
        ("y-axis", "reported y", ("y_axis", "right")),
        ("heading-zero", "reported heading zero", ("heading_zero", "y")),
    ],
)
def test_a_wrong_reported_axis_is_the_only_flag(fault: str, flag: str, setting: tuple[str, str]) -> None:
    result = guided_check(_clip(PRACTICE, [fault]), PRACTICE)
    assert result.flags == [flag]
    key, value = setting
    assert result.corrected.reported == replace(PRACTICE.reported, **{key: value})


def test_swapped_wheels_in_the_profile_are_wrong_on_the_turn_only() -> None:
    declared = robot_code_profile(PRACTICE, parse_faults(["swapped:left,right"], PRACTICE))
    result = guided_check(_clip(PRACTICE), declared)
    assert sorted(result.flags) == ["wheel left direction", "wheel right direction"]
    overall = {c.subject: c for c in result.checks if c.step == "overall"}
    assert "on turn only" in overall["wheel left direction"].detail
    assert result.corrected.wheels == declared.wheels  # no guess at which fix


def test_a_wrong_diameter_shows_as_scale() -> None:
    w = PRACTICE.wheels
    declared = PRACTICE.with_wheels((replace(w[0], diameter=1.378 * 1.15), w[1], w[2]))
    result = guided_check(_clip(PRACTICE), declared)
    assert "wheel left scale" in result.flags
    assert not any(f.endswith("direction") for f in result.flags)


def test_missing_and_short_moves() -> None:
    # The first 5.5 s of the guided path hold the forward push only.
    result = guided_check(_clip(PRACTICE, seconds=5.5), PRACTICE)
    moves = {c.step: c for c in result.checks if c.subject == "move"}
    assert moves["forward"].ok and moves["left"].ok is False and moves["turn"].ok is False
    assert "not found" in moves["turn"].detail
    assert all(c.ok is None for c in result.checks if c.subject.startswith("reported"))
    # A 12 in push is the minimum; the strafe path's 36 in pushes pass, but
    # with no turn the turn step fails.
    assert "turn" in {c.step for c in guided_check(_clip(PRACTICE, path="strafe", seconds=6.0), PRACTICE).checks if c.ok is False}


def test_json() -> None:
    out = guided_check(_clip(PRACTICE, ["y-axis"]), PRACTICE).to_json()
    assert out["passed"] is False and out["flags"] == ["reported y"]
    assert out["moves"]["turn"]["amount"] == pytest.approx(120.0, rel=0.02)
    assert {"step", "subject", "ok", "detail"} == set(out["checks"][0])
