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
from receiver.live.gate import MAX_COUNTED_NAMES, OTHER_NAMES, OTHER_ROBOTS, WINDOW_S, Gate, parse_networks, robot_name
from receiver.live.hub import IDLE_SLOT_S, Hub
from receiver.live.raw_history import DEFAULT_RAW_MAX_ROBOTS, RawHistory
from receiver.live.ring_buffer import SMALL_BLOCK_ROWS
from receiver.live.serve import summary_lines
from tests.live.serve_process import message
from tests.live.test_session import ListRecorder

RX0 = 1_790_000_000.0


def test_the_gate_reads_the_robot_name_from_the_bytes():
    assert robot_name(message("practice-bot", 1, 0.0)) == b"practice-bot"
    assert robot_name(b'[ {"v": 1, "robot" : "a.b-c_9", "seq": 0} ]') == b"a.b-c_9"
    assert robot_name(b'{"robot": "' + b"x" * 33 + b'"}') == OTHER_NAMES  # longer than a robot id
    assert robot_name(b"not json at all") == OTHER_NAMES


class CountingDecoder:
    """decode_keeping_raw, counting its calls."""

    def __init__(self):
        self.calls = 0

    def __call__(self, data):
        self.calls += 1
        return decode_keeping_raw(data)


def test_the_rate_cap_counts_messages_per_robot_and_window():
    gate, decode = Gate(max_rate=100.0), CountingDecoder()
    flood, good = message("flood-bot", 0, 0.0), message("practice-bot", 0, 0.0)
    taken = [gate.take(flood, RX0 + 0.001 * k, decode) is not None for k in range(300)]
    assert taken == [True] * 100 + [False] * 200
    assert decode.calls == 101  # the rest were refused before decoding
    assert all(gate.take(good, RX0 + 0.3, decode) for _ in range(50))  # another name keeps its own count
    assert gate.over_cap == {"flood-bot": 200} and gate.refused == 200
    assert gate.take(flood, RX0 + WINDOW_S + 0.001, decode)  # a new window
    batch = b"[" + b",".join(message("batch-bot", k, 0.0) for k in range(64)) + b"]"
    assert gate.take(batch, RX0 + 1.5, decode) and not gate.take(batch, RX0 + 1.6, decode)  # 64, then 128 > 100
    assert not gate.take(batch, RX0 + 1.7, decode)  # refused before decoding now
    assert gate.over_cap["batch-bot"] == 128  # every message of the refused batches
    garbage = b"not json"
    assert [gate.take(garbage, RX0 + 1.8, decode) is not None for _ in range(102)] == [True] * 100 + [False] * 2
    assert gate.over_cap[""] == 2  # counted under no name, and bounded by the same cap


def test_counted_names_are_bounded():
    gate = Gate(max_rate=1.0)
    for k in range(MAX_COUNTED_NAMES + 10):
        name = f"n{k}"
        gate.take(message(name, 0, 0.0), RX0, decode_keeping_raw)
        gate.take(message(name, 1, 0.0), RX0, decode_keeping_raw)  # over the cap of 1 per window
    assert len(gate.over_cap) == MAX_COUNTED_NAMES + 1 and gate.over_cap[OTHER_ROBOTS] == 10


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
    decoded = gate.take(data, rx, decode_keeping_raw)
    if decoded is not None:
        hub.ingest(*decoded[:2], rx, "test", raws=decoded[2])


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
            if k % 100 == 99:
                hub.check(rx)  # as the pump does, once a second
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


def test_robots_without_a_profile_share_their_rows(practice_profile):
    hub = Hub({practice_profile.name: practice_profile})
    one(hub, "visitor-0", 0, RX0)
    assert hub.sessions["visitor-0"].ring.max_rows == hub_module.UNPROFILED_ROWS  # alone: the whole share
    for k in range(1, 10):
        one(hub, f"visitor-{k}", 0, RX0)
    rows = {name: session.ring.max_rows for name, session in hub.sessions.items()}
    assert rows.pop("practice-bot") == hub.max_rows  # the user's own robot keeps its cap
    assert set(rows.values()) == {hub_module.UNPROFILED_ROWS // 10}


def test_raw_samples_for_the_checks_are_shared_out_too(practice_profile):
    raw = RawHistory(max_rows=100_000, total_rows=100_000)
    hub = Hub({}, max_robots=1000)
    hub.add_listener(raw)
    one(hub, "a-bot", 0, RX0)
    one(hub, "b-bot", 0, RX0)
    assert {r.ring.max_rows for r in raw._robots.values()} == {50_000}
    for k in range(200):
        one(hub, f"c-{k}", 0, RX0)
    assert {r.ring.max_rows for r in raw._robots.values()} == {SMALL_BLOCK_ROWS}  # many robots: a block each
    assert len(raw._robots) == DEFAULT_RAW_MAX_ROBOTS  # and no more of them than this


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
