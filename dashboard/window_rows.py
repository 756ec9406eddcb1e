"""A robot's rows over the page's window, read through kept block summaries.

Owns the walk over a session's ring buffer that a refresh makes: full blocks
are summarised once (block_summary.py) and chained, so that the unwrapped
heading error carries from block to block and the line a page draws stays
where it was as the window moves; the window's numbers, growth and drawable
rows are joined from those summaries and from the rows of the block still
filling and of the block the window's start cuts. Only those rows, and an
append's new rows, are copied out of the ring: a refresh costs about the
same over 10 s or 600 s. Reads the hub; never draws.
"""

from __future__ import annotations

import logging
import math
import threading
import weakref
from dataclasses import dataclass

import numpy as np

from dashboard.block_summary import (
    VIEW_COLUMNS,
    BlockSummary,
    Entry,
    Numbers,
    Rows,
    drawn_of,
    last_finite,
    numbers,
    read_rows,
    summarise,
)
from dashboard.signal_blocks import warm_signals
from dashboard.sources import LiveSource
from receiver.analysis.growth import Growth, growth
from receiver.live.hub import Hub
from receiver.odometry.counts import SampleKind

_STEP = int(SampleKind.STEP)
log = logging.getLogger("podwatch.dashboard")
# Blocks of other robots summarised per refresh at most (about a millisecond
# each): a 1 kHz robot fills one every 4 s, a page refreshes several times a second.
WARM_BLOCKS = 2


@dataclass
class Window:
    """What a refresh needs of one robot's window. ``drawn``: per view, rx then the view's
    columns (block_summary.VIEW_COLUMNS) of the rows it may draw: every row of a block read
    whole or in part, the kept ones of a summarised block; to be thinned for the page."""

    rows: int
    oldest_rx: float  # the window's first and last row (NaN without rows)
    newest_rx: float
    numbers: Numbers
    growth: Growth
    stretch_rx: tuple[float, float]  # rx of the growth stretch's first and last row (NaN: none)
    position_now: float
    heading_now: float  # wrapped, rad
    drawn: dict[str, np.ndarray]
    anchors_xy: np.ndarray
    long_loops: np.ndarray  # (L, 2) rx, loop period s
    last_pose: tuple[float, float, float] | None
    last_reported: tuple[float, float, float] | None


@dataclass
class _Part:
    """One piece of the window: a summarised block whole, or rows read."""

    summary: BlockSummary | None
    rows: Rows | None
    entry_step: tuple[float, float] = (0.0, 0.0)  # distance, turn into a summarised block's first row


class RobotBlocks:
    """The summaries of one robot's full blocks, by block; shared by every tab showing it."""

    def __init__(self, threshold_s: float) -> None:
        self.threshold_s = threshold_s
        self._kept: dict[int, BlockSummary] = {}
        self._lock = threading.Lock()

    def walk(self, pieces: list[tuple[dict, int, int]], most_new: int | None = None,
             ) -> list[tuple[BlockSummary | None, Entry, np.ndarray | None]]:
        """Per piece of the whole ring: its block's summary (None while the block fills), the
        entry of the heading error into it and the last pose of the block before. Summarises
        blocks seen full for the first time, oldest first, at most ``most_new`` of them (all:
        None); forgets blocks the ring has let go of."""
        with self._lock:
            kept, self._kept = self._kept, {}
            out = []
            entry: Entry = None
            before_pose = None
            budget = math.inf if most_new is None else most_new
            for block, _lo, hi in pieces:
                rx = block["rx"]
                summary = kept.get(id(block))
                if summary is not None and summary.rx is not rx:
                    summary = None  # a new block with the id of one let go of
                if summary is None and hi == len(rx) and budget > 0:
                    summary = summarise(block, self.threshold_s)
                    budget -= 1
                elif summary is None and hi == len(rx):
                    budget = 0  # no block after one left unsummarised may be chained now
                out.append((summary, entry, before_pose))
                if summary is None:
                    before_pose = block["pose"][hi - 1] if hi else before_pose
                    continue
                summary.chain(entry)
                self._kept[id(block)] = summary
                entry = summary.exit(entry)
                before_pose = summary.last_pose
            return out


class Reader:
    """One refresh's look at one robot: the ring's pieces now, walked once."""

    def __init__(self, pieces: list[tuple[dict, int, int]], blocks: RobotBlocks) -> None:
        self.pieces = pieces
        self.walked = blocks.walk(pieces)
        self.threshold_s = blocks.threshold_s

    @classmethod
    def of(cls, hub: Hub, robot: str, threshold_s: float) -> Reader:
        """A look at ``robot``'s rows in ``hub`` now, with the summaries kept for it."""
        return cls(hub.cut(robot).pieces, robot_blocks(hub, robot, threshold_s))


    def _parts(self, since_rx: float, whole: bool) -> list[_Part]:
        """The pieces with rows later than ``since_rx``: summaries where a whole full block is
        in (``whole``), rows read elsewhere."""
        parts = []
        for (block, lo, hi), (summary, entry, before_pose) in zip(self.pieces, self.walked):
            rx = block["rx"]
            if hi <= lo or rx[hi - 1] <= since_rx:
                continue
            start = lo if rx[lo] > since_rx else lo + int(np.searchsorted(rx[lo:hi], since_rx, side="right"))
            if whole and summary is not None and start == 0 and not summary.has_anchor:
                step = (0.0, 0.0)
                if before_pose is not None:
                    d = summary.first_pose - before_pose
                    step = (math.hypot(d[0], d[1]), abs(d[2]))
                parts.append(_Part(summary, None, step))
            else:
                shift = summary.shift if summary is not None else None
                parts.append(_Part(None, read_rows(block, start, hi, entry, before_pose, shift)))
        return parts

    def rows_since(self, since_rx: float) -> Rows | None:
        """Every row later than ``since_rx``, read (an append's new rows); None without one."""
        parts = [p.rows for p in self._parts(since_rx, whole=False)]
        if not parts:
            return None
        if len(parts) == 1:
            return parts[0]
        return Rows({name: np.concatenate([p.columns[name] for p in parts]) for name in parts[0].columns},
                    *(np.concatenate([getattr(p, f) for p in parts]) for f in ("unwrapped", "distance", "turn",
                                                                                  "anchor")), 0)

    def row_before(self, rx: float) -> tuple[float, float, float] | None:
        """rx and the two headings (recompute, reported; rad) of the newest row at or before ``rx``."""
        for block, lo, hi in reversed(self.pieces):
            if hi > lo and block["rx"][lo] <= rx:
                at = lo + int(np.searchsorted(block["rx"][lo:hi], rx, side="right")) - 1
                return float(block["rx"][at]), float(block["pose"][at, 2]), float(block["reported"][at, 2])
        return None

    def window(self, since_rx: float, metres_per_unit: float) -> Window:
        """The window of rows later than ``since_rx``; lengths in the profile's unit
        (``metres_per_unit`` for growth; NaN without a profile)."""
        parts = self._parts(since_rx, whole=True)
        kept = [p.summary.numbers if p.summary is not None else
                numbers(p.rows.columns["position_error"], p.rows.columns["heading_error"], p.rows.columns["loop"],
                        self.threshold_s) for p in parts]
        drawn = {view: _drawn(parts, view) for view in VIEW_COLUMNS}
        g, stretch, now = _growth(parts, metres_per_unit)
        last = next((p for p in reversed(parts)), None)
        if last is None:
            newest = (None, None)
        elif last.summary is not None:
            newest = (last.summary.newest_pose, last.summary.newest_reported)
        else:
            newest = (last_finite(last.rows.columns["pose"]), last_finite(last.rows.columns["reported"]))
        ends = [p.summary.rx if p.summary is not None else p.rows.columns["rx"] for p in parts]
        return Window(
            rows=sum(len(rx) for rx in ends),
            oldest_rx=float(ends[0][0]) if ends else math.nan,
            newest_rx=float(ends[-1][-1]) if ends else math.nan,
            numbers=_joined(kept),
            growth=g,
            stretch_rx=stretch,
            position_now=now[0],
            heading_now=now[1],
            drawn=drawn,
            anchors_xy=_stacked([p.summary.anchors_xy if p.summary is not None else
                                 p.rows.columns["pose"][p.rows.anchor, :2] for p in parts], 2),
            long_loops=_stacked([p.summary.long_loops if p.summary is not None else _long(p.rows, self.threshold_s)
                                 for p in parts], 2),
            last_pose=newest[0],
            last_reported=newest[1],
        )


def warm(hub: Hub, robot: str, threshold_s: float, most_new: int | None = WARM_BLOCKS) -> None:
    """Summarise ``robot``'s new full blocks (at most ``most_new``; all: None) ahead of a page
    showing it (a robot picked later then draws from kept summaries)."""
    robot_blocks(hub, robot, threshold_s).walk(hub.cut(robot).pieces, most_new)


def _long(rows: Rows, threshold_s: float) -> np.ndarray:
    loop = rows.columns["loop"]
    long = np.flatnonzero(loop > threshold_s)
    return np.column_stack([rows.columns["rx"][long], loop[long]])


def _stacked(arrays: list[np.ndarray], width: int) -> np.ndarray:
    arrays = [a for a in arrays if len(a)]
    return np.concatenate(arrays) if arrays else np.empty((0, width))


def _drawn(parts: list[_Part], view: str) -> np.ndarray:
    """rx and the columns of ``view`` of the rows the window's parts may draw."""
    pieces = []
    for part in parts:
        if part.rows is not None:
            pieces.append(drawn_of(part.rows, view))
            continue
        values = part.summary.drawn[view]
        if view == "errors" and part.summary.shift:
            values = values.copy()
            values[part.summary.drawn_moves, 2] += part.summary.shift
        pieces.append(values)
    return _stacked(pieces, 1 + len(VIEW_COLUMNS[view]))


def _joined(kept: list[Numbers]) -> Numbers:
    """The numbers of consecutive parts, joined (maxima of maxima, sums of sums)."""
    if not kept:
        return numbers(np.empty(0), np.empty(0), np.empty(0), 0.0)
    worst = [k.position_worst for k in kept if math.isfinite(k.position_worst)]
    heading = [k.heading_worst for k in kept if math.isfinite(k.heading_worst)]
    longest = [k.loop_max_s for k in kept if math.isfinite(k.loop_max_s)]
    return Numbers(
        position_worst=max(worst) if worst else math.nan,
        heading_worst=max(heading) if heading else math.nan,
        loop_count=sum(k.loop_count for k in kept),
        loop_sum_s=math.fsum(k.loop_sum_s for k in kept),
        loop_max_s=max(longest) if longest else math.nan,
        loop_long=sum(k.loop_long for k in kept),
        loop_bins=(np.concatenate([k.loop_bins[0] for k in kept]), np.concatenate([k.loop_bins[1] for k in kept])),
    )


def _growth(parts: list[_Part], metres_per_unit: float) -> tuple[Growth, tuple[float, float], tuple[float, float]]:
    """growth() over the window's rows, summarised blocks given as their stand-in rows;
    with the rx of the stretch's ends and the errors at its last row (now)."""
    columns: dict[str, list[np.ndarray]] = {k: [] for k in ("pe", "he", "d", "t", "kind", "rx")}
    for part in parts:
        if part.rows is not None:
            rows = part.rows
            found = (rows.columns["position_error"], rows.columns["heading_error"], rows.distance, rows.turn,
                     rows.columns["kind"], rows.columns["rx"])
        else:
            s = part.summary.stand_in
            distance, turn = s.distance.copy(), s.turn.copy()
            distance[0] += part.entry_step[0]
            turn[0] += part.entry_step[1]
            found = (s.position_error, s.heading_error, distance, turn, np.full(len(s.row), _STEP, dtype=np.int8),
                     part.summary.rx[s.row])
        for name, values in zip(columns, found):
            columns[name].append(values)
    nan = math.nan
    if not parts:
        return growth(np.empty((0, 3)), np.empty(0), np.empty(0), np.empty(0, dtype=np.int8), 1.0), (nan, nan), \
            (nan, nan)
    pe, he, d, t, kind, rx = (np.concatenate(columns[k]) for k in columns)
    g = growth(np.broadcast_to(0.0, (len(pe), 3)), pe, he, kind, metres_per_unit, steps=(d, t))
    if not math.isfinite(pe[g.end]):
        return g, (nan, nan), (nan, nan)
    return g, (float(rx[g.start]), float(rx[g.end])), (float(pe[g.end]), float(he[g.end]))


_BLOCKS: weakref.WeakKeyDictionary[Hub, dict[tuple[str, float], RobotBlocks]] = weakref.WeakKeyDictionary()
_BLOCKS_LOCK = threading.Lock()


def robot_blocks(hub: Hub, robot: str, threshold_s: float) -> RobotBlocks:
    """The kept summaries of ``robot``'s blocks in ``hub``, shared by every tab showing it;
    forgotten with the hub (a replay rebuilt, a tab's replay closed)."""
    with _BLOCKS_LOCK:
        per_hub = _BLOCKS.setdefault(hub, {})
        return per_hub.setdefault((robot, threshold_s), RobotBlocks(threshold_s))


class Warmer:
    """Summarises every robot's new full blocks of a live source once a second, in a thread of
    its own, so that a page opened late on a long session, or a robot picked later, draws from
    kept summaries at once. Holds the source weakly: it ends when the source is gone, or on ``stop``."""

    def __init__(self, source: LiveSource, threshold_s: float, every_s: float = 1.0) -> None:
        self._source = weakref.ref(source)
        self.threshold_s = threshold_s
        self.every_s = every_s
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, name="podwatch-summaries", daemon=True)

    def start(self) -> Warmer:
        """Start the thread; returns self."""
        self._thread.start()
        return self

    def stop(self) -> None:
        """End the thread (a summary under way is finished first)."""
        self._stop.set()
        if self._thread.is_alive():
            self._thread.join()

    def _run(self) -> None:
        while not self._stop.wait(self.every_s):
            source = self._source()
            if source is None:
                return
            try:
                self.warm_once(source)
            except Exception:  # our own bug: the page reads the rows itself then; never a traceback on the terminal
                log.debug("summarising the live rows failed", exc_info=True)
            del source

    def warm_once(self, source: LiveSource) -> None:
        """Summarise what is new of every robot's result rows and signals."""
        for robot in source.hub.snapshot(0.0, loop_stats=False):
            warm(source.hub, robot, self.threshold_s, most_new=None)
            warm_signals(source.raw, robot)
