"""Benchmarks of the pose engine, each side by side with a plain baseline in one run.

    .venv/bin/python tests/bench/bench_engine.py [--messages N] [--repeat R]

1. Integration: vectorised ``integrate(..., "arc")`` against per-sample
   Python loops doing one arc step per sample with the math module: the
   straightforward one iterates the array's rows, the tuned one first turns
   the array into Python floats (``tolist``).
2. `podwatch recompute` of an N-message recording (default 1,000,000, CSV
   written) against reading the same file with the standard json module and
   recomputing with a per-sample Python loop (no CSV). Each contender runs in
   its own process, so peak memory (max RSS) is its own.
Machines here are noisy: read the ratios, and the best of R runs.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from receiver.formats.profile_toml import load_profile, profile_to_table  # noqa: E402
from receiver.odometry.integrate import integrate  # noqa: E402
from receiver.odometry.kinematics import Kinematics  # noqa: E402
from tests.bench.plain_baseline import loop_arc  # noqa: E402

PROFILE = ROOT / "replay_fixtures" / "practice-bot.toml"


def bench_integration(n: int, repeat: int) -> dict:
    rng = np.random.default_rng(1)
    deltas = np.column_stack([rng.normal(0.2, 0.05, n), rng.normal(0, 0.05, n), rng.normal(0, 0.01, n)])
    plain_s = min(_timed(lambda: loop_arc(deltas)) for _ in range(repeat))
    tuned_s = min(_timed(lambda: loop_arc(deltas.tolist())) for _ in range(repeat))
    vec_s = min(_timed(lambda: integrate(deltas, np.zeros(3), "arc")) for _ in range(repeat))
    final_loop = loop_arc(deltas.tolist())
    final_vec = integrate(deltas, np.zeros(3), "arc")[-1]
    assert np.allclose(final_loop, final_vec, atol=1e-6), (final_loop, final_vec)
    return {
        "samples": n,
        "plain_per_s": n / plain_s,
        "tuned_per_s": n / tuned_s,
        "vectorised_per_s": n / vec_s,
        "ratio_plain": plain_s / vec_s,
        "ratio_tuned": tuned_s / vec_s,
    }


def _timed(fn) -> float:
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def write_big_recording(path: Path, n: int) -> None:
    """N messages of the practice robot driving a wandering path at 200 Hz."""
    profile = load_profile(PROFILE)
    kin = Kinematics(profile)
    t = np.arange(n) * 0.005
    twist = np.column_stack([18 + 6 * np.sin(0.9 * t), 5 * np.sin(1.7 * t), 1.2 * np.sin(0.6 * t)]) * 0.005
    counts = np.rint(np.cumsum(kin.wheel_travel(twist), axis=0) / kin.travel_per_count).astype(np.int64)
    poses = integrate(twist, np.zeros(3), "arc")
    header = {"recording": 1, "created": "2026-12-02T10:00:00+00:00", "profiles": {profile.name: profile_to_table(profile)}}
    with open(path, "w") as fh:
        fh.write(json.dumps(header) + "\n")
        for k in range(n):
            c, p = counts[k], poses[k]
            fh.write(
                f'{{"v":1,"robot":"practice-bot","seq":{k},"t":{t[k]:.6f},"ticks":[{c[0]},{c[1]},{c[2]}],'
                f'"pose":[{p[0]:.6f},{p[1]:.6f},{p[2]:.6f}],"loop":0.005,"rx":{1.79e9 + t[k]:.6f}}}\n'
            )


def _run_measured(cmd: list[str]) -> tuple[float, float, str]:
    """(seconds, peak RSS in MB, stdout) of a command in its own process."""
    code = (
        "import resource, subprocess, sys, time\n"
        "s = time.perf_counter()\n"
        "r = subprocess.run(sys.argv[1:], capture_output=True, text=True)\n"
        "e = time.perf_counter() - s\n"
        "assert r.returncode == 0, r.stderr\n"
        "print(e, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0)\n"
        "print(r.stdout, end='')\n"
    )
    out = subprocess.run([sys.executable, "-c", code, *cmd], capture_output=True, text=True, check=True).stdout
    first, _, rest = out.partition("\n")
    seconds, rss = map(float, first.split())
    return seconds, rss, rest


def bench_recompute(n: int, repeat: int) -> dict:
    profile = load_profile(PROFILE)
    w = {wh.name: wh for wh in profile.wheels}
    with tempfile.TemporaryDirectory() as tmp:
        rec = Path(tmp) / "big.jsonl"
        print(f"writing a {n:,}-message recording ...", file=sys.stderr)
        write_big_recording(rec, n)
        size_mb = rec.stat().st_size / 1e6
        podwatch = [sys.executable, "-m", "receiver.cli", "recompute", str(rec), "--out", str(Path(tmp) / "out.csv")]
        baseline = [
            sys.executable, str(Path(__file__).with_name("plain_baseline.py")), str(rec),
            str(w["left"].y), str(w["right"].y), str(w["back"].x), str(w["left"].travel_per_count),
        ]
        results = {"ours": [], "baseline": []}
        for i in range(repeat):
            print(f"run {i + 1}/{repeat} ...", file=sys.stderr)
            results["baseline"].append(_run_measured(baseline)[:2])
            results["ours"].append(_run_measured(podwatch)[:2])
        rows = sum(1 for _ in open(Path(tmp) / "out.csv")) - 1
        assert rows == n, rows
    best = {k: min(v) for k, v in results.items()}
    return {
        "messages": n,
        "file_mb": size_mb,
        "ours_s": best["ours"][0],
        "ours_peak_mb": max(r[1] for r in results["ours"]),
        "baseline_s": best["baseline"][0],
        "baseline_peak_mb": max(r[1] for r in results["baseline"]),
        "ratio": best["baseline"][0] / best["ours"][0],
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--messages", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    os.chdir(ROOT)
    integ = bench_integration(args.messages, args.repeat)
    print(f"integration of {integ['samples']:,} samples (arc), best of {args.repeat}:")
    print(f"  Python loop over the array rows   {integ['plain_per_s']:>14,.0f} samples/s")
    print(f"  Python loop over Python floats    {integ['tuned_per_s']:>14,.0f} samples/s")
    print(
        f"  vectorised (podwatch)             {integ['vectorised_per_s']:>14,.0f} samples/s"
        f"   {integ['ratio_plain']:.0f}x / {integ['ratio_tuned']:.0f}x"
    )
    rec = bench_recompute(args.messages, args.repeat)
    print(f"recompute of {rec['messages']:,} messages ({rec['file_mb']:.0f} MB), best of {args.repeat}:")
    print(f"  json + per-sample loop   {rec['baseline_s']:>8.2f} s   peak {rec['baseline_peak_mb']:>6.0f} MB (no CSV)")
    print(f"  podwatch recompute       {rec['ours_s']:>8.2f} s   peak {rec['ours_peak_mb']:>6.0f} MB (CSV written)   {rec['ratio']:.1f}x")
    print(f"peak RSS of this process: {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")


if __name__ == "__main__":
    main()
