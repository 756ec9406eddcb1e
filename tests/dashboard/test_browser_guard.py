"""What the page does not do, in a real browser: reach past its own origin, offer an upload,
open what is not in its recordings folder, or answer the Diagnosis panel with a 500.

``podwatch replay`` of a recording with no header (so a robot without a
profile) serves the page, listing a folder that also holds a gzip bomb, a
named pipe and a link to /etc/shadow. Every request the page makes is
recorded; none may leave its origin, and none may get a 5xx answer.
"""

from __future__ import annotations

import gzip
import os
import re
import shutil
import signal
import subprocess
import sys
import time
from urllib.parse import urlsplit

import pytest

from dashboard import ids
from dashboard.layout import MODEBAR_BUTTONS
from tests.dashboard.conftest import CHROMIUM, REVERSED, ROOT, free_port, open_from_list, open_page, wait_for

sync_api = pytest.importorskip("playwright.sync_api")
pytestmark = pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian package chromium is not installed")

DEADLINE_S = 30.0  # for things to show up on a loaded machine; not a speed check
# What plotly titles each allowed button (plotly.js' modebar/buttons.js).
BUTTON_TITLES = {"zoom2d": "Zoom", "pan2d": "Pan", "resetScale2d": "Reset axes", "toImage": "Download plot as a PNG"}
GRAPHS = (ids.TRACK, ids.ERRORS, ids.POSES, ids.LOOP, ids.LOOP_HISTOGRAM)




@pytest.fixture
def page_without_profile(tmp_path):
    """(URL, recordings folder) of ``podwatch replay`` of a header-less recording, with a hostile folder."""
    bare = tmp_path / "bare.jsonl"
    bare.write_bytes(b"".join(gzip.decompress(REVERSED.read_bytes()).splitlines(keepends=True)[1:]))
    folder = tmp_path / "recordings"
    folder.mkdir()
    shutil.copy(REVERSED, folder / REVERSED.name)
    (folder / "zeros.jsonl.gz").write_bytes(gzip.compress(bytes(1 << 20)) * 64)  # 64 MiB of zeros, one line
    os.mkfifo(folder / "pipe.jsonl")
    (folder / "shadow.jsonl").symlink_to("/etc/shadow")
    os.utime(folder / REVERSED.name, (1_700_000_000, 1_700_000_000))
    port = free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "receiver.cli", "replay", str(bare), "--speed", "0", "--dashboard",
         f"127.0.0.1:{port}", "--recordings", str(folder)],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, cwd=ROOT,
    )
    url = None
    deadline = time.monotonic() + DEADLINE_S
    while url is None and time.monotonic() < deadline:
        found = re.search(r"dashboard: (http://\S+)", proc.stdout.readline())
        url = found.group(1) if found else None
    if url is None:
        proc.kill()
        pytest.fail(f"podwatch replay did not print its URL: {proc.stdout.read()}")
    yield url, folder
    proc.send_signal(signal.SIGINT)
    out, _ = proc.communicate(timeout=20)
    assert proc.returncode == 0, out
    assert "Traceback" not in out


def listed(page) -> list[str]:
    page.click(f"#{ids.RECORDING_CHOICE}")
    names = page.evaluate("() => [...document.querySelectorAll('[role=option] input')].map(i => i.value)")
    page.keyboard.press("Escape")
    return names


def test_the_page_keeps_to_its_origin_its_folder_and_its_messages(page_without_profile):
    url, folder = page_without_profile
    requests, failures = [], []
    with open_page(url, 2000) as page:
        page.on("request", lambda r: requests.append(r.url))
        page.on("response", lambda r: failures.append((r.status, r.url)) if r.status >= 500 else None)
        page.reload()  # every request of the page's start, recorded from the first

        # Every graph's toolbar: zoom, pan, reset axes and download image, nothing that uploads.
        toolbars = wait_for(lambda: page.evaluate("""ids => {
            const bars = ids.map(id => [...document.querySelectorAll('#' + id + ' .modebar-btn')]
                                       .map(b => b.getAttribute('data-title')));
            return bars.every(b => b.length) ? bars : null;
        }""", list(GRAPHS)), "every graph's toolbar")
        assert toolbars == [[BUTTON_TITLES[b] for b in MODEBAR_BUTTONS]] * len(GRAPHS)

        # The Diagnosis panel, asked about a robot without a profile, says so.
        wait_for(lambda: page.inner_text(f"#{ids.ROBOT}").strip() == "practice-bot", "the robot to be listed")
        page.click(f"#{ids.DIAGNOSE_RUN}")
        wait_for(lambda: "practice-bot has no profile" in page.inner_text(f"#{ids.DIAGNOSE_RESULT}"),
                 "the panel's message")

        # The list names the folder and holds its regular files only; a new one shows up.
        assert page.inner_text(f"#{ids.RECORDINGS_FOLDER}") == f"Recordings in {folder}/"
        wait_for(lambda: listed(page) == ["zeros.jsonl.gz", REVERSED.name], "the folder's two recordings")
        shutil.copy(REVERSED, folder / "podwatch-new.jsonl.gz")
        wait_for(lambda: listed(page)[0] == "podwatch-new.jsonl.gz", "the new recording at the top of the list")

        # A bomb is refused in a line; then a recording opens and replays.
        open_from_list(page, "zeros.jsonl.gz")
        wait_for(lambda: page.inner_text(f"#{ids.MESSAGE}").startswith(
            "cannot open: zeros.jsonl.gz: line 1 is longer than"), "the refusal")
        open_from_list(page, REVERSED.name)
        opened = f"opened {folder / REVERSED.name}: 977 messages"
        wait_for(lambda: page.inner_text(f"#{ids.MESSAGE}").startswith(opened), "the recording to open")
        wait_for(lambda: "of 10.0 s" in page.inner_text(f"#{ids.REPLAY_POSITION}"), "the replay bar")

    origin = urlsplit(url).netloc
    assert requests and {urlsplit(r).netloc for r in requests} == {origin}, sorted(set(requests))
    assert failures == []
