"""Send a robot's raw tracking-wheel counts and its own pose to podwatch over UDP.

A single file with the Python standard library only, for Python-based robots
and for scripting: copy it next to your robot code. Create one sender at
start-up and call ``send`` once per loop, right after reading the encoders
and updating your odometry:

    from podwatch_sender import OdometrySender

    sender = OdometrySender("practice-bot")            # broadcast on port 47474
    while running:
        ...
        sender.put("arm.angle", arm_angle)             # optional: your own signals
        sender.send([left, right, back], pose=(x, y, heading))

Counts go in the order of the profile's [[wheel]] tables, the pose in the
units and conventions its [reported] table declares. ``send`` never blocks
the loop: the socket is non-blocking, a datagram the network cannot take
right now is dropped and counted, and a rate cap keeps a fast loop from
flooding the network (podwatch bridges skipped samples from the cumulative
counts).

``put(name, value)`` adds a signal of your own (a motor power, an arm angle)
to the next message that goes out, as the message's "data"; podwatch records
it by name. A name of other characters than A-Z a-z 0-9 _ . -, a 33rd name
before a message goes out, or a value that is not a number is a mistake in
the robot code and raises ValueError at once, so it shows the first time the
loop runs. A value that is NaN or infinite (a sensor or a division can give
one mid-match) is skipped and counted in ``skipped_signals``: the loop never
stops for it.
"""

from __future__ import annotations

import json
import math
import numbers
import re
import socket
import time

DEFAULT_PORT = 47474
DEFAULT_MAX_RATE_HZ = 200.0
MAX_SIGNALS = 32  # per message, as the wire protocol allows
_ROBOT = re.compile(r"[A-Za-z0-9_.\-]{1,32}\Z")


class OdometrySender:
    def __init__(
        self,
        robot: str,
        host: str = "255.255.255.255",
        port: int = DEFAULT_PORT,
        max_rate_hz: float = DEFAULT_MAX_RATE_HZ,
    ) -> None:
        if not _ROBOT.match(robot):
            raise ValueError(f"robot id must be 1-32 of A-Z a-z 0-9 _ . -, got {robot!r}")
        if not max_rate_hz > 0:
            raise ValueError(f"max_rate_hz must be positive, got {max_rate_hz!r}")
        self.robot = robot
        self.address = (host, port)
        self.min_interval_s = 1.0 / max_rate_hz
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        self.sock.setsockopt(socket.SOL_SOCKET, socket.SO_BROADCAST, 1)
        self.sock.setblocking(False)
        self.seq = 0
        self.sent = 0
        self.dropped = 0
        self.skipped_signals = 0
        self._signals: dict[str, float] = {}
        self._last_send: float | None = None
        self._last_loop: float | None = None

    def put(self, name: str, value: float) -> bool:
        """Add a signal to the next message sent (the latest value of a name wins); False
        when the value is NaN or infinite and was skipped (counted in ``skipped_signals``)."""
        if not isinstance(name, str) or not _ROBOT.match(name):
            raise ValueError(f"signal name must be 1-32 of A-Z a-z 0-9 _ . -, got {name!r}")
        if isinstance(value, bool) or not isinstance(value, numbers.Real):
            raise ValueError(f"signal {name!r} must be a number, got {value!r}")
        if name not in self._signals and len(self._signals) >= MAX_SIGNALS:
            raise ValueError(f"at most {MAX_SIGNALS} signals per message: {name!r} is one more")
        try:
            number = float(value)
        except OverflowError:  # an integer past a double's range
            number = math.inf
        if not math.isfinite(number):
            self.skipped_signals += 1
            return False
        self._signals[name] = number
        return True

    def send(self, ticks, pose=None, imu: float | None = None, reset: bool = False) -> bool:
        """Queue one sample; True when it went out, False when skipped or dropped."""
        now = time.monotonic()
        loop = None if self._last_loop is None else now - self._last_loop
        self._last_loop = now
        if not reset and self._last_send is not None and now - self._last_send < self.min_interval_s:
            return False
        self._last_send = now
        message = {"v": 1, "robot": self.robot, "seq": self.seq, "t": now, "ticks": [int(c) for c in ticks]}
        if pose is not None and all(math.isfinite(v) for v in pose):
            message["pose"] = [float(v) for v in pose]
        if imu is not None and math.isfinite(imu):
            message["imu"] = float(imu)
        if loop is not None:
            message["loop"] = loop
        if reset:
            message["reset"] = True
        if self._signals:
            message["data"] = self._signals
            self._signals = {}
        self.seq = (self.seq + 1) % 2**32  # wraps at 2^32, as the protocol says
        try:
            self.sock.sendto(json.dumps(message, separators=(",", ":")).encode(), self.address)
        except OSError:  # buffer full or no network right now: never stop the robot
            self.dropped += 1
            return False
        self.sent += 1
        return True

    def close(self) -> None:
        self.sock.close()

    def __enter__(self) -> OdometrySender:
        return self

    def __exit__(self, *exc_info) -> None:
        self.close()
