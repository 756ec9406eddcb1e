"""The page read at a glance, in a real browser (Debian's Chromium, driven by Playwright).

A ``podwatch serve`` with no robot yet, then the repository's own Python
sender streaming over real UDP with signals of its own (``put``); and
``podwatch demo``, whose simulated robot reads its right encoder backwards,
so that the recompute spins against the robot's own heading. Everything on
127.0.0.1; waits have deadlines for a loaded machine, nothing checks speed.
"""

from __future__ import annotations

import math
import os
import re
import sys
import threading
import time

import pytest

from dashboard import ids
from tests.dashboard.conftest import ARTIFACTS, CHROMIUM, REVERSED, ROOT, open_from_list, open_sized, wait_for

pytest.importorskip("playwright.sync_api")
pytestmark = pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian package chromium is not installed")

sys.path.insert(0, str(ROOT / "receiver" / "senders" / "python"))
from podwatch_sender import OdometrySender  # noqa: E402  (a file robot code copies, not a package)

LIBRARY_PURPLE = "rgb(127, 75, 196)"  # Dash 4's own highlight colour (--Dash-Fill-Interactive-Strong)




def badges(page) -> list[tuple[str, str]]:
    """(state class, words) of every badge shown in the top bar, in order."""
    return page.evaluate("""() => Array.from(document.querySelectorAll('.topbar .badge'))
        .filter(b => b.offsetParent !== null)
        .map(b => [Array.from(b.classList).filter(c => c !== 'badge').join(' '), b.textContent])""")


def has_badge(page, state: str, words: str | re.Pattern) -> bool:
    return any(s == state and (re.fullmatch(words, w) if isinstance(words, re.Pattern) else w == words)
               for s, w in badges(page))


def traces(page, component_id: str) -> list[dict] | None:
    """Name, x and y of each trace the graph holds now (None before it is drawn)."""
    return page.evaluate("""id => {
        const gd = document.querySelector('#' + id + ' .js-plotly-plot');
        if (!gd || !gd.data) { return null; }
        return gd.data.map(t => ({name: t.name, x: Array.from(t.x || []), y: Array.from(t.y || [])}));
    }""", component_id)


class Robot:
    """The repository's Python sender in a thread: counts, a pose and two signals of its own per loop."""

    def __init__(self, port: int, loops: int) -> None:
        self.sender = OdometrySender("practice-bot", host="127.0.0.1", port=port)
        self.loops = loops
        self.sent_arm: list[float] = []
        self.thread = threading.Thread(target=self._run, daemon=True)

    def _run(self) -> None:
        for k in range(self.loops):
            arm = 0.5 * k
            self.sender.put("arm.angle", arm)
            self.sender.put("turn.pid_error", math.sin(k / 20.0))
            if self.sender.send([10 * k, 10 * k, 0], pose=(0.0, 0.0, 0.0)):
                self.sent_arm.append(arm)
            time.sleep(0.01)
        self.sender.close()


def test_live_states_and_a_signal_sent_by_the_udp_sender(serve_url):
    url, udp = serve_url
    with open_sized(url, (1440, 900)) as (page,):
        # A profile and nothing heard yet.
        wait_for(lambda: has_badge(page, "waiting", "waiting for data"), "the waiting-for-data badge")

        robot = Robot(udp, loops=300)
        robot.thread.start()
        wait_for(lambda: has_badge(page, "receiving", "receiving"), "the receiving badge")
        assert not has_badge(page, "waiting", "waiting for data")

        # The robot's own signals, by name, with the values it sent.
        def drawn() -> dict[str, list]:
            found = traces(page, ids.SIGNALS) or []
            return {t["name"]: t["y"] for t in found}
        wait_for(lambda: {"arm.angle", "turn.pid_error"} <= set(drawn()), "both signals on the Robot signals panel")
        robot.thread.join()
        wait_for(lambda: drawn()["arm.angle"] and max(drawn()["arm.angle"]) == robot.sent_arm[-1],
                 "the last value sent on the panel")
        arm = drawn()["arm.angle"]
        assert set(arm) <= set(robot.sent_arm) and len(arm) > 20  # values sent, none made up
        # A zoom of the disagreement's time axis takes the signals' along (and back).
        page.evaluate("""id => window.Plotly.relayout(document.querySelector('#' + id + ' .js-plotly-plot'),
                                                      {'xaxis.range': [1.5, 2.5]})""", ids.ERRORS)
        signal_range = f"() => document.querySelector('#{ids.SIGNALS} .js-plotly-plot').layout.xaxis.range"
        wait_for(lambda: page.evaluate(signal_range) == [1.5, 2.5], "the signals' time axis to follow the zoom")
        page.click(f"#{ids.SIGNAL_PICK}")
        names = page.evaluate("() => Array.from(document.querySelectorAll('.dash-dropdown-option'))"
                              ".map(o => o.textContent)")
        assert {"arm.angle", "turn.pid_error"} <= set(names)
        page.keyboard.press("Escape")

        # The robot goes quiet: no data for N s, never "receiving".
        wait_for(lambda: has_badge(page, "quiet", re.compile(r"no data for \d+ s")), "the no-data badge")
        assert not has_badge(page, "receiving", "receiving")

        # Pause page: a badge of its own, not only the button's label.
        page.click(f"#{ids.FOLLOW}")
        wait_for(lambda: has_badge(page, "paused", "page paused"), "the page-paused badge")
        assert "held" in page.get_attribute(f"#{ids.STATUS}", "class")
        page.click(f"#{ids.FOLLOW}")
        wait_for(lambda: not has_badge(page, "paused", "page paused"), "the badge to go on Follow")


HEADING_SPAN = """id => {
    const gd = document.querySelector('#' + id + ' .js-plotly-plot');
    if (!gd || !gd.data || gd.data.length < 2) { return null; }
    const y = Array.from(gd.data[1].y).filter(v => v !== null);
    let jump = 0;
    for (let k = 1; k < y.length; k++) { jump = Math.max(jump, Math.abs(y[k] - y[k - 1])); }
    return {span: Math.max(...y) - Math.min(...y), jump: jump, n: y.length};
}"""


def computed_colours(page) -> set[str]:
    """Every colour any element of the page is drawn with now (text, fill, border, outline)."""
    return set(page.evaluate("""() => {
        const found = new Set();
        for (const e of document.querySelectorAll('*')) {
            const s = getComputedStyle(e);
            for (const p of ['color', 'backgroundColor', 'borderTopColor', 'borderLeftColor', 'outlineColor',
                             'fill', 'stroke', 'accentColor']) { found.add(s[p]); }
        }
        return Array.from(found);
    }"""))


def test_a_spin_is_one_line_replays_say_where_they_stand_and_the_look_is_our_own(demo_url):
    with open_sized(demo_url, (1440, 900), (820, 1180)) as (page, tablet):
        # The heading disagreement through many turns: one line, no wrap jumps.
        def spun() -> bool:
            found = page.evaluate(HEADING_SPAN, ids.ERRORS)
            return found is not None and found["span"] > 720.0
        wait_for(spun, "the heading disagreement to grow past two turns")
        found = page.evaluate(HEADING_SPAN, ids.ERRORS)
        assert found["jump"] < 180.0, found
        assert has_badge(page, "receiving", "receiving")

        # A tablet beside the field: the numbers on its first screen, above the first graph.
        def box(selector: str) -> dict:
            return tablet.locator(selector).first.bounding_box()
        wait_for(lambda: re.match(r"-?[0-9]", tablet.inner_text(f"#{ids.LOOP_P95}")), "the tablet's readouts")
        first_graph = box(".js-plotly-plot")
        for readout in (ids.POSITION_NOW, ids.HEADING_GROWTH, ids.LOOP_MEAN, ids.JITTER):
            b = box(f"#{readout}")
            assert b["y"] + b["height"] <= min(first_graph["y"], 1180), readout
        for control in (f"#{ids.FOLLOW}", f"#{ids.OPEN}", f"#{ids.ROBOT}", f"#{ids.WINDOW}"):
            assert box(control)["height"] >= 40, control  # a finger's width
        toolbar = tablet.evaluate("""() => Array.from(document.querySelectorAll('.modebar-btn'))
            .filter(b => b.offsetParent !== null)  // the graphs on the page now, not those of closed panels
            .map(b => { const r = b.getBoundingClientRect(); return Math.min(r.width, r.height); })""")
        assert len(toolbar) >= 20 and min(toolbar) >= 40  # the graphs' zoom, pan, reset and download buttons
        ARTIFACTS.mkdir(exist_ok=True)
        tablet.screenshot(path=str(ARTIFACTS / "dashboard-820x1180.png"))
        page.screenshot(path=str(ARTIFACTS / "dashboard-1440x900.png"))

        # Our own look: a picker of six windows opens without a search box, and nothing on
        # the page (its menu open, a control focused) is drawn in the library's purple.
        page.click(f"#{ids.WINDOW}")
        wait_for(lambda: page.locator(".dash-dropdown-option").count() == 6, "the window picker's menu")
        assert page.locator(".dash-dropdown-search").count() == 0
        page.locator(".dash-dropdown-option").nth(1).hover()
        assert LIBRARY_PURPLE not in computed_colours(page)
        page.keyboard.press("Escape")

        # A replay says whether it plays, holds or has ended, and never "receiving".
        open_from_list(page, REVERSED.name)
        wait_for(lambda: has_badge(page, "replay-paused", "replay paused"), "the replay-paused badge", page)
        page.focus(f"#{ids.SCRUB} .dash-slider-thumb")
        assert LIBRARY_PURPLE not in computed_colours(page)
        page.click(f"#{ids.SPEED}")
        page.get_by_role("option", name="10\u00d7").click()
        page.click(f"#{ids.PLAY}")
        wait_for(lambda: has_badge(page, "replaying", "replaying at 10\u00d7"), "the replaying badge", page)
        wait_for(lambda: has_badge(page, "replay-ended", "replay ended"), "the replay-ended badge", page)
        status = page.inner_text(f"#{ids.STATUS}")
        assert "receiving" not in status and "messages/s" not in status, status


def test_the_receivers_own_troubles_have_badges_of_their_own():
    # The page of a receiver in this process, so that its health can be set as its threads
    # set it: a worker that failed (a closed socket) and a recording that stopped (a full
    # disk). Both are made to happen for real in tests/live/test_serve_process.py.
    from dashboard.server import start_dashboard
    from dashboard.settings import Settings
    from dashboard.sources import LiveSource
    from dashboard.tabs import Station
    from receiver.formats.profile_toml import load_profile
    from receiver.formats.protocol import decode
    from receiver.live.health import WorkerEvent
    from receiver.live.hub import Hub
    from tests.dashboard.conftest import free_port
    from tests.live.serve_process import message

    profile = load_profile(ROOT / "replay_fixtures" / "practice-bot.toml")
    hub = Hub({profile.name: profile})
    station = Station(live=LiveSource(hub))
    server = start_dashboard(station, Settings(), f"127.0.0.1:{free_port()}", lambda _: None)
    stop = threading.Event()

    def robot() -> None:
        seq = 0
        while not stop.wait(0.01):
            hub.ingest(*decode(message("practice-bot", seq, 0.01 * seq)), time.time(), "test")
            hub.process(time.time())
            seq += 1

    feeding = threading.Thread(target=robot, daemon=True)
    feeding.start()
    try:
        with open_sized(server.url, (1440, 900)) as (page,):
            wait_for(lambda: has_badge(page, "receiving", "receiving"), "the receiving badge", page)
            hub.health.worker("udp receive loop", WorkerEvent.CRASHED, "Bad file descriptor")
            hub.health.stop_recording("No space left on device")
            wait_for(lambda: has_badge(page, "worker-error", "worker error")
                     and has_badge(page, "recording-stopped", "recording stopped"), "both badges", page)
            assert [state for state, _ in badges(page)] == ["worker-error", "recording-stopped", "receiving"]
            status = page.inner_text(f"#{ids.STATUS}")
            assert "udp receive loop failed: Bad file descriptor; restarting" in status
            assert "recording stopped: No space left on device" in status
            colours = page.evaluate("""() => Array.from(document.querySelectorAll('.topbar .badge'))
                .filter(b => b.offsetParent !== null).map(b => getComputedStyle(b).backgroundColor)""")
            assert len(set(colours)) == len(colours)  # each in a colour of its own
    finally:
        stop.set()
        feeding.join()
        server.stop()
