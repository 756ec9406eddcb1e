"""Bulk decoding of message lines into per-robot columns, on two cores when large.

Owns the fast path of reading recordings: JSON lines -> validated samples
(msgspec) -> numpy columns per robot, with bad lines counted by reason.
Decoding and column building are most of the cost of `recompute`, and they
split cleanly by block, so large inputs go to two worker processes. A block
is given either as bytes of complete lines or, for an uncompressed file, as
a byte range of complete lines that the worker reads itself (nothing large
crosses the pipe to it). Line numbers are counted by the caller, who sees
the blocks in order.
"""

from __future__ import annotations

import ctypes
import gc
import multiprocessing
import os
import threading
from collections import Counter, defaultdict, deque
from contextlib import contextmanager
from multiprocessing.pool import Pool
from operator import attrgetter
from typing import Iterable, Iterator

import msgspec

from receiver.formats.protocol import Failure, Reason, Sample, WithOwnFields, decode_message, split_bad_names
from receiver.odometry.columns import Columns, columns_from_samples

PARALLEL_FROM_BYTES = 48 * 1024 * 1024  # below this, starting workers costs more than it saves
# glibc's mallopt parameters (malloc.h) and our values: every temporary of a
# block (up to a few tens of MB) is taken from and returned to the heap.
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3
_KEEP_BELOW_BYTES = 64 * 1024 * 1024
_TRIM_ABOVE_BYTES = 256 * 1024 * 1024
WORKERS = 2
LOOKAHEAD = 2 * WORKERS  # blocks on the workers at a time
_lines = msgspec.json.Decoder(WithOwnFields)  # recordings keep the teams' own fields; the columns skip them
_data = attrgetter("data")


class Decoded:
    """One block's columns per robot in arrival order, and what was skipped and why.

    ``first_failure`` holds the first bad line's index within the block (None
    when it is not one line) with its failure; ``lines`` counts the block's lines.
    """

    def __init__(self, ticks_length: dict[str, int]) -> None:
        self.ticks_length = dict(ticks_length)
        self.parts: dict[str, list[Columns]] = defaultdict(list)
        self.skipped: Counter = Counter()
        self.first_failure: tuple[int | None, Failure] | None = None
        self.lines = 0

    def fail(self, failure: Failure, line_index: int | None, count: int = 1) -> None:
        """Count ``count`` messages refused for ``failure``; the first is kept with its line's
        index in the block (None when it is not one line).
        """
        self.skipped[failure.reason] += count
        if self.first_failure is None:
            self.first_failure = (line_index, failure)

    def add(self, samples: list[Sample], with_signals: bool | None = None) -> None:
        """Append valid samples as columns per robot; messages whose number of counts differs
        from the robot's (its ``ticks_length``, else its first message's) are counted as refused.
        ``with_signals`` False says no sample carries "data" (None: look).
        """
        robots = set(map(attrgetter("robot"), samples))
        if len(robots) == 1:  # the common case: no regrouping pass
            groups = {robots.pop(): samples}
        else:
            groups = defaultdict(list)
            for sample in samples:
                groups[sample.robot].append(sample)
        for robot, group in groups.items():
            n_wheels = self.ticks_length.setdefault(robot, len(group[0].ticks))
            ticks = list(map(attrgetter("ticks"), group))
            if set(map(len, ticks)) != {n_wheels}:
                group = [s for s in group if len(s.ticks) == n_wheels]
                self._wrong_length(robot, n_wheels, len(ticks) - len(group))
                ticks = None
            if group:
                self.parts[robot].append(columns_from_samples(group, n_wheels, ticks, with_signals))

    def _wrong_length(self, robot: str, n_wheels: int, count: int) -> None:
        detail = f"robot {robot!r} expects {n_wheels} counts per message"
        self.fail(Failure(Reason.WRONG_TICKS_LENGTH, detail), None, count)

    def decode_block(self, block: bytes) -> None:
        """Decode a block of complete lines into this result: all at once, or line by line
        when any line fails.

        A line the decoder cannot take costs that line alone, whatever goes
        wrong with it: a recording must stay readable. Lines are held to the
        wire's rules but for nesting, which only the decoder's own limit
        bounds here (``protocol.decode_message``).
        """
        self.lines = block.count(b"\n")
        try:
            samples = _lines.decode_lines(block)
        except Exception:  # any failure sends the block line by line, whatever it is
            samples = None
        if samples is not None and (block.isascii() or _is_utf8(block)):
            with_signals = any(map(_data, samples))  # one pass: signals are rare, and then every part has them
            samples, failures = split_bad_names(samples, with_signals)
            for failure in failures:
                self.fail(failure, None)
            self.add(samples, with_signals)
            return
        good: list[Sample] = []
        for index, line in enumerate(block.split(b"\n")):
            if not line.strip():
                continue
            result = decode_line(line)
            if isinstance(result, Sample):
                good.append(result)
            else:
                self.fail(result, index)
        self.add(good)


def _is_utf8(data: bytes) -> bool:
    try:
        data.decode("utf-8")
    except UnicodeDecodeError:
        return False
    return True


def decode_line(line: bytes) -> Sample | Failure:
    """One recording line: a sample, or why it is skipped; never raises."""
    try:
        return decode_message(line, check_nesting=False)
    except Exception as exc:  # a line the decoder chokes on is skipped, never a traceback
        return Failure(Reason.NOT_JSON, f"the decoder failed on this line ({type(exc).__name__})")


class Tally:
    """Per-block results, taken in file order: counts per message, skips, line numbers."""

    def __init__(self, ticks_length: dict[str, int], first_line_no: int = 1) -> None:
        self.ticks_length = dict(ticks_length)
        self.skipped: Counter = Counter()
        self.first_failure: str | None = None
        self.line_no = first_line_no  # of the next block's first line

    def accept(self, block: Decoded) -> list[tuple[str, Columns]]:
        """The block's columns per robot, dropping any whose width disagrees with earlier blocks."""
        kept = []
        for robot, parts in block.parts.items():
            for part in parts:
                n_wheels = self.ticks_length.setdefault(robot, part.ticks.shape[1])
                if part.ticks.shape[1] == n_wheels:
                    kept.append((robot, part))
                else:
                    self.skipped[Reason.WRONG_TICKS_LENGTH] += len(part)
        self.skipped.update(block.skipped)
        if self.first_failure is None and block.first_failure is not None:
            index, failure = block.first_failure
            self.first_failure = f"{failure}" if index is None else f"line {self.line_no + index}: {failure}"
        self.line_no += block.lines
        return kept


Block = bytes | tuple[str, int, int]  # complete lines, or (path, start, end) of an uncompressed file


def read_range(path: str, start: int, end: int) -> bytes:
    """Bytes [start, end) of the file at ``path``: a worker's block of an uncompressed recording."""
    with open(path, "rb") as fh:
        return os.pread(fh.fileno(), end - start, start)


def _decode_job(job: tuple[Block, dict[str, int]]) -> Decoded:
    block, ticks_length = job
    if not isinstance(block, bytes):
        block = read_range(*block)
    decoded = Decoded(ticks_length)
    decoded.decode_block(block)
    return decoded


@contextmanager
def worker_pool(path: str) -> Iterator[Pool | None]:
    """Two forked worker processes for a file big enough to be worth them, else None.

    fork: the workers start at once with everything imported; so only from a
    process with no other threads, and only where there are two cores.
    """
    try:
        size = os.path.getsize(path)
    except OSError:
        size = 0  # the reader reports a missing or unreadable file itself
    wanted = size >= PARALLEL_FROM_BYTES and (os.cpu_count() or 1) > 1 and threading.active_count() == 1
    if not wanted:
        yield None
        return
    keep_freed_memory()
    # The workers only decode: with no reference cycles to find, the garbage
    # collector would only walk the decoded lists again and again.
    with multiprocessing.get_context("fork").Pool(WORKERS, initializer=gc.disable) as pool:
        yield pool


def keep_freed_memory() -> bool:
    """Ask the C allocator to keep freed memory for reuse; False where it cannot.

    By default glibc maps each large allocation afresh and unmaps it when
    freed, so numpy's per-block temporaries and columns would be faulted in and
    zeroed by the kernel again for every block. Process-wide and inherited by
    forked workers; meant for the command-line process.
    """
    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):  # not glibc (musl, macOS, Windows): leave the allocator alone
        return False
    return bool(mallopt(_M_MMAP_THRESHOLD, _KEEP_BELOW_BYTES)) and bool(mallopt(_M_TRIM_THRESHOLD, _TRIM_ABOVE_BYTES))


def decode_blocks(blocks: Iterable[Block], ticks_length: dict[str, int], pool: Pool | None) -> Iterator[Decoded]:
    """Decode blocks of complete lines, yielding results in order.

    With a pool, up to LOOKAHEAD blocks are on the workers at a time: enough
    to keep both busy while the caller works on the last result, few enough
    that memory stays bounded and that any other work the caller gives the
    pool is not queued behind the whole file. The garbage collector is
    paused meanwhile (and in the workers, which inherit that): the decoded
    objects hold no cycles, and collection passes over them cost more than
    the decode itself (measured in DESIGN.md).
    """
    gc_was_enabled = gc.isenabled()
    gc.disable()
    try:
        jobs = ((block, ticks_length) for block in blocks)
        if pool is None:
            yield from map(_decode_job, jobs)
            return
        pending: deque = deque()
        for job in jobs:
            pending.append(pool.apply_async(_decode_job, (job,)))
            if len(pending) > LOOKAHEAD:
                yield pending.popleft().get()
        while pending:
            yield pending.popleft().get()
    finally:
        if gc_was_enabled:
            gc.enable()
