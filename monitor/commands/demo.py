"""`regime demo`: the operator's screen on the built-in simulated discharge with its matching envelope, looping."""

from __future__ import annotations

import argparse
from importlib import resources

from monitor.commands.flags import add_output_flags, add_view_flags, check_view_flags, relay_options

__all__ = ["register", "run", "envelope_path"]


def envelope_path() -> str:
    """The bundled demo envelope (package data monitor/demo/envelope.toml)."""
    return str(resources.files("monitor").joinpath("demo", "envelope.toml"))


def register(parser: argparse.ArgumentParser) -> None:
    add_view_flags(parser, duration="stop after S wall seconds, on the screen too (default: the screen runs until q; "
                                    "headless runs one loop)")
    parser.add_argument("--speed", default="1", metavar="X|max",
                        help="simulation speed: 1 is real time, max as fast as possible (default 1)")
    parser.add_argument("--seed", type=int, default=0, help="noise seed of the simulated discharge (default 0)")
    parser.add_argument("--once", action="store_true", help="play the 60 s scenario once instead of looping")
    parser.add_argument("--no-bell", action="store_true", help="no terminal bell on new high-priority alarms")
    add_output_flags(parser, journal_note="", remote="let --alarm-pub bind a non-loopback address")
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
    from monitor.outputs import build_outputs
    from monitor.recipe import RunPlan, execute
    from monitor.sources import open_source

    check_view_flags(args)
    config = load_config(envelope_path())
    loop = not args.once and not (args.headless and args.duration is None)
    source = open_source(_spec(args, loop), config)
    # only --journal: the bundled envelope names no recording directory or journal of its own
    outputs = build_outputs(config, source_name=source.name, journal=args.journal,
                            config_directory=False, alarm_pub=args.alarm_pub, allow_remote=args.allow_remote)
    screen = None
    if not args.headless:
        from monitor.tui.launch import settings_for
        screen = settings_for(config, title="regime demo", bell=False if args.no_bell else None, units=args.units,
                              quit_after=args.duration)
    return execute(RunPlan("regime demo", source, config, outputs, live=True, headless=args.headless,
                           json=args.json, duration=args.duration, screen=screen,
                           relay=relay_options(args)))
