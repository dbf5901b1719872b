"""`regime watch SOURCE`: a live source through the pipeline and alarms, on the screen or headless."""

from __future__ import annotations

import argparse
import dataclasses
import importlib.util
import math
import sys
import threading
from typing import Any

from monitor.errors import EXIT_USAGE, UsageError

__all__ = ["register", "run"]


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("source", metavar="SOURCE",
                        help="tcp://HOST:PORT, ipc://PATH, serial:PORT[@BAUD], loop://, socket://HOST:PORT, "
                             "/dev/tty..., sim:NAME[?seed=N&rate=HZ&speed=X|max&duration=S&loop=1], or a CSV file")
    parser.add_argument("--config", metavar="F", help="TOML config: device, channels, limits, alarms, recording")
    parser.add_argument("--record", metavar="DIR", help="record every accepted reading, the alarm journal and "
                                                        "the rejects into DIR")
    parser.add_argument("--journal", metavar="F", help="append every alarm transition and operator action to F, one JSON line each "
                             "(the alarm objects of --json); an existing journal keeps its lines" +
                             " (as [alarms] journal)")
    parser.add_argument("--headless", action="store_true", help="no screen: status lines on stdout")
    parser.add_argument("--json", action="store_true", help="with --headless: one JSON object per line")
    parser.add_argument("--duration", metavar="S", type=float, help="stop after S seconds (wall clock)")
    parser.add_argument("--alarm-pub", metavar="ENDPOINT", help="publish alarm events on ZeroMQ (PUB) at ENDPOINT")
    parser.add_argument("--allow-remote", action="store_true",
                        help="ZeroMQ beyond loopback: let --alarm-pub bind a non-loopback address and a tcp:// "
                             "SOURCE connect off this machine (as [sources] allow_remote = true)")


def _module(name: str) -> Any | None:
    try:
        if importlib.util.find_spec(name) is None:
            return None
    except ModuleNotFoundError:
        return None
    return importlib.import_module(name)


def run(args: argparse.Namespace) -> int:
    from monitor.config import load_config
    from monitor.headless import run_headless
    from monitor.outputs import build_outputs
    from monitor.session import Session, make_engine
    from monitor.sources import is_live, open_source

    if args.json and not args.headless:
        raise UsageError("--json needs --headless")
    if args.duration is not None and not (args.duration > 0 and math.isfinite(args.duration)):
        raise UsageError(f"--duration must be a positive number of seconds, got {args.duration}")
    config = load_config(args.config)
    if getattr(args, "allow_remote", False) and not config.allow_remote:
        config = dataclasses.replace(config, allow_remote=True)
    source = open_source(args.source, config)
    engine = make_engine(config)
    # a journal or recording directory that cannot be written, or a refused publisher address, stops
    # here (exit 2; a publisher address that cannot be bound: exit 3), before any reading is taken
    outputs = build_outputs(config, source_name=getattr(source, "name", args.source), record=args.record,
                            alarm_pub=args.alarm_pub, journal=args.journal)
    if args.headless:
        return run_headless(source, config, json=args.json, duration=args.duration, live=is_live(args.source),
                            sinks=outputs.sinks, engine=engine, on_session=outputs.bind, recorder=outputs.recorder)
    session = Session(source, config, outputs.sinks, engine=engine, live=is_live(args.source))
    return _screen(session, config, outputs, duration=args.duration)


# kept for the other commands that share the signal handling
def _install_signals(stop: threading.Event) -> dict[int, Any]:
    from monitor.headless import install_signals
    return install_signals(stop)


def _restore_signals(previous: dict[int, Any]) -> None:
    from monitor.headless import restore_signals
    restore_signals(previous)


def _screen(session: Any, config: Any, outputs: Any, duration: float | None = None) -> int:
    if _module("monitor.tui.app") is None or _module("monitor.tui.launch") is None:
        for sink in session.sinks:
            close = getattr(sink, "close", None)
            if callable(close):
                close()
        print("regime watch: the screen is not available in this build; use --headless", file=sys.stderr)
        return EXIT_USAGE
    from monitor.tui.launch import settings_for

    code = run_screen(session, outputs, settings_for(config, title=f"regime watch {session.name}",
                                                     quit_after=duration), "regime watch")
    return 0 if code is None else code


def run_screen(session: Any, outputs: Any, settings: Any, command: str) -> int | None:
    """The operator's screen on ``session`` until it quits, then the summary on stdout; the exit code
    of a run that did not end well (``headless.failed_run``), else None. Shared by watch and replay."""
    from monitor.headless import failed_run, final_summary, human_summary
    from monitor.tui.app import RegimeApp
    from monitor.tui.feed import EventTap, SessionFeed

    tap = EventTap()
    session.add_sink(tap)
    outputs.bind(session)          # after the tap: the recorder's early events reach the journal screen
    app = RegimeApp(SessionFeed(session, tap), settings)
    try:
        app.run()
    finally:
        app.stop.set()
        session.close()
    summary, final = final_summary(session, outputs.recorder)
    print(human_summary(summary))
    return failed_run(session, final, command)
