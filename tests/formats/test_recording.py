"""Tests for receiver/formats/recording_writer.py and recording.py: the writer, and the reader on what the writer leaves behind."""

from __future__ import annotations

import gzip
import json
from pathlib import Path

import numpy as np
import pytest

from receiver.errors import RecordingError
from receiver.formats.profile_toml import load_profile
from receiver.formats.protocol import Sample, encode
from receiver.formats.recording import GZIP_MAGIC, read_recording
from receiver.formats.recording_writer import FLUSH_INTERVAL_S, RecordingWriter
from receiver.odometry.columns import COLUMN_NAMES
from tests.conftest import FIXTURES

PROFILE = load_profile(FIXTURES / "practice-bot.toml")
CREATED = "2025-01-01T12:00:00+00:00"
RX0 = 1735732800.0


def make_samples(n: int, robot: str = "practice-bot", seed: int = 0) -> list[Sample]:
    """n valid messages with every optional field present somewhere (seeded)."""
    rng = np.random.default_rng(seed)
    ticks = np.cumsum(rng.integers(-50, 200, (n, 3)), axis=0).tolist()
    pose = rng.normal(0.0, 30.0, (n, 3)).tolist()
    samples = []
    for i in range(n):
        samples.append(
            Sample(
                v=1,
                robot=robot,
                seq=i,
                t=10.0 + 0.01 * i,
                ticks=ticks[i],
                pose=tuple(pose[i]) if i % 7 else None,
                imu=pose[i][2] if i % 3 == 0 else None,
                loop=0.01 + 1e-4 * (i % 5),
                reset=i == n // 2,
            )
        )
    return samples


def stamp(samples: list[Sample]) -> list[Sample]:
    for i, sample in enumerate(samples):
        sample.rx = RX0 + 0.01 * i + 0.002
    return samples


@pytest.mark.parametrize("name", ["rec.jsonl", "rec.jsonl.gz"])
def test_round_trip(tmp_path: Path, name: str) -> None:
    samples = stamp(make_samples(1000))
    path = tmp_path / name
    with RecordingWriter(path, [PROFILE], created=CREATED) as writer:
        writer.write(samples[:400])  # each sample's own rx
        writer.write(samples[400:], rx=RX0 + 99.0)  # one rx stamped on a batch
    assert (path.read_bytes()[:2] == GZIP_MAGIC) == name.endswith(".gz")

    data = read_recording(path)
    assert data.warnings == [] and not data.skipped
    assert data.created == CREATED
    assert data.profiles == {"practice-bot": PROFILE}
    cols = data.robots["practice-bot"]
    assert cols.seq.tolist() == [s.seq for s in samples]
    assert cols.ticks.tolist() == [s.ticks for s in samples]
    np.testing.assert_array_equal(cols.t, [s.t for s in samples])
    expected_pose = np.array([s.pose if s.pose else (np.nan,) * 3 for s in samples])
    np.testing.assert_array_equal(cols.pose, expected_pose)  # msgspec writes the shortest round-tripping repr
    np.testing.assert_array_equal(cols.imu, [np.nan if s.imu is None else s.imu for s in samples])
    np.testing.assert_array_equal(cols.loop, [s.loop for s in samples])
    assert cols.reset.tolist() == [s.reset for s in samples]
    np.testing.assert_array_equal(cols.rx[:400], [RX0 + 0.01 * i + 0.002 for i in range(400)])
    np.testing.assert_array_equal(cols.rx[400:], RX0 + 99.0)


def test_compress_flag_without_gz_suffix(tmp_path: Path) -> None:
    path = tmp_path / "rec.jsonl"
    with RecordingWriter(path, [PROFILE], compress=True) as writer:
        writer.write(make_samples(10), rx=RX0)
    assert path.read_bytes()[:2] == GZIP_MAGIC
    assert read_recording(path).message_count == 10


def test_header_holds_only_profiles_known_at_open(tmp_path: Path) -> None:
    path = tmp_path / "rec.jsonl"
    with RecordingWriter(path, [PROFILE]) as writer:
        writer.write(make_samples(5), rx=RX0)
        writer.write(make_samples(5, robot="visitor-bot"), rx=RX0 + 1.0)
    data = read_recording(path)
    assert set(data.robots) == {"practice-bot", "visitor-bot"}
    assert set(data.profiles) == {"practice-bot"}
    assert data.created is not None and data.created.endswith("+00:00")  # ISO 8601, UTC


def test_truncated_last_line_is_skipped_with_a_warning(tmp_path: Path) -> None:
    path = tmp_path / "rec.jsonl"
    with RecordingWriter(path, [PROFILE]) as writer:
        writer.write(make_samples(200), rx=RX0)
    raw = path.read_bytes()
    path.write_bytes(raw[:-9])  # the receiver was killed mid-line
    data = read_recording(path)
    assert data.robots["practice-bot"].seq.tolist() == list(range(199))
    assert len(data.warnings) == 1 and "truncated last line" in data.warnings[0]


def test_gzip_cut_mid_stream_yields_what_was_there(tmp_path: Path) -> None:
    path = tmp_path / "rec.jsonl.gz"
    samples = make_samples(20_000, seed=1)
    writer = RecordingWriter(path, [PROFILE])
    for k in range(0, len(samples), 1000):
        writer.write(samples[k : k + 1000], rx=RX0 + k)
        writer.flush(now=k * FLUSH_INTERVAL_S)  # one flush due per batch
    writer.close()
    raw = path.read_bytes()
    path.write_bytes(raw[: len(raw) * 6 // 10])

    data = read_recording(path)
    seq = data.robots["practice-bot"].seq
    assert 1000 <= len(seq) < len(samples)
    assert seq.tolist() == list(range(len(seq)))  # everything before the cut, in order
    assert any("ends early" in w for w in data.warnings)


def test_flush_waits_for_the_interval_on_the_callers_clock(tmp_path: Path) -> None:
    path = tmp_path / "rec.jsonl"

    def lines_on_disk() -> int:
        return path.read_bytes().count(b"\n")

    with RecordingWriter(path, [PROFILE]) as writer:
        assert lines_on_disk() == 1  # the header goes out at once
        writer.write(make_samples(10), rx=RX0)
        assert lines_on_disk() == 1  # buffered
        assert writer.flush(now=100.0)
        assert lines_on_disk() == 11
        writer.write(make_samples(10), rx=RX0)
        assert not writer.flush(now=100.0 + FLUSH_INTERVAL_S / 2)
        assert lines_on_disk() == 11
        assert writer.flush(now=100.0 + FLUSH_INTERVAL_S)
        assert lines_on_disk() == 21
        writer.write(make_samples(3), rx=RX0)
    assert lines_on_disk() == 24  # close pushes the rest
    assert writer.message_count == 23


def test_gzip_flush_makes_a_readable_prefix(tmp_path: Path) -> None:
    path = tmp_path / "rec.jsonl.gz"
    with RecordingWriter(path, [PROFILE]) as writer:
        writer.write(make_samples(50), rx=RX0)
        writer.flush()
        # A sync flush: what is on disk decompresses without the end of the stream.
        with open(path, "rb") as raw:
            text = gzip.GzipFile(fileobj=raw).read1(1 << 20)
        assert text.count(b"\n") == 51


def test_large_burst_reaches_the_file_before_a_flush(tmp_path: Path) -> None:
    path = tmp_path / "rec.jsonl"
    with RecordingWriter(path, [PROFILE]) as writer:
        writer.write(make_samples(20_000), rx=RX0)  # about 3 MB of lines, past the 1 MB write buffer
        assert path.stat().st_size > 1_000_000


def test_unwritable_path_is_one_line_error(tmp_path: Path) -> None:
    with pytest.raises(RecordingError, match=r"cannot write: No such file or directory$"):
        RecordingWriter(tmp_path / "missing" / "rec.jsonl", [PROFILE])


def as_sent(samples: list[Sample]) -> tuple[list[dict], list[bytes]]:
    """Each sample as a robot might send it: with fields of the team's own,
    some spread over several lines (LF or CRLF), some padded, some carrying
    an "rx" of the robot's own (seeded by position)."""
    messages, raws = [], []
    for i, sample in enumerate(samples):
        message = json.loads(encode(sample))
        message.pop("rx", None)
        message["motor_power"] = 0.125 * (i % 9) - 0.5
        message["note"] = f"lap {i}: ok"
        if i % 4 == 1:
            message["rx"] = 12.5  # the robot's own clock; the receiver's must win
        text = json.dumps(message, indent=1 if i % 5 == 0 else None)
        if i % 7 == 0:
            text = text.replace("\n", "\r\n")
        if i % 11 == 0:
            text = f" \t{text}\r\n"
        messages.append(message)
        raws.append(text.encode())
    return messages, raws


def stamp_unevenly(samples: list[Sample]) -> list[float]:
    """Receiver times that need all 17 significant digits to read back exactly."""
    rng = np.random.default_rng(7)
    rx = (RX0 + np.cumsum(rng.uniform(0.001, 0.02, len(samples)))).tolist()
    for sample, value in zip(samples, rx):
        sample.rx = value
    return rx


@pytest.mark.parametrize("name", ["rec.jsonl", "rec.jsonl.gz"])
def test_messages_are_recorded_as_received_plus_rx(tmp_path: Path, name: str) -> None:
    samples = make_samples(300)
    rx = stamp_unevenly(samples)
    messages, raws = as_sent(samples)
    raws_with_gaps = [None if i % 13 == 3 else r for i, r in enumerate(raws)]  # a sample without its bytes
    path = tmp_path / name
    with RecordingWriter(path, [PROFILE], created=CREATED) as writer:
        for start, stop in [(0, 1), (1, 17), (17, 150), (150, 300)]:
            writer.write(samples[start:stop], raws=raws_with_gaps[start:stop])
    lines = (gzip.decompress(path.read_bytes()) if name.endswith(".gz") else path.read_bytes()).split(b"\n")
    assert lines[-1] == b"" and len(lines) == 1 + len(samples) + 1  # header, one line each, final newline
    for i, line in enumerate(lines[1:-1]):
        assert b"\r" not in line
        got = json.loads(line)
        assert got["rx"] == rx[i]  # exactly: the float reads back as written
        if raws_with_gaps[i] is None:
            assert got == json.loads(encode(samples[i]))
            continue
        assert got == {**messages[i], "rx": rx[i]}  # unknown fields and their values kept
        # byte for byte the object as sent, line breaks made spaces, with the rx key last
        as_one_line = raws[i].strip().replace(b"\r", b" ").replace(b"\n", b" ")
        head, rx_text = line.rsplit(b',"rx":', 1)
        assert head + b"}" == as_one_line and float(rx_text.removesuffix(b"}")) == rx[i]

    # read back: the same columns as a recording of the samples encoded
    # (no unknown fields, no robot "rx"), the receiver's rx winning
    encoded = tmp_path / "encoded.jsonl"
    with RecordingWriter(encoded, [PROFILE], created=CREATED) as writer:
        writer.write(samples)
    got, want = read_recording(path).robots["practice-bot"], read_recording(encoded).robots["practice-bot"]
    for column in COLUMN_NAMES:
        np.testing.assert_array_equal(getattr(got, column), getattr(want, column), err_msg=column)
    np.testing.assert_array_equal(got.rx, rx)


def test_the_receivers_rx_wins_on_every_read_path(tmp_path: Path) -> None:
    samples = make_samples(40)
    rx = stamp_unevenly(samples)
    _, raws = as_sent(samples)
    path = tmp_path / "rec.jsonl"
    with RecordingWriter(path, [PROFILE]) as writer:
        writer.write(samples, raws=raws)
    header, body = path.read_bytes().split(b"\n", 1)
    variants = {
        "bulk": body,
        "line by line, after a bad line": b"not a message\n" + body,
        "unterminated last line": body.rstrip(b"\n"),
    }
    for label, content in variants.items():
        variant = tmp_path / "variant.jsonl"
        variant.write_bytes(header + b"\n" + content)
        data = read_recording(variant)
        np.testing.assert_array_equal(data.robots["practice-bot"].rx, rx, err_msg=label)
