"""A family of nearly symmetric robots with every single and paired mistake, slip and packet faults on top.

For each, diagnosis must name the mistake put into the simulated robot code
(receiver/sim/simulate.py), or a near-twin pair holding it, and the profile
it writes (through the format-preserving writer) must reproduce the robot's
own reports when the receiver's recompute (odometry/recompute.Tracker) runs
it: the robot code's pose is the reference.
"""

from __future__ import annotations

import tomllib
from dataclasses import replace

import numpy as np
import pytest

from receiver.analysis.diagnose import diagnose
from receiver.analysis.mistakes import hypotheses
from receiver.formats.profile_toml import load_profile, profile_from_table
from receiver.formats.profile_writer import profile_text, write_profile_preserving
from receiver.odometry.columns import columns_from_samples
from receiver.odometry.faults import parse_faults
from receiver.odometry.recompute import Tracker
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES

PRACTICE = load_profile(FIXTURES / "practice-bot.toml")
W = PRACTICE.wheels
FAMILY = {
    "sides-6.6-6.4": PRACTICE.with_wheels((replace(W[0], y=6.6), replace(W[1], y=-6.4), W[2])),
    "sides-6.3-6.2-back-0.4": PRACTICE.with_wheels(
        (replace(W[0], y=6.3), replace(W[1], y=-6.2), replace(W[2], x=-0.4))
    ),
}
NOISE = ["slip:0.02", "drop:0.02", "reorder:0.01", "duplicate:0.01"]
CASES = [(robot, h.id) for robot, profile in FAMILY.items() for h in hypotheses(profile)[1:]]


def _named(d, mistake: str) -> bool:
    best = {d.best.hypothesis.id} | {h.id for h in d.best.equivalent} | {r.hypothesis.id for r in d.best.same_after_fit}
    if mistake in best:
        return True
    twin = d.judgement.twin
    return d.confidence == "near twins" and mistake in {twin.hypothesis.id} | {h.id for h in twin.equivalent}


@pytest.mark.parametrize("robot, mistake", CASES)
def test_each_mistake_is_named_and_the_written_profile_reproduces_the_reports(robot: str, mistake: str) -> None:
    profile = FAMILY[robot]
    run = simulate(profile, "wander", 50.0, 8.0, 5, parse_faults(mistake.split("+") + NOISE, profile))
    cols = columns_from_samples(run.samples, len(profile.wheels))
    d = diagnose(cols, profile)
    assert _named(d, mistake), (d.best.hypothesis.id, d.confidence, [r.hypothesis.id for r in d.ranking[:3]])
    assert d.confidence in ("high", "low", "near twins")
    written = write_profile_preserving(profile_text(profile), d.corrected)
    again = profile_from_table(tomllib.loads(written))
    result = Tracker(again, d.integration.method).feed(cols)
    rms = float(np.sqrt(np.nanmean(result.position_error**2)))
    assert rms <= 3.0 * d.noise.residual + 1e-3, (rms, d.noise)
