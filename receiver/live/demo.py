"""The built-in simulated robot streaming over real UDP, for ``podwatch demo`` and benchmarks.

Owns running simulated runs one after another until stopped, each sent in
real time by replay.send_paced, one datagram per message: each new run goes on
from the last one's seq and clock and starts with ``reset`` (the robot code
set its pose), so the receiver re-anchors instead of integrating a jump.
Each message carries two signals of the robot code's own (``own_signals``).
The stream runs under the receiver's ``Supervisor``: a failure is logged and
shown, and the robot goes on from where it was. The motion and the mistakes
come from simulate.py; this module never decodes.
"""

from __future__ import annotations

import asyncio
import threading
import tomllib
from importlib import resources

import numpy as np

from receiver.formats.profile_toml import profile_from_table
from receiver.live.replay import send_paced
from receiver.live.supervise import Supervisor
from receiver.odometry.counts import SEQ_MODULUS
from receiver.odometry.faults import Faults
from receiver.odometry.robot import Profile
from receiver.sim.simulate import Run, simulate

DEMO_FAULTS = ("reversed:right",)  # the robot code reads its right wheel backwards
DEMO_PATH = "figure-eight"
RUN_S = 120.0  # one simulated run; the next one follows on
DEMO_PROFILE = "data/practice-bot.toml"


def demo_profile() -> Profile:
    """The practice robot's profile, shipped inside the package (receiver/data)."""
    text = resources.files("receiver").joinpath(DEMO_PROFILE).read_text(encoding="utf-8")
    return profile_from_table(tomllib.loads(text), "practice-bot (built in)")


def own_signals(run: Run) -> list[dict[str, float]]:
    """Per robot loop, two signals of the robot code's own, as a team would ``put`` them: its
    speed over the field (profile unit per second) and its turn rate (deg/s), from its own
    odometry; the page's Robot signals panel shows them."""
    step = np.diff(run.robot_pose, axis=0)
    dt = np.maximum(np.diff(run.t), 1e-6)
    speed = np.concatenate([[0.0], np.hypot(step[:, 0], step[:, 1]) / dt])
    rate = np.concatenate([[0.0], np.degrees(step[:, 2]) / dt])
    return [{"drive.speed": s, "turn.rate": r} for s, r in zip(np.round(speed, 3).tolist(), np.round(rate, 2).tolist())]


def demo_profile_file() -> str:
    """Where the demo's profile file is (the page's "download profile" keeps its comments)."""
    return str(resources.files("receiver").joinpath(DEMO_PROFILE))


class SimulatedRobot:
    """Streams a simulated robot to ``address`` (host, port) over UDP from a thread."""

    def __init__(
        self,
        profile: Profile,
        address: tuple[str, int],
        path: str = DEMO_PATH,
        rate_hz: float = 100.0,
        seed: int = 1,
        faults: Faults = Faults(),
        run_s: float = RUN_S,
        supervisor: Supervisor | None = None,
    ) -> None:
        self.profile = profile
        self.url = f"udp://{address[0]}:{address[1]}"
        self.path = path
        self.rate_hz = rate_hz
        self.seed = seed
        self.faults = faults
        self.run_s = run_s
        self.supervisor = supervisor
        self._next = (0, None, 0)  # the next run's first seq, its clock's start and its number
        self._loop = asyncio.new_event_loop()
        self._task: asyncio.Task | None = None
        self._thread = threading.Thread(target=self._run, name=f"podwatch-robot-{profile.name}", daemon=True)

    def start(self) -> None:
        """Start streaming from the robot's own thread and event loop; ``stop`` ends it."""
        self._thread.start()

    def stop(self) -> None:
        """Cancel the stream and wait for the thread; the robot cannot be started again."""
        self._loop.call_soon_threadsafe(lambda: self._task is not None and self._task.cancel())
        self._thread.join()
        self._loop.close()

    def _run(self) -> None:
        name = f"simulated robot {self.profile.name}"
        stream = self._stream() if self.supervisor is None else self.supervisor.run_task(name, self._stream)
        self._task = self._loop.create_task(stream)
        try:
            self._loop.run_until_complete(self._task)
        except asyncio.CancelledError:
            pass

    async def _stream(self) -> None:
        seq0, t0, k = self._next
        while True:
            run = simulate(self.profile, self.path, self.rate_hz, self.run_s, self.seed + k, self.faults)
            shift = 0.0 if t0 is None else t0 - float(run.t[0])
            signals = own_signals(run)
            for n, sample in enumerate(run.samples):
                sample.seq = (sample.seq + seq0) % SEQ_MODULUS
                sample.t += shift
                sample.reset = k > 0 and n == 0
                sample.data = signals[int(run.delivered[n])]
            await send_paced(run.samples, run.arrival_s, self.url)
            seq0 = (seq0 + len(run.t)) % SEQ_MODULUS
            t0 = float(run.t[-1]) + shift + 1.0 / self.rate_hz
            k += 1
            self._next = (seq0, t0, k)
