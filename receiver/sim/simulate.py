"""A simulated robot: true motion, encoder counts, its own odometry, what arrives.

Owns the robot side of the wire for tests, the demo and the replay fixtures:
it drives a path (paths.py), turns the exact motion into quantised encoder
counts, runs the robot code's odometry (with chosen mistakes in it) and
applies network faults to the delivered messages. Pure: a seed in, arrays and
protocol.Sample objects out; never a socket, a file or a clock read.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from receiver.errors import UsageError
from receiver.formats.protocol import PROTOCOL_VERSION, Sample
from receiver.odometry.columns import Columns
from receiver.odometry.conventions import rep103_to_reported
from receiver.odometry.counts import COUNT_MODULUS, SEQ_MODULUS
from receiver.odometry.faults import Faults, robot_code_profile
from receiver.odometry.integrate import integrate
from receiver.odometry.kinematics import Kinematics
from receiver.odometry.recompute import Tracker
from receiver.odometry.robot import Profile, inches
from receiver.sim.motion_paths import PATHS, Motion, make_path

SUBSTEPS = 8  # exact arc steps of the true motion per robot loop
MAX_RATE_HZ = 2000.0
MAX_DURATION_S = 3600.0
# Robot loop timing (common practice: control loops run every 5-30 ms, with
# the odd stall for a slow sensor read or a garbage-collection pause).
JITTER = 0.05  # standard deviation of a loop period, as a fraction of the nominal one
STALL_PROBABILITY = 0.01
STALL_PERIODS = (1.0, 4.0)  # a stall adds this many nominal periods (uniform)
IMU_NOISE_RAD = math.radians(0.1)
# The network: a FIFO link with a small one-way latency.
LATENCY_S = 0.002
LATENCY_SPREAD_S = 0.001  # exponential part of the latency
DUPLICATE_GAP_S = 1e-4  # a duplicated datagram arrives just after its original
_I32 = COUNT_MODULUS // 2

@dataclass
class Run:
    """One simulated session.

    Loop arrays have a row for every robot loop (before any packet fault);
    poses are REP 103 field poses in the profile's distance unit with
    continuous headings in radians. ``samples`` are the messages in the
    order the laptop receives them.
    """

    profile: Profile
    robot_profile: Profile  # what the robot code uses: the declared profile with the faults in it
    path: str
    motion: Motion  # the path itself: start pose and twist(tau), inches
    t: np.ndarray  # (N,) robot clock at each loop, s
    loop_s: np.ndarray  # (N,) each loop's measured period, s
    truth: np.ndarray  # (N, 3) true pose
    ticks: np.ndarray  # (N, n_wheels) int64 counts as sent, signed 32-bit
    robot_pose: np.ndarray  # (N, 3) the robot code's own estimate
    reported: np.ndarray  # (N, 3) that estimate in the robot code's conventions, as sent
    samples: list[Sample]
    delivered: np.ndarray  # (M,) loop index of each received message
    arrival_s: np.ndarray  # (M,) when each arrives, s after the first loop; non-decreasing

    def stamp_rx(self, wall_start_s: float) -> list[Sample]:
        """Set each message's rx to wall_start_s plus its arrival time; returns the samples."""
        for sample, arrival in zip(self.samples, self.arrival_s.tolist()):
            sample.rx = wall_start_s + arrival
        return self.samples


def jittered_periods(rate_hz: float, count: int, rng: np.random.Generator) -> np.ndarray:
    """(count,) robot loop periods in seconds: jitter around 1 / rate_hz plus occasional stalls."""
    period = 1.0 / rate_hz
    periods = np.maximum(period * (1.0 + JITTER * rng.standard_normal(count)), 0.5 * period)
    stall = rng.random(count) < STALL_PROBABILITY
    return periods + np.where(stall, rng.uniform(*STALL_PERIODS, count) * period, 0.0)


def true_motion(
    path: Motion, tau: np.ndarray, scale: float, kinematics: Kinematics
) -> tuple[np.ndarray, np.ndarray]:
    """(true poses (N, 3) at loop times tau (N,), true wheel travel (N - 1, n) between loops).

    The path's twist (inches) is scaled to the profile's unit by ``scale``,
    held at its midpoint value over SUBSTEPS substeps per loop, and each
    substep is an exact arc; the wheels' travel is exact for those substeps.
    """
    units = np.array([scale, scale, 1.0])
    dt = np.diff(tau)
    mid = tau[:-1, None] + dt[:, None] * ((np.arange(SUBSTEPS) + 0.5) / SUBSTEPS)
    deltas = path.twist(mid) * units * (dt / SUBSTEPS)[:, None, None]
    start = np.asarray(path.start, dtype=float) * units
    poses = integrate(deltas.reshape(-1, 3), start)
    truth = np.vstack([start, poses[SUBSTEPS - 1 :: SUBSTEPS]])
    return truth, kinematics.wheel_travel(deltas).sum(axis=1)


def quantise(travel: np.ndarray, kinematics: Kinematics, offset: np.ndarray | None) -> np.ndarray:
    """Counts (N, n) as sent, from wheel travel between loops (N - 1, n).

    Each counter starts at ``offset``; None starts them so that each moving
    wheel's counter passes the signed 32-bit wrap half-way through its range.
    """
    cumulative = np.vstack([np.zeros(travel.shape[1]), np.cumsum(travel, axis=0)])
    raw = np.rint(cumulative / kinematics.travel_per_count).astype(np.int64)
    if offset is None:
        offset = _I32 - (raw.min(axis=0) + raw.max(axis=0)) // 2
    return (raw + offset + _I32) % COUNT_MODULUS - _I32


def deliver(
    tau: np.ndarray, period: float, faults: Faults, rngs: Sequence[np.random.Generator]
) -> tuple[np.ndarray, np.ndarray]:
    """(loop index (M,), arrival time (M,)) of the received messages, in arrival order.

    The link is first-in first-out; a reordered message is held back by 1-3
    loop periods, a duplicate arrives just after its original.
    """
    latency_rng, drop_rng, reorder_rng, duplicate_rng = rngs
    n = len(tau)
    arrival = np.maximum.accumulate(tau + LATENCY_S + latency_rng.exponential(LATENCY_SPREAD_S, n))
    held = reorder_rng.random(n) < faults.reorder
    arrival = arrival + np.where(held, (reorder_rng.integers(1, 4, n) + 0.5) * period, 0.0)
    keep = drop_rng.random(n) >= faults.drop
    copy = keep & (duplicate_rng.random(n) < faults.duplicate)
    index = np.concatenate([np.flatnonzero(keep), np.flatnonzero(copy)])
    when = np.concatenate([arrival[keep], arrival[copy] + DUPLICATE_GAP_S])
    order = np.argsort(when, kind="stable")
    return index[order], when[order]


def imu_readings(truth_heading: np.ndarray, robot_profile: Profile, rng: np.random.Generator) -> np.ndarray:
    """IMU heading (N,) in the robot code's heading unit and sense, wrapped at half a turn as IMUs do."""
    noisy = np.zeros((len(truth_heading), 3))
    noisy[:, 2] = truth_heading + IMU_NOISE_RAD * rng.standard_normal(len(truth_heading))
    heading = rep103_to_reported(noisy, robot_profile.reported)[:, 2]
    half = 180.0 if robot_profile.reported.heading_unit == "deg" else math.pi
    return np.mod(heading + half, 2.0 * half) - half


def simulate(
    profile: Profile,
    path: str = "square",
    rate_hz: float = 100.0,
    duration_s: float = 20.0,
    seed: int = 1,
    faults: Faults = Faults(),
    near_wrap: bool = False,
    imu: bool = False,
) -> Run:
    """Simulate ``duration_s`` seconds of the robot of ``profile`` driving ``path``.

    The same seed gives the same motion, timing and counts whatever the
    faults, so a faulty run can be compared with its clean twin. ``near_wrap``
    starts the counters so that they cross the signed 32-bit wrap and the
    sequence numbers so that they cross 2^32; ``imu`` adds IMU headings
    (always sent when the profile uses the IMU).
    """
    if path not in PATHS:
        raise UsageError(f"unknown path {path!r}, expected one of {', '.join(PATHS)}")
    if not 0.0 < rate_hz <= MAX_RATE_HZ:
        raise UsageError(f"rate {rate_hz!r} Hz: expected more than 0 and at most {MAX_RATE_HZ:g}")
    if not 0.0 < duration_s <= MAX_DURATION_S:
        raise UsageError(f"duration {duration_s!r} s: expected more than 0 and at most {MAX_DURATION_S:g}")
    if seed < 0:
        raise UsageError(f"seed {seed}: expected a non-negative integer")
    # One independent stream per concern, so that faults never shift the motion.
    (timing, offsets, clock, shape, slip, heading, *network) = [
        np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(10)
    ]
    period = 1.0 / rate_hz
    periods = jittered_periods(rate_hz, int(duration_s * rate_hz * 1.25) + 16, timing)
    tau_all = np.concatenate([[0.0], np.cumsum(periods[1:])])
    n = int(np.searchsorted(tau_all, duration_s, side="right"))
    assert n < len(tau_all), "loop periods must cover the duration"
    tau, loop_s = tau_all[:n], periods[:n]

    kinematics = Kinematics(profile)
    scale = inches(profile.distance_unit)
    motion = make_path(path, shape)
    truth, travel = true_motion(motion, tau, scale, kinematics)
    travel = travel * (1.0 + faults.slip * slip.standard_normal(travel.shape))
    # A counter the robot code never zeroed starts anywhere (here within +-100,000).
    offset = None if near_wrap else offsets.integers(-100_000, 100_001, kinematics.n_wheels)
    ticks = quantise(travel, kinematics, offset)
    t = clock.uniform(5.0, 60.0) + tau  # robot clock: seconds since its controller booted
    seq = ((SEQ_MODULUS - n // 2 if near_wrap else 0) + np.arange(n)) % SEQ_MODULUS

    robot_profile = robot_code_profile(profile, faults)
    send_imu = imu or profile.uses_imu
    imu_values = imu_readings(truth[:, 2], robot_profile, heading) if send_imu else np.full(n, np.nan)
    # The robot code starts from the true pose and integrates its own counts.
    start = np.full((n, 3), np.nan)
    start[0] = rep103_to_reported(truth[0], robot_profile.reported)
    columns = Columns(seq, t, ticks, start, imu_values, loop_s, np.zeros(n, dtype=bool))
    # The robot code integrates as its profile says (arc when it does not say).
    robot_pose = Tracker(robot_profile, robot_profile.reported.integration or "arc").feed(columns).pose
    assert len(robot_pose) == n, "the robot code integrates every one of its own loops"
    reported = rep103_to_reported(robot_pose, robot_profile.reported)

    delivered, arrival_s = deliver(tau, period, faults, network)
    samples = _messages(profile.name, seq, t, ticks, reported, imu_values if send_imu else None, loop_s, delivered)
    return Run(
        profile, robot_profile, path, motion, t, loop_s, truth, ticks,
        robot_pose, reported, samples, delivered, arrival_s,
    )


def _messages(
    robot: str,
    seq: np.ndarray,
    t: np.ndarray,
    ticks: np.ndarray,
    pose: np.ndarray,
    imu: np.ndarray | None,
    loop_s: np.ndarray,
    index: np.ndarray,
) -> list[Sample]:
    seq_l, t_l, ticks_l, loop_l = seq.tolist(), t.tolist(), ticks.tolist(), loop_s.tolist()
    pose_l = [tuple(p) for p in pose.tolist()]
    imu_l = imu.tolist() if imu is not None else [None] * len(seq_l)
    return [
        Sample(
            v=PROTOCOL_VERSION, robot=robot, seq=seq_l[i], t=t_l[i], ticks=ticks_l[i],
            pose=pose_l[i], imu=imu_l[i], loop=loop_l[i],
        )
        for i in index.tolist()
    ]
