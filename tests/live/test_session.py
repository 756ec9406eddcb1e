"""The hub with an in-memory feed: receiver-level rules, link statistics,
link states, ring buffers, and poses equal to the offline recompute."""

from __future__ import annotations

import json
import math
from dataclasses import replace

import msgspec
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from receiver.formats.protocol import Reason, Sample, decode, decode_keeping_raw, decode_message
from receiver.live.hub import Hub
from receiver.live.ring_buffer import RingBuffer
from receiver.live.session import TRANSITIONS, LinkEvent, LinkState
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.recompute import Tracker
from tests.synthetic import constant_twist_messages

RX0 = 1_790_000_000.0


def feed(hub: Hub, messages: list[dict], rx0: float = RX0, dt: float = 0.02, every: int = 5) -> None:
    """Ingest one message per 'datagram', processing every few, like the pump."""
    for k, m in enumerate(messages):
        samples, failures = decode(json.dumps(m).encode())
        hub.ingest(samples, failures, rx0 + k * dt, "test")
        if k % every == every - 1:
            hub.process(rx0 + k * dt)
    hub.process(rx0 + len(messages) * dt)


def offline(profile, messages):
    samples = [decode(json.dumps(m).encode())[0][0] for m in messages]
    return Tracker(profile).feed(columns_from_samples(samples, len(profile.wheels)))


class ListRecorder:
    def __init__(self):
        self.samples: list[Sample] = []
        self.raws: list[bytes | None] = []
        self.flushes = 0

    def write(self, samples, rx=None, raws=None):
        assert raws is None or len(raws) == len(samples)
        self.samples.extend(samples)
        self.raws.extend([None] * len(samples) if raws is None else raws)

    def flush(self, now=None):
        self.flushes += 1
        return True


def test_live_poses_equal_the_offline_recompute(practice_profile):
    messages = constant_twist_messages(practice_profile, seconds=3.0)
    hub = Hub({practice_profile.name: practice_profile})
    feed(hub, messages, every=3)
    rows = hub.history(practice_profile.name)
    ref = offline(practice_profile, messages)
    np.testing.assert_allclose(rows["pose"], ref.pose, atol=1e-9, rtol=0)
    np.testing.assert_allclose(rows["position_error"], ref.position_error, atol=1e-9, rtol=0)
    np.testing.assert_array_equal(rows["seq"], ref.seq)


def test_wrong_ticks_length_and_too_many_robots_are_refused(practice_profile):
    hub = Hub({practice_profile.name: practice_profile}, max_robots=3)
    good = constant_twist_messages(practice_profile, seconds=0.1)
    stray = [dict(good[0], robot=f"visitor-{k}", ticks=[1, 2]) for k in range(4)]
    feed(hub, [*good[:2], dict(good[2], ticks=[1, 2, 3, 4]), *stray, *good[2:]])
    assert hub.errors == {Reason.WRONG_TICKS_LENGTH: 1, Reason.TOO_MANY_ROBOTS: 2}
    assert set(hub.sessions) == {"practice-bot", "visitor-0", "visitor-1"}
    snap = hub.snapshot(RX0)["practice-bot"]
    assert snap.messages == len(good) and snap.errors == {"wrong_ticks_length": 1}


def test_a_robot_without_a_profile_is_kept_but_not_recomputed(practice_profile):
    recorder = ListRecorder()
    hub = Hub({}, recorder=recorder)
    messages = constant_twist_messages(practice_profile, seconds=0.5)
    feed(hub, messages)
    snap = hub.snapshot(RX0 + 0.5)["practice-bot"]
    assert not snap.has_profile and snap.state is LinkState.LIVE
    assert snap.messages == len(messages) and snap.pose is None
    assert snap.reported == pytest.approx(tuple(messages[-1]["pose"]))
    assert snap.loop_p50_s == pytest.approx(0.02)
    # the page's snapshot skips the loop statistics (it computes its own) and nothing else
    light = hub.snapshot(RX0 + 0.5, loop_stats=False)["practice-bot"]
    assert math.isnan(light.loop_p50_s) and math.isnan(light.loop_mean_s)
    assert light.messages == snap.messages and light.reported == snap.reported and light.state is snap.state
    assert len(recorder.samples) == len(messages)
    # the first message fixes the ticks length of a robot without a profile
    feed(hub, [dict(messages[-1], seq=10_000, ticks=[1, 2])])
    assert hub.errors == {Reason.WRONG_TICKS_LENGTH: 1}


def test_the_recorder_gets_the_bytes_of_each_accepted_message(practice_profile):
    recorder = ListRecorder()
    hub = Hub({practice_profile.name: practice_profile}, recorder=recorder, max_robots=2)
    good = [dict(m, motor_power=0.5) for m in constant_twist_messages(practice_profile, seconds=0.2)]
    datagrams = [
        json.dumps(good[0]).encode(),
        json.dumps(dict(good[1], ticks=[1, 2])).encode(),  # refused by the hub: wrong ticks length
        json.dumps(good[1:4]).encode(),  # a batch
        json.dumps([dict(good[4], seq="x"), good[4], dict(good[5], robot="visitor-0")]).encode(),
        json.dumps(dict(good[5], robot="visitor-1")).encode(),  # refused by the hub: one robot too many
        json.dumps(good[5]).encode(),
    ]
    for k, data in enumerate(datagrams):
        samples, failures, raws = decode_keeping_raw(data)
        hub.ingest(samples, failures, RX0 + k, "test", raws=raws)
        if k % 2:
            hub.process(RX0 + k)
    hub.ingest(*decode(json.dumps(good[6]).encode()), RX0 + 9, "test")  # without its bytes, as a replay
    hub.process(RX0 + 9)
    assert hub.errors == {Reason.WRONG_TICKS_LENGTH: 1, Reason.WRONG_TYPE: 1, Reason.TOO_MANY_ROBOTS: 1}
    assert [(s.robot, s.seq) for s in recorder.samples] == [
        *[("practice-bot", k) for k in range(5)], ("visitor-0", 5), ("practice-bot", 5), ("practice-bot", 6)
    ]
    assert recorder.raws[-1] is None
    for sample, raw in zip(recorder.samples[:-1], recorder.raws):
        assert b"motor_power" in raw
        assert decode_message(raw) == msgspec.structs.replace(sample, rx=None)


def test_gaps_duplicates_and_late_samples_are_counted(practice_profile):
    messages = constant_twist_messages(practice_profile, seconds=1.0)  # seq 0..50
    order = list(range(0, 10)) + [12, 11, 11, 13, 13] + list(range(14, 20)) + list(range(25, 51))
    hub = Hub({practice_profile.name: practice_profile})
    feed(hub, [messages[k] for k in order], every=1)
    snap = hub.snapshot(RX0)["practice-bot"]
    # 10 and 11 skipped at 12, 20..24 at 25; 11 then comes late, twice (older than
    # the last accepted, so not a duplicate); 13 twice in a row is a duplicate
    assert (snap.gaps, snap.late, snap.duplicates) == (2 + 5, 2, 1)
    assert snap.messages == len(order)
    # the pose is bridged across the gaps from the cumulative counts: the same as
    # the offline recompute of what arrived, and close to the run without losses
    # (the arc step is exact for this constant twist; count rounding differs)
    assert snap.pose == pytest.approx(tuple(offline(practice_profile, [messages[k] for k in order]).pose[-1]), abs=1e-9)
    assert snap.pose == pytest.approx(tuple(offline(practice_profile, messages).pose[-1]), abs=1e-3)


def test_decode_errors_count_globally_and_per_robot(practice_profile):
    hub = Hub({practice_profile.name: practice_profile})
    good = constant_twist_messages(practice_profile, seconds=0.1)
    hub.ingest(*decode(b"not json"), RX0, "test")
    hub.ingest(*decode(json.dumps(dict(good[0], seq="x")).encode()), RX0, "test")
    hub.ingest(*decode(json.dumps(good[:3]).encode()), RX0, "test")
    hub.process(RX0)
    assert hub.errors == {Reason.NOT_JSON: 1, Reason.WRONG_TYPE: 1}
    assert hub.snapshot(RX0)["practice-bot"].errors == {"wrong_type": 1}
    assert hub.snapshot(RX0)["practice-bot"].messages == 3


def test_link_states_follow_the_transition_table(practice_profile):
    hub = Hub({practice_profile.name: practice_profile}, quiet_after_s=1.0)
    assert hub.snapshot(RX0)["practice-bot"].state is LinkState.WAITING
    hub.tick(RX0 + 100)
    assert hub.snapshot(RX0)["practice-bot"].state is LinkState.WAITING  # silence before data changes nothing
    messages = constant_twist_messages(practice_profile, seconds=0.2)
    feed(hub, messages[:5], dt=0.0)
    assert hub.snapshot(RX0)["practice-bot"].state is LinkState.LIVE
    hub.tick(RX0 + 1.5)
    assert hub.snapshot(RX0)["practice-bot"].state is LinkState.QUIET
    feed(hub, messages[5:], rx0=RX0 + 2, dt=0.0)
    assert hub.snapshot(RX0)["practice-bot"].state is LinkState.LIVE
    assert (LinkState.WAITING, LinkEvent.SILENCE) not in TRANSITIONS


def test_a_silent_robot_goes_quiet_while_another_keeps_sending(practice_profile):
    """``process`` skips the walk over every session while no live robot can
    have been silent long enough; the one that has still goes QUIET, at the
    first ``process`` after quiet_after_s, as ``tick`` would move it."""
    other = replace(practice_profile, name="other-bot")
    hub = Hub({practice_profile.name: practice_profile, other.name: other}, quiet_after_s=1.0)
    messages = constant_twist_messages(practice_profile, seconds=3.0)  # 50 Hz
    for k, m in enumerate(messages):
        rx = RX0 + 0.02 * k
        hub.ingest(*decode(json.dumps(m).encode()), rx, "test")
        if k < 10:  # other-bot sends for the first 0.2 s only
            hub.ingest(*decode(json.dumps(dict(m, robot=other.name)).encode()), rx, "test")
        hub.process(rx)
        state = hub.snapshot(rx)[other.name].state
        # other-bot's last message came at RX0 + 0.18
        assert state is (LinkState.QUIET if rx - (RX0 + 0.18) > 1.0 else LinkState.LIVE), k
    assert hub.snapshot(rx)[practice_profile.name].state is LinkState.LIVE


def test_rate_and_jitter(practice_profile):
    messages = constant_twist_messages(practice_profile, rate_hz=50.0, seconds=2.0)
    hub = Hub({practice_profile.name: practice_profile})
    rng = np.random.default_rng(3)
    for k, m in enumerate(messages):
        # arrivals 20 ms apart plus up to 4 ms of network delay
        hub.ingest(*decode(json.dumps(m).encode()), RX0 + k * 0.02 + rng.uniform(0, 0.004), "test")
    hub.process(RX0 + 2.0)
    snap = hub.snapshot(RX0 + 2.0)["practice-bot"]
    assert snap.rate_hz == pytest.approx(50, abs=1)
    # RFC 3550: for delays uniform on [0, a] the mean |D| is a/3; the filter hovers near it
    assert 0.0005 < snap.jitter_s < 0.003


def test_ring_buffer_keeps_the_window_and_stays_bounded():
    ring = RingBuffer({"rx": (float, None), "v": (float, 2)}, window_s=10.0, max_rows=5000, block_rows=256)
    for start in range(0, 20_000, 100):  # 100 rows per second, for 200 s
        rx = np.arange(start, start + 100) / 100.0
        ring.append(rx=rx, v=np.column_stack([rx, -rx]))
    rows = ring.rows()
    # grew only as far as the 10 s window needed: its 1000 rows, a block that
    # is partly outside it and the block being filled
    assert ring.capacity <= 1000 + 2 * 256
    assert rows["rx"][-1] == 199.99 and rows["rx"][0] <= 199.99 - 10.0
    assert np.all(np.diff(rows["rx"]) > 0)
    np.testing.assert_array_equal(rows["v"][:, 1], -rows["rx"])


def test_ring_buffer_overwrites_at_its_cap():
    ring = RingBuffer({"rx": (float, None)}, window_s=1e9, max_rows=3000, block_rows=1024)
    ring.append(rx=np.arange(10_000.0))
    ring.append(rx=np.arange(10_000.0, 10_050.0))
    assert len(ring) == 3000 and ring.capacity <= 3000 + 1024
    np.testing.assert_array_equal(ring.rows()["rx"], np.arange(7050.0, 10_050.0))


@settings(max_examples=80, deadline=None)
@given(
    pieces=st.lists(st.tuples(st.integers(0, 700), st.floats(0.0, 3.0)), min_size=1, max_size=40),
    window_s=st.floats(0.5, 50.0),
    max_rows=st.integers(1, 3000),
    block_rows=st.integers(1, 600),
)
def test_ring_buffer_against_a_plain_list(pieces, window_s, max_rows, block_rows):
    """Appends of any size keep exactly the newest rows: every row of the
    window up to the cap, never more than the cap, in blocks that are all in
    use. Reads since an rx and of the newest row agree with the plain list,
    and a cut still reads what it held after any later appends."""
    ring = RingBuffer({"rx": (float, None), "seq": (np.int64, None), "v": (float, 3)}, window_s, max_rows, block_rows)
    rx_all: list[float] = []
    cuts = []  # (a cut taken after each append, the seq it held then)
    clock = 0.0
    for n, dt in pieces:
        rx = clock + dt * np.arange(1, n + 1) / max(n, 1)
        clock = float(rx[-1]) if n else clock
        seq = np.arange(len(rx_all), len(rx_all) + n)
        ring.append(rx=rx, seq=seq, v=np.column_stack([seq, -seq, 2 * seq]).astype(float))
        rx_all += rx.tolist()
        rows = ring.rows()
        kept = len(rows["rx"])
        assert kept == len(ring) <= max_rows
        np.testing.assert_array_equal(rows["seq"], np.arange(len(rx_all) - kept, len(rx_all)))
        np.testing.assert_array_equal(rows["rx"], rx_all[len(rx_all) - kept :])
        np.testing.assert_array_equal(rows["v"][:, 2], 2.0 * rows["seq"])
        cuts.append((ring.cut(), rows["seq"]))
        if rx_all:
            in_window = sum(r >= rx_all[-1] - window_s for r in rx_all)
            assert kept >= min(in_window, max_rows)
            assert ring.capacity < kept + 2 * min(block_rows, max_rows)  # no empty block held
            newest = ring.newest()
            assert newest["seq"] == len(rx_all) - 1 and newest["v"].tolist() == [len(rx_all) - 1, 1 - len(rx_all), 2 * len(rx_all) - 2]
            since = rx_all[-1] - window_s / 3
            np.testing.assert_array_equal(ring.rows(since, names=("seq",))["seq"], rows["seq"][rows["rx"] > since])
            assert ring.first_after(since) == int(np.count_nonzero(rows["rx"] <= since))
    assert ring.rows(clock + 1.0)["v"].shape == (0, 3)
    for cut, seq in cuts:  # later appends never wrote over what a cut holds
        np.testing.assert_array_equal(cut.rows(("seq",))["seq"], seq)
        np.testing.assert_array_equal(cut.rows()["v"][:, 1], -seq)
