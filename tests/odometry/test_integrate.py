"""Pose integration against Modern Robotics, spatialmath-python and scipy."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp
from spatialmath.base import trexp2

from receiver.odometry.integrate import METHODS, integrate, step, wrap_angle
from receiver.odometry.kinematics import Kinematics


def _se2(pose):
    c, s = math.cos(pose[2]), math.sin(pose[2])
    return np.array([[c, -s, pose[0]], [s, c, pose[1]], [0.0, 0.0, 1.0]])


@pytest.mark.parametrize("scale", [1e-3, 1e-2, 0.3, 1.0, 3.0])
def test_arc_step_equals_the_se2_exponential(scale):
    # Reference: spatialmath.base.trexp2 (spatialmath-python), the SE(2)
    # exponential of a twist (vx, vy, w); Modern Robotics eq. 3.88 in the plane.
    rng = np.random.default_rng(int(scale * 1e6))
    for _ in range(50):
        twist = np.array([rng.normal() * 3, rng.normal() * 3, rng.normal() * scale])
        start = rng.normal(size=3) * [20, 20, 3]
        expected = _se2(start) @ trexp2(twist)
        got = _se2(step(start, twist, "arc"))
        np.testing.assert_allclose(got, expected, atol=1e-9, rtol=0)


def _exact_arc_factors(theta: float) -> tuple[float, float]:
    """sin(t)/t and (1 - cos t)/t by their Taylor series in exact rationals."""
    t = Fraction(theta)
    a = sum(Fraction((-1) ** k) * t ** (2 * k) / math.factorial(2 * k + 1) for k in range(12))
    b = sum(Fraction((-1) ** k) * t ** (2 * k + 1) / math.factorial(2 * k + 2) for k in range(12))
    return float(a), float(b)


@pytest.mark.parametrize("theta", [0.0, 1e-12, -1e-9, 1e-6, -1e-4, 2e-3, 0.05, 0.3, -0.4999, 0.5001, 0.9])
def test_arc_step_at_tiny_rotations(theta):
    # Near zero rotation the closed form loses digits (trexp2 itself is off
    # by about 1e-8 at 1e-6 rad), so the reference here is the exponential's
    # series (Modern Robotics, eq. 3.88) summed in exact rational arithmetic
    # (12 terms: exact to double precision up to |t| = 1), on both sides of
    # podwatch's switch from series to closed form at 0.5 rad.
    a, b = _exact_arc_factors(theta)
    vx, vy = 2.5, -1.5
    got = step(np.zeros(3), np.array([vx, vy, theta]), "arc")
    np.testing.assert_allclose(got, [a * vx - b * vy, b * vx + a * vy, theta], atol=5e-14, rtol=0)


def _quantised_run(kin, twist_per_s, rate_hz, seconds):
    """Counts a robot would read driving a constant twist: exact travel, rounded."""
    n = int(seconds * rate_hz)
    dt = 1.0 / rate_hz
    travel = np.arange(1, n + 1)[:, None] * kin.wheel_travel(np.asarray(twist_per_s) * dt)
    counts = np.rint(travel / kin.travel_per_count).astype(np.int64)
    counts = np.vstack([np.zeros((1, kin.n_wheels), dtype=np.int64), counts])
    deltas = kin.body_delta(kin.travel(np.diff(counts, axis=0)))
    return deltas, n * dt


@pytest.mark.parametrize(
    ("name", "twist", "expected"),
    [
        # Analytic poses for constant body twists (Modern Robotics ch. 3):
        # a circle of radius v / w, a holonomic arc, and a spin in place.
        ("circle", (20.0, 0.0, 0.5), lambda T: (40 * math.sin(0.5 * T), 40 * (1 - math.cos(0.5 * T)), 0.5 * T)),
        (
            "holonomic arc",
            (12.0, 9.0, -0.4),
            lambda T: tuple(_se2((0, 0, 0)) @ trexp2(np.array([12.0, 9.0, -0.4]) * T) @ [0, 0, 1])[:2] + (-0.4 * T,),
        ),
        ("spin", (0.0, 0.0, math.pi), lambda T: (0.0, 0.0, math.pi * T)),
    ],
)
def test_constant_twist_trajectories(practice_profile, name, twist, expected):
    kin = Kinematics(practice_profile)
    deltas, duration = _quantised_run(kin, twist, rate_hz=50, seconds=8.0)
    truth = np.array(expected(duration))
    arc = integrate(deltas, np.zeros(3), "arc")[-1]
    euler = integrate(deltas, np.zeros(3), "euler")[-1]
    arc_error = np.hypot(*(arc[:2] - truth[:2]))
    euler_error = np.hypot(*(euler[:2] - truth[:2]))
    # Quantisation: one count is pi * 1.378 / 8192 = 0.00053 in; the heading
    # from two wheels 12.5 in apart is good to about 1e-4 rad over this run.
    assert arc_error < 0.01, name
    assert abs(arc[2] - truth[2]) < 1e-3
    if name != "spin":
        # The gap proves the arc method is really in use (no silent fallback).
        assert euler_error > 20 * arc_error and euler_error > 0.05, name


def _wander_twist(t):
    """A smoothly varying body twist (in/s, in/s, rad/s) for the ground-truth test."""
    return np.array([
        18.0 + 6.0 * np.sin(0.9 * t),
        5.0 * np.sin(1.7 * t + 0.3),
        1.2 * np.sin(0.6 * t) + 0.5 * np.cos(2.3 * t),
    ])


def _field_rates(t, state):
    vx, vy, w = _wander_twist(t)
    c, s = np.cos(state[2]), np.sin(state[2])
    return [c * vx - s * vy, s * vx + c * vy, w]


def test_varying_twist_accuracy_order_against_solve_ivp(practice_profile):
    # Ground truth: scipy.integrate.solve_ivp on the continuous kinematics
    # (field velocity = R(heading) * body velocity), tight tolerances.
    kin = Kinematics(practice_profile)
    loop_s, duration = 0.020, 10.0  # common practice: control loops of 5-30 ms
    times = np.arange(0.0, duration + 1e-9, loop_s)
    truth = solve_ivp(_field_rates, (0, duration), [0.0, 0.0, 0.0], t_eval=times, rtol=1e-11, atol=1e-11)
    # Wheel travel over each loop is the integral of A @ body twist: exact
    # up to the quadrature, independent of the pose integration under test.
    fine = np.linspace(0.0, duration, 200_001)
    twist = _wander_twist(fine).T
    body = np.concatenate([[np.zeros(3)], np.cumsum((twist[1:] + twist[:-1]) / 2 * np.diff(fine)[:, None], axis=0)])
    at_loops = np.array([np.interp(times, fine, body[:, i]) for i in range(3)]).T
    deltas = np.diff(at_loops, axis=0)  # body-frame twist integrals = travel solve, no quantisation
    deltas = kin.body_delta(kin.wheel_travel(deltas))
    errors = {}
    for method in METHODS:
        poses = integrate(deltas, np.zeros(3), method)
        errors[method] = np.max(np.hypot(*(poses[:, :2] - truth.y[:2, 1:].T).T))
    assert errors["arc"] < errors["midpoint"] < errors["euler"], errors
    assert errors["arc"] < 0.01


@settings(max_examples=60, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    n=st.integers(1, 400),
    method=st.sampled_from(METHODS),
    rotation_scale=st.sampled_from([0.0, 1e-7, 1e-3, 0.05, 1.0]),
)
def test_batch_equals_streaming(seed, n, method, rotation_scale):
    rng = np.random.default_rng(seed)
    deltas = np.column_stack([rng.normal(0, 1, n), rng.normal(0, 1, n), rng.normal(0, rotation_scale, n)])
    start = rng.normal(size=3) * [50, 50, 3]
    anchors = np.full((n, 3), np.nan)
    marks = rng.random(n) < 0.05
    anchors[marks] = rng.normal(size=(marks.sum(), 3)) * 30
    batch = integrate(deltas, start, method, np.flatnonzero(marks), anchors[marks])
    pose = start
    for k in range(n):
        pose = anchors[k] if marks[k] else step(pose, deltas[k], method)
        np.testing.assert_allclose(batch[k], pose, atol=1e-9, rtol=0)


def test_unknown_method_is_refused():
    with pytest.raises(ValueError, match="unknown integration method 'rk4'"):
        step(np.zeros(3), np.ones(3), "rk4")


def test_wrap_angle_range():
    angles = np.array([-3 * math.pi, -math.pi, 0.0, math.pi, 3 * math.pi, 7.0, -7.0])
    wrapped = wrap_angle(angles)
    assert np.all(wrapped > -math.pi) and np.all(wrapped <= math.pi)
    np.testing.assert_allclose(np.cos(wrapped), np.cos(angles), atol=1e-12)
    assert wrapped[1] == pytest.approx(math.pi)


def test_long_batch_across_blocks_equals_streaming():
    # The batch path works in blocks of samples; crossing several block
    # boundaries must not change the result beyond rounding.
    rng = np.random.default_rng(21)
    n = 40_000
    deltas = np.column_stack([rng.normal(0.3, 0.1, n), rng.normal(0, 0.1, n), rng.normal(0, 0.02, n)])
    start = np.array([10.0, -20.0, 1.0])
    batch = integrate(deltas, start, "arc")
    pose = start
    for k in range(n):
        pose = step(pose, deltas[k], "arc")
        if k % 997 == 0 or k == n - 1:
            np.testing.assert_allclose(batch[k], pose, atol=1e-9, rtol=0)


@pytest.mark.parametrize("method", METHODS)
def test_a_step_over_several_loops_is_what_the_robot_integrated(method):
    # A sample after lost ones carries several loops' counts. With loops=k
    # the step is the robot's own k equal steps (the same method applied k
    # times to delta / k, with plain ``step`` as the reference): for arc one
    # arc of the sum is exact, Euler and midpoint need the sum of rotations.
    rng = np.random.default_rng(12)
    deltas = rng.normal(size=(40, 3)) * [0.6, 0.3, 0.2]
    loops = rng.integers(1, 5, size=40)
    start = np.array([3.0, -2.0, 0.4])
    expected, pose = [], start
    for delta, k in zip(deltas, loops):
        for _ in range(k):
            pose = step(pose, delta / k, method)
        expected.append(pose)
    expected = np.asarray(expected)
    np.testing.assert_allclose(integrate(deltas, start, method, loops=loops), expected, atol=1e-9)
    # The anchored path too (a re-anchor in the middle sets the pose it reached).
    marks = np.array([20])
    np.testing.assert_allclose(integrate(deltas, start, method, marks, expected[marks], loops), expected, atol=1e-9)
    # One loop each is the plain integration.
    np.testing.assert_array_equal(integrate(deltas, start, method, loops=np.ones(40, int)), integrate(deltas, start, method))
