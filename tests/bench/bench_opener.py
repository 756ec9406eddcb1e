"""Benchmark of the page's recording opener: the checked read against the plain reader, and hostile files.

    .venv/bin/python tests/bench/bench_opener.py [--seconds S] [--bomb-baseline]

Each case runs in a fresh process, which reports its wall time and peak
memory (ru_maxrss). Valid recordings (a simulated wander at 200 Hz, plain
and gzip) are read by ``recordings_folder.read_from_folder``, beside the
plain ``read_recording`` of the same file (what the page called before).
Hostile files are refused by the checked read; ``--bomb-baseline`` also
gives the gzip bomb to the plain reader, under a 60 s and 3 GiB limit (slow:
it is what the page used to do). Machines here are noisy: read the ratios.
"""

from __future__ import annotations

import argparse
import gzip
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

PROFILE = ROOT / "replay_fixtures" / "practice-bot.toml"
MIB = 1024 * 1024
BASELINE_LIMIT_S = 60
BASELINE_LIMIT_BYTES = 3 * 1024 * MIB


def run_case(how: str, folder: str, name: str) -> None:
    """In the child: read or refuse, then print one JSON line."""
    from dashboard.recordings_folder import read_from_folder
    from receiver.errors import PodwatchError
    from receiver.formats.recording import read_recording

    start = time.perf_counter()
    try:
        if how == "checked":
            result = f"{read_from_folder(Path(folder), name).message_count} messages"
        else:
            result = f"{read_recording(os.path.join(folder, name)).message_count} messages"
    except PodwatchError as exc:
        result = f"refused: {exc}"
    except MemoryError:
        result = "MemoryError"
    wall = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"wall_s": wall, "peak_mb": peak, "result": result}))


def child(how: str, folder: Path, name: str, limited: bool = False) -> dict:
    def limits() -> None:
        resource.setrlimit(resource.RLIMIT_AS, (BASELINE_LIMIT_BYTES, BASELINE_LIMIT_BYTES))

    try:
        done = subprocess.run([sys.executable, __file__, "--case", how, str(folder), name], capture_output=True,
                              text=True, timeout=BASELINE_LIMIT_S if limited else None,
                              preexec_fn=limits if limited else None)
    except subprocess.TimeoutExpired:
        return {"wall_s": float(BASELINE_LIMIT_S), "peak_mb": float("nan"), "result": "still reading: killed"}
    lines = done.stdout.strip().splitlines()
    if not lines:
        return {"wall_s": float("nan"), "peak_mb": float("nan"), "result": f"died: {done.stderr.strip()[-120:]}"}
    return json.loads(lines[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=600.0, help="length of the valid recording at 200 Hz")
    parser.add_argument("--bomb-baseline", action="store_true", help="also give the gzip bomb to the plain reader")
    parser.add_argument("--case", nargs=3, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.case:
        run_case(*args.case)
        return
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        plain = folder / "wander.jsonl"
        subprocess.run([sys.executable, "-m", "receiver.cli", "simulate", "--profile", str(PROFILE), "--path",
                        "wander", "--rate", "200", "--duration", str(args.seconds), "--out", str(plain)],
                       check=True, capture_output=True)
        (folder / "wander.jsonl.gz").write_bytes(gzip.compress(plain.read_bytes(), compresslevel=1))
        (folder / "zeros.jsonl.gz").write_bytes(gzip.compress(bytes(MIB), compresslevel=9) * 3072)
        (folder / "lines.jsonl.gz").write_bytes(gzip.compress(b"\n" * MIB, compresslevel=9) * 256)
        (folder / "zero.jsonl").symlink_to("/dev/zero")
        os.mkfifo(folder / "pipe.jsonl")
        rows = []
        for name in ("wander.jsonl", "wander.jsonl.gz"):
            rows.append((name, "checked", child("checked", folder, name)))
            rows.append((name, "plain reader", child("plain", folder, name)))
        for name in ("zeros.jsonl.gz", "lines.jsonl.gz", "zero.jsonl", "pipe.jsonl"):
            rows.append((name, "checked", child("checked", folder, name)))
        if args.bomb_baseline:
            rows.append(("zeros.jsonl.gz", "plain reader", child("plain", folder, "zeros.jsonl.gz", limited=True)))
        sizes = {p.name: p.stat().st_size for p in folder.iterdir() if p.is_file() and not p.is_symlink()}
        print(f"{'file':18} {'on disk':>10} {'read by':13} {'wall s':>7} {'peak MB':>8}  result")
        for name, how, r in rows:
            size = f"{sizes[name] / 1e6:.2f} MB" if name in sizes else "-"
            print(f"{name:18} {size:>10} {how:13} {r['wall_s']:7.3f} {r['peak_mb']:8.0f}  {r['result'][:90]}")


if __name__ == "__main__":
    main()
