"""RawHistory as a hub listener: the robots' own samples, bounded, as the offline checks read them."""

from __future__ import annotations

import json

import numpy as np
import pytest

from receiver.analysis.diagnose import diagnose, diagnose_recent
from receiver.formats.protocol import decode
from receiver.live.hub import Hub
from receiver.live.raw_history import RawHistory
from receiver.odometry.columns import COLUMN_NAMES, columns_from_samples
from receiver.odometry.faults import parse_faults
from receiver.sim.simulate import simulate
from tests.synthetic import constant_twist_messages

RX0 = 1_790_000_000.0


def _hub_with_raw(profile, **kwargs) -> tuple[Hub, RawHistory]:
    hub = Hub({profile.name: profile})
    raw = RawHistory(**kwargs)
    hub.add_listener(raw)
    return hub, raw


def _feed(hub: Hub, messages: list[dict], every: int = 7) -> None:
    for k, m in enumerate(messages):
        hub.ingest(*decode(json.dumps(m).encode()), RX0 + 0.01 * k, "test")
        if k % every == every - 1:
            hub.process(RX0 + 0.01 * k)
    hub.process(RX0 + 0.01 * len(messages))


def test_columns_are_what_the_robot_sent_with_the_receivers_rx(practice_profile):
    # More than one flush of pending rows (256), some without a pose, IMU or loop.
    messages = constant_twist_messages(practice_profile, seconds=7.0)
    for k in range(0, len(messages), 5):
        messages[k].pop("pose", None)
    messages[10]["reset"] = True
    hub, raw = _hub_with_raw(practice_profile)
    _feed(hub, messages)
    got = raw.columns(practice_profile.name)
    samples = [decode(json.dumps(m).encode())[0][0] for m in messages]
    for k, s in enumerate(samples):
        s.rx = RX0 + 0.01 * k
    want = columns_from_samples(samples, len(practice_profile.wheels))
    for name in COLUMN_NAMES:
        np.testing.assert_array_equal(getattr(got, name), getattr(want, name), err_msg=name)
    assert raw.robots() == [practice_profile.name]
    assert raw.latest_rx(practice_profile.name) == RX0 + 0.01 * (len(messages) - 1)
    since = raw.columns(practice_profile.name, since_rx=RX0 + 0.01 * 99.5)
    np.testing.assert_array_equal(since.seq, want.seq[100:])
    assert raw.columns("nobody") is None and raw.latest_rx("nobody") is None


def test_refused_samples_are_not_kept(practice_profile):
    messages = constant_twist_messages(practice_profile, seconds=0.2)
    hub, raw = _hub_with_raw(practice_profile)
    _feed(hub, [*messages[:3], dict(messages[3], ticks=[1, 2]), *messages[4:]])
    np.testing.assert_array_equal(raw.columns(practice_profile.name).seq, [m["seq"] for m in messages if m["seq"] != 3])


def test_memory_is_bounded_by_rows_and_by_time(practice_profile):
    messages = constant_twist_messages(practice_profile, seconds=20.0)  # 50 Hz, 0.01 s apart in rx here
    hub, raw = _hub_with_raw(practice_profile, window_s=1.0, max_rows=300)
    _feed(hub, messages)
    kept = raw.columns(practice_profile.name)
    assert len(kept) <= 300
    np.testing.assert_array_equal(kept.seq, [m["seq"] for m in messages][-len(kept):])
    assert kept.rx[-1] - kept.rx[0] >= 1.0  # the whole window is still there


def test_live_diagnosis_on_the_kept_samples_equals_the_offline_one(practice_profile):
    run = simulate(practice_profile, "figure-eight", 100.0, 6.0, 3, parse_faults(["reversed:right"], practice_profile))
    hub, raw = _hub_with_raw(practice_profile)
    for k, s in enumerate(run.samples):
        hub.ingest([s], [], RX0 + float(run.arrival_s[k]), "test")
        if k % 4 == 3:
            hub.process(RX0 + float(run.arrival_s[k]))
    hub.process(RX0 + 10.0)
    live = diagnose_recent(raw.columns(practice_profile.name), practice_profile, 4.0)
    offline = diagnose_recent(columns_from_samples(run.samples, len(practice_profile.wheels)), practice_profile, 4.0)
    assert live.verdict == offline.verdict == "the robot code treats the right wheel as reversed; the profile does not"
    assert live.best.score == pytest.approx(offline.best.score, rel=1e-9)
    assert diagnose(raw.columns(practice_profile.name), practice_profile).best.hypothesis.id == "reversed:right"
