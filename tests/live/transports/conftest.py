"""A real Mosquitto broker on a free loopback port, for the MQTT tests."""

from __future__ import annotations

import shutil
import socket
import subprocess
import time

import pytest

MOSQUITTO = shutil.which("mosquitto") or "/usr/sbin/mosquitto"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture
def mosquitto(tmp_path):
    """mqtt://127.0.0.1:PORT of a broker started for this test and stopped after it."""
    if not shutil.which(MOSQUITTO):
        pytest.skip("mosquitto is not installed (Debian package mosquitto)")
    port = free_port()
    config = tmp_path / "mosquitto.conf"
    config.write_text(f"listener {port} 127.0.0.1\nallow_anonymous true\npersistence false\n")
    broker = subprocess.Popen([MOSQUITTO, "-c", str(config)], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 10.0
    while True:
        try:
            socket.create_connection(("127.0.0.1", port), timeout=0.2).close()
            break
        except OSError:
            if broker.poll() is not None or time.monotonic() > deadline:
                broker.kill()
                pytest.fail(f"mosquitto did not start: {broker.stderr.read().decode(errors='replace')}")
            time.sleep(0.02)
    yield f"mqtt://127.0.0.1:{port}"
    broker.terminate()
    broker.wait(timeout=5)
