"""Every malformed kind the wire table implies, each with the reason it must be counted under.

Shared by the decoder's tests and the real-socket tests, so that both prove
the same matrix. Built around one valid message of the practice robot.
"""

from __future__ import annotations

import json

from receiver.formats.protocol import MAX_BATCH, MAX_MESSAGE_BYTES, Reason

GOOD = {"v": 1, "robot": "practice-bot", "seq": 7, "t": 1.25, "ticks": [10, -20, 30], "pose": [1.0, 2.0, 0.5]}


def message(**changes) -> dict:
    out = dict(GOOD)
    for key, value in changes.items():
        if value is _DROP:
            del out[key]
        else:
            out[key] = value
    return out


_DROP = object()


def raw(**changes) -> bytes:
    return json.dumps(message(**changes)).encode()


def _with_token(field: str, token: str) -> bytes:
    """A message whose field holds a bare token json.dumps would never write."""
    text = json.dumps(message(**{field: 123456.5}))
    return text.replace("123456.5", token).encode()


def nested(field: str, depth: int) -> bytes:
    """A valid message plus an unknown field of arrays ``depth`` deep (the message's object makes one more)."""
    return raw().replace(b"}", b', "%s": %s%s}' % (field.encode(), b"[" * depth, b"]" * depth))


# (label, payload, reason); decoder-level rules only (the hub adds its own).
DECODER_CASES: list[tuple[str, bytes, Reason]] = [
    ("not json", b"hello robot", Reason.NOT_JSON),
    ("empty", b"", Reason.NOT_JSON),
    ("truncated", raw()[:-7], Reason.NOT_JSON),
    ("two objects", raw() + raw(), Reason.NOT_JSON),
    ("binary garbage", bytes(range(256)) * 4, Reason.NOT_UTF8),
    ("utf-8 byte-order mark", b"\xef\xbb\xbf" + raw(), Reason.NOT_JSON),
    ("version as string", raw(v="1"), Reason.WRONG_TYPE),
    ("robot as number", raw(robot=5), Reason.WRONG_TYPE),
    ("seq as string", raw(seq="7"), Reason.WRONG_TYPE),
    ("seq as float", raw(seq=7.5), Reason.WRONG_TYPE),
    ("seq as bool", raw(seq=True), Reason.WRONG_TYPE),
    ("t as string", raw(t="1.25"), Reason.WRONG_TYPE),
    ("ticks as string", raw(ticks="10,20,30"), Reason.WRONG_TYPE),
    ("ticks with a float", raw(ticks=[10.5, 0, 0]), Reason.WRONG_TYPE),
    ("pose of two", raw(pose=[1.0, 2.0]), Reason.WRONG_TYPE),
    ("pose as string", raw(pose="here"), Reason.WRONG_TYPE),
    ("reset as number", raw(reset=1), Reason.WRONG_TYPE),
    ("a bare number", b"42", Reason.WRONG_TYPE),
    ("null", b"null", Reason.WRONG_TYPE),
    ("missing v", raw(v=_DROP), Reason.MISSING_FIELD),
    ("missing robot", raw(robot=_DROP), Reason.MISSING_FIELD),
    ("missing seq", raw(seq=_DROP), Reason.MISSING_FIELD),
    ("missing t", raw(t=_DROP), Reason.MISSING_FIELD),
    ("missing ticks", raw(ticks=_DROP), Reason.MISSING_FIELD),
    ("NaN t", _with_token("t", "NaN"), Reason.NON_FINITE),
    ("Infinity imu", _with_token("imu", "Infinity"), Reason.NON_FINITE),
    ("-Infinity loop", _with_token("loop", "-Infinity"), Reason.NON_FINITE),
    ("nan from printf", _with_token("t", "nan"), Reason.NON_FINITE),
    ("1e400 t", _with_token("t", "1e400"), Reason.NON_FINITE),
    ("-1e400 in pose", raw().replace(b"[1.0, 2.0, 0.5]", b"[-1e400, 2.0, 0.5]"), Reason.NON_FINITE),
    ("version 2", raw(v=2), Reason.OUT_OF_RANGE),
    ("negative seq", raw(seq=-1), Reason.OUT_OF_RANGE),
    ("seq 2^32", raw(seq=2**32), Reason.OUT_OF_RANGE),
    ("seq of 30 digits", raw(seq=10**30), Reason.OUT_OF_RANGE),
    ("counts past 32 bits", raw(ticks=[2**32, 0, 0]), Reason.OUT_OF_RANGE),
    ("counts below signed 32 bits", raw(ticks=[-(2**31) - 1, 0, 0]), Reason.OUT_OF_RANGE),
    ("negative loop", raw(loop=-0.01), Reason.OUT_OF_RANGE),
    ("empty robot name", raw(robot=""), Reason.OUT_OF_RANGE),
    ("robot name of 33", raw(robot="r" * 33), Reason.OUT_OF_RANGE),
    ("robot name with space", raw(robot="practice bot"), Reason.OUT_OF_RANGE),
    ("robot name with newline", raw(robot="practice-bot\n"), Reason.OUT_OF_RANGE),
    ("robot name not ASCII", raw(robot="pr\u00e4ctice"), Reason.OUT_OF_RANGE),
    ("oversize", b" " * (MAX_MESSAGE_BYTES - len(raw()) + 1) + raw(), Reason.TOO_LARGE),
    ("batch over 256", json.dumps([message(seq=k) for k in range(MAX_BATCH + 1)]).encode(), Reason.TOO_LARGE),
    ("nested too deep", b"[" * 20000 + b"]" * 20000, Reason.NESTED_TOO_DEEP),
    ("unknown field nested 33 deep", nested("extra", 32), Reason.NESTED_TOO_DEEP),
    ("unknown field nested 990 deep", nested("extra", 989), Reason.NESTED_TOO_DEEP),
    ("objects nested 40 deep", raw().replace(b"}", b', "o": ' + b'{"a": ' * 39 + b"1" + b"}" * 39 + b"}"),
     Reason.NESTED_TOO_DEEP),
    ("not UTF-8 in an unknown field", raw().replace(b"}", b', "note": "\xff\xfe"}'), Reason.NOT_UTF8),
    ("a lone continuation byte in the name", raw().replace(b"practice-bot", b"practice\x80bot"), Reason.NOT_UTF8),
    ("overlong UTF-8", raw().replace(b"}", b', "note": "\xc0\xaf"}'), Reason.NOT_UTF8),
    ("UTF-16 surrogate in UTF-8", raw().replace(b"}", b', "note": "\xed\xa0\x80"}'), Reason.NOT_UTF8),
    ("data as a list", raw(data=[1, 2]), Reason.WRONG_TYPE),
    ("data of 33 signals", raw(data={f"s{k}": k for k in range(33)}), Reason.OUT_OF_RANGE),
    ("signal name with a space", raw(data={"arm angle": 1.0}), Reason.OUT_OF_RANGE),
    ("signal name of 33", raw(data={"s" * 33: 1.0}), Reason.OUT_OF_RANGE),
    ("empty signal name", raw(data={"": 1.0}), Reason.OUT_OF_RANGE),
    ("signal name not ASCII", raw(data={"\u00e4rm": 1.0}), Reason.OUT_OF_RANGE),
    ("signal as string", raw(data={"arm": "up"}), Reason.WRONG_TYPE),
    ("signal as bool", raw(data={"arm": True}), Reason.WRONG_TYPE),
    ("signal as null", raw(data={"arm": None}), Reason.WRONG_TYPE),
    ("signal as list", raw(data={"arm": [1.0]}), Reason.WRONG_TYPE),
    ("NaN signal", raw(data={"arm": 123456.5}).replace(b"123456.5", b"NaN"), Reason.NON_FINITE),
    ("1e400 signal", raw(data={"arm": 123456.5}).replace(b"123456.5", b"1e400"), Reason.NON_FINITE),
    ("signal of 400 digits", raw(data={"arm": 10**400}), Reason.NON_FINITE),
]
