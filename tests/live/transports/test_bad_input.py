"""Real UDP and WebSocket sockets on 127.0.0.1: valid traffic interleaved with
every malformed kind on the same socket. Every valid message is recorded and
recomputed, each bad one counted under its reason, and the receiver runs on."""

from __future__ import annotations

import asyncio
import json
import socket
from collections import Counter

import numpy as np
import pytest
from websockets.asyncio.client import connect
from websockets.exceptions import ConnectionClosed, InvalidStatus

from receiver.formats.protocol import Reason, decode
from receiver.formats.recording import read_recording
from receiver.live.hub import DEFAULT_MAX_ROBOTS
from receiver.live.serve import ServeConfig
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.recompute import Tracker
from tests.live.harness import handled, live_receiver, wait_until
from tests.malformed import DECODER_CASES
from tests.synthetic import constant_twist_messages

UDP_PAYLOAD_LIMIT = 65507  # IPv4: 65535 minus the IP and UDP headers; larger cannot be sent


def bad_payloads(good: dict) -> list[tuple[bytes, Reason]]:
    """The decoder's matrix plus the hub's own rules, built around a good message."""
    visitors = [(json.dumps(dict(good, robot=f"visitor-{k}")).encode(), None) for k in range(DEFAULT_MAX_ROBOTS)]
    # 1 profiled robot + 63 visitors fill the hub; the 64th visitor is one too many
    return [
        *[(payload, reason) for _, payload, reason in DECODER_CASES],
        (json.dumps(dict(good, ticks=[1, 2, 3, 4])).encode(), Reason.WRONG_TICKS_LENGTH),
        *visitors[:-1],
        (visitors[-1][0], Reason.TOO_MANY_ROBOTS),
    ]


def interleave(good: list[dict], bad: list[tuple[bytes, Reason | None]]) -> list[bytes]:
    out = []
    for k, message in enumerate(good):
        out.append(json.dumps(message).encode())
        if k < len(bad):
            out.append(bad[k][0])
    out += [payload for payload, _ in bad[len(good):]]
    return out


def check_outcome(receiver, recording, profile, good, bad):
    expected = Counter(reason for _, reason in bad if reason is not None)
    assert receiver.hub.errors == expected
    visitors = sum(1 for _, reason in bad if reason is None)
    # every good message recorded, in order, and recomputed like the offline engine
    data = read_recording(recording)
    assert len(data.robots["practice-bot"]) == len(good)
    assert data.message_count == len(good) + visitors
    samples = [decode(json.dumps(m).encode())[0][0] for m in good]
    ref = Tracker(profile).feed(columns_from_samples(samples, 3))
    live = receiver.hub.history("practice-bot")
    np.testing.assert_allclose(live["pose"], ref.pose, atol=1e-9, rtol=0)
    np.testing.assert_array_equal(data.robots["practice-bot"].seq, ref.seq)


def test_udp_takes_every_valid_message_among_bad_ones(practice_profile, tmp_path):
    good = constant_twist_messages(practice_profile, seconds=3.0)
    bad = [(p, r) for p, r in bad_payloads(good[0]) if len(p) <= UDP_PAYLOAD_LIMIT]
    config = ServeConfig(profiles={"practice-bot": practice_profile}, udp=("127.0.0.1", 0), record=tmp_path / "r.jsonl")
    with live_receiver(config) as receiver:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
            with pytest.raises(OSError):  # a datagram over 64 KiB cannot even be sent
                sock.sendto(b" " * (64 * 1024 + 1), receiver.udp.address)
            for payload in interleave(good, bad):
                sock.sendto(payload, receiver.udp.address)
        wait_until(lambda: handled(receiver) == len(good) + len(bad), "every datagram handled")
        assert receiver.udp._thread.is_alive()
    check_outcome(receiver, tmp_path / "r.jsonl", practice_profile, good, bad)
    assert receiver.summary[0].startswith(f"practice-bot: {len(good)} messages, 0 gaps, 0 duplicates, 0 late")


async def _send_ws(url: str, payloads: list[bytes]) -> None:
    async with connect(url, proxy=None, compression=None) as ws:
        for payload in payloads:
            await ws.send(payload, text=True)


def test_websocket_takes_every_valid_message_among_bad_ones(practice_profile, tmp_path):
    good = constant_twist_messages(practice_profile, seconds=3.0)
    bad = bad_payloads(good[0])
    oversize = next(p for label, p, _ in DECODER_CASES if label == "oversize")
    frames = [p for p in interleave(good, bad) if p is not oversize]
    config = ServeConfig(profiles={"practice-bot": practice_profile}, ws=("127.0.0.1", 0), record=tmp_path / "r.jsonl")
    with live_receiver(config) as receiver:
        url = "ws://%s:%d/" % receiver.ws.address
        half = len(frames) // 2

        async def session():
            await _send_ws(url, frames[:half])
            # a frame over 64 KiB closes that connection (1009) and is counted...
            with pytest.raises(ConnectionClosed):
                async with connect(url, proxy=None, compression=None) as ws:
                    await ws.send(oversize, text=True)
                    await ws.recv()
            # ...and the receiver takes the rest on a new connection
            await _send_ws(url, frames[half:])

        asyncio.run(session())
        wait_until(lambda: handled(receiver) == len(good) + len(bad), "every frame handled")
    check_outcome(receiver, tmp_path / "r.jsonl", practice_profile, good, bad)


def test_websocket_token_refuses_others(practice_profile, tmp_path):
    good = constant_twist_messages(practice_profile, seconds=0.2)
    config = ServeConfig(ws=("127.0.0.1", 0), token="pit-crew", record=tmp_path / "r.jsonl")
    with live_receiver(config) as receiver:
        base = "ws://%s:%d/" % receiver.ws.address
        payloads = [json.dumps(m).encode() for m in good]
        for url in (base, base + "?token=wrong"):
            with pytest.raises(InvalidStatus) as refused:
                asyncio.run(_send_ws(url, payloads))
            assert refused.value.response.status_code == 401
            assert b"token" in refused.value.response.body
        asyncio.run(_send_ws(base + "?token=pit-crew", payloads))

        async def with_header():
            async with connect(base, proxy=None, additional_headers={"X-Podwatch-Token": "pit-crew"}) as ws:
                await ws.send(payloads[0], text=True)

        asyncio.run(with_header())
        wait_until(lambda: handled(receiver) == len(good) + 1, "the token holders' messages")
        assert receiver.ws.refused == 2
    snap = receiver.hub.snapshot(0.0)["practice-bot"]
    assert snap.messages == len(good) + 1 and snap.late == 1 and not snap.has_profile  # seq 0 again, last
