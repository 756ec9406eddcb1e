"""Bulk decoding of message lines into per-robot columns, on two cores when large.

Owns the fast path of reading recordings: JSON lines -> validated samples
(msgspec) -> numpy columns per robot, with bad lines counted by reason.
Decoding and column building are most of the cost of `recompute`, and they
split cleanly by block, so large inputs go to two worker processes. Never
opens files itself: it is given blocks of complete lines.
"""

from __future__ import annotations

import gc
import multiprocessing
import os
import threading
from collections import Counter, defaultdict
from contextlib import contextmanager
from multiprocessing.pool import Pool
from operator import attrgetter
from typing import Iterable, Iterator

import msgspec

from receiver.protocol import Failure, Reason, Sample, decode_message, split_bad_names
from receiver.recompute import Columns, columns_from_samples

PARALLEL_FROM_BYTES = 48 * 1024 * 1024  # below this, starting workers costs more than it saves
WORKERS = 2
_lines = msgspec.json.Decoder(Sample)


class Decoded:
    """Columns per robot in arrival order, and what was skipped and why."""

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
        robots = set(map(attrgetter("robot"), samples))
        if len(robots) == 1:  # the common case: no regrouping pass
            groups = {robots.pop(): samples}
        else:
            groups = defaultdict(list)
            for s in samples:
                groups[s.robot].append(s)
        for robot, group in groups.items():
            n_wheels = self.ticks_length.setdefault(robot, len(group[0].ticks))
            if set(map(len, map(attrgetter("ticks"), group))) != {n_wheels}:
                good = [s for s in group if len(s.ticks) == n_wheels]
                self._wrong_length(robot, n_wheels, len(group) - len(good))
                group = good
            if group:
                self.parts[robot].append(columns_from_samples(group, n_wheels))

    def _wrong_length(self, robot: str, n_wheels: int, count: int) -> None:
        detail = f"robot {robot!r} expects {n_wheels} counts per message"
        self.fail(Failure(Reason.WRONG_TICKS_LENGTH, detail), None, count)

    def decode_block(self, block: bytes, first_line_no: int) -> None:
        try:
            samples = _lines.decode_lines(block)
        except msgspec.MsgspecError:
            pass
        else:
            samples, failures = split_bad_names(samples)
            for failure in failures:
                self.fail(failure, None)
            self.add(samples)
            return
        good: list[Sample] = []
        for offset, line in enumerate(block.split(b"\n")):
            if not line.strip():
                continue
            result = decode_message(line)
            if isinstance(result, Sample):
                good.append(result)
            else:
                self.fail(result, first_line_no + offset)
        self.add(good)



class Tally:
    """Per-block results checked against each other: counts per message and skips."""

    def __init__(self, ticks_length: dict[str, int]) -> None:
        self.ticks_length = dict(ticks_length)
        self.skipped: Counter = Counter()
        self.first_failure: str | None = None

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
        if self.first_failure is None:
            self.first_failure = block.first_failure
        return kept


def _decode_job(job: tuple[bytes, int, dict[str, int]]) -> Decoded:
    block, first_line_no, ticks_length = job
    decoded = Decoded(ticks_length)
    decoded.decode_block(block, first_line_no)
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
    with multiprocessing.get_context("fork").Pool(WORKERS) as pool:
        yield pool


def decode_blocks(
    blocks: Iterable[tuple[bytes, int]], ticks_length: dict[str, int], pool: Pool | None
) -> Iterator[Decoded]:
    """Decode blocks of lines (each with the number of its first line), yielding results in order.

    The garbage collector is paused meanwhile (and in the workers, which
    inherit that): the decoded objects hold no cycles, and collection passes
    over them cost more than the decode itself (measured in DESIGN.md).
    """
    gc_was_enabled = gc.isenabled()
    gc.disable()
    try:
        if pool is not None:
            jobs = ((block, line_no, ticks_length) for block, line_no in blocks)
            yield from pool.imap(_decode_job, jobs)
        else:
            for block, line_no in blocks:
                yield _decode_job((block, line_no, ticks_length))
    finally:
        if gc_was_enabled:
            gc.enable()
