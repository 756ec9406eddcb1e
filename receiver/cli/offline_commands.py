"""The offline commands that work on files: ``recompute`` and ``simulate``.

Owns their options and plain-text output; the work is in receiver.odometry,
receiver.formats and receiver.sim. program.py registers these with
``add_offline_commands``.
"""

from __future__ import annotations

import argparse
import sys
import time
from collections import Counter
from itertools import chain

import numpy as np

from receiver.cli.common import add_set_option, edit_profiles, load_profiles, warn
from receiver.errors import UsageError
from receiver.formats import block_decoder, csv_writer
from receiver.formats.profile_toml import load_profile
from receiver.formats.recording import RecordingStream
from receiver.formats.recording_writer import RecordingWriter
from receiver.odometry.faults import FAULT_SYNTAX, parse_faults
from receiver.odometry.integrate import METHODS, wrap_angle
from receiver.odometry.recompute import Result, Tracker
from receiver.odometry.robot import Profile, counts_per_message, missing_profile_hint
from receiver.sim.motion_paths import PATHS
from receiver.sim.simulate import simulate

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
        """Erase the progress line, if one was shown; call before writing anything else to stderr."""
        if self._shown:
            self.stream.write("\r\033[K")
            self.stream.flush()


class _RobotTotals:
    """What the one-line summary of a recomputed robot needs, gathered piece by piece."""

    def __init__(self, robot: str, profile: Profile) -> None:
        self.robot, self.profile = robot, profile
        self.samples = 0
        self.dropped: Counter = Counter()
        self.last: tuple[float, float] | None = None
        self.worst = 0.0

    def add(self, result: Result) -> None:
        self.samples += len(result.seq)
        self.dropped.update(result.dropped)
        pos, head = result.position_error, result.heading_error
        has = np.flatnonzero(np.isfinite(pos))
        if len(has):
            self.last = (float(pos[has[-1]]), float(head[has[-1]]))
            self.worst = max(self.worst, float(pos[has].max()))

    def line(self) -> str:
        unit = self.profile.distance_unit
        text = f"{self.robot}: {self.samples} samples"
        dropped = ", ".join(f"{k} {v}" for k, v in self.dropped.items() if v)
        if dropped:
            text += f" ({dropped} ignored)"
        if self.last is None:
            return text + "; the robot sent no pose to compare"
        return (
            f"{text}; disagreement at end {self.last[0]:z.3f} {unit}, {np.degrees(self.last[1]):z.2f} deg; "
            f"worst {self.worst:.3f} {unit}"
        )


def _csv_columns(robot: str, result: Result) -> list:
    """The `recompute` CSV columns of DESIGN.md for one piece of one robot."""
    return [
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
    ]


def _write_with_signals(out, held: list[tuple[str, Result]]) -> None:
    """The CSV with a ``data.NAME`` column per signal after the contract columns (``--signals``):
    every name any robot sent, in order of first appearance; empty where a row lacks it."""
    names = list(dict.fromkeys(chain.from_iterable(result.signals for _, result in held)))
    out.write(CSV_HEADER[:-1] + b"".join(b",data." + name.encode() for name in names) + b"\n")
    for robot, result in held:
        absent = np.zeros(len(result.seq), dtype="S1")  # zero bytes: empty cells
        cells = [csv_writer.text_cells(result.signals[name]) if name in result.signals else absent for name in names]
        csv_writer.write(out, _csv_columns(robot, result) + cells)


def cmd_recompute(args: argparse.Namespace) -> int:
    """Stream the recording block by block: decode, recompute, write rows.

    A large file is decoded by two worker processes while this one
    recomputes and writes the rows: recomputing is sequential per robot, but
    cheap. Each robot's rows are in arrival order; with several robots their
    rows interleave block by block.
    """
    if args.method not in METHODS:
        raise UsageError(f"unknown method {args.method!r}, expected one of {', '.join(METHODS)}")
    cli_profiles = load_profiles(args.profile)
    progress = ProgressLine(f"reading {args.recording}")
    trackers: dict[str, Tracker | None] = {}
    totals: dict[str, _RobotTotals] = {}
    out = open(args.out, "wb") if args.out else sys.stdout.buffer
    lengths = counts_per_message(edit_profiles(cli_profiles, args.set))
    held: list[tuple[str, Result]] | None = [] if args.signals else None  # the signal names are known at the end
    try:
        with block_decoder.worker_pool(args.recording) as pool, RecordingStream(args.recording, lengths, progress, pool) as rec:
            profiles = edit_profiles({**rec.profiles, **cli_profiles}, args.set)
            if held is None:
                out.write(CSV_HEADER)
            for robot, columns in rec:
                if robot not in trackers:
                    profile = profiles.get(robot)
                    if profile is None:
                        hint = missing_profile_hint(robot, [n for n in cli_profiles if n not in trackers])
                        warn(f"robot {robot!r} has no profile ({hint}); its messages are not recomputed")
                    else:
                        totals[robot] = _RobotTotals(robot, profile)
                    trackers[robot] = Tracker(profile, args.method) if profile else None
                tracker = trackers[robot]
                if tracker is not None:
                    result = tracker.feed(columns)
                    if held is None:
                        csv_writer.write(out, _csv_columns(robot, result))
                    else:
                        held.append((robot, result))
                    totals[robot].add(result)
            if held is not None:
                _write_with_signals(out, held)
    finally:
        progress.close()
        if args.out:
            out.close()
        else:
            out.flush()
    for warning in rec.warnings:
        warn(warning)
    if not totals:
        heard = list(trackers)
        unused = [n for n in cli_profiles if n not in heard]
        hint = missing_profile_hint(heard[0], unused) if heard and unused else "give one with --profile"
        raise UsageError(f"{args.recording}: no robot in it has a profile; {hint}")
    for robot_totals in totals.values():
        print(robot_totals.line(), file=sys.stderr)
    return 0


def cmd_simulate(args: argparse.Namespace) -> int:
    """``podwatch simulate``: write a recording of a simulated robot (``--out``) or stream
    it in real time (``--to``).
    """
    profile = load_profile(args.profile)
    faults = parse_faults(args.fault or (), profile)
    run = simulate(profile, args.path, args.rate, args.duration, args.seed, faults, args.near_wrap, args.imu)
    if args.to:
        # Streams in real time, paced by each message's simulated arrival.
        print(f"{profile.name}: {run.path}, streaming {len(run.samples)} messages to {args.to} ...", file=sys.stderr)
        import asyncio

        from receiver.live.replay import send_paced  # the network stack, only when sending

        sent = asyncio.run(send_paced(run.samples, np.asarray(run.arrival_s), args.to, token=args.token))
        print(f"{profile.name}: sent {sent} messages to {args.to}", file=sys.stderr)
        return 0
    # The receiver's wall clock is synthetic: now, plus each message's arrival time.
    with RecordingWriter(args.out, [profile]) as writer:
        writer.write(run.stamp_rx(time.time()))
    print(
        f"{profile.name}: {run.path}, {len(run.t)} loops, {len(run.samples)} messages received -> {args.out}",
        file=sys.stderr,
    )
    return 0


def add_offline_commands(sub: argparse._SubParsersAction) -> None:
    """Register ``recompute`` and ``simulate``."""
    p = sub.add_parser("recompute", help="recording -> CSV of both poses and their disagreement")
    p.add_argument("recording", help="recording (.jsonl or .jsonl.gz), or a file of bare wire messages")
    p.add_argument("--profile", action="append", metavar="P", help="robot profile TOML (repeat for several robots)")
    p.add_argument("--method", default="arc", help="integration method: arc (default), midpoint or euler")
    p.add_argument("--out", metavar="CSV", help="write the CSV here instead of standard output")
    add_set_option(p)
    p.add_argument(
        "--signals", action="store_true",
        help="add a column data.NAME per signal the robots sent in \"data\" (holds the rows in memory until the end)",
    )
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
    destination.add_argument(
        "--to", metavar="URL", help="stream in real time instead: udp://HOST:PORT, ws://HOST:PORT or mqtt://HOST:PORT"
    )
    p.add_argument("--token", metavar="T", help="token for a ws:// receiver that requires one")
    p.set_defaults(run=cmd_simulate)
