"""What every command's output shares: warnings, status lines, loading the given profiles."""

from __future__ import annotations

import sys
from typing import Sequence

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


def counts_per_message(profiles: dict[str, Profile]) -> dict[str, int]:
    """How many encoder counts each profiled robot's messages carry: what the recording reader checks."""
    return {name: len(profile.wheels) for name, profile in profiles.items()}
