"""UDP ingest benchmark, run by hand (pytest does not collect bench_* files).

    .venv/bin/python tests/bench/bench_udp.py [--duration 30] [--robots 20] [--batch 16]
        [--single-rates 10000,20000,...] [--batched-rates ...] [--only single|batched] [--record]
        [--compare OTHER_TREE]
    .venv/bin/python tests/bench/bench_udp.py --only cpu [--compare OTHER_TREE] [--profile]

A sender in another process streams wire messages to a live UdpReceiver,
Hub and Pump on 127.0.0.1 at a target rate, rising step by step until a
step loses a message (or the sender cannot reach the rate). Reported per
step: messages sent and taken, datagrams sent and received, lost, and the
latency to the recomputed pose being available (when the hub's listeners
are told) at p50, p99 and max, measured from the datagram's arrival (its
rx, the receiver's clock right after the receive call) and, as ``p99 send``,
from the moment the sender sent it (its ``t`` carries the sender's wall
clock; this adds the time spent waiting in the kernel's socket buffer).
"recv dgram" counts datagrams the receive loop got (fewer than sent: the
kernel dropped them; "lost" beyond that: still queued after the drain
time). "rx CPU" is the receive thread's own CPU time (its thread clock)
per datagram received, and "per pass" the datagrams its loop took per pass.
The 1-minute load average before and after each step shows what else was
running. First single-message datagrams, then datagrams batching
--batch messages of one robot. With --record the hub also writes a recording
(to a temporary file, deleted afterwards), as ``podwatch serve`` does by
default. As in ``serve``, the heap is settled (receiver.live.settle_heap)
once everything is set up. With ``--compare DIR`` each step runs twice, in
turns, in fresh processes: with this tree's ``receiver`` package and with
the one under DIR (a copy of another tree, say ``git archive HEAD receiver``
unpacked there).

``--only cpu`` measures instead the receive thread's CPU time per datagram
(time.thread_time, so other processes on the machine do not count) through
exactly what the loop runs on each pass (``UdpReceiver.one_pass``: the
receive calls, decode, ``Hub.ingest`` and ``Hub.process``), with ``serve``'s
defaults (a recording, the dashboard's raw-history listener, a 600 s
window). Datagrams are put on a loopback socket just before each pass (pass
sizes 1, 4 and 16 datagrams; --robots robots in turn), outside the timing.
It leaves out what waiting costs: a thread that sleeps or blocks and wakes
again spent about 20 us of CPU on that here, and ran its next work slower;
the ramps' "rx CPU" counts everything. With ``--compare DIR`` the
measurement runs in turns with both packages, each in its own process, and
both are printed side by side. ``--profile`` prints cProfile's top
functions for this tree instead.
"""

from __future__ import annotations

import argparse
import cProfile
import gc
import json
import multiprocessing as mp
import os
import pstats
import select
import socket
import subprocess
import sys
import tempfile
import time
from array import array
from dataclasses import replace
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from receiver.formats.profile_toml import load_profile  # noqa: E402
from receiver.formats.recording_writer import RecordingWriter  # noqa: E402
from receiver.live.hub import Hub  # noqa: E402
from receiver.live.raw_history import RawHistory  # noqa: E402
from receiver.live.serve import Pump, settle_heap  # noqa: E402
from receiver.live.transports.udp import UdpReceiver  # noqa: E402

_HERE = str(Path(__file__).resolve().parents[2])
PROFILE = Path(_HERE) / "replay_fixtures" / "practice-bot.toml"
SINGLE_RATES = (10_000, 20_000, 30_000, 40_000, 60_000, 80_000, 120_000, 160_000)
BATCH_RATES = (20_000, 40_000, 80_000, 160_000, 320_000, 640_000)
DRAIN_S = 3.0  # after the sender stops, time for the receiver to catch up
CPU_PASS_SIZES = (1, 4, 16)  # datagrams waiting per pass of the receive loop
CPU_WARMUP = 2_000  # datagrams through each pipeline before the measurement
CPU_DATAGRAMS = 10_000  # measured datagrams per pass size
CPU_ROUNDS = 5  # turns per tree with --compare; the least and the median are printed


def robot_name(i: int) -> str:
    return f"bench-{i:02d}"


def message(robot: bytes, seq: int, sent: float) -> bytes:
    # constant forward motion: 3 counts per loop on the two forward wheels;
    # t is the sender's wall clock, so the receiver can tell the time since sending
    return b'{"v":1,"robot":"%s","seq":%d,"t":%.6f,"ticks":[%d,%d,0],"pose":[0.0,0.0,0.0],"loop":0.001}' % (
        robot, seq, sent, 3 * seq, 3 * seq,
    )


def sender(address, rate_msgs: float, duration_s: float, robots: int, batch: int, result) -> None:
    """Send for duration_s at rate_msgs messages/s; datagrams hold `batch` messages of one robot."""
    import socket

    sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    names = [robot_name(i).encode() for i in range(robots)]
    seq = [0] * robots
    datagram_rate = rate_msgs / batch
    sent_datagrams = 0
    start = time.perf_counter()
    robot = 0
    while True:
        elapsed = time.perf_counter() - start
        if elapsed >= duration_s:
            break
        due = int(elapsed * datagram_rate) - sent_datagrams
        if due <= 0:
            time.sleep(0.0002)
            continue
        for _ in range(min(due, 1000)):
            s = seq[robot]
            now = time.time()
            if batch == 1:
                payload = message(names[robot], s, now)
            else:
                payload = b"[" + b",".join(message(names[robot], s + k, now) for k in range(batch)) + b"]"
            seq[robot] = s + batch
            try:
                sock.sendto(payload, address)
            except BlockingIOError:
                continue
            sent_datagrams += 1
            robot = (robot + 1) % robots
    result.put((sent_datagrams, sent_datagrams * batch, time.perf_counter() - start))


def run_step(rate: float, duration_s: float, robots: int, batch: int, record: bool = False) -> dict:
    base = load_profile(PROFILE)
    profiles = {robot_name(i): replace(base, name=robot_name(i)) for i in range(robots)}
    recording = Path(tempfile.gettempdir()) / f"bench-udp-{os.getpid()}.jsonl"
    recorder = RecordingWriter(recording, profiles.values()) if record else None
    hub = Hub(profiles, recorder=recorder, window_s=10.0, max_rows=100_000)
    # What the listener was told, kept in arrays: the garbage collector does not
    # walk them, where a tuple and two lists per call grew every full collection
    # by the end of a 30 s step. Arithmetic after the run.
    told_when, told_rx, told_t = array("d"), array("d"), array("d")  # when per sample, rx, sender's t

    def on_processed(accepted, updates):
        when = time.time()
        told_when.extend([when] * len(accepted))
        told_rx.extend([s.rx for s, _ in accepted])
        told_t.extend([s.t for s, _ in accepted])

    hub.add_listener(on_processed)
    load_before = os.getloadavg()[0]
    udp = UdpReceiver(hub, "127.0.0.1", 0)
    pump = Pump(hub)
    pump.start()
    udp.start()
    udp_cpu = time.pthread_getcpuclockid(udp._thread.ident)  # the receive thread's own CPU clock
    udp_cpu_start = time.clock_gettime(udp_cpu)
    settle_heap()
    result = mp.Queue()
    proc = mp.Process(target=sender, args=(udp.address, rate, duration_s, robots, batch, result))
    proc.start()
    sent_datagrams, sent_msgs, send_s = result.get()
    proc.join()
    deadline = time.monotonic() + DRAIN_S
    while time.monotonic() < deadline:
        taken = sum(s.messages for s in hub.snapshot(time.time()).values())
        if taken >= sent_msgs:
            break
        time.sleep(0.05)
    udp_cpu_s = time.clock_gettime(udp_cpu) - udp_cpu_start
    udp.stop()
    pump.stop()
    gc.unfreeze()  # the next step settles its own heap
    recorded = None
    if recorder is not None:
        recorder.close()
        recorded = recorder.message_count
        recording.unlink()
    snap = hub.snapshot(time.time())
    taken = sum(s.messages for s in snap.values())
    when = np.frombuffer(told_when) if told_when else np.array([np.nan])
    lat = when - (np.frombuffer(told_rx) if told_rx else np.nan)
    lat_send = when - (np.frombuffer(told_t) if told_t else np.nan)
    return {
        "rate": rate,
        "achieved": sent_msgs / send_s,
        "datagrams": sent_datagrams,
        "received": udp.datagrams,
        "sent": sent_msgs,
        "taken": taken,
        "lost": sent_msgs - taken,
        "errors": sum(hub.errors.values()),
        "p50_ms": float(np.percentile(lat, 50) * 1e3),
        "p99_ms": float(np.percentile(lat, 99) * 1e3),
        "max_ms": float(np.max(lat) * 1e3),
        "p99_send_ms": float(np.percentile(lat_send, 99) * 1e3),
        "load": (load_before, os.getloadavg()[0]),
        "recorded": recorded,
        "rx_cpu_us": udp_cpu_s * 1e6 / max(udp.datagrams, 1),
        "per_pass": udp.datagrams / udp.passes if getattr(udp, "passes", 0) else float("nan"),
    }


def ramp(
    title: str, rates, duration_s: float, robots: int, batch: int, record: bool, compare: str | None = None
) -> None:
    recording = ", recording" if record else ""
    print(f"\n{title} ({robots} robots, {batch} message(s) per datagram, {duration_s:g} s per step{recording})")
    print("rx CPU: the receive thread's CPU time per datagram received, us; per pass: datagrams per pass of its loop")
    print(f"{'tree':>12} " if compare else "", end="")
    print(f"{'target msg/s':>12} {'sent msg/s':>11} {'sent':>9} {'taken':>9} {'lost':>6} {'datagrams':>10} {'recv dgram':>10} "
          f"{'p50 ms':>7} {'p99 ms':>7} {'max ms':>7} {'p99 send':>8} {'rx CPU':>6} {'per pass':>8} {'load 1m':>11}")
    best = None
    for rate in rates:
        args = [rate, duration_s, robots, batch, record]
        # with --compare, the other tree's step right after this tree's, each in its own process
        steps = {"this tree": _in_tree(_HERE, "run_step", args), compare: _in_tree(compare, "run_step", args)} \
            if compare else {"": run_step(*args)}
        for label, r in steps.items():
            print(f"{label[-12:]:>12} " if compare else "", end="")
            print(f"{r['rate']:>12,.0f} {r['achieved']:>11,.0f} {r['sent']:>9,} {r['taken']:>9,} {r['lost']:>6,} "
                  f"{r['datagrams']:>10,} {r['received']:>10,} {r['p50_ms']:>7.2f} {r['p99_ms']:>7.2f} {r['max_ms']:>7.1f} "
                  f"{r['p99_send_ms']:>8.2f} {r['rx_cpu_us']:>6.1f} {r['per_pass']:>8.1f} "
                  f"{r['load'][0]:>5.2f}>{r['load'][1]:<5.2f}", flush=True)
        r = next(iter(steps.values()))
        if r["recorded"] not in (None, r["taken"]):
            print(f"recorded {r['recorded']:,} of {r['taken']:,} messages taken")
        if r["lost"] != 0 or r["errors"] != 0 or r["achieved"] < 0.95 * rate or r["recorded"] not in (None, r["taken"]):
            break
        best = r
    if best is None:
        print("no rate held with zero loss")
    else:
        print(f"highest rate held with zero loss: {best['rate']:,.0f} msg/s (p99 {best['p99_ms']:.2f} ms)")


def cpu_per_datagram(robots: int, profiler: cProfile.Profile | None = None) -> dict[int, float]:
    """Receive-thread CPU microseconds per datagram, by pass size (see the module's
    comment). Datagrams are single messages of ``robots`` robots in turn."""
    base = load_profile(PROFILE)
    profiles = {robot_name(i): replace(base, name=robot_name(i)) for i in range(robots)}
    names = [robot_name(i).encode() for i in range(robots)]
    total = CPU_WARMUP + CPU_DATAGRAMS
    payloads = [message(names[i % robots], i // robots, 1_000.0 + 0.001 * (i // robots)) for i in range(total)]
    us = {}
    for size in CPU_PASS_SIZES:
        with tempfile.TemporaryDirectory() as tmp:
            recorder = RecordingWriter(Path(tmp) / "bench.jsonl", profiles.values())
            hub = Hub(profiles, recorder=recorder)  # serve's defaults: 600 s window
            hub.add_listener(RawHistory())  # what the dashboard registers
            udp = UdpReceiver(hub, "127.0.0.1", 0)
            address = udp.address
            one_pass, thread_time = getattr(udp, "one_pass", None), time.thread_time_ns
            if one_pass is None:  # a tree from before UdpReceiver.one_pass: its loop's body, as it was
                def one_pass(sock=udp.sock, take=udp._take_arrived, process=hub.process, clock=time.time):
                    select.select([sock], [], [])
                    if take():
                        process(clock())
            cpu_ns = taken = 0
            with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as out:
                settle_heap()
                for start in range(0, total, size):
                    for payload in payloads[start : start + size]:
                        out.sendto(payload, address)
                    measured = start >= CPU_WARMUP
                    if measured and profiler is not None:
                        profiler.enable()
                    began = thread_time()
                    one_pass()  # what UdpReceiver._run does on each pass
                    spent = thread_time() - began
                    if measured:
                        if profiler is not None:
                            profiler.disable()
                        cpu_ns += spent
                        taken += udp.datagrams
                    udp.datagrams = 0
                gc.unfreeze()
            udp.sock.close()
            recorder.close()
            if taken != CPU_DATAGRAMS or recorder.message_count != total:
                raise RuntimeError(f"pass size {size}: took {taken} of {CPU_DATAGRAMS} datagrams")
            us[size] = cpu_ns / 1e3 / CPU_DATAGRAMS
    return us


def _in_tree(tree: str, function: str, args: list):
    """bench_udp.<function>(*args) in a fresh process whose ``receiver``
    package is the one under ``tree``; its result, through JSON."""
    code = (
        "import json, sys; sys.path.insert(0, sys.argv[1]); import receiver; "  # that tree's package first
        "sys.path.insert(0, sys.argv[2]); import bench_udp; "
        "print(json.dumps(getattr(bench_udp, sys.argv[3])(*json.loads(sys.argv[4]))))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code, tree, str(Path(__file__).resolve().parent), function, json.dumps(args)],
        check=True, capture_output=True, text=True,
    ).stdout
    return json.loads(out.splitlines()[-1])


def cpu_report(robots: int, compare: str | None, profile: bool) -> None:
    if profile:
        profiler = cProfile.Profile()
        us = cpu_per_datagram(robots, profiler)
        print("receive-thread CPU per datagram, us, by pass size:", {k: round(v, 1) for k, v in us.items()})
        print(f"cProfile over {len(CPU_PASS_SIZES) * CPU_DATAGRAMS:,} datagrams (its own overhead inflates each call):")
        pstats.Stats(profiler).sort_stats("tottime").print_stats(25)
        return
    trees = {"this tree": _HERE, **({compare: compare} if compare else {})}
    runs: dict[str, list[dict[int, float]]] = {name: [] for name in trees}
    for _ in range(CPU_ROUNDS):
        for name, tree in trees.items():  # in turns, so a busy spell hits both
            runs[name].append({int(k): v for k, v in _in_tree(tree, "cpu_per_datagram", [robots]).items()})
    print(f"\nreceive-thread CPU per single-message datagram, us: least and median of {CPU_ROUNDS} runs of "
          f"{CPU_DATAGRAMS:,} ({robots} robots, recording and raw-history listener as in serve)")
    print(f"{'datagrams per pass':>18} " + " ".join(f"{name[-24:]:>24}" for name in trees)
          + (f" {'ratio of medians':>16}" if compare else ""))
    for size in CPU_PASS_SIZES:
        least = [min(run[size] for run in runs[name]) for name in trees]
        med = [float(np.median([run[size] for run in runs[name]])) for name in trees]
        ratio = f" {med[1] / med[0]:>15.2f}x" if compare else ""
        print(f"{size:>18} " + " ".join(f"{lo:>13.1f} / {m:>8.1f}" for lo, m in zip(least, med)) + ratio)
    print(f"1-minute load average {os.getloadavg()[0]:.2f}")


def rates(text: str) -> tuple[int, ...]:
    return tuple(int(float(part)) for part in text.split(","))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--duration", type=float, default=30.0, help="seconds per rate step (default 30)")
    parser.add_argument("--robots", type=int, default=20, help="robots the sender interleaves (default 20)")
    parser.add_argument("--batch", type=int, default=16, help="messages per datagram in the batched ramp (default 16)")
    parser.add_argument("--single-rates", type=rates, default=SINGLE_RATES, help="comma-separated msg/s steps")
    parser.add_argument("--batched-rates", type=rates, default=BATCH_RATES, help="comma-separated msg/s steps")
    parser.add_argument("--only", choices=("single", "batched", "cpu"), help="run one of the two ramps, or the CPU measurement")
    parser.add_argument("--record", action="store_true", help="the hub also writes a recording, as serve does")
    parser.add_argument("--compare", metavar="DIR", help="also measure the receiver package under DIR (a copy of another tree)")
    parser.add_argument("--profile", action="store_true", help="with --only cpu: cProfile's top functions instead")
    args = parser.parse_args()
    print(f"{os.cpu_count()} cores; 1-minute load average {os.getloadavg()[0]:.2f} at start")
    if args.only == "cpu":
        cpu_report(args.robots, args.compare, args.profile)
        return
    if args.only != "batched":
        ramp("single-message datagrams", args.single_rates, args.duration, args.robots, 1, args.record, args.compare)
    if args.only != "single":
        ramp("batched datagrams", args.batched_rates, args.duration, args.robots, args.batch, args.record, args.compare)


if __name__ == "__main__":
    main()
