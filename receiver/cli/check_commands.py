"""The checking commands: ``diagnose`` (with ``--guided``) and ``calibrate``.

Owns their options, which robots of a recording they run on, and their
plain-text and JSON output; the work is in diagnose.py, guided.py and
calibrate.py. program.py registers these with ``add_check_commands``.
"""

from __future__ import annotations

import argparse
import json
import math
import sys

import numpy as np

from receiver.analysis.calibrate import Calibration, push_calibration, spin_calibration
from receiver.analysis.diagnose import Diagnosis, diagnose
from receiver.analysis.guided_check import GuidedResult, guided_check
from receiver.analysis.mistakes import profile_changes
from receiver.analysis.sample_clip import clip_from_columns, last_seconds
from receiver.analysis.wording import (
    CHECK_MARK,
    TOP_HYPOTHESES,
    after_fit,
    change_lines,
    clip_line,
    confidence_words,
    explanation_id,
    guided_outcome,
    integration_words,
    small,
)
from receiver.cli.common import add_set_option, edit_profiles, load_profiles, profile_sources, warn
from receiver.errors import UsageError
from receiver.formats.profile_writer import write_profile_file
from receiver.formats.recording import read_recording
from receiver.odometry.columns import Columns
from receiver.odometry.robot import Profile, counts_per_message, missing_profile_hint


def _robots(args: argparse.Namespace, one: bool) -> list[tuple[str, Columns, Profile]]:
    """(robot, columns, profile) for each robot to check; ``one`` insists on a single robot."""
    cli_profiles = load_profiles(args.profile)
    data = read_recording(args.recording, counts_per_message(edit_profiles(cli_profiles, args.set)))
    for warning in data.warnings:
        warn(warning)
    profiles = edit_profiles({**data.profiles, **cli_profiles}, args.set)
    if args.robot is not None:
        if args.robot not in data.robots:
            raise UsageError(f"{args.recording}: no robot {args.robot!r} in it (it has {', '.join(sorted(data.robots))})")
        names = [args.robot]
    else:
        names = list(data.robots)
    if (one or args.write_profile) and len(names) > 1:
        raise UsageError(f"{args.recording} holds several robots ({', '.join(names)}): choose one with --robot")
    unused = [given for given in cli_profiles if given not in data.robots]
    chosen = []
    for name in names:
        if name not in profiles:
            if len(names) == 1:
                raise UsageError(f"robot {name!r} has no profile: {missing_profile_hint(name, unused)}")
            warn(f"robot {name!r} has no profile ({missing_profile_hint(name, unused)}); skipped")
            continue
        cols = data.robots[name]
        if getattr(args, "last", None) is not None:
            cols = last_seconds(cols, args.last)
        chosen.append((name, cols, profiles[name]))
    if not chosen:
        raise UsageError(f"{args.recording}: no robot in it has a profile; give one with --profile")
    return chosen


def _write(args: argparse.Namespace, before: Profile, after: Profile) -> None:
    """Write the corrected profile: into the text of the user's --profile file for this robot
    (only the changed values change), or as a clean commented file for a recording's profile."""
    if not args.write_profile:
        return
    if after == before:
        warn("nothing to change: the profile is written as it was")
    source = profile_sources(args.profile).get(before.name)
    write_profile_file(args.write_profile, after, source)
    kept = f" (changes written into a copy of {source})" if source else " (from the recording's profile)"
    print(f"podwatch: wrote {args.write_profile}{kept}", file=sys.stderr)


def _diagnosis_text(diagnosis: Diagnosis) -> list[str]:
    unit = diagnosis.profile.distance_unit
    fit = diagnosis.fit
    lines = [
        clip_line(diagnosis),
        f"verdict: {diagnosis.verdict}",
        f"confidence: {confidence_words(diagnosis)}",
        f"integration: {integration_words(diagnosis)}",
        f"  {'#':>2}  {'explanation':44s} {'position RMS':>14s} {'heading RMS':>12s} {'score':>10s} {'after fit':>10s}",
    ]
    for k, ranked in enumerate(diagnosis.ranking[:TOP_HYPOTHESES], 1):
        lines.append(
            f"  {k:>2}  {explanation_id(ranked):44s} {ranked.position_rms:11.3f} {unit:2s} "
            f"{math.degrees(ranked.heading_rms):8.2f} deg {ranked.score:10.3f} {after_fit(ranked):>10s}"
        )
    lines.append(
        f"fitted constants (what the robot code uses; the profile's first), RMS {small(fit.score_before, 3)} -> "
        f"{small(fit.score_after, 3)} {unit}:"
    )
    for fitted in fit.values:
        how = f"+-{small(fitted.std)}" if fitted.determined else "not determined by this clip"
        applied = "  (changed)" if fitted.significant else ""
        lines.append(f"  {fitted.name:30s} {fitted.before:10.4f} -> {fitted.fitted:10.4f} {fitted.unit} {how}{applied}")
    lines += change_lines(diagnosis.changes)
    lines += [f"note: {note}" for note in diagnosis.notes]
    return lines


def _guided_text(guided: GuidedResult) -> list[str]:
    lines = [f"{guided.robot}: guided check (forward push, left push, counter-clockwise turn)"]
    for step in ("forward", "left", "turn", "overall"):
        lines.append(f"  {step}:")
        lines += [
            f"    {CHECK_MARK[check.ok]}  {check.subject:26s} {check.detail}"
            for check in guided.checks
            if check.step == step
        ]
    lines.append(f"result: {guided_outcome(guided)}")
    return lines + change_lines(profile_changes(guided.profile, guided.corrected), say_none=False)


def cmd_diagnose(args: argparse.Namespace) -> int:
    """``podwatch diagnose``: diagnose (with ``--guided``, guided-check) each chosen robot;
    prints text or one JSON object and returns the exit status.
    """
    results: list[dict] = []
    for robot, cols, profile in _robots(args, one=False):
        if args.guided:
            guided = guided_check(clip_from_columns(cols), profile, robot)
            changes = profile_changes(profile, guided.corrected)
            results.append({"check": "guided", **guided.to_json(), "profile_changes": changes})
            text, corrected = _guided_text(guided), guided.corrected
        else:
            diagnosis = diagnose(cols, profile, robot)
            results.append({"check": "diagnose", **diagnosis.to_json(TOP_HYPOTHESES)})
            text, corrected = _diagnosis_text(diagnosis), diagnosis.corrected
        if not args.json:
            print("\n".join(text))
        _write(args, profile, corrected)
    if args.json:
        print(json.dumps({"recording": args.recording, "robots": results}))
    return 0


def cmd_calibrate(args: argparse.Namespace) -> int:
    """``podwatch calibrate``: one spin or push test on one robot; prints the table (or
    JSON) and returns the exit status.
    """
    if sum([args.spin_turns is not None, args.spin_imu, args.push_distance is not None]) != 1:
        raise UsageError("choose one test: --spin-turns N, --spin-imu, or --push-distance D with --push-axis x|y")
    if (args.push_distance is None) != (args.push_axis is None):
        raise UsageError("--push-distance and --push-axis go together")
    [(robot, cols, profile)] = _robots(args, one=True)
    clip = clip_from_columns(cols)
    if args.push_distance is not None:
        cal: Calibration = push_calibration(clip, profile, args.push_distance, args.push_axis, robot)
    else:
        cal = spin_calibration(clip, profile, args.spin_turns, robot)
    changes = profile_changes(profile, cal.corrected)
    if args.json:
        print(json.dumps({"recording": args.recording, **cal.to_json(), "profile_changes": changes}))
    else:
        lines = [f"{robot}: {cal.test} test, {len(clip)} samples over {clip.duration_s:.1f} s", *cal.table()]
        lines += change_lines(changes)
        lines += [f"warning: {warning}" for warning in cal.warnings]
        lines += [f"note: {note}" for note in cal.notes]
        print("\n".join(lines))
    _write(args, profile, cal.corrected)
    return 0


def _positive(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not (value > 0 and np.isfinite(value)):
        raise argparse.ArgumentTypeError(f"expected a positive number, got {text!r}")
    return value


def _common(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("recording", help="recording (.jsonl or .jsonl.gz), or a file of bare wire messages")
    parser.add_argument(
        "--profile", action="append", metavar="P", help="robot profile TOML (repeat for several robots)"
    )
    parser.add_argument("--robot", metavar="NAME", help="check only this robot of the recording")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    parser.add_argument("--write-profile", metavar="FILE", help="write the corrected profile here (TOML)")
    add_set_option(parser)


def add_check_commands(sub: argparse._SubParsersAction) -> None:
    """Register ``diagnose`` and ``calibrate`` on the program's subparsers."""
    p = sub.add_parser("diagnose", help="explain a disagreement as convention mistakes (or --guided: the hand-push check)")
    _common(p)
    p.add_argument("--last", type=_positive, metavar="S", help="only the last S seconds of the recording")
    p.add_argument(
        "--guided", action="store_true",
        help="the guided check instead: a recording of pushing the robot forward >= 12 in, left >= 12 in, "
        "then turning it counter-clockwise >= 90 degrees",
    )
    p.set_defaults(run=cmd_diagnose)

    p = sub.add_parser("calibrate", help="geometry from a spin test or a push test")
    _common(p)
    p.add_argument("--spin-turns", type=_positive, metavar="N", help="spin test: N whole turns in place")
    p.add_argument("--spin-imu", action="store_true", help="spin test: take the turn from the IMU heading")
    p.add_argument("--push-distance", type=_positive, metavar="D", help="push test: pushed D (profile's unit) in a straight line")
    p.add_argument("--push-axis", choices=("x", "y"), help="push test: x (forward) or y (left)")
    p.set_defaults(run=cmd_calibrate)
