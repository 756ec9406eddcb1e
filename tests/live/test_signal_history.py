"""RawHistory.signals: a robot's own signals over a time window, as (rx, values) per name."""

from __future__ import annotations

import json
import socket

import numpy as np

from receiver.formats.protocol import decode
from receiver.live.hub import Hub
from receiver.live.raw_history import RawHistory
from receiver.live.serve import ServeConfig
from receiver.live.signal_history import MAX_NAMES_PER_ROBOT, SignalStore
from tests.live.harness import handled, live_receiver, wait_until
from tests.synthetic import constant_twist_messages

RX0 = 1_790_000_000.0


def _signalled(profile, seconds: float = 7.0) -> list[dict]:
    messages = constant_twist_messages(profile, seconds=seconds)
    for k, m in enumerate(messages):
        if k % 2:
            m["data"] = {"arm": 0.5 * k} | ({"lift": -float(k)} if k % 3 == 0 else {})
    return messages


def test_signals_by_name_with_their_receive_times(practice_profile):
    messages = _signalled(practice_profile)  # 351 messages: more than one flush of pending rows
    hub, raw = Hub({practice_profile.name: practice_profile}), RawHistory()
    hub.add_listener(raw)
    for k, m in enumerate(messages):
        hub.ingest(*decode(json.dumps(m).encode()), RX0 + 0.01 * k, "test")
        if k % 5 == 4:
            hub.process(RX0 + 0.01 * k)
    hub.process(RX0 + 0.01 * len(messages))
    got = raw.signals(practice_profile.name)
    assert list(got) == ["arm", "lift"]
    arm_k = [k for k in range(len(messages)) if k % 2]
    lift_k = [k for k in arm_k if k % 3 == 0]
    np.testing.assert_allclose(got["arm"][0], [RX0 + 0.01 * k for k in arm_k], rtol=0, atol=1e-6)
    np.testing.assert_array_equal(got["arm"][1], [0.5 * k for k in arm_k])
    np.testing.assert_array_equal(got["lift"][1], [-float(k) for k in lift_k])
    # a window: only what came after since_rx
    since = RX0 + 0.01 * 300
    recent = raw.signals(practice_profile.name, since_rx=since)
    np.testing.assert_array_equal(recent["arm"][1], [0.5 * k for k in arm_k if k > 300])
    assert raw.signals("nobody") == {} and raw.signals(practice_profile.name, since_rx=RX0 + 1e6) == {}


def test_old_signals_leave_the_window_and_invented_names_are_bounded():
    store = SignalStore(window_s=10.0, max_rows=100_000)
    for k in range(20_000):
        store.add("bot", RX0 + 0.1 * k, {"arm": float(k)})
    names, cut = store.cut("bot")
    rows = cut.rows()
    # whole blocks of rows (4096) go once they are out of the window: what is left is recent
    assert rows["rx"][-1] - rows["rx"][0] <= 10.0 + 4096 * 0.1 and len(rows["rx"]) < 2 * 4096
    np.testing.assert_array_equal(rows["value"], np.arange(20_000 - len(rows["rx"]), 20_000))
    for k in range(MAX_NAMES_PER_ROBOT + 10):
        store.add("bot", RX0 + 300.0, {f"s{k}": 1.0})
    assert len(store.cut("bot")[0]) == MAX_NAMES_PER_ROBOT and store.names_refused == 11


def test_signals_sent_over_udp_reach_the_raw_history(practice_profile):
    config = ServeConfig({practice_profile.name: practice_profile}, udp=("127.0.0.1", 0))
    messages = _signalled(practice_profile, seconds=1.0)
    with live_receiver(config) as live:
        raw = RawHistory()
        live.hub.add_listener(raw)
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
            for m in messages:
                sock.sendto(json.dumps(m).encode(), live.udp.address)
                wait_until(lambda: handled(live) >= m["seq"] + 1, "the datagram just sent")
        got = raw.signals(practice_profile.name)
    assert list(got) == ["arm", "lift"]
    np.testing.assert_array_equal(got["arm"][1], [m["data"]["arm"] for m in messages if "data" in m])
    assert np.all(np.diff(got["arm"][0]) >= 0)


def test_a_replayed_recording_hands_its_signals_over_too(tmp_path, practice_profile):
    from receiver.formats.recording import read_recording
    from receiver.live.replay import recorded_samples, replay_into_hub
    from tests.synthetic import write_recording

    messages = _signalled(practice_profile, seconds=2.0)
    data = read_recording(write_recording(tmp_path / "rec.jsonl", messages, [practice_profile]))
    samples, _ = recorded_samples(data)
    assert [s.data for s in samples] == [m.get("data") for m in messages]
    hub, raw = Hub({practice_profile.name: practice_profile}), RawHistory()
    hub.add_listener(raw)
    assert replay_into_hub(data, hub, speed=0) == len(messages)
    got = raw.signals(practice_profile.name)
    np.testing.assert_array_equal(got["lift"][1], [m["data"]["lift"] for m in messages if "lift" in m.get("data", {})])
    np.testing.assert_allclose(got["lift"][0], [1_790_000_000.0 + k * 0.01 for k, m in enumerate(messages)
                                                if "lift" in m.get("data", {})], rtol=0, atol=1e-6)
