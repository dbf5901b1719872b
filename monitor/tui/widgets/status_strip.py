"""The top strip: discharge on or off, data time, alarms needing attention, recording, units and bell."""

from __future__ import annotations

from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.alarms.events import Priority
from monitor.snapshot import Snapshot
from monitor.tui import palette
from monitor.tui.formatting import fmt_data_time
from monitor.tui.widgets.alarm_list import UNACKED

__all__ = ["StatusStrip", "strip_text"]


def strip_text(snapshot: Snapshot | None, *, title: str, units: str, bell: bool, flash: bool, width: int) -> Text:
    """The strip's text; the alarm count flashes only while something is unacknowledged."""
    parts: list[tuple[str, object]] = [(f" {title} ", palette.STRONG)]
    if snapshot is None:
        parts.append(("  starting…", palette.DIM))
        return Text.assemble(*parts)  # type: ignore[arg-type]
    parts.append((" ◉ discharge ON " if snapshot.discharge_on else " ○ discharge off", palette.NORMAL))
    if snapshot.data_time is not None:
        parts.append((f" {fmt_data_time(snapshot.data_time)}", palette.DIM))
    unacked = [a for a in snapshot.alarms if a.state in UNACKED]
    active = [a for a in snapshot.alarms if a.state.value not in ("normal",)]
    if unacked:
        top = min(unacked, key=lambda a: list(Priority).index(a.priority))
        style = palette.ALERT if top.priority in (Priority.URGENT, Priority.HIGH) else palette.CAUTION
        parts.append((f"  ⚠ {len(unacked)} to acknowledge ", style + palette.BLINK if flash else style))
    elif active:
        parts.append((f"  {len(active)} alarm(s) acknowledged/shelved", palette.NORMAL))
    else:
        parts.append(("  no alarms", palette.DIM))
    if snapshot.flood:
        parts.append(("  ≋ FLOOD", palette.CAUTION))
    if snapshot.recording:
        parts.append(("  ⏺ rec", palette.NORMAL))
    right = f"{units}, bell {'on' if bell else 'off'} "
    text = Text.assemble(*parts)  # type: ignore[arg-type]
    pad = width - text.cell_len - len(right)
    if pad > 1:
        text.append(" " * pad)
        text.append(right, style=palette.DIM)
    return text


class StatusStrip(Widget):
    """One line across the top of the console."""

    DEFAULT_CSS = """
    StatusStrip {
        height: 1;
    }
    """

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True)
    """The snapshot summarised."""

    units: reactive[str] = reactive("practical")
    """The unit system in force, shown at the right."""

    bell: reactive[bool] = reactive(True)
    """Whether a new high-priority alarm rings the terminal bell."""

    flash: reactive[bool] = reactive(False)
    """Flashing phase for the to-acknowledge count."""

    def __init__(self, title: str = "regime", *, name: str | None = None, id: str | None = None,
                 classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._title = title

    def render(self) -> RenderResult:
        return strip_text(self.snapshot, title=self._title, units=self.units, bell=self.bell,
                          flash=self.flash, width=self.size.width or 80)
