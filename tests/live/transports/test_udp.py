"""The UDP receive loop on a real loopback socket: it processes what it takes
itself (no pump needed), in passes that mix the one-by-one and numpy paths,
and the poses equal the offline recompute of the same messages."""

from __future__ import annotations

import socket
import time

import numpy as np

from receiver.formats.protocol import encode
from receiver.live.hub import Hub
from receiver.live.transports.udp import MAX_DATAGRAMS_PER_PASS, UdpReceiver
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.recompute import Tracker
from receiver.sim.simulate import simulate
from tests.live.harness import wait_until


def test_the_receive_loop_recomputes_a_backlog_and_a_trickle_without_a_pump(practice_profile):
    run = simulate(practice_profile, rate_hz=100.0, duration_s=10.0, seed=5, near_wrap=True)
    samples = run.samples
    backlog = 3 * MAX_DATAGRAMS_PER_PASS  # sent before the loop starts: whole passes, the numpy path
    hub = Hub({practice_profile.name: practice_profile})
    passes: list[int] = []
    hub.add_listener(lambda accepted, updates: passes.append(len(accepted)))
    udp = UdpReceiver(hub, "127.0.0.1", 0)
    try:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sender:
            for sample in samples[:backlog]:
                sender.sendto(encode(sample), udp.address)
            udp.start()
            wait_until(lambda: hub.snapshot(time.time())[practice_profile.name].messages == backlog, "the backlog")
            for sample in samples[backlog:]:  # then one at a time: the one-by-one path
                sender.sendto(encode(sample), udp.address)
                time.sleep(0.0005)
            wait_until(lambda: hub.snapshot(time.time())[practice_profile.name].messages == len(samples), "the rest")
    finally:
        udp.stop()
    assert max(passes) == MAX_DATAGRAMS_PER_PASS and min(passes) < 32
    rows = hub.history(practice_profile.name)
    offline = Tracker(practice_profile).feed(columns_from_samples(samples, 3))
    np.testing.assert_array_equal(rows["seq"], offline.seq)
    np.testing.assert_allclose(rows["pose"], offline.pose, atol=1e-9, rtol=0)
    assert udp.datagrams == len(samples)
