"""No traceback at a user: ``simulate --to`` and ``replay --to`` against a receiver that
refuses the token, an address where nothing listens and a broker that is not there
each end with one line that says what to do, and a non-zero exit. Real processes and
real sockets on 127.0.0.1."""

from __future__ import annotations

from pathlib import Path

import pytest

from receiver.live.serve import ServeConfig
from tests.live.harness import live_receiver
from tests.live.serve_process import assert_one_error_line, run_podwatch
from tests.live.transports.conftest import free_port

ROOT = Path(__file__).resolve().parents[2]
PROFILE = str(ROOT / "replay_fixtures" / "practice-bot.toml")
RECORDING = str(ROOT / "replay_fixtures" / "practice-bot-square.jsonl")


def sends(command: str, url: str, *extra: str) -> list[str]:
    if command == "simulate":
        return ["simulate", "--profile", PROFILE, "--duration", "0.5", "--to", url, *extra]
    return ["replay", RECORDING, "--speed", "0", "--to", url, *extra]


def error_line(args: list[str], cwd: Path, *fragments: str) -> None:
    result = run_podwatch(args, cwd)
    assert result.returncode == 1
    errors = "\n".join(line for line in result.stderr.splitlines() if line.startswith("podwatch: error"))
    assert_one_error_line(errors, *fragments)
    assert "Traceback" not in result.stderr


@pytest.mark.parametrize("command", ["simulate", "replay"])
def test_a_refused_token_says_to_pass_one(command, tmp_path):
    with live_receiver(ServeConfig({}, ws=("127.0.0.1", 0), token="s3cret")) as receiver:
        url = "ws://%s:%d" % receiver.ws.address
        error_line(sends(command, url), tmp_path, f"the receiver at {url} refused the token: pass --token")
        error_line(sends(command, url, "--token", "guess"), tmp_path,
                   "refused the token: pass the receiver's own --token")


@pytest.mark.parametrize("command", ["simulate", "replay"])
def test_nothing_listening_and_no_broker_name_the_address(command, tmp_path):
    port = free_port()
    error_line(sends(command, f"ws://127.0.0.1:{port}"), tmp_path,
               f"nothing is listening at ws://127.0.0.1:{port} (Connection refused)", "podwatch serve --ws")
    error_line(sends(command, f"mqtt://127.0.0.1:{port}"), tmp_path,
               f"no MQTT broker answers at mqtt://127.0.0.1:{port} (Connection refused)")
