"""The alarm journal: every alarm event and operator action seen this session, newest at the bottom."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer, RichLog, Static

from monitor.alarms.events import AlarmEvent
from monitor.quantities import ALL
from monitor.snapshot import Snapshot
from monitor.tui import palette
from monitor.tui.feed import EventTap
from monitor.tui.formatting import fmt_data_time, fmt_value
from monitor.tui.widgets.alarm_list import STATE_WORDS

__all__ = ["JournalScreen", "event_line"]


def event_line(e: AlarmEvent, units: str = "practical") -> Text:
    """One journal line: data time, alarm, transition or action, value and limit."""
    unit = ALL[e.quantity].unit if e.quantity in ALL else "1"
    value = fmt_value(e.value, None, unit, units) if e.value is not None else ("—", "", "")
    limit = fmt_value(e.limit, None, unit, units) if e.limit is not None else ("—", "", "")
    who = f"operator {e.action}" if e.action else "engine"
    style = palette.NORMAL if e.action else (palette.ALERT if e.state.value == "unacknowledged" else palette.NORMAL)
    return Text.assemble(
        (f"{fmt_data_time(e.time)}  ", palette.DIM), (f"{e.alarm:<16} ", palette.STRONG),
        (f"{STATE_WORDS.get(e.previous, e.previous.value)} → {STATE_WORDS.get(e.state, e.state.value)}", style),
        (f"  {value[0]} {value[2]} (limit {limit[0]})  ", palette.NORMAL), (who, palette.DIM),
        (f"  [{e.priority.value}, {e.kind}]", palette.DIM), (f"  {e.message}" if e.message else "", palette.DIM),
    )


class JournalScreen(Screen[None]):
    """Appends new events from the tap on each render tick."""

    BINDINGS = [Binding("escape,j", "back", "back to watch")]

    def __init__(self, tap: EventTap) -> None:
        super().__init__()
        self.tap = tap
        self._shown = 0

    def compose(self) -> ComposeResult:
        yield Static(" alarm journal — every transition and operator action (data time) · esc or j: back", id="journal-title")
        yield RichLog(id="journal", wrap=False, highlight=False, markup=False, max_lines=5000)
        yield Footer()

    def on_mount(self) -> None:
        self.show(None, 0.0)

    def show(self, snapshot: Snapshot | None, now: float) -> None:
        found = self.query(RichLog)
        if not found:          # pushed but not composed yet: the events wait for the next tick
            return
        log = found.first()
        events, total = self.tap.newer_than(self._shown)
        if events and self._shown == 0:
            log.clear()
        for e in events:
            log.write(event_line(e))
        self._shown = total
        if total == 0 and not log.lines:
            log.write(Text("no alarm events yet", style=palette.DIM))

    def action_back(self) -> None:
        self.app.pop_screen()
