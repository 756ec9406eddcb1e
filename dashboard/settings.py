"""What a dashboard is told at start: field and footprint sizes, thresholds, pacing, the recordings folder.

Owns the command-line spelling of lengths ("144in", "3.6m") and the
defaults. Lengths are kept in metres and converted to each robot's profile
unit when drawn, since several robots may use different units.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

from receiver.errors import UsageError
from receiver.odometry.robot import METRES_PER_UNIT

FIELD_SIZE = "144in"  # common practice: a competition field is 12 ft square
FOOTPRINT = "18in"  # common practice: robots are limited to an 18 in cube at the start
LOOP_THRESHOLD_MS = 50.0
DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 47480  # our own choice, near the UDP (47474) and WebSocket (47475) ports
WINDOWS_S = (10, 30, 60, 120, 300, 600)
RECORDINGS = Path("recordings")  # where serve records by default, and what the page lists
_LENGTH = re.compile(r"^\s*([0-9]*\.?[0-9]+)\s*(in|mm|cm|m)?\s*$")


def parse_length(text: str) -> float:
    """"144in", "3.6 m", "18" (inches) -> metres."""
    match = _LENGTH.match(text)
    if not match or float(match.group(1)) <= 0:
        raise UsageError(f"expected a positive length such as 144in, 3.6m or 450mm, got {text!r}")
    return float(match.group(1)) * METRES_PER_UNIT[match.group(2) or "in"]


@dataclass(frozen=True)
class Settings:
    """One dashboard's settings: lengths in metres, times in seconds (``tick_ms`` in ms),
    the self-diagnosis thresholds in inches and degrees, the recordings folder.
    """

    field_size_m: float = parse_length(FIELD_SIZE)
    footprint_m: float = parse_length(FOOTPRINT)
    loop_threshold_s: float = LOOP_THRESHOLD_MS / 1000.0
    window_s: float = 60.0
    # The page asks for new points as soon as the last are answered (pacing.PAINT_AND_ASK_NEXT);
    # its interval is only a watchdog (start, resume, a lost request), and ticks
    # cost the page its callback bookkeeping even when they ask for nothing.
    tick_ms: int = 1000
    points: int = 1000  # most points per view and window (server-side downsampling beyond)
    full_every_s: float = 10.0  # a whole redraw this often re-trims the window exactly
    # The page diagnoses by itself when the disagreement first passes either of
    # these: with a right profile both poses (from the same counts) stay far
    # below them, while a sign mistake passes them within a second of driving.
    diagnose_position_in: float = 2.0
    diagnose_heading_deg: float = 5.0
    diagnose_s: float = 10.0  # default clip: the last this many seconds
    recordings: Path = RECORDINGS  # the folder the page lists and opens recordings from
