"""What the page is showing, as badges in its status line: words first, each in a colour of its own.

Owns the states a person must never mistake for one another (a page held
still, a replay playing, paused or ended, a robot waiting, silent or
streaming, a recording that stopped, a receiver worker down), their words and
their CSS classes (assets/style.css gives each its colour from the Okabe-Ito
palette, which figures.py uses too), and the status line's HTML. Pure:
states in, text out; never reads a clock.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import Enum
from html import escape

from receiver.live.session import LinkState, RobotSnapshot
from receiver.odometry.robot import missing_profile_hint


class Badge(Enum):
    """A state the page shows, by its CSS class; each has its own colour in the stylesheet."""

    PAUSED = "paused"  # the page holds still (Pause page); the receiver records on
    RECEIVING = "receiving"
    WAITING = "waiting"  # for a robot, or for the first data of a robot with a profile
    QUIET = "quiet"  # no data for N s
    REPLAYING = "replaying"
    REPLAY_PAUSED = "replay-paused"
    REPLAY_ENDED = "replay-ended"
    RECORDING_STOPPED = "recording-stopped"
    WORKER_ERROR = "worker-error"


PAUSED_WORDS = "page paused"  # the follow button's callback shows it; no answer comes while paused


@dataclass(frozen=True)
class Replaying:
    """Where a shown replay stands."""

    playing: bool
    position_s: float
    duration_s: float
    speed: float

    @property
    def ended(self) -> bool:
        """At the recording's end, not playing."""
        return not self.playing and self.position_s >= self.duration_s - 1e-9


@dataclass(frozen=True)
class Status:
    """The status line: badges (state, words) in order, then one line of detail."""

    badges: tuple[tuple[Badge, str], ...]
    detail: str

    def html(self) -> str:
        """The line as HTML, every text escaped."""
        spans = "".join(f'<span class="badge {badge.value}">{escape(words)}</span>' for badge, words in self.badges)
        return f'{spans}<span class="status-detail">{escape(self.detail)}</span>'

    def text(self) -> str:
        """The line as plain words, badges first."""
        return " \u00b7 ".join([*(words for _, words in self.badges), self.detail])


def status(
    snap: RobotSnapshot | None, now: float, source_label: str, replay: Replaying | None = None,
    recording_stopped: str | None = None, worker_errors: tuple[str, ...] = (), problems: tuple[str, ...] = (),
    unheard: tuple[str, ...] = (),
) -> Status:
    """The status line for the selected robot's ``snap`` at ``now`` (the source's clock).
    ``replay`` when the tab shows a replay. The receiver's own troubles lead, a badge
    each for a worker down (``worker_errors``, one line each) and a recording stopped
    (``recording_stopped``, the reason), then its other ``problems`` in words (an MQTT
    broker gone). ``unheard``: profiles given for robots that sent nothing, named in the
    hint for a robot without one."""
    badges: list[tuple[Badge, str]] = []
    if worker_errors:
        badges.append((Badge.WORKER_ERROR, "worker error" if len(worker_errors) == 1
                       else f"{len(worker_errors)} worker errors"))
    if recording_stopped:
        badges.append((Badge.RECORDING_STOPPED, "recording stopped"))
    if replay is not None:
        if replay.playing:
            badges.append((Badge.REPLAYING, f"replaying at {replay.speed:g}\u00d7"))
        elif replay.ended:
            badges.append((Badge.REPLAY_ENDED, "replay ended"))
        else:
            badges.append((Badge.REPLAY_PAUSED, "replay paused"))
    detail = source_label if replay is None else f"{source_label}, at {replay.position_s:.1f} s of {replay.duration_s:.1f} s"
    troubles = [*worker_errors, *([f"recording stopped: {recording_stopped}"] if recording_stopped else []), *problems]
    if troubles:
        detail = f"{'; '.join(troubles)} \u00b7 {detail}"
    if snap is None:
        badges.append((Badge.WAITING, "waiting for a robot"))
        return Status(tuple(badges), detail)
    quiet_s = max(now - snap.last_rx, 0.0) if math.isfinite(snap.last_rx) else math.nan
    if snap.state is LinkState.WAITING:
        badges.append((Badge.WAITING, "waiting for data"))
    elif snap.state is LinkState.QUIET:
        badges.append((Badge.QUIET, f"no data for {quiet_s:.0f} s"))
    elif replay is None:
        badges.append((Badge.RECEIVING, "receiving"))
    robot = snap.robot
    if snap.state is LinkState.LIVE and (replay is None or replay.playing):
        robot += f", {snap.rate_hz:.0f} messages/s"
    detail = f"{detail} \u00b7 {robot}"
    if not snap.has_profile:
        detail += f"; no profile for this robot ({missing_profile_hint(snap.robot, unheard)}): not recomputed"
    return Status(tuple(badges), detail)
