"""Pose integration: body displacements -> field poses, streaming and batch.

Poses are arrays (..., 3) of (x, y, heading) in the REP 103 field frame,
heading in radians and left unwrapped (continuous) so that sums stay exact;
wrap only for display. Three methods, selectable everywhere:

- ``euler``: rotate (dx, dy) by the old heading.
- ``midpoint``: rotate by the old heading plus dth / 2.
- ``arc`` (default): the SE(2) exponential of the twist (dx, dy, dth), exact
  when the body velocity is constant over the step (Lynch and Park, Modern
  Robotics, 2017, ch. 3.2.3 and 13.4).

Pure numpy; no I/O and no state kept between calls.
"""

from __future__ import annotations

import math

import numpy as np

METHODS = ("arc", "midpoint", "euler")

# Below this |dth| the arc factors come from their Taylor series in t^2 (8
# terms: the next is under 5e-17 at t = 0.5, so exact to double precision).
# That sidesteps the closed forms' cancellation near zero (about 1e-16 / t)
# and is several times cheaper than sin and cos; per-loop rotations of a
# robot sit far below this.
_SERIES_BELOW = 0.5
_BLOCK = 16384  # samples per block of the batch path
_A_SERIES = tuple((-1) ** k / math.factorial(2 * k + 1) for k in range(8))  # sin(t)/t
_B_SERIES = tuple((-1) ** k / math.factorial(2 * k + 2) for k in range(8))  # (1 - cos t)/t, over t


def _horner(coefficients: tuple[float, ...], u: np.ndarray) -> np.ndarray:
    result = np.full_like(u, coefficients[-1])
    for c in coefficients[-2::-1]:
        result *= u
        result += c
    return result


def _arc_factors(dth: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """sin(t)/t and (1 - cos t)/t: the series near t = 0, closed forms beyond."""
    t = np.asarray(dth, dtype=float)
    u = t * t
    a = _horner(_A_SERIES, u)
    b = _horner(_B_SERIES, u)
    b *= t
    large = np.abs(t) >= _SERIES_BELOW
    if np.any(large):
        tl = t[large]
        a[large] = np.sin(tl) / tl
        b[large] = (1.0 - np.cos(tl)) / tl
    return a, b


def _over_loops(lx: np.ndarray, ly: np.ndarray, dth: np.ndarray, loops: np.ndarray, method: str) -> tuple[np.ndarray, np.ndarray]:
    """(lx, ly) of a step that the robot took as ``loops`` equal steps of ``method``.

    A sample that arrives after lost ones carries the counts of several of
    the robot's loops. Taken as k equal steps of the twist / k, Euler moves
    by (dx + i dy) / k * sum_j e^(i j d) with d = dth / k, midpoint by the
    same turned by d / 2; the sum is e^(i (k - 1) d / 2) sin(k d / 2) / sin(d / 2).
    The arc needs nothing: k arcs of one twist are one arc.
    """
    k = np.asarray(loops, dtype=float)
    several = k > 1
    if method == "arc" or not several.any():
        return lx, ly
    d = np.where(several, dth / k, 0.0)
    half = np.sin(0.5 * d)
    ratio = np.where(half != 0.0, np.sin(0.5 * k * d) / np.where(half != 0.0, half, 1.0), k) / k
    turn = 0.5 * (k - 1.0) * d + (0.5 * d if method == "midpoint" else 0.0)
    px, py = lx, ly
    if method == "midpoint":
        # The plain midpoint step already turned by dth / 2: undo it first.
        c, s = np.cos(0.5 * dth), np.sin(0.5 * dth)
        px, py = c * lx + s * ly, -s * lx + c * ly
    c, s = ratio * np.cos(turn), ratio * np.sin(turn)
    return np.where(several, c * px - s * py, lx), np.where(several, s * px + c * py, ly)


def local_displacement(
    delta: np.ndarray, method: str = "arc", loops: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Translation (lx, ly), each (...), in the frame of the old heading, for body deltas (..., 3).

    ``loops`` (...), when given, is how many of the robot's loops each step
    spans (see ``_over_loops``); None is one each.
    """
    delta = np.asarray(delta, dtype=float)
    dx, dy, dth = delta[..., 0], delta[..., 1], delta[..., 2]
    if method == "euler":
        lx, ly = dx.copy(), dy.copy()
    elif method == "midpoint":
        c, s = np.cos(dth / 2.0), np.sin(dth / 2.0)
        lx, ly = c * dx - s * dy, s * dx + c * dy
    elif method == "arc":
        a, b = _arc_factors(dth)
        return a * dx - b * dy, b * dx + a * dy
    else:
        raise ValueError(f"unknown integration method {method!r}, expected one of {', '.join(METHODS)}")
    return (lx, ly) if loops is None else _over_loops(lx, ly, dth, loops, method)


def _moved(
    delta: np.ndarray, heading: np.ndarray, method: str, loops: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Field-frame translation of each step, rotating by the heading before it."""
    lx, ly = local_displacement(delta, method, loops)
    c, s = np.cos(heading), np.sin(heading)
    return c * lx - s * ly, s * lx + c * ly


def step(pose: np.ndarray, delta: np.ndarray, method: str = "arc") -> np.ndarray:
    """One integration step: pose (..., 3) moved by body delta (..., 3)."""
    pose = np.asarray(pose, dtype=float)
    delta = np.asarray(delta, dtype=float)
    mx, my = _moved(delta, pose[..., 2], method)
    return np.stack([pose[..., 0] + mx, pose[..., 1] + my, pose[..., 2] + delta[..., 2]], axis=-1)


_A0, _A1, _A2, _A3, _A4, _A5, _A6, _A7 = _A_SERIES
_B0, _B1, _B2, _B3, _B4, _B5, _B6, _B7 = _B_SERIES


def _arc_factors_one(t: float) -> tuple[float, float]:
    """``_arc_factors`` for one float: the same series, switch point and
    order of operations (``_horner`` unrolled), so the same roundings."""
    if abs(t) >= _SERIES_BELOW:
        return math.sin(t) / t, (1.0 - math.cos(t)) / t
    u = t * t
    a = _A0 + u * (_A1 + u * (_A2 + u * (_A3 + u * (_A4 + u * (_A5 + u * (_A6 + u * _A7))))))
    b = _B0 + u * (_B1 + u * (_B2 + u * (_B3 + u * (_B4 + u * (_B5 + u * (_B6 + u * _B7))))))
    return a, b * t


def step_one(
    pose: tuple[float, float, float], delta: tuple[float, float, float], method: str = "arc"
) -> tuple[float, float, float]:
    """``step`` for one sample in plain floats: the live receiver's path.

    The same formulas as ``step`` without numpy, whose fixed cost per call
    is tens of times the arithmetic of one sample.
    """
    x, y, heading = pose
    dx, dy, dth = delta
    if method == "arc":
        a, b = _arc_factors_one(dth)
        lx, ly = a * dx - b * dy, b * dx + a * dy
    elif method == "midpoint":
        c, s = math.cos(dth / 2.0), math.sin(dth / 2.0)
        lx, ly = c * dx - s * dy, s * dx + c * dy
    elif method == "euler":
        lx, ly = dx, dy
    else:
        raise ValueError(f"unknown integration method {method!r}, expected one of {', '.join(METHODS)}")
    c, s = math.cos(heading), math.sin(heading)
    return x + (c * lx - s * ly), y + (s * lx + c * ly), heading + dth


def _integrate_one_segment(
    deltas: np.ndarray, start: np.ndarray, method: str, loops: np.ndarray | None = None
) -> np.ndarray:
    """The batch path without anchors, built for speed.

    Headings are cumulative sums. The rotation by each old heading is the
    running product of the steps' unit complex numbers e^(i dth) instead of
    a sin and cos of every heading: for the arc method cos and sin of dth
    fall out of the arc factors (sin t = a t, cos t = 1 - b t) at no cost.
    Rounding in the product grows like 1e-16 per step (1e-10 after a million
    steps), far inside the 1e-9 agreement with ``step``.
    """
    n = deltas.shape[0]
    dx, dy, dth = deltas[:, 0], deltas[:, 1], deltas[:, 2]
    poses = np.empty((n, 3))
    np.cumsum(dth, out=poses[:, 2])
    poses[:, 2] += start[2]
    if method == "arc":
        a, b = _arc_factors(dth)
        local = (a * dx - b * dy) + 1j * (b * dx + a * dy)
        turn = (1.0 - b * dth) + 1j * (a * dth)
    else:
        lx, ly = local_displacement(deltas, method, loops)
        local = lx + 1j * ly
        turn = np.cos(dth) + 1j * np.sin(dth)
    # rotation[k] = e^(i heading before step k)
    rotation = np.empty(n, dtype=complex)
    rotation[0] = 1.0
    np.cumprod(turn[:-1], out=rotation[1:])
    rotation *= complex(math.cos(start[2]), math.sin(start[2]))
    path = np.cumsum(rotation * local)
    poses[:, 0] = path.real + start[0]
    poses[:, 1] = path.imag + start[1]
    return poses


def integrate(
    deltas: np.ndarray,
    start: np.ndarray,
    method: str = "arc",
    anchor_at: np.ndarray | None = None,
    anchor_pose: np.ndarray | None = None,
    loops: np.ndarray | None = None,
) -> np.ndarray:
    """Integrate a whole series of body deltas (N, 3) into poses (N, 3).

    poses[k] is the pose after deltas[k] is applied to poses[k-1]; the pose
    before the first delta is ``start``. At the sorted indices ``anchor_at``
    (K,) the pose is set to ``anchor_pose`` (K, 3) and those deltas are
    ignored: this is how resets and reboots re-anchor. Vectorised with
    cumulative sums; equal to repeated ``step`` calls to rounding (tests hold
    it to 1e-9). ``loops`` (N,), when given, is how many of the robot's loops
    each delta spans: a step after lost samples is integrated as the robot
    integrated it, in that many equal steps.
    """
    deltas = np.asarray(deltas, dtype=float)
    n = deltas.shape[0]
    start = np.asarray(start, dtype=float)
    if n == 0:
        return np.empty((0, 3))
    if anchor_at is None or len(anchor_at) == 0:
        # Blocks keep the temporaries in cache and out of fresh pages, which
        # is worth about 2x on long series here (tests/bench/bench_engine.py).
        poses = np.empty((n, 3))
        for begin in range(0, n, _BLOCK):
            end = min(begin + _BLOCK, n)
            part = None if loops is None else loops[begin:end]
            poses[begin:end] = _integrate_one_segment(deltas[begin:end], start, method, part)
            start = poses[end - 1]
        return poses
    anchor_at = np.asarray(anchor_at)
    anchor_pose = np.asarray(anchor_pose, dtype=float).reshape(-1, 3)
    if len(anchor_at) == 1 and anchor_at[0] == 0:
        # A stream's first sample: one segment from the anchor.
        rest = None if loops is None else loops[1:]
        return np.vstack([anchor_pose, integrate(deltas[1:], anchor_pose[0], method, loops=rest)])
    is_anchor = np.zeros(n, dtype=bool)
    is_anchor[anchor_at] = True
    # Segment k starts at the last anchor at or before k (segment 0 at `start`).
    seg = np.cumsum(is_anchor)
    seg_start_pose = np.vstack([start[None, :], anchor_pose])
    # Index of each segment's first sample (-1 for the implicit start segment).
    first = np.concatenate([[-1], anchor_at])[seg]

    dth = np.where(is_anchor, 0.0, deltas[:, 2])
    cum_th = np.cumsum(dth)
    base_th = np.where(first >= 0, cum_th[np.maximum(first, 0)], 0.0)
    heading = seg_start_pose[seg, 2] + (cum_th - base_th)
    old_heading = heading - dth

    moved = np.column_stack(_moved(deltas, old_heading, method, loops))
    moved[is_anchor] = 0.0
    cum_xy = np.cumsum(moved, axis=0)
    base_xy = np.where((first >= 0)[:, None], cum_xy[np.maximum(first, 0)], 0.0)
    xy = seg_start_pose[seg, :2] + (cum_xy - base_xy)
    return np.column_stack([xy, heading])


def wrap_angle(angle: np.ndarray) -> np.ndarray:
    """Wrap radians into (-pi, pi]."""
    wrapped = np.mod(np.asarray(angle, dtype=float) + np.pi, 2.0 * np.pi) - np.pi
    return np.where(wrapped == -np.pi, np.pi, wrapped)


def wrap_angle_one(angle: float) -> float:
    """``wrap_angle`` for one float (Python's % on floats is numpy's mod)."""
    wrapped = (angle + math.pi) % (2.0 * math.pi) - math.pi
    return math.pi if wrapped == -math.pi else wrapped
