"""The page in a real browser: headless Chromium (Debian's) driven by Playwright.

``podwatch demo`` runs as a subprocess: receiver, dashboard and the seeded
simulated robot with a reversed right encoder, streaming over UDP on
127.0.0.1. The browser talks to 127.0.0.0/8 only (anything else is aborted).
Waits have deadlines for a loaded machine; nothing here checks speed.
"""

from __future__ import annotations

import math
import os
import re

import pytest

from dashboard import ids
from tests.dashboard.conftest import (
    ARTIFACTS,
    CHROMIUM,
    REVERSED,
    ROOT,
    keep_for_readme,
    open_from_list,
    open_page,
    wait_for,
)

sync_api = pytest.importorskip("playwright.sync_api")

README_SCREENSHOT = ROOT / "dashboard" / "screenshot.png"
DIVERGED_IN = 10.0  # the reversed encoder puts the two poses this far apart within seconds

pytestmark = pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian package chromium is not installed")


def number(page, component_id: str) -> float:
    """The number at the start of a readout such as "12.34 in" (NaN while unknown)."""
    text = page.inner_text(f"#{component_id}")
    found = re.match(r"\s*(-?[0-9.]+)", text)
    return float(found.group(1)) if found else math.nan




PATH_ENDS = """() => {
    const gd = document.querySelector('#%s .js-plotly-plot');
    if (!gd || !gd._fullData || gd._fullData.length < 2) { return null; }  // not drawn yet
    return [0, 1].map(i => {
        const t = gd._fullData[i];
        const n = t.x.length;
        return {name: t.name, n: n, x: n ? t.x[n - 1] : null, y: n ? t.y[n - 1] : null};
    });
}""" % ids.TRACK


def replay_position(page) -> float:
    return float(re.match(r"([0-9.]+) s of", page.inner_text(f"#{ids.REPLAY_POSITION}")).group(1))


def test_live_page_shows_the_disagreement_then_a_replay_pauses_and_scrubs(demo_url):
    with open_page(demo_url, 2000) as page:

        # The disagreement readout grows past the threshold as the robot drives.
        wait_for(lambda: number(page, ids.POSITION_NOW) > DIVERGED_IN, "the position disagreement to grow")
        # Both read in one step of the page (an update could come between two reads).
        now, worst = page.evaluate("ids => ids.map(id => document.getElementById(id).textContent)",
                                   [ids.POSITION_NOW, ids.POSITION_WORST])
        assert float(worst.split()[0]) >= float(now.split()[0]), (now, worst)
        assert page.inner_text(f"#{ids.POSITION_NOW}").endswith(" in")

        # The track map holds two paths that have parted.
        def diverged() -> bool:
            ends = page.evaluate(PATH_ENDS)
            return ends is not None and all(e["n"] > 50 for e in ends) and math.dist(
                (ends[0]["x"], ends[0]["y"]), (ends[1]["x"], ends[1]["y"])
            ) > DIVERGED_IN
        wait_for(diverged, "two diverging paths on the track map")
        names = [e["name"] for e in page.evaluate(PATH_ENDS)]
        assert names == ["podwatch recompute", "robot's own pose"]

        # The loop-timing panel shows the simulated 100 Hz loop.
        wait_for(lambda: 90.0 < number(page, ids.LOOP_RATE) < 110.0, "a loop rate near 100 Hz")
        assert 8.0 < number(page, ids.LOOP_MEAN) < 12.0
        assert "live" in page.inner_text(f"#{ids.LINK_TABLE}")

        ARTIFACTS.mkdir(exist_ok=True)
        page.wait_for_timeout(1500)  # let the last redraw settle for the picture
        page.screenshot(path=str(ARTIFACTS / "dashboard.png"), full_page=True)
        keep_for_readme(ARTIFACTS / "dashboard.png", README_SCREENSHOT)

        # A recording opened from the page replays; it can be paused and scrubbed.
        open_from_list(page, REVERSED.name)
        wait_for(lambda: "of 10.0 s" in page.inner_text(f"#{ids.REPLAY_POSITION}"), "the replay bar")
        page.click(f"#{ids.PLAY}")
        wait_for(lambda: replay_position(page) > 1.0, "the replay to play")
        page.click(f"#{ids.PAUSE}")
        wait_for(lambda: "paused" in page.inner_text(f"#{ids.REPLAY_POSITION}"), "the replay to pause")
        held = replay_position(page)
        page.wait_for_timeout(1000)
        assert replay_position(page) == held

        track = page.locator(f"#{ids.SCRUB} .dash-slider-track")
        box = track.bounding_box()
        track.click(position={"x": box["width"] * 0.7, "y": box["height"] / 2})
        wait_for(lambda: 6.0 <= replay_position(page) <= 8.0, "the scrubber to move the replay to 7 s")
        wait_for(lambda: number(page, ids.POSITION_NOW) > 0.0, "the readouts at the new position")
        page.screenshot(path=str(ARTIFACTS / "dashboard-replay.png"), full_page=True)
