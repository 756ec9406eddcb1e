"""The browser harness for the page's tests: Debian's Chromium driven by
Playwright, talking to 127.0.0.0/8 only, and a running ``podwatch demo``."""

from __future__ import annotations

import ipaddress
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
from contextlib import contextmanager
from pathlib import Path
from urllib.parse import urlsplit

import pytest

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--no-sandbox", "--headless", "--disable-gpu", "--disable-background-networking",
    "--disable-component-update", "--disable-sync", "--no-first-run",
]
ROOT = Path(__file__).resolve().parents[2]
REVERSED = ROOT / "replay_fixtures" / "practice-bot-figure-eight-reversed-right.jsonl.gz"
ARTIFACTS = ROOT / "artifacts"
DEMO_START_S = 30.0  # for the demo to print its URL on a loaded machine; not a speed check


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture
def recordings(tmp_path):
    """The page's recordings folder, holding a copy of the reversed-encoder fixture."""
    folder = tmp_path / "recordings"
    folder.mkdir()
    shutil.copy(REVERSED, folder / REVERSED.name)
    return folder


@pytest.fixture
def demo_url(recordings):
    """URL of a running ``podwatch demo`` (stopped with Ctrl-C after the test), started beside
    ``recordings`` and listing it (as recordings/, the default)."""
    port = free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "receiver.cli", "demo", "--duration", "120", "--seed", "3",
         "--udp", "127.0.0.1:0", "--dashboard", f"127.0.0.1:{port}"],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, cwd=recordings.parent,
    )
    url = None
    deadline = time.monotonic() + DEMO_START_S
    while url is None and time.monotonic() < deadline:
        line = proc.stdout.readline()
        if not line and proc.poll() is not None:
            break
        found = re.search(r"dashboard: (http://\S+)", line)
        url = found.group(1) if found else None
    if url is None:
        proc.kill()
        pytest.fail(f"podwatch demo did not print its URL: {proc.stdout.read()}")
    yield url
    proc.send_signal(signal.SIGINT)
    out, _ = proc.communicate(timeout=20)
    assert proc.returncode == 0, out
    assert "Traceback" not in out


@pytest.fixture
def serve_url(tmp_path):
    """(page URL, UDP port) of a running ``podwatch serve`` with the practice robot's profile and
    no robot yet (stopped with Ctrl-C after the test); it records into ``tmp_path``."""
    port = free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "receiver.cli", "serve", "--profile", str(ROOT / "replay_fixtures" / "practice-bot.toml"),
         "--udp", "127.0.0.1:0", "--dashboard", f"127.0.0.1:{port}"],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, cwd=tmp_path,
    )
    url = udp = None
    deadline = time.monotonic() + DEMO_START_S
    while (url is None or udp is None) and time.monotonic() < deadline:
        line = proc.stdout.readline()
        if not line and proc.poll() is not None:
            break
        page = re.search(r"dashboard: (http://\S+)", line)
        listening = re.search(r"listening: udp \S+:(\d+)", line)
        url = page.group(1) if page else url
        udp = int(listening.group(1)) if listening else udp
    if url is None or udp is None:
        proc.kill()
        pytest.fail(f"podwatch serve did not print its URL and port: {proc.stdout.read()}")
    yield url, udp
    proc.send_signal(signal.SIGINT)
    out, _ = proc.communicate(timeout=20)
    assert proc.returncode == 0, out
    assert "Traceback" not in out


def _loopback_only(route) -> None:
    host = urlsplit(route.request.url).hostname or ""
    try:
        allowed = ipaddress.ip_address(host).is_loopback
    except ValueError:
        allowed = host == "localhost"
    route.continue_() if allowed else route.abort()


@contextmanager
def open_pages(url: str, height: int, count: int):
    """``count`` headless Chromium pages (tabs) on ``url``, 1400 px wide, in one browser;
    requests off loopback are aborted."""
    sync_api = pytest.importorskip("playwright.sync_api")
    with sync_api.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            pages = []
            for _ in range(count):
                page = browser.new_page(viewport={"width": 1400, "height": height})
                page.route("**/*", _loopback_only)
                page.goto(url)
                pages.append(page)
            yield pages
        finally:
            browser.close()


@contextmanager
def open_sized(url: str, *sizes: tuple[int, int]):
    """One headless Chromium page on ``url`` per (width, height), in one browser; requests off
    loopback are aborted."""
    sync_api = pytest.importorskip("playwright.sync_api")
    with sync_api.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            pages = []
            for width, height in sizes:
                page = browser.new_page(viewport={"width": width, "height": height})
                page.route("**/*", _loopback_only)
                page.goto(url)
                pages.append(page)
            yield pages
        finally:
            browser.close()


@contextmanager
def open_page(url: str, height: int):
    """A headless Chromium page on ``url`` (``open_pages`` with one page)."""
    with open_pages(url, height, 1) as (page,):
        yield page


def open_from_list(page, name: str) -> None:
    """Choose ``name`` in the opener's list of recordings and press Open recording."""
    from dashboard import ids

    page.click(f"#{ids.RECORDING_CHOICE}")
    page.get_by_role("option", name=re.compile(re.escape(name))).click()
    page.click(f"#{ids.OPEN}")


def keep_for_readme(picture: Path, readme_picture: Path) -> None:
    """Copy a screenshot over the README's picture when PODWATCH_README_PICTURES=1: a plain
    test run leaves the checkout as it was (the picture stays in artifacts/)."""
    if os.environ.get("PODWATCH_README_PICTURES") == "1":
        shutil.copyfile(picture, readme_picture)


WAIT_S = 30.0  # for things to show up on a loaded machine; not a speed check


def wait_for(condition, what: str, page=None, deadline_s: float = WAIT_S, every_s: float = 0.2):
    """Poll ``condition`` until it returns something true (which is returned); fail after
    ``deadline_s`` naming ``what`` (and, given a ``page``, what its status line says)."""
    from dashboard import ids

    deadline = time.monotonic() + deadline_s
    while not (found := condition()):
        if time.monotonic() > deadline:
            shown = "" if page is None else f"; the status line says {page.inner_text(f'#{ids.STATUS}')!r}"
            raise AssertionError(f"gave up waiting for {what}{shown}")
        time.sleep(every_s)
    return found
