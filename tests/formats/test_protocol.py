"""The decoder's bad-input matrix: each malformed kind maps to its reason, and
a batch keeps its good elements whatever else it holds; decode_keeping_raw
(which decode wraps) gives each good message's bytes, in step with it."""

from __future__ import annotations

import json

import pytest

from receiver.formats.protocol import (
    MAX_BATCH,
    Failure,
    Reason,
    Sample,
    decode,
    decode_keeping_raw,
    decode_message,
    encode,
)
from tests.malformed import DECODER_CASES, GOOD, message, raw, nested


def test_a_valid_message_decodes_with_every_field():
    data = raw(imu=0.25, loop=0.01, reset=True, extra={"ignored": [1, 2]})
    samples, failures = decode(data)
    assert failures == []
    (s,) = samples
    assert (s.robot, s.seq, s.t, s.ticks, s.pose, s.imu, s.loop, s.reset) == (
        "practice-bot", 7, 1.25, [10, -20, 30], (1.0, 2.0, 0.5), 0.25, 0.01, True
    )


def test_optional_fields_may_be_absent():
    (s,), _ = decode(raw(pose=None))
    assert s.pose is None and s.imu is None and s.loop is None and s.reset is False


@pytest.mark.parametrize("label, payload, reason", DECODER_CASES, ids=[c[0] for c in DECODER_CASES])
def test_each_malformed_kind_has_its_reason(label, payload, reason):
    samples, failures, raws = decode_keeping_raw(payload)
    assert samples == [] and raws == []  # nothing of a refused message is kept for the recording
    assert [f.reason for f in failures] == [reason], failures
    assert "\n" not in failures[0].detail  # one line, fit for a log


def test_boundaries_of_counters_are_accepted():
    for ticks in ([2**32 - 1, 0, 0], [-(2**31), 0, 0]):
        assert len(decode(raw(ticks=ticks))[0]) == 1
    assert decode(raw(seq=2**32 - 1))[0][0].seq == 2**32 - 1
    assert decode(raw(robot="A" * 32))[0][0].robot == "A" * 32


def test_a_full_batch_of_256_is_accepted():
    batch = [message(seq=k) for k in range(MAX_BATCH)]
    samples, failures = decode(json.dumps(batch).encode())
    assert failures == [] and [s.seq for s in samples] == list(range(MAX_BATCH))


def test_a_batch_keeps_its_good_elements():
    batch = [
        message(seq=1),
        message(seq="two"),
        message(t="soon"),
        {"v": 1, "robot": "practice-bot"},
        message(seq=-5),
        42,
        message(seq=6),
    ]
    samples, failures = decode(json.dumps(batch).encode())
    assert [s.seq for s in samples] == [1, 6]
    assert [f.reason for f in failures] == [
        Reason.WRONG_TYPE, Reason.WRONG_TYPE, Reason.MISSING_FIELD, Reason.OUT_OF_RANGE, Reason.WRONG_TYPE
    ]


def test_a_batch_with_a_nan_element_keeps_the_others():
    # NaN is not JSON, so the whole array does not parse; the good ones must survive anyway.
    good = json.dumps(message(seq=1))
    bad = json.dumps(message(seq=2, t=123456.5)).replace("123456.5", "NaN")
    also_good = json.dumps(message(seq=3, note="a:NaN, [Infinity"))
    samples, failures, raws = decode_keeping_raw(f"[{good}, {bad},{also_good}]".encode())
    assert [s.seq for s in samples] == [1, 3]
    assert [f.reason for f in failures] == [Reason.NON_FINITE]
    assert raws == [good.encode(), also_good.encode()]  # as sent: the note keeps its "NaN"


def test_a_nan_in_a_field_the_protocol_does_not_know_costs_the_message_alone_or_in_a_batch():
    # NaN is not JSON wherever it stands; the other elements of the batch stay.
    bad = json.dumps(message(seq=2, note=123456.5)).replace("123456.5", " NaN")
    assert decode(bad.encode())[0] == []
    samples, failures, raws = decode_keeping_raw(f"[{raw(seq=1).decode()},{bad} ,{raw(seq=3).decode()}]".encode())
    assert [s.seq for s in samples] == [1, 3] and [f.reason for f in failures] == [Reason.NON_FINITE]
    assert raws == [raw(seq=1), raw(seq=3)]


def test_failures_name_the_robot_when_the_message_does():
    (failure,) = decode(raw(seq="x"))[1]
    assert failure.robot == "practice-bot"
    (failure,) = decode(raw(robot="bad name", seq="x"))[1]
    assert failure.robot is None
    assert decode(b"garbage")[1][0].robot is None


def test_unknown_fields_are_ignored_and_encode_round_trips():
    sample = decode_message(raw(colour="red"))
    assert isinstance(sample, Sample)
    assert decode_message(encode(sample)) == sample
    assert b"colour" not in encode(sample)


def test_failure_prints_as_reason_and_detail():
    failure = decode_message(raw(seq=-1))
    assert isinstance(failure, Failure)
    assert str(failure).startswith("out_of_range: ") and "seq" in str(failure)


def test_good_message_is_unchanged_by_the_matrix_helpers():
    assert json.loads(raw()) == GOOD


def test_keeping_raw_a_single_message_gives_the_datagram_itself():
    # whitespace and line breaks around and inside the object, and a field of the team's own
    data = b' \r\n{"v": 1,\r\n "robot": "practice-bot", "seq": 7, "motor_power": 0.75,\n "t": 1.25,\t"ticks": [10, -20, 30]}\n'
    samples, failures, raws = decode_keeping_raw(data)
    assert failures == [] and samples[0].seq == 7
    assert raws == [data]


def test_keeping_raw_a_batch_gives_each_element_as_sent():
    elements = [raw(seq=1), raw(seq=2, motor_power=0.5), b'{"v":1,\n"robot":"practice-bot",\r\n"seq":3,"t":1.5,"ticks":[1,2,3]}']
    data = b"[ " + b" ,\n".join(elements) + b"\r\n]"
    samples, failures, raws = decode_keeping_raw(data)
    assert failures == [] and [s.seq for s in samples] == [1, 2, 3]
    assert raws == elements


BAD_AMONG_GOOD = {
    # the array decodes whole, and a name is refused afterwards
    "bad robot name": raw(robot="no spaces allowed", seq=2),
    # the array does not decode as samples: each element is decoded on its own
    "wrong type": raw(seq="two"),
    # not even JSON: the array is split after its NaN is rewritten
    "nan": raw(t=123456.5).replace(b"123456.5", b"NaN"),
    # the datagram is refused before decoding: the array is cut at its commas and each element judged alone
    "nested too deep": nested("extra", 40),
    "not UTF-8": raw(seq=2, note="x").replace(b'"x"', b'"\xff"'),
    "bad signal name": raw(seq=2, data={"arm angle": 1.0}),
    "too many signals": raw(seq=2, data={f"s{k}": 1.0 for k in range(33)}),
    "NaN signal": raw(seq=2, data={"arm": 123456.5}).replace(b"123456.5", b"NaN"),
}


@pytest.mark.parametrize("bad", BAD_AMONG_GOOD.values(), ids=BAD_AMONG_GOOD.keys())
def test_keeping_raw_stays_aligned_with_bad_elements_among_good_ones(bad):
    good = [raw(seq=1, motor_power=0.25), raw(seq=3), raw(seq=4, note="fine")]
    data = b"[" + b", ".join([good[0], bad, good[1], bad, good[2]]) + b"]"
    samples, failures, raws = decode_keeping_raw(data)
    assert [s.seq for s in samples] == [1, 3, 4] and len(failures) == 2
    assert raws == good
    assert [decode_message(r) for r in raws] == samples



def test_a_robots_own_rx_of_another_type_does_not_cost_the_message():
    # "rx" is the receiver's field (recordings); on the wire it is one the
    # protocol does not know, and those are ignored (DESIGN.md, wire table).
    alone = raw(rx="wifi", motor_power=0.5)
    samples, failures, raws = decode_keeping_raw(alone)
    assert failures == [] and samples[0].seq == 7 and samples[0].rx is None
    assert json.loads(raws[0]) == message(motor_power=0.5)  # kept, but for the robot's rx
    batch = b"[" + raw(seq=1) + b"," + raw(seq=2, rx=[1, 2]) + b"," + raw(seq=3) + b"]"
    samples, failures, raws = decode_keeping_raw(batch)
    assert failures == [] and [s.seq for s in samples] == [1, 2, 3]
    assert [json.loads(r).get("rx") for r in raws] == [None, None, None]
    # the message's real faults still count, whatever its rx
    samples, failures, _ = decode_keeping_raw(raw(rx="wifi", seq="seven"))
    assert samples == [] and [f.reason for f in failures] == [Reason.WRONG_TYPE] and "seq" in failures[0].detail


def test_a_recording_line_with_an_rx_of_another_type_is_still_refused():
    # In a recording "rx" is the receiver's own clock: a line where it is not a number is damaged.
    assert isinstance(decode_message(raw(rx="wifi")), Failure)


def test_nesting_up_to_32_is_accepted_alone_and_in_a_batch():
    at_limit = nested("extra", 31)  # the message's own object and 31 arrays: 32 open at once
    assert len(decode(at_limit)[0]) == 1
    batch = b"[" + b",".join([at_limit] * 3) + b"]"  # the batch's array does not count
    samples, failures, raws = decode_keeping_raw(batch)
    assert failures == [] and len(samples) == 3 and raws == [at_limit] * 3
    (failure,) = decode(nested("extra", 32))[1]
    assert failure.reason is Reason.NESTED_TOO_DEEP and "33 deep, limit 32" in failure.detail


def test_brackets_inside_strings_do_not_count_as_nesting():
    note = "[" * 100 + '{\\"[[' + "}" * 3
    samples, failures = decode(raw(note=note, other="\\" + "[" * 40))
    assert failures == [] and samples[0].seq == 7


def test_a_recording_line_is_refused_for_nesting_only_past_what_the_decoder_can_take():
    assert isinstance(decode_message(nested("extra", 40), check_nesting=False), Sample)
    failure = decode_message(nested("extra", 5000), check_nesting=False)
    assert isinstance(failure, Failure) and failure.reason is Reason.NESTED_TOO_DEEP
    assert decode_message(nested("extra", 40)).reason is Reason.NESTED_TOO_DEEP


def test_text_that_is_utf8_beyond_ascii_is_accepted():
    samples, failures, raws = decode_keeping_raw(raw(note="\u00e4rm \u2192 30\u00b0").replace(b"\\u00e4", "\u00e4".encode()))
    assert failures == [] and len(samples) == 1


def test_a_message_not_utf8_names_its_robot_when_it_can():
    (failure,) = decode(raw(note="x").replace(b'"x"', b'"\xff"'))[1]
    assert failure.reason is Reason.NOT_UTF8 and failure.robot == "practice-bot"


def test_signals_decode_by_name_and_survive_in_the_bytes_kept():
    data = raw(data={"arm.angle": 12.5, "motor_power": -0.25, "lift_2": 3})
    samples, failures, raws = decode_keeping_raw(data)
    assert failures == [] and samples[0].data == {"arm.angle": 12.5, "motor_power": -0.25, "lift_2": 3.0}
    assert raws == [data] and json.loads(raws[0])["data"]["motor_power"] == -0.25
    assert decode_message(encode(samples[0])) == samples[0]
    assert decode_message(raw()).data is None and b"data" not in encode(decode_message(raw()))


def test_32_signals_with_32_character_names_are_accepted():
    signals = {f"{k:02d}" + "s" * 30: float(k) for k in range(32)}
    (sample,), failures = decode(raw(data=signals))
    assert failures == [] and sample.data == signals


def test_a_bad_signal_costs_only_its_message_and_names_the_robot():
    batch = [message(seq=1, data={"ok": 1.0}), message(seq=2, data={"not ok": 1.0}), message(seq=3)]
    samples, failures = decode(json.dumps(batch).encode())
    assert [s.seq for s in samples] == [1, 3] and samples[0].data == {"ok": 1.0}
    assert [f.reason for f in failures] == [Reason.OUT_OF_RANGE]
    assert "signal name 'not ok'" in failures[0].detail and failures[0].robot == "practice-bot"
