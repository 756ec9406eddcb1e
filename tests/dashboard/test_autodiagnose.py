"""The watch that runs a diagnosis by itself: when it asks, when it asks again, when it keeps quiet."""

from __future__ import annotations

import math

import numpy as np
import pytest

from dashboard.autodiagnose import (
    RETRY_TICKS,
    STALL_TICKS,
    TRANSITIONS,
    Level,
    Thresholds,
    Watch,
    WatchEvent,
    WatchState,
    level,
    step,
)

LIMITS = Thresholds(position=2.0, heading_rad=math.radians(5.0))
PAST = Level(past=True, down=False, rx=1.0)
UP = Level(past=False, down=False, rx=1.0)  # still up, nothing new past
DOWN = Level(past=False, down=True, rx=1.0)


def rows(position, heading_deg, rx0=0.0):
    n = len(position)
    return {"rx": rx0 + 0.01 * np.arange(n), "position_error": np.asarray(position, float),
            "heading_error": np.radians(np.asarray(heading_deg, float))}


def test_thresholds_in_the_profiles_unit():
    t = Thresholds.of(2.0, 5.0, "mm")
    assert t.position == pytest.approx(50.8) and t.heading_rad == pytest.approx(math.radians(5.0))
    assert Thresholds.of(2.0, 5.0, "in").position == pytest.approx(2.0)


def test_level_looks_at_every_new_row_and_at_the_newest_for_coming_down():
    r = rows([0.1, 0.2, -2.5, 0.3, 0.1], [0, 0, 0, 0, 0])
    assert level(r, 0.005, LIMITS) == Level(past=True, down=True, rx=0.04)  # a spike in between counts
    assert level(r, 0.025, LIMITS) == Level(past=False, down=True, rx=0.04)  # rows up to the last tick do not
    assert level(r, None, LIMITS) == Level(past=False, down=True, rx=0.04)  # first tick: the newest row only
    assert level(rows([0.0, 1.5], [0, -6]), None, LIMITS).past  # heading alone, either sign
    assert level(rows([0.0, 1.5], [0, 3]), None, LIMITS) == Level(False, False, 0.01)  # between: neither
    no_pose = level(rows([math.nan] * 3, [math.nan] * 3), None, LIMITS)
    assert not no_pose.past and not no_pose.down
    empty = {k: np.empty(0) for k in ("rx", "position_error", "heading_error")}
    assert level(empty, 3.0, LIMITS) == Level(False, False, 3.0)


def test_asks_once_when_the_disagreement_first_passes_then_stays_quiet_after_a_verdict():
    w, ask = step(Watch(), "bot", "live:1", 1, UP, None)
    assert not ask and w.state is WatchState.ARMED
    w, ask = step(w, "bot", "live:1", 2, PAST, None)
    assert ask and w.state is WatchState.ASKED and w.asked == 1
    for tick in range(3, 3 + STALL_TICKS):  # waiting for the answer: no second ask
        w, ask = step(w, "bot", "live:1", tick, PAST, None)
        assert not ask
    w, ask = step(w, "bot", "live:1", 30, PAST, {"n": 1, "confidence": "high"})
    assert not ask and w.state is WatchState.DONE
    for tick in range(31, 60):
        w, ask = step(w, "bot", "live:1", tick, PAST, None)
        assert not ask
    # Back down (a re-anchor), the next crossing asks again.
    w, ask = step(w, "bot", "live:1", 60, DOWN, None)
    assert not ask and w.state is WatchState.ARMED
    w, ask = step(w, "bot", "live:1", 61, PAST, None)
    assert ask and w.asked == 2


def test_not_enough_motion_asks_again_while_the_disagreement_stays_up():
    w, _ = step(Watch(), "bot", "k", 10, PAST, None)
    w, ask = step(w, "bot", "k", 11, UP, {"n": 1, "confidence": "not enough motion"})
    assert not ask and w.state is WatchState.UNSURE  # asked one tick ago: wait
    w, ask = step(w, "bot", "k", 10 + RETRY_TICKS, UP, None)
    assert ask and w.state is WatchState.ASKED and w.asked == 2
    w, ask = step(w, "bot", "k", 20, UP, {"n": 2, "confidence": "low"})
    assert not ask and w.state is WatchState.DONE


@pytest.mark.parametrize("answer, state", [("undecided", "UNSURE"), ("near twins", "DONE")])
def test_an_undecided_answer_is_asked_again_and_near_twins_are_an_answer(answer, state):
    w, _ = step(Watch(), "bot", "k", 10, PAST, None)
    w, ask = step(w, "bot", "k", 11, UP, {"n": 1, "confidence": answer})
    assert not ask and w.state is WatchState[state]


def test_a_late_not_enough_motion_asks_again_in_the_tick_it_arrives():
    # On a busy machine a run can take longer than RETRY_TICKS: its answer
    # and the retry it calls for come in one tick, and that tick asks.
    w, _ = step(Watch(), "bot", "k", 10, PAST, None)
    for tick in range(11, 10 + RETRY_TICKS + 1):
        w, ask = step(w, "bot", "k", tick, UP, None)
        assert not ask
    w, ask = step(w, "bot", "k", 11 + RETRY_TICKS, UP, {"n": 1, "confidence": "not enough motion"})
    assert ask and w.state is WatchState.ASKED and w.asked == 2 and w.asked_tick == 11 + RETRY_TICKS
    w, ask = step(w, "bot", "k", 12 + RETRY_TICKS, UP, {"n": 1, "confidence": "not enough motion"})
    assert not ask and w.state is WatchState.ASKED  # the old answer does not count for the new ask
    w, ask = step(w, "bot", "k", 13 + RETRY_TICKS, UP, {"n": 2, "confidence": "high"})
    assert not ask and w.state is WatchState.DONE


def test_only_the_answer_to_the_latest_ask_counts_and_a_lost_one_is_asked_again():
    w, _ = step(Watch(), "bot", "k", 0, PAST, None)
    w, _ = step(w, "bot", "k", 1, UP, {"n": 0, "confidence": "high"})  # an older answer
    assert w.state is WatchState.ASKED
    w, ask = step(w, "bot", "k", 1 + STALL_TICKS, UP, None)
    assert ask and w.asked == 2 and w.state is WatchState.ASKED


def test_another_robot_or_source_starts_a_fresh_watch():
    w, _ = step(Watch(), "bot", "k", 0, PAST, None)
    w, _ = step(w, "bot", "k", 1, UP, {"n": 1, "confidence": "high"})
    assert w.state is WatchState.DONE
    other, ask = step(w, "other", "k", 2, PAST, None)
    assert ask and other.robot == "other" and other.asked == 2  # numbering goes on: old answers never match
    replayed, ask = step(w, "bot", "replay:9", 2, PAST, None)
    assert ask and replayed.key == "replay:9"


def test_the_watch_survives_the_page_store():
    w, _ = step(Watch(), "bot", "k", 4, PAST, None)
    assert Watch.from_store(w.to_store()) == w
    assert Watch.from_store(None) == Watch()
    assert (WatchState.DONE, WatchEvent.PAST) not in TRANSITIONS
