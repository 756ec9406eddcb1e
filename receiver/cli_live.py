"""The live commands of the command line: ``serve`` and ``replay``.

Owns their options and plain-text output; the work is in live.py and
replay.py. Kept apart from cli.py so that the offline commands stay small;
cli.py registers these with ``add_live_commands``.
"""

from __future__ import annotations

import argparse
import asyncio
import logging
import sys
import time
from pathlib import Path

from receiver.errors import UsageError
from receiver.live import ServeConfig, default_recording_path, parse_host_port, serve, summary_lines
from receiver.profile import Profile, load_profile
from receiver.recording import read_recording
from receiver.replay import replay_into_hub, replay_to
from receiver.session import Hub
from receiver.transports.mqtt import DEFAULT_PREFIX
from receiver.transports.udp import DEFAULT_UDP_HOST, DEFAULT_UDP_PORT


def _profiles(paths: list[str] | None) -> dict[str, Profile]:
    return {p.name: p for p in map(load_profile, paths or ())}


def _say(line: str) -> None:
    print(f"podwatch: {line}", flush=True)


def cmd_serve(args: argparse.Namespace) -> int:
    logging.basicConfig(format="podwatch: %(message)s", level=logging.WARNING, stream=sys.stderr)
    udp = args.udp
    if udp is None and args.ws is None and args.mqtt is None:
        udp = f"{DEFAULT_UDP_HOST}:{DEFAULT_UDP_PORT}"
    config = ServeConfig(
        profiles=_profiles(args.profile),
        udp=parse_host_port(udp, DEFAULT_UDP_HOST) if udp else None,
        ws=parse_host_port(args.ws, "127.0.0.1") if args.ws else None,
        mqtt=args.mqtt,
        forward=args.forward,
        token=args.token,
        record=Path(args.record) if args.record else default_recording_path(),
        prefix=args.prefix,
    )
    if not config.profiles:
        _say("no --profile given: robots are shown and recorded but not recomputed")
    for line in asyncio.run(serve(config, _say)):
        _say(line)
    return 0


def cmd_replay(args: argparse.Namespace) -> int:
    if args.speed < 0:
        raise UsageError(f"--speed must be 0 (as fast as possible) or positive, got {args.speed}")
    cli_profiles = _profiles(args.profile)
    data = read_recording(args.recording, {n: len(p.wheels) for n, p in cli_profiles.items()})
    for warning in data.warnings:
        print(f"podwatch: warning: {warning}", file=sys.stderr)
    if args.to:
        sent = asyncio.run(replay_to(data, args.to, args.speed, token=args.token, prefix=args.prefix))
        _say(f"sent {sent} messages to {args.to}")
        return 0
    hub = Hub({**data.profiles, **cli_profiles})
    started = time.monotonic()
    count = replay_into_hub(data, hub, args.speed)
    _say(f"replayed {count} messages in {time.monotonic() - started:.1f} s")
    for line in summary_lines(hub):
        _say(line)
    return 0


def add_live_commands(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("serve", help="live receiver: listen, recompute, record")
    p.add_argument("--profile", action="append", metavar="P", help="robot profile TOML (repeat for several robots)")
    p.add_argument(
        "--udp",
        metavar="HOST:PORT",
        help=f"listen for UDP (default {DEFAULT_UDP_HOST}:{DEFAULT_UDP_PORT} when no other listener is given)",
    )
    p.add_argument("--ws", metavar="HOST:PORT", help="listen for WebSocket clients")
    p.add_argument("--mqtt", metavar="URL", help="MQTT broker, mqtt://HOST[:PORT]: take samples published there")
    p.add_argument("--forward", action="store_true", help="republish UDP/WebSocket samples and poses to the broker")
    p.add_argument("--prefix", default=DEFAULT_PREFIX, help=f"MQTT topic prefix (default {DEFAULT_PREFIX})")
    p.add_argument("--token", metavar="T", help="WebSocket clients must send this token (?token= or header)")
    p.add_argument("--record", metavar="FILE", help="recording file (default recordings/podwatch-DATE-TIME.jsonl)")
    p.add_argument("--no-dashboard", action="store_true", help="run headless (the only mode for now)")
    p.set_defaults(run=cmd_serve)

    p = sub.add_parser("replay", help="feed a recording through the live pipeline")
    p.add_argument("recording", help="recording (.jsonl or .jsonl.gz)")
    p.add_argument("--profile", action="append", metavar="P", help="robot profile TOML (overrides the header)")
    p.add_argument("--speed", type=float, default=1.0, metavar="X", help="1 = real time, 0 = as fast as possible")
    p.add_argument("--to", metavar="URL", help="send over the network instead: udp://, ws:// or mqtt://HOST:PORT")
    p.add_argument("--token", metavar="T", help="token for a ws:// receiver that requires one")
    p.add_argument("--prefix", default=DEFAULT_PREFIX, help=f"MQTT topic prefix for mqtt:// (default {DEFAULT_PREFIX})")
    p.set_defaults(run=cmd_replay)
