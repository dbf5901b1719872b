"""`regime compare SHOT_OR_FILE ...`: up to eight shots side by side, a table of differences and an overlay aligned at discharge start."""

from __future__ import annotations

import argparse
import json
import sys

from monitor.errors import EXIT_OK, UsageError
from monitor.archive.columns import cell_text

__all__ = ["register", "run"]


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("shots", nargs="+", metavar="SHOT_OR_FILE",
                        help="recordings, or shot numbers looked up in the catalogue of --archive")
    parser.add_argument("--archive", metavar="DIR", default=".", help="catalogue for shot numbers (default: .)")
    parser.add_argument("--config", metavar="F", help="analyse every shot with this envelope/config")
    parser.add_argument("--quantity", default="debye_length", help="derived quantity of the third panel")
    parser.add_argument("--plot", metavar="OUT.png", help="write the overlay here (needs matplotlib)")
    parser.add_argument("--json", action="store_true", help="one JSON object with the table of differences")




def run(args: argparse.Namespace) -> int:
    from adapters.base import FatalSourceError
    from monitor.archive.compare import compare, differences, plot_overlay, resolve
    from monitor.quantities import ALL

    if args.quantity not in ALL:
        raise UsageError(f"--quantity: no quantity {args.quantity!r}")
    files = resolve(args.shots, args.archive)
    try:
        shots = compare(files, args.config)
    except FatalSourceError as exc:
        raise UsageError(str(exc)) from None
    table = differences(shots)
    if args.plot:
        out = plot_overlay(shots, args.plot, args.quantity)
        print(f"regime compare: figure written to {out}", file=sys.stderr)
    if args.json:
        print(json.dumps({"type": "compare", "files": files, "table": table}, separators=(",", ":"), default=str))
        return EXIT_OK
    labels = [s.label for s in shots]
    widths = [max(len(x), 12) for x in labels]
    print(f"{'':<22}" + "  ".join(x.ljust(w) for x, w in zip(labels, widths)))
    for entry in table:
        values = entry["values"]
        assert isinstance(values, list)
        cells = [cell_text(v) for v in values]
        change = entry.get("change")
        if isinstance(change, list):
            cells = [c if i == 0 or d is None else f"{c} ({'+' if d >= 0 else ''}{d:.3g})"
                     for i, (c, d) in enumerate(zip(cells, change))]
        print(f"{entry['name']:<22}" + "  ".join(c.ljust(w) for c, w in zip(cells, widths)))
    return EXIT_OK
