"""The profile editor in a real browser (headless Chromium, a running ``podwatch demo`` on
loopback, whose simulated robot has its right encoder reversed in the robot code).

The Diagnosis panel's suggestion goes into the editor in one click; a recording made with
that mistake agrees once the wheel is flipped in the editor; a value typed in the page
gives exactly the path that the `podwatch recompute` line the page shows gives offline;
the download holds the edited profile. Waits have deadlines for a loaded machine;
nothing here checks speed.
"""

from __future__ import annotations

import csv
import json
import os
import re
import shlex
import subprocess
import sys
import tomllib
from functools import partial

import numpy as np
import pytest

from dashboard import ids
from dashboard.editor_figures import POSITION_EDITED, TRACK_EDITED
from receiver.formats.profile_toml import profile_from_table
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

pytest.importorskip("playwright.sync_api")
pytestmark = pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian package chromium is not installed")

DEADLINE_S = 45.0  # for things to show up on a loaded machine; not a speed check
wait_for = partial(wait_for, deadline_s=DEADLINE_S)
EDITOR_SCREENSHOT = ROOT / "dashboard" / "screenshot-editor.png"




def field(key: str) -> str:
    """The CSS selector of the editor's field for ``key`` (Dash writes a pattern id as sorted JSON)."""
    return "[id='" + json.dumps({"key": key, "type": ids.EDITOR_FIELD}, separators=(",", ":")) + "']"


def choose(page, key: str, value: str) -> None:
    page.click(f"button{field(key)}")
    page.get_by_role("option", name=value, exact=True).click()


def numbers(page) -> dict[str, list[float]]:
    """The editor's table: per run ("loaded profile", "edited profile"), its numbers in order
    (final, final heading, worst, worst heading, growth, heading growth); NaN for a dash."""
    rows = page.evaluate(f"""() => Array.from(document.querySelectorAll('#{ids.EDITOR_NUMBERS} tbody tr'))
        .map(tr => Array.from(tr.children).map(td => td.textContent))""")
    found = {}
    for name, *cells in rows:
        found[name] = [float(c.split()[0]) if re.match(r"-?[0-9]", c) else float("nan") for c in cells]
    return found


def options(page) -> str:
    return page.inner_text(f"#{ids.EDITOR_OPTIONS}")


def figure_data(page, graph: str) -> list[dict]:
    return page.evaluate(f"""() => {{
        const gd = document.querySelector('#{graph} .js-plotly-plot');
        return gd && gd.data ? gd.data.map(t => ({{name: t.name, x: t.x, y: t.y}})) : [];
    }}""")


def test_the_editor_takes_the_diagnosis_flips_a_wheel_and_matches_recompute(demo_url, recordings, tmp_path):
    with open_page(demo_url, 2400) as page:
        # Live: the page diagnoses the reversed encoder by itself; one click tries its suggestion.
        try_button = page.locator(f"#{ids.DIAGNOSE_TRY}")
        wait_for(lambda: try_button.is_visible(), "the diagnosis's suggestion")
        try_button.click()
        wait_for(lambda: "--set wheel.right.reversed=true" in options(page), "the suggestion in the editor")
        assert "live robot's last" in page.inner_text(f"#{ids.EDITOR_WHAT}")
        assert page.inner_text(f"button{field('wheel.1.reversed')}").strip() == "true"

        # The recording made with the same mistake: the whole of it agrees once the wheel is flipped.
        open_from_list(page, REVERSED.name)
        wait_for(lambda: "977 samples: the whole recording" in page.inner_text(f"#{ids.EDITOR_WHAT}"),
                 "the editor on the opened recording")
        wait_for(lambda: numbers(page).get("edited profile", [1.0] * 3)[2] < 0.001, "the edited run to agree")
        table = numbers(page)
        # `podwatch recompute` of this recording: worst 61.239 in; edited: encoder resolution.
        assert table["loaded profile"][2] == pytest.approx(61.239, abs=1e-3)
        assert table["edited profile"][2] < 0.001 and abs(table["edited profile"][3]) < 0.01

        # A value typed in the page: the path is the one the page's own command line gives offline.
        page.fill(f"input{field('wheel.0.y')}", "6.3")
        wait_for(lambda: "wheel.left.y=6.3" in options(page), "the typed value in the options")
        wait_for(lambda: numbers(page)["edited profile"][2] > 0.01, "the redraw with the typed value")
        command = options(page)
        assert command.startswith("podwatch recompute ") and "--profile " in command
        track = figure_data(page, ids.EDITOR_TRACK)[TRACK_EDITED]
        errors = figure_data(page, ids.EDITOR_ERRORS)[POSITION_EDITED]

        ARTIFACTS.mkdir(exist_ok=True)
        page.wait_for_timeout(1000)  # let the last redraw settle for the picture
        editor = page.locator(".card.editor")
        editor.screenshot(path=str(ARTIFACTS / "editor.png"))
        keep_for_readme(ARTIFACTS / "editor.png", EDITOR_SCREENSHOT)

        with page.expect_download() as download:
            page.click(f"#{ids.EDITOR_DOWNLOAD}")
        text = open(download.value.path(), encoding="utf-8").read()
        downloaded = profile_from_table(tomllib.loads(text))
        assert download.value.suggested_filename == "practice-bot.toml"
        assert downloaded.wheels[1].reversed and downloaded.wheels[0].y == 6.3

    out = tmp_path / "poses.csv"
    words = shlex.split(command)
    subprocess.run([sys.executable, "-m", "receiver.cli", *words[1:], "--out", str(out)], cwd=recordings, check=True,
                   capture_output=True)
    with open(out) as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == len(track["x"]) == 977  # under the page's point budget: every row drawn
    column = {name: np.array([float(r[name]) for r in rows]) for name in ("x", "y", "position_error")}
    # The page rounds to 0.001 (figures.as_list), the CSV to 0.000001.
    np.testing.assert_allclose(track["x"], column["x"], atol=6e-4)
    np.testing.assert_allclose(track["y"], column["y"], atol=6e-4)
    np.testing.assert_allclose(errors["y"], column["position_error"], atol=6e-4)
