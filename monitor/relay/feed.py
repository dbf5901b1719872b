"""RelayFeed: the screen's feed (run/snapshot/act) on a relay, so RegimeApp shows the owner's run on another console."""

from __future__ import annotations

import threading
from typing import Any

from monitor.relay.console import RelayConsole
from monitor.relay.requests import OperatorClient
from monitor.snapshot import Snapshot
from monitor.tui.feed import EventTap
from monitor.operator import Acknowledge, Command, Reset, Shelve, Unshelve, command_name

__all__ = ["RelayFeed"]


class RelayFeed:
    """What ``RegimeApp(RelayFeed(console), settings)`` reads: the console's picture, the owner's alarm
    events in the journal screen, and operator actions sent to the owner (``token`` given: the
    console was started with ``--operator``) or refused as read-only."""

    def __init__(self, console: RelayConsole, *, token: str | None = None, name: str = "console",
                 context: Any = None) -> None:
        self.console = console
        self.tap = EventTap()
        console.on_event = self.tap.on_alarm
        self.error: str | None = None
        self.finished = threading.Event()
        self._token = token
        self._name = name
        self._context = context
        self._client: OperatorClient | None = None

    def run(self, stop: threading.Event) -> None:
        try:
            if not self.console.is_open:
                self.console.open()
            while not stop.is_set():
                self.console.poll(0.05)
        except Exception as exc:  # noqa: BLE001 - a broken relay is a visible status, never a crash
            self.error = f"{type(exc).__name__}: {exc}"
        finally:
            self.console.close()
            if self._client is not None:
                self._client.close()
            self.finished.set()

    def snapshot(self) -> Snapshot | None:
        return self.console.snapshot()

    def act(self, command: Command) -> str:
        """Send an alarm action to the owner; a short message for the operator (empty when applied)."""
        action = command_name(command)
        if not isinstance(command, (Acknowledge, Shelve, Unshelve, Reset)):
            return f"{action.replace('_', ' ')}: not available on a relay console (the owner steers the run)"
        if self._token is None:
            return f"{action}: this console is read-only (start it with --operator and a key the owner accepts)"
        requests = self.console.requests
        if requests is None:
            return f"{action}: the owner takes no operator actions from consoles"
        if self._client is None or self._client.endpoint != requests:
            if self._client is not None:
                self._client.close()
            self._client = OperatorClient(requests, token=self._token, name=self._name, context=self._context,
                                          curve=self.console.curve)
        seconds = command.seconds if isinstance(command, Shelve) else None
        reply = self._client.request(action, command.alarm, seconds, run=self.console.run)
        return "" if reply.applied else f"{action}: refused by the owner: {reply.reason}"
