"""When the page diagnoses by itself: the watch on one robot's disagreement.

Owns the decision, tick by tick, to ask for a diagnosis run: once when the
disagreement first passes a threshold, again while the answer is "not
enough motion", and not again until the disagreement has come back down (a
re-anchor) and passes it anew. Pure: rows and tick numbers in, a new watch
and a yes or no out; it never runs the diagnosis and never reads a clock.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, replace
from enum import Enum

import numpy as np

from receiver.analysis.diagnose import UNDECIDED
from receiver.odometry.robot import inches

# Back under this share of both thresholds, the next crossing asks again:
# half, so that an error hovering at a threshold does not ask at every tick.
REARM_SHARE = 0.5
# While the answer names no explanation ("not enough motion", "undecided"), ask again every this many ticks
# (the clip gains the motion the last one lacked).
RETRY_TICKS = 2
# An answer this many ticks late is taken as lost (the page dropped it): ask again.
STALL_TICKS = 20


class WatchState(Enum):
    """Where a watch stands between ticks; it moves only through TRANSITIONS."""

    ARMED = "armed"  # under the thresholds: the next crossing asks for a run
    ASKED = "asked"  # a run asked for, its answer not back yet
    UNSURE = "unsure"  # answered "not enough motion" or "undecided": asks again while the disagreement stays up
    DONE = "done"  # a verdict is on the page: quiet until the disagreement comes back down


class WatchEvent(Enum):
    """What a tick saw or heard; each moves the WatchState through TRANSITIONS."""

    PAST = "past"  # the disagreement passed a threshold
    DOWN = "down"  # back under REARM_SHARE of both thresholds
    SURE = "sure"  # the run answered with a verdict
    UNSURE = "unsure"  # the run answered "not enough motion" or "undecided"
    RETRY = "retry"  # RETRY_TICKS since an unsure answer, or STALL_TICKS since an unanswered ask


# Every allowed move; a pair missing here leaves the state as it is.
TRANSITIONS: dict[tuple[WatchState, WatchEvent], WatchState] = {
    (WatchState.ARMED, WatchEvent.PAST): WatchState.ASKED,
    (WatchState.ASKED, WatchEvent.SURE): WatchState.DONE,
    (WatchState.ASKED, WatchEvent.UNSURE): WatchState.UNSURE,
    (WatchState.ASKED, WatchEvent.RETRY): WatchState.ASKED,
    (WatchState.UNSURE, WatchEvent.RETRY): WatchState.ASKED,
    (WatchState.ASKED, WatchEvent.DOWN): WatchState.ARMED,
    (WatchState.UNSURE, WatchEvent.DOWN): WatchState.ARMED,
    (WatchState.DONE, WatchEvent.DOWN): WatchState.ARMED,
}


@dataclass(frozen=True)
class Thresholds:
    """When the page diagnoses by itself: position in the profile's distance unit,
    heading in radians.
    """

    position: float  # the profile's distance unit
    heading_rad: float

    @classmethod
    def of(cls, position_in: float, heading_deg: float, distance_unit: str) -> Thresholds:
        """Thresholds from inches and degrees (the settings), for a profile in ``distance_unit``."""
        return cls(position_in * inches(distance_unit), math.radians(heading_deg))


@dataclass(frozen=True)
class Level:
    """The disagreement since the last tick, against the thresholds."""

    past: bool  # some new row passed a threshold
    down: bool  # the newest row is under REARM_SHARE of both
    rx: float | None  # the newest row's rx: the next tick reads rows after it


def level(rows: dict[str, np.ndarray], since_rx: float | None, limits: Thresholds) -> Level:
    """Judge the hub's rows received after ``since_rx`` (on the first tick, None: the newest row only).

    Rows without the robot's own pose have NaN errors: neither past nor down.
    """
    rx = rows["rx"]
    if not len(rx):
        return Level(False, False, since_rx)
    new = slice(len(rx) - 1, None) if since_rx is None else slice(int(np.searchsorted(rx, since_rx, side="right")), None)
    position = np.abs(rows["position_error"][new])
    heading = np.abs(rows["heading_error"][new])
    with np.errstate(invalid="ignore"):
        past = bool(np.any((position > limits.position) | (heading > limits.heading_rad)))
    down = bool(position[-1] < REARM_SHARE * limits.position and heading[-1] < REARM_SHARE * limits.heading_rad) if len(position) else False
    return Level(past, down, float(rx[-1]))


@dataclass(frozen=True)
class Watch:
    """One page's watch on one robot of one source (``key``); kept in the page between ticks."""

    robot: str | None = None
    key: str | None = None
    state: WatchState = WatchState.ARMED
    asked: int = 0  # number of the latest ask; an answer carries the number it answers
    asked_tick: int = 0
    rx: float | None = None  # rows up to this rx have been judged

    def to_store(self) -> dict:
        """The watch as plain JSON for a dcc.Store; ``from_store`` reads it back."""
        return {**asdict(self), "state": self.state.value}

    @classmethod
    def from_store(cls, data: dict | None) -> Watch:
        """The watch a dcc.Store holds (``to_store``'s output); a new, armed one when empty."""
        if not data:
            return cls()
        return cls(**{**data, "state": WatchState(data["state"])})


def step(watch: Watch, robot: str, key: str, tick: int, seen: Level, answer: dict | None) -> tuple[Watch, bool]:
    """The watch after one tick, and whether to ask for a run now.

    ``answer`` is the latest run's {"n": ask number or None, "confidence": ...};
    an answer to an older ask, or to a button press, does not count.
    """
    if (watch.robot, watch.key) != (robot, key):
        watch = Watch(robot, key, asked=watch.asked)
    events = []
    if watch.state is WatchState.ASKED and answer and answer.get("n") == watch.asked:
        events.append(WatchEvent.UNSURE if answer.get("confidence") in UNDECIDED else WatchEvent.SURE)
    if seen.down:
        events.append(WatchEvent.DOWN)
    if seen.past:
        events.append(WatchEvent.PAST)
    state = watch.state
    for event in events:
        state = TRANSITIONS.get((state, event), state)
    waited = tick - watch.asked_tick
    retry = ((state is WatchState.UNSURE and waited >= RETRY_TICKS)
             or (state is WatchState.ASKED and waited > STALL_TICKS))
    if retry:
        state = TRANSITIONS[(state, WatchEvent.RETRY)]
    # Every retry asks, including one in the tick that brings a late "not
    # enough motion" (ASKED -> UNSURE -> ASKED): judged by the state before
    # the tick alone, that retry waited STALL_TICKS for an answer already in.
    ask = retry or (state is WatchState.ASKED and watch.state is not WatchState.ASKED)
    watch = replace(watch, state=state, rx=seen.rx)
    if ask:
        watch = replace(watch, asked=watch.asked + 1, asked_tick=tick)
    return watch, ask
