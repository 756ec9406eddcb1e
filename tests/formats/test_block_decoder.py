"""Bulk decoding: two worker processes give what one process gives."""

from __future__ import annotations

import platform

import numpy as np
import pytest

from receiver.errors import RecordingError
from receiver.formats import block_decoder, recording
from receiver.formats.recording import read_recording
from tests.synthetic import constant_twist_messages, write_recording


def _messy_recording(tmp_path, practice_profile, metric_profile):
    a = constant_twist_messages(practice_profile, seconds=20.0)
    b = constant_twist_messages(metric_profile, twist_per_s=(200.0, 50.0, 0.3), seconds=20.0)
    mixed = [m for pair in zip(a, b) for m in pair]
    path = write_recording(tmp_path / "mixed.jsonl", mixed, [practice_profile, metric_profile])
    lines = path.read_text().splitlines()
    lines.insert(300, "not json at all")
    lines.insert(1500, '{"v": 1, "robot": "practice-bot", "seq": 1, "t": 1.0, "ticks": [1, 2]}')
    lines.insert(1700, '{"v": 1, "robot": "bad name", "seq": 1, "t": 1.0, "ticks": [1, 2, 3]}')
    path.write_text("\n".join(lines) + "\n")
    return path


def test_parallel_equals_sequential(tmp_path, monkeypatch, practice_profile, metric_profile):
    path = _messy_recording(tmp_path, practice_profile, metric_profile)
    monkeypatch.setattr(recording, "_CHUNK_BYTES", 20_000)  # many blocks
    sequential = read_recording(path)
    monkeypatch.setattr(block_decoder, "PARALLEL_FROM_BYTES", 0)
    parallel = read_recording(path)
    assert sequential.skipped == parallel.skipped
    assert sum(sequential.skipped.values()) == 3
    assert sequential.warnings == parallel.warnings
    assert "first: line 301: not_json" in sequential.warnings[0]
    assert set(sequential.robots) == set(parallel.robots) == {"practice-bot", "practice-bot-metric"}
    for robot, cols in sequential.robots.items():
        other = parallel.robots[robot]
        assert len(cols) == 1001
        for name in ("seq", "t", "ticks", "pose", "loop", "rx"):
            np.testing.assert_array_equal(getattr(cols, name), getattr(other, name))


def test_recompute_on_workers_writes_the_same_csv(tmp_path, monkeypatch, capsys, practice_profile, metric_profile):
    from receiver.cli import main

    path = _messy_recording(tmp_path, practice_profile, metric_profile)
    monkeypatch.setattr(recording, "_CHUNK_BYTES", 20_000)
    assert main(["recompute", str(path), "--out", str(tmp_path / "one.csv")]) == 0
    monkeypatch.setattr(block_decoder, "PARALLEL_FROM_BYTES", 0)
    assert main(["recompute", str(path), "--out", str(tmp_path / "two.csv")]) == 0
    one, two = ((tmp_path / name).read_bytes().splitlines() for name in ("one.csv", "two.csv"))
    assert len(one) == len(two) == 1 + 2 * 1001
    # Each robot's rows are the same, in the same order; how two robots'
    # rows interleave follows the block boundaries, which differ.
    for robot in (b"practice-bot,", b"practice-bot-metric,"):
        assert [r for r in one if r.startswith(robot)] == [r for r in two if r.startswith(robot)]
    assert "first: line 301: not_json" in capsys.readouterr().err


def _outcome(path):
    """What reading a file gives: its messages, skips and warnings, or the error's text."""
    try:
        data = read_recording(path)
    except RecordingError as exc:
        return str(exc)
    columns = {robot: (cols.seq.tolist(), cols.ticks.tolist()) for robot, cols in data.robots.items()}
    return columns, dict(data.skipped), data.warnings, data.created, sorted(data.profiles)


EDGE_CASES = {
    "truncated last line": lambda good, header: header + good + good[:25],
    "no header, truncated last line": lambda good, header: good * 3 + good[:-1],
    "header only": lambda good, header: header,
    "header without its newline": lambda good, header: header[:-1],
    "one bare message without a newline": lambda good, header: good[:-1],
    "blank lines between": lambda good, header: header + b"\n\n" + good + b"   \n" + good,
    "nothing but blank lines": lambda good, header: b"\n \n\n",
    "empty file": lambda good, header: b"",
    "bad line at a block boundary": lambda good, header: header + good * 40 + b"{nope\n" + good * 40,
}


@pytest.mark.parametrize("case", sorted(EDGE_CASES))
def test_workers_reading_byte_ranges_find_what_one_process_finds(tmp_path, monkeypatch, practice_profile, case):
    """The byte-range reader (workers read their own blocks) against the sequential line reader."""
    messages = constant_twist_messages(practice_profile, seconds=0.02)[:1]
    good = write_recording(tmp_path / "one.jsonl", messages).read_bytes()
    header = write_recording(tmp_path / "h.jsonl", [], [practice_profile]).read_bytes()  # the header line
    path = tmp_path / "case.jsonl"
    path.write_bytes(EDGE_CASES[case](good, header))
    monkeypatch.setattr(recording, "_CHUNK_BYTES", 1000)  # block boundaries inside the lines
    sequential = _outcome(path)
    monkeypatch.setattr(block_decoder, "PARALLEL_FROM_BYTES", 0)
    with block_decoder.worker_pool(str(path)) as pool:
        assert pool is not None or path.stat().st_size == 0
    parallel = _outcome(path)
    assert parallel == sequential


@pytest.mark.skipif(platform.libc_ver()[0] != "glibc", reason="the setting is glibc's (malloc.h: mallopt)")
def test_the_c_allocator_takes_the_settings_that_keep_freed_memory():
    # mallopt answers 0 for a parameter or value it refuses: then every block's
    # temporaries would be faulted in afresh again (DEVELOPERS.md).
    assert block_decoder.keep_freed_memory() is True
