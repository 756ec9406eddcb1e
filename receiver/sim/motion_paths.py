"""Motion paths for the simulated robot: the body twist as a function of time.

Owns the shapes the simulator drives on a 144 in square field (origin at the
field centre, REP 103 axes). Each path gives its start pose and the body
twist (forward and leftward speed in in/s, counter-clockwise turn rate in
rad/s) at any times. Pure numpy: no clocks, no state, no units but inches.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from receiver.errors import UsageError

FIELD_SIZE_IN = 144.0  # common practice: a competition field is 12 ft square
PATHS = ("square", "figure-eight", "spin", "strafe", "wander", "guided", "guided-curving", "push-forward", "push-left")

# First zero of the Bessel function J0 (Abramowitz and Stegun, table 9.5). A
# heading that swings by this amplitude either side of its centre, at
# constant speed, brings the robot back to where the swing began: the
# displacement over one swing is proportional to J0(amplitude).
_J0_FIRST_ZERO = 2.404825557695773


@dataclass(frozen=True)
class Moves:
    """Moves one after another, each from rest to rest with a sin^2 speed profile.

    ``peaks`` (K, 3) is each move's peak twist; a move of duration T covers
    peak * T / 2. With ``repeat`` the list starts over, otherwise the robot
    rests after the last move.
    """

    start: tuple[float, float, float]
    durations: np.ndarray
    peaks: np.ndarray
    repeat: bool

    def twist(self, tau: np.ndarray) -> np.ndarray:
        """Body twist (..., 3) at times tau (...) in seconds since the start."""
        tau = np.asarray(tau, dtype=float)
        edges = np.concatenate([[0.0], np.cumsum(self.durations)])
        total = edges[-1]
        local = np.mod(tau, total) if self.repeat else np.minimum(tau, total)
        k = np.clip(np.searchsorted(edges, local, side="right") - 1, 0, len(self.durations) - 1)
        shape = np.sin(np.pi * (local - edges[k]) / self.durations[k]) ** 2
        if not self.repeat:
            shape = np.where(tau >= total, 0.0, shape)
        return self.peaks[k] * shape[..., None]


def _moves(start: tuple[float, float, float], steps: list[tuple], repeat: bool) -> Moves:
    """Moves from ("forward" | "left" | "turn" | "pause", amount, peak speed[, turn]) steps.

    Amounts are inches or radians (seconds for a pause); the duration that
    covers the amount at the given peak under a sin^2 profile is 2 * amount / peak.
    A push may also turn the robot by ``turn`` radians on the way (a curving push).
    """
    axis = {"forward": 0, "left": 1, "turn": 2}
    durations, peaks = [], []
    for kind, amount, peak, *turn in steps:
        twist = np.zeros(3)
        if kind == "pause":
            durations.append(amount)
        else:
            durations.append(2.0 * abs(amount) / peak)
            twist[axis[kind]] = math.copysign(peak, amount)
            if turn:
                twist[2] += turn[0] / durations[-1] * 2.0  # the sin^2 profile covers peak * T / 2
        peaks.append(twist)
    return Moves(start, np.asarray(durations), np.asarray(peaks), repeat)


@dataclass(frozen=True)
class FigureEight:
    """Constant speed with the heading swinging sinusoidally: two loops, one of each hand.

    Heading th(t) = A (1 - cos(2 pi t / P)) with A the first zero of J0, so
    each period closes the path; the speed ramps up over the first second.
    """

    start: tuple[float, float, float] = (11.97, 0.51, 0.0)  # centres the eight on the field (computed numerically)
    speed: float = 24.0
    period: float = 12.0
    ramp: float = 1.0

    def twist(self, tau: np.ndarray) -> np.ndarray:
        """Body twist (..., 3) at times tau (...), s since the start: forward speed in in/s,
        no sideways speed, turn rate in rad/s.
        """
        tau = np.asarray(tau, dtype=float)
        v = self.speed * np.sin(0.5 * np.pi * np.clip(tau / self.ramp, 0.0, 1.0)) ** 2
        omega = 2.0 * np.pi / self.period
        w = _J0_FIRST_ZERO * omega * np.sin(omega * tau)
        return np.stack([v, np.zeros_like(tau), w], axis=-1)


@dataclass(frozen=True)
class Wander:
    """Smooth wandering: field position and heading are sums of sinusoids.

    Position amplitudes add up to less than half the field, so the robot can
    never leave it; the body twist is the field velocity seen from the body,
    which makes it a holonomic (mecanum-style) motion with sideways speed.
    Rows of ``x``, ``y`` and ``heading`` are (amplitude, angular rate, phase).
    """

    x: np.ndarray
    y: np.ndarray
    heading: np.ndarray

    @staticmethod
    def _value_rate(terms: np.ndarray, tau: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        amp, rate, phase = terms[:, 0], terms[:, 1], terms[:, 2]
        arg = tau[..., None] * rate + phase
        return (amp * np.sin(arg)).sum(axis=-1), (amp * rate * np.cos(arg)).sum(axis=-1)

    def field_pose(self, tau: np.ndarray) -> np.ndarray:
        """The pose (..., 3) the twist traces, in the field frame."""
        tau = np.asarray(tau, dtype=float)
        return np.stack([self._value_rate(terms, tau)[0] for terms in (self.x, self.y, self.heading)], axis=-1)

    @property
    def start(self) -> tuple[float, float, float]:
        """The pose at time 0: x, y in inches, heading in radians, field frame."""
        return tuple(float(v) for v in self.field_pose(np.zeros(1))[0])

    def twist(self, tau: np.ndarray) -> np.ndarray:
        """Body twist (..., 3) at times tau (...), s: the field velocity seen from the body,
        in/s and rad/s.
        """
        tau = np.asarray(tau, dtype=float)
        _, vx = self._value_rate(self.x, tau)
        _, vy = self._value_rate(self.y, tau)
        th, w = self._value_rate(self.heading, tau)
        c, s = np.cos(th), np.sin(th)
        return np.stack([c * vx + s * vy, -s * vx + c * vy, w], axis=-1)


def _wander(rng: np.random.Generator) -> Wander:
    # Amplitudes sum to 60 in (< 72 in, half the field); peak speed stays
    # under about 30 in/s and the turn rate under about 1 rad/s.
    def terms(amps: list[float], rates: list[float]) -> np.ndarray:
        phases = rng.uniform(0.0, 2.0 * np.pi, len(amps))
        return np.column_stack([amps, rates, phases])

    return Wander(
        x=terms([36.0, 18.0, 6.0], [0.31, 0.53, 1.1]),
        y=terms([34.0, 20.0, 6.0], [0.27, 0.61, 0.97]),
        heading=terms([2.0, 0.6], [0.23, 0.9]),
    )


Motion = Moves | FigureEight | Wander


def make_path(name: str, rng: np.random.Generator) -> Motion:
    """The named path (one of PATHS); ``rng`` only varies the wander."""
    quarter = math.pi / 2.0
    if name == "square":
        # 48 in sides driven forward, a 90 degree left turn in place at each corner.
        steps = [("forward", 48.0, 30.0), ("pause", 0.3, 0.0), ("turn", quarter, 2.0), ("pause", 0.3, 0.0)]
        return _moves((-24.0, -24.0, 0.0), steps, repeat=True)
    if name == "spin":
        # Whole turns in place with a rest between: at each rest the heading is a multiple of 2 pi.
        return _moves((0.0, 0.0, 0.0), [("turn", 2.0 * math.pi, 3.0), ("pause", 0.5, 0.0)], repeat=True)
    if name == "strafe":
        steps = [("left", 36.0, 24.0), ("pause", 0.5, 0.0), ("left", -36.0, 24.0), ("pause", 0.5, 0.0)]
        return _moves((0.0, -18.0, 0.0), steps, repeat=True)
    if name in ("push-forward", "push-left"):
        # The push test: one straight 48 in push from rest to rest, forward or leftward.
        move = "forward" if name == "push-forward" else "left"
        return _moves((0.0, 0.0, 0.0), [("pause", 0.5, 0.0), (move, 48.0, 12.0), ("pause", 1.0, 0.0)], repeat=False)
    if name in ("guided", "guided-curving"):
        # The hand-push check: a person pushes the robot 18 in forward, 18 in
        # left, then turns it 120 degrees counter-clockwise, resting about 1 s
        # between. Done carelessly ("guided-curving"), the forward push curves
        # 30 degrees to the left on its way (the robot was pushed at one corner).
        forward = ("forward", 18.0, 12.0) if name == "guided" else ("forward", 18.0, 12.0, math.radians(30.0))
        steps = [
            ("pause", 1.0, 0.0),
            forward,
            ("pause", 1.0, 0.0),
            ("left", 18.0, 12.0),
            ("pause", 1.0, 0.0),
            ("turn", math.radians(120.0), 1.0),
            ("pause", 1.0, 0.0),
        ]
        return _moves((0.0, 0.0, 0.0), steps, repeat=False)
    if name == "figure-eight":
        return FigureEight()
    if name == "wander":
        return _wander(rng)
    raise UsageError(f"unknown path {name!r}, expected one of {', '.join(PATHS)}")
