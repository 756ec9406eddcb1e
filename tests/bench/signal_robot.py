"""A simulated robot streaming over UDP with four signals of its own in every message.

Run: .venv/bin/python tests/bench/signal_robot.py --profile P --rate HZ --duration S --seed N --to udp://HOST:PORT

For bench_dashboard.py's browser cases: what ``podwatch simulate --to`` sends
(the wander path, the right encoder reversed in the robot code), plus the
signals the Robot signals panel draws: the robot code's speed and turn rate,
its own heading in degrees and its loop period in ms. Self-contained (it
imports nothing newer than the simulator), so that it can stream to an
older tree's receiver for a side-by-side run.
"""

from __future__ import annotations

import argparse
import asyncio
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from receiver.formats.profile_toml import load_profile  # noqa: E402
from receiver.live.replay import send_paced  # noqa: E402
from receiver.odometry.faults import parse_faults  # noqa: E402
from receiver.sim.simulate import simulate  # noqa: E402

SIGNALS = ("drive.speed", "turn.rate", "heading.own", "loop.ms")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--profile", required=True)
    parser.add_argument("--rate", type=float, default=200.0)
    parser.add_argument("--duration", type=float, default=60.0)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--to", required=True)
    args = parser.parse_args()
    profile = load_profile(Path(args.profile))
    run = simulate(profile, "wander", args.rate, args.duration, args.seed, parse_faults(["reversed:right"], profile))
    step = np.diff(run.robot_pose, axis=0)
    dt = np.maximum(np.diff(run.t), 1e-6)
    columns = (
        np.concatenate([[0.0], np.hypot(step[:, 0], step[:, 1]) / dt]),  # drive.speed, profile unit per s
        np.concatenate([[0.0], np.degrees(step[:, 2]) / dt]),  # turn.rate, deg/s
        np.degrees(run.robot_pose[:, 2]) % 360.0,  # heading.own, deg
        run.loop_s * 1000.0,  # loop.ms
    )
    rows = np.round(np.column_stack(columns), 3).tolist()
    for sample, loop in zip(run.samples, run.delivered.tolist()):
        sample.data = dict(zip(SIGNALS, rows[loop]))
    asyncio.run(send_paced(run.samples, np.asarray(run.arrival_s), args.to))


if __name__ == "__main__":
    main()
