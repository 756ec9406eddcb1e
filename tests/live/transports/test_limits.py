"""The transports' limits on real sockets on 127.0.0.0/8: allowed networks (UDP and
WebSocket), the per-robot rate cap, the kernel's drop counter, WebSocket
back-pressure, and a WebSocket handler that fails alone."""

from __future__ import annotations

import asyncio
import logging
import socket

import pytest
from websockets.asyncio.client import connect
from websockets.exceptions import ConnectionClosed, InvalidStatus

import receiver.live.hub as hub_module
import receiver.live.transports.websocket as websocket_module
from receiver.formats.protocol import Reason
from receiver.live.gate import parse_networks
from receiver.live.hub import Hub
from receiver.live.serve import ServeConfig
from receiver.live.transports.udp import UdpReceiver
from receiver.live.transports.websocket import WebSocketReceiver
from tests.live.harness import LoopThread, handled, live_receiver, wait_until
from tests.live.serve_process import message

ALLOWED = "127.0.0.2"  # loopback, but not the address a socket sends from by default


def test_udp_from_outside_the_allowed_networks_is_refused_and_counted():
    config = ServeConfig({}, udp=("127.0.0.1", 0), allow=tuple(parse_networks([f"{ALLOWED}/32"])))
    with live_receiver(config) as receiver:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as other, \
                socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as allowed:
            allowed.bind((ALLOWED, 0))
            for seq in range(10):
                other.sendto(message("stranger-bot", seq, 0.0), receiver.udp.address)
                allowed.sendto(message("team-bot", seq, 0.01 * seq), receiver.udp.address)
            wait_until(lambda: receiver.udp.datagrams == 20, "both senders' datagrams")
            receiver.hub.check(0.0)
        assert set(receiver.hub.sessions) == {"team-bot"}
        assert receiver.hub.sessions["team-bot"].stats.messages == 10
        assert receiver.hub.errors == {Reason.SOURCE_NOT_ALLOWED: 10}
    assert "refused 10 messages: source_not_allowed 10" in receiver.summary
    assert "refused, not in --allow: 127.0.0.1 (10)" in receiver.summary


def test_websocket_from_outside_the_allowed_networks_is_refused_at_the_handshake():
    config = ServeConfig({}, ws=("127.0.0.1", 0), allow=tuple(parse_networks([f"{ALLOWED}/32"])))
    with live_receiver(config) as receiver:
        url = "ws://%s:%d/" % receiver.ws.address

        async def scenario():
            with pytest.raises(InvalidStatus) as refused:
                async with connect(url, proxy=None):
                    pass
            assert refused.value.response.status_code == 403
            async with connect(url, proxy=None, local_addr=(ALLOWED, 0)) as ws:
                await ws.send(message("team-bot", 0, 0.0), text=True)

        asyncio.run(scenario())
        wait_until(lambda: "team-bot" in receiver.hub.sessions, "the allowed client's message")
        receiver.hub.check(0.0)
        assert receiver.hub.errors == {Reason.SOURCE_NOT_ALLOWED: 1}
        assert receiver.hub.sessions["team-bot"].stats.messages == 1


def test_a_flood_under_one_name_is_capped_before_decoding_and_the_others_keep_theirs():
    config = ServeConfig({}, udp=("127.0.0.1", 0), max_rate=500.0)
    with live_receiver(config) as receiver:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
            for seq in range(3000):
                sock.sendto(message("flood-bot", seq, 0.0), receiver.udp.address)
                if seq % 60 == 0:
                    sock.sendto(message("team-bot", seq // 60, 0.01 * seq), receiver.udp.address)
            wait_until(lambda: receiver.udp.datagrams == 3050, "every datagram")
        receiver.hub.check(0.0)
        flood = receiver.hub.sessions["flood-bot"].stats
        assert receiver.hub.sessions["team-bot"].stats.messages == 50  # none of the good robot's lost
        # within at most two windows of the cap (a window may end mid-flood), the rest counted
        assert 500 <= flood.messages <= 1000 and flood.messages + flood.errors[Reason.OVER_RATE_CAP] == 3000
        assert "over the rate cap of 500 messages/s: flood-bot" in receiver.hub.health.problems()[0]


def test_the_kernels_drops_are_counted():
    hub = Hub({})
    udp = UdpReceiver(hub, "127.0.0.1", 0)
    udp.sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, 4096)  # the smallest buffer, and no loop running
    try:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
            for seq in range(200):
                sock.sendto(message("a-bot", seq, 0.0), udp.address)
        drops = udp.kernel_drops()
        while udp.one_pass() == 256:
            pass  # MAX_DATAGRAMS_PER_PASS: more may wait
        assert drops > 0 and udp.datagrams + drops == 200
    finally:
        udp.sock.close()


def test_a_websocket_flood_waits_for_room_and_loses_nothing(monkeypatch):
    monkeypatch.setattr(hub_module, "MAX_BACKLOG", 50)
    hub = Hub({}, max_rate=1e9)
    loop = LoopThread()
    ws = WebSocketReceiver(hub, "127.0.0.1", 0)
    loop.call(ws.start())
    try:
        url = "ws://%s:%d/" % ws.address

        async def flood():
            async with connect(url, proxy=None) as client:
                for seq in range(1000):
                    await client.send(message("ws-bot", seq, 0.001 * seq), text=True)

        sender = asyncio.run_coroutine_threadsafe(flood(), loop.loop)
        wait_until(lambda: ws.held_back > 0, "the connection to be held back")
        assert hub._backlog <= 50  # the receiver stopped reading at the bound
        taken = 0
        while taken < 1000:  # now processing takes what waits, and the connection is read again
            hub.process(0.0)
            taken = hub.sessions["ws-bot"].stats.messages if "ws-bot" in hub.sessions else 0
        sender.result(timeout=20)
        assert taken == 1000 and not hub.errors
    finally:
        loop.call(ws.stop())
        loop.close()


def test_a_failing_websocket_handler_closes_only_its_connection(monkeypatch, caplog):
    decode = websocket_module.decode_keeping_raw

    def fragile_decode(data):  # a bug that one frame trips
        if b"poison" in data:
            raise ValueError("tripped")
        return decode(data)

    monkeypatch.setattr(websocket_module, "decode_keeping_raw", fragile_decode)
    config = ServeConfig({}, ws=("127.0.0.1", 0))
    with caplog.at_level(logging.ERROR, logger="podwatch"), live_receiver(config) as receiver:
        url = "ws://%s:%d/" % receiver.ws.address

        async def scenario():
            async with connect(url, proxy=None) as steady, connect(url, proxy=None) as doomed:
                await doomed.send(b'{"poison": 1}', text=True)
                with pytest.raises(ConnectionClosed) as closed:
                    await doomed.recv()
                assert closed.value.rcvd.code == 1011
                await steady.send(message("steady-bot", 0, 0.0), text=True)

        asyncio.run(scenario())
        wait_until(lambda: handled(receiver) == 1, "the other connection's message")
        notes = receiver.hub.health.notes()
    assert "websocket connection: 1 failed, the last with ValueError: tripped" in notes
    lines = [r.getMessage() for r in caplog.records]
    assert len(lines) == 1 and lines[0].startswith("websocket connection from 127.0.0.1:")
