"""Which source each browser tab shows: the shared live receiver, or a replay of its own.

Owns the per-tab view: a tab is named by the id its page was built with
(layout.build), and what it shows (live, or a recording it opened), where
its replay stands and how fast it plays belong to that tab alone. Opening a
recording in one tab changes nothing in another; the live receiver and its
recording are shared and never touched by a viewer. Tabs not heard from for
a while are forgotten, their replays stopped, so memory stays bounded.
Never draws anything and never serves HTTP.
"""

from __future__ import annotations

import threading
import time
from pathlib import Path
from typing import Callable

from dashboard.sources import LiveSource, ReplaySource
from receiver.formats.recording import RecordingData
from receiver.odometry.columns import Columns
from receiver.odometry.robot import Profile

# A tab that has not asked for anything for this long is closed (its page is
# gone: an open page asks several times a second).
IDLE_S = 600.0
# At most this many tabs are remembered; the one idle longest goes first.
# Each may hold a whole recording's replay.
MAX_TABS = 16


class TabView:
    """What one tab shows: its replay when it has one, else the live receiver."""

    def __init__(self, live: LiveSource | None, replay: ReplaySource | None = None) -> None:
        assert live is not None or replay is not None
        self.live = live
        self.replay = replay

    @property
    def source(self) -> LiveSource | ReplaySource:
        """The shown source."""
        return self.replay if self.replay is not None else self.live

    @property
    def label(self) -> str:
        """The shown source's name: "live", or the recording's path."""
        return self.source.label

    def profile(self, robot: str | None) -> Profile | None:
        """The profile the shown source recomputes ``robot`` with; None without one."""
        return self.source.hub.profiles.get(robot) if robot else None

    def columns(self, robot: str, since_rx: float | None = None) -> Columns | None:
        """The robot's own samples (counts, pose, IMU) held by the shown source, received after
        ``since_rx``; None for a robot never heard."""
        return self.source.raw.columns(robot, since_rx)

    def latest_rx(self, robot: str) -> float | None:
        """The receive time of the robot's newest sample in the shown source; None before its first."""
        return self.source.raw.latest_rx(robot)

    def heard_robots(self) -> list[str]:
        """The robots the shown source has samples of, by name."""
        return self.source.raw.robots()

    def history(self, robot: str, since_rx: float | None = None) -> dict:
        """The shown source's result rows of one robot (``Hub.history``); KeyError for an unknown robot."""
        return self.source.hub.history(robot, since_rx)

    def key(self) -> str:
        """Changes whenever the tab must redraw everything (another source or a rebuilt hub)."""
        source = self.source
        return f"{source.kind}:{id(source)}:{source.generation}"


class Station:
    """Every tab's view: the live source they share and the replays they opened.

    Without a live source (``podwatch replay --dashboard``), each tab gets a
    replay of ``recording`` of its own, made by ``make_replay``.
    ``profile_files`` names the file each given profile was loaded from, by robot.
    """

    def __init__(
        self,
        live: LiveSource | None = None,
        recording: RecordingData | None = None,
        profiles: dict[str, Profile] | None = None,
        make_replay: Callable[[RecordingData], ReplaySource] | None = None,
        clock: Callable[[], float] = time.monotonic,
        profile_files: dict[str, Path] | None = None,
    ) -> None:
        assert live is not None or recording is not None
        self.live = live
        self.recording = recording
        self.profiles = dict(profiles or {})
        self.profile_files = dict(profile_files or {})
        self._make_replay = make_replay or self.replay_of
        self._clock = clock
        self._tabs: dict[str, tuple[TabView, float]] = {}  # view id -> (its view, when last asked)
        self._lock = threading.Lock()

    def replay_of(self, data: RecordingData) -> ReplaySource:
        """A started, paused replay of ``data`` with the station's profiles."""
        source = ReplaySource(data, self.profiles)
        source.start()
        return source

    def tab(self, view_id: str | None) -> TabView:
        """The view of the tab ``view_id`` (a new one, showing live or its own replay, the first time)."""
        now = self._clock()
        with self._lock:
            known = self._tabs.get(view_id) if view_id else None
            view = known[0] if known else None
            if view is None:
                replay = self._make_replay(self.recording) if self.live is None else None
                view = TabView(self.live, replay)
            if view_id:
                self._tabs[view_id] = (view, now)
            gone = self._forget_idle(now)
        for old in gone:
            old.stop()
        return view

    def _forget_idle(self, now: float) -> list[ReplaySource]:
        """Drop tabs idle past IDLE_S, then the idlest past MAX_TABS; their replays, to stop (lock held)."""
        by_age = sorted(self._tabs.items(), key=lambda item: item[1][1])
        drop = [view_id for view_id, (_, seen) in by_age if now - seen > IDLE_S]
        drop += [view_id for view_id, _ in by_age[: max(len(by_age) - MAX_TABS, 0)] if view_id not in drop]
        replays = [self._tabs.pop(view_id)[0].replay for view_id in drop]
        return [replay for replay in replays if replay is not None]

    def open(self, view_id: str | None, data: RecordingData) -> str:
        """Show a replay of ``data`` (read by the caller, recordings_folder.read_from_folder) in the
        tab ``view_id`` only, paused at its start; returns a line for the page."""
        source = self.replay_of(data)
        view = self.tab(view_id)
        with self._lock:
            old, view.replay = view.replay, source
        if old is not None:
            old.stop()
        return f"opened {data.path}: {len(source.samples)} messages, {source.duration_s:.1f} s"

    def show_live(self, view_id: str | None) -> bool:
        """Back to the live receiver in the tab ``view_id``, when there is one."""
        if self.live is None:
            return False
        view = self.tab(view_id)
        with self._lock:
            old, view.replay = view.replay, None
        if old is not None:
            old.stop()
        return True

    def profile_file(self, profile: Profile) -> Path | None:
        """The file ``profile`` was loaded from, when it is a given one; None for a recording's own."""
        return self.profile_files.get(profile.name) if self.profiles.get(profile.name) == profile else None

    def all_profiles(self) -> dict[str, Profile]:
        """Every profile a tab may recompute with: given ones, the live hub's, the recording's."""
        found = dict(self.recording.profiles) if self.recording is not None else {}
        if self.live is not None:
            found.update(self.live.hub.profiles)
        return {**found, **self.profiles}

    def close(self) -> None:
        """Stop every tab's replay; the live receiver is its owner's to stop."""
        with self._lock:
            replays = [view.replay for view, _ in self._tabs.values() if view.replay is not None]
            self._tabs.clear()
        for replay in replays:
            replay.stop()


def remember(by_tab: dict, view_id: str | None, value: object, most: int) -> None:
    """Keep ``value`` as the tab's newest in ``by_tab`` (insertion order = age), forgetting the
    oldest tabs past ``most``: what a background job reports back to the tab that asked."""
    by_tab.pop(view_id, None)
    by_tab[view_id] = value
    while len(by_tab) > most:
        del by_tab[next(iter(by_tab))]
