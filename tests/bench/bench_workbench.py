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
The page's target is a redraw within 150 ms on the server including figures,
which (a) must leave room for. Machines here are noisy: read the best and the
median of R runs.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from receiver.analysis.compare import row_from_result  # noqa: E402
from receiver.analysis.growth import disagreement_by_distance  # noqa: E402
from receiver.analysis.loop_cost import loop_cost  # noqa: E402
from receiver.cli import main as podwatch  # noqa: E402
from receiver.formats.profile_set import edited_profile  # noqa: E402
from receiver.formats.profile_toml import load_profile  # noqa: E402
from receiver.formats.recording_writer import RecordingWriter  # noqa: E402
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


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--seconds", type=float, default=600.0)
    parser.add_argument("--rate", type=float, default=200.0)
    parser.add_argument("--repeat", type=int, default=7)
    args = parser.parse_args()

    profile = load_profile(PROFILE)
    n = int(args.seconds * args.rate)
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

    print(f"{n:,} samples ({columns.t[-1] - columns.t[0]:.0f} s at {args.rate:g} Hz), best and median of {args.repeat}:")
    for name, times in timings.items():
        print(f"  {name:34s} {_summary(times)}")
    print(f"  (b) podwatch recompute --set, {size_mb:.0f} MB file to CSV:")
    print(f"      in this process (main)         {_summary(in_process)}")
    print(f"      its own process                {_summary(own_process)}")
    ratio = min(own_process) / min(timings["(a) all of the above"])
    print(f"  (a) is {ratio:.0f}x faster than (b) in its own process")


if __name__ == "__main__":
    main()
