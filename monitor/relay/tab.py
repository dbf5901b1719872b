"""One read-only console on a relay, as a process of its own: what `regime serve` runs for each browser tab."""

from __future__ import annotations

import argparse
import sys

__all__ = ["main"]


def main(argv: list[str] | None = None) -> int:
    """``python -m monitor.relay.tab relay+ipc://PATH [--title T]``: the operator's screen on that relay."""
    parser = argparse.ArgumentParser(prog="regime-console", description=main.__doc__)
    parser.add_argument("relay", help="relay+tcp://HOST:PORT or relay+ipc://PATH")
    parser.add_argument("--title", default="regime console (read-only)")
    args = parser.parse_args(argv)
    from monitor.relay.console import RelayConsole
    from monitor.relay.feed import RelayFeed
    from monitor.tui.app import RegimeApp
    from monitor.tui.settings import ScreenSettings

    app = RegimeApp(RelayFeed(RelayConsole(args.relay)), ScreenSettings(title=args.title, bell=False))
    try:
        app.run()
    finally:
        app.stop.set()
    return 0


if __name__ == "__main__":
    sys.exit(main())
