"""Pure figure builders of the Robot signals panel: the team's own signals against time.

Owns how the signals look: one row per signal, named on its axis, on the
page's time line (seconds, as the disagreement graph's), each in a colour of
the Okabe-Ito palette that the pose colours leave free. Arrays in, plain
dicts out; nothing here reads a clock, a session or a file.
"""

from __future__ import annotations

import numpy as np

from dashboard.figures import _layout, _line, _stacked_axes, as_list

# Okabe-Ito (Okabe and Ito, "Color Universal Design", 2008), after the blue and
# vermillion of the two poses and the bluish green of the disagreement.
SIGNAL_COLOURS = ("#E69F00", "#56B4E9", "#CC79A7", "#000000", "#F0E442")
ROW_PX = 110  # height of one signal's row; the graph grows with the rows
EMPTY = "no signals picked: the robot's own values (put(name, value) in the sender) show here"


def height_px(rows: int) -> int:
    """The graph's height for ``rows`` signals (one row's worth with none)."""
    return 80 + ROW_PX * max(rows, 1)


def signal_traces(names: list[str], series: list[tuple[np.ndarray, np.ndarray]]) -> dict:
    """One row per signal, in order: ``series`` holds (t s, values) for each of ``names``."""
    data = []
    for k, (name, (t, values)) in enumerate(zip(names, series)):
        data.append(_line(as_list(t), as_list(values, 6), name, SIGNAL_COLOURS[k % len(SIGNAL_COLOURS)],
                          width=1.6, yaxis="y" if k == 0 else f"y{k + 1}"))
    if not names:
        layout = _layout(showlegend=False, height=height_px(0), annotations=[
            {"text": EMPTY, "xref": "paper", "yref": "paper", "x": 0.5, "y": 0.5, "showarrow": False}],
            xaxis={"title": {"text": "time (s)"}, "visible": False}, yaxis={"visible": False})
        return {"data": data, "layout": layout}
    axes = _stacked_axes(list(names), "time (s)", gap=0.12 / max(len(names), 1))
    return {"data": data, "layout": _layout(showlegend=False, height=height_px(len(names)), **axes)}


def signal_extension(series: list[tuple[np.ndarray, np.ndarray]], max_points: int) -> tuple[dict, list[int], int]:
    """extendData for ``signal_traces``: each signal's new (t, values), in trace order."""
    return ({"x": [as_list(t) for t, _ in series], "y": [as_list(v, 6) for _, v in series]},
            list(range(len(series))), max_points)
