"""Small synthetic runs for tests: exact wheel travel for a constant twist,
rounded to counts, with the robot's own pose computed the same way.

Independent of receiver.simulate on purpose: the pose engine's tests must not
lean on the simulator that is itself checked against the pose engine.
"""

from __future__ import annotations

import gzip
import json
from pathlib import Path

import numpy as np

from receiver.formats.profile_toml import profile_to_table
from receiver.odometry.conventions import rep103_to_reported
from receiver.odometry.integrate import integrate
from receiver.odometry.kinematics import Kinematics
from receiver.odometry.robot import Profile


def constant_twist_messages(
    profile: Profile, twist_per_s=(12.0, 3.0, 0.4), rate_hz=50.0, seconds=4.0, start_counts=0, seq0=0, t0=1.0
) -> list[dict]:
    kin = Kinematics(profile)
    n = int(rate_hz * seconds)
    dt = 1.0 / rate_hz
    step = kin.wheel_travel(np.asarray(twist_per_s, dtype=float) * dt)
    travel = np.arange(n + 1)[:, None] * step
    counts = np.rint(travel / kin.travel_per_count).astype(np.int64) + start_counts
    wrapped = (counts + 2**31) % 2**32 - 2**31  # what a signed 32-bit counter shows
    deltas = np.vstack([np.zeros(3), np.tile(np.asarray(twist_per_s) * dt, (n, 1))])
    truth = integrate(deltas, np.zeros(3), "arc")
    reported = rep103_to_reported(truth, profile.reported)
    return [
        {
            "v": 1,
            "robot": profile.name,
            "seq": (seq0 + k) % 2**32,
            "t": t0 + k * dt,
            "ticks": [int(c) for c in wrapped[k]],
            "pose": [float(v) for v in reported[k]],
            "loop": dt,
        }
        for k in range(n + 1)
    ]


def write_recording(path: Path, messages: list[dict], profiles: list[Profile] | None = None, compress=False) -> Path:
    lines = []
    if profiles is not None:
        header = {"recording": 1, "created": "2026-12-02T10:00:00+00:00", "profiles": {p.name: profile_to_table(p) for p in profiles}}
        lines.append(json.dumps(header))
    lines += [json.dumps({**m, "rx": 1_790_000_000.0 + i * 0.01}) for i, m in enumerate(messages)]
    data = ("\n".join(lines) + "\n").encode()
    path.write_bytes(gzip.compress(data) if compress else data)
    return path
