"""Counter bookkeeping: 32-bit wrap, duplicates, late packets, reboots, resets."""

from __future__ import annotations

import numpy as np
import pytest

from receiver.odometry.counts import SampleKind, classify, count_change, decide, seq_ahead


def test_signed_32_bit_wrap_is_a_small_step():
    # From memory: controllers keep signed 32-bit counters, so counting up
    # past 2^31 - 1 continues at -2^31.
    assert count_change(np.array([-(2**31) + 5]), np.array([2**31 - 3]))[0] == 8
    assert count_change(np.array([2**31 - 3]), np.array([-(2**31) + 5]))[0] == -8
    assert count_change(np.array([1000]), np.array([-1000]))[0] == 2000


def test_seq_wraps_at_2_to_the_32():
    assert seq_ahead(0, 2**32 - 1) == 1
    assert seq_ahead(2**32 - 1, 0) == -1
    assert seq_ahead(10, 7) == 3


@pytest.mark.parametrize(
    ("last", "now", "expected"),
    [
        ((100, 5.00), (101, 5.01, False), SampleKind.STEP),
        ((100, 5.00), (105, 5.05, False), SampleKind.STEP),  # a gap: bridged by the cumulative counts
        ((100, 5.00), (100, 5.00, False), SampleKind.DUPLICATE),
        ((100, 5.00), (98, 4.98, False), SampleKind.LATE),
        ((100, 5.00), (0, 0.02, False), SampleKind.RESTART),  # reboot: clock and seq start again
        ((100, 5.00), (0, 5.02, False), SampleKind.RESTART),  # code restart: seq again, clock runs on
        ((50_000, 500.0), (3, 499.9, False), SampleKind.RESTART),  # far behind: not a late packet
        ((100, 5.00), (101, 5.01, True), SampleKind.RESET),
        ((2**32 - 1, 5.00), (0, 5.01, False), SampleKind.STEP),
    ],
)
def test_decide(last, now, expected):
    assert decide(*last, *now) == expected


def test_batch_classification_equals_the_scalar_rule():
    rng = np.random.default_rng(11)
    seq = np.arange(2000, dtype=np.int64)
    t = seq * 0.01
    # Shuffle a few neighbours, duplicate some, and reboot once.
    for k in rng.choice(np.arange(10, 1900), 30, replace=False):
        seq[k], seq[k + 1] = seq[k + 1], seq[k]
        t[k], t[k + 1] = t[k + 1], t[k]
    dup = rng.choice(np.arange(10, 1900), 10, replace=False)
    seq[dup], t[dup] = seq[dup - 1], t[dup - 1]
    seq[1500:] -= 1500
    t[1500:] -= 14.9
    reset = np.zeros(2000, dtype=bool)
    reset[700] = True
    kinds = classify(seq, t, reset)
    last = (int(seq[0]), float(t[0]))
    assert kinds[0] == SampleKind.FIRST
    for k in range(1, 2000):
        expected = decide(*last, int(seq[k]), float(t[k]), bool(reset[k]))
        assert kinds[k] == expected, k
        if expected in (SampleKind.STEP, SampleKind.RESET, SampleKind.RESTART):
            last = (int(seq[k]), float(t[k]))
    assert kinds[1500] == SampleKind.RESTART and kinds[700] == SampleKind.RESET
    assert np.count_nonzero(kinds == SampleKind.LATE) >= 20
    assert np.count_nonzero(kinds == SampleKind.DUPLICATE) >= 5


def test_fed_in_pieces_equals_fed_whole():
    seq = np.array([5, 6, 6, 9, 8, 10, 0, 1, 2], dtype=np.int64)
    t = np.array([10.05, 10.06, 10.06, 10.09, 10.08, 10.10, 0.0, 0.01, 0.02])
    reset = np.zeros(9, dtype=bool)
    whole = classify(seq, t, reset)
    first = classify(seq[:4], t[:4], reset[:4])
    rest = classify(seq[4:], t[4:], reset[4:], last=(9, 10.09))
    np.testing.assert_array_equal(whole, np.concatenate([first, rest]))
    assert list(whole) == [SampleKind.FIRST, SampleKind.STEP, SampleKind.DUPLICATE, SampleKind.STEP, SampleKind.LATE, SampleKind.STEP, SampleKind.RESTART, SampleKind.STEP, SampleKind.STEP]
