"""What every command's output shares: warnings, status lines, loading the given profiles and
editing them with ``--set``."""

from __future__ import annotations

import argparse
import sys
from typing import Sequence

from receiver.errors import UsageError
from receiver.formats.profile_set import edited_profile
from receiver.formats.profile_toml import load_profile
from receiver.odometry.robot import Profile


def warn(message: str) -> None:
    """One warning line on standard error."""
    print(f"podwatch: warning: {message}", file=sys.stderr)


def say(line: str) -> None:
    """One status line of a running command on standard output, flushed at once."""
    print(f"podwatch: {line}", flush=True)


def load_profiles(paths: Sequence[str] | None) -> dict[str, Profile]:
    """The profiles of the --profile options, by robot name."""
    return {profile.name: profile for profile in map(load_profile, paths or ())}


def profile_sources(paths: Sequence[str] | None) -> dict[str, str]:
    """The file each --profile option's robot came from, by robot name: what a corrected
    profile is written into, the user's comments and layout kept."""
    return {load_profile(path).name: path for path in paths or ()}


def add_set_option(parser: argparse.ArgumentParser) -> None:
    """The repeatable ``--set KEY=VALUE`` option (read by ``edit_profiles``)."""
    parser.add_argument(
        "--set", action="append", default=[], metavar="KEY=VALUE",
        help="change a profile value for this run, repeatable: wheel.right.reversed=true, wheel.0.x=-4.1, "
        "reported.heading_unit=deg, distance_unit=mm (converts lengths), imu.mode=heading, name=...",
    )


def edit_profiles(profiles: dict[str, Profile], settings: Sequence[str]) -> dict[str, Profile]:
    """Every profile in use with the ``--set`` settings made, by robot name (a ``name=``
    setting moves the profile to that robot, so it needs a single profile)."""
    if not settings:
        return profiles
    renames = any(setting.partition("=")[0].strip() == "name" for setting in settings)
    if renames and len(profiles) > 1:
        raise UsageError(f"--set name=... renames one profile, and {len(profiles)} are in use ({', '.join(profiles)})")
    # With several robots, an error says whose profile the setting did not fit.
    edited = [edited_profile(p, settings, "--set" if len(profiles) == 1 else f"--set ({p.name})") for p in profiles.values()]
    return {profile.name: profile for profile in edited}
