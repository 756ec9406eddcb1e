"""Nesting depth and array elements read without parsing, checked against
the standard library's json module (the reference parser) on generated JSON."""

from __future__ import annotations

import json

from hypothesis import given, settings
from hypothesis import strategies as st

from receiver.formats.json_shape import MAX_NESTING, array_items, may_nest_deeper, nesting_depth, nests_deeper

# Strings full of the characters that matter: brackets, quotes, backslashes, commas.
_TEXT = st.text(alphabet=st.sampled_from('[]{}",\\:ab \u00e4\u2192'), max_size=8)
_JSON = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False, allow_infinity=False) | _TEXT,
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(_TEXT, inner, max_size=4),
    max_leaves=40,
)
_FAST = settings(max_examples=300, derandomize=True, deadline=None)


def depth_of(value) -> int:
    """Arrays and objects open at once, from the parsed value (the reference)."""
    if isinstance(value, list):
        return 1 + max(map(depth_of, value), default=0)
    if isinstance(value, dict):
        return 1 + max(map(depth_of, value.values()), default=0)
    return 0


def dumped(value, ascii_only: bool, spaced: bool) -> bytes:
    separators = (", ", ": ") if spaced else (",", ":")
    return json.dumps(value, ensure_ascii=ascii_only, separators=separators).encode()


@_FAST
@given(_JSON, st.booleans(), st.booleans())
def test_depth_matches_the_parsed_value(value, ascii_only, spaced):
    data = dumped(value, ascii_only, spaced)
    assert nesting_depth(data) == depth_of(value)
    assert nests_deeper(data, 2) == (depth_of(value) > 2)
    if not may_nest_deeper(data, 2):
        assert depth_of(value) <= 2  # the cheap bound never says "cannot" wrongly


@_FAST
@given(st.lists(_JSON, max_size=6), st.booleans(), st.booleans())
def test_array_items_are_the_elements_as_written(values, ascii_only, spaced):
    data = dumped(values, ascii_only, spaced)
    items = array_items(b" \n" + data + b"\r\n")
    assert [json.loads(item) for item in items] == values
    assert all(item in data for item in items)


def test_deep_nesting_is_measured_without_recursion():
    assert nesting_depth(b"[" * 100_000 + b"]" * 100_000) == 100_000
    assert nesting_depth(b'{"a":' * 50_000 + b"1" + b"}" * 50_000) == 50_000
    assert nesting_depth(b"[" * 40) == 40  # never closed: still as deep as it goes
    assert not nests_deeper(b"[" * MAX_NESTING + b"]" * MAX_NESTING)
    assert nests_deeper(b"[" * (MAX_NESTING + 1) + b"]" * (MAX_NESTING + 1))


def test_brackets_in_strings_and_escapes_are_not_structure():
    assert nesting_depth(b'{"a": "[[[[[[", "b": "\\\\", "c": ["\\"]]]]"]}') == 2
    assert nesting_depth(b'"\\\\\\"[[["') == 0


def test_what_is_not_one_array_of_elements_has_no_items():
    for data in (b"", b"   ", b"{}", b"1", b"[1,2", b"[1,,2]", b"[1,]", b"[1] [2]", b"[1] x", b'["a]'):
        assert array_items(data) is None, data
    assert array_items(b"[ ]") == []
