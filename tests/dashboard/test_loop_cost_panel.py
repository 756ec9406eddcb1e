"""The "What the loop rate costs" view (dashboard/loop_cost_panel.py, workbench_figures.py):
its figures hold analysis/loop_cost.py's numbers, binned by loop period with units, and a
slow loop's bar stands where the closed forms of a constant twist put it."""

from __future__ import annotations

import math

import numpy as np
import pytest

from dashboard import ids
from dashboard.app import create_app
from dashboard.loop_cost_panel import cost_of
from dashboard.sources import ReplaySource
from dashboard.tabs import Station
from dashboard.workbench_figures import (
    EULER_NAME,
    MIDPOINT_NAME,
    loop_cost_by_period,
    loop_cost_over_time,
    period_labels,
)
from dashboard.workbench_session import Session
from receiver.analysis.loop_cost import loop_cost
from receiver.formats.recording import read_recording
from receiver.odometry.profile_edit import Edit, apply_edits
from tests.analysis.test_loop_cost import INCH_M, V_IN_S, W_RAD_S, chord, constant_twist, euler_error, midpoint_error
from tests.conftest import FIXTURES
from tests.dashboard.test_callbacks import call


@pytest.fixture
def fine_profile(practice_profile):
    # 2^22 counts per turn: rounding to counts is far below the differences drawn.
    return apply_edits(practice_profile, [Edit("counts_per_rev", 2.0**22, i) for i in range(3)])


def test_the_bars_are_the_bins_per_metre_with_their_periods(fine_profile):
    # Half the drive at a 10 ms loop, half at a 40 ms loop, and a bin between them that holds none.
    fast, slow = 0.010, 0.040
    cost = loop_cost(constant_twist(fine_profile, [fast] * 600 + [slow] * 150), fine_profile,
                     edges_s=(0.0, 0.02, 0.03, 0.06))
    figure = loop_cost_by_period(cost.bins, "in")
    euler, midpoint = figure["data"]
    assert (euler["name"], midpoint["name"]) == (EULER_NAME, MIDPOINT_NAME)
    # Only the bins that hold steps.
    assert euler["x"] == ["0-20 ms", "30-60 ms"] == midpoint["x"]
    for k, dt in enumerate((fast, slow)):
        s, q = V_IN_S * dt, W_RAD_S * dt
        # Modern Robotics ch. 13.4 (closed forms in tests/analysis/test_loop_cost.py): in per metre.
        assert euler["y"][k] == pytest.approx(euler_error(s, q) / chord(s, q) / INCH_M, abs=1e-4)
        assert midpoint["y"][k] == pytest.approx(midpoint_error(s, q) / chord(s, q) / INCH_M, abs=1e-4)
    metres = [n * chord(V_IN_S * dt, W_RAD_S * dt) * INCH_M for n, dt in ((600, fast), (150, slow))]
    assert euler["text"] == [f"600 steps, {metres[0]:.2f} m driven", f"150 steps, {metres[1]:.2f} m driven"]
    assert figure["layout"]["yaxis"]["title"]["text"] == "in from arc per metre driven"


def test_the_period_labels_name_each_bin():
    edges = np.array([0.0, 0.005, 0.1, math.inf])
    assert period_labels(edges) == ["0-5 ms", "5-100 ms", "100 ms and over"]


def test_the_curves_over_time_are_the_methods_distance_from_arc(fine_profile):
    cost = loop_cost(constant_twist(fine_profile, [0.03] * 100), fine_profile)
    figure = loop_cost_over_time(cost.t - cost.t[0], cost.euler_gap, cost.midpoint_gap, "in")
    euler, midpoint = figure["data"]
    assert len(euler["x"]) == 101 and euler["x"][-1] == pytest.approx(3.0)
    assert np.allclose(euler["y"], cost.euler_gap, atol=5e-5) and np.allclose(midpoint["y"], cost.midpoint_gap, atol=5e-5)
    assert figure["layout"]["yaxis"]["title"]["text"] == "distance from arc (in)"


def test_a_recordings_cost_and_its_summary(practice_profile):
    data = read_recording(FIXTURES / "practice-bot-figure-eight.jsonl.gz")
    session = Session("practice-bot", data.robots["practice-bot"], data.profiles["practice-bot"], str(data.path),
                      "the whole recording")
    over_time, by_period, line = cost_of(session, session.loaded, 1000)
    cost = loop_cost(session.columns, session.loaded)
    assert over_time["data"][0]["y"][-1] == pytest.approx(cost.euler_gap[-1], abs=1e-4)
    assert line.startswith("976 steps of 10.2 ms on average (the whole recording); Euler ends ")
    assert f"Euler ends {cost.euler_gap[-1]:.3f} in from arc" in line and "in per metre driven" in line
    assert sum(float(b.split()[0]) for b in by_period["data"][0]["text"]) == 976


def test_the_button_computes_for_the_tabs_session():
    station = Station(recording=read_recording(FIXTURES / "practice-bot-figure-eight.jsonl.gz"),
                      make_replay=lambda data: ReplaySource(data, clock=lambda: 0.0))
    app = create_app(station)
    values = {f"{ids.LOOP_COST_RUN}.n_clicks": 1, f"{ids.ROBOT}.value": "practice-bot", f"{ids.WINDOW}.value": 60,
              f"{ids.EDITOR}.data": None}
    answer = call(app, f"{ids.LOOP_COST_OVER_TIME}.figure", values, [f"{ids.LOOP_COST_RUN}.n_clicks"])
    assert answer[ids.LOOP_COST_STATUS]["children"].startswith("976 steps")
    assert [t["name"] for t in answer[ids.LOOP_COST_BY_PERIOD]["figure"]["data"]] == [EULER_NAME, MIDPOINT_NAME]
