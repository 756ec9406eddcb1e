"""Property-based fuzzing of the three boundaries that take outside bytes: the
wire decoder, the profile loader and the recording reader (tests/fuzz_inputs.py
says what must hold). Bounded and derandomized, so CI is deterministic and
quick; tests/bench/fuzz_campaign.py runs the same checks for minutes."""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings

from tests.fuzz_inputs import (
    check_datagram,
    check_profile_text,
    check_recording_bytes,
    datagrams,
    profile_texts,
    recordings,
)

_BOUNDED = settings(
    max_examples=150, derandomize=True, deadline=None, database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)


@_BOUNDED
@given(datagrams())
def test_the_decoder_keeps_what_the_wire_table_keeps_and_never_raises(data):
    check_datagram(data)


@_BOUNDED
@given(profile_texts())
def test_a_profile_loads_or_is_one_profile_error(text):
    check_profile_text(text)


@_BOUNDED
@given(recordings())
def test_a_recording_is_read_or_refused_in_one_line(recording):
    check_recording_bytes(*recording)
