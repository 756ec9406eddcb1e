"""Tests for receiver/analysis/diagnose.py, mistakes.py, refine.py and sample_clip.py: naming the convention mistake.

The reference for every verdict is the mistake injected into the simulated
robot code (receiver/sim/simulate.py), with wheel slip and packet faults on top.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from receiver.analysis.diagnose import diagnose, diagnose_recent, equivalence_classes
from receiver.analysis.mistakes import hypotheses, single_mistakes, verdict
from receiver.analysis.sample_clip import clip_from_columns, last_seconds
from receiver.errors import UsageError
from receiver.formats.profile_toml import load_profile
from receiver.odometry.columns import Columns, columns_from_samples, concat_columns
from receiver.odometry.faults import parse_faults, robot_code_profile
from receiver.sim.simulate import simulate
from tests.conftest import FIXTURES

PRACTICE = load_profile(FIXTURES / "practice-bot.toml")
METRIC = load_profile(FIXTURES / "practice-bot-metric.toml")
# Realistic noise: 2 % wheel slip per loop, and a lossy, reordering network.
NOISE = ["slip:0.02", "drop:0.02", "reorder:0.01", "duplicate:0.01"]
SINGLES = [spec for spec, _ in single_mistakes(PRACTICE)]
PAIRS = [
    "reversed:right+heading-unit",
    "reversed:left+y-axis",
    "reversed:back+heading-direction",
    "swapped:left,right+heading-zero",
    "offset-sign:back+heading-unit",
    "heading-unit+heading-zero",
    "reversed:left+reversed:right",
    "offset-sign:right+heading-direction",
    "reversed:right+offset-sign:back",
]


def _columns(profile, path, faults, seconds=10.0, seed=11):
    run = simulate(profile, path, 100.0, seconds, seed, parse_faults(faults, profile))
    return columns_from_samples(run.samples, len(profile.wheels))


def _top_ids(d) -> list[str]:
    return [d.best.hypothesis.id] + [h.id for h in d.best.equivalent]


def test_hypothesis_set_for_the_practice_robot() -> None:
    # Three wheels reversed, one parallel pair swapped, three offsets, four
    # reported conventions: eleven single mistakes (issue 5's list).
    assert SINGLES == [
        "reversed:left", "reversed:right", "reversed:back", "swapped:left,right",
        "offset-sign:left", "offset-sign:right", "offset-sign:back",
        "heading-unit", "heading-direction", "y-axis", "heading-zero",
    ]
    hyps = hypotheses(PRACTICE)
    assert len(hyps) == 1 + 11 + 11 * 10 // 2  # none, singles, every pair
    assert hyps[0].id == "none" and hyps[0].robot_profile == PRACTICE
    assert all(h.robot_profile == robot_code_profile(PRACTICE, h.faults) for h in hyps)


def test_plain_words() -> None:
    by_id = {h.id: h for h in hypotheses(PRACTICE)}
    assert verdict(by_id["reversed:right"], PRACTICE) == "the robot code treats the right wheel as reversed; the profile does not"
    assert verdict(by_id["heading-unit"], PRACTICE) == "the robot code reports heading in degrees; the profile says radians"
    assert verdict(by_id["offset-sign:back"], PRACTICE) == (
        "the robot code uses x = +5.5 in for the back wheel's forward offset; the profile says -5.5 in"
    )
    # The metric profile declares its right encoder reversed and clockwise degrees.
    by_id = {h.id: h for h in hypotheses(METRIC)}
    assert verdict(by_id["reversed:right"], METRIC) == (
        "the robot code treats the right wheel as not reversed; the profile treats it as reversed"
    )
    assert verdict(by_id["heading-direction"], METRIC).endswith("counter-clockwise; the profile says clockwise")
    assert verdict(by_id["y-axis+heading-zero"], METRIC).startswith("2 mistakes: the robot code reports +y to the right")


def test_equivalent_explanations_are_grouped() -> None:
    # From the wheel model of DESIGN.md (s = cos(phi) (dx - y dth) for a
    # forward wheel): with the forward wheels mirror images of each other,
    # reading them swapped is the same as flipping both lateral offsets; and
    # a swap plus a reversed sideways wheel mirrors the whole motion, which
    # is what reporting y to the right with clockwise heading shows (REP 103
    # reflected). No clip can tell such pairs apart.
    hyps = hypotheses(PRACTICE)
    groups = [{hyps[i].id for i in members} for members in equivalence_classes(PRACTICE)]
    assert {"swapped:left,right", "offset-sign:left+offset-sign:right"} in groups
    assert {"reversed:back+swapped:left,right", "heading-direction+y-axis"} in groups
    assert {"none"} in groups and {"reversed:right"} in groups


@pytest.mark.parametrize("path", ["wander", "figure-eight"])
@pytest.mark.parametrize("fault", SINGLES + PAIRS)
def test_fault_matrix_names_the_injected_mistake(path: str, fault: str) -> None:
    d = diagnose(_columns(PRACTICE, path, fault.split("+") + NOISE), PRACTICE)
    assert fault in _top_ids(d), [(r.hypothesis.id, r.score) for r in d.ranking[:3]]
    assert d.confidence == "high"
    assert d.margin > 0.5  # inches: the runner-up leaves far more disagreement


@pytest.mark.parametrize("fault", ["", "reversed:right", "heading-direction", "y-axis"])
def test_metric_robot_in_millimetres_and_clockwise_degrees(fault: str) -> None:
    d = diagnose(_columns(METRIC, "wander", [f for f in [fault] if f] + NOISE), METRIC)
    assert (fault or "none") in _top_ids(d)
    assert d.confidence == "high"


def test_clean_run_says_no_mistake_and_changes_nothing() -> None:
    d = diagnose(_columns(PRACTICE, "wander", NOISE), PRACTICE)
    assert d.verdict == "no convention mistake: the robot code and the profile agree"
    assert d.corrected == PRACTICE and d.changes == []
    assert not any(v.significant for v in d.fit.values)


@pytest.mark.parametrize("fault", ["", "reversed:left", "reversed:back", "swapped:left,right", "heading-unit", "heading-direction", "y-axis", "offset-sign:back"])
def test_no_rotation_is_not_enough_motion(fault: str) -> None:
    # The strafe path never turns: a heading convention or a lever arm shows
    # only when the robot turns, and a reversed sideways wheel looks just
    # like a flipped y axis. The answer must not be a confident guess.
    d = diagnose(_columns(PRACTICE, "strafe", [f for f in [fault] if f] + ["slip:0.02"]), PRACTICE)
    assert d.confidence == "not enough motion"
    assert d.verdict == "not enough motion to tell"
    assert d.corrected == PRACTICE
    assert d.rotation_rad < 1e-9


def test_robot_at_rest_is_not_enough_motion() -> None:
    cols = _columns(PRACTICE, "guided", ["reversed:right"], seconds=0.8)  # the guided path rests its first second
    d = diagnose(cols, PRACTICE)
    assert d.confidence == "not enough motion"
    assert d.travel < 1e-9


def test_refinement_recovers_the_robot_codes_constants() -> None:
    # The robot code uses the simulator's geometry (track width 12.5 in, back
    # wheel 5.5 in behind, 1.378 in wheels); the profile has three of them off.
    w = PRACTICE.wheels
    declared = PRACTICE.with_wheels((replace(w[0], y=6.0, diameter=1.40), replace(w[1], y=-6.0), replace(w[2], x=-5.2)))
    d = diagnose(_columns(PRACTICE, "wander", NOISE), declared)
    assert d.best.hypothesis.id == "none"
    fitted = {v.name: v for v in d.fit.values}
    assert fitted["track width"].fitted == pytest.approx(12.5, rel=1e-3)
    assert fitted["back wheel forward offset"].fitted == pytest.approx(-5.5, abs=0.01)
    assert fitted["left wheel diameter"].fitted == pytest.approx(1.378, rel=1e-3)
    assert all(v.determined for v in d.fit.values)
    assert {v.name for v in d.fit.values if v.significant} == {"track width", "back wheel forward offset", "left wheel diameter"}
    assert d.fit.score_after < 0.01 * d.fit.score_before
    assert d.corrected.wheels[0].y == pytest.approx(6.25, rel=1e-3)
    assert d.corrected.wheels[1].y == pytest.approx(-6.25, rel=1e-3)


def test_the_fit_says_when_the_clip_leaves_a_constant_free() -> None:
    # Driving straight ahead never rolls the sideways wheel: its scale is free.
    d = diagnose(_columns(PRACTICE, "square", ["reversed:left"], seconds=1.5), PRACTICE)
    back = next(v for v in d.fit.values if v.name == "back wheel diameter")
    assert not back.determined and not back.significant and back.to_json()["std"] is None


def test_imu_profile() -> None:
    profile = replace(PRACTICE, imu_mode="heading")
    for fault, expected in [("heading-direction", "heading-direction"), ("reversed:right", "reversed:right")]:
        d = diagnose(_columns(profile, "wander", [fault] + NOISE), profile)
        assert expected in _top_ids(d) and d.confidence == "high"


def test_last_seconds_for_a_live_session() -> None:
    cols = _columns(PRACTICE, "wander", ["heading-direction"] + NOISE, seconds=20.0)
    d = diagnose_recent(cols, PRACTICE, seconds=5.0)
    assert 450 <= d.samples <= 510 and d.duration_s == pytest.approx(5.0, abs=0.05)
    assert "heading-direction" in _top_ids(d) and d.confidence == "high"


def test_last_seconds_ignores_samples_before_a_reboot() -> None:
    a = _columns(PRACTICE, "wander", [], seconds=3.0, seed=1)
    b = _columns(PRACTICE, "wander", [], seconds=2.0, seed=2)
    b.t = b.t - b.t[0] + 1.0  # the robot rebooted: its clock starts again near zero
    window = last_seconds(concat_columns([a, b]), 10.0)
    assert len(window) == len(b) and np.array_equal(window.t, b.t)
    with pytest.raises(UsageError, match="expected a positive number of seconds"):
        last_seconds(a, 0.0)


def test_clip_needs_the_robots_pose() -> None:
    cols = _columns(PRACTICE, "wander", [], seconds=1.0)
    no_pose = Columns(cols.seq, cols.t, cols.ticks, np.full_like(cols.pose, np.nan), cols.imu, cols.loop, cols.reset)
    with pytest.raises(UsageError, match=r"only 0 samples carry the robot's own pose"):
        diagnose(no_pose, PRACTICE)
    assert len(clip_from_columns(no_pose)) == len(cols)  # the guided check and calibration do not need it


def test_samples_without_pose_merge_into_the_next() -> None:
    cols = _columns(PRACTICE, "wander", ["reversed:back"], seconds=4.0)
    cols.pose[1::2] = np.nan  # the robot sent its pose every other loop
    clip = clip_from_columns(cols, need_pose=True)
    assert len(clip) == (len(cols) + 1) // 2
    assert "reversed:back" in _top_ids(diagnose(cols, PRACTICE))


def test_json_is_plain_data() -> None:
    d = diagnose(_columns(PRACTICE, "wander", ["y-axis"] + NOISE), PRACTICE)
    out = d.to_json(top=3)
    assert out["verdict"] == "the robot code reports +y to the right; the profile says left"
    assert out["confidence"] == "high" and len(out["hypotheses"]) == 3
    assert out["hypotheses"][0]["id"] == "y-axis" and out["profile_changes"] == ["reported.y_axis: left -> right"]
    assert {f["name"] for f in out["fitted"]} >= {"track width", "back wheel forward offset"}
