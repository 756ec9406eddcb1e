"""Per-robot recompute: anchoring, resets, reboots, gaps, pieces vs whole."""

from __future__ import annotations

import numpy as np
import pytest

from receiver.formats.protocol import Sample
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.counts import SampleKind
from receiver.odometry.recompute import Tracker
from tests.synthetic import constant_twist_messages


def _cols(messages, n_wheels=3):
    return columns_from_samples([Sample(**m) for m in messages], n_wheels)


def test_clean_run_agrees_with_the_robot(practice_profile):
    messages = constant_twist_messages(practice_profile)
    result = Tracker(practice_profile).feed(_cols(messages))
    assert len(result.seq) == len(messages)
    # Encoder quantisation only: one count is 0.00053 in.
    assert np.nanmax(result.position_error) < 0.005
    assert np.nanmax(np.abs(result.heading_error)) < 1e-3


def test_starts_at_the_first_reported_pose(practice_profile):
    messages = constant_twist_messages(practice_profile)
    for m in messages:
        m["pose"] = [m["pose"][0] + 30.0, m["pose"][1] - 12.0, m["pose"][2] + 1.0]
    result = Tracker(practice_profile).feed(_cols(messages))
    np.testing.assert_allclose(result.pose[0], [30.0, -12.0, 1.0])
    # A constant offset in the robot's frame is not a constant offset after
    # rotation, so only the start is checked exactly.
    assert result.kind[0] == SampleKind.FIRST


def test_origin_when_the_robot_sends_no_pose(practice_profile):
    messages = constant_twist_messages(practice_profile)
    for m in messages:
        del m["pose"]
    result = Tracker(practice_profile).feed(_cols(messages))
    np.testing.assert_allclose(result.pose[0], [0.0, 0.0, 0.0])
    assert np.all(np.isnan(result.position_error))
    assert result.pose[-1][0] > 10.0  # it still moved


def test_counter_wrap_is_not_a_jump(practice_profile):
    plain = Tracker(practice_profile).feed(_cols(constant_twist_messages(practice_profile)))
    near_wrap = constant_twist_messages(practice_profile, start_counts=2**31 - 500)
    assert any(c < 0 for c in near_wrap[-1]["ticks"])  # the counters really did wrap
    wrapped = Tracker(practice_profile).feed(_cols(near_wrap))
    np.testing.assert_allclose(wrapped.pose, plain.pose, atol=1e-9)


def test_gap_is_bridged_by_cumulative_counts(practice_profile):
    messages = constant_twist_messages(practice_profile)
    full = Tracker(practice_profile).feed(_cols(messages))
    rng = np.random.default_rng(8)
    kept = [m for k, m in enumerate(messages) if k in (0, len(messages) - 1) or rng.random() > 0.2]
    assert len(kept) < 0.9 * len(messages)
    lossy = Tracker(practice_profile).feed(_cols(kept))
    # Constant twist: the arc over a longer step is still exact, so every
    # surviving sample has the pose it had without loss, up to how encoder
    # quantisation (0.00053 in a count) falls on the longer steps.
    np.testing.assert_allclose(lossy.pose, full.pose[np.isin(full.seq, lossy.seq)], atol=1e-3)


def test_duplicates_and_late_packets_are_ignored(practice_profile):
    messages = constant_twist_messages(practice_profile)
    full = Tracker(practice_profile).feed(_cols(messages))
    messy = list(messages)
    messy.insert(50, messages[49])  # duplicate
    messy[100], messy[101] = messy[101], messy[100]  # reordered pair: one becomes late
    result = Tracker(practice_profile).feed(_cols(messy))
    assert result.dropped == {"duplicate": 1, "late": 1}
    np.testing.assert_allclose(result.pose[-1], full.pose[-1], atol=0.01)


def test_reboot_re_anchors_instead_of_integrating_the_jump(practice_profile):
    before = constant_twist_messages(practice_profile, start_counts=500_000, t0=30.0)
    after = constant_twist_messages(practice_profile, t0=0.5)  # counts, seq and clock start again
    result = Tracker(practice_profile).feed(_cols(before + after))
    k = len(before)
    assert result.kind[k] == SampleKind.RESTART
    # Re-anchored at the robot's reported pose (its own restart at the origin).
    np.testing.assert_allclose(result.pose[k], [0.0, 0.0, 0.0], atol=1e-12)
    assert np.nanmax(result.position_error) < 0.005


def test_reset_re_anchors_at_the_reported_pose(practice_profile):
    messages = constant_twist_messages(practice_profile)
    messages[120]["reset"] = True
    messages[120]["pose"] = [72.0, -36.0, 3.0]
    result = Tracker(practice_profile).feed(_cols(messages))
    assert result.kind[120] == SampleKind.RESET
    np.testing.assert_allclose(result.pose[120], [72.0, -36.0, 3.0])


@pytest.mark.parametrize("piece", [1, 7, 64])
def test_fed_in_pieces_equals_fed_whole(practice_profile, piece):
    messages = constant_twist_messages(practice_profile, twist_per_s=(10.0, -4.0, 1.1), start_counts=2**31 - 2000)
    messages.insert(30, messages[29])
    messages[60], messages[61] = messages[61], messages[60]
    messages[90]["reset"] = True
    messages += constant_twist_messages(practice_profile, t0=0.2)
    cols = _cols(messages)
    whole = Tracker(practice_profile).feed(cols)
    tracker = Tracker(practice_profile)
    parts = [tracker.feed(cols.take(np.arange(i, min(i + piece, len(cols))))) for i in range(0, len(cols), piece)]
    np.testing.assert_allclose(np.vstack([p.pose for p in parts]), whole.pose, atol=1e-9, rtol=0)
    np.testing.assert_array_equal(np.concatenate([p.kind for p in parts]), whole.kind)


def test_loop_period_is_derived_when_absent(practice_profile):
    messages = constant_twist_messages(practice_profile, rate_hz=100.0)
    for m in messages:
        del m["loop"]
    del messages[10]  # a gap of two loops still gives one loop's period
    result = Tracker(practice_profile).feed(_cols(messages))
    assert np.isnan(result.loop_s[0])
    np.testing.assert_allclose(result.loop_s[1:], 0.01, rtol=1e-6)


def test_imu_heading_mode(practice_profile):
    from dataclasses import replace

    profile = replace(practice_profile, imu_mode="heading")
    messages = constant_twist_messages(profile)
    for m in messages:
        m["imu"] = m["pose"][2]  # a perfect IMU reading the true heading
    # Spoil the right wheel's heading information: the IMU must carry it.
    for m in messages:
        m["ticks"][1] = m["ticks"][0]
    result = Tracker(profile).feed(_cols(messages))
    assert np.nanmax(np.abs(result.heading_error)) < 1e-9
    plain = Tracker(practice_profile).feed(_cols(messages))
    assert np.nanmax(np.abs(plain.heading_error)) > 0.5
