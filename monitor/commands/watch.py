"""`regime watch SOURCE`: a live source through the pipeline and alarms, on the screen or headless."""

from __future__ import annotations

import argparse
import dataclasses

from typing import TYPE_CHECKING

from monitor.commands.flags import add_output_flags, add_view_flags, check_view_flags, relay_options
from monitor.errors import UsageError

if TYPE_CHECKING:
    from monitor.config import Config

__all__ = ["register", "run"]


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("source", metavar="SOURCE",
                        help="tcp://HOST:PORT, ipc://PATH, serial:PORT[@BAUD], loop://, socket://HOST:PORT, "
                             "/dev/tty..., sim:NAME[?seed=N&rate=HZ&speed=X|max&duration=S&loop=1], or a CSV file")
    parser.add_argument("--config", metavar="F", help="TOML config: device, channels, limits, alarms, recording")
    parser.add_argument("--record", metavar="DIR", help="record every accepted reading, the alarm journal and "
                                                        "the rejects into DIR")
    add_view_flags(parser, duration="stop after S seconds (wall clock)")
    add_output_flags(parser, journal_note=" (as [alarms] journal)",
                     remote="ZeroMQ beyond loopback: let --alarm-pub bind a non-loopback address and a tcp:// "
                            "SOURCE connect off this machine (as [sources] allow_remote = true)")
    parser.add_argument("--operator", metavar="KEY", help="on a relay (SOURCE relay+tcp://... or relay+ipc://...): "
                        "send acknowledge, shelve and reset to the owning run with this operator key")
    parser.add_argument("--name", metavar="NAME", help="on a relay: this console's name in the owner's journal "
                        "(default: the host name)")


def run(args: argparse.Namespace) -> int:
    from monitor.config import load_config
    from monitor.outputs import build_outputs
    from monitor.recipe import RunPlan, execute
    from monitor.sources import is_live, open_source

    check_view_flags(args)
    config = load_config(args.config)
    if args.source.startswith("relay+"):
        return _console(args, config)
    if args.operator or args.name:
        raise UsageError("--operator and --name are for a console on a relay (SOURCE relay+tcp://... or relay+ipc://...)")
    if args.allow_remote and not config.allow_remote:
        config = dataclasses.replace(config, allow_remote=True)
    source = open_source(args.source, config)
    # a journal or recording directory that cannot be written, or a refused publisher address, stops
    # here (exit 2; a publisher address that cannot be bound: exit 3), before any reading is taken
    outputs = build_outputs(config, source_name=source.name, record=args.record,
                            alarm_pub=args.alarm_pub, journal=args.journal)
    screen = None
    if not args.headless:
        from monitor.tui.launch import settings_for
        screen = settings_for(config, title=f"regime watch {source.name}", quit_after=args.duration)
    return execute(RunPlan("regime watch", source, config, outputs, live=is_live(args.source),
                           headless=args.headless, json=args.json, duration=args.duration, screen=screen,
                           relay=relay_options(args)))


def _console(args: argparse.Namespace, config: "Config") -> int:
    """A console on another run's relay: the owner's readings and alarm states, no engine of its own."""
    import socket

    from monitor.relay.run import run_console

    if args.record or args.journal or args.alarm_pub or args.relay:
        raise UsageError("a console on a relay shows the owner's run: --record, --journal, --alarm-pub and "
                         "--relay belong to the owning run")
    # the [sources] CURVE keys, as for a ZeroMQ source: (the owner's public key, this console's secret key)
    curve = ((config.curve_server_key, config.curve_client_key)
             if config.curve_server_key and config.curve_client_key else None)
    return run_console(args.source, operator_key=args.operator, name=args.name or socket.gethostname(),
                       headless=args.headless, as_json=args.json, duration=args.duration, curve=curve)
