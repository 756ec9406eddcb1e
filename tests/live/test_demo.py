"""The demo's built-in robot: packaged profile, runs that follow on, real UDP on loopback."""

from __future__ import annotations

import numpy as np

from receiver.live.demo import SimulatedRobot, demo_profile
from receiver.live.serve import ServeConfig
from receiver.odometry.counts import SampleKind
from receiver.odometry.faults import parse_faults
from tests.live.harness import live_receiver, wait_until


def test_the_packaged_profile_is_the_fixture_profile(practice_profile):
    assert demo_profile() == practice_profile


def test_runs_follow_on_with_a_reset_and_no_gaps(practice_profile):
    config = ServeConfig(profiles={practice_profile.name: practice_profile}, udp=("127.0.0.1", 0))
    with live_receiver(config) as receiver:
        faults = parse_faults(["reversed:right"], practice_profile)
        robot = SimulatedRobot(practice_profile, receiver.udp.address, rate_hz=200.0, faults=faults, run_s=0.5)
        robot.start()
        try:
            def resets() -> int:
                return int(np.count_nonzero(receiver.hub.history(practice_profile.name)["kind"] == SampleKind.RESET))
            wait_until(lambda: resets() >= 2, "two follow-on runs")
        finally:
            robot.stop()
        snap = receiver.hub.snapshot(0.0)[practice_profile.name]
    assert snap.gaps == 0 and snap.restarts == 0 and snap.duplicates == 0
