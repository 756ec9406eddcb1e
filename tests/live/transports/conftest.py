"""A real Mosquitto broker on a free loopback port, for the MQTT tests; ``broker`` can
also be stopped and started again on the same port mid-test."""

from __future__ import annotations

import shutil
import socket
import subprocess
import time
from pathlib import Path

import pytest

MOSQUITTO = shutil.which("mosquitto") or "/usr/sbin/mosquitto"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Broker:
    """Mosquitto on one loopback port; ``url`` is mqtt://127.0.0.1:PORT."""

    def __init__(self, folder: Path) -> None:
        self.port = free_port()
        self.url = f"mqtt://127.0.0.1:{self.port}"
        self.config = folder / "mosquitto.conf"
        self.config.write_text(f"listener {self.port} 127.0.0.1\nallow_anonymous true\npersistence false\n")
        self.proc: subprocess.Popen | None = None

    def start(self) -> None:
        """Start it and wait until it accepts connections."""
        self.proc = subprocess.Popen([MOSQUITTO, "-c", str(self.config)], stdout=subprocess.DEVNULL,
                                     stderr=subprocess.PIPE)
        deadline = time.monotonic() + 10.0
        while True:
            try:
                socket.create_connection(("127.0.0.1", self.port), timeout=0.2).close()
                return
            except OSError:
                if self.proc.poll() is not None or time.monotonic() > deadline:
                    self.proc.kill()
                    pytest.fail(f"mosquitto did not start: {self.proc.stderr.read().decode(errors='replace')}")
                time.sleep(0.02)

    def stop(self) -> None:
        """Stop it (its clients see the connection drop)."""
        if self.proc is not None:
            self.proc.terminate()
            self.proc.wait(timeout=5)
            self.proc = None


@pytest.fixture
def broker(tmp_path):
    """A started Broker, stopped after the test."""
    if not shutil.which(MOSQUITTO):
        pytest.skip("mosquitto is not installed (Debian package mosquitto)")
    running = Broker(tmp_path)
    running.start()
    yield running
    running.stop()


@pytest.fixture
def mosquitto(broker):
    """mqtt://127.0.0.1:PORT of a broker started for this test and stopped after it."""
    return broker.url
