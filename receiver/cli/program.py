"""The ``podwatch`` program: its parser and ``main``.

Every command exits non-zero with one line on bad input; no traceback is
shown for an error podwatch expected (a PodwatchError), nor for a system
error (a file, a port) it did not. The commands live in
offline_commands.py, check_commands.py, compare_command.py and live_commands.py.
"""

from __future__ import annotations

import argparse
import logging
import os
import sys
from typing import Sequence

from receiver import __version__
from receiver.cli.check_commands import add_check_commands
from receiver.cli.compare_command import add_compare_command
from receiver.cli.live_commands import add_live_commands
from receiver.cli.offline_commands import add_offline_commands
from receiver.cli.profile_commands import add_profile_commands
from receiver.errors import PodwatchError

DEBUG_ENV = "PODWATCH_DEBUG"


def build_parser() -> argparse.ArgumentParser:
    """The ``podwatch`` argument parser with every command; each command sets ``args.run``."""
    parser = argparse.ArgumentParser(
        prog="podwatch", description="Check a robot's tracking-wheel odometry against an independent recompute."
    )
    parser.add_argument("--version", action="version", version=f"podwatch {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    add_offline_commands(sub)
    add_check_commands(sub)
    add_compare_command(sub)
    add_live_commands(sub)
    add_profile_commands(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command line (``sys.argv[1:]`` when None) and return the exit status: 1 with
    one error line for a PodwatchError or a system error.
    """
    parser = build_parser()
    args = parser.parse_args(argv)
    # Log lines of the receiver, the senders and their libraries read like the rest.
    logging.basicConfig(format="podwatch: %(message)s", level=logging.WARNING, stream=sys.stderr)
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
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"podwatch: error: {where}{exc.strerror or exc}", file=sys.stderr)
        return 1
    except Exception as exc:  # our own bug: one line for the user, the traceback on request
        if os.environ.get(DEBUG_ENV):
            raise
        print(f"podwatch: error: internal error ({type(exc).__name__}: {exc}); this is a bug in podwatch: "
              f"please report it (set {DEBUG_ENV}=1 to see where it happened)", file=sys.stderr)
        return 70  # EX_SOFTWARE, sysexits.h

