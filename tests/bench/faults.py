"""What a real ``podwatch serve`` process loses under faults and hostile traffic, run by hand.

    .venv/bin/python tests/bench/faults.py flood [--compare DIR] [--flood-rate 100000] [--seconds 10]
    .venv/bin/python tests/bench/faults.py names [--compare DIR]
    .venv/bin/python tests/bench/faults.py ws-flood [--compare DIR] [--seconds 10] [--clients 1] [--names 1]
    .venv/bin/python tests/bench/faults.py disk-full [--compare DIR]
    .venv/bin/python tests/bench/faults.py sigkill [--compare DIR] [--repeat 5]
    .venv/bin/python tests/bench/faults.py existing [--compare DIR]
    .venv/bin/python tests/bench/faults.py mqtt-outage [--compare DIR]

Each starts ``podwatch serve`` (this tree's, and with ``--compare DIR`` also
the ``receiver`` package under DIR, say ``git archive HEAD receiver`` of
main unpacked there, one after the other) on free loopback ports, drives it
with robots in other processes, stops it with Ctrl-C (SIGINT) or SIGKILL,
and prints what was sent, what the receiver counted (its summary), what its
recording holds and its exit status:

- flood: a good robot at 200 Hz and, for --seconds, a second sender
  flooding under another name at --flood-rate datagrams/s; the good robot's
  loss is what counts.
- names: 100 invented robot names, then a real robot 11 s later.
- ws-flood: --clients WebSocket clients with the token sending batches as
  fast as they can, each under --names names in turn; the receiver's peak
  memory (VmHWM) is what counts.
- disk-full: the recording on a 1 MB tmpfs (as root) or, otherwise, under a
  file size limit of 1 MB (RLIMIT_FSIZE: the kernel refuses writes past it
  with EFBIG), a robot at 1 kHz for 10 s.
- sigkill: SIGKILL after 3 s of a robot at 1 kHz; the messages sent more
  than the flush interval before the kill that the recording lacks.
- existing: ``--record`` on an existing file.
- mqtt-outage: a robot publishing at 200 Hz through a Mosquitto stopped for
  5 s mid-stream and started again.
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import os
import resource
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

HERE = Path(__file__).resolve().parents[2]
PROFILE = HERE / "replay_fixtures" / "practice-bot.toml"
PYTHON = sys.executable
FLUSH_INTERVAL_S = 0.2


def free_port(kind: int = socket.SOCK_DGRAM) -> int:
    with socket.socket(socket.AF_INET, kind) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def message(robot: str, seq: int, t: float) -> bytes:
    return b'{"v":1,"robot":"%s","seq":%d,"t":%.6f,"ticks":[%d,%d,0],"pose":[0.0,0.0,0.0]}' % (
        robot.encode(), seq, t, 3 * seq, 3 * seq)


def pace_udp(address, robot: str, rate: float, seconds: float, result=None, start_seq: int = 0) -> int:
    """Send ``robot``'s messages at ``rate``/s for ``seconds`` (sending late ones at once)."""
    sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_SNDBUF, 4 << 20)
    start, sent = time.perf_counter(), 0
    while True:
        elapsed = time.perf_counter() - start
        if elapsed >= seconds:
            break
        due = int(elapsed * rate) - sent
        if due <= 0:
            time.sleep(min(0.0005, 1.0 / rate))
            continue
        for _ in range(min(due, 1000)):
            try:
                sock.sendto(message(robot, start_seq + sent, elapsed), address)
            except OSError:
                pass  # the kernel had no room: counted as sent, lost like a robot's would be
            sent += 1
    if result is not None:
        result.put((robot, sent))
    return sent


class Serve:
    """A ``podwatch serve`` of one tree, run in its own process."""

    def __init__(self, tree: str, args: list[str], cwd: Path, preexec=None) -> None:
        code = ("import sys; sys.path.insert(0, sys.argv[1]); from receiver.cli.program import main; "
                "sys.argv = ['podwatch'] + sys.argv[2:]; sys.exit(main())")
        self.proc = subprocess.Popen([PYTHON, "-c", code, tree, "serve", *args], cwd=cwd, stdout=subprocess.PIPE,
                                     stderr=subprocess.PIPE, text=True, preexec_fn=preexec)
        self.out = ""
        self.err = ""

    def wait_listening(self, what: str = "listening: udp", timeout: float = 60.0) -> None:
        """Read standard output until a line containing ``what``."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            line = self.proc.stdout.readline()
            self.out += line
            if what in line:
                return
            if not line and self.proc.poll() is not None:
                break
        self.err += self.proc.stderr.read()
        raise RuntimeError(f"serve did not start: {self.out}{self.err}")

    def peak_rss_mb(self) -> float:
        with open(f"/proc/{self.proc.pid}/status") as status:
            for line in status:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024
        return float("nan")

    def stop(self, sig: int = signal.SIGINT, timeout: float = 60.0) -> int:
        self.proc.send_signal(sig)
        out, err = self.proc.communicate(timeout=timeout)
        self.out += out
        self.err += err
        return self.proc.returncode

    def robot_messages(self, robot: str) -> int | None:
        for line in self.out.splitlines():
            if line.startswith(f"podwatch: {robot}: "):
                return int(line.split(": ")[2].split()[0])
        return None


def recorded(path: Path) -> dict[str, list[int]]:
    """seq per robot in a recording (plain or gzip), read by podwatch's own reader; {} if unreadable."""
    from receiver.errors import RecordingError
    from receiver.formats.recording import read_recording

    try:
        data = read_recording(path)
    except RecordingError:
        return {}
    return {robot: cols.seq.tolist() for robot, cols in data.robots.items()}


def trees(args) -> dict[str, str]:
    return {"this tree": str(HERE), **({args.compare: args.compare} if args.compare else {})}


def say_result(label: str, **values) -> None:
    print(f"{label[-24:]:>24}: " + ", ".join(f"{k} {v}" for k, v in values.items()), flush=True)


def flood(args) -> None:
    print(f"good robot at 200 Hz for {args.seconds + 4:g} s; flood under another name at {args.flood_rate:,.0f} "
          f"datagrams/s for {args.seconds:g} s, from 2 s in")
    for label, tree in trees(args).items():
        with tempfile.TemporaryDirectory() as tmp:
            port = free_port()
            serve = Serve(tree, ["--udp", f"127.0.0.1:{port}", "--no-dashboard", "--profile", str(PROFILE)], Path(tmp))
            serve.wait_listening()
            result = mp.Queue()
            good = mp.Process(target=pace_udp, args=(("127.0.0.1", port), "practice-bot", 200.0, args.seconds + 4,
                                                     result))
            good.start()
            time.sleep(2.0)
            bad = mp.Process(target=pace_udp, args=(("127.0.0.1", port), "flood-bot", args.flood_rate, args.seconds,
                                                    result))
            bad.start()
            sent = dict(result.get() for _ in range(2))
            good.join()
            bad.join()
            time.sleep(1.0)
            code = serve.stop()
            got = serve.robot_messages("practice-bot") or 0
            lost = sent["practice-bot"] - got
            share = f"{lost} ({100 * lost / sent['practice-bot']:.1f} %)"
            say_result(label, good_sent=sent["practice-bot"], good_lost=share, flood_sent=sent["flood-bot"],
                       flood_taken=serve.robot_messages("flood-bot"), exit=code)
            for line in serve.out.splitlines()[-6:]:
                print(f"{'':>26}{line}")


def names(args) -> None:
    print("100 invented robot names (one message each), then a real robot at 200 Hz for 2 s, 11 s later")
    for label, tree in trees(args).items():
        with tempfile.TemporaryDirectory() as tmp:
            port = free_port()
            serve = Serve(tree, ["--udp", f"127.0.0.1:{port}", "--no-dashboard"], Path(tmp))
            serve.wait_listening()
            with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
                for k in range(100):
                    sock.sendto(message(f"invented-{k:03d}", 0, 0.0), ("127.0.0.1", port))
            time.sleep(11.0)
            sent = pace_udp(("127.0.0.1", port), "late-bot", 200.0, 2.0)
            time.sleep(0.5)
            code = serve.stop()
            say_result(label, late_sent=sent, late_taken=serve.robot_messages("late-bot"), exit=code)


def _ws_client(port: int, token: str, names: list[str], seconds: float, result) -> None:
    import asyncio

    from websockets.asyncio.client import connect

    async def run() -> int:
        sent, seq = 0, {name: 0 for name in names}
        async with connect(f"ws://127.0.0.1:{port}/?token={token}", compression=None) as ws:
            end = time.monotonic() + seconds
            while time.monotonic() < end:
                for name in names:
                    first = seq[name]
                    batch = b"[" + b",".join(message(name, first + k, 0.001 * (first + k)) for k in range(64)) + b"]"
                    seq[name] = first + 64
                    await ws.send(batch, text=True)
                    sent += 64
        return sent

    result.put(asyncio.run(run()))


def ws_flood(args) -> None:
    print(f"{args.clients} WebSocket client(s) with the token, sending batches of 64 under {args.names} name(s) "
          f"each in turn, as fast as they can for {args.seconds:g} s")
    for label, tree in trees(args).items():
        with tempfile.TemporaryDirectory() as tmp:
            port, page = free_port(socket.SOCK_STREAM), free_port(socket.SOCK_STREAM)
            # with the page, as serve runs by default: its listener keeps each robot's raw samples
            serve = Serve(tree, ["--ws", f"127.0.0.1:{port}", "--token", "s3cret", "--dashboard", f"127.0.0.1:{page}"],
                          Path(tmp))
            serve.wait_listening("dashboard:")
            result = mp.Queue()
            names = [[f"ws-flood-{c}-{k}" for k in range(args.names)] for c in range(args.clients)]
            clients = [mp.Process(target=_ws_client, args=(port, "s3cret", names[c], args.seconds, result))
                       for c in range(args.clients)]
            for client in clients:
                client.start()
            sent = sum(result.get() for _ in clients)
            for client in clients:
                client.join()
            peak = serve.peak_rss_mb()
            code = serve.stop()
            taken = sum(serve.robot_messages(name) or 0 for group in names for name in group)
            say_result(label, sent=f"{sent:,}", taken=f"{taken:,}", peak_rss=f"{peak:.0f} MB", exit=code)


def _limit_file_size() -> None:
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # a write past the limit then fails with EFBIG
    resource.setrlimit(resource.RLIMIT_FSIZE, (1 << 20, 1 << 20))


def disk_full(args) -> None:
    for label, tree in trees(args).items():
        with tempfile.TemporaryDirectory() as tmp:
            folder = Path(tmp) / "disk"
            folder.mkdir()
            mounted = os.geteuid() == 0 and subprocess.run(
                ["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(folder)], capture_output=True).returncode == 0
            how = "1 MB tmpfs" if mounted else "RLIMIT_FSIZE 1 MB"
            try:
                port = free_port()
                serve = Serve(tree, ["--udp", f"127.0.0.1:{port}", "--no-dashboard", "--profile", str(PROFILE),
                                     "--record", str(folder / "session.jsonl")], Path(tmp),
                              preexec=None if mounted else _limit_file_size)
                serve.wait_listening()
                sent = pace_udp(("127.0.0.1", port), "practice-bot", 1000.0, 10.0)
                time.sleep(1.0)
                code = serve.stop()
                shown = serve.robot_messages("practice-bot")
                on_disk = len(recorded(folder / "session.jsonl").get("practice-bot", []))
                say_result(f"{label} ({how})", sent=sent, shown=shown, recorded=on_disk, exit=code)
                for line in (serve.out + serve.err).splitlines():
                    if "recording" in line or "error" in line or "Traceback" in line:
                        print(f"{'':>26}{line}")
            finally:
                if mounted:
                    subprocess.run(["umount", str(folder)], check=True)


def sigkill(args) -> None:
    print("a robot at 1 kHz for 3 s and a bit (0, 0.05, 0.1 ... s more), then SIGKILL: the messages lost, and those "
          "sent more than the flush interval before the kill that are not in the recording")
    for label, tree in trees(args).items():
        for k in range(args.repeat):
            with tempfile.TemporaryDirectory() as tmp:
                port = free_port()
                path = Path(tmp) / "session.jsonl"
                serve = Serve(tree, ["--udp", f"127.0.0.1:{port}", "--no-dashboard", "--record", str(path)], Path(tmp))
                serve.wait_listening()
                sent = pace_udp(("127.0.0.1", port), "practice-bot", 1000.0, 3.0 + 0.05 * k)
                serve.proc.kill()
                serve.proc.wait()
                seqs = recorded(path).get("practice-bot", [])
                before = sent - int(1000.0 * FLUSH_INTERVAL_S)
                missing = sum(1 for s in range(before) if s not in set(seqs))
                say_result(label, sent=sent, recorded=len(seqs), lost=sent - len(seqs),
                           lost_before_the_last_interval=missing)


def existing(args) -> None:
    for label, tree in trees(args).items():
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "session.jsonl"
            shutil.copy(HERE / "replay_fixtures" / "practice-bot-square.jsonl", path)
            before = path.stat().st_size
            serve = Serve(tree, ["--udp", "127.0.0.1:0", "--no-dashboard", "--record", str(path)], Path(tmp))
            try:
                serve.wait_listening(timeout=20)
                code = serve.stop()
            except RuntimeError:
                code = serve.proc.wait()
            say_result(label, bytes_before=before, bytes_after=path.stat().st_size, exit=code,
                       said=(serve.err.strip().splitlines() or [""])[-1][:100])


def mqtt_outage(args) -> None:
    from tests.live.transports.conftest import MOSQUITTO

    print("a robot at 200 Hz for 12 s through Mosquitto; the broker stopped at 3 s and started again 5 s later")
    for label, tree in trees(args).items():
        with tempfile.TemporaryDirectory() as tmp:
            port = free_port(socket.SOCK_STREAM)
            config = Path(tmp) / "mosquitto.conf"
            config.write_text(f"listener {port} 127.0.0.1\nallow_anonymous true\npersistence false\n")

            def broker():
                proc = subprocess.Popen([MOSQUITTO, "-c", str(config)], stderr=subprocess.DEVNULL)
                time.sleep(0.5)
                return proc

            mosquitto = broker()
            serve = Serve(tree, ["--mqtt", f"mqtt://127.0.0.1:{port}", "--no-dashboard", "--profile", str(PROFILE)],
                          Path(tmp))
            serve.wait_listening("listening: mqtt")
            time.sleep(1.0)
            robot = subprocess.Popen([PYTHON, "-c", _MQTT_ROBOT, str(port)], cwd=HERE, stdout=subprocess.PIPE,
                                     text=True)
            time.sleep(3.0)
            mosquitto.terminate()
            mosquitto.wait()
            time.sleep(5.0)
            mosquitto = broker()
            sent = int(robot.communicate(timeout=60)[0].split()[-1])
            time.sleep(1.0)
            code = serve.stop()
            mosquitto.terminate()
            mosquitto.wait()
            say_result(label, sent=sent, taken=serve.robot_messages("practice-bot"), exit=code)
            for line in serve.err.splitlines() + serve.out.splitlines():
                if "mqtt" in line.lower() or "practice-bot:" in line:
                    print(f"{'':>26}{line}")


# A robot publishing at 200 Hz for 12 s with paho at QoS 0, reconnecting by itself; prints how many it published.
_MQTT_ROBOT = """
import sys, time
import paho.mqtt.client as mqtt
from tests.bench.faults import message
client = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2)
client.connect("127.0.0.1", int(sys.argv[1]))
client.loop_start()
start, sent = time.perf_counter(), 0
while time.perf_counter() - start < 12.0:
    due = int((time.perf_counter() - start) * 200) - sent
    for _ in range(due):
        client.publish("podwatch/practice-bot/samples", message("practice-bot", sent, 0.005 * sent))
        sent += 1
    time.sleep(0.001)
client.loop_stop()
print("published", sent)
"""


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("fault", choices=("flood", "names", "ws-flood", "disk-full", "sigkill", "existing",
                                          "mqtt-outage"))
    parser.add_argument("--compare", metavar="DIR", help="also run the receiver package under DIR")
    parser.add_argument("--seconds", type=float, default=10.0, help="flood length (default 10)")
    parser.add_argument("--flood-rate", type=float, default=100_000.0, help="flood datagrams/s (default 100000)")
    parser.add_argument("--names", type=int, default=1, help="ws-flood: names each client sends under (default 1)")
    parser.add_argument("--clients", type=int, default=1, help="ws-flood: clients (default 1)")
    parser.add_argument("--repeat", type=int, default=3, help="sigkill: runs per tree (default 3)")
    args = parser.parse_args()
    print(f"{os.cpu_count()} cores; 1-minute load average {os.getloadavg()[0]:.2f}")
    {"flood": flood, "names": names, "ws-flood": ws_flood, "disk-full": disk_full, "sigkill": sigkill,
     "existing": existing, "mqtt-outage": mqtt_outage}[args.fault](args)


if __name__ == "__main__":
    main()
