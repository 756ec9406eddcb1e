"""`podwatch compare`: one row per recording, the profile values that differ, --json, --set,
--profile, and one-line errors."""

from __future__ import annotations

import json

import pytest

from receiver.analysis.compare import run_row
from receiver.cli import main
from receiver.formats.recording import read_recording
from tests.conftest import FIXTURES
from tests.synthetic import constant_twist_messages, write_recording

REVERSED = str(FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz")
WIDE = str(FIXTURES / "practice-bot-figure-eight-wide-track.jsonl.gz")
FIXED = str(FIXTURES / "practice-bot-figure-eight.jsonl.gz")


def _run(capsys, *args):
    code = main(["compare", *args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_one_row_per_recording_then_what_differs(capsys):
    code, out, err = _run(capsys, REVERSED, WIDE, FIXED)
    assert code == 0 and err == ""
    lines = out.splitlines()
    assert lines[0].split()[:4] == ["#", "time", "driven", "turns"] and lines[0].endswith("recording")
    rows = [line.split() for line in lines[1:4]]
    assert [row[0] for row in rows] == ["1", "2", "3"]
    assert [row[-1] for row in rows] == [
        "practice-bot-figure-eight-reversed-right.jsonl.gz", "practice-bot-figure-eight-wide-track.jsonl.gz",
        "practice-bot-figure-eight.jsonl.gz",
    ]
    assert rows[0][6:8] == ["52.00", "in"] and rows[1][6:8] == ["11.73", "in"] and rows[2][6:8] == ["0.000", "in"]
    assert lines[4].startswith("growth: change of the disagreement per metre driven and per turn since the last re-anchor")
    assert lines[5:] == [
        "profile values that differ:",
        "                    #1     #2     #3",
        "  wheel.left.y    6.25   6.45   6.25",
        "  wheel.right.y  -6.25  -6.45  -6.25",
    ]


def test_json_is_one_object_of_the_rows(capsys):
    code, out, err = _run(capsys, REVERSED, WIDE, "--json")
    assert code == 0, err
    found = json.loads(out)
    assert [row["recording"] for row in found["rows"]] == [REVERSED, WIDE]
    assert found["profile_differences"] == {"wheel.left.y": [6.25, 6.45], "wheel.right.y": [-6.25, -6.45]}
    assert found["growth_minimums"] == {"min_travel_m": 0.5, "min_turns": 0.25}
    data = read_recording(WIDE)
    expected = run_row(data.robots["practice-bot"], data.profiles["practice-bot"]).to_json()
    assert {k: v for k, v in found["rows"][1].items() if k not in ("recording", "profile")} == expected
    assert found["rows"][1]["profile"]["wheel.left.y"] == 6.45


def test_set_and_profile_apply_to_every_recording(capsys):
    code, out, err = _run(capsys, WIDE, FIXED, "--set", "wheel.left.y=6.25", "--set", "wheel.right.y=-6.25", "--json")
    rows = json.loads(out)["rows"]
    assert [row["final_position_error"] for row in rows] == [pytest.approx(0.0, abs=1e-9)] * 2
    assert json.loads(out)["profile_differences"] == {}
    code, out, err = _run(capsys, WIDE, "--profile", str(FIXTURES / "practice-bot.toml"), "--json")
    assert json.loads(out)["rows"][0]["final_position_error"] == pytest.approx(0.0, abs=1e-9)


def test_recordings_without_a_profile_are_skipped_with_a_warning(tmp_path, capsys, practice_profile):
    bare = write_recording(tmp_path / "bare.jsonl", constant_twist_messages(practice_profile))
    code, out, err = _run(capsys, str(bare), FIXED)
    assert code == 0
    assert err == f"podwatch: warning: {bare}: robot 'practice-bot' has no profile (give one with --profile); skipped\n"
    assert len(out.splitlines()) == 4  # header, one row, growth line, "profile values that differ: none"
    code, out, err = _run(capsys, str(bare))
    assert code == 1
    assert err.splitlines()[-1] == "podwatch: error: no recording holds a robot with a profile to compare; give one with --profile"


def test_robot_choice_and_missing_files(tmp_path, capsys):
    code, out, err = _run(capsys, FIXED, "--robot", "other-bot")
    assert code == 1 and err.splitlines()[0] == f"podwatch: warning: {FIXED}: no robot 'other-bot' in it; skipped"
    code, out, err = _run(capsys, str(tmp_path / "nowhere.jsonl"))
    assert code == 1 and len(err.splitlines()) == 1 and "nowhere.jsonl" in err
