"""How large and how small a robot profile's numbers may be.

Owns the bounds the profile loader (profile_toml.py) holds a file to, and
the words that name them. They are far beyond any robot the trade builds,
and near enough that everything computed from a profile stays finite: a
wheel's travel per count is never zero nor infinite, a simulated pose never
overflows. Values only: it never reads a file.
"""

from __future__ import annotations

from receiver.odometry.robot import METRES_PER_UNIT

# Common practice, no source: a competition robot fits in a 0.46 m (18 in)
# cube, tracking wheels are 30-100 mm across with encoders of 28-8192 counts
# per revolution, geared 1:1 or a few to one. Each bound leaves two orders of
# magnitude or more beyond that; angles may be written past a full turn
# (420 for 60), up to ten turns either way.
LENGTH_LIMITS_M = {"x": (-100.0, 100.0), "y": (-100.0, 100.0), "diameter": (1e-4, 10.0)}
PLAIN_LIMITS = {"angle": (-3600.0, 3600.0), "counts_per_rev": (1.0, 1e9), "gear_ratio": (1e-4, 1e4)}
MAX_WHEELS = 16
MAX_WHEEL_NAME = 32
MAX_PROFILE_BYTES = 1024 * 1024  # a profile is a few hundred bytes


def out_of_limits(key: str, value: float, unit: str) -> str | None:
    """What is wrong with a wheel's ``value`` for ``key`` (lengths in ``unit``), or None."""
    if key in LENGTH_LIMITS_M:
        low_m, high_m = LENGTH_LIMITS_M[key]
        low, high = low_m / METRES_PER_UNIT[unit], high_m / METRES_PER_UNIT[unit]
        bounds = f"{low:g} and {high:g} {unit} ({low_m:g} and {high_m:g} m)"
    elif key in PLAIN_LIMITS:
        low, high = PLAIN_LIMITS[key]
        bounds = f"{low:g} and {high:g}" + (" degrees" if key == "angle" else "")
    else:
        return None
    if low <= value <= high:
        return None
    return f"must be between {bounds}, got {value:g}"
