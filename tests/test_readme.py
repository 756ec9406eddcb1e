"""The README's commands: every `podwatch` line in it parses, and the examples
whose output it shows print exactly that output."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest

from receiver.cli import main
from receiver.cli.program import build_parser
from receiver.live.serve import ServeConfig
from tests.conftest import FIXTURES
from tests.live.harness import handled, live_receiver, wait_until

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text()
COMMANDS = [
    line.strip().removeprefix("$ ")
    for line in README.splitlines()
    if re.match(r"^    (\$ )?podwatch [a-z]", line) and "[" not in line
]


def _example(command: str) -> list[str]:
    """The lines the README shows right after ``$ command``, up to the next prompt or blank line."""
    lines = README.splitlines()
    start = lines.index(f"    $ {command}") + 1
    shown = []
    for line in lines[start:]:
        if not line.startswith("    ") or line.startswith("    $ "):
            break
        shown.append(line[4:])
    return shown


def test_there_are_commands_to_check():
    assert len(COMMANDS) >= 5


@pytest.mark.parametrize("command", COMMANDS)
def test_every_command_parses(command):
    build_parser().parse_args(shlex.split(command)[1:])


def test_recompute_example_prints_what_the_readme_shows(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "replay_fixtures").symlink_to(FIXTURES)
    command = "podwatch recompute replay_fixtures/practice-bot-figure-eight-reversed-right.jsonl.gz --out poses.csv"
    assert main(shlex.split(command)[1:]) == 0
    assert capsys.readouterr().err.splitlines() == _example(command)
    assert (tmp_path / "poses.csv").read_text().splitlines()[:3] == _example("head -3 poses.csv")


EXAMPLES = [line.strip().removeprefix("$ ") for line in README.splitlines() if line.startswith("    $ podwatch ")]


def _shows(printed: list[str], shown: list[str]) -> bool:
    """True when ``printed`` starts with the lines ``shown`` and holds each part after a "..." in order."""
    parts, part = [], []
    for line in shown:
        if line == "...":
            parts.append(part)
            part = []
        else:
            part.append(line)
    parts.append(part)
    if printed[: len(parts[0])] != parts[0]:
        return False
    at = len(parts[0])
    for part in parts[1:]:
        found = next((k for k in range(at, len(printed) - len(part) + 1) if printed[k : k + len(part)] == part), None)
        if found is None:
            return False
        at = found + len(part)
    return True


def test_there_are_examples_to_run():
    assert {c.split()[1] for c in EXAMPLES} >= {"recompute", "diagnose", "calibrate", "simulate"}


def test_every_example_prints_what_the_readme_shows(tmp_path, monkeypatch, capsys):
    # In document order, in a scratch folder: a `simulate` example writes the
    # recording the next example reads. Standard output, then standard error.
    monkeypatch.chdir(tmp_path)
    (tmp_path / "replay_fixtures").symlink_to(FIXTURES)
    for command in EXAMPLES:
        assert main(shlex.split(command)[1:]) == 0, command
        captured = capsys.readouterr()
        printed = captured.out.splitlines() + captured.err.splitlines()
        assert _shows(printed, _example(command)), (command, printed)


def test_simulate_to_udp_example(practice_profile, monkeypatch):
    # The README's own command, against a receiver on a free port put in
    # place of the one it names (another program may hold that one here).
    monkeypatch.chdir(ROOT)
    command = next(c for c in COMMANDS if c.startswith("podwatch simulate") and "--to udp://127.0.0.1:47474" in c)
    config = ServeConfig({practice_profile.name: practice_profile}, udp=("127.0.0.1", 0))
    with live_receiver(config) as receiver:
        port = receiver.udp.address[1]
        assert main(shlex.split(command.replace(":47474", f":{port}"))[1:]) == 0
        wait_until(lambda: handled(receiver) >= 900, "the simulated robot's messages")
        snap = receiver.hub.snapshot(0.0)[practice_profile.name]
    assert snap.messages >= 900 and sum(receiver.hub.errors.values()) == 0
