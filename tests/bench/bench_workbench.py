"""Benchmark of the tuning loop: trying a profile edit on a 10-minute session at 200 Hz.

    .venv/bin/python tests/bench/bench_workbench.py [--seconds S] [--rate HZ] [--repeat R]

Side by side in one run, on the same simulated session (120,000 samples by
default, the practice robot wandering with loop jitter and stalls):

(a) in memory, as the page will do it: the columns are already loaded; read
    the edit's text and apply it (``formats.profile_set.edited_profile``),
    recompute (``Tracker.feed``), then the numbers and curve the page shows
    (``analysis.compare.row_from_result``, ``analysis.growth.disagreement_by_distance``).
    Beside it, ``analysis.loop_cost.loop_cost`` given the arc result (two
    more recomputes, euler and midpoint) for the loop-cost view.
(b) from a file, as a user does today: ``podwatch recompute REC --set ...
    --out CSV``, in its own process (what a person waits for) and in this
    one through ``main`` (without the interpreter's start).
(c) the page's editor, server side: the edit read into the tab's editor
    state, then the redraw (``editor_draw.draw_editor``: recompute, both
    rows, downsampling, both figures, the numbers table); and the same
    through the page's own callbacks (the edit's, then the redraw's), posted
    through Flask's test client as the browser posts them, JSON answer
    included. The loaded profile's recompute is kept between edits, as the
    page keeps it for a recording.
(d) memory of the raw history the live editor recomputes from: one robot
    at 1 kHz (three wheels) for 180 s (the window before the editor) and
    600 s (the page's longest window, kept now), measured with tracemalloc.
(e) the live editor's redraw at its largest: a 600 s window of a 1 kHz
    robot in a live source's raw history (the copy of the window, both
    recomputes, both rows, the figures), what each follow of a live
    session costs (editor_panel.FOLLOW_SHARE bounds how often).
The page's target is a redraw within 150 ms on the server including figures.
Machines here are noisy: read the best and the median of R runs, and the
load average printed with them.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from dashboard import ids  # noqa: E402
from dashboard.app import create_app  # noqa: E402
from dashboard.editor_draw import draw_editor  # noqa: E402
from dashboard.editor_panel import numbers_table  # noqa: E402
from dashboard.editor_state import EditorState  # noqa: E402
from dashboard.settings import Settings  # noqa: E402
from dashboard.sources import LiveSource, ReplaySource  # noqa: E402
from dashboard.tabs import Station  # noqa: E402
from dashboard.workbench_session import LoadedResults, session_of  # noqa: E402
from receiver.analysis.compare import row_from_result  # noqa: E402
from receiver.analysis.growth import disagreement_by_distance  # noqa: E402
from receiver.analysis.loop_cost import loop_cost  # noqa: E402
from receiver.cli import main as podwatch  # noqa: E402
from receiver.formats.profile_set import edited_profile  # noqa: E402
from receiver.formats.profile_toml import load_profile  # noqa: E402
from receiver.formats.protocol import Sample  # noqa: E402
from receiver.formats.recording import read_recording  # noqa: E402
from receiver.formats.recording_writer import RecordingWriter  # noqa: E402
from receiver.live.hub import Hub  # noqa: E402
from receiver.live.raw_history import RawHistory  # noqa: E402
from receiver.odometry.columns import columns_from_samples  # noqa: E402
from receiver.odometry.recompute import Tracker  # noqa: E402
from receiver.odometry.robot import METRES_PER_UNIT  # noqa: E402
from receiver.sim.simulate import simulate  # noqa: E402

PROFILE = ROOT / "replay_fixtures" / "practice-bot.toml"
# The edit a team tries: a track width 0.1 in wider, the back wheel 0.2 in further back.
SETTINGS = ["wheel.left.y=6.3", "wheel.right.y=-6.3", "wheel.back.x=-5.7"]


def _timed(fn) -> float:
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def _summary(times: list[float]) -> str:
    return f"best {min(times) * 1000:8.1f} ms   median {statistics.median(times) * 1000:8.1f} ms"


def page_redraw(rec: Path, repeat: int) -> dict[str, list[float]]:
    """(c): the page's editor on the recording ``rec``, its values dragged one step per edit."""
    data = read_recording(rec)
    station = Station(recording=data, make_replay=lambda d: ReplaySource(d, clock=lambda: 0.0))
    settings = Settings()
    view = station.tab("bench")
    session = session_of(view, "practice-bot", settings.window_s)
    loaded_results = LoadedResults()
    loaded_results.of(session)  # the first draw's recompute, kept for the edits after it
    state = EditorState("practice-bot")

    def draw(k: int) -> None:
        edited = state.with_field(session.loaded, "wheel.0.y", f"{6.25 + 0.01 * (k + 1):.2f}")
        drawn = draw_editor(session, loaded_results.of(session), edited.profile(session.loaded), edited.now.method,
                            settings.field_size_m, settings.points)
        numbers_table(drawn)

    app = create_app(station, settings)
    client = app.server.test_client()
    edit_key = next(k for k in app.callback_map if f"{ids.EDITOR}.data" in k and "editor-field" in k)
    redraw_key = next(k for k in app.callback_map if f"{ids.EDITOR_TRACK}.figure" in k)
    field = {"key": "wheel.0.y", "type": ids.EDITOR_FIELD}

    def post(key: str, values: dict, changed: str) -> dict:
        spec = app.callback_map[key]

        def item(i):
            if isinstance(i["id"], str) and i["id"].startswith("{"):  # the form's fields (pattern-matching)
                return [{"id": field, "property": "value", "value": values["field"]}]
            return {"id": i["id"], "property": i["property"], "value": values.get(f"{i['id']}.{i['property']}")}

        outputs = []
        for part in key.strip(".").split("..."):
            name, prop = part.rsplit(".", 1)
            outputs.append([{"id": field, "property": "value"}] if name.startswith("{") else
                           {"id": name, "property": prop.split("@")[0]})
        body = {"output": key, "outputs": outputs, "inputs": [item(i) for i in spec["inputs"]],
                "state": [item(s) for s in spec["state"]], "changedPropIds": [changed]}
        response = client.post("/_dash-update-component", json=body)
        assert response.status_code == 200, response.data[:300]
        return json.loads(response.data)["response"]

    base = {f"{ids.VIEW_ID}.data": "bench", f"{ids.ROBOT}.value": "practice-bot", f"{ids.WINDOW}.value": 60,
            f"{ids.EDITOR_METHOD}.value": "arc", f"{ids.EDITOR_BODY}.className": "editor-body",
            f"{ids.EDITOR_TICK}.n_intervals": 0}
    store = {"data": None}

    def through_callbacks(k: int) -> None:
        text = f"{6.25 + 0.01 * (k + 1):.2f}"
        edited = post(edit_key, {**base, "field": text, f"{ids.EDITOR}.data": store["data"]},
                      json.dumps(field, separators=(",", ":"), sort_keys=True) + ".value")
        store["data"] = edited[ids.EDITOR]["data"]
        answer = post(redraw_key, {**base, f"{ids.EDITOR}.data": store["data"]}, f"{ids.EDITOR}.data")
        assert "wheel.left.y=" + text.rstrip("0").rstrip(".") in answer[ids.EDITOR_OPTIONS]["children"]

    through_callbacks(0)  # warm: Dash's first call of each callback
    return {
        "(c) edit + redraw (draw_editor)": [_timed(lambda k=k: draw(k)) for k in range(repeat)],
        "(c) through the page's callbacks": [_timed(lambda k=k: through_callbacks(k + 1)) for k in range(repeat)],
    }


def live_redraw(repeat: int, rate_hz: float = 1000.0, window_s: float = 600.0) -> list[float]:
    """(e): the editor's redraw of a live window of ``window_s`` at ``rate_hz``, edited."""
    profile = load_profile(PROFILE)
    samples = simulate(profile, "wander", rate_hz, window_s * 1.02, seed=2, imu=False).stamp_rx(1.79e9)
    live = LiveSource(Hub({profile.name: profile}), clock=lambda: samples[-1].rx)
    for k in range(0, len(samples), 1000):
        live.raw([(sample, "bench") for sample in samples[k:k + 1000]])
    view = Station(live=live).tab("bench")
    settings = Settings()
    edited = EditorState(profile.name).with_field(profile, "wheel.0.y", "6.3").profile(profile)

    def redraw() -> None:
        session = session_of(view, profile.name, window_s)
        draw_editor(session, LoadedResults().of(session), edited, "arc", settings.field_size_m, settings.points)

    return [_timed(redraw) for _ in range(repeat)]


def raw_history_mb(window_s: float, rate_hz: float = 1000.0) -> float:
    """(d): MB the raw history holds for one robot of three wheels at ``rate_hz`` over ``window_s``."""
    history = RawHistory(window_s=window_s, max_rows=int(window_s * rate_hz))
    rows = int(window_s * rate_hz) + 20_000
    tracemalloc.start()
    batch = []
    for k in range(rows):
        batch.append((Sample(v=1, robot="bot", seq=k, t=k / rate_hz, ticks=[k, -k, 3 * k], pose=(1.0, 2.0, 0.3),
                             imu=None, loop=1.0 / rate_hz, reset=False, rx=1.79e9 + k / rate_hz), "bench"))
        if len(batch) == 1000:
            history(batch)
            batch = []
    held, _ = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert len(history.columns("bot")) == int(window_s * rate_hz)
    return held / 1e6


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--seconds", type=float, default=600.0)
    parser.add_argument("--rate", type=float, default=200.0)
    parser.add_argument("--repeat", type=int, default=7)
    args = parser.parse_args()

    profile = load_profile(PROFILE)
    n = int(args.seconds * args.rate)
    load_start = os.getloadavg()[0]
    print(f"simulating {n:,} loops at {args.rate:g} Hz ...", file=sys.stderr)
    # The simulated loop runs a little slower than its rate (jitter, stalls): simulate a
    # little longer and keep the first n samples.
    run = simulate(profile, "wander", args.rate, args.seconds * 1.05, seed=1, imu=False)
    samples = run.stamp_rx(1.79e9)[:n]
    assert len(samples) == n
    columns = columns_from_samples(samples, len(profile.wheels))
    metres = METRES_PER_UNIT[profile.distance_unit]

    def edit_and_recompute():
        edited = edited_profile(profile, SETTINGS)
        result = Tracker(edited).feed(columns)
        row_from_result(result, edited)
        disagreement_by_distance(result.pose, result.position_error, result.heading_error, result.kind, metres)

    edited = edited_profile(profile, SETTINGS)
    result = Tracker(edited).feed(columns)
    parts = {
        "edit (parse + apply)": lambda: edited_profile(profile, SETTINGS),
        "recompute (Tracker.feed)": lambda: Tracker(edited).feed(columns),
        "row + curve": lambda: (
            row_from_result(result, edited),
            disagreement_by_distance(result.pose, result.position_error, result.heading_error, result.kind, metres),
        ),
        "(a) all of the above": edit_and_recompute,
        "loop cost (+2 recomputes)": lambda: loop_cost(columns, edited, arc=result),
    }
    timings = {name: [_timed(fn) for _ in range(args.repeat)] for name, fn in parts.items()}

    with tempfile.TemporaryDirectory() as tmp:
        rec = Path(tmp) / "session.jsonl"
        with RecordingWriter(rec, [profile]) as writer:
            writer.write(samples)
        size_mb = rec.stat().st_size / 1e6
        command = ["recompute", str(rec), *(x for s in SETTINGS for x in ("--set", s)), "--out", str(Path(tmp) / "out.csv")]
        in_process, own_process = [], []
        for _ in range(args.repeat):
            in_process.append(_timed(lambda: podwatch(command)))
            own_process.append(_timed(lambda: subprocess.run(
                [sys.executable, "-m", "receiver.cli", *command], check=True, capture_output=True
            )))
        rows = sum(1 for _ in open(Path(tmp) / "out.csv")) - 1
        assert rows == n, (rows, n)
        timings.update(page_redraw(rec, args.repeat))
    print("simulating 600 s at 1 kHz for the live window ...", file=sys.stderr)
    timings["(e) live 600 s window at 1 kHz, edited"] = live_redraw(args.repeat)
    memory = {window: raw_history_mb(window) for window in (180.0, 600.0)}

    print(f"{n:,} samples ({columns.t[-1] - columns.t[0]:.0f} s at {args.rate:g} Hz), best and median of {args.repeat}:")
    for name, times in timings.items():
        print(f"  {name:40s} {_summary(times)}")
    print(f"  (b) podwatch recompute --set, {size_mb:.0f} MB file to CSV:")
    print(f"      in this process (main)         {_summary(in_process)}")
    print(f"      its own process                {_summary(own_process)}")
    ratio = min(own_process) / min(timings["(a) all of the above"])
    print(f"  (a) is {ratio:.0f}x faster than (b) in its own process")
    for window, mb in memory.items():
        print(f"  (d) raw history, one robot at 1 kHz, {window:.0f} s: {mb:.1f} MB")
    print(f"1-minute load average: {load_start:.2f} at the start, {os.getloadavg()[0]:.2f} at the end")


if __name__ == "__main__":
    main()
