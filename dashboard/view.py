"""One refresh of the page for one robot: a whole redraw or only the new points.

Owns the step between a source and the figure builders: which rows are in
the window, which of them to draw (downsample.py), unit conversion, and the
cursor the page keeps between refreshes (what it already has). A whole
redraw happens on a new robot, window or source and every ``full_every_s``
(re-trimming the window exactly); otherwise only rows newer than the cursor
are sent as extendData, to one group of views per refresh in turn (see
APPEND_GROUPS). Reads the source; never touches Dash components.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from dashboard import figures, readouts
from dashboard.downsample import pick_rows
from dashboard.settings import Settings
from dashboard.tabs import TabView
from receiver.live.session import LinkState, RobotSnapshot, unheard_profiles
from receiver.odometry.counts import ANCHORS
from receiver.odometry.robot import METRES_PER_UNIT, missing_profile_hint

NO_PROFILE_UNIT = "robot units"
_ANCHOR_KINDS = np.array([int(k) for k in ANCHORS])
VIEWS = ("track", "poses", "errors", "loop")
# Appends go to one group per refresh, in turn, each group with every row
# since it was last sent; the readouts follow every refresh. Plotly redraws a
# whole graph to append to it: half the graphs per refresh keeps the page's
# refresh rate up, each graph moving at half of it.
APPEND_GROUPS = (("track", "errors"), ("poses", "loop"))  # the loop histogram goes with "loop"
# A histogram is a whole new figure for the page to lay out and draw, not an
# append; its shape over a window barely moves in a second.
HISTOGRAM_EVERY_S = 1.0


@dataclass
class Refresh:
    """What one refresh sends: per view either a whole figure or an extendData payload."""

    figures: dict[str, dict] = field(default_factory=dict)
    extensions: dict[str, tuple] = field(default_factory=dict)
    histogram: dict | None = None
    disagreement: readouts.Disagreement | None = None
    loop: readouts.LoopTiming | None = None
    snapshots: dict[str, RobotSnapshot] = field(default_factory=dict)
    robots: list[str] = field(default_factory=list)
    robot: str | None = None  # the robot shown: the one asked for, else the first there is
    status: str = ""
    unit: str = NO_PROFILE_UNIT
    now: float = math.nan
    unattributed: dict[str, int] = field(default_factory=dict)  # refused messages no robot could be named for
    problems: list[str] = field(default_factory=list)  # the receiver's own: a worker down, recording stopped
    notes: list[str] = field(default_factory=list)  # the receiver's links: buffer, kernel drops, outages
    cursor: dict = field(default_factory=dict)


def _unit(shown: TabView, robot: str | None) -> tuple[str, float | None]:
    profile = shown.profile(robot)
    if profile is None:
        return NO_PROFILE_UNIT, None
    return profile.distance_unit, METRES_PER_UNIT[profile.distance_unit]


def status_line(snap: RobotSnapshot | None, now: float, source_label: str, problems: Sequence[str] = (),
                unheard: Sequence[str] = ()) -> str:
    """One line on the selected robot's link, e.g. "practice-bot: no data for 4 s", after
    the receiver's own ``problems`` (e.g. "recording stopped: No space left on device");
    ``unheard`` names the profiles given for robots that sent nothing (``unheard_profiles``)."""
    if problems:
        source_label = f"{source_label} \u00b7 {'; '.join(problems)}"
    if snap is None:
        return f"{source_label}: waiting for a robot"
    if snap.state is LinkState.WAITING:
        text = f"{snap.robot}: waiting for data"
    elif snap.state is LinkState.QUIET:
        text = f"{snap.robot}: no data for {max(now - snap.last_rx, 0.0):.0f} s"
    else:
        text = f"{snap.robot}: receiving, {snap.rate_hz:.0f} messages/s"
    if not snap.has_profile:
        text += f"; no profile for this robot ({missing_profile_hint(snap.robot, unheard)}): not recomputed"
    return f"{source_label} \u00b7 {text}"


def refresh(
    shown: TabView, settings: Settings, robot: str | None, window_s: float, cursor: dict | None, force_full: bool = False
) -> Refresh:
    """One refresh of ``robot`` (the first there is when unknown) over the last ``window_s``
    seconds. ``cursor`` is the last refresh's ``Refresh.cursor``, which the page sends
    back; without one, or with ``force_full``, everything is redrawn.
    """
    source = shown.source
    now = source.now()
    hub = source.hub
    snapshots = hub.snapshot(now, loop_stats=False)  # the views compute their own from their rows
    robots = sorted(snapshots)
    if robot not in snapshots:
        robot = robots[0] if robots else None
    unit, metres_per_unit = _unit(shown, robot)
    problems = hub.health.problems()
    out = Refresh(snapshots=snapshots, robots=robots, robot=robot, unit=unit, now=now, problems=problems,
                  notes=hub.health.notes(),
                  status=status_line(snapshots.get(robot), now, source.label, problems, unheard_profiles(snapshots)))
    named = sum((Counter(snap.errors) for snap in snapshots.values()), Counter())
    out.unattributed = {
        str(reason): count - named[str(reason)] for reason, count in hub.errors.items() if count > named[str(reason)]
    }
    key = shown.key()
    full = (
        force_full
        or not cursor
        or "turn" not in cursor
        or cursor.get("robot") != robot
        or cursor.get("key") != key
        or cursor.get("window") != window_s
        or now - cursor.get("full_at", -math.inf) >= settings.full_every_s
        or now < cursor.get("full_at", -math.inf)
    )
    rows = hub.history(robot, since_rx=now - window_s) if robot else None
    if rows is None or not len(rows["rx"]):
        rows = _empty_rows()
    t = rows["rx"] - source.origin
    points = settings.points
    if full:
        span = float(t[-1] - t[0]) if len(t) > 1 else 0.0
        estimate = len(t) * window_s / span if span > 0 else points
        max_points = int(min(points, max(16, math.ceil(estimate))))
        new = slice(0, len(t))
        n_out = points
        turn, names = 0, VIEWS
        sent = [float(rows["rx"][-1]) if len(t) else now - window_s] * len(APPEND_GROUPS)
    else:
        max_points = cursor["max_points"]
        turn, sent = cursor["turn"], list(cursor["rx"])
        first = int(np.searchsorted(rows["rx"], sent[turn], side="right"))
        new = slice(first, len(t))
        span = float(rows["rx"][-1] - sent[turn]) if len(t) else 0.0
        n_out = max(4, math.ceil(points * span / window_s))
        names = APPEND_GROUPS[turn]
        if first < len(t):
            sent[turn] = float(rows["rx"][-1])
        turn = (turn + 1) % len(APPEND_GROUPS)
    _views(out, rows, t, new, n_out, full, max_points, settings, unit, metres_per_unit, names)
    if len(t):
        out.disagreement = readouts.disagreement(
            rows["pose"], rows["position_error"], rows["heading_error"], rows["kind"], metres_per_unit or math.nan
        )
    out.loop = readouts.loop_timing(rows["loop"], settings.loop_threshold_s)
    hist_at = -math.inf if full else cursor.get("hist_at", -math.inf)
    if "loop" in names and not 0.0 <= now - hist_at < HISTOGRAM_EVERY_S:
        out.histogram = figures.loop_histogram(
            rows["loop"] * 1000.0, settings.loop_threshold_s * 1000.0, out.loop.mean_s * 1000.0, out.loop.p95_s * 1000.0
        )
        hist_at = now
    out.cursor = {
        "robot": robot,
        "key": key,
        "window": window_s,
        "rx": sent,  # per group of APPEND_GROUPS: the newest row the page has
        "turn": turn,  # the group the next append goes to
        "full_at": now if full else cursor["full_at"],
        "max_points": max_points,
        "hist_at": hist_at,  # when the histogram was last sent
    }
    return out


def _views(
    out: Refresh, rows: dict, t: np.ndarray, new: slice, n_out: int, full: bool, max_points: int,
    settings: Settings, unit: str, metres_per_unit: float | None, names: tuple[str, ...],
) -> None:
    """Whole figures (``full``) or extendData of the rows in ``new``, for the views in ``names``."""
    if not full and new.start >= len(t):
        return
    scale = 1.0 / (metres_per_unit or METRES_PER_UNIT["in"])
    field_size, body = settings.field_size_m * scale, settings.footprint_m * scale
    tn = t[new]
    pose, rep = rows["pose"][new], rows["reported"][new]
    made = out.figures if full else out.extensions
    if "track" in names:
        track = pick_rows(tn, [pose[:, 0], pose[:, 1], rep[:, 0], rep[:, 1]], n_out)
        anchors = pose[np.isin(rows["kind"][new], _ANCHOR_KINDS)][:, :2]
        points = figures.TrackPoints(pose[track, :2], rep[track, :2], anchors, _last_finite(rows["pose"]),
                                     _last_finite(rows["reported"]))
        made["track"] = (figures.track_map(points, field_size, body, unit) if full
                         else figures.track_extension(points, body, max_points))
    # The row before these, which the page's graphs end with: a heading that
    # wraps between it and the first new row is broken there too.
    last = new.start - 1 if not full and new.start > 0 else None
    if "poses" in names:
        poses = pick_rows(tn, [*pose.T, *rep.T], n_out)
        before = None if last is None else (t[last], rows["pose"][last, 2], rows["reported"][last, 2])
        made["poses"] = (figures.pose_traces(tn[poses], pose[poses], rep[poses], unit) if full
                         else figures.pose_extension(tn[poses], pose[poses], rep[poses], max_points, before))
    if "errors" in names:
        err, head = rows["position_error"][new], np.degrees(rows["heading_error"][new])
        errors = pick_rows(tn, [err, head], n_out)
        before = None if last is None else (t[last], np.degrees(rows["heading_error"][last]))
        made["errors"] = (figures.disagreement_traces(tn[errors], err[errors], head[errors], unit) if full
                          else figures.disagreement_extension(tn[errors], err[errors], head[errors], max_points, before))
    if "loop" in names:
        loop_ms = rows["loop"][new] * 1000.0
        threshold_ms = settings.loop_threshold_s * 1000.0
        loops = pick_rows(tn, [loop_ms], n_out)
        long = np.flatnonzero(loop_ms > threshold_ms)[-settings.points:]
        made["loop"] = (figures.loop_traces(tn[loops], loop_ms[loops], tn[long], loop_ms[long], threshold_ms) if full
                        else figures.loop_extension(tn[loops], loop_ms[loops], tn[long], loop_ms[long], max_points))


def _last_finite(poses: np.ndarray, tail: int = 256) -> tuple[float, float, float] | None:
    # The newest rows first: scanning a whole 60 s window at 1 kHz took 1.5 ms a call.
    for part in (poses[-tail:], poses):
        ok = np.flatnonzero(np.isfinite(part).all(axis=1))
        if len(ok):
            return tuple(map(float, part[ok[-1]]))
    return None


def _empty_rows() -> dict[str, np.ndarray]:
    e = np.empty(0)
    return {
        "seq": e.astype(np.int64), "t": e, "rx": e, "pose": np.empty((0, 3)), "reported": np.empty((0, 3)),
        "position_error": e, "heading_error": e, "loop": e, "kind": e.astype(np.int8),
    }
