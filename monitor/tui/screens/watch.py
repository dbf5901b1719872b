"""The watch screen: readings, verdicts, derived table, regime map, alarms, sources and playback, with the operator's keys."""

from __future__ import annotations

import time
from typing import Any

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.css.query import NoMatches
from textual.screen import Screen
from textual.widgets import Footer

from monitor.alarms.events import AlarmState, Priority
from monitor.snapshot import Snapshot
from monitor.tui.feed import Feed
from monitor.tui.screens.shelve import ShelveDialog
from monitor.tui.settings import ScreenSettings
from monitor.tui.widgets.alarm_list import UNACKED, AlarmList
from monitor.tui.widgets.derived import DerivedTable
from monitor.tui.widgets.playback import PlaybackBar
from monitor.tui.widgets.readings import Readings
from monitor.tui.widgets.regime_map import RegimeMapView
from monitor.tui.widgets.sources import SourcesPanel
from monitor.tui.widgets.status_strip import StatusStrip
from monitor.tui.widgets.verdicts import Verdicts
from monitor.operator import Acknowledge, Command, Pause, Reset, Resume, Seek, SetSpeed, Shelve, StepReplay, Unshelve

__all__ = ["WatchScreen", "SPEEDS"]

SPEEDS: tuple[float | None, ...] = (0.25, 0.5, 1.0, 2.0, 5.0, 10.0, None)
NUMBERS_HZ = 5.0
"""Redraws per second of the panels of numbers (readings, derived, verdicts): a digit that changes more
often cannot be read (common practice for digital displays: 2-5 updates a second); keys redraw at once."""
_RINGS = (Priority.URGENT, Priority.HIGH)


class WatchScreen(Screen[None]):
    """The operator's main screen; ``show(snapshot, now)`` is called by the app's render timer."""

    BINDINGS = [
        Binding("a", "acknowledge", "ack"),
        Binding("A", "acknowledge_all", "ack all", show=False, key_display="A"),
        Binding("z", "shelve", "shelve"),
        Binding("Z", "unshelve", "unshelve", show=False, key_display="Z"),
        Binding("r", "reset", "reset latched", show=False),
        Binding("space", "pause", "pause/run", key_display="␣"),
        Binding("full_stop", "step", "step", show=False, key_display="."),
        Binding("left_square_bracket", "seek(-1)", "seek back", show=False, key_display="["),
        Binding("right_square_bracket", "seek(1)", "seek fwd", show=False, key_display="]"),
        Binding("minus", "speed(-1)", "slower", show=False, key_display="-"),
        Binding("plus,equals_sign", "speed(1)", "faster", show=False, key_display="+"),
        Binding("u", "units", "units"),
        Binding("d", "derived", "derived/map", show=False),
        Binding("b", "bell", "bell on/off", show=False),
        Binding("j", "journal", "journal"),
    ]

    def __init__(self, feed: Feed, settings: ScreenSettings) -> None:
        super().__init__()
        self.feed = feed
        self.settings = settings
        self.units = settings.units
        self.bell = settings.bell
        self.last: Snapshot | None = None
        self._rung: set[str] = set()
        self._ready = False
        self._numbers_at = -1e9

    def compose(self) -> ComposeResult:
        s = self.settings
        yield StatusStrip(s.title, id="strip")
        with Horizontal(id="upper"):
            with Vertical(id="left"):
                yield Readings(id="readings")
                yield Verdicts(id="verdicts")
            with VerticalScroll(id="derived-box"):
                yield DerivedTable(id="derived")
            yield RegimeMapView(length=s.length, wave_frequency=s.wave_frequency, box=s.box, stale_after=s.stale_after,
                                id="map")
        yield AlarmList(id="alarms")
        yield SourcesPanel(id="sources")
        yield PlaybackBar(id="playback")
        yield Footer()

    def on_mount(self) -> None:
        self.query_one("#readings").border_title = "readings"
        self.query_one("#verdicts").border_title = "regime verdicts"
        self.query_one("#derived-box").border_title = "derived"
        self.query_one("#map").border_title = "ne–Te map"
        self.query_one("#alarms").border_title = "alarms"
        self.query_one("#sources").border_title = "sources"
        self.query_one(AlarmList).focus()
        self._ready = True
        self.show(None, self.settings.clock(), force=True)

    def show(self, snapshot: Snapshot | None, now: float, *, force: bool = False) -> None:
        """Push ``snapshot`` into every widget; flash and bell follow the unacknowledged alarms.

        The panels of numbers take a new snapshot at most NUMBERS_HZ times a second (``force``: now);
        the map, alarms, sources, strip and playback line at every frame."""
        if snapshot is not None:
            self.last = snapshot
        if not self._ready or not self.is_attached:
            return
        try:
            self._push(now, force)
        except NoMatches:  # the screen is being torn down while the timer fires
            return

    def _push(self, now: float, force: bool) -> None:
        snap = self.last
        unacked = bool(snap and any(a.state in UNACKED for a in snap.alarms))
        flash = unacked and int(now * 2.0) % 2 == 0
        strip = self.query_one(StatusStrip)
        strip.now, strip.stale_after = now, self.settings.stale_after
        strip.units, strip.bell, strip.flash, strip.snapshot = self.units, self.bell, flash, snap
        tick = time.monotonic()
        if force or tick - self._numbers_at >= 1.0 / NUMBERS_HZ:
            self._numbers_at = tick
            for view in (self.query_one(Readings), self.query_one(DerivedTable), self.query_one(Verdicts)):
                view.now, view.stale_after = now, self.settings.stale_after
                view.units, view.snapshot = self.units, snap
        regime_map = self.query_one(RegimeMapView)
        regime_map.now = now
        regime_map.units, regime_map.snapshot = self.units, snap
        alarms = self.query_one(AlarmList)
        alarms.units, alarms.flash, alarms.snapshot = self.units, flash, snap
        sources = self.query_one(SourcesPanel)
        sources.now, sources.stale_after, sources.error = now, self.settings.stale_after, self.feed.error
        sources.snapshot = snap
        playback = self.query_one(PlaybackBar)
        playback.now, playback.stale_after = now, self.settings.stale_after
        playback.snapshot = snap
        if snap is not None:
            self._ring(snap)

    def _ring(self, snap: Snapshot) -> None:
        """Terminal bell once per alarm entering unacknowledged at urgent or high priority."""
        ringing = {a.alarm for a in snap.alarms if a.state == AlarmState.UNACKNOWLEDGED and a.priority in _RINGS}
        if ringing - self._rung and self.bell:
            self.app.bell()
        self._rung = ringing

    def _say(self, message: str) -> None:
        if message:
            self.notify(message, timeout=4)

    def _act(self, command: Command) -> None:
        """Apply ``command`` and show its effect at once from a fresh snapshot (not at the next timer tick)."""
        self._say(self.feed.act(command))
        self.show(self.feed.snapshot(), self.settings.clock(), force=True)

    @property
    def selected(self) -> str | None:
        return self.query_one(AlarmList).selected

    def action_acknowledge(self) -> None:
        if self.selected is None:
            self._say("no alarm selected")
        else:
            self._act(Acknowledge(self.selected))

    def action_acknowledge_all(self) -> None:
        self._act(Acknowledge(None))

    def action_shelve(self) -> None:
        alarm = self.selected
        if alarm is None:
            self._say("no alarm selected")
            return

        def chosen(seconds: float | None | bool) -> None:
            if seconds is not False:
                self._act(Shelve(alarm, seconds))

        self.app.push_screen(ShelveDialog(alarm), chosen)

    def action_unshelve(self) -> None:
        if self.selected is None:
            self._say("no alarm selected")
        else:
            self._act(Unshelve(self.selected))

    def action_reset(self) -> None:
        if self.selected is None:
            self._say("no alarm selected")
        else:
            self._act(Reset(self.selected))

    def _replay(self) -> Any:
        # a fresh snapshot: two quick keys must not act on a position one frame old
        snap = self.feed.snapshot() or self.last
        if snap is None or snap.live or snap.replay is None:
            self._say("live source: replay keys do nothing")
            return None
        return snap.replay

    def action_pause(self) -> None:
        r = self._replay()
        if r is not None:
            self._act(Resume() if r.paused else Pause())

    def action_step(self) -> None:
        if self._replay() is not None:
            self._act(StepReplay())

    def action_seek(self, direction: int) -> None:
        r = self._replay()
        if r is not None:
            target = r.time + direction * self.settings.seek_step
            self._act(Seek(max(r.start, target if r.end is None else min(r.end, target))))

    def action_speed(self, direction: int) -> None:
        r = self._replay()
        if r is not None:
            i = SPEEDS.index(r.speed) if r.speed in SPEEDS else 2
            self._act(SetSpeed(SPEEDS[max(0, min(len(SPEEDS) - 1, i + direction))]))

    def action_units(self) -> None:
        self.units = "SI" if self.units == "practical" else "practical"
        self.show(None, self.settings.clock(), force=True)

    def action_derived(self) -> None:
        self.toggle_class("-show-derived")

    def action_bell(self) -> None:
        self.bell = not self.bell
        self._say(f"bell {'on' if self.bell else 'off'}")
        self.show(None, self.settings.clock())

    def action_journal(self) -> None:
        self.app.push_screen("journal")
