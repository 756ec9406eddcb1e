"""A columnar CSV writer for large numeric tables.

Per-row string formatting costs about 5 us a row of floats here (DESIGN.md);
this builds the digits of a whole column at once with integer numpy
arithmetic into a byte matrix, then drops the unused bytes (marked 0) in one pass.
Fixed-point decimals, empty cells for NaN; numbers of any size as text
cells (``text_cells``). Pure apart from ``write``.
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
    # A sign byte only where some cell needs one: every unused byte costs
    # the final pass that drops them (a column never negative, such as seq,
    # t or a distance, saves one per row).
    return finite, scaled, negative if negative.any() else None, whole, n_int


def _digit_table(group: int) -> np.ndarray:
    """(group, 10**group) uint8: column v holds v's decimal digits, zero-padded."""
    values = np.arange(10**group)
    return np.stack([(values // 10 ** (group - 1 - k)) % 10 for k in range(group)]).astype(np.uint8) + ord("0")


# Digits are written four at a time through a lookup table: a quarter of the
# integer divisions of one digit at a time.
_GROUP = 4
_DIGITS = {g: _digit_table(g) for g in range(1, _GROUP + 1)}


def _write_digits(chars: np.ndarray, end: int, count: int, values: np.ndarray) -> None:
    """Write ``count`` digits of ``values`` (zero-padded) into rows [end - count, end)."""
    rest = values
    while count:
        group = min(count, _GROUP)
        rest, low = np.divmod(rest, 10**group)
        np.take(_DIGITS[group], low, axis=1, out=chars[end - group : end])
        end -= group
        count -= group


def _fill_column(chars, row, layout, decimals) -> None:
    """Write one column's cells into the (bytes, rows) matrix from byte ``row`` on; 0 marks unused bytes."""
    finite, scaled, negative, whole, n_int = layout
    first = row  # the first integer digit
    if negative is not None:
        chars[row] = np.where(negative, ord("-"), 0)
        first += 1
    _write_digits(chars, first + n_int, n_int, whole)
    if decimals:
        chars[first + n_int] = ord(".")
        _write_digits(chars, first + n_int + 1 + decimals, decimals, scaled % 10**decimals)
    # Leading integer digits are kept only when the value has that many.
    for k in range(n_int - 1):
        chars[first + k] *= whole >= 10 ** (n_int - 1 - k)
    if not finite.all():  # NaN: an empty cell
        width = n_int + (1 + decimals if decimals else 0)
        chars[first : first + width, ~finite] = 0


Column = tuple[np.ndarray, int] | bytes | np.ndarray


def text_cells(values: np.ndarray) -> np.ndarray:
    """Floats as text cells for ``format_rows``: the shortest text that reads back as the
    same float (any magnitude), empty for NaN. About 0.3 us a cell: for columns of any size.
    """
    return np.array([b"" if v != v else repr(v).encode() for v in np.asarray(values, dtype=float).tolist()], dtype=bytes)


def format_rows(columns: Sequence[Column]) -> bytes:
    """CSV text of the given columns; a ``bytes`` entry is a constant cell (e.g. a name),
    a bytes array (``text_cells``) one cell per row.

    Float columns give (values, decimals); decimals = 0 writes integers
    without a point. Digits are exact while |value| * 10**decimals < 2**53
    (with 6 decimals: below 9e9, far beyond any field position or robot
    clock); past that they carry a double's rounding, and values must stay
    below 9e18 / 10**decimals. NaN writes an empty cell.
    The matrix is built transposed, one byte position per row, so that every
    write is contiguous; one transpose at the end puts the rows in order.
    """
    n = next(len(c[0]) for c in columns if isinstance(c, tuple))
    layouts = [c if isinstance(c, (bytes, np.ndarray)) else _column_layout(*c) for c in columns]
    widths = [
        len(lay) if isinstance(lay, bytes) else lay.itemsize if isinstance(lay, np.ndarray)
        else (lay[2] is not None) + lay[4] + (1 + c[1] if c[1] else 0)
        for lay, c in zip(layouts, columns)
    ]
    total = sum(widths) + len(columns)
    chars = np.empty((total, n), dtype=np.uint8)
    pos = 0
    for column, layout, width in zip(columns, layouts, widths):
        if isinstance(layout, bytes):
            assert b"\0" not in layout, "a constant cell cannot hold a zero byte"
            chars[pos : pos + width] = np.frombuffer(layout, dtype=np.uint8)[:, None]
        elif isinstance(layout, np.ndarray):  # cells padded with zero bytes, which are dropped below
            chars[pos : pos + width] = layout.view(np.uint8).reshape(n, width).T
        else:
            _fill_column(chars, pos, layout, column[1])
        pos += width
        chars[pos] = ord(",")
        pos += 1
    chars[-1] = ord("\n")
    # Unused bytes hold 0, which no cell contains (names are validated
    # characters); bytes.replace drops them far faster than a boolean mask.
    # tobytes of the transposed view copies once, in row order (a third less
    # CPU than a contiguous copy and then its bytes).
    return chars.T.tobytes().replace(b"\0", b"")


def write(out: BinaryIO, columns: Sequence[Column]) -> None:
    """Write rows block by block (``columns`` as in ``format_rows``)."""
    n = next(len(c[0]) for c in columns if isinstance(c, tuple))
    for start in range(0, n, _ROWS_PER_BLOCK):
        end = start + _ROWS_PER_BLOCK
        block = [c if isinstance(c, bytes) else c[start:end] if isinstance(c, np.ndarray) else (c[0][start:end], c[1])
                 for c in columns]
        out.write(format_rows(block))
