"""The one-sample path (plain floats, what the live receiver runs for a few
samples per robot at a time) against the vectorised path it must equal:
the same kinds and statistics, poses to 1e-9, over seeded messy streams with
counter wraps, seq wraps, duplicates, late packets, gaps, resets and reboots."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from receiver.formats.profile_toml import load_profile
from receiver.formats.protocol import Sample
from receiver.live import session as session_module
from receiver.live.hub import Hub
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.conventions import OneSample, imu_heading_change, reported_to_rep103
from receiver.odometry.counts import SampleKind, count_change, count_change_one
from receiver.odometry.integrate import METHODS, step, step_one, wrap_angle, wrap_angle_one
from receiver.odometry.kinematics import Kinematics
from receiver.odometry.recompute import Tracker
from receiver.odometry.robot import Reported
from tests.conftest import FIXTURES

PROFILE = load_profile(FIXTURES / "practice-bot.toml")
IMU_PROFILE = replace(PROFILE, imu_mode="heading")
CONVENTIONS = [
    Reported(heading_unit=unit, heading_positive=positive, y_axis=y_axis, heading_zero=zero)
    for unit in ("rad", "deg")
    for positive in ("ccw", "cw")
    for y_axis in ("left", "right")
    for zero in ("x", "y")
]


def messy_stream(seed: int, n: int, profile=PROFILE, robot: str | None = None) -> list[Sample]:
    """n loops of a robot wandering with varying speed and turn rate, as a
    network and a robot could deliver them: counters and seq near their
    wrap, and a sprinkling of every irregularity the receiver handles."""
    rng = np.random.default_rng(seed)
    kin = Kinematics(profile)
    turn_scale = rng.choice([0.0, 1e-6, 0.02, 0.6])  # none, tiny, usual, past the series switch
    deltas = np.column_stack([rng.normal(0.2, 0.3, n), rng.normal(0, 0.1, n), rng.normal(0, turn_scale, n)])
    counts = np.cumsum(np.rint(kin.wheel_travel(deltas) / kin.travel_per_count), axis=0).astype(np.int64)
    counts += rng.integers(2**31 - 3000, 2**31, size=kin.n_wheels)  # the counters roll over early on
    seq0 = int(rng.integers(2**32 - 40, 2**32))
    reported = rng.normal(0, 40, size=(n, 3))
    samples = []
    t = 100.0
    k = 0
    rebooted_at = 0  # index in samples of the first one after the latest reboot
    while k < n:
        t += float(rng.uniform(0.005, 0.02))
        counter = (counts[k] + 2**31) % 2**32 - 2**31
        message = dict(
            v=1, robot=robot or profile.name, seq=(seq0 + k) % 2**32, t=t, ticks=[int(c) for c in counter],
            pose=tuple(map(float, reported[k])) if rng.random() > 0.1 else None,
            imu=float(rng.uniform(-200, 200)) if rng.random() > 0.1 else None,
            loop=float(rng.uniform(0.005, 0.02)) if rng.random() > 0.3 else None,
            reset=bool(rng.random() < 0.03),
        )
        event = rng.random()
        # The robot reboots: counters and seq start again, its clock maybe too. Not
        # just before the seq wraps, where seq 0 would look like the next step.
        if event < 0.03 and 100 < message["seq"] < 2**31:
            counts -= counts[k]
            seq0 = -k
            if rng.random() < 0.5:
                t = 1.0
            rebooted_at = len(samples)
            continue
        samples.append(Sample(**message))
        if event < 0.08:
            samples.append(Sample(**message))  # duplicate
        elif event < 0.12 and len(samples) - 2 >= rebooted_at:
            # reordered, one arriving late (never across a reboot: the old sample
            # would then be a giant step, correctly integrated but no test of rounding)
            samples[-1], samples[-2] = samples[-2], samples[-1]
        k += 1 + int(event > 0.97)  # and now and then a gap
    for i, sample in enumerate(samples):
        sample.rx = 1_790_000_000.0 + 0.01 * i + float(rng.uniform(0, 0.004))
    return samples


def one_by_one(tracker: Tracker, samples: list[Sample]) -> dict:
    steps = [tracker.feed_one(s) for s in samples]
    kept = [(s, r) for s, r in zip(samples, steps) if r.pose is not None]
    return {
        "kind": np.array([r.kind for _, r in kept], dtype=np.int8),
        "seq": np.array([s.seq for s, _ in kept], dtype=np.int64),
        "pose": np.array([r.pose for _, r in kept]).reshape(-1, 3),
        "reported": np.array([r.reported for _, r in kept]).reshape(-1, 3),
        "loop_s": np.array([r.loop_s for _, r in kept]),
        "position_error": np.array([r.position_error for _, r in kept]),
        "heading_error": np.array([r.heading_error for _, r in kept]),
        "duplicate": sum(r.kind is SampleKind.DUPLICATE for r in steps),
        "late": sum(r.kind is SampleKind.LATE for r in steps),
    }


def vectorised(tracker: Tracker, samples: list[Sample]) -> dict:
    result = tracker.feed(columns_from_samples(samples, tracker.kinematics.n_wheels))
    return {
        "kind": result.kind,
        "seq": result.seq,
        "pose": result.pose,
        "reported": result.reported,
        "loop_s": result.loop_s,
        "position_error": result.position_error,
        "heading_error": result.heading_error,
        **result.dropped,
    }


def assert_same(a: dict, b: dict) -> None:
    np.testing.assert_array_equal(a["kind"], b["kind"])
    np.testing.assert_array_equal(a["seq"], b["seq"])
    assert (a["duplicate"], a["late"]) == (b["duplicate"], b["late"])
    np.testing.assert_allclose(a["pose"], b["pose"], atol=1e-9, rtol=0)
    np.testing.assert_allclose(a["reported"], b["reported"], atol=1e-12, rtol=0)
    np.testing.assert_allclose(a["loop_s"], b["loop_s"], atol=1e-12, rtol=0)
    np.testing.assert_allclose(a["position_error"], b["position_error"], atol=1e-9, rtol=0)
    # compare the heading errors across the +-pi seam, where rounding may pick either side
    heading_gap = wrap_angle(np.asarray(a["heading_error"]) - np.asarray(b["heading_error"]))
    assert np.all(np.isnan(a["heading_error"]) == np.isnan(b["heading_error"]))
    np.testing.assert_allclose(heading_gap[np.isfinite(heading_gap)], 0.0, atol=1e-9)


def concat(parts: list[dict]) -> dict:
    return {
        name: sum(p[name] for p in parts) if name in ("duplicate", "late") else np.concatenate([p[name] for p in parts])
        for name in parts[0]
    }


@settings(max_examples=60, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    n=st.integers(1, 300),
    method=st.sampled_from(METHODS),
    imu=st.booleans(),
)
def test_feed_one_equals_feed_of_the_whole_stream(seed, n, method, imu):
    profile = IMU_PROFILE if imu else PROFILE
    samples = messy_stream(seed, n, profile)
    assert_same(one_by_one(Tracker(profile, method), samples), vectorised(Tracker(profile, method), samples))


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 300), imu=st.booleans())
def test_the_two_paths_take_turns_on_one_tracker(seed, n, imu):
    """Pieces of any size, each through either path, equal the whole stream."""
    profile = IMU_PROFILE if imu else PROFILE
    samples = messy_stream(seed, n, profile)
    rng = np.random.default_rng(seed + 1)
    tracker, parts, start = Tracker(profile), [], 0
    while start < len(samples):
        piece = samples[start : start + int(rng.integers(1, 40))]
        parts.append(one_by_one(tracker, piece) if rng.random() < 0.5 else vectorised(tracker, piece))
        start += len(piece)
    assert_same(concat(parts), vectorised(Tracker(profile), samples))


def test_a_messy_stream_has_every_irregularity():
    """The generator above really produces what the equality tests claim to cover."""
    samples = messy_stream(3, 2000)
    kinds = Tracker(PROFILE).feed(columns_from_samples(samples, 3))
    assert {SampleKind.FIRST, SampleKind.STEP, SampleKind.RESET, SampleKind.RESTART} <= set(kinds.kind.tolist())
    assert kinds.dropped["duplicate"] > 0 and kinds.dropped["late"] > 0
    ticks = np.array([s.ticks for s in samples])
    assert np.any(np.abs(np.diff(ticks, axis=0)) > 2**31)  # a counter rolled over
    assert any(a.seq > b.seq for a, b in zip(samples, samples[1:]))


@settings(max_examples=200, deadline=None)
@given(
    now=st.integers(-(2**31), 2**32 - 1),
    before=st.integers(-(2**31), 2**32 - 1),
)
def test_count_change_one_equals_count_change(now, before):
    assert count_change_one(now, before) == int(count_change(np.array([now]), np.array([before]))[0])


@settings(max_examples=200, deadline=None)
@given(
    delta=st.tuples(
        st.floats(-5, 5), st.floats(-5, 5),
        st.one_of(st.just(0.0), st.floats(-1e-6, 1e-6), st.floats(-0.6, 0.6), st.floats(-3, 3)),
    ),
    pose=st.tuples(st.floats(-200, 200), st.floats(-200, 200), st.floats(-50, 50)),
    method=st.sampled_from(METHODS),
)
def test_step_one_equals_step(delta, pose, method):
    expected = step(np.array(pose), np.array(delta), method)
    np.testing.assert_allclose(step_one(pose, delta, method), expected, atol=1e-12, rtol=0)


@pytest.mark.parametrize("angle", [0.0, np.pi, -np.pi, 3 * np.pi, -3 * np.pi, 1e-300, 7.5, -7.5, np.nan])
def test_wrap_angle_one_equals_wrap_angle(angle):
    np.testing.assert_array_equal(wrap_angle_one(angle), wrap_angle(angle))


@settings(max_examples=200, deadline=None)
@given(
    dcounts=st.lists(st.integers(-5000, 5000), min_size=3, max_size=3),
    dth_imu=st.one_of(st.none(), st.just(float("nan")), st.floats(-3, 3)),
)
def test_body_delta_one_equals_body_delta(dcounts, dth_imu):
    kin = Kinematics(PROFILE)
    expected = kin.body_delta(kin.travel(np.array(dcounts)), None if dth_imu is None else np.array(dth_imu))
    np.testing.assert_allclose(kin.body_delta_one(dcounts, dth_imu), expected, atol=1e-12, rtol=0)


@pytest.mark.parametrize("reported", CONVENTIONS)
def test_one_sample_conventions_equal_the_array_functions(reported):
    one = OneSample(reported)
    pose = (12.5, -3.25, 200.0 if reported.heading_unit == "deg" else 2.5)
    np.testing.assert_allclose(one.to_rep103(pose), reported_to_rep103(np.array(pose), reported), atol=1e-15, rtol=0)
    for now, before in [(179.0, -179.0), (-3.0, 3.1), (0.25, 0.5), (float("nan"), 1.0)]:
        np.testing.assert_allclose(
            one.imu_heading_change(now, before), imu_heading_change(np.array(now), np.array(before), reported),
            atol=1e-15, rtol=0,
        )


def _hub_after(streams: list[list[Sample]], every: int) -> Hub:
    """Three robots' samples interleaved one per datagram, processed every few, like the pump."""
    hub = Hub({s[0].robot: replace(PROFILE, name=s[0].robot) for s in streams})
    merged = sorted((sample for stream in streams for sample in stream), key=lambda s: s.rx)
    for k, sample in enumerate(merged):
        hub.ingest([sample], [], sample.rx, "test")
        if k % every == every - 1:
            hub.process(sample.rx)
    hub.process(merged[-1].rx)
    return hub


@pytest.mark.parametrize("seed, every", [(1, 1), (2, 3), (3, 40), (4, 200)])
def test_hub_rows_and_statistics_equal_the_vectorised_path(seed, every, monkeypatch):
    """Every ring column and link statistic, one-by-one against numpy only."""
    robots = [f"bot-{i}" for i in range(3)]

    def streams():
        return [messy_stream(seed * 10 + i, 400, robot=name) for i, name in enumerate(robots)]

    fast = _hub_after(streams(), every)
    monkeypatch.setattr(session_module, "ONE_BY_ONE_UP_TO", 0)
    slow = _hub_after(streams(), every)
    for robot in robots:
        a, b = fast.history(robot), slow.history(robot)
        assert a.keys() == b.keys()
        for name in ("seq", "t", "rx", "kind"):
            np.testing.assert_array_equal(a[name], b[name], err_msg=name)
        for name in ("pose", "reported", "position_error", "loop"):
            np.testing.assert_allclose(a[name], b[name], atol=1e-9, rtol=0, err_msg=name)
        heading_gap = wrap_angle(a["heading_error"] - b["heading_error"])[np.isfinite(a["heading_error"])]
        np.testing.assert_allclose(heading_gap, 0.0, atol=1e-9)
        snap_a, snap_b = fast.snapshot(0.0)[robot], slow.snapshot(0.0)[robot]
        for name in ("messages", "gaps", "duplicates", "late", "restarts", "resets"):
            assert getattr(snap_a, name) == getattr(snap_b, name), name
        assert snap_a.jitter_s == pytest.approx(snap_b.jitter_s, rel=1e-12)
        assert snap_a.pose == pytest.approx(snap_b.pose, abs=1e-9)
