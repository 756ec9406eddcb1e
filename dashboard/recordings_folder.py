"""The recordings folder as the page sees it: the list of recordings, and a bounded read of one.

Owns what the page may open: a regular file directly in the folder (or a
symbolic link that stays inside it), named as the list names it, within the
size limits. The page sends a name, never a path; a name that is not a
plain file name, a link that leads out of the folder, a named pipe, a
device, a file too large, a line too long or a compressed stream that
grows too large are refused with one line (RecordingError), after a
bounded amount of work and memory. Never follows the page outside the
folder, never opens a file that is not regular, never blocks on one.
"""

from __future__ import annotations

import os
import stat
import tempfile
import zlib
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import BinaryIO, Callable, Iterator

from receiver.errors import PodwatchError, RecordingError
from receiver.formats.protocol import MAX_MESSAGE_BYTES
from receiver.formats.recording import GZIP_MAGIC, RecordingData, read_recording

MIB = 1024 * 1024
# A recording line is one wire message (at most 64 KiB) plus the recorder's
# ',"rx":<seconds>': anything longer is not a recording line.
RX_ROOM_BYTES = 64
_PIECE_BYTES = MIB  # decompressed and copied this much at a time: the read's memory stays near this
_OPEN_FLAGS = os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
_KINDS = ((stat.S_ISDIR, "a folder"), (stat.S_ISFIFO, "a named pipe"), (stat.S_ISCHR, "a device"),
          (stat.S_ISBLK, "a device"), (stat.S_ISSOCK, "a socket"))


@dataclass(frozen=True)
class Limits:
    """What the page opens at most. A replay holds about 1 kB of memory per message
    (about 4 MB per MB of recording), so 128 MB keeps a laptop's memory for the rest.
    """

    file_bytes: int = 128 * MIB  # the file as it is on disk
    data_bytes: int = 128 * MIB  # the recording once decompressed
    line_bytes: int = MAX_MESSAGE_BYTES + RX_ROOM_BYTES


@dataclass(frozen=True)
class Entry:
    """One recording in the folder: its name, size on disk (bytes) and last change (s since the epoch)."""

    name: str
    size: int
    modified: float

    @property
    def label(self) -> str:
        """How the list shows it: name, size in MB, day and time of its last change."""
        when = datetime.fromtimestamp(self.modified).strftime("%Y-%m-%d %H:%M")
        return f"{self.name} \u00b7 {self.size / 1e6:.1f} MB \u00b7 {when}"


def _inside(path: Path, root: Path) -> bool:
    """True when ``path``, all links followed, is in ``root`` (``root`` already resolved)."""
    try:
        return path.resolve(strict=True).is_relative_to(root)
    except (OSError, RuntimeError):  # gone, unreadable, or a loop of links
        return False


def list_recordings(folder: Path, most: int = 200) -> list[Entry]:
    """The regular files of ``folder`` the page may open, newest first (at most ``most``).

    Hidden files, folders, pipes, devices and links that lead out of the
    folder are left out; a missing folder lists nothing.
    """
    try:
        root = folder.resolve(strict=True)
        scan = list(os.scandir(root))
    except OSError:
        return []
    found = []
    for entry in scan:
        if entry.name.startswith("."):
            continue
        try:
            info = entry.stat()  # follows a link: what it leads to must be a regular file
        except OSError:
            continue
        if not stat.S_ISREG(info.st_mode):
            continue
        if entry.is_symlink() and not _inside(Path(entry.path), root):
            continue
        found.append(Entry(entry.name, info.st_size, info.st_mtime))
    found.sort(key=lambda e: (-e.modified, e.name))
    return found[:most]


def _kind(mode: int) -> str:
    return next((what for test, what in _KINDS if test(mode)), "not a regular file")


def open_in_folder(folder: Path, name: str, limits: Limits = Limits()) -> BinaryIO:
    """The file ``name`` of ``folder``, opened for reading, once it is known to be a
    regular file inside the folder and within ``limits.file_bytes``; else RecordingError.
    """
    if not name or name in (".", "..") or any(c in name for c in "/\\\0") or os.path.basename(name) != name:
        raise RecordingError(f"{name!r} is not the name of a file in the recordings folder")
    try:
        root = folder.resolve(strict=True)
    except OSError:
        raise RecordingError(f"the recordings folder {folder} does not exist") from None
    path = root / name
    if not _inside(path, root):
        raise RecordingError(f"{name}: not in the recordings folder {root} (missing, or a link that leads out of it)")
    real = path.resolve(strict=True)
    # Looked at before it is opened: opening a named pipe waits for a writer, and
    # opening a device can have effects of its own.
    mode = os.stat(real).st_mode
    if not stat.S_ISREG(mode):
        raise RecordingError(f"{name}: {_kind(mode)}, not a recording file")
    try:
        fd = os.open(real, _OPEN_FLAGS | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        raise RecordingError(f"{name}: cannot read: {exc.strerror}") from exc
    raw = os.fdopen(fd, "rb")
    info = os.fstat(fd)  # what was opened, should it have changed since the check
    if not stat.S_ISREG(info.st_mode) or info.st_size > limits.file_bytes:
        raw.close()
        if not stat.S_ISREG(info.st_mode):
            raise RecordingError(f"{name}: {_kind(info.st_mode)}, not a recording file")
        raise RecordingError(f"{name}: {info.st_size / MIB:.1f} MiB on disk, over the page's limit of "
                             f"{limits.file_bytes / MIB:g} MiB (podwatch recompute or replay reads it)")
    return raw


class _Inflate:
    """The decompressed bytes of a gzip file (every member), ``piece_bytes`` at most at a time.

    zlib parses the headers and inflates in C, with a bound on each output,
    so a crafted file costs no more than its decompressed bytes. A stream
    cut short (a recording still being written) ends quietly and sets
    ``cut``; a corrupt one raises zlib.error.
    """

    def __init__(self, raw: BinaryIO, piece_bytes: int) -> None:
        self.raw, self.piece_bytes = raw, piece_bytes
        self.cut = False

    def __iter__(self) -> Iterator[bytes]:
        inflater = zlib.decompressobj(wbits=31)
        pending = b""
        started = False  # a member is under way
        while True:
            if not pending:
                pending = self.raw.read(self.piece_bytes)
                if not pending:
                    self.cut = started
                    return
            started = True
            piece = inflater.decompress(pending, self.piece_bytes)
            pending = inflater.unconsumed_tail
            if piece:
                yield piece
            if inflater.eof:
                pending = inflater.unused_data.lstrip(b"\0")  # members may be padded with zeros
                inflater = zlib.decompressobj(wbits=31)
                started = False


class _LineCheck:
    """Counts lines across pieces and refuses the first one over ``limit`` bytes.

    Creates no object per line (a piece of a million empty lines costs a
    few scans of it): a line over the limit holds a whole block of
    limit/2 bytes with no newline, so only such blocks are looked at closely.
    """

    def __init__(self, name: str, limit: int) -> None:
        self.name, self.limit = name, limit
        self.lines = 0  # complete lines so far
        self.run = 0  # bytes of the line not yet ended

    def feed(self, piece: bytes) -> None:
        """Take the next piece of the file; RecordingError at a line over the limit."""
        first = piece.find(b"\n")
        if first < 0:
            self.run += len(piece)
            self._check(self.run, lambda: self.lines + 1)
            return
        self._check(self.run + first, lambda: self.lines + 1)
        last = piece.rfind(b"\n")
        step = max(self.limit // 2, 1)
        for start in range(first + 1, last, step):
            if piece.find(b"\n", start, start + step) < 0:
                begin = piece.rfind(b"\n", 0, start) + 1
                self._check(piece.find(b"\n", start) - begin, lambda: self.lines + piece.count(b"\n", 0, begin) + 1)
        self.lines += piece.count(b"\n")
        self.run = len(piece) - last - 1
        self._check(self.run, lambda: self.lines + 1)

    def _check(self, length: int, number: Callable[[], int]) -> None:
        if length > self.limit:
            raise RecordingError(f"{self.name}: line {number()} is longer than {self.limit} bytes "
                                 f"(a recorded message is at most {MAX_MESSAGE_BYTES // 1024} KiB): not a recording")


def copy_checked(raw: BinaryIO, out: BinaryIO, name: str, limits: Limits = Limits()) -> list[str]:
    """Copy the (decompressed) recording in ``raw`` to ``out``, checking every line's length
    and the total size as it goes; returns warnings. RecordingError at the first limit passed.
    """
    head = raw.read(2)
    raw.seek(0)
    compressed = head == GZIP_MAGIC
    inflate = _Inflate(raw, _PIECE_BYTES)
    pieces = iter(inflate) if compressed else iter(lambda: raw.read(_PIECE_BYTES), b"")
    lines = _LineCheck(name, limits.line_bytes)
    total = 0
    warnings = []
    try:
        for piece in pieces:
            total += len(piece)
            if total > limits.data_bytes:
                raise RecordingError(f"{name}: more than {limits.data_bytes / MIB:g} MiB once decompressed, over "
                                     "the page's limit (podwatch recompute or replay reads it)")
            lines.feed(piece)
            out.write(piece)
    except zlib.error as exc:
        if not total:
            raise RecordingError(f"{name}: not a readable gzip file ({exc})") from exc
        warnings.append(f"the compressed stream is damaged after {total} bytes; read what came before")
    if inflate.cut:
        warnings.append("the compressed stream ends early (receiver killed mid-write?); read what was there")
    return warnings


# What a read from the folder can fail with, for a caller that reports it in one line (why_unreadable).
UNREADABLE = (PodwatchError, OSError, MemoryError)


def why_unreadable(exc: BaseException) -> str:
    """One of UNREADABLE in one line: our own error as it says, a system error's reason, or memory."""
    if isinstance(exc, MemoryError):
        return "not enough memory"
    if isinstance(exc, OSError):
        return exc.strerror or str(exc)
    return str(exc)


def read_from_folder(folder: Path, name: str, ticks_length: dict[str, int] | None = None,
                     limits: Limits = Limits()) -> RecordingData:
    """The recording ``name`` of ``folder``, read within ``limits``; RecordingError otherwise.

    The checked copy goes to a private temporary folder, and the reader reads
    that copy: it sees a plain file of short lines, whatever the folder held
    (and however the file changes meanwhile).
    """
    shown = str(folder / name)
    with open_in_folder(folder, name, limits) as raw, tempfile.TemporaryDirectory(prefix="podwatch-open-") as private:
        copy = os.path.join(private, "recording.jsonl")
        with open(copy, "wb") as out:
            warnings = copy_checked(raw, out, name, limits)
        try:
            data = read_recording(copy, ticks_length)
        except RecordingError as exc:
            raise RecordingError(str(exc).replace(copy, shown)) from exc
    data.path = shown
    data.warnings[:0] = warnings
    return data
