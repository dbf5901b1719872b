"""The `regime` command line: dispatches to monitor.commands.<name>, importing only what runs."""

from __future__ import annotations

import argparse
import importlib
import os
import sys

from monitor import __version__
from monitor.commands import COMMANDS
from monitor.errors import EXIT_SOURCE, EXIT_USAGE, UsageError


def _parser_for(argv: list[str]) -> tuple[argparse.ArgumentParser, str | None]:
    parser = argparse.ArgumentParser(
        prog="regime",
        description="A live plasma-regime monitor. It advises operators; it is not a safety interlock.",
    )
    parser.add_argument("--version", action="version", version=f"regime {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    wanted = next((a for a in argv if not a.startswith("-")), None)
    for name, summary in COMMANDS.items():
        if name == wanted:
            module = importlib.import_module(f"monitor.commands.{name}")
            module.register(sub.add_parser(name, help=summary, description=summary))
        else:
            sub.add_parser(name, help=summary, add_help=False)
    return parser, wanted if wanted in COMMANDS else None


def main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser, wanted = _parser_for(argv)
    args = parser.parse_args(argv)  # exits 2 on bad usage
    if args.command is None:
        parser.print_help()
        return EXIT_USAGE
    module = importlib.import_module(f"monitor.commands.{args.command}")
    try:
        return int(module.run(args) or 0)
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        # the reader went away (`regime report --json | head`): stop quietly, as text tools do
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0
    except Exception as exc:
        if not _fatal_source(exc) and not isinstance(exc, UsageError):
            raise
        # a source that can never work exits 3, also when it is a UsageError too (an alarm publisher
        # address that cannot be bound, as `regime simulate` exits 3 for it); other bad usage exits 2
        print(f"regime {args.command}: {exc}", file=sys.stderr)
        return EXIT_SOURCE if _fatal_source(exc) else EXIT_USAGE


def _fatal_source(exc: BaseException) -> bool:
    """``exc`` is an adapters FatalSourceError (looked up without importing the adapters for every command)."""
    base = sys.modules.get("adapters.base")
    return base is not None and isinstance(exc, base.FatalSourceError)
