"""Regenerate the small replay fixtures from the simulated practice robot.

Run with `.venv/bin/python replay_fixtures/regenerate.py`. The output is
byte-for-byte reproducible: fixed seeds, a fixed creation time and receiver
clock, and gzip without a timestamp. Each fixture stays well under 300 KB.
"""

from __future__ import annotations

from pathlib import Path

from receiver.formats.profile_set import edited_profile
from receiver.formats.profile_toml import load_profile
from receiver.formats.recording_writer import RecordingWriter
from receiver.odometry.faults import parse_faults
from receiver.sim.simulate import simulate

HERE = Path(__file__).resolve().parent
CREATED = "2025-01-01T12:00:00+00:00"
WALL_START_S = 1735732800.0  # CREATED as seconds since the Unix epoch

# (file, profile, path, seconds, faults, simulate options)
FIXTURES = [
    ("practice-bot-square.jsonl", "practice-bot.toml", "square", 10.0, [], {}),
    (
        "practice-bot-figure-eight-reversed-right.jsonl.gz",
        "practice-bot.toml",
        "figure-eight",
        10.0,
        ["reversed:right"],
        {},
    ),
    ("practice-bot-metric-wander.jsonl.gz", "practice-bot-metric.toml", "wander", 10.0, [], {"imu": True}),
    (
        "practice-bot-packet-faults.jsonl.gz",
        "practice-bot.toml",
        "wander",
        10.0,
        ["drop:0.05", "reorder:0.02", "duplicate:0.01"],
        {"near_wrap": True},
    ),
    ("practice-bot-guided.jsonl.gz", "practice-bot.toml", "guided", 15.0, [], {}),
    # The drive of the reversed-right fixture after the fix in the robot code,
    # and the same drive recorded with a profile that has the forward wheels
    # 12.9 in apart instead of 12.5 (HEADER_SETTINGS): for `compare`.
    ("practice-bot-figure-eight.jsonl.gz", "practice-bot.toml", "figure-eight", 10.0, [], {}),
    ("practice-bot-figure-eight-wide-track.jsonl.gz", "practice-bot.toml", "figure-eight", 10.0, [], {}),
    # The guided check done carelessly: the forward push curves 30 degrees.
    ("practice-bot-guided-curving.jsonl.gz", "practice-bot.toml", "guided-curving", 15.0, [], {}),
    # Nearly symmetric side wheels and swapped encoders: the swap and its
    # near twin (both side offsets flipped) differ by 0.2 in of geometry.
    (
        "practice-bot-rebuilt-swapped.jsonl.gz",
        "practice-bot-rebuilt.toml",
        "wander",
        20.0,
        ["swapped:left,right"],
        {},
    ),
]
# Fixtures whose header declares a profile other than the simulated robot's:
# the `--set` settings that turn the robot's profile into the declared one.
HEADER_SETTINGS = {
    "practice-bot-figure-eight-wide-track.jsonl.gz": ("wheel.left.y=6.45", "wheel.right.y=-6.45"),
}


def header_profile(name: str, profile):
    """The profile a fixture's header declares: the simulated robot's, with HEADER_SETTINGS made."""
    return edited_profile(profile, HEADER_SETTINGS.get(name, ()), source=name)


def main() -> None:
    for name, profile_file, path, seconds, fault_specs, options in FIXTURES:
        profile = load_profile(HERE / profile_file)
        run = simulate(profile, path, 100.0, seconds, 1, parse_faults(fault_specs, profile), **options)
        out = HERE / name
        out.unlink(missing_ok=True)  # a recording is never overwritten in place: this is a fresh one
        with RecordingWriter(out, [header_profile(name, profile)], created=CREATED) as writer:
            writer.write(run.stamp_rx(WALL_START_S))
        print(f"{name}: {len(run.samples)} messages, {out.stat().st_size / 1024:.0f} KB")


if __name__ == "__main__":
    main()
