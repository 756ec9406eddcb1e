"""Wire protocol v1: bytes in, typed samples or typed failures out.

Owns the rules of DESIGN.md's wire table. It never touches a socket, a clock
or a session: the transports feed it bytes and the recording reader feeds it
lines. Decoding uses msgspec, which validates while it parses.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from enum import StrEnum
from typing import Annotated, Literal

import msgspec

PROTOCOL_VERSION = 1
MAX_MESSAGE_BYTES = 64 * 1024  # one datagram or frame; keeps a bad sender's cost bounded
MAX_BATCH = 256
ROBOT_PATTERN = r"^[A-Za-z0-9_.\-]{1,32}$"

_Finite = float  # msgspec refuses NaN/Infinity tokens and numbers past a double's range
_Count = Annotated[int, msgspec.Meta(ge=-(2**31), le=2**32 - 1)]  # signed or unsigned 32-bit counters


class Sample(msgspec.Struct, gc=False, omit_defaults=True):
    """One wire message as validated; ``rx`` is only present in recordings.

    gc=False: samples hold no reference cycles, and keeping hundreds of
    thousands of them out of the garbage collector's lists keeps decoding fast.
    """

    v: Literal[1]
    robot: Annotated[str, msgspec.Meta(pattern=ROBOT_PATTERN)]
    seq: Annotated[int, msgspec.Meta(ge=0, le=2**32 - 1)]
    t: _Finite
    ticks: list[_Count]
    pose: tuple[_Finite, _Finite, _Finite] | None = None
    imu: _Finite | None = None
    loop: Annotated[float, msgspec.Meta(ge=0.0)] | None = None
    reset: bool = False
    rx: float | None = None


class Reason(StrEnum):
    """Why a message was dropped; the names are what statistics and logs show."""

    NOT_JSON = "not_json"
    WRONG_TYPE = "wrong_type"
    MISSING_FIELD = "missing_field"
    OUT_OF_RANGE = "out_of_range"
    NON_FINITE = "non_finite"
    TOO_LARGE = "too_large"
    WRONG_TICKS_LENGTH = "wrong_ticks_length"
    TOO_MANY_ROBOTS = "too_many_robots"


@dataclass(frozen=True)
class Failure:
    reason: Reason
    detail: str

    def __str__(self) -> str:
        return f"{self.reason}: {self.detail}"


_one = msgspec.json.Decoder(Sample)
_one_or_batch = msgspec.json.Decoder(Sample | list[Sample])
_raw_items = msgspec.json.Decoder(list[msgspec.Raw])
_NON_FINITE_TOKEN = re.compile(rb"(?<![\w\"])-?(?:NaN|Infinity|inf|nan)(?![\w\"])")


def classify_error(exc: msgspec.MsgspecError, data: bytes) -> Failure:
    """Map a msgspec error to our reason codes, with its one-line text."""
    text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    if isinstance(exc, msgspec.ValidationError):
        if text.startswith("Object missing required field"):
            reason = Reason.MISSING_FIELD
        elif text.startswith("Number out of range"):
            reason = Reason.NON_FINITE
        elif re.match(r"Expected `\w+`, got", text) or "of length" in text and "array" in text:
            reason = Reason.WRONG_TYPE
        else:
            reason = Reason.OUT_OF_RANGE
    elif _NON_FINITE_TOKEN.search(data):
        reason = Reason.NON_FINITE
    else:
        reason = Reason.NOT_JSON
    return Failure(reason, text)


def decode_message(data: bytes) -> Sample | Failure:
    """Decode exactly one message (a recording line, or one batch element)."""
    try:
        return _one.decode(data)
    except msgspec.MsgspecError as exc:
        return classify_error(exc, data)


def decode(data: bytes) -> tuple[list[Sample], list[Failure]]:
    """Decode one datagram or frame: a message or a JSON array of messages.

    Every valid message in a batch is returned even when others in it fail.
    """
    if len(data) > MAX_MESSAGE_BYTES:
        return [], [Failure(Reason.TOO_LARGE, f"{len(data)} bytes, limit {MAX_MESSAGE_BYTES}")]
    try:
        decoded = _one_or_batch.decode(data)
    except msgspec.MsgspecError as exc:
        return _decode_items(data, exc)
    if isinstance(decoded, Sample):
        return [decoded], []
    if len(decoded) > MAX_BATCH:
        return [], [Failure(Reason.TOO_LARGE, f"batch of {len(decoded)} messages, limit {MAX_BATCH}")]
    return decoded, []


def _decode_items(data: bytes, first_error: msgspec.MsgspecError) -> tuple[list[Sample], list[Failure]]:
    """Slow path after a failure: separate a batch's good elements from bad ones."""
    stripped = data.lstrip()
    if not stripped.startswith(b"["):
        return [], [classify_error(first_error, data)]
    try:
        items = _raw_items.decode(data)
    except msgspec.MsgspecError as exc:
        return [], [classify_error(exc, data)]
    if len(items) > MAX_BATCH:
        return [], [Failure(Reason.TOO_LARGE, f"batch of {len(items)} messages, limit {MAX_BATCH}")]
    samples: list[Sample] = []
    failures: list[Failure] = []
    for raw in items:
        result = decode_message(bytes(raw))
        (samples if isinstance(result, Sample) else failures).append(result)
    return samples, failures


def encode(sample: Sample | list[Sample]) -> bytes:
    """Serialise samples back to wire JSON (omitting absent optional fields)."""
    return msgspec.json.encode(sample)
