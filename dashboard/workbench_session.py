"""The session a tab's workbench works on, and its recompute with the loaded profile.

Owns which samples the profile editor and the loop-cost view take for the
tab's robot: a replayed recording whole, whatever its replay position (as
`podwatch recompute` reads it), or the live robot's raw samples over the
page's window. And the one recompute worth keeping: a recording's with its
loaded profile, which every edit is drawn beside (a live window changes
with every sample and is recomputed each time). Reads a tab's view; holds
no edit state (that is the page's) and draws nothing.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from dataclasses import dataclass

from dashboard.tabs import TabView
from receiver.odometry.columns import Columns
from receiver.odometry.recompute import Result, Tracker
from receiver.odometry.robot import Profile

# Recordings' recomputes kept: a few tabs and robots, and at most about 100 MB (a result
# holds about 90 bytes a sample; the replay it belongs to holds ten times that).
KEPT_RESULTS = 8
KEPT_SAMPLES = 1_200_000


@dataclass(frozen=True)
class Session:
    """One robot's samples as a tab shows them, and the profile the tab's source recomputes them with.

    ``recording`` is the recording's path (its samples stay the same), None
    for a live window; ``what`` says which in a few words for the page.
    """

    robot: str
    columns: Columns
    loaded: Profile
    recording: str | None
    what: str

    @property
    def whole(self) -> bool:
        """True for a whole recording, False for a live window."""
        return self.recording is not None


def session_of(view: TabView, robot: str | None, window_s: float) -> Session | str:
    """The tab's session of ``robot``, or a line saying why there is none."""
    if not robot:
        return "No robot heard yet."
    loaded = view.profile(robot)
    if loaded is None:
        return f"{robot} has no profile (give one with --profile): nothing to recompute."
    replay = view.replay
    if replay is not None:
        columns = replay.recording.robots.get(robot)
        recording = str(replay.recording.path)
        what = f"the whole recording {recording}"
    else:
        columns = view.columns(robot, since_rx=view.source.now() - window_s)
        recording = None
        # What is held may be less than the window: a young session, or many fast robots
        # sharing the raw history's rows (live/raw_history.py).
        span = float(columns.rx[-1] - columns.rx[0]) if columns is not None and len(columns) > 1 else 0.0
        what = f"the live robot's last {min(span, window_s):.0f} s"
    if columns is None or len(columns) < 2:
        return f"No samples from {robot} yet."
    return Session(robot, columns, loaded, recording, what)


class LoadedResults:
    """Recomputes of recordings with their loaded profile, the newest few kept (by the
    columns' identity: a recording's columns never change while its replay is open)."""

    def __init__(self, most: int = KEPT_RESULTS, samples: int = KEPT_SAMPLES) -> None:
        self.most, self.samples = most, samples
        self._kept: OrderedDict[tuple[int, Profile], tuple[Columns, Result]] = OrderedDict()
        self._lock = threading.Lock()

    def of(self, session: Session) -> Result:
        """``Tracker(session.loaded).feed(session.columns)``, from the kept ones for a recording."""
        if not session.whole:
            return Tracker(session.loaded).feed(session.columns)
        key = (id(session.columns), session.loaded)
        with self._lock:
            kept = self._kept.get(key)
            if kept is not None and kept[0] is session.columns:
                self._kept.move_to_end(key)
                return kept[1]
        result = Tracker(session.loaded).feed(session.columns)
        with self._lock:
            # The columns are kept with their result, so that their id is not reused meanwhile.
            self._kept[key] = (session.columns, result)
            while len(self._kept) > 1 and (len(self._kept) > self.most or self._held() > self.samples):
                self._kept.popitem(last=False)
        return result

    def _held(self) -> int:
        return sum(len(result.t) for _, result in self._kept.values())
