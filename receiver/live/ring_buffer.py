"""Column ring buffers that keep a time window of rows, in bounded memory.

Owns the storage of a session's recent history as numpy columns, in blocks
of a fixed number of rows. It grows by one block at a time and lets go of its
oldest block once every row in it is outside the window, or past the row cap,
so it never copies what it holds to grow (a copy of a full window stalls
every datagram behind it). A row, once written, is never written again (a
block let go is left to the garbage collector, not reused), so a ``Cut``
taken under the owner's lock can be copied after the lock is released. It
never reads a clock: times are the rows' own ``rx``.
"""

from __future__ import annotations

from collections import deque
from typing import Iterable

import numpy as np

# 4096 rows of a session (97 bytes a row) are 0.4 MB: a robot costs at least
# that, and a 1 kHz robot adds a block every 4 s (a few microseconds).
BLOCK_ROWS = 4096
# For rings that many robots may share a budget of rows between (robots
# without a profile, raw samples): the memory a ring holds past its cap is
# at most a block, and many rings of a few blocks each add up.
SMALL_BLOCK_ROWS = 1024


class RingBuffer:
    """Rows of named columns; ``fields`` maps name -> (dtype, width or None).

    One column must be ``rx`` (seconds, non-decreasing): it decides what is
    inside the window. Every row received within ``window_s`` of the newest
    is kept, up to ``max_rows`` rows; older rows go a block at a time.
    """

    def __init__(
        self, fields: dict[str, tuple[type, int | None]], window_s: float, max_rows: int, block_rows: int = BLOCK_ROWS
    ) -> None:
        assert "rx" in fields and max_rows > 0 and block_rows > 0
        self.fields = dict(fields)
        self.window_s = window_s
        self.max_rows = max_rows
        self._block_rows = min(block_rows, max_rows)
        self._blocks: deque[dict[str, np.ndarray]] = deque()  # oldest first
        self._start = 0  # index of the oldest row in the oldest block
        self._size = 0
        self._empty = {name: self._alloc(name, 0) for name in self.fields}  # what a read of no rows gives

    def __len__(self) -> int:
        return self._size

    @property
    def capacity(self) -> int:
        """Rows the blocks held now can take."""
        return len(self._blocks) * self._block_rows

    def append(self, **columns: np.ndarray) -> None:
        """Append N rows (every column given, each with N rows)."""
        n = len(columns["rx"])
        if n == 0:
            return
        if n > self.max_rows:
            columns = {name: col[-self.max_rows :] for name, col in columns.items()}
            n = self.max_rows
        newest_rx = float(columns["rx"][-1])
        rows = self._block_rows
        done = 0
        while done < n:
            over_cap = self._size + n - done - self.max_rows
            if over_cap > 0:
                self._drop(min(over_cap, self._size))
            block_index, at = divmod(self._start + self._size, rows)
            if block_index == len(self._blocks):
                self._add_block(newest_rx)
                continue
            block = self._blocks[block_index]
            k = min(n - done, rows - at)
            for name, col in columns.items():
                block[name][at : at + k] = col[done : done + k]
            done += k
            self._size += k

    def _add_block(self, newest_rx: float) -> None:
        """A new block for the next rows, after letting go of the oldest blocks
        whose rows are all outside the window (every block is full here)."""
        while self._blocks and self._blocks[0]["rx"][-1] < newest_rx - self.window_s:
            self._drop(min(self._block_rows - self._start, self._size))
        self._blocks.append({name: self._alloc(name, self._block_rows) for name in self.fields})

    def _alloc(self, name: str, rows: int) -> np.ndarray:
        dtype, width = self.fields[name]
        return np.empty((rows,) if width is None else (rows, width), dtype=dtype)

    def _drop(self, count: int) -> None:
        """Forget the ``count`` oldest rows, and the blocks they leave empty. The
        next row still goes after them: rows are never written twice."""
        self._start += count
        self._size -= count
        while self._start >= self._block_rows:
            self._blocks.popleft()
            self._start -= self._block_rows

    def _pieces(self, first: int) -> list[tuple[dict[str, np.ndarray], int, int]]:
        """(block, from, to) for the rows from ``first`` (0 = oldest) to the newest."""
        pieces = []
        index, at = divmod(self._start + first, self._block_rows)
        left = self._size - first
        while left > 0:
            k = min(left, self._block_rows - at)
            pieces.append((self._blocks[index], at, at + k))
            left -= k
            index, at = index + 1, 0
        return pieces

    def first_after(self, rx: float) -> int:
        """Index (0 = oldest) of the first row whose rx is later than ``rx``;
        ``len(self)`` when none is (a binary search, as rx does not decrease)."""
        first = self._size
        for block, lo, hi in reversed(self._pieces(0)):
            column = block["rx"][lo:hi]
            if column[0] > rx:
                first -= hi - lo
                continue
            return first - (hi - lo) + int(np.searchsorted(column, rx, side="right"))
        return first

    def cut(self, since_rx: float | None = None) -> Cut:
        """The rows held now (with ``since_rx``, those whose rx is later than
        it), to copy now or later: later appends do not change them."""
        first = 0 if since_rx is None else self.first_after(since_rx)
        return Cut(self._pieces(first), self._empty)

    def rows(self, since_rx: float | None = None, names: Iterable[str] | None = None) -> dict[str, np.ndarray]:
        """Copies of the columns ``names`` (all by default), oldest row first;
        with ``since_rx`` only the rows whose rx is later than it."""
        return self.cut(since_rx).rows(names)

    def newest(self) -> dict[str, np.ndarray] | None:
        """The newest row, one copied value (or row of a wide column) per name;
        None when empty."""
        if self._size == 0:
            return None
        index, at = divmod(self._start + self._size - 1, self._block_rows)
        return {name: col[at].copy() for name, col in self._blocks[index].items()}


class Cut:
    """Rows of a ring buffer at one moment, as (block, from, to) pieces."""

    def __init__(self, pieces: list[tuple[dict[str, np.ndarray], int, int]], empty: dict[str, np.ndarray]) -> None:
        self._pieces = pieces
        self._empty = empty  # a zero-row column of each name, for a cut without rows

    def __len__(self) -> int:
        return sum(hi - lo for _, lo, hi in self._pieces)

    @property
    def pieces(self) -> list[tuple[dict[str, np.ndarray], int, int]]:
        """(block, from, to), oldest first: rows ``from`` to ``to`` of each block's columns.
        A block's rows before ``to`` never change; one whose ``to`` is its length
        is full and never changes at all (a reader may keep what it computed of it)."""
        return list(self._pieces)

    def rows(self, names: Iterable[str] | None = None) -> dict[str, np.ndarray]:
        """Copies of the columns ``names`` (all by default), oldest row first."""
        out = {}
        for name in self._empty if names is None else names:
            parts = [block[name][lo:hi] for block, lo, hi in self._pieces]
            out[name] = np.concatenate(parts) if parts else self._empty[name].copy()
        return out


class PendingRows:
    """Rows waiting in two flat lists of numbers before they reach a ring buffer in bulk.

    A caller appends each row's numbers to ``floats`` and ``ints`` in the
    order of ``float_columns`` and ``int_columns`` ((name, width) pairs,
    width None for a single number) and calls ``flush`` once ``ints`` holds
    ``limit`` numbers or more, or before reading the ring: writing one row
    into numpy columns costs more than recomputing it, a few hundred at
    once cost little. Flat lists, not a tuple per row, because the garbage
    collector tracks tuples (DEVELOPERS.md, "Measurements behind the code").
    """

    def __init__(
        self,
        ring: RingBuffer,
        float_columns: Iterable[tuple[str, int | None]],
        int_columns: Iterable[tuple[str, int | None]],
        flush_rows: int,
    ) -> None:
        self.ring = ring
        self.floats: list[float] = []
        self.ints: list[int] = []
        self._float_parts, self._floats_per_row = _parts(float_columns)
        self._int_parts, self._ints_per_row = _parts(int_columns)
        self.limit = flush_rows * self._ints_per_row

    def flush(self) -> None:
        """Write every waiting row into the ring; the same lists are kept for the next rows."""
        if not self.ints:
            return
        floats = np.array(self.floats, dtype=float).reshape(-1, self._floats_per_row)
        ints = np.array(self.ints, dtype=np.int64).reshape(-1, self._ints_per_row)
        columns = {name: floats[:, part] for name, part in self._float_parts}
        columns.update((name, ints[:, part]) for name, part in self._int_parts)
        self.ring.append(**columns)
        # Cleared, not replaced: lists that stay old stay out of young collections.
        self.floats.clear()
        self.ints.clear()


def _parts(columns: Iterable[tuple[str, int | None]]) -> tuple[list[tuple[str, int | slice]], int]:
    """(name, index or slice into a row) for each column, and the numbers per row."""
    parts, at = [], 0
    for name, width in columns:
        parts.append((name, at if width is None else slice(at, at + width)))
        at += 1 if width is None else width
    return parts, at
