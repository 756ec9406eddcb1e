"""`podwatch recompute`: the CSV contract of DESIGN.md and one-line errors."""

from __future__ import annotations

import csv
import io
import math
import subprocess
import sys

import numpy as np
import pytest

from receiver.cli import main
from tests.conftest import FIXTURES
from tests.synthetic import constant_twist_messages, write_recording

COLUMNS = "robot,seq,t,x,y,heading,reported_x,reported_y,reported_heading,position_error,heading_error,loop"


def _run(capsys, *args):
    code = main(list(args))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _rows(text):
    return list(csv.DictReader(io.StringIO(text)))


def test_header_recording_to_csv(tmp_path, capsys, practice_profile):
    rec = write_recording(tmp_path / "run.jsonl", constant_twist_messages(practice_profile), [practice_profile])
    code, out, err = _run(capsys, "recompute", str(rec))
    assert code == 0, err
    assert out.splitlines()[0] == COLUMNS
    rows = _rows(out)
    assert len(rows) == 201
    assert rows[0]["robot"] == "practice-bot" and rows[0]["seq"] == "0" and rows[0]["loop"] == "0.020000"
    assert all(-math.pi < float(r["heading"]) <= math.pi for r in rows)
    assert max(float(r["position_error"]) for r in rows) < 0.005
    assert "practice-bot: 201 samples" in err


def test_gzip_and_out_file(tmp_path, capsys, practice_profile):
    rec = write_recording(tmp_path / "run.jsonl.gz", constant_twist_messages(practice_profile), [practice_profile], compress=True)
    out_csv = tmp_path / "poses.csv"
    code, out, err = _run(capsys, "recompute", str(rec), "--out", str(out_csv), "--method", "midpoint")
    assert code == 0, err
    assert out == ""
    assert len(_rows(out_csv.read_text())) == 201


def test_bare_messages_need_a_profile(tmp_path, capsys, metric_profile):
    rec = write_recording(tmp_path / "bare.jsonl", constant_twist_messages(metric_profile, twist_per_s=(300.0, 0, -0.5)))
    code, out, err = _run(capsys, "recompute", str(rec))
    assert code == 1
    assert err.strip().endswith("no robot in it has a profile; give one with --profile")
    assert len(err.strip().splitlines()) == 2  # the warning for the robot, then the one-line error
    code, out, err = _run(capsys, "recompute", str(rec), "--profile", str(FIXTURES / "practice-bot-metric.toml"))
    assert code == 0, err
    rows = _rows(out)
    # The metric robot reports clockwise degrees; the CSV is REP 103 radians.
    last = rows[-1]
    assert float(last["reported_heading"]) == pytest.approx(float(last["heading"]), abs=1e-3)
    assert float(last["heading"]) < 0  # the twist turned clockwise


def test_several_robots_in_one_file(tmp_path, capsys, practice_profile, metric_profile):
    a = constant_twist_messages(practice_profile)
    b = constant_twist_messages(metric_profile, twist_per_s=(200.0, 50.0, 0.3))
    mixed = [m for pair in zip(a, b) for m in pair]
    rec = write_recording(tmp_path / "two.jsonl", mixed, [practice_profile, metric_profile])
    code, out, err = _run(capsys, "recompute", str(rec))
    assert code == 0, err
    robots = [r["robot"] for r in _rows(out)]
    assert robots.count("practice-bot") == 201 and robots.count("practice-bot-metric") == 201


def test_methods_differ_and_unknown_method_is_refused(tmp_path, capsys, practice_profile):
    rec = write_recording(tmp_path / "run.jsonl", constant_twist_messages(practice_profile, twist_per_s=(20, 0, 1.5), rate_hz=5.0, seconds=8.0), [practice_profile])
    finals = {}
    for method in ("arc", "midpoint", "euler"):
        code, out, err = _run(capsys, "recompute", str(rec), "--method", method)
        assert code == 0
        finals[method] = float(_rows(out)[-1]["position_error"])
    assert finals["arc"] < finals["midpoint"] < finals["euler"]
    code, out, err = _run(capsys, "recompute", str(rec), "--method", "rk4")
    assert code == 1 and "unknown method 'rk4'" in err


def test_truncated_last_line_is_skipped_with_a_warning(tmp_path, capsys, practice_profile):
    rec = write_recording(tmp_path / "cut.jsonl", constant_twist_messages(practice_profile), [practice_profile])
    rec.write_bytes(rec.read_bytes()[:-40])
    code, out, err = _run(capsys, "recompute", str(rec))
    assert code == 0
    assert "skipped a truncated last line" in err
    assert len(_rows(out)) == 200


def test_bad_lines_in_the_middle_are_counted(tmp_path, capsys, practice_profile):
    rec = write_recording(tmp_path / "bad.jsonl", constant_twist_messages(practice_profile), [practice_profile])
    lines = rec.read_text().splitlines()
    lines.insert(5, "this is not json")
    lines.insert(9, '{"v": 1, "robot": "practice-bot", "seq": 3, "t": 1.0}')
    lines.insert(12, '{"v": 1, "robot": "practice-bot", "seq": 4, "t": 1.0, "ticks": [1, 2]}')
    rec.write_text("\n".join(lines) + "\n")
    code, out, err = _run(capsys, "recompute", str(rec))
    assert code == 0
    assert "skipped 3 bad messages (missing_field 1, not_json 1, wrong_ticks_length 1)" in err
    assert len(_rows(out)) == 201


@pytest.mark.parametrize(
    ("content", "message"),
    [
        (None, "no such file"),
        (b"", "empty recording"),
        (b"\x00\x01\x02garbage\xff\n", "no valid messages"),
        (b'{"recording": 7, "profiles": {}}\n', "recording format 7 is not supported"),
        (b'{"recording": 1, "profiles": {"x": {"name": "x"}}}\n{}\n', "header profile 'x': wheel: missing"),
        (b"\x1f\x8b\x08\x00garbage", "not a readable gzip file"),
    ],
)
def test_bad_files_give_one_line(tmp_path, capsys, content, message):
    path = tmp_path / "rec.jsonl"
    if content is not None:
        path.write_bytes(content)
    code, out, err = _run(capsys, "recompute", str(path))
    assert code == 1
    assert len(err.strip().splitlines()) == 1, err
    assert err.startswith("podwatch: error: ") and message in err


def test_bad_profile_gives_one_line(tmp_path, capsys, practice_profile):
    rec = write_recording(tmp_path / "run.jsonl", constant_twist_messages(practice_profile))
    bad = tmp_path / "bad.toml"
    bad.write_text((FIXTURES / "practice-bot.toml").read_text().replace("diameter = 1.378", "diameter = -1.0", 1))
    code, out, err = _run(capsys, "recompute", str(rec), "--profile", str(bad))
    assert code == 1
    assert err.strip() == f"podwatch: error: {bad}: wheel[0].diameter: must be positive, got -1.0"


def test_console_script_runs_without_traceback(tmp_path):
    result = subprocess.run(
        [sys.executable, "-m", "receiver.cli", "recompute", str(tmp_path / "missing.jsonl")],
        capture_output=True, text=True, check=False,
    )
    assert result.returncode == 1
    assert "Traceback" not in result.stderr
    assert result.stderr.strip() == f"podwatch: error: {tmp_path / 'missing.jsonl'}: no such file"


def test_csv_values_equal_the_engine(tmp_path, capsys, practice_profile):
    from receiver.formats.protocol import Sample
    from receiver.odometry.columns import columns_from_samples
    from receiver.odometry.recompute import Tracker

    messages = constant_twist_messages(practice_profile, twist_per_s=(15.0, 6.0, -0.9))
    rec = write_recording(tmp_path / "run.jsonl", messages, [practice_profile])
    code, out, err = _run(capsys, "recompute", str(rec))
    rows = _rows(out)
    result = Tracker(practice_profile).feed(columns_from_samples([Sample(**m) for m in messages], 3))
    got = np.array([[float(r["x"]), float(r["y"]), float(r["position_error"])] for r in rows])
    want = np.column_stack([result.pose[:, :2], result.position_error])
    np.testing.assert_allclose(got, want, atol=1e-6)


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def test_progress_shows_on_a_terminal_only(tmp_path, monkeypatch, practice_profile):
    from receiver.cli import offline_commands as cli
    from receiver.formats import recording

    rec = write_recording(tmp_path / "run.jsonl", constant_twist_messages(practice_profile, seconds=40.0), [practice_profile])
    monkeypatch.setattr(recording, "_CHUNK_BYTES", 50_000)  # several blocks, several updates
    terminal = _Terminal()
    progress = cli.ProgressLine("reading", stream=terminal, min_interval_s=0.0)
    with recording.RecordingStream(rec, progress=progress) as stream:
        assert sum(len(piece) for _, piece in stream) == 2001
    progress.close()
    shown = terminal.getvalue()
    assert "reading: " in shown and "100.0% of 0.4 MB" in shown
    assert shown.endswith("\r\033[K")  # the line is cleared at the end
    piped = io.StringIO()
    quiet = cli.ProgressLine("reading", stream=piped, min_interval_s=0.0)
    quiet(10, 100)
    quiet.close()
    assert piped.getvalue() == ""
