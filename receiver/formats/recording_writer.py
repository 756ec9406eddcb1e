"""Writing a live recording: one JSON line per received message, as received, plus "rx".

Owns the writer side of the recording contract (DESIGN.md): the header
line with the profiles, then each message's bytes as received with the
receiver's "rx" added as the last key (or, for a simulation or replay with
no bytes, the message encoded). It reads the clock only to date the
header: the caller stamps "rx" and says when it is time to flush.
"""

from __future__ import annotations

import errno
import gzip
import os
from datetime import datetime, timezone
from pathlib import Path
from typing import BinaryIO, Iterable, Sequence

import msgspec

from receiver.errors import RecordingError, RecordingExistsError
from receiver.formats.protocol import Sample
from receiver.formats.recording import header_line
from receiver.odometry.robot import Profile

# Buffered lines go to the file object once they pass this size, so that a
# burst between two flushes costs one large write instead of many small ones.
_WRITE_BYTES = 1024 * 1024
FLUSH_INTERVAL_S = 0.2  # the longest a received message waits in memory when flush(now) is called often
# zlib level 1, not the default 6: several times faster for slightly larger
# files, and live recording must leave the receiver time.
_GZIP_LEVEL = 1
# A raw line break can only stand between a message's tokens (JSON strings hold
# none), so a space in its place keeps the message and keeps it on one line.
_LINE_BREAKS_TO_SPACES = bytes.maketrans(b"\r\n", b"  ")
_CR, _LF = ord("\r"), ord("\n")  # an int operand: ``in`` on bytes takes a quarter of the time it takes with b"\n"


class _WholeWrites:
    """A file descriptor that writes each piece whole or raises.

    A plain file object (and gzip on top of one) may write part of a piece
    when the disk fills and drop the rest unseen; this loops over short
    writes, so the bytes on disk are always a prefix of the stream.
    """

    def __init__(self, fd: int, name: str) -> None:
        self._fd = fd
        self.name = name  # gzip puts the file's name in its header, as with a plain file object
        self.closed = False

    def write(self, data: bytes | bytearray | memoryview) -> int:
        """Write every byte of ``data``; an OSError (disk full, device gone) leaves a prefix on disk."""
        if self.closed:  # the descriptor's number may belong to another file by now
            raise OSError(errno.EBADF, "the recording was closed")
        written, size = 0, len(data)
        # Views released even when a write fails: one left alive (by the error's
        # traceback) would keep the caller's bytearray from ever changing size.
        with memoryview(data) as whole:
            while written < size:
                with whole[written:] as rest:
                    written += os.write(self._fd, rest)
        return size

    def flush(self) -> None:
        """Nothing is buffered here."""

    def close(self) -> None:
        """Close the descriptor; a second call does nothing."""
        if not self.closed:
            self.closed = True
            os.close(self._fd)


def _exists(path: str) -> RecordingExistsError:
    return RecordingExistsError(f"{path}: already exists; podwatch never overwrites a recording: give another name")


def refuse_existing(path: str | Path) -> None:
    """RecordingExistsError when ``path`` is already there: a check before a long start,
    which creating the file exclusively (``RecordingWriter``) makes certain."""
    if os.path.lexists(path):
        raise _exists(str(path))


def create_exclusively(path: str) -> int:
    """A new file at ``path``, opened for writing; RecordingExistsError when it exists,
    RecordingError when it cannot be made."""
    try:
        return os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_CLOEXEC, 0o644)
    except FileExistsError:
        raise _exists(path) from None
    except OSError as exc:
        raise RecordingError(f"{path}: cannot write: {exc.strerror}") from exc


class RecordingWriter:
    """Appends received messages to a recording, one JSON line each plus "rx".

    The header (with the profiles known at open) is written and flushed at
    once. A message whose bytes as received are given is written as those
    bytes with "rx" added as its last key, so fields this receiver does not
    know are kept; others (a simulation's) are encoded in bulk with msgspec.
    Lines are buffered; ``flush(now)`` pushes them to the operating system at
    most every FLUSH_INTERVAL_S of the caller's clock, and ``close`` pushes the
    rest. A path ending in ``.gz`` (or ``compress=True``) writes gzip,
    sync-flushed so that a file cut by a killed receiver still decompresses up
    to the last flush. There is no fsync: a killed process loses nothing the
    operating system was given. The file is created exclusively: an existing
    one is refused with a RecordingError. An OSError from ``write``,
    ``flush`` or ``close`` reaches the caller, who then calls ``abandon``.
    """

    def __init__(
        self,
        path: str | Path,
        profiles: Iterable[Profile] = (),
        compress: bool | None = None,
        created: str | None = None,
    ) -> None:
        self.path = str(path)
        self.compress = self.path.endswith(".gz") if compress is None else compress
        if created is None:
            created = datetime.now(timezone.utc).isoformat(timespec="milliseconds")
        raw = _WholeWrites(create_exclusively(self.path), self.path)
        # mtime=0 keeps the gzip bytes reproducible; "created" carries the time.
        self._file: BinaryIO | _WholeWrites = (
            gzip.GzipFile(fileobj=raw, mode="wb", compresslevel=_GZIP_LEVEL, mtime=0) if self.compress else raw
        )
        self._raw = raw
        self._encoder = msgspec.json.Encoder()
        self._encode_into = self._encoder.encode_into
        # One growing buffer: a line is appended in place, piece by piece,
        # with no bytes object of its own (see write).
        self._pending = bytearray()
        self._last_flush: float | None = None
        self.message_count = 0
        try:
            self._file.write(header_line(profiles, created))
            self._file.flush()
        except OSError as exc:
            self.abandon()
            raise RecordingError(f"{self.path}: cannot write: {exc.strerror}") from exc

    def write(
        self, samples: Sequence[Sample], rx: float | None = None, raws: Sequence[bytes | None] | None = None
    ) -> None:
        """Buffer messages; ``rx`` (receiver wall clock, s since the epoch) is stamped on each.

        Without ``rx`` the samples keep the rx they carry (a replay or a
        simulation that stamped its own). ``raws``, one per sample, are the
        messages' bytes as received (``protocol.decode_keeping_raw``), or
        None where a sample has none.
        """
        if not samples:
            return
        if rx is not None:
            for sample in samples:
                sample.rx = rx
        pending = self._pending
        if raws is None:
            pending += self._encoder.encode_lines(samples)
        else:
            # Each raw object with ',"rx":<rx>' before its closing brace: the receiver's
            # rx comes last, so it wins over any "rx" the robot sent (a repeated key
            # decodes to its last value). Put together in the buffer by an inline,
            # indexing loop: at one message per call this is cheaper than encoding.
            assert len(raws) == len(samples)
            encode_into = self._encode_into
            k = 0
            for raw in raws:
                sample = samples[k]
                k += 1
                if raw is None:
                    pending += self._encoder.encode_lines((sample,))
                    continue
                raw = raw.strip()  # the same object when there is nothing to strip
                if _LF in raw or _CR in raw:
                    raw = raw.translate(_LINE_BREAKS_TO_SPACES)
                pending += raw
                del pending[-1]  # the closing brace
                pending += b',"rx":'
                encode_into(sample.rx, pending, -1)
                pending += b"}\n"
        self.message_count += len(samples)
        if len(pending) >= _WRITE_BYTES:
            self._drain()

    def flush(self, now: float | None = None) -> bool:
        """Push buffered lines to the operating system; True when it did.

        With ``now`` (seconds on any clock the caller keeps using, such as
        time.monotonic()) it flushes only when FLUSH_INTERVAL_S has passed
        since the last flush, so it can be called after every received batch.
        """
        if now is not None:
            if self._last_flush is not None and now - self._last_flush < FLUSH_INTERVAL_S:
                return False
            self._last_flush = now
        self._drain()
        self._file.flush()
        return True

    def close(self) -> None:
        """Write out what is buffered and close the file; a second call does nothing."""
        if self._raw.closed:
            return
        try:
            self._drain()
            self._file.close()
        finally:
            self._raw.close()

    def abandon(self) -> None:
        """Close the file without writing anything more (after a failed write, say):
        what is on disk stays as it is, a prefix of the stream that reads back."""
        self._pending = bytearray()
        self._raw.close()
        if self._file is not self._raw:
            try:
                self._file.close()  # gzip's trailer cannot reach the closed descriptor
            except OSError:
                pass

    def __enter__(self) -> RecordingWriter:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    def _drain(self) -> None:
        if self._pending:
            self._file.write(self._pending)
            self._pending.clear()
