"""Serving the page: loopback by default, and ``podwatch replay REC --dashboard`` end to end."""

from __future__ import annotations

import logging
import re
import signal
import subprocess
import sys
import threading
import time
import urllib.request
from pathlib import Path

import pytest

from dashboard.server import DashboardServer, is_loopback
from tests.dashboard.conftest import free_port

ROOT = Path(__file__).resolve().parents[2]
REVERSED = ROOT / "replay_fixtures" / "practice-bot-figure-eight-reversed-right.jsonl.gz"


@pytest.mark.parametrize("host, loopback", [("127.0.0.1", True), ("127.5.0.9", True), ("localhost", True),
                                            ("::1", True), ("0.0.0.0", False), ("192.168.1.20", False)])
def test_which_addresses_count_as_loopback(host, loopback):
    assert is_loopback(host) is loopback


def _ignore_sigint() -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # as a shell starts a background job


@pytest.mark.parametrize("sig, background", [(signal.SIGINT, False), (signal.SIGTERM, False), (signal.SIGINT, True)],
                         ids=["ctrl-c", "sigterm", "sigint-to-a-background-job"])
def test_replay_with_the_dashboard_serves_the_page_until_told_to_stop(sig, background):
    port = free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "receiver.cli", "replay", str(REVERSED), "--dashboard", f"127.0.0.1:{port}"],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, cwd=ROOT,
        preexec_fn=_ignore_sigint if background else None,
    )
    try:
        url = None
        deadline = time.monotonic() + 30.0
        while url is None and time.monotonic() < deadline:
            found = re.search(r"dashboard: (http://\S+)", proc.stdout.readline())
            url = found.group(1) if found else None
        assert url == f"http://127.0.0.1:{port}/"
        with urllib.request.urlopen(url, timeout=10) as page:
            assert page.status == 200 and b"podwatch" in page.read()
    finally:
        proc.send_signal(sig)
        try:
            out, _ = proc.communicate(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
            out, _ = proc.communicate()
            pytest.fail(f"still running 20 s after {sig.name}: {out}")
    assert proc.returncode == 0, out
    assert "Traceback" not in out


def test_a_taken_port_is_one_line():
    import socket

    with socket.socket() as taken:
        taken.bind(("127.0.0.1", 0))
        taken.listen()
        port = taken.getsockname()[1]
        done = subprocess.run(
            [sys.executable, "-m", "receiver.cli", "replay", str(REVERSED), "--dashboard", f"127.0.0.1:{port}"],
            capture_output=True, text=True, cwd=ROOT, timeout=60,
        )
    assert done.returncode == 1
    assert done.stderr.strip().splitlines()[-1].startswith("podwatch: error: cannot serve the dashboard on 127.0.0.1:")
    assert "Traceback" not in done.stderr


def test_stop_answers_the_request_being_served_then_closes_without_an_error(monkeypatch, caplog):
    # Closing the sockets under the serving thread killed it, or the worker
    # still answering, with "Bad file descriptor". Here the request is being
    # served when stop() begins and answers once stop() has stopped accepting.
    died = []
    monkeypatch.setattr(threading, "excepthook", lambda args: died.append(args.exc_value))
    serving = threading.Event()

    def app(environ, start_response):
        serving.set()
        deadline = time.monotonic() + 30.0
        while server._server.accepting and time.monotonic() < deadline:
            time.sleep(0.01)
        start_response("200 OK", [("Content-Type", "text/plain")])
        return [b"answered"]

    server = DashboardServer(app, "127.0.0.1", 0)
    server.start()
    answers = []
    client = threading.Thread(target=lambda: answers.append(urllib.request.urlopen(server.url, timeout=30).read()))
    client.start()
    with caplog.at_level(logging.WARNING):
        assert serving.wait(30.0)
        server.stop()
        client.join(30.0)
    assert answers == [b"answered"]
    assert not server._thread.is_alive()
    assert died == []
    assert [r.getMessage() for r in caplog.records if r.name.startswith("waitress")] == []
