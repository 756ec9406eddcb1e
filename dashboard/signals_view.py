"""The Robot signals panel's part of a refresh: the team's own signals over the window.

Owns which signals are drawn (those picked, or the first few the robot sent
until a person picks) and what a refresh sends of them: a whole figure on a
whole redraw or a new pick, else the values received since the last refresh
as extendData. Reads the source's raw history (``RawHistory.signals``);
never touches Dash components.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from dashboard import signal_figures
from dashboard.downsample import pick_rows
from dashboard.signal_blocks import drawable
from receiver.live.raw_history import RawHistory

SHOWN_FIRST = 4  # signals drawn before a person picks any


def chosen(names: list[str], picked: list[str] | None) -> list[str]:
    """The signals to draw: those ``picked`` that the robot sent, in the order picked; the
    first SHOWN_FIRST it sent while nothing is picked yet (``picked`` None)."""
    if picked is None:
        return names[:SHOWN_FIRST]
    known = set(names)
    return [name for name in picked if name in known]


@dataclass
class SignalsOut:
    """What a refresh sends of the signals: a whole figure or an extension (or neither), the
    names the robot sent in the window (on a whole figure only), what is drawn, and the
    newest rx the page then has."""

    figure: dict | None = None
    extension: tuple | None = None
    names: list[str] | None = None
    shown: list[str] | None = None
    newest_rx: float | None = None


def whole(raw: RawHistory, robot: str, picked: list[str] | None, since_rx: float, origin: float,
          points: int) -> SignalsOut:
    """The figure of the signals received after ``since_rx`` (the window's start), read
    through kept block summaries (signal_blocks.py)."""
    values = drawable(raw, robot, since_rx)
    names = list(values)
    shown = chosen(names, picked)
    series = [_thinned(values[name], origin, points) for name in shown]
    newest = max((float(rx[-1]) for rx, _ in values.values() if len(rx)), default=since_rx)
    return SignalsOut(signal_figures.signal_traces(shown, series), None, names, shown, newest)


def appended(raw: RawHistory, robot: str, shown: list[str], since_rx: float, origin: float, window_s: float,
             points: int, max_points: int) -> SignalsOut:
    """extendData of the values of ``shown`` received after ``since_rx`` (none: nothing to send)."""
    values = raw.signals(robot, since_rx)
    newest = max((float(rx[-1]) for rx, _ in values.values() if len(rx)), default=since_rx)
    if not shown or newest <= since_rx:
        return SignalsOut(shown=shown, newest_rx=since_rx)
    n_out = max(4, math.ceil(points * (newest - since_rx) / window_s))
    series = [_thinned(values.get(name), origin, n_out) for name in shown]
    return SignalsOut(None, signal_figures.signal_extension(series, max_points), None, shown, newest)


def _thinned(held: tuple[np.ndarray, np.ndarray] | None, origin: float, n_out: int) -> tuple[np.ndarray, np.ndarray]:
    """(t s, values) of one signal, at most about ``n_out`` of them (MinMax keeps the peaks)."""
    if held is None:
        return np.empty(0), np.empty(0)
    rx, value = held
    keep = pick_rows(rx, [value], n_out)
    return rx[keep] - origin, value[keep]
