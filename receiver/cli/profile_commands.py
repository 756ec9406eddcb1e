"""The ``profile`` command: ``profile new`` writes a commented starter profile.

Owns the options and where the text goes (a new file, never over an
existing one, or standard output); the layouts and their words are in
receiver/formats/starter_profiles.py. program.py registers it with
``add_profile_commands``.
"""

from __future__ import annotations

import argparse
import sys

from receiver.errors import UsageError
from receiver.formats.starter_profiles import LAYOUTS, UNITS, starter_text


def cmd_profile_new(args: argparse.Namespace) -> int:
    """``podwatch profile new``: the starter profile of a layout, to ``--out`` (created, never
    replaced) or standard output."""
    text = starter_text(args.layout, args.unit, args.name)
    if args.out is None:
        sys.stdout.write(text)
        return 0
    try:
        with open(args.out, "x", encoding="utf-8") as out:
            out.write(text)
    except FileExistsError:
        raise UsageError(f"{args.out}: already exists; podwatch never writes over a profile (choose another --out)") from None
    print(f"podwatch: wrote {args.out}: measure the robot and replace the placeholders", file=sys.stderr)
    return 0


def add_profile_commands(sub: argparse._SubParsersAction) -> None:
    """Register ``profile new``."""
    p = sub.add_parser("profile", help="robot profiles: profile new writes a commented starter")
    actions = p.add_subparsers(dest="action", required=True, metavar="ACTION")
    new = actions.add_parser("new", help="write a commented starter profile for a common drive")
    new.add_argument("--layout", required=True, choices=LAYOUTS, help="which drive and encoders")
    new.add_argument("--unit", default="in", choices=UNITS, help="length unit of the profile (default in)")
    new.add_argument("--name", default="my-robot", help='the "robot" name its messages carry (default my-robot)')
    new.add_argument("--out", metavar="FILE", help="write here (a new file) instead of standard output")
    new.set_defaults(run=cmd_profile_new)
