"""The quotable numbers against values worked out by hand."""

from __future__ import annotations

import math

import numpy as np
import pytest

from dashboard import readouts
from receiver.odometry.counts import SampleKind

IN = 0.0254  # metres per inch (SI definition)


def test_disagreement_numbers_on_a_straight_drive_with_a_turn():
    # 0.5 m of straight travel per step, turning 90 degrees over the last step.
    step_in = 0.5 / IN
    pose = np.array([[0, 0, 0], [step_in, 0, 0], [2 * step_in, 0, 0], [2 * step_in, step_in, math.pi / 2]])
    position_error = np.array([0.0, 1.0, 2.0, 4.0])
    heading_error = np.radians([0.0, 1.0, 2.0, 5.0])
    kind = np.array([SampleKind.FIRST, SampleKind.STEP, SampleKind.STEP, SampleKind.STEP])
    d = readouts.disagreement(pose, position_error, heading_error, kind, IN)
    assert d.position_now == 4.0 and d.position_worst == 4.0
    assert d.heading_now_deg == pytest.approx(5.0) and d.heading_worst_deg == pytest.approx(5.0)
    # 1.5 m travelled (three 0.5 m steps), error 0 -> 4 in: 4 / 1.5 in per metre.
    assert d.travelled_m == pytest.approx(1.5)
    assert d.position_per_m == pytest.approx(4.0 / 1.5)
    # A quarter turn, heading error 0 -> 5 deg: 20 deg per turn.
    assert d.turns == pytest.approx(0.25)
    assert d.heading_per_turn_deg == pytest.approx(20.0)


def test_growth_counts_only_since_the_last_re_anchor():
    step_in = 0.5 / IN
    pose = np.array([[0, 0, 0], [step_in, 0, 0], [0, 0, 0], [step_in, 0, 0], [2 * step_in, 0, 0]])
    position_error = np.array([0.0, 9.0, 0.0, 0.5, 1.0])
    heading_error = np.zeros(5)
    kind = np.array([SampleKind.FIRST, SampleKind.STEP, SampleKind.RESET, SampleKind.STEP, SampleKind.STEP])
    d = readouts.disagreement(pose, position_error, heading_error, kind, IN)
    assert d.position_worst == 9.0  # worst in the whole window
    assert d.travelled_m == pytest.approx(1.0)
    assert d.position_per_m == pytest.approx(1.0)  # 0 -> 1 in over 1 m
    assert math.isnan(d.heading_per_turn_deg)  # no turning: no rate to quote


def test_heading_growth_follows_an_error_past_half_a_turn():
    turn = np.linspace(0.0, 4 * math.pi, 9)  # two full turns in eight steps
    pose = np.column_stack([np.zeros(9), np.zeros(9), turn])
    true_error = np.linspace(0.0, 2 * math.pi, 9)  # 360 deg of error over two turns
    wrapped = (true_error + math.pi) % (2 * math.pi) - math.pi
    kind = np.full(9, SampleKind.STEP)
    kind[0] = SampleKind.FIRST
    d = readouts.disagreement(pose, np.zeros(9), wrapped, kind, IN)
    assert d.turns == pytest.approx(2.0)
    assert d.heading_per_turn_deg == pytest.approx(180.0)


def test_no_comparison_gives_unknown_numbers():
    d = readouts.disagreement(np.zeros((3, 3)), np.full(3, np.nan), np.full(3, np.nan), np.zeros(3, dtype=int), IN)
    assert math.isnan(d.position_now) and math.isnan(d.position_per_m)


def test_loop_timing_numbers():
    loop = np.array([0.010, 0.010, 0.020, 0.060, np.nan])
    timing = readouts.loop_timing(loop, 0.050)
    assert timing.count == 4
    assert timing.mean_s == pytest.approx(0.025)
    assert timing.max_s == 0.060 and timing.long == 1
    assert timing.p95_s == pytest.approx(np.percentile([0.01, 0.01, 0.02, 0.06], 95))
    assert timing.rate_hz == pytest.approx(40.0)
    assert readouts.loop_timing(np.array([np.nan]), 0.05).count == 0


def test_quote_carries_the_unit():
    assert readouts.quote(3.14159, "in") == "3.14 in"
    assert readouts.quote(float("nan"), "deg", 1) == "\u2014 deg"
