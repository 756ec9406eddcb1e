"""A columnar CSV writer for large numeric tables.

Per-row string formatting costs about 5 us a row of floats here (DESIGN.md);
this builds the digits of a whole column at once with integer numpy
arithmetic into a byte matrix, then keeps the used bytes with one mask.
Fixed-point decimals, empty cells for NaN. Pure apart from ``write``.
"""

from __future__ import annotations

from typing import BinaryIO, Sequence

import numpy as np

_ROWS_PER_BLOCK = 100_000  # bounds memory: one block's byte matrix is a few tens of MB


def _digits(magnitude: np.ndarray, width: int) -> np.ndarray:
    """Decimal digits of non-negative int64 values, most significant first, (N, width) uint8."""
    powers = 10 ** np.arange(width - 1, -1, -1, dtype=np.int64)
    return ((magnitude[:, None] // powers) % 10).astype(np.uint8) + ord("0")


def format_column(values: np.ndarray, decimals: int) -> tuple[np.ndarray, np.ndarray]:
    """(bytes (N, W) uint8, used (N, W) bool) for a float or int column.

    decimals = 0 writes integers without a point. Digits are exact while
    |value| * 10**decimals < 2**53 (with 6 decimals: below 9e9, far beyond
    any field position or robot clock); past that they carry a double's
    rounding, and values must stay below 9e18 / 10**decimals.
    """
    values = np.asarray(values)
    n = len(values)
    finite = np.isfinite(values) if values.dtype.kind == "f" else np.ones(n, dtype=bool)
    if values.dtype.kind == "f":
        scaled = np.rint(np.abs(np.where(finite, values, 0.0)) * 10.0**decimals).astype(np.int64)
    else:
        scaled = np.abs(values.astype(np.int64))
    negative = (values < 0) & (scaled != 0) & finite
    whole, frac = np.divmod(scaled, 10**decimals)
    n_int = max(len(str(int(whole.max()))) if n else 1, 1)
    used_int = np.ones((n, n_int), dtype=bool)
    if n_int > 1:
        # A digit column is used when the value has at least that many digits (always the units).
        thresholds = 10 ** np.arange(n_int - 1, 0, -1, dtype=np.int64)
        used_int[:, :-1] = whole[:, None] >= thresholds
    parts = [np.full((n, 1), ord("-"), dtype=np.uint8), _digits(whole, n_int)]
    used = [negative[:, None], used_int & finite[:, None]]
    if decimals:
        parts += [np.full((n, 1), ord("."), dtype=np.uint8), _digits(frac, decimals)]
        used += [np.repeat(finite[:, None], 1 + decimals, axis=1)]
    return np.hstack(parts), np.hstack(used)


def format_rows(columns: Sequence[tuple[np.ndarray, int] | bytes]) -> bytes:
    """CSV text of the given columns; a ``bytes`` entry is a constant cell (e.g. a name)."""
    n = next(len(c[0]) for c in columns if not isinstance(c, bytes))
    chars, used = [], []
    for i, column in enumerate(columns):
        if isinstance(column, bytes):
            cell = np.frombuffer(column, dtype=np.uint8)
            chars.append(np.broadcast_to(cell, (n, len(cell))))
            used.append(np.ones((n, len(cell)), dtype=bool))
        else:
            c, u = format_column(*column)
            chars.append(c)
            used.append(u)
        end = ord("\n") if i == len(columns) - 1 else ord(",")
        chars.append(np.full((n, 1), end, dtype=np.uint8))
        used.append(np.ones((n, 1), dtype=bool))
    return np.hstack(chars)[np.hstack(used)].tobytes()


def write(out: BinaryIO, columns: Sequence[tuple[np.ndarray, int] | bytes]) -> None:
    """Write rows block by block (``columns`` as in ``format_rows``)."""
    n = next(len(c[0]) for c in columns if not isinstance(c, bytes))
    for start in range(0, n, _ROWS_PER_BLOCK):
        block = [c if isinstance(c, bytes) else (c[0][start : start + _ROWS_PER_BLOCK], c[1]) for c in columns]
        out.write(format_rows(block))
