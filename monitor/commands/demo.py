"""`regime demo`: the operator's screen on the built-in simulated discharge with its matching envelope, looping."""

from __future__ import annotations

import argparse
from importlib import resources

__all__ = ["register", "run", "envelope_path"]


def envelope_path() -> str:
    """The bundled demo envelope (package data monitor/demo/envelope.toml)."""
    return str(resources.files("monitor").joinpath("demo", "envelope.toml"))


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--headless", action="store_true",
                        help="no screen: print status lines and alarm events (for automation)")
    parser.add_argument("--json", action="store_true", help="with --headless: one JSON object per line")
    parser.add_argument("--duration", type=float, default=None, metavar="S",
                        help="stop after S wall seconds, on the screen too (default: the screen runs until q; headless runs one loop)")
    parser.add_argument("--speed", default="1", metavar="X|max",
                        help="simulation speed: 1 is real time, max as fast as possible (default 1)")
    parser.add_argument("--seed", type=int, default=0, help="noise seed of the simulated discharge (default 0)")
    parser.add_argument("--once", action="store_true", help="play the 60 s scenario once instead of looping")
    parser.add_argument("--no-bell", action="store_true", help="no terminal bell on new high-priority alarms")
    parser.add_argument("--journal", metavar="F", help="append every alarm transition and operator action to F, one JSON line each "
                             "(the alarm objects of --json); an existing journal keeps its lines")
    parser.add_argument("--alarm-pub", metavar="ENDPOINT", help="publish alarm events on ZeroMQ (PUB) at ENDPOINT "
                        "(loopback or ipc:// unless --allow-remote)")
    parser.add_argument("--allow-remote", action="store_true", help="let --alarm-pub bind a non-loopback address")
    parser.add_argument("--units", choices=("practical", "SI"), default="practical",
                        help="units shown first (u switches on the screen)")


def _spec(args: argparse.Namespace, loop: bool) -> str:
    from monitor.errors import UsageError
    speed = str(args.speed).strip().lower()
    if speed not in ("max", "inf"):
        try:
            if float(speed) <= 0:
                raise ValueError(speed)
        except ValueError:
            raise UsageError(f"--speed {args.speed!r}: give a positive number or max") from None
    return f"sim:demo?seed={args.seed}&speed={speed}&loop={1 if loop else 0}"


def run(args: argparse.Namespace) -> int:
    from monitor.config import load_config
    from monitor.errors import UsageError
    from monitor.outputs import build_outputs
    from monitor.session import Session, make_engine
    from monitor.sources import open_source

    if args.json and not args.headless:
        raise UsageError("--json needs --headless")
    config = load_config(envelope_path())
    loop = not args.once and not (args.headless and args.duration is None)
    source = open_source(_spec(args, loop), config)
    # only --journal: the bundled envelope names no recording directory or journal of its own
    outputs = build_outputs(config, source_name=getattr(source, "name", "demo"), journal=args.journal,
                            config_directory=False, alarm_pub=args.alarm_pub, allow_remote=args.allow_remote)
    if args.headless:
        return _headless(source, config, args, outputs)
    from monitor.tui.feed import EventTap
    from monitor.tui.launch import run_screen, settings_for

    tap = EventTap()
    session = Session(source, config, sinks=[tap, *outputs.sinks], engine=make_engine(config), live=True)
    outputs.bind(session)
    settings = settings_for(config, title="regime demo", bell=False if args.no_bell else None, units=args.units,
                            quit_after=args.duration)
    return run_screen(session, tap, settings)


def _headless(source: object, config: object, args: argparse.Namespace, outputs: object) -> int:
    from monitor import headless
    return int(headless.run_headless(source, config, json=args.json, duration=args.duration, live=True,
                                     sinks=outputs.sinks, on_session=outputs.bind) or 0)
