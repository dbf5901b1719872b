"""The list of alarms not in normal state, with a selection the operator's keys act on."""

from __future__ import annotations

from rich.console import Group
from rich.text import Text
from textual.app import RenderResult
from textual.binding import Binding
from textual.message import Message
from textual.reactive import reactive
from textual.widget import Widget

from monitor.alarms.events import AlarmState, Priority
from monitor.quantities import ALL
from monitor.snapshot import AlarmView, Snapshot
from monitor.tui import feed, palette
from monitor.tui.formatting import fmt_age, fmt_duration, fmt_value
from monitor.tui.renderables.grid import grid_text

__all__ = ["AlarmList", "STATE_WORDS", "PRIORITY_MARK", "ordered"]

STATE_WORDS = {
    AlarmState.NORMAL: "normal",
    AlarmState.UNACKNOWLEDGED: "unacknowledged",
    AlarmState.ACKNOWLEDGED: "acknowledged",
    AlarmState.RETURNED_UNACKNOWLEDGED: "returned unacknowledged",
    AlarmState.SHELVED: "shelved",
    AlarmState.SUPPRESSED: "suppressed",
    AlarmState.OUT_OF_SERVICE: "out of service",
}
PRIORITY_MARK = {Priority.URGENT: "▲▲ urgent", Priority.HIGH: "▲ high", Priority.ADVISORY: "△ advisory"}
_PRIO_RANK = {Priority.URGENT: 0, Priority.HIGH: 1, Priority.ADVISORY: 2}
_STATE_RANK = {AlarmState.UNACKNOWLEDGED: 0, AlarmState.RETURNED_UNACKNOWLEDGED: 1, AlarmState.ACKNOWLEDGED: 2,
               AlarmState.SHELVED: 3, AlarmState.SUPPRESSED: 4, AlarmState.OUT_OF_SERVICE: 5}
UNACKED = (AlarmState.UNACKNOWLEDGED, AlarmState.RETURNED_UNACKNOWLEDGED)


HIDDEN = (AlarmState.NORMAL, AlarmState.SUPPRESSED, AlarmState.OUT_OF_SERVICE)


def ordered(alarms: tuple[AlarmView, ...]) -> list[AlarmView]:
    """Those needing the operator (not normal, not suppressed by design, not out of service):
    unacknowledged first, then by priority, newest first. Shelved ones stay listed so they can be unshelved."""
    rows = [a for a in alarms if a.state not in HIDDEN]
    return sorted(rows, key=lambda a: (_STATE_RANK.get(a.state, 9), _PRIO_RANK.get(a.priority, 9), -(a.since or 0.0)))


class AlarmList(Widget, can_focus=True):
    """Rows of alarms; up/down move the selection; flashing marks only the unacknowledged."""

    BINDINGS = [
        Binding("up", "move(-1)", "previous alarm", show=False),
        Binding("down", "move(1)", "next alarm", show=False),
        Binding("home", "move(-1000)", "first alarm", show=False),
        Binding("end", "move(1000)", "last alarm", show=False),
    ]

    DEFAULT_CSS = """
    AlarmList {
        height: auto;
        min-height: 2;
    }
    """

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True)
    """The snapshot whose alarms are listed."""

    units: reactive[str] = reactive("practical")
    """Units of the value and limit columns."""

    flash: reactive[bool] = reactive(False)
    """Phase of the flashing of unacknowledged rows (toggled by the screen's timer)."""

    selected: reactive[str | None] = reactive(None)
    """Name of the selected alarm; None when the list is empty."""

    class Selected(Message):
        """The selection moved to ``alarm``."""

        def __init__(self, alarm: str | None) -> None:
            super().__init__()
            self.alarm = alarm

    def __init__(self, *, name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._shape: tuple[int, bool] = (-1, False)

    def watch_snapshot(self, snapshot: Snapshot | None) -> None:
        rows = ordered(snapshot.alarms) if snapshot is not None else []
        names = [a.alarm for a in rows]
        if self.selected not in names:
            self.selected = names[0] if names else None
        shape = (len(rows), self._hidden_note(snapshot) != "")
        if shape != self._shape:
            self._shape = shape
            self.refresh(layout=True)

    def watch_selected(self, alarm: str | None) -> None:
        self.post_message(self.Selected(alarm))

    @staticmethod
    def _hidden_note(snapshot: Snapshot | None) -> str:
        if snapshot is None:
            return ""
        sup = sum(1 for a in snapshot.alarms if a.state == AlarmState.SUPPRESSED)
        oos = sum(1 for a in snapshot.alarms if a.state == AlarmState.OUT_OF_SERVICE)
        parts = ([f"{sup} suppressed by design" + ("" if snapshot.discharge_on else " (discharge off)")] if sup else []) + \
                ([f"{oos} out of service"] if oos else [])
        return "  + " + ", ".join(parts) if parts else ""

    def rows(self) -> list[AlarmView]:
        return ordered(self.snapshot.alarms) if self.snapshot is not None else []

    def render(self) -> RenderResult:
        snap = self.snapshot
        rows = self.rows()
        note = self._hidden_note(snap)
        if not rows:
            return Text("○ nothing to attend to" + note, style=palette.DIM)
        now = feed.data_clock(snap) if snap is not None else None
        wide = (self.size.width or 80) >= 100
        # left out first when the rows are too wide: description, age, priority word (its glyph stays),
        # tripping value, limit
        table = grid_text([self._cells(a, now, wide) for a in rows], max_width=self.size.width or None,
                          drop=(8, 3, 1, 6, 7))
        if note:
            return Group(table, Text(note, style=palette.DIM))
        return table

    def _cells(self, a: AlarmView, now: float | None, wide: bool) -> list[Text]:
        """mark and priority glyph, priority word, state, age, name, live value, tripping value, limit (or
        the prediction), description."""
        unacked = a.state in UNACKED
        if a.state in (AlarmState.SHELVED, AlarmState.SUPPRESSED, AlarmState.OUT_OF_SERVICE):
            style = palette.DIM
        elif a.state == AlarmState.ACKNOWLEDGED:
            style = palette.NORMAL
        else:
            style = palette.ALERT if a.priority in (Priority.URGENT, Priority.HIGH) else palette.CAUTION
        state_style = style + palette.BLINK if unacked and self.flash else style
        mark = "▶" if a.alarm == self.selected else " "
        if self.has_focus is False and mark == "▶":
            mark = "›"
        unit = ALL[a.quantity].unit if a.quantity in ALL else "1"
        snap = self.snapshot
        live = snap.latest.get(a.quantity, (None, None))[0] if snap is not None and a.quantity else None
        live_text = f"now {' '.join(fmt_value(live, None, unit, self.units)[::2]).strip()}" if live is not None else ""
        tripped, what = feed.trip_value(a)
        trip_text = f"{what} {fmt_value(tripped, None, unit, self.units)[0]}" if tripped is not None else ""
        limit = fmt_value(a.limit, None, unit, self.units)[0] if a.limit is not None else None
        since = fmt_age(now - a.since) if now is not None and a.since is not None else "—"
        if a.state == AlarmState.SHELVED and a.shelved_until is not None and now is not None:
            since = f"{fmt_duration(max(0.0, a.shelved_until - now))} left"
        if a.kind == "predictive":
            # one phrase: what is predicted and when
            when = f" in {fmt_duration(max(0.0, a.predicted_time - now))}" if a.predicted_time is not None and now is not None else ""
            limit_text = Text(f"reaches {limit}{when}" if limit else f"predicted{when}", style=palette.CAUTION)
            trip_text, description = "", ""
        elif a.kind == "stale":
            limit_text = Text(f"no data for {fmt_duration(a.limit)}" if a.limit is not None else "", style=palette.DIM)
            trip_text, live_text, description = "", "", a.description
        else:
            limit_text = Text(f"limit {limit}" if limit else "", style=palette.DIM)
            description = a.description
        waiting = feed.awaiting_reset(a)
        state_word = STATE_WORDS.get(a.state, str(a.state)) + (" ⊡ latched, reset (r)" if waiting else " ⊡" if a.latched else "")
        name = a.alarm.replace(":predict", " ⇢")
        glyph, _sp, word = PRIORITY_MARK.get(a.priority, str(a.priority)).partition(" ")
        return [Text(mark + glyph, style=style), Text(word, style=style),
                Text(state_word, style=state_style), Text(since, style=palette.DIM), Text(name, style=palette.NORMAL),
                Text(live_text, style=palette.NORMAL), Text(trip_text, style=palette.DIM), limit_text,
                Text(description if wide else "", style=palette.DIM)]

    def action_move(self, step: int) -> None:
        names = [a.alarm for a in self.rows()]
        if not names:
            self.selected = None
            return
        i = names.index(self.selected) if self.selected in names else 0
        self.selected = names[max(0, min(len(names) - 1, i + step))]
        self.refresh()
