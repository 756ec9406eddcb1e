"""A real ``podwatch serve`` process: recordings are never lost or overwritten, a full disk
stops the recording and not the receiver, SIGKILL costs at most the flush interval, and a
start that fails says why in one line and writes nothing."""

from __future__ import annotations

import gzip
import os
import resource
import shutil
import signal
import socket
import subprocess
import time
from pathlib import Path

import pytest

from receiver.formats.recording import read_recording
from receiver.formats.recording_writer import FLUSH_INTERVAL_S
from tests.live.serve_process import (
    ServeProcess,
    assert_one_error_line,
    messages_in,
    run_podwatch,
    send_paced,
)

ROOT = Path(__file__).resolve().parents[2]
PROFILE = str(ROOT / "replay_fixtures" / "practice-bot.toml")
# Scheduling on a loaded 2-core machine: how late the receiver may see a datagram
# and run its flush, beyond the flush interval itself. Not a speed check.
SLACK_S = 0.3


def test_record_never_overwrites_an_existing_file(tmp_path):
    path = tmp_path / "session.jsonl"
    shutil.copy(ROOT / "replay_fixtures" / "practice-bot-square.jsonl", path)
    before = path.read_bytes()
    result = run_podwatch(["serve", "--udp", "127.0.0.1:0", "--no-dashboard", "--record", str(path)], tmp_path)
    assert result.returncode == 1
    assert_one_error_line(result.stderr, str(path), "already exists")
    assert path.read_bytes() == before


def test_a_start_that_fails_on_the_page_port_writes_nothing(tmp_path):
    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        port = busy.getsockname()[1]
        result = run_podwatch(["serve", "--udp", "127.0.0.1:0", "--dashboard", f"127.0.0.1:{port}"], tmp_path)
    assert result.returncode == 1
    assert_one_error_line(result.stderr, f"127.0.0.1:{port}", f"port {port} is in use", "--dashboard HOST:PORT")
    assert list(tmp_path.iterdir()) == []  # not even the default recordings folder


def test_a_start_that_fails_on_the_udp_port_names_it_and_writes_nothing(tmp_path):
    with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as busy:
        busy.bind(("127.0.0.1", 0))
        port = busy.getsockname()[1]
        result = run_podwatch(
            ["serve", "--udp", f"127.0.0.1:{port}", "--no-dashboard", "--record", "session.jsonl"], tmp_path
        )
    assert result.returncode == 1
    assert_one_error_line(result.stderr, f"udp on 127.0.0.1:{port}", f"port {port} is in use", "--udp HOST:PORT")
    assert list(tmp_path.iterdir()) == []


def test_sigkill_at_1khz_loses_at_most_the_flush_interval(tmp_path):
    path = tmp_path / "session.jsonl"
    serve = ServeProcess(["--udp", "127.0.0.1:0", "--no-dashboard", "--record", str(path)], tmp_path)
    serve.wait_started()
    sent_at: list[float] = []
    send_paced(serve.udp, "practice-bot", 1000.0, 2.0, on_sent=lambda seq, when: sent_at.append(when))
    killed_at = time.monotonic()
    serve.kill()
    data = read_recording(path)  # a line cut by the kill is skipped with a warning
    seq = data.robots["practice-bot"].seq.tolist()
    assert seq == list(range(len(seq)))  # what is there is everything up to a point, in order
    must = sum(1 for when in sent_at if when < killed_at - FLUSH_INTERVAL_S - SLACK_S)
    assert len(seq) >= must, f"lost {len(sent_at) - len(seq)} of {len(sent_at)}; {must} were due on disk"


def _file_size_limit(limit: int):
    def limit_file_size() -> None:
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # inherited: a write past the limit fails with EFBIG
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))

    return limit_file_size


@pytest.fixture(params=["tmpfs", "file size limit"])
def full_disk(request, tmp_path):
    """(folder, preexec for serve, what the log says): a 1 MB tmpfs, as root, or a
    process file size limit of 256 KB (RLIMIT_FSIZE), which needs no root."""
    folder = tmp_path / "disk"
    folder.mkdir()
    if request.param == "file size limit":
        yield folder, _file_size_limit(256 * 1024), "File too large", 256 * 1024
        return
    if os.geteuid() != 0:
        pytest.skip("mounting a tmpfs needs root")
    mounted = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(folder)], capture_output=True)
    if mounted.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {mounted.stderr.decode().strip()}")
    try:
        yield folder, None, "No space left on device", 1024 * 1024
    finally:
        subprocess.run(["umount", str(folder)], check=True)


@pytest.mark.parametrize("name", ["session.jsonl", "session.jsonl.gz"])
def test_a_full_disk_stops_the_recording_and_not_the_receiver(full_disk, name, tmp_path):
    folder, preexec, why, size = full_disk
    path = folder / name
    serve = ServeProcess(["--udp", "127.0.0.1:0", "--no-dashboard", "--profile", PROFILE, "--record", str(path),
                          "--max-rate", "50000"], tmp_path, preexec=preexec)
    serve.wait_started()
    sent, deadline = 0, time.monotonic() + 60.0
    while path.stat().st_size < size - 64 * 1024 and time.monotonic() < deadline:  # until it is full...
        sent += send_paced(serve.udp, "practice-bot", 10_000.0, 0.5, first_seq=sent)
    sent += send_paced(serve.udp, "practice-bot", 10_000.0, 1.0, first_seq=sent)  # ... and on
    time.sleep(0.5)
    code = serve.stop()
    assert code == 0, serve.err
    assert "Traceback" not in serve.err
    assert f"recording stopped: {why}" in serve.err  # the log line, when it happened
    assert messages_in(serve.summary("practice-bot")) == sent  # receiving went on: nothing valid lost
    assert f"podwatch: recording stopped: {why}; {path} keeps what was written before" in serve.out
    if name.endswith(".gz"):  # cut mid-stream, yet it decompresses up to the last sync flush
        with gzip.open(path) as stream, pytest.raises(EOFError):
            stream.read()
    data = read_recording(path)
    seq = data.robots["practice-bot"].seq.tolist()
    assert len(seq) > 1000 and seq == list(range(len(seq)))  # everything up to the failure, in order
