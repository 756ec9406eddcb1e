"""The live commands' recordings folder: what the page lists, and where ``serve`` records."""

from __future__ import annotations

import re
import shlex
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from receiver.cli.live_commands import _recordings_folder
from receiver.cli.program import build_parser

START_S = 30.0  # for the receiver to start on a loaded machine; not a speed check


@pytest.mark.parametrize("command, folder", [
    ("serve", "recordings"),
    ("serve --recordings /data/tuning", "/data/tuning"),
    ("serve --record /data/day1/run.jsonl", "/data/day1"),
    ("serve --record /data/day1/run.jsonl --recordings /data/all", "/data/all"),
    ("replay x.jsonl --dashboard 127.0.0.1:0 --recordings old", "old"),
    ("replay x.jsonl", "recordings"),
    ("demo --record here/run.jsonl", "here"),
    ("demo", "recordings"),
])
def test_the_folder_the_page_lists(command, folder):
    assert _recordings_folder(build_parser().parse_args(shlex.split(command))) == Path(folder)


def test_serve_records_into_the_recordings_folder(tmp_path):
    folder = tmp_path / "tuning"
    proc = subprocess.Popen(
        [sys.executable, "-m", "receiver.cli", "serve", "--udp", "127.0.0.1:0", "--no-dashboard",
         "--recordings", str(folder)],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, cwd=tmp_path,
    )
    try:
        said = ""
        deadline = time.monotonic() + START_S
        while "recording: " not in said and time.monotonic() < deadline:
            line = proc.stdout.readline()
            if not line:
                break
            said += line
        found = re.search(r"recording: (\S+)", said)
        assert found, said
    finally:
        proc.send_signal(signal.SIGINT)
        out, _ = proc.communicate(timeout=20)
    assert proc.returncode == 0, said + out
    recorded = Path(found.group(1))
    assert recorded.parent == folder and re.fullmatch(r"podwatch-\d{8}-\d{6}\.jsonl", recorded.name)
    assert [p.name for p in folder.iterdir()] == [recorded.name]
