"""The team's own signals ("data") through recordings: written as received,
read back into ``Columns.signals`` by name, in one process or on workers."""

from __future__ import annotations

import json

import numpy as np
import pytest

from receiver.formats import block_decoder, recording
from receiver.formats.protocol import Reason, decode_keeping_raw, decode_message
from receiver.formats.recording import read_recording
from receiver.formats.recording_writer import RecordingWriter
from receiver.odometry.columns import Columns, concat_columns
from tests.synthetic import constant_twist_messages, write_recording

NAN = float("nan")


def with_signals(messages: list[dict]) -> list[dict]:
    """Every message with "arm"; every third also "lift.2"; every seventh without data at all."""
    out = []
    for k, m in enumerate(messages):
        if k % 7 == 3:
            out.append(m)
            continue
        data = {"arm": 0.25 * k} | ({"lift.2": -1e300 * (k % 2 - 0.5)} if k % 3 == 0 else {})
        out.append(dict(m, data=data))
    return out


def expected(messages: list[dict], name: str) -> list[float]:
    return [m.get("data", {}).get(name, NAN) for m in messages]


def test_a_live_recording_keeps_the_signals_as_received(tmp_path, practice_profile):
    messages = with_signals(constant_twist_messages(practice_profile, seconds=1.0))
    path = tmp_path / "rec.jsonl"
    with RecordingWriter(path, [practice_profile]) as writer:
        for k, message in enumerate(messages):
            data = json.dumps(message, indent=1 if k % 5 == 0 else None).encode()  # as a robot sent it
            samples, failures, raws = decode_keeping_raw(data)
            assert failures == []
            writer.write(samples, rx=1.7e9 + k, raws=raws)
    lines = path.read_bytes().splitlines()[1:]
    assert [json.loads(line).get("data") for line in lines] == [m.get("data") for m in messages]
    cols = read_recording(path).robots["practice-bot"]
    assert list(cols.signals) == ["arm", "lift.2"]
    np.testing.assert_array_equal(cols.signals["arm"], expected(messages, "arm"))
    np.testing.assert_array_equal(cols.signals["lift.2"], expected(messages, "lift.2"))


def test_samples_encoded_for_a_recording_keep_their_signals(tmp_path, practice_profile):
    messages = with_signals(constant_twist_messages(practice_profile, seconds=0.5))
    samples = [decode_message(json.dumps(m).encode()) for m in messages]
    path = tmp_path / "rec.jsonl.gz"
    with RecordingWriter(path, [practice_profile]) as writer:
        writer.write(samples, rx=1.7e9)
    cols = read_recording(path).robots["practice-bot"]
    np.testing.assert_array_equal(cols.signals["arm"], expected(messages, "arm"))


def test_blocks_with_other_signals_are_joined_with_gaps(tmp_path, monkeypatch, practice_profile):
    messages = constant_twist_messages(practice_profile, seconds=4.0)
    for k, m in enumerate(messages):
        if k < 60:
            m["data"] = {"early": float(k)}
        elif k >= 150:
            m["data"] = {"late": float(k), "early": -1.0} if k % 2 else {"late": float(k)}
    path = write_recording(tmp_path / "rec.jsonl", messages, [practice_profile])
    monkeypatch.setattr(recording, "_CHUNK_BYTES", 2_000)  # many blocks, some without any signal
    monkeypatch.setattr(block_decoder, "PARALLEL_FROM_BYTES", 0)  # and on two workers
    cols = read_recording(path).robots["practice-bot"]
    assert list(cols.signals) == ["early", "late"]
    np.testing.assert_array_equal(cols.signals["early"], expected(messages, "early"))
    np.testing.assert_array_equal(cols.signals["late"], expected(messages, "late"))


def test_a_line_with_a_bad_signal_is_skipped_alone(tmp_path, practice_profile):
    messages = constant_twist_messages(practice_profile, seconds=0.2)
    messages[3]["data"] = {"arm angle": 1.0}
    messages[5]["data"] = {"arm": "up"}
    path = write_recording(tmp_path / "rec.jsonl", messages, [practice_profile])
    data = read_recording(path)
    assert len(data.robots["practice-bot"]) == len(messages) - 2
    assert data.skipped == {Reason.OUT_OF_RANGE: 1, Reason.WRONG_TYPE: 1}
    assert "line 5: out_of_range: signal name 'arm angle'" in data.warnings[0]


def _columns(n: int, signals: dict) -> Columns:
    return Columns(np.arange(n), np.arange(n) * 0.1, np.zeros((n, 3), dtype=np.int64), np.zeros((n, 3)),
                   np.full(n, NAN), np.full(n, NAN), np.zeros(n, dtype=bool), signals=signals)


def test_columns_take_and_join_carry_the_signals():
    a = _columns(3, {"arm": np.array([1.0, 2.0, 3.0])})
    b = _columns(2, {"lift": np.array([5.0, 6.0]), "arm": np.array([4.0, NAN])})
    joined = concat_columns([a, b, _columns(1, {})])
    assert list(joined.signals) == ["arm", "lift"]
    np.testing.assert_array_equal(joined.signals["arm"], [1, 2, 3, 4, NAN, NAN])
    np.testing.assert_array_equal(joined.signals["lift"], [NAN, NAN, NAN, 5, 6, NAN])
    np.testing.assert_array_equal(joined.take(np.array([1, 4])).signals["lift"], [NAN, 6])


@pytest.mark.parametrize("uniform", [True, False])
def test_signal_columns_from_samples_in_both_ways(uniform):
    from receiver.odometry.columns import columns_from_samples

    datas = [{"a": 1.0, "b": 2.0}, {"b": 3.0, "a": 4.0}] if uniform else [{"a": 1.0}, None, {"b": 3.0, "a": 4.0}]
    samples = [decode_message(json.dumps({"v": 1, "robot": "r", "seq": k, "t": k, "ticks": [0, 0, 0],
                                          **({"data": d} if d else {})}).encode()) for k, d in enumerate(datas)]
    cols = columns_from_samples(samples, 3)
    np.testing.assert_array_equal(cols.signals["a"], [d.get("a", NAN) if d else NAN for d in datas])
    np.testing.assert_array_equal(cols.signals["b"], [d.get("b", NAN) if d else NAN for d in datas])
    assert columns_from_samples(samples, 3, with_signals=False).signals == {}
