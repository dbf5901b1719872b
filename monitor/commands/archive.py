"""`regime archive DIR`: build or update the catalogue of every recording under DIR, then find, list, export or trend shots."""

from __future__ import annotations

import argparse
import json
import os
import sys
from typing import Mapping, Sequence

from monitor.errors import EXIT_OK, UsageError
from monitor.archive.columns import cell_text

__all__ = ["register", "run", "parse_sort", "TABLE_COLUMNS"]

TABLE_COLUMNS = ("file", "shot", "started", "status", "duration", "envelope_fraction", "excursions",
                 "priority_max", "ne_median", "Te_median")


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("directory", metavar="DIR", help="folder of recordings (searched recursively)")
    parser.add_argument("--config", metavar="F", help="analyse every shot with this envelope/config (a new "
                                                      "catalogue version; the old ones are kept)")
    parser.add_argument("--where", metavar="E", help='select shots, e.g. "cutoff_ratio_max > 1 and duration > 10", '
                                                     '\'alarm("ne_high")\', "started >= 2026-11-30"')
    parser.add_argument("--json", action="store_true", help="one JSON object per shot")
    parser.add_argument("--sort", metavar="C", help="sort by columns, comma-separated; C:desc (or --sort=-C) "
                                                    "for descending")
    parser.add_argument("--limit", metavar="N", type=int, help="at most N shots")
    parser.add_argument("--csv", metavar="OUT", help="write the selected shots as CSV to OUT")
    parser.add_argument("--workers", metavar="N", type=int, help="processes summarising shots (default: cores)")
    parser.add_argument("--scheduler", metavar="ADDRESS", help="run on a Dask cluster (tcp://host:8786), or "
                                                               "'local' for a local cluster (needs regime[cluster])")
    parser.add_argument("--quiet", action="store_true", help="no progress bar, no build line on stderr")
    parser.add_argument("--trend", metavar="COLS", help="columns to plot per shot, comma-separated (with --plot)")
    parser.add_argument("--against", default="shot", choices=("shot", "started"), help="x axis of --trend")
    parser.add_argument("--plot", metavar="OUT.png", help="write the --trend figure here (needs matplotlib)")
    parser.add_argument("--analysis", metavar="N", type=int, help="query catalogue version N (default: the one "
                                                                  "this run built)")
    parser.add_argument("--no-update", action="store_true", help="query the catalogue as it is, read nothing")
    parser.add_argument("--settle", metavar="S", type=float, default=None,
                        help="a file written to within S seconds is still being recorded (default 5)")
    parser.add_argument("--columns", action="store_true", help="list the catalogue's columns and exit")
    parser.add_argument("--table", action="store_true", help="print a text table even on a terminal")


def parse_sort(text: str | None) -> list[tuple[str, bool]]:
    """``"-duration,shot"`` or ``"duration:desc,shot"`` -> [("duration", True), ("shot", False)];
    unknown columns are a UsageError."""
    from monitor.archive.columns import column

    out: list[tuple[str, bool]] = []
    for part in (text or "").split(","):
        part = part.strip()
        if not part:
            continue
        name, _, way = part.partition(":")
        if way.strip().lower() not in ("", "asc", "desc"):
            raise UsageError(f"--sort: {part!r}: after ':' write asc or desc")
        desc = name.startswith("-") or way.strip().lower() == "desc"
        name = name.strip().lstrip("-+")
        if column(name) is None:
            raise UsageError(f"--sort: no column {name!r} (`regime archive DIR --columns` lists them)")
        out.append((name, desc))
    return out


def _check_config(path: str) -> None:
    import tomllib

    from monitor.config import parse_config
    from monitor.errors import ConfigError

    try:
        raw = tomllib.loads(open(path, encoding="utf-8").read())
    except OSError as exc:
        raise ConfigError(path, "(file)", f"cannot read the config: {exc.strerror or exc}") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(path, "(syntax)", f"not valid TOML: {exc}") from None
    parse_config(raw, path)




def _print_table(rows: Sequence[Mapping[str, object]], columns: Sequence[str]) -> None:
    cells = [[cell_text(r.get(c)) for c in columns] for r in rows]
    widths = [max([len(c)] + [len(row[i]) for row in cells]) for i, c in enumerate(columns)]
    print("  ".join(c.ljust(w) for c, w in zip(columns, widths)))
    for row in cells:
        print("  ".join(v.ljust(w) for v, w in zip(row, widths)))


def run(args: argparse.Namespace) -> int:
    from monitor.archive import catalogue
    from monitor.archive.columns import COLUMNS
    from monitor.archive.where import WhereError, parse_where

    if args.columns:
        for c in COLUMNS:
            print(f"{c.name:<28}{c.sql:<9}{c.meaning}")
        return EXIT_OK
    directory = args.directory
    if not os.path.isdir(directory):
        raise UsageError(f"{directory}: not a directory")
    if args.limit is not None and args.limit < 0:
        raise UsageError("--limit: must be >= 0")
    if args.workers is not None and args.workers < 1:
        raise UsageError("--workers: must be >= 1")
    if (args.trend is None) != (args.plot is None):
        raise UsageError("--trend and --plot go together: --trend COLS --plot OUT.png")
    try:
        condition = parse_where(args.where) if args.where else None
    except WhereError as exc:
        raise UsageError(f"--where: {exc}") from None
    sort = parse_sort(args.sort)
    trend = [c.strip() for c in (args.trend or "").split(",") if c.strip()]
    for name in trend:
        if name not in {c.name for c in COLUMNS}:
            raise UsageError(f"--trend: no column {name!r}")
    version = None
    if not args.no_update:
        if args.config:
            _check_config(args.config)
        version = _build(args, directory)
    try:
        db = catalogue.open_readonly(directory)
    except FileNotFoundError as exc:
        raise UsageError(str(exc)) from None
    try:
        if args.analysis is not None:
            if args.analysis not in {v.number for v in catalogue.versions(db)}:
                raise UsageError(f"--analysis: no catalogue version {args.analysis}")
            version = args.analysis
        if version is None:
            version = catalogue.latest_version(db)
        rows = catalogue.select(db, version or 0, condition, sort, args.limit) if version is not None else []
    finally:
        db.close()
    if args.csv:
        with open(args.csv, "w", encoding="utf-8", newline="") as out:
            catalogue.export_csv(rows, out)
        if not args.quiet:
            print(f"regime archive: {len(rows)} shots written to {args.csv}", file=sys.stderr)
    if args.plot:
        from monitor.archive.trend import plot_trend

        plot_trend(rows, trend, args.plot, against=args.against)
        if not args.quiet:
            print(f"regime archive: trend written to {args.plot}", file=sys.stderr)
    if args.json:
        for r in rows:
            print(json.dumps(r, separators=(",", ":"), allow_nan=False, default=str))
    elif args.csv or args.plot:
        pass
    elif sys.stdout.isatty() and sys.stdin.isatty() and not args.table:
        from monitor.tui.archive_app import run_browser

        chosen = run_browser(directory, version or 0, args.where or "", args.config)
        if chosen is not None and chosen[0] == "replay":
            # the browser hands over to `regime replay` of the chosen shot, as a new program in this process
            argv = [sys.executable, "-m", "monitor", "replay", chosen[1]] + (["--config", args.config] if args.config else [])
            os.execv(sys.executable, argv)
    else:
        _print_table(rows, TABLE_COLUMNS)
    return EXIT_OK


def _build(args: argparse.Namespace, directory: str) -> int:
    from monitor.archive import catalogue
    from monitor.archive.build import SETTLE_S, build
    from monitor.archive.progress import ProgressBar, wanted

    workers = args.workers or (os.cpu_count() or 1)
    skip = [args.csv] if args.csv else []
    settle = SETTLE_S if args.settle is None else args.settle
    try:
        if wanted(args.quiet):
            with ProgressBar() as bar:
                result = build(directory, config_path=args.config, workers=workers, scheduler=args.scheduler,
                               settle=settle, progress=bar, skip=skip)
        else:
            result = build(directory, config_path=args.config, workers=workers, scheduler=args.scheduler,
                           settle=settle, skip=skip)
    except catalogue.CatalogueBusy as exc:
        raise UsageError(str(exc)) from None
    except PermissionError as exc:
        raise UsageError(f"{directory}: cannot write the catalogue there ({exc.strerror}); query an existing "
                         f"one with --no-update") from None
    if not args.quiet:
        print(f"regime archive: {result.total} recordings ({result.read} read, {result.unchanged} unchanged, "
              f"{result.in_progress} in progress, {result.removed} gone, {result.damaged} damaged) in "
              f"{result.seconds:.2f} s; catalogue version {result.version}", file=sys.stderr)
    return result.version
