"""`podwatch profile new`, `--write-profile` into the user's own file, and the message for a
profile of another name (DESIGN.md: the profile's `name` matches the messages' `robot`)."""

from __future__ import annotations

import time
from dataclasses import replace
from pathlib import Path

import pytest

from receiver.cli import main
from receiver.formats.profile_toml import load_profile
from receiver.formats.protocol import encode
from receiver.formats.starter_profiles import LAYOUTS, starter_text
from receiver.live.hub import Hub
from receiver.live.serve import summary_lines
from receiver.odometry.faults import parse_faults
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES

PROFILE = FIXTURES / "practice-bot.toml"
PRACTICE = load_profile(PROFILE)
MISMATCH = (
    "the profile given is named practice-bot; the messages come from my-robot: "
    'set name = "my-robot" in the profile, or send that name'
)


def _run(capsys, *args):
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.fixture(scope="module")
def my_robot_samples():
    """A spin of a robot that calls itself my-robot: the practice robot under another name."""
    mine = replace(PRACTICE, name="my-robot")
    return simulate(mine, "spin", 100.0, 6.0, 1, parse_faults(["reversed:right"], mine)).stamp_rx(time.time())


@pytest.fixture
def bare_file(tmp_path: Path, my_robot_samples) -> Path:
    """The messages alone, no recording header: the profile must come from --profile."""
    path = tmp_path / "my-robot.jsonl"
    path.write_bytes(b"\n".join(encode(s) for s in my_robot_samples) + b"\n")
    return path


@pytest.mark.parametrize(
    "command",
    [["diagnose"], ["diagnose", "--guided"], ["calibrate", "--spin-turns", "1"], ["recompute"]],
)
def test_a_profile_of_another_name_is_named_with_the_fix(capsys, bare_file: Path, command: list[str]) -> None:
    code, out, err = _run(capsys, command[0], bare_file, "--profile", PROFILE, *command[1:])
    assert code == 1
    assert MISMATCH in err and err.count("podwatch: error: ") == 1
    if command[0] == "recompute":
        assert f"warning: robot 'my-robot' has no profile ({MISMATCH}); its messages are not recomputed" in err


def test_serve_summary_names_the_profile_of_another_name(my_robot_samples) -> None:
    hub = Hub({"practice-bot": PRACTICE})
    hub.ingest(my_robot_samples[:50], [], 0.0, "test")
    hub.process(0.0)
    lines = summary_lines(hub)
    mine = next(line for line in lines if line.startswith("my-robot: "))
    assert mine.endswith(f"; no profile, not recomputed: {MISMATCH}")
    # Without a profile of another name the line stays as before.
    alone = Hub({})
    alone.ingest(my_robot_samples[:50], [], 0.0, "test")
    alone.process(0.0)
    assert summary_lines(alone)[0].endswith("; no profile, not recomputed")


@pytest.mark.parametrize("layout", LAYOUTS)
def test_profile_new_writes_a_starter_and_never_over_a_file(tmp_path: Path, capsys, layout: str) -> None:
    code, out, err = _run(capsys, "profile", "new", "--layout", layout)
    assert code == 0 and out == starter_text(layout, "in")
    path = tmp_path / "robot.toml"
    code, out, err = _run(capsys, "profile", "new", "--layout", layout, "--unit", "mm", "--out", path)
    assert code == 0 and load_profile(path).distance_unit == "mm"
    before = path.read_bytes()
    code, out, err = _run(capsys, "profile", "new", "--layout", layout, "--out", path)
    assert code == 1 and "already exists; podwatch never writes over a profile" in err
    assert path.read_bytes() == before


def test_write_profile_keeps_the_users_file_but_the_changed_line(tmp_path: Path, capsys) -> None:
    # The user's own file, with a comment of their own; the robot code treats
    # the right encoder as reversed.
    source = tmp_path / "mine.toml"
    text = PROFILE.read_text().replace("[imu]\n", "# our IMU is not wired yet\n[imu]\n")
    source.write_text(text)
    recording = tmp_path / "run.jsonl.gz"
    assert main(["simulate", "--profile", str(source), "--path", "wander", "--duration", "8", "--fault", "reversed:right",
                 "--out", str(recording)]) == 0
    written = tmp_path / "fixed.toml"
    code, out, err = _run(capsys, "diagnose", recording, "--profile", source, "--write-profile", written)
    assert code == 0, err
    before, after = text.splitlines(keepends=True), written.read_text().splitlines(keepends=True)
    assert len(before) == len(after)
    changed = [(a, b) for a, b in zip(before, after) if a != b]
    assert changed == [("reversed = false\n", "reversed = true\n")]
    assert after.index("reversed = true\n") == 29  # the right wheel's line, the second table
    assert f"wrote {written} (changes written into a copy of {source})" in err


def test_write_profile_from_a_recordings_header_is_a_clean_commented_file(tmp_path: Path, capsys) -> None:
    written = tmp_path / "from-header.toml"
    code, out, err = _run(
        capsys, "diagnose", FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz", "--write-profile", written
    )
    assert code == 0, err
    text = written.read_text()
    assert text.startswith("# Robot profile of practice-bot, written by podwatch.\n")
    assert "counts_per_rev = 8192 " in text and "# rad | deg" in text
    profile = load_profile(written)
    assert profile.wheels[1].reversed and profile.wheels[0].counts_per_rev == 8192
