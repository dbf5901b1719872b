"""`regime report FILE`: the post-shot summary (envelope, excursions, alarm timeline, quantities, criteria)."""

from __future__ import annotations

import argparse
import json
import sys

from monitor.errors import EXIT_OK, EXIT_SOURCE

__all__ = ["register", "run"]


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="a recording (or any CSV with a header row)")
    parser.add_argument("--config", metavar="F", help="TOML config with the envelope; default: the one embedded "
                                                      "in the recording (then the journal beside it gives the "
                                                      "alarm timeline)")
    parser.add_argument("--map", metavar="F", help="TOML [channels] table for foreign columns")
    parser.add_argument("--json", action="store_true", help="one JSON object instead of Markdown")
    parser.add_argument("--plot", metavar="OUT.png", help="draw traces and the ne-Te path (needs matplotlib)")
    parser.add_argument("--rerun-alarms", action="store_true",
                        help="take the alarm timeline from the engine even when a journal is beside the file")


def _unreadable(name: str) -> str:
    """Why FILE cannot be a recording before anything reads it ("" when it may be one)."""
    import os
    import stat

    try:
        st = os.stat(name)
    except FileNotFoundError:
        return "no such file"
    except OSError as exc:
        return f"cannot read: {exc.strerror or exc}"
    if stat.S_ISDIR(st.st_mode):
        return "is a directory; give a recording's .csv file"
    if not stat.S_ISREG(st.st_mode):
        return "not a regular file (a device or a pipe); give a recording's .csv file"
    if st.st_size == 0:
        return "is empty; a recording has a header row and data lines"
    return ""


def run(args: argparse.Namespace) -> int:
    from adapters.base import FatalSourceError
    from monitor.headless import jsonable
    from monitor.report import build_report, to_json, to_markdown

    problem = _unreadable(args.file)
    if problem:
        print(f"regime report: {args.file}: {problem}", file=sys.stderr)
        return EXIT_SOURCE
    try:
        report = build_report(args.file, config_path=args.config, map_path=args.map,
                              use_journal=not args.rerun_alarms)
    except FatalSourceError as exc:
        print(f"regime report: {exc}", file=sys.stderr)
        return EXIT_SOURCE
    if args.plot:
        from monitor.report.plot import plot_report

        out = plot_report(report, args.plot)
        print(f"regime report: figure written to {out}", file=sys.stderr)
    if args.json:
        print(json.dumps(jsonable(to_json(report)), separators=(",", ":")))
    else:
        sys.stdout.write(to_markdown(report))
    return EXIT_OK
