"""Tests for receiver/recording.py: the writer, and the reader on what the writer leaves behind."""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np
import pytest

from receiver.errors import RecordingError
from receiver.profile import load_profile
from receiver.protocol import Sample
from receiver.recording import FLUSH_INTERVAL_S, GZIP_MAGIC, RecordingWriter, read_recording

FIXTURES = Path(__file__).resolve().parents[1] / "replay_fixtures"
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
