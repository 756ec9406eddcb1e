"""Run a LiveReceiver in a background event loop for tests, and wait for its hub."""

from __future__ import annotations

import asyncio
import threading
import time
from contextlib import contextmanager
from typing import Callable, Iterator

from receiver.live.serve import LiveReceiver, ServeConfig

# A deadline for traffic to arrive, not a speed check: loopback delivers in
# milliseconds; the margin covers a loaded test machine.
DEADLINE_S = 20.0


class LoopThread:
    """An asyncio loop in a thread; ``call`` runs a coroutine there and waits."""

    def __init__(self) -> None:
        self.loop = asyncio.new_event_loop()
        self.thread = threading.Thread(target=self.loop.run_forever, daemon=True)
        self.thread.start()

    def call(self, coro, timeout: float = DEADLINE_S):
        return asyncio.run_coroutine_threadsafe(coro, self.loop).result(timeout)

    def close(self) -> None:
        self.loop.call_soon_threadsafe(self.loop.stop)
        self.thread.join()
        self.loop.close()


@contextmanager
def live_receiver(config: ServeConfig) -> Iterator[LiveReceiver]:
    """A started receiver; stopped (recording finished) on exit. ``.summary`` holds its lines,
    ``.runner`` is the LoopThread its coroutines run in."""
    runner = LoopThread()
    receiver = LiveReceiver(config, say=lambda line: None)
    receiver.runner = runner  # where its coroutines run
    runner.call(receiver.start())
    try:
        yield receiver
    finally:
        receiver.summary = runner.call(receiver.stop())
        runner.close()


def wait_until(condition: Callable[[], bool], what: str) -> None:
    deadline = time.monotonic() + DEADLINE_S
    while not condition():
        if time.monotonic() > deadline:
            raise AssertionError(f"gave up waiting for {what}")
        time.sleep(0.01)


def handled(receiver: LiveReceiver) -> int:
    """Messages the hub has dealt with: accepted plus refused."""
    snapshot = receiver.hub.snapshot(time.time())
    return sum(s.messages for s in snapshot.values()) + sum(receiver.hub.errors.values())


def listen_on(config: ServeConfig, transport: str, request) -> None:
    """Have ``config`` listen on one transport ("udp", "ws" or "mqtt") on
    loopback; MQTT goes through the test's own Mosquitto broker."""
    if transport == "udp":
        config.udp = ("127.0.0.1", 0)
    elif transport == "ws":
        config.ws = ("127.0.0.1", 0)
    else:
        config.mqtt = request.getfixturevalue("mosquitto")


def sender_url(receiver: LiveReceiver, config: ServeConfig, transport: str) -> str:
    """Where a robot sends to reach ``receiver`` over ``transport``, once it listens."""
    if transport == "udp":
        return "udp://%s:%d" % receiver.udp.address
    if transport == "ws":
        return "ws://%s:%d" % receiver.ws.address
    wait_until(receiver.mqtt.connected.is_set, "the MQTT subscription")
    return config.mqtt
