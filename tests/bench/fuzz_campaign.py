"""A long fuzzing campaign of the wire decoder, the profile loader and the recording reader.

    .venv/bin/python tests/bench/fuzz_campaign.py [--minutes 3] [--only decoder,profile,recording] [--seed N]

Runs the checks of tests/fuzz_inputs.py (the same the test suite runs on 150
derandomized inputs each) on fresh hypothesis inputs, in turns, until the
time is up, with a progress line on standard error. An input fails when its
check raises anything: an AssertionError (a rule broken) or any other
exception (a traceback a user would see). Failures do not stop the campaign:
each is counted under its kind and where it was raised, with the first input
that showed it. The summary gives inputs tried and failing per boundary;
the exit status is 1 when any input failed.
"""

from __future__ import annotations

import argparse
import sys
import time
import traceback
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from hypothesis import HealthCheck, Phase, given, seed, settings  # noqa: E402

from tests.fuzz_inputs import (  # noqa: E402
    check_datagram,
    check_profile_text,
    check_recording_bytes,
    datagrams,
    profile_texts,
    recordings,
)

TARGETS = {
    "decoder": (datagrams(), check_datagram),
    "profile": (profile_texts(), check_profile_text),
    "recording": (recordings(), lambda recording: check_recording_bytes(*recording)),
}
ROUND_EXAMPLES = 500  # inputs per turn of one boundary


class Tally:
    """Inputs tried and failing for one boundary, failures by kind with a first example."""

    def __init__(self) -> None:
        self.tried = 0
        self.failing = 0
        self.kinds: Counter = Counter()
        self.examples: dict[str, str] = {}

    def record(self, value: object, exc: BaseException) -> None:
        self.failing += 1
        where = traceback.extract_tb(exc.__traceback__)[-1]
        kind = f"{type(exc).__name__} at {Path(where.filename).name}:{where.lineno}"
        self.kinds[kind] += 1
        self.examples.setdefault(kind, f"{str(exc).splitlines()[0][:160] if str(exc) else ''} | input {value!r:.200}")


def one_turn(name: str, tally: Tally, turn_seed: int, deadline: float) -> None:
    strategy, check = TARGETS[name]

    @seed(turn_seed)
    @settings(max_examples=ROUND_EXAMPLES, database=None, deadline=None, phases=[Phase.generate],
              suppress_health_check=list(HealthCheck))
    @given(strategy)
    def run(value) -> None:
        if time.monotonic() > deadline:
            return
        tally.tried += 1
        try:
            check(value)
        except Exception as exc:  # every failure is counted, none stops the campaign
            tally.record(value, exc)

    run()


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--minutes", type=float, default=3.0)
    parser.add_argument("--only", default=",".join(TARGETS), help="boundaries, comma-separated")
    parser.add_argument("--seed", type=int, default=int(time.time()), help="first hypothesis seed (default: the clock)")
    args = parser.parse_args()
    names = [n for n in args.only.split(",") if n]
    unknown = set(names) - set(TARGETS)
    if unknown:
        parser.error(f"unknown boundary {', '.join(sorted(unknown))}; choose from {', '.join(TARGETS)}")
    tallies = {name: Tally() for name in names}
    start = time.monotonic()
    deadline = start + 60.0 * args.minutes
    turn = 0
    print(f"fuzzing {', '.join(names)} for {args.minutes:g} min, seeds from {args.seed}", file=sys.stderr)
    while time.monotonic() < deadline:
        name = names[turn % len(names)]
        one_turn(name, tallies[name], args.seed + turn, deadline)
        turn += 1
        left = deadline - time.monotonic()
        line = "  ".join(f"{n} {t.tried:,} ({t.failing:,} failing)" for n, t in tallies.items())
        sys.stderr.write(f"\r{line}  {max(left, 0):4.0f} s left ")
        sys.stderr.flush()
    sys.stderr.write("\n")
    elapsed = time.monotonic() - start
    print(f"{elapsed:.0f} s, seeds {args.seed} to {args.seed + turn - 1}")
    print(f"{'boundary':<10} {'inputs':>10} {'failing':>8}")
    for name, tally in tallies.items():
        print(f"{name:<10} {tally.tried:>10,} {tally.failing:>8,}")
        for kind, count in tally.kinds.most_common():
            print(f"    {count:>7,}  {kind}: {tally.examples[kind]}")
    return 1 if any(t.failing for t in tallies.values()) else 0


if __name__ == "__main__":
    sys.exit(main())
