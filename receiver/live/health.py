"""The receiver's own health: its workers, its recording and its links, for the page and the summary.

Owns the state of each of the receiver's threads and tasks (running,
restarting after a failure, failed for good), the recording's state
(recording, stopped with a reason, off) and short notes on the links (the
UDP socket's buffer and kernel drops, MQTT outages, robots over the rate
cap). Threads report here; the page's status line and link table and the
Ctrl-C summary read ``problems`` and ``notes``. It never starts a thread and
never reads a clock: times are arguments.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from enum import Enum


class WorkerState(Enum):
    """A worker (thread or task) as the page shows it; it moves only through WORKER_TRANSITIONS."""

    RUNNING = "running"
    RESTARTING = "restarting"  # failed; it starts again after a pause
    FAILED = "failed"  # failed too often: the receiver stops


class WorkerEvent(Enum):
    """What moves a WorkerState."""

    STARTED = "started"
    CRASHED = "crashed"
    GAVE_UP = "gave up"


WORKER_TRANSITIONS: dict[tuple[WorkerState, WorkerEvent], WorkerState] = {
    (WorkerState.RUNNING, WorkerEvent.CRASHED): WorkerState.RESTARTING,
    (WorkerState.RESTARTING, WorkerEvent.STARTED): WorkerState.RUNNING,
    (WorkerState.RESTARTING, WorkerEvent.CRASHED): WorkerState.RESTARTING,
    (WorkerState.RUNNING, WorkerEvent.GAVE_UP): WorkerState.FAILED,
    (WorkerState.RESTARTING, WorkerEvent.GAVE_UP): WorkerState.FAILED,
}


@dataclass
class WorkerStatus:
    """One worker: its state, how often it failed and why, last."""

    name: str
    state: WorkerState = WorkerState.RUNNING
    failures: int = 0
    last_error: str = ""

    def text(self) -> str:
        """The worker's problem in a line, e.g. "udp receive loop failed (2 times): ...; restarting"."""
        times = "" if self.failures == 1 else f" ({self.failures} times)"
        then = "restarting" if self.state is WorkerState.RESTARTING else "stopped"
        return f"{self.name} failed{times}: {self.last_error}; {then}"


class Health:
    """Workers, recording and link notes of one receiver; safe from any thread."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._workers: dict[str, WorkerStatus] = {}
        self.recording_path: str | None = None
        self.recording_stopped: str | None = None  # the reason, once stopped
        self._problems: dict[str, str] = {}  # by key: shown on the status line while set
        self._notes: dict[str, str] = {}  # by key: shown under the link table

    def worker(self, name: str, event: WorkerEvent, error: str = "") -> WorkerStatus:
        """Apply ``event`` to the worker called ``name`` (registered RUNNING on first sight)."""
        with self._lock:
            status = self._workers.setdefault(name, WorkerStatus(name))
            status.state = WORKER_TRANSITIONS.get((status.state, event), status.state)
            if event is WorkerEvent.CRASHED:
                status.failures += 1
                status.last_error = error
            return WorkerStatus(status.name, status.state, status.failures, status.last_error)

    def workers(self) -> list[WorkerStatus]:
        """Copies of every worker's status."""
        with self._lock:
            return [WorkerStatus(w.name, w.state, w.failures, w.last_error) for w in self._workers.values()]

    def recording_started(self, path: str) -> None:
        """The recording is open at ``path``."""
        self.recording_path = path

    def stop_recording(self, reason: str) -> None:
        """The recording stopped for ``reason`` (the first reason stays)."""
        with self._lock:
            if self.recording_stopped is None:
                self.recording_stopped = reason

    def set_problem(self, key: str, text: str | None) -> None:
        """Show ``text`` on the status line under ``key`` (None clears it)."""
        with self._lock:
            if text is None:
                self._problems.pop(key, None)
            else:
                self._problems[key] = text

    def set_note(self, key: str, text: str | None) -> None:
        """Show ``text`` under the link table under ``key`` (None clears it)."""
        with self._lock:
            if text is None:
                self._notes.pop(key, None)
            else:
                self._notes[key] = text

    def problems(self) -> list[str]:
        """What is wrong now, one short line each: workers down, the recording stopped, links in trouble."""
        with self._lock:
            lines = [w.text() for w in self._workers.values() if w.state is not WorkerState.RUNNING]
            if self.recording_stopped is not None:
                lines.append(f"recording stopped: {self.recording_stopped}")
            lines.extend(self._problems.values())
            return lines

    def notes(self) -> list[str]:
        """The link notes, one line each (buffer sizes, kernel drops, outages, the recording's file)."""
        with self._lock:
            lines = []
            if self.recording_path is not None and self.recording_stopped is None:
                lines.append(f"recording to {self.recording_path}")
            lines.extend(self._notes.values())
            return lines
