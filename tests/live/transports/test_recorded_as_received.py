"""Real UDP, WebSocket and MQTT (real broker) receivers record each message as
received: fields the protocol does not know keep their values in the
recording, every line carries rx, and read_recording and `podwatch
recompute` give the same result as for the same messages without them."""

from __future__ import annotations

import asyncio
import json
import time

import numpy as np
import pytest

from receiver.cli import main
from receiver.formats.recording import read_recording
from receiver.live.serve import ServeConfig
from receiver.live.transports.send import open_sender
from receiver.odometry.columns import COLUMN_NAMES
from tests.live.harness import handled, listen_on, live_receiver, sender_url, wait_until
from tests.synthetic import constant_twist_messages

TEAM_FIELDS = ("motor_power", "debug")


def with_team_fields(messages: list[dict]) -> list[dict]:
    return [
        dict(m, motor_power=round(0.01 * k - 0.5, 2), debug={"state": "drive", "lap": k, "why": "a\\tb"})
        for k, m in enumerate(messages)
    ]


def payloads_of(messages: list[dict]) -> list[bytes]:
    """Mostly one message per datagram; every tenth starts a batch of three;
    some spread over lines, as a pretty-printing sender would."""
    out, k = [], 0
    while k < len(messages):
        if k % 10 == 5:
            out.append(json.dumps(messages[k : k + 3], indent=1 if k % 20 == 5 else None).encode())
            k += 3
        else:
            text = json.dumps(messages[k], indent=2 if k % 7 == 0 else None)
            out.append((text.replace("\n", "\r\n") if k % 3 == 0 else text).encode())
            k += 1
    return out


async def send_all(url: str, payloads: list[bytes], robot: str) -> None:
    async with open_sender(url) as sender:
        for payload in payloads:
            await sender.send(payload, robot)
            await asyncio.sleep(0.001)  # a robot's pace; keeps a loaded machine's socket buffers easy


def without_team_fields(recording, out) -> None:
    """The same recording with the team's fields taken out of every message."""
    header, *lines = recording.read_bytes().splitlines()
    kept = [json.dumps({k: v for k, v in json.loads(line).items() if k not in TEAM_FIELDS}) for line in lines]
    out.write_bytes(header + b"\n" + "\n".join(kept).encode() + b"\n")


@pytest.mark.parametrize("transport", ["udp", "ws", "mqtt"])
def test_recordings_keep_fields_the_protocol_does_not_know(transport, practice_profile, tmp_path, request, capsys):
    sent = with_team_fields(constant_twist_messages(practice_profile, seconds=2.0))
    payloads = payloads_of(sent)
    recording = tmp_path / "live.jsonl"
    config = ServeConfig({"practice-bot": practice_profile}, record=recording)
    listen_on(config, transport, request)
    before = time.time()
    with live_receiver(config) as receiver:
        url = sender_url(receiver, config, transport)
        asyncio.run(send_all(url, payloads, "practice-bot"))
        wait_until(lambda: handled(receiver) == len(sent), "every message")
    after = time.time()
    assert receiver.hub.errors == {}

    header, *lines = recording.read_bytes().split(b"\n")
    assert json.loads(header)["recording"] == 1 and lines[-1] == b""
    recorded = [json.loads(line) for line in lines[:-1]]
    assert len(recorded) == len(sent)
    for message, got in zip(sent, recorded):
        rx = got.pop("rx")
        assert isinstance(rx, float) and before <= rx <= after
        assert got == message and list(got) == list(message)  # every field, its value and its place

    reference = tmp_path / "without.jsonl"
    without_team_fields(recording, reference)
    got, want = read_recording(recording), read_recording(reference)
    assert got.message_count == want.message_count == len(sent) and not got.skipped and not got.warnings
    for column in COLUMN_NAMES:
        np.testing.assert_array_equal(
            getattr(got.robots["practice-bot"], column), getattr(want.robots["practice-bot"], column), err_msg=column
        )
    csv_got, csv_want = tmp_path / "got.csv", tmp_path / "want.csv"
    assert main(["recompute", str(recording), "--out", str(csv_got)]) == 0
    assert main(["recompute", str(reference), "--out", str(csv_want)]) == 0
    capsys.readouterr()
    assert csv_got.read_text() == csv_want.read_text()
    assert csv_got.read_text().count("\n") == len(sent) + 1
