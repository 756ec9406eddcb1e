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


def _column_layout(values: np.ndarray, decimals: int):
    """Scaled magnitudes and the widths of one column's cells."""
    values = np.asarray(values)
    n = len(values)
    if values.dtype.kind == "f":
        finite = np.isfinite(values)
        scaled = np.rint(np.abs(np.where(finite, values, 0.0)) * 10.0**decimals).astype(np.int64)
    else:
        finite = np.ones(n, dtype=bool)
        scaled = np.abs(values.astype(np.int64))
    negative = (values < 0) & (scaled != 0) & finite
    whole = scaled // 10**decimals
    n_int = len(str(int(whole.max()))) if n else 1
    return finite, scaled, negative, whole, n_int


def _fill_column(chars, used, row, layout, decimals) -> None:
    """Write one column's cells into the (bytes, rows) matrix from byte ``row`` on."""
    finite, scaled, negative, whole, n_int = layout
    chars[row] = ord("-")
    used[row] = negative
    width = n_int + (1 + decimals if decimals else 0)
    end = row + 1 + width
    rest = scaled.copy()
    for pos in range(end - 1, row, -1):
        used[pos] = finite
        if decimals and pos == end - 1 - decimals:
            chars[pos] = ord(".")
            continue
        rest, digit = np.divmod(rest, 10)
        chars[pos] = digit
        chars[pos] += ord("0")
    # Leading integer digits are used only when the value has that many.
    for k in range(1, n_int):
        used[row + k] &= whole >= 10 ** (n_int - k)


def format_rows(columns: Sequence[tuple[np.ndarray, int] | bytes]) -> bytes:
    """CSV text of the given columns; a ``bytes`` entry is a constant cell (e.g. a name).

    Float columns give (values, decimals); decimals = 0 writes integers
    without a point. Digits are exact while |value| * 10**decimals < 2**53
    (with 6 decimals: below 9e9, far beyond any field position or robot
    clock); past that they carry a double's rounding, and values must stay
    below 9e18 / 10**decimals. NaN writes an empty cell.
    The matrix is built transposed, one byte position per row, so that every
    write is contiguous; one transpose at the end puts the rows in order.
    """
    n = next(len(c[0]) for c in columns if not isinstance(c, bytes))
    layouts = [c if isinstance(c, bytes) else _column_layout(*c) for c in columns]
    widths = [len(lay) if isinstance(lay, bytes) else 1 + lay[4] + (1 + c[1] if c[1] else 0) for lay, c in zip(layouts, columns)]
    total = sum(widths) + len(columns)
    chars = np.empty((total, n), dtype=np.uint8)
    used = np.ones((total, n), dtype=bool)
    pos = 0
    for column, layout, width in zip(columns, layouts, widths):
        if isinstance(layout, bytes):
            chars[pos : pos + width] = np.frombuffer(layout, dtype=np.uint8)[:, None]
        else:
            _fill_column(chars, used, pos, layout, column[1])
        pos += width
        chars[pos] = ord(",")
        pos += 1
    chars[-1] = ord("\n")
    return chars.T[used.T].tobytes()


def write(out: BinaryIO, columns: Sequence[tuple[np.ndarray, int] | bytes]) -> None:
    """Write rows block by block (``columns`` as in ``format_rows``)."""
    n = next(len(c[0]) for c in columns if not isinstance(c, bytes))
    for start in range(0, n, _ROWS_PER_BLOCK):
        block = [c if isinstance(c, bytes) else (c[0][start : start + _ROWS_PER_BLOCK], c[1]) for c in columns]
        out.write(format_rows(block))
