"""A real ``podwatch serve`` process for tests about the process: signals, exit codes, what it prints."""

from __future__ import annotations

import re
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

from tests.live.harness import DEADLINE_S

ROOT = Path(__file__).resolve().parents[2]
PODWATCH = [sys.executable, "-m", "receiver.cli"]


def message(robot: str, seq: int, t: float) -> bytes:
    """A small valid wire message of a three-wheel robot driving forward."""
    return b'{"v":1,"robot":"%s","seq":%d,"t":%.6f,"ticks":[%d,%d,0],"pose":[0.0,0.0,0.0]}' % (
        robot.encode(), seq, t, 3 * seq, 3 * seq)


def send_paced(address: tuple[str, int], robot: str, rate_hz: float, seconds: float,
               on_sent=None, first_seq: int = 0) -> int:
    """Send ``robot``'s messages over UDP at ``rate_hz`` for ``seconds``, from seq
    ``first_seq``; returns how many. ``on_sent(seq, time.monotonic())`` is called for each."""
    with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
        start, sent = time.monotonic(), 0
        while (elapsed := time.monotonic() - start) < seconds:
            for _ in range(int(elapsed * rate_hz) - sent):
                seq = first_seq + sent
                sock.sendto(message(robot, seq, seq / rate_hz), address)
                if on_sent is not None:
                    on_sent(seq, time.monotonic())
                sent += 1
            time.sleep(0.0005)
    return sent


def run_podwatch(args: list[str], cwd: Path, timeout: float = 60.0) -> subprocess.CompletedProcess:
    """Run a podwatch command to its end."""
    return subprocess.run([*PODWATCH, *args], cwd=cwd, capture_output=True, text=True, timeout=timeout,
                          env=_env())


def _env() -> dict:
    import os

    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT)
    env.pop("PODWATCH_DEBUG", None)
    return env


class ServeProcess:
    """``podwatch serve ARGS`` started in ``cwd``; ``udp`` is where it listens once started."""

    def __init__(self, args: list[str], cwd: Path, preexec=None) -> None:
        self.proc = subprocess.Popen([*PODWATCH, "serve", *args], cwd=cwd, stdout=subprocess.PIPE,
                                     stderr=subprocess.PIPE, text=True, preexec_fn=preexec, env=_env())
        self.out = ""
        self.err = ""
        self.udp: tuple[str, int] | None = None

    def wait_started(self, last: str = "recording:") -> None:
        """Read standard output up to the line starting with ``podwatch: {last}``."""
        deadline = time.monotonic() + DEADLINE_S
        while time.monotonic() < deadline:
            line = self.proc.stdout.readline()
            self.out += line
            found = re.match(r"podwatch: listening: udp ([\d.]+):(\d+)", line)
            if found:
                self.udp = (found[1], int(found[2]))
            if line.startswith(f"podwatch: {last}"):
                return
            if not line and self.proc.poll() is not None:
                break
        self.proc.kill()
        raise AssertionError(f"serve did not start: {self.out}{self.proc.stderr.read()}")

    def stop(self, sig: int = signal.SIGINT) -> int:
        """Send ``sig`` and wait for the end; the exit status."""
        self.proc.send_signal(sig)
        out, err = self.proc.communicate(timeout=DEADLINE_S)
        self.out += out
        self.err += err
        return self.proc.returncode

    def kill(self) -> None:
        """SIGKILL, and wait."""
        self.proc.kill()
        self.proc.communicate(timeout=DEADLINE_S)

    def summary(self, robot: str) -> str:
        """The summary line of ``robot``."""
        return next(line for line in self.out.splitlines() if line.startswith(f"podwatch: {robot}: "))


def messages_in(summary: str) -> int:
    """The message count of a robot's summary line."""
    return int(re.search(r": (\d+) messages", summary)[1])


def assert_one_error_line(stderr: str, *fragments: str) -> str:
    """stderr holds one line, an error with every fragment, and no traceback; returns it."""
    lines = stderr.strip().splitlines()
    assert "Traceback" not in stderr, stderr
    assert len(lines) == 1 and lines[0].startswith("podwatch: error: "), stderr
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    return lines[0]
