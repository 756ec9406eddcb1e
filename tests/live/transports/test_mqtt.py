"""Two receivers on one real Mosquitto broker: A takes UDP and forwards, B only
subscribes; B sees the same robots and recomputes the same poses, and
nothing is forwarded twice."""

from __future__ import annotations

import asyncio
import json
import socket

import aiomqtt
import msgspec
import numpy as np

from receiver.formats.protocol import PoseMessage, encode
from receiver.live.serve import ServeConfig
from receiver.live.transports.mqtt import batch_payloads, parse_mqtt_url
from receiver.sim.simulate import simulate
from tests.live.harness import handled, live_receiver, wait_until


def test_batches_respect_the_wire_limits():
    small = [b"{}"] * 600
    assert [p.count(b"{}") for p in batch_payloads(small)] == [256, 256, 88]
    big = [b'"' + b"x" * 30_000 + b'"'] * 5
    payloads = batch_payloads(big)
    assert all(len(p) <= 64 * 1024 for p in payloads) and sum(p.count(b"x" * 30_000) for p in payloads) == 5
    assert all(isinstance(v, list) for v in map(json.loads, payloads))


def test_a_second_receiver_watches_the_same_robots(practice_profile, mosquitto, tmp_path):
    run = simulate(practice_profile, rate_hz=100.0, duration_s=3.0, seed=5)
    other = msgspec.structs.replace(run.samples[0], robot="no-profile-bot")
    # each with a field of the team's own, which B's recording must keep too
    payloads = [encode(s)[:-1] + b',"motor_power":%d}' % k for k, s in enumerate([*run.samples, other])]
    profiles = {"practice-bot": practice_profile}
    a_config = ServeConfig(profiles, udp=("127.0.0.1", 0), mqtt=mosquitto, forward=True, record=tmp_path / "a.jsonl")
    # B forwards too: it must still never republish what it got from the broker
    b_config = ServeConfig(profiles, mqtt=mosquitto, forward=True, record=tmp_path / "b.jsonl")
    poses: dict[str, PoseMessage] = {}

    async def watch_poses(ready: asyncio.Event, done: asyncio.Event):
        async with aiomqtt.Client(*parse_mqtt_url(mosquitto)) as client:
            await client.subscribe("podwatch/+/pose")
            ready.set()
            async for message in client.messages:
                pose = msgspec.json.decode(message.payload, type=PoseMessage)
                poses[pose.robot] = pose
                if pose.seq == run.samples[-1].seq:
                    done.set()

    with live_receiver(a_config) as a, live_receiver(b_config) as b:
        wait_until(lambda: a.mqtt.connected.is_set() and b.mqtt.connected.is_set(), "both receivers on the broker")

        async def scenario():
            ready, done = asyncio.Event(), asyncio.Event()
            watcher = asyncio.create_task(watch_poses(ready, done))
            await asyncio.wait_for(ready.wait(), 10)
            with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
                for payload in payloads:
                    sock.sendto(payload, a.udp.address)
            await asyncio.wait_for(done.wait(), 20)
            watcher.cancel()

        asyncio.run(scenario())
        wait_until(lambda: handled(b) == len(payloads), "B to receive every forwarded sample")
        wait_until(lambda: a.mqtt.forwarded == len(payloads), "A to forward every sample")
        assert b.mqtt.forwarded == 0 and handled(a) == len(payloads)
    snap_a, snap_b = a.hub.snapshot(0.0), b.hub.snapshot(0.0)
    assert set(snap_a) == set(snap_b) == {"practice-bot", "no-profile-bot"}
    for robot in snap_a:
        assert snap_a[robot].messages == snap_b[robot].messages
        assert snap_b[robot].duplicates == 0 and snap_b[robot].late == snap_a[robot].late
    for name in ("a.jsonl", "b.jsonl"):
        lines = (tmp_path / name).read_bytes().splitlines()[1:]
        assert sorted(json.loads(line)["motor_power"] for line in lines) == list(range(len(payloads))), name
    pose_a, pose_b = a.hub.history("practice-bot")["pose"], b.hub.history("practice-bot")["pose"]
    np.testing.assert_allclose(pose_b, pose_a, atol=1e-9, rtol=0)
    # the pose topic carries A's latest recompute and its disagreement
    np.testing.assert_allclose(poses["practice-bot"].pose, pose_a[-1], atol=1e-9, rtol=0)
    assert np.isfinite(poses["practice-bot"].position_error)
