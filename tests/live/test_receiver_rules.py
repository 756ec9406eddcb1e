"""One sender cannot take the others' place, and the recorder fails alone: the gate's
rate cap and allowed networks, idle robots freeing their slots, refusals logged
once per name, the bounded queue, and a recorder that raises. In memory; the
transports' own tests use real sockets."""

from __future__ import annotations

import ipaddress
import json
import logging

import pytest

import receiver.live.hub as hub_module
from receiver.formats.protocol import Reason, decode, decode_keeping_raw
from receiver.live.gate import MAX_COUNTED_NAMES, OTHER_NAMES, WINDOW_S, Gate, parse_networks, robot_name
from receiver.live.hub import IDLE_SLOT_S, Hub
from receiver.live.serve import summary_lines
from tests.live.serve_process import message
from tests.live.test_session import ListRecorder

RX0 = 1_790_000_000.0


def test_the_gate_reads_the_robot_name_from_the_bytes():
    assert robot_name(message("practice-bot", 1, 0.0)) == b"practice-bot"
    assert robot_name(b'[ {"v": 1, "robot" : "a.b-c_9", "seq": 0} ]') == b"a.b-c_9"
    assert robot_name(b'{"robot": "' + b"x" * 33 + b'"}') == OTHER_NAMES  # longer than a robot id
    assert robot_name(b"not json at all") == OTHER_NAMES


def test_the_rate_cap_counts_messages_per_robot_and_window():
    gate = Gate(max_rate=100.0)
    flood, good = message("flood-bot", 0, 0.0), message("practice-bot", 0, 0.0)
    admitted = [gate.admit(flood, RX0 + 0.001 * k) for k in range(300)]
    assert admitted == [True] * 100 + [False] * 200
    assert all(gate.admit(good, RX0 + 0.3) for _ in range(50))  # another name keeps its own count
    assert gate.over_cap == {b"flood-bot": 200} and gate.refused == 200
    assert gate.admit(flood, RX0 + WINDOW_S + 0.001)  # a new window
    batch = b"[" + b",".join(message("batch-bot", k, 0.0) for k in range(64)) + b"]"
    assert gate.admit(batch, RX0 + 1.5) and not gate.admit(batch, RX0 + 1.6)  # 64, then 128 > 100
    assert gate.over_cap[b"batch-bot"] == 64  # every message of the refused batch


def test_counted_names_are_bounded():
    gate = Gate(max_rate=1.0)
    for k in range(MAX_COUNTED_NAMES + 10):
        name = f"n{k}"
        gate.admit(message(name, 0, 0.0), RX0)
        gate.admit(message(name, 1, 0.0), RX0)  # over the cap of 1 per window
    assert len(gate.over_cap) == MAX_COUNTED_NAMES + 1 and gate.over_cap[OTHER_NAMES] == 10


def test_allowed_networks():
    gate = Gate(allow=parse_networks(["127.0.0.2/32", "192.168.7.0/24"]))
    assert gate.source_allowed("127.0.0.2") and gate.source_allowed("192.168.7.200")
    assert not gate.source_allowed("127.0.0.1") and not gate.source_allowed("not an address")
    assert gate.source_allowed("::ffff:127.0.0.2")  # an IPv4 peer of a dual-stack socket
    assert gate.not_allowed == {"127.0.0.1": 1, "not an address": 1}
    assert Gate().source_allowed("10.1.2.3")  # no --allow: every source
    with pytest.raises(ValueError, match="--allow expects"):
        parse_networks(["192.168.1.0/33"])
    assert parse_networks(["10.0.0.5"]) == [ipaddress.ip_network("10.0.0.5/32")]


def ingest_through(hub: Hub, gate: Gate, data: bytes, rx: float) -> None:
    """What a transport does with one datagram."""
    if gate.admit(data, rx):
        samples, failures, raws = decode_keeping_raw(data)
        hub.ingest(samples, failures, rx, "test", raws=raws)


def test_the_hub_counts_and_names_a_robot_over_the_cap(practice_profile, caplog):
    hub = Hub({practice_profile.name: practice_profile}, max_rate=50.0)
    gate = hub.new_gate()
    with caplog.at_level(logging.WARNING, logger="podwatch.hub"):
        for k in range(400):  # 0.4 s: the good robot at 100 Hz (under the cap), the flood at 1 kHz
            rx = RX0 + 0.001 * k
            if k % 10 == 0:
                ingest_through(hub, gate, message("practice-bot", k // 10, 0.01 * k), rx)
            ingest_through(hub, gate, message("flood-bot", k, 0.001 * k), rx)
            hub.process(rx)
    snap = hub.snapshot(RX0 + 0.4)
    assert snap["practice-bot"].messages == 40 and not snap["practice-bot"].errors
    assert snap["flood-bot"].messages == 50 and snap["flood-bot"].errors == {"over_rate_cap": 350}
    assert hub.errors == {Reason.OVER_RATE_CAP: 350}
    assert any("flood-bot (350 dropped)" in problem for problem in hub.health.problems())
    lines = [r.getMessage() for r in caplog.records if "flood-bot" in r.getMessage()]
    assert len(lines) == 1 and "over the rate cap of 50 messages/s" in lines[0]  # once, not per message
    assert "flood-bot: 50 messages, 0 gaps, 0 duplicates, 0 late, 0 decode errors, 350 over the rate cap" in (
        " ".join(summary_lines(hub)))
    hub.check(RX0 + 0.4 + hub_module.FLOOD_SHOWN_S + 1.0)  # quiet since: no longer named
    assert not any("flood-bot" in problem for problem in hub.health.problems())


def test_refused_sources_are_counted(practice_profile):
    hub = Hub({}, allow=parse_networks(["127.0.0.2/32"]))
    gate = hub.new_gate()
    for _ in range(3):
        assert not gate.source_allowed("127.0.0.1")
    hub.check(RX0)
    assert hub.errors == {Reason.SOURCE_NOT_ALLOWED: 3}
    assert any("127.0.0.1 (3)" in note for note in hub.health.notes())


def one(hub: Hub, robot: str, seq: int, rx: float) -> None:
    hub.ingest(*decode(message(robot, seq, seq * 0.01)), rx, "test")
    hub.process(rx)


def test_idle_robots_without_a_profile_free_their_slots(practice_profile, caplog):
    hub = Hub({practice_profile.name: practice_profile}, max_robots=64)
    with caplog.at_level(logging.WARNING, logger="podwatch.hub"):
        for k in range(100):  # 100 invented names: 63 take the free slots, 37 are refused
            one(hub, f"invented-{k:03d}", 0, RX0 + 0.001 * k)
        for k in range(5):
            one(hub, "late-bot", k, RX0 + 1.5 + 0.01 * k)  # 1.5 s later: every slot is taken
    assert len(hub.sessions) == 64 and "late-bot" not in hub.sessions
    assert hub.errors == {Reason.TOO_MANY_ROBOTS: 37 + 5}
    late = [r.getMessage() for r in caplog.records if "late-bot" in r.getMessage()]
    assert len(late) == 1 and "already 64 robots" in late[0]  # logged once for five refusals
    later = RX0 + 0.1 + IDLE_SLOT_S + 0.5  # the invented robots have been quiet for over 10 s
    for k in range(5, 10):
        one(hub, "late-bot", k, later + 0.01 * k)
    assert hub.snapshot(later + 1)["late-bot"].messages == 5
    assert set(hub.sessions) == {"practice-bot", "late-bot"}  # the profiled robot kept its slot, silent or not
    assert len(hub.retired) == 63
    lines = summary_lines(hub)
    assert sum("slot freed after its silence" in line for line in lines) == 63  # their counts stay
    one(hub, "invented-000", 1, later + 1.0)  # back: its counts go on
    assert hub.snapshot(later + 1.0)["invented-000"].messages == 2


def test_the_queue_to_processing_is_bounded(monkeypatch):
    monkeypatch.setattr(hub_module, "MAX_BACKLOG", 10)
    hub = Hub({})
    for k in range(9):
        hub.ingest(*decode(message("a-bot", k, 0.0)), RX0, "test")
    assert hub.has_room()
    hub.ingest(*decode(b"[" + b",".join(message("a-bot", 9 + k, 0.0) for k in range(3)) + b"]"), RX0, "test")
    assert not hub.has_room()
    hub.process(RX0)
    assert hub.has_room() and hub.snapshot(RX0)["a-bot"].messages == 12


class FailingRecorder(ListRecorder):
    """Takes ``room`` samples, then fails as a full disk does."""

    def __init__(self, room: int):
        super().__init__()
        self.room = room
        self.path = "disk/session.jsonl"
        self.abandoned = False

    def write(self, samples, rx=None, raws=None):
        if len(self.samples) + len(samples) > self.room:
            raise OSError(28, "No space left on device")
        super().write(samples, rx, raws)

    def abandon(self):
        self.abandoned = True


def test_a_failing_recorder_stops_recording_not_receiving(practice_profile, caplog):
    recorder = FailingRecorder(room=30)
    hub = Hub({practice_profile.name: practice_profile}, recorder=recorder)
    hub.health.recording_started(recorder.path)
    with caplog.at_level(logging.ERROR, logger="podwatch.hub"):
        for k in range(100):
            one(hub, "practice-bot", k, RX0 + 0.01 * k)
    assert hub.snapshot(RX0 + 1.0)["practice-bot"].messages == 100  # every message still shown
    assert len(recorder.samples) == 30 and recorder.abandoned and hub.recorder is None
    assert hub.health.problems() == ["recording stopped: No space left on device"]
    errors = [r.getMessage() for r in caplog.records]
    assert len(errors) == 1 and "recording stopped: No space left on device (disk/session.jsonl)" in errors[0]
    assert "recording stopped: No space left on device; disk/session.jsonl keeps what was written before" in (
        summary_lines(hub))


def test_messages_refused_by_the_hub_reach_the_summary_by_reason(practice_profile):
    hub = Hub({practice_profile.name: practice_profile}, max_robots=1)
    one(hub, "practice-bot", 0, RX0)
    one(hub, "visitor", 0, RX0 + 0.01)
    hub.ingest(*decode(json.dumps({"v": 1}).encode()), RX0, "test")
    hub.process(RX0 + 0.02)
    assert summary_lines(hub)[-1] == "refused 2 messages: missing_field 1, too_many_robots 1"
