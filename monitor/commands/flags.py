"""The command-line flags that watch, replay and demo share, declared once."""

from __future__ import annotations

import argparse
import math

from typing import TYPE_CHECKING

from monitor.errors import UsageError

if TYPE_CHECKING:
    from monitor.recipe import RelayOptions

__all__ = ["add_view_flags", "add_output_flags", "check_view_flags", "relay_options"]


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
    parser.add_argument("--relay", metavar="ENDPOINT",
                        help="republish the run for consoles and browsers at ENDPOINT (PORT, tcp://127.0.0.1:PORT or "
                             "ipc://PATH; loopback unless --allow-remote): `regime watch relay+tcp://...` attaches")
    parser.add_argument("--operator-keys", metavar="F",
                        help="with --relay: consoles holding a key in F (IDENTITY KEY per line) may acknowledge, "
                             "shelve and reset; each request is journaled in F.journal")
    parser.add_argument("--relay-secret-key", metavar="F", help="with --relay: CURVE, the owner's secret key file")
    parser.add_argument("--relay-consoles", metavar="DIR",
                        help="with --relay-secret-key: the directory of the consoles' public key files")


def relay_options(args: argparse.Namespace) -> RelayOptions | None:
    """--relay with --operator-keys, --allow-remote and the relay's CURVE keys; None without --relay."""
    from monitor.recipe import RelayOptions

    if args.relay is None:
        return None
    curve = (args.relay_secret_key, args.relay_consoles) if args.relay_secret_key else None
    return RelayOptions(args.relay, args.operator_keys, bool(args.allow_remote), curve)


def check_view_flags(args: argparse.Namespace) -> None:
    """Refuse --json without --headless, a --duration that is not a positive number of seconds, and relay
    options without --relay."""
    if args.json and not args.headless:
        raise UsageError("--json needs --headless")
    if getattr(args, "relay", None) is None and (getattr(args, "operator_keys", None)
                                                 or getattr(args, "relay_secret_key", None)):
        raise UsageError("--operator-keys and --relay-secret-key need --relay")
    if bool(getattr(args, "relay_secret_key", None)) != bool(getattr(args, "relay_consoles", None)):
        raise UsageError("--relay-secret-key and --relay-consoles go together")
    duration = getattr(args, "duration", None)
    if duration is not None and not (duration > 0 and math.isfinite(duration)):
        raise UsageError(f"--duration must be a positive number of seconds, got {duration}")
