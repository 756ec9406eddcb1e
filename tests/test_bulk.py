"""Bulk decoding: two worker processes give what one process gives."""

from __future__ import annotations

import numpy as np

from receiver import bulk, recording
from receiver.recording import read_recording
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
    monkeypatch.setattr(bulk, "PARALLEL_FROM_BYTES", 0)
    parallel = read_recording(path)
    assert sequential.skipped == parallel.skipped
    assert sum(sequential.skipped.values()) == 3
    assert sequential.warnings == parallel.warnings
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
    monkeypatch.setattr(bulk, "PARALLEL_FROM_BYTES", 0)
    assert main(["recompute", str(path), "--out", str(tmp_path / "two.csv")]) == 0
    one, two = (tmp_path / "one.csv").read_bytes(), (tmp_path / "two.csv").read_bytes()
    assert one == two and one.count(b"\n") == 1 + 2 * 1001
    capsys.readouterr()
