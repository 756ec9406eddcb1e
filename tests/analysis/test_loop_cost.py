"""What the loop period costs, against the closed forms for a constant-twist arc.

The exact move of one step of a constant body twist (forward speed v, turn rate w,
no sideways speed) over a loop period dt, with s = v dt and q = w dt, is, in the
frame of the heading before the step (Lynch and Park, Modern Robotics, 2017,
ch. 13.4, odometry for a constant twist):

    arc      = (s sin(q) / q,  s (1 - cos q) / q)
    euler    = (s, 0)                                 rotate by the old heading only
    midpoint = (s cos(q/2), s sin(q/2))               rotate by the heading half-way

Subtracting, per step:

    |euler - arc|^2 = (s/q)^2 [(q - sin q)^2 + (1 - cos q)^2]
                    = (s/q)^2 [q^2 + 2 - 2 cos q - 2 q sin q]     (about s q / 2)
    |midpoint - arc| = s |1 - 2 sin(q/2) / q|                     (about s q^2 / 24)

since arc = s (2 sin(q/2) / q) (cos(q/2), sin(q/2)). Each step's error is the same
vector in the body frame, so after N steps from an anchor the field-frame errors
add up as N unit vectors turned by q each:

    gap_N = |per-step error| * |sin(N q / 2) / sin(q / 2)|

and the arc's own straight-line move per step is the chord s (2 sin(q/2) / q).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from receiver.analysis.loop_cost import DEFAULT_BIN_EDGES_S, loop_cost, loop_cost_bins
from receiver.odometry.columns import Columns
from receiver.odometry.profile_edit import Edit, apply_edits
from receiver.odometry.recompute import Tracker

INCH_M = 0.0254  # SI: 1 in = 0.0254 m exactly
V_IN_S = 20.0
# A fast turn (about 290 deg/s) so that the closed forms differ from their first-order
# approximations (s q / 2 and s q^2 / 24) by more than the tolerances below.
W_RAD_S = 5.0


def euler_error(s, q):
    return (s / q) * math.sqrt(q * q + 2 - 2 * math.cos(q) - 2 * q * math.sin(q))


def midpoint_error(s, q):
    return s * abs(1 - 2 * math.sin(q / 2) / q)


def chord(s, q):
    return s * 2 * math.sin(q / 2) / q


@pytest.fixture
def fine_profile(practice_profile):
    # 2^22 counts per turn: a count is 1e-6 in, so rounding to counts is far below the errors tested.
    return apply_edits(practice_profile, [Edit("counts_per_rev", 2.0**22, i) for i in range(3)])


def constant_twist(profile, periods_s):
    """Columns of the practice robot driving forward at V_IN_S while turning at W_RAD_S, one
    sample after each period; wheel travel from the observation model of DESIGN.md (a wheel
    at (x, y) rolling at 0 deg measures dx - y dth, at 90 deg dy + x dth), computed by hand."""
    periods = np.asarray(periods_s, dtype=float)
    n = len(periods) + 1
    t = 3.0 + np.concatenate([[0.0], np.cumsum(periods)])
    distance = V_IN_S * (t - t[0])
    turn = W_RAD_S * (t - t[0])
    (left, right, back) = profile.wheels
    travel = np.column_stack([distance - left.y * turn, distance - right.y * turn, back.x * turn])
    per_count = np.array([math.pi * w.diameter / w.counts_per_rev for w in profile.wheels])
    ticks = np.rint(travel / per_count).astype(np.int64)
    pose = np.full((n, 3), np.nan)
    pose[0] = 0.0
    return Columns(np.arange(n), t, ticks, pose, np.full(n, np.nan), np.concatenate([[np.nan], periods]),
                   np.zeros(n, dtype=bool))


def test_the_gap_over_time_follows_the_closed_form(fine_profile):
    dt, steps = 0.03, 500
    columns = constant_twist(fine_profile, [dt] * steps)
    cost = loop_cost(columns, fine_profile)
    s, q = V_IN_S * dt, W_RAD_S * dt
    k = np.arange(steps + 1)
    turned = np.abs(np.sin(k * q / 2) / math.sin(q / 2))
    np.testing.assert_allclose(cost.euler_gap, euler_error(s, q) * turned, rtol=1e-4, atol=1e-6)
    np.testing.assert_allclose(cost.midpoint_gap, midpoint_error(s, q) * turned, rtol=1e-4, atol=1e-7)
    np.testing.assert_allclose(cost.euler_step[1:], euler_error(s, q), rtol=1e-4)
    np.testing.assert_allclose(cost.midpoint_step[1:], midpoint_error(s, q), rtol=1e-4)
    np.testing.assert_allclose(cost.travel[1:], chord(s, q), rtol=1e-5)
    assert cost.euler_step[0] == 0.0 and math.isnan(cost.step_s[0])
    np.testing.assert_allclose(cost.step_s[1:], dt, rtol=1e-9)
    assert cost.unit == "in"
    # Given the arc recompute the page already has, the same answer.
    again = loop_cost(columns, fine_profile, arc=Tracker(fine_profile).feed(columns))
    np.testing.assert_array_equal(again.euler_gap, cost.euler_gap)


def test_binned_by_loop_period_per_metre(fine_profile):
    # The same drive, half of it at a 10 ms loop and half at a 40 ms loop.
    fast, slow = 0.010, 0.040
    cost = loop_cost(constant_twist(fine_profile, [fast] * 600 + [slow] * 150), fine_profile, edges_s=(0.0, 0.02, 0.06))
    bins = cost.bins
    assert bins.steps.tolist() == [600, 150]
    for b, dt in enumerate((fast, slow)):
        s, q = V_IN_S * dt, W_RAD_S * dt
        assert bins.travel_m[b] == pytest.approx(bins.steps[b] * chord(s, q) * INCH_M, rel=1e-5)
        # Inches of difference per metre of travel: each step's error over each step's travel.
        assert bins.euler_per_m[b] == pytest.approx(euler_error(s, q) / chord(s, q) / INCH_M, rel=1e-4)
        assert bins.midpoint_per_m[b] == pytest.approx(midpoint_error(s, q) / chord(s, q) / INCH_M, rel=1e-4)
    # A loop four times as slow costs Euler about four times as much per metre (the error
    # per step is about s q / 2), and midpoint about sixteen times (s q^2 / 24).
    assert bins.euler_per_m[1] / bins.euler_per_m[0] == pytest.approx(4.0, rel=5e-3)
    assert bins.midpoint_per_m[1] / bins.midpoint_per_m[0] == pytest.approx(16.0, rel=5e-3)


def test_a_lost_message_is_one_longer_step(fine_profile):
    columns = constant_twist(fine_profile, [0.01] * 100)
    kept = columns.take(np.setdiff1d(np.arange(101), [50]))
    cost = loop_cost(kept, fine_profile, edges_s=(0.0, 0.015, 0.025))
    assert cost.bins.steps.tolist() == [98, 1]
    assert cost.step_s[50] == pytest.approx(0.02)


def test_a_reset_brings_the_methods_back_together(fine_profile, practice_profile):
    columns = constant_twist(fine_profile, [0.02] * 200)
    columns.reset[120] = True
    columns.pose[120] = (1.0, 2.0, 0.3)
    cost = loop_cost(columns, fine_profile)
    assert cost.euler_gap[119] > 0.01 and cost.euler_gap[120] == 0.0
    assert math.isnan(cost.step_s[120]) and cost.euler_step[120] == 0.0


def test_bins_leave_out_unknown_periods_and_empty_bins_have_no_rate():
    bins = loop_cost_bins(
        np.array([np.nan, 0.004, 0.012, 0.5]), np.array([0.0, 1.0, 2.0, 0.0]),
        np.array([9.0, 0.1, 0.4, 7.0]), np.array([9.0, 0.01, 0.02, 7.0]),
    )
    assert bins.steps.sum() == 3 and len(bins.steps) == len(DEFAULT_BIN_EDGES_S) - 1
    assert bins.euler_per_m[0] == pytest.approx(0.1) and bins.euler_per_m[2] == pytest.approx(0.2)
    assert math.isnan(bins.euler_per_m[1]) and math.isnan(bins.euler_per_m[-1])  # no steps / no travel
