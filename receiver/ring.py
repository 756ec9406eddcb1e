"""Column ring buffers that keep a time window of rows, in bounded memory.

Owns the storage of a session's recent history as numpy columns. The
buffer starts small and doubles only while its oldest row is still inside
the window, up to a hard row cap; after that the oldest rows are
overwritten. It never reads a clock: times are the rows' own ``rx``.
"""

from __future__ import annotations

import numpy as np

_START_ROWS = 1024


class RingBuffer:
    """Rows of named columns; ``fields`` maps name -> (dtype, width or None).

    One column must be ``rx`` (seconds, non-decreasing): it decides what is
    inside the window.
    """

    def __init__(self, fields: dict[str, tuple[type, int | None]], window_s: float, max_rows: int) -> None:
        assert "rx" in fields and max_rows > 0
        self.fields = dict(fields)
        self.window_s = window_s
        self.max_rows = max_rows
        self._capacity = min(_START_ROWS, max_rows)
        self._columns = {name: self._alloc(name, self._capacity) for name in self.fields}
        self._start = 0  # index of the oldest row
        self._size = 0

    def _alloc(self, name: str, rows: int) -> np.ndarray:
        dtype, width = self.fields[name]
        return np.empty((rows,) if width is None else (rows, width), dtype=dtype)

    def __len__(self) -> int:
        return self._size

    @property
    def capacity(self) -> int:
        return self._capacity

    def append(self, **columns: np.ndarray) -> None:
        """Append N rows (every column given, each with N rows)."""
        n = len(columns["rx"])
        if n == 0:
            return
        self._grow_for(n, float(columns["rx"][-1]))
        if n > self._capacity:
            columns = {name: col[-self._capacity :] for name, col in columns.items()}
            n = self._capacity
        end = (self._start + self._size) % self._capacity
        first = min(n, self._capacity - end)
        for name, col in columns.items():
            dest = self._columns[name]
            dest[end : end + first] = col[:first]
            dest[: n - first] = col[first:]
        overflow = max(0, self._size + n - self._capacity)
        self._start = (self._start + overflow) % self._capacity
        self._size = min(self._size + n, self._capacity)

    def _grow_for(self, n: int, newest_rx: float) -> None:
        while self._size + n > self._capacity and self._capacity < self.max_rows:
            oldest_kept = self._size + n - self._capacity  # rows that would be overwritten
            if oldest_kept <= self._size:
                rx_col = self._columns["rx"]
                lost_rx = rx_col[(self._start + oldest_kept - 1) % self._capacity]
                if lost_rx < newest_rx - self.window_s:
                    return  # the rows to drop are already outside the window
            view = self.view()
            self._capacity = min(self._capacity * 2, self.max_rows)
            self._columns = {name: self._alloc(name, self._capacity) for name in self.fields}
            for name, col in view.items():
                self._columns[name][: self._size] = col
            self._start = 0

    def view(self) -> dict[str, np.ndarray]:
        """Every column, oldest row first (copies when the rows wrap)."""
        end = self._start + self._size
        if end <= self._capacity:
            return {name: col[self._start : end] for name, col in self._columns.items()}
        wrap = end - self._capacity
        return {name: np.concatenate([col[self._start :], col[:wrap]]) for name, col in self._columns.items()}
