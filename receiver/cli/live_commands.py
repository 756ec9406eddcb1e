"""The live commands of the command line: ``serve`` and ``replay``.

Owns their options and plain-text output; the work is in live.py and
replay.py. Kept apart from cli.py so that the offline commands stay small;
program.py registers these with ``add_live_commands``.
"""

from __future__ import annotations

import argparse
import errno
import signal
import threading
import time
from pathlib import Path

from receiver.cli.common import load_profiles, profile_sources, say, warn
from receiver.errors import PodwatchError, UsageError
from receiver.formats.protocol import MQTT_PREFIX as DEFAULT_PREFIX
from receiver.live.transports.udp import DEFAULT_UDP_HOST, DEFAULT_UDP_PORT
from receiver.odometry.robot import Profile, counts_per_message
from receiver.sim.motion_paths import PATHS

# The receiver (asyncio, websockets, aiomqtt) and the dashboard (Dash,
# Plotly) are imported by the commands that run them, so that the offline
# commands start quickly: `recompute` on a large file is timed with its start.


def cmd_serve(args: argparse.Namespace) -> int:
    """``podwatch serve``: listen, record and show the page until Ctrl-C or SIGTERM, then
    print one summary line per robot.
    """
    import asyncio

    from receiver.live.serve import ServeConfig, parse_host_port, serve

    udp = args.udp
    if udp is None and args.ws is None and args.mqtt is None:
        udp = f"{DEFAULT_UDP_HOST}:{DEFAULT_UDP_PORT}"
    profiles = load_profiles(args.profile)
    page = _PageServer(args, profiles, profile_sources(args.profile))
    config = ServeConfig(
        profiles=profiles,
        udp=parse_host_port(udp, DEFAULT_UDP_HOST) if udp else None,
        ws=parse_host_port(args.ws, "127.0.0.1") if args.ws else None,
        mqtt=args.mqtt,
        forward=args.forward,
        token=args.token,
        record=Path(args.record) if args.record else None,
        record_in=None if args.record else page.settings.recordings,
        prefix=args.prefix,
        max_rate=args.max_rate,
        allow=_networks(args.allow),
    )
    if not config.profiles:
        say("no --profile given: robots are shown and recorded but not recomputed")
    try:
        finished = asyncio.run(serve(config, say, on_start=None if args.no_dashboard else page.start_live))
    finally:
        page.stop()
    return _finish(finished)


def _networks(texts: list[str] | None) -> tuple:
    from receiver.live.gate import parse_networks

    try:
        return tuple(parse_networks(texts or ()))
    except ValueError as exc:
        raise UsageError(str(exc)) from None


def _finish(finished) -> int:
    """Print the summary of a serve run; a run that had to stop fails with its reason."""
    for line in finished.lines:
        say(line)
    if finished.failure is not None:
        raise PodwatchError(f"stopped: {finished.failure}")
    return 0


class _PageServer:
    """The dashboard of one command run, started once the receiver listens."""

    def __init__(self, args: argparse.Namespace, profiles: dict[str, Profile], files: dict[str, str] | None = None) -> None:
        from dashboard.settings import Settings, parse_length
        from receiver.live.serve import parse_host_port

        self.args = args
        self.profiles = profiles
        self.files = {name: Path(path) for name, path in (files or {}).items()}  # where each profile was loaded from
        self.server = None
        self.station = None
        if args.dashboard:
            parse_host_port(args.dashboard, "127.0.0.1")
        if not args.loop_threshold > 0:
            raise UsageError(f"--loop-threshold must be positive, got {args.loop_threshold}")
        # Checked before anything starts, so that a typo stops the command at once.
        self.settings = Settings(
            field_size_m=parse_length(args.field),
            footprint_m=parse_length(args.footprint),
            loop_threshold_s=args.loop_threshold / 1000.0,
            recordings=_recordings_folder(args),
        )

    def start_live(self, receiver) -> None:
        """Serve the page on the live receiver's hub."""
        from dashboard.sources import LiveSource
        from dashboard.tabs import Station

        self.station = Station(live=LiveSource(receiver.hub), profiles=self.profiles, profile_files=self.files)
        self.server = self._start(self.station)

    def _start(self, station):
        from dashboard.server import start_dashboard
        from dashboard.settings import DEFAULT_HOST, DEFAULT_PORT
        from receiver.live.serve import parse_host_port

        try:
            return start_dashboard(station, self.settings, self.args.dashboard, say)
        except UsageError as exc:
            if isinstance(exc.__cause__, OSError) and exc.__cause__.errno == errno.EADDRINUSE:
                host, port = parse_host_port(self.args.dashboard or f":{DEFAULT_PORT}", DEFAULT_HOST)
                raise UsageError(f"cannot serve the dashboard on {host}:{port}: port {port} is in use (another "
                                 "podwatch running?): stop that program, or choose another port with --dashboard "
                                 "HOST:PORT") from exc.__cause__
            raise

    def start_replay(self, data, speed: float) -> None:
        """Serve the page on a recording: each tab plays a replay of its own from the start at ``speed``."""
        from dashboard.sources import ReplaySource
        from dashboard.tabs import Station

        def playing(recording) -> ReplaySource:
            source = ReplaySource(recording, self.profiles)
            source.set_speed(speed)
            source.start()
            source.play()
            return source

        self.station = Station(recording=data, profiles=self.profiles, make_replay=playing, profile_files=self.files)
        self.server = self._start(self.station)

    def stop(self) -> None:
        """Stop serving the page and every tab's replay."""
        if self.server is not None:
            self.server.stop()
        if self.station is not None:
            self.station.close()


def _recordings_folder(args: argparse.Namespace) -> Path:
    """The folder the page lists: --recordings, else the folder of --record FILE, else recordings/."""
    from dashboard.settings import RECORDINGS

    if args.recordings:
        return Path(args.recordings)
    record = getattr(args, "record", None)
    return Path(record).parent if record else RECORDINGS


def cmd_demo(args: argparse.Namespace) -> int:
    """``podwatch demo``: a receiver and the page, with a simulated robot streaming to them
    over UDP (loopback by default).
    """
    import asyncio

    from receiver.live.demo import DEMO_FAULTS, SimulatedRobot, demo_profile, demo_profile_file
    from receiver.live.serve import ServeConfig, parse_host_port, serve
    from receiver.odometry.faults import parse_faults

    if args.duration is not None and not args.duration > 0:
        raise UsageError(f"--duration must be positive, got {args.duration}")
    profile = demo_profile()
    faults = parse_faults(args.fault if args.fault is not None else DEMO_FAULTS, profile)
    config = ServeConfig(
        profiles={profile.name: profile},
        udp=parse_host_port(args.udp, "127.0.0.1"),
        record=Path(args.record) if args.record else None,
        max_rate=args.max_rate,
    )
    page = _PageServer(args, config.profiles, {profile.name: demo_profile_file()})
    robots: list[SimulatedRobot] = []

    def start(receiver) -> None:
        page.start_live(receiver)
        host, port = receiver.udp.address
        robot = SimulatedRobot(profile, (host, port), args.path, args.rate, args.seed, faults,
                               supervisor=receiver.supervisor)
        robot.start()
        robots.append(robot)
        mistakes = ", ".join(args.fault if args.fault is not None else DEMO_FAULTS) or "none"
        say(f"simulated {profile.name} driving {args.path} at {args.rate:g} Hz, mistakes: {mistakes}")

    try:
        finished = asyncio.run(serve(config, say, on_start=start, until=args.duration))
    finally:
        for robot in robots:
            robot.stop()
        page.stop()
    return _finish(finished)


def cmd_replay(args: argparse.Namespace) -> int:
    """``podwatch replay``: feed a recording through a hub and print the summary, or send it
    ``--to`` a receiver, or play it on the page with ``--dashboard``.
    """
    import asyncio

    from receiver.formats.recording import read_recording
    from receiver.live.hub import Hub
    from receiver.live.replay import replay_into_hub, replay_to
    from receiver.live.serve import summary_lines

    if args.speed < 0:
        raise UsageError(f"--speed must be 0 (as fast as possible) or positive, got {args.speed}")
    cli_profiles = load_profiles(args.profile)
    data = read_recording(args.recording, counts_per_message(cli_profiles))
    for warning in data.warnings:
        warn(warning)
    if args.to:
        sent = asyncio.run(replay_to(data, args.to, args.speed, token=args.token, prefix=args.prefix))
        say(f"sent {sent} messages to {args.to}")
        return 0
    if args.dashboard:
        return _replay_on_page(args, data, cli_profiles, profile_sources(args.profile))
    hub = Hub({**data.profiles, **cli_profiles})
    started = time.monotonic()
    count = replay_into_hub(data, hub, args.speed)
    say(f"replayed {count} messages in {time.monotonic() - started:.1f} s")
    for line in summary_lines(hub):
        say(line)
    return 0


def _replay_on_page(args: argparse.Namespace, data, profiles: dict[str, Profile], files: dict[str, str]) -> int:
    """Replay on the dashboard, playing at --speed, until Ctrl-C."""
    from dashboard.sources import REPLAY_SPEEDS
    from receiver.live.replay import recorded_span_s

    duration_s = recorded_span_s(data)
    if duration_s is None:
        raise UsageError(f"{args.recording}: the recording holds no messages")
    page = _PageServer(args, profiles, files)
    try:
        page.start_replay(data, args.speed if args.speed > 0 else max(REPLAY_SPEEDS))
        say(f"replaying {args.recording} ({duration_s:.1f} s) on the dashboard, from the start in each tab; "
            "Ctrl-C to stop")
        stop = threading.Event()
        # Both set here: a shell starts a background job with SIGINT ignored,
        # and Python then installs no KeyboardInterrupt for it.
        for sig in (signal.SIGINT, signal.SIGTERM):
            signal.signal(sig, lambda *_: stop.set())
        while not stop.wait(0.5):
            pass
    finally:
        page.stop()
    return 0


def _dashboard_options(parser: argparse.ArgumentParser, optional: bool) -> None:
    where = parser.add_mutually_exclusive_group() if optional else parser
    where.add_argument(
        "--dashboard", metavar="HOST:PORT",
        help="serve the page here (default 127.0.0.1:47480; an address other than loopback is logged as a warning)",
    )
    if optional:
        where.add_argument("--no-dashboard", action="store_true", help="run headless, without the page")
    parser.add_argument("--field", default="144in", metavar="LENGTH",
                        help="side of the square field on the track map, e.g. 144in or 3.66m (default 144in)")
    parser.add_argument("--footprint", default="18in", metavar="LENGTH",
                        help="side of the robot's square footprint on the track map (default 18in)")
    parser.add_argument("--loop-threshold", type=float, default=50.0, metavar="MS",
                        help="loops longer than this are highlighted (default 50)")
    parser.add_argument("--recordings", metavar="DIR",
                        help="the folder the page lists recordings from, and serve records into (default the "
                             "folder of --record, else recordings/)")


def _max_rate_option(parser: argparse.ArgumentParser) -> None:
    from receiver.live.gate import DEFAULT_MAX_RATE  # no sockets: a plain module

    parser.add_argument("--max-rate", type=float, default=DEFAULT_MAX_RATE, metavar="MSG/S",
                        help=f"per-robot cap: messages beyond it are dropped before decoding and counted "
                             f"(default {DEFAULT_MAX_RATE:g})")


def add_live_commands(sub: argparse._SubParsersAction) -> None:
    """Register ``serve``, ``replay`` and ``demo`` on the program's subparsers."""
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
    p.add_argument("--record", metavar="FILE",
                   help="recording file, which must not exist yet (default recordings/podwatch-DATE-TIME.jsonl)")
    _max_rate_option(p)
    p.add_argument("--allow", action="append", metavar="CIDR",
                   help="take UDP and WebSocket traffic only from this network, e.g. 192.168.1.0/24 (repeatable; "
                        "default: from anywhere)")
    _dashboard_options(p, optional=True)
    p.set_defaults(run=cmd_serve)

    p = sub.add_parser("replay", help="feed a recording through the live pipeline")
    p.add_argument("recording", help="recording (.jsonl or .jsonl.gz)")
    p.add_argument("--profile", action="append", metavar="P", help="robot profile TOML (overrides the header)")
    p.add_argument("--speed", type=float, default=1.0, metavar="X", help="1 = real time, 0 = as fast as possible")
    p.add_argument("--to", metavar="URL", help="send over the network instead: udp://, ws:// or mqtt://HOST:PORT")
    p.add_argument("--token", metavar="T", help="token for a ws:// receiver that requires one")
    p.add_argument("--prefix", default=DEFAULT_PREFIX, help=f"MQTT topic prefix for mqtt:// (default {DEFAULT_PREFIX})")
    _dashboard_options(p, optional=False)
    p.set_defaults(run=cmd_replay)

    p = sub.add_parser("demo", help="receiver, dashboard and a simulated robot streaming over UDP on loopback")
    p.add_argument("--udp", default="127.0.0.1:0", metavar="HOST:PORT",
                   help="where the receiver listens and the robot sends (default a free port on 127.0.0.1)")
    p.add_argument("--path", default="figure-eight", choices=PATHS, help="what the robot drives (default figure-eight)")
    p.add_argument("--rate", type=float, default=100.0, metavar="HZ", help="robot loop rate (default 100)")
    p.add_argument("--seed", type=int, default=1, metavar="N", help="random seed (default 1)")
    p.add_argument("--fault", action="append", metavar="NAME",
                   help="a mistake in the robot code, repeatable (default reversed:right)")
    p.add_argument("--duration", type=float, metavar="S", help="stop after this many seconds (default: at Ctrl-C)")
    p.add_argument("--record", metavar="FILE", help="also record the session to FILE (which must not exist yet)")
    _max_rate_option(p)
    _dashboard_options(p, optional=False)
    p.set_defaults(run=cmd_demo)
