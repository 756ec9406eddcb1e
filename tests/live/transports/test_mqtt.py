"""Two receivers on one real Mosquitto broker: A takes UDP and forwards, B only
subscribes; B sees the same robots and recomputes the same poses, and
nothing is forwarded twice."""

from __future__ import annotations

import asyncio
import json
import socket
from dataclasses import replace

import aiomqtt
import msgspec
import numpy as np

from receiver.formats.protocol import PoseMessage, encode
from receiver.live.serve import ServeConfig
from receiver.live.transports.mqtt import batch_payloads, parse_mqtt_url
from receiver.odometry.faults import parse_faults
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


def test_a_viewer_without_a_profile_recomputes_with_the_forwarders(practice_profile, mosquitto, tmp_path, caplog):
    # A forwards with --profile and keeps its profile retained on the broker;
    # B, started later with no profile, takes it and recomputes the same
    # poses and disagreement. C has its own, different profile: it keeps it
    # and says so once.
    run = simulate(practice_profile, path="figure-eight", rate_hz=100.0, duration_s=3.0, seed=5,
                   faults=parse_faults(["reversed:right"], practice_profile))
    profiles = {"practice-bot": practice_profile}
    a_config = ServeConfig(profiles, udp=("127.0.0.1", 0), mqtt=mosquitto, forward=True, record=tmp_path / "a.jsonl")
    other = replace(practice_profile, wheels=practice_profile.wheels[:2] + (
        replace(practice_profile.wheels[2], x=-4.0),))
    c_config = ServeConfig({"practice-bot": other}, mqtt=mosquitto, record=tmp_path / "c.jsonl")
    with live_receiver(a_config) as a:
        wait_until(lambda: a.mqtt.connected.is_set(), "A on the broker")
        with live_receiver(ServeConfig({}, mqtt=mosquitto, record=tmp_path / "b.jsonl")) as b, \
                live_receiver(c_config) as c:
            wait_until(lambda: "practice-bot" in b.hub.profiles, "B to take the profile retained on the broker")
            assert b.hub.profiles["practice-bot"] == practice_profile
            wait_until(lambda: c.mqtt.connected.is_set(), "C on the broker")
            with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
                for sample in run.samples:
                    sock.sendto(encode(sample), a.udp.address)
            wait_until(lambda: handled(b) == len(run.samples) and handled(c) == len(run.samples),
                       "B and C to receive every forwarded sample")
    rows_a, rows_b = a.hub.history("practice-bot"), b.hub.history("practice-bot")
    np.testing.assert_allclose(rows_b["pose"], rows_a["pose"], atol=1e-9, rtol=0)
    np.testing.assert_allclose(rows_b["position_error"], rows_a["position_error"], atol=1e-9, rtol=0)
    assert rows_a["position_error"][-1] > 5.0  # the reversed encoder: a disagreement worth showing
    assert c.hub.profiles["practice-bot"] == other  # the local profile wins
    said = [r.getMessage() for r in caplog.records if "differs from the one given here" in r.getMessage()]
    assert len(said) == 1


def test_a_bad_profile_on_the_broker_is_logged_and_ignored(mosquitto, tmp_path, caplog):
    async def publish():
        async with aiomqtt.Client(*parse_mqtt_url(mosquitto)) as client:
            await client.publish("podwatch/junk-bot/profile", b"[" * 5000, qos=1, retain=True)
            await client.publish("podwatch/named-bot/profile", b'{"name": "other-bot"}', qos=1, retain=True)

    asyncio.run(publish())
    with live_receiver(ServeConfig({}, mqtt=mosquitto, record=tmp_path / "b.jsonl")) as b:
        wait_until(lambda: sum("ignored the profile" in r.getMessage() for r in caplog.records) >= 2,
                   "both bad profiles to be logged")
        assert b.hub.profiles == {} and b.mqtt.connected.is_set()
