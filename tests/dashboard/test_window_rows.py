"""The window read through block summaries against the same numbers computed on every row.

The ring here has blocks of 64 rows, so a few hundred rows give many full
blocks, a block still filling and a window that starts inside a block. The
expected numbers come from the definitions applied to every row of the
window: growth() of receiver/analysis/growth.py, numpy's max and the sums.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from dashboard import readouts
from dashboard.block_summary import LOOP_BIN_MS, unwrap_heading_error
from dashboard.window_rows import Reader, RobotBlocks
from receiver.analysis.growth import growth
from receiver.live.ring_buffer import RingBuffer
from receiver.live.session import _RING_FIELDS
from receiver.odometry.counts import SampleKind
from receiver.odometry.integrate import wrap_angle

INCH_M = 0.0254  # SI: 1 in = 0.0254 m exactly
THRESHOLD_S = 0.05


def session_rows(n: int, seed: int, resets: tuple[int, ...] = (), no_pose: slice | None = None) -> dict:
    """Rows of a robot spinning while it drives, its heading error growing through many wraps."""
    rng = np.random.default_rng(seed)
    rx = 1000.0 + np.cumsum(rng.uniform(0.004, 0.006, n))
    heading = np.cumsum(rng.uniform(0.0, 0.08, n))  # about 13 turns in 1000 rows
    step = rng.uniform(0.1, 0.3, n)
    pose = np.column_stack([np.cumsum(step * np.cos(heading)), np.cumsum(step * np.sin(heading)), heading])
    true_heading_error = 0.4 * heading + rng.normal(0, 0.01, n)
    position_error = np.abs(np.cumsum(rng.normal(0.02, 0.05, n)))
    kind = np.full(n, SampleKind.STEP, dtype=np.int8)
    kind[0] = SampleKind.FIRST
    for at in resets:
        kind[at] = SampleKind.RESET
        position_error[at:] -= position_error[at]
        true_heading_error[at:] -= true_heading_error[at]
        pose[at:, :2] += 50.0  # the re-anchor's jump, not driving
    heading_error = wrap_angle(true_heading_error)
    reported = pose.copy()
    if no_pose is not None:
        position_error[no_pose] = heading_error[no_pose] = np.nan
        reported[no_pose] = np.nan
    loop = rng.uniform(0.008, 0.012, n)
    loop[rng.integers(0, n, 5)] = 0.07
    return {"seq": np.arange(n), "t": rx - 999.0, "rx": rx, "pose": pose, "reported": reported,
            "position_error": position_error, "heading_error": heading_error, "loop": loop, "kind": kind}


def ring_of(rows: dict, block_rows: int = 64, max_rows: int = 100_000) -> RingBuffer:
    ring = RingBuffer(_RING_FIELDS, window_s=1e9, max_rows=max_rows, block_rows=block_rows)
    ring.append(**rows)
    return ring


def expected(rows: dict, since_rx: float):
    inside = rows["rx"] > since_rx
    w = {k: v[inside] for k, v in rows.items()}
    return w, growth(w["pose"], w["position_error"], w["heading_error"], w["kind"], INCH_M)


@pytest.mark.parametrize("resets, no_pose", [((), None), ((333, 700), None), ((333,), slice(500, 620)),
                                             ((), slice(0, 150))])
@pytest.mark.parametrize("since_index", [0, 37, 300, 950])
def test_window_numbers_and_growth_equal_those_of_every_row(resets, no_pose, since_index):
    rows = session_rows(1000, seed=7, resets=resets, no_pose=no_pose)
    ring = ring_of(rows)
    since = rows["rx"][since_index] - 1e-6
    window = Reader(ring.cut().pieces, RobotBlocks(THRESHOLD_S)).window(since, INCH_M)
    w, g = expected(rows, since)
    assert window.rows == len(w["rx"])
    assert window.numbers.position_worst == pytest.approx(np.nanmax(w["position_error"]), rel=1e-12)
    assert window.numbers.heading_worst == pytest.approx(np.nanmax(np.abs(w["heading_error"])), rel=1e-12)
    for name in ("position_per_m", "heading_per_turn_deg", "distance_m", "turns"):
        ours, theirs = getattr(window.growth, name), getattr(g, name)
        assert (math.isnan(ours) and math.isnan(theirs)) or ours == pytest.approx(theirs, rel=1e-9, abs=1e-9), name
    assert window.growth.from_anchor == g.from_anchor
    assert window.stretch_rx == (w["rx"][g.start], w["rx"][g.end])
    assert window.position_now == w["position_error"][g.end]
    loop = w["loop"]
    timing = readouts.loop_timing(window.numbers)
    assert timing.count == len(loop) and timing.max_s == loop.max()
    assert timing.mean_s == pytest.approx(loop.mean(), rel=1e-12)
    assert timing.long == np.count_nonzero(loop > THRESHOLD_S)
    # p95 from counts in bins: within half a bin of numpy's.
    assert abs(timing.p95_s - np.percentile(loop, 95)) <= LOOP_BIN_MS / 2000.0 + 1e-12


def test_the_drawn_heading_error_is_continuous_and_keeps_the_worst_point():
    rows = session_rows(1000, seed=3)
    window = Reader(ring_of(rows).cut().pieces, RobotBlocks(THRESHOLD_S)).window(rows["rx"][100], INCH_M)
    drawn = window.drawn["errors"]
    assert np.all(np.diff(drawn[:, 0]) > 0)  # in time order, each row once
    steps = np.abs(np.diff(drawn[:, 2]))
    assert steps.max() < math.pi  # no wrap jumps: the spin's error grows as one line
    assert drawn[-1, 2] - drawn[0, 2] > 4 * math.pi  # through several wraps
    # The unwrapped error is the true one, up to whole turns at its start.
    inside = rows["rx"] > rows["rx"][100]
    truth, _ = unwrap_heading_error(rows["heading_error"][inside], np.zeros(inside.sum(), dtype=bool), None)
    picked = np.searchsorted(rows["rx"][inside], drawn[:, 0])
    np.testing.assert_allclose(drawn[:, 2], truth[picked] + (drawn[0, 2] - truth[picked[0]]), atol=1e-9)
    assert (drawn[0, 2] - truth[picked[0]]) / (2 * math.pi) == pytest.approx(round((drawn[0, 2] - truth[picked[0]]) /
                                                                                   (2 * math.pi)), abs=1e-9)
    assert drawn[:, 1].max() == np.nanmax(rows["position_error"][inside])


def test_the_line_stays_where_it_was_as_old_blocks_are_let_go():
    rows = session_rows(1000, seed=5)
    ring = RingBuffer(_RING_FIELDS, window_s=1e9, max_rows=400, block_rows=64)
    blocks = RobotBlocks(THRESHOLD_S)
    ring.append(**{k: v[:700] for k, v in rows.items()})  # rows 300 to 699 kept
    first = Reader(ring.cut().pieces, blocks).rows_since(rows["rx"][500])
    ring.append(**{k: v[700:] for k, v in rows.items()})  # the blocks before row 600 are let go of
    assert ring.cut().pieces[0][0]["rx"][0] > rows["rx"][500]
    later = Reader(ring.cut().pieces, blocks).rows_since(rows["rx"][500])
    assert len(later.unwrapped) == 400 and later.columns["rx"][0] == rows["rx"][600]
    np.testing.assert_allclose(first.unwrapped[99:], later.unwrapped[:100], atol=1e-9)  # rows 600 to 699
    # A reader that never saw the blocks let go of starts its line elsewhere, by whole turns.
    fresh = Reader(ring.cut().pieces, RobotBlocks(THRESHOLD_S)).rows_since(rows["rx"][500])
    turns = (fresh.unwrapped - later.unwrapped) / (2 * math.pi)
    np.testing.assert_allclose(turns, np.round(turns[0]), atol=1e-9)


def test_an_append_reads_the_new_rows_with_the_same_unwrapping():
    rows = session_rows(1000, seed=9, resets=(640,))
    blocks = RobotBlocks(THRESHOLD_S)
    reader = Reader(ring_of(rows).cut().pieces, blocks)
    whole = reader.window(rows["rx"][0] - 1.0, INCH_M).drawn["errors"]
    new = reader.rows_since(rows["rx"][900])
    assert len(new.columns["rx"]) == 99 and new.columns["rx"][0] == rows["rx"][901]
    shared, a, b = np.intersect1d(whole[:, 0], new.columns["rx"], return_indices=True)
    assert len(shared) > 5
    np.testing.assert_allclose(whole[a, 2], new.unwrapped[b], atol=1e-9)
    assert reader.rows_since(rows["rx"][-1]) is None


def test_the_warmer_keeps_every_robots_summaries_and_ends_with_its_source(monkeypatch):
    import gc

    from dashboard import window_rows
    from dashboard.sources import LiveSource
    from receiver.live.hub import Hub

    hub = Hub({})
    rows = session_rows(9000, seed=2)  # full blocks of each session's ring and part of one more
    for robot in ("bot-a", "bot-b"):
        hub.sessions[robot] = hub._new_session(robot, None)
        hub.sessions[robot].ring.append(**rows)
    source = LiveSource(hub)
    made = []
    real = window_rows.summarise
    monkeypatch.setattr(window_rows, "summarise", lambda *args: made.append(1) or real(*args))
    warmer = window_rows.Warmer(source, THRESHOLD_S, every_s=0.01)
    warmer.warm_once(source)
    full = sum(hi == len(block["rx"]) for robot in hub.sessions for block, _, hi in hub.cut(robot).pieces)
    assert full >= 4 and len(made) == full  # every full block of every robot
    Reader.of(hub, "bot-b", THRESHOLD_S).window(0.0, INCH_M)
    assert len(made) == full  # a page then reads them from what was kept
    warmer.start()
    del source
    gc.collect()
    warmer._thread.join(timeout=5.0)
    assert not warmer._thread.is_alive()
