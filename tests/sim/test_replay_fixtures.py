"""The replay fixtures: each reads cleanly, shows what it was made to show, and is up to date."""

from __future__ import annotations

import importlib.util

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


@pytest.mark.parametrize("fixture", regenerate.FIXTURES, ids=lambda f: f[0])
def test_fixture_reads_and_matches_the_simulator(fixture) -> None:
    name, profile_file, path, seconds, fault_specs, options = fixture
    file = FIXTURES / name
    assert file.stat().st_size < 300_000
    data = read_recording(file)
    assert data.warnings == []
    profile = load_profile(FIXTURES / profile_file)
    assert data.profiles == {profile.name: profile}
    cols = data.robots[profile.name]

    run = simulate(profile, path, 100.0, seconds, 1, parse_faults(fault_specs, profile), **options)
    message = f"{name} is out of date: run replay_fixtures/regenerate.py"
    assert cols.ticks.tolist() == [s.ticks for s in run.samples], message
    np.testing.assert_array_equal(cols.pose, [s.pose for s in run.samples], err_msg=message)

    result = Tracker(profile).feed(cols)
    if any(spec.startswith("reversed") for spec in fault_specs):
        assert result.position_error.max() > 5.0
    else:
        assert result.position_error.max() < 1e-3 * (25.4 if profile.distance_unit == "mm" else 1.0)
    if any(spec.startswith(("reorder", "duplicate")) for spec in fault_specs):
        assert result.dropped["late"] > 0 and result.dropped["duplicate"] > 0
