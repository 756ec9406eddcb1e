"""UDP ingest: one receive loop in its own thread.

Owns the UDP socket and nothing else: bytes in,
``protocol.decode_keeping_raw``, then ``Hub.ingest``. A plain loop with a
large kernel buffer, not an asyncio datagram endpoint, for throughput; it
takes whatever datagrams have arrived and runs ``Hub.process`` on them
itself, sparing a GIL hand-over to the pump thread per datagram. It never
parses JSON itself and never lets a bad datagram stop the loop.

System calls are the dearest part of a small pass: the loop waits in a
blocking receive rather than in select, and takes whatever else has arrived
with non-blocking receives (MSG_DONTWAIT, POSIX, as is the rest of ``serve``:
its signal handling). It never sleeps to let datagrams gather: under load
such sleeps wake late and the socket's buffer overflows.
"""

from __future__ import annotations

import socket
import sys
import threading
import time

from receiver.formats.protocol import MAX_MESSAGE_BYTES, decode_keeping_raw
from receiver.live.hub import Hub

# Our own choice of port, unassigned as far as we know; --udp overrides it.
DEFAULT_UDP_PORT = 47474
DEFAULT_UDP_HOST = "0.0.0.0"  # all interfaces: a robot's broadcast must reach us
# A big kernel buffer rides out pauses of the Python thread (GIL, GC); Linux
# caps the request at net.core.rmem_max unless the process may exceed it.
RECEIVE_BUFFER_BYTES = 16 * 1024 * 1024
# Other threads (the pump for WebSocket and MQTT, the dashboard) must not keep
# the loop from the GIL for CPython's default 5 ms: that alone would break the
# 5 ms latency target. With 0.2 ms they hand it back promptly.
GIL_SWITCH_INTERVAL_S = 0.0002
# At most this many datagrams are taken before they are processed: it bounds
# how long the first of them waits when a backlog has built up.
MAX_DATAGRAMS_PER_PASS = 256
_READ_BYTES = MAX_MESSAGE_BYTES + 1  # one more, so an oversize datagram is seen as such
SOURCE = "udp"


class UdpReceiver:
    """Listens on (host, port); ``start`` spawns the loop, ``stop`` ends it."""

    def __init__(self, hub: Hub, host: str = DEFAULT_UDP_HOST, port: int = DEFAULT_UDP_PORT) -> None:
        self.hub = hub
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        self.sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, RECEIVE_BUFFER_BYTES)
        self.sock.bind((host, port))
        self.datagrams = 0
        self.passes = 0
        self._stopping = False
        self._thread = threading.Thread(target=self._run, name="podwatch-udp", daemon=True)

    @property
    def address(self) -> tuple[str, int]:
        """The (host, port) the socket is bound to: the real port when 0 was asked for."""
        return self.sock.getsockname()

    def start(self) -> None:
        """Lower the GIL switch interval to GIL_SWITCH_INTERVAL_S and start the receive loop's
        thread; ``stop`` ends it.
        """
        sys.setswitchinterval(min(sys.getswitchinterval(), GIL_SWITCH_INTERVAL_S))
        self._thread.start()

    def _run(self) -> None:
        while not self._stopping:
            self.one_pass()

    def one_pass(self) -> int:
        """Wait for datagrams, take those waiting and process them; returns
        the datagrams taken."""
        taken = self._take_arrived()
        if taken:
            self.hub.process(time.time())
            self.passes += 1
        return taken

    def _take_arrived(self) -> int:
        """Wait for a datagram, then decode and queue it and those already
        waiting behind it (up to a pass's worth)."""
        recv, ingest, clock = self.sock.recv, self.hub.ingest, time.time
        flags = 0  # the first receive waits
        taken = 0
        while taken < MAX_DATAGRAMS_PER_PASS:
            try:
                data = recv(_READ_BYTES, flags)
            except BlockingIOError:
                break  # nothing more has arrived
            except OSError:
                if self._stopping:
                    break
                continue  # e.g. ICMP errors reported on the socket: keep listening
            rx = clock()
            if self._stopping:
                break
            flags = socket.MSG_DONTWAIT
            taken += 1
            samples, failures, raws = decode_keeping_raw(data)
            ingest(samples, failures, rx, SOURCE, wake=False, raws=raws)
        self.datagrams += taken
        return taken

    def stop(self) -> None:
        """End the loop: a datagram to ourselves wakes the waiting receive."""
        self._stopping = True
        host, port = self.address
        wake_host = "127.0.0.1" if host == "0.0.0.0" else host
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as wake:
            wake.sendto(b"", (wake_host, port))
        self._thread.join(timeout=2.0)
        self.sock.close()
