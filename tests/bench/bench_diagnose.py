"""Benchmark of `diagnose`: a 20 s clip at 200 Hz, every hypothesis plus the refinement.

    .venv/bin/python tests/bench/bench_diagnose.py [--seconds S] [--rate HZ] [--repeat R]

Times ``receiver.analysis.diagnose.diagnose`` on a simulated wander with a
reversed wheel, wheel slip and packet faults: cold (the per-profile
hypothesis set, equivalence groups and near-twin moves rebuilt, as on a
first call) and warm. Beside it, the plain way of scoring the same
hypotheses: one streaming Tracker per hypothesis. Issue 12 asks for under
0.5 s (the leaders' fits, the integration found from the clip and the
judgement included). Machines here are noisy: read the best of R runs, and
run another tree's copy of this script alternately for a ratio.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from receiver.analysis.diagnose import diagnose, equivalence_classes  # noqa: E402
from receiver.analysis import scoring, twins  # noqa: E402
from receiver.analysis.mistakes import hypotheses  # noqa: E402
from receiver.formats.profile_toml import load_profile  # noqa: E402
from receiver.odometry.columns import columns_from_samples  # noqa: E402
from receiver.odometry.faults import parse_faults
from receiver.odometry.recompute import Tracker
from receiver.sim.simulate import simulate  # noqa: E402

PROFILE = ROOT / "replay_fixtures" / "practice-bot.toml"
FAULTS = ["reversed:right", "slip:0.02", "drop:0.02", "reorder:0.01", "duplicate:0.01"]


def _best(run, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=20.0)
    parser.add_argument("--rate", type=float, default=200.0)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()

    profile = load_profile(PROFILE)
    sim = simulate(profile, "wander", args.rate, args.seconds, 1, parse_faults(FAULTS, profile))
    cols = columns_from_samples(sim.samples, len(profile.wheels))
    n_hyp = len(hypotheses(profile))

    def cold() -> None:
        hypotheses.cache_clear()
        equivalence_classes.cache_clear()
        twins.move_predictions.cache_clear()
        scoring._solve_stack.cache_clear()
        diagnose(cols, profile)

    def per_hypothesis_trackers() -> None:
        for h in hypotheses(profile):
            result = Tracker(h.robot_profile).feed(cols)
            np.sqrt(np.nanmean(result.position_error**2))

    verdict = diagnose(cols, profile).verdict
    cold_s = _best(cold, args.repeat)
    warm_s = _best(lambda: diagnose(cols, profile), args.repeat)
    plain_s = _best(per_hypothesis_trackers, args.repeat)
    print(f"clip: {len(cols)} messages ({args.seconds:g} s at {args.rate:g} Hz), {n_hyp} hypotheses; verdict: {verdict}")
    print(f"diagnose, cold (hypotheses and equivalence groups built): {cold_s * 1e3:8.1f} ms  (best of {args.repeat})")
    print(f"diagnose, warm:                                           {warm_s * 1e3:8.1f} ms")
    print(f"baseline, scoring only, one Tracker per hypothesis:       {plain_s * 1e3:8.1f} ms")
    print(f"issue 12 target: under 500 ms -> {'met' if cold_s < 0.5 else 'NOT met'}")


if __name__ == "__main__":
    main()
