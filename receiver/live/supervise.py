"""Supervision of the receiver's threads and tasks: no worker dies quietly.

Owns the policy for a worker (the UDP loop, the pump, the MQTT link, the
demo's robot) that raises: one log line
with the reason, the worker marked RESTARTING in ``Health`` (the page's
status line shows it), and a restart after a pause that doubles from
RESTART_DELAY_S up to MAX_RESTART_DELAY_S. A worker that fails MAX_FAILURES
times within FAILURE_WINDOW_S is marked FAILED and ``on_fatal`` is called:
``serve`` then stops with a non-zero exit rather than show "live" over a
dead pipeline. A failure that ends only itself (a WebSocket connection's
handler: a sender can cause it) is logged and counted in a note instead. It
never decides what a worker does.
"""

from __future__ import annotations

import logging
import os
import re
import threading
import time
from collections import deque
from typing import Awaitable, Callable

from receiver.live.health import Health, WorkerEvent

RESTART_DELAY_S = 0.1
MAX_RESTART_DELAY_S = 5.0
MAX_FAILURES = 5
FAILURE_WINDOW_S = 60.0
DEBUG_ENV = "PODWATCH_DEBUG"  # set to 1 to log each failure's traceback too
log = logging.getLogger("podwatch")
_ERRNO_PREFIX = re.compile(r"\[Errno -?\d+\] ")  # how an OSError's text begins inside another error's


def reason(exc: BaseException) -> str:
    """An exception as one line: the system's words for an OSError (or a library's error
    that wraps one), else its type and message."""
    if isinstance(exc, OSError) and exc.errno:
        return os.strerror(exc.errno)
    if isinstance(exc, OSError) and exc.strerror:
        return exc.strerror
    text = str(exc).strip().splitlines()
    wrapped = _ERRNO_PREFIX.match(text[0]) if text else None
    if wrapped:
        return text[0][wrapped.end():]
    return f"{type(exc).__name__}: {text[0]}" if text else type(exc).__name__


class Supervisor:
    """Restarts failed workers and escalates the ones that keep failing (see the module)."""

    def __init__(
        self,
        health: Health,
        on_fatal: Callable[[str], None] | None = None,
        clock: Callable[[], float] = time.monotonic,
    ) -> None:
        self.health = health
        self.on_fatal = on_fatal
        self.clock = clock
        self.fatal: str | None = None  # the first reason the receiver must stop
        self._lock = threading.Lock()
        self._failures: dict[str, deque[float]] = {}
        self._once: dict[str, int] = {}

    def started(self, name: str) -> None:
        """``name`` runs (again)."""
        self.health.worker(name, WorkerEvent.STARTED)

    def failed_once(self, what: str, exc: BaseException, detail: str = "") -> None:
        """``what`` (one connection's handler, say) raised ``exc`` and ended: one log line, and
        a link note with the running count; nothing restarts and nothing stops."""
        text = reason(exc)
        with self._lock:
            count = self._once[what] = self._once.get(what, 0) + 1
        if os.environ.get(DEBUG_ENV):
            log.error("%s failed", what, exc_info=exc)
        log.error("%s%s failed: %s; it was closed, the rest goes on", what, detail, text)
        self.health.set_note(f"failed: {what}", f"{what}: {count} failed, the last with {text}")

    def failed(self, name: str, exc: BaseException) -> float | None:
        """Log and show that ``name`` raised ``exc``; the pause before its restart (s), or
        None when it failed too often (``on_fatal`` has been called)."""
        now = self.clock()
        text = reason(exc)
        with self._lock:
            times = self._failures.setdefault(name, deque())
            times.append(now)
            while times and now - times[0] > FAILURE_WINDOW_S:
                times.popleft()
            recent = len(times)
        self.health.worker(name, WorkerEvent.CRASHED, text)
        if os.environ.get(DEBUG_ENV):
            log.error("%s failed", name, exc_info=exc)
        if recent >= MAX_FAILURES:
            self.health.worker(name, WorkerEvent.GAVE_UP)
            why = f"{name} failed {recent} times in {FAILURE_WINDOW_S:g} s, last: {text}"
            log.error("%s; stopping", why)
            with self._lock:
                first = self.fatal is None
                if first:
                    self.fatal = why
            if first and self.on_fatal is not None:
                self.on_fatal(why)
            return None
        pause = min(RESTART_DELAY_S * 2 ** (recent - 1), MAX_RESTART_DELAY_S)
        log.error("%s failed (%d in the last %g s): %s; restarting", name, recent, FAILURE_WINDOW_S, text)
        return pause

    def run_thread(self, name: str, body: Callable[[], None], stop: threading.Event) -> None:
        """Run ``body`` until ``stop`` is set, restarting it after a failure: the target of a
        worker thread. ``body`` returns when it saw ``stop``."""
        while not stop.is_set():
            try:
                body()
                return
            except Exception as exc:  # a worker's top: whatever it was, it must not end the thread quietly
                pause = self.failed(name, exc)
                if pause is None or stop.wait(pause):
                    return
                self.started(name)

    async def run_task(self, name: str, body: Callable[[], Awaitable[None]]) -> None:
        """Await ``body()`` until it returns or the task is cancelled, restarting it after a
        failure: the coroutine of a worker task."""
        import asyncio  # here: the command line's parser reaches this module, and asyncio costs it 13 ms

        while True:
            try:
                await body()
                return
            except asyncio.CancelledError:
                raise
            except Exception as exc:  # a worker's top (see run_thread)
                pause = self.failed(name, exc)
                if pause is None:
                    return
                await asyncio.sleep(pause)
                self.started(name)
