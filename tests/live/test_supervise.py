"""No worker dies quietly: a failure is one log line and a visible state, then a restart;
a worker that keeps failing ends ``serve`` with its reason. Real UDP sockets on
127.0.0.1 where a transport's loop is the worker."""

from __future__ import annotations

import asyncio
import logging
import socket
import threading

import pytest

import receiver.live.supervise as supervise
import receiver.live.transports.udp as udp_module
from receiver.live.health import Health, WorkerState
from receiver.live.hub import Hub
from receiver.live.serve import ServeConfig, serve
from receiver.live.supervise import MAX_FAILURES, Supervisor, reason
from tests.live.harness import live_receiver, wait_until
from tests.live.serve_process import message


@pytest.fixture(autouse=True)
def quick_restarts(monkeypatch):
    monkeypatch.setattr(supervise, "RESTART_DELAY_S", 0.001)


def test_reasons_are_one_line():
    assert reason(OSError(28, "No space left on device")) == "No space left on device"
    assert reason(ConnectionRefusedError(111, "Connect call failed ('127.0.0.1', 1)")) == "Connection refused"
    assert reason(RuntimeError("[Errno 111] Connection refused")) == "Connection refused"
    assert reason(ValueError("bad\nsecond line")) == "ValueError: bad"
    assert reason(KeyError()) == "KeyError"


def test_a_failed_thread_is_shown_logged_and_restarted(caplog):
    health = Health()
    supervisor = Supervisor(health)
    calls, seen = [], []

    def body():
        calls.append(1)
        if len(calls) <= 2:
            seen.append([w.state for w in health.workers()])
            raise RuntimeError("boom")

    with caplog.at_level(logging.ERROR, logger="podwatch"):
        supervisor.run_thread("test loop", body, threading.Event())
    assert len(calls) == 3
    assert seen == [[], [WorkerState.RUNNING]]  # unknown at first, then running again after the restart
    assert [w.state for w in health.workers()] == [WorkerState.RUNNING] and health.problems() == []
    assert [r.getMessage() for r in caplog.records] == [
        "test loop failed (1 in the last 60 s): RuntimeError: boom; restarting",
        "test loop failed (2 in the last 60 s): RuntimeError: boom; restarting",
    ]


def test_a_worker_that_keeps_failing_stops_the_receiver():
    health = Health()
    fatal = []
    supervisor = Supervisor(health, on_fatal=fatal.append)

    async def body():
        raise OSError(5, "Input/output error")

    asyncio.run(supervisor.run_task("mqtt link", body))
    assert fatal == [f"mqtt link failed {MAX_FAILURES} times in 60 s, last: Input/output error"]
    assert supervisor.fatal == fatal[0]
    assert health.problems() == [f"mqtt link failed ({MAX_FAILURES} times): Input/output error; stopped"]


def test_the_udp_loop_restarts_after_a_failure_and_loses_nothing_after_it(practice_profile, monkeypatch, caplog):
    decode = udp_module.decode_keeping_raw

    def fragile_decode(data):  # a bug that one datagram trips
        if b"poison" in data:
            raise ValueError("tripped")
        return decode(data)

    monkeypatch.setattr(udp_module, "decode_keeping_raw", fragile_decode)
    config = ServeConfig({}, udp=("127.0.0.1", 0))
    with caplog.at_level(logging.ERROR, logger="podwatch"), live_receiver(config) as receiver:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
            sock.sendto(b'{"poison": 1}', receiver.udp.address)
            wait_until(lambda: caplog.records, "the failure's log line")
            for seq in range(20):
                sock.sendto(message("after-bot", seq, 0.01 * seq), receiver.udp.address)
            wait_until(lambda: "after-bot" in receiver.hub.sessions and
                       receiver.hub.sessions["after-bot"].stats.messages == 20, "the datagrams after it")
        assert [w.state for w in receiver.hub.health.workers()] == [WorkerState.RUNNING]
    assert [r.getMessage() for r in caplog.records] == [
        "udp receive loop failed (1 in the last 60 s): ValueError: tripped; restarting"
    ]


def test_serve_ends_with_the_reason_when_processing_keeps_failing(monkeypatch, caplog):
    def broken(self, now):
        raise RuntimeError("broken")

    monkeypatch.setattr(Hub, "process", broken)
    config = ServeConfig({}, udp=("127.0.0.1", 0))
    with caplog.at_level(logging.ERROR, logger="podwatch"):
        finished = asyncio.run(serve(config, say=lambda line: None, until=60.0))
    assert finished.failure == f"processing (pump) failed {MAX_FAILURES} times in 60 s, last: RuntimeError: broken"
    assert f"processing (pump) failed ({MAX_FAILURES} times): RuntimeError: broken; stopped" in finished.lines
    assert caplog.records[-2].getMessage().endswith("; stopping")
