"""`podwatch diagnose` (and `--guided`) and `podwatch calibrate`: the DESIGN.md contract and one-line errors."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from receiver.cli import main
from receiver.formats.profile_toml import load_profile
from receiver.formats.recording_writer import RecordingWriter
from receiver.odometry.faults import parse_faults
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES
from tests.synthetic import constant_twist_messages, write_recording

PROFILE = str(FIXTURES / "practice-bot.toml")


def _run(capsys, *args):
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _simulated(tmp_path: Path, path: str, seconds: float, *faults: str) -> Path:
    out = tmp_path / f"{path}.jsonl.gz"
    code = main(["simulate", "--profile", PROFILE, "--path", path, "--duration", str(seconds), "--seed", "3", "--out", str(out),
                 *[a for f in faults for a in ("--fault", f)]])
    assert code == 0
    return out


def test_diagnose_text(capsys) -> None:
    code, out, err = _run(capsys, "diagnose", FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz")
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0].startswith("practice-bot: ")
    assert lines[1] == "verdict: the robot code treats the right wheel as reversed; the profile does not"
    assert lines[2].startswith("confidence: high (margin ")
    assert "  wheel right: reversed false -> true" in lines


def test_diagnose_json_is_one_object_and_writes_the_profile(tmp_path: Path, capsys) -> None:
    rec = _simulated(tmp_path, "wander", 8.0, "heading-unit", "slip:0.02")
    written = tmp_path / "fixed.toml"
    code, out, err = _run(capsys, "diagnose", rec, "--json", "--write-profile", written)
    assert code == 0, err
    result = json.loads(out)  # exactly one JSON object
    [robot] = result["robots"]
    assert robot["check"] == "diagnose" and robot["confidence"] == "high"
    assert robot["hypotheses"][0]["id"] == "heading-unit"
    assert load_profile(written).reported.heading_unit == "deg"
    # The corrected profile makes the disagreement vanish.
    code, out, err = _run(capsys, "diagnose", rec, "--profile", written, "--json")
    assert json.loads(out)["robots"][0]["hypotheses"][0]["id"] == "none"


def test_diagnose_last_seconds(tmp_path: Path, capsys) -> None:
    rec = _simulated(tmp_path, "wander", 12.0, "y-axis")
    code, out, err = _run(capsys, "diagnose", rec, "--last", "4", "--json")
    assert code == 0, err
    robot = json.loads(out)["robots"][0]
    assert robot["duration_s"] == pytest.approx(4.0, abs=0.05) and robot["hypotheses"][0]["id"] == "y-axis"


def test_guided(tmp_path: Path, capsys) -> None:
    code, out, err = _run(capsys, "diagnose", FIXTURES / "practice-bot-guided.jsonl.gz", "--guided")
    assert code == 0, err
    assert out.splitlines()[-1] == "result: all checks pass"
    rec = _simulated(tmp_path, "guided", 15.0, "heading-direction")
    written = tmp_path / "fixed.toml"
    code, out, err = _run(capsys, "diagnose", rec, "--guided", "--json", "--write-profile", written)
    robot = json.loads(out)["robots"][0]
    assert robot["check"] == "guided" and robot["flags"] == ["reported heading"]
    assert robot["profile_changes"] == ["reported.heading_positive: ccw -> cw"]
    assert load_profile(written).reported.heading_positive == "cw"


def test_several_robots(tmp_path: Path, capsys) -> None:
    practice, metric = load_profile(PROFILE), load_profile(FIXTURES / "practice-bot-metric.toml")
    rec = tmp_path / "two.jsonl"
    with RecordingWriter(rec, [practice, metric]) as writer:
        writer.write(simulate(practice, "wander", 100.0, 6.0, 1, parse_faults(["reversed:left"], practice)).stamp_rx(0.0))
        writer.write(simulate(metric, "wander", 100.0, 6.0, 1).stamp_rx(0.0))
    code, out, err = _run(capsys, "diagnose", rec, "--json")
    assert code == 0, err
    found = {r["robot"]: r["hypotheses"][0]["id"] for r in json.loads(out)["robots"]}
    assert found == {"practice-bot": "reversed:left", "practice-bot-metric": "none"}
    code, out, err = _run(capsys, "diagnose", rec, "--write-profile", tmp_path / "p.toml")
    assert code == 1 and err.strip().endswith("choose one with --robot") and len(err.strip().splitlines()) == 1
    code, out, err = _run(capsys, "diagnose", rec, "--robot", "practice-bot-metric")
    assert code == 0 and out.startswith("practice-bot-metric: ")
    code, out, err = _run(capsys, "calibrate", rec, "--spin-turns", "3")
    assert code == 1 and "choose one with --robot" in err


def test_calibrate_spin_and_push(tmp_path: Path, capsys) -> None:
    spin = _simulated(tmp_path, "spin", 13.8, "slip:0.02")
    written = tmp_path / "spun.toml"
    code, out, err = _run(capsys, "calibrate", spin, "--spin-turns", "3", "--json", "--write-profile", written)
    assert code == 0, err
    result = json.loads(out)
    assert result["test"] == "spin" and [v["name"] for v in result["values"]] == ["track width", "back wheel forward offset"]
    assert result["values"][0]["measured"] == pytest.approx(12.5, rel=0.005)  # the simulated geometry
    fixed = load_profile(written)
    assert fixed.wheels[0].y - fixed.wheels[1].y == pytest.approx(12.5, rel=0.005)
    push = _simulated(tmp_path, "push-forward", 10.0)
    code, out, err = _run(capsys, "calibrate", push, "--push-distance", "48", "--push-axis", "x")
    assert code == 0, err
    assert out.splitlines()[1].split() == ["profile", "measured", "+-bound", "change"]
    assert out.splitlines()[2].startswith("left wheel diameter")


def test_bad_input_exits_with_one_line(tmp_path: Path, capsys) -> None:
    spin = _simulated(tmp_path, "spin", 13.8)
    bare = write_recording(tmp_path / "bare.jsonl", constant_twist_messages(load_profile(PROFILE)))
    capsys.readouterr()
    cases = [
        (["diagnose", tmp_path / "missing.jsonl"], "no such file"),
        (["diagnose", bare], "has no profile: give one with --profile"),
        (["diagnose", spin, "--robot", "other"], "no robot 'other' in it"),
        (["calibrate", spin], "choose one test"),
        (["calibrate", spin, "--spin-turns", "3", "--push-distance", "4", "--push-axis", "x"], "choose one test"),
        (["calibrate", spin, "--push-distance", "48"], "--push-distance and --push-axis go together"),
        (["calibrate", spin, "--spin-turns", "7"], "count the turns again"),
        (["calibrate", spin, "--spin-imu"], "needs an \"imu\" value in every message"),
        (["calibrate", spin, "--spin-turns", "3", "--profile", tmp_path / "nope.toml"], "no such file"),
    ]
    for args, reason in cases:
        code, out, err = _run(capsys, *args)
        assert code == 1, (args, err)
        assert len(err.strip().splitlines()) == 1 and reason in err, (args, err)
    with pytest.raises(SystemExit) as exc:  # argparse refuses a non-positive count before anything runs
        main(["calibrate", str(spin), "--spin-turns", "-2"])
    assert exc.value.code == 2
