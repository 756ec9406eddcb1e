"""The recordings folder as the page sees it: what it lists, what it opens, and every refusal.

Each refusal is one line, and each comes after a bounded amount of work:
the named pipe is never waited on, the oversize file never read, the gzip
bombs never decompressed past the limit that refuses them.
"""

from __future__ import annotations

import gzip
import io
import os
import shutil
import stat
import threading
import tracemalloc
import zlib
from pathlib import Path

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from dashboard.recordings_folder import (
    MIB,
    Limits,
    _LineCheck,
    copy_checked,
    list_recordings,
    open_in_folder,
    read_from_folder,
)
from receiver.errors import RecordingError
from tests.conftest import FIXTURES

REVERSED = FIXTURES / "practice-bot-figure-eight-reversed-right.jsonl.gz"
SQUARE = FIXTURES / "practice-bot-square.jsonl"
HANG_GUARD_S = 30.0  # a call that never returns fails the test instead of hanging it; not a speed check


@pytest.fixture
def folder(tmp_path):
    """A recordings folder holding the two fixtures, with the reversed one newer."""
    inside = tmp_path / "recordings"
    inside.mkdir()
    shutil.copy(SQUARE, inside / SQUARE.name)
    shutil.copy(REVERSED, inside / REVERSED.name)
    os.utime(inside / SQUARE.name, (1_700_000_000, 1_700_000_000))
    os.utime(inside / REVERSED.name, (1_700_000_100, 1_700_000_100))
    return inside


def refusal(folder: Path, name: str, limits: Limits = Limits()) -> str:
    """The one-line message that refuses ``name``, from a call that must return."""
    caught: list[BaseException] = []
    worker = threading.Thread(target=lambda: _catch(caught, folder, name, limits), daemon=True)
    worker.start()
    worker.join(HANG_GUARD_S)
    assert not worker.is_alive(), f"opening {name!r} never returned"
    assert len(caught) == 1 and isinstance(caught[0], RecordingError), caught
    message = str(caught[0])
    assert "\n" not in message
    return message


def _catch(caught: list, folder: Path, name: str, limits: Limits) -> None:
    try:
        read_from_folder(folder, name, limits=limits)
    except BaseException as exc:  # noqa: BLE001 - handed to the test thread
        caught.append(exc)


def test_the_list_holds_the_regular_files_newest_first(folder, tmp_path):
    (folder / ".hidden.jsonl").write_text("{}\n")
    (folder / "sub").mkdir()
    os.mkfifo(folder / "pipe.jsonl")
    outside = tmp_path / "outside.jsonl"
    outside.write_text("{}\n")
    (folder / "out.jsonl").symlink_to(outside)
    (folder / "shadow").symlink_to("/etc/shadow")
    (folder / "zero").symlink_to("/dev/zero")
    (folder / "dangling").symlink_to(folder / "gone")
    (folder / "alias.jsonl").symlink_to(folder / SQUARE.name)  # a link that stays inside is a recording
    os.utime(folder / "alias.jsonl", (1_600_000_000, 1_600_000_000), follow_symlinks=False)
    listed = list_recordings(folder)
    assert [e.name for e in listed] == [REVERSED.name, "alias.jsonl", SQUARE.name]
    assert listed[0].size == REVERSED.stat().st_size
    assert listed[0].label.startswith(f"{REVERSED.name} \u00b7 0.1 MB \u00b7 ")


def test_a_new_recording_shows_up_first_and_a_missing_folder_lists_nothing(folder, tmp_path):
    (folder / "podwatch-new.jsonl").write_bytes(SQUARE.read_bytes())
    assert list_recordings(folder)[0].name == "podwatch-new.jsonl"
    assert list_recordings(tmp_path / "no-such-folder") == []


def test_a_listed_recording_opens_with_its_folder_in_its_name(folder):
    data = read_from_folder(folder, REVERSED.name, {"practice-bot": 3})
    assert data.message_count == 977
    assert data.path == str(folder / REVERSED.name)
    assert set(data.profiles) == {"practice-bot"}
    plain = read_from_folder(folder, SQUARE.name)
    assert plain.message_count > 0 and plain.warnings == []


@pytest.mark.parametrize("name", ["../recordings/x.jsonl", "/etc/passwd", "sub/x.jsonl", "..", ".", "", "a\0b",
                                  "..\\x.jsonl"])
def test_anything_but_a_plain_name_is_refused(folder, name):
    assert "is not the name of a file in the recordings folder" in refusal(folder, name)


@pytest.mark.parametrize("target", ["/etc/shadow", "/etc/passwd", "outside.jsonl", "/dev/zero"])
def test_a_link_that_leads_out_of_the_folder_is_refused(folder, tmp_path, target):
    (tmp_path / "outside.jsonl").write_bytes(SQUARE.read_bytes())
    (folder / "link.jsonl").symlink_to(target if target.startswith("/") else tmp_path / target)
    assert "link.jsonl: not in the recordings folder" in refusal(folder, "link.jsonl")


def test_a_missing_file_and_a_missing_folder_are_one_line(folder, tmp_path):
    assert "gone.jsonl: not in the recordings folder" in refusal(folder, "gone.jsonl")
    assert "does not exist" in refusal(tmp_path / "nowhere", "x.jsonl")


def test_a_named_pipe_is_refused_without_waiting_for_a_writer(folder):
    os.mkfifo(folder / "pipe.jsonl")
    assert refusal(folder, "pipe.jsonl").endswith("pipe.jsonl: a named pipe, not a recording file")


def test_a_folder_is_refused(folder):
    (folder / "sub.jsonl").mkdir()
    assert refusal(folder, "sub.jsonl").endswith("a folder, not a recording file")


@pytest.mark.skipif(os.geteuid() != 0, reason="making a device node needs root")
def test_a_device_in_the_folder_is_refused(folder):
    os.mknod(folder / "zero.jsonl", stat.S_IFCHR | 0o600, os.makedev(1, 5))  # the kernel's /dev/zero
    assert refusal(folder, "zero.jsonl").endswith("zero.jsonl: a device, not a recording file")


def test_a_file_over_the_size_limit_is_refused_before_it_is_read(folder):
    with open(folder / "huge.jsonl", "wb") as f:
        f.truncate(200 * MIB)  # sparse: takes no disk
    message = refusal(folder, "huge.jsonl")
    assert message == ("huge.jsonl: 200.0 MiB on disk, over the page's limit of 128 MiB "
                       "(podwatch recompute or replay reads it)")


def test_a_long_line_is_refused_with_its_number(folder):
    lines = SQUARE.read_bytes().splitlines(keepends=True)
    (folder / "long.jsonl").write_bytes(b"".join(lines[:2]) + b"x" * (70 * 1024) + b"\n" + b"".join(lines[2:]))
    assert "long.jsonl: line 3 is longer than 65600 bytes (a recorded message is at most 64 KiB)" in refusal(
        folder, "long.jsonl")


def _bomb(member: bytes, members: int) -> bytes:
    """A gzip file of ``members`` copies of one compressed member: small on disk, huge inflated."""
    return gzip.compress(member, compresslevel=9) * members


def test_a_gzip_bomb_of_zeros_is_refused_at_its_first_long_line(folder):
    # 3 GiB of zeros in a file of about 3 MB (3072 members of 1 MiB each).
    bomb = _bomb(bytes(MIB), 3072)
    (folder / "zeros.jsonl.gz").write_bytes(bomb)
    assert len(bomb) < 4 * MIB
    assert "zeros.jsonl.gz: line 1 is longer than 65600 bytes" in refusal(folder, "zeros.jsonl.gz")
    sink = io.BytesIO()
    with pytest.raises(RecordingError), open(folder / "zeros.jsonl.gz", "rb") as raw:
        copy_checked(raw, sink, "zeros.jsonl.gz")
    assert sink.tell() == 0  # refused inside its first piece: nothing of it was kept


def test_a_gzip_bomb_of_short_lines_is_refused_past_the_decompressed_limit_in_bounded_memory(folder):
    # 256 MiB of empty lines in about 256 kB: no line is long, the total is.
    (folder / "lines.jsonl.gz").write_bytes(_bomb(b"\n" * MIB, 256))
    tracemalloc.start()
    try:
        message = refusal(folder, "lines.jsonl.gz")
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert message == ("lines.jsonl.gz: more than 128 MiB once decompressed, over the page's limit "
                       "(podwatch recompute or replay reads it)")
    assert peak < 16 * MIB, peak  # a few pieces of 1 MiB at a time, never the whole
    sink = io.BytesIO()
    with pytest.raises(RecordingError), open(folder / "lines.jsonl.gz", "rb") as raw:
        copy_checked(raw, sink, "lines.jsonl.gz")
    assert sink.tell() <= 128 * MIB  # the work stops at the limit


def test_small_limits_apply_to_plain_files_too(folder):
    assert SQUARE.stat().st_size > 4096
    assert "MiB once decompressed, over the page's limit" in refusal(folder, SQUARE.name, Limits(data_bytes=4096))


def test_a_recording_cut_mid_write_reads_what_was_there(folder):
    whole = REVERSED.read_bytes()
    (folder / "cut.jsonl.gz").write_bytes(whole[: len(whole) * 2 // 3])
    data = read_from_folder(folder, "cut.jsonl.gz")
    assert 0 < data.message_count < 977
    assert any("truncated last line" in w for w in data.warnings)
    assert "the compressed stream ends early (receiver killed mid-write?); read what was there" in data.warnings
    assert not any("ends early" in w for w in read_from_folder(folder, REVERSED.name).warnings)


def test_a_damaged_gzip_file_is_one_line(folder):
    (folder / "bad.jsonl.gz").write_bytes(b"\x1f\x8b" + b"not deflate at all" * 10)
    assert "bad.jsonl.gz: not a readable gzip file" in refusal(folder, "bad.jsonl.gz")


def test_a_file_that_is_not_a_recording_names_the_folder_not_a_temporary_copy(folder):
    (folder / "notes.txt").write_text("hello\nworld\n")
    message = refusal(folder, "notes.txt")
    assert message.startswith(f"{folder / 'notes.txt'}: no valid messages")
    assert "podwatch-open-" not in message


def test_an_open_file_is_the_checked_one(folder):
    with open_in_folder(folder, SQUARE.name) as raw:
        assert raw.read() == SQUARE.read_bytes()


def test_multi_member_gzip_reads_every_member(folder):
    lines = SQUARE.read_bytes().splitlines(keepends=True)
    half = len(lines) // 2
    (folder / "two.jsonl.gz").write_bytes(gzip.compress(b"".join(lines[:half])) + b"\0\0"
                                          + gzip.compress(b"".join(lines[half:])))
    assert read_from_folder(folder, "two.jsonl.gz").message_count == read_from_folder(folder, SQUARE.name).message_count


@settings(max_examples=300, deadline=None, derandomize=True)
@example([b"\n", b"\n", b"x" * 5, b"\n"], [], 4)  # a long line between two others, off the blocks' grid
@given(st.lists(st.one_of(st.just(b"\n"), st.integers(1, 20).map(lambda n: b"x" * n)), max_size=40),
       st.lists(st.integers(0, 400), max_size=6), st.integers(1, 8))
def test_the_line_check_agrees_with_splitting_the_whole(tokens, cuts, limit):
    # The reference: split the whole text at once (common practice); the check
    # sees it in pieces cut anywhere, as the pieces of a decompressed file are.
    text = b"".join(tokens)
    lengths = [len(line) for line in text.split(b"\n")]
    over = next((k + 1 for k, n in enumerate(lengths) if n > limit), None)
    bounds = sorted({0, len(text), *(c for c in cuts if c <= len(text))})
    check = _LineCheck("x", limit)
    try:
        for a, b in zip(bounds, bounds[1:]):
            check.feed(text[a:b])
    except RecordingError as exc:
        assert over is not None and f"line {over} is longer" in str(exc)
    else:
        assert over is None


def test_inflating_keeps_each_piece_bounded():
    from dashboard.recordings_folder import _Inflate

    pieces = list(_Inflate(io.BytesIO(_bomb(bytes(3 * MIB), 2)), MIB))
    assert sum(map(len, pieces)) == 6 * MIB and max(map(len, pieces)) <= MIB
    assert zlib.crc32(b"".join(pieces)) == zlib.crc32(bytes(6 * MIB))


def test_a_failed_read_is_one_line_whatever_failed():
    from dashboard.recordings_folder import why_unreadable
    from receiver.errors import RecordingError

    assert why_unreadable(RecordingError("run.jsonl: empty recording")) == "run.jsonl: empty recording"
    assert why_unreadable(PermissionError(13, "Permission denied")) == "Permission denied"
    assert why_unreadable(MemoryError()) == "not enough memory"
