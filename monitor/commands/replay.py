"""`regime replay FILE`: a recording or any CSV with a header row through the same pipeline and alarms as live."""

from __future__ import annotations

import argparse
import math
import sys
import time
from typing import Any

from monitor.commands.flags import add_output_flags, add_view_flags, check_view_flags, relay_options
from monitor.errors import EXIT_OK, EXIT_SOURCE, EXIT_USAGE, UsageError

__all__ = ["register", "run"]


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", nargs="+",
                        help="a recording (CSV with # metadata) or any CSV with a header row (one file)")
    parser.add_argument("--config", metavar="F", help="TOML config (envelope, device, channels); default: the "
                                                      "config embedded in the recording, else the defaults")
    parser.add_argument("--speed", metavar="X|max", default=None,
                        help="times data time (1 = as recorded, 10 = ten times faster) or 'max' "
                             "(default: max headless, 1 on the screen)")
    parser.add_argument("--from", dest="start", metavar="T",
                        help="start T s after the file's first reading; @T: at data time T (the file's own t, "
                             "s), @2026-01-01T10:00:10+00:00: at that clock time (ISO 8601)")
    parser.add_argument("--to", dest="stop", metavar="T", help="stop after T s from the first reading; @T as --from")
    parser.add_argument("--map", metavar="F", help="TOML file with a [channels] table for foreign columns, "
                                                   "e.g. time_ms = {quantity = \"t\", unit = \"ms\"}")
    add_view_flags(parser)
    parser.add_argument("--record", metavar="DIR", help="record the replay again into DIR")
    add_output_flags(parser, journal_note=" (a recording's own [alarms] journal is not used)",
                     remote="let --alarm-pub bind a non-loopback address")
    parser.add_argument("--on-damage", choices=("stop", "skip"), default="stop",
                        help="at an unreadable line: stop there (default) or reject it and go on")
    parser.add_argument("--quiet", action="store_true", help="no progress lines on stderr")


class _Progress:
    """Progress on stderr for long headless replays: at most one line a second, after the first 2 s."""

    def __init__(self, enabled: bool) -> None:
        self.enabled = enabled
        self.started = time.monotonic()
        self.printed = False

    def __call__(self, session: Any) -> None:
        if not self.enabled or time.monotonic() - self.started < 2.0:
            return
        pos = session.replay_position()
        summary = session.summary()
        if pos is None:
            return
        span = (pos.end - pos.start) if pos.end is not None else math.nan
        done = (pos.time - pos.start) / span if span and span > 0 else math.nan
        pct = f"{100 * min(max(done, 0.0), 1.0):5.1f} %" if math.isfinite(done) else "  ? %"
        print(f"regime replay: {pct}  t={pos.time:.3f} s  {summary.get('accepted', 0)} readings  "
              f"{time.monotonic() - self.started:.0f} s", file=sys.stderr, flush=True)
        self.printed = True


def run(args: argparse.Namespace) -> int:
    from adapters.base import FatalSourceError
    from monitor.outputs import build_outputs
    from monitor.recipe import RunPlan, execute
    from monitor.recording.replaying import open_file, parse_speed, parse_window_time, window_text

    check_view_flags(args)
    if len(args.file) > 1:
        raise UsageError(f"replay takes one file, got {len(args.file)}; for many shots: regime archive DIR "
                         "(a catalogue of every recording in a folder), or a shell loop over the files")
    args.file = args.file[0]
    speed = parse_speed(args.speed) if args.speed is not None else (None if args.headless else 1.0)
    start = None if args.start is None else parse_window_time(args.start, "--from")
    stop = None if args.stop is None else parse_window_time(args.stop, "--to")
    try:
        opened = open_file(args.file, config_path=args.config, map_path=args.map, speed=speed,
                           start=start, stop=stop, on_damage=args.on_damage)
    except FatalSourceError as exc:
        print(f"regime replay: {exc}", file=sys.stderr)
        return EXIT_SOURCE
    config, source = opened.config, opened.source
    outputs = build_outputs(config, source_name=source.name, record=args.record, config_directory=False,
                            journal=args.journal, alarm_pub=args.alarm_pub, allow_remote=args.allow_remote)
    window = window_text(start, stop)

    def annotate(summary: dict[str, Any]) -> None:
        summary["file"] = str(args.file)
        summary["config"] = opened.config_origin
        # {"line", "reason", "mode"}; skip mode adds "skipped" and "lines" (the first "lines_cap")
        summary["damage"] = source.damage_summary()
        if source.damage is not None:
            print(f"regime replay: {args.file}: {source.end_message()}", file=sys.stderr)

    screen = None
    if not args.headless:
        from monitor.tui.launch import settings_for
        # device guides and envelope box from the config, as `regime watch` does
        screen = settings_for(config, title=f"regime replay {source.name}")
    return execute(RunPlan("regime replay", source, config, outputs, live=False, headless=args.headless,
                           json=args.json, screen=screen, open_first=True,
                           on_interval=_Progress(args.headless and not args.quiet),
                           annotate=annotate if args.headless else None,
                           finish=lambda: _empty_window(source, args, window), relay=relay_options(args)))


def _empty_window(source: Any, args: argparse.Namespace, window: str) -> int:
    """Exit 2, said on stderr, when a --from/--to window within the file's span was played to its end
    and held no reading (a gap in the data, or damage before it). A window wholly outside the span
    was refused before the replay (open_file)."""
    from adapters.base import LinkState

    if not window or source.released or source.status().state is not LinkState.ENDED:
        return EXIT_OK
    why = "no reading lies in that stretch of the file"
    if source.damage is not None and args.on_damage == "stop":
        why = f"the file is damaged at line {source.damage[0]}, before it (--on-damage skip goes on past it)"
    print(f"regime replay: {args.file}: {window} selects no readings: {why}; --from/--to are seconds from "
          f"the file's first reading, @T an absolute data time", file=sys.stderr)
    return EXIT_USAGE
