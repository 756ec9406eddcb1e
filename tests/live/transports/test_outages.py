"""Links that go away: a real Mosquitto stopped and started again mid-stream, and a
WebSocket receiver that stops. The receiver reconnects and says so (with the outage's
length); the senders reconnect, or stop with one LinkError line."""

from __future__ import annotations

import asyncio
import logging
import threading
import time

import numpy as np
import pytest

import receiver.live.transports.send as send_module
from receiver.errors import LinkError
from receiver.live.replay import send_paced
from receiver.live.serve import ServeConfig
from receiver.sim.simulate import simulate
from tests.live.harness import live_receiver, wait_until
from tests.live.transports.conftest import free_port


@pytest.fixture(autouse=True)
def quick_reconnects(monkeypatch):
    monkeypatch.setattr(send_module, "RECONNECT_DELAY_S", 0.05)


def messages_of(receiver, robot="practice-bot") -> int:
    session = receiver.hub.sessions.get(robot)
    return 0 if session is None else session.stats.messages


def test_the_receiver_reconnects_to_a_broker_that_comes_back_and_says_for_how_long(broker, practice_profile,
                                                                                     caplog):
    run = simulate(practice_profile, rate_hz=100.0, duration_s=1.0, seed=3)
    samples, stamps = run.samples, np.asarray(run.arrival_s)
    config = ServeConfig({practice_profile.name: practice_profile}, mqtt=broker.url)
    with caplog.at_level(logging.WARNING, logger="podwatch"), live_receiver(config) as receiver:
        wait_until(receiver.mqtt.connected.is_set, "the subscription")
        asyncio.run(send_paced(samples[:50], stamps[:50], broker.url, speed=0))
        wait_until(lambda: messages_of(receiver) == 50, "the messages before the outage")
        broker.stop()
        wait_until(lambda: not receiver.mqtt.connected.is_set(), "the receiver to see the broker go")
        wait_until(lambda: receiver.hub.health.problems(), "the outage on the page")
        assert "MQTT broker %s lost" % broker.url in receiver.hub.health.problems()[0]
        time.sleep(1.0)
        broker.start()
        wait_until(receiver.mqtt.connected.is_set, "the receiver to reconnect")
        asyncio.run(send_paced(samples[50:], stamps[50:], broker.url, speed=0))
        wait_until(lambda: messages_of(receiver) == len(samples), "the messages after it")
        assert receiver.hub.health.problems() == []
        note = next(n for n in receiver.hub.health.notes() if n.startswith("mqtt"))
    lines = [r.getMessage() for r in caplog.records if r.name == "podwatch.mqtt"]
    assert lines[0].startswith(f"MQTT broker {broker.url} lost: ") and lines[0].endswith("; reconnecting")
    back = float(lines[1].split(" back after ")[1].split()[0])
    assert len(lines) == 2 and back >= 1.0  # the broker was away for a second at least
    assert note.startswith(f"mqtt {broker.url}: 1 outage, ")


def test_a_sender_reconnects_to_a_broker_that_comes_back(broker, practice_profile, caplog):
    run = simulate(practice_profile, rate_hz=100.0, duration_s=3.0, seed=4)
    config = ServeConfig({practice_profile.name: practice_profile}, mqtt=broker.url)
    with live_receiver(config) as receiver:
        wait_until(receiver.mqtt.connected.is_set, "the subscription")

        def outage():
            time.sleep(0.5)
            broker.stop()
            time.sleep(0.5)
            broker.start()

        away = threading.Thread(target=outage)
        away.start()
        with caplog.at_level(logging.WARNING, logger="podwatch.send"):
            sent = asyncio.run(send_paced(run.samples, np.asarray(run.arrival_s), broker.url))
        away.join()
        last = run.samples[-1].seq
        wait_until(lambda: receiver.hub.sessions["practice-bot"]._last[0] == last, "the last message")
        assert sent == len(run.samples)
        received = messages_of(receiver)
    lines = [r.getMessage() for r in caplog.records if r.name == "podwatch.send"]
    assert lines[0].startswith(f"lost the connection to {broker.url}: ")
    assert lines[-1].startswith(f"reconnected to {broker.url} after ")
    # what was sent while the broker was away is lost (QoS 1 acknowledges only what the broker took)
    assert len(run.samples) - 100 <= received <= len(run.samples)


def test_a_sender_whose_broker_does_not_come_back_stops_with_one_line(broker, practice_profile, monkeypatch):
    monkeypatch.setattr(send_module, "RECONNECT_FOR_S", 0.5)
    run = simulate(practice_profile, rate_hz=100.0, duration_s=2.0, seed=5)
    threading.Timer(0.3, broker.stop).start()
    with pytest.raises(LinkError, match=rf"^lost the connection to {broker.url} and could not reconnect in \d+ s: "):
        asyncio.run(send_paced(run.samples, np.asarray(run.arrival_s), broker.url))


def test_a_sender_whose_websocket_receiver_stops_says_so_in_one_line(practice_profile, monkeypatch):
    monkeypatch.setattr(send_module, "RECONNECT_FOR_S", 0.5)
    run = simulate(practice_profile, rate_hz=100.0, duration_s=2.0, seed=6)
    config = ServeConfig({practice_profile.name: practice_profile}, ws=("127.0.0.1", 0))
    with live_receiver(config) as receiver:
        url = "ws://%s:%d" % receiver.ws.address
        threading.Timer(0.3, lambda: receiver.runner.call(receiver.ws.stop())).start()
        with pytest.raises(LinkError, match=rf"^lost the connection to {url} and could not reconnect"):
            asyncio.run(send_paced(run.samples, np.asarray(run.arrival_s), url))


def test_nothing_there_is_one_line(practice_profile):
    run = simulate(practice_profile, rate_hz=100.0, duration_s=0.1, seed=7)
    port = free_port()
    for url, words in ((f"ws://127.0.0.1:{port}", "nothing is listening at"),
                       (f"mqtt://127.0.0.1:{port}", "no MQTT broker answers at")):
        with pytest.raises(LinkError, match=rf"^{words} {url} \(Connection refused\)"):
            asyncio.run(send_paced(run.samples, np.asarray(run.arrival_s), url))


def test_a_forwarding_receiver_keeps_nothing_for_a_broker_that_is_away():
    from receiver.live.hub import Hub
    from receiver.live.transports.mqtt import MqttLink

    link = MqttLink(Hub({}), "mqtt://127.0.0.1:1", forward=True)
    link._queue([("practice-bot", b"{}")] * 10, {})  # what the pump hands over while no broker answers
    assert link.unforwarded == 10 and not link._samples
