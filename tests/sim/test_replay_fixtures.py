"""The replay fixtures: each reads cleanly, shows what it was made to show, and is up to date."""

from __future__ import annotations

import importlib.util
from dataclasses import replace

import numpy as np
import pytest

from receiver.formats.profile_toml import load_profile
from receiver.formats.recording import read_recording
from receiver.odometry.faults import parse_faults
from receiver.odometry.recompute import Tracker
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES

_spec = importlib.util.spec_from_file_location("regenerate", FIXTURES / "regenerate.py")
regenerate = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(regenerate)


# Poses are compared with a relative tolerance, not exactly: another CPU's
# vector instructions round the simulator's sums differently (by about
# 1e-14). A stale fixture differs by far more (see the test below).
POSE_RTOL = 1e-9
POSE_ATOL = 1e-9  # profile units, for poses at the origin
COUNT_TOLERANCE = 1  # a count rounded the other way at an exact half


def differences(cols, run) -> list[str]:
    """What differs between a fixture's columns and a fresh simulation, beyond rounding."""
    found = []
    sent = np.asarray([s.ticks for s in run.samples])
    if cols.ticks.shape != sent.shape or np.abs(cols.ticks - sent).max() > COUNT_TOLERANCE:
        found.append("encoder counts")
    poses = np.asarray([s.pose for s in run.samples])
    if cols.pose.shape != poses.shape or not np.allclose(cols.pose, poses, rtol=POSE_RTOL, atol=POSE_ATOL):
        found.append("reported poses")
    return found


def fixture_run(fixture, profile):
    name, profile_file, path, seconds, fault_specs, options = fixture
    return simulate(profile, path, 100.0, seconds, 1, parse_faults(fault_specs, profile), **options)


@pytest.mark.parametrize("fixture", regenerate.FIXTURES, ids=lambda f: f[0])
def test_fixture_reads_and_matches_the_simulator(fixture) -> None:
    name, profile_file, path, seconds, fault_specs, options = fixture
    file = FIXTURES / name
    assert file.stat().st_size < 300_000
    data = read_recording(file)
    assert data.warnings == []
    profile = load_profile(FIXTURES / profile_file)
    declared = regenerate.header_profile(name, profile)
    assert data.profiles == {profile.name: declared}
    cols = data.robots[profile.name]

    run = fixture_run(fixture, profile)
    assert differences(cols, run) == [], f"{name} is out of date: run replay_fixtures/regenerate.py"

    result = Tracker(declared).feed(cols)
    network = ("drop", "reorder", "duplicate", "slip")
    if any(not spec.startswith(network) for spec in fault_specs) or declared != profile:  # a mistake in the robot code
        assert result.position_error.max() > 5.0
    else:
        assert result.position_error.max() < 1e-3 * (25.4 if profile.distance_unit == "mm" else 1.0)
    if any(spec.startswith(("reorder", "duplicate")) for spec in fault_specs):
        assert result.dropped["late"] > 0 and result.dropped["duplicate"] > 0


@pytest.mark.parametrize("change", [{"diameter": 1.3781}, {"y": -6.26}], ids=["diameter", "offset"])
def test_the_tolerance_still_catches_a_fixture_made_with_another_profile(change):
    # The right wheel 0.0001 in larger, or 0.01 in further out: a profile
    # edited without regenerating the fixtures.
    fixture = next(f for f in regenerate.FIXTURES if f[0] == "practice-bot-square.jsonl")
    profile = load_profile(FIXTURES / fixture[1])
    cols = read_recording(FIXTURES / fixture[0]).robots[profile.name]
    right = next(i for i, w in enumerate(profile.wheels) if w.name == "right")
    wheels = list(profile.wheels)
    wheels[right] = replace(wheels[right], **change)
    assert differences(cols, fixture_run(fixture, profile.with_wheels(tuple(wheels)))) != []
    assert differences(cols, fixture_run(fixture, profile)) == []
