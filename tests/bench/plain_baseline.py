"""The plain baselines the engine benchmark compares against: standard library only.

Run as a script it reads a recording line by line with the json module and
integrates the common three-wheel layout with one arc step per sample:

    python tests/bench/plain_baseline.py REC Y_LEFT Y_RIGHT X_BACK TRAVEL_PER_COUNT
"""

from __future__ import annotations

import json
import math
import sys


def arc_step(x: float, y: float, th: float, dx: float, dy: float, dth: float) -> tuple[float, float, float]:
    """One SE(2) exponential step (Modern Robotics, ch. 3), written out in plain floats."""
    if abs(dth) < 1e-9:
        a, b = 1.0, 0.0
    else:
        a, b = math.sin(dth) / dth, (1.0 - math.cos(dth)) / dth
    lx, ly = a * dx - b * dy, b * dx + a * dy
    c, s = math.cos(th), math.sin(th)
    return x + c * lx - s * ly, y + s * lx + c * ly, th + dth


def loop_arc(deltas) -> tuple[float, float, float]:
    """Integrate (dx, dy, dth) rows one at a time."""
    x = y = th = 0.0
    for dx, dy, dth in deltas:
        x, y, th = arc_step(x, y, th, dx, dy, dth)
    return x, y, th


def recompute(path: str, y_left: float, y_right: float, x_back: float, per_count: float) -> tuple[int, float, float, float]:
    """Read a recording with json, one line at a time, and integrate its counts."""
    x = y = th = 0.0
    last = None
    rows = 0
    with open(path) as fh:
        fh.readline()  # the header
        for line in fh:
            ticks = json.loads(line)["ticks"]
            if last is not None:
                s_l, s_r, s_s = ((a - b) * per_count for a, b in zip(ticks, last))
                dth = (s_r - s_l) / (y_left - y_right)
                x, y, th = arc_step(x, y, th, s_l + y_left * dth, s_s - x_back * dth, dth)
            last = ticks
            rows += 1
    return rows, x, y, th


if __name__ == "__main__":
    print(*recompute(sys.argv[1], *map(float, sys.argv[2:6])))
