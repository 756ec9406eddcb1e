"""A simulated session sent over UDP, WebSocket and MQTT (real broker) is
recorded in full, and the offline ``recompute`` of that recording gives the
poses the live receiver computed."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from receiver.cli import main
from receiver.formats.recording import read_recording
from receiver.live.serve import ServeConfig
from receiver.odometry.integrate import wrap_angle
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES
from tests.live.harness import handled, listen_on, live_receiver, sender_url, wait_until


@pytest.mark.parametrize("transport", ["udp", "ws", "mqtt"])
def test_live_poses_equal_recompute_of_the_recording(transport, practice_profile, tmp_path, request, capsys):
    run = simulate(practice_profile, rate_hz=100.0, duration_s=4.0, seed=11, near_wrap=True)
    recording = tmp_path / "live.jsonl"
    config = ServeConfig({"practice-bot": practice_profile}, record=recording)
    listen_on(config, transport, request)
    with live_receiver(config) as receiver:
        url = sender_url(receiver, config, transport)

        # The simulated robot streams in real time through `podwatch simulate --to`.
        profile_path = str(FIXTURES / "practice-bot.toml")
        args = ["--rate", "100", "--duration", "4", "--seed", "11", "--near-wrap", "--to", url]
        assert main(["simulate", "--profile", profile_path, *args]) == 0
        wait_until(lambda: handled(receiver) == len(run.samples), "every sample")
    live = receiver.hub.history("practice-bot")

    data = read_recording(recording)
    assert data.message_count == len(run.samples) and "practice-bot" in data.profiles
    out = tmp_path / "offline.csv"
    assert main(["recompute", str(recording), "--out", str(out)]) == 0
    capsys.readouterr()
    rows = list(csv.DictReader(io.StringIO(out.read_text())))
    assert len(rows) == len(live["seq"])
    offline = np.array([[float(r["x"]), float(r["y"]), float(r["heading"])] for r in rows])
    # the CSV keeps 6 decimals
    np.testing.assert_allclose(offline[:, :2], live["pose"][:, :2], atol=1e-6, rtol=0)
    np.testing.assert_allclose(offline[:, 2], wrap_angle(live["pose"][:, 2]), atol=1e-6, rtol=0)
    np.testing.assert_array_equal([int(r["seq"]) for r in rows], live["seq"])
