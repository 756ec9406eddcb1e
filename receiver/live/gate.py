"""The gate in front of the decoder: which sources may send, and how fast each robot may.

Owns the two cheap checks a transport makes on a datagram's (or frame's)
bytes before it pays for decoding them: the source address against the
``--allow`` networks, and the robot's message count in the current window
against the per-robot rate cap. The robot's name is read with one regular
expression over the bytes, not a JSON parse: a flood under one name is then
dropped for well under a microsecond a datagram, before the hub's work of
recording and recomputing, and cannot crowd out the others. It counts what it refuses, by robot and by source, for the hub to
report; it never decodes a message and never reads a clock (times are
arguments).

Each transport has its own gate, used from that transport's one thread:
its counters have a single writer, and the hub reads them from another
thread through ``dict`` copies (atomic in CPython).
"""

from __future__ import annotations

import ipaddress
import math
import re
from typing import Iterable

# Well above any real control loop (5-30 ms loops send 33-200 messages/s;
# DESIGN.md, "Check values"), and low enough that a flood under one name
# stays a small part of what the receiver can take.
DEFAULT_MAX_RATE = 2000.0
WINDOW_S = 1.0  # the cap counts messages per robot in windows of this length
_ROBOT_KEY = b'"robot"'
# The first "robot" key with a string value of a robot id's length (1-32
# characters, DESIGN.md) and no escapes; 0.25 us where three byte searches
# took 0.6 us.
_NAME = re.compile(rb'"robot"\s*:\s*"([^"\\]{1,32})"')
_BATCH = ord("[")
# Refusals are counted by name (or source) for this many names; the rest
# share one entry, so invented names cannot grow the counters without bound.
MAX_COUNTED_NAMES = 1024
OTHER_NAMES = b""  # the entry for a message with no readable name, and for names past the limit
_search = _NAME.search

Network = ipaddress.IPv4Network | ipaddress.IPv6Network


def parse_networks(texts: Iterable[str]) -> list[Network]:
    """``--allow`` values (CIDR, or a bare address) -> networks; ValueError names a bad one."""
    networks = []
    for text in texts:
        try:
            networks.append(ipaddress.ip_network(text, strict=False))
        except ValueError:
            raise ValueError(f"--allow expects an address or network like 192.168.1.0/24, got {text!r}") from None
    return networks


def robot_name(data: bytes) -> bytes:
    """The robot's name as the bytes of a message hold it, found without parsing JSON;
    OTHER_NAMES when there is none to be read. For a batch, the first message's.

    Only a rate key: a message that hides its name (an escaped quote, a
    "robot" key nested in another field) is counted under whatever name
    this finds, and the decoder still checks it fully.
    """
    found = _NAME.search(data)
    return OTHER_NAMES if found is None else found[1]


class Gate:
    """Per-transport checks before decoding: ``source_allowed`` and ``admit``.

    ``max_rate`` messages per robot per second (counted in WINDOW_S windows;
    a batch counts each message in it, found by its "robot" keys).
    ``allow``: networks sources must be in; empty allows every source.
    """

    def __init__(self, max_rate: float = DEFAULT_MAX_RATE, allow: Iterable[Network] = ()) -> None:
        if not max_rate > 0:
            raise ValueError(f"the rate cap must be positive, got {max_rate!r}")
        self.max_rate = max_rate
        self.per_window = max_rate * WINDOW_S
        self.allow = tuple(allow)
        self._counts: dict[bytes, int] = {}
        self._window_end = -math.inf
        self._verdicts: dict[str, bool] = {}  # source host -> allowed, for hosts seen
        # What was refused, for the hub (single writer: the transport's thread).
        self.over_cap: dict[bytes, int] = {}  # messages over the cap, by robot name
        self.not_allowed: dict[str, int] = {}  # datagrams or connections refused, by source host
        self.refused = 0  # changes whenever either grows: the hub looks further only then

    def source_allowed(self, host: str) -> bool:
        """Whether ``host`` (an IP address as text) may send; a refusal is counted."""
        verdict = self._verdicts.get(host)
        if verdict is None:
            verdict = self._decide(host)
        if not verdict:
            key = host if host in self.not_allowed or len(self.not_allowed) < MAX_COUNTED_NAMES else "other sources"
            self.not_allowed[key] = self.not_allowed.get(key, 0) + 1
            self.refused += 1
        return verdict

    def _decide(self, host: str) -> bool:
        try:
            address = ipaddress.ip_address(host.partition("%")[0])
        except ValueError:
            return False
        if address.version == 6 and address.ipv4_mapped is not None:
            address = address.ipv4_mapped
        verdict = not self.allow or any(address in network for network in self.allow)
        if len(self._verdicts) < MAX_COUNTED_NAMES:
            self._verdicts[host] = verdict
        return verdict

    def admit(self, data: bytes, rx: float) -> bool:
        """Whether the robot that sent ``data`` at ``rx`` (s) is within its cap; the
        messages of a refused datagram are counted against its name."""
        found = _search(data)  # robot_name, inline: this runs for every datagram
        name = OTHER_NAMES if found is None else found[1]
        n = (data.count(_ROBOT_KEY) or 1) if data and data[0] == _BATCH else 1
        if rx >= self._window_end:
            self._counts.clear()
            self._window_end = rx + WINDOW_S
        counts = self._counts
        count = counts.get(name, 0) + n
        counts[name] = count
        if count <= self.per_window:
            return True
        over = self.over_cap
        if name not in over and len(over) >= MAX_COUNTED_NAMES:
            name = OTHER_NAMES
        over[name] = over.get(name, 0) + n
        self.refused += 1
        return False
