"""The command-line flags that watch, replay and demo share, declared once."""

from __future__ import annotations

import argparse
import math

from monitor.errors import UsageError

__all__ = ["add_view_flags", "add_output_flags", "check_view_flags"]


def add_view_flags(parser: argparse.ArgumentParser, *, duration: str | None = None) -> None:
    """--headless, --json and (when ``duration`` gives its help) --duration."""
    parser.add_argument("--headless", action="store_true", help="no screen: status lines on stdout")
    parser.add_argument("--json", action="store_true", help="with --headless: one JSON object per line")
    if duration is not None:
        parser.add_argument("--duration", metavar="S", type=float, default=None, help=duration)


def add_output_flags(parser: argparse.ArgumentParser, *, journal_note: str, remote: str) -> None:
    """--journal, --alarm-pub and --allow-remote."""
    parser.add_argument("--journal", metavar="F",
                        help="append every alarm transition and operator action to F, one JSON line each "
                             "(the alarm objects of --json); an existing journal keeps its lines" + journal_note)
    parser.add_argument("--alarm-pub", metavar="ENDPOINT", help="publish alarm events on ZeroMQ (PUB) at ENDPOINT "
                        "(loopback or ipc:// unless --allow-remote)")
    parser.add_argument("--allow-remote", action="store_true", help=remote)


def check_view_flags(args: argparse.Namespace) -> None:
    """Refuse --json without --headless and a --duration that is not a positive number of seconds."""
    if args.json and not args.headless:
        raise UsageError("--json needs --headless")
    duration = getattr(args, "duration", None)
    if duration is not None and not (duration > 0 and math.isfinite(duration)):
        raise UsageError(f"--duration must be a positive number of seconds, got {duration}")
