"""One refresh of the page for one robot: a whole redraw or only the new points.

Owns the step between a source and the figure builders: which rows are in
the window (window_rows.py reads them through kept block summaries), which
of them to draw (downsample.py), unit conversion, and the cursor the page
keeps between refreshes (what it already has). A whole redraw happens on a
new robot, window or source and every ``full_every_s`` (re-trimming the
window exactly); otherwise only rows newer than the cursor are sent as
extendData, to one group of views per refresh in turn (see APPEND_GROUPS).
Reads the source; never touches Dash components.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from dashboard import figures, readouts, signals_view, status
from dashboard.block_summary import LOOP_BIN_MS, Rows, drawn_of
from dashboard.downsample import pick_rows
from dashboard.settings import Settings
from dashboard.tabs import TabView
from dashboard.window_rows import Reader, Window, warm
from receiver.live.health import Health, WorkerState
from receiver.live.session import RobotSnapshot, unheard_profiles
from receiver.odometry.robot import METRES_PER_UNIT

NO_PROFILE_UNIT = "robot units"
VIEWS = ("track", "poses", "errors", "loop", "signals")
# Appends go to one group per refresh, in turn, each group with every row
# since it was last sent; the readouts follow every refresh. Plotly redraws a
# whole graph to append to it: part of the graphs per refresh keeps the
# page's refresh rate up. The robot's signals move with the disagreement,
# whose time axis they share.
APPEND_GROUPS = (("track",), ("errors", "signals"), ("poses", "loop"))  # the loop histogram goes with "loop"
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
    status: status.Status = status.Status((), "")
    unit: str = NO_PROFILE_UNIT
    now: float = math.nan
    unattributed: dict[str, int] = field(default_factory=dict)  # refused messages no robot could be named for
    signal_names: list[str] | None = None  # the signals the robot sent in the window, on a whole figure
    problems: list[str] = field(default_factory=list)  # the receiver's own: a worker down, recording stopped
    notes: list[str] = field(default_factory=list)  # the receiver's links: buffer, kernel drops, outages
    cursor: dict = field(default_factory=dict)


def _unit(shown: TabView, robot: str | None) -> tuple[str, float | None]:
    profile = shown.profile(robot)
    if profile is None:
        return NO_PROFILE_UNIT, None
    return profile.distance_unit, METRES_PER_UNIT[profile.distance_unit]


def _status(shown: TabView, snapshots: dict[str, RobotSnapshot], robot: str | None, now: float,
            health: Health, problems: list[str]) -> status.Status:
    """The status line: the receiver's own troubles (a worker down, the recording stopped)
    as badges of their own, the replay's state, the robot's link."""
    replay = shown.replay
    where = None if replay is None else status.Replaying(replay.playing, replay.position_s, replay.duration_s,
                                                         replay.speed)
    down = [w.text() for w in health.workers() if w.state is not WorkerState.RUNNING]
    stopped = health.recording_stopped
    told = {*down, f"recording stopped: {stopped}"}
    return status.status(snapshots.get(robot), now, shown.label, where, recording_stopped=stopped,
                         worker_errors=tuple(down), problems=tuple(p for p in problems if p not in told),
                         unheard=tuple(unheard_profiles(snapshots)))


def refresh(
    shown: TabView, settings: Settings, robot: str | None, window_s: float, cursor: dict | None,
    force_full: bool = False, signals: list[str] | None = None,
) -> Refresh:
    """One refresh of ``robot`` (the first there is when unknown) over the last ``window_s``
    seconds. ``cursor`` is the last refresh's ``Refresh.cursor``, which the page sends
    back; without one, or with ``force_full``, everything is redrawn. ``signals``: the
    robot's own signals to draw (None: the first few it sent).
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
                  notes=hub.health.notes(), status=_status(shown, snapshots, robot, now, hub.health, problems))
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
    since = now - window_s
    reader = Reader.of(hub, robot, settings.loop_threshold_s) if robot else None
    window = reader.window(since, metres_per_unit or math.nan) if reader else None
    origin = source.origin
    points = settings.points
    if full:
        rows = window.rows if window else 0
        span = window.newest_rx - window.oldest_rx if rows > 1 else 0.0
        estimate = rows * window_s / span if span > 0 else points
        max_points = int(min(points, max(16, math.ceil(estimate))))
        turn, names = 0, VIEWS
        sent = [window.newest_rx if rows else since] * len(APPEND_GROUPS)
        if window is not None:
            _whole_views(out, window, origin, settings, unit, metres_per_unit)
    else:
        max_points = cursor["max_points"]
        turn, sent = cursor["turn"], list(cursor["rx"])
        names = APPEND_GROUPS[turn]
        new = reader.rows_since(sent[turn]) if reader else None
        if new is not None:
            span = float(new.columns["rx"][-1] - sent[turn])
            n_out = max(4, math.ceil(points * span / window_s))
            before = reader.row_before(sent[turn])
            before = None if before is None else (before[0] - origin, before[1], before[2])
            _appended_views(out, new, before, origin, n_out, max_points, settings, unit, metres_per_unit, names)
            sent[turn] = float(new.columns["rx"][-1])
        turn = (turn + 1) % len(APPEND_GROUPS)
    signals = _signals(out, source, robot, signals, full, cursor, since, window_s, max_points, settings, names)
    # One other robot's new blocks, a few at a time: picking it later draws from kept summaries.
    others = [name for name in robots if name != robot]
    if others:
        warm(hub, others[int(now * 4.0) % len(others)], settings.loop_threshold_s)
    _readouts(out, window, origin, settings)
    hist_at = -math.inf if full else cursor.get("hist_at", -math.inf)
    if "loop" in names and not 0.0 <= now - hist_at < HISTOGRAM_EVERY_S:
        bins = window.numbers.loop_bins if window else (np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64))
        out.histogram = figures.loop_histogram(*bins, LOOP_BIN_MS, settings.loop_threshold_s * 1000.0,
                                               out.loop.mean_s * 1000.0, out.loop.p95_s * 1000.0)
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
        **signals,  # which signals the page draws, and the newest value it has
    }
    return out


def _signals(out: Refresh, source, robot: str | None, picked: list[str] | None, full: bool, cursor: dict | None,
             since: float, window_s: float, max_points: int, settings: Settings, names: tuple[str, ...]) -> dict:
    """The signals' figure or new values into ``out``; what the cursor keeps of them."""
    kept = {k: (cursor or {}).get(k) for k in ("signals_picked", "signals_shown", "signals_rx")}
    if cursor and cursor.get("robot") != robot:
        picked = None  # another robot's picks: its own first few until a person picks
    picked_anew = picked != kept["signals_picked"]  # drawn at once, whichever group's turn it is
    if robot is None or ("signals" not in names and not picked_anew):
        return kept
    if full or picked_anew:
        sent = signals_view.whole(source.raw, robot, picked, since, source.origin, settings.points)
        out.figures["signals"] = sent.figure
        out.signal_names = sent.names
    else:
        sent = signals_view.appended(source.raw, robot, kept["signals_shown"] or [], kept["signals_rx"],
                                     source.origin, window_s, settings.points, max_points)
        if sent.extension is not None:
            out.extensions["signals"] = sent.extension
    return {"signals_picked": picked, "signals_shown": sent.shown, "signals_rx": sent.newest_rx}


def _readouts(out: Refresh, window: Window | None, origin: float, settings: Settings) -> None:
    if window is None:
        out.disagreement = None
        out.loop = readouts.LoopTiming(0, math.nan, math.nan, math.nan, 0)
        return
    kept = window.numbers
    out.disagreement = readouts.Disagreement(
        position_now=window.position_now,
        position_worst=kept.position_worst,
        heading_now_deg=math.degrees(window.heading_now),
        heading_worst_deg=math.degrees(kept.heading_worst),
        growth=window.growth,
        stretch_s=(window.stretch_rx[0] - origin, window.stretch_rx[1] - origin),
    )
    out.loop = readouts.loop_timing(kept)


def _scale(settings: Settings, metres_per_unit: float | None) -> tuple[float, float]:
    scale = 1.0 / (metres_per_unit or METRES_PER_UNIT["in"])
    return settings.field_size_m * scale, settings.footprint_m * scale


def _thinned(drawn: np.ndarray, n_out: int) -> np.ndarray:
    """The rows of ``drawn`` (rx, then columns) that the page draws: MinMax over each column."""
    picked = pick_rows(drawn[:, 0], [drawn[:, k] for k in range(1, drawn.shape[1])], n_out)
    return drawn[picked]


def _whole_views(out: Refresh, window: Window, origin: float, settings: Settings, unit: str,
                 metres_per_unit: float | None) -> None:
    """Whole figures of every view from the window's drawable rows."""
    field_size, body = _scale(settings, metres_per_unit)
    points = settings.points
    track = _thinned(window.drawn["track"], points)
    out.figures["track"] = figures.track_map(
        figures.TrackPoints(track[:, 1:3], track[:, 3:5], window.anchors_xy, window.last_pose, window.last_reported),
        field_size, body, unit)
    poses = _thinned(window.drawn["poses"], points)
    out.figures["poses"] = figures.pose_traces(poses[:, 0] - origin, poses[:, 1:4], poses[:, 4:7], unit)
    errors = _thinned(window.drawn["errors"], points)
    out.figures["errors"] = figures.disagreement_traces(errors[:, 0] - origin, errors[:, 1], np.degrees(errors[:, 2]),
                                                        unit)
    loop = _thinned(window.drawn["loop"], points)
    long = window.long_loops[-points:]
    threshold_ms = settings.loop_threshold_s * 1000.0
    out.figures["loop"] = figures.loop_traces(loop[:, 0] - origin, loop[:, 1] * 1000.0, long[:, 0] - origin,
                                              long[:, 1] * 1000.0, threshold_ms)


def _appended_views(out: Refresh, new: Rows, before: tuple[float, float, float] | None, origin: float, n_out: int,
                    max_points: int, settings: Settings, unit: str, metres_per_unit: float | None,
                    names: tuple[str, ...]) -> None:
    """extendData of the rows ``new`` for the views in ``names``; ``before``: the page time
    and the two headings (rad) of the row before them, which the pose graph ends with."""
    _, body = _scale(settings, metres_per_unit)
    columns = new.columns
    if "track" in names:
        track = _thinned(drawn_of(new, "track"), n_out)
        points = figures.TrackPoints(track[:, 1:3], track[:, 3:5], columns["pose"][new.anchor, :2],
                                     _last_finite(columns["pose"]), _last_finite(columns["reported"]))
        out.extensions["track"] = figures.track_extension(points, body, max_points)
    if "poses" in names:
        poses = _thinned(drawn_of(new, "poses"), n_out)
        out.extensions["poses"] = figures.pose_extension(poses[:, 0] - origin, poses[:, 1:4], poses[:, 4:7],
                                                         max_points, before)
    if "errors" in names:
        errors = _thinned(drawn_of(new, "errors"), n_out)
        out.extensions["errors"] = figures.disagreement_extension(errors[:, 0] - origin, errors[:, 1],
                                                                  np.degrees(errors[:, 2]), max_points)
    if "loop" in names:
        loop = _thinned(drawn_of(new, "loop"), n_out)
        long = np.flatnonzero(columns["loop"] > settings.loop_threshold_s)[-settings.points:]
        out.extensions["loop"] = figures.loop_extension(loop[:, 0] - origin, loop[:, 1] * 1000.0,
                                                        columns["rx"][long] - origin, columns["loop"][long] * 1000.0,
                                                        max_points)


def _last_finite(poses: np.ndarray) -> tuple[float, float, float] | None:
    ok = np.flatnonzero(np.isfinite(poses).all(axis=1))
    return tuple(map(float, poses[ok[-1]])) if len(ok) else None
