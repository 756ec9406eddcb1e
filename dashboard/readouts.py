"""The numbers a person quotes off the page: disagreement and loop timing.

Owns what each readout is: the current and worst disagreement in the window
(exact), its growth per metre driven and per turn over a stated stretch
(receiver.analysis.growth, the one definition ``podwatch compare`` quotes too,
with its minimums), and the loop period's statistics: count, mean, max and
loops over the threshold exact, p95 from counts in bins of LOOP_BIN_MS
(within half a bin of the exact one). Pure: numbers in, numbers out; no clock, no Dash.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from dashboard.block_summary import LOOP_BIN_MS, Numbers
from receiver.analysis.growth import MIN_TRAVEL_M, MIN_TURNS, Growth

__all__ = ["MIN_TRAVEL_M", "MIN_TURNS", "Disagreement", "LoopTiming", "loop_timing", "quote", "p95_of_bins"]


@dataclass(frozen=True)
class Disagreement:
    """Position in the profile's distance unit, heading in degrees (wrapped); NaN when unknown.

    ``growth`` is growth.py's over the window's rows since the last re-anchor;
    ``stretch_s`` the page times (s) of the stretch's first and last row.
    """

    position_now: float
    position_worst: float
    heading_now_deg: float
    heading_worst_deg: float
    growth: Growth
    stretch_s: tuple[float, float]

    @property
    def position_per_m(self) -> float:
        """Change of the position error per metre driven over the stretch (unit/m); NaN under MIN_TRAVEL_M."""
        return self.growth.position_per_m

    @property
    def heading_per_turn_deg(self) -> float:
        """Change of the heading error per turn over the stretch (deg/turn, signed); NaN under MIN_TURNS."""
        return self.growth.heading_per_turn_deg


UNKNOWN_GROWTH = Growth(math.nan, math.nan, 0.0, 0.0, 0, 0, False)


@dataclass(frozen=True)
class LoopTiming:
    """Loop periods in seconds over the window; ``long`` counts loops over the threshold.
    ``p95_s`` is read off counts in LOOP_BIN_MS bins: within half a bin of the exact one."""

    count: int
    mean_s: float
    p95_s: float
    max_s: float
    long: int

    @property
    def rate_hz(self) -> float:
        """Loops per second from the mean period; NaN when unknown."""
        return 1.0 / self.mean_s if self.mean_s > 0 else math.nan


def p95_of_bins(index: np.ndarray, counts: np.ndarray) -> float:
    """The 95th percentile (s) of loop periods counted in LOOP_BIN_MS bins (index, counts; bins
    may repeat), as np.percentile interpolates it between two ranked periods, each taken at
    the middle of its bin: within half a bin of the exact value. NaN without a count."""
    total = int(counts.sum())
    if not total:
        return math.nan
    cumulative = np.cumsum(np.bincount(index, weights=counts))
    rank = 0.95 * (total - 1)  # np.percentile's default: linear between ranks, from 0
    below = math.floor(rank)
    at = np.searchsorted(cumulative, [below + 1, min(below + 2, total)])  # the bins of ranks below, below + 1
    middle = (at + 0.5) * LOOP_BIN_MS / 1000.0
    return float(middle[0] + (rank - below) * (middle[1] - middle[0]))


def loop_timing(kept: Numbers) -> LoopTiming:
    """The loop readouts of a window's numbers (block_summary.Numbers)."""
    if not kept.loop_count:
        return LoopTiming(0, math.nan, math.nan, math.nan, 0)
    return LoopTiming(
        count=kept.loop_count,
        mean_s=kept.loop_sum_s / kept.loop_count,
        p95_s=min(p95_of_bins(*kept.loop_bins), kept.loop_max_s),
        max_s=kept.loop_max_s,
        long=kept.loop_long,
    )


def quote(value: float, unit: str, digits: int = 2, sign: bool = False) -> str:
    """"3.21 in" ("+3.21 in" with ``sign``), or an em dash when the value is unknown."""
    if not math.isfinite(value):
        return f"\u2014 {unit}"
    return f"{value:{'+' if sign else ''}.{digits}f} {unit}"
