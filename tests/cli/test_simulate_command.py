"""`podwatch simulate --out`: a recording that `podwatch recompute` reads, and one-line errors."""

from __future__ import annotations

import csv
import io
import subprocess
import sys
from pathlib import Path

import pytest

from receiver.cli import main
from receiver.formats.recording import read_recording
from tests.conftest import FIXTURES

PROFILE = str(FIXTURES / "practice-bot.toml")


def _run(capsys, *args: str) -> tuple[int, str, str]:
    code = main(list(args))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _worst_error(csv_path: Path) -> float:
    rows = list(csv.DictReader(io.StringIO(csv_path.read_text())))
    return max(float(r["position_error"]) for r in rows)


@pytest.mark.parametrize("name", ["sim.jsonl", "sim.jsonl.gz"])
def test_simulate_then_recompute(tmp_path: Path, capsys, name: str) -> None:
    rec = tmp_path / name
    code, _, err = _run(capsys, "simulate", "--profile", PROFILE, "--duration", "3", "--out", str(rec))
    assert code == 0, err
    assert "practice-bot: square" in err and str(rec) in err
    data = read_recording(rec)
    cols = data.robots["practice-bot"]
    assert set(data.profiles) == {"practice-bot"} and data.warnings == []
    assert cols.seq[0] == 0 and (cols.rx[1:] >= cols.rx[:-1]).all()

    out = tmp_path / "out.csv"
    code, _, err = _run(capsys, "recompute", str(rec), "--out", str(out))
    assert code == 0, err
    assert _worst_error(out) < 1e-5  # clean: robot and podwatch agree


def test_simulated_fault_shows_in_recompute(tmp_path: Path, capsys) -> None:
    rec, out = tmp_path / "sim.jsonl", tmp_path / "out.csv"
    args = ["simulate", "--profile", PROFILE, "--path", "figure-eight", "--duration", "5", "--seed", "3"]
    assert _run(capsys, *args, "--fault", "reversed:right", "--fault", "drop:0.1", "--out", str(rec))[0] == 0
    assert _run(capsys, "recompute", str(rec), "--out", str(out))[0] == 0
    assert _worst_error(out) > 5.0


@pytest.mark.parametrize(
    "extra, message",
    [
        (["--fault", "reversed:middle"], "fault 'reversed:middle': expected reversed:WHEEL"),
        (["--fault", "sideways"], "unknown fault 'sideways'"),
        (["--rate", "-5"], "rate -5.0 Hz: expected more than 0"),
        (["--duration", "0"], "duration 0.0 s: expected more than 0"),
    ],
)
def test_bad_input_is_one_line_and_writes_nothing(tmp_path: Path, capsys, extra: list[str], message: str) -> None:
    rec = tmp_path / "sim.jsonl"
    code, _, err = _run(capsys, "simulate", "--profile", PROFILE, *extra, "--out", str(rec))
    assert code == 1
    assert err.startswith("podwatch: error: ") and message in err and err.count("\n") == 1
    assert not rec.exists()


def test_missing_profile_is_one_line(tmp_path: Path, capsys) -> None:
    code, _, err = _run(capsys, "simulate", "--profile", str(tmp_path / "none.toml"), "--out", str(tmp_path / "x"))
    assert code == 1 and err == f"podwatch: error: {tmp_path / 'none.toml'}: (file): no such file\n"


def test_command_line_end_to_end(tmp_path: Path) -> None:
    rec, out = tmp_path / "sim.jsonl.gz", tmp_path / "out.csv"
    cmd = [sys.executable, "-m", "receiver.cli"]
    subprocess.run([*cmd, "simulate", "--profile", PROFILE, "--path", "wander", "--duration", "2",
                    "--near-wrap", "--imu", "--out", str(rec)], check=True, capture_output=True)
    subprocess.run([*cmd, "recompute", str(rec), "--out", str(out)], check=True, capture_output=True)
    assert _worst_error(out) < 1e-5
