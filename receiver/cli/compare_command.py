"""``podwatch compare``: several recordings of the same robot side by side, one row each.

Owns the command's options, which robots of each recording get a row, and
the plain-text table and JSON object; it never computes a number itself
(the rows are analysis/compare.py's).
program.py registers it with ``add_compare_command``.
"""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

from receiver.analysis.compare import GROWTH_MINIMUMS, RunRow, profile_differences, run_row
from receiver.cli.common import add_set_option, edit_profiles, load_profiles, warn
from receiver.cli.offline_commands import ProgressLine
from receiver.errors import UsageError
from receiver.formats.recording import read_recording
from receiver.odometry.profile_edit import profile_values, show_value
from receiver.odometry.robot import counts_per_message

_NONE = "-"


def _figure(value: float, significant: int = 3, most_decimals: int = 3) -> str:
    """``value`` to about ``significant`` digits without an exponent, or "-" when unknown."""
    if not math.isfinite(value):
        return _NONE
    size = math.floor(math.log10(abs(value))) if value else 0
    decimals = min(most_decimals, max(0, significant - 1 - size))
    return f"{round(value, decimals) + 0.0:.{decimals}f}"


def _signed(value: float, significant: int = 3, most_decimals: int = 2) -> str:
    """``_figure`` with its sign always shown."""
    text = _figure(value, significant, most_decimals)
    return text if text == _NONE or text.startswith("-") else "+" + text


def _cells(number: int, row: RunRow, label: str) -> list[str]:
    unit, g = row.profile.distance_unit, row.growth
    return [
        str(number),
        f"{row.duration_s:.1f} s",
        f"{row.distance:.1f} {unit}",
        f"{row.turns:.2f}",
        f"{_figure(row.final_position, 4)} {unit}",
        f"{_signed(row.final_heading_deg)} deg",
        f"{_figure(row.worst_position, 4)} {unit}",
        f"{_figure(row.worst_heading_deg, 4, 2)} deg",
        f"{_figure(g.position_per_m)} {unit}/m",
        f"{_signed(g.heading_per_turn_deg)} deg/turn",
        f"{_figure(row.loop_mean_s * 1000.0, 3, 1)} ms",
        f"{_figure(row.loop_p95_s * 1000.0, 3, 1)} ms",
        label,
    ]


_HEADER = ["#", "time", "driven", "turns", "final", "final heading", "worst", "worst heading", "growth",
           "heading growth", "loop mean", "loop p95", "recording"]


def _table(rows: list[list[str]], left: tuple[int, ...] = ()) -> list[str]:
    """Columns aligned to their widest cell: right-aligned, but those in ``left``."""
    widths = [max(len(row[k]) for row in rows) for k in range(len(rows[0]))]
    return [
        "  ".join(cell.ljust(w) if k in left else cell.rjust(w) for k, (cell, w) in enumerate(zip(row, widths))).rstrip()
        for row in rows
    ]


def _rows(args: argparse.Namespace) -> list[tuple[str, str, RunRow]]:
    """(recording path, label, row) for every robot of every recording that gets a row."""
    cli_profiles = load_profiles(args.profile)
    lengths = counts_per_message(edit_profiles(cli_profiles, args.set))
    found = []
    for path in args.recordings:
        progress = ProgressLine(f"reading {path}")
        try:
            data = read_recording(path, lengths, progress)
        finally:
            progress.close()
        for warning in data.warnings:
            warn(warning)
        profiles = edit_profiles({**data.profiles, **cli_profiles}, args.set)
        robots = [args.robot] if args.robot else list(data.robots)
        for robot in robots:
            if robot not in data.robots:
                warn(f"{path}: no robot {robot!r} in it; skipped")
            elif robot not in profiles:
                warn(f"{path}: robot {robot!r} has no profile (give one with --profile); skipped")
            else:
                label = Path(path).name + (f" ({robot})" if len(data.robots) > 1 else "")
                found.append((path, label, run_row(data.robots[robot], profiles[robot], robot)))
    if not found:
        raise UsageError("no recording holds a robot with a profile to compare; give one with --profile")
    return found


def cmd_compare(args: argparse.Namespace) -> int:
    """``podwatch compare``: one row per recording and robot, then the profile values that differ."""
    rows = _rows(args)
    differences = profile_differences([row for _, _, row in rows])
    if args.json:
        print(json.dumps({
            "rows": [
                {"recording": path, **row.to_json(), "profile": profile_values(row.profile)}
                for path, _, row in rows
            ],
            "profile_differences": differences,
            "growth_minimums": GROWTH_MINIMUMS,
        }))
        return 0
    lines = _table([_HEADER, *(_cells(k, row, label) for k, (_, label, row) in enumerate(rows, 1))], left=(12,))
    lines.append(
        f"growth: change of the disagreement per metre driven and per turn since the last re-anchor "
        f"({_NONE} under {GROWTH_MINIMUMS['min_travel_m']:g} m or {GROWTH_MINIMUMS['min_turns']:g} turn)"
    )
    if not differences:
        lines.append("profile values that differ: none")
    else:
        lines.append("profile values that differ:")
        table = [["", *(f"#{k}" for k in range(1, len(rows) + 1))]]
        table += [[key, *(_NONE if v is None else show_value(v) for v in values)] for key, values in differences.items()]
        lines += ["  " + line for line in _table(table, left=(0,))]
    print("\n".join(lines))
    return 0


def add_compare_command(sub: argparse._SubParsersAction) -> None:
    """Register ``compare`` on the program's subparsers."""
    p = sub.add_parser("compare", help="recordings of the same robot side by side: disagreement, growth, loop, profile")
    p.add_argument("recordings", nargs="+", metavar="REC", help="recordings (.jsonl or .jsonl.gz), in the order to show")
    p.add_argument("--profile", action="append", metavar="P", help="robot profile TOML for every recording (repeatable)")
    p.add_argument("--robot", metavar="NAME", help="only this robot of each recording")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    add_set_option(p)
    p.set_defaults(run=cmd_compare)
