"""`--set KEY=VALUE` on `recompute`, `diagnose` and `compare`: the edit reaches the recompute,
and a bad setting stops the command with one line naming the key."""

from __future__ import annotations

import json

import numpy as np
import pytest

from receiver.cli import main
from receiver.cli.program import build_parser
from tests.conftest import FIXTURES
from tests.synthetic import constant_twist_messages, write_recording

REVERSED = str(FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz")
WIDE = str(FIXTURES / "practice-bot-figure-eight-wide-track.jsonl.gz")


def _run(capsys, *args):
    code = main(list(args))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _summary(capsys, *args):
    code, out, err = _run(capsys, "recompute", *args, "--out", "/dev/null")
    assert code == 0, err
    return err.strip()


def test_the_edit_that_fixes_a_fixture_takes_the_disagreement_away(capsys):
    assert "disagreement at end 11.732 in" in _summary(capsys, WIDE)
    fixed = _summary(capsys, WIDE, "--set", "wheel.left.y=6.25", "--set", "wheel.right.y=-6.25")
    assert fixed == "practice-bot: 977 samples; disagreement at end 0.000 in, 0.00 deg; worst 0.000 in"
    # The reversed-right robot code agrees with a profile that reverses the right wheel too,
    # named or by its place in "ticks".
    for key in ("wheel.right.reversed", "wheel.1.reversed"):
        assert _summary(capsys, REVERSED, "--set", f"{key}=true").endswith("worst 0.000 in")


def test_a_unit_change_converts_lengths_and_output(tmp_path, capsys):
    # distance_unit converts the profile's lengths (the robot stays the same size), so the
    # recomputed path is the same path in mm: 25.4 mm to the inch (SI). The robot's reported
    # x, y are read in mm too, which for this inch robot moves only the starting anchor.
    paths = {}
    for unit in ("in", "mm"):
        out = tmp_path / f"{unit}.csv"
        code, _, err = _run(capsys, "recompute", REVERSED, "--set", f"distance_unit={unit}", "--out", str(out))
        assert code == 0 and f" {unit}, " in err
        rows = [line.split(",") for line in out.read_text().splitlines()[1:]]
        paths[unit] = np.array([[float(r[3]), float(r[4])] for r in rows])
    np.testing.assert_allclose(paths["mm"] - paths["mm"][0], (paths["in"] - paths["in"][0]) * 25.4, atol=2e-6 * 25.4)


def test_a_renamed_profile_recomputes_another_robot(tmp_path, capsys, practice_profile):
    messages = [{**m, "robot": "loaner-bot"} for m in constant_twist_messages(practice_profile)]
    rec = write_recording(tmp_path / "bare.jsonl", messages)
    profile = str(FIXTURES / "practice-bot.toml")
    code, out, err = _run(capsys, "recompute", str(rec), "--profile", profile, "--out", "/dev/null")
    assert code == 1 and "no robot in it has a profile" in err
    summary = _summary(capsys, str(rec), "--profile", profile, "--set", "name=loaner-bot")
    assert summary.startswith("loaner-bot: 201 samples")


def test_a_rename_needs_one_profile(tmp_path, capsys, practice_profile, metric_profile):
    messages = constant_twist_messages(practice_profile) + constant_twist_messages(metric_profile, twist_per_s=(300.0, 0, -0.5))
    rec = write_recording(tmp_path / "two.jsonl", messages, [practice_profile, metric_profile])
    code, out, err = _run(capsys, "recompute", str(rec), "--set", "name=x")
    assert (code, err) == (1, "podwatch: error: --set name=... renames one profile, and 2 are in use (practice-bot, practice-bot-metric)\n")
    # With several robots an error says whose profile a setting did not fit.
    code, out, err = _run(capsys, "recompute", str(rec), "--set", "wheel.left.diameter=0")
    assert (code, err) == (1, "podwatch: error: --set (practice-bot): wheel.left.diameter: must be positive, got 0.0\n")


@pytest.mark.parametrize("command", ["recompute", "diagnose", "compare"])
@pytest.mark.parametrize(
    "setting, message",
    [
        ("wheel.rigth.reversed=true", "--set: wheel.rigth.reversed: unknown wheel 'rigth', expected one of left, right, back or an index 0-2 (did you mean right?)"),
        ("wheel.right.reversed=yes", "--set: wheel.right.reversed: expected true or false, got 'yes'"),
        ("reported.heading_unit=grad", "--set: reported.heading_unit: unknown value 'grad', expected one of rad, deg"),
        ("wheel.back.angle=0", "--set: wheel.back.angle: this edit leaves wheels that cannot observe x, y and heading (are all wheels parallel, or at one spot?)"),
        ("speed", "--set: speed: expected KEY=VALUE, e.g. wheel.right.reversed=true"),
    ],
)
def test_bad_settings_stop_with_one_line(tmp_path, capsys, command, setting, message):
    args = [command, REVERSED, "--set", setting] + (["--out", str(tmp_path / "out.csv")] if command == "recompute" else [])
    code, out, err = _run(capsys, *args)
    assert code == 1
    assert err == f"podwatch: error: {message}\n"


def test_diagnose_with_the_edit_finds_nothing_left(capsys):
    code, out, err = _run(capsys, "diagnose", REVERSED, "--json")
    assert json.loads(out)["robots"][0]["hypotheses"][0]["id"] == "reversed:right"
    code, out, err = _run(capsys, "diagnose", REVERSED, "--json", "--set", "wheel.right.reversed=true")
    assert code == 0, err
    assert json.loads(out)["robots"][0]["hypotheses"][0]["id"] == "none"


def test_calibrate_takes_set_too():
    args = build_parser().parse_args(["calibrate", REVERSED, "--spin-turns", "3", "--set", "wheel.back.x=-4.1"])
    assert args.set == ["wheel.back.x=-4.1"]
