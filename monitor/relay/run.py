"""A console run on a relay, on the screen or headless: what `regime watch relay+...` does (no engine, no pipeline of its own)."""

from __future__ import annotations

import json
import sys
import threading
import time
from typing import Any, TextIO

from adapters.base import LinkState
from monitor.errors import EXIT_OK
from monitor.relay.console import RelayConsole
from monitor.relay.curve import ConsoleCurve
from monitor.relay.feed import RelayFeed

__all__ = ["run_console", "console_summary"]


def console_summary(console: RelayConsole) -> dict[str, Any]:
    """The owner's counts as this console has them, and the console's own (received, missed, runs)."""
    snap = console.snapshot()
    owner = console.owner_status
    counts = list(snap.counts.values()) if snap is not None else []
    rejected: dict[str, int] = {}
    for c in counts:
        for reason, n in c.rejected.items():
            rejected[reason] = rejected.get(reason, 0) + int(n)
    return {"type": "summary", "source": owner.name if owner is not None else None,
            "accepted": console.accepted or 0, "rejected": rejected, "rejected_total": sum(rejected.values()),
            "lost": sum(c.lost for c in counts),
            "alarms_active": [a.alarm for a in (snap.alarms if snap is not None else ())
                              if a.state.value in ("unacknowledged", "acknowledged", "returned_unacknowledged")],
            "relay": console.summary()}


def run_console(spec: str, *, operator_key: str | None = None, name: str = "console", headless: bool = False,
                as_json: bool = False, duration: float | None = None, title: str | None = None,
                stop: threading.Event | None = None, out: TextIO | None = None,
                curve: ConsoleCurve | None = None) -> int:
    """Attach to the relay ``spec`` and show the owner's run until quit, ``duration`` wall seconds, ``stop``
    or (headless) the owner's run ending. ``operator_key``: actions go to the owner (--operator).
    ``curve``: (the owner's public key file, this console's secret key file) for a relay under CURVE."""
    console = RelayConsole(spec, curve=curve)
    feed = RelayFeed(console, token=operator_key, name=name)
    stop = stop or threading.Event()
    if not headless:
        from monitor.tui.app import RegimeApp
        from monitor.tui.settings import ScreenSettings
        app = RegimeApp(feed, ScreenSettings(title=title or f"regime console {console.endpoint}",
                                             quit_after=duration))
        try:
            app.run()
        finally:
            app.stop.set()
        return EXIT_OK
    from monitor.headless import HeadlessPrinter, install_signals, restore_signals
    stream = out if out is not None else sys.stdout
    printer = HeadlessPrinter(stream, as_json=as_json)

    def write(line: str) -> None:
        stream.write(line + "\n")
        stream.flush()

    console.on_event = printer.on_alarm
    previous = install_signals(stop) if threading.current_thread() is threading.main_thread() else None
    console.open()
    start = next_line = time.monotonic()
    said = 0
    try:
        while not stop.is_set() and (duration is None or time.monotonic() - start < duration):
            console.poll(0.05)
            notices, said = console.notices_since(said)
            for notice in notices:
                write(json.dumps({"type": "relay", "message": notice}) if as_json else f"RELAY {notice}")
            now = time.monotonic()
            snap = console.snapshot()
            if snap is not None and now >= next_line:
                printer.status(snap)
                next_line = now + 1.0
            owner = console.owner_status
            if owner is not None and owner.state in (LinkState.ENDED, LinkState.FAILED) and console.states:
                break       # the whole picture came (a state), and everything the owner sent before its end
    finally:
        console.close()
        if previous is not None:
            restore_signals(previous)
    summary = console_summary(console)
    write(json.dumps(summary) if as_json else
                   f"SUMMARY {summary['source']}: accepted {summary['accepted']}, rejected {summary['rejected_total']}, "
                   f"lost {summary['lost']}; this console received {summary['relay']['received']}, "
                   f"missed {summary['relay']['missed']}, runs {summary['relay']['runs']}")
    return EXIT_OK
