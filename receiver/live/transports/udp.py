"""UDP ingest: one receive loop in its own thread.

Owns the UDP socket and nothing else: bytes in, the hub's gate (allowed
sources, the per-robot rate cap: a flood is dropped before it is decoded),
``protocol.decode_keeping_raw``, then ``Hub.ingest``. A plain loop with a
large kernel buffer, not an asyncio datagram endpoint, for throughput; it
takes whatever datagrams have arrived and runs ``Hub.process`` on them
itself, sparing a GIL hand-over to the pump thread per datagram. It never
parses JSON itself and never lets a bad datagram stop the loop.

System calls are the dearest part of a small pass: the loop waits in a
blocking receive rather than in select, and takes whatever else has arrived
with non-blocking receives (MSG_DONTWAIT, POSIX, as is the rest of ``serve``:
its signal handling). It never sleeps to let datagrams gather: under load
such sleeps wake late and the socket's buffer overflows. What the kernel
drops when the buffer is full anyway is read from the socket's own counter
(``kernel_drops``) when asked, not per datagram. The loop runs under a
``Supervisor``: a failure is logged and shown, and the loop starts again.
"""

from __future__ import annotations

import errno
import os
import socket
import struct
import sys
import threading
import time

from receiver.formats.protocol import MAX_MESSAGE_BYTES, decode_keeping_raw
from receiver.live.gate import BATCH, OTHER_NAMES, messages_in, search_name
from receiver.live.hub import Hub
from receiver.live.supervise import Supervisor

# Our own choice of port, unassigned as far as we know; --udp overrides it.
DEFAULT_UDP_PORT = 47474
DEFAULT_UDP_HOST = "0.0.0.0"  # all interfaces: a robot's broadcast must reach us
# A big kernel buffer rides out pauses of the Python thread (GIL, GC); Linux
# caps the request at net.core.rmem_max unless the process may exceed it.
RECEIVE_BUFFER_BYTES = 16 * 1024 * 1024
# Linux socket options Python does not name. SO_RCVBUFFORCE passes
# rmem_max for a process allowed to (CAP_NET_ADMIN); SO_MEMINFO gives the
# socket's memory counters, SK_MEMINFO_DROPS of them the datagrams dropped
# (include/uapi/linux/sock_diag.h): one system call when asked, nothing per
# datagram (receiving with recvmsg and SO_RXQ_OVFL cost 0.4 us more each).
SO_RCVBUFFORCE = getattr(socket, "SO_RCVBUFFORCE", 33)
SO_MEMINFO = 55
SK_MEMINFO_VARS, SK_MEMINFO_DROPS = 9, 8
# Errors a receive may report for an earlier datagram (ICMP) or a passing
# shortage: the loop goes on. Any other is a real failure of the socket.
_PASSING = {errno.ECONNREFUSED, errno.EHOSTUNREACH, errno.ENETUNREACH, errno.ENOBUFS, errno.ENOMEM, errno.EAGAIN}
# Other threads (the pump for WebSocket and MQTT, the dashboard) must not keep
# the loop from the GIL for CPython's default 5 ms: that alone would break the
# 5 ms latency target. With 0.2 ms they hand it back promptly.
GIL_SWITCH_INTERVAL_S = 0.0002
# At most this many datagrams are taken before they are processed: it bounds
# how long the first of them waits when a backlog has built up.
MAX_DATAGRAMS_PER_PASS = 256
_READ_BYTES = MAX_MESSAGE_BYTES + 1  # one more, so an oversize datagram is seen as such
SOURCE = "udp"
WORKER = "udp receive loop"


def ask_receive_buffer(sock: socket.socket, size: int) -> int:
    """Ask for a ``size``-byte receive buffer (past the system's limit where allowed);
    returns what the kernel gave, as it reports it (Linux counts twice the bytes
    asked, for its bookkeeping)."""
    for option in (SO_RCVBUFFORCE, socket.SO_RCVBUF):
        try:
            sock.setsockopt(socket.SOL_SOCKET, option, size)
            break
        except OSError:
            continue
    return sock.getsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF)


class UdpReceiver:
    """Listens on (host, port); ``start`` spawns the loop, ``stop`` ends it."""

    def __init__(
        self,
        hub: Hub,
        host: str = DEFAULT_UDP_HOST,
        port: int = DEFAULT_UDP_PORT,
        supervisor: Supervisor | None = None,
    ) -> None:
        self.hub = hub
        self.gate = hub.new_gate()
        self.supervisor = supervisor or Supervisor(hub.health)
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        try:
            self.receive_buffer = ask_receive_buffer(self.sock, RECEIVE_BUFFER_BYTES)
            self.sock.bind((host, port))
        except OSError:
            self.sock.close()
            raise
        self.datagrams = 0
        self.passes = 0
        self._stopping = False
        self._stop = threading.Event()
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
        self.supervisor.run_thread(WORKER, self._loop, self._stop)

    def _loop(self) -> None:
        while not self._stopping:
            self.one_pass()

    def kernel_drops(self) -> int | None:
        """Datagrams the kernel dropped on this socket (its buffer was full) since it was
        opened; None where the system does not say."""
        try:
            info = self.sock.getsockopt(socket.SOL_SOCKET, SO_MEMINFO, SK_MEMINFO_VARS * 4)
            return struct.unpack_from(f"{SK_MEMINFO_VARS}I", info)[SK_MEMINFO_DROPS]
        except (OSError, struct.error):
            return _proc_net_udp_drops(self.sock)

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
        recv, recvfrom, ingest, clock = self.sock.recv, self.sock.recvfrom, self.hub.ingest, time.time
        gate = self.gate
        allowed = gate.source_allowed if gate.allow else None  # recvfrom only when needed
        # Gate.take inline, with the window read once a pass: a method call and its
        # attribute lookups per datagram cost more than the check itself.
        (counts, capped), cap = gate.window(clock()), gate.per_window
        search, early = search_name, {}  # early: messages refused before decoding, by name, this pass
        flags = 0  # the first receive waits
        taken = 0
        while taken < MAX_DATAGRAMS_PER_PASS:
            try:
                if allowed is None:
                    data = recv(_READ_BYTES, flags)
                else:
                    data, source = recvfrom(_READ_BYTES, flags)
            except BlockingIOError:
                break  # nothing more has arrived
            except OSError as exc:
                if self._stopping:
                    break
                if exc.errno in _PASSING:
                    continue  # e.g. ICMP errors reported on the socket: keep listening
                raise
            rx = clock()
            if self._stopping:
                break
            flags = socket.MSG_DONTWAIT
            taken += 1
            if allowed is not None and not allowed(source[0]):
                continue
            if capped:  # Gate.refused_early, inline: under a flood this is most of the loop's work
                found = search(data)
                name = OTHER_NAMES if found is None else found[1]
                if name in capped:
                    early[name] = early.get(name, 0) + (messages_in(data) if data and data[0] == BATCH else 1)
                    continue  # its robot is over the rate cap: not decoded
            samples, failures, raws = decode_keeping_raw(data)
            robot = samples[0].robot if samples else ""
            n = len(samples) + len(failures)
            count = counts.get(robot, 0) + n
            counts[robot] = count
            if count > cap:
                gate.went_over(robot, n, capped)
                continue
            ingest(samples, failures, rx, SOURCE, wake=False, raws=raws)
        for name, n in early.items():
            gate.refuse(name.decode("utf-8", "replace"), n)
        self.datagrams += taken
        return taken

    def stop(self) -> None:
        """End the loop: a datagram to ourselves wakes the waiting receive."""
        self._stopping = True
        self._stop.set()
        if self._thread.is_alive():
            host, port = self.address
            wake_host = "127.0.0.1" if host == "0.0.0.0" else host
            with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as wake:
                wake.sendto(b"", (wake_host, port))
            self._thread.join(timeout=2.0)
        self.sock.close()


def _proc_net_udp_drops(sock: socket.socket) -> int | None:
    """The socket's "drops" column of /proc/net/udp, found by its inode; None if absent."""
    try:
        inode = str(os.fstat(sock.fileno()).st_ino)
        with open("/proc/net/udp", encoding="ascii") as table:
            for line in table:
                fields = line.split()
                if len(fields) >= 13 and fields[9] == inode:
                    return int(fields[-1])
    except (OSError, ValueError):
        return None
    return None
