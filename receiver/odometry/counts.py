"""Encoder counter bookkeeping: 32-bit wrap, duplicates, late samples, reboots.

Owns the decision of what each arriving sample means for the integration,
as one scalar rule (``decide``) used by the streaming tracker and by the batch
classifier alike. Pure: numbers in, kinds out.
"""

from __future__ import annotations

from enum import IntEnum

import numpy as np

SEQ_MODULUS = 2**32
COUNT_MODULUS = 2**32  # from memory: robot controllers keep signed 32-bit position counters
# A sample whose seq falls further behind than this is a restart, not a late
# packet: networks reorder by a handful of datagrams, never by a thousand.
REORDER_WINDOW = 1024
# The robot's clock is monotonic; going back by more than this means it rebooted.
CLOCK_BACK_TOLERANCE_S = 0.5


class SampleKind(IntEnum):
    """What an arriving sample means for the integration (``decide``); ACCEPTED kinds
    give result rows, ANCHORS re-set the pose.
    """

    FIRST = 0  # anchor: the first sample of a robot
    STEP = 1  # integrate the counts since the last accepted sample
    RESET = 2  # robot code set its pose: re-anchor at the reported pose
    RESTART = 3  # robot rebooted or its code restarted: re-anchor, never integrate the jump
    DUPLICATE = 4  # same seq again: ignored
    LATE = 5  # older than the last accepted sample: ignored (its motion is in later counts)


ACCEPTED = (SampleKind.FIRST, SampleKind.STEP, SampleKind.RESET, SampleKind.RESTART)
ANCHORS = (SampleKind.FIRST, SampleKind.RESET, SampleKind.RESTART)


def seq_ahead(seq: int, last_seq: int) -> int:
    """Signed distance from last_seq to seq on the 2^32 wrapping counter."""
    return (seq - last_seq + SEQ_MODULUS // 2) % SEQ_MODULUS - SEQ_MODULUS // 2


def decide(last_seq: int, last_t: float, seq: int, t: float, reset: bool) -> SampleKind:
    """What a sample means, given the last accepted one."""
    if reset:
        return SampleKind.RESET
    if t < last_t - CLOCK_BACK_TOLERANCE_S:
        return SampleKind.RESTART
    ahead = seq_ahead(seq, last_seq)
    if ahead > 0:
        return SampleKind.STEP
    # seq went back. With the clock still moving on, the robot code restarted
    # its counter; far back, likewise; otherwise the packet is old news.
    if t > last_t or ahead < -REORDER_WINDOW:
        return SampleKind.RESTART
    return SampleKind.DUPLICATE if ahead == 0 else SampleKind.LATE


def classify(
    seq: np.ndarray, t: np.ndarray, reset: np.ndarray, last: tuple[int, float] | None = None
) -> np.ndarray:
    """Kinds (N,) for one robot's samples in arrival order.

    ``last`` is the (seq, t) of the last accepted sample before these, when a
    stream is fed in pieces; without it the first sample anchors.
    Fast path: when every sample is ahead of the one before (mod 2^32, gaps
    allowed) with the clock not going back and no reset, all are steps, which
    ``decide`` would also say; otherwise the scalar rule runs sample by sample.
    """
    n = len(seq)
    kinds = np.full(n, SampleKind.STEP, dtype=np.int8)
    if n == 0:
        return kinds
    seq64 = np.asarray(seq, dtype=np.int64)
    t = np.asarray(t, dtype=float)
    reset = np.asarray(reset, dtype=bool)
    if last is None:
        kinds[0] = SampleKind.RESET if reset[0] else SampleKind.FIRST
        last, start = (int(seq64[0]), float(t[0])), 1
    else:
        start = 0
    all_seq = np.concatenate([[last[0]], seq64[start:]])
    all_t = np.concatenate([[last[1]], t[start:]])
    ahead = np.diff(all_seq) % SEQ_MODULUS
    regular = (
        np.all((ahead > 0) & (ahead < SEQ_MODULUS // 2))
        and np.all(np.diff(all_t) >= -CLOCK_BACK_TOLERANCE_S)
        and not np.any(reset[start:])
    )
    if regular:
        return kinds
    seq_list, t_list, reset_list = seq64.tolist(), t.tolist(), reset.tolist()
    last_seq, last_t = last
    for k in range(start, n):
        kind = decide(last_seq, last_t, seq_list[k], t_list[k], reset_list[k])
        kinds[k] = kind
        if kind in ACCEPTED:
            last_seq, last_t = seq_list[k], t_list[k]
    return kinds


def count_change_one(now: int, before: int) -> int:
    """``count_change`` for one counter, on Python ints (the one-sample path)."""
    diff = now - before
    half = COUNT_MODULUS // 2
    if diff >= half or diff < -half:
        diff = (diff + half) % COUNT_MODULUS - half
    return diff


def count_change(now: np.ndarray, before: np.ndarray) -> np.ndarray:
    """Counter change now - before, unwrapped across the signed 32-bit rollover."""
    diff = np.asarray(now, dtype=np.int64) - np.asarray(before, dtype=np.int64)
    half = COUNT_MODULUS // 2
    wrapped = (diff >= half) | (diff < -half)
    if np.any(wrapped):  # rare: only where a counter rolled over
        diff = np.where(wrapped, (diff + half) % COUNT_MODULUS - half, diff)
    return diff
