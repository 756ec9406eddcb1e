"""Where a live recording goes: a file created exclusively, and a warning when the disk is nearly full.

Owns the default recording's name (podwatch-DATE-TIME.jsonl in a folder,
then -2, -3 ... when taken, each chosen by creating the file exclusively, so
two receivers started in the same second never share one) and the estimate
of the space an hour of recording needs. It never writes a message:
formats.recording_writer does.
"""

from __future__ import annotations

import itertools
import shutil
from datetime import datetime
from pathlib import Path
from typing import Iterable

from receiver.errors import RecordingExistsError
from receiver.formats.recording_writer import RecordingWriter
from receiver.odometry.robot import Profile

# An hour's estimate: a robot sending a line of this size this often.
# LINE_BYTES: replay_fixtures/practice-bot-square.jsonl, 199,512 bytes for
# 977 messages with a pose and rx (204 bytes a line); the gzip fixtures take
# 34-38 % of that at level 1. ROBOT_RATE_HZ: the bundled senders' own rate
# cap (receiver/senders), what a fast loop sends.
LINE_BYTES = 210
GZIP_SHARE = 0.4
ROBOT_RATE_HZ = 200.0
HOUR_S = 3600.0


def hour_bytes(robots: int, compress: bool) -> float:
    """Bytes an hour of recording takes for ``robots`` robots at ROBOT_RATE_HZ."""
    return max(robots, 1) * ROBOT_RATE_HZ * HOUR_S * LINE_BYTES * (GZIP_SHARE if compress else 1.0)


def space_warning(folder: Path, robots: int, compress: bool) -> str | None:
    """A line to show when ``folder`` has less free space than an hour of recording needs; else None."""
    try:
        free = shutil.disk_usage(folder).free
    except OSError:
        return None
    need = hour_bytes(robots, compress)
    if free >= need:
        return None
    how = f"{max(robots, 1)} robot{'s' if robots > 1 else ''} at {ROBOT_RATE_HZ:g} messages/s"
    how += f" of about {LINE_BYTES} bytes"
    if compress:
        how += f", gzip to about {GZIP_SHARE:.0%}"
    return (
        f"{folder}: {free / 1e6:.0f} MB free, less than an hour of recording needs (about {need / 1e6:.0f} MB: "
        f"{how}); when the disk is full, recording stops and receiving goes on"
    )


def default_name(now: datetime, n: int) -> str:
    """podwatch-YYYYmmdd-HHMMSS.jsonl, with -n before the suffix from n = 2 on."""
    stamp = now.strftime("%Y%m%d-%H%M%S")
    return f"podwatch-{stamp}.jsonl" if n == 1 else f"podwatch-{stamp}-{n}.jsonl"


def create_recording(
    profiles: Iterable[Profile], record: Path | None = None, folder: Path | None = None, now: datetime | None = None
) -> RecordingWriter:
    """A new recording at ``record``, or under a default name in ``folder`` (made if
    missing); never an existing file (RecordingExistsError for ``record``)."""
    profiles = list(profiles)
    if record is not None:
        return RecordingWriter(record, profiles)
    assert folder is not None, "give a file or a folder"
    folder.mkdir(parents=True, exist_ok=True)
    now = now or datetime.now()
    for n in itertools.count(1):
        try:
            return RecordingWriter(folder / default_name(now, n), profiles)
        except RecordingExistsError:
            continue  # taken, perhaps this very moment by another receiver: the next name
    raise AssertionError("unreachable")
