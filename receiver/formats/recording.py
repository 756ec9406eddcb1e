"""Reading recordings (JSON Lines, optionally gzip) in bulk, fast.

Owns the reader side of the recording contract of DESIGN.md: a header line
with the profiles, then one wire message per line plus "rx"; also files of
bare messages with no header. Bad lines are skipped and counted by reason, a
truncated last line (the receiver was killed mid-write) is skipped with a
warning; a file with nothing valid is refused with one line. The writer is
recording_writer.py.
"""

from __future__ import annotations

import gzip
import itertools
import mmap
import os
import zlib
from collections import Counter
from dataclasses import dataclass, field
from multiprocessing.pool import Pool
from pathlib import Path
from typing import BinaryIO, Callable, Iterable, Iterator

import msgspec

from receiver.errors import ProfileError, RecordingError, describe
from receiver.formats import block_decoder
from receiver.formats.profile_toml import profile_from_table, profile_to_table
from receiver.formats.protocol import Sample
from receiver.odometry.columns import Columns, concat_columns
from receiver.odometry.robot import Profile, counts_per_message

RECORDING_VERSION = 1
# Blocks of a few MB: a block's decoded objects then fit in memory the small-object
# allocator still holds from the last, so fewer pages are faulted in afresh.
_CHUNK_BYTES = 4 * 1024 * 1024
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
        """Valid messages over every robot."""
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


def _read_block(stream: BinaryIO) -> tuple[bytes, Exception | None]:
    """Up to _CHUNK_BYTES of (decompressed) data, and the error that cut the stream short.

    Gathered from read1 pieces because GzipFile.read(n) discards everything it
    had decompressed when it meets the end of a cut gzip stream.
    """
    pieces: list[bytes] = []
    size = 0
    try:
        while size < _CHUNK_BYTES:
            piece = stream.read1(_CHUNK_BYTES - size)
            if not piece:
                break
            pieces.append(piece)
            size += len(piece)
    except (EOFError, zlib.error, gzip.BadGzipFile) as exc:
        return b"".join(pieces), exc
    return b"".join(pieces), None


def header_line(profiles: Iterable[Profile], created: str) -> bytes:
    """The recording's first line: format version, creation time and profiles by robot."""
    tables = {p.name: profile_to_table(p) for p in profiles}
    return msgspec.json.encode({"recording": RECORDING_VERSION, "created": created, "profiles": tables}) + b"\n"


def _parse_header(line: bytes, path: str) -> tuple[str | None, dict[str, Profile]] | None:
    """The header's (created, profiles), or None when the line is not a header."""
    try:
        obj = msgspec.json.decode(line)
    except (msgspec.MsgspecError, RecursionError):  # too deep for the decoder: a bad message line, not a header
        return None
    if not isinstance(obj, dict) or "recording" not in obj:
        return None
    if obj["recording"] != RECORDING_VERSION:
        raise RecordingError(
            f"{path}: recording format {describe(obj['recording'])} is not supported (expected {RECORDING_VERSION})"
        )
    tables = obj.get("profiles", {})
    if not isinstance(tables, dict):
        raise RecordingError(f"{path}: header 'profiles' must be an object of robot name -> profile")
    profiles = {}
    for robot, table in tables.items():
        if not isinstance(table, dict):
            raise RecordingError(f"{path}: header profile for {describe(robot)} must be an object")
        try:
            profiles[robot] = profile_from_table(table, f"{path} header profile {describe(robot)}")
        except ProfileError as exc:
            raise RecordingError(str(exc)) from exc
    created = obj.get("created")
    return (created if isinstance(created, str) else None), profiles


class _Lines:
    """Blocks of complete lines from a (decompressed) stream, header taken off.

    Iterating yields blocks of bytes; ``done_at`` gets the raw file offset
    reached by each block (for progress). Afterwards ``header``, ``tail`` (an
    unterminated last line) and ``cut`` (the error that ended a compressed
    stream early) tell what else was found.
    """

    def __init__(self, stream: BinaryIO, raw: BinaryIO, path: str) -> None:
        self.stream, self.raw, self.path = stream, raw, path
        self.header: tuple[str | None, dict[str, Profile]] | None = None
        self.first_line_no = 1
        self.done_at: list[int] = []
        self.tail = b""
        self.cut: Exception | None = None
        self.seen_any = False

    def __iter__(self) -> Iterator[bytes]:
        pending = b""
        first = True
        while True:
            block, cut = _read_block(self.stream)
            if cut is not None:
                if first and not pending and not block:
                    raise RecordingError(f"{self.path}: not a readable gzip file ({cut})") from cut
                self.cut = cut
            if not block:
                break
            self.seen_any = True
            data = pending + block
            end = data.rfind(b"\n")
            if end < 0:
                pending = data
                continue
            body, pending = data[: end + 1], data[end + 1 :]
            if first:
                first = False
                head, _, rest = body.partition(b"\n")
                self.header = _parse_header(head, self.path)
                if self.header is not None:
                    body, self.first_line_no = rest, 2
            self.done_at.append(self.raw.tell())
            yield body
        if first:
            self.tail = _check_lone_line(pending, self.path)
        else:
            self.tail = pending


class _Ranges:
    """Byte ranges of complete lines of an uncompressed file, for workers that read them themselves.

    The same findings as _Lines (header, tail, done_at), from a memory map:
    only the newlines at block boundaries are looked for here.
    """

    def __init__(self, raw: BinaryIO, path: str) -> None:
        self.raw, self.path = raw, path
        self.header: tuple[str | None, dict[str, Profile]] | None = None
        self.first_line_no = 1
        self.done_at: list[int] = []
        self.tail = b""
        self.cut: Exception | None = None
        self.seen_any = os.fstat(raw.fileno()).st_size > 0

    def __iter__(self) -> Iterator[tuple[str, int, int]]:
        if not self.seen_any:
            return
        with mmap.mmap(self.raw.fileno(), 0, access=mmap.ACCESS_READ) as mm:
            last = mm.rfind(b"\n") + 1  # the end of the last complete line
            if not last:
                self.tail = _check_lone_line(mm[:], self.path)
                return
            self.tail = mm[last:]
            start = mm.find(b"\n") + 1
            self.header = _parse_header(mm[: start - 1], self.path)
            if self.header is None:
                start = 0
            else:
                self.first_line_no = 2
            while start < last:
                end = mm.find(b"\n", min(start + _CHUNK_BYTES, last) - 1) + 1
                self.done_at.append(end)
                yield self.path, start, end
                start = end


def _check_lone_line(line: bytes, path: str) -> bytes:
    """A file of one unterminated line: refused if it is a header, else kept as the tail."""
    if line.strip() and _parse_header(line, path) is not None:
        raise RecordingError(f"{path}: the recording has a header but no messages")
    return line


class RecordingStream:
    """A recording read block by block: (robot, columns) pieces in arrival order.

    ``profiles`` and ``created`` are known once the stream is open;
    ``warnings`` and ``skipped`` are complete once it has been iterated to
    the end, which raises RecordingError if nothing valid was found. Each
    robot's pieces come in order, so a recompute can feed them as they come
    and memory stays bounded by the block size.
    """

    def __init__(
        self,
        path: str | Path,
        ticks_length: dict[str, int] | None = None,
        progress: Progress | None = None,
        pool: Pool | None = None,
    ) -> None:
        self.path = str(path)
        self._pool = pool  # decode on these workers (block_decoder.worker_pool) when given
        self._progress = progress
        self._stream, self._raw = _open(self.path)
        if pool is not None and self._stream is self._raw:  # uncompressed: the workers read their own ranges
            self._lines: _Lines | _Ranges = _Ranges(self._raw, self.path)
        else:
            self._lines = _Lines(self._stream, self._raw, self.path)
        self._blocks = iter(self._lines)
        try:
            self._first = next(self._blocks, None)
        except BaseException:
            self.close()
            raise
        header = self._lines.header
        self.created = header[0] if header else None
        self.profiles: dict[str, Profile] = header[1] if header else {}
        lengths = counts_per_message(self.profiles)
        lengths.update(ticks_length or {})
        self._tally = block_decoder.Tally(lengths, self._lines.first_line_no)
        self.warnings: list[str] = []

    @property
    def skipped(self) -> Counter:
        """Messages skipped so far, by Reason; complete once the stream is iterated to the end."""
        return self._tally.skipped

    def __iter__(self) -> Iterator[tuple[str, Columns]]:
        blocks = itertools.chain([] if self._first is None else [self._first], self._blocks)
        found = False
        lines = self._lines
        total = os.fstat(self._raw.fileno()).st_size
        decoded_blocks = block_decoder.decode_blocks(blocks, self._tally.ticks_length, self._pool)
        for k, decoded in enumerate(decoded_blocks):
            if self._progress is not None:
                self._progress(lines.done_at[k], total)
            for piece in self._tally.accept(decoded):
                found = True
                yield piece
        if lines.tail.strip():
            result = block_decoder.decode_line(lines.tail)
            if isinstance(result, Sample):
                tail = block_decoder.Decoded(self._tally.ticks_length)
                tail.add([result])
                for piece in self._tally.accept(tail):
                    found = True
                    yield piece
            else:
                self.warnings.append(f"skipped a truncated last line ({len(lines.tail)} bytes): {result}")
        if lines.cut is not None:
            self.warnings.append("the compressed stream ends early (receiver killed mid-write?); read what was there")
        if not lines.seen_any:
            raise RecordingError(f"{self.path}: empty recording")
        tally = self._tally
        if tally.skipped:
            reasons = ", ".join(f"{reason} {count}" for reason, count in sorted(tally.skipped.items()))
            self.warnings.append(f"skipped {sum(tally.skipped.values())} bad messages ({reasons}); first: {tally.first_failure}")
        if not found:
            raise RecordingError(f"{self.path}: no valid messages ({tally.first_failure or 'nothing but blank lines'})")

    def close(self) -> None:
        """Close the file; ``with RecordingStream(...)`` calls it."""
        self._stream.close()
        self._raw.close()

    def __enter__(self) -> RecordingStream:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()


def read_recording(
    path: str | Path, ticks_length: dict[str, int] | None = None, progress: Progress | None = None
) -> RecordingData:
    """Read a whole recording (plain or gzip, with or without header) into columns per robot.

    ``ticks_length`` gives the expected number of counts per robot (from the
    profiles in use); messages of another length are skipped and counted.
    """
    with block_decoder.worker_pool(str(path)) as pool:
        with RecordingStream(path, ticks_length, progress, pool) as stream:
            parts: dict[str, list[Columns]] = {}
            for robot, piece in stream:
                parts.setdefault(robot, []).append(piece)
    robots = {robot: concat_columns(pieces) for robot, pieces in parts.items()}
    return RecordingData(stream.path, stream.created, stream.profiles, robots, stream.skipped, stream.warnings)
