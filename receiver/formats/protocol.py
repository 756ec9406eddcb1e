"""Wire protocol v1: bytes in, typed samples or typed failures out.

Owns the rules of DESIGN.md's wire table. It never touches a socket, a clock
or a session: the transports feed it bytes and the recording reader feeds it
lines. Decoding uses msgspec, which validates while it parses.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from enum import StrEnum
from operator import attrgetter
from typing import Annotated, Literal

import msgspec

from receiver.formats.json_shape import MAX_NESTING, array_items, may_nest_deeper, nesting_depth

PROTOCOL_VERSION = 1
MQTT_PREFIX = "podwatch"  # topics <prefix>/<robot>/samples and <prefix>/<robot>/pose, prefix configurable
MAX_MESSAGE_BYTES = 64 * 1024  # one datagram or frame; keeps a bad sender's cost bounded
MAX_BATCH = 256
MAX_SIGNALS = 32  # entries of a message's "data"
# \Z, not $: Python's $ also matches before a trailing newline ("bot\n").
ROBOT_PATTERN = r"^[A-Za-z0-9_.\-]{1,32}\Z"

_Finite = float  # msgspec refuses NaN/Infinity tokens and numbers past a double's range
_Count = Annotated[int, msgspec.Meta(ge=-(2**31), le=2**32 - 1)]  # signed or unsigned 32-bit counters
# Names are checked as robot names are, once per distinct name (split_bad_names),
# length included: a length constraint here cost 150 ns a message of three signals.
Signals = Annotated[dict[str, _Finite], msgspec.Meta(max_length=MAX_SIGNALS)]


class Sample(msgspec.Struct, gc=False, omit_defaults=True, forbid_unknown_fields=True):
    """One wire message as validated; ``rx`` is only present in recordings.

    gc=False: samples hold no reference cycles, and keeping hundreds of
    thousands of them out of the garbage collector's lists keeps decoding fast.
    Decoded as it is, a message may hold no field this protocol does not know
    (see decode_keeping_raw); ``WithOwnFields`` decodes one that does.
    """

    v: Literal[1]
    # Length here; the characters are checked once per distinct name by
    # split_bad_names: a regex per message halves the decoder's speed.
    robot: Annotated[str, msgspec.Meta(min_length=1, max_length=32)]
    seq: Annotated[int, msgspec.Meta(ge=0, le=2**32 - 1)]
    t: _Finite
    ticks: list[_Count]
    pose: tuple[_Finite, _Finite, _Finite] | None = None
    imu: _Finite | None = None
    loop: Annotated[float, msgspec.Meta(ge=0.0)] | None = None
    reset: bool = False
    data: Signals | None = None  # the team's own signals: name -> finite number
    rx: float | None = None


class WithOwnFields(Sample, forbid_unknown_fields=False):
    """A message with fields of the team's own, which decoding skips (the recording keeps its bytes)."""


class PoseMessage(msgspec.Struct, tag_field="v", tag=PROTOCOL_VERSION, omit_defaults=True, gc=False):
    """A robot's latest recompute: what a hub tells its listeners and <prefix>/<robot>/pose carries.

    REP 103, the profile's distance unit, radians; ``reported`` and the two
    errors are absent when the robot sent no pose. Encodes with "v" first.
    """

    robot: str
    seq: int
    t: float
    rx: float
    pose: tuple[float, float, float]
    position_error: float | None = None
    heading_error: float | None = None
    reported: tuple[float, float, float] | None = None


class Reason(StrEnum):
    """Why a message was dropped; the names are what statistics and logs show."""

    NOT_JSON = "not_json"
    WRONG_TYPE = "wrong_type"
    MISSING_FIELD = "missing_field"
    OUT_OF_RANGE = "out_of_range"
    NON_FINITE = "non_finite"
    TOO_LARGE = "too_large"
    NESTED_TOO_DEEP = "nested_too_deep"
    NOT_UTF8 = "not_utf8"
    WRONG_TICKS_LENGTH = "wrong_ticks_length"
    TOO_MANY_ROBOTS = "too_many_robots"
    OVER_RATE_CAP = "over_rate_cap"  # the robot sent faster than the receiver's per-robot cap
    SOURCE_NOT_ALLOWED = "source_not_allowed"  # from an address outside the receiver's --allow networks


@dataclass(frozen=True)
class Failure:
    """A message that was refused, why (``reason``) and the decoder's one-line ``detail``."""

    reason: Reason
    detail: str
    robot: str | None = None  # the sender, when the bad message still names a valid robot

    def __str__(self) -> str:
        return f"{self.reason}: {self.detail}"


# Known fields only: such a message nests at most 3 deep (with a batch's
# array) and msgspec has checked every string in it as UTF-8, so the screen
# (_screen) is needed only after these fail; then the lenient ones decode.
_one = msgspec.json.Decoder(Sample)
_one_or_batch = msgspec.json.Decoder(Sample | list[Sample])
_one_lenient = msgspec.json.Decoder(WithOwnFields)
_one_or_batch_lenient = msgspec.json.Decoder(WithOwnFields | list[WithOwnFields])
_raw_items = msgspec.json.Decoder(list[msgspec.Raw])


class _Sender(msgspec.Struct):
    robot: Annotated[str, msgspec.Meta(pattern=ROBOT_PATTERN)]


_sender = msgspec.json.Decoder(_Sender)
_NON_FINITE_TOKEN = re.compile(rb"(?<![\w\"])-?(?:NaN|Infinity|inf|nan)(?![\w\"])")
# The same tokens where a JSON value starts (after ":", "[" or ","), or in a
# string that looks so: rewritten to an out-of-range number they let a batch
# with one NaN split into elements, which are then cut from the bytes as sent
# (_split_with_non_finite).
_NON_FINITE_VALUE = re.compile(rb"(?<=[:\[,])\s*-?(?:NaN|Infinity|inf|nan)(?![\w\"])")
_OUT_OF_RANGE_NUMBER = b"1e999"


def classify_error(exc: msgspec.MsgspecError | RecursionError, data: bytes) -> Failure:
    """Map a msgspec error to our reason codes, with its one-line text."""
    if isinstance(exc, RecursionError):
        return Failure(Reason.NESTED_TOO_DEEP, "nested deeper than the decoder allows")
    text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    if isinstance(exc, msgspec.ValidationError):
        if text.startswith("Object missing required field"):
            reason = Reason.MISSING_FIELD
        elif text.startswith("Number out of range"):
            reason = Reason.NON_FINITE
        elif re.match(r"Expected `[^`]+`, got", text) or "of length" in text and "array" in text:
            reason = Reason.WRONG_TYPE
        else:
            reason = Reason.OUT_OF_RANGE
    elif _NON_FINITE_TOKEN.search(data):
        reason = Reason.NON_FINITE
    else:
        reason = Reason.NOT_JSON
    return Failure(reason, text)


_ROBOT_NAME = re.compile(ROBOT_PATTERN)
_good_names: set[str] = set()
_GOOD_NAMES_CACHED = 4096  # bounds the cache against a flood of made-up names


_NAME_RULE = "1-32 of A-Z a-z 0-9 _ . -"
_robot_of, _data_of = attrgetter("robot"), attrgetter("data")


def split_bad_names(samples: list[Sample], with_signals: bool | None = None) -> tuple[list[Sample], list[Failure]]:
    """Keep samples whose robot name and signal names are 1-32 of A-Z a-z 0-9 _ . -; refuse the rest.

    ``with_signals`` False says that no sample carries "data" (the caller has
    looked); None looks.
    """
    names = set(map(_robot_of, samples))
    if with_signals is None:
        with_signals = any(map(_data_of, samples))
    if with_signals:
        names.update(*filter(None, map(_data_of, samples)))
    if names <= _good_names:
        return samples, []
    bad = {name for name in names if not _ROBOT_NAME.match(name)}
    if len(_good_names) < _GOOD_NAMES_CACHED:
        _good_names.update(names - bad)
    if not bad:
        return samples, []
    kept, failures = [], []
    for sample in samples:
        if sample.robot in bad:
            failures.append(Failure(Reason.OUT_OF_RANGE, f"robot name {sample.robot!r} is not {_NAME_RULE}"))
        elif sample.data and not bad.isdisjoint(sample.data):
            name = next(name for name in sample.data if name in bad)
            failures.append(Failure(Reason.OUT_OF_RANGE, f"signal name {name!r} is not {_NAME_RULE}", sample.robot))
        else:
            kept.append(sample)
    return kept, failures


def _named(failure: Failure, data: bytes) -> Failure:
    """The failure with its robot filled in when the message still names one."""
    try:
        robot = _sender.decode(data).robot
    except (msgspec.MsgspecError, RecursionError):
        return failure
    return Failure(failure.reason, failure.detail, robot)


def _screen(data: bytes, check_nesting: bool = True) -> Failure | None:
    """The rules checked before decoding: nesting (exact) and UTF-8; None when both hold.

    Callers first ask the cheap questions (``data.isascii()``,
    ``may_nest_deeper``) and call this only when one fails.
    """
    if check_nesting:
        depth = nesting_depth(data)
        if depth > MAX_NESTING:
            return Failure(Reason.NESTED_TOO_DEEP, f"arrays and objects nested {depth} deep, limit {MAX_NESTING}")
    if not data.isascii():
        try:
            data.decode("utf-8")
        except UnicodeDecodeError as exc:
            return _named(Failure(Reason.NOT_UTF8, f"byte {exc.start} is not UTF-8 ({exc.reason})"), data)
    return None


def _as_sample(sample: Sample) -> Sample:
    """A plain Sample of the same fields (a WithOwnFields is one only by subclass)."""
    return sample if type(sample) is Sample else Sample(*msgspec.structs.astuple(sample))


def decode_message(data: bytes, check_nesting: bool = True) -> Sample | Failure:
    """Decode exactly one message (a recording line, or one batch element).

    The recording reader passes ``check_nesting=False``: its bulk path cannot
    afford the nesting check, so a line is refused for nesting only when the
    decoder itself cannot go that deep, in both of its paths alike.
    """
    try:
        sample = _one.decode(data)
    except (msgspec.MsgspecError, RecursionError):
        if not data.isascii() or check_nesting and may_nest_deeper(data):
            refused = _screen(data, check_nesting)
            if refused is not None:
                return refused
        try:
            sample = _as_sample(_one_lenient.decode(data))
        except (msgspec.MsgspecError, RecursionError) as exc:
            failure = classify_error(exc, data)
            return failure if failure.reason is Reason.NESTED_TOO_DEEP else _named(failure, data)
    good, failures = split_bad_names([sample])
    return failures[0] if failures else sample


def decode(data: bytes) -> tuple[list[Sample], list[Failure]]:
    """Decode one datagram or frame: a message or a JSON array of messages.

    Every valid message in a batch is returned even when others in it fail.
    The receivers call ``decode_keeping_raw``, which also keeps each
    message's bytes for the recording; this is the same without them.
    """
    samples, failures, _ = decode_keeping_raw(data)
    return samples, failures


def decode_keeping_raw(data: bytes) -> tuple[list[Sample], list[Failure], list[bytes]]:
    """Samples, failures, and the bytes of each valid message as received, aligned with the samples.

    For live recordings, which keep fields this protocol does not know. A
    single message's bytes are the datagram (or frame) itself, whitespace
    around the object included, at no cost; only a batch is parsed a second
    time, to find where each element lies.
    """
    if len(data) > MAX_MESSAGE_BYTES:
        return [], [Failure(Reason.TOO_LARGE, f"{len(data)} bytes, limit {MAX_MESSAGE_BYTES}")], []
    try:
        decoded = _one_or_batch.decode(data)  # known fields only: nothing to screen (see _one)
    except (msgspec.MsgspecError, RecursionError):
        # Cheap questions first: ASCII is UTF-8, and a short message with at
        # most 32 brackets cannot nest deeper. The exact checks only when one fails.
        if not data.isascii() or may_nest_deeper(data):
            refused = _screen(data)
            if refused is not None:
                items = array_items(data)  # a batch: each element is judged on its own
                return ([], [refused], []) if items is None else _decode_each(items)
        try:
            decoded = _one_or_batch_lenient.decode(data)
        except (msgspec.MsgspecError, RecursionError) as exc:
            return _decode_items(data, exc)
        decoded = _as_sample(decoded) if isinstance(decoded, Sample) else list(map(_as_sample, decoded))
    if isinstance(decoded, Sample):
        signals = decoded.data
        if decoded.robot in _good_names and (signals is None or signals.keys() <= _good_names):  # the usual message
            return [decoded], [], [data]
        samples, failures = split_bad_names([decoded])
        return samples, failures, [data] if samples else []
    if len(decoded) > MAX_BATCH:
        return [], [Failure(Reason.TOO_LARGE, f"batch of {len(decoded)} messages, limit {MAX_BATCH}")], []
    samples, failures = split_bad_names(decoded)
    # The batch decoded whole, so it splits into as many elements, in order.
    items = _raw_items.decode(data)
    if failures:
        kept = set(map(id, samples))
        items = [raw for sample, raw in zip(decoded, items) if id(sample) in kept]
    return samples, failures, [bytes(raw) for raw in items]


_AT_RX = "at `$.rx`"  # the end of msgspec's text for an error in a message's "rx"
_ANY = msgspec.json.Decoder()


def _without_robot_rx(data: bytes, failed: str) -> bytes | None:
    """The message without the "rx" the robot sent, when that kept it out
    (``failed``, the decoder's text, says where the decode failed); else None.

    "rx" is the receiver's field, not the robot's: on the wire it is a field
    the protocol does not know, so a robot's own "rx" of another type (a
    string, say) must not cost the message. Re-encoded without it, the
    message loses that key in the recording, which gets the receiver's "rx"
    instead. Only on the path of a message that failed: no cost otherwise.
    """
    if not failed.endswith(_AT_RX):
        return None
    try:
        message = _ANY.decode(data)
    except (msgspec.MsgspecError, RecursionError):
        return None
    if not isinstance(message, dict) or "rx" not in message:
        return None
    del message["rx"]
    return msgspec.json.encode(message)


def _split_with_non_finite(data: bytes) -> list[bytes] | None:
    """The elements of a batch that is not JSON only for a NaN or Infinity
    somewhere, each as it was sent; None when that does not make it JSON.

    The tokens are rewritten to an out-of-range number so that the array
    splits, and each element is then cut from the original bytes: an element
    that held such a token is refused on its own, as it would be alone, and
    a string that merely looks like one (",NaN" in a note) is kept as it was.
    """
    pieces, edits, last, length = [], [], 0, 0  # edits: (where in the rewrite one ends, bytes it added)
    for match in _NON_FINITE_VALUE.finditer(data):
        pieces += [data[last : match.start()], _OUT_OF_RANGE_NUMBER]
        length += match.start() - last + len(_OUT_OF_RANGE_NUMBER)
        edits.append((length, len(_OUT_OF_RANGE_NUMBER) - (match.end() - match.start())))
        last = match.end()
    if not edits:
        return None
    repaired = b"".join(pieces) + data[last:]
    try:
        items = [bytes(item) for item in _raw_items.decode(repaired)]
    except (msgspec.MsgspecError, RecursionError):
        return None

    def original(at: int) -> int:  # a position in the rewrite, outside any rewritten token
        return at - sum(added for end, added in edits if end <= at)

    out, at = [], 0
    for item in items:
        start = repaired.find(item, at)
        at = start + len(item)
        out.append(data[original(start) : original(at)])
    return out


def _decode_items(
    data: bytes, first_error: msgspec.MsgspecError | RecursionError
) -> tuple[list[Sample], list[Failure], list[bytes]]:
    """Slow path after a failure: separate a batch's good elements from bad
    ones; the bytes of each good one come third."""
    stripped = data.lstrip()
    if not stripped.startswith(b"["):
        without = _without_robot_rx(data, str(first_error))
        if without is not None:
            return decode_keeping_raw(without)
        return [], [_named(classify_error(first_error, data), data)], []
    try:
        items = [bytes(item) for item in _raw_items.decode(data)]
    except msgspec.DecodeError as exc:
        items = _split_with_non_finite(data)
        if items is None:
            return [], [classify_error(exc, data)], []
    except (msgspec.MsgspecError, RecursionError) as exc:
        return [], [classify_error(exc, data)], []
    return _decode_each(items)


def _decode_each(items: list[bytes]) -> tuple[list[Sample], list[Failure], list[bytes]]:
    """A batch's elements decoded one by one: samples, failures, and each good one's bytes."""
    if len(items) > MAX_BATCH:
        return [], [Failure(Reason.TOO_LARGE, f"batch of {len(items)} messages, limit {MAX_BATCH}")], []
    samples: list[Sample] = []
    failures: list[Failure] = []
    raws: list[bytes] = []
    for raw in items:
        result = decode_message(raw)
        if isinstance(result, Failure):
            without = _without_robot_rx(raw, result.detail)
            if without is not None:
                raw, result = without, decode_message(without)
        if isinstance(result, Sample):
            samples.append(result)
            raws.append(raw)
        else:
            failures.append(result)
    return samples, failures, raws


def encode(sample: Sample | list[Sample]) -> bytes:
    """Serialise samples back to wire JSON (omitting absent optional fields)."""
    return msgspec.json.encode(sample)
