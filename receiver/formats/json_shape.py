"""What JSON bytes look like from outside, without parsing them: how deep
their arrays and objects nest, and where a top-level array's elements lie.

The wire decoder and the recording reader ask this before msgspec sees the
bytes: msgspec recurses once per level, so a message nested a thousand deep
costs stack and ends in a RecursionError whose depth depends on the caller's
stack. Bytes operations and numpy only; it never decodes, never raises on any
input, and its answers are exact for valid JSON (for bytes that are not JSON
they are a best guess, and the decoder refuses those anyway).
"""

from __future__ import annotations

import numpy as np

MAX_NESTING = 32  # arrays and objects open at once in one message, its own object counted

# Brackets and quotes only, with { } written as [ ]; backslashes are dealt with before.
_AS_SQUARE = bytes.maketrans(b"{}", b"[]")
_NOT_STRUCTURE = bytes(c for c in range(256) if c not in b'[]{}"')
_QUICK_PASSES = 4  # valid messages nest 2 deep, batches 3: a few passes of replace settle them
_OPEN, _CLOSE = ord("["), ord("]")
# Counting brackets costs about 0.6 ns a byte: past this length (a batch),
# the exact check costs less than a count that would fail anyway.
COUNT_BELOW_BYTES = 1024


def may_nest_deeper(data: bytes, limit: int = MAX_NESTING) -> bool:
    """A cheap bound: False when ``data`` is short and holds at most ``limit`` brackets, so
    cannot nest deeper than ``limit``; True means "ask ``nesting_depth``"."""
    return len(data) >= COUNT_BELOW_BYTES or data.count(b"[") + data.count(b"{") > limit


def _skeleton(data: bytes) -> bytes:
    """The brackets of ``data`` outside strings, in order, with { and } written as [ and ]."""
    if b"\\" in data:
        # A backslash escapes the next character: pairs of them first, then an
        # escaped quote; a backslash left over escapes a letter, which goes below.
        data = data.replace(b"\\\\", b"").replace(b'\\"', b"")
    skeleton = data.translate(_AS_SQUARE, _NOT_STRUCTURE)
    # Dropping two adjacent quotes leaves every other character inside or
    # outside strings as it was; usually that drops every string.
    skeleton = skeleton.replace(b'""', b"")
    if b'"' in skeleton:  # strings that hold brackets: keep what lies between them
        skeleton = b"".join(skeleton.split(b'"')[::2])
    return skeleton


def nesting_depth(data: bytes) -> int:
    """How many arrays and objects are open at once, at most, outside strings (0 for a bare value)."""
    skeleton = shrunk = _skeleton(data)
    for depth in range(_QUICK_PASSES):
        if not shrunk:
            return depth
        # In balanced brackets each pass removes exactly the innermost level.
        shrunk = shrunk.replace(b"[]", b"")
    steps = _OPEN + 1 - np.frombuffer(skeleton, dtype=np.uint8).astype(np.int64)  # [ -> +1, ] -> -1
    return max(0, int(np.cumsum(steps).max()))


def nests_deeper(data: bytes, limit: int = MAX_NESTING) -> bool:
    """True when arrays and objects in ``data`` nest deeper than ``limit`` (the cheap bound first)."""
    return may_nest_deeper(data, limit) and nesting_depth(data) > limit


def array_items(data: bytes) -> list[bytes] | None:
    """The elements of a top-level JSON array, cut at its top-level commas
    without parsing them; None when ``data`` is not one array of non-empty elements.

    For a batch that cannot be handed to the decoder whole (an element nested
    too deep, or not UTF-8): each element is then judged on its own.
    """
    chars = np.frombuffer(data, dtype=np.uint8)
    n = len(chars)
    if n == 0:
        return None
    index = np.arange(n)
    backslash = chars == ord("\\")
    # A character is escaped when an odd run of backslashes ends just before it.
    last_other = np.maximum.accumulate(np.where(backslash, -1, index))
    run_before = np.zeros(n, dtype=np.int64)
    run_before[1:] = index[:-1] - last_other[:-1]
    quote = (chars == ord('"')) & (run_before % 2 == 0)
    outside = np.cumsum(quote) % 2 == 0  # an opening quote counts as inside, a closing one as outside
    opens = ((chars == _OPEN) | (chars == ord("{"))) & outside
    closes = ((chars == _CLOSE) | (chars == ord("}"))) & outside
    depth = np.cumsum(opens.astype(np.int64) - closes)  # after each character
    start = len(data) - len(data.lstrip())
    if start >= n or chars[start] != _OPEN:
        return None
    ends = np.flatnonzero(depth[start:] == 0)
    if not len(ends):
        return None  # never closed
    end = start + int(ends[0])
    if data[end + 1 :].strip():
        return None
    commas = start + np.flatnonzero((chars[start:end] == ord(",")) & outside[start:end] & (depth[start:end] == 1))
    bounds = [start, *commas.tolist(), end]
    items = [data[a + 1 : b].strip() for a, b in zip(bounds, bounds[1:])]
    if items == [b""]:
        return []
    return items if all(items) else None
