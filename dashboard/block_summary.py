"""What the page keeps of one full block of a robot's result rows, and what it reads of any rows.

Owns the per-block numbers that let a refresh over a long window read a few
thousand rows instead of every row: a full block of the session's ring buffer
never changes (ring_buffer.Cut.pieces), so its worst errors, loop-period
counts, growth stand-in rows (analysis.growth.stand_in) and the rows its
graphs may draw (the lowest and highest of each column in every bin of
BIN_ROWS) are computed once. The same definitions read a block that is still
filling, or the part of one inside the window, from its rows. Pure numpy over
block columns; never reads a clock or a session.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from tsdownsample import NaNMinMaxDownsampler

from receiver.analysis.growth import StandIn, stand_in, step_motion
from receiver.odometry.counts import ANCHORS

# Rows per bin of a block's drawable rows: 32 bins in a block of 4096. A 60 s
# window at 1 kHz then offers about 470 bins per column, a 600 s one 4,700.
BIN_ROWS = 128
# Loop periods are counted in bins of this width (ms) for p95 and the
# histogram; a p95 from them is within a bin of the exact one.
LOOP_BIN_MS = 0.1
LOOP_BINS_UP_TO_MS = 10_000.0  # longer loops count in the last bin (max stays exact)
ANCHOR_KINDS = np.array([int(k) for k in ANCHORS])
# The columns each view draws, after the rx column: (ring column, its index or None).
VIEW_COLUMNS = {
    "track": (("pose", 0), ("pose", 1), ("reported", 0), ("reported", 1)),
    "poses": (("pose", 0), ("pose", 1), ("pose", 2), ("reported", 0), ("reported", 1), ("reported", 2)),
    "errors": (("position_error", None), ("unwrapped", None)),
    "loop": (("loop", None),),
}

Entry = tuple[float, float] | None  # (wrapped heading error, its unwrapped value) of the row before, rad


def unwrap_heading_error(heading_error: np.ndarray, anchor: np.ndarray, entry: Entry) -> tuple[np.ndarray, int]:
    """The heading error (rad) followed through its wraps, one step at a time the short way,
    starting afresh at each re-anchor (``anchor`` True) and at the first known row when
    ``entry`` is None. Returns it (NaN where unknown) and the first row whose value does not
    depend on ``entry`` (the length when every row does): a caller that has it with one
    entry gets it for another by shifting the rows before that one."""
    n = len(heading_error)
    out = np.full(n, np.nan)
    known = np.flatnonzero(np.isfinite(heading_error))
    if not len(known):
        return out, n
    values = heading_error[known]
    anchors_so_far = np.cumsum(anchor)
    restart = np.empty(len(known), dtype=bool)
    restart[0] = entry is None or anchors_so_far[known[0]] > 0
    restart[1:] = anchors_so_far[known[1:]] > anchors_so_far[known[:-1]]
    step = np.empty(len(known))
    step[1:] = np.diff(values)
    step[1:] += math.pi
    np.mod(step[1:], 2.0 * math.pi, out=step[1:])
    step[1:] -= math.pi
    step[0] = values[0] if entry is None else entry[1] + _wrapped(values[0] - entry[0])
    # Each restart begins its run at its own value: the running sum is reset there.
    step[restart] = values[restart]
    total = np.cumsum(step)
    starts = np.maximum.accumulate(np.where(restart, np.arange(len(known)), 0))
    before = np.where(starts > 0, total[starts - 1], 0.0)
    out[known] = total - before
    # Rows move with the entry up to the first one that a re-anchor starts afresh.
    by_anchor = restart.copy()
    by_anchor[0] = anchors_so_far[known[0]] > 0
    first_free = int(known[np.argmax(by_anchor)]) if by_anchor.any() else n
    return out, first_free


def _wrapped(angle: float) -> float:
    return (angle + math.pi) % (2.0 * math.pi) - math.pi


def loop_bins(loop_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(bin indices, counts) of the known loop periods in LOOP_BIN_MS bins."""
    loop = loop_s[np.isfinite(loop_s)]
    index = np.minimum(np.floor(loop * (1000.0 / LOOP_BIN_MS)), LOOP_BINS_UP_TO_MS / LOOP_BIN_MS).astype(np.int64)
    return np.unique(index, return_counts=True)


@dataclass(frozen=True)
class Numbers:
    """The quotable numbers of some rows: worst errors, loop-period counts."""

    position_worst: float  # NaN without a compared row
    heading_worst: float  # largest |heading error|, rad
    loop_count: int
    loop_sum_s: float
    loop_max_s: float
    loop_long: int  # loops over the threshold
    loop_bins: tuple[np.ndarray, np.ndarray]


def numbers(position_error: np.ndarray, heading_error: np.ndarray, loop_s: np.ndarray, threshold_s: float) -> Numbers:
    """``Numbers`` of rows (any length; errors in the profile's unit and wrapped rad, loop in s)."""
    compared = np.isfinite(position_error)
    any_compared = bool(compared.any())
    heading = np.abs(heading_error[np.isfinite(heading_error)])
    loop = loop_s[np.isfinite(loop_s)]
    return Numbers(
        position_worst=float(position_error[compared].max()) if any_compared else math.nan,
        heading_worst=float(heading.max()) if len(heading) else math.nan,
        loop_count=len(loop),
        loop_sum_s=float(loop.sum()),
        loop_max_s=float(loop.max()) if len(loop) else math.nan,
        loop_long=int(np.count_nonzero(loop > threshold_s)),
        loop_bins=loop_bins(loop),
    )


def shift_for(entry: Entry, first_heading: float, first_known: int, shift_until: int) -> float:
    """What to add to the rows before ``shift_until`` of an unwrapping made with no entry, to
    make it the one with ``entry`` (the block's first known row at ``first_known``)."""
    if entry is None or first_known >= shift_until or not math.isfinite(first_heading):
        return 0.0
    return entry[1] + _wrapped(first_heading - entry[0]) - first_heading


@dataclass
class Rows:
    """Rows ``lo`` to ``hi`` of a block, read: copies of their columns, the heading error
    unwrapped (rad), the steps into each row (step_motion, the first from the row before),
    whether each re-anchors."""

    columns: dict[str, np.ndarray]
    unwrapped: np.ndarray
    distance: np.ndarray
    turn: np.ndarray
    anchor: np.ndarray
    shift_until: int  # of the block's unwrapping (see unwrap_heading_error)


ROW_COLUMNS = ("rx", "t", "pose", "reported", "position_error", "heading_error", "loop", "kind")


def read_rows(block: dict[str, np.ndarray], lo: int, hi: int, entry: Entry, before_pose: np.ndarray | None,
              shift: float | None = None, copy: bool = True) -> Rows:
    """``Rows`` of rows ``lo`` to ``hi`` of ``block``. ``before_pose``: the last row of the
    block before (None without one), for the step into row 0. The unwrapping carries on from
    ``entry``, or, for a block chained before (``BlockSummary.shift``), with its ``shift``.
    Without ``copy`` the columns are the block's own (for a full block, which never changes)."""
    kind = block["kind"][:hi]
    anchor = np.isin(kind, ANCHOR_KINDS)
    heading_error = block["heading_error"][:hi]
    unwrapped, shift_until = unwrap_heading_error(heading_error, anchor, None)
    if shift is None:
        known = np.flatnonzero(np.isfinite(heading_error))
        first = int(known[0]) if len(known) else hi
        shift = shift_for(entry, float(heading_error[first]) if len(known) else math.nan, first, shift_until)
    if shift:
        unwrapped[:shift_until] += shift
    pose = block["pose"][:hi]
    if before_pose is not None:
        pose = np.concatenate([before_pose[None, :], pose])
        kind = np.concatenate([kind[:1], kind])  # the step into row 0 is zero where row 0 re-anchors
    distance, turn = step_motion(pose, kind)
    if before_pose is not None:
        distance, turn = distance[1:], turn[1:]
    columns = {name: block[name][lo:hi] for name in ROW_COLUMNS}
    if copy:
        columns = {name: column.copy() for name, column in columns.items()}
    return Rows(columns, unwrapped[lo:hi], distance[lo:hi],
                turn[lo:hi], anchor[lo:hi], shift_until)


def last_finite(values: np.ndarray) -> tuple[float, float, float] | None:
    """The newest row of (N, 3) ``values`` with every number known, or None."""
    ok = np.flatnonzero(np.isfinite(values).all(axis=1))
    return tuple(map(float, values[ok[-1]])) if len(ok) else None


@dataclass
class BlockSummary:
    """What is kept of one full block (``summarise``). ``shift`` is set once, when the block
    is first chained to the block before it (window_rows.py): the unwrapped heading error of
    its rows before ``shift_until`` is the one kept plus ``shift``."""

    rx: np.ndarray  # the block's own rx column: tells this block from one that took its place
    numbers: Numbers
    stand_in: StandIn | None  # None when the block re-anchors (its rows are read instead)
    first_pose: np.ndarray
    last_pose: np.ndarray
    first_known: int  # the first row with a heading error (the length: none)
    first_heading: float  # its heading error (wrapped, rad), NaN without one
    last_known: int  # the last such row (-1: none)
    exit_heading: float
    exit_unwrapped: float  # its unwrapped value as kept
    anchor_after_last_known: bool  # a re-anchor after the last known row (or in a block without one)
    shift_until: int
    anchors_xy: np.ndarray  # (K, 2) recomputed positions where it re-anchors
    long_loops: np.ndarray  # (L, 2) rx and loop period (s) of loops over the threshold
    drawn: dict[str, np.ndarray]  # per view: (M, 1 + columns) rx then the view's columns at its rows
    drawn_moves: np.ndarray  # per drawn row of "errors": True when its unwrapped value moves with the shift
    newest_pose: tuple[float, float, float] | None
    newest_reported: tuple[float, float, float] | None
    shift: float | None = None

    @property
    def has_anchor(self) -> bool:
        """True when a row of the block re-anchors."""
        return self.stand_in is None

    def chain(self, entry: Entry) -> None:
        """Set ``shift`` from the entry into the block, once: later it is kept, so the line
        stays where it was when the block before is let go of."""
        if self.shift is None:
            self.shift = shift_for(entry, self.first_heading, self.first_known, self.shift_until)

    def exit(self, entry: Entry) -> Entry:
        """The entry this block hands on, given the one into it (after ``chain``)."""
        if self.anchor_after_last_known:
            return None
        if self.last_known < 0:
            return entry
        moved = self.last_known < self.shift_until
        return self.exit_heading, self.exit_unwrapped + (self.shift if moved else 0.0)


def drawn_rows(columns: list[np.ndarray], n: int) -> np.ndarray:
    """Sorted rows holding the lowest and highest value of each column in every bin of BIN_ROWS."""
    bins = max(1, n // BIN_ROWS)
    if n <= 2 * bins:
        return np.arange(n)
    picks = [NaNMinMaxDownsampler().downsample(np.ascontiguousarray(c), n_out=2 * bins) for c in columns]
    return np.unique(np.concatenate(picks))


def view_values(rows: Rows, view: str) -> list[np.ndarray]:
    """The columns ``view`` draws (VIEW_COLUMNS) of rows read."""
    out = []
    for name, index in VIEW_COLUMNS[view]:
        column = rows.unwrapped if name == "unwrapped" else rows.columns[name]
        out.append(column if index is None else column[:, index])
    return out


def drawn_of(rows: Rows, view: str, picked: np.ndarray | None = None) -> np.ndarray:
    """(M, 1 + columns): rx and the columns ``view`` draws, at ``picked`` (every row: None)."""
    values = [rows.columns["rx"], *view_values(rows, view)]
    return np.column_stack(values if picked is None else [v[picked] for v in values])


def summarise(block: dict[str, np.ndarray], threshold_s: float) -> BlockSummary:
    """The summary of a full block (every row written), its unwrapping made with no entry."""
    n = len(block["rx"])
    rows = read_rows(block, 0, n, None, None, shift=0.0, copy=False)
    columns, anchor = rows.columns, rows.anchor
    heading_error, shift_until = columns["heading_error"], rows.shift_until
    known = np.flatnonzero(np.isfinite(heading_error))
    drawn, moves = {}, np.empty(0, dtype=bool)
    for view in VIEW_COLUMNS:
        picked = drawn_rows(view_values(rows, view), n)
        drawn[view] = drawn_of(rows, view, picked)
        if view == "errors":
            moves = picked < shift_until
    anchors = np.flatnonzero(anchor)
    last_known = int(known[-1]) if len(known) else -1
    long = np.flatnonzero(columns["loop"] > threshold_s)
    return BlockSummary(
        rx=block["rx"],
        numbers=numbers(columns["position_error"], heading_error, columns["loop"], threshold_s),
        stand_in=None if len(anchors) else stand_in(columns["position_error"], heading_error, rows.distance,
                                                    rows.turn),
        first_pose=columns["pose"][0].copy(),  # copies: a summary keeps no more of the block than it needs
        last_pose=columns["pose"][-1].copy(),
        first_known=int(known[0]) if len(known) else n,
        first_heading=float(heading_error[known[0]]) if len(known) else math.nan,
        last_known=last_known,
        exit_heading=float(heading_error[last_known]) if len(known) else math.nan,
        exit_unwrapped=float(rows.unwrapped[last_known]) if len(known) else math.nan,
        anchor_after_last_known=bool(len(anchors)) and int(anchors[-1]) > last_known,
        shift_until=shift_until,
        anchors_xy=columns["pose"][anchor, :2],
        long_loops=np.column_stack([columns["rx"][long], columns["loop"][long]]),
        drawn=drawn,
        drawn_moves=moves,
        newest_pose=last_finite(columns["pose"]),
        newest_reported=last_finite(columns["reported"]),
    )
