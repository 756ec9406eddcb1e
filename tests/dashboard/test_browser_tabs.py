"""Each browser tab its own view: a recording opened in one tab leaves every other tab
on the live receiver, a tab opened later starts live, and a profile edited in one tab's
editor is that tab's alone (headless Chromium, a running ``podwatch demo`` on loopback)."""

from __future__ import annotations

import os
import re

import pytest

from dashboard import ids
from tests.dashboard.conftest import CHROMIUM, REVERSED, _loopback_only, open_from_list, open_pages, wait_for
from tests.dashboard.test_browser_editor import choose, field, options

pytest.importorskip("playwright.sync_api")
pytestmark = pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian package chromium is not installed")





def status(page) -> str:
    """The status line's words after its badges: the source shown, then the robot."""
    found = page.query_selector(f"#{ids.STATUS} .status-detail")
    return found.inner_text() if found else ""


def messages(page) -> int:
    """The selected robot's message count in the link-health table."""
    found = re.search(r"practice-bot\s+\S+\s+(\d+)", page.inner_text(f"#{ids.LINK_TABLE}"))
    return int(found.group(1)) if found else -1


def replay_bar_shown(page) -> bool:
    return "hidden" not in (page.get_attribute(f"#{ids.REPLAY_BAR}", "class") or "")


def test_a_recording_opened_in_one_tab_leaves_the_other_live(demo_url):
    with open_pages(demo_url, 1200, 2) as (first, second):
        for page in (first, second):
            wait_for(lambda: status(page).startswith("live"), "each tab to show the live receiver")

        open_from_list(first, REVERSED.name)
        wait_for(lambda: replay_bar_shown(first), "the replay bar in the tab that opened the recording")
        wait_for(lambda: status(first).startswith(str(REVERSED.name)) or REVERSED.name in status(first),
                 "the first tab to show the recording")

        # The other tab is untouched: still live, no replay bar, and still counting messages.
        before = messages(second)
        wait_for(lambda: messages(second) > before + 50, "the second tab to keep counting live messages")
        assert status(second).startswith("live") and not replay_bar_shown(second)

        # An edit in the first tab's editor is the first tab's: the second tab's editor shows the
        # loaded profile, unedited, on its own live session.
        first.click(f"#{ids.EDITOR_OPEN}")
        wait_for(lambda: first.locator(f"button{field('wheel.1.reversed')}").count() == 1, "the first tab's form")
        choose(first, "wheel.1.reversed", "true")
        wait_for(lambda: "--set wheel.right.reversed=true" in options(first), "the first tab's edit")
        second.click(f"#{ids.EDITOR_OPEN}")
        wait_for(lambda: options(second).startswith("no changes"), "the second tab's editor")
        assert second.inner_text(f"button{field('wheel.1.reversed')}").strip() == "false"
        assert "live robot's last" in second.inner_text(f"#{ids.EDITOR_WHAT}")
        assert "--set wheel.right.reversed=true" in options(first)

        # A tab opened now starts on the live receiver, not inside the first tab's replay.
        third = second.context.browser.new_page(viewport={"width": 1400, "height": 1200})
        third.route("**/*", _loopback_only)
        third.goto(demo_url)
        wait_for(lambda: status(third).startswith("live"), "a new tab to start live")
        assert not replay_bar_shown(third)

        # Back to live in the first tab; the others never moved.
        first.click(f"#{ids.BACK_TO_LIVE}")
        wait_for(lambda: status(first).startswith("live") and not replay_bar_shown(first), "the first tab back live")
        assert status(second).startswith("live")
