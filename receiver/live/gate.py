"""The gate in front of the hub: which sources may send, and how fast each robot may.

Owns the checks a transport makes on each datagram (or frame): the source
address against the ``--allow`` networks, and the robot's message count in
the current window against the per-robot rate cap. A datagram is counted
against its first message's robot once decoded (decoding gives the name
for free); once a robot is over its cap, its later datagrams in that window
are refused before decoding, their name read with one regular expression
over the bytes. So a flood under one name costs about a microsecond a
datagram and never reaches the hub's work of recording and recomputing,
while other traffic pays a dictionary update. It counts what it refuses, by
robot and by source, for the hub to report; it never reads a clock (times
are arguments).

Each transport has its own gate, used from that transport's one thread:
its counters have a single writer, and the hub reads them from another
thread through ``dict`` copies (atomic in CPython).
"""

from __future__ import annotations

import ipaddress
import math
import re
from typing import Callable, Iterable

# Well above any real control loop (5-30 ms loops send 33-200 messages/s;
# DESIGN.md, "Check values"), and low enough that a flood under one name
# stays a small part of what the receiver can take.
DEFAULT_MAX_RATE = 2000.0
WINDOW_S = 1.0  # the cap counts messages per robot in windows of this length
_ROBOT_KEY = b'"robot"'
# The first "robot" key with a string value of a robot id's length (1-32
# characters, DESIGN.md) and no escapes; 0.25 us where three byte searches
# took 0.6 us, but still 0.5 us a datagram with the counting around it:
# that is why it runs only while some robot is over its cap.
_NAME = re.compile(rb'"robot"\s*:\s*"([^"\\]{1,32})"')
# Refusals are counted by name (or source) for this many names; the rest
# share one entry, so invented names cannot grow the counters without bound.
MAX_COUNTED_NAMES = 1024
OTHER_NAMES = b""  # the name of a datagram with no readable robot name
OTHER_ROBOTS = "(other robots)"  # the entry for names past MAX_COUNTED_NAMES
_search = search_name = _NAME.search  # search_name(data)[1] is the name, for a loop that inlines robot_name
_BATCH = BATCH = ord("[")  # a datagram that starts with this is a batch

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
    """Per-transport checks: ``source_allowed``, and ``take`` (or the same inline).

    ``max_rate`` messages per robot per second, counted in WINDOW_S windows
    (a datagram counts all its messages, valid or not, against its first
    message's robot; one with no valid message against OTHER_NAMES).
    ``allow``: networks sources must be in; empty allows every source.
    """

    def __init__(self, max_rate: float = DEFAULT_MAX_RATE, allow: Iterable[Network] = ()) -> None:
        if not max_rate > 0:
            raise ValueError(f"the rate cap must be positive, got {max_rate!r}")
        self.max_rate = max_rate
        self.per_window = max_rate * WINDOW_S
        self.allow = tuple(allow)
        self._counts: dict[str, int] = {}  # messages by robot in this window
        self._capped: set[bytes] = set()  # robots over the cap in this window, as their names' bytes
        self._window_end = -math.inf
        self._verdicts: dict[str, bool] = {}  # source host -> allowed, for hosts seen
        # What was refused, for the hub (single writer: the transport's thread).
        self.over_cap: dict[str, int] = {}  # messages over the cap, by robot name ("" for none)
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

    def take(self, data: bytes, rx: float, decode: Callable[[bytes], tuple]) -> tuple | None:
        """``decode(data)`` (samples, failures, raws), or None when the datagram's robot is
        over its cap in the window of ``rx`` (s): then it is counted, and decoded only if
        it was the one that went over. The UDP loop does the same inline."""
        counts, capped = self.window(rx)
        if capped and self.refused_early(data, capped):
            return None
        decoded = decode(data)
        samples, failures = decoded[0], decoded[1]
        robot = samples[0].robot if samples else ""
        n = len(samples) + len(failures)
        count = counts.get(robot, 0) + n
        counts[robot] = count
        if count > self.per_window:
            self.went_over(robot, n, capped)
            return None
        return decoded

    def window(self, rx: float) -> tuple[dict[str, int], set[bytes]]:
        """(message counts by robot, robots over the cap) of the window that holds ``rx`` (s)."""
        if rx >= self._window_end:
            self._counts, self._capped = {}, set()
            self._window_end = rx + WINDOW_S
        return self._counts, self._capped

    def refused_early(self, data: bytes, capped: set[bytes]) -> bool:
        """Before decoding, while some robot is over its cap (``capped``, from ``window``):
        True, with its messages counted, when ``data`` is one of that robot's."""
        found = _search(data)
        name = OTHER_NAMES if found is None else found[1]
        if name not in capped:
            return False
        self.refuse(name.decode("utf-8", "replace"), messages_in(data) if data and data[0] == _BATCH else 1)
        return True

    def went_over(self, robot: str, n: int, capped: set[bytes]) -> None:
        """``robot`` passed its cap with a datagram of ``n`` messages: count them, and refuse
        its later datagrams in this window before decoding."""
        capped.add(robot.encode())
        self.refuse(robot, n)

    def refuse(self, robot: str, n: int) -> None:
        """Count ``n`` messages of ``robot`` refused over the cap."""
        over = self.over_cap
        if robot not in over and len(over) >= MAX_COUNTED_NAMES:
            robot = OTHER_ROBOTS
        over[robot] = over.get(robot, 0) + n
        self.refused += 1


def messages_in(batch: bytes) -> int:
    """How many messages a batch (a JSON array) holds, by its "robot" keys; at least 1."""
    return batch.count(_ROBOT_KEY) or 1
