"""Tests for receiver/formats/profile_writer.py: a profile written back as the user wrote it.

The loader (receiver/formats/profile_toml.py) reads every written file
back; the user's own file is compared line by line, byte for byte.
"""

from __future__ import annotations

import tomllib
from dataclasses import replace
from pathlib import Path

import pytest

from receiver.errors import ProfileError
from receiver.formats.profile_toml import load_profile, profile_from_table
from receiver.formats.profile_writer import profile_text, write_profile_file, write_profile_preserving
from tests.conftest import FIXTURES

SOURCE = FIXTURES / "practice-bot.toml"
PRACTICE = load_profile(SOURCE)
W = PRACTICE.wheels


def _changed_lines(before: str, after: str) -> list[tuple[str, str]]:
    a, b = before.splitlines(keepends=True), after.splitlines(keepends=True)
    assert len(a) == len(b)
    return [(x, y) for x, y in zip(a, b) if x != y]


def test_only_the_changed_values_change_and_every_other_byte_stays() -> None:
    changed = PRACTICE.with_wheels((W[0], replace(W[1], y=-6.2503, reversed=True), replace(W[2], diameter=1.3741823)))
    text = write_profile_preserving(SOURCE, changed)
    assert _changed_lines(SOURCE.read_text(), text) == [
        ("y = -6.25          # right of centre: negative in REP 103\n",
         "y = -6.2503        # right of centre: negative in REP 103\n"),
        ("reversed = false\n", "reversed = true\n"),
        ("diameter = 1.378\n", "diameter = 1.37418\n"),
    ]
    assert "counts_per_rev = 8192\n" in text and "8192.0" not in text  # integers stay integers
    again = profile_from_table(tomllib.loads(text))
    assert again.wheels[2].diameter == pytest.approx(1.3741823, rel=2e-6)  # six significant digits
    assert again == replace(changed, wheels=(W[0], changed.wheels[1], replace(W[2], diameter=1.37418)))


def test_nothing_changed_writes_the_file_as_it_was() -> None:
    assert write_profile_preserving(SOURCE, PRACTICE) == SOURCE.read_text()


def test_a_swap_moves_the_wheel_tables_with_their_comments() -> None:
    text = SOURCE.read_text().replace('[[wheel]]\nname = "right"', '[[wheel]]   # the right one\n# measured 2026\nname = "right"')
    swapped = PRACTICE.with_wheels((W[1], W[0], W[2]))
    out = write_profile_preserving(text, swapped)
    again = profile_from_table(tomllib.loads(out))
    assert [w.name for w in again.wheels] == ["right", "left", "back"] and again == swapped
    first = out.index("[[wheel]]")
    assert out[first:].startswith('[[wheel]]   # the right one\n# measured 2026\nname = "right"')
    assert "y = -6.25          # right of centre: negative in REP 103" in out
    assert out.count("\n\n") == text.count("\n\n")  # the blank lines stay where they were


def test_keys_the_file_lacks_are_added_where_they_belong() -> None:
    bare = (
        'name = "bare-bot"\n'
        "# no [reported], no gear_ratio or reversed: the defaults\n"
        "[[wheel]]\nname = \"left\"\nx = 0\ny = 6\nangle = 0\ncounts_per_rev = 2000\ndiameter = 2\n\n"
        "[[wheel]]\nname = \"right\"\nx = 0\ny = -6\nangle = 0\ncounts_per_rev = 2000\ndiameter = 2\n\n"
        "[[wheel]]\nname = \"back\"\nx = -5\ny = 0\nangle = 90\ncounts_per_rev = 2000\ndiameter = 2\n"
    )
    profile = profile_from_table(tomllib.loads(bare))
    assert write_profile_preserving(bare, profile) == bare
    w = profile.wheels
    changed = replace(
        profile.with_wheels((w[0], replace(w[1], reversed=True, y=-6.5), w[2])),
        reported=replace(profile.reported, heading_unit="deg", integration="euler"),
        imu_mode="heading",
    )
    out = write_profile_preserving(bare, changed)
    assert profile_from_table(tomllib.loads(out)) == changed
    assert "x = 0\n" in out and "counts_per_rev = 2000\n" in out  # integers the user wrote stay
    assert "y = -6.5\n" in out and 'integration = "euler"' in out and 'mode = "heading"' in out


def test_a_source_without_a_wheel_of_the_profile_is_refused() -> None:
    other = replace(PRACTICE, wheels=(replace(W[0], name="front"), W[1], W[2]))
    with pytest.raises(ProfileError, match=r"wheel: the file's wheels \['left', 'right', 'back'\]"):
        write_profile_preserving(SOURCE, other)
    with pytest.raises(ProfileError, match="not valid TOML"):
        write_profile_preserving("name = \n", PRACTICE)


@pytest.mark.parametrize("name", ["practice-bot.toml", "practice-bot-metric.toml"])
def test_a_clean_file_is_commented_and_reads_back(tmp_path: Path, name: str) -> None:
    profile = replace(load_profile(FIXTURES / name), reported=replace(PRACTICE.reported, integration="midpoint"))
    path = tmp_path / "clean.toml"
    write_profile_file(path, profile)
    assert load_profile(path) == profile
    text = path.read_text()
    assert text.startswith(f"# Robot profile of {profile.name}, written by podwatch.\n")
    assert "counts_per_rev = " in text and ".0  " not in text.split("counts_per_rev = ")[1].split("\n")[0]
    assert "# rad | deg" in text and "integration = \"midpoint\"" in text
    # Without a declared integration the key is left out (the checks find it out).
    assert "integration" not in profile_text(load_profile(FIXTURES / name))
