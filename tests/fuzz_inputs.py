"""Hostile inputs for the three boundaries that take outside bytes, and what must hold for each.

Shared by the bounded property tests (tests/formats/test_fuzz.py) and the
long campaign (tests/bench/fuzz_campaign.py). Each ``check_*`` raises
AssertionError when a rule of the wire table, the recording contract or the
profile contract is broken, and lets any other exception escape: both are
failures. The wire oracle is a plain reading of the wire table with the
standard library's json module.
"""

from __future__ import annotations

import gzip
import json
import math
import re
import tempfile
from pathlib import Path

from hypothesis import strategies as st

from receiver.errors import ProfileError, RecordingError
from receiver.formats.profile_toml import load_profile
from receiver.formats.protocol import Reason, Sample, decode_keeping_raw, decode_message
from receiver.formats.recording import read_recording
from tests.conftest import FIXTURES

GOOD = {"v": 1, "robot": "practice-bot", "seq": 7, "t": 1.25, "ticks": [10, -20, 30], "pose": [1.0, 2.0, 0.5]}
_NAME = re.compile(r"[A-Za-z0-9_.\-]{1,32}\Z")
PROFILE_TEXT = (FIXTURES / "practice-bot.toml").read_text()
HEADER = (FIXTURES / "practice-bot-square.jsonl").read_bytes().split(b"\n", 1)[0]

# ---------------------------------------------------------------- values

# Numbers at and past every edge a decoder has: 32 and 64 bits, a double's range, 4300 digits.
_EDGE_INTS = st.sampled_from([0, 1, -1, 2**31 - 1, -(2**31), -(2**31) - 1, 2**32 - 1, 2**32, 2**63, 2**64, 10**30,
                              10**308, 10**400])
_INTS = st.integers() | _EDGE_INTS
_FLOATS = st.floats(allow_nan=False, allow_infinity=False) | st.sampled_from([1e308, -1e308, 5e-324, 0.0, -0.0])
_TEXT = st.text(alphabet=st.sampled_from('ab_.-[]{}",\\:\n\u00e4\u2192\U0001f916 '), max_size=12)
_SCALARS = st.none() | st.booleans() | _INTS | _FLOATS | _TEXT


def _nest(depth: int, kind: str) -> str:
    """A stand-in that _json writes as arrays or objects nested ``depth`` deep (json.dumps
    itself recurses, and would stop short of the depths wanted here)."""
    return f"<<deep {depth} {kind}>>"


_DEEP_MARK = re.compile(rb'"<<deep (\d+) ([\[{])>>"')


def _deep_text(match: re.Match) -> bytes:
    depth = int(match.group(1))
    if match.group(2) == b"[":
        return b"[" * depth + b"1" + b"]" * depth
    return b'{"k":' * depth + b"1" + b"}" * depth


DEEP = st.builds(_nest, st.integers(0, 1500), st.sampled_from("[{"))
JSON_VALUES = st.recursive(
    _SCALARS,
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(_TEXT, inner, max_size=4),
    max_leaves=12,
) | DEEP
SIGNAL_NAMES = st.from_regex(r"[A-Za-z0-9_.\-]{1,32}", fullmatch=True) | _TEXT
SIGNALS = st.dictionaries(SIGNAL_NAMES, _FLOATS | _INTS | _SCALARS, max_size=40)

# Tokens json.dumps never writes: NaN, infinities, numbers past a double, 5,000 digits.
_TOKENS = [b"NaN", b"Infinity", b"-Infinity", b"nan", b"1e400", b"-1e999", b"9" * 5000, b"1" + b"0" * 400]


@st.composite
def messages(draw) -> dict:
    """A message: the good one with fields changed, dropped, added, signals and deep values."""
    message = dict(GOOD)
    if draw(st.booleans()):
        message["data"] = draw(SIGNALS)
    for key in draw(st.lists(st.sampled_from([*GOOD, "imu", "loop", "reset", "rx", "data", "extra"]), max_size=3)):
        choice = draw(st.integers(0, 3))
        if choice == 0:
            message.pop(key, None)
        else:
            message[key] = draw(JSON_VALUES)
    return message


def _json(value) -> bytes:
    return _DEEP_MARK.sub(_deep_text, json.dumps(value).encode())


@st.composite
def datagrams(draw) -> bytes:
    """Bytes a receiver may get: messages alone or in batches, with hostile tokens and bytes."""
    kind = draw(st.integers(0, 9))
    if kind == 0:
        return draw(st.binary(max_size=3000))
    if kind <= 5:
        data = _json(draw(messages()))
    else:
        data = b"[" + b",".join(_json(m) for m in draw(st.lists(messages(), max_size=8))) + b"]"
    if draw(st.booleans()):  # a token in place of some number or value
        spots = [m.end() for m in re.finditer(rb"[:\[,] ?", data)]
        if spots:
            at = draw(st.sampled_from(spots))
            data = data[:at] + draw(st.sampled_from(_TOKENS)) + data[at:].lstrip(b"0123456789.e-+truefalsn")
    if draw(st.integers(0, 3)) == 0:  # bytes that are not UTF-8, or a cut
        at = draw(st.integers(0, len(data)))
        data = data[:at] + draw(st.sampled_from([b"\xff", b"\xc0\xaf", b"\xed\xa0\x80", b"\x80", b"", b"\x00"])) + (
            data[at:] if draw(st.booleans()) else b"")
    return data


# ---------------------------------------------------------------- the wire oracle

def _reject_constant(token: str):
    raise ValueError(token)


def _depth(value) -> int:
    """Arrays and objects open at once (iterative: the values may be deeper than Python recurses)."""
    deepest, todo = 0, [(value, 1)]
    while todo:
        value, level = todo.pop()
        if isinstance(value, (list, dict)):
            deepest = max(deepest, level)
            todo.extend((item, level + 1) for item in (value.values() if isinstance(value, dict) else value))
    return deepest


def _number(value) -> bool:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return False
    try:
        return math.isfinite(float(value))
    except OverflowError:  # an integer past a double's range
        return False


def _integer(value, low: int, high: int) -> bool:
    return isinstance(value, int) and not isinstance(value, bool) and low <= value <= high


def oracle(message) -> bool:
    """Whether one parsed message (the json module's reading) keeps the wire table's rules."""
    if not isinstance(message, dict) or _depth(message) > 32:
        return False
    ok = (
        message.get("v", None) == 1 and _integer(message["v"], 1, 1)
        and isinstance(message.get("robot"), str) and bool(_NAME.match(message["robot"]))
        and _integer(message.get("seq"), 0, 2**32 - 1)
        and _number(message.get("t"))
        and isinstance(message.get("ticks"), list)
        and all(_integer(c, -(2**31), 2**32 - 1) for c in message["ticks"])
    )
    pose = message.get("pose")
    ok = ok and (pose is None or isinstance(pose, list) and len(pose) == 3 and all(map(_number, pose)))
    ok = ok and all(message.get(k) is None or _number(message[k]) for k in ("imu", "loop"))
    ok = ok and (message.get("loop") is None or message["loop"] >= 0)
    ok = ok and isinstance(message.get("reset", False), bool)
    data = message.get("data")
    return ok and (data is None or isinstance(data, dict) and len(data) <= 32
                   and all(_NAME.match(k) and _number(v) for k, v in data.items()))


def _parsed(data: bytes):
    """The json module's reading of the bytes, or None when they are not UTF-8 JSON."""
    try:
        return json.loads(data.decode("utf-8"), parse_constant=_reject_constant)
    except (ValueError, RecursionError):
        return None


def check_datagram(data: bytes) -> None:
    """decode_keeping_raw never raises, explains every refusal in one line, keeps
    exactly the messages the oracle keeps (for JSON it can read) with their bytes."""
    samples, failures, raws = decode_keeping_raw(data)
    assert len(samples) == len(raws)
    assert all(isinstance(f.reason, Reason) and "\n" not in f.detail and len(f.detail) < 300 for f in failures)
    for sample, raw in zip(samples, raws):
        again = decode_message(raw)
        assert isinstance(again, Sample) and again.seq == sample.seq
        assert getattr(again, "data", None) == getattr(sample, "data", None)
    if len(data) > 64 * 1024:
        return
    parsed = _parsed(data)
    if parsed is None:
        return
    elements = parsed if isinstance(parsed, list) else [parsed]
    if isinstance(parsed, list) and len(parsed) > 256:
        assert samples == []
        return
    expected = [m["seq"] for m in elements if oracle(m)]
    assert [s.seq for s in samples] == expected, (expected, failures)


# ---------------------------------------------------------------- profiles

_TOML_VALUES = st.sampled_from([
    "0", "-1", "1e308", "-1e308", "1e-308", "inf", "-inf", "nan", "9" * 400, "9" * 5000, "1.0e400",
    "8192", "1.378", "0.0", "true", '"text"', '"\\n"', "[]", "[1, 2]", "{a = 1}", "1979-05-27T07:32:00Z",
    "0x7fffffffffffffff", "1_000_000_000_000", "360.5", "1e-12", '""', '"' + "w" * 40 + '"',
]) | st.builds(lambda d, k: ("[" if k else "{a = ") * d + "1" + ("]" if k else "}") * d, st.integers(1, 3000),
               st.booleans()) | st.floats(allow_nan=False).map(repr) | st.integers().map(str)
_PROFILE_LINES = PROFILE_TEXT.splitlines()
_VALUE_LINES = [i for i, line in enumerate(_PROFILE_LINES) if "=" in line and not line.startswith("#")]


@st.composite
def profile_texts(draw) -> bytes:
    """The practice robot's profile with values replaced, lines dropped or repeated, or bytes changed."""
    lines = list(_PROFILE_LINES)
    for _ in range(draw(st.integers(1, 3))):
        kind = draw(st.integers(0, 5))
        at = draw(st.sampled_from(_VALUE_LINES))
        key = lines[at].split("=", 1)[0]
        if kind <= 2:
            lines[at] = key + "= " + draw(_TOML_VALUES)
        elif kind == 3:
            lines[at] = ""
        elif kind == 4:
            lines += ["[[wheel]]", *_PROFILE_LINES[12:21]] * draw(st.integers(1, 20))
        else:
            lines.insert(at, draw(st.text(max_size=30)).replace("\r", ""))
    text = "\n".join(lines).encode("utf-8", "surrogatepass")
    if draw(st.integers(0, 4)) == 0:
        at = draw(st.integers(0, len(text)))
        text = text[:at] + draw(st.binary(max_size=8)) + text[at + draw(st.integers(0, 8)):]
    return text


def check_profile_file(path: Path) -> None:
    """load_profile gives a profile whose every wheel rolls a finite, non-zero distance per
    count, or one ProfileError line that starts with the file's name; nothing else."""
    try:
        profile = load_profile(path)
    except ProfileError as exc:
        assert "\n" not in str(exc) and str(exc).startswith(f"{path}: ") and len(str(exc)) < 400, str(exc)
        return
    for wheel in profile.wheels:
        assert math.isfinite(wheel.travel_per_count) and wheel.travel_per_count != 0.0


def check_profile_text(text: bytes) -> None:
    """check_profile_file on the text written to a temporary file."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "robot.toml"
        path.write_bytes(text)
        check_profile_file(path)


# ---------------------------------------------------------------- recordings

_LINES = st.one_of(
    messages().map(_json),
    datagrams(),
    st.builds(lambda d: _json({**GOOD, "extra": _nest(d, "[")}), st.integers(0, 3000)),
    st.just(HEADER),
    st.builds(lambda v: _json({"recording": v, "profiles": {}}), JSON_VALUES),
    st.builds(lambda p: _json({"recording": 1, "profiles": {"practice-bot": p}}), JSON_VALUES),
)


@st.composite
def recordings(draw) -> tuple[bytes, int, bool]:
    """(file bytes, valid message lines that must all be read, gzip); lines hold no line breaks.

    The count is 0 when nothing says how many counts a message has (no
    header) or the gzip stream is cut: then valid lines may be lost.
    """
    header = draw(st.booleans())
    lines = [HEADER] if header else []
    valid = 0
    for k in range(draw(st.integers(0, 12))):
        if draw(st.integers(0, 2)) == 0:
            lines.append(_json({**GOOD, "seq": k, "rx": 1.0 + k}))
            valid += 1
        else:
            lines.append(draw(_LINES).replace(b"\n", b" ").replace(b"\r", b" "))
    body = b"\n".join(lines) + (b"\n" if draw(st.booleans()) else b"")
    packed = draw(st.booleans())
    if packed:
        body = gzip.compress(body, compresslevel=1)
        if draw(st.booleans()):
            body = body[: draw(st.integers(0, len(body)))]
            valid = 0
    return body, valid if header else 0, packed


def check_recording(path: Path, valid: int) -> None:
    """read_recording reads a file or refuses it in one line (RecordingError, or ProfileError
    for a header profile); every valid line it was given is read."""
    try:
        data = read_recording(path)
    except (RecordingError, ProfileError) as exc:
        assert "\n" not in str(exc) and len(str(exc)) < 600, str(exc)
        return
    assert all("\n" not in w for w in data.warnings)
    if valid:
        assert len(data.robots["practice-bot"]) >= valid


def check_recording_bytes(body: bytes, valid: int, packed: bool) -> None:
    """check_recording on the bytes written to a temporary file (.jsonl or .jsonl.gz)."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / ("rec.jsonl.gz" if packed else "rec.jsonl")
        path.write_bytes(body)
        check_recording(path, valid)
