"""The top strip: discharge on, off or unknown, data time or STALE, alarm counts by what they count, recording, units and bell."""

from __future__ import annotations

import time
from collections import Counter

from rich.style import Style
from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.alarms.events import AlarmState, Priority
from monitor.snapshot import Snapshot
from monitor.tui import feed, palette
from monitor.tui.formatting import fmt_age, fmt_data_time
from monitor.tui.widgets.alarm_list import UNACKED

__all__ = ["StatusStrip", "strip_text", "alarm_counts"]

Part = tuple[str, Style, int]   # text, style, drop rank (0 never dropped; higher dropped first)


def alarm_counts(snapshot: Snapshot) -> list[tuple[str, int]]:
    """(what, how many) in the alarm list's own categories, nonzero only, in the order shown."""
    states = Counter(a.state for a in snapshot.alarms)
    latched = sum(1 for a in snapshot.alarms if a.latched and a.state not in (AlarmState.NORMAL, AlarmState.SUPPRESSED))
    out = [("to acknowledge", states[AlarmState.UNACKNOWLEDGED] + states[AlarmState.RETURNED_UNACKNOWLEDGED]),
           ("acknowledged", states[AlarmState.ACKNOWLEDGED]), ("shelved", states[AlarmState.SHELVED]),
           ("latched", latched), ("suppressed by design", states[AlarmState.SUPPRESSED]),
           ("out of service", states[AlarmState.OUT_OF_SERVICE])]
    return [(what, n) for what, n in out if n]


def _parts(snapshot: Snapshot, *, title: str, units: str, bell: bool, flash: bool, now: float,
           stale_after: float) -> list[Part]:
    parts: list[Part] = [(f" {title} ", palette.STRONG, 0)]
    discharge = feed.discharge_state(snapshot, now, stale_after)
    parts.append({"on": (" ◉ discharge ON", palette.NORMAL, 0), "off": (" ○ discharge off", palette.NORMAL, 0)}.get(
        discharge, (" ? discharge unknown", palette.CAUTION, 0)))
    quality = feed.value_quality(snapshot, "ne", now, stale_after)
    stale = feed.stale_sources(snapshot, now, stale_after)
    if stale or quality.stale:
        views = list(stale)
        if not views and quality.source is not None:
            views = [feed.source_view(snapshot, quality.source, now, stale_after)]
        names = ", ".join(v.name + ("" if v.state == "stale" else f" {v.state}") for v in views)
        age = quality.age if quality.stale else stale[0].age
        parts.append((f"  ◼ data STALE {fmt_age(age)}" + (f": {names}" if names else ""), palette.CAUTION + palette.LOUD, 0))
    elif feed.data_clock(snapshot) is not None:
        parts.append((f"  {fmt_data_time(feed.data_clock(snapshot))}", palette.DIM, 3))
    counts = alarm_counts(snapshot)
    unacked = [a for a in snapshot.alarms if a.state in UNACKED]
    for what, n in counts:
        if what == "to acknowledge":
            top = min(unacked, key=lambda a: list(Priority).index(a.priority))
            style = palette.ALERT if top.priority in (Priority.URGENT, Priority.HIGH) else palette.CAUTION
            parts.append((f"  ⚠ {n} to acknowledge ", style + palette.BLINK if flash else style, 0))
        else:
            rank = {"acknowledged": 1, "shelved": 1, "latched": 2}.get(what, 4)
            parts.append((f"  {n} {what}", palette.DIM if rank >= 4 else palette.NORMAL, rank))
    if not counts:
        parts.append(("  no alarms", palette.DIM, 2))
    if snapshot.flood:
        parts.append(("  ≋ FLOOD", palette.CAUTION, 0))
    if snapshot.recording:
        parts.append(("  ⏺ rec", palette.NORMAL, 1))
    return parts


def strip_text(snapshot: Snapshot | None, *, title: str, units: str, bell: bool, flash: bool, width: int,
               now: float | None = None, stale_after: float = 2.0) -> Text:
    """The strip's text; the alarm count flashes only while something is unacknowledged. Parts that do
    not fit are left out whole, the least needed first (never cut mid-word)."""
    if snapshot is None:
        return Text.assemble((f" {title} ", palette.STRONG), ("  starting…", palette.DIM))
    parts = _parts(snapshot, title=title, units=units, bell=bell, flash=flash,
                   now=time.time() if now is None else now, stale_after=stale_after)
    right = f"{units}, bell {'on' if bell else 'off'} "
    for rank in (4, 3, 2, 1):
        if sum(len(t) for t, _s, _r in parts) <= width:
            break
        parts = [p for p in parts if p[2] != rank]
    text = Text.assemble(*((t, s) for t, s, _r in parts))
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
        self.now = 0.0
        """Wall time of the frame (the screen's clock), for ages."""
        self.stale_after = 2.0
        """Seconds without a reading after which a live source is stale."""

    def render(self) -> RenderResult:
        return strip_text(self.snapshot, title=self._title, units=self.units, bell=self.bell, flash=self.flash,
                          width=self.size.width or 80, now=self.now, stale_after=self.stale_after)
