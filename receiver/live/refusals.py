"""How refused messages reach the log: once per robot (or source) and reason, then a running count.

Owns the log lines of refusals the receiver applies itself (too many
robots, over the rate cap, source not allowed): the first refusal of a name
is logged at once with its reason, later ones only as a running count, at
most every REPEAT_S per name, so a flood costs a few lines, not one per
message. Names are kept for at most MAX_NAMES; the rest share one entry. It
never reads a clock: times are arguments.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

REPEAT_S = 30.0
MAX_NAMES = 1024
OTHERS = "(other names)"


@dataclass
class _Entry:
    count: int = 0
    logged: int = 0
    last_s: float = 0.0  # when it was last refused
    log_after_s: float = 0.0  # the next running count is due after this


class RefusalLog:
    """Counts and logs refusals by (reason, name)."""

    def __init__(self, log: logging.Logger, repeat_s: float = REPEAT_S) -> None:
        self.log = log
        self.repeat_s = repeat_s
        self._entries: dict[tuple[str, str], _Entry] = {}

    def note(self, reason: str, name: str, n: int, now: float, why: str) -> None:
        """``n`` messages from ``name`` refused for ``reason`` at ``now`` (s); ``why`` is the first line's text."""
        key = (reason, name)
        entry = self._entries.get(key)
        if entry is None:
            if len(self._entries) >= MAX_NAMES:
                key = (reason, OTHERS)
                entry = self._entries.setdefault(key, _Entry(log_after_s=now + self.repeat_s))
            else:
                entry = self._entries[key] = _Entry(log_after_s=now + self.repeat_s)
                self.log.warning("%s (%s; further refusals are counted)", why, reason)
                entry.logged = n
        entry.count += n
        entry.last_s = now
        if now >= entry.log_after_s and entry.count > entry.logged:
            self.log.warning("%s: %d messages refused so far (%s)", key[1], entry.count, reason)
            entry.logged = entry.count
            entry.log_after_s = now + self.repeat_s

    def recent(self, reason: str, now: float, within_s: float) -> dict[str, int]:
        """Names refused for ``reason`` within ``within_s`` of ``now``, with their counts so far."""
        return {
            name: entry.count
            for (why, name), entry in self._entries.items()
            if why == reason and now - entry.last_s <= within_s
        }
