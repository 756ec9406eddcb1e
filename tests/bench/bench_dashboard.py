"""Dashboard speed: update-callback time and payload, and updates per second in Chromium.

Run: .venv/bin/python tests/bench/bench_dashboard.py [--seconds S]

Part 1 (server side, no network): a hub holding a full 60 s window of one
robot at 1 kHz, of four robots at 200 Hz, and a full 600 s window of four
robots at 1 kHz (the hub's whole ring), fed 0.2 s of new samples before each
update; the page's update callback is called through Flask's test client
exactly as the browser calls it. Reports time per call and response size,
for the first whole redraw, the later whole redraws (one every
``--full-every`` s) and the appends separately. A running page keeps its
block summaries from the receiver's start; here the hub is filled first, so
the time to summarise every full block of every robot is printed apart
(``summaries_catch_up_ms``) and done before the first call. To compare with
another tree, copy this file into that tree's tests/bench/ and run it there.
Part 2 (real browser): ``podwatch serve`` with the dashboard, robots streamed
by signal_robot.py (other processes: the simulator's messages over UDP with
four signals of the robot's own in each), headless Chromium on the page; counts answered update callbacks per second once the 60 s window
is full, and the CPU time per update of Chromium (all its processes) and of
the serve process (which also receives the robots' messages). On a shared
machine updates/s follows the load; the CPU times hardly do, so compare
those across runs, and run a before and an after side by side (the
machine's 1-minute load average before and after each measurement is
printed with it).
Targets (issue 4): < 30 ms, < 200 kB, >= 5 updates/s; (issue 14) a whole
redraw of the 600 s window of four 1 kHz robots < 50 ms, >= 10 updates/s in
the browser with the signals panel showing four signals.
"""

from __future__ import annotations

import argparse
import json
import os
import signal
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from dashboard import ids  # noqa: E402
from dashboard.app import create_app  # noqa: E402
from dashboard.settings import Settings  # noqa: E402
from dashboard.sources import LiveSource  # noqa: E402
from dashboard.tabs import Station  # noqa: E402
from receiver.formats.profile_toml import load_profile, write_profile  # noqa: E402
from receiver.live.hub import Hub  # noqa: E402
from receiver.odometry.faults import parse_faults
from receiver.sim.simulate import simulate  # noqa: E402

PROFILE = ROOT / "replay_fixtures" / "practice-bot.toml"
WINDOW_S = 60.0
STEP_S = 0.2
CHROMIUM_ARGS = ["--no-sandbox", "--headless", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run"]


class Clock:
    def __init__(self, now: float) -> None:
        self.now = now

    def __call__(self) -> float:
        return self.now


def robots(count: int):
    base = load_profile(PROFILE)
    return [base] if count == 1 else [replace(base, name=f"bot-{k + 1}") for k in range(count)]


def update_request(app, robot: str, cursor, tick: int, window_s: float) -> dict:
    """The body the page posts for the view-update callback (inputs it has no value for: None,
    so that the same request fits an older tree's callback)."""
    key = next(k for k in app.callback_map if f"{ids.TRACK}.figure" in k)
    spec = app.callback_map[key]
    values = {
        (ids.REQUEST, "data"): {"tick": tick}, (ids.ROBOT, "value"): robot, (ids.WINDOW, "value"): window_s,
        (ids.CURSOR, "data"): cursor, (ids.ROBOT, "options"): [],
    }
    return {
        "output": key,
        "outputs": [{"id": part.split(".")[0], "property": part.split(".")[1].split("@")[0]}
                    for part in key.strip(".").split("...")],
        "inputs": [{"id": i["id"], "property": i["property"], "value": values.get((i["id"], i["property"]))}
                   for i in spec["inputs"]],
        "state": [{"id": s["id"], "property": s["property"], "value": values.get((s["id"], s["property"]))}
                  for s in spec["state"]],
        "changedPropIds": [f"{ids.REQUEST}.data"],
    }


def server_side(count: int, rate_hz: float, calls: int, window_s: float, full_every_s: float, signals: int) -> dict:
    """Update calls on a hub whose window of ``window_s`` is full: each robot simulated and fed
    in turn (only the samples still to come are kept, so 600 s at 1 kHz for four robots fits
    in memory), then ``calls`` updates 0.2 s of new samples apart. With ``signals``, every
    message carries that many signals of the robot's own (the page draws up to four)."""
    profiles = robots(count)
    hub = Hub({p.name: p for p in profiles})
    faults = parse_faults(["reversed:right"], profiles[0])
    t_total = window_s + calls * STEP_S + 1.0
    t0 = 1_000_000.0
    clock = Clock(t0)
    live = LiveSource(hub, clock)  # before the robots: its raw history (and signals) fills with the window
    live.origin = t0
    streams = []
    for k, profile in enumerate(profiles):
        run = simulate(profile, "wander", rate_hz, t_total, seed=k + 1, faults=faults)
        if signals:
            for n, sample in enumerate(run.samples):
                sample.data = {f"signal.{j}": float(n % (100 + j)) for j in range(signals)}
        arrival = np.asarray(run.arrival_s)
        fill = int(np.searchsorted(arrival, window_s, side="right"))
        for start in range(0, fill, 1000):  # a process() per second of 1 kHz, as the pump would
            end = min(start + 1000, fill)
            for i in range(start, end):
                hub.ingest([run.samples[i]], [], t0 + float(arrival[i]), "bench", wake=False)
            hub.process(t0 + float(arrival[end - 1]))
        streams.append((run.samples[fill:], arrival[fill:]))
        del run
    clock.now = t0 + window_s

    def feed_until(t: float, fed: list[int]) -> None:
        for k, (samples, arrival) in enumerate(streams):
            end = int(np.searchsorted(arrival, t, side="right"))
            for i in range(fed[k], end):
                hub.ingest([samples[i]], [], t0 + float(arrival[i]), "bench")
            fed[k] = end
        hub.process(t0 + t)

    fed = [0] * len(streams)
    station = Station(live=live)
    app = create_app(station, Settings(window_s=window_s, full_every_s=full_every_s))
    # A served page summarises full blocks in the background from its start (window_rows.Warmer);
    # here the hub filled before the page was made, so that catch-up is done (and timed) first.
    catch_up_ms = None
    try:
        from dashboard.window_rows import Warmer
    except ImportError:  # an older tree
        pass
    else:
        start = time.perf_counter()
        Warmer(live, Settings().loop_threshold_s).warm_once(live)
        catch_up_ms = round(1000 * (time.perf_counter() - start), 1)
    client = app.server.test_client()
    robot = profiles[0].name
    cursor = None
    first, full, append = [], [], []
    for n in range(calls):
        t = window_s + (n + 1) * STEP_S
        feed_until(t, fed)
        clock.now = t0 + t
        body = update_request(app, robot, cursor, n, window_s)
        start = time.perf_counter()
        response = client.post("/_dash-update-component", json=body)
        elapsed = time.perf_counter() - start
        assert response.status_code == 200, response.data[:300]
        answer = json.loads(response.data)["response"]
        cursor = answer[ids.CURSOR]["data"]
        kind = first if n == 0 else full if "figure" in answer.get(ids.TRACK, {}) else append
        kind.append((elapsed, len(response.data)))
    rows = sum(len(hub.history(p.name, since_rx=clock.now - window_s)["rx"]) for p in profiles)

    def summary(items):
        if not items:
            return None
        times = [1000 * e for e, _ in items]
        sizes = [b / 1000 for _, b in items]
        return {"n": len(items), "median_ms": round(statistics.median(times), 2), "max_ms": round(max(times), 2),
                "median_kB": round(statistics.median(sizes), 1), "max_kB": round(max(sizes), 1)}

    return {"robots": count, "rate_hz": rate_hz, "window_s": window_s, "signals": signals, "rows_in_window": rows,
            "summaries_catch_up_ms": catch_up_ms,
            "first_full": summary(first), "full": summary(full), "append": summary(append),
            "load_average_1min": round(os.getloadavg()[0], 2), "tree": str(Path(create_app.__code__.co_filename).parents[1])}


def free_port() -> int:
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def in_browser(count: int, rate_hz: float, measure_s: float, fill_s: float) -> dict:
    from playwright.sync_api import sync_playwright

    tmp = Path(tempfile.mkdtemp(prefix="podwatch-bench-"))
    profiles = robots(count)
    paths = []
    for p in profiles:
        path = tmp / f"{p.name}.toml"
        write_profile(p, path)
        paths.append(path)
    udp, page_port = free_port(), free_port()
    serve = subprocess.Popen(
        [sys.executable, "-m", "receiver.cli", "serve", *sum((["--profile", str(p)] for p in paths), []),
         "--udp", f"127.0.0.1:{udp}", "--dashboard", f"127.0.0.1:{page_port}", "--record", str(tmp / "rec.jsonl")],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, cwd=ROOT,
    )
    while "dashboard:" not in (line := serve.stdout.readline()):
        if not line:
            raise SystemExit("serve did not start")
    # Each robot sends four signals of its own (signal_robot.py); a page with the Robot
    # signals panel draws them, an older page records them only.
    senders = [
        subprocess.Popen(
            [sys.executable, str(Path(__file__).with_name("signal_robot.py")), "--profile", str(path),
             "--rate", str(rate_hz), "--duration", str(fill_s + measure_s + 30), "--seed", str(k + 1),
             "--to", f"udp://127.0.0.1:{udp}"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=ROOT,
        )
        for k, path in enumerate(paths)
    ]
    stamps: list[float] = []
    sizes: list[int] = []
    try:
        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
            page = browser.new_page(viewport={"width": 1400, "height": 2000})

            def on_response(response) -> None:
                if "_dash-update-component" in response.url and f"{ids.TRACK}.figure" in (response.request.post_data or ""):
                    stamps.append(time.monotonic())
                    sizes.append(int(response.headers.get("content-length", 0)))

            page.on("response", on_response)
            page.goto(f"http://127.0.0.1:{page_port}/")
            # wait_for_timeout, not time.sleep: the sync API delivers events only while it runs
            page.wait_for_timeout(fill_s * 1000)
            before = cpu_s(serve.pid)
            load_before = os.getloadavg()[0]
            stamps.clear()
            sizes.clear()
            page.wait_for_timeout(measure_s * 1000)
            used = {k: v - before[k] for k, v in cpu_s(serve.pid).items()}
            load = (load_before, os.getloadavg()[0])
            n = len(stamps)
            rate = (n - 1) / (stamps[-1] - stamps[0]) if n > 1 else 0.0
            shown = page.inner_text(f"#{ids.LOOP_RATE}")
            signals = page.evaluate("""id => {
                const gd = document.querySelector('#' + id + ' .js-plotly-plot');
                return gd && gd.data ? gd.data.map(t => t.name) : null;
            }""", getattr(ids, "SIGNALS", "no-signals-panel"))
            browser.close()
    finally:
        for s in senders:
            s.kill()
        serve.send_signal(signal.SIGINT)
        serve.communicate(timeout=30)
    return {"robots": count, "rate_hz": rate_hz, "updates_per_s": rate, "updates": n,
            "median_kB": statistics.median(sizes) / 1000 if sizes else None,
            "max_kB": max(sizes) / 1000 if sizes else None, "loop_rate_on_page": shown, "signals_drawn": signals,
            "cpu_ms_per_update": {k: round(1000 * v / max(n, 1)) for k, v in used.items()},
            "load_average_1min": [round(x, 2) for x in load]}  # before and after measuring


def cpu_s(serve_pid: int) -> dict[str, float]:
    """CPU seconds (user + system) used so far by the Chromium processes this
    benchmark started and by the ``podwatch serve`` process (receiver and
    dashboard server). CPU time, unlike wall time, hardly depends on what
    else the machine is running, so these compare across runs."""
    clock = os.sysconf("SC_CLK_TCK")
    children: dict[int, list[int]] = {}
    used: dict[int, float] = {}
    names: dict[int, str] = {}
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            stat = Path(f"/proc/{entry}/stat").read_text()
        except OSError:
            continue  # the process has ended
        fields = stat[stat.rindex(")") + 2:].split()  # the name in parentheses may hold spaces
        children.setdefault(int(fields[1]), []).append(int(entry))
        used[int(entry)] = (int(fields[11]) + int(fields[12])) / clock
        names[int(entry)] = stat[stat.index("(") + 1:stat.rindex(")")]
    browser, stack = 0.0, [os.getpid()]
    while stack:
        pid = stack.pop()
        stack.extend(children.get(pid, []))
        if "chrom" in names.get(pid, ""):
            browser += used[pid]
    return {"chromium": browser, "serve": used.get(serve_pid, 0.0)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--calls", type=int, default=100, help="update calls per server-side case")
    parser.add_argument("--seconds", type=float, default=20.0, help="browser measuring time per case")
    parser.add_argument("--fill", type=float, default=WINDOW_S, help="streaming before measuring (fills the window)")
    parser.add_argument("--only", choices=("server", "browser"), help="run one part only")
    parser.add_argument("--full-every", type=float, default=2.0,
                        help="seconds between whole redraws in the server-side cases (the page's default is 10)")
    parser.add_argument("--cases", default="1x1000x60,4x200x60,4x1000x600,4x1000x600x4",
                        help="server-side cases, robots x rate (Hz) x window (s) [x signals a message], "
                             "comma-separated")
    args = parser.parse_args()
    cases = [tuple(float(x) for x in case.split("x")) + (0.0,) for case in args.cases.split(",")]
    for count, rate, window, signals, *_ in cases if args.only != "browser" else ():
        print("server", json.dumps(server_side(int(count), rate, args.calls, window, args.full_every, int(signals))),
              flush=True)
    if args.only != "server":
        for count, rate in ((1, 1000.0), (4, 200.0)):
            print("browser", json.dumps(in_browser(count, rate, args.seconds, args.fill)), flush=True)


if __name__ == "__main__":
    main()
