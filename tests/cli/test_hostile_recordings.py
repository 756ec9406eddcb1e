"""Every offline command, and the page's recording reader, on a recording with
hostile lines: each bad line is a skipped-line warning, never a traceback."""

from __future__ import annotations

import json
import shlex

import pytest

from dashboard.recordings_folder import Limits, read_from_folder
from dashboard.sources import ReplaySource
from receiver.errors import RecordingError
from receiver.cli import main
from tests.conftest import FIXTURES
from tests.synthetic import constant_twist_messages, write_recording

HOSTILE = [
    # deeper than Python lets the decoder recurse (1,000 levels by default), from any caller's stack
    b'{"v":1,"robot":"practice-bot","seq":900,"t":0.5,"ticks":[0,0,0],"x":' + b"[" * 3000 + b"]" * 3000 + b"}",
    b'{"v":1,"robot":"practice-bot","seq":901,"t":0.5,"ticks":[0,0,0],"x":' + b"{\"k\":" * 5000 + b"1" + b"}" * 5001,
    b'{"v":1,"robot":"practice-bot","seq":902,"t":0.5,"ticks":[0,0,0],"note":"\xff\xfe"}',
    b'{"v":1,"robot":"practice-bot","seq":903,"t":0.5,"ticks":[0,0,0],"data":{"arm angle":1}}',
    b'{"v":1,"robot":"practice-bot","seq":904,"t":' + b"9" * 5000 + b',"ticks":[0,0,0]}',
    b"[" * 100_000,
    b"\x00\x01\x02 not even text",
]


@pytest.fixture
def hostile(tmp_path, practice_profile):
    """A spin of the practice robot with the hostile lines among its messages."""
    messages = constant_twist_messages(practice_profile, twist_per_s=(0.0, 0.0, 1.5), seconds=8.0)
    path = write_recording(tmp_path / "clean.jsonl", messages, [practice_profile])
    header, *lines = path.read_bytes().splitlines()
    for k, bad in enumerate(HOSTILE):
        lines.insert(20 + 30 * k, bad)
    path = tmp_path / "hostile.jsonl"
    path.write_bytes(b"\n".join([header, *lines]) + b"\n")
    return path, len(messages)


@pytest.mark.parametrize(
    "command",
    [
        "recompute {rec} --out {tmp}/out.csv",
        "recompute {rec} --signals --out {tmp}/out.csv",
        "replay {rec} --speed 0",
        "diagnose {rec} --json",
        "calibrate {rec} --spin-turns 1.9099 --json",
    ],
)
def test_each_offline_command_skips_the_hostile_lines(hostile, tmp_path, capsys, command):
    path, _ = hostile
    code = main(shlex.split(command.format(rec=path, tmp=tmp_path)))
    err = capsys.readouterr().err
    assert "Traceback" not in err
    warning = next(line for line in err.splitlines() if "skipped" in line)
    assert warning.startswith(f"podwatch: warning: skipped {len(HOSTILE)} bad messages (")
    assert "nested_too_deep 2" in warning and "not_utf8 1" in warning and "line 22: nested_too_deep" in warning
    assert code == 0, err


def test_the_pages_reader_opens_it_and_keeps_every_good_message(tmp_path, practice_profile):
    # The page refuses a file with a line longer than any message a receiver
    # records (dashboard/recordings_folder.py); every shorter hostile line is
    # skipped and every good message kept.
    short = [line for line in HOSTILE if len(line) <= Limits().line_bytes]
    assert len(short) < len(HOSTILE)
    messages = constant_twist_messages(practice_profile, twist_per_s=(0.0, 0.0, 1.5), seconds=8.0)
    path = write_recording(tmp_path / "clean.jsonl", messages, [practice_profile])
    header, *lines = path.read_bytes().splitlines()
    for k, bad in enumerate(short):
        lines.insert(20 + 30 * k, bad)
    (tmp_path / "hostile.jsonl").write_bytes(b"\n".join([header, *lines]) + b"\n")
    source = ReplaySource(read_from_folder(tmp_path, "hostile.jsonl"))
    try:
        assert len(source.samples) == len(messages)  # every good message, nothing of the hostile lines
        assert sorted(s.seq for s in source.samples) == list(range(len(messages)))
    finally:
        source.stop()


def test_the_page_refuses_a_file_with_a_line_longer_than_any_message(hostile):
    path, _ = hostile
    with pytest.raises(RecordingError, match="longer than"):
        read_from_folder(path.parent, path.name)


def test_a_header_too_deep_for_the_decoder_is_a_bad_line_not_a_header(tmp_path, capsys):
    rec = tmp_path / "rec.jsonl"
    good = json.dumps({"v": 1, "robot": "practice-bot", "seq": 0, "t": 0.0, "ticks": [0, 0, 0]})
    rec.write_text('{"recording": ' + "[" * 5000 + "]" * 5000 + "}\n" + good + "\n")
    code = main(["recompute", str(rec), "--profile", str(FIXTURES / "practice-bot.toml")])
    err = capsys.readouterr().err
    assert code == 0 and "skipped 1 bad messages (nested_too_deep 1)" in err and "Traceback" not in err


def test_a_line_nested_well_within_the_decoders_reach_is_read_alone_or_among_bad_lines(tmp_path, practice_profile):
    # The reader does not hold lines to the wire's 32 (protocol.md, Recordings): its bulk path and its
    # line-by-line path (taken when another line in the block is bad) must agree on such a line.
    from receiver.formats.recording import read_recording

    messages = constant_twist_messages(practice_profile, seconds=1.0)
    messages[10]["x"] = json.loads("[" * 100 + "]" * 100)
    clean = write_recording(tmp_path / "clean.jsonl", messages, [practice_profile])
    assert len(read_recording(clean).robots["practice-bot"]) == len(messages)
    dirty = tmp_path / "dirty.jsonl"
    dirty.write_bytes(clean.read_bytes() + b"not json\n")
    assert len(read_recording(dirty).robots["practice-bot"]) == len(messages)
