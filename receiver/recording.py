"""Recordings (JSON Lines, optionally gzip): read them in bulk, fast.

Owns the recording contract of DESIGN.md: a header line with the profiles,
then one wire message per line plus "rx". Also reads header-less files of bare
messages. Bad lines are skipped and counted by reason, a truncated last line
(the receiver was killed mid-write) is skipped with a warning; a file with
nothing valid is refused with one line.
"""

from __future__ import annotations

import gc
import gzip
import zlib
from collections import Counter, defaultdict
from dataclasses import dataclass, field
from pathlib import Path
from typing import BinaryIO, Callable

import msgspec
import numpy as np

from receiver.errors import ProfileError, RecordingError
from receiver.profile import Profile, profile_from_table
from receiver.protocol import Failure, Reason, Sample, decode_message
from receiver.recompute import Columns, columns_from_samples, concat_columns

RECORDING_VERSION = 1
_CHUNK_BYTES = 16 * 1024 * 1024
_lines = msgspec.json.Decoder(Sample)
GZIP_MAGIC = b"\x1f\x8b"

Progress = Callable[[int, int], None]


@dataclass
class RecordingData:
    """What a recording holds: header profiles and each robot's samples as columns."""

    path: str
    created: str | None
    profiles: dict[str, Profile]
    robots: dict[str, Columns]
    skipped: Counter = field(default_factory=Counter)
    warnings: list[str] = field(default_factory=list)

    @property
    def message_count(self) -> int:
        return sum(len(c) for c in self.robots.values())


def _open(path: str) -> tuple[BinaryIO, BinaryIO]:
    """(decompressed stream, raw file) for progress by raw bytes read."""
    try:
        raw = open(path, "rb")
    except FileNotFoundError:
        raise RecordingError(f"{path}: no such file") from None
    except OSError as exc:
        raise RecordingError(f"{path}: cannot read: {exc.strerror}") from exc
    magic = raw.read(2)
    raw.seek(0)
    if magic == GZIP_MAGIC:
        return gzip.GzipFile(fileobj=raw, mode="rb"), raw
    return raw, raw


def _parse_header(line: bytes, path: str) -> tuple[str | None, dict[str, Profile]] | None:
    """The header's (created, profiles), or None when the line is not a header."""
    try:
        obj = msgspec.json.decode(line)
    except msgspec.MsgspecError:
        return None
    if not isinstance(obj, dict) or "recording" not in obj:
        return None
    if obj["recording"] != RECORDING_VERSION:
        raise RecordingError(f"{path}: recording format {obj['recording']!r} is not supported (expected {RECORDING_VERSION})")
    tables = obj.get("profiles", {})
    if not isinstance(tables, dict):
        raise RecordingError(f"{path}: header 'profiles' must be an object of robot name -> profile")
    profiles = {}
    for robot, table in tables.items():
        if not isinstance(table, dict):
            raise RecordingError(f"{path}: header profile for {robot!r} must be an object")
        try:
            profiles[robot] = profile_from_table(table, f"{path} header profile {robot!r}")
        except ProfileError as exc:
            raise RecordingError(str(exc)) from exc
    created = obj.get("created")
    return (created if isinstance(created, str) else None), profiles


class _Accumulator:
    """Decoded samples grouped per robot, turned into columns chunk by chunk."""

    def __init__(self, ticks_length: dict[str, int]) -> None:
        self.ticks_length = dict(ticks_length)
        self.parts: dict[str, list[Columns]] = defaultdict(list)
        self.skipped: Counter = Counter()
        self.first_failure: str | None = None

    def fail(self, failure: Failure, line_no: int | None, count: int = 1) -> None:
        self.skipped[failure.reason] += count
        if self.first_failure is None:
            where = f"line {line_no}: " if line_no is not None else ""
            self.first_failure = f"{where}{failure}"

    def add(self, samples: list[Sample]) -> None:
        groups: dict[str, list[Sample]] = defaultdict(list)
        for s in samples:
            groups[s.robot].append(s)
        for robot, group in groups.items():
            n_wheels = self.ticks_length.setdefault(robot, len(group[0].ticks))
            good = [s for s in group if len(s.ticks) == n_wheels]
            if len(good) != len(group):
                detail = f"robot {robot!r} expects {n_wheels} counts per message"
                self.fail(Failure(Reason.WRONG_TICKS_LENGTH, detail), None, len(group) - len(good))
            if good:
                self.parts[robot].append(columns_from_samples(good, n_wheels))

    def decode_chunk(self, chunk: bytes, first_line_no: int) -> None:
        try:
            self.add(_lines.decode_lines(chunk))
            return
        except msgspec.MsgspecError:
            pass
        good: list[Sample] = []
        for offset, line in enumerate(chunk.split(b"\n")):
            if not line.strip():
                continue
            result = decode_message(line)
            if isinstance(result, Sample):
                good.append(result)
            else:
                self.fail(result, first_line_no + offset)
        self.add(good)


def read_recording(
    path: str | Path, ticks_length: dict[str, int] | None = None, progress: Progress | None = None
) -> RecordingData:
    """Read a whole recording (plain or gzip, with or without header).

    ``ticks_length`` gives the expected number of counts per robot (from the
    profiles in use); messages of another length are skipped and counted.
    The garbage collector is paused during the bulk decode: the decoded
    objects hold no cycles, and collection passes over them cost more than
    the decode itself (measured in DESIGN.md).
    """
    path = str(path)
    stream, raw = _open(path)
    total = Path(path).stat().st_size
    warnings: list[str] = []
    created: str | None = None
    profiles: dict[str, Profile] = {}
    acc: _Accumulator | None = None
    line_no = 1
    pending = b""
    first = True
    truncated_stream = False
    gc_was_enabled = gc.isenabled()
    gc.disable()
    try:
        with stream, raw:
            while True:
                try:
                    block = stream.read(_CHUNK_BYTES)
                except (EOFError, zlib.error, gzip.BadGzipFile) as exc:
                    if first and not pending:
                        raise RecordingError(f"{path}: not a readable gzip file ({exc})") from exc
                    truncated_stream, block = True, b""
                if not block:
                    break
                data = pending + block
                cut = data.rfind(b"\n")
                if cut < 0:
                    pending = data
                    continue
                body, pending = data[: cut + 1], data[cut + 1 :]
                if first:
                    first = False
                    head, _, body = body.partition(b"\n")
                    header = _parse_header(head, path)
                    if header is not None:
                        created, header_profiles = header
                        profiles.update(header_profiles)
                        body_start = 2
                    else:
                        body, body_start = head + b"\n" + body, 1
                    lengths = {name: len(p.wheels) for name, p in profiles.items()}
                    lengths.update(ticks_length or {})
                    acc = _Accumulator(lengths)
                    line_no = body_start
                acc.decode_chunk(body, line_no)
                line_no += body.count(b"\n")
                if progress is not None:
                    progress(raw.tell(), total)
            if pending.strip():
                if acc is None:
                    header = _parse_header(pending, path)
                    if header is not None:
                        raise RecordingError(f"{path}: the recording has a header but no messages")
                    acc = _Accumulator(ticks_length or {})
                result = decode_message(pending)
                if isinstance(result, Sample):
                    acc.add([result])
                else:
                    warnings.append(f"skipped a truncated last line ({len(pending)} bytes): {result}")
            if truncated_stream:
                warnings.append("the compressed stream ends early (receiver killed mid-write?); read what was there")
    finally:
        if gc_was_enabled:
            gc.enable()
    if acc is None:
        raise RecordingError(f"{path}: empty recording")
    if acc.skipped:
        reasons = ", ".join(f"{reason} {count}" for reason, count in sorted(acc.skipped.items()))
        warnings.append(f"skipped {sum(acc.skipped.values())} bad messages ({reasons}); first: {acc.first_failure}")
    robots = {robot: concat_columns(parts) for robot, parts in acc.parts.items()}
    if not robots:
        raise RecordingError(f"{path}: no valid messages ({acc.first_failure or 'nothing but blank lines'})")
    return RecordingData(path, created, profiles, robots, acc.skipped, warnings)
