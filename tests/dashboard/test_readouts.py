"""The quotable numbers and their texts against values worked out by hand.

The window's numbers are checked against every row in test_window_rows.py;
here, loop statistics from counts in bins, and how the growth figures read:
their stretch and their minimums always on the page."""

from __future__ import annotations

import math

import numpy as np
import pytest

from dashboard import readout_texts, readouts
from dashboard.block_summary import LOOP_BIN_MS, numbers
from receiver.analysis.growth import Growth


def test_loop_timing_numbers():
    loop = np.array([0.010, 0.010, 0.020, 0.060, np.nan])
    timing = readouts.loop_timing(numbers(np.empty(0), np.empty(0), loop, 0.050))
    assert timing.count == 4
    assert timing.mean_s == pytest.approx(0.025)
    assert timing.max_s == 0.060 and timing.long == 1
    # numpy's p95 lies 85 % of the way from 0.020 to 0.060 s: from bins, the same between
    # the middles of their bins (20.05 and 60.05 ms), capped by the exact max.
    assert timing.p95_s == pytest.approx(min(0.02005 + 0.85 * 0.04, 0.060)) and np.percentile(loop[:4], 95) == \
        pytest.approx(0.054)
    assert timing.rate_hz == pytest.approx(40.0)
    assert readouts.loop_timing(numbers(np.empty(0), np.empty(0), np.array([np.nan]), 0.05)).count == 0


@pytest.mark.parametrize("seed", range(5))
def test_p95_from_bins_is_within_half_a_bin_of_numpys(seed):
    rng = np.random.default_rng(seed)
    loop = np.concatenate([rng.normal(0.010, 0.0005, 5000), rng.uniform(0.02, 0.2, 60)])
    timing = readouts.loop_timing(numbers(np.empty(0), np.empty(0), loop, 0.050))
    assert abs(timing.p95_s - np.percentile(loop, 95)) <= LOOP_BIN_MS / 2000.0 + 1e-12


def test_quote_carries_the_unit_and_a_sign_when_asked():
    assert readouts.quote(3.14159, "in") == "3.14 in"
    assert readouts.quote(2.0, "in/m", sign=True) == "+2.00 in/m"
    assert readouts.quote(float("nan"), "deg", 1) == "\u2014 deg"


def disagreement(per_m: float, per_turn: float, distance_m: float, turns: float, from_anchor: bool):
    return readouts.Disagreement(position_now=1.5, position_worst=2.0, heading_now_deg=-3.0, heading_worst_deg=7.5,
                                 growth=Growth(per_m, per_turn, distance_m, turns, 0, 10, from_anchor),
                                 stretch_s=(12.34, 20.0))


def test_growth_reads_with_its_stretch_and_its_minimums():
    texts = readout_texts.disagreement_values(disagreement(2.031, -11.52, 3.2, 1.3, True), "in")
    assert texts[:6] == ["1.50 in", "2.00 in", "+2.03 in/m", "-3.0 deg", "7.5 deg", "-11.5 deg/turn"]
    assert texts[6] == ("growth over 3.20 m and 1.30 turns, from the re-anchor at 12.3 s to 20.0 s; "
                        "rates from 0.5 m driven and \u00bc turn")
    short = readout_texts.disagreement_values(disagreement(math.nan, math.nan, 0.2, 0.1, False), "mm")
    assert short[2] == "needs 0.5 m" and short[5] == "needs \u00bc turn"
    assert "from the window's start (12.3 s)" in short[6]
    unknown = readout_texts.disagreement_values(None, "in")
    assert unknown[0] == "\u2014 in" and unknown[6] == "no robot to compare yet"
