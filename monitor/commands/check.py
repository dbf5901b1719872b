"""`regime check CONFIG`: validate a whole config file without running and summarise its limits."""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("config", help="the TOML config file to check")
    parser.add_argument("--json", action="store_true", help="print the limits as one JSON object")


def _load(path: str) -> tuple[tuple[Any, ...], Any, dict[str, Any]]:
    """(limits, alarm options, facts) through the full config loader."""
    from monitor.config import load_config

    cfg = load_config(path)
    facts = {"on_above": cfg.on_above, "stale_after": cfg.stale_after,
             "journal": _text(getattr(cfg.alarms, "journal", None)),
             "recording_directory": _text(getattr(cfg.recording, "directory", None))}
    return tuple(cfg.limits), cfg.alarms, facts


def _text(value: Any) -> str | None:
    return None if value is None else str(value)


def _describe(lim: Any) -> str:
    from monitor.quantities import ALL

    unit = ALL[lim.quantity].unit
    unit = "(dimensionless)" if unit == "1" else unit
    side = []
    if lim.low is not None:
        side.append(f"low {lim.low:g}")
    if lim.high is not None:
        side.append(f"high {lim.high:g}")
    band = f"{lim.deadband:.0%}" if lim.deadband_relative else f"{lim.deadband:g} {unit}"
    extras = [f"deadband {band}", f"on {lim.on_delay:g} s", f"off {lim.off_delay:g} s"]
    if lim.latch:
        extras.append("latching")
    if lim.uncertainty != "none":
        extras.append(f"{lim.uncertainty} at k={lim.k:g}")
    if lim.predict_within is not None:
        extras.append(f"predict {lim.predict_within:g} s ahead")
    if lim.realarm_after is not None:
        extras.append(f"re-alarm after {lim.realarm_after:g} s")
    if not lim.only_when_on:
        extras.append("evaluated with the discharge off too")
    return f"  {lim.name}: {lim.quantity} {' / '.join(side)} {unit}, {lim.priority.value}; {', '.join(extras)}"


def run(args: argparse.Namespace) -> int:
    limits, options, facts = _load(args.config)
    if args.json:
        print(json.dumps({"type": "check", "config": args.config, "ok": True, **facts,
                          "limits": [{"name": x.name, "quantity": x.quantity, "low": x.low, "high": x.high,
                                      "priority": x.priority.value} for x in limits],
                          "hooks": sorted(p.value for p in (options.hooks if options else {}))}))
        return 0
    head = f"{args.config}: ok, {len(limits)} limit{'s' if len(limits) != 1 else ''}"
    if facts:
        head += f"; discharge on above {facts['on_above']:g} m^-3, sources stale after {facts['stale_after']:g} s"
    print(head)
    for lim in limits:
        print(_describe(lim))
    if options is not None and options.hooks:
        print(f"  hooks for: {', '.join(p.value for p in options.hooks)}")
    if facts.get("journal"):
        print(f"  alarm journal: {facts['journal']} (watch; --journal wins)")
    if facts.get("recording_directory"):
        print(f"  records into: {facts['recording_directory']} (watch; --record wins)")
    sys.stdout.flush()
    return 0
