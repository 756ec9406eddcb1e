"""Pure figure builders: arrays in, Plotly figures (plain dicts) or extendData payloads out.

Owns how each view looks: colours, trace order, axis titles with units, the
robot footprint drawing. Every builder takes arrays that are already
windowed and downsampled, in display units; nothing here reads a clock, a
session or a file, so each view is tested on known samples. Figures are
plain dicts, not graph objects, whose validation is far over the page's
budget. Arrays go out as plain rounded numbers, not Plotly's base64 typed
arrays: extendData appends to the figure as the page holds it, and Plotly
cannot extend a typed-array spec.

Traces are SVG ``scatter``, not WebGL ``scattergl``: the page only ever holds
downsampled series (``Settings.points``, 1000 by default, per view and
window), and at that length SVG is the faster of the two wherever WebGL is
rendered in software (a laptop without GPU acceleration, headless Chromium
in CI).
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

# Colours from the Okabe-Ito palette (Okabe and Ito, "Color Universal Design",
# 2008), chosen to stay apart for the common forms of colour blindness.
RECOMPUTE_COLOUR = "#0072B2"  # blue
REPORTED_COLOUR = "#D55E00"  # vermillion
DISAGREEMENT_COLOUR = "#009E73"  # bluish green
LONG_LOOP_COLOUR = "#CC79A7"  # reddish purple
ANCHOR_COLOUR = "#000000"
NEUTRAL = "#6b6b6b"
FIELD_LINE = "#c9c9c9"

RECOMPUTE_NAME = "podwatch recompute"
REPORTED_NAME = "robot's own pose"

# Trace order of each view: the extendData payloads address traces by index.
TRACK_RECOMPUTE_PATH, TRACK_REPORTED_PATH, TRACK_ANCHORS, TRACK_RECOMPUTE_BODY, TRACK_REPORTED_BODY = range(5)
POSE_ROWS = ("x", "y", "heading")  # each row: recompute trace, then reported trace
ERROR_POSITION, ERROR_HEADING = range(2)
LOOP_PERIOD, LOOP_LONG = range(2)
HISTOGRAM_SHORT, HISTOGRAM_LONG = range(2)
FIELD_TILES = 6  # common practice: a field is 6 x 6 foam tiles
# A footprint: body outline (5 points, closed), gap, heading arrow (2), gap, arrowhead (3).
FOOTPRINT_POINTS = 12

_FONT = {"family": "system-ui, -apple-system, Segoe UI, sans-serif", "size": 12, "color": "#1d2733"}
_MARGIN = {"l": 60, "r": 12, "t": 30, "b": 40}


def as_list(values: np.ndarray, digits: int = 3) -> list:
    """Plain JSON numbers: rounded (a thousandth of a second, inch or degree is
    plenty on screen), NaN as None (a gap)."""
    a = np.round(np.asarray(values, dtype=float), digits)
    if np.isfinite(a).all():
        return a.tolist()
    return np.where(np.isfinite(a), a, None).tolist()


def _layout(**extra) -> dict:
    """Common layout; sizes come from the page's stylesheet (the graphs are responsive).

    Every axis lets its tick labels overflow: by default Plotly measures each
    label's box on every redraw to hide those past the graph's edge, a forced
    browser layout per label that cost 15-20 % of a redraw.
    """
    layout = {
        "font": _FONT,
        "margin": _MARGIN,
        "autosize": True,
        "paper_bgcolor": "#ffffff",
        "plot_bgcolor": "#fbfbf8",
        "uirevision": "keep",  # keep the user's zoom across redraws
        "legend": {"orientation": "h", "yanchor": "bottom", "y": 1.0, "xanchor": "left", "x": 0.0},
        "xaxis": {},
        "yaxis": {},
        **extra,
    }
    for name, axis in layout.items():
        if name.startswith(("xaxis", "yaxis")):
            axis["ticklabeloverflow"] = "allow"
    return layout


def _stacked_axes(titles: list[str], x_title: str, gap: float = 0.05) -> dict:
    """Axes for rows sharing one time axis: yaxis (top) ... yaxisN (bottom), all on xaxis."""
    n = len(titles)
    height = (1.0 - gap * (n - 1)) / n
    axes: dict = {"xaxis": {"title": {"text": x_title}, "anchor": f"y{n}" if n > 1 else "y"}}
    for k, title in enumerate(titles):
        top = 1.0 - k * (height + gap)
        axes["yaxis" if k == 0 else f"yaxis{k + 1}"] = {
            "title": {"text": title}, "domain": [max(top - height, 0.0), top], "anchor": "x",
        }
    return axes


def _line(x, y, name: str, colour: str, *, dash: str = "solid", width: float = 2.0, yaxis: str = "y",
          legend: bool = True) -> dict:
    return {
        "type": "scatter", "mode": "lines", "x": x, "y": y, "name": name, "legendgroup": name,
        "showlegend": legend, "yaxis": yaxis, "line": {"color": colour, "width": width, "dash": dash},
    }


def footprint(pose: tuple[float, float, float] | None, size: float) -> tuple[list, list]:
    """(xs, ys) of FOOTPRINT_POINTS points drawing a square robot of side ``size``
    at ``pose`` (x, y, heading rad, REP 103) with an arrow along its heading;
    None where the pose is unknown and between the strokes."""
    if pose is None or not all(map(math.isfinite, pose)):
        return [None] * FOOTPRINT_POINTS, [None] * FOOTPRINT_POINTS
    x, y, th = pose
    h = size / 2.0
    # Body frame: x forward, y left. The arrow reaches past the front edge.
    body = [(h, h), (-h, h), (-h, -h), (h, -h), (h, h)]
    arrow = [(0.0, 0.0), (1.4 * h, 0.0)]
    head = [(1.05 * h, 0.3 * h), (1.4 * h, 0.0), (1.05 * h, -0.3 * h)]
    c, s = math.cos(th), math.sin(th)
    xs: list = []
    ys: list = []
    for stroke in (body, arrow, head):
        if xs:
            xs.append(None)
            ys.append(None)
        for bx, by in stroke:
            xs.append(x + c * bx - s * by)
            ys.append(y + s * bx + c * by)
    return xs, ys


class TrackPoints(NamedTuple):
    """What the track map shows, in one length unit: both paths (N, 2), the
    re-anchor points (K, 2) and each source's current pose (x, y, heading rad,
    REP 103; None when unknown). A whole redraw and an append take the same."""

    recompute_xy: np.ndarray
    reported_xy: np.ndarray
    anchors_xy: np.ndarray
    recompute_pose: tuple[float, float, float] | None
    reported_pose: tuple[float, float, float] | None


def _track_columns(points: TrackPoints, footprint_size: float) -> tuple[list, list]:
    """x and y of the track map's traces, in trace order: paths, anchors, footprints."""
    bodies = [footprint(points.recompute_pose, footprint_size), footprint(points.reported_pose, footprint_size)]
    xy = (points.recompute_xy, points.reported_xy, points.anchors_xy)
    xs = [as_list(a[:, 0]) for a in xy] + [b[0] for b in bodies]
    ys = [as_list(a[:, 1]) for a in xy] + [b[1] for b in bodies]
    return xs, ys


def field_shapes(field_size: float) -> list[dict]:
    """The field's border and tile lines, centred on the origin, under the traces."""
    half = field_size / 2.0
    tile = field_size / FIELD_TILES
    line = {"color": FIELD_LINE, "width": 1}
    shapes = [{"type": "rect", "x0": -half, "x1": half, "y0": -half, "y1": half, "layer": "below",
               "line": {"color": NEUTRAL, "width": 2}}]
    for k in range(1, FIELD_TILES):
        at = -half + k * tile
        shapes.append({"type": "line", "x0": at, "x1": at, "y0": -half, "y1": half, "layer": "below", "line": line})
        shapes.append({"type": "line", "x0": -half, "x1": half, "y0": at, "y1": at, "layer": "below", "line": line})
    return shapes


def track_map(points: TrackPoints, field_size: float, footprint_size: float, unit: str) -> dict:
    """The field seen from above, origin at its centre: both paths, the re-anchor
    points and each source's current footprint; lengths in ``unit``."""
    half = field_size / 2.0
    xs, ys = _track_columns(points, footprint_size)
    data = [
        _line(xs[0], ys[0], RECOMPUTE_NAME, RECOMPUTE_COLOUR),
        _line(xs[1], ys[1], REPORTED_NAME, REPORTED_COLOUR, dash="dot"),
        {
            "type": "scatter", "mode": "markers", "x": xs[2], "y": ys[2], "name": "re-anchored here",
            "marker": {"symbol": "x-thin", "size": 12, "line": {"width": 2, "color": ANCHOR_COLOUR}},
        },
    ]
    for k, (colour, name) in enumerate(((RECOMPUTE_COLOUR, RECOMPUTE_NAME), (REPORTED_COLOUR, REPORTED_NAME)), 3):
        data.append({"type": "scatter", "mode": "lines", "x": xs[k], "y": ys[k], "name": f"{name}, now",
                     "showlegend": False, "hoverinfo": "skip", "line": {"color": colour, "width": 2.5}})
    pad = 0.04 * field_size
    span = [-half - pad, half + pad]
    layout = _layout(
        shapes=field_shapes(field_size),
        showlegend=False,  # the page shows a legend key above the map
        xaxis={"title": {"text": f"x ({unit}), forward, REP 103"}, "range": span, "zeroline": False,
               "constrain": "domain"},
        yaxis={"title": {"text": f"y ({unit}), left"}, "range": span, "zeroline": False,
               "scaleanchor": "x", "scaleratio": 1},
    )
    return {"data": data, "layout": layout}


def track_extension(points: TrackPoints, footprint_size: float, max_points: int) -> tuple[dict, list[int], dict]:
    """extendData for ``track_map``: new path points and anchors appended, the
    footprints replaced (their traces keep only FOOTPRINT_POINTS points)."""
    xs, ys = _track_columns(points, footprint_size)
    keep = [max_points, max_points, max_points, FOOTPRINT_POINTS, FOOTPRINT_POINTS]
    return {"x": xs, "y": ys}, list(range(5)), {"x": keep, "y": keep}


def wrapped_degrees(heading_rad: np.ndarray) -> np.ndarray:
    """Degrees in (-180, 180]."""
    deg = np.degrees(heading_rad)
    return 180.0 - np.mod(180.0 - deg, 360.0)


def break_at_wraps(
    t: np.ndarray, deg: np.ndarray, before: tuple[float, float] | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """``t`` and ``deg`` with a gap (NaN) between neighbours that a wrap at
    +-180 degrees puts more than 180 apart: the line would otherwise cross the
    whole graph and read as a sudden swing of the robot's heading. ``before``
    is the (t, deg) the graph already ends with, for points appended to it."""
    if before is not None and len(t):
        tw, dw = break_at_wraps(np.concatenate([[before[0]], t]), np.concatenate([[before[1]], deg]))
        return (t, deg) if len(tw) == len(t) + 1 else (tw[1:], dw[1:])
    jumps = np.flatnonzero(np.abs(np.diff(deg)) > 180.0) + 1
    if not len(jumps):
        return t, deg
    return np.insert(t, jumps, 0.5 * (t[jumps - 1] + t[jumps])), np.insert(deg, jumps, np.nan)


def _degrees_column(
    t: np.ndarray, deg: np.ndarray, tl: list, before: tuple[float, float] | None = None
) -> tuple[list, list]:
    """(t, degrees) of one trace with gaps at its wraps; ``tl`` is ``t`` as
    sent, shared with the traces that need no gap."""
    tw, dw = break_at_wraps(t, deg, before)
    return (tl if tw is t else as_list(tw)), as_list(dw)


def _pose_columns(
    t: np.ndarray, recompute: np.ndarray, reported: np.ndarray, before: tuple[float, float, float] | None = None
) -> list[tuple[list, list]]:
    """(t, values) of x, y and heading (deg) of recompute then reported, in
    trace order; the headings with gaps at their wraps. ``before``: the time
    and the two headings (rad) the graph already ends with."""
    tl = as_list(t)
    columns = [(tl, as_list(v)) for v in (recompute[:, 0], reported[:, 0], recompute[:, 1], reported[:, 1])]
    for k, heading in enumerate((recompute[:, 2], reported[:, 2])):
        last = None if before is None else (before[0], float(wrapped_degrees(before[1 + k])))
        columns.append(_degrees_column(t, wrapped_degrees(heading), tl, last))
    return columns


def pose_traces(t: np.ndarray, recompute: np.ndarray, reported: np.ndarray, unit: str) -> dict:
    """x, y (``unit``) and heading (degrees, wrapped to (-180, 180], a gap at
    each wrap) against time t (s), from (N, 3) REP 103 poses with headings in radians."""
    data = []
    for k, (tt, values) in enumerate(_pose_columns(t, recompute, reported)):
        row, source = divmod(k, 2)
        name, colour, dash = ((RECOMPUTE_NAME, RECOMPUTE_COLOUR, "solid"), (REPORTED_NAME, REPORTED_COLOUR, "dot"))[source]
        data.append(_line(tt, values, name, colour, dash=dash, width=1.6,
                          yaxis="y" if row == 0 else f"y{row + 1}", legend=row == 0))
    axes = _stacked_axes([f"x ({unit})", f"y ({unit})", "heading (deg)"], "time (s)")
    return {"data": data, "layout": _layout(
        **axes)}


def pose_extension(
    t: np.ndarray, recompute: np.ndarray, reported: np.ndarray, max_points: int,
    before: tuple[float, float, float] | None = None,
) -> tuple[dict, list[int], int]:
    """extendData for ``pose_traces``; ``before`` as in ``_pose_columns``."""
    columns = _pose_columns(t, recompute, reported, before)
    return {"x": [c[0] for c in columns], "y": [c[1] for c in columns]}, list(range(len(columns))), max_points


def disagreement_traces(t: np.ndarray, position_error: np.ndarray, heading_error_deg: np.ndarray, unit: str) -> dict:
    """Position error (``unit``) and heading error (degrees, unwrapped: one continuous line
    through +-180, so that a steady growth per turn is a straight slope) against time t (s)."""
    tt = as_list(t)
    data = [
        _line(tt, as_list(position_error), "position error", DISAGREEMENT_COLOUR, width=1.8),
        _line(tt, as_list(heading_error_deg), "heading error", DISAGREEMENT_COLOUR, width=1.8, yaxis="y2"),
    ]
    axes = _stacked_axes([f"position ({unit})", "heading, unwrapped (deg)"], "time (s)", gap=0.08)
    axes["yaxis"]["rangemode"] = "tozero"
    return {"data": data, "layout": _layout(showlegend=False, **axes)}


def disagreement_extension(
    t: np.ndarray, position_error: np.ndarray, heading_error_deg: np.ndarray, max_points: int,
) -> tuple[dict, list[int], int]:
    """extendData for ``disagreement_traces``."""
    tl = as_list(t)
    return {"x": [tl, tl], "y": [as_list(position_error), as_list(heading_error_deg)]}, [0, 1], max_points


def loop_traces(t: np.ndarray, loop_ms: np.ndarray, long_t: np.ndarray, long_ms: np.ndarray, threshold_ms: float) -> dict:
    """Loop period (ms) against time t (s); loops over ``threshold_ms`` as markers on top."""
    data = [
        _line(as_list(t), as_list(loop_ms), "loop period", NEUTRAL, width=1.2),
        {"type": "scatter", "mode": "markers", "x": as_list(long_t), "y": as_list(long_ms),
         "name": f"longer than {threshold_ms:g} ms",
         "marker": {"color": LONG_LOOP_COLOUR, "size": 8, "symbol": "diamond"}},
    ]
    threshold = {"type": "line", "xref": "paper", "x0": 0, "x1": 1, "y0": threshold_ms, "y1": threshold_ms,
                 "line": {"color": LONG_LOOP_COLOUR, "width": 1, "dash": "dash"}}
    layout = _layout(
        shapes=[threshold], xaxis={"title": {"text": "time (s)"}},
                     yaxis={"title": {"text": "loop period (ms)"}, "rangemode": "tozero"})
    return {"data": data, "layout": layout}


def loop_extension(t: np.ndarray, loop_ms: np.ndarray, long_t: np.ndarray, long_ms: np.ndarray, max_points: int) -> tuple[dict, list[int], int]:
    """extendData for ``loop_traces``: new loop periods and long loops appended, each
    trace kept to ``max_points``.
    """
    return {"x": [as_list(t), as_list(long_t)], "y": [as_list(loop_ms), as_list(long_ms)]}, [0, 1], max_points


def loop_histogram(index: np.ndarray, counts: np.ndarray, bin_ms: float, threshold_ms: float, mean_ms: float,
                   p95_ms: float) -> dict:
    """Counts of loop periods in 1 ms bars (wider when the spread is large), from counts in
    narrow bins (``index`` of bins ``bin_ms`` wide, ``counts``; an index may repeat); bars
    from ``threshold_ms`` up in the highlight colour; mean and p95 marked, each label on
    the far side of its line from the other's, so the two never overlap."""
    per_bin = np.bincount(index, weights=counts) if len(index) else np.empty(0)
    top_ms = max((len(per_bin)) * bin_ms if len(per_bin) else 0.0, threshold_ms) + 1.0
    width = float(max(1, math.ceil(top_ms / 80.0)))
    bars = int(math.ceil(top_ms / width))
    # Each narrow bin into the bar its start falls in (a 1 ms bar holds ten 0.1 ms bins).
    bar_of = np.minimum((np.arange(len(per_bin)) * bin_ms / width + 1e-9).astype(np.int64), bars - 1)
    bar_counts = np.bincount(bar_of, weights=per_bin, minlength=bars).astype(np.int64) if len(per_bin) \
        else np.zeros(bars, dtype=np.int64)
    edges = np.arange(bars + 1) * width
    centres = (edges[:-1] + edges[1:]) / 2.0
    long = edges[:-1] >= threshold_ms
    data = [
        {"type": "bar", "x": as_list(centres[~long]), "y": bar_counts[~long].tolist(), "width": width,
         "name": "loops", "marker": {"color": NEUTRAL}},
        {"type": "bar", "x": as_list(centres[long]), "y": bar_counts[long].tolist(), "width": width,
         "name": f"longer than {threshold_ms:g} ms", "marker": {"color": LONG_LOOP_COLOUR}},
    ]
    marks = sorted(((v, label) for v, label in ((mean_ms, "mean"), (p95_ms, "p95")) if math.isfinite(v)))
    shapes, notes = [], []
    for k, (value, label) in enumerate(marks):
        # The lower value's label reads leftwards from its line, the higher's rightwards.
        leftwards = k == 0 and len(marks) == 2
        shapes.append({"type": "line", "yref": "paper", "y0": 0, "y1": 1, "x0": value, "x1": value,
                       "line": {"color": "#1d2733", "width": 1, "dash": "dot" if label == "mean" else "dash"}})
        notes.append({"x": value, "y": 1.0, "yref": "paper", "yanchor": "top", "text": f"{label} {value:.1f} ms",
                      "showarrow": False, "xanchor": "right" if leftwards else "left", "xshift": -3 if leftwards else 3,
                      "font": {"size": 11}, "bgcolor": "rgba(255,255,255,0.8)"})
    log = int(bar_counts.max()) > 50 if len(bar_counts) else False
    layout = _layout(
        bargap=0.05, showlegend=False, shapes=shapes, annotations=notes,
        xaxis={"title": {"text": "loop period (ms)"}, "range": [0.0, bars * width]},
        yaxis={"title": {"text": "loops"}, "type": "log" if log else "linear", "dtick": 1 if log else None})
    return {"data": data, "layout": layout}
