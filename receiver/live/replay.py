"""Replay a recording through the live pipeline, or over the network.

Owns the timing of a replay: messages go out in their recorded arrival
order, paced by their recorded ``rx`` (or the robot clock ``t`` when a file
of bare messages has no rx) divided by the speed. Into a Hub it feeds the
same ``ingest``/``process`` calls the transports cause; with a URL it sends
through ``transports.send``. It never changes a message's content.
"""

from __future__ import annotations

import asyncio
import math
import time
from typing import Callable

import msgspec
import numpy as np

from receiver.formats.protocol import Sample, encode
from receiver.formats.recording import RecordingData
from receiver.live.hub import Hub
from receiver.live.transports.send import open_sender

SOURCE = "replay"
# Messages handed to the hub at once when replaying as fast as possible.
FAST_CHUNK = 4096
# At or above this speed (or at 0), a replay does not wait at all.
AS_FAST_AS_POSSIBLE = 1e6


def recorded_samples(data: RecordingData) -> tuple[list[Sample], np.ndarray]:
    """Every robot's samples merged into arrival order, and each one's timestamp (s).

    The timestamp is the recorded rx where every message has one, else t.
    """
    samples: list[Sample] = []
    stamps: list[np.ndarray] = []
    use_rx = all(np.isfinite(cols.rx).all() for cols in data.robots.values())
    for robot, cols in data.robots.items():
        signals = _signals_by_row(cols.signals, len(cols))
        for k in range(len(cols)):
            pose = cols.pose[k]
            samples.append(
                Sample(
                    v=1,
                    robot=robot,
                    seq=int(cols.seq[k]),
                    t=float(cols.t[k]),
                    ticks=cols.ticks[k].tolist(),
                    pose=tuple(pose.tolist()) if np.isfinite(pose).all() else None,
                    imu=_optional(cols.imu[k]),
                    loop=_optional(cols.loop[k]),
                    reset=bool(cols.reset[k]),
                    rx=_optional(cols.rx[k]),
                    data=signals[k],
                )
            )
        stamps.append(cols.rx if use_rx else cols.t)
    when = np.concatenate(stamps) if stamps else np.empty(0)
    order = np.argsort(when, kind="stable")
    return [samples[i] for i in order], when[order]


def recorded_span_s(data: RecordingData) -> float | None:
    """Seconds from the first to the last message by the timestamps a replay paces by; None when empty."""
    use_rx = all(np.isfinite(cols.rx).all() for cols in data.robots.values())
    stamps = [cols.rx if use_rx else cols.t for cols in data.robots.values() if len(cols)]
    if not stamps:
        return None
    return float(max(s.max() for s in stamps) - min(s.min() for s in stamps))
def _signals_by_row(signals: dict[str, np.ndarray], n: int) -> list[dict[str, float] | None]:
    """Each row's signals as a message's "data" (None for a row without any)."""
    if not signals:
        return [None] * n
    names = list(signals)
    rows = np.column_stack([signals[name] for name in names]).tolist()
    return [{name: v for name, v in zip(names, row) if v == v} or None for row in rows]


def _optional(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def _fast(speed: float) -> bool:
    return speed <= 0 or speed >= AS_FAST_AS_POSSIBLE


def _due(stamps: np.ndarray, start: int, elapsed_s: float, speed: float) -> tuple[int, float]:
    """(end, wait_s): messages [start, end) are due once ``elapsed_s`` of wall
    time has passed since the first; when none is, wait_s until the next."""
    if _fast(speed):
        return min(len(stamps), start + FAST_CHUNK), 0.0
    due = stamps[0] + elapsed_s * speed
    end = int(np.searchsorted(stamps, due, side="right"))
    if end > start:
        return end, 0.0
    return start, min((stamps[start] - due) / speed, 0.05)


def replay_into_hub(
    data: RecordingData,
    hub: Hub,
    speed: float = 1.0,
    sleep: Callable[[float], None] = time.sleep,
    clock: Callable[[], float] = time.monotonic,
) -> int:
    """Feed a recording through ``hub`` in recorded order; returns messages fed.

    Each message keeps its recorded rx (or t), so link statistics describe
    the recorded session; the hub's clock is that same timeline.
    """
    samples, stamps = recorded_samples(data)
    start, wall0 = 0, clock()
    while start < len(samples):
        end, wait_s = _due(stamps, start, clock() - wall0, speed)
        if end == start:
            sleep(wait_s)
            continue
        feed_hub(hub, samples, stamps, start, end)
        start = end
    return len(samples)


def feed_hub(hub: Hub, samples: list[Sample], stamps: np.ndarray, start: int, end: int) -> None:
    """Feed ``samples[start:end]`` to the hub as the transports would: each
    ingested with its timestamp, processed FAST_CHUNK at a time."""
    for first in range(start, end, FAST_CHUNK):
        last = min(first + FAST_CHUNK, end)
        for k in range(first, last):
            hub.ingest([samples[k]], [], float(stamps[k]), SOURCE)
        hub.process(float(stamps[last - 1]))


async def replay_to(
    data: RecordingData, url: str, speed: float = 1.0, token: str | None = None, prefix: str | None = None
) -> int:
    """Send a recording's messages to a receiver at ``url``; returns messages sent."""
    samples, stamps = recorded_samples(data)
    return await send_paced(samples, stamps, url, speed, token, prefix)


async def send_paced(
    samples: list[Sample],
    stamps: np.ndarray,
    url: str,
    speed: float = 1.0,
    token: str | None = None,
    prefix: str | None = None,
) -> int:
    """Send messages to ``url`` paced by their timestamps (s) over ``speed``; returns messages sent."""
    loop = asyncio.get_running_loop()
    options = {"token": token} if prefix is None else {"token": token, "prefix": prefix}
    async with open_sender(url, **options) as sender:
        start, wall0 = 0, loop.time()
        while start < len(samples):
            end, wait_s = _due(stamps, start, loop.time() - wall0, speed)
            # a zero sleep still lets the event loop run between chunks
            await asyncio.sleep(wait_s)
            for k in range(start, end):
                sample = msgspec.structs.replace(samples[k], rx=None)
                await sender.send(encode(sample), sample.robot)
            start = end
    return len(samples)
