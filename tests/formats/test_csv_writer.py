"""The columnar CSV writer against Python's own fixed-point formatting."""

from __future__ import annotations

import io

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from receiver.formats import csv_writer


def _python_cell(value, decimals):
    if isinstance(value, float) and not np.isfinite(value):
        return ""
    text = f"{value:.{decimals}f}"
    return "0" + text[2:] if text.startswith("-0") and float(text) == 0 else text


@settings(max_examples=200, deadline=None)
@given(
    values=st.lists(st.one_of(st.floats(min_value=-1e9, max_value=1e9), st.just(float("nan"))), min_size=1, max_size=40),
    decimals=st.integers(0, 8),
)
def test_floats_match_python_format(values, decimals):
    arr = np.array(values, dtype=float)
    text = csv_writer.format_rows([(arr, decimals)]).decode()
    expected = "".join(_python_cell(v, decimals) + "\n" for v in values)
    # Python rounds the exact binary value, numpy's rint the scaled value:
    # they may differ by one in the last digit on ties, or by a double's
    # rounding (1e-16 relative) once |v| * 10^decimals passes 2^53.
    for got_line, want_line in zip(text.splitlines(), expected.splitlines()):
        if got_line != want_line:
            want = float(want_line)
            assert abs(float(got_line) - want) <= 1.01 * 10.0**-decimals + 4e-16 * abs(want)
    assert len(text.splitlines()) == len(values)


def test_rows_with_names_ints_and_empty_cells():
    seq = np.array([7, 8, 123456], dtype=np.int64)
    x = np.array([1.5, -0.25, np.nan])
    text = csv_writer.format_rows([b"bot-1", (seq, 0), (x, 3)]).decode()
    assert text == "bot-1,7,1.500\nbot-1,8,-0.250\nbot-1,123456,\n"


def test_negative_zero_prints_without_sign():
    assert csv_writer.format_rows([(np.array([-0.0000001, -0.0]), 3)]) == b"0.000\n0.000\n"


def test_write_in_blocks_equals_one_block(monkeypatch):
    rng = np.random.default_rng(2)
    cols = [b"r", (np.arange(1000), 0), (rng.normal(size=1000) * 100, 6)]
    whole = csv_writer.format_rows(cols)
    monkeypatch.setattr(csv_writer, "_ROWS_PER_BLOCK", 37)
    out = io.BytesIO()
    csv_writer.write(out, cols)
    assert out.getvalue() == whole
