"""Default recording names are taken by exclusive creation, and a folder with less free
space than an hour of recording is warned about with the estimate spelled out."""

from __future__ import annotations

import shutil
from collections import namedtuple
from datetime import datetime

import receiver.live.recording_file as recording_file
from receiver.live.recording_file import create_recording, hour_bytes, space_warning

NOW = datetime(2026, 12, 2, 9, 30, 5)


def test_receivers_started_in_the_same_second_get_files_of_their_own(tmp_path, practice_profile):
    folder = tmp_path / "recordings"  # made when the first recording is created
    writers = [create_recording([practice_profile], folder=folder, now=NOW) for _ in range(3)]
    try:
        assert [w.path for w in writers] == [str(folder / name) for name in (
            "podwatch-20261202-093005.jsonl", "podwatch-20261202-093005-2.jsonl", "podwatch-20261202-093005-3.jsonl")]
    finally:
        for writer in writers:
            writer.close()


def test_an_hour_is_estimated_from_the_robots_and_compression():
    # 200 messages/s of 210 bytes for 3600 s: 151.2 MB a robot; gzip keeps 40 % of it
    assert hour_bytes(0, False) == hour_bytes(1, False) == 151_200_000
    assert hour_bytes(3, True) == 3 * 151_200_000 * 0.4


def test_little_free_space_is_warned_about(tmp_path, monkeypatch):
    usage = namedtuple("usage", "total used free")
    monkeypatch.setattr(shutil, "disk_usage", lambda path: usage(10**9, 10**9 - 50_000_000, 50_000_000))
    assert recording_file.shutil is shutil
    line = space_warning(tmp_path, 2, False)
    assert line == (
        f"{tmp_path}: 50 MB free, less than an hour of recording needs (about 302 MB: 2 robots at 200 messages/s "
        "of about 210 bytes); when the disk is full, recording stops and receiving goes on"
    )
    monkeypatch.setattr(shutil, "disk_usage", lambda path: usage(10**12, 0, 10**12))
    assert space_warning(tmp_path, 2, False) is None
