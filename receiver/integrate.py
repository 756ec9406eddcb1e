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

import numpy as np

METHODS = ("arc", "midpoint", "euler")

# Below this |dth| the closed forms sin(t)/t and (1 - cos t)/t lose digits to
# cancellation (about 1e-16 / t); the series to t^5 is off by under 3e-16 here.
_SERIES_BELOW = 1e-2


def _arc_factors(dth: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """sin(t)/t and (1 - cos t)/t, with series near t = 0 (np.where, no branches)."""
    t = np.asarray(dth, dtype=float)
    small = np.abs(t) < _SERIES_BELOW
    safe = np.where(small, 1.0, t)
    t2 = t * t
    a = np.where(small, 1.0 - t2 / 6.0 + t2 * t2 / 120.0, np.sin(safe) / safe)
    b = np.where(small, t / 2.0 - t * t2 / 24.0 + t * t2 * t2 / 720.0, (1.0 - np.cos(safe)) / safe)
    return a, b


def local_displacement(delta: np.ndarray, method: str = "arc") -> np.ndarray:
    """Translation (..., 2) in the frame of the old heading, for body deltas (..., 3)."""
    delta = np.asarray(delta, dtype=float)
    dx, dy, dth = delta[..., 0], delta[..., 1], delta[..., 2]
    if method == "euler":
        return delta[..., :2].copy()
    if method == "midpoint":
        c, s = np.cos(dth / 2.0), np.sin(dth / 2.0)
        return np.stack([c * dx - s * dy, s * dx + c * dy], axis=-1)
    if method == "arc":
        a, b = _arc_factors(dth)
        return np.stack([a * dx - b * dy, b * dx + a * dy], axis=-1)
    raise ValueError(f"unknown integration method {method!r}, expected one of {', '.join(METHODS)}")


def _rotate(vec: np.ndarray, heading: np.ndarray) -> np.ndarray:
    c, s = np.cos(heading), np.sin(heading)
    return np.stack([c * vec[..., 0] - s * vec[..., 1], s * vec[..., 0] + c * vec[..., 1]], axis=-1)


def step(pose: np.ndarray, delta: np.ndarray, method: str = "arc") -> np.ndarray:
    """One integration step: pose (..., 3) moved by body delta (..., 3)."""
    pose = np.asarray(pose, dtype=float)
    delta = np.asarray(delta, dtype=float)
    moved = _rotate(local_displacement(delta, method), pose[..., 2])
    return np.concatenate([pose[..., :2] + moved, pose[..., 2:3] + delta[..., 2:3]], axis=-1)


def integrate(deltas: np.ndarray, start: np.ndarray, method: str = "arc", anchors: np.ndarray | None = None) -> np.ndarray:
    """Integrate a whole series of body deltas (N, 3) into poses (N, 3).

    poses[k] is the pose after deltas[k] is applied to poses[k-1]; the pose
    before the first delta is ``start``. Where ``anchors[k]`` is finite (an
    (N, 3) array, NaN elsewhere) the pose is set to it and deltas[k] ignored:
    this is how resets and reboots re-anchor. Vectorised with cumulative sums;
    equal to repeated ``step`` calls to rounding (tests hold it to 1e-9).
    """
    deltas = np.asarray(deltas, dtype=float)
    n = deltas.shape[0]
    start = np.asarray(start, dtype=float)
    if n == 0:
        return np.empty((0, 3))
    is_anchor = np.zeros(n, dtype=bool) if anchors is None else np.isfinite(anchors).all(axis=1)
    if not is_anchor.any():
        # One segment from `start`: plain cumulative sums.
        heading = start[2] + np.cumsum(deltas[:, 2])
        moved = _rotate(local_displacement(deltas, method), heading - deltas[:, 2])
        return np.column_stack([start[:2] + np.cumsum(moved, axis=0), heading])
    anchor_pose = np.asarray(anchors, dtype=float)[is_anchor]
    # Segment k starts at the last anchor at or before k (segment 0 at `start`).
    seg = np.cumsum(is_anchor)
    seg_start_pose = np.vstack([start[None, :], anchor_pose])
    idx = np.arange(n)
    # Index of each segment's first sample (-1 for the implicit start segment).
    first = np.concatenate([[-1], idx[is_anchor]])[seg]

    dth = np.where(is_anchor, 0.0, deltas[:, 2])
    cum_th = np.cumsum(dth)
    base_th = np.where(first >= 0, cum_th[np.maximum(first, 0)], 0.0)
    heading = seg_start_pose[seg, 2] + (cum_th - base_th)
    old_heading = heading - dth

    moved = _rotate(local_displacement(deltas, method), old_heading)
    moved[is_anchor] = 0.0
    cum_xy = np.cumsum(moved, axis=0)
    base_xy = np.where((first >= 0)[:, None], cum_xy[np.maximum(first, 0)], 0.0)
    xy = seg_start_pose[seg, :2] + (cum_xy - base_xy)
    return np.column_stack([xy, heading])


def wrap_angle(angle: np.ndarray) -> np.ndarray:
    """Wrap radians into (-pi, pi]."""
    wrapped = np.mod(np.asarray(angle, dtype=float) + np.pi, 2.0 * np.pi) - np.pi
    return np.where(wrapped == -np.pi, np.pi, wrapped)
