"""UDP ingest benchmark, run by hand (pytest does not collect bench_* files).

    .venv/bin/python tests/bench/bench_udp.py [--duration 30] [--robots 20] [--batch 16]

A sender in another process streams wire messages to a live UdpReceiver,
Hub and Pump on 127.0.0.1 at a target rate; the rate doubles until a step
loses a message. Reported per step: datagrams and messages sent and taken,
and the 99th percentile from datagram arrival (its rx) to the recomputed
pose being available (when the hub's listeners are told); "recv dgram" counts
datagrams the receive loop got (fewer than sent: the kernel dropped them;
"lost" beyond that: still queued in the hub after the drain time). First single-message
datagrams, then datagrams batching --batch messages of one robot.
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from receiver.live import Pump  # noqa: E402
from receiver.profile import load_profile  # noqa: E402
from receiver.session import Hub  # noqa: E402
from receiver.transports.udp import UdpReceiver  # noqa: E402

PROFILE = Path(__file__).resolve().parents[2] / "replay_fixtures" / "practice-bot.toml"
SINGLE_RATES = (10_000, 20_000, 40_000, 80_000, 160_000)
BATCH_RATES = (20_000, 40_000, 80_000, 160_000, 320_000, 640_000)
DRAIN_S = 3.0  # after the sender stops, time for the receiver to catch up


def robot_name(i: int) -> str:
    return f"bench-{i:02d}"


def message(robot: str, seq: int) -> bytes:
    # constant forward motion: 3 counts per loop on the two forward wheels
    return b'{"v":1,"robot":"%s","seq":%d,"t":%.6f,"ticks":[%d,%d,0],"pose":[0.0,0.0,0.0],"loop":0.001}' % (
        robot.encode(), seq, seq * 0.001, 3 * seq, 3 * seq,
    )


def sender(address, rate_msgs: float, duration_s: float, robots: int, batch: int, result) -> None:
    """Send for duration_s at rate_msgs messages/s; datagrams hold `batch` messages of one robot."""
    import socket

    sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    names = [robot_name(i) for i in range(robots)]
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
            if batch == 1:
                payload = message(names[robot], s)
            else:
                payload = b"[" + b",".join(message(names[robot], s + k) for k in range(batch)) + b"]"
            seq[robot] = s + batch
            try:
                sock.sendto(payload, address)
            except BlockingIOError:
                continue
            sent_datagrams += 1
            robot = (robot + 1) % robots
    result.put((sent_datagrams, sent_datagrams * batch, time.perf_counter() - start))


def run_step(rate: float, duration_s: float, robots: int, batch: int) -> dict:
    base = load_profile(PROFILE)
    profiles = {robot_name(i): replace(base, name=robot_name(i)) for i in range(robots)}
    hub = Hub(profiles, window_s=10.0, max_rows=100_000)
    latencies: list[np.ndarray] = []

    def on_processed(accepted, updates):
        now = time.time()
        latencies.append(now - np.fromiter((s.rx for s, _ in accepted), dtype=float, count=len(accepted)))

    hub.add_listener(on_processed)
    udp = UdpReceiver(hub, "127.0.0.1", 0)
    pump = Pump(hub)
    pump.start()
    udp.start()
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
    snap = hub.snapshot(time.time())
    taken = sum(s.messages for s in snap.values())
    lat = np.concatenate(latencies) if latencies else np.array([np.nan])
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
    }


def ramp(title: str, rates, duration_s: float, robots: int, batch: int) -> None:
    print(f"\n{title} ({robots} robots, {batch} message(s) per datagram, {duration_s:g} s per step)")
    print(f"{'target msg/s':>12} {'sent msg/s':>11} {'datagrams':>10} {'recv dgram':>10} {'sent':>9} {'taken':>9} {'lost':>7} "
          f"{'p50 ms':>7} {'p99 ms':>7}")
    best = None
    for rate in rates:
        r = run_step(rate, duration_s, robots, batch)
        print(f"{r['rate']:>12,.0f} {r['achieved']:>11,.0f} {r['datagrams']:>10,} {r['received']:>10,} {r['sent']:>9,} {r['taken']:>9,} "
              f"{r['lost']:>7,} {r['p50_ms']:>7.2f} {r['p99_ms']:>7.2f}", flush=True)
        if r["lost"] != 0 or r["errors"] != 0 or r["achieved"] < 0.95 * rate:
            break
        best = r
    if best is None:
        print("no rate held with zero loss")
    else:
        print(f"highest rate held with zero loss: {best['rate']:,.0f} msg/s (p99 {best['p99_ms']:.2f} ms)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--duration", type=float, default=30.0, help="seconds per rate step (default 30)")
    parser.add_argument("--robots", type=int, default=20, help="robots the sender interleaves (default 20)")
    parser.add_argument("--batch", type=int, default=16, help="messages per datagram in the batched ramp (default 16)")
    args = parser.parse_args()
    ramp("single-message datagrams", SINGLE_RATES, args.duration, args.robots, 1)
    ramp("batched datagrams", BATCH_RATES, args.duration, args.robots, args.batch)


if __name__ == "__main__":
    main()
