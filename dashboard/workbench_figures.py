"""Pure figure builders of the compare and loop-cost views.

Owns how those graphs look: runs' disagreement curves overlaid against
distance driven, one colour per run; and what the loop rate costs, the
Euler and midpoint recomputes' distance from the arc's over time and per
metre driven by loop period. Arrays in (already downsampled, display units),
plain-dict figures out, in the look of figures.py; no clock, no I/O.
"""

from __future__ import annotations

import math
from typing import NamedTuple, Sequence

import numpy as np

from dashboard.figures import _layout, _line, _stacked_axes, as_list
from receiver.analysis.loop_cost import LoopCostBins

# Okabe-Ito ("Color Universal Design", 2008) without its yellow, which is
# hard to see on white: one colour per run, in this order, then again.
RUN_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
EULER_COLOUR = "#E69F00"  # orange
MIDPOINT_COLOUR = "#56B4E9"  # sky blue
EULER_NAME = "Euler"
MIDPOINT_NAME = "midpoint"


class RunCurve(NamedTuple):
    """One run's disagreement against distance driven, for overlaying: (N,) each; the position
    error already in the figure's unit, the heading error in degrees."""

    label: str
    distance_m: np.ndarray
    position_error: np.ndarray
    heading_error_deg: np.ndarray


def run_colour(index: int) -> str:
    """The colour of the run at ``index`` (0-based) in the table and the curves."""
    return RUN_COLOURS[index % len(RUN_COLOURS)]


def compare_curves(runs: Sequence[RunCurve], unit: str) -> dict:
    """Position error (``unit``) and heading error (degrees, unwrapped: one line through +-180)
    of each run against the distance it drove (m), one colour per run."""
    data = []
    for k, run in enumerate(runs):
        data.append(_line(as_list(run.distance_m), as_list(run.position_error), f"#{k + 1} {run.label}",
                          run_colour(k), width=1.8))
    for k, run in enumerate(runs):
        data.append(_line(as_list(run.distance_m), as_list(run.heading_error_deg), f"#{k + 1} {run.label}",
                          run_colour(k), width=1.6, yaxis="y2", legend=False))
    axes = _stacked_axes([f"position ({unit})", "heading, unwrapped (deg)"], "distance driven (m)", gap=0.08)
    axes["yaxis"]["rangemode"] = "tozero"
    return {"data": data, "layout": _layout(**axes)}


def loop_cost_over_time(t: np.ndarray, euler_gap: np.ndarray, midpoint_gap: np.ndarray, unit: str) -> dict:
    """How far the Euler and the midpoint recomputes are from the arc's (``unit``) against time t (s)."""
    tt = as_list(t)
    data = [
        _line(tt, as_list(euler_gap, 4), f"{EULER_NAME} from arc", EULER_COLOUR, width=1.8),
        _line(tt, as_list(midpoint_gap, 4), f"{MIDPOINT_NAME} from arc", MIDPOINT_COLOUR, width=1.8),
    ]
    return {"data": data, "layout": _layout(
        xaxis={"title": {"text": "time (s)"}},
        yaxis={"title": {"text": f"distance from arc ({unit})"}, "rangemode": "tozero"},
    )}


def period_labels(edges_s: np.ndarray) -> list[str]:
    """Each bin of loop periods as text in ms: "10-15 ms", the last "100 ms and over"."""
    labels = []
    for low, high in zip(edges_s[:-1], edges_s[1:]):
        labels.append(f"{low * 1000:g} ms and over" if math.isinf(high) else f"{low * 1000:g}-{high * 1000:g} ms")
    return labels


def loop_cost_by_period(bins: LoopCostBins, unit: str) -> dict:
    """Per bin of loop period that holds steps: the Euler and midpoint recomputes' per-step distance
    from the arc's, summed and divided by the metres driven (``unit`` per metre), side by side;
    each bar's hover names its steps and metres."""
    used = np.flatnonzero(bins.steps > 0)
    labels = [period_labels(bins.edges_s)[k] for k in used]
    hover = [f"{int(bins.steps[k])} steps, {bins.travel_m[k]:.2f} m driven" for k in used]
    data = [
        {"type": "bar", "x": labels, "y": as_list(values[used], 4), "name": name, "text": hover, "textposition": "none",
         "hovertemplate": f"%{{x}}: %{{y}} {unit}/m<br>%{{text}}<extra>{name}</extra>", "marker": {"color": colour}}
        for values, name, colour in ((bins.euler_per_m, EULER_NAME, EULER_COLOUR),
                                     (bins.midpoint_per_m, MIDPOINT_NAME, MIDPOINT_COLOUR))
    ]
    return {"data": data, "layout": _layout(
        barmode="group",
        xaxis={"title": {"text": "loop period"}, "type": "category"},
        yaxis={"title": {"text": f"{unit} from arc per metre driven"}, "rangemode": "tozero"},
    )}
