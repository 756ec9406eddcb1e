"""The recording writer never overwrites a file, and a write that fails (the disk is full)
leaves what was written readable, plain or gzip: on a real 1 MB tmpfs as root, and
under a file size limit (RLIMIT_FSIZE: the kernel refuses writes past it) without."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from receiver.errors import RecordingExistsError
from receiver.formats.profile_toml import load_profile
from receiver.formats.protocol import decode
from receiver.formats.recording import read_recording
from receiver.formats.recording_writer import RecordingWriter, refuse_existing

ROOT = Path(__file__).resolve().parents[2]
PROFILE = load_profile(ROOT / "replay_fixtures" / "practice-bot.toml")


@pytest.mark.parametrize("name", ["rec.jsonl", "rec.jsonl.gz"])
def test_an_existing_file_is_refused_and_left_as_it_was(tmp_path, name):
    path = tmp_path / name
    path.write_bytes(b"a team's earlier session\n")
    with pytest.raises(RecordingExistsError, match=rf"^{path}: already exists; podwatch never overwrites"):
        RecordingWriter(path, [PROFILE])
    with pytest.raises(RecordingExistsError):
        refuse_existing(path)
    assert path.read_bytes() == b"a team's earlier session\n"
    refuse_existing(tmp_path / "new.jsonl")  # nothing there: fine


def write_until_it_fails(path: str) -> tuple[int, str]:
    """Write batches of 100 messages, flushing after each, until a write fails; then
    abandon. Returns (messages flushed before the failure, the error's words)."""
    writer = RecordingWriter(path, [PROFILE])
    flushed = 0
    for batch in range(100_000):
        samples = []
        for k in range(100):
            seq = batch * 100 + k
            text = b'{"v":1,"robot":"practice-bot","seq":%d,"t":%.6f,"ticks":[%d,%d,%d],"pose":[%.3f,0.0,0.0]}' % (
                seq, 0.01 * seq, 7 * seq, -5 * seq, (seq * 7919) % 1000, 0.1 * seq)
            samples.extend(decode(text)[0])
        try:
            writer.write(samples, rx=1_790_000_000.0 + batch)
            writer.flush()
        except OSError as exc:
            writer.abandon()
            return flushed, exc.strerror
        flushed += len(samples)
    raise AssertionError("the disk never filled")


def check_what_is_left(path: Path, flushed: int) -> None:
    data = read_recording(path)
    seq = data.robots["practice-bot"].seq.tolist()
    assert seq == list(range(len(seq)))  # in order, nothing skipped
    assert len(seq) >= flushed  # every message flushed before the failure reads back
    assert data.profiles == {"practice-bot": PROFILE}


@pytest.mark.parametrize("name", ["rec.jsonl", "rec.jsonl.gz"])
def test_a_full_tmpfs_leaves_a_readable_recording(tmp_path, name):
    if os.geteuid() != 0:
        pytest.skip("mounting a tmpfs needs root")
    disk = tmp_path / "disk"
    disk.mkdir()
    mounted = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(disk)], capture_output=True)
    if mounted.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {mounted.stderr.decode().strip()}")
    try:
        flushed, why = write_until_it_fails(str(disk / name))
        assert why == "No space left on device" and flushed > 1000
        check_what_is_left(disk / name, flushed)
    finally:
        subprocess.run(["umount", str(disk)], check=True)


# In a child process: RLIMIT_FSIZE is the whole process's, and SIGXFSZ must be ignored
# for the write to fail with EFBIG instead of killing it.
CHILD = """
import json, resource, signal, sys
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
resource.setrlimit(resource.RLIMIT_FSIZE, (200_000, 200_000))
from tests.formats.test_recording_writer import write_until_it_fails
print(json.dumps(write_until_it_fails(sys.argv[1])))
"""


@pytest.mark.parametrize("name", ["rec.jsonl", "rec.jsonl.gz"])
def test_a_write_refused_by_the_kernel_leaves_a_readable_recording(tmp_path, name):
    path = tmp_path / name
    child = subprocess.run([sys.executable, "-c", CHILD, str(path)], cwd=ROOT, capture_output=True, text=True,
                           check=True)
    flushed, why = json.loads(child.stdout)
    assert why == "File too large" and flushed > 500
    assert path.stat().st_size <= 200_000
    check_what_is_left(path, flushed)
