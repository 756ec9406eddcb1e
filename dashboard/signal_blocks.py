"""A robot's own signals over the page's window, read through kept block summaries.

Owns what the page keeps of a full block of a robot's signal rows (the
lowest and highest value of each signal in every bin of BIN_ROWS of its
rows, kept once: a full block never changes) and the join of those with the
rows of the blocks the window cuts, per signal name. A whole redraw of four
signals at 1 kHz over ten minutes then reads a few thousand rows, not
millions. Reads the raw history (``RawHistory.signal_cut``); never draws.
"""

from __future__ import annotations

import threading
import weakref

import numpy as np
from tsdownsample import NaNMinMaxDownsampler

from receiver.live.raw_history import RawHistory

BIN_ROWS = 64  # rows of one signal per bin of its kept rows
Drawn = dict[int, np.ndarray]  # a signal's number -> (M, 2): rx and value of the rows it may draw


def _by_name(rx: np.ndarray, value: np.ndarray, number: np.ndarray, thin: bool) -> Drawn:
    """Rows by signal number, in time order; ``thin``: the lowest and highest of each bin."""
    order = np.argsort(number, kind="stable")  # stable: each signal's rows stay in time order
    numbers, starts = np.unique(number[order], return_index=True)
    out: Drawn = {}
    for k, (name, start) in enumerate(zip(numbers.tolist(), starts.tolist())):
        rows = order[start: starts[k + 1] if k + 1 < len(starts) else len(order)]
        bins = len(rows) // BIN_ROWS
        if thin and bins >= 1 and len(rows) > 2 * bins:
            kept = NaNMinMaxDownsampler().downsample(np.ascontiguousarray(value[rows]), n_out=2 * bins)
            rows = rows[np.unique(kept)]
        out[name] = np.column_stack([rx[rows], value[rows]])
    return out


class _Kept:
    """One full block's kept rows, with the block's own rx column (which block it is)."""

    def __init__(self, block: dict[str, np.ndarray]) -> None:
        self.rx = block["rx"]
        self.drawn = _by_name(block["rx"], block["value"], block["name"], thin=True)


class RobotSignalBlocks:
    """The kept rows of one robot's full signal blocks, by block."""

    def __init__(self) -> None:
        self._kept: dict[int, _Kept] = {}
        self._lock = threading.Lock()

    def window(self, pieces: list[tuple[dict, int, int]]) -> list[Drawn]:
        """Per piece: the rows each signal may draw (kept for a whole full block, all rows
        elsewhere); forgets blocks the ring has let go of."""
        out = []
        with self._lock:
            kept, self._kept = self._kept, {}
            for block, lo, hi in pieces:
                found = kept.get(id(block))
                if found is not None and found.rx is not block["rx"]:
                    found = None  # a new block with the id of one let go of
                if found is None and hi == len(block["rx"]):
                    found = _Kept(block)
                if found is not None:
                    self._kept[id(block)] = found
                if found is not None and lo == 0:
                    out.append(found.drawn)
                else:
                    out.append(_by_name(block["rx"][lo:hi], block["value"][lo:hi], block["name"][lo:hi], thin=False))
        return out


def drawable(raw: RawHistory, robot: str, since_rx: float) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Per signal the robot sent after ``since_rx``, in order of first appearance: (rx, values)
    of the rows it may draw (each bin's lowest and highest in full blocks), oldest first."""
    held = raw.signal_cut(robot, since_rx)
    if held is None:
        return {}
    names, cut = held
    parts = _blocks(raw, robot).window(cut.pieces)
    out = {}
    for number, name in enumerate(names):
        found = [part[number] for part in parts if number in part]
        if found:
            rows = np.concatenate(found)
            out[name] = (rows[:, 0], rows[:, 1])
    return out


def warm_signals(raw: RawHistory, robot: str) -> None:
    """Keep the summaries of ``robot``'s full signal blocks ahead of a page drawing them."""
    held = raw.signal_cut(robot)
    if held is not None:
        _blocks(raw, robot).window(held[1].pieces)


_BLOCKS: weakref.WeakKeyDictionary[RawHistory, dict[str, RobotSignalBlocks]] = weakref.WeakKeyDictionary()
_BLOCKS_LOCK = threading.Lock()


def _blocks(raw: RawHistory, robot: str) -> RobotSignalBlocks:
    with _BLOCKS_LOCK:
        return _BLOCKS.setdefault(raw, {}).setdefault(robot, RobotSignalBlocks())
