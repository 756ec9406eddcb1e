"""The status line's badges: one per state, never one state's words for another's."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

import dashboard
from dashboard.status import Badge, Replaying, status
from receiver.live.session import LinkState, RobotSnapshot


def snap(state: LinkState, **changes) -> RobotSnapshot:
    fields = dict(robot="bot", state=state, has_profile=True, messages=5, rate_hz=98.0, gaps=0, duplicates=0, late=0,
                  restarts=0, resets=0, errors={}, loop_mean_s=0.01, loop_p50_s=0.01, loop_p95_s=0.01,
                  loop_max_s=0.01, jitter_s=0.0, pose=None, reported=None, position_error=0.0, heading_error=0.0,
                  last_rx=90.0)
    return RobotSnapshot(**{**fields, **changes})


PLAYING = Replaying(True, 4.2, 10.0, 2.0)
PAUSED = Replaying(False, 4.2, 10.0, 1.0)
ENDED = Replaying(False, 10.0, 10.0, 1.0)


@pytest.mark.parametrize("robot, replay, badges, detail", [
    (snap(LinkState.LIVE), None, [(Badge.RECEIVING, "receiving")], "live \u00b7 bot, 98 messages/s"),
    (snap(LinkState.WAITING), None, [(Badge.WAITING, "waiting for data")], "live \u00b7 bot"),
    (snap(LinkState.QUIET), None, [(Badge.QUIET, "no data for 4 s")], "live \u00b7 bot"),
    (None, None, [(Badge.WAITING, "waiting for a robot")], "live"),
    (snap(LinkState.LIVE), PLAYING, [(Badge.REPLAYING, "replaying at 2\u00d7")],
     "live, at 4.2 s of 10.0 s \u00b7 bot, 98 messages/s"),
    # A paused or ended replay is not receiving anything, whatever its rows' rate was.
    (snap(LinkState.LIVE), PAUSED, [(Badge.REPLAY_PAUSED, "replay paused")], "live, at 4.2 s of 10.0 s \u00b7 bot"),
    (snap(LinkState.LIVE), ENDED, [(Badge.REPLAY_ENDED, "replay ended")], "live, at 10.0 s of 10.0 s \u00b7 bot"),
])
def test_each_state_has_its_badge(robot, replay, badges, detail):
    line = status(robot, 94.2, "live", replay)
    assert list(line.badges) == badges and line.detail == detail


def test_the_receivers_own_troubles_lead():
    line = status(snap(LinkState.LIVE), 94.2, "live", recording_stopped="No space left on device",
                  worker_errors=("udp receive loop failed: Bad file descriptor; restarting",))
    assert [badge for badge, _ in line.badges] == [Badge.WORKER_ERROR, Badge.RECORDING_STOPPED, Badge.RECEIVING]
    assert line.detail.startswith("udp receive loop failed: Bad file descriptor; restarting; recording stopped: No "
                                  "space left on device \u00b7 live")


def test_every_badge_has_its_own_class_and_the_line_is_escaped():
    assert len({badge.value for badge in Badge}) == len(Badge)
    line = status(snap(LinkState.LIVE, robot="<b>", has_profile=False), 94.2, "live")
    assert line.html() == ('<span class="badge receiving">receiving</span><span class="status-detail">live \u00b7 '
                           '&lt;b&gt;, 98 messages/s; no profile for this robot (give one with --profile): not '
                           'recomputed</span>')
    assert line.text().startswith("receiving \u00b7 live")


def test_each_badge_has_a_colour_of_its_own_from_the_okabe_ito_palette():
    # Okabe and Ito, "Color Universal Design" (2008): the eight colours, black among them
    # (white is the page's own, for the outlined badge).
    okabe_ito = {"#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000", "#000"}
    css = (Path(dashboard.__file__).parent / "assets" / "style.css").read_text()
    backgrounds = dict(re.findall(r"\.badge\.([a-z-]+) \{ background: (#[0-9A-Fa-f]+)", css))
    assert set(backgrounds) == {badge.value for badge in Badge}
    assert len(set(backgrounds.values())) == len(backgrounds)
    assert set(backgrounds.values()) - okabe_ito == {"#fff"}  # replay ended: outlined in black
