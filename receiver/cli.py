"""The `podwatch` command line: argument parsing and plain-text output only.

Every command exits non-zero with one line on bad input; no traceback is
shown for an error podwatch expected (a PodwatchError). The work itself
lives in the modules this calls.
"""

from __future__ import annotations

import argparse
import sys
import time
from typing import Sequence

import numpy as np

from receiver import __version__, csvtable
from receiver.cli_live import add_live_commands
from receiver.errors import PodwatchError, UsageError
from receiver.integrate import METHODS, wrap_angle
from receiver.paths import PATHS
from receiver.profile import Profile, load_profile
from receiver.recompute import Tracker
from receiver.recording import RecordingWriter, read_recording
from receiver.simulate import FAULT_SYNTAX, parse_faults, simulate

CSV_HEADER = (
    b"robot,seq,t,x,y,heading,reported_x,reported_y,reported_heading,position_error,heading_error,loop\n"
)


class ProgressLine:
    """A one-line progress display on stderr, shown only on a terminal."""

    def __init__(self, label: str, stream=sys.stderr, min_interval_s: float = 0.2) -> None:
        self.label = label
        self.stream = stream
        self.enabled = stream.isatty()
        self.min_interval_s = min_interval_s
        self._last = 0.0
        self._shown = False

    def __call__(self, done: int, total: int) -> None:
        now = time.monotonic()
        if not self.enabled or now - self._last < self.min_interval_s:
            return
        self._last = now
        self._shown = True
        percent = 100.0 * done / total if total else 100.0
        self.stream.write(f"\r{self.label}: {percent:5.1f}% of {total / 1e6:.1f} MB")
        self.stream.flush()

    def close(self) -> None:
        if self._shown:
            self.stream.write("\r\033[K")
            self.stream.flush()


def _warn(message: str) -> None:
    print(f"podwatch: warning: {message}", file=sys.stderr)


def _load_profiles(paths: Sequence[str] | None) -> dict[str, Profile]:
    profiles = {}
    for path in paths or ():
        profile = load_profile(path)
        profiles[profile.name] = profile
    return profiles


def cmd_recompute(args: argparse.Namespace) -> int:
    if args.method not in METHODS:
        raise UsageError(f"unknown method {args.method!r}, expected one of {', '.join(METHODS)}")
    cli_profiles = _load_profiles(args.profile)
    progress = ProgressLine(f"reading {args.recording}")
    try:
        data = read_recording(
            args.recording, {n: len(p.wheels) for n, p in cli_profiles.items()}, progress=progress
        )
    finally:
        progress.close()
    for warning in data.warnings:
        _warn(warning)
    profiles = {**data.profiles, **cli_profiles}
    missing = [robot for robot in data.robots if robot not in profiles]
    for robot in missing:
        _warn(f"robot {robot!r} has no profile (give one with --profile); its messages are not recomputed")
    if len(missing) == len(data.robots):
        raise UsageError(f"{args.recording}: no robot in it has a profile; give one with --profile")
    out = open(args.out, "wb") if args.out else sys.stdout.buffer
    try:
        out.write(CSV_HEADER)
        for robot, columns in data.robots.items():
            if robot in missing:
                continue
            profile = profiles[robot]
            result = Tracker(profile, args.method).feed(columns)
            csvtable.write(
                out,
                [
                    robot.encode(),
                    (result.seq, 0),
                    (result.t, 6),
                    (result.pose[:, 0], 6),
                    (result.pose[:, 1], 6),
                    (wrap_angle(result.pose[:, 2]), 6),
                    (result.reported[:, 0], 6),
                    (result.reported[:, 1], 6),
                    (wrap_angle(result.reported[:, 2]), 6),
                    (result.position_error, 6),
                    (result.heading_error, 6),
                    (result.loop_s, 6),
                ],
            )
            print(_summary(robot, profile, result), file=sys.stderr)
    finally:
        if args.out:
            out.close()
        else:
            out.flush()
    return 0


def _summary(robot: str, profile: Profile, result) -> str:
    pos, head = result.position_error, result.heading_error
    has = np.isfinite(pos)
    dropped = ", ".join(f"{k} {v}" for k, v in result.dropped.items() if v)
    text = f"{robot}: {len(result.seq)} samples"
    if dropped:
        text += f" ({dropped} ignored)"
    if has.any():
        last = np.flatnonzero(has)[-1]
        text += (
            f"; disagreement at end {pos[last]:.3f} {profile.distance_unit}, "
            f"{np.degrees(head[last]):.2f} deg; worst {np.nanmax(pos):.3f} {profile.distance_unit}"
        )
    else:
        text += "; the robot sent no pose to compare"
    return text


def cmd_simulate(args: argparse.Namespace) -> int:
    profile = load_profile(args.profile)
    faults = parse_faults(args.fault or (), profile)
    run = simulate(profile, args.path, args.rate, args.duration, args.seed, faults, args.near_wrap, args.imu)
    # The receiver's wall clock is synthetic: now, plus each message's arrival time.
    with RecordingWriter(args.out, [profile]) as writer:
        writer.write(run.stamp_rx(time.time()))
    print(
        f"{profile.name}: {run.path}, {len(run.t)} loops, {len(run.samples)} messages received -> {args.out}",
        file=sys.stderr,
    )
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="podwatch", description="Check a robot's tracking-wheel odometry against an independent recompute."
    )
    parser.add_argument("--version", action="version", version=f"podwatch {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("recompute", help="recording -> CSV of both poses and their disagreement")
    p.add_argument("recording", help="recording (.jsonl or .jsonl.gz), or a file of bare wire messages")
    p.add_argument("--profile", action="append", metavar="P", help="robot profile TOML (repeat for several robots)")
    p.add_argument("--method", default="arc", help="integration method: arc (default), midpoint or euler")
    p.add_argument("--out", metavar="CSV", help="write the CSV here instead of standard output")
    p.set_defaults(run=cmd_recompute)

    p = sub.add_parser("simulate", help="a simulated robot that writes a recording")
    p.add_argument("--profile", required=True, metavar="P", help="robot profile TOML of the simulated robot")
    p.add_argument("--path", default="square", choices=PATHS, help="what the robot drives (default square)")
    p.add_argument("--rate", type=float, default=100.0, metavar="HZ", help="robot loop rate (default 100)")
    p.add_argument("--duration", type=float, default=20.0, metavar="S", help="seconds to simulate (default 20)")
    p.add_argument("--seed", type=int, default=1, metavar="N", help="random seed (default 1)")
    p.add_argument(
        "--fault", action="append", metavar="NAME", help=f"a mistake to simulate, repeatable: {FAULT_SYNTAX}"
    )
    p.add_argument("--near-wrap", action="store_true", help="start counters and seq near their 32-bit wrap")
    p.add_argument("--imu", action="store_true", help="send IMU headings (always sent when the profile uses the IMU)")
    destination = p.add_mutually_exclusive_group(required=True)
    destination.add_argument("--out", metavar="FILE", help="write a recording (.jsonl, or .jsonl.gz for gzip)")
    p.set_defaults(run=cmd_simulate)

    add_live_commands(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.run(args)
    except PodwatchError as exc:
        print(f"podwatch: error: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        return 0
    except OSError as exc:
        print(f"podwatch: error: {exc.filename or ''}: {exc.strerror}", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
