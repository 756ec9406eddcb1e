"""The profile editor in headless Chromium: time from an edit to the redrawn graph, and a drag.

    .venv/bin/python tests/bench/bench_editor_page.py [--seconds S] [--rate HZ] [--repeat R]

``podwatch replay REC --dashboard`` serves the page on a recording (paused at
its start, so that only the editor works); Chromium opens the editor. Side by
side in one run, on two recordings of the practice robot: the 10 s fixture
(977 samples) and a simulated 10-minute session at 200 Hz (120,000 samples).

- typed edit: a value put into a field (as typing does), then the time until
  both editor graphs have redrawn (Plotly's ``plotly_afterplot``), in the
  page's own clock. It includes the field's debounce (editor_form.DEBOUNCE_S,
  0.3 s: the page waits for typing to pause); "requests" is the time the
  editor's two requests took (the edit's and the redraw's, each from sent to
  answered: the server's work, the wait for one of its threads, loopback).
- drag: a number's handle dragged 20 steps over about a second, then let go:
  the editor's requests the drag caused, the time from letting go to the redraw, and
  the longest task on the page's main thread during the drag (a long task is
  what a person feels as a stuck page).
The machine's 1-minute load average is printed before and after.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from dashboard import ids  # noqa: E402
from dashboard.editor_form import DEBOUNCE_S  # noqa: E402
from receiver.formats.profile_toml import load_profile  # noqa: E402
from receiver.formats.recording_writer import RecordingWriter  # noqa: E402
from receiver.sim.simulate import simulate  # noqa: E402

PROFILE = ROOT / "replay_fixtures" / "practice-bot.toml"
FIXTURE = ROOT / "replay_fixtures" / "practice-bot-figure-eight.jsonl.gz"
CHROMIUM_ARGS = ["--no-sandbox", "--headless", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run"]
FIELD = json.dumps({"key": "wheel.0.y", "type": ids.EDITOR_FIELD}, separators=(",", ":"))
# Page-side helpers: mark each redraw of the editor's graphs, the page's requests and long tasks.
WATCH = """() => {
    window.__drawn = {};
    for (const id of ['%s', '%s']) {
        const gd = document.querySelector('#' + id + ' .js-plotly-plot');
        gd.on('plotly_afterplot', () => { window.__drawn[id] = performance.now(); });
    }
    window.__long = [];
    new PerformanceObserver(list => { for (const e of list.getEntries()) window.__long.push([e.startTime, e.duration]); })
        .observe({type: 'longtask', buffered: false});
}""" % (ids.EDITOR_TRACK, ids.EDITOR_ERRORS)
TYPE = """(text) => {
    const input = document.querySelector(`input[id='%s']`);
    const set = Object.getOwnPropertyDescriptor(HTMLInputElement.prototype, 'value').set;
    window.__drawn = {};
    const start = performance.now();
    set.call(input, text);
    input.dispatchEvent(new Event('input', {bubbles: true}));
    return start;
}""" % FIELD
DRAWN = "() => Object.keys(window.__drawn).length === 2 ? Math.max(...Object.values(window.__drawn)) : null"
# The editor's two requests per edit: the edit's callback (its store) and the redraw's (its figures).
EDITOR_OUTPUTS = (f"{ids.EDITOR}.data", f"{ids.EDITOR_TRACK}.figure")


def free_port() -> int:
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def session_recording(folder: Path, seconds: float, rate: float) -> Path:
    """A simulated session of the practice robot, ``seconds`` long at ``rate`` Hz."""
    profile = load_profile(PROFILE)
    n = int(seconds * rate)
    run = simulate(profile, "wander", rate, seconds * 1.05, seed=1, imu=False)
    path = folder / f"session-{n}.jsonl"
    with RecordingWriter(path, [profile]) as writer:
        writer.write(run.stamp_rx(1.79e9)[:n])
    return path


def drag_once(page, handle, editor_requests: list, direction: int) -> dict:
    """One drag of ``handle``: 20 steps sideways, a move every 50 ms, then let go; what it cost."""
    box = handle.bounding_box()
    x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    page.evaluate("() => { window.__drawn = {}; window.__long = []; }")
    editor_requests.clear()
    began = page.evaluate("() => performance.now()")
    page.mouse.move(x, y)
    page.mouse.down()
    for k in range(1, 21):
        page.mouse.move(x + direction * 4 * k, y)
        page.wait_for_timeout(50)
    released = page.evaluate("() => performance.now()")
    edits = [first for first, _ in editor_requests]
    page.mouse.up()
    page.wait_for_function(DRAWN, timeout=60_000)
    end = page.evaluate(DRAWN)
    longest = page.evaluate("([a, b]) => Math.max(0, ...window.__long.filter(e => e[0] >= a && e[0] <= b)"
                            ".map(e => e[1]))", [began, released])
    page.wait_for_timeout(800)
    sent = [first for first, _ in editor_requests].count(EDITOR_OUTPUTS[0])
    return {"requests_during": edits.count(EDITOR_OUTPUTS[0]), "requests_after": sent - edits.count(EDITOR_OUTPUTS[0]),
            "after_release_ms": end - released, "longest_task_ms": longest}


def measure(recording: Path, repeat: int) -> dict:
    """Start the page on ``recording``, open the editor and time the edits."""
    from playwright.sync_api import sync_playwright

    port = free_port()
    server = subprocess.Popen(
        [sys.executable, "-m", "receiver.cli", "replay", str(recording), "--dashboard", f"127.0.0.1:{port}"],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, cwd=ROOT,
    )
    while "dashboard:" not in (line := server.stdout.readline()):
        if not line:
            raise SystemExit("replay --dashboard did not start")
    typed, server_ms, drag = [], [], {}
    editor_requests: list[tuple[str, float]] = []  # (the callback's first output, its duration in ms)

    def finished(request) -> None:
        if "_dash-update-component" not in request.url:
            return
        output = json.loads(request.post_data or "{}").get("output", "")
        first = next((o for o in EDITOR_OUTPUTS if output.startswith(".." + o)), None)
        # The redraw's requests on the editor's follow tick answer "nothing new" for a recording: not counted.
        if first is not None and (first == EDITOR_OUTPUTS[0] or request.response().status == 200):
            editor_requests.append((first, request.timing["responseEnd"]))

    try:
        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
            page = browser.new_page(viewport={"width": 1400, "height": 2400})
            page.on("requestfinished", finished)
            page.goto(f"http://127.0.0.1:{port}/")
            page.wait_for_selector(f"#{ids.PAUSE}")
            page.wait_for_timeout(1500)
            page.click(f"#{ids.PAUSE}")
            page.click(f"#{ids.EDITOR_OPEN}")
            page.wait_for_selector(f"input[id='{FIELD}']", timeout=60_000)
            page.wait_for_function("() => document.querySelector('#%s').textContent.includes('samples')"
                                   % ids.EDITOR_WHAT, timeout=60_000)
            page.wait_for_timeout(1000)
            page.evaluate(WATCH)
            for k in range(repeat):
                text = f"{6.25 + 0.01 * (k + 1):.2f}"
                editor_requests.clear()
                start = page.evaluate(TYPE, text)
                page.wait_for_function(DRAWN, timeout=60_000)
                page.wait_for_function("(t) => document.querySelector('#%s').textContent.includes('y=' + t)"
                                       % ids.EDITOR_OPTIONS, arg=text.rstrip("0"), timeout=60_000)
                end = page.evaluate(DRAWN)
                typed.append(end - start)
                page.wait_for_timeout(500)
                server_ms.append(sum(duration for _, duration in editor_requests))
            # Drags of the field's handle: 20 steps, a move every 50 ms, then let go (right, then left).
            handle = page.locator(f"input[id='{FIELD}']").locator("xpath=ancestor::div[contains(@class,'editor-field')]") \
                .locator(".editor-drag")
            drags = []
            for k in range(3):
                drags.append(drag_once(page, handle, editor_requests, 1 if k % 2 == 0 else -1))
            drag = {key: statistics.median(d[key] for d in drags) for key in drags[0]}
            samples = page.inner_text(f"#{ids.EDITOR_WHAT}").split()[0]
            browser.close()
    finally:
        server.terminate()
        server.communicate(timeout=20)
    return {"samples": samples, "typed": typed, "server": server_ms, "drag": drag}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--seconds", type=float, default=600.0)
    parser.add_argument("--rate", type=float, default=200.0)
    parser.add_argument("--repeat", type=int, default=7)
    args = parser.parse_args()
    folder = Path(tempfile.mkdtemp(prefix="podwatch-bench-editor-"))
    try:
        shutil.copy(FIXTURE, folder / FIXTURE.name)
        print(f"simulating {int(args.seconds * args.rate):,} loops at {args.rate:g} Hz ...", file=sys.stderr)
        long = session_recording(folder, args.seconds, args.rate)
        load = os.getloadavg()[0]
        started = time.monotonic()
        results = {name: measure(path, args.repeat) for name, path in (("10 s fixture", folder / FIXTURE.name),
                                                                        (f"{args.seconds:g} s session", long))}
        print(f"edit to redrawn graph in headless Chromium, median and max of {args.repeat} "
              f"(typing includes the field's {DEBOUNCE_S * 1000:.0f} ms debounce):")
        for name, r in results.items():
            t, s, d = r["typed"], r["server"], r["drag"]
            rest = statistics.median(a - b - DEBOUNCE_S * 1000 for a, b in zip(t, s))
            print(f"  {name} ({r['samples']} samples):\n"
                  f"    typed: {statistics.median(t):5.0f} ms (max {max(t):4.0f}) = {DEBOUNCE_S * 1000:.0f} ms debounce"
                  f" + requests {statistics.median(s):4.0f} ms (max {max(s):4.0f}) + page {rest:4.0f} ms\n"
                  f"    drag of 20 steps (median of 3): {d['requests_during']:.0f} edits sent during it, "
                  f"{d['requests_after']:.0f} after; redrawn {d['after_release_ms']:4.0f} ms after letting go; "
                  f"longest main-thread task during it {d['longest_task_ms']:.0f} ms")
        print(f"1-minute load average: {load:.2f} before, {os.getloadavg()[0]:.2f} after "
              f"({time.monotonic() - started:.0f} s)")
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
