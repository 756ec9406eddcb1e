"""UDP ingest benchmark, run by hand (pytest does not collect bench_* files).

    .venv/bin/python tests/bench/bench_udp.py [--duration 30] [--robots 20] [--batch 16]
        [--single-rates 10000,20000,...] [--batched-rates ...] [--only single|batched] [--record]

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
time). The 1-minute load average before and after each step shows what
else was running. First single-message datagrams, then datagrams batching
--batch messages of one robot. With --record the hub also writes a recording
(to a temporary file, deleted afterwards), as ``podwatch serve`` does by
default. As in ``serve``, the heap is settled (receiver.live.settle_heap)
once everything is set up.
"""

from __future__ import annotations

import argparse
import gc
import multiprocessing as mp
import os
import sys
import tempfile
import time
from array import array
from dataclasses import replace
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from receiver.live import Pump, settle_heap  # noqa: E402
from receiver.profile import load_profile  # noqa: E402
from receiver.recording import RecordingWriter  # noqa: E402
from receiver.session import Hub  # noqa: E402
from receiver.transports.udp import UdpReceiver  # noqa: E402

PROFILE = Path(__file__).resolve().parents[2] / "replay_fixtures" / "practice-bot.toml"
SINGLE_RATES = (10_000, 20_000, 30_000, 40_000, 60_000, 80_000, 120_000, 160_000)
BATCH_RATES = (20_000, 40_000, 80_000, 160_000, 320_000, 640_000)
DRAIN_S = 3.0  # after the sender stops, time for the receiver to catch up


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
    }


def ramp(title: str, rates, duration_s: float, robots: int, batch: int, record: bool) -> None:
    recording = ", recording" if record else ""
    print(f"\n{title} ({robots} robots, {batch} message(s) per datagram, {duration_s:g} s per step{recording})")
    print(f"{'target msg/s':>12} {'sent msg/s':>11} {'sent':>9} {'taken':>9} {'lost':>6} {'datagrams':>10} {'recv dgram':>10} "
          f"{'p50 ms':>7} {'p99 ms':>7} {'max ms':>7} {'p99 send':>8} {'load 1m':>11}")
    best = None
    for rate in rates:
        r = run_step(rate, duration_s, robots, batch, record)
        print(f"{r['rate']:>12,.0f} {r['achieved']:>11,.0f} {r['sent']:>9,} {r['taken']:>9,} {r['lost']:>6,} "
              f"{r['datagrams']:>10,} {r['received']:>10,} {r['p50_ms']:>7.2f} {r['p99_ms']:>7.2f} {r['max_ms']:>7.1f} "
              f"{r['p99_send_ms']:>8.2f} {r['load'][0]:>5.2f}>{r['load'][1]:<5.2f}", flush=True)
        if r["recorded"] not in (None, r["taken"]):
            print(f"recorded {r['recorded']:,} of {r['taken']:,} messages taken")
        if r["lost"] != 0 or r["errors"] != 0 or r["achieved"] < 0.95 * rate or r["recorded"] not in (None, r["taken"]):
            break
        best = r
    if best is None:
        print("no rate held with zero loss")
    else:
        print(f"highest rate held with zero loss: {best['rate']:,.0f} msg/s (p99 {best['p99_ms']:.2f} ms)")


def rates(text: str) -> tuple[int, ...]:
    return tuple(int(float(part)) for part in text.split(","))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--duration", type=float, default=30.0, help="seconds per rate step (default 30)")
    parser.add_argument("--robots", type=int, default=20, help="robots the sender interleaves (default 20)")
    parser.add_argument("--batch", type=int, default=16, help="messages per datagram in the batched ramp (default 16)")
    parser.add_argument("--single-rates", type=rates, default=SINGLE_RATES, help="comma-separated msg/s steps")
    parser.add_argument("--batched-rates", type=rates, default=BATCH_RATES, help="comma-separated msg/s steps")
    parser.add_argument("--only", choices=("single", "batched"), help="run one of the two ramps")
    parser.add_argument("--record", action="store_true", help="the hub also writes a recording, as serve does")
    args = parser.parse_args()
    print(f"{os.cpu_count()} cores; 1-minute load average {os.getloadavg()[0]:.2f} at start")
    if args.only != "batched":
        ramp("single-message datagrams", args.single_rates, args.duration, args.robots, 1, args.record)
    if args.only != "single":
        ramp("batched datagrams", args.batched_rates, args.duration, args.robots, args.batch, args.record)


if __name__ == "__main__":
    main()
